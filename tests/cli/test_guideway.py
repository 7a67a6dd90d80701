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
def test_bad_input_one_line(cli, args, words, one_line_error):
    code, out, err = cli(*args)
    line = one_line_error(code, err)
    for w in words:
        assert w in line, line


def test_pad_on_an_unknown_face(cli, tmp_path, one_line_error):
    text = CARRIAGE.read_text().replace('face = "underside"', 'face = "bottom"', 1)
    bad = tmp_path / "c.toml"
    bad.write_text(text)
    code, out, err = cli("guideway", BODY, "--carriage", bad, *FAST)
    line = one_line_error(code, err)
    assert "'bottom'" in line and re.search(r"faces: 'top', 'underside'", line)


def _rail_csv(path, fn, *, width=60.0, length=1000.0):
    """A rail's form as a height-map CSV on a 50 x 10 mm grid (file y runs 0..width across the rail)."""
    lines = ["x_mm,y_mm,height_um"]
    for x in range(0, int(length) + 1, 50):
        for y in range(0, int(width) + 1, 10):
            lines.append(f"{x},{y},{fn(x, y):.6f}")
    path.write_text("\n".join(lines) + "\n")


def _two_rail_body(tmp_path, ident="R2 <rails>"):
    # Two tops 600 mm apart (centre lines at -300 and +300 mm). Each rail's own form is a gentle bow along x
    # (sagitta 0.5 µm over 1000 mm), which its survey shows; where the rails sit comes from the height readings
    # of rail B over rail A: 2 µm at x = 0 rising by 1 µm/m, read at x = 0, 500 and 1000 mm.
    bow = lambda x, y: 0.5 * (1.0 - ((x - 500.0) / 500.0) ** 2)  # noqa: E731
    _rail_csv(tmp_path / "rail-a.csv", bow)
    _rail_csv(tmp_path / "rail-b.csv", bow)
    body = tmp_path / "rails.toml"
    body.write_text(
        'format = "flatcheck-guideway"\nversion = 1\n\n[guideway]\nident = "' + ident + '"\nlength_mm = 1000\n\n'
        '[[face]]\nname = "rail-a"\nsurvey = "rail-a.csv"\nnormal = "+z"\ncentre_mm = -300.0\n\n'
        '[[face]]\nname = "rail-b"\nsurvey = "rail-b.csv"\nnormal = "+z"\ncentre_mm = 300.0\n\n'
        '[[height]]\nfaces = ["rail-a", "rail-b"]\nx_mm = [0, 500, 1000]\nacross_mm = [-300.0, 300.0]\n'
        'value_um = [2.0, 2.5, 3.0]\n'
    )
    return body


def test_two_rail_body(cli, tmp_path):
    body = _two_rail_body(tmp_path)
    code, out, err = cli("guideway", body, "--json")
    assert code == 0, err
    d = json.loads(out)
    assert d["guideway"]["ident"] == "R2 <rails>"  # user text kept literally
    (r,) = d["rails"]
    assert r["faces"] == ["rail-a", "rail-b"]
    # Closed form: the rails carry the same bow, so B - A is the tie line 2 + 1e-3 x µm: 2 to 3 µm over the travel,
    # and the bridge slope (wB - wA)/(sB - sA) changes by 1 µm over 600 mm = 1.667 µrad.
    assert r["height_difference_min_um"] == pytest.approx(2.0, abs=1e-6)
    assert r["height_difference_max_um"] == pytest.approx(3.0, abs=1e-6)
    assert r["twist_urad"] == pytest.approx(1e3 / 600.0, rel=1e-6)
    # each rail's straightness along the travel is its bow's sagitta (closed form: a parabola's minimum zone
    # about its chord is its sagitta, 0.5 µm)
    for f in d["faces"]:
        assert f["straightness_um"] == pytest.approx(0.5, abs=1e-6)


def test_two_rail_body_in_inches(cli, tmp_path):
    body = _two_rail_body(tmp_path)
    code, out, err = cli("guideway", body, "--units", "in")
    assert code == 0, err
    assert "R2 <rails>" in out  # printed literally, not read as markup
    m = re.search(r"height difference ([\d.]+) µin to ([\d.]+) µin", out)
    assert m, out
    # 1 in = 25.4 mm exactly (international yard and pound, 1959): 2 µm = 78.74 µin, 3 µm = 118.11 µin
    assert float(m.group(1)) == pytest.approx(2.0 / 0.0254, abs=0.06)
    assert float(m.group(2)) == pytest.approx(3.0 / 0.0254, abs=0.06)
    assert "µm" not in out.split("Rails")[1].split("\n")[0]


def test_pad_stiffness_weight_is_refused(cli, tmp_path, one_line_error):
    text = CARRIAGE.read_text()
    head, sep, tail = text.partition("[[carriage.pad]]\n")
    bad = tmp_path / "c.toml"
    bad.write_text(head + sep + "stiffness = 2.0\n" + tail)
    code, out, err = cli("guideway", BODY, "--carriage", bad, *FAST)
    line = one_line_error(code, err)
    assert "stiffness" in line and "c.toml" in line and "remove stiffness" in line


def _ink_free_margins(images):
    # nothing is drawn into the outer 2 % of a page's width (the house frame keeps 6 %): text running off the
    # page or a panel wider than the page would show there
    for k, img in enumerate(images, start=1):
        w = img.shape[1]
        edge = max(1, int(0.02 * w))
        assert img[:, :edge].min() > 0.9 and img[:, -edge:].min() > 0.9, f"page {k} has ink in its margin"


def test_report_pages(cli, tmp_path, pdf_tools):
    render, text_of = pdf_tools
    pdf = tmp_path / "g.pdf"
    code, out, err = cli("guideway", BODY, "--carriage", CARRIAGE, *FAST, "--report", pdf, "--json")
    assert code == 0, err
    d = json.loads(out)  # --json keeps standard output to the one object
    pages = text_of(pdf).split("\f")
    titles = ["Guideway", "Faces side by side", "Thickness along the beam", "Pad films along the travel",
              "Error motions of the carriage", "Methods, sources and cautions"]
    assert len(pages) == len(titles)
    for page, title in zip(pages, titles):
        assert title in page
    first = " ".join(pages[0].split())
    assert f"Verdict: {d['verdict'].upper()}" in first
    assert " ".join(d["reason"].split()) in first  # the one-line reason, as the JSON states it
    for a in d["advice"]:
        assert a["face"] in first
    assert all(p["name"] in " ".join(pages[3].split()) for p in d["carriage"]["pads"])
    last = " ".join(pages[-1].split())
    for words in ("rated lifting gear", "depressurise", "local codes", "licensed practice", "ISO 12781-1",
                  "ISO 1101", "ISO 230-1"):
        assert words in last, words
    images = render(pdf, dpi=40)
    assert all(img.min() < 0.5 for img in images)  # every page carries ink
    _ink_free_margins(images)


def test_report_of_a_body_alone_draws_user_text_literally(cli, tmp_path, pdf_tools):
    render, text_of = pdf_tools
    body = _two_rail_body(tmp_path, ident="R2 $x_1$ <rails>")
    pdf = tmp_path / "r.pdf"
    code, out, err = cli("guideway", body, "--report", pdf, "--units", "in")
    assert code == 0, err
    assert f"report written to {pdf}" in out
    pages = text_of(pdf).split("\f")
    assert len(pages) == 4  # guideway, faces, thickness and geometry, methods: no carriage pages
    assert "R2 $x_1$ <rails>" in pages[0]  # not read as mathtext
    assert "Verdict: none" in pages[0]
    assert "µin" in pages[2]  # the tables in the display units
    _ink_free_margins(render(pdf, dpi=40))


def test_report_may_not_overwrite_an_input(cli, tmp_path, one_line_error):
    body = _two_rail_body(tmp_path)
    before = (tmp_path / "rail-a.csv").read_bytes()
    code, out, err = cli("guideway", body, "--report", tmp_path / "rail-a.csv")
    line = one_line_error(code, err)
    assert "--report" in line
    assert (tmp_path / "rail-a.csv").read_bytes() == before
