"""The PDF report: built from the bundled sample readings, rendered with pdftoppm, read back with pdftotext.

pdftoppm and pdftotext come with Debian's poppler-utils (installed by .ci/run). If they are missing the tests
fail with a message saying so; they never skip.
"""

import shutil
import subprocess
from pathlib import Path

import numpy as np
import pytest
from matplotlib.image import imread
from scipy.optimize import linprog, minimize_scalar

from flatcheck import report
from flatcheck.bearing import Carriage, Pad
from flatcheck.errors import InputValueError, OutputError
from flatcheck.evaluation import LoadedInput, evaluate_surface
from flatcheck.heightmap import HeightMap
from flatcheck.io.survey_toml import read_survey
from flatcheck.lapping import LapModel
from flatcheck.reduction import reduce_survey

SAMPLE = Path(report.__file__).parent / "data" / "plate-KY-P3-2024-03-11.toml"


def _tool(name):
    path = shutil.which(name)
    if path is None:
        pytest.fail(f"{name} is not installed: install Debian's poppler-utils (apt-get install poppler-utils)")
    return path


def _render(pdf: Path, out_dir: Path, dpi: int = 30) -> list:
    subprocess.run([_tool("pdftoppm"), "-png", "-r", str(dpi), str(pdf), str(out_dir / "page")], check=True)
    return sorted(out_dir.glob("page-*.png"))


def _text(pdf: Path) -> str:
    res = subprocess.run([_tool("pdftotext"), "-layout", str(pdf), "-"], check=True, capture_output=True, text=True)
    return res.stdout


def _page_text(draw, content, units):
    """Every text one page of the report draws (one figure, no PDF), joined into one string."""
    from flatcheck import plot

    fig = plot.new_figure()
    draw(fig, content, units)
    return " ".join(" ".join(t.get_text() for t in ax.texts) + " " + ax.get_title() for ax in fig.axes)


def _mz_reference(x, y, z):
    """Minimum-zone flatness by a direct linear program (scipy), independent of flatcheck's solvers."""
    n = x.size
    A = np.column_stack([np.ones(n), x - x.mean(), y - y.mean()])
    res = linprog([0, 0, 0, 1], A_ub=np.vstack([np.column_stack([A, np.zeros(n)]), np.column_stack([-A, -np.ones(n)])]),
                  b_ub=np.concatenate([z, -z]), bounds=[(None, None)] * 4, method="highs")
    return res.x[3]


def _loaded(path=SAMPLE):
    survey = read_survey(path)
    red = reduce_survey(survey)
    return LoadedInput(str(path), red.heightmap, survey, red)


def _map_report(hm, **kw):
    return report.analyse(evaluate_surface(LoadedInput("map.csv", hm), window="none"), **kw)


@pytest.fixture(scope="module")
def sample_report(tmp_path_factory):
    """The full report of the bundled sample: grades, a pad, a lapping target; pictures as PNG too."""
    tmp = tmp_path_factory.mktemp("report")
    ev = evaluate_surface(_loaded(), monte_carlo=dict(trials=2000, seed=7))
    carriage = Carriage.single(Pad("rect", 80.0, 40.0, 8.0))
    content = report.analyse(ev, standard="din-876", carriage=carriage, target_um=1.5,
                             lap=LapModel("round", diameter_mm=120.0, rate_um=1.0), lap_rate_assumed=True)
    pngs = tmp / "png"
    pngs.mkdir()
    files = report.write_report(tmp / "sample.pdf", content, png_dir=pngs, png_dpi=40)
    return content, files, tmp


def test_every_page_renders_with_content(sample_report):
    content, files, tmp = sample_report
    pages = _render(files.pdf, tmp)
    assert len(pages) == files.pages == len(report.page_titles(content))
    for page in pages:
        grey = imread(page)[..., :3].mean(axis=2)
        body = grey[int(0.1 * grey.shape[0]) : int(0.9 * grey.shape[0])]  # between the running head and the footer
        dark = (body < 0.5).mean()
        assert dark > 0.003, f"{page.name} looks blank ({dark:.4f} dark pixels)"
        assert body.std() > 0.05, f"{page.name} has no contrast"
    assert {"Summary", "Surface map", "Local flatness", "Survey layout and closure", "Grades and decision rule", "Lapping plan",
            "Air bearing: fitness and carriage motion", "Methods, sources and cautions"} <= set(report.page_titles(content))


def test_pictures_written_alone(sample_report):
    content, files, tmp = sample_report
    assert len(files.pngs) == files.pages - 1  # every page but the summary
    for p in files.pngs:
        grey = imread(p)[..., :3].mean(axis=2)
        assert (grey < 0.5).mean() > 0.003


def test_report_states_the_flatness_computed_independently(sample_report):
    content, files, _ = sample_report
    hm = content.heightmap
    text = _text(files.pdf)
    # reference: minimum zone by a direct scipy LP, least squares by numpy lstsq (peak to valley of residuals)
    mz = _mz_reference(hm.x_mm, hm.y_mm, hm.height_um)
    A = np.column_stack([np.ones(hm.n), hm.x_mm, hm.y_mm])
    r = hm.height_um - A @ np.linalg.lstsq(A, hm.height_um, rcond=None)[0]
    assert f"{mz:.3f} µm" in text
    assert f"{np.ptp(r):.3f} µm" in text
    assert content.u_mz_um is not None and content.u_mz_um > 0 and "JCGM 101" in text
    pages = files.pages
    assert f"page 1 of {pages}" in text and f"page {pages} of {pages}" in text
    # the cautions and the scope statement are printed
    assert "respirable crystalline silica" in text and "lifting gear" in text and "Compressed air" in text
    assert "only as it was when and where it was measured" in text
    assert "KY-P3" in text and "2024-03-11" in text


def test_grade_verdicts_follow_the_iso_14253_rule(sample_report):
    content, files, _ = sample_report
    F, U = content.mz.flatness_um, content.u_mz_um
    for g in content.grades:
        # Source: ISO 14253-1:2017 default rule (REFERENCE.md section 5, check value 24): conformity proven if
        # F <= T - U, non-conformity proven if F > T + U, otherwise undecided.
        expected = "conforms" if F <= g.tolerance_um - U else "does not conform" if F > g.tolerance_um + U else "undecided"
        assert g.verdict == expected
    # Source: DIN 876 form t = c (1 + L/1000) with L the longer side (REFERENCE.md 4.1, check value 14):
    # grade 0, L = 1000 mm -> 8.0 µm; grade 00 (c = 2, from memory) -> 4.0 µm.
    tol = {g.grade: g.tolerance_um for g in content.grades}
    assert tol["0"] == pytest.approx(8.0) and tol["00"] == pytest.approx(4.0)


def test_heightmap_report_matches_the_worked_3x3_example(tmp_path):
    x, y = np.meshgrid([0.0, 1.0, 2.0], [0.0, 1.0, 2.0])
    z = np.zeros_like(x)
    z[2, 2] = 1.0
    hm = HeightMap(x.ravel(), y.ravel(), z.ravel(), label="corner bump")
    content = _map_report(hm)
    files = report.write_report(tmp_path / "small.pdf", content)
    text = _text(files.pdf)
    # Source: REFERENCE.md check value 7 (derived with numpy): MZ 0.7500 µm, LS peak-to-valley 0.8333 µm
    assert "0.750 µm" in text and "0.833 µm" in text
    assert "not evaluated" in text  # a height map carries no reading uncertainty: said, not invented
    assert len(_render(files.pdf, tmp_path)) == files.pages


def test_straightness_of_a_parabola_is_a_quarter_of_its_sagitta():
    # Analytic: h = k s^2 on [0, L]; the minimum zone is parallel to the chord and its width is k L^2 / 4.
    x, y = np.meshgrid(np.linspace(0.0, 800.0, 17), np.linspace(0.0, 300.0, 4))
    hm = HeightMap(x.ravel(), y.ravel(), (2e-6 * x**2).ravel())
    content = _map_report(hm)
    rows = [ln for ln in content.lines if ln.name.startswith("y =")]
    assert rows
    for ln in rows:
        assert ln.straightness_um == pytest.approx(2e-6 * 800.0**2 / 4, rel=1e-9)
        assert ln.ref_slope_um_per_mm == pytest.approx(2e-6 * 800.0, rel=1e-9)  # chord slope


def test_line_straightness_matches_a_brute_force_search(sample_report):
    content, _, _ = sample_report
    assert len(content.lines) == 8
    for ln in content.lines:
        s, h = ln.s_mm, ln.height_um
        # reference: width of the zone minimised over the slope by scipy's bounded scalar search (convex in the slope)
        ref = minimize_scalar(lambda b: np.ptp(h - b * s), bounds=(-1, 1), method="bounded", options={"xatol": 1e-12})
        assert ln.straightness_um == pytest.approx(ref.fun, abs=1e-6)
        # the drawn zone: deviations from the reference mid-line span exactly the straightness
        dev = h - (ln.ref_offset_um + ln.ref_slope_um_per_mm * s)
        assert np.ptp(dev) == pytest.approx(ln.straightness_um, abs=1e-9)


def test_local_flatness_page_states_the_worst_window_checked_by_linear_programs(tmp_path, rng):
    # 600 x 400 mm grid at 50 mm; a 200 x 200 mm window moved in 50 mm steps has its edges on grid lines, so the
    # linear interpolant adds only points on straight segments between stations: the local flatness is the
    # minimum zone of the stations inside each window, found here by a direct scipy LP per position.
    x, y = np.meshgrid(np.arange(0.0, 601.0, 50.0), np.arange(0.0, 401.0, 50.0))
    z = rng.normal(0.0, 0.5, x.shape)
    hm = HeightMap(x.ravel(), y.ravel(), z.ravel(), label="bumpy map")
    content = report.analyse(evaluate_surface(LoadedInput("m.csv", hm), window="200x200"))
    best, where = -1.0, None
    for cx in np.arange(100.0, 501.0, 50.0):
        for cy in np.arange(100.0, 301.0, 50.0):
            inside = (np.abs(hm.x_mm - cx) <= 100.0 + 1e-9) & (np.abs(hm.y_mm - cy) <= 100.0 + 1e-9)
            t = _mz_reference(hm.x_mm[inside], hm.y_mm[inside], hm.height_um[inside])
            if t > best:
                best, where = t, (cx, cy)
    assert content.local.worst_um == pytest.approx(best, abs=1e-6)
    assert (content.local.worst_x_mm, content.local.worst_y_mm) == pytest.approx(where)
    assert "Local flatness" in report.page_titles(content)
    text = _page_text(report._page_local, content, "um")
    assert f"{best:.3f} µm" in text and "200 x 200 mm" in text
    assert f"x = {where[0]:.0f} mm, y = {where[1]:.0f} mm" in text


def test_uncertainty_note_follows_the_display_units(tmp_path):
    # a copy of the sample without the stated reading uncertainty: the note then quotes sigma0 in µm
    src = SAMPLE.read_text().replace("reading_uncertainty = 0.15", "")
    path = tmp_path / "no-u.toml"
    path.write_text(src)
    ev = evaluate_surface(_loaded(path), monte_carlo=dict(trials=500, seed=3))
    content = report.analyse(ev)
    um, uin = report.uncertainty_text(content, "um"), report.uncertainty_text(content, "in")
    lo, hi = ev.uncertainty.minimum_zone.interval_um
    s0 = ev.loaded.reduction.sigma0_um
    # 1 µin = 0.0254 µm exactly (international inch, 1959)
    assert f"{lo / 0.0254:.1f} µin to {hi / 0.0254:.1f} µin" in uin
    assert f"{s0 / 0.0254:.1f} µin" in uin and "µm" not in uin
    assert f"{lo:.3f} µm to {hi:.3f} µm" in um and f"{s0:.3f} µm" in um
    text = _page_text(report._page_summary, content, "in")
    assert f"{lo / 0.0254:.1f} µin" in text and f"{s0:.3f} µm" not in text


def test_a_lapping_target_needs_a_lap():
    x, y = np.meshgrid(np.arange(4.0) * 100, np.arange(3.0) * 100)
    hm = HeightMap(x.ravel(), y.ravel(), (x * y).ravel() * 1e-4)
    with pytest.raises(InputValueError):
        _map_report(hm, target_um=0.5)


def test_write_report_refuses_a_missing_picture_folder_and_keeps_the_old_pdf(tmp_path):
    x, y = np.meshgrid(np.arange(4.0) * 100, np.arange(3.0) * 100)
    hm = HeightMap(x.ravel(), y.ravel(), (x * y).ravel() * 1e-4)
    content = _map_report(hm)
    target = tmp_path / "r.pdf"
    target.write_bytes(b"old")
    with pytest.raises(OutputError):
        report.write_report(target, content, png_dir=tmp_path / "nope")
    assert target.read_bytes() == b"old"
    with pytest.raises(OutputError):
        report.write_report(tmp_path / "no-folder" / "r.pdf", content)


@pytest.mark.parametrize("size_mm", [(80.0, 80.0), (1000.0, 630.0), (2000.0, 200.0)])
def test_map_page_x_label_clear_of_the_3d_title(size_mm):
    # A square pad's map reached down so far that its x label ran into the 3-D view's title.
    # Checked on the drawn extents (matplotlib's renderer), for a square, a plate and a guideway.
    from flatcheck import plot

    L, W = size_mm
    x, y = np.meshgrid(np.linspace(0, L, 9), np.linspace(0, W, 9))
    z = 1e-3 * np.hypot(x - L / 2, y - W / 2)  # a shallow cone, µm (invented shape)
    hm = HeightMap(x.ravel(), y.ravel(), z.ravel(), length_mm=L, width_mm=W, label="cone")
    content = _map_report(hm)
    fig = plot.new_figure()
    report._page_map(fig, content, "um")
    fig.canvas.draw()
    r = fig.canvas.get_renderer()
    ax_map, ax3 = [a for a in fig.axes if a.name != "3d" and a.get_xlabel()][0], [a for a in fig.axes if a.name == "3d"][0]
    label_box = ax_map.xaxis.label.get_window_extent(r)
    from matplotlib.text import Text

    title = ax3.get_title(loc="left")
    assert title.startswith("the same surface in three dimensions")
    title_box = [t for t in ax3.findobj(Text) if t.get_text() == title][0].get_window_extent(r)
    assert label_box.y0 > title_box.y1, (label_box, title_box)
