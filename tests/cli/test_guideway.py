"""``flatcheck guideway`` end to end on the sample beam KY-G2 (short travel and a coarse film mesh for speed)."""

import json
import re
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
SAMPLE = ROOT / "sample_readings" / "guideway-KY-G2"
BODY = SAMPLE / "body.toml"
CARRIAGE = SAMPLE / "carriage.toml"
FAST = ("--film-mesh", "8", "--travel-start-mm", "600", "--travel-end-mm", "640")


def _one_line_error(code, err):
    assert code == 2
    assert "Traceback" not in err
    lines = [ln for ln in err.splitlines() if ln.strip()]
    assert len(lines) == 1 and lines[0].startswith("flatcheck: error: ")
    return lines[0]


@pytest.fixture(scope="module")
def sample_json():
    from flatcheck.cli.main import run
    import contextlib
    import io

    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        code = run(["guideway", str(BODY), "--carriage", str(CARRIAGE), *FAST, "--json"])
    assert code == 0
    return json.loads(out.getvalue())


def test_pinned_json_keys(sample_json):
    d = sample_json
    assert d["command"] == "guideway"
    names = [f["name"] for f in d["faces"]]
    assert names == ["top", "underside", "side-right", "side-left"]
    assert all(isinstance(f["flatness_um"], float) for f in d["faces"])
    par = {tuple(p["faces"]): p["value_um"] for p in d["parallelism"]}
    assert ("underside", "top") in par and par[("underside", "top")] > 0  # [guideway] datum = "top"
    pads = d["carriage"]["pads"]
    assert len(pads) == 10 and {"name", "face", "min_film_um"} <= set(pads[0])
    assert {p["face"] for p in pads} == {"top", "underside", "side-right", "side-left"}
    motion = d["carriage"]["motion"]
    for key in ("pitch_arcsec", "yaw_arcsec", "roll_arcsec", "vertical_straightness_um", "horizontal_straightness_um"):
        assert isinstance(motion[key], float) and motion[key] >= 0
    assert d["verdict"] in ("fit", "marginal", "unfit")
    assert d["reason"] and "\n" not in d["reason"]
    assert d["carriage"]["solutions_per_pad_station"] <= 6.0


def test_every_json_key_is_documented(sample_json, cli):
    # docs/guideway.md names every key the command prints (as docs/json-output.md does for the other commands)
    text = (ROOT / "docs" / "guideway.md").read_text(encoding="utf-8")
    section = text[text.index("## JSON output"):]
    code, out, err = cli("guideway", BODY, "--json")
    keys = set()

    def walk(o):
        if isinstance(o, dict):
            for k, v in o.items():
                keys.add(k)
                walk(v)
        elif isinstance(o, list):
            for v in o:
                walk(v)

    walk(sample_json)
    walk(json.loads(out))
    missing = sorted(k for k in keys if f"`{k}`" not in section)
    assert not missing, f"keys missing from docs/guideway.md: {missing}"


def test_body_only_has_no_verdict(cli):
    code, out, err = cli("guideway", BODY, "--json")
    assert code == 0, err
    d = json.loads(out)
    assert d["carriage"] is None and d["verdict"] is None
    assert d["advice"]  # the sample's underside is wedged: lapping advice names it
    assert any(a["face"] == "underside" and a["reason"] == "parallelism" for a in d["advice"])


def test_summary_and_pictures(cli, tmp_path):
    code, out, err = cli("guideway", BODY, "--carriage", CARRIAGE, *FAST, "--plot", tmp_path / "g")
    assert code == 0, err
    assert "Verdict:" in out and "Caution:" in out
    for kind in ("faces", "thickness", "films", "motions"):
        data = (tmp_path / f"g-{kind}.png").read_bytes()
        assert data[:8] == b"\x89PNG\r\n\x1a\n"


@pytest.mark.parametrize(
    "args,words",
    [
        (("guideway", "missing.toml"), ["missing.toml", "no such file"]),
        (("guideway", BODY, "--gap-um", "5"), ["--gap-um", "no carriage"]),
        (("guideway", BODY, "--plot", "a", "--png", "."), ["--plot/--png"]),
        (("guideway", BODY, "--carriage", CARRIAGE, "--step-mm", "50"), ["step", "tenth"]),
        (("guideway", BODY, "--carriage", CARRIAGE, "--gap-um", "-1"), ["--gap-um", "positive"]),
        (("guideway", BODY, "--carriage", BODY), ["body.toml", "unknown key"]),
        (("guideway", BODY, "--carriage", CARRIAGE, "--travel-start-mm", "0"), ["travel", "within"]),
    ],
)
def test_bad_input_one_line(cli, args, words):
    code, out, err = cli(*args)
    line = _one_line_error(code, err)
    for w in words:
        assert w in line, line


def test_pad_on_an_unknown_face(cli, tmp_path):
    text = CARRIAGE.read_text().replace('face = "underside"', 'face = "bottom"', 1)
    bad = tmp_path / "c.toml"
    bad.write_text(text)
    code, out, err = cli("guideway", BODY, "--carriage", bad, *FAST)
    line = _one_line_error(code, err)
    assert "'bottom'" in line and re.search(r"faces: 'top', 'underside'", line)
