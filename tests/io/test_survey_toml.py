"""Tests of the TOML survey format (flatcheck.io.survey_toml)."""

import dataclasses
import math
import re

import numpy as np
import pytest

from flatcheck.errors import FlatcheckError, InputFormatError, InputValueError, LayoutError, UnitError
from flatcheck.io import format_survey, parse_survey, read_survey, write_survey
from flatcheck.survey import plan_grid, plan_lines, plan_union_jack
from flatcheck.survey import simulate_survey
from flatcheck.survey import Instrument, Surface, observations


def _norm(survey):
    """The survey without file positions (Run.where) and source, for comparisons."""
    lines = tuple(
        dataclasses.replace(ln, runs=tuple(dataclasses.replace(r, where="") for r in ln.runs)) for ln in survey.lines
    )
    return dataclasses.replace(survey, lines=lines, source="")


def _surface(x, y):
    return 2e-6 * (x - 500) ** 2 - 3e-6 * (x - 500) * (y - 300) + 0.8 * np.exp(-((x - 300) ** 2 + (y - 200) ** 2) / 60**2)


PLANS = {
    "uj": lambda: plan_union_jack(
        1000, 630, 100, surface=Surface("granite plate", 1000, 630, ident="P-1", material="granite"),
        instrument=Instrument("autocollimator", "arcsec", reading_uncertainty=0.2),
    ),
    "uj-beam": lambda: plan_union_jack(
        1200, 800, 120, instrument=Instrument("autocollimator", "urad", reports="beam-deviation")
    ),
    "grid-level": lambda: plan_grid(800, 600, 100, instrument=Instrument("level", "um/m")),
    "grid-diag": lambda: plan_grid(600, 600, 100, diagonals=True),
    "indicator": lambda: plan_grid(80, 80, 10, margin_mm=5, instrument=Instrument("indicator", "um")),
    "lines": lambda: plan_lines(
        [("a", (50, 50), (1950, 50), 19), ("b", (50, 150), (1950, 150), 19), ("x", (50, 50), (50, 150), 2)],
        length_mm=2000, width_mm=200, instrument=Instrument("level", "mm/m"),
    ),
}


@pytest.mark.parametrize("key", sorted(PLANS))
def test_blank_round_trip(tmp_path, key):
    plan = PLANS[key]()
    p = tmp_path / "blank.toml"
    write_survey(p, plan)
    s1 = read_survey(p)
    assert _norm(s1) == _norm(plan)
    write_survey(tmp_path / "again.toml", s1)
    s2 = read_survey(tmp_path / "again.toml")
    assert _norm(s2) == _norm(s1)
    assert (tmp_path / "again.toml").read_text() == p.read_text()


@pytest.mark.parametrize("key", sorted(PLANS))
def test_filled_round_trip_keeps_rises(tmp_path, key):
    plan = PLANS[key]()
    runs = {plan.lines[0].name: ("forward", "reverse-flipped")}
    sim = simulate_survey(plan, _surface, noise_sd=0.1, rng=np.random.default_rng(5), runs=runs, instrument_zero=1.5)
    sim = dataclasses.replace(sim, date="2024-05-06", temperature_c=20.25, operator="QA inspector", notes='line "b" \\ test')
    p = tmp_path / "filled.toml"
    write_survey(p, sim)
    back = read_survey(p)
    assert _norm(back) == _norm(sim)
    # the readings give the same rises (shared conversion in survey.observations)
    np.testing.assert_array_equal(observations(back).value_um, observations(sim).value_um)
    assert back.lines[0].runs[1].where.startswith(str(p))


def _uj_text():
    plan = plan_union_jack(1000, 630, 100)
    sim = simulate_survey(plan, _surface, runs={"SW-SE": ("forward", "reverse")})
    return format_survey(sim)


def _err(tmp_path, text, exc=FlatcheckError):
    p = tmp_path / "s.toml"
    p.write_text(text)
    with pytest.raises(exc) as info:
        read_survey(p)
    e = info.value
    assert e.fix, "every error says how to fix it"
    assert str(p) in e.one_line()
    return e


def _line_of(text, pattern):
    for no, ln in enumerate(text.splitlines(), start=1):
        if re.search(pattern, ln):
            return no
    raise AssertionError(pattern)


def test_not_toml(tmp_path):
    e = _err(tmp_path, 'format = "flatcheck-survey"\nversion = 1\n[surface\nx = 1\n', InputFormatError)
    assert "line 3" in e.where


def test_empty_and_binary(tmp_path):
    _err(tmp_path, "", InputFormatError)
    p = tmp_path / "b.toml"
    p.write_bytes(b"\x00\x01\x02binary")
    with pytest.raises(InputFormatError, match="binary"):
        read_survey(p)
    _err(tmp_path, "# only a comment\n", InputFormatError)


def test_missing_marker_and_section(tmp_path):
    text = _uj_text()
    e = _err(tmp_path, text.replace('format = "flatcheck-survey"\n', ""), InputFormatError)
    assert "format" in e.message
    cut = text.split("[instrument]")[0] + "[layout]" + text.split("[layout]")[1]
    e = _err(tmp_path, cut, InputFormatError)
    assert "[instrument]" in e.message


def test_unknown_key_suggests(tmp_path):
    text = _uj_text().replace("foot_spacing_mm = 100.0", "foot_spacng_mm = 100.0")
    e = _err(tmp_path, text, InputFormatError)
    assert "foot_spacng_mm" in e.message and "foot_spacing_mm" in e.fix
    assert f"line {_line_of(text, 'foot_spacng_mm')}" in e.where


def test_unknown_instrument_and_unit(tmp_path):
    text = _uj_text()
    e = _err(tmp_path, text.replace('kind = "autocollimator"', 'kind = "autocolimator"'), InputValueError)
    assert "autocollimator" in e.fix
    t2 = text.replace('unit = "arcsec"', 'unit = "degrees"')
    e = _err(tmp_path, t2, UnitError)
    assert "degrees" in e.message and "arcsec" in e.fix
    assert f"line {_line_of(t2, 'degrees')}" in e.where


def test_wrong_reading_count(tmp_path):
    text = _uj_text()
    m = re.search(r'name = "W-E"\n(?:#.*\n)?steps = 8\nreadings = \[([^\]]*)\]', text)
    vals = m.group(1).split(",")
    bad = text.replace(m.group(1), ",".join(vals[:-1]))
    e = _err(tmp_path, bad, InputValueError)
    assert "'W-E'" in e.message and "7 readings" in e.message and "8" in e.fix
    # the error points at the readings key of that line
    lines = bad.splitlines()
    no = int(re.search(r"line (\d+)", e.where).group(1))
    assert lines[no - 1].startswith("readings")
    assert 'name = "W-E"' in "\n".join(lines[no - 4 : no])


@pytest.mark.parametrize("value, what", [('"abc"', "not a number"), ("nan", "nan"), ("inf", "inf"), ("true", "not a number")])
def test_bad_reading_values(tmp_path, value, what):
    text = _uj_text()
    m = re.search(r'name = "S-N"\n(?:#.*\n)?steps = 4\nreadings = \[([^,\]]*),', text)
    bad = text.replace(m.group(0), m.group(0).replace(m.group(1), value))
    e = _err(tmp_path, bad, InputValueError)
    assert "reading 1 of line 'S-N'" in e.message and what in e.message


def test_bad_foot_spacing(tmp_path):
    text = _uj_text()
    for v in ("0.0", "-100.0"):
        e = _err(tmp_path, text.replace("foot_spacing_mm = 100.0", f"foot_spacing_mm = {v}"), InputValueError)
        assert "positive" in e.message
    both = text.replace("foot_spacing_mm = 100.0", "foot_spacing_mm = 100.0\nfoot_spacing_in = 4.0")
    _err(tmp_path, both, InputValueError)


def test_duplicate_missing_and_foreign_lines(tmp_path):
    text = _uj_text()
    dup = text.replace('name = "S-N"', 'name = "W-E"')
    e = _err(tmp_path, dup, InputValueError)
    assert "twice" in e.message
    # the second occurrence is the one reported
    nos = [i for i, ln in enumerate(dup.splitlines(), 1) if ln == 'name = "W-E"']
    assert f"line {nos[1]}" in e.where
    # a line that does not belong to the pattern, with the nearest name
    foreign = text.replace('name = "S-N"', 'name = "S-NN"')
    e = _err(tmp_path, foreign, LayoutError)
    assert "S-NN" in e.message and "'S-N'" in e.fix
    # a missing line of the pattern
    head, _, tail = text.rpartition("[[line]]")
    e = _err(tmp_path, head, LayoutError)
    assert "'S-N'" in e.message and "missing" in e.message


def test_sign_convention(tmp_path):
    text = _uj_text()
    _err(tmp_path, text.replace('positive = "rises-toward-line-end"\n', ""), InputFormatError)
    e = _err(tmp_path, text.replace('"rises-toward-line-end"', '"up"'), InputValueError)
    assert "rises-toward-line-end" in e.fix
    # the opposite convention reads as the same rises with every reading negated
    p = tmp_path / "flip.toml"
    flipped = re.sub(r"readings = \[([^\]]*)\]", lambda m: "readings = [" + ",".join(
        repr(-float(v)) for v in m.group(1).split(",") if v.strip()) + "]", text)
    p.write_text(flipped.replace('"rises-toward-line-end"', '"falls-toward-line-end"'))
    q = tmp_path / "orig.toml"
    q.write_text(text)
    np.testing.assert_allclose(observations(read_survey(p)).value_um, observations(read_survey(q)).value_um, rtol=0, atol=1e-12)


def test_inches(tmp_path):
    # 1 in = 25.4 mm exactly (units.py; international inch, 1959)
    text = _uj_text().replace("length_mm = 1000.0", "length_in = 40.0").replace("foot_spacing_mm = 100.0", "foot_spacing_in = 4.0")
    text = re.sub(r"diagonal_foot_spacing_mm = .*\n", "", text)
    text = re.sub(r"steps_(x|y|diagonal) = \d+\n", "", text)
    text = re.sub(r"readings = \[[^\]]*\]", "readings = []", text)
    text = re.sub(r"\nsteps = \d+", "", text)
    text = re.sub(r"\[\[line\.run\]\]\n", "", text)
    text = text.replace('readings = []\norder = "reverse"\nflip_sign = false\n', "")
    p = tmp_path / "inch.toml"
    p.write_text(text)
    s = read_survey(p)
    assert s.surface.length_mm == pytest.approx(1016.0)
    assert s.line("SW-SE").foot_spacing_mm == pytest.approx(101.6)


def test_steps_disagree_and_layout_error(tmp_path):
    text = _uj_text()
    bad = text.replace("steps_x = 8", "steps_x = 7")
    e = _err(tmp_path, bad, LayoutError)
    assert "odd" in e.message and f"line {_line_of(bad, 'steps_x = 7')}" in e.where
    bad = text.replace('name = "W-E"\n# W -> E: 8 steps of 100.000 mm, 8 readings per run\nsteps = 8', 'name = "W-E"\nsteps = 6')
    e = _err(tmp_path, bad, LayoutError)
    assert "steps = 6" in e.message


def test_both_readings_and_runs(tmp_path):
    text = _uj_text()
    bad = text.replace('name = "SW-SE"', 'name = "SW-SE"\nreadings = [1.0]', 1)
    e = _err(tmp_path, bad, InputFormatError)
    assert "both" in e.message


def test_free_lines_need_ends(tmp_path):
    plan = PLANS["lines"]()
    text = format_survey(plan)
    bad = text.replace("start_mm = [50.0, 150.0]\n", "", 1)
    e = _err(tmp_path, bad, InputFormatError)
    assert "start_mm" in e.message


def test_date_literal_and_conditions(tmp_path):
    text = _uj_text().replace('# date = "YYYY-MM-DD"', "date = 2024-03-05").replace("# temperature_c = 20.0", "temperature_c = 20.4")
    p = tmp_path / "d.toml"
    p.write_text(text)
    s = read_survey(p)
    assert s.date == "2024-03-05" and s.temperature_c == 20.4


def _load_make_samples():
    import importlib.util
    from pathlib import Path

    path = Path(__file__).resolve().parents[2] / "sample_readings" / "make_samples.py"
    spec = importlib.util.spec_from_file_location("make_samples", path)
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod, path.parent


def test_sample_files_are_reproducible_and_readable():
    mod, folder = _load_make_samples()
    files = mod.build_samples()
    assert len(files) >= 6
    for name, text in files.items():
        assert (folder / name).read_text(encoding="utf-8") == text, f"{name} differs from make_samples.py output"
        if name.endswith(".toml"):
            s = read_survey(folder / name)
            assert s.has_readings
            observations(s)  # every reading converts


def test_sample_plate_recovers_true_shape():
    # Independent numpy least-squares reduction (station heights + one zero per line) of the
    # before-lapping sample; the result must match the invented shape to within the noise:
    # 0.15 arcsec over 100 mm is 0.073 µm per step (REFERENCE.md s. 10 item 2 scaled), so a few
    # tenths of a µm at most after integration over 8 steps (REFERENCE.md s. 1, bridge random walk).
    mod, folder = _load_make_samples()
    s = read_survey(folder / "plate-KY-P3-2024-03-11.toml")
    obs = observations(s)
    n = len(s.stations)
    a = np.zeros((obs.value_um.size, n + len(s.lines)))
    r = np.arange(obs.value_um.size)
    a[r, obs.i_to] += 1.0
    a[r, obs.i_from] -= 1.0
    a[r, n + obs.line] = obs.base_mm
    h = np.linalg.lstsq(a, obs.value_um, rcond=None)[0][:n]
    truth = mod._p3_shape(s.x_mm, s.y_mm)
    m = np.column_stack([np.ones(n), s.x_mm, s.y_mm])
    d = h - truth
    d = d - m @ np.linalg.lstsq(m, d, rcond=None)[0]
    assert np.sqrt(np.mean(d**2)) < 0.15  # measured 0.06 µm; the lapped files differ by 0.37 µm
    assert np.ptp(truth - m @ np.linalg.lstsq(m, truth, rcond=None)[0]) > 2.0  # the shape is well above the noise


def test_unknown_unit_message_reads_correctly(tmp_path):
    # "for a autocollimator" read badly: the article follows the instrument's name
    bad = _uj_text().replace('unit = "arcsec"', 'unit = "furlong"')
    e = _err(tmp_path, bad, UnitError)
    assert "for an autocollimator" in e.message and "arcsec" in e.fix
    assert f"line {_line_of(bad, 'furlong')}" in e.where


def _first_reading(text, line, value):
    m = re.search(rf'name = "{line}"\n(?:#.*\n)?steps = \d+\nreadings = \[([^,\]]*),', text)
    return text.replace(m.group(0), m.group(0).replace(m.group(1), value))


@pytest.mark.parametrize(
    "unit, reports, ok, bad",
    [
        # 0.02 rad = 0.02 * 648000 / pi arcsec = 4125.3 arcsec (1 arcsec = pi/648000 rad, exact)
        ("arcsec", "mirror-tilt", "4125.0", "4126.0"),
        ("arcsec", "beam-deviation", "8250.0", "8252.0"),  # beam deviation is twice the tilt
        ("urad", "mirror-tilt", "-19999.0", "-20001.0"),
        ("mm/m", "mirror-tilt", "20.0", "20.01"),
        ("arcsec", "mirror-tilt", None, "1e308"),  # gave a 31 218 µm minimum zone
        ("arcsec", "mirror-tilt", None, "400000.0"),  # tan changes sign: gave 169 mm
    ],
)
def test_implausible_slope_is_refused(tmp_path, unit, reports, ok, bad):
    # Limit: 20 mm/m = 0.02 rad (common practice, no single source; flatcheck.survey.MAX_SLOPE_RAD)
    text = _uj_text().replace('unit = "arcsec"', f'unit = "{unit}"').replace('reports = "mirror-tilt"', f'reports = "{reports}"')
    if ok is not None:
        p = tmp_path / "ok.toml"
        p.write_text(_first_reading(text, "S-N", ok))
        read_survey(p)
    t2 = _first_reading(text, "S-N", bad)
    e = _err(tmp_path, t2, InputValueError)
    assert "reading 1 of line 'S-N'" in e.message and "20 mm/m" in e.message
    assert f"line {_line_of(t2, 'readings = .' + re.escape(bad))}" in e.where and "readings" in e.where
    assert "unit" in e.fix


def _indicator_text():
    plan = PLANS["indicator"]()  # 80 x 80 mm, 10 mm pitch, heights in µm
    return format_survey(simulate_survey(plan, _surface))


@pytest.mark.parametrize("first, second, what", [("0.0", "199.0", None), ("0.0", "201.0", "heights 1 and 2"),
                                                 ("2e10", "2e10", "height 1")])
def test_implausible_indicator_heights_are_refused(tmp_path, first, second, what):
    # 10 mm pitch x 20 mm/m = 200 µm between neighbours (common practice, no single source)
    text = _indicator_text()
    m = re.search(r'name = "row-1"\n(?:#.*\n)?steps = \d+\nreadings = \[([^,\]]*), ([^,\]]*),', text)
    new = m.group(0).replace(f"[{m.group(1)}, {m.group(2)}", f"[{first}, {second}")
    t2 = text.replace(m.group(0), new)
    if what is None:
        p = tmp_path / "ok.toml"
        p.write_text(t2)
        read_survey(p)
        return
    e = _err(tmp_path, t2, InputValueError)
    assert what in e.message and "'row-1'" in e.message and "readings" in e.where


def test_inch_free_lines_off_the_surface_speak_inches(tmp_path):
    # the error said "give positions in mm" to a file written in inches
    plan = plan_lines([("a", (25.4, 25.4), (508.0, 25.4), 4), ("b", (25.4, 25.4), (25.4, 127.0), 2)],
                      length_mm=609.6, width_mm=152.4, instrument=Instrument("level", "um/m"))
    text = format_survey(plan, inches=True)
    assert "start_in = [1.0, 1.0]" in text and "end_in = [20.0, 1.0]" in text and "start_mm" not in text
    bad = text.replace("end_in = [20.0, 1.0]", "end_in = [30.0, 1.0]")
    e = _err(tmp_path, bad, LayoutError)
    assert "(30, 1) in is off the 24 x 6 in surface" in e.message
    assert "inches" in e.fix and "mm" not in e.fix


def test_inch_layout_errors_speak_inches(tmp_path):
    plan = plan_union_jack(40 * 25.4, 30 * 25.4, 4 * 25.4, margin_mm=25.4)
    text = format_survey(plan, inches=True)
    assert "foot_spacing_in = 4.0" in text and "margin_in = 1.0" in text
    e = _err(tmp_path, text.replace("steps_x = 8", "steps_x = 10"), LayoutError)
    assert "4 in" in e.message and " mm" not in e.message
    assert f"line {_line_of(text, 'steps_x')}" in e.where
    e = _err(tmp_path, text.replace("margin_in = 1.0", "margin_in = 16.0"), LayoutError)
    assert "16 in" in e.message and "margin_in" in e.where and " mm" not in e.message + e.fix


@pytest.mark.parametrize("key", sorted(PLANS))
def test_inch_files_round_trip(tmp_path, key):
    plan = PLANS[key]()
    sim = simulate_survey(plan, _surface)
    p = tmp_path / "inch.toml"
    write_survey(p, sim, inches=True)
    text = p.read_text()
    assert not re.search(r"^(length|width|margin|foot_spacing|diagonal_foot_spacing|start|end)_mm", text, re.M)
    back = read_survey(p)
    assert [s.name for s in back.stations] == [s.name for s in sim.stations]
    np.testing.assert_allclose(back.x_mm, sim.x_mm, rtol=0, atol=1e-9)
    np.testing.assert_allclose(observations(back).value_um, observations(sim).value_um, rtol=1e-12, atol=1e-12)
    # written again, it stays in inches, unchanged
    write_survey(tmp_path / "again.toml", back)
    assert (tmp_path / "again.toml").read_text() == text
