"""Tests of session-to-session progress (flatcheck.lapping: match_nodes, compare_surveys): change map, removed volume, rate and sessions."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from flatcheck.errors import InputValueError
from flatcheck.form import HeightMap
from flatcheck.lapping import LapModel
from flatcheck.lapping import DwellLog, compare_surveys, match_nodes


def _before(rng, step=25.0):
    x, y = np.meshgrid(np.arange(0, 600 + 1e-9, step), np.arange(0, 400 + 1e-9, step))
    x, y = x.ravel(), y.ravel()
    z = 1.5 * np.exp(-((x - 200) ** 2 + (y - 250) ** 2) / (2 * 90.0**2)) + rng.normal(0, 0.05, x.size)
    return HeightMap(x, y, z)


def _session(before, lap, log, plane=(3.0, 0.004, -0.002), order=None):
    """After survey: known removal rate x minutes under the footprint, plus another height reference."""
    x, y = before.x_mm, before.y_mm
    under = lap.covers(x[:, None] - log.x_mm[None, :], y[:, None] - log.y_mm[None, :])
    removed = lap.rate_um * (under.astype(float) @ log.minutes)
    a, b, c = plane
    z = before.height_um - removed + a + b * x + c * y
    if order is None:
        order = np.arange(x.size)
    return HeightMap(x[order], y[order], z[order]), removed


def test_known_removal_and_rate_come_back(rng):
    before = _before(rng)
    lap = LapModel("round", diameter_mm=120.0, rate_um=0.15)
    log = DwellLog([200.0, 250.0], [250.0, 225.0], [4.0, 2.0])
    order = rng.permutation(before.n)  # node order of the after file differs
    after, removed_true = _session(before, lap, log, order=order)
    pr = compare_surveys(before, after, lap=lap, log=log)
    # the untouched nodes read zero, so the least consistent removal is the true one
    assert pr.removed_um == pytest.approx(removed_true, abs=1e-9)
    # reference volume: numpy's trapezoid rule on the grid (µm * mm^2 -> 1e-3 mm^3)
    xs, ys = np.unique(before.x_mm), np.unique(before.y_mm)
    grid = removed_true.reshape(ys.size, xs.size)
    vol_ref = np.trapezoid(np.trapezoid(grid, xs, axis=1), ys) / 1000.0
    assert pr.removed_volume_mm3 == pytest.approx(vol_ref, rel=1e-9)
    # the logged dwell gives the rate back exactly (least squares on noise-free change)
    assert pr.rate_um_per_min == pytest.approx(0.15, rel=1e-9)
    assert pr.rate_fit_rms_um == pytest.approx(0.0, abs=1e-9)
    assert pr.dwell_min == 6.0
    assert pr.volume_rate_mm3_per_min == pytest.approx(vol_ref / 6.0)
    assert pr.max_removed_um == pytest.approx(removed_true.max())


def test_total_dwell_rate_is_volume_over_area_and_time(rng):
    before = _before(rng)
    lap = LapModel("rect", length_mm=100.0, width_mm=100.0, rate_um=0.1)
    log = DwellLog([300.0], [200.0], [5.0])
    after, removed_true = _session(before, lap, log)
    pr = compare_surveys(before, after, dwell_min=5.0, lap=lap)
    # rate = V / (A t); the volume of a 100 mm square footprint sampled on a 25 mm grid (nodes inside
    # +-50 mm, trapezoid rule) is (100 + 25)^2 mm^2 x depth: hand calculation
    depth = 0.1 * 5.0
    assert pr.removed_volume_mm3 == pytest.approx(125.0**2 * depth / 1000.0, rel=1e-9)
    assert pr.rate_um_per_min == pytest.approx(0.1 * 125.0**2 / 100.0**2, rel=1e-9)


@given(a=st.floats(-20, 20), b=st.floats(-0.02, 0.02), c=st.floats(-0.02, 0.02))
@settings(max_examples=20)
def test_relative_plane_is_removed(a, b, c):
    rng = np.random.default_rng(3)
    before = _before(rng, step=50.0)
    lap = LapModel("round", diameter_mm=150.0, rate_um=0.2)
    log = DwellLog([200.0], [250.0], [3.0])
    after, _ = _session(before, lap, log, plane=(a, b, c))
    pr = compare_surveys(before, after)
    ref = compare_surveys(before, _session(before, lap, log, plane=(0, 0, 0))[0])
    assert pr.change_um == pytest.approx(ref.change_um, abs=1e-8)
    assert pr.removed_volume_mm3 == pytest.approx(ref.removed_volume_mm3, rel=1e-7, abs=1e-9)
    # the change map has no plane left: its least-squares plane (numpy lstsq as reference) is zero
    A = np.column_stack([np.ones(before.n), before.x_mm, before.y_mm])
    coef, *_ = np.linalg.lstsq(A, pr.change_um, rcond=None)
    assert coef == pytest.approx(np.zeros(3), abs=1e-9)


def _centre_bump_lapped():
    """3 x 3 grid at 100 mm, centre 1 µm high before and 0.8 µm after one session (the rest untouched)."""
    x, y = np.meshgrid([0.0, 100.0, 200.0], [0.0, 100.0, 200.0])
    x, y = x.ravel(), y.ravel()
    zb = np.zeros(9)
    zb[4] = 1.0
    za = zb.copy()
    za[4] = 0.8
    return HeightMap(x, y, zb), HeightMap(x, y, za)


def test_sessions_to_target_hand_calculation():
    # 3 x 3 grid, centre 1 µm high (REFERENCE section 10 item 8 surface). The session lowers the centre by
    # 0.2 µm, leaving 0.8 µm; reaching 0.3 µm needs 0.5 µm more at the centre: ceil(0.5 / 0.2) = 3 sessions.
    before, after = _centre_bump_lapped()
    pr = compare_surveys(before, after, target_um=0.3)
    assert pr.removed_um[4] == pytest.approx(0.2)
    assert pr.flatness_before_um == pytest.approx(1.0) and pr.flatness_after_um == pytest.approx(0.8)
    assert pr.sessions_to_target == 3
    assert compare_surveys(before, after, target_um=0.9).sessions_to_target == 0


def test_unmatched_node_is_named(rng):
    before = _before(rng, step=100.0)
    x = before.x_mm.copy()
    x[7] += 2.0
    after = HeightMap(x, before.y_mm, before.height_um)
    with pytest.raises(InputValueError, match=r"point 8 at \(0, 100\) mm"):
        match_nodes(before, after)
    # within a wider tolerance they match
    assert (match_nodes(before, after, tol_mm=3.0) == np.arange(before.n)).all()
    fewer = HeightMap(before.x_mm[1:], before.y_mm[1:], before.height_um[1:])
    with pytest.raises(InputValueError, match="point 1 at"):
        compare_surveys(before, fewer)
    with pytest.raises(InputValueError, match="after-survey"):
        compare_surveys(fewer, before)


def test_bad_options(rng):
    before = _before(rng, step=100.0)
    with pytest.raises(InputValueError):
        compare_surveys(before, before, dwell_min=-1.0)
    with pytest.raises(InputValueError):
        compare_surveys(before, before, log=DwellLog([0.0], [0.0], [1.0]))  # log without a lap
    with pytest.raises(InputValueError):
        DwellLog([0.0], [0.0], [-1.0])


def test_sessions_left_are_stated_unrounded_with_minutes():
    # Hand calculation on the 3 x 3 grid above: the session lowers the centre 1 -> 0.8 µm in 10 min. A target of
    # 0.79 µm needs 0.01 µm more at the centre: 0.01 / 0.2 = 1/20 of the session (not "1 more session"), and at
    # the session's volume rate 10 min x 1/20 = 0.5 min (volume ratio = depth ratio: the same single node).
    before, after = _centre_bump_lapped()
    pr = compare_surveys(before, after, target_um=0.79, dwell_min=10.0)
    assert pr.sessions_fraction == pytest.approx(0.05, rel=1e-6)
    assert pr.minutes_to_target == pytest.approx(0.5, rel=1e-6)
    assert pr.sessions_to_target == 1  # the rounded-up figure is kept for scripts
    met = compare_surveys(before, after, target_um=0.9, dwell_min=10.0)
    assert met.sessions_fraction == 0.0 and met.minutes_to_target == 0.0
    assert compare_surveys(before, after, target_um=0.79).minutes_to_target is None
