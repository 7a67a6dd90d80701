"""Benchmark: exact minimum zone of a 1000 x 1000 map vs one direct HiGHS LP over all points.

Run:  python -m pytest tests/benchmarks/bench_minzone.py -m benchmark -s
"""

import time

import numpy as np
import pytest
from scipy.optimize import linprog

from flatcheck.form import solve_minimum_zone


def _direct_lp(x, y, z):
    """Baseline: one HiGHS LP over every point (centred positions), scipy defaults."""
    n = x.size
    A = np.column_stack([np.ones(n), x - x.mean(), y - y.mean()])
    A_ub = np.vstack([np.column_stack([A, np.zeros(n)]), np.column_stack([-A, -np.ones(n)])])
    res = linprog([0, 0, 0, 1], A_ub=A_ub, b_ub=np.concatenate([z, -z]), bounds=[(None, None)] * 4, method="highs")
    return res.x[3]


def _best(f, repeat):
    times, out = [], None
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = f()
        times.append(time.perf_counter() - t0)
    return min(times), out


@pytest.mark.benchmark
@pytest.mark.parametrize("surface", ["noise", "saddle+tilt", "waves"])
def test_minzone_1000x1000(surface):
    rng = np.random.default_rng(1234)
    g = np.linspace(0, 999, 1000)
    X, Y = np.meshgrid(g, g)
    x, y = X.ravel(), Y.ravel()
    if surface == "noise":
        z = rng.normal(0, 1, x.size)
    elif surface == "saddle+tilt":
        z = 1e-5 * ((x - 500) ** 2 - (y - 500) ** 2) + 3e-3 * x + 1000 + rng.normal(0, 0.05, x.size)
    else:
        z = 2 * np.sin(x / 100) * np.cos(y / 130) + rng.normal(0, 0.02, x.size)
    t_fast, sol = _best(lambda: solve_minimum_zone(x, y, z), 3)
    t_hull, hull = _best(lambda: solve_minimum_zone(x, y, z, method="hull"), 1)
    t_lp, ref = _best(lambda: _direct_lp(x, y, z), 1)
    print(
        f"\n[minzone {surface}] dual simplex {t_fast:.3f} s, hull+HiGHS {t_hull:.3f} s, direct HiGHS {t_lp:.2f} s; "
        f"ratio LP/fast {t_lp / t_fast:.0f}x, LP/hull {t_lp / t_hull:.1f}x; |t - t_LP| = {abs(sol.t_um - ref):.2e} µm"
    )
    assert abs(sol.t_um - ref) <= 1e-6
    assert abs(hull.t_um - ref) <= 1e-6
    assert t_lp / t_fast >= 50
