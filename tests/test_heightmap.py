"""HeightMap model and interpolation (heightmap.py)."""

import numpy as np
import pytest

from flatcheck.errors import InputValueError
from flatcheck.form import HeightMap, regular_grid


def test_grid_detection_and_order(rng):
    xs, ys = np.arange(5) * 25.0, np.arange(4) * 25.0
    X, Y = np.meshgrid(xs, ys)
    perm = rng.permutation(X.size)
    hm = HeightMap(X.ravel()[perm], Y.ravel()[perm], (X + 2 * Y).ravel()[perm])
    gx, gy, index = hm.grid
    assert np.array_equal(gx, xs) and np.array_equal(gy, ys)
    assert np.array_equal(hm.grid_heights_um(), X + 2 * Y)


def test_incomplete_grid_is_not_a_grid():
    assert regular_grid([0, 1, 0], [0, 0, 1]) is None
    assert regular_grid([0, 1, 0, 1, 2], [0, 0, 1, 1, 0]) is None


def test_bilinear_is_exact_for_bilinear_surface():
    # Analytic: bilinear interpolation reproduces z = a + bx + cy + dxy exactly on a rectilinear grid.
    X, Y = np.meshgrid([0.0, 10, 30, 60], [0.0, 20, 25])
    f = lambda x, y: 1 + 0.1 * x - 0.2 * y + 0.003 * x * y  # noqa: E731
    hm = HeightMap(X.ravel(), Y.ravel(), f(X, Y).ravel())
    xq, yq = np.array([5.0, 44.0, 59.9]), np.array([3.0, 22.5, 24.0])
    assert np.allclose(hm.sample(xq, yq), f(xq, yq), atol=1e-12)


def test_scattered_linear_is_exact_for_plane_and_nan_outside():
    # Analytic: piecewise-linear interpolation on a triangulation reproduces a plane exactly.
    x = np.array([0, 100, 100, 0, 50, 30.0])
    y = np.array([0, 0, 80, 80, 40, 70.0])
    hm = HeightMap(x, y, 2 + 0.01 * x - 0.03 * y)
    assert hm.grid is None
    q = hm.sample([10.0, 90.0], [10.0, 70.0])
    assert np.allclose(q, 2 + 0.01 * np.array([10, 90]) - 0.03 * np.array([10, 70]), atol=1e-12)
    assert np.isnan(hm.sample(120.0, 10.0))  # never extrapolates


def test_bad_values_are_named():
    with pytest.raises(InputValueError, match="height_um of point 2 is not a finite number"):
        HeightMap([0, 1, 2], [0, 1, 0], [0, np.nan, 1])
    with pytest.raises(InputValueError, match="differ in length"):
        HeightMap([0, 1], [0, 1, 2], [0, 1, 2])


def test_resampled_keeps_surface():
    X, Y = np.meshgrid(np.arange(0, 101, 20.0), np.arange(0, 61, 20.0))
    hm = HeightMap(X.ravel(), Y.ravel(), (0.5 * X - Y).ravel())
    fine = hm.resampled(5.0)
    assert fine.n == 21 * 13
    assert np.allclose(fine.height_um, 0.5 * fine.x_mm - fine.y_mm, atol=1e-12)
