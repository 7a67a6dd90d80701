"""Pictures: the numbers a picture writes on itself, its colour scale and its files.

The drawings are checked through what they state (labels, annotations, data
of the drawn lines) against values computed outside the drawing code, and the
rendered files for content (not blank).
"""

import numpy as np
import pytest
from matplotlib.image import imread

from flatcheck.output import _plots as plot
from flatcheck.errors import InputValueError, OutputError
from flatcheck.form import minimum_zone
from flatcheck.form import HeightMap


def _grid_3x3_corner():
    """3 x 3 grid, x, y in {0, 1, 2} (mm), z = 0 except z(2, 2) = 1 µm."""
    x, y = np.meshgrid([0.0, 1.0, 2.0], [0.0, 1.0, 2.0])
    z = np.zeros_like(x)
    z[2, 2] = 1.0
    return HeightMap(x.ravel(), y.ravel(), z.ravel(), names=[f"P{i}" for i in range(9)], label="3x3")


def _annotations(ax):
    return {a.get_gid(): a.get_text() for a in ax.texts if a.get_gid() in ("high", "low")}


def test_contour_map_labels_high_and_low_about_the_minimum_zone_plane():
    hm = _grid_3x3_corner()
    mz = minimum_zone(hm.x_mm, hm.y_mm, hm.height_um)
    fig = plot.new_figure((5, 4))
    ax = plot.contour_map(fig.add_subplot(), hm, reference=mz)
    ann = _annotations(ax)
    # Source: REFERENCE.md check value 7 (derived with numpy): minimum zone of this grid is 0.75 µm with plane
    # -0.75 + 0.25x + 0.25y; the corner (2, 2) is 0.75 above it and the lowest points lie on it.
    assert ann["high"] == "high +0.750 µm"
    assert ann["low"] == "low 0.000 µm"
    assert "µm" in ax.get_xlabel() or "mm" in ax.get_xlabel()
    assert ax.get_xlabel().endswith("(mm)") and ax.get_ylabel().endswith("(mm)")


def test_contour_map_in_microinches_and_inches():
    hm = _grid_3x3_corner()
    mz = minimum_zone(hm.x_mm, hm.y_mm, hm.height_um)
    fig = plot.new_figure((5, 4))
    ax = plot.contour_map(fig.add_subplot(), hm, reference=mz, units="in")
    # 1 µin = 0.0254 µm exactly (international inch, 1959): 0.75 µm = 29.53 µin, to 0.1 µin without a stated
    # instrument (a height map), to 1 µin for a 0.024 µm step (0.95 µin: the nearest decade is 1 µin)
    assert _annotations(ax)["high"] == f"high +{0.75 / 0.0254:.1f} µin"
    ax = plot.contour_map(fig.add_subplot(), hm, reference=mz, units="in", step_um=0.024)
    assert _annotations(ax)["high"] == f"high +{0.75 / 0.0254:.0f} µin"
    assert ax.get_xlabel().endswith("(in)")


def test_contour_map_high_point_is_numpys_argmax(rng):
    x, y = np.meshgrid(np.linspace(0, 400, 9), np.linspace(0, 300, 7))
    z = rng.normal(0, 1.0, x.shape)
    hm = HeightMap(x.ravel(), y.ravel(), z.ravel(), length_mm=400, width_mm=300)
    fig = plot.new_figure((5, 4))
    ax = plot.contour_map(fig.add_subplot(), hm)
    ann = _annotations(ax)
    # reference: numpy's max/min of the heights, to 1 nm (a height map states no instrument resolution)
    zmax, zmin = float(z.max()), float(z.min())
    assert ann["high"] == f"high {zmax:+.3f} µm"
    assert ann["low"] == f"low {zmin:+.3f} µm"
    # the high marker sits on the highest station
    markers = [ln for ln in ax.lines if ln.get_marker() == "^"]
    assert markers and markers[0].get_xdata()[0] == pytest.approx(x.ravel()[np.argmax(z)])


def test_height_colour_scale_prints_in_grey_in_order():
    """The height colour map's luminance rises monotonically, so grey prints keep the order of heights."""
    from matplotlib import colormaps

    for name in (plot.HEIGHT_CMAP, plot.FIELD_CMAP):
        rgb = colormaps[name](np.linspace(0, 1, 256))[:, :3]
        # Source: ITU-R BT.709 luma coefficients (0.2126, 0.7152, 0.0722), applied to the colour map's values
        luma = rgb @ np.array([0.2126, 0.7152, 0.0722])
        assert np.all(np.diff(luma) > 0), name


def test_surface_view_needs_3d_axes():
    hm = _grid_3x3_corner()
    fig = plot.new_figure((5, 4))
    with pytest.raises(InputValueError):
        plot.surface_view(fig.add_subplot(), hm)
    ax = plot.surface_view(fig.add_subplot(projection="3d"), hm)
    assert ax.get_zlabel() == "height (µm)"


def test_line_profiles_draw_deviation_from_reference_line():
    # Analytic: a parabola h = s^2/1000 µm on s in [0, 1000] mm, reference = its chord h = s (µm, slope 1 µm/mm).
    # The deviation h - s is -s(1000 - s)/1000, lowest -250 µm at mid-length (the chord's minimum-zone width).
    s = np.linspace(0, 1000, 11)
    h = s**2 / 1000
    p = plot.LineProfile("AB", s, h, straightness_um=250.0, ref_offset_um=0.0, ref_slope_um_per_mm=1.0)
    fig = plot.new_figure((6, 4))
    (ax,) = plot.line_profiles(fig, [p], step_um=0.1)  # an indicator read to 0.1 µm: 1 decimal
    drawn = ax.lines[-1].get_ydata()
    np.testing.assert_allclose(drawn, -s * (1000 - s) / 1000, atol=1e-9)
    assert "straightness 250.0 µm" in ax.get_title(loc="left")
    with pytest.raises(InputValueError):
        plot.line_profiles(plot.new_figure(), [])


def test_survey_layout_writes_closures_and_notes():
    xy = np.array([[0, 0], [500, 0], [1000, 0], [500, 300]], float)
    fig = plot.new_figure((6, 4))
    ax = plot.survey_layout(fig.add_subplot(), xy, [("S", [0, 1, 2]), ("N", [1, 3])], length_mm=1000, width_mm=630,
                            closures=[("centre", 500, 300, -0.125)], line_notes={"S": "0.040 µm rms"})
    texts = " | ".join(t.get_text() for t in ax.texts)
    assert "closure -0.125 µm" in texts
    assert "S\n0.040 µm rms" in texts


def test_field_map_hatches_where_the_limit_is_exceeded():
    x = np.linspace(0, 100, 11)
    y = np.linspace(0, 50, 6)
    v = np.tile(x / 50.0, (y.size, 1))  # 0..2 µm, rising with x
    fig = plot.new_figure((6, 4))
    ax = plot.local_flatness_map(fig.add_subplot(), x, y, v, window_mm=25, limit_um=1.5)
    hatched = [c for c in ax.collections if "////" in (getattr(c, "hatches", None) or [])]
    assert hatched, "exceedance of the limit must be hatched (legible in grey)"
    with pytest.raises(InputValueError):
        plot.local_flatness_map(fig.add_subplot(), x, y, v[:, :-1], window_mm=25)


def test_carriage_path_draws_both_curves_and_local_flatness():
    t = np.linspace(0, 500, 51)
    rail = np.sin(t / 40)
    car = 0.5 * rail
    fig = plot.new_figure((6, 5))
    axes = plot.carriage_path(fig, t, rail, car, pitch=np.gradient(car, t), local_um=np.abs(rail), local_limit_um=0.8)
    assert len(axes) == 2
    ys = [ln.get_ydata() for ln in axes[0].lines]
    assert any(np.allclose(y, rail) for y in ys) and any(np.allclose(y, car) for y in ys)
    assert axes[1].get_xlabel().endswith("(mm)")


def test_save_png_writes_a_picture_with_content(tmp_path):
    hm = _grid_3x3_corner()
    fig = plot.new_figure((4, 3))
    plot.contour_map(fig.add_subplot(), hm)
    out = plot.save_png(fig, tmp_path / "map.png", dpi=60)
    img = imread(out)
    grey = img[..., :3].mean(axis=2)
    assert img.shape[0] == 180 and img.shape[1] == 240
    assert grey.std() > 0.1 and (grey < 0.5).mean() > 0.01  # not blank: contrast and some dark ink
    with pytest.raises(OutputError):
        plot.save_png(fig, tmp_path / "missing" / "map.png")


def test_pdf_book_is_atomic(tmp_path):
    target = tmp_path / "book.pdf"
    target.write_bytes(b"earlier report")
    with pytest.raises(RuntimeError):
        with plot.PdfBook(target) as book:
            book.add(plot.new_figure((3, 3)))
            raise RuntimeError("drawing failed")
    assert target.read_bytes() == b"earlier report"
    assert [p.name for p in tmp_path.iterdir()] == ["book.pdf"]
    with plot.PdfBook(target) as book:
        book.add(plot.new_figure((3, 3)))
        book.add(plot.new_figure((3, 3)))
    assert book.pages == 2 and target.read_bytes()[:5] == b"%PDF-"


def _union_jack():
    """Union Jack on 1000 x 600 mm (stations 100 mm in from the edges): all four long lines cross at C."""
    xs, ys = [100.0, 500.0, 900.0], [100.0, 300.0, 500.0]
    xy = np.array([[x, y] for y in ys for x in xs])  # index 3 * row + column; C = 4
    lines = [("SW-NE", [0, 4, 8]), ("SE-NW", [2, 4, 6]), ("SW-SE", [0, 1, 2]), ("NW-NE", [6, 7, 8]),
             ("SW-NW", [0, 3, 6]), ("SE-NE", [2, 5, 8]), ("W-E", [3, 4, 5]), ("S-N", [1, 4, 7])]
    return xy, lines, 1000.0, 600.0


def _grid_survey():
    """5 rows x 8 columns of stations on 630 x 400 mm (rows along x, columns along y)."""
    xs, ys = np.linspace(50, 580, 8), np.linspace(50, 350, 5)
    xy = np.array([[x, y] for y in ys for x in xs])
    lines = [(f"row-{j + 1}", [8 * j + i for i in range(8)]) for j in range(5)]
    lines += [(f"col-{'ABCDEFGH'[i]}", [8 * j + i for j in range(5)]) for i in range(8)]
    return xy, lines, 630.0, 400.0


def _guideway_survey():
    """2000 x 200 mm guideway: three long lines (20 stations) and five cross lines of three stations."""
    xs = np.linspace(50, 1950, 20)
    xy = [[x, y] for y in (40.0, 100.0, 160.0) for x in xs]
    lines = [(f"long-{k + 1}", list(range(20 * k, 20 * k + 20))) for k in range(3)]
    for k, i in enumerate((0, 5, 10, 15, 19)):
        lines.append((f"cross-{k + 1}", [i, 20 + i, 40 + i]))
    return np.array(xy), lines, 2000.0, 200.0


@pytest.mark.parametrize("survey", [_union_jack, _grid_survey, _guideway_survey])
def test_survey_layout_labels_are_clear_of_each_other_and_of_the_stations(survey):
    # The rendered boxes of the line labels (matplotlib's text extents) must overlap no other text, cover
    # no station and stay inside the plan, each beside its own line. (Labels used to be put at points along
    # the lines: on a Union Jack one covered the centre station, on a grid column labels ran into row labels.)
    xy, lines, L, W = survey()
    notes = {name: f"closure {0.001 * (k - 4):+.3f} µm" for k, (name, _) in enumerate(lines)}
    fig = plot.new_figure((6.9, 4.4))
    ax = fig.add_axes([0.12, 0.12, 0.84, 0.78])
    plot.survey_layout(ax, xy, lines, length_mm=L, width_mm=W, line_notes=notes, title="lines walked")
    boxes = _drawn_text_boxes(fig)
    assert not _overlaps(boxes)
    r = fig.canvas.get_renderer()
    labels = {t.get_text().replace("\n", ": ").split(":")[0]: t.get_window_extent(r)
              for t in ax.texts if t.get_gid() == "line-label"}
    assert set(labels) == {name for name, _ in lines}
    axbox = ax.get_window_extent(r)
    st = ax.transData.transform(xy)
    pt = fig.dpi / 72
    for name, idx in lines:
        b = labels[name]
        assert axbox.x0 <= b.x0 and b.x1 <= axbox.x1 and axbox.y0 <= b.y0 and b.y1 <= axbox.y1, name
        inside = (st[:, 0] > b.x0) & (st[:, 0] < b.x1) & (st[:, 1] > b.y0) & (st[:, 1] < b.y1)
        assert not inside.any(), f"{name}'s label covers a station"
        assert f"{name}: {notes[name]}" in [t.get_text().replace("\n", ": ") for t in ax.texts]
        # beside its own line: the box comes within 12 points of one of the line's segments
        P = st[np.asarray(idx)]
        gaps = []
        for a, c in zip(P[:-1], P[1:]):
            for q in np.linspace(0, 1, 50):
                x, y = a + q * (c - a)
                gaps.append(np.hypot(max(b.x0 - x, 0, x - b.x1), max(b.y0 - y, 0, y - b.y1)))
        assert min(gaps) <= 12 * pt, f"{name}'s label is {min(gaps) / pt:.0f} pt from its line"


def test_plan_views_of_a_long_narrow_surface_are_stretched_across_and_say_so():
    # A 2000 x 200 mm guideway drawn to scale is a strip 10 times longer than wide; the plan
    # views stretch it so the drawn length : width is at most 4 (common practice, no single
    # source: a legible plan), and the axis label states the stretch.
    x, y = np.meshgrid(np.linspace(0, 2000, 21), np.linspace(0, 200, 5))
    z = 1e-3 * (x - 1000) ** 2 / 1000  # a bowl along the length, µm
    hm = HeightMap(x.ravel(), y.ravel(), z.ravel(), length_mm=2000, width_mm=200, label="guide")
    fig = plot.new_figure((6, 4))
    ax = plot.contour_map(fig.add_subplot(), hm)
    fig.canvas.draw()
    bb = ax.get_position()
    w_in, h_in = bb.width * fig.get_figwidth(), bb.height * fig.get_figheight()
    assert w_in / h_in == pytest.approx(4.0, rel=0.02)
    assert "drawn" in ax.get_ylabel() and "x the x scale" in ax.get_ylabel()
    # a plate of ordinary proportions (1000 x 630 mm) is still drawn to scale, label unchanged
    x, y = np.meshgrid(np.linspace(0, 1000, 11), np.linspace(0, 630, 7))
    hm = HeightMap(x.ravel(), y.ravel(), (1e-3 * x).ravel(), length_mm=1000, width_mm=630, label="plate")
    ax = plot.contour_map(plot.new_figure((6, 4)).add_subplot(), hm)
    assert ax.get_aspect() == 1.0
    assert ax.get_ylabel() == "y, across (mm)"


def _drawn_text_boxes(fig):
    """(text, window extent) of every visible, non-empty text the renderer draws in ``fig``.

    Titles, axis labels, tick labels inside the view, named texts of the axes (annotations,
    labels; contour labels, which carry no name and sit on their lines by design, are left out)
    and the figure's own texts. 3-D axes are left out (their labels are placed in projection).
    """
    fig.canvas.draw()
    r = fig.canvas.get_renderer()
    texts = list(fig.texts)
    for ax in fig.axes:
        if getattr(ax, "name", "") == "3d":
            continue
        texts += [ax.title, ax._left_title, ax._right_title, ax.xaxis.label, ax.yaxis.label]
        texts += [t for t in ax.texts if t.get_gid() is not None]
        for axis in (ax.xaxis, ax.yaxis):
            lo, hi = sorted(axis.get_view_interval())
            eps = 1e-9 * max(abs(lo), abs(hi), 1.0)
            for tick in axis.get_major_ticks():
                if lo - eps <= tick.get_loc() <= hi + eps:
                    texts += [tick.label1, tick.label2]
    out = []
    for t in texts:
        if t.get_visible() and t.get_text().strip():
            out.append((t.get_text(), t.get_window_extent(r)))
    return out


def _overlaps(boxes, shrink_px: float = 0.5):
    """Pairs of texts whose drawn boxes overlap (each shrunk by ``shrink_px`` so touching is allowed)."""
    bad = []
    for i, (ta, a) in enumerate(boxes):
        for tb, b in boxes[i + 1:]:
            if (min(a.x1, b.x1) - max(a.x0, b.x0) > 2 * shrink_px
                    and min(a.y1, b.y1) - max(a.y0, b.y0) > 2 * shrink_px):
                bad.append((ta, tb))
    return bad


def _lapped_pair(L, W):
    """Before/after surveys of an L x W mm surface (11 x 7 grid): the after one lost a Gaussian dip 2 µm deep
    centred on node (0.7 L, W/3) and was levelled differently (another plane). Invented shapes."""
    x, y = np.meshgrid(np.linspace(0, L, 11), np.linspace(0, W, 7))
    x, y = x.ravel(), y.ravel()
    before = 2e-3 * x + 1e-6 * (x - L / 2) ** 2 + 0.3 * np.sin(y / 100)
    dip = 2.0 * np.exp(-(((x - 0.7 * L) / (0.08 * L)) ** 2 + ((y - W / 3) / (0.12 * W)) ** 2))
    after = before - dip + 1e-3 * y + 5.0
    return x, y, before, after, dip


@pytest.mark.parametrize("size_mm", [(1000.0, 630.0), (2000.0, 200.0)])
def test_compare_change_map_draws_before_after_change_and_least_removal(size_mm):
    from flatcheck.lapping import compare_surveys

    L, W = size_mm
    x, y, before, after, dip = _lapped_pair(L, W)
    pr = compare_surveys(HeightMap(x, y, before), HeightMap(x, y, after))
    # two surveys resolving 0.024 µm (0.05 arcsec over 100 mm): labels to 0.01 µm, as the summary prints the change
    axes = plot.compare_change_map(None, x, y, before, after, pr.removed_um, length_mm=L, width_mm=W, step_um=0.024)
    fig = axes[0].figure
    assert [a.get_title(loc="left").split(" ")[0] for a in axes] == ["before", "after", "change", "least"]
    # reference: each survey about its own least-squares plane by numpy lstsq, then after - before
    A = np.column_stack([np.ones_like(x), x, y])
    own = [z - A @ np.linalg.lstsq(A, z, rcond=None)[0] for z in (before, after)]
    change = own[1] - own[0]
    texts = {t.get_gid(): t.get_text() for a in axes for t in a.texts if t.get_gid()}
    assert texts["lowest"] == f"most lowered {change.min():+.2f} µm"
    # the dip is the only removal and most of the surface is untouched, so the least removal consistent
    # with the change is the dip itself (flatcheck.progress notes): deepest 2 µm, at the dip's centre node
    assert texts["deepest"] == f"deepest {dip.max():+.2f} µm"
    marker = [ln for ln in axes[3].lines if ln.get_marker() == "v"][0]
    assert (marker.get_xdata()[0], marker.get_ydata()[0]) == (x[np.argmax(dip)], y[np.argmax(dip)])
    # every matched node is marked on every view; positions in mm
    for a in axes:
        assert any(ln.get_marker() == "o" and len(ln.get_xdata()) == x.size for ln in a.lines)
        assert a.get_xlabel() == "x (mm)"
    # each colour bar is as tall as its map (drawn extents) and labelled in µm; no two texts overlap
    fig.canvas.draw()
    r = fig.canvas.get_renderer()
    for a in axes:
        cax = [c for c in a.child_axes][0]
        box, cbox = a.get_window_extent(r), cax.get_window_extent(r)
        assert cbox.height == pytest.approx(box.height, rel=0.02) and cbox.x0 >= box.x1
        assert "µm" in cax.get_ylabel()
    assert not _overlaps(_drawn_text_boxes(fig))
    # the whole picture stays inside the figure
    fb = fig.bbox
    for _, b in _drawn_text_boxes(fig):
        assert b.x0 >= fb.x0 - 1 and b.x1 <= fb.x1 + 1 and b.y0 >= fb.y0 - 1 and b.y1 <= fb.y1 + 1


def test_compare_change_map_refuses_mismatched_nodes():
    x, y, before, after, _ = _lapped_pair(500.0, 300.0)
    with pytest.raises(InputValueError):
        plot.compare_change_map(None, x, y, before, after[:-1], np.zeros_like(x))


def test_map_markers_at_the_edge_are_drawn_whole_and_the_colour_bar_matches_the_map():
    # A pad height map (no stated outline) with its low point in a corner: the low marker was cut in half
    # by the axes edge, and the colour bar was drawn taller than a long map (fig.colorbar's shrink).
    x, y = np.meshgrid(np.linspace(5, 75, 15), np.linspace(5, 75, 15))
    z = -np.hypot(x - 75, y - 75) * 1e-2  # lowest at the (5, 5) corner (invented shape)
    hm = HeightMap(x.ravel(), y.ravel(), z.ravel(), label="pad")
    for shape, size in ((hm, (5, 4)), (None, (8, 3))):
        if shape is None:  # a long surface: 2000 x 200 mm
            gx, gy = np.meshgrid(np.linspace(0, 2000, 21), np.linspace(0, 200, 5))
            shape = HeightMap(gx.ravel(), gy.ravel(), (1e-6 * (gx - 1000) ** 2).ravel(), length_mm=2000, width_mm=200)
        fig = plot.new_figure(size)
        ax = plot.contour_map(fig.add_axes([0.15, 0.15, 0.6, 0.7]), shape)
        fig.canvas.draw()
        r = fig.canvas.get_renderer()
        box = ax.get_window_extent(r)
        for m in [ln for ln in ax.lines if ln.get_marker() in ("^", "v")]:
            b = m.get_window_extent(r)
            assert box.x0 <= b.x0 and b.x1 <= box.x1 and box.y0 <= b.y0 and b.y1 <= box.y1
        (cax,) = ax.child_axes
        assert cax.get_window_extent(r).height == pytest.approx(box.height, rel=0.01)


# ---------------------------------------------------------------- issue 15, item 14: pictures that stand alone
def test_plot_modules_are_split_by_what_they_draw():
    from pathlib import Path

    folder = Path(plot.__file__).parent
    modules = sorted(p.name for p in folder.glob("_*.py"))
    assert {"_maps.py", "_survey_plots.py", "_bearing_plots.py", "_lapping_plots.py"} <= set(modules)
    for p in folder.glob("*.py"):  # STYLE.md: split a module that passes about 800 lines
        assert len(p.read_text(encoding="utf-8").splitlines()) < 800, p.name
    for name in plot.__all__:  # the old module's public names are still importable from flatcheck.output._plots
        assert hasattr(plot, name), name


def test_union_jack_arrowheads_do_not_meet_at_the_corners_and_stations_are_named():
    xy, lines, L, W = _union_jack()
    names = ["SW", "S", "SE", "W", "C", "E", "NW", "N", "NE"]
    fig = plot.new_figure((6.9, 4.4))
    ax = fig.add_axes([0.12, 0.12, 0.84, 0.78])
    plot.survey_layout(ax, xy, lines, length_mm=L, width_mm=W, station_names=names)
    fig.canvas.draw()
    r = fig.canvas.get_renderer()
    heads = [t for t in ax.texts if t.get_gid() == "direction"]
    assert len(heads) == len(lines)
    tips = np.array([h.xy for h in heads])
    # no arrowhead sits on a station (where several lines meet), and no two share a place
    d_station = np.min(np.hypot(*(tips[:, None, :] - xy[None, :, :]).transpose(2, 0, 1)), axis=1)
    assert d_station.min() > 20.0  # mm on a 1000 x 600 mm plate
    d_tips = np.hypot(*(tips[:, None, :] - tips[None, :, :]).transpose(2, 0, 1)) + np.eye(len(tips)) * 1e9
    assert d_tips.min() > 20.0
    # each head points along its line towards the line's last station
    for h, (name, idx) in zip(heads, lines):
        direction = xy[idx[-1]] - xy[idx[0]]
        assert np.dot(np.asarray(h.xy) - np.asarray(h.xyann), direction) > 0, name
    named = [t for t in ax.texts if t.get_gid() == "station-name"]
    assert {t.get_text() for t in named} <= set(names) and len(named) >= 6  # most fit; none overlaps a label
    assert not _overlaps([(t.get_text(), t.get_window_extent(r)) for t in ax.texts
                          if t.get_gid() in ("station-name", "line-label")])


def test_residual_histogram_explains_its_lines():
    fig = plot.new_figure((5, 3))
    ax = fig.add_axes([0.15, 0.2, 0.8, 0.7])
    r = np.random.default_rng(1234).normal(0, 0.05, 80)
    plot.residual_histogram(ax, r)
    legend = ax.get_legend()
    assert legend is not None and "RMS" in legend.get_texts()[0].get_text()
    # the dashed lines stand at -RMS and +RMS (numpy as the reference)
    rms = float(np.sqrt(np.mean(r**2)))
    xs = sorted(line.get_xdata()[0] for line in ax.lines)
    assert xs == pytest.approx([-rms, rms])


def test_a_picture_written_alone_keeps_its_second_axis_and_carries_its_caption(tmp_path):
    fig = plot.new_figure((8, 5))
    t = np.linspace(0, 1000, 51)
    axes = plot.carriage_path(fig, t, np.sin(t / 200), np.sin(t / 200) * 0.8, pitch=np.cos(t / 200),
                              local_um=np.abs(np.sin(t / 100)), local_limit_um=1.0, title="carriage")
    bare = plot.save_png(fig, tmp_path / "bare.png", dpi=60, axes=axes[:1])
    fig.canvas.draw()
    twin = [a for a in fig.axes if a not in axes][0]
    assert "pitch" in twin.get_ylabel()
    r = fig.canvas.get_renderer()
    # the crop holds the pitch axis's label: the picture reaches past the right spine by at least its width
    right_in = (twin.yaxis.label.get_window_extent(r).x1 - axes[0].get_window_extent(r).x1) / fig.dpi
    assert imread(bare).shape[1] / 60 > axes[0].get_window_extent(r).width / fig.dpi + right_in * 0.9
    captioned = plot.save_png(fig, tmp_path / "cap.png", dpi=60, axes=axes[:1], caption=("plate KY-0", "measured"))
    a, b = imread(bare), imread(captioned)
    assert b.shape[0] > a.shape[0]  # the caption adds lines above the picture
    assert not any(t.get_gid() == "caption" for t in fig.texts)  # and leaves the figure as it was


def test_compare_change_map_labels_one_spot_with_one_depth_when_referred():
    x, y = np.meshgrid(np.linspace(0, 1000, 11), np.linspace(0, 630, 7))
    x, y = x.ravel(), y.ravel()
    dip = 2.0 * np.exp(-((x - 400) ** 2 + (y - 300) ** 2) / (2 * 120.0**2))
    before = 0.001 * x
    after = before - dip
    axes = plot.compare_change_map(None, x, y, before, after, dip, change_um=-dip, step_um=0.024)
    texts = {t.get_gid(): t.get_text() for ax in axes for t in ax.texts if t.get_gid() in ("lowest", "deepest")}
    # the removal is the dip itself; referred to the least removal's plane the change is -dip: same spot, same
    # depth, told as a lowering and as a removal
    assert texts["lowest"] == f"most lowered {-dip.max():+.2f} µm"
    assert texts["deepest"] == f"deepest removal {dip.max():.2f} µm"
