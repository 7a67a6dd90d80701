"""Least squares against the classic Union Jack (Moody) worksheet on several figures of merit (docs/methods.md).

For the same simulated Union Jack surveys, both reductions' linear operators G (heights = G @ rises) give the
covariance of the station heights, C = G diag(var) G^T, for a stated reading noise. Figures of merit:

- station RMS: root mean square over the stations of the height standard deviation (about the LS plane);
- flatness u (linear): the standard uncertainty of the minimum-zone flatness from its sensitivities, the
  contact weights of the zone (t = sum w_u z_u - sum w_l z_l near the solution): u = sqrt(c^T C c);
- flatness U (budget): the whole Monte Carlo budget with the reading noise as the only source.

Variants: angle noise equal per step (the diagonals' longer base makes their rises noisier) or rise noise equal
per step; least squares with and without the centre lines (figures then over the stations both have).

Run:  python -m pytest tests/benchmarks/bench_moody_u.py -m benchmark -s
"""

import dataclasses

import numpy as np
import pytest

from flatcheck.evaluation import MeasuredSurface, uncertainty_budget
from flatcheck.evaluation._budget_sources import KEYS
from flatcheck.form import solve_minimum_zone
from flatcheck.survey import Instrument, observations, plan_union_jack, reduce_survey, simulate_survey


def surface(x, y):
    """Invented plate: an off-centre crown with a bump, no symmetric ties (µm)."""
    x, y = np.asarray(x, float), np.asarray(y, float)
    return 4e-6 * ((x - 470) ** 2 + 1.3 * (y - 330) ** 2) + 0.4 * np.exp(-((x - 300) ** 2 + (y - 250) ** 2) / 2e4)


def _plan(instrument):
    return plan_union_jack(1020, 700, 80, margin_mm=30, instrument=instrument, steps=(12, 8, 14))


def _drop_centre_lines(s):
    lines = tuple(ln for ln in s.lines if ln.name not in ("W-E", "S-N"))
    keep = {st for ln in lines for st in ln.stations}
    stations = tuple(st for st in s.stations if st.name in keep)
    return dataclasses.replace(s, lines=lines, stations=stations, pattern="lines", meta={})


def _figures(s, red, var, names, h_true):
    """(station RMS, linear flatness u) over the stations ``names``."""
    G = red.operator.G
    idx = [list(red.operator.station_names).index(n) for n in names]
    C = (G * var) @ G.T
    C = C[np.ix_(idx, idx)]
    # covariance about the least-squares plane of these stations
    pos = {st.name: (st.x_mm, st.y_mm) for st in s.stations}
    xy = np.array([pos[n] for n in names])
    A = np.column_stack([np.ones(len(names)), xy])
    P = np.eye(len(names)) - A @ np.linalg.pinv(A)
    C = P @ C @ P.T
    sol = solve_minimum_zone(xy[:, 0], xy[:, 1], h_true)
    c = np.zeros(len(names))
    for k, i in enumerate(sol.upper):
        c[i] += sol.weights[k]
    for k, i in enumerate(sol.lower):
        c[i] -= sol.weights[len(sol.upper) + k]
    return float(np.sqrt(np.mean(np.diag(C)))), float(np.sqrt(c @ C @ c))


def _budget_u(s, method, sigma):
    s = dataclasses.replace(s, instrument=dataclasses.replace(s.instrument, reading_uncertainty=sigma,
                                                              scale_uncertainty_rel=0.0,
                                                              foot_spacing_uncertainty_mm=0.0))
    meta = dict(s.meta)
    meta["uncertainty"] = {k: 0.0 for k in KEYS if k != "expansion_coefficient_per_k"}
    s = dataclasses.replace(s, meta=meta)
    red = reduce_survey(s, method=method)
    b = uncertainty_budget(MeasuredSurface("x", red.heightmap, s, red), trials=20_000, seed=1,
                           contribution_trials=100)
    return b.combined_um, b.expanded_um


@pytest.mark.benchmark
@pytest.mark.parametrize("kind, unit, sigma", [("autocollimator", "arcsec", 0.2), ("level", "um/m", 1.0)])
def test_least_squares_against_moody(kind, unit, sigma):
    s = simulate_survey(_plan(Instrument(kind, unit)), surface)
    obs = observations(s)
    red_ls, red_m = reduce_survey(s), reduce_survey(s, method="moody")
    names = list(red_ls.operator.station_names)
    h_true = red_ls.heightmap.height_um  # exact readings: both reductions give the truth about the LS plane
    ang = (sigma * obs.um_per_unit) ** 2  # equal angle noise per step
    rise = np.full(obs.value_um.size, float(np.mean(ang)))  # equal rise noise per step, same mean variance
    print(f"\n[{kind}, 12 x 8 steps, diagonal 14; sigma {sigma} {unit}]")
    for label, var in (("equal angle noise", ang), ("equal rise noise", rise)):
        ls = _figures(s, red_ls, var, names, h_true)
        mo = _figures(s, red_m, var, names, h_true)
        print(f"  {label}: LS/Moody station RMS {ls[0] / mo[0]:.3f}, flatness u (linear) {ls[1] / mo[1]:.3f}")
    # without the centre lines, over the stations both reductions have
    s6 = _drop_centre_lines(s)
    red6 = reduce_survey(s6)
    names6 = list(red6.operator.station_names)
    obs6 = observations(s6)
    var6 = (sigma * obs6.um_per_unit) ** 2
    h6 = np.array([h_true[names.index(n)] for n in names6])
    ls6 = _figures(s6, red6, var6, names6, h6)
    mo6 = _figures(s, red_m, ang, names6, h6)
    ls8 = _figures(s, red_ls, ang, names6, h6)
    print(f"  over the {len(names6)} stations off the centre lines: LS without centre lines / Moody: station RMS "
          f"{ls6[0] / mo6[0]:.3f}, flatness u {ls6[1] / mo6[1]:.3f}; LS with them / Moody: {ls8[0] / mo6[0]:.3f}, "
          f"{ls8[1] / mo6[1]:.3f}")
    for sg in (sigma, sigma / 5):
        u_ls, U_ls = _budget_u(s, "least-squares", sg)
        u_m, U_m = _budget_u(s, "moody", sg)
        print(f"  budget (Monte Carlo, reading only {sg:g} {unit}, 20 000 trials): u LS {u_ls:.4f} µm, Moody "
              f"{u_m:.4f} µm, ratio {u_ls / u_m:.3f}; U LS {U_ls:.4f}, Moody {U_m:.4f}, ratio {U_ls / U_m:.3f}")
        assert u_ls < u_m
