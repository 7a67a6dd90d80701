"""Benchmark: a wrap-around carriage of 8 porous pads over 200 stations of a wavy, twisted, wedged beam.

Counted: film solutions per pad per station (issue 17 asks for at most 6 on average, from the warm start at the
previous station). Baseline timed in the same run (shared, noisy machines: only ratios mean anything): one film
solution of one pad on the same mesh (``PadFilmModel.respond``), so the ratio "carriage time / (pads x stations
x one solution)" says how much the Newton iteration and the bookkeeping cost on top of the film solutions.

Run with ``python -m pytest tests/benchmarks -m benchmark -s``.
"""

import time

import numpy as np
import pytest

from flatcheck.bearing import Pad, PadFilmModel, PlacedPad, PorousFeed, rectangular_pad_mesh
from flatcheck.form import HeightMap
from flatcheck.guideway import Face, GuidewayBody, ThicknessTie, WrapCarriage, evaluate_body, solve_carriage

L = 1400.0
FEED = PorousFeed(5e-16, 5.0, 500.0)
PAD = Pad.rect(80.0, 60.0, 6.0)
N_STATIONS = 200
CELLS = 32


def _face(name, normal, fn, width):
    xs = np.arange(0.0, L + 1e-9, 20.0)
    ys = np.linspace(0.0, width, 9)
    X, Y = np.meshgrid(xs, ys)
    S = Y - width / 2
    return Face(name, normal, HeightMap(X.ravel(), Y.ravel(), fn(X, S).ravel()), name)


def _top(X, S):  # invented: 0.3 µm waves of 250 mm, a twist of 3 µrad/m, a sag of 1 µm
    return 0.3 * np.sin(2 * np.pi * X / 250.0) + 1e-3 * 3e-3 * (X - L / 2) * S - 1.0 * (1 - ((X - L / 2) / (L / 2)) ** 2)


def _under(X, S):  # invented: a wedge of 1.5 µm/m, 0.2 µm waves of 180 mm
    return 1.5e-3 * X + 0.2 * np.cos(2 * np.pi * X / 180.0) + 1.0 * (1 - ((X - L / 2) / (L / 2)) ** 2)


def _body():
    top = _face("top", "+z", _top, 160.0)
    under = _face("underside", "-z", _under, 160.0)
    ties = []
    for x in np.linspace(100.0, 1300.0, 7):
        for s in (-40.0, 40.0):
            ties.append(ThicknessTie(("underside", "top"), float(x), s,
                                     float(_top(np.array(x), np.array(s)) + _under(np.array(x), np.array(s)))))
    return evaluate_body(GuidewayBody("bench", L, (top, under), tuple(ties)))


@pytest.mark.benchmark
@pytest.mark.parametrize("pivot", [True, False])
def test_bench_carriage_8_pads_200_stations(pivot):
    g = _body()
    pads = [PlacedPad(PAD, al, ac, f"top {al:+g}/{ac:+g}", "top") for al in (200.0, -200.0) for ac in (45.0, -45.0)]
    pads += [PlacedPad(PAD, al, ac, f"under {al:+g}/{ac:+g}", "underside") for al in (200.0, -200.0)
             for ac in (45.0, -45.0)]
    start, end = 300.0, 1100.0
    step = (end - start) / (N_STATIONS - 1)
    c = WrapCarriage(tuple(pads), FEED, travel_start_mm=start, travel_end_mm=end, step_mm=step, mesh_cells=CELLS,
                     pivot=pivot)
    # baseline: one film solution of one pad on the same mesh, best of 20
    model = PadFilmModel(rectangular_pad_mesh(PAD.length_mm, PAD.width_mm, CELLS, CELLS), FEED)
    gap = np.full(model.probe_x_mm.size, PAD.gap_um) + 0.2 * np.sin(model.probe_x_mm / 13.0)
    model.respond(gap)
    t_one = np.inf
    for _ in range(20):
        t0 = time.perf_counter()
        model.respond(gap)
        t_one = min(t_one, time.perf_counter() - t0)
    t0 = time.perf_counter()
    r = solve_carriage(g, c)
    t_all = time.perf_counter() - t0
    n_pads, n_st = len(pads), r.x_mm.size
    per = r.solutions_per_pad_station
    ratio = t_all / (n_pads * n_st * t_one)
    print(f"\n[guideway] pivot={pivot}: {n_pads} pads x {n_st} stations, {r.film_solutions} film solutions = "
          f"{per:.2f} per pad per station; carriage {t_all:.2f} s; one film solution {1e3 * t_one:.2f} ms "
          f"({CELLS} cells); carriage / (pads x stations x one solution) = {ratio:.2f}; "
          f"converged {int(r.converged.sum())}/{n_st}")
    assert n_st == N_STATIONS and r.converged.all()
    assert per <= 6.0
