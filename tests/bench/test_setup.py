"""Tests of the set-up sheet, beam supports and the sag check (flatcheck.bench._setup, _sag)."""

import math

import numpy as np
import pytest

import flatcheck
from flatcheck.bench import (
    AIRY_SPACING_RATIO,
    BESSEL_SPACING_RATIO,
    Pace,
    airy_points,
    beam_self_weight_deflection_um,
    beam_supports,
    bessel_points,
    check_sag,
    least_bow_points,
    setup_sheet,
    three_point_support,
)
from flatcheck.errors import InputValueError


def _slope(x_mm, a_mm, L_mm=1000.0):
    """Slope of the self-weight deflection (µm per mm) by central differences."""
    h = 1e-3
    y = beam_self_weight_deflection_um([x_mm - h, x_mm + h], L_mm, 100.0, a_mm)
    return (y[1] - y[0]) / (2 * h)


# ---------------------------------------------------------------------------
# beam supports against their closed forms


def test_airy_points_closed_form():
    # REFERENCE.md section 11 (from memory): Airy points L/sqrt(3) = 0.5774 L apart
    assert AIRY_SPACING_RATIO == pytest.approx(0.5774, abs=5e-5)
    a, s = airy_points(1000.0)
    assert s == pytest.approx(1000.0 / math.sqrt(3.0), rel=1e-15) and a == pytest.approx((1000.0 - s) / 2, rel=1e-15)
    # beam theory (Euler-Bernoulli, the deflection below): on Airy points the end faces stay vertical,
    # i.e. the slope at the free end is zero; anywhere else it is not
    assert abs(_slope(1e-3, a) * 1e3) < 1e-6
    assert abs(_slope(1e-3, a + 20.0)) > 1e-4


def test_bessel_points_closed_form_and_beam_theory():
    # REFERENCE.md section 11 (from memory): Bessel points 0.5594 L apart
    assert BESSEL_SPACING_RATIO == 0.5594
    a, s = bessel_points(1000.0)
    assert s == pytest.approx(559.4) and a == pytest.approx(220.3)
    # derived check: the Bessel points minimise the shortening of the neutral axis, (1/2) int y'^2 dx;
    # compute it from the deflection for supports around them and find the minimum (parabola through 3 points)
    x = np.linspace(0.0, 1000.0, 20001)

    def shortening(a_mm):
        y = beam_self_weight_deflection_um(x, 1000.0, 100.0, a_mm)
        dy = np.gradient(y, x)
        return np.trapezoid(dy**2, x)

    grid = np.linspace(210.0, 230.0, 41)
    vals = np.array([shortening(g) for g in grid])
    k = int(np.argmin(vals))
    p = np.polyfit(grid[k - 2:k + 3], vals[k - 2:k + 3], 2)
    best = -p[1] / (2 * p[0])
    assert (1000.0 - 2 * best) / 1000.0 == pytest.approx(0.5594, abs=2e-4)


def test_least_bow_supports_beat_their_neighbours():
    # derived: the least peak-to-valley self-weight bow; REFERENCE.md section 9 says "about 0.2 L in"
    a, s = least_bow_points(1000.0)
    assert 200.0 < a < 240.0 and s == pytest.approx(1000.0 - 2 * a)
    x = np.linspace(0.0, 1000.0, 4001)

    def pv(a_mm):
        y = beam_self_weight_deflection_um(x, 1000.0, 150.0, a_mm)
        return y.max() - y.min()

    assert pv(a) < pv(a - 3.0) and pv(a) < pv(a + 3.0)
    b = beam_supports(1000.0)
    assert (b.airy_from_end_mm, b.bessel_from_end_mm, b.least_bow_from_end_mm) == pytest.approx(
        (airy_points(1000.0)[0], bessel_points(1000.0)[0], a))
    assert any("from memory" in s for s in b.sources)


def test_self_weight_sag_check_values():
    # REFERENCE.md section 10, check value 21: end-supported beam, rho 2700, E 50 GPa, L 1 m, t 0.15 m -> 3.679 µm
    # (5 rho g L^4 / (32 E t^2) with g = 9.81; flatcheck uses standard gravity 9.80665, 0.04 % less)
    y = beam_self_weight_deflection_um(np.linspace(0, 1000, 1001), 1000.0, 150.0, 0.0)
    assert -y[500] == pytest.approx(3.679, rel=1e-3)
    assert y[0] == pytest.approx(0.0, abs=1e-12) and y[1000] == pytest.approx(0.0, abs=1e-12)
    assert -y[500] == pytest.approx(5 * 2700 * 9.80665 * 1.0 / (32 * 50e9 * 0.15**2) * 1e6, rel=1e-12)
    # same check value: supports at 0.2 L -> peak-to-valley 0.34 µm
    y = beam_self_weight_deflection_um(np.linspace(0, 1000, 1001), 1000.0, 150.0, 200.0)
    assert y.max() - y.min() == pytest.approx(0.34, abs=0.005)


def test_supports_off_the_beam_are_refused():
    with pytest.raises(InputValueError):
        beam_self_weight_deflection_um([0.0], 1000.0, 150.0, 600.0)
    with pytest.raises(InputValueError):
        beam_self_weight_deflection_um([0.0], 1000.0, -1.0, 100.0)


def test_three_point_support():
    # common practice, no single source: a fifth of the length and width in from the edges
    pts = three_point_support(1000.0, 630.0)
    assert pts == ((200.0, 126.0), (200.0, 504.0), (800.0, 315.0))


# ---------------------------------------------------------------------------
# the sheet


def _plan(length=1000.0, width=630.0, kind="autocollimator", unit="arcsec"):
    return flatcheck.plan_union_jack(length, width, 100.0, instrument=flatcheck.Instrument(kind, unit))


def test_sheet_follows_the_files_order_and_places_the_autocollimator():
    sheet = setup_sheet(_plan(), standoff_mm=150.0)
    assert [x.line for x in sheet.lines] == ["SW-NE", "SE-NW", "SW-SE", "NW-NE", "SW-NW", "SE-NE", "W-E", "S-N"]
    sw_se = sheet.lines[2]
    assert sw_se.heading == "west -> east" and sw_se.runs == ("forward", "reverse")
    # SW is at (100, 115): 150 mm behind it, on the line's extension, is x = -50: off the plate
    assert sw_se.instrument_mm == pytest.approx((-50.0, 115.0)) and sw_se.on_surface is False
    # nearest and farthest mirror centres: 150 + 50 and 150 + 800 - 50 mm
    assert sw_se.distance_mm == pytest.approx((200.0, 900.0))
    assert sheet.lines[0].heading == "south-west -> north-east"
    assert sheet.readings == 2 * 52


def test_time_estimate_is_the_stated_pace():
    pace = Pace(seconds_per_reading=30.0, minutes_per_line=5.0, minutes_per_extra_run=2.0)
    sheet = setup_sheet(_plan(), pace=pace)
    # by hand: 104 readings x 0.5 min + 8 lines x 5 min + 8 turns x 2 min = 52 + 40 + 16 = 108 min
    assert sheet.minutes == pytest.approx(108.0)
    one_way = setup_sheet(_plan(), runs=("forward",), pace=pace)
    assert one_way.minutes == pytest.approx(26.0 + 40.0)


def test_thermal_bow_and_mass():
    sheet = setup_sheet(_plan(), thickness_mm=150.0)
    # REFERENCE.md check value 19: alpha 6e-6/K, dT 0.5 K, t 150 mm, L 1000 mm -> 2.50 µm; per 0.1 K a fifth
    assert sheet.thermal_bow_um_per_0p1k == pytest.approx(2.50 / 5, rel=1e-12)
    # check value 20: 1000 x 630 x 150 mm -> 245.7 kg at 2600 and 264.6 kg at 2800 kg/m^3
    assert sheet.mass_kg == pytest.approx((245.7, 264.6), rel=1e-4)
    assert sheet.beam is None  # 1000 x 630 is a plate, not a beam
    assert any("common practice, no single source" in n for n in sheet.notes)


def test_long_narrow_surface_gets_beam_supports_and_a_level_instruction():
    sheet = setup_sheet(flatcheck.plan_grid(2000.0, 300.0, 100.0, instrument=flatcheck.Instrument("level", "um/m")))
    assert sheet.beam is not None and sheet.beam.length_mm == 2000.0
    assert sheet.lines[0].instrument_mm is None and "level" in sheet.lines[0].instruction


def test_bad_inputs_are_refused():
    with pytest.raises(InputValueError):
        setup_sheet(_plan(), runs=("sideways",))
    with pytest.raises(InputValueError):
        setup_sheet(_plan(), standoff_mm=-1.0)
    with pytest.raises(InputValueError):
        setup_sheet(_plan(), thickness_mm=0.0)


# ---------------------------------------------------------------------------
# sag between supports


def _beam_map(shape, length=1500.0, width=150.0):
    x, y = np.meshgrid(np.linspace(50, length - 50, 15), np.linspace(25, width - 25, 3))
    x, y = x.ravel(), y.ravel()
    return x, y, shape(x, y)


def test_a_beam_sagging_on_end_supports_is_flagged():
    # a granite beam 1500 x 150 mm, 100 mm deep, on supports 30 mm from its ends, plus a small tilt
    def shape(x, y):
        return beam_self_weight_deflection_um(x, 1500.0, 100.0, 30.0) + 1e-3 * x - 2e-3 * y

    x, y, h = _beam_map(shape)
    res = check_sag(x, y, h, length_mm=1500.0, width_mm=150.0, thickness_mm=100.0, support_from_end_mm=30.0)
    assert res.flagged and res.long_narrow and res.axis == "x"
    assert res.middle_minus_ends_um < 0 and res.symmetric_share > 0.99
    assert "check the supports" in res.message and "Airy" in res.message
    # the expected sag on those supports is the beam's own: middle minus ends
    yy = beam_self_weight_deflection_um([0.0, 750.0], 1500.0, 100.0, 30.0)
    assert res.expected_sag_um == pytest.approx(yy[1] - yy[0])


def test_plates_twists_and_flat_beams_are_not_flagged():
    def bow(x, y):
        return 2e-6 * (x - 750.0) ** 2

    x, y, h = _beam_map(bow, length=1500.0, width=1000.0)
    assert not check_sag(x, y, h, length_mm=1500.0, width_mm=1000.0).flagged  # a plate: aspect 1.5
    x, y, h = _beam_map(lambda x, y: 1e-4 * (x - 750.0) * (y - 75.0))
    assert not check_sag(x, y, h, length_mm=1500.0, width_mm=150.0).flagged  # a twist, not a bow
    x, y, h = _beam_map(lambda x, y: 1e-9 * (x - 750.0) ** 3)
    assert not check_sag(x, y, h, length_mm=1500.0, width_mm=150.0).flagged  # an S-shape
    x, y, h = _beam_map(lambda x, y: 0.0 * x)
    assert not check_sag(x, y, h, length_mm=1500.0, width_mm=150.0).flagged  # flat
