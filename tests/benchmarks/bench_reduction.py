"""Benchmark: least-squares reduction of a 200 x 200 station grid.

Baselines timed in the same run (the machines are shared and noisy, so only
ratios mean anything):

- one ``scipy.sparse.linalg.spsolve`` of the 2-D grid Laplacian of the same size
  (the normal matrix of a rows + columns survey, one station held fixed);
- plain integration of the same readings: ``numpy.cumsum`` along every row and
  every column (what a per-line reduction without any adjustment costs).

Run with ``python -m pytest tests/benchmarks -m benchmark -s``.
"""

import time

import numpy as np
import pytest
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from flatcheck.survey import plan_grid
from flatcheck.survey import reduce_survey
from flatcheck.survey import simulate_survey
from flatcheck.survey import Instrument, observations

N_SIDE = 200  # stations per side
PITCH_MM = 10.0


def _surface(x, y):
    return 0.5 * np.sin(x / 300.0) * np.cos(y / 250.0) + 1e-3 * x


def _best_of(fn, repeat=3):
    best = np.inf
    out = None
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t0)
    return best, out


def _laplacian(n):
    one = sp.diags([-np.ones(n - 1), 2 * np.ones(n), -np.ones(n - 1)], [-1, 0, 1])
    one = sp.lil_matrix(one)
    one[0, 0] = one[-1, -1] = 1.0  # free ends: a path graph
    eye = sp.identity(n)
    L = (sp.kron(eye, one) + sp.kron(one, eye)).tocsc()
    return L[1:, 1:]  # hold one station: non-singular


@pytest.mark.benchmark
@pytest.mark.parametrize("kind,diagonals", [("level", False), ("autocollimator", True)])
def test_bench_reduce_200x200(kind, diagonals):
    size = (N_SIDE - 1) * PITCH_MM + 20.0
    unit = "um/m" if kind == "level" else "arcsec"
    plan = plan_grid(size, size, PITCH_MM, margin_mm=10.0, instrument=Instrument(kind, unit), diagonals=diagonals)
    assert len(plan.stations) == N_SIDE * N_SIDE
    s = simulate_survey(plan, _surface, noise_sd=0.05, instrument_zero="random", rng=1234)
    obs = observations(s)

    t_red, red = _best_of(lambda: reduce_survey(s), repeat=2)
    L = _laplacian(N_SIDE)
    b = np.random.default_rng(1).normal(size=L.shape[0])
    t_lap, _ = _best_of(lambda: spla.spsolve(L, b))
    rises = obs.value_um
    t_cum, _ = _best_of(lambda: np.cumsum(rises.reshape(-1, N_SIDE - 1)[: 2 * N_SIDE], axis=1))

    print(
        f"\nreduce {kind} {N_SIDE}x{N_SIDE} ({len(s.lines)} lines, {rises.size} readings): {t_red:.3f} s; "
        f"spsolve Laplacian {t_lap:.3f} s (ratio {t_red / t_lap:.1f}); "
        f"cumsum integration {t_cum * 1e3:.2f} ms (ratio {t_red / t_cum:.0f})"
    )
    assert red.heightmap.n == N_SIDE * N_SIDE
    assert np.isfinite(red.sigma0_um)
    assert t_red < 5.0, "the 200 x 200 reduction must take at most 5 s on 2 cores"
