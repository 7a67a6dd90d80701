"""Tests of flatcheck.bearing: pad averaging, carriage motion, local flatness, clearance and verdict.

Surfaces are built from analytic functions on fine regular grids, so every expected value below is a closed
form (stated beside each check) rather than a number produced by flatcheck itself.
"""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.optimize import minimize_scalar
from scipy.special import j1

from flatcheck.bearing import (
    Carriage,
    MotionBudget,
    Pad,
    PlacedPad,
    evaluate_bearing,
    evaluate_pad_at,
    footprint,
    gap_field_um,
    station_positions,
    straightness_mz_um,
)
from flatcheck.errors import GeometryError, InputValueError
from flatcheck.form import HeightMap

ARCSEC_PER_UM_PER_MM = 1e-3 * 648000 / math.pi  # 1 µm/mm = 1e-3 rad; 1 rad = 648000/pi arcsec (exact)


def grid_surface(func, length=1000.0, width=600.0, pitch=5.0):
    x = np.arange(0.0, length + 1e-9, pitch)
    y = np.arange(0.0, width + 1e-9, pitch)
    X, Y = np.meshgrid(x, y)
    return HeightMap(X.ravel(), Y.ravel(), func(X, Y).ravel())


# ----------------------------------------------------------------------------- footprint quadrature
def test_rect_footprint_weights_integrate_polynomials_exactly():
    # Simpson's rule is exact for cubics: mean of u^2 over [-L/2, L/2] is L^2/12 (elementary integral)
    fp = footprint(Pad.rect(120, 80, 8))
    assert fp.weight.sum() == pytest.approx(1.0)
    assert np.sum(fp.weight * fp.u_mm**2) == pytest.approx(120**2 / 12, rel=1e-12)
    assert np.sum(fp.weight * fp.v_mm**2) == pytest.approx(80**2 / 12, rel=1e-12)
    assert fp.pitch_mm <= 80 / 20


def test_circle_footprint_mean_of_r_squared():
    # mean of r^2 over a disc of radius R is R^2/2 (elementary integral); the rings use equal-area radii
    fp = footprint(Pad.circle(80, 8))
    assert np.sum(fp.weight * (fp.u_mm**2 + fp.v_mm**2)) == pytest.approx(40**2 / 2, rel=1e-12)
    assert np.max(np.hypot(fp.u_mm, fp.v_mm)) == pytest.approx(40.0)  # the edge is sampled (form only)


# ----------------------------------------------------------------------------- pad averaging (analytic)
@pytest.mark.parametrize("lam_over_l, expected", [(2.0, 0.63662), (4.0, 0.90032), (10.0, 0.98363)])
def test_sine_attenuation_matches_sinc(lam_over_l, expected):
    # Exact integral: (1/L) * int_{-L/2}^{L/2} sin(k(x+u)) du = sin(kx) * sinc(L/lam), sinc(t) = sin(pi t)/(pi t).
    # The three factors are REFERENCE.md section 10 item 18 [D] and numpy's np.sinc.
    L = 60.0
    lam = lam_over_l * L
    amp = 1.0
    surf = grid_surface(lambda X, Y: amp * np.sin(2 * np.pi * X / lam), length=500, width=100, pitch=1.0)
    pad = Pad.rect(L, 40, 8)
    for x in (150.0, 150.0 + lam / 4, 233.3):
        ps = evaluate_pad_at(surf, pad, x, 50.0, method="cubic")
        exact = amp * np.sinc(1 / lam_over_l) * np.sin(2 * np.pi * x / lam)
        assert ps.mean_height_um == pytest.approx(exact, abs=2e-4)
    assert np.sinc(1 / lam_over_l) == pytest.approx(expected, abs=1e-5)


def test_carriage_path_over_sine_has_sinc_amplitude():
    # Single pad riding along x: path(x) = A sin(kx) sinc(L/lam) (exact integral above); lam/L = 4/3
    L, lam, amp = 120.0, 160.0, 1.5
    surf = grid_surface(lambda X, Y: amp * np.sin(2 * np.pi * X / lam), pitch=2.0)
    res = evaluate_bearing(surf, Carriage.single(Pad.rect(L, 80, 8), travel_start_mm=100, travel_end_mm=400))
    m = res.motion
    expected = amp * np.sinc(L / lam) * np.sin(2 * np.pi * m.x_mm / lam)
    np.testing.assert_allclose(m.path_um, expected, atol=2e-3 * amp)
    # the raw profile on the centre line is the unaveraged sine (bilinear interpolation error only)
    np.testing.assert_allclose(m.raw_profile_um, amp * np.sin(2 * np.pi * m.x_mm / lam), atol=2e-3 * amp)
    # the contract: a single pad's station height is the mean of the surface under it
    assert [s.mean_height_um for s in res.stations] == [s.pads[0].mean_height_um for s in res.stations]


def test_pad_as_long_as_the_wavelength_removes_it():
    # sinc(1) = 0: a pad exactly one wavelength long does not see the sine at all (exact integral)
    surf = grid_surface(lambda X, Y: np.sin(2 * np.pi * X / 100.0), length=600, width=200, pitch=2.0)
    res = evaluate_bearing(surf, Carriage.single(Pad.rect(100, 50, 8)))
    assert res.motion.straightness_um < 5e-3
    # the raw profile on the centre line keeps the full sine (level best line over whole periods: P-V)
    raw_expected = np.ptp(np.sin(2 * np.pi * res.motion.x_mm / 100.0))
    assert res.motion.raw_straightness_um == pytest.approx(raw_expected, abs=5e-3)
    assert raw_expected > 1.9


def test_circular_pad_mean_over_sine_is_airy_factor():
    # Mean of sin(k x) over a disc of radius R centred at x0: sin(k x0) * 2 J1(kR)/(kR)
    # (Fourier transform of the uniform disc, textbook result; scipy.special.j1 as reference).
    R, lam = 40.0, 150.0
    k = 2 * np.pi / lam
    surf = grid_surface(lambda X, Y: np.sin(k * X), length=500, width=200, pitch=1.0)
    for x0 in (120.0, 120.0 + lam / 4, 301.0):
        ps = evaluate_pad_at(surf, Pad.circle(2 * R, 8), x0, 100.0, method="cubic")
        assert ps.mean_height_um == pytest.approx(np.sin(k * x0) * 2 * j1(k * R) / (k * R), abs=5e-4)


# ----------------------------------------------------------------------------- planes and tilts
def test_plane_gives_no_motion_error_and_pitch_equals_slope():
    # A tilted plane z = a + b x + c y: straightness 0, local flatness 0, constant pitch = b and roll = c.
    # b = 0.01 µm/mm = 10 µrad = 2.06265 arcsec (REFERENCE.md section 10 item 1: 1 µrad = 0.206265 arcsec).
    b, c = 0.01, -0.004
    surf = grid_surface(lambda X, Y: 3.0 + b * X + c * Y)
    res = evaluate_bearing(surf, Carriage.single(Pad.rect(120, 80, 8), step_mm=10))
    m = res.motion
    assert m.straightness_um < 1e-9
    assert m.pitch_arcsec < 1e-9 and m.roll_arcsec < 1e-9
    np.testing.assert_allclose(m.pitch_path_arcsec, 2.06265, atol=1e-5)
    np.testing.assert_allclose(m.roll_path_arcsec, c * ARCSEC_PER_UM_PER_MM, rtol=1e-9)
    assert res.local_flatness_max_um < 1e-9
    assert res.clearance_min_um == pytest.approx(8.0, abs=1e-9)  # a plane leaves the full gap
    assert res.verdict == "fit"


def test_tandem_pads_pitch_is_height_difference_over_spacing():
    # Two pads in tandem (spacing s) on z = q x^2: each pad's mean is q((x +- s/2)^2 + L^2/12)
    # (exact integral of a parabola), so pitch = (h_front - h_rear)/s = 2 q x and the carriage height
    # is the average q(x^2 + s^2/4 + L^2/12).
    q, s, L = 2e-5, 300.0, 100.0
    surf = grid_surface(lambda X, Y: q * X**2, pitch=2.0)
    pad = Pad.rect(L, 60, 8)
    car = Carriage((PlacedPad(pad, along_mm=s / 2, name="front"), PlacedPad(pad, along_mm=-s / 2, name="rear")),
                   step_mm=10)
    res = evaluate_bearing(surf, car, method="cubic")
    x = res.motion.x_mm
    np.testing.assert_allclose(res.motion.pitch_path_arcsec, 2 * q * x * ARCSEC_PER_UM_PER_MM, rtol=1e-5)  # cubic spline end effects ~2e-6
    np.testing.assert_allclose(res.motion.path_um, q * (x**2 + s**2 / 4 + L**2 / 12), rtol=1e-5)
    for st_ in res.stations:
        front, rear = st_.pads
        assert st_.pitch_arcsec == pytest.approx(
            (front.mean_height_um - rear.mean_height_um) / s * ARCSEC_PER_UM_PER_MM, rel=1e-9
        )
    # the span of travel: every pad stays on the surface (0..1000 mm), no extrapolation
    assert x[0] == pytest.approx(s / 2 + L / 2) and x[-1] == pytest.approx(1000 - s / 2 - L / 2)


def test_three_pads_carriage_plane_passes_through_pad_means():
    # REFERENCE.md section 6 [D]: a rigid carriage on 3 pads sits exactly on the plane through the three
    # pad-averaged heights; numpy's linear solver gives that plane independently.
    surf = grid_surface(lambda X, Y: 0.5 * np.sin(X / 70.0) * np.cos(Y / 90.0) + 1e-6 * X * Y, pitch=5.0)
    pad = Pad.circle(60, 8)
    offsets = [(150.0, 0.0), (-150.0, 120.0), (-150.0, -120.0)]
    car = Carriage(tuple(PlacedPad(pad, a, c, name=f"p{i}") for i, (a, c) in enumerate(offsets)), step_mm=6)
    res = evaluate_bearing(surf, car)
    for st_ in res.stations[::7]:
        A = np.array([[1.0, a, c] for a, c in offsets])
        h = np.array([p.mean_height_um for p in st_.pads])
        z0, gx, gy = np.linalg.solve(A, h)
        assert st_.mean_height_um == pytest.approx(z0, abs=1e-9)
        assert st_.pitch_arcsec == pytest.approx(gx * ARCSEC_PER_UM_PER_MM, abs=1e-6)
        assert st_.roll_arcsec == pytest.approx(gy * ARCSEC_PER_UM_PER_MM, abs=1e-6)


def test_four_pads_equal_stiffness_is_least_squares_plane():
    # Four pads: the carriage plane is the least-squares plane through the pad means (numpy lstsq reference);
    # unequal stiffness weights it (weighted least squares with sqrt(k) rows).
    surf = grid_surface(lambda X, Y: 0.3 * np.sin(X / 50.0 + Y / 80.0), pitch=5.0)
    pad = Pad.rect(50, 50, 8)
    offsets = [(100.0, 100.0), (100.0, -100.0), (-100.0, 100.0), (-100.0, -100.0)]
    k = np.array([1.0, 2.0, 1.0, 3.0])
    car = Carriage(tuple(PlacedPad(pad, a, c, name=f"p{i}", stiffness=k[i]) for i, (a, c) in enumerate(offsets)),
                   travel_start_mm=300, travel_end_mm=400)
    res = evaluate_bearing(surf, car)
    A = np.array([[1.0, a, c] for a, c in offsets])
    for st_ in res.stations:
        h = np.array([p.mean_height_um for p in st_.pads])
        coef, *_ = np.linalg.lstsq(A * np.sqrt(k)[:, None], h * np.sqrt(k), rcond=None)
        assert st_.mean_height_um == pytest.approx(coef[0], abs=1e-9)
        assert st_.pitch_arcsec == pytest.approx(coef[1] * ARCSEC_PER_UM_PER_MM, abs=1e-6)


# ----------------------------------------------------------------------------- local features
def _bump(x0, y0, height, radius):
    def f(X, Y):
        r = np.hypot(X - x0, Y - y0)
        return np.where(r < radius, height * 0.5 * (1 + np.cos(np.pi * r / radius)), 0.0)

    return f


def test_local_bump_shows_at_the_right_stations():
    # A raised-cosine bump of radius rb at x0 on a flat plate: a pad of length L sees it exactly when
    # |x - x0| < L/2 + rb (geometry); its local minimum-zone flatness is then > 0, elsewhere 0.
    x0, rb, hb, L = 500.0, 20.0, 1.2, 100.0
    surf = grid_surface(_bump(x0, 300.0, hb, rb), pitch=5.0)
    res = evaluate_bearing(surf, Carriage.single(Pad.rect(L, 100, 8), step_mm=10))
    for st_ in res.stations:
        d = abs(st_.x_mm - x0)
        if d < L / 2 + rb - 5.0:
            assert st_.local_flatness_um > 0.05
        elif d > L / 2 + rb + 5.0:  # beyond the bump plus one grid pitch
            assert st_.local_flatness_um < 1e-12
    # when the whole bump is under the pad the minimum zone is its height (zone between z = 0 and the top)
    assert res.local_flatness_max_um == pytest.approx(hb, abs=1e-9)


@pytest.mark.parametrize("hb, verdict", [(1.0, "fit"), (1.6, "marginal"), (1.7, "marginal"), (2.0, "marginal"),
                                         (2.5, "unfit")])
def test_verdict_bands(hb, verdict):
    # Limit = 1/4 of an 8 µm gap = 2 µm; marginal from 80 % (1.6 µm) up to 100 % of it (the stated convention).
    surf = grid_surface(_bump(500.0, 300.0, hb, 20.0), pitch=5.0)
    res = evaluate_bearing(surf, Carriage.single(Pad.rect(100, 100, 8), step_mm=10, travel_start_mm=380,
                                                 travel_end_mm=620))
    assert res.limit_um == pytest.approx(2.0)
    assert res.verdict == verdict
    check = res.checks[0]
    if verdict != "fit":
        # where: an interval of positions around the bump
        lo = min(a for a, b in check.where)
        hi = max(b for a, b in check.where)
        assert lo <= 500.0 <= hi
    else:
        assert check.where == ()


def test_gap_fraction_changes_the_limit():
    surf = grid_surface(_bump(500.0, 300.0, 1.0, 20.0), pitch=5.0)
    car = Carriage.single(Pad.rect(100, 100, 5), step_mm=10, travel_start_mm=450, travel_end_mm=550)
    assert evaluate_bearing(surf, car, gap_fraction=0.1).verdict == "unfit"  # 0.5 µm limit
    assert evaluate_bearing(surf, car, gap_fraction=0.5).verdict == "fit"  # 2.5 µm limit
    with pytest.raises(InputValueError):
        evaluate_bearing(surf, car, gap_fraction=1.5)


def test_clearance_is_gap_minus_peak_above_pad_plane():
    # Flat surface with a bump entirely under the pad: the LS plane of the footprint sits at the bump's mean,
    # so clearance = gap - (hb - mean); mean of a raised-cosine bump over the square footprint is
    # hb * pi rb^2 (1/2 - 2/pi^2) / L^2: the integral of (1 + cos(pi r/rb))/2 * 2 pi r dr over [0, rb] is
    # pi rb^2/2 + pi (rb/pi)^2 (cos(pi) - 1) = pi rb^2 (1/2 - 2/pi^2) (integration by parts).
    hb, rb, L, gap = 1.0, 20.0, 100.0, 8.0
    surf = grid_surface(_bump(500.0, 300.0, hb, rb), pitch=1.0)
    ps = evaluate_pad_at(surf, Pad.rect(L, L, gap), 500.0, 300.0)
    mean_exact = hb * math.pi * rb**2 * (0.5 - 2 / math.pi**2) / L**2
    assert ps.mean_height_um == pytest.approx(mean_exact, rel=2e-3)
    assert ps.clearance_um == pytest.approx(gap - (hb - ps.mean_height_um), abs=1e-9)
    gf = gap_field_um(surf, Pad.rect(L, L, gap), 500.0, 300.0)
    assert np.nanmin(gf.gap_um) == pytest.approx(ps.clearance_um, abs=1e-9)


def test_gap_field_of_a_plane_is_the_nominal_gap_and_circle_is_masked():
    surf = grid_surface(lambda X, Y: 0.02 * X - 0.01 * Y)
    gf = gap_field_um(surf, Pad.circle(80, 6), 400.0, 300.0)
    assert np.allclose(gf.gap_um[gf.inside], 6.0, atol=1e-9)
    assert np.isnan(gf.gap_um[~gf.inside]).all() and (~gf.inside).any()
    assert gf.tilt_x_arcsec == pytest.approx(0.02 * ARCSEC_PER_UM_PER_MM)
    with pytest.raises(GeometryError):
        gap_field_um(surf, Pad.circle(80, 6), 10.0, 300.0)


def test_pad_face_map_adds_its_peak_and_is_checked():
    # A pad face with a 1 µm dome: its peak above its own LS plane is subtracted from every clearance.
    surf = grid_surface(lambda X, Y: 0.0 * X)
    u = np.linspace(-40, 40, 17)
    U, V = np.meshgrid(u, u)
    dome = 1.0 - (U**2 + V**2) / (2 * 40**2)
    face = HeightMap(U.ravel(), V.ravel(), dome.ravel())
    car = Carriage.single(Pad.rect(80, 80, 3), travel_start_mm=400, travel_end_mm=440)
    res = evaluate_bearing(surf, car, pad_face=face)
    resid_peak = dome.max() - dome.mean()  # the LS plane of a symmetric dome is level at its mean (numpy)
    assert res.clearance_min_um == pytest.approx(3.0 - resid_peak, abs=1e-9)
    assert res.pad_face.flatness_um == pytest.approx(np.ptp(dome), abs=1e-9)
    face_check = [c for c in res.checks if c.name == "pad face flatness"][0]
    assert face_check.status == "unfit"  # 1 µm > 1/4 of 3 µm
    assert res.verdict == "unfit"


# ----------------------------------------------------------------------------- travel and exclusion
def test_positions_outside_the_survey_are_excluded_not_extrapolated():
    surf = grid_surface(lambda X, Y: 0.001 * X, length=500, width=200)
    car = Carriage.single(Pad.rect(100, 50, 8), travel_start_mm=0, travel_end_mm=500, step_mm=10)
    res = evaluate_bearing(surf, car)
    xs = res.motion.x_mm
    assert xs.min() >= 50 - 1e-9 and xs.max() <= 450 + 1e-9
    excluded = [x for x, _ in res.excluded]
    assert min(excluded) == 0 and max(excluded) == 500
    assert len(excluded) + len(xs) == 51


def test_scattered_survey_hull_limits_the_travel():
    # Scattered stations (Delaunay interpolation): outside their convex hull nothing is evaluated.
    rng = np.random.default_rng(1234)
    pts = rng.uniform([0, 0], [800, 400], size=(400, 2))
    corners = np.array([[0, 0], [800, 0], [800, 400], [0, 400]])
    pts = np.vstack([pts, corners])
    surf = HeightMap(pts[:, 0], pts[:, 1], 0.001 * pts[:, 0] + 0.002 * pts[:, 1])
    res = evaluate_bearing(surf, Carriage.single(Pad.circle(60, 8)))
    # a linear surface is reproduced exactly by piecewise-linear interpolation: no motion error
    assert res.motion.straightness_um < 1e-9
    assert res.motion.pitch_path_arcsec == pytest.approx(np.full(len(res.stations), 0.001 * ARCSEC_PER_UM_PER_MM))


def test_step_rules():
    surf = grid_surface(lambda X, Y: 0.0 * X, length=500, width=200)
    xs, y, step = station_positions(surf, Carriage.single(Pad.rect(100, 50, 8)))
    assert step <= 10.0 + 1e-12 and y == pytest.approx(100.0)
    assert np.allclose(np.diff(xs), step)
    with pytest.raises(InputValueError, match="tenth"):
        station_positions(surf, Carriage.single(Pad.rect(100, 50, 8), step_mm=12))
    with pytest.raises(GeometryError):
        station_positions(surf, Carriage.single(Pad.rect(600, 50, 8)))


def test_pad_validation():
    with pytest.raises(InputValueError):
        Pad.rect(100, 50, -2)
    with pytest.raises(InputValueError):
        Pad.rect(0, 50, 8)
    with pytest.raises(InputValueError):
        Pad("hexagon", 10, 10, 8)
    with pytest.raises(InputValueError):
        Pad.rect(100, 50, 8, kind="magnetic")


# ----------------------------------------------------------------------------- motion budget
def test_motion_budget_checks_pitch():
    surf = grid_surface(lambda X, Y: 0.5 * np.sin(2 * np.pi * X / 400.0), pitch=5.0)
    car = Carriage.single(Pad.rect(100, 80, 8), step_mm=10)
    res = evaluate_bearing(surf, car, budget=MotionBudget(pitch_arcsec=1.0, straightness_um=100.0))
    checks = {c.name: c for c in res.checks}
    assert checks["carriage pitch"].status == "unfit"
    assert checks["carriage straightness"].status == "fit"
    # A single pad pitches with the least-squares slope of its footprint. For A sin(k(x+u)), u in [-L/2, L/2]:
    # slope = int u z du / int u^2 du = A cos(kx) * 24 (sin(kL/2)/k^2 - (L/2) cos(kL/2)/k) / L^3
    # (exact integral by parts), so the pitch P-V is twice that amplitude.
    A, k, L = 0.5, 2 * np.pi / 400.0, 100.0
    slope = A * 24 * (np.sin(k * L / 2) / k**2 - (L / 2) * np.cos(k * L / 2) / k) / L**3
    assert res.motion.pitch_arcsec == pytest.approx(2 * slope * ARCSEC_PER_UM_PER_MM, rel=2e-3)
    assert res.verdict == "unfit"


# ----------------------------------------------------------------------------- straightness
def test_straightness_matches_brute_force_minimum(rng):
    # Minimum-zone straightness = min over slopes of the peak-to-valley of the residual (a convex 1-D
    # problem); scipy's bounded scalar minimiser gives the reference.
    x = np.sort(rng.uniform(0, 500, 40))
    z = 0.004 * x + rng.normal(0, 0.3, x.size)
    ref = minimize_scalar(lambda b: np.ptp(z - b * x), bounds=(-0.1, 0.1), method="bounded",
                          options={"xatol": 1e-12}).fun
    assert straightness_mz_um(x, z) == pytest.approx(ref, abs=1e-6)


def test_straightness_of_a_parabola():
    # z = x^2 on [-1, 1]: the best line is level (symmetry), the zone is max - min = 1 (hand calculation)
    x = np.linspace(-1, 1, 201)
    assert straightness_mz_um(x, x**2) == pytest.approx(1.0, abs=1e-12)


@settings(max_examples=12)
@given(a=st.floats(-50, 50), b=st.floats(-0.05, 0.05), c=st.floats(-0.05, 0.05))
def test_added_plane_changes_only_attitude(a, b, c):
    # Adding a plane a + b x + c y: local flatness, clearance and straightness unchanged; pitch/roll shift by b, c.
    base = grid_surface(_bump(200.0, 100.0, 0.8, 25.0), length=400, width=200, pitch=5.0)
    tilted = base.with_heights(base.height_um + a + b * base.x_mm + c * base.y_mm)
    car = Carriage.single(Pad.rect(60, 40, 8), step_mm=6, travel_start_mm=150, travel_end_mm=250)
    r0 = evaluate_bearing(base, car)
    r1 = evaluate_bearing(tilted, car)
    assert r1.local_flatness_max_um == pytest.approx(r0.local_flatness_max_um, abs=1e-6)
    assert r1.clearance_min_um == pytest.approx(r0.clearance_min_um, abs=1e-6)
    assert r1.motion.straightness_um == pytest.approx(r0.motion.straightness_um, abs=1e-6)
    np.testing.assert_allclose(
        r1.motion.pitch_path_arcsec - r0.motion.pitch_path_arcsec, b * ARCSEC_PER_UM_PER_MM, atol=1e-6
    )
    np.testing.assert_allclose(
        r1.motion.roll_path_arcsec - r0.motion.roll_path_arcsec, c * ARCSEC_PER_UM_PER_MM, atol=1e-6
    )


# ----------------------------------------------------------------------------- warnings about the input
def test_surface_longer_across_than_along_x_is_warned():
    # the single-pad carriage rides along x (pinned contract); a map 300 x 600 mm probably runs along y
    along_y = evaluate_bearing(grid_surface(lambda X, Y: 0 * X, 300.0, 600.0, 10.0), Carriage.single(Pad.rect(60, 40, 8)))
    assert [s.y_mm for s in along_y.stations][0] == pytest.approx(300.0)  # still x travel, centred across
    assert any("longer across" in w and "600 mm" in w for w in along_y.warnings)
    along_x = evaluate_bearing(grid_surface(lambda X, Y: 0 * X, 600.0, 300.0, 10.0), Carriage.single(Pad.rect(60, 40, 8)))
    assert not any("longer across" in w for w in along_x.warnings)


@pytest.mark.parametrize(
    "pitch_x, pitch_y, coarse",
    [(10.0, 10.0, False), (30.0, 10.0, False), (40.0, 10.0, True), (10.0, 25.0, True), (10.0, 20.0, False)],
)
def test_coarse_survey_under_the_pad_is_warned(pitch_x, pitch_y, coarse):
    # a 60 x 40 mm pad: stations more than 30 mm apart along or 20 mm across leave the footprint to interpolation
    x = np.arange(0.0, 600.0 + 1e-9, pitch_x)
    y = np.arange(0.0, 300.0 + 1e-9, pitch_y)
    X, Y = np.meshgrid(x, y)
    surf = HeightMap(X.ravel(), Y.ravel(), np.sin(X.ravel() / 50.0))
    res = evaluate_bearing(surf, Carriage.single(Pad.rect(60, 40, 8)))
    assert any("interpolation between stations" in w for w in res.warnings) == coarse


def test_survey_spacing_sees_the_lines_under_the_pad_only():
    from flatcheck.bearing import survey_spacing_mm

    # three survey lines at y = 40, 100, 160 with stations 100 mm apart; dense line at y = 10 away from the pad
    xs = np.concatenate([np.arange(0, 1001, 100.0)] * 3 + [np.arange(0, 1001, 5.0)])
    ys = np.concatenate([np.full(11, 40.0), np.full(11, 100.0), np.full(11, 160.0), np.full(201, 10.0)])
    surf = HeightMap(xs, ys, np.zeros(xs.size))
    along, across = survey_spacing_mm(surf, PlacedPad(Pad.rect(120, 80, 8)), 100.0, 900.0, 100.0)
    assert (along, across) == (100.0, 60.0)


def test_pad_face_map_of_another_size_is_warned():
    surf = grid_surface(lambda X, Y: 0 * X, 600.0, 300.0, 10.0)
    # a face surveyed on a 5 mm grid inset half a cell from the edges represents 80 x 80 mm
    g = np.arange(2.5, 80.0, 5.0)
    X, Y = np.meshgrid(g, g)
    face = HeightMap(X.ravel(), Y.ravel(), 0.01 * X.ravel())
    ok = evaluate_bearing(surf, Carriage.single(Pad.rect(80, 80, 8)), pad_face=face)
    assert not any("pad-face map" in w for w in ok.warnings)
    for size in ((100, 80), (80, 60)):  # the map is 20 % smaller / 33 % larger than the pad
        res = evaluate_bearing(surf, Carriage.single(Pad.rect(*size, 8)), pad_face=face)
        assert any("pad-face map covers 80 x 80 mm" in w for w in res.warnings)


def test_carriage_errors_name_the_carriage_field():
    # the command maps these fields to the option or file field the value came from
    surf = grid_surface(lambda X, Y: 0.0 * X, length=500, width=200)
    cases = (
        (Carriage.single(Pad.rect(100, 50, 8), step_mm=12), "step_mm"),
        (Carriage.single(Pad.rect(100, 50, 8), travel_start_mm=300, travel_end_mm=100), "travel_start_mm/travel_end_mm"),
        (Carriage((PlacedPad(Pad.rect(100, 50, 8), face="side"),), face="top"), "face"),
    )
    for carriage, field in cases:
        with pytest.raises((InputValueError, GeometryError)) as exc:
            station_positions(surf, carriage)
        assert exc.value.where == field
    # a start beyond the default end says so, and what travel fits
    with pytest.raises(InputValueError, match="beyond its last position") as exc:
        station_positions(surf, Carriage.single(Pad.rect(100, 50, 8), travel_start_mm=900))
    assert "50 to 450 mm" in exc.value.fix


# ---------------------------------------------------------------- issue 15, item 5: what a pad layout determines
def _tilted_guideway():
    """A 1000 x 300 mm surface that rises across (y) by 0.3 µm/100 mm more and more along x: a twist.

    Analytic: z = 1e-6 x y (µm, x and y in mm), so the cross slope at x is dz/dy = 1e-6 x µm/mm.
    """
    x, y = np.meshgrid(np.linspace(0, 1000, 51), np.linspace(0, 300, 16))
    return HeightMap(x.ravel(), y.ravel(), (1e-6 * x * y).ravel())


def test_two_pads_in_line_along_the_travel_do_not_determine_roll():
    hm = _tilted_guideway()
    pad = Pad("rect", 120, 80, 8.0)
    inline = Carriage((PlacedPad(pad, along_mm=150, name="front"), PlacedPad(pad, along_mm=-150, name="rear")))
    r = evaluate_bearing(hm, inline, budget=MotionBudget(roll_arcsec=1.0))
    # Two pads on one line along x, each free to pivot in its film: nothing holds the carriage about that line
    # (a rigid body on two points has a free rotation about the line through them; statics, no single source)
    assert r.motion.roll_determined is False and r.motion.pitch_determined is True
    assert math.isnan(r.motion.roll_arcsec) and np.isnan(r.motion.roll_path_arcsec).all()
    assert all(c.name != "carriage roll" for c in r.checks)  # no budget check on a figure that is not there
    assert any("Roll is not determined" in n and "roll budget is not checked" in n for n in r.notes)
    assert math.isfinite(r.motion.pitch_arcsec)


def test_four_pads_determine_roll_from_the_surface_and_two_diagonal_pads_do_not():
    hm = _tilted_guideway()
    pad = Pad("rect", 60, 40, 8.0)
    diagonal = Carriage((PlacedPad(pad, along_mm=100, across_mm=60, name="a"),
                         PlacedPad(pad, along_mm=-100, across_mm=-60, name="b")))
    r = evaluate_bearing(hm, diagonal)  # a rotation about the line through the two pads is free: both angles
    assert r.motion.roll_determined is False and r.motion.pitch_determined is False
    wide = Carriage(tuple(PlacedPad(pad, along_mm=a, across_mm=c, name=f"{a},{c}")
                          for a in (-100, 100) for c in (-60, 60)))
    r = evaluate_bearing(hm, wide)
    assert r.motion.roll_determined is True and not any("not determined" in n for n in r.notes)
    # Analytic: z = 1e-6 x y is bilinear, so the mean under each rectangular pad is its value at the pad centre,
    # and the least-squares plane through (X +- 100, Y +- 60) has the cross slope 1e-6 X µm/mm (the mean of the
    # two x). Roll in arcsec = slope (µm/mm = mrad) x 206.265 arcsec/mrad (1 rad = 648000/pi arcsec, exact).
    m = r.motion
    assert m.roll_path_arcsec == pytest.approx(1e-6 * m.x_mm * 206.264806, rel=1e-6, abs=1e-9)


def test_a_bottom_face_carriage_says_which_face_the_surface_must_be():
    hm = _tilted_guideway()
    pad = Pad("rect", 60, 40, 8.0)
    c = Carriage((PlacedPad(pad, along_mm=100, face="bottom", name="a"),
                  PlacedPad(pad, along_mm=-100, face="bottom", name="b")), face="bottom")
    r = evaluate_bearing(hm, c)
    assert any("face 'bottom'" in n and "top face" in n for n in r.notes)
