"""Tests of the guided-entry state machine (flatcheck.bench._entry) and the closure check."""

import dataclasses
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import flatcheck
from flatcheck.bench import (
    DEFAULT_READING_SD_URAD,
    MAX_CLOSURE_UNKNOWNS,
    ReadingRefused,
    check_reading,
    correct_reading,
    describe_slot,
    enter_reading,
    entry_limits,
    line_closure,
    plan_entry,
    plate_map,
    run_readings,
    start_entry,
    undo_reading,
)
from flatcheck.errors import InputValueError
from flatcheck.io._survey_fill import parse_form
from flatcheck.units import ARCSEC_TO_RAD


def _plan_text(length=1000.0, width=630.0, base=100.0, *, back=False, kind="autocollimator", unit="arcsec"):
    """The text of a blank Union Jack as `flatcheck plan` writes it; `back` adds a reverse run to every line."""
    inst = flatcheck.Instrument(kind, unit)
    survey = flatcheck.plan_union_jack(length, width, base, instrument=inst)
    text = flatcheck.format_survey(survey)
    if back:
        old = 'readings = []   # fill in, in the order taken\norder = "forward"'
        assert text.count(old) == 8
        text = text.replace(old, '[[line.run]]\nreadings = []\norder = "forward"\n'
                                 '[[line.run]]\nreadings = []\norder = "reverse"')
    return text


def _state(text):
    form = parse_form(text, source="plan.toml")
    plan = plan_entry(form.survey, form.runs, falls=form.falls)
    return plan, start_entry(plan, [r.readings for r in form.runs])


def _bowl(x, y):
    """A smooth, slightly twisted bowl (µm), a few µm deep on a 1000 x 630 mm plate."""
    return 3e-6 * (x - 500.0) ** 2 + 2e-6 * (y - 315.0) ** 2 + 4e-6 * (x - 500.0) * (y - 315.0) / 10.0


def _simulated_values(plan, runs=("forward",), seed=7, noise=0.0):
    """Readings of _bowl in entry order (line by line, run by run, as each run lists them)."""
    sim = flatcheck.simulate_survey(plan.survey, _bowl, instrument_zero="random", noise_sd=noise, rng=seed, runs=runs)
    return [v for ln in sim.lines for r in ln.runs for v in r.readings]


# ---------------------------------------------------------------------------
# the order of readings and where they are


def test_order_is_line_by_line_run_by_run_as_the_file_lists_them():
    plan, state = _state(_plan_text(back=True))
    names = [ln.name for ln in plan.survey.lines]
    assert [r.line for r in plan.runs] == [n for n in names for _ in range(2)]
    assert [r.order for r in plan.runs[:2]] == ["forward", "reverse"]
    assert state.n_total == 2 * 52 and state.next_slot.number == 1
    # SW-SE has 8 steps: its forward run reads steps 0..7, the reverse run lists them from step 7 back to 0
    fwd, rev = plan.runs[4], plan.runs[5]
    assert fwd.line == rev.line == "SW-SE"
    assert [s.step for s in plan.slots[fwd.first - 1: fwd.first - 1 + 8]] == list(range(8))
    assert [s.step for s in plan.slots[rev.first - 1: rev.first - 1 + 8]] == list(range(7, -1, -1))
    # walking back, the instrument's rear foot is on the station nearer the line's end
    first_back = plan.slots[rev.first - 1]
    assert first_back.stations == ("SE", "SW-SE.7")
    assert first_back.distances_mm == pytest.approx((800.0, 700.0))
    assert "reading 1 of this run" in describe_slot(plan, first_back)


def test_distances_from_the_line_start_follow_the_stations():
    plan, _ = _state(_plan_text())
    diag = plan.slots[4]  # SW-NE, step 5: from C to SW-NE.5
    assert diag.stations == ("C", "SW-NE.5")
    # the diagonal of the 800 x 400 mm surveyed rectangle in 8 steps (Pythagoras): C is at half of it
    d = math.hypot(800.0, 400.0)
    assert diag.distances_mm == pytest.approx((d / 2, d * 5 / 8))
    assert diag.foot_spacing_mm == pytest.approx(d / 8)
    assert "feet on C and SW-NE.5, 447 mm and 559 mm from SW" in describe_slot(plan, diag)
    # 1 in = 25.4 mm exactly
    assert f"{d / 2 / 25.4:.2f} in and {d * 5 / 8 / 25.4:.2f} in" in describe_slot(plan, diag, units="in")


def test_plate_map_marks_the_instrument_and_the_line():
    plan, _ = _state(_plan_text())
    slot = plan.slots[16]  # SW-SE, step 1: feet on SW and SW-SE.1, along the south side
    rows = plate_map(plan, slot, width=41)
    assert rows[0].startswith("+") and rows[-1].startswith("+") and len({len(r) for r in rows}) == 1
    text = "\n".join(rows)
    assert text.count("@") == 2
    south = [r for r in rows if "@" in r]
    assert len(south) == 1 and south[0].count("o") == 7  # the other 7 stations of the south side
    # the south side is below every other station row (north up)
    assert rows.index(south[0]) == max(i for i, r in enumerate(rows) if "." in r or "o" in r or "@" in r)


# ---------------------------------------------------------------------------
# entering, resuming, undo and corrections


def test_enter_undo_correct_and_resume_from_partial_runs():
    plan, state = _state(_plan_text(back=True))
    for v in (1.0, 2.0, 3.0):
        state = enter_reading(state, v)
    assert state.n_done == 3 and state.next_slot.number == 4
    state, undone = undo_reading(state)
    assert undone.number == 3 and state.next_slot.number == 3
    state = correct_reading(state, 2, 2.5)
    assert state.value(2) == 2.5
    saved = run_readings(state)
    assert saved[0] == (1.0, 2.5) and all(r == () for r in saved[1:])
    # a restart from what was saved resumes at the first missing reading, and undo takes back the last one saved
    again = start_entry(plan, saved)
    assert again.next_slot.number == 3 and again.history == ()
    again, undone = undo_reading(again)
    assert undone.number == 2 and again.value(2) is None
    with pytest.raises(InputValueError):
        correct_reading(again, 5, 1.0)  # not entered yet


def test_a_run_longer_than_planned_is_refused():
    plan, _ = _state(_plan_text())
    with pytest.raises(InputValueError, match="has 9 readings but needs 8"):
        start_entry(plan, [tuple(range(9))] + [()] * 7)


@pytest.mark.parametrize("bad", [float("nan"), float("inf"), "x"])
def test_non_numbers_are_refused(bad):
    _, state = _state(_plan_text())
    with pytest.raises(ReadingRefused):
        enter_reading(state, bad)


def test_a_slope_beyond_the_file_readers_limit_is_refused_not_saved():
    # docs/survey-format.md "Plausibility limits": 20 mm/m = 0.02 rad is about 4125 arcsec (0.02 / 4.848e-6)
    _, state = _state(_plan_text())
    limit_arcsec = 0.02 / ARCSEC_TO_RAD
    state = enter_reading(state, limit_arcsec * 0.99)
    with pytest.raises(ReadingRefused, match="mm/m"):
        enter_reading(state, limit_arcsec * 1.01)


# ---------------------------------------------------------------------------
# checks as readings come


def test_exact_readings_raise_no_finding():
    plan, state = _state(_plan_text(back=True))
    limits = entry_limits(plan)
    for v in _simulated_values(plan, runs=("forward", "reverse")):
        assert check_reading(state, v, limits) == ()
        state = enter_reading(state, v)
    assert state.complete


def test_a_planted_slip_is_named_against_the_previous_run():
    # 4.1 keyed for 1.4 arcsec in the back run of a line read forward and back (the example)
    plan, state = _state(_plan_text(back=True))
    limits = entry_limits(plan)
    values = _simulated_values(plan, runs=("forward", "reverse"), noise=0.02, seed=3)
    target = plan.runs[5].first - 1 + 3  # SW-SE back run, its 4th reading
    shift = 1.4 - values[target]  # move the surface's readings so that the true reading is 1.4 arcsec
    rev = plan.runs[5]
    fwd = plan.runs[4]
    for k in range(fwd.first - 1, rev.first - 1 + rev.n_readings):
        values[k] += shift  # a constant zero offset changes nothing real
    values[target] = 4.1
    flagged = {}
    for k, v in enumerate(values):
        for f in check_reading(state, v, limits):
            flagged.setdefault(k, []).append(f)
        state = enter_reading(state, v)
    assert list(flagged) == [target]
    (f,) = flagged[target]
    assert f.kind == "runs-differ" and "4.1 arcsec" in f.message and "run 1" in f.message
    # the default reading uncertainty: 1.5 µrad in arcsec (1 µrad = 0.206265 arcsec, REFERENCE.md check value 1)
    assert limits.reading_sd == pytest.approx(1.5 * 0.206265, rel=1e-5)
    assert limits.reading_sd_basis == "default" and DEFAULT_READING_SD_URAD == 1.5


def test_the_stated_reading_uncertainty_sets_the_run_limit():
    text = _plan_text(back=True).replace("# reading_uncertainty = ...", "reading_uncertainty = 2.0 #")
    plan, state = _state(text)
    limits = entry_limits(plan)
    assert (limits.reading_sd, limits.reading_sd_basis) == (2.0, "stated")
    values = _simulated_values(plan, runs=("forward", "reverse"))
    for v in values[:8]:
        state = enter_reading(state, v)
    # first reading of the back run (step 8): its forward twin is values[7]; same sign, so no offset is assumed
    assert plan.slots[8].step == 7 and values[8] == pytest.approx(values[7])
    limit = 3.29 * math.sqrt(2.0) * 2.0  # z sqrt(2) sigma, z the two-sided 0.1 % point
    assert check_reading(state, values[7] + 0.99 * limit, limits) == ()
    (f,) = check_reading(state, values[7] + 1.01 * limit, limits)
    assert f.kind == "runs-differ" and f.limit == pytest.approx(limit)


def test_a_jump_no_surface_of_this_size_makes_is_named():
    # DIN 876 grade 3 for the 1000 mm side: 40 (1 + 1000/1000) = 80 µm (REFERENCE.md section 4.1)
    plan, state = _state(_plan_text())
    limits = entry_limits(plan)
    assert limits.jump_um == pytest.approx(80.0)
    state = enter_reading(state, 4.12)
    base = plan.slots[1].foot_spacing_mm  # 111.8 mm diagonal base
    # a rise change of B tan(d) over the step; just above and just below the 80 µm limit
    d_limit = math.atan(80.0 / (base * 1e3)) / ARCSEC_TO_RAD
    assert check_reading(state, 4.12 + 0.99 * d_limit, limits) == ()
    (f,) = check_reading(state, 4.12 + 1.01 * d_limit, limits)
    assert f.kind == "jump" and "DIN 876" in f.message
    # a decimal point slipped: 412 keyed for 4.12 arcsec
    assert [x.kind for x in check_reading(state, 412.0, limits)] == ["jump"]


def test_the_closure_check_equals_the_classic_moody_closure():
    # Union Jack read once: W-E closes at C against diagonals and sides. The classic worksheet's closure is
    # "centre-line value at O minus the diagonals' value" (REFERENCE.md section 2, Moody 1955 / Burton 1997);
    # flatcheck.moody_reduce implements that worksheet.
    plan, state = _state(_plan_text())
    values = _simulated_values(plan)
    we = plan.runs[6]
    assert we.line == "W-E"
    values[we.first - 1 + 2] += 3.0  # a slip of 3 arcsec in W-E, step 3
    for v in values:
        state = enter_reading(state, v)
    filled = dataclasses.replace(plan.survey, lines=tuple(
        dataclasses.replace(ln, runs=(flatcheck.Run(tuple(r), "forward", False),))
        for ln, r in zip(plan.survey.lines, run_readings(state))))
    moody = {c.line: c.closure_um for c in flatcheck.moody_reduce(filled).closures}
    done = [(r.line_index, np.asarray(vals), r.sign) for r, vals in zip(plan.runs[:6], run_readings(state)[:6])]
    res = line_closure(plan.survey, done, (we.line_index, np.asarray(run_readings(state)[6]), 1),
                       reading_sd_rad=1.5e-6)
    assert res.n_closures == 1 and res.station == "C"
    assert res.closure_um == pytest.approx(moody["W-E"], abs=1e-9)
    # the slip moves C by half its rise relative to the chord W-E (step 3 of 8 lies west of C):
    # rise error = 100 mm x tan(3 arcsec) = 1.4544 µm (REFERENCE.md check value 2: 0.48481 µm per arcsec)
    assert abs(res.closure_um) == pytest.approx(0.5 * 100e3 * math.tan(3 * ARCSEC_TO_RAD), rel=1e-6)


def test_the_closure_check_names_a_line_that_does_not_close():
    plan, state = _state(_plan_text())
    limits = entry_limits(plan)
    values = _simulated_values(plan)
    we = plan.runs[6]
    values[we.first - 1 + 2] += 8.0  # 8 arcsec: a 3.9 µm rise error, C off by 1.9 µm
    kinds = {}
    for k, v in enumerate(values):
        for f in check_reading(state, v, limits):
            kinds[k + 1] = f
        state = enter_reading(state, v)
    last_of_we = we.first + we.n_readings - 1
    assert list(kinds) == [last_of_we] and kinds[last_of_we].kind == "closure"
    assert "'W-E'" in kinds[last_of_we].message and " at C" in kinds[last_of_we].message


def test_exact_readings_close_to_rounding():
    plan, state = _state(_plan_text())
    for v in _simulated_values(plan):
        state = enter_reading(state, v)
    runs = run_readings(state)
    for target in (6, 7):  # the centre lines
        done = [(plan.runs[i].line_index, np.asarray(runs[i]), 1) for i in range(target)]
        res = line_closure(plan.survey, done, (plan.runs[target].line_index, np.asarray(runs[target]), 1),
                           reading_sd_rad=1.5e-6)
        assert res.n_closures == 1 and abs(res.closure_um) < 1e-6 and not res.flagged


def test_lines_that_close_no_loop_are_not_checked():
    plan, state = _state(_plan_text())
    runs_vals = _simulated_values(plan)
    for v in runs_vals:
        state = enter_reading(state, v)
    runs = run_readings(state)
    # SW-SE after the two diagonals meets them at SW and SE only: its offset and tilt absorb both
    done = [(plan.runs[i].line_index, np.asarray(runs[i]), 1) for i in range(2)]
    res = line_closure(plan.survey, done, (plan.runs[2].line_index, np.asarray(runs[2]), 1), reading_sd_rad=1.5e-6)
    assert res.n_closures == 0 and not res.flagged


@settings(max_examples=20)
@given(a=st.floats(-1e-5, 1e-5), b=st.floats(-1e-5, 1e-5), c=st.floats(-2e-8, 2e-8), seed=st.integers(0, 10_000))
def test_no_finding_on_exact_readings_of_any_smooth_surface(a, b, c, seed):
    # invariant: exact readings of a smooth surface (a tilt plus a bowl/saddle of a few µm) are never flagged
    text = _plan_text(back=True)
    plan, state = _state(text)
    limits = entry_limits(plan)

    def surf(x, y):
        return a * 1e3 * x + b * 1e3 * y + c * ((x - 500.0) ** 2 - (y - 315.0) ** 2)

    sim = flatcheck.simulate_survey(plan.survey, surf, instrument_zero="random", rng=seed, runs=("forward", "reverse"))
    for v in (v for ln in sim.lines for r in ln.runs for v in r.readings):
        assert check_reading(state, v, limits) == ()
        state = enter_reading(state, v)


def test_indicator_grid_heights_are_checked_as_heights():
    inst = flatcheck.Instrument("indicator", "um")
    survey = flatcheck.plan_grid(260.0, 260.0, 100.0, instrument=inst)
    text = flatcheck.format_survey(survey)
    plan, state = _state(text)
    limits = entry_limits(plan)
    assert plan.slots[0].stations == ("A1",) and len(plan.slots) == 9
    # DIN 876 grade 3 for 260 mm: 40 x 1.26 = 50.4 µm; heights 12, 12, 12 + 51 bend by 51 µm
    assert limits.jump_um == pytest.approx(50.4)
    state = enter_reading(enter_reading(state, 12.0), 12.0)
    assert check_reading(state, 12.0 + 50.0, limits) == ()
    assert [f.kind for f in check_reading(state, 12.0 + 51.0, limits)] == ["jump"]


def test_closure_checks_are_left_to_the_reduction_on_very_large_surveys():
    # a 2000 x 1000 mm grid at 50 mm: 741 stations, more unknowns than a check at every line can afford
    big = flatcheck.plan_grid(2000.0, 1000.0, 50.0, instrument=flatcheck.Instrument("level", "um/m"))
    plan, _ = _state(flatcheck.format_survey(big))
    assert len(plan.survey.stations) + 1 > MAX_CLOSURE_UNKNOWNS and not entry_limits(plan).closure_checks
    small, _ = _state(_plan_text())
    assert entry_limits(small).closure_checks
