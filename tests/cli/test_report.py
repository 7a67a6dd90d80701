"""``flatcheck report``: exit codes, one-line errors, the files it writes."""

import json
from pathlib import Path

import numpy as np
import pytest

from flatcheck.form import HeightMap
from flatcheck.io import write_heightmap_csv


@pytest.fixture
def plate_csv(tmp_path):
    """A 600 x 400 mm height map: a 2 µm crown (invented shape) on a 7 x 5 grid."""
    x, y = np.meshgrid(np.linspace(0, 600, 7), np.linspace(0, 400, 5))
    z = 2.0 * (1 - ((x - 300) / 300) ** 2) * (1 - ((y - 200) / 200) ** 2)
    path = tmp_path / "crown.csv"
    write_heightmap_csv(path, HeightMap(x.ravel(), y.ravel(), z.ravel()))
    return path


def test_report_writes_pdf_and_pictures(cli, plate_csv, tmp_path, pdf_tools):
    pics = tmp_path / "pics"
    pics.mkdir()
    code, out, err = cli("report", plate_csv, "-o", tmp_path / "r.pdf", "--png", pics, "--json", "--standard", "din-876")
    assert code == 0 and "Traceback" not in err
    data = json.loads(out)  # exactly one JSON object on stdout
    assert data["pages"] >= 4
    # the pictures alone (issue 8): one file per figure, none for the text pages (summary, grades, sources)
    assert sorted(Path(p).name for p in data["png"]) == [
        "02-surface-3d.png", "02-surface-map.png", "03-local-flatness.png", "04-line-profiles-1-7.png"]
    assert sorted(pics.iterdir()) == sorted(Path(p) for p in data["png"])
    # Analytic: the crown peaks at 2 µm in the middle and is 0 along the edges, so its minimum zone
    # (through the zero edges, horizontal) is 2 µm.
    assert data["flatness_mz_um"] == pytest.approx(2.0, abs=1e-9)
    assert (tmp_path / "r.pdf").read_bytes()[:5] == b"%PDF-"
    assert all(p.startswith(str(pics)) for p in data["png"])
    # Source: DIN 876 form c (1 + L/1000), L = 600 mm longer side: grade 0 -> 4 x 1.6 = 6.4 µm
    assert {g["grade"]: g["tolerance_um"] for g in data["grades"]}["0"] == pytest.approx(6.4)
    render_pages, _ = pdf_tools  # pypdfium2, from the test extra: no system tools (issue 15, item 1)
    pages = render_pages(tmp_path / "r.pdf", dpi=20)
    assert len(pages) == data["pages"] and pages[0].shape[0] > 100


def test_report_human_summary(cli, plate_csv, tmp_path):
    code, out, err = cli("report", plate_csv, "-o", tmp_path / "r.pdf", "--units", "in", "--window", "none")
    assert code == 0 and "r.pdf" in out and "pages" in out


@pytest.mark.parametrize(
    "args",
    [
        ("-o", "report.txt"),  # not a PDF name
        ("-o", "missing-folder/r.pdf"),
        ("-o", "r.pdf", "--png", "crown.csv"),  # a file where the picture folder would be (a missing one is made)
        ("-o", "r.pdf", "--trials", "0"),
        ("-o", "r.pdf", "--standard", "no-such-standard"),
        ("-o", "r.pdf", "--pad", "80x40"),  # a pad without its gap
        ("-o", "r.pdf", "--window", "big"),
        ("-o", "r.pdf", "--target-um", "1", "--lap-size-mm", "80by40"),
    ],
)
def test_bad_options_are_one_line_errors(cli, plate_csv, tmp_path, monkeypatch, args, one_line_error):
    monkeypatch.chdir(tmp_path)
    code, out, err = cli("report", plate_csv, *args)
    one_line_error(code, err)
    assert not (tmp_path / "r.pdf").exists()


def test_missing_input_is_aone_line_error(cli, tmp_path, one_line_error):
    code, out, err = cli("report", tmp_path / "nothing.csv", "-o", tmp_path / "r.pdf")
    one_line_error(code, err)


SAMPLE = Path(__file__).resolve().parents[2] / "flatcheck" / "data" / "plate-KY-P3-2024-03-11.toml"


def test_reduce_grade_and_report_state_the_same_numbers(cli, tmp_path):
    """One input, one seed, one trial count: the three commands must agree (they share one evaluation)."""
    mc = ("--seed", "11", "--trials", "2000")
    code, out, err = cli("reduce", SAMPLE, "--uncertainty", "--json", *mc)
    assert code == 0, err
    red = json.loads(out)
    code, out, err = cli("grade", SAMPLE, "--standard", "din-876", "--uncertainty", "--json", *mc)
    assert code == 0, err
    grd = json.loads(out)
    code, out, err = cli("report", SAMPLE, "-o", tmp_path / "r.pdf", "--standard", "din-876", "--json", *mc)
    assert code == 0, err
    rep = json.loads(out)
    f = red["flatness"]
    assert rep["flatness_mz_um"] == f["minimum_zone_um"] == pytest.approx(grd["flatness_um"], abs=1e-12)
    assert rep["flatness_ls_um"] == f["least_squares_um"]
    assert rep["u_mz_um"] == f["expanded_uncertainty_um"] == grd["expanded_uncertainty_um"]
    assert rep["u_ls_um"] == f["least_squares_expanded_uncertainty_um"]
    assert rep["monte_carlo"] == {"trials": 2000, "seed": 11}
    assert [(ln["name"], ln["straightness_um"], ln["closure_um"]) for ln in rep["lines"]] == [
        (ln["name"], ln["straightness_um"], ln["closure_um"]) for ln in red["lines"]
    ]
    lf = red["local_flatness"]
    assert rep["local_flatness"] == {"window": lf["window"], "max_um": lf["max_um"], "x_mm": lf["x_mm"],
                                     "y_mm": lf["y_mm"]}
    assert [(g["grade"], g["tolerance_um"], g["verdict"].replace("-", " ")) for g in grd["grades"]] == [
        (g["grade"], g["tolerance_um"], g["verdict"]) for g in rep["grades"]
    ]
    # independent of all three: minimum zone of the reduced nodes by a direct scipy LP
    from scipy.optimize import linprog

    x = np.array([n["x_mm"] for n in red["nodes"]])
    y = np.array([n["y_mm"] for n in red["nodes"]])
    z = np.array([n["height_um"] for n in red["nodes"]])
    A = np.column_stack([np.ones(x.size), x, y])
    res = linprog([0, 0, 0, 1], A_ub=np.vstack([np.column_stack([A, np.zeros(x.size)]),
                                                 np.column_stack([-A, -np.ones(x.size)])]),
                  b_ub=np.concatenate([z, -z]), bounds=[(None, None)] * 4, method="highs")
    assert rep["flatness_mz_um"] == pytest.approx(res.x[3], abs=1e-6)


def test_lapping_page_takes_the_users_lap_and_rate(cli, plate_csv, tmp_path, pdf_tools):
    common = ("--target-um", "1", "--json", "--window", "none", "--lap-diameter-mm", "100")
    code, out, err = cli("report", plate_csv, "-o", tmp_path / "a.pdf", *common)
    assert code == 0, err
    assumed = json.loads(out)["lapping"]
    assert assumed["rate_assumed"] is True and assumed["lap"] == "round lap 100 mm, 1 µm per min"
    code, out, err = cli("report", plate_csv, "-o", tmp_path / "g.pdf", *common, "--rate-um-per-min", "0.5")
    assert code == 0, err
    given = json.loads(out)["lapping"]
    assert given["rate_assumed"] is False and given["lap"] == "round lap 100 mm, 0.5 µm per min"
    # Preston equation: removal = rate x time, so at half the (assumed 1 µm/min) rate the same lap needs twice the time
    assert given["total_time"] == pytest.approx(2 * assumed["total_time"], rel=1e-9)
    text = {name: pdf_tools[1](tmp_path / name) for name in ("a.pdf", "g.pdf")}
    assert "removal rate is assumed" in text["a.pdf"] and "removal rate is assumed" not in text["g.pdf"]
    assert "Removal rate as given by the user: 0.5 µm per min" in text["g.pdf"]


def test_lap_options_without_a_target_are_aone_line_error(cli, plate_csv, tmp_path, one_line_error):
    code, out, err = cli("report", plate_csv, "-o", tmp_path / "r.pdf", "--rate-um-per-min", "0.5")
    one_line_error(code, err)
    assert not (tmp_path / "r.pdf").exists()


@pytest.mark.parametrize(
    "args, option",
    [
        (("--lap-diameter-mm", "1e9"), "--lap-diameter-mm"),  # was a 22.7 TiB MemoryError (exit 3)
        (("--lap-diameter-mm", "10000"), "--lap-diameter-mm"),  # a 10 m lap on a 1 m plate was accepted silently
        (("--lap-size-mm", "1e6x1e6"), "--lap-size-mm"),
        (("--lap-diameter-mm", "-5"), "--lap-diameter-mm"),
        (("--lap-diameter-mm", "nan"), "--lap-diameter-mm"),
        (("--rate-um-per-min", "0"), "--rate-um-per-min"),
        (("--rate-um-per-pass", "inf"), "--rate-um-per-pass"),
        (("--rate-um-per-pass", "1", "--strokes-per-pass", "0"), "--strokes-per-pass"),
        (("--stroke-mm", "-1"), "--stroke-mm"),
    ],
)
def test_lap_options_are_checked_as_lap_checks_them(cli, tmp_path, args, option, one_line_error):
    code, out, err = cli("report", SAMPLE, "-o", tmp_path / "r.pdf", "--target-um", "1", "--no-uncertainty", *args)
    one_line_error(code, err)
    assert err.startswith(f"flatcheck: error: {option}:")
    assert not (tmp_path / "r.pdf").exists()


SAMPLES = Path(__file__).resolve().parents[2] / "sample_readings"


@pytest.mark.parametrize(
    "name, args, says",
    [
        ("guideway-KY-G1.toml", ("--pad", "120x80", "--gap-um", "8", "--target-um", "2", "--lap-diameter-mm", "80",
                                 "--rate-um-per-min", "0.2"),
         ("bench chart", "Lapping plan: passes", "Preston", "--window 120x120", "Verdict:")),
        ("pad-KY-B4-heights.csv", ("--u-height-um", "0.02", "--window", "d20", "--target-um", "0.2",
                                   "--lap-diameter-mm", "20"),
         ("bench chart", "Lapping plan: passes", "Local flatness")),
        ("plate-KY-P7-grid.toml", ("--units", "in", "--bearing", SAMPLES / "bearing_tandem_slide.toml"),
         ("Survey layout and closure (continued)", "µin", "Air bearing")),
    ],
)
def test_sample_reports_render_with_content_on_every_page(cli, tmp_path, name, args, says, pdf_tools):
    # issue 8: tests render the PDF's pages (pypdfium2 since issue 15) and check that each page has content, here for the
    # guideway, the pad and the grid samples with bearing and lapping options (few trials: quick)
    code, out, err = cli("report", SAMPLES / name, "-o", tmp_path / "r.pdf", "--trials", "200", "--seed", "1",
                         "--json", *args)
    assert code == 0, err
    data = json.loads(out)
    render_pages, pdf_text = pdf_tools
    # 50 dpi: pdfium's anti-aliased text is a grey blur at lower resolutions, too light for the blank-page check
    pages = render_pages(tmp_path / "r.pdf", dpi=50)
    assert len(pages) == data["pages"]
    for number, page in enumerate(pages, start=1):
        grey = page.mean(axis=2)
        body = grey[int(0.1 * grey.shape[0]) : int(0.9 * grey.shape[0])]  # between the running head and the footer
        assert (body < 0.5).mean() > 0.003 and body.std() > 0.05, f"page {number} looks blank"
    text = pdf_text(tmp_path / "r.pdf")
    for s in says:
        assert s in text, s


def test_report_names_its_slow_steps_on_a_status_line(cli, tmp_path, monkeypatch):
    # About two seconds passed between the Monte Carlo bar and the page bar with nothing shown: the air
    # bearing, the lapping plan and loading the plotting library now each say so while they run.
    from flatcheck.cli import _report_job

    said = []

    class Recorder(_report_job.StatusLine):
        def __init__(self, enabled=True):
            super().__init__(False)

        def say(self, text):
            said.append(text)

    # report_cmd imports StatusLine from _report_job when it runs (the command modules load little at start-up)
    monkeypatch.setattr(_report_job, "StatusLine", Recorder)
    code, out, err = cli("report", SAMPLES / "guideway-KY-G1.toml", "-o", tmp_path / "r.pdf", "--trials", "100",
                         "--pad", "120x80", "--gap-um", "8", "--target-um", "2", "--lap-diameter-mm", "80")
    assert code == 0, err
    steps = " | ".join(said)
    for step in ("reading guideway-KY-G1.toml", "evaluating the surface", "air bearing", "lapping plan",
                 "loading the plotting library"):
        assert step in steps
    assert err == ""  # not a terminal: nothing on stderr


def test_status_line_shows_only_on_a_terminal(monkeypatch):
    import io
    import sys

    from flatcheck.cli._report_job import StatusLine

    class Tty(io.StringIO):
        def isatty(self):
            return True

    for tty in (False, True):
        buf = Tty() if tty else io.StringIO()
        monkeypatch.setattr(sys, "stderr", buf)
        with StatusLine(True) as status:
            status.say("lapping plan: least removal")
        assert ("lapping plan: least removal" in buf.getvalue()) is tty


def test_report_never_writes_over_its_input(cli, plate_csv, tmp_path, one_line_error):
    # a height map is read whatever its name, so `report map.pdf -o map.pdf` would have replaced the input
    src = tmp_path / "map.pdf"
    src.write_bytes(plate_csv.read_bytes())
    code, out, err = cli("report", src, "-o", src, "--no-uncertainty")
    one_line_error(code, err)
    assert err.startswith("flatcheck: error: -o:") and src.read_bytes() == plate_csv.read_bytes()
    # nor can a picture replace an input that happens to carry a picture's name in the --png folder
    pics = tmp_path / "pics"
    pics.mkdir()
    src = pics / "02-surface-map.png"
    src.write_bytes(plate_csv.read_bytes())
    code, out, err = cli("report", src, "-o", tmp_path / "r.pdf", "--png", pics, "--no-uncertainty")
    one_line_error(code, err)
    assert err.startswith("flatcheck: error: --png:") and src.read_bytes() == plate_csv.read_bytes()


# ---------------------------------------------------------------- issue 19: set-up sheet page, supports before lapping
SAMPLES = Path(__file__).resolve().parents[2] / "sample_readings"


def _page_index(text, title):
    """Index of the first page whose title (the line after the running head, drawn last) is ``title``."""
    for k, page in enumerate(text.split("\f")):
        lines = [ln.strip() for ln in page.splitlines() if ln.strip()]
        head = next(i for i, ln in enumerate(lines) if ln.startswith("FLATNESS REPORT"))
        if lines[head + 1] == title:
            return k
    raise AssertionError(f"no page {title!r}")


def _page(text, title):
    """The text of the first page titled ``title``."""
    return text.split("\f")[_page_index(text, title)]


def test_a_survey_report_has_a_setup_sheet_page(cli, tmp_path, pdf_tools):
    render, text_of = pdf_tools
    blank = tmp_path / "plate.toml"
    code, out, err = cli("plan", "--length-mm", 1000, "--width-mm", 630, "--foot-spacing-mm", 100, "--material",
                         "granite", "-o", blank)
    assert code == 0, err
    from flatcheck.io import read_survey
    from flatcheck.survey import simulate_survey

    def bowl(x, y):  # invented: a 2 µm bowl
        return 8e-6 * (x - 500.0) ** 2 + 6e-6 * (y - 315.0) ** 2

    sim = simulate_survey(read_survey(blank), bowl, noise_sd=0.05, rng=1234, runs=("forward", "reverse"))
    text = blank.read_text()
    for r in (r for ln in sim.lines for r in ln.runs):  # each run in file order, as `flatcheck enter` fills them
        text = text.replace("readings = []", "readings = [" + ", ".join(f"{v:.2f}" for v in r.readings) + "]", 1)
    blank.write_text(text)
    pdf = tmp_path / "r.pdf"
    code, out, err = cli("report", blank, "-o", pdf, "--no-uncertainty")
    assert code == 0, err
    page = " ".join(_page(text_of(pdf), "Set-up sheet").split())  # wrapped lines joined
    # every line read forward and back, in the order of the file; the autocollimator 150 mm behind each line's
    # first station (SW at x 100, y 115 mm: -50, 115) with the mirror 150 + 50 = 200 to 150 + 800 - 50 = 900 mm away
    assert page.count("forward + back") == 8
    assert "-50, 115 (on a stand beside it)" in page and "200 to 900" in page
    # three supports a fifth of the length and width in (common practice, no single source); soak; the caution
    assert "(200, 126); (200, 504); (800, 315)" in page and "common practice, no single source" in page
    assert "Soak" in page and "24 h" in page and "lifting gear" in page and "Granite plates" in page
    assert "Airy" not in page  # a plate, not a long beam
    # the page is drawn: the supports on the outline take up ink
    pages = render(pdf)
    k = _page_index(text_of(pdf), "Set-up sheet")
    assert (pages[k][..., :3].mean(axis=2) < 128).mean() > 0.01


def test_a_height_map_report_has_no_setup_sheet(cli, plate_csv, tmp_path, pdf_tools):
    _, text_of = pdf_tools
    code, out, err = cli("report", plate_csv, "-o", tmp_path / "r.pdf")
    assert code == 0, err
    assert "Set-up sheet" not in text_of(tmp_path / "r.pdf")


def test_the_lapping_page_of_a_sagging_beam_says_supports_first(cli, tmp_path, pdf_tools):
    # the sample guideway (2000 x 200 mm, invented) bows symmetrically along its length, the middle low: check the
    # supports before any lapping (issue 19, item 6); its set-up sheet gives the Airy and Bessel points
    _, text_of = pdf_tools
    pdf = tmp_path / "g.pdf"
    code, out, err = cli("report", SAMPLES / "guideway-KY-G1.toml", "-o", pdf, "--no-uncertainty", "--target-um", "2",
                         "--lap-diameter-mm", "80")
    assert code == 0, err
    text = text_of(pdf)
    lapping = _page(text, "Lapping plan")
    assert "Supports first: a symmetric bow" in lapping and "the middle low" in lapping
    # heights to 0.01 µm: the level's 0.1 µm/m over the survey's shortest foot spacing resolves 0.006 µm
    assert lapping.index("Supports first") < lapping.index("Target 2.00 µm")
    summary = _page(text, "Summary")
    assert summary.index("Supports first") < summary.index("Target 2.00 µm")
    setup = " ".join(_page(text, "Set-up sheet").split())
    # Airy points L/sqrt(3) apart (beam theory): (2000 - 1154.7) / 2 = 423 mm from each end; Bessel 0.5594 L apart
    # (from memory): 441 mm from each end
    assert "Airy points 423 mm from each end (1155 mm apart" in setup and "Bessel points 441 mm" in setup
    # a plate lapped to a target: no such message
    code, out, err = cli("report", SAMPLES / "plate-KY-P3-2024-03-11.toml", "-o", tmp_path / "p.pdf",
                         "--no-uncertainty", "--target-um", "1", "--lap-diameter-mm", "150")
    assert code == 0, err
    assert "Supports first" not in text_of(tmp_path / "p.pdf")
