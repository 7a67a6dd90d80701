"""Tests of simulated readings (flatcheck.simulate)."""

import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from flatcheck.errors import InputValueError, UnitError
from flatcheck.survey import plan_grid, plan_lines, plan_union_jack
from flatcheck.survey import simulate_survey
from flatcheck.survey import Instrument, observations


def _reduce_lstsq(survey):
    """Independent least-squares reduction with numpy: station heights + line zeros.

    Returns heights in µm with the best-fit plane removed (what the survey can see).
    """
    obs = observations(survey)
    n = len(survey.stations)
    gravity = survey.instrument.gravity_referenced
    nz = 1 if gravity else len(survey.lines)
    zcol = np.zeros(obs.value_um.size, dtype=int) if gravity else obs.line
    a = np.zeros((obs.value_um.size, n + nz))
    r = np.arange(obs.value_um.size)
    a[r, obs.i_to] += 1.0
    a[r, obs.i_from] -= 1.0
    a[r, n + zcol] = obs.base_mm
    sol = np.linalg.lstsq(a, obs.value_um, rcond=None)[0]
    return _deplane(survey, sol[:n])


def _deplane(survey, h):
    x, y = survey.x_mm, survey.y_mm
    m = np.column_stack([np.ones_like(x), x, y])
    return h - m @ np.linalg.lstsq(m, h, rcond=None)[0]


def _bowl_twist(x, y):
    # a few µm: bow along x, twist, a local low spot
    return 3e-6 * (x - 500) ** 2 + 4e-6 * (x - 500) * (y - 315) - 1.5 * np.exp(-((x - 700) ** 2 + (y - 200) ** 2) / 80**2)


def test_check_values_arcsec_and_levels():
    # Source: REFERENCE.md section 10 item 2 [D]: 1 arcsec over B = 100 mm rises 0.48481 µm.
    plan = plan_lines([("a", (0, 0), (100, 0), 1)], length_mm=100, width_mm=10)
    s = simulate_survey(plan, lambda x, y: x * (0.48481368 / 100.0))
    assert s.lines[0].runs[0].readings[0] == pytest.approx(1.0, abs=1e-6)
    # Source: REFERENCE.md section 10 item 3 [D]: 0.01 mm/m over 200 mm -> 2.000 µm.
    plan = plan_lines([("a", (0, 0), (200, 0), 1)], length_mm=200, width_mm=10, instrument=Instrument("level", "mm/m"))
    s = simulate_survey(plan, lambda x, y: x * (2.0 / 200.0))
    assert s.lines[0].runs[0].readings[0] == pytest.approx(0.01, rel=1e-12)
    # Source: REFERENCE.md section 10 item 3 [D]: 5 µm/m over 150 mm -> 0.750 µm.
    plan = plan_lines([("a", (0, 0), (150, 0), 1)], length_mm=150, width_mm=10, instrument=Instrument("level", "um/m"))
    s = simulate_survey(plan, lambda x, y: x * (0.75 / 150.0))
    assert s.lines[0].runs[0].readings[0] == pytest.approx(5.0, rel=1e-12)


def test_beam_deviation_doubles():
    # Source: REFERENCE.md section 10 item 5 [V principle]: mirror tilt 1.0 arcsec shows as 2.0 arcsec beam deviation.
    inst = Instrument("autocollimator", "arcsec", reports="beam-deviation")
    plan = plan_lines([("a", (0, 0), (100, 0), 1)], length_mm=100, width_mm=10, instrument=inst)
    s = simulate_survey(plan, lambda x, y: x * (100e3 * math.tan(math.pi / 648000) / 100.0))
    assert s.lines[0].runs[0].readings[0] == pytest.approx(2.0, rel=1e-9)


@pytest.mark.parametrize("unit", ["arcsec", "urad", "um/m", "mm/m", "in/ft"])
def test_rises_are_exact(unit):
    # Exactness against the shared conversion: observations() turns each reading back into a rise;
    # the rises must equal the height differences of the true surface (numpy reference).
    plan = plan_union_jack(1000, 630, 100, instrument=Instrument("autocollimator", unit))
    s = simulate_survey(plan, _bowl_twist, runs=("forward", "reverse", "reverse-flipped"))
    obs = observations(s)
    h = _bowl_twist(s.x_mm, s.y_mm)
    assert np.max(np.abs(obs.value_um - (h[obs.i_to] - h[obs.i_from]))) < 1e-9
    ln = s.line("SW-SE")
    fwd, rev, flp = ln.runs
    assert rev.order == "reverse" and rev.readings == fwd.readings[::-1]
    assert flp.flip_sign and flp.readings == tuple(-v for v in fwd.readings[::-1])


def test_autocollimator_zero_per_line_is_invisible(rng):
    # A per-line zero only tilts each line; an independent numpy least-squares reduction
    # (station heights + one zero per line) recovers the surface up to a plane.
    plan = plan_union_jack(1000, 630, 100)
    s = simulate_survey(plan, _bowl_twist, instrument_zero="random", rng=rng)
    zeros = s.meta["simulation"]["zeros"]
    assert np.unique(zeros).size == len(plan.lines)  # one per line
    got = _reduce_lstsq(s)
    want = _deplane(s, _bowl_twist(s.x_mm, s.y_mm))
    # tan(theta + zero) is not linear in the zero: with zeros of ~20 arcsec (1e-4 rad) the
    # linear model leaves ~1e-8 µm; 1e-6 µm is still far below anything measurable
    assert np.max(np.abs(got - want)) < 1e-6


def test_level_one_zero(rng):
    plan = plan_grid(1000, 630, 100, instrument=Instrument("level", "um/m"))
    s = simulate_survey(plan, _bowl_twist, instrument_zero="random", rng=rng)
    assert np.unique(s.meta["simulation"]["zeros"]).size == 1
    got = _reduce_lstsq(s)
    want = _deplane(s, _bowl_twist(s.x_mm, s.y_mm))
    # gravity reference: twist is observable from rows + columns (REFERENCE.md section 2)
    assert np.max(np.abs(got - want)) < 1e-8
    with pytest.raises(InputValueError, match="one zero"):
        simulate_survey(plan, _bowl_twist, instrument_zero=[0.0] * len(plan.lines))


def test_noise_statistics():
    plan = plan_grid(2000, 2000, 50, margin_mm=0, instrument=Instrument("level", "um/m"))
    s = simulate_survey(plan, lambda x, y: 0 * x, noise_sd=0.5, rng=np.random.default_rng(7))
    r = observations(s).reading
    # sample standard deviation of ~3200 N(0, 0.5) values: relative standard error 1/sqrt(2n) = 1.3 %
    assert r.size > 3000
    assert np.std(r, ddof=1) == pytest.approx(0.5, rel=0.05)
    assert abs(np.mean(r)) < 4 * 0.5 / math.sqrt(r.size)
    # same seed -> same readings
    s2 = simulate_survey(plan, lambda x, y: 0 * x, noise_sd=0.5, rng=np.random.default_rng(7))
    assert s2.lines == s.lines


def test_indicator_heights_with_datum():
    plan = plan_grid(80, 80, 10, margin_mm=5, instrument=Instrument("indicator", "uin"))
    s = simulate_survey(plan, lambda x, y: 0.0254 * x, instrument_zero=100.0)
    obs = observations(s)
    # 1 µin = 0.0254 µm exactly (REFERENCE.md section 1 / units.py): the reading in µin equals x_mm + datum
    assert obs.reading == pytest.approx(s.x_mm[obs.i_to] + 100.0, abs=1e-9)


def test_bad_inputs():
    plan = plan_union_jack(1000, 630, 100)
    with pytest.raises(InputValueError):
        simulate_survey(plan, _bowl_twist, runs=("sideways",))
    with pytest.raises(InputValueError):
        simulate_survey(plan, _bowl_twist, noise_sd=-1)
    with pytest.raises(InputValueError):
        simulate_survey(plan, lambda x, y: np.full(3, 1.0))
    with pytest.raises(InputValueError):
        simulate_survey(plan, lambda x, y: x * np.nan)
    with pytest.raises(UnitError):
        simulate_survey(plan, _bowl_twist, unit="furlong")
    with pytest.raises(InputValueError):
        simulate_survey(plan, _bowl_twist, runs={"XX": ("forward",)})


@given(
    a=st.floats(-5, 5),
    b=st.floats(-0.01, 0.01),
    c=st.floats(-0.01, 0.01),
)
def test_added_plane_does_not_change_reduced_shape(a, b, c):
    plan = plan_union_jack(1000, 630, 100)
    s1 = simulate_survey(plan, _bowl_twist)
    s2 = simulate_survey(plan, lambda x, y: _bowl_twist(x, y) + a + b * x + c * y)
    assert np.max(np.abs(_reduce_lstsq(s1) - _reduce_lstsq(s2))) < 1e-8
