"""Flatness reference planes and ISO 12781-1 parameters."""

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from flatcheck.errors import GeometryError, InputValueError
from flatcheck.form import (
    corner_stations,
    diagonal_plane,
    evaluate_flatness,
    least_squares_plane,
    minimum_zone,
    three_corner_plane,
)

G3 = np.meshgrid([0.0, 1.0, 2.0], [0.0, 1.0, 2.0])


def test_reference_item7_corner_bump():
    # REFERENCE.md section 10 item 7 [D] (3x3 grid, z = 0 except z(2,2) = 1). Arithmetic:
    # LS normal equations on the symmetric grid give b = c = cov(x, z)/var(x) = (1/9*(2-1))/(6/9) = 1/6,
    # a = mean z - b*1 - c*1 = 1/9 - 1/3 = -2/9. Residuals: at (2,2) 1 - 4/9 = 5/9 (FLTp 0.5556);
    # lowest at (1,2),(2,1): 0 - (-2/9 + 3/6) = -5/18 (FLTv 0.2778); FLTq = sqrt(sum r^2 / 9) = 0.24845.
    x, y = G3
    z = np.zeros((3, 3))
    z[2, 2] = 1.0
    rep = evaluate_flatness(x.ravel(), y.ravel(), z.ravel())
    ls = rep.lspl
    assert (ls.a_um, ls.b_um_per_mm, ls.c_um_per_mm) == pytest.approx((-2 / 9, 1 / 6, 1 / 6), abs=1e-12)
    assert ls.fltt_um == pytest.approx(0.8333, abs=5e-5)
    assert ls.fltp_um == pytest.approx(0.5556, abs=5e-5)
    assert ls.fltv_um == pytest.approx(0.2778, abs=5e-5)
    assert ls.fltq_um == pytest.approx(0.24845, abs=5e-6)
    # MZ 0.75 with lower plane -0.75 + 0.25x + 0.25y; the mid-plane is 0.375 higher
    assert rep.mzpl.fltt_um == pytest.approx(0.75, abs=1e-12)
    assert rep.mzpl.fltp_um == pytest.approx(0.375, abs=1e-12) and rep.mzpl.fltv_um == pytest.approx(0.375, abs=1e-12)
    mz = minimum_zone(x.ravel(), y.ravel(), z.ravel())
    assert (mz.a_um, mz.b_um_per_mm, mz.c_um_per_mm) == pytest.approx((-0.75, 0.25, 0.25), abs=1e-12)


def test_reference_item7_normal_zone():
    # Same case with positions in the height unit (x in mm = 1e-3 * x in µm), so the slopes
    # 0.25 are dimensionless: normal zone 0.75/sqrt(1 + 2*0.25^2) = 0.7071 (REFERENCE item 7).
    x, y = G3
    z = np.zeros((3, 3))
    z[2, 2] = 1.0
    mz = minimum_zone(x.ravel() * 1e-3, y.ravel() * 1e-3, z.ravel())
    assert mz.normal_flatness_um == pytest.approx(0.7071, abs=5e-5)
    rep = evaluate_flatness(x.ravel() * 1e-3, y.ravel() * 1e-3, z.ravel())
    assert rep.mzpl.normal_fltt_um == pytest.approx(0.75 / np.sqrt(1.125), abs=1e-12)


def test_reference_item8_centre_bump():
    # REFERENCE.md section 10 item 8 [D]: only z(1,1) = 1. LS plane z = 1/9 (no slope by symmetry);
    # FLTp = 1 - 1/9 = 0.8889, FLTv = 1/9 = 0.1111, FLTq = sqrt((8/81 + 64/81)/9) = 0.31427; MZ = LS = 1.
    x, y = G3
    z = np.zeros((3, 3))
    z[1, 1] = 1.0
    rep = evaluate_flatness(x.ravel(), y.ravel(), z.ravel())
    assert rep.lspl.fltt_um == pytest.approx(1.0, abs=1e-12)
    assert rep.lspl.fltp_um == pytest.approx(0.8889, abs=5e-5)
    assert rep.lspl.fltv_um == pytest.approx(0.1111, abs=5e-5)
    assert rep.lspl.fltq_um == pytest.approx(0.31427, abs=5e-6)
    assert rep.mzpl.fltt_um == pytest.approx(1.0, abs=1e-12)


def test_twist_item9_corner_planes():
    # REFERENCE.md section 10 item 9 [D]: z = k(x-500)(y-300) on 1000 x 600 mm, k*500*300 = 1 µm.
    # Plane containing diagonal SW-NE and parallel to SE-NW: SW = NE = 0, SE = NW = -2 µm; MZ = LS = 2 µm.
    X, Y = np.meshgrid(np.linspace(0, 1000, 11), np.linspace(0, 600, 7))
    x, y = X.ravel(), Y.ravel()
    z = (x - 500) * (y - 300) / (500 * 300)
    sw, se, ne, nw = corner_stations(x, y)
    a, b, c = diagonal_plane(x, y, z)
    r = z - (a + b * x + c * y)
    assert r[sw] == pytest.approx(0, abs=1e-12) and r[ne] == pytest.approx(0, abs=1e-12)
    assert r[se] == pytest.approx(-2, abs=1e-12) and r[nw] == pytest.approx(-2, abs=1e-12)
    rep = evaluate_flatness(x, y, z)
    assert rep.mzpl.fltt_um == pytest.approx(2.0, abs=1e-9)
    assert rep.lspl.fltt_um == pytest.approx(2.0, abs=1e-9)
    # three-corner plane through SW, SE, NW (NE left out): the fourth corner deviates by the twist,
    # z(NE) - z(SE) - z(NW) + z(SW) = 1 + 1 + 1 + 1 = 4 (hand arithmetic)
    a, b, c = three_corner_plane(x, y, z, omit="ne")
    assert z[ne] - (a + b * x[ne] + c * y[ne]) == pytest.approx(4.0, abs=1e-12)


def test_corner_planes_unavailable_on_triangle():
    rep = evaluate_flatness([0, 10, 0], [0, 0, 10], [0.0, 1.0, 2.0])
    assert rep.three_corner is None and rep.diagonal is None
    assert rep.mzpl.fltt_um == pytest.approx(0.0, abs=1e-12)
    with pytest.raises(GeometryError, match="corner"):
        diagonal_plane([0, 10, 0], [0, 0, 10], [0.0, 1.0, 2.0])
    with pytest.raises(InputValueError, match="corner"):
        evaluate_flatness([0, 10, 0, 10], [0, 0, 10, 10], [0.0, 1.0, 2.0, 3.0], omit_corner="middle")


def test_least_squares_matches_numpy_lstsq(rng):
    # Source: numpy.linalg.lstsq on the uncentred design matrix as an independent reference.
    x, y = rng.uniform(0, 1000, 200), rng.uniform(0, 600, 200)
    z = 5 + 0.003 * x - 0.002 * y + rng.normal(0, 1, 200)
    coef, *_ = np.linalg.lstsq(np.column_stack([np.ones(200), x, y]), z, rcond=None)
    fit = least_squares_plane(x, y, z)
    assert (fit.a_um, fit.b_um_per_mm, fit.c_um_per_mm) == pytest.approx(tuple(coef), rel=1e-9, abs=1e-9)
    r = z - np.column_stack([np.ones(200), x, y]) @ coef
    assert fit.flatness_um == pytest.approx(np.ptp(r), rel=1e-9)


# ------------------------------------------------------------- properties
_n = st.integers(4, 40)


@st.composite
def point_sets(draw):
    n = draw(_n)
    seed = draw(st.integers(0, 2**31 - 1))
    rng = np.random.default_rng(seed)
    x = rng.uniform(0, 1000, n)
    y = rng.uniform(0, 600, n)
    z = draw(arrays(np.float64, n, elements=st.floats(-20, 20, allow_nan=False, width=32)))
    return x, y, z


@given(point_sets())
def test_mz_not_above_ls(pts):
    # The LS plane is one candidate plane for the zone (REFERENCE.md section 3 [D]).
    x, y, z = pts
    assert minimum_zone(x, y, z).flatness_um <= least_squares_plane(x, y, z).flatness_um + 1e-9


@given(point_sets(), st.floats(-50, 50), st.floats(-0.05, 0.05), st.floats(-0.05, 0.05))
def test_added_plane_is_ignored(pts, a, b, c):
    x, y, z = pts
    t0 = minimum_zone(x, y, z).flatness_um
    t1 = minimum_zone(x, y, z + a + b * x + c * y).flatness_um
    assert t1 == pytest.approx(t0, abs=1e-9 * max(1.0, t0) + 1e-9)


@given(point_sets(), st.floats(-100, 100))
def test_scaling_heights_scales_flatness(pts, k):
    x, y, z = pts
    t0 = minimum_zone(x, y, z).flatness_um
    assert minimum_zone(x, y, k * z).flatness_um == pytest.approx(abs(k) * t0, rel=1e-9, abs=1e-9)


@given(point_sets(), st.randoms(use_true_random=False))
def test_point_order_is_irrelevant(pts, rnd):
    x, y, z = pts
    perm = list(range(x.size))
    rnd.shuffle(perm)
    rep0 = evaluate_flatness(x, y, z)
    rep1 = evaluate_flatness(x[perm], y[perm], z[perm])
    assert rep1.mzpl.fltt_um == pytest.approx(rep0.mzpl.fltt_um, abs=1e-9)
    assert rep1.lspl.fltq_um == pytest.approx(rep0.lspl.fltq_um, abs=1e-9)
