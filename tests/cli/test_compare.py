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


def one_line_error(code, out, err):
    assert code == 2
    assert out == ""
    assert err.count("\n") == 1 and err.startswith("flatcheck: error:")
    assert "Traceback" not in err


def test_unmatched_surveys_stop_naming_the_node(cli, tmp_path, pair):
    before, after, log, x, y, removed = pair
    x2 = x.copy()
    x2[30] += 3.0
    other = write_csv(tmp_path / "other.csv", x2, y, np.zeros(x.size))
    code, out, err = cli("compare", before, other)
    one_line_error(code, out, err)
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
def test_bad_options_one_line(cli, pair, extra):
    before, after, log, *_ = pair
    args = [str(log) if a == "LOG" else a for a in extra]
    one_line_error(*cli("compare", before, after, *args))


def test_bad_log_one_line(cli, pair, tmp_path):
    before, after, *_ = pair
    bad = tmp_path / "badlog.csv"
    bad.write_text("x,y,t\n1,2,3\n", encoding="utf-8")
    one_line_error(*cli("compare", before, after, "--log", bad, "--lap-diameter-mm", "100"))
    bad.write_text("x_mm,y_mm,minutes\n1,2,-3\n", encoding="utf-8")
    one_line_error(*cli("compare", before, after, "--log", bad, "--lap-diameter-mm", "100"))
    one_line_error(*cli("compare", before, tmp_path / "missing.csv"))
