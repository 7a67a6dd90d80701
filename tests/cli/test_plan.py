"""Tests of ``flatcheck plan``."""

import json
import math

import pytest

from flatcheck.io.survey_toml import read_survey


def _one_line_error(code, out, err):
    assert code == 2
    assert "Traceback" not in err and "Traceback" not in out
    assert len(err.strip().splitlines()) == 1
    assert err.startswith("flatcheck: error:")


def test_plan_union_jack_writes_blank(cli, tmp_path):
    out_file = tmp_path / "blank.toml"
    code, out, err = cli("plan", "--length-mm", 1000, "--width-mm", 630, "--foot-spacing-mm", 100, "-o", out_file)
    assert code == 0, err
    s = read_survey(out_file)
    assert s.pattern == "union-jack"
    assert [ln.name for ln in s.lines] == ["SW-NE", "SE-NW", "SW-SE", "NW-NE", "SW-NW", "SE-NE", "W-E", "S-N"]
    assert all(not ln.runs for ln in s.lines)
    # the second (diagonal) base is shown: 800 x 400 mm rectangle, 8 diagonal steps -> 111.80 mm (Pythagoras)
    assert f"{math.hypot(800, 400) / 8:.2f} mm" in out
    assert "45 stations" in out and "52 readings" in out
    assert "SW > SW-NE.1" in out  # the reading sequence


def test_plan_refuses_overwrite(cli, tmp_path):
    p = tmp_path / "exists.toml"
    p.write_text("keep me")
    code, out, err = cli("plan", "--length-mm", 1000, "--width-mm", 630, "--foot-spacing-mm", 100, "-o", p)
    _one_line_error(code, out, err)
    assert "--force" in err and p.read_text() == "keep me"
    code, out, err = cli("plan", "--length-mm", 1000, "--width-mm", 630, "--foot-spacing-mm", 100, "-o", p, "--force")
    assert code == 0 and read_survey(p).pattern == "union-jack"


def test_plan_json(cli):
    code, out, err = cli(
        "plan", "--pattern", "grid", "--length-mm", 460, "--width-mm", 360, "--foot-spacing-mm", 100,
        "--instrument", "level", "--json",
    )
    assert code == 0, err
    data = json.loads(out)  # exactly one JSON object
    assert data["pattern"] == "grid"
    assert data["instrument"]["unit"] == "um/m"
    # 400 mm / 100 -> 4 steps, 300 / 100 -> 3 steps: 5 x 4 = 20 stations, 4 rows x 4 steps + 5 cols x 3 steps = 31
    assert data["n_stations"] == 20 and data["readings_per_pass"] == 31
    assert len(data["sequence"]) == 31
    assert data["output"] is None


@pytest.mark.parametrize(
    "args, needle",
    [
        (("--length-mm", 100, "--width-mm", 100, "--foot-spacing-mm", 100), "foot spacing"),
        (("--length-mm", 1000, "--width-mm", 630, "--foot-spacing-mm", 0), "positive"),
        (("--length-mm", 1000, "--width-mm", 630, "--foot-spacing-mm", 100, "--unit", "furlong"), "furlong"),
        (("--pattern", "grid", "--length-mm", 1000, "--width-mm", 630, "--foot-spacing-mm", 100, "--diagonals"), "square"),
        (("--pattern", "zigzag", "--length-mm", 1000, "--width-mm", 630, "--foot-spacing-mm", 100), "zigzag"),
        (("--length-mm", 1000, "--width-mm", 630, "--foot-spacing-mm", 100, "-o", "/no/such/dir/x.toml"), "does not exist"),
    ],
)
def test_plan_bad_input(cli, args, needle):
    code, out, err = cli("plan", *args)
    _one_line_error(code, out, err)
    assert needle in err
