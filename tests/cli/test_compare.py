"""Tests of ``flatcheck compare``: known removal and rate back, unmatched surveys, one-line errors."""

import json

import numpy as np
import pytest


def write_csv(path, x, y, z):
    lines = ["x_mm,y_mm,height_um"] + [f"{a:.6f},{b:.6f},{c:.9f}" for a, b, c in zip(x, y, z)]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def _grid(pitch=25.0):
    X, Y = np.meshgrid(np.arange(0, 600 + 1e-9, pitch), np.arange(0, 400 + 1e-9, pitch))
    return X.ravel(), Y.ravel()


@pytest.fixture
def pair(tmp_path, rng):
    """Before/after surveys: a round 100 mm lap at 0.2 µm/min worked 3 min at (200, 250) and 2 min at
    (400, 150); the after survey has its own height reference (another plane) and another node order."""
    x, y = _grid()
    zb = 1.5 * np.exp(-((x - 200) ** 2 + (y - 250) ** 2) / (2 * 90.0**2)) + rng.normal(0, 0.05, x.size)
    removed = 0.2 * (3.0 * (np.hypot(x - 200, y - 250) <= 50.0) + 2.0 * (np.hypot(x - 400, y - 150) <= 50.0))
    za = zb - removed + 4.0 + 0.003 * x - 0.001 * y
    order = rng.permutation(x.size)
    before = write_csv(tmp_path / "before.csv", x, y, zb)
    after = write_csv(tmp_path / "after.csv", x[order], y[order], za[order])
    log = tmp_path / "log.csv"
    log.write_text("# session 1\nx_mm,y_mm,minutes\n200,250,3\n400,150,2\n", encoding="utf-8")
    return before, after, log, x, y, removed


def test_known_removal_and_rate(cli, pair):
    before, after, log, x, y, removed = pair
    code, out, err = cli("compare", before, after, "--log", log, "--lap-diameter-mm", "100", "--json")
    assert code == 0, err
    doc = json.loads(out)
    got = {(c["x_mm"], c["y_mm"]): c["removed_um"] for c in doc["change"]}
    assert np.array([got[(a, b)] for a, b in zip(x, y)]) == pytest.approx(removed, abs=1e-6)
    # reference volume: numpy trapezoid rule on the grid
    xs, ys = np.unique(x), np.unique(y)
    vol = np.trapezoid(np.trapezoid(removed.reshape(ys.size, xs.size), xs, axis=1), ys) / 1000.0
    assert doc["removed_volume_mm3"] == pytest.approx(vol, rel=1e-6)
    assert doc["rate_um_per_min"] == pytest.approx(0.2, rel=1e-6)
    assert doc["dwell_min"] == pytest.approx(5.0)
    assert doc["safety"].startswith("Grinding")


def test_dwell_minutes_and_sessions(cli, pair):
    before, after, log, x, y, removed = pair
    code, out, err = cli("compare", before, after, "--dwell-min", "5", "--target-um", "0.5")
    assert code == 0, err
    assert "Removed" in out and "session" in out and "silica" in out
    code, out, err = cli("compare", before, after, "--dwell-min", "5", "--target-um", "0.5", "--json")
    doc = json.loads(out)
    assert doc["volume_rate_mm3_per_min"] == pytest.approx(doc["removed_volume_mm3"] / 5.0)
    assert doc["rate_um_per_min"] is None  # no lap size: no depth rate
    assert doc["sessions_to_target"] >= 1


def test_unmatched_surveys_stop_naming_the_node(cli, tmp_path, pair, one_line_error):
    before, after, log, x, y, removed = pair
    x2 = x.copy()
    x2[30] += 3.0
    other = write_csv(tmp_path / "other.csv", x2, y, np.zeros(x.size))
    code, out, err = cli("compare", before, other)
    one_line_error(code, err, out=out, quiet=True)
    assert f"point 31 at ({x[30]:g}, {y[30]:g}) mm" in err
    code, out, err = cli("compare", before, other, "--match-tol-mm", "5")
    assert code == 0


@pytest.mark.parametrize(
    "extra",
    [
        ("--dwell-min", "-2"),
        ("--dwell-min", "2", "--log", "LOG"),
        ("--log", "LOG"),  # no lap size
        ("--lap-diameter-mm", "100", "--lap-size-mm", "50x50"),
        ("--target-grade", "nonsense"),
        ("--match-tol-mm", "0"),
    ],
)
def test_bad_options_one_line(cli, pair, extra, one_line_error):
    before, after, log, *_ = pair
    args = [str(log) if a == "LOG" else a for a in extra]
    code, out, err = cli("compare", before, after, *args)
    one_line_error(code, err, out=out, quiet=True)


def test_bad_log_one_line(cli, pair, tmp_path, one_line_error):
    before, after, *_ = pair
    bad = tmp_path / "badlog.csv"
    bad.write_text("x,y,t\n1,2,3\n", encoding="utf-8")
    code, out, err = cli("compare", before, after, "--log", bad, "--lap-diameter-mm", "100")
    one_line_error(code, err, out=out, quiet=True)
    bad.write_text("x_mm,y_mm,minutes\n1,2,-3\n", encoding="utf-8")
    code, out, err = cli("compare", before, after, "--log", bad, "--lap-diameter-mm", "100")
    one_line_error(code, err, out=out, quiet=True)
    code, out, err = cli("compare", before, tmp_path / "missing.csv")
    one_line_error(code, err, out=out, quiet=True)


# ---------------------------------------------------------------- regressions found by trying the command as a new user


def _survey_file(path, ident, length_mm=600.0, width_mm=400.0, bump_um=1.0):
    """A Union Jack survey (level, exact readings) of a crowned surface, written as TOML."""
    from flatcheck.io import write_survey
    from flatcheck.survey import plan_union_jack
    from flatcheck.survey import simulate_survey
    from flatcheck.survey import Instrument, Surface

    plan = plan_union_jack(length_mm, width_mm, 100.0, instrument=Instrument("level", "um/m"),
                           surface=Surface("plate", length_mm, width_mm, ident=ident))
    s = simulate_survey(plan, lambda x, y: bump_um * np.exp(-((x - 300) ** 2 + (y - 200) ** 2) / 2e4))
    write_survey(path, s)
    return path


def test_surveys_of_different_surfaces_refused(cli, tmp_path, one_line_error):
    a = _survey_file(tmp_path / "a.toml", "P-1")
    b = _survey_file(tmp_path / "b.toml", "P-2", bump_um=0.5)
    code, out, err = cli("compare", a, b)
    one_line_error(code, err, out=out, quiet=True)
    assert "different surfaces" in err and "'P-1'" in err and "'P-2'" in err and str(a) in err and str(b) in err
    # same identity but another stated size: also another surface (the stations could match by chance)
    c = _survey_file(tmp_path / "c.toml", "P-1", length_mm=600.0, width_mm=430.0)
    code, out, err = cli("compare", a, c)
    one_line_error(code, err, out=out, quiet=True)
    assert "600 x 400 mm before, 600 x 430 mm after" in err
    # the same surface after lapping passes
    d = _survey_file(tmp_path / "d.toml", "P-1", bump_um=0.5)
    code, out, err = cli("compare", a, d, "--json")
    assert code == 0, err
    # exact level readings of z = b exp(...): the change is (0.5 - 1) exp(...) about planes; removal > 0
    assert json.loads(out)["removed_volume_mm3"] > 0


def test_unmatched_names_both_files(cli, pair, tmp_path, one_line_error):
    before, after, *_ = pair
    x, y = _grid(pitch=40.0)
    other = write_csv(tmp_path / "other.csv", x, y, np.zeros(x.size))
    code, out, err = cli("compare", before, other)
    one_line_error(code, err, out=out, quiet=True)
    assert f"{before} -> {other}:" in err


@pytest.mark.parametrize(
    "extra, option",
    [
        (("--dwell-min", "-2"), "--dwell-min"),
        (("--dwell-min", "nan"), "--dwell-min"),
        (("--match-tol-mm", "0"), "--match-tol-mm"),
        (("--dwell-min", "5", "--lap-diameter-mm", "0"), "--lap-diameter-mm"),
        (("--dwell-min", "5", "--lap-size-mm", "-100x50"), "--lap-size-mm"),
    ],
)
def test_bad_option_names_the_option(cli, pair, extra, option, one_line_error):
    before, after, *_ = pair
    code, out, err = cli("compare", before, after, *extra)
    one_line_error(code, err, out=out, quiet=True)
    assert err.startswith(f"flatcheck: error: {option}:")


def test_log_errors_name_the_log(cli, pair, tmp_path, one_line_error):
    before, after, *_ = pair
    log = tmp_path / "far.csv"
    log.write_text("x_mm,y_mm,minutes\n5000,3000,5\n", encoding="utf-8")  # 5 m away from a 600 x 400 mm surface
    code, out, err = cli("compare", before, after, "--log", log, "--lap-diameter-mm", "100")
    one_line_error(code, err, out=out, quiet=True)
    assert err.startswith(f"flatcheck: error: {log}:") and "under the lap" in err
    log.write_text("x_mm,y_mm,minutes\n200,250,0\n", encoding="utf-8")
    code, out, err = cli("compare", before, after, "--log", log, "--lap-diameter-mm", "100")
    one_line_error(code, err, out=out, quiet=True)
    assert err.startswith(f"flatcheck: error: {log}:") and "zero" in err
    log.write_text("", encoding="utf-8")
    code, out, err = cli("compare", before, after, "--log", log, "--lap-diameter-mm", "100")
    one_line_error(code, err, out=out, quiet=True)
    assert "x_mm,y_mm,minutes" in err and "survey" not in err  # the fix asks for a log, not a survey


def test_nothing_removed_gives_no_rate_to_use(cli, pair):
    before, *_ = pair
    code, out, err = cli("compare", before, before, "--dwell-min", "10", "--lap-diameter-mm", "100")
    assert code == 0, err
    text = " ".join(out.split())  # the console wraps at the terminal width
    assert "no removal rate can be calibrated" in text and "--rate-um-per-min" not in text


def test_swapped_files_warned(cli, pair):
    before, after, *_ = pair
    # after -> before: the lapped hill grows back (about 1.45 -> 1.54 µm here); flatness gets worse by more than 1 %
    code, out, err = cli("compare", after, before, "--dwell-min", "5", "--json")
    assert code == 0, err
    doc = json.loads(out)
    assert doc["flatness_after_um"] > doc["flatness_before_um"], (doc["flatness_before_um"], doc["flatness_after_um"])
    assert any("BEFORE AFTER" in n for n in doc["notes"])
    code, out, err = cli("compare", before, after, "--dwell-min", "5", "--json")
    assert not any("BEFORE AFTER" in n for n in json.loads(out)["notes"])


# ---------------------------------------------------------------- the change map in the summary


def _grid_pair(tmp_path, pitch):
    """Before/after height maps on a grid; 0.6 µm taken off a cross of five nodes about (200, 200) mm, the
    after survey on another plane. Returns the files and the known change (after - before, untouched = 0)."""
    X, Y = np.meshgrid(np.arange(0, 600 + 1e-9, pitch), np.arange(0, 400 + 1e-9, pitch))
    x, y = X.ravel(), Y.ravel()
    zb = 1.5 * np.exp(-((x - 200) ** 2 + (y - 250) ** 2) / (2 * 90.0**2))
    removed = 0.6 * (np.hypot(x - 200, y - 200) <= 120.0)
    za = zb - removed + 4.0 + 0.003 * x - 0.002 * y
    return write_csv(tmp_path / "gb.csv", x, y, zb), write_csv(tmp_path / "ga.csv", x, y, za), x, y, -removed


def test_summary_prints_the_change_map_on_a_grid(cli, tmp_path):
    before, after, x, y, change = _grid_pair(tmp_path, 100.0)
    code, out, err = cli("compare", before, after)
    assert code == 0, err
    lines = out.splitlines()
    k = next(i for i, line in enumerate(lines) if line.startswith("Change map"))
    head = lines[k + 1].split()
    assert head[:2] == ["y", "mm"] and [float(v) for v in head[2:]] == [0, 100, 200, 300, 400, 500, 600]
    rows = [lines[k + 2 + j].split() for j in range(5)]
    assert [float(r[0]) for r in rows] == [400, 300, 200, 100, 0]  # north at the top
    got = {(float(c), float(r[0])): float(v) for r in rows for c, v in zip(head[2:], r[1:])}
    # the known removal, constructed above: -0.6 on the five lapped nodes, 0 elsewhere
    assert [got[(a, b)] for a, b in zip(x, y)] == pytest.approx(change, abs=1e-3)
    # JSON: the same referred change at every node
    doc = json.loads(cli("compare", before, after, "--json")[1])
    ref = {(c["x_mm"], c["y_mm"]): c["change_referred_um"] for c in doc["change"]}
    assert [ref[(a, b)] for a, b in zip(x, y)] == pytest.approx(change, abs=1e-6)


def test_summary_without_a_printable_grid_says_where_the_map_is(cli, tmp_path, pair, monkeypatch):
    before, after, *_ = pair  # a 25 x 17 grid: wider than an 80-column terminal
    # an 80-column terminal; written to a pipe the grid is printed whole (issue 15, item 9)
    from flatcheck.cli import common

    monkeypatch.setattr(common, "_is_terminal", lambda stream: True)
    monkeypatch.setenv("COLUMNS", "80")
    code, out, err = cli("compare", before, after)
    assert code == 0, err
    text = " ".join(out.split())
    assert "Change map: the 425 nodes make a 25 x 17 grid, too large for this terminal" in text and "--json" in text
    a = _survey_file(tmp_path / "a.toml", "P-1")
    b = _survey_file(tmp_path / "b.toml", "P-1", bump_um=0.5)
    text = " ".join(cli("compare", a, b)[1].split())
    # not a grid: the change is printed by station name (issue 15, item 12), not only promised in --json
    assert "are not a regular grid" not in text and "Change at each station" in text


def test_a_small_remainder_is_a_touch_up_not_a_whole_session(cli, tmp_path):
    # The audit's case in small: after the session the surface is just above the target. The summary states the
    # share of this session's removal and the minutes at its rate, not "about 1 more session(s)".
    before, after, x, y, change = _grid_pair(tmp_path, 100.0)
    doc = json.loads(cli("compare", before, after, "--dwell-min", "10", "--json")[1])
    target = doc["flatness_after_um"] * 0.995
    code, out, err = cli("compare", before, after, "--dwell-min", "10", "--target-um", f"{target:.6f}", "--json")
    doc = json.loads(out)
    f = doc["sessions_to_target_fraction"]
    assert 0 < f < 0.1 and f == pytest.approx(doc["remaining_volume_mm3"] / doc["removed_volume_mm3"])
    assert doc["minutes_to_target"] == pytest.approx(10.0 * f)
    code, out, err = cli("compare", before, after, "--dwell-min", "10", "--target-um", f"{target:.6f}")
    text = " ".join(out.split())
    assert "more session" not in text and "touch-up" in text and "% of what this session removed" in text
    assert "at this session's rate" in text


def test_json_lap_has_no_placeholder_rate(cli, pair):
    # compare builds the lap from its size alone; its model's default rate (1 µm/min) must not appear beside
    # the calibrated rate as if it were one
    before, after, *_ = pair
    doc = json.loads(cli("compare", before, after, "--dwell-min", "5", "--lap-diameter-mm", "100", "--json")[1])
    assert "rate_um" not in doc["lap"] and "time_unit" not in doc["lap"]
    assert doc["lap"]["shape"] == "round" and doc["lap"]["diameter_mm"] == 100.0
    assert doc["lap"]["area_mm2"] == pytest.approx(np.pi * 50.0**2)  # area of a 100 mm disc
    assert doc["rate_um_per_min"] == pytest.approx(doc["removed_volume_mm3"] * 1000 / (np.pi * 50.0**2 * 5))
    doc = json.loads(cli("compare", before, after, "--lap-size-mm", "80x40", "--json")[1])
    assert doc["lap"] == {"shape": "rect", "diameter_mm": None, "length_mm": 80.0, "width_mm": 40.0, "area_mm2": 3200.0}
    assert json.loads(cli("compare", before, after, "--json")[1])["lap"] is None


def test_target_from_the_air_bearing_gap(cli, pair, one_line_error):
    # as in lap: the bearing limit is a fraction of the gap (common practice, no single source; default 1/4), so
    # an 8 µm gap gives the same estimate as --target-um 2, and 0.1 x 10 µm the same as --target-um 1
    before, after, *_ = pair
    base = ("compare", before, after, "--dwell-min", "5", "--json")
    for gap, num in ((("--target-gap-um", "8"), "2"), (("--target-gap-um", "10", "--gap-fraction", "0.1"), "1")):
        a = json.loads(cli(*base, *gap)[1])
        b = json.loads(cli(*base, "--target-um", num)[1])
        assert a["target_um"] == pytest.approx(float(num))
        assert a["remaining_volume_mm3"] == pytest.approx(b["remaining_volume_mm3"], rel=1e-12)
        assert "air-bearing limit" in a["target_source"]
    code, out, err = cli("compare", before, after, "--target-um", "1", "--gap-fraction", "0.3")
    one_line_error(code, err, out=out, quiet=True)
    assert err.startswith("flatcheck: error: --gap-fraction:")


def test_microinch_output_has_sensible_decimals(cli, pair):
    import re

    before, after, *_ = pair
    code, out, err = cli("compare", before, after, "--dwell-min", "5", "--target-um", "0.5", "--units", "in")
    assert code == 0, err
    assert re.findall(r"\d\.\d\d+ µin", out) == [] and "Target 19.7 µin" in out  # 0.5 / 0.0254 = 19.69 µin


def test_plot_writes_the_change_map(cli, tmp_path, pair, one_line_error):
    before, after, log, *_ = pair
    png = tmp_path / "change.png"
    code, out, err = cli("compare", before, after, "--plot", png)
    assert code == 0, err
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" and "picture written to" in out
    png.unlink()
    code, out, err = cli("compare", before, after, "--plot", png, "--json")
    assert code == 0 and json.loads(out)["command"] == "compare" and png.exists()  # stdout stays one JSON object
    # an output can never replace an input
    for victim in (before, after, log):
        text = victim.read_text(encoding="utf-8")
        extra = ("--log", log, "--lap-diameter-mm", "100") if victim == log else ()
        code, out, err = cli("compare", before, after, *extra, "--plot", victim)
        one_line_error(code, err, out=out, quiet=True)
        assert err.startswith("flatcheck: error: --plot:") and victim.read_text(encoding="utf-8") == text
    code, out, err = cli("compare", before, after, "--plot", tmp_path / "missing" / "c.png")
    one_line_error(code, err, out=out, quiet=True)
