"""Tests of ``flatcheck plan``."""

import json
import math
import re

import numpy as np
import pytest

from flatcheck.io import read_survey


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


def test_plan_refuses_overwrite(cli, tmp_path, one_line_error):
    p = tmp_path / "exists.toml"
    p.write_text("keep me")
    code, out, err = cli("plan", "--length-mm", 1000, "--width-mm", 630, "--foot-spacing-mm", 100, "-o", p)
    one_line_error(code, err, out=out)
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
def test_plan_bad_input(cli, args, needle, one_line_error):
    code, out, err = cli("plan", *args)
    one_line_error(code, err, out=out)
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
def test_plan_errors_name_the_option(cli, args, option, needle, one_line_error):
    code, out, err = cli("plan", *args)
    one_line_error(code, err, out=out)
    assert err.startswith(f"flatcheck: error: {option}:") and needle in err


def test_plan_refuses_absurd_foot_spacing_quickly(cli, one_line_error):
    # 0.01 mm (a slip for 100 mm) once built ~670 000 readings and printed 9 MB over 30 s.
    # 1000 x 630 mm less 30 mm margins: 94 000 x 57 000 steps of 0.01 mm -> far above the cap.
    import time

    t0 = time.perf_counter()
    code, out, err = cli("plan", "--length-mm", 1000, "--width-mm", 630, "--foot-spacing-mm", 0.01)
    one_line_error(code, err, out=out)
    assert "--foot-spacing-mm" in err and "readings per pass" in err
    assert time.perf_counter() - t0 < 5.0


def test_plan_output_checked_before_work(cli, tmp_path, one_line_error):
    # a folder given as the output file, and a missing folder: one-line errors naming --output
    code, out, err = cli("plan", "--length-mm", 1000, "--width-mm", 630, "--foot-spacing-mm", 100, "-o", tmp_path)
    one_line_error(code, err, out=out)
    assert "--output" in err and "folder" in err
    code, out, err = cli(
        "plan", "--length-mm", 1000, "--width-mm", 630, "--foot-spacing-mm", 100, "-o", tmp_path / "no" / "x.toml"
    )
    one_line_error(code, err, out=out)
    assert "does not exist" in err


def test_plan_failure_keeps_existing_file(cli, tmp_path, one_line_error):
    p = tmp_path / "exists.toml"
    p.write_text("keep me")
    code, out, err = cli("plan", "--length-mm", 1000, "--width-mm", 630, "--foot-spacing-mm", 0, "-o", p, "--force")
    one_line_error(code, err, out=out)
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
def test_plan_inch_errors_speak_inches(cli, args, option, needle, one_line_error):
    code, out, err = cli("plan", *args)
    one_line_error(code, err, out=out)
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
        ("--length-mm", 1000, "--width-mm", 630, "--foot-spacing-mm", 100, "--single-run"),
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

    runs = ("forward",) if "--single-run" in sizes else ("forward", "reverse")  # what plan writes
    sim = simulate_survey(read_survey(blank), _surface_um, runs=runs)
    text = blank.read_text()
    for ln in sim.lines:  # fill in the blank file line by line, run by run, as a user would
        at = text.index(f'name = "{ln.name}"')
        for run in ln.runs:
            at = text.index("readings = []", at)
            values = ", ".join(repr(float(r)) for r in run.readings)
            text = text[:at] + f"readings = [{values}]" + text[at + len("readings = []"):]
    assert "readings = []" not in text
    assert text.count('order = "reverse"') == (8 if len(runs) == 2 else 0)
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


def _inch_plate_um(x, y):
    """An invented 48 x 36 in plate (µm; x, y in mm): a shallow bowl with a twist, about 1 µm deep."""
    return 2e-6 * (x - 610) ** 2 + 1.5e-6 * (y - 457) ** 2 + 1e-6 * (x - 610) * (y - 457)


def _fill_with_a_slip(blank, runs, dest):
    """Readings of the invented plate (0.1 arcsec noise, shown to 0.1 arcsec), with line SW-SE's 5th step
    read as 1.4 arcsec keyed as 4.1 in its first run; returns the filled file."""
    from flatcheck.survey import simulate_survey

    sim = simulate_survey(read_survey(blank), _inch_plate_um, noise_sd=0.1, rng=1234, runs=runs)
    names = [ln.name for ln in sim.lines for _ in ln.runs]
    values = [[round(v, 1) for v in r.readings] for ln in sim.lines for r in ln.runs]
    first = names.index("SW-SE")
    # an offset common to every reading of a line is the autocollimator's zero for that line: it changes no
    # height, and it makes the 5th step read exactly 1.4 arcsec (a forward run lists its steps from SW)
    shift = 1.4 - values[first][4]
    for k, n in enumerate(names):
        if n == "SW-SE":
            values[k] = [round(v + shift, 1) for v in values[k]]
    assert values[first][4] == 1.4
    values[first][4] = 4.1  # the digits swapped as they were keyed
    text = blank.read_text()
    for r in values:  # each empty run in file order: line by line, run by run
        text = text.replace("readings = []", "readings = [" + ", ".join(repr(float(v)) for v in r) + "]", 1)
    assert "readings = []" not in text
    dest.write_text(text)
    return dest


def test_forward_and_back_runs_let_the_residuals_name_a_mis_keyed_reading(cli, tmp_path):
    # Regression (issue 19, item 2): on a 48 x 36 in plate read in single runs, 4.1 arcsec keyed for 1.4 was
    # not flagged; plan now writes a forward and a back run of every line, and the reduction's residual
    # check (data snooping, |w| > 3.29, the two-sided 0.1 % point of the normal distribution) names it.
    sizes = ("--length-in", 48, "--width-in", 36, "--foot-spacing-in", 4)
    both, one = tmp_path / "both.toml", tmp_path / "one.toml"
    assert cli("plan", *sizes, "-o", both)[0] == 0
    assert cli("plan", *sizes, "--single-run", "-o", one)[0] == 0
    assert both.read_text().count('order = "reverse"') == 8 and 'order = "reverse"' not in one.read_text()

    filled = _fill_with_a_slip(both, ("forward", "reverse"), tmp_path / "both-filled.toml")
    code, out, err = cli("reduce", filled, "--json")
    assert code == 0, err
    suspects = [o for o in json.loads(out)["residuals"]["outliers"] if o["group"] is not None and o["group"] >= 1]
    assert [(o["line"], o["run"], o["step"], o["reading"]) for o in suspects] == [("SW-SE", 1, 5, 4.1)]
    assert abs(suspects[0]["w"]) > 3.29
    code, out, err = cli("reduce", filled)
    out = " ".join(out.split())  # as one paragraph, whatever the terminal's width
    assert code == 0 and "suspect reading: line 'SW-SE', run 1, step 5" in out and "reading 4.1" in out

    # the same slip in single runs: nothing to compare it with, and the residuals stay quiet
    filled = _fill_with_a_slip(one, ("forward",), tmp_path / "one-filled.toml")
    code, out, err = cli("reduce", filled, "--json")
    assert code == 0, err
    assert not [o for o in json.loads(out)["residuals"]["outliers"] if o["reading"] == 4.1]


def test_plan_json_keeps_the_pinned_layout_and_adds_the_setup_sheet(cli):
    code, out, err = cli("plan", "--length-mm", 1000, "--width-mm", 630, "--foot-spacing-mm", 100, "--json")
    assert code == 0, err
    data = json.loads(out)
    # pinned (issue 19): stations with name, x_mm, y_mm; lines with name, steps, foot_spacing_mm and their
    # stations in order from the line's first station; the reading sequence
    pos = {s["name"]: (s["x_mm"], s["y_mm"]) for s in data["stations"]}
    assert len(pos) == data["n_stations"] == 45
    for ln in data["lines"]:
        assert {"name", "steps", "foot_spacing_mm", "stations"} <= set(ln)
        assert len(ln["stations"]) == ln["steps"] + 1
        steps = [r for r in data["sequence"] if r["line"] == ln["name"]]
        assert [r["from"] for r in steps] == ln["stations"][:-1] and [r["to"] for r in steps] == ln["stations"][1:]
        # consecutive stations one foot spacing apart (Pythagoras)
        gaps = [math.dist(pos[a], pos[b]) for a, b in zip(ln["stations"], ln["stations"][1:])]
        assert gaps == pytest.approx([ln["foot_spacing_mm"]] * ln["steps"])
    assert data["runs"] == ["forward", "reverse"]
    setup = data["setup"]
    assert [s["line"] for s in setup["lines"]] == [ln["name"] for ln in data["lines"]]  # the file's order
    assert all(s["runs"] == ["forward", "reverse"] for s in setup["lines"])
    sw_se = next(s for s in setup["lines"] if s["line"] == "SW-SE")
    # the autocollimator 150 mm behind SW on the line's extension (margin 30 mm: SW at x 100, y 115);
    # the mirror's centre is half a base past each station: 150 + 50 = 200 mm, 150 + 800 - 50 = 900 mm
    assert sw_se["instrument_mm"] == pytest.approx([100 - 150, 115]) and sw_se["on_surface"] is False
    assert sw_se["distance_mm"] == pytest.approx([200, 900])
    # time at the stated pace (30 s a reading, 5 min a line, 2 min a further run): 104 readings -> 52 min,
    # 8 lines -> 40 min, 8 back runs -> 16 min
    assert setup["readings"] == 104 and setup["minutes"] == pytest.approx(52 + 40 + 16)
    # three supports a fifth of the length and width in (common practice, no single source)
    assert [v for p in setup["three_point_mm"] for v in p] == pytest.approx([200, 126, 200, 504, 800, 315])
    assert setup["beam"] is None  # a plate, not a beam
    assert "lifting gear" in setup["caution"] and "common practice" in setup["notes"][1]


def test_plan_prints_the_setup_sheet(cli, monkeypatch):
    monkeypatch.delenv("COLUMNS", raising=False)  # as written to a file: no wrapping inside the table's cells
    code, out, err = cli("plan", "--length-mm", 1000, "--width-mm", 630, "--foot-spacing-mm", 100)
    assert code == 0, err
    assert "Set-up sheet" in out and "forward + back" in out and "104 readings in all" in out
    assert "lengths in mm" in out and "-50, 115 (beside)" in out and "200-900" in out
    assert "about 1 h 48 min for 104 readings" in out and "common practice, no single source" in out
    assert "(200, 126 mm); (200, 504 mm); (800, 315 mm)" in out
    assert "Soak:" in out and "24 h" in out and "Caution:" in out and "lifting gear" in out
    code, out, err = cli("plan", "--length-mm", 1000, "--width-mm", 630, "--foot-spacing-mm", 100, "--single-run")
    assert code == 0 and "one forward run of each line (--single-run)" in out and "forward + back" not in out
    assert "about 1 h 06 min for 52 readings" in out  # 26 + 40 + 0 min


def test_plan_setup_sheet_of_a_long_beam_gives_airy_and_bessel_points(cli, monkeypatch):
    monkeypatch.delenv("COLUMNS", raising=False)
    args = ("plan", "--pattern", "grid", "--length-mm", 2000, "--width-mm", 400, "--foot-spacing-mm", 100,
            "--instrument", "level")
    code, out, err = cli(*args, "--json")
    assert code == 0, err
    beam = json.loads(out)["setup"]["beam"]
    # Airy points L/sqrt(3) apart (zero end slope of a uniform beam on two supports; G.B. Airy 1845, beam
    # theory); Bessel points 0.5594 L apart (from memory)
    assert beam["airy_spacing_mm"] == pytest.approx(2000 / math.sqrt(3))
    assert beam["airy_from_end_mm"] == pytest.approx((2000 - 2000 / math.sqrt(3)) / 2)
    assert beam["bessel_spacing_mm"] == pytest.approx(0.5594 * 2000, abs=0.5)
    assert any("Airy" in s for s in beam["sources"]) and any("Bessel" in s for s in beam["sources"])
    code, out, err = cli(*args)
    assert code == 0 and "Airy points 423 mm from each end (1155 mm apart" in out and "Bessel points 441 mm" in out


def test_plan_setup_sheet_speaks_inches(cli, monkeypatch):
    monkeypatch.delenv("COLUMNS", raising=False)
    code, out, err = cli("plan", "--length-in", 48, "--width-in", 36, "--foot-spacing-in", 4)
    assert code == 0, err
    sheet = out[out.index("Set-up sheet"):]
    assert " mm" not in sheet and "(9.60, 7.20 in)" in sheet  # 0.2 x 48 in, 0.2 x 36 in
