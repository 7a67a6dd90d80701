"""Benchmark: Monte Carlo flatness uncertainty, 100,000 trials on an 81-station survey.

Baseline: one HiGHS LP per trial, timed on a sample of trials in the same run and scaled up.

Run:  python -m pytest tests/benchmarks/bench_montecarlo.py -m benchmark -s
"""

import time

import numpy as np
import pytest
from scipy.optimize import linprog

from flatcheck.form import monte_carlo_flatness


def _lp(x, y, z):
    n = x.size
    A = np.column_stack([np.ones(n), x - x.mean(), y - y.mean()])
    A_ub = np.vstack([np.column_stack([A, np.zeros(n)]), np.column_stack([-A, -np.ones(n)])])
    return linprog([0, 0, 0, 1], A_ub=A_ub, b_ub=np.concatenate([z, -z]), bounds=[(None, None)] * 4, method="highs").x[3]


@pytest.mark.benchmark
@pytest.mark.parametrize("case", ["plate", "dome", "noise-dominated"])
def test_montecarlo_100k(case):
    X, Y = np.meshgrid(np.linspace(0, 1000, 9), np.linspace(0, 630, 9))
    x, y = X.ravel(), Y.ravel()
    rng = np.random.default_rng(5)
    z, u = {
        "plate": (rng.normal(0, 0.5, 81), 0.2),
        "dome": (3e-6 * ((x - 500) ** 2 + (y - 315) ** 2) + rng.normal(0, 0.1, 81), 0.1),
        "noise-dominated": (0.2 * rng.normal(0, 1, 81), 0.5),
    }[case]
    t0 = time.perf_counter()
    r = monte_carlo_flatness(x, y, z, u_value_um=u, scale_u_rel=0.002, trials=100_000, seed=3, keep_samples=True)
    t_mc = time.perf_counter() - t0
    # baseline: HiGHS per trial on 300 trials of the same kind, scaled to 100,000
    H = z + u * rng.standard_normal((300, 81))
    t0 = time.perf_counter()
    for h in H:
        _lp(x, y, h)
    t_lp = (time.perf_counter() - t0) / 300 * 100_000
    print(
        f"\n[montecarlo {case}] 100k trials {t_mc:.2f} s (fallbacks {r.n_fallback}); HiGHS per trial "
        f"{t_lp / 100_000 * 1e3:.2f} ms -> {t_lp:.0f} s; ratio {t_lp / t_mc:.0f}x; "
        f"estimate {r.estimate_um:.4f} mean {r.mean_um:.4f} sd {r.std_um:.4f} µm"
    )
    assert t_mc <= 10.0
