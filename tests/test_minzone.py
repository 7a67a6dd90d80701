"""Exact minimum-zone solvers against scipy's HiGHS linear program and hand calculations."""

import numpy as np
import pytest
from scipy.optimize import linprog

from flatcheck.form import minimum_zone_batch, solve_minimum_zone
from flatcheck.errors import GeometryError, InputValueError


def lp_zone(x, y, z):
    """Reference: one direct HiGHS LP over all points (scipy.optimize.linprog), centred positions."""
    n = x.size
    A = np.column_stack([np.ones(n), x - x.mean(), y - y.mean()])
    A_ub = np.vstack([np.column_stack([A, np.zeros(n)]), np.column_stack([-A, -np.ones(n)])])
    res = linprog([0, 0, 0, 1], A_ub=A_ub, b_ub=np.concatenate([z, -z]), bounds=[(None, None)] * 4, method="highs")
    assert res.status == 0
    return res.x[3]


def _cases(rng):
    """Point sets of many shapes and sizes: scattered, gridded, quantised heights (ties), curved, tiny."""
    for k in range(80):
        kind = k % 8
        n = int(rng.integers(3, 400))
        x = rng.uniform(0, 1000, n)
        y = rng.uniform(0, 600, n)
        if kind == 0:
            z = rng.normal(0, 3, n)
        elif kind == 1:  # dome + noise
            z = 1e-5 * ((x - 500) ** 2 + (y - 300) ** 2) + rng.normal(0, 0.1, n)
        elif kind == 2:  # quantised heights: many ties
            z = np.round(rng.normal(0, 2, n))
        elif kind == 3:  # regular grid, half-micrometre steps (degenerate contacts on a grid)
            X, Y = np.meshgrid(np.arange(0, 1000, 100.0), np.arange(0, 600, 100.0))
            x, y = X.ravel(), Y.ravel()
            z = np.round(rng.normal(0, 1, x.size) * 2) / 2
        elif kind == 4:  # saddle with a huge offset and tilt
            z = 1e6 + 0.02 * x - 0.05 * y + 1e-5 * (x - 500) * (y - 300) + rng.normal(0, 0.05, n)
        elif kind == 5:  # very few points
            n = int(rng.integers(3, 7))
            x, y, z = rng.uniform(0, 10, n), rng.uniform(0, 10, n), rng.normal(0, 1, n)
        elif kind == 6:  # duplicated positions with different heights
            x = np.repeat(x[: n // 2 + 2], 2)
            y = np.repeat(y[: n // 2 + 2], 2)
            z = rng.normal(0, 1, x.size)
        else:  # long thin guideway 3000 x 40 mm
            x = rng.uniform(0, 3000, n)
            y = rng.uniform(0, 40, n)
            z = np.sin(x / 400) + rng.normal(0, 0.02, n)
        yield kind, x, y, z


def test_equals_highs_lp_on_many_shapes():
    rng = np.random.default_rng(1234)
    for kind, x, y, z in _cases(rng):
        ref = lp_zone(x, y, z)  # Source: scipy.optimize.linprog (HiGHS), the LP of REFERENCE.md section 3
        for method in ("auto", "hull", "lp"):
            sol = solve_minimum_zone(x, y, z, method=method)
            assert sol.t_um == pytest.approx(ref, abs=1e-6 * max(1.0, ref)), (kind, method)
            assert sol.certified
            # the returned lower plane really encloses every point in a zone of width t
            r = z - (sol.a_um + sol.b_um_per_mm * x + sol.c_um_per_mm * y)
            assert r.min() >= -1e-6 and r.max() <= sol.t_um + 1e-6


def test_hand_case_corner_bump():
    # REFERENCE.md section 10 item 7 [D]: 3x3 grid, z = 0 except z(2,2) = 1.
    # Hand check: lower plane p = -0.75 + 0.25x + 0.25y gives residuals 0.75 at (0,0) and (2,2),
    # 0 at (2,1) and (1,2); the upper contacts (0,0), (2,2) weighted 1/4, 3/4 have the same
    # (x, y) centroid (1.5, 1.5) as the lower contacts (2,1), (1,2): the optimality condition.
    x, y = np.meshgrid([0.0, 1, 2], [0.0, 1, 2])
    z = np.zeros((3, 3))
    z[2, 2] = 1
    s = solve_minimum_zone(x.ravel(), y.ravel(), z.ravel())
    assert s.t_um == pytest.approx(0.75, abs=1e-12)
    assert (s.a_um, s.b_um_per_mm, s.c_um_per_mm) == pytest.approx((-0.75, 0.25, 0.25), abs=1e-12)
    assert sorted(s.upper) == [0, 8] and sorted(s.lower) == [5, 7]


def test_four_points_twist():
    # Hand calculation: corners of a unit square, heights 0, 0, 0, 1. For any plane p the residuals
    # r = z - p satisfy r00 + r11 - r10 - r01 = z00 + z11 - z10 - z01 = 1 (the plane terms cancel).
    # With 0 <= r <= t the left side is at most 2t, so t >= 0.5; the lower plane
    # p = -0.5 + 0.5x + 0.5y gives residuals 0.5, 0, 0, 0.5, so t = 0.5 exactly.
    s = solve_minimum_zone([0, 1, 0, 1], [0, 0, 1, 1], [0.0, 0.0, 0.0, 1.0])
    assert s.t_um == pytest.approx(0.5, abs=1e-12)
    assert (s.a_um, s.b_um_per_mm, s.c_um_per_mm) == pytest.approx((-0.5, 0.5, 0.5), abs=1e-12)


def test_paraboloid_on_square_grid():
    # z = x^2 + y^2 on the 11x11 grid over [-1, 1]^2 (heights in µm, positions in mm).
    # Analytic: the zone is horizontal by symmetry; lower plane touches the centre (0),
    # upper plane the corners (2): t = 2.
    g = np.linspace(-1, 1, 11)
    X, Y = np.meshgrid(g, g)
    s = solve_minimum_zone(X.ravel(), Y.ravel(), (X**2 + Y**2).ravel())
    assert s.t_um == pytest.approx(2.0, abs=1e-12)
    assert s.b_um_per_mm == pytest.approx(0.0, abs=1e-12)


def test_saddle_on_square_grid():
    # z = x*y on [-1, 1]^2 grid: the corners are +1, +1, -1, -1. Any plane a + bx + cy:
    # (z - p) at (1,1) + (-1,-1) - (1,-1) - (-1,1) = 4 regardless of the plane, so t >= 4/2 = 2,
    # and the horizontal plane achieves 2.
    g = np.linspace(-1, 1, 9)
    X, Y = np.meshgrid(g, g)
    s = solve_minimum_zone(X.ravel(), Y.ravel(), (X * Y).ravel())
    assert s.t_um == pytest.approx(2.0, abs=1e-12)


def test_coplanar_gives_zero():
    rng = np.random.default_rng(1234)
    x, y = rng.uniform(0, 500, 50), rng.uniform(0, 500, 50)
    s = solve_minimum_zone(x, y, 3.0 + 0.01 * x - 0.02 * y)
    assert s.t_um == pytest.approx(0.0, abs=1e-9)
    s = solve_minimum_zone(x, y, np.full(50, 7.0))
    assert s.t_um == 0.0


def test_degenerate_inputs_raise():
    with pytest.raises(GeometryError, match="three points"):
        solve_minimum_zone([0, 1], [0, 1], [0, 1])
    with pytest.raises(GeometryError, match="one line"):
        solve_minimum_zone([0, 1, 2, 3], [0, 2, 4, 6], [0, 1, 0, 1])
    with pytest.raises(GeometryError, match="same"):
        solve_minimum_zone([1, 1, 1], [2, 2, 2], [0, 1, 0])
    with pytest.raises(InputValueError, match="point 3"):
        solve_minimum_zone([0, 1, 0, 1], [0, 0, 1, 1], [0, 1, np.nan, 1])
    with pytest.raises(InputValueError, match="point 2"):
        solve_minimum_zone([0, np.inf, 0, 1], [0, 0, 1, 1], [0, 1, 0, 1])
    with pytest.raises(InputValueError, match="differ in length"):
        solve_minimum_zone([0, 1, 0], [0, 0, 1], [0, 1])


def test_batch_equals_linprog_on_every_trial():
    # Monte Carlo-like trials: a 9x9 station grid, nominal dome + twist, noise of several sizes
    # (small: warm start optimal; large: many pivots). Source of truth: scipy HiGHS per trial.
    rng = np.random.default_rng(1234)
    X, Y = np.meshgrid(np.linspace(0, 800, 9), np.linspace(0, 600, 9))
    x, y = X.ravel(), Y.ravel()
    nominal = 2e-6 * ((x - 400) ** 2 + (y - 300) ** 2) + 1e-6 * (x - 400) * (y - 300)
    start = solve_minimum_zone(x, y, nominal)
    for u in (0.01, 0.1, 0.5, 2.0):
        Z = nominal + rng.normal(0, u, (75, x.size))
        t, n_fb = minimum_zone_batch(x, y, Z, start=start)
        ref = np.array([lp_zone(x, y, z) for z in Z])
        np.testing.assert_allclose(t, ref, atol=1e-7)
        assert n_fb <= 5
