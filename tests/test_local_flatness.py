"""Local flatness windows against dense sampling of the interpolant and analytic surfaces."""

import numpy as np
import pytest

from flatcheck.form import solve_minimum_zone
from flatcheck.errors import InputValueError
from flatcheck.form import HeightMap
from flatcheck.form import local_flatness


def _grid_map(fn, nx=11, ny=7, pitch=100.0):
    X, Y = np.meshgrid(np.arange(nx) * pitch, np.arange(ny) * pitch)
    return HeightMap(X.ravel(), Y.ravel(), fn(X, Y).ravel())


def _dense_mz(hm, x0, x1, y0, y1, n=461):
    """Reference: MZ of the interpolant sampled densely (scipy interpolators behind HeightMap.sample)."""
    X, Y = np.meshgrid(np.linspace(x0, x1, n), np.linspace(y0, y1, n))
    Z = hm.sample(X, Y)
    return solve_minimum_zone(X.ravel(), Y.ravel(), Z.ravel()).t_um


def test_single_bump_on_grid():
    # Plane plus one raised node (1 µm at x=500, y=300): the bilinear interpolant is plane + a
    # pyramid of height 1; any window containing the node has local flatness 1 exactly
    # (hand reasoning: the node is 1 above the plane through the window's other extremes).
    hm = _grid_map(lambda X, Y: 0.002 * X - 0.001 * Y + np.where((X == 500) & (Y == 300), 1.0, 0.0))
    lf = local_flatness(hm, size_mm=250, step_mm=50)
    assert lf.worst_um == pytest.approx(1.0, abs=1e-9)
    assert abs(lf.worst_x_mm - 500) <= 125 and abs(lf.worst_y_mm - 300) <= 125
    far = (np.abs(lf.centre_x_mm - 500) >= 225) | (np.abs(lf.centre_y_mm - 300) >= 225)
    assert np.all(lf.flatness_um[far] < 1e-9)  # windows not reaching the pyramid see only the plane


def test_exact_against_dense_sampling_grid(rng):
    hm = _grid_map(lambda X, Y: rng.normal(0, 1, X.shape))
    lf = local_flatness(hm, size_mm=(230, 170), step_mm=70)
    for k in range(0, lf.flatness_um.size, 5):
        cx, cy = lf.centre_x_mm[k], lf.centre_y_mm[k]
        ref = _dense_mz(hm, cx - 115, cx + 115, cy - 85, cy + 85)
        # dense sampling can only miss extremes: ref <= exact; with samples 0.5 mm apart and
        # interpolant slopes below 0.04 µm/mm it misses a kink by at most ~0.01 µm
        assert ref <= lf.flatness_um[k] + 1e-9
        assert lf.flatness_um[k] == pytest.approx(ref, abs=0.015)


def test_exact_against_dense_sampling_scattered():
    # Union-Jack-like scattered stations (diagonals, edges, centre lines) on 1000 x 600 mm
    rng = np.random.default_rng(1234)
    t = np.linspace(0, 1, 9)
    pts = [(1000 * t, 600 * t), (1000 * t, 600 * (1 - t)), (1000 * t, 0 * t), (1000 * t, 600 + 0 * t),
           (0 * t, 600 * t), (1000 + 0 * t, 600 * t), (500 + 0 * t, 600 * t), (1000 * t, 300 + 0 * t)]
    xy = np.unique(np.round(np.column_stack([np.concatenate([p[0] for p in pts]), np.concatenate([p[1] for p in pts])]), 6), axis=0)
    hm = HeightMap(xy[:, 0], xy[:, 1], rng.normal(0, 1, len(xy)))
    assert hm.grid is None
    lf = local_flatness(hm, size_mm=300, step_mm=100)
    for k in range(0, lf.flatness_um.size, 3):
        cx, cy = lf.centre_x_mm[k], lf.centre_y_mm[k]
        ref = _dense_mz(hm, cx - 150, cx + 150, cy - 150, cy + 150)
        assert ref <= lf.flatness_um[k] + 1e-9
        assert lf.flatness_um[k] == pytest.approx(ref, abs=0.015)


def test_whole_surface_window_equals_global_mz(rng):
    hm = _grid_map(lambda X, Y: rng.normal(0, 1, X.shape))
    lf = local_flatness(hm, size_mm=(1000, 600))
    assert lf.flatness_um.size == 1
    assert lf.worst_um == pytest.approx(solve_minimum_zone(hm.x_mm, hm.y_mm, hm.height_um).t_um, abs=1e-9)


def test_circle_on_paraboloid():
    # z = k((x-500)^2 + (y-300)^2): removing a plane leaves k*|p - c|^2 + const for any centre c,
    # so over a disc of radius R the minimum zone is k R^2 (analytic). Fine 10 mm grid: bilinear
    # interpolation error <= k (h^2/4 + h^2/4) = 5e-4 µm (bilinear error of x^2 and y^2 terms,
    # h^2/4 each; interpolation error of a quadratic on a 10 mm cell, hand calculation).
    k = 1e-5
    hm = _grid_map(lambda X, Y: k * ((X - 500) ** 2 + (Y - 300) ** 2), nx=101, ny=61, pitch=10.0)
    lf = local_flatness(hm, size_mm=200, shape="circle", step_mm=150)
    # a 180-gon inscribed in the circle reaches radius R cos(1 deg): relative error ~ 1.5e-4
    np.testing.assert_allclose(lf.flatness_um, k * 100**2, atol=5e-4 + 0.1 * 3e-4)


def test_small_window_says_what_it_sees(rng):
    hm = _grid_map(lambda X, Y: rng.normal(0, 1, X.shape))
    lf = local_flatness(hm, size_mm=60, step_mm=100)
    assert lf.undersampled and lf.notes and "station spacing" in lf.notes[0]
    assert lf.stations_in_window.min() <= 1


def test_cubic_and_errors(rng):
    hm = _grid_map(lambda X, Y: 1e-6 * (X - 500) ** 2 + 0 * Y)
    # x-parabola: the cubic spline reproduces it exactly, so a 200 mm wide window gives 1e-6*100^2 = 0.01
    lf = local_flatness(hm, size_mm=(200, 200), step_mm=100, method="cubic")
    assert lf.worst_um == pytest.approx(0.01, rel=1e-6)
    with pytest.raises(InputValueError, match="does not fit"):
        local_flatness(hm, size_mm=2000)
    with pytest.raises(InputValueError, match="shape"):
        local_flatness(hm, size_mm=100, shape="hexagon")
