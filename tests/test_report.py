"""The PDF report: built from the bundled sample readings, rendered and read back with pypdfium2.

pypdfium2 is a Python package of the ``test`` extra (``pip install ".[test]"``), so the tests need nothing but
Python (issue 15, item 1); the ``pdf_tools`` fixture in ``tests/conftest.py`` wraps it.
"""

import math
import re
from pathlib import Path

import numpy as np
import pytest
from matplotlib.image import imread
from scipy.optimize import linprog, minimize_scalar

from flatcheck.output import _report as report
from flatcheck.output import _report_content as report_content
from flatcheck.output import _report_pages as report_pages
from flatcheck.bearing import Carriage, Pad
from flatcheck.errors import InputValueError, OutputError
from flatcheck.evaluation import MeasuredSurface, evaluate_surface
from flatcheck.form import HeightMap
from flatcheck.io import read_survey
from flatcheck.lapping import LapModel
from flatcheck.survey import reduce_survey

SAMPLE = Path(report.__file__).parents[1] / "data" / "plate-KY-P3-2024-03-11.toml"


@pytest.fixture(scope="module")
def pdf(pdf_tools):
    """``pdf.render(path, out_dir, dpi)`` -> page PNG paths; ``pdf.text(path)`` -> the PDF's text."""
    render_pages, text = pdf_tools

    class _Pdf:
        @staticmethod
        def render(path: Path, out_dir: Path, dpi: int = 50) -> list:
            # 50 dpi: pdfium's anti-aliased text is a grey blur at 30 dpi, too light for the blank-page check
            return [Path(p) for p in render_pages(path, out_dir, dpi)]

        @staticmethod
        def text(path: Path) -> str:
            return text(path)

    return _Pdf


def _page_text(draw, content, units):
    """Every text one page of the report draws (one figure, no PDF), joined into one string."""
    from flatcheck.output import _plots as plot

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
    return MeasuredSurface(str(path), red.heightmap, survey, red)


def _map_report(hm, **kw):
    return report_content.analyse(evaluate_surface(MeasuredSurface("map.csv", hm), window="none"), **kw)


@pytest.fixture(scope="module")
def sample_report(tmp_path_factory):
    """The full report of the bundled sample: grades, a pad, a lapping target; pictures as PNG too."""
    tmp = tmp_path_factory.mktemp("report")
    ev = evaluate_surface(_loaded(), monte_carlo=dict(trials=2000, seed=7))
    carriage = Carriage.single(Pad("rect", 80.0, 40.0, 8.0))
    content = report_content.analyse(ev, standard="din-876", carriage=carriage, target_um=1.5,
                                     lap=LapModel("round", diameter_mm=120.0, rate_um=1.0), lap_rate_assumed=True)
    pngs = tmp / "png"
    pngs.mkdir()
    files = report.write_report(tmp / "sample.pdf", content, png_dir=pngs, png_dpi=40)
    return content, files, tmp


def test_every_page_renders_with_content(sample_report, pdf):
    content, files, tmp = sample_report
    pages = pdf.render(files.pdf, tmp)
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
    # issue 8: "--png DIR for the pictures alone": each figure on its own, cut out of its page (no running
    # head, footer, tables or notes), and nothing for the pages that are text only
    content, files, tmp = sample_report
    titles = report.page_titles(content)
    names = {p.name.split("-", 1)[1] for p in files.pngs}
    assert names == {"surface-map.png", "surface-3d.png", "local-flatness.png", "line-profiles-1-8.png",
                     "survey-layout.png", "reduction-residuals.png", "carriage-motion.png", "lapping-removal.png",
                     "lapping-dwell.png", "lapping-cell-chart.png", "uncertainty-budget.png",
                     "setup-supports.png"}  # the set-up sheet's supports on the outline (issue 19, item 5)
    pages_with_pictures = {titles[int(p.name[:2]) - 1] for p in files.pngs}
    assert not pages_with_pictures & {"Summary", "Grades and decision rule", "Methods, sources and cautions"}
    assert not any(t.startswith("Lapping plan: passes") for t in pages_with_pictures)
    page_h = 11.69 * 40  # the fixture writes at 40 dpi; an A4 page is 11.69 in tall
    for p in files.pngs:
        img = imread(p)
        grey = img[..., :3].mean(axis=2)
        assert (grey < 0.5).mean() > 0.003, f"{p.name} looks blank"
        # a picture, not a page: shorter than the page less its head and footer
        assert img.shape[0] < 0.88 * page_h, p.name
    # the map alone: its first rows are not the page's running head but the map's title, so the top tenth
    # of the picture holds text and the map's frame only (no rule across the whole width at the top)
    top = imread(next(p for p in files.pngs if p.name.endswith("surface-map.png")))[..., :3].mean(axis=2)
    assert not (top[:3] < 0.5).all(axis=1).any()


def test_report_states_the_flatness_computed_independently(sample_report, pdf):
    content, files, _ = sample_report
    hm = content.heightmap
    text = pdf.text(files.pdf)
    # reference: minimum zone by a direct scipy LP, least squares by numpy lstsq (peak to valley of residuals)
    mz = _mz_reference(hm.x_mm, hm.y_mm, hm.height_um)
    A = np.column_stack([np.ones(hm.n), hm.x_mm, hm.y_mm])
    r = hm.height_um - A @ np.linalg.lstsq(A, hm.height_um, rcond=None)[0]
    # stated with its U (two significant digits), to U's decimal place (JCGM 100:2008, 7.2.6)
    u_mz = float(f"{content.u_mz_um:.2g}")
    assert f"{mz:.{max(0, 1 - int(np.floor(np.log10(u_mz))))}f} µm" in text
    # the summary states each flatness with its U: U to two significant digits and the value to the same decimal
    # place (JCGM 100:2008, 7.2.6; issue 16 item 6; before that change the least-squares value had three decimals)
    u_ls = float(f"{content.u_ls_um:.2g}")
    dec = max(0, 1 - int(np.floor(np.log10(u_ls))))
    assert f"{np.ptp(r):.{dec}f} µm" in text and f"{u_ls:.{dec}f} µm" in text
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


def test_heightmap_report_matches_the_worked_3x3_example(tmp_path, pdf):
    x, y = np.meshgrid([0.0, 1.0, 2.0], [0.0, 1.0, 2.0])
    z = np.zeros_like(x)
    z[2, 2] = 1.0
    hm = HeightMap(x.ravel(), y.ravel(), z.ravel(), label="corner bump")
    content = _map_report(hm)
    files = report.write_report(tmp_path / "small.pdf", content)
    text = pdf.text(files.pdf)
    # Source: REFERENCE.md check value 7 (derived with numpy): MZ 0.7500 µm, LS peak-to-valley 0.8333 µm
    assert "0.750 µm" in text and "0.833 µm" in text
    assert "not evaluated" in text  # a height map carries no reading uncertainty: said, not invented
    assert len(pdf.render(files.pdf, tmp_path)) == files.pages


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
    content = report_content.analyse(evaluate_surface(MeasuredSurface("m.csv", hm), window="200x200"))
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
    text = _page_text(report_pages._page_local, content, "um")
    assert f"{best:.3f} µm" in text and "200 x 200 mm" in text
    assert f"x = {where[0]:.0f} mm, y = {where[1]:.0f} mm" in text


def test_uncertainty_note_follows_the_display_units(tmp_path):
    # a copy of the sample without the stated reading uncertainty: the note then quotes sigma0 in µm
    src = SAMPLE.read_text().replace("reading_uncertainty = 0.15", "")
    path = tmp_path / "no-u.toml"
    path.write_text(src)
    ev = evaluate_surface(_loaded(path), monte_carlo=dict(trials=500, seed=3))
    content = report_content.analyse(ev)
    um, uin = report_content.uncertainty_text(content, "um"), report_content.uncertainty_text(content, "in")
    lo, hi = ev.uncertainty.minimum_zone.corrected_interval_um  # the bias-corrected 95 % interval (issue 16)
    s0 = ev.loaded.reduction.sigma0_um
    U = ev.uncertainty.minimum_zone.expanded_um

    def to_u(x, u):  # the interval's ends to the decimal place of U's second significant digit (JCGM 100, 7.2.6)
        d = max(1 - math.floor(math.log10(u)), 0)
        return f"{x:.{d}f}"

    # 1 µin = 0.0254 µm exactly (international inch, 1959)
    assert f"{to_u(lo / 0.0254, U / 0.0254)} µin to {to_u(hi / 0.0254, U / 0.0254)} µin" in uin
    assert f"{s0 / 0.0254:.1f} µin" in uin and "µm" not in uin
    assert f"{to_u(lo, U)} µm to {to_u(hi, U)} µm" in um and f"{s0:.3f} µm" in um
    text = _page_text(report_pages._page_summary, content, "in")
    assert f"{to_u(lo / 0.0254, U / 0.0254)} µin" in text and f"{s0:.3f} µm" not in text


def test_a_lapping_target_needs_a_lap():
    x, y = np.meshgrid(np.arange(4.0) * 100, np.arange(3.0) * 100)
    hm = HeightMap(x.ravel(), y.ravel(), (x * y).ravel() * 1e-4)
    with pytest.raises(InputValueError):
        _map_report(hm, target_um=0.5)


def test_write_report_makes_the_picture_folder_refuses_a_file_in_its_place_and_keeps_the_old_pdf(tmp_path):
    x, y = np.meshgrid(np.arange(4.0) * 100, np.arange(3.0) * 100)
    hm = HeightMap(x.ravel(), y.ravel(), (x * y).ravel() * 1e-4)
    content = _map_report(hm)
    target = tmp_path / "r.pdf"
    target.write_bytes(b"old")
    blocker = tmp_path / "pics"
    blocker.write_text("a person's own file", encoding="utf-8")
    with pytest.raises(OutputError):
        report.write_report(target, content, png_dir=blocker)
    assert target.read_bytes() == b"old" and blocker.read_text(encoding="utf-8") == "a person's own file"
    with pytest.raises(OutputError):
        report.write_report(tmp_path / "no-folder" / "r.pdf", content)
    # issue 15, item 11: a missing picture folder is made, with its parents, as demo --out makes its folder
    files = report.write_report(target, content, png_dir=tmp_path / "new" / "pics")
    assert files.pngs and all(p.parent == tmp_path / "new" / "pics" and p.is_file() for p in files.pngs)


@pytest.mark.parametrize("size_mm", [(80.0, 80.0), (1000.0, 630.0), (2000.0, 200.0)])
def test_map_page_x_label_clear_of_the_3d_title(size_mm):
    # A square pad's map reached down so far that its x label ran into the 3-D view's title.
    # Checked on the drawn extents (matplotlib's renderer), for a square, a plate and a guideway.
    from flatcheck.output import _plots as plot

    L, W = size_mm
    x, y = np.meshgrid(np.linspace(0, L, 9), np.linspace(0, W, 9))
    z = 1e-3 * np.hypot(x - L / 2, y - W / 2)  # a shallow cone, µm (invented shape)
    hm = HeightMap(x.ravel(), y.ravel(), z.ravel(), length_mm=L, width_mm=W, label="cone")
    content = _map_report(hm)
    fig = plot.new_figure()
    report_pages._page_map(fig, content, "um")
    fig.canvas.draw()
    r = fig.canvas.get_renderer()
    ax_map, ax3 = [a for a in fig.axes if a.name != "3d" and a.get_xlabel()][0], [a for a in fig.axes if a.name == "3d"][0]
    label_box = ax_map.xaxis.label.get_window_extent(r)
    from matplotlib.text import Text

    title = ax3.get_title(loc="left")
    assert title.startswith("the same surface in three dimensions")
    title_box = [t for t in ax3.findobj(Text) if t.get_text() == title][0].get_window_extent(r)
    assert label_box.y0 > title_box.y1, (label_box, title_box)


# ------------------------------------------------------------------ the four sample reports, page by page
SAMPLES = Path(__file__).resolve().parents[1] / "sample_readings"


def _sample_content(name):
    """Report content of a sample as the audit's commands make it (no Monte Carlo, to stay quick)."""
    from flatcheck import open_surface as load_input
    from flatcheck.cli._report_job import carriage_from_options, lapping_from_options

    lap_none = dict(target_um=None, target_grade=None, lap_diameter_mm=None, lap_size_mm=None, rate_um_per_min=None,
                    rate_um_per_pass=None, strokes_per_pass=None, stroke_mm=0.0)
    if name == "pad":  # report pad-KY-B4-heights.csv --window d20 --target-um 0.2 --lap-diameter-mm 20
        path, window, units, standard = SAMPLES / "pad-KY-B4-heights.csv", "d20", "um", None
        lap, bearing = dict(lap_none, target_um=0.2, lap_diameter_mm=20.0), (None, None, None)
    elif name == "guideway":  # --pad 120x80 --gap-um 8 --target-um 2 --lap-diameter-mm 80 --rate-um-per-min 0.2
        path, window, units, standard = SAMPLES / "guideway-KY-G1.toml", "auto", "um", None
        lap = dict(lap_none, target_um=2.0, lap_diameter_mm=80.0, rate_um_per_min=0.2)
        bearing = (None, "120x80", 8.0)
    elif name == "grid":  # --units in --bearing bearing_tandem_slide.toml
        path, window, units, standard = SAMPLES / "plate-KY-P7-grid.toml", "auto", "in", None
        lap, bearing = lap_none, (SAMPLES / "bearing_tandem_slide.toml", None, None)
    else:  # plate: --standard din-876
        path, window, units, standard = SAMPLES / "plate-KY-P3-2024-03-11.toml", "auto", "um", "din-876"
        lap, bearing = lap_none, (None, None, None)
    loaded = load_input(path)
    lapping = lapping_from_options(loaded.heightmap, **lap)
    carriage = carriage_from_options(*bearing)[0]
    ev = evaluate_surface(loaded, window=window)
    return report_content.analyse(ev, standard=standard, carriage=carriage, window=window, **lapping), units


@pytest.fixture(scope="module")
def samples():
    return {name: _sample_content(name) for name in ("pad", "guideway", "grid", "plate")}


def _drawn_texts(fig):
    """(text, rendered box) of every text a page draws: the frame, titles, axis and tick labels (3-D too),
    legends, tables, notes and annotations; contour labels (no gid: they sit on their lines) left out."""
    fig.canvas.draw()
    r = fig.canvas.get_renderer()
    texts = list(fig.texts)
    axes = [a for ax in fig.axes for a in (ax, *ax.child_axes)]
    for ax in axes:
        is3d = getattr(ax, "name", "") == "3d"
        texts += [ax.title, ax._left_title, ax._right_title, ax.xaxis.label, ax.yaxis.label]
        texts += [t for t in ax.texts if t.get_gid() is not None]
        if ax.get_legend() is not None:
            texts += list(ax.get_legend().get_texts())
        for axis in (ax.xaxis, ax.yaxis) + ((ax.zaxis,) if is3d else ()):
            if is3d and axis is ax.zaxis:
                texts.append(axis.label)
            lo, hi = sorted(axis.get_view_interval())
            eps = 1e-9 * max(abs(lo), abs(hi), 1.0)
            texts += [t for tick in axis.get_major_ticks() if lo - eps <= tick.get_loc() <= hi + eps
                      for t in (tick.label1, tick.label2)]
    return [(t.get_text(), t.get_window_extent(r)) for t in texts if t.get_visible() and t.get_text().strip()]


def _draw_page(content, units, k):
    from flatcheck.output import _plots as plot

    plan = report._page_plan(content)
    title, draw = plan[k]
    fig = plot.new_figure()
    pictures = draw(fig, content, units)
    report._frame(fig, content, title, k + 1, len(plan))
    return fig, title, pictures


@pytest.mark.parametrize("name", ["pad", "guideway", "grid", "plate"])
def test_no_text_of_any_page_overlaps_another_or_leaves_the_page(samples, name):
    # The audit's four reports: labels ran into titles (pad lapping page), line labels into each other (layout
    # pages), 3-D tick labels piled up (guideway). Checked on matplotlib's rendered extents of every text.
    content, units = samples[name]
    for k in range(len(report.page_titles(content))):
        fig, title, _ = _draw_page(content, units, k)
        boxes = _drawn_texts(fig)
        bad = [(a, b) for i, (a, A) in enumerate(boxes) for b, B in boxes[i + 1:]
               if min(A.x1, B.x1) - max(A.x0, B.x0) > 1 and min(A.y1, B.y1) - max(A.y0, B.y0) > 1]
        assert not bad, f"{name}, page {title!r}: {bad[:5]}"
        W, H = fig.bbox.width, fig.bbox.height
        out = [t for t, b in boxes if b.x0 < -1 or b.y0 < -1 or b.x1 > W + 1 or b.y1 > H + 1]
        assert not out, f"{name}, page {title!r}: off the page: {out}"


def test_colour_bars_are_as_tall_as_their_maps(samples):
    # The guideway's map was a thin strip beside a colour bar three times its height.
    content, units = samples["guideway"]
    titles = report.page_titles(content)
    for page in ("Surface map", "Lapping plan"):
        fig, _, pictures = _draw_page(content, units, titles.index(page))
        fig.canvas.draw()
        r = fig.canvas.get_renderer()
        maps = [ax for _, axes in pictures for ax in axes if ax.child_axes]
        assert maps, page
        for ax in maps:
            h, hc = ax.get_window_extent(r).height, ax.child_axes[0].get_window_extent(r).height
            assert hc == pytest.approx(h, rel=0.02), (page, ax.get_title(loc="left"))
    # and the long map uses the page's width: at least 80 % of the space between the margins
    fig, _, pictures = _draw_page(content, units, titles.index("Surface map"))
    ax = dict(pictures)["surface-map"][0]
    assert ax.get_position().width > 0.8 * (0.94 - 0.11 - 0.95 / 8.27)


def test_guideway_says_why_it_has_no_local_flatness_and_how_to_get_it(samples):
    content, units = samples["guideway"]
    assert "Local flatness" not in report.page_titles(content)  # the 250 x 250 mm window does not fit 2000 x 200
    fig, _, _ = _draw_page(content, units, report.page_titles(content).index("Surface map"))
    text = " ".join(t for t, _ in _drawn_texts(fig))
    assert "250 x 250 mm" in text and "does not fit" in text and "--window 120x120" in text


def test_residual_histogram_moves_to_the_next_page_when_the_table_is_long(samples):
    # the P7 grid's 13 lines fill the layout page: the histogram used to be dropped without a word
    content, units = samples["grid"]
    titles = report.page_titles(content)
    k = titles.index("Survey layout and closure")
    assert titles[k + 1] == "Survey layout and closure (continued)"
    _, _, pictures = _draw_page(content, units, k + 1)
    assert [name for name, _ in pictures] == ["reduction-residuals"]
    # the Union Jack's 8 lines leave room: the histogram stays on the layout page
    content, units = samples["plate"]
    _, _, pictures = _draw_page(content, units, report.page_titles(content).index("Survey layout and closure"))
    assert "reduction-residuals" in dict(pictures)


def test_heights_in_microinches_and_lengths_in_inches_with_units_in(samples):
    content, units = samples["grid"]
    titles = report.page_titles(content)
    for page in ("Summary", "Local flatness", "Air bearing: fitness and carriage motion"):
        fig, _, _ = _draw_page(content, units, titles.index(page))
        text = " ".join(t for t, _ in _drawn_texts(fig))
        # 1 in = 25.4 mm and 1 µin = 0.0254 µm exactly (international inch, 1959)
        assert not re.search(r"\d mm\b|\d µm\b|\bum\b|um/m", text), (page, re.findall(r".{30}(?:\d mm|\d µm|um/m).{5}", text))
    fig, _, _ = _draw_page(content, units, 0)
    text = " ".join(t for t, _ in _drawn_texts(fig))
    assert f"{630 / 25.4:.2f} x {400 / 25.4:.2f} in" in text
    fig, _, _ = _draw_page(content, units, titles.index("Air bearing: fitness and carriage motion"))
    text = " ".join(t for t, _ in _drawn_texts(fig))
    # a gap is stated, not measured: as a limit is, to 0.1 µin at most and without trailing zeros
    assert f"gap {round(8 / 0.0254, 1):g} µin" in text


def test_carriage_path_and_surface_share_one_datum(samples):
    # Each curve is drawn about its own minimum-zone straightness line, so both are centred on zero and each
    # spans exactly its stated straightness (they were drawn 22.6-23.7 and 11-13 µin apart).
    content, units = samples["grid"]
    m = content.bearing.motion
    fig, _, pictures = _draw_page(content, units, report.page_titles(content).index(
        "Air bearing: fitness and carriage motion"))
    ax = dict(pictures)["carriage-motion"][0]
    drawn = {ln.get_label(): np.asarray(ln.get_ydata(), float) for ln in ax.lines}
    path = drawn["carriage path (pads average)"] * 0.0254  # back to µm (1 µin = 0.0254 µm exactly)
    raw = drawn["surface under the carriage centre (raw)"] * 0.0254
    for d, strt in ((path, m.straightness_um), (raw, m.raw_straightness_um)):
        assert np.ptp(d) == pytest.approx(strt, rel=1e-6)
        assert d.max() == pytest.approx(-d.min(), abs=1e-9)


def test_cautions_and_sources_follow_the_surface_and_the_methods_used(samples):
    pad, _ = samples["pad"]
    # the pad is a height map (material not stated): no granite, no lifting, no air; lapping sources present
    assert not any("granite" in c.lower() and "silica:" in c for c in pad.cautions)
    assert not any("lifting gear" in c for c in pad.cautions) and not any("Compressed air" in c for c in pad.cautions)
    srcs = " ".join(pad.sources)
    assert "Moody" not in srcs and "Union Jack" not in srcs
    assert "Preston" in srcs and "1927" in srcs and "doi:10.37188/lam.2024.021" in srcs
    plate, _ = samples["plate"]
    srcs = " ".join(plate.sources)
    assert "Union Jack" in srcs and "Preston" not in srcs and "Lapping" not in srcs
    assert any("black granite can release respirable crystalline silica" in c for c in plate.cautions)
    grid, _ = samples["grid"]
    assert any("Compressed air" in c for c in grid.cautions) and "Union Jack layout" not in " ".join(grid.sources)


def test_lapping_page_has_the_bench_chart_and_passes_with_centre_and_extent(samples):
    # issue 7: "a chart of the surface divided into cells with the time for each, that can be printed and taken
    # to the bench"; the pass table named cells but no chart was drawn, and had no centre or extent
    content, units = samples["guideway"]
    p = content.lapping
    titles = report.page_titles(content)
    # on the lapping page when it fits there, else on a page of its own (this guideway's lapping page opens with
    # the sag check's "Supports first", issue 19 item 6, which leaves the chart too little room)
    page = "Lapping plan: bench chart" if "Lapping plan: bench chart" in titles else "Lapping plan"
    fig, _, pictures = _draw_page(content, units, titles.index(page))
    chart_axes = dict(pictures)["lapping-cell-chart"]  # the chart, cut into blocks of columns if it is long
    ch = p.chart
    texts = [t for ax in chart_axes for t in ax.texts]
    cells = [t for t in texts if t.get_gid() == "cell-time"]
    assert len(cells) == len(ch.columns) * len(ch.rows)
    xe, ye = np.asarray(ch.x_edges_mm), np.asarray(ch.y_edges_mm)
    for t in cells:  # each cell's time where the cell is (the chart's own numbers, as 'flatcheck lap' prints them)
        x, y = t.get_position()
        i, j = np.searchsorted(xe, x) - 1, np.searchsorted(ye, y) - 1
        v = ch.time[j, i]
        assert t.get_text() == ("." if v <= 0 else f"{v:.1f}" if v >= 0.05 else "<0.1")
    assert [t.get_text() for t in texts if t.get_gid() == "cell-column"] == list(ch.columns)
    assert [t.get_text() for t in chart_axes[0].texts if t.get_gid() == "cell-row"] == list(ch.rows)
    for t in cells:  # legible: at least 6 points
        assert t.get_fontsize() >= 6
    # the pass table: every pass with its cells, centre and the extent of the lap centre's travel
    fig, _, _ = _draw_page(content, units, titles.index("Lapping plan: passes"))
    text = " | ".join(t for t, _ in _drawn_texts(fig))
    assert "centre x, y (mm)" in text and "lap centre travels x, y (mm)" in text
    for q in p.passes:
        x0, x1, y0, y1 = q.extent_mm
        assert f"{q.zone} | {q.centre_x_mm:.0f}, {q.centre_y_mm:.0f} | {x0:.0f} to {x1:.0f}, {y0:.0f} to {y1:.0f}" in text


def test_a_long_pass_table_continues_on_further_pages(samples):
    # only the first 8 passes used to be shown; now every pass is, on as many pages as it takes
    import dataclasses

    content, units = samples["guideway"]
    p = content.lapping
    many = tuple(dataclasses.replace(q, order=k + 1) for k, q in enumerate(p.passes * 15))
    long = dataclasses.replace(content, lapping=dataclasses.replace(p, passes=many))
    titles = report.page_titles(long)
    pass_pages = [k for k, t in enumerate(titles) if t.startswith("Lapping plan: passes")]
    assert len(pass_pages) >= 2 and titles[pass_pages[0]] == f"Lapping plan: passes (1 of {len(pass_pages)})"
    seen = []
    for k in pass_pages:
        fig, _, _ = _draw_page(long, units, k)
        texts = [t for t, _ in _drawn_texts(fig)]
        seen += [int(t) for t in texts if t.isdigit()]  # the pass numbers (first column)
    assert set(range(1, len(many) + 1)) <= set(seen)


# ---------------------------------------------------------------- issue 15: one height reference, limits, pictures
def test_every_page_names_the_plane_the_heights_are_referred_to(sample_report, pdf):
    content, files, _ = sample_report
    pages = pdf.text(files.pdf).split("\f")
    assert len(pages) == files.pages
    for k, page in enumerate(pages, start=1):
        flat = " ".join(page.split())
        assert "Heights are referred to the least-squares plane of all points" in flat, k


def test_map_shows_heights_about_the_least_squares_plane_as_the_terminal_does():
    # a tilted corner bump: about the least-squares plane the map's high point is the LS residual maximum
    # (numpy lstsq as the reference), not the height about the minimum-zone plane
    x, y = np.meshgrid(np.linspace(0, 400, 5), np.linspace(0, 300, 4))
    z = 0.002 * x - 0.001 * y + np.where((x == 400) & (y == 300), 1.0, 0.0)
    hm = HeightMap(x.ravel(), y.ravel(), z.ravel(), label="tilted bump")
    content = _map_report(hm)
    from flatcheck.output import _plots as plot

    fig = plot.new_figure()
    report_pages._page_map(fig, content, "um")
    A = np.column_stack([np.ones(hm.n), hm.x_mm, hm.y_mm])
    r = hm.height_um - A @ np.linalg.lstsq(A, hm.height_um, rcond=None)[0]
    texts = [t for ax in fig.axes for t in ax.texts if t.get_gid() in ("high", "low")]
    high = next(t.get_text() for t in texts if t.get_gid() == "high")
    low = next(t.get_text() for t in texts if t.get_gid() == "low")
    assert f"+{r.max():.3f}" in high and f"{r.min():.3f}" in low
    labels = " ".join(a.get_ylabel() + " " + a.get_title(loc="left") for a in fig.axes)
    assert "least-squares plane" in labels and "minimum-zone plane" not in labels


def test_limits_of_uncertain_provenance_are_noted_once_in_the_methods_not_beside_each_limit(sample_report, pdf):
    content, files, _ = sample_report
    # DIN 876 grade 00's coefficient is recalled, not verified (flatcheck.conformance marks it "from memory")
    assert any(g.status != "verified" for g in content.grades)
    assert all("from memory" not in g.note and "inferred" not in g.note for g in content.grades)
    text = " ".join(pdf.text(files.pdf).split())
    grades_page = next(p for p in pdf.text(files.pdf).split("\f") if "Grades and decision rule" in p)
    assert "from memory" not in grades_page and "inferred" not in grades_page
    assert text.count("not checked against the standard's own text") == 1
    assert "--tolerance-um" in text


def test_a_target_already_met_is_one_sentence_not_lapping_pages():
    x, y = np.meshgrid(np.linspace(0, 600, 7), np.linspace(0, 400, 5))
    hm = HeightMap(x.ravel(), y.ravel(), (0.5 * np.sin(x / 200.0)).ravel(), label="nearly flat")
    content = _map_report(hm, target_um=5.0, lap=LapModel("round", diameter_mm=100.0, rate_um=1.0))
    assert content.lapping is not None and content.lapping.passes == ()
    assert not any(t.startswith("Lapping") for t in report.page_titles(content))
    sentence = report_pages.lapping_summary(content)
    assert sentence.startswith("The surface is already within the target 5.000 µm") and "no lapping" in sentence
    assert sentence in " ".join(_page_text(report_pages._page_summary, content, "um").split())


def test_local_flatness_map_covers_the_surveyed_area(sample_report):
    content, _, _ = sample_report
    lf, win, hm = content.local, content.window, content.heightmap
    xs, ys, cover = report_pages.local_cover(lf, win, hm)
    # every point of the surveyed area lies in some 250 x 250 mm window of the scan (centres 50 mm apart, the
    # windows reaching the edges), so the map has a value everywhere, not only between the window centres
    assert np.isfinite(cover).all()
    assert xs[0] == hm.extent_mm[0] and xs[-1] == hm.extent_mm[1]
    # each value is the largest local flatness of a window holding the point: check a few points by brute force
    for i, j in ((0, 0), (len(ys) // 2, len(xs) // 3), (len(ys) - 1, len(xs) - 1)):
        holds = (np.abs(lf.centre_x_mm - xs[j]) <= win.length_mm / 2 + 1e-6) & \
                (np.abs(lf.centre_y_mm - ys[i]) <= win.width_mm / 2 + 1e-6)
        assert cover[i, j] == pytest.approx(lf.flatness_um[holds].max())
    assert cover.max() == pytest.approx(lf.worst_um)


def test_pictures_carry_the_surface_the_date_and_what_they_show(sample_report):
    content, files, _ = sample_report
    for p in files.pngs:
        img = imread(p)
        top = img[: int(0.06 * img.shape[0]) + 12, :, :3].mean(axis=2)
        assert (top < 0.5).mean() > 0.002, f"{p.name}: no caption above the picture"
    caption = report.picture_caption(content, "surface map")
    assert "KY-P3" in caption[0] and "measured 2024-03-11" in caption[1] and caption[1].endswith("surface map")
