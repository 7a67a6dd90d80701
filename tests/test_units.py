"""Exact unit conversions (units.py)."""

import math

import numpy as np
import pytest

from flatcheck.errors import UnitError
from flatcheck.units import ARCSEC_TO_RAD, UM_PER_UIN, angle_unit, length_unit, rise_um, um_to


def test_arcsec_definition():
    # Source: definition of the second of arc, 1" = pi / (180 * 3600) rad = pi/648000 rad
    assert ARCSEC_TO_RAD == pytest.approx(math.pi / 648000, rel=1e-15)
    # REFERENCE check value 1: 1 arcsec -> 4.848137e-6 rad; 1 µrad -> 0.206265 arcsec
    assert ARCSEC_TO_RAD == pytest.approx(4.848137e-6, rel=1e-7)
    assert 1e-6 / ARCSEC_TO_RAD == pytest.approx(0.206265, rel=1e-6)


def test_autocollimator_rise_over_100_mm():
    # Source: rise = base x tan(angle); 1 arcsec over 100 mm = 100e3 µm x tan(4.8481e-6) = 0.48481 µm
    assert float(rise_um(1.0, 100.0, angle_unit("arcsec"))) == pytest.approx(0.484814, abs=1e-6)


def test_inch_base():
    # Source: 1 in = 25.4 mm exactly (1959 agreement); 1 arcsec over 4 in = 19.3925 µin
    r = float(rise_um(1.0, 4 * 25.4, angle_unit("arcsec")))
    assert r / UM_PER_UIN == pytest.approx(19.3925, abs=1e-4)


@pytest.mark.parametrize(
    "reading, unit, base_mm, expected_um",
    [
        # Source: definition of slope units: 1 µm/m over 100 mm = 0.1 µm
        (1.0, "um/m", 100.0, 0.1),
        (1.0, "urad", 100.0, 0.1),  # tan(1e-6) = 1e-6 to 3e-19
        # REFERENCE check value 3: 0.01 mm/m over 200 mm = 2.000 µm; 5 µm/m over 150 mm = 0.750 µm
        (0.01, "mm/m", 200.0, 2.0),
        (5.0, "um/m", 150.0, 0.75),
        # 1 µin/in is a slope of 1e-6 (definition)
        (3.0, "uin/in", 250.0, 0.75),
    ],
)
def test_slope_units(reading, unit, base_mm, expected_um):
    assert float(rise_um(reading, base_mm, angle_unit(unit))) == pytest.approx(expected_um, rel=1e-12)


def test_tan_not_small_angle():
    # Exact conversion uses tan: 3600 arcsec (1 degree) over 100 mm = 100e3 * tan(pi/180) µm (numpy reference)
    assert float(rise_um(3600.0, 100.0, angle_unit("arcsec"))) == pytest.approx(1e5 * np.tan(np.pi / 180), rel=1e-14)


def test_aliases_and_errors():
    assert angle_unit("µrad").name == "urad"
    assert angle_unit("ARCSEC").name == "arcsec"
    assert length_unit("µin").factor_um == pytest.approx(0.0254)
    with pytest.raises(UnitError, match="unknown angle unit 'degrees'.*use one of"):
        angle_unit("degrees")
    with pytest.raises(UnitError, match="unknown length unit"):
        length_unit("furlong")


def test_display_units():
    assert um_to(0.0254, "in") == pytest.approx(1.0)
    assert um_to(2.0, "um") == 2.0
    with pytest.raises(UnitError):
        um_to(1.0, "ft")


def test_format_height_digits_in_each_system():
    # 1 in = 25.4 mm exactly (international inch, 1959), so 1 µin = 0.0254 µm: 2.54 µm = 100.0 µin
    from flatcheck.units import format_height

    assert format_height(2.54, "um") == "2.540 µm"
    assert format_height(2.54, "in") == "100.0 µin"
    assert format_height(2.54, "in", unit=False) == "100.0"


def test_format_length_in_each_system():
    # 1 in = 25.4 mm exactly (international inch, 1959): 254 mm = 10.00 in
    from flatcheck.units import format_length

    assert format_length(254.0, "um") == "254 mm"
    assert format_length(254.0, "in") == "10.00 in"
    assert format_length(254.0, "in", unit=False) == "10.00"


@pytest.mark.parametrize(
    "step_um, units, decimals",
    [
        # an autocollimator read to 0.05 arcsec over 100 mm: 100 mm x tan(0.05") = 0.0242 µm (hand calculation),
        # nearest decade 0.01 µm; in µin 0.954 µin, nearest decade 1 µin
        (100e3 * math.tan(math.radians(0.05 / 3600)), "um", 2),
        (100e3 * math.tan(math.radians(0.05 / 3600)), "in", 0),
        # 0.01 arcsec over 100 mm = 0.00485 µm: log10 = -2.31, nearer -2 than -3, so still 0.01 µm;
        # 0.01 arcsec over 50 mm = 0.00242 µm: log10 = -2.62, so 0.001 µm
        (100e3 * math.tan(math.radians(0.01 / 3600)), "um", 2),
        (50e3 * math.tan(math.radians(0.01 / 3600)), "um", 3),
        # an indicator read to 0.1 µm: 0.1 µm; a level to 1 µm/m over 500 mm = 0.5 µm (log10 = -0.30): 1 µm
        (0.1, "um", 1),
        (0.5, "um", 0),
        # the bounds: never finer than 1 nm or 0.1 µin, never coarser than 1 µm or 1 µin
        (1e-6, "um", 3),
        (1e-6, "in", 1),
        (50.0, "um", 0),
        (None, "um", 3),
        (float("nan"), "in", 1),
    ],
)
def test_height_decimals_nearest_decade_of_the_step(step_um, units, decimals):
    from flatcheck.units import height_decimals

    assert height_decimals(step_um, units) == decimals


def test_format_height_to_the_step_and_limits_as_stated():
    from flatcheck.units import format_height, format_limit

    step = 100e3 * math.tan(math.radians(0.05 / 3600))  # 0.0242 µm, as above
    assert format_height(2.48624, "um", step_um=step) == "2.49 µm"
    assert format_height(-0.004, "um", step_um=step, unit=False) == "0.00"  # no sign on a height that rounds to 0
    assert format_height(-0.006, "um", step_um=step, unit=False) == "-0.01"
    # 2.54 µm = 100 µin exactly (1 µin = 0.0254 µm, international inch, 1959)
    assert format_height(2.54, "in", step_um=step) == "100 µin"
    # a limit is stated, not measured: DIN 876 grade 00 at 1000 mm is 4 µm (t = 2 (1 + 1000/1000), from memory)
    assert format_limit(4.0, "um") == "4 µm" and format_limit(1.5, "um") == "1.5 µm"
    assert format_limit(2.54, "in") == "100 µin"
