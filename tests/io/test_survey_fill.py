"""Tests of flatcheck.io._survey_fill: readings written into a survey file's own text."""

import tomllib

import pytest

import flatcheck
from flatcheck.errors import InputFormatError, InputValueError, LayoutError, OutputError
from flatcheck.io._survey_fill import fill_text, format_readings, parse_form, read_form, save_form


def _blank(back=False):
    text = flatcheck.format_survey(flatcheck.plan_union_jack(1000.0, 630.0, 100.0))
    if back:
        text = text.replace('readings = []   # fill in, in the order taken\norder = "forward"',
                            '[[line.run]]\nreadings = []\norder = "forward"\n[[line.run]]\nreadings = []\n'
                            'order = "reverse"\nflip_sign = true')
    return text


def test_blank_plan_reads_as_runs_in_file_order():
    form = parse_form(_blank(back=True), source="p.toml")
    assert [r.line for r in form.runs][:4] == ["SW-NE", "SW-NE", "SE-NW", "SE-NW"]
    assert [(r.order, r.flip_sign, r.run_table) for r in form.runs[:2]] == [("forward", False, 0), ("reverse", True, 1)]
    assert all(r.readings == () for r in form.runs)
    assert form.runs[0].where.startswith("p.toml, line ") and "[[line.run]] 1" in form.runs[0].where
    assert not form.falls


def test_filling_keeps_comments_and_layout_and_reads_back_exactly():
    text = _blank().replace('[surface]', '# my own note, keep me\n[surface]')
    form = parse_form(text, source="p.toml")
    values = [tuple(0.1 * k + j for k in range(len_)) for j, len_ in enumerate((8, 8, 8, 8, 4, 4, 8, 4))]
    new = fill_text(form, values)
    assert "# my own note, keep me" in new
    # only the readings arrays changed: the texts agree outside them line for line
    old_lines, new_lines = text.splitlines(), new.splitlines()
    assert len(old_lines) == len(new_lines)
    assert [a for a, b in zip(old_lines, new_lines) if a != b] == [ln for ln in old_lines if ln.startswith("readings")]
    data = tomllib.loads(new)
    assert [tuple(item["readings"]) for item in data["line"]] == values  # floats read back exactly


def test_partial_runs_and_long_arrays_round_trip(tmp_path):
    p = tmp_path / "plan.toml"
    p.write_text(_blank())
    form = read_form(p)
    partial = [(1.25, -0.5, 3.0)] + [()] * 7
    form = save_form(form, partial)
    again = read_form(p)
    assert again.runs[0].readings == (1.25, -0.5, 3.0)
    # a long run is written over several lines; the text still parses and keeps its line count for the rest
    assert format_readings(range(10), "").count("\n") == 3
    assert format_readings([1, 2]) == "[1.0, 2.0]"
    with pytest.raises(InputValueError):
        format_readings([float("nan")])


def test_a_complete_fill_is_a_survey_reduce_accepts(tmp_path):
    p = tmp_path / "plan.toml"
    p.write_text(_blank())
    form = read_form(p)
    sim = flatcheck.simulate_survey(form.survey, lambda x, y: 1e-6 * (x - 500.0) ** 2, instrument_zero="random", rng=1)
    save_form(form, [ln.runs[0].readings for ln in sim.lines])
    back = flatcheck.read_survey(p)
    assert [ln.runs[0].readings for ln in back.lines] == [ln.runs[0].readings for ln in sim.lines]


def test_too_many_readings_name_the_file_line():
    text = _blank().replace("readings = []", "readings = [1, 2, 3, 4, 5, 6, 7, 8, 9]", 1)
    with pytest.raises(InputValueError) as exc:
        parse_form(text, source="p.toml")
    line_no = text.splitlines().index(next(ln for ln in text.splitlines() if ln.startswith("readings = [1"))) + 1
    assert f"p.toml, line {line_no}" in str(exc.value) and "9 readings but 8 steps" in str(exc.value)


def test_layout_errors_keep_their_line_numbers_after_blanking():
    # a multi-line readings array before the error must not shift the reported line
    text = _blank().replace("readings = []", "readings = [\n  1.0,\n  2.0,\n]", 1)
    text = text.replace('name = "S-N"', 'name = "S-X"')
    line_no = text.splitlines().index('name = "S-X"') + 1
    with pytest.raises(LayoutError) as exc:
        parse_form(text, source="p.toml")
    assert f"p.toml, line {line_no}" in str(exc.value)


def test_not_a_survey_and_unplaceable_runs_are_refused():
    with pytest.raises(InputFormatError):
        parse_form("x_mm,y_mm,height_um\n0,0,1\n", source="map.csv")
    inline = _blank().replace('readings = []   # fill in, in the order taken\norder = "forward"',
                              'run = [{readings = [], order = "forward"}]', 1)
    with pytest.raises(InputFormatError, match="cannot find where to write"):
        parse_form(inline, source="p.toml")


def test_a_file_changed_on_disk_is_not_overwritten(tmp_path):
    p = tmp_path / "plan.toml"
    p.write_text(_blank())
    form = read_form(p)
    p.write_text(_blank() + "\n# edited elsewhere\n")
    with pytest.raises(OutputError, match="changed on disk"):
        save_form(form, [(1.0,)] + [()] * 7)
    assert p.read_text().endswith("# edited elsewhere\n")
    assert [q.name for q in tmp_path.iterdir()] == ["plan.toml"]  # no temporary file left behind


def test_format_survey_writes_blank_forward_and_back_runs():
    # what `flatcheck plan` writes by default (issue 19, item 2): one [[line.run]] per planned run, each with
    # readings = [] and its order; the survey reader sees a blank plan, the entry sees 16 runs in file order
    from flatcheck.io import parse_survey

    survey = flatcheck.plan_union_jack(1000.0, 630.0, 100.0)
    text = flatcheck.format_survey(survey, blank_runs=("forward", "reverse"))
    assert text.count("[[line.run]]") == 16 and text.count('order = "reverse"') == 8
    assert all(not ln.runs for ln in parse_survey(text).lines)
    form = parse_form(text, source="p.toml")
    assert [(r.line, r.order) for r in form.runs] == [(ln.name, o) for ln in survey.lines for o in ("forward", "reverse")]
    # the readings typed into the text read back as the survey's runs, the back run as walked
    filled = fill_text(form, [[0.5] * 8 if r.line not in ("SW-NW", "SE-NE", "S-N") else [0.5] * 4 for r in form.runs])
    assert [len(ln.runs) for ln in parse_survey(filled).lines] == [2] * 8
    # without blank_runs, the one-run layout of before
    assert "[[line.run]]" not in flatcheck.format_survey(survey)
    for bad in ((), ("backward",)):
        with pytest.raises(InputValueError):
            flatcheck.format_survey(survey, blank_runs=bad)
