"""Straightness (ISO 12780-1 parameters) against analytic profiles and scipy's HiGHS LP."""

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from scipy.optimize import linprog

from flatcheck.errors import GeometryError, InputValueError
from flatcheck.form import evaluate_straightness, minimum_zone_line


def lp_line(s, z):
    """Reference: min t s.t. 0 <= z - (a + b s) <= t by scipy.optimize.linprog (HiGHS)."""
    n = s.size
    A = np.column_stack([np.ones(n), s - s.mean()])
    A_ub = np.vstack([np.column_stack([A, np.zeros(n)]), np.column_stack([-A, -np.ones(n)])])
    res = linprog([0, 0, 1], A_ub=A_ub, b_ub=np.concatenate([z, -z]), bounds=[(None, None)] * 3, method="highs")
    return res.x[2]


def test_parabola_analytic():
    # z = s^2 + 0.3 s on 21 points in [-1, 1]. Removing the line 0.3 s leaves s^2, whose zone is
    # horizontal by symmetry: lower line at 0 (s = 0), upper at 1 (s = +-1): MZ = 1 (hand calculation).
    # LS: b = 0.3, a = mean(s^2) = sum(k^2, k=-10..10)/(100*21) = 770/2100 = 0.36667,
    # so STRp = 1 - 0.36667 = 0.63333, STRv = 0.36667. End-point line: z = 1 + 0.3 s, STRv = 1, STRp = 0.
    s = np.linspace(-1, 1, 21)
    rep = evaluate_straightness(s, s**2 + 0.3 * s)
    assert rep.mzli.strt_um == pytest.approx(1.0, abs=1e-12)
    assert rep.mzli.b_um_per_mm == pytest.approx(0.3, abs=1e-12)
    assert rep.lsli.b_um_per_mm == pytest.approx(0.3, abs=1e-12)
    assert rep.lsli.strp_um == pytest.approx(1 - 770 / 2100, abs=1e-12)
    assert rep.lsli.strv_um == pytest.approx(770 / 2100, abs=1e-12)
    # STRq about LS: sqrt(mean((s^2 - 11/30)^2)) computed with numpy as the reference
    assert rep.lsli.strq_um == pytest.approx(np.sqrt(np.mean((s**2 - 770 / 2100) ** 2)), rel=1e-12)
    assert rep.endpoint.strv_um == pytest.approx(1.0, abs=1e-12) and rep.endpoint.strp_um == pytest.approx(0.0, abs=1e-12)


def test_sine_half_period():
    # z = sin(pi s / L) on [0, L] (one hump, dense sampling): the ends are 0, the top is 1, and
    # the zone is horizontal by symmetry: MZ = 1, end-point line = MZ lower line.
    s = np.linspace(0, 500, 1001)
    rep = evaluate_straightness(s, np.sin(np.pi * s / 500))
    assert rep.mzli.strt_um == pytest.approx(1.0, abs=1e-12)
    assert rep.endpoint.strt_um == pytest.approx(1.0, abs=1e-12)


def test_normal_width():
    # Line of slope 1 (positions in µm units: s_mm = 1e-3 * s_um), one point 1 µm above it:
    # vertical zone 1, normal zone 1/sqrt(2) (plane geometry).
    s_um = np.array([0.0, 1.0, 2.0, 3.0])
    z = s_um.copy()
    z[1] += 1.0
    z[2] += 1.0
    rep = evaluate_straightness(s_um * 1e-3, z)
    assert rep.mzli.strt_um == pytest.approx(1.0, abs=1e-12)
    assert rep.mzli.normal_strt_um == pytest.approx(1 / np.sqrt(2), abs=1e-12)


def test_equals_highs_on_random_profiles():
    rng = np.random.default_rng(1234)
    for k in range(60):
        n = int(rng.integers(2, 500))
        s = np.sort(rng.uniform(0, 2000, n)) if k % 3 else np.linspace(0, 2000, n)
        z = rng.normal(0, 1, n) if k % 2 else np.round(0.002 * s + np.sin(s / 300) + rng.normal(0, 0.3, n))
        a, b, t = minimum_zone_line(s, z)
        assert t == pytest.approx(lp_line(s, z), abs=1e-7)  # Source: scipy HiGHS LP
        r = z - (a + b * s)
        assert r.min() >= -1e-9 and r.max() <= t + 1e-9


@given(st.integers(0, 2**31 - 1), st.floats(-10, 10), st.floats(-0.1, 0.1), st.floats(-20, 20))
def test_line_ignored_and_scaling(seed, a, b, k):
    rng = np.random.default_rng(seed)
    s = np.sort(rng.uniform(0, 1000, 30))
    z = rng.normal(0, 1, 30)
    t0 = minimum_zone_line(s, z)[2]
    assert minimum_zone_line(s, z + a + b * s)[2] == pytest.approx(t0, abs=1e-9)
    assert minimum_zone_line(s, k * z)[2] == pytest.approx(abs(k) * t0, abs=1e-9)
    assert evaluate_straightness(s, z).mzli.strt_um <= evaluate_straightness(s, z).lsli.strt_um + 1e-12


def test_bad_profiles():
    with pytest.raises(GeometryError):
        evaluate_straightness([5.0, 5.0, 5.0], [0, 1, 2])
    with pytest.raises(InputValueError, match="point 2"):
        evaluate_straightness([0, 1, 2], [0, np.nan, 2])
    assert evaluate_straightness([0, 1], [3.0, 7.0]).mzli.strt_um == 0.0
