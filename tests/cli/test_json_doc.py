"""docs/json-output.md names every key the commands print with --json (reduce, grade, bearing, plan, lap, compare,
report)."""

import json
import re
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
SAMPLES = ROOT / "sample_readings"


def _section(command):
    text = (ROOT / "docs" / "json-output.md").read_text(encoding="utf-8")
    start = text.index(f"## `flatcheck {command}")
    end = text.find("\n## ", start + 1)
    return text[start : end if end > 0 else None]


def _keys(obj, out=None):
    out = set() if out is None else out
    if isinstance(obj, dict):
        for k, v in obj.items():
            out.add(k)
            _keys(v, out)
    elif isinstance(obj, list):
        for v in obj:
            _keys(v, out)
    return out


RUNS = {
    "grade": [
        (SAMPLES / "plate-KY-P3-2024-03-11.toml", "-s", "din-876", "--trials", "300", "--seed", "1", "--units", "in"),
        (SAMPLES / "plate-KY-P7-grid.toml", "-s", "asme", "--no-uncertainty", "--repeat-radius-mm", "100",
         "--repeat-tolerance-um", "1", "--units", "in"),
    ],
    "bearing": [
        (SAMPLES / "guideway-KY-G1.toml", "--bearing", SAMPLES / "bearing_tandem_slide.toml", "--supply-kpa", "500",
         "--permeability-m2", "1e-15", "--layer-mm", "5", "--film-mesh", "12", "--travel-start-mm", "400",
         "--travel-end-mm", "500"),
        (SAMPLES / "guideway-KY-G1.toml", "--pad", "d60", "--gap-um", "10", "--kind", "orifice", "--supply-kpa", "500",
         "--orifice-mm", "0.25", "--orifices", "4", "--film-mesh", "13", "--travel-start-mm", "400",
         "--travel-end-mm", "450", "--pad-face", SAMPLES / "pad-KY-B4-heights.csv"),
    ],
}
RUNS["lap"] = [
    (SAMPLES / "plate-KY-P7-grid.toml", "--target-um", "0.3", "--lap-diameter-mm", "60", "--rate-um-per-min", "0.2"),
    (SAMPLES / "pad-KY-B4-heights.csv", "--target-um", "0.2", "--lap-diameter-mm", "20", "--units", "in"),
]
RUNS["plan"] = [
    ("--length-mm", 1000, "--width-mm", 630, "--foot-spacing-mm", 100),  # autocollimator, forward and back runs
    ("--pattern", "grid", "--length-mm", 2000, "--width-mm", 400, "--foot-spacing-mm", 100, "--instrument", "level",
     "--single-run"),  # a long beam: its two-point supports
    ("--length-in", 48, "--width-in", 36, "--foot-spacing-in", 4, "--instrument", "indicator"),
]
RUNS["compare"] = [
    (SAMPLES / "plate-KY-P3-2024-03-11.toml", SAMPLES / "plate-KY-P3-after-lap-1.toml", "--dwell-min", "40",
     "--target-um", "1.5", "--lap-diameter-mm", "150"),
]
RUNS["report"] = [
    (SAMPLES / "guideway-KY-G1.toml", "-o", "{tmp}/g.pdf", "--trials", "200", "--standard", "din-876", "--pad",
     "120x80", "--gap-um", "8", "--target-um", "2", "--lap-diameter-mm", "80"),
]
PINNED = {
    "grade": ("standard", "length_used_mm", "flatness_um", "expanded_uncertainty_um", "grades", "grade",
              "tolerance_um", "verdict"),
    "bearing": ("limit_um", "local_flatness_max_um", "verdict", "motion", "stations"),
    "lap": ("removal", "removed_volume_mm3", "predicted_flatness_um", "passes"),
    "plan": ("stations", "lines", "sequence"),
    "compare": (),
    "report": (),
}


@pytest.mark.parametrize("command", sorted(RUNS))
def test_every_json_key_is_documented(cli, command, tmp_path):
    section = _section(command)
    keys = set()
    for args in RUNS[command]:
        args = [str(a).replace("{tmp}", str(tmp_path)) for a in args]
        code, out, err = cli(command, *args, "--json")
        assert code == 0, err
        keys |= _keys(json.loads(out))
    missing = sorted(k for k in keys if f"`{k}`" not in section)
    assert not missing, f"keys of {command} --json missing from docs/json-output.md: {missing}"
    for k in PINNED[command]:
        assert re.search(rf"`{k}`[^\n]*\*\*pinned\*\*", section), k


def test_every_reduce_json_key_is_documented(cli, tmp_path):
    # docs/json-output.md must name every key `flatcheck reduce --json` prints
    section = _section("reduce")
    plate = (SAMPLES / "plate-KY-P3-2024-03-11.toml").read_text(encoding="utf-8")
    mis_keyed = tmp_path / "mis.toml"
    mis_keyed.write_text(plate.replace("17.24", "71.24"), encoding="utf-8")
    keys = set()
    for args in [
        (SAMPLES / "plate-KY-P3-2024-03-11.toml", "--uncertainty", "--trials", "300", "--seed", "1", "--units", "in"),
        (SAMPLES / "plate-KY-P3-2024-03-11.toml", "--method", "moody"),
        (SAMPLES / "pad-KY-B4-heights.csv", "--uncertainty", "--trials", "300", "--u-height-um", "0.02", "--units", "in", "--window", "d20"),
        (SAMPLES / "guideway-KY-G1.toml",),
        (SAMPLES / "plate-KY-P7-grid.toml",),
        (mis_keyed,),  # flagged readings, with their diagnosis
    ]:
        code, out, err = cli("reduce", *args, "--json")
        assert code == 0, err
        keys |= _keys(json.loads(out))
    missing = sorted(k for k in keys if f"`{k}`" not in section and f"`{k}`" not in section.replace(", `", "`, `"))
    assert not missing, f"keys of reduce --json missing from docs/json-output.md: {missing}"
    # the pinned keys are marked as such
    for k in ("nodes", "minimum_zone_um", "least_squares_um"):
        assert re.search(rf"`{k}`[^\n]*\*\*pinned\*\*", section), k
    # the doc says what the code does: peak, valley and RMS are about the least-squares plane
    assert "`peak_um + valley_um = least_squares_um`" in section
