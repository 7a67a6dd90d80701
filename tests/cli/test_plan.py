"""Tests of ``flatcheck plan``."""

import json
import math
import re

import numpy as np
import pytest

from flatcheck.io import read_survey


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


# ---------------------------------------------------------------- regressions found by trying the command as a new user


@pytest.mark.parametrize(
    "args, option, needle",
    [
        # layout errors name the command-line option, not the library's parameter name
        (("--length-mm", 0, "--width-mm", 630, "--foot-spacing-mm", 100), "--length-mm", "positive"),
        (("--length-mm", 1000, "--width-mm", -630, "--foot-spacing-mm", 100), "--width-mm", "positive"),
        (("--length-mm", 1000, "--width-mm", 630, "--foot-spacing-mm", "nan"), "--foot-spacing-mm", "positive"),
        # a margin wider than half the plate: said so, not "use a foot spacing of at most 0 mm"
        (("--length-mm", 1000, "--width-mm", 630, "--foot-spacing-mm", 100, "--margin-mm", 400), "--margin-mm", "315"),
        (("--pattern", "grid", "--length-mm", 1000, "--width-mm", 630, "--foot-spacing-mm", 100, "--diagonals"),
         "--diagonals", "square"),
    ],
)
def test_plan_errors_name_the_option(cli, args, option, needle):
    code, out, err = cli("plan", *args)
    _one_line_error(code, out, err)
    assert err.startswith(f"flatcheck: error: {option}:") and needle in err


def test_plan_refuses_absurd_foot_spacing_quickly(cli):
    # 0.01 mm (a slip for 100 mm) once built ~670 000 readings and printed 9 MB over 30 s.
    # 1000 x 630 mm less 30 mm margins: 94 000 x 57 000 steps of 0.01 mm -> far above the cap.
    import time

    t0 = time.perf_counter()
    code, out, err = cli("plan", "--length-mm", 1000, "--width-mm", 630, "--foot-spacing-mm", 0.01)
    _one_line_error(code, out, err)
    assert "--foot-spacing-mm" in err and "readings per pass" in err
    assert time.perf_counter() - t0 < 5.0


def test_plan_output_checked_before_work(cli, tmp_path):
    # a folder given as the output file, and a missing folder: one-line errors naming --output
    code, out, err = cli("plan", "--length-mm", 1000, "--width-mm", 630, "--foot-spacing-mm", 100, "-o", tmp_path)
    _one_line_error(code, out, err)
    assert "--output" in err and "folder" in err
    code, out, err = cli(
        "plan", "--length-mm", 1000, "--width-mm", 630, "--foot-spacing-mm", 100, "-o", tmp_path / "no" / "x.toml"
    )
    _one_line_error(code, out, err)
    assert "does not exist" in err


def test_plan_failure_keeps_existing_file(cli, tmp_path):
    p = tmp_path / "exists.toml"
    p.write_text("keep me")
    code, out, err = cli("plan", "--length-mm", 1000, "--width-mm", 630, "--foot-spacing-mm", 0, "-o", p, "--force")
    _one_line_error(code, out, err)
    assert p.read_text() == "keep me"


def test_autocollimator_grid_without_diagonals_is_warned_at_planning(cli, tmp_path):
    # reduce refuses such a survey (twist z = k*x*y is invisible to rows and columns read with an
    # instrument re-aimed per line); plan must say so before the survey is walked.
    blank = tmp_path / "grid.toml"
    args = ("plan", "--pattern", "grid", "--length-mm", 460, "--width-mm", 360, "--foot-spacing-mm", 100)
    code, out, err = cli(*args, "-o", blank)
    assert code == 0, err
    warn = [ln for ln in err.splitlines() if ln.startswith("flatcheck: warning:")]
    assert len(warn) == 1 and "twist" in warn[0] and "--diagonals" in warn[0] and "--instrument level" in warn[0]
    code, out, err = cli(*args, "--json")
    assert code == 0 and any("twist" in w and "--diagonals" in w for w in json.loads(out)["warnings"])
    # reduce, on that layout filled in, refuses it for the reason plan gave
    from flatcheck.io import write_survey
    from flatcheck.survey import simulate_survey

    filled = tmp_path / "filled.toml"
    write_survey(filled, simulate_survey(read_survey(blank), lambda x, y: 1e-5 * x * y))
    code, out, err = cli("reduce", filled)
    assert code == 2 and "twist" in err


@pytest.mark.parametrize(
    "extra",
    [
        ("--pattern", "grid", "--instrument", "level", "--width-mm", 360),
        ("--pattern", "grid", "--diagonals", "--width-mm", 460),
        ("--pattern", "grid", "--instrument", "indicator", "--width-mm", 360),
        ("--pattern", "union-jack", "--width-mm", 360),
    ],
)
def test_layouts_that_see_twist_are_not_warned(cli, extra):
    code, out, err = cli("plan", "--length-mm", 460, "--foot-spacing-mm", 100, *extra, "--json")
    assert code == 0, err
    assert json.loads(out)["warnings"] == [] and "warning" not in err


def test_plan_in_inches_writes_an_inch_blank_file(cli, tmp_path):
    blank = tmp_path / "inch.toml"
    code, out, err = cli("plan", "--length-in", 48, "--width-in", 36, "--foot-spacing-in", 4, "-o", blank)
    assert code == 0, err
    text = blank.read_text()
    for key in ("length_in = 48.0", "width_in = 36.0", "margin_in = 1.25", "foot_spacing_in = 4.0", "diagonal_foot_spacing_in"):
        assert key in text, key
    assert not re.search(r"^(length|width|margin|foot_spacing|diagonal_foot_spacing)_mm", text, re.M)
    assert "48 x 36 in" in out and "base in" in out and " mm" not in out
    # the same layout as the mm plan of the same sizes (1 in = 25.4 mm exactly, 1959)
    s_in = read_survey(blank)
    mm = tmp_path / "mm.toml"
    code, _, err = cli("plan", "--length-mm", 48 * 25.4, "--width-mm", 36 * 25.4, "--foot-spacing-mm", 4 * 25.4,
                       "--margin-mm", 1.25 * 25.4, "-o", mm)
    s_mm = read_survey(mm)
    assert [s.name for s in s_in.stations] == [s.name for s in s_mm.stations]
    assert np.allclose(s_in.x_mm, s_mm.x_mm, atol=1e-9) and np.allclose(s_in.y_mm, s_mm.y_mm, atol=1e-9)
    assert s_in.surface.length_mm == 48 * 25.4 and s_in.line("SW-SE").foot_spacing_mm == 4 * 25.4


@pytest.mark.parametrize(
    "args, option, needle",
    [
        (("--length-in", 48, "--width-in", 36, "--foot-spacing-in", 0), "--foot-spacing-in", "0 in"),
        (("--length-in", 48, "--width-in", 36, "--foot-spacing-in", 4, "--margin-in", 20), "--margin-in", "18 in"),
        (("--length-in", 48, "--width-in", 36, "--foot-spacing-in", 0.001), "--foot-spacing-in", "in inches"),
        (("--length-in", 48, "--width-in", 36), "--foot-spacing-mm", "--foot-spacing-in"),
        (("--length-in", 48, "--length-mm", 1000, "--width-in", 36, "--foot-spacing-in", 4), "--length-in", "once"),
    ],
)
def test_plan_inch_errors_speak_inches(cli, args, option, needle):
    code, out, err = cli("plan", *args)
    _one_line_error(code, out, err)
    assert err.startswith(f"flatcheck: error: {option}:") and needle in err
    assert not re.search(r"\d mm|is in mm", err), err  # no size stated in mm, no "check it is in mm"


def _surface_um(x, y):
    """A known surface (µm): bowl + twist + a local bump, x and y in mm."""
    return 2e-6 * (x - 500) ** 2 + 3e-6 * (x - 500) * (y - 300) + 0.7 * np.exp(-((x - 300) ** 2 + (y - 200) ** 2) / 80**2)


@pytest.mark.parametrize(
    "sizes",
    [
        ("--length-mm", 1000, "--width-mm", 630, "--foot-spacing-mm", 100),
        ("--length-in", 40, "--width-in", 24, "--foot-spacing-in", 4),
    ],
)
def test_plan_fill_reduce_gives_the_surface_back(cli, tmp_path, sizes):
    # The whole path a user walks: plan writes the blank file, its `readings = []` are filled in with
    # exact readings of a known surface (flatcheck.simulate), reduce gives the surface back.
    # Reference: the analytic surface itself, referred to its least-squares plane (numpy), since an
    # autocollimator survey cannot see the plane.
    blank = tmp_path / "blank.toml"
    code, out, err = cli("plan", *sizes, "-o", blank)
    assert code == 0, err
    from flatcheck.survey import simulate_survey

    sim = simulate_survey(read_survey(blank), _surface_um)
    text = blank.read_text()
    for ln in sim.lines:  # fill in the blank file line by line, as a user would
        m = re.search(rf'name = "{re.escape(ln.name)}"\n(?:.*\n)*?readings = \[\]', text)
        values = ", ".join(repr(float(r)) for r in ln.runs[0].readings)
        text = text[: m.start()] + m.group(0).replace("readings = []", f"readings = [{values}]") + text[m.end():]
    assert "readings = []" not in text
    filled = tmp_path / "filled.toml"
    filled.write_text(text)
    code, out, err = cli("reduce", filled, "--json")
    assert code == 0, err
    nodes = json.loads(out)["nodes"]
    x = np.array([n["x_mm"] for n in nodes])
    y = np.array([n["y_mm"] for n in nodes])
    z = np.array([n["height_um"] for n in nodes])
    truth = _surface_um(x, y)
    A = np.column_stack([np.ones_like(x), x, y])
    truth = truth - A @ np.linalg.lstsq(A, truth, rcond=None)[0]
    assert len(nodes) == len(sim.stations) and np.ptp(truth) > 0.5  # a shape well above the tolerance
    assert np.max(np.abs(z - truth)) < 1e-6
