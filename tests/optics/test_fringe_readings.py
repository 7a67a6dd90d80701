"""Written fringe readings -> surface estimate, flatness, uncertainty (flatcheck.optics._fringe_readings),
and their file format (flatcheck.io._fringe_toml)."""

import math
from pathlib import Path

import numpy as np
import pytest

from flatcheck.errors import InputFormatError, InputValueError
from flatcheck.io._fringe_toml import parse_fringe_readings, read_fringe_readings
from flatcheck.optics import EYE_LIMIT_FRINGES, FringeReading, FringeReadings, reduce_fringe_readings, wavelength_of

SAMPLES = Path(__file__).resolve().parents[2] / "sample_readings"
HELIUM_NM = 587.56
FRINGE_NM = HELIUM_NM / 2  # one fringe = half a wavelength (Williamson, SPIE oemagazine 2004: He 587.6 -> 293.8 nm)


def _lp_zone(x, y, z):
    """Minimum zone of heights z by one direct linear program (scipy HiGHS), the outside reference."""
    from scipy.optimize import linprog

    n = x.size
    A = np.column_stack([np.ones(n), x - x.mean(), y - y.mean()])
    res = linprog([0, 0, 0, 1], A_ub=np.vstack([np.column_stack([A, np.zeros(n)]), np.column_stack([-A, -np.ones(n)])]),
                  b_ub=np.concatenate([z, -z]), bounds=[(None, None)] * 4, method="highs")
    return res.x[3]


def _readings(shape, size, *rs, flat=0.0):
    return FringeReadings(HELIUM_NM, "helium", shape, size, size, tuple(rs), flat_flatness_nm=flat)


def test_light_sources():
    # fringe heights per Williamson (2004): He 293.8, Na 294.5, Hg green 273.0, HeNe 316.4 nm
    for name, half in (("helium", 293.8), ("sodium", 294.5), ("mercury-green", 273.0), ("hene", 316.4)):
        assert wavelength_of(name) / 2 == pytest.approx(half, abs=0.05)
    with pytest.raises(InputValueError):
        wavelength_of("neon")


def test_one_bend_on_a_round_part_is_a_sphere_whose_flatness_is_the_sag():
    # A paraboloid h = a r^2 over a disc of radius R: the sag along any diameter is a R^2, and its
    # peak-to-valley (the best plane is level by symmetry) is also a R^2 (analytic).
    est = reduce_fringe_readings(_readings("circle", 50.0, FringeReading(0.0, 0.25)))
    assert est.model == "sphere"
    assert est.minimum_zone_nm == pytest.approx(0.25 * FRINGE_NM, rel=1e-6)
    assert est.minimum_zone_fringes == pytest.approx(0.25, rel=1e-6)
    # convex: the middle is high
    mid = np.argmin(np.hypot(est.x_mm - 25, est.y_mm - 25))
    assert est.height_nm[mid] == pytest.approx(est.height_nm.max())
    # one direction cannot tell a sphere from a saddle: said, with the other shapes' flatness
    assert any("sphere from a cylinder or a saddle" in t for t in est.cannot_tell)
    alt = dict(est.alternatives)
    assert alt["saddle"] == pytest.approx(2 * 0.25 * FRINGE_NM, rel=1e-6)  # a (x^2 - y^2) over a disc: 2 a R^2
    # law of propagation (JCGM 100): F = |sag|, so u(F) = u(sag) = eye limit / sqrt(3) as a rectangle
    assert est.standard_uncertainty_nm == pytest.approx(EYE_LIMIT_FRINGES / math.sqrt(3) * FRINGE_NM, rel=1e-3)
    assert est.expanded_uncertainty_nm == pytest.approx(2 * est.standard_uncertainty_nm)


def test_sphere_on_a_square_part_is_twice_the_axis_sag():
    # h = a (x^2 + y^2) over a square of side L: sag along x through the centre a L^2/4, corners a L^2/2 (analytic)
    est = reduce_fringe_readings(_readings("rect", 80.0, FringeReading(0.0, -0.3), FringeReading(90.0, -0.3)))
    assert est.model == "no twist"
    assert est.minimum_zone_nm == pytest.approx(2 * 0.3 * FRINGE_NM, rel=1e-6)
    assert any("twist" in t for t in est.cannot_tell)
    # concave: the middle is low
    assert est.coefficients_nm_per_mm2[0] > 0 and est.coefficients_nm_per_mm2[1] > 0


def test_saddle_and_twist_against_a_linear_program():
    # opposite bends along x and y: a saddle; opposite bends along the diagonals: a twist c x y.
    for rs in [
        (FringeReading(0.0, 0.3), FringeReading(90.0, -0.3), FringeReading(45.0, 0.0)),
        (FringeReading(0.0, 0.0), FringeReading(90.0, 0.0), FringeReading(45.0, 0.4), FringeReading(135.0, -0.4)),
    ]:
        est = reduce_fringe_readings(_readings("rect", 60.0, *rs))
        assert est.model == "full quadratic"
        # the fit reproduces the readings it was given
        assert np.allclose(est.fitted_sag_fringes, [r.sag_fringes for r in rs], atol=1e-9)
        # minimum zone of the estimate: scipy HiGHS on the same points as the outside reference
        assert est.minimum_zone_nm == pytest.approx(_lp_zone(est.x_mm, est.y_mm, est.height_nm), rel=1e-6)
    # the saddle x^2 - y^2 over a square: +-a L^2/4 at the mid-sides, zone a L^2/2 = twice the sag (analytic)
    est = reduce_fringe_readings(_readings("rect", 60.0, FringeReading(0.0, 0.3), FringeReading(90.0, -0.3),
                                           FringeReading(45.0, 0.0)))
    assert est.minimum_zone_nm == pytest.approx(2 * 0.3 * FRINGE_NM, rel=1e-6)


def test_circular_rings_fix_a_sphere():
    # N rings from a central contact to the edge of a disc: the sag is N fringes (each ring one more half wave)
    est = reduce_fringe_readings(_readings("circle", 40.0, FringeReading(None, 2.0, kind="rings")))
    assert est.model == "full quadratic"
    a, b, c = est.coefficients_nm_per_mm2
    assert a == pytest.approx(b) and c == pytest.approx(0.0, abs=1e-12)
    assert est.minimum_zone_fringes == pytest.approx(2.0, rel=1e-6)


def test_uncertainty_grows_with_the_flat():
    bare = reduce_fringe_readings(_readings("circle", 50.0, FringeReading(0.0, 0.25)))
    withflat = reduce_fringe_readings(_readings("circle", 50.0, FringeReading(0.0, 0.25), flat=29.4))
    # the flat adds at most its own flatness (rectangular half-width 29.4 nm), in quadrature (JCGM 100)
    expect = math.hypot(bare.standard_uncertainty_nm, 29.4 / math.sqrt(3))
    assert withflat.standard_uncertainty_nm == pytest.approx(expect, rel=1e-6)


def test_scaling_the_readings_scales_the_flatness():
    rs = (FringeReading(0.0, 0.2), FringeReading(90.0, -0.1), FringeReading(45.0, 0.15))
    f1 = reduce_fringe_readings(_readings("rect", 50.0, *rs)).minimum_zone_nm
    rs3 = tuple(FringeReading(r.direction_deg, 3 * r.sag_fringes) for r in rs)
    assert reduce_fringe_readings(_readings("rect", 50.0, *rs3)).minimum_zone_nm == pytest.approx(3 * f1, rel=1e-6)


# --------------------------------------------------------------------------- the file format
def test_sample_file_reads():
    rd = read_fringe_readings(SAMPLES / "padface-KY-B4-fringes.toml")
    assert rd.wavelength_nm == HELIUM_NM and rd.shape == "rect" and rd.length_mm == 80.0
    assert [r.direction_deg for r in rd.readings] == [0.0, 90.0, 45.0]
    assert all(r.sag_fringes > 0 for r in rd.readings)  # bows away from the contact edge: convex
    assert rd.flat_flatness_nm == 29.0


GOOD = """format = "flatcheck-fringes"
[part]
shape = "circle"
diameter_mm = 50
[light]
wavelength_nm = 546.07
[[reading]]
along = "y"
bend_mm = 1.5
spacing_mm = 6.0
bows = "toward"
[[reading]]
rings = 1
contact = "rim"
along = 30
"""


def test_bend_in_mm_and_rings():
    rd = parse_fringe_readings(GOOD)
    assert rd.readings[0].direction_deg == 90.0 and rd.readings[0].sag_fringes == pytest.approx(-0.25)
    assert rd.readings[1].kind == "rings" and rd.readings[1].sag_fringes == -1.0 and rd.readings[1].direction_deg == 30.0


@pytest.mark.parametrize(
    "change, kind, where",
    [
        (('bows = "toward"', 'bows = "sideways"'), InputValueError, "line 11"),
        (('bows = "toward"', 'bow = "toward"'), InputValueError, "line 11"),
        (('along = "y"', 'along = "z"'), InputValueError, "line 8"),
        (('format = "flatcheck-fringes"', 'format = "other"'), InputFormatError, "line 1"),
        (("diameter_mm = 50", "diameter_mm = -50"), InputValueError, "line 4"),
        (("wavelength_nm = 546.07", "wavelength_nm = 5460.7"), InputValueError, "line 6"),
        (("rings = 1", "rings = 1\nbend_fringes = 0.2"), InputFormatError, "reading 2"),
        (("[light]", "[light"), InputFormatError, "line 5"),
    ],
)
def test_bad_files_name_the_line(change, kind, where):
    with pytest.raises(kind) as exc:
        parse_fringe_readings(GOOD.replace(*change), path="f.toml")
    assert where in str(exc.value)
    assert "\n" not in str(exc.value)
