"""Pictures of lapping: removal and dwell maps, the bench chart of cells, and the change between two surveys."""

from __future__ import annotations

import numpy as np
from matplotlib.patches import Rectangle

from ...errors import InputValueError
from ._maps import field_map
from ._common import (
    A4_PORTRAIT_IN, FIELD_CMAP, HEIGHT_CMAP, _INK, _colorbar_beside, _fmt_step, _height_scale, _levels, _plan_aspect,
    _plan_limits, _pos_scale, new_figure, plan_panels, plan_ratio,
)


def removal_map(ax, x_mm, y_mm, removal_um, *, units: str = "um", title: str | None = "planned removal",
                box_mm=None):
    """Map of the material to remove by lapping, µm on a (ny, nx) grid (``box_mm``: the whole surface, mm)."""
    hs, hu = _height_scale(units)
    return field_map(ax, x_mm, y_mm, removal_um, label=f"removal ({hu})", cmap=HEIGHT_CMAP, units=units,
                     title=title, scale=hs, box_mm=box_mm)


def dwell_map(ax, x_mm, y_mm, dwell, *, dwell_unit: str = "s", units: str = "um", title: str | None = "dwell",
              chart=None, box_mm=None):
    """Map of the lap's dwell (time or passes per area) on a (ny, nx) grid, in ``dwell_unit``.

    With ``chart`` (a :class:`flatcheck.lapping.CellChart`) the edges of the chart's cells are drawn
    over the map (white lines), so the map and the bench chart (:func:`cell_chart`) read together.
    """
    field_map(ax, x_mm, y_mm, dwell, label=f"dwell ({dwell_unit})", cmap=FIELD_CMAP, units=units, title=title,
              box_mm=box_mm)
    if chart is not None:
        _cell_grid(ax, chart, units=units, color="white", lw=0.7, names=False)
    return ax


def _cell_grid(ax, chart, *, units: str, color=_INK, lw: float = 0.6, fontsize: float = 6.5, names: bool = True,
               columns=None):
    """Cell edges of a lapping chart and (``names``) column letters above it and row numbers right of it.

    ``columns`` is ``(start, stop)``: only those columns (a block of a long chart). Column letters too
    wide for their cells are written every second (third...) column so that none overlap.
    """
    ps, _ = _pos_scale(units)
    start, stop = columns or (0, len(chart.columns))
    xe = np.asarray(chart.x_edges_mm, float)[start : stop + 1] * ps
    ye = np.asarray(chart.y_edges_mm, float) * ps
    for v in xe:
        ax.plot([v, v], [ye[0], ye[-1]], color=color, lw=lw, zorder=3)
    for v in ye:
        ax.plot([xe[0], xe[-1]], [v, v], color=color, lw=lw, zorder=3)
    if not names:
        return
    ax.apply_aspect()
    to_px = ax.transData.transform
    cell_pt = min(abs(to_px((b, 0))[0] - to_px((a, 0))[0]) for a, b in zip(xe[:-1], xe[1:])) * 72 / ax.figure.dpi
    widest = max(len(c) for c in chart.columns[start:stop]) * 0.65 * fontsize + 2.0
    every = max(1, int(np.ceil(widest / max(cell_pt, 1e-9))))
    top = ax.get_xaxis_transform()  # x in data, y in axes fraction
    side = ax.get_yaxis_transform()  # x in axes fraction, y in data
    for k, (name, a, b) in enumerate(zip(chart.columns[start:stop], xe[:-1], xe[1:])):
        if k % every:
            continue
        ax.text((a + b) / 2, 1.01, name, transform=top, ha="center", va="bottom", fontsize=fontsize,
                fontweight="bold", color=_INK, gid="cell-column", clip_on=False)
    for name, a, b in zip(chart.rows, ye[:-1], ye[1:]):
        ax.text(1.01, (a + b) / 2, name, transform=side, ha="left", va="center", fontsize=fontsize,
                fontweight="bold", color=_INK, gid="cell-row", clip_on=False)


def _cell_time_text(t: float) -> str:
    """A cell's time as the bench chart prints it: '.' for none, one decimal, '<0.1' for a touch."""
    if t <= 0:
        return "."
    return f"{t:.1f}" if t >= 0.05 else "<0.1"


def cell_chart_blocks(chart, width_in: float, *, min_cell_in: float = 0.3, box_mm=None) -> list:
    """Cut a lapping chart into blocks of whole columns whose cells are drawn at least ``min_cell_in`` wide.

    Parameters
    ----------
    chart : flatcheck.lapping.CellChart
    width_in : float
        Width the chart is drawn at (inches).
    min_cell_in : float
        Narrowest cell that keeps its time legible (inches; 0.3 in holds "12.5" at 7 points).
    box_mm : (xmin, xmax, ymin, ymax), optional
        The whole surface (mm); its length sets the scale of the first try.

    Returns
    -------
    list of (int, int)
        ``(start, stop)`` column ranges, west first; one block when the whole chart fits.
    """
    xe = np.asarray(chart.x_edges_mm, float)
    n = len(chart.columns)
    span = (box_mm[1] - box_mm[0]) if box_mm is not None else float(xe[-1] - xe[0])
    narrowest = float(np.min(np.diff(xe)))
    for blocks in range(1, n + 1):
        per = int(np.ceil(n / blocks))
        cuts = [(k, min(n, k + per)) for k in range(0, n, per)]
        longest = max(float(xe[b] - xe[a]) for a, b in cuts)
        scale = width_in / (1.08 * (span if blocks == 1 else longest))  # inches per mm, with the view's margins
        if narrowest * scale >= min_cell_in or per == 1:
            return cuts
    return [(k, k + 1) for k in range(n)]


def cell_chart(ax, chart, *, units: str = "um", title: str | None = None, box_mm=None, columns=None):
    """The bench chart of a lapping plan: the surface cut into named cells with the working time in each.

    Parameters
    ----------
    ax : Axes
        Placed on its figure already (the cell texts are sized to the drawn cells).
    chart : flatcheck.lapping.CellChart
        Columns A.. from the west, rows 1.. from the south, cell edges in mm, time per cell.
    units : {"um", "in"}
        Positions in mm or inches.
    title : str, optional
    box_mm : (xmin, xmax, ymin, ymax), optional
        The whole surface (mm), outlined around the chart (its x range is cut to ``columns``).
    columns : (int, int), optional
        Draw only columns ``start`` to ``stop - 1``: one block of a long chart (see :func:`cell_chart_blocks`).

    Returns
    -------
    float
        The font size of the cell times (points); the texts carry ``gid`` "cell-time". Cells are
        shaded from white (no time) to mid grey (the longest), so the black numbers read in grey print.
    """
    ps, pu = _pos_scale(units)
    start, stop = columns or (0, len(chart.columns))
    xe_all = np.asarray(chart.x_edges_mm, float) * ps
    xe = xe_all[start : stop + 1]
    ye = np.asarray(chart.y_edges_mm, float) * ps
    T = np.asarray(chart.time, float)
    tmax = float(np.max(T)) if T.size and np.max(T) > 0 else 1.0
    T = T[:, start:stop]
    for j in range(len(chart.rows)):
        for i in range(stop - start):
            shade = 1.0 - 0.45 * max(T[j, i], 0.0) / tmax
            ax.add_patch(Rectangle((xe[i], ye[j]), xe[i + 1] - xe[i], ye[j + 1] - ye[j], fc=str(shade), ec="none",
                                   zorder=1))
    box = box_mm if box_mm is not None else (xe_all[0] / ps, xe_all[-1] / ps, ye[0] / ps, ye[-1] / ps)
    if columns is not None:  # a block: its own stretch of the surface
        box = (max(box[0], xe[0] / ps) if start else box[0], min(box[1], xe[-1] / ps) if stop < len(chart.columns)
               else box[1], box[2], box[3])
    bx0, bx1, by0, by1 = (v * ps for v in box)
    ax.plot([bx0, bx1, bx1, bx0, bx0], [by0, by0, by1, by1, by0], color="0.4", lw=0.8, ls="--", zorder=0)
    (xa, xb), (ya, yb) = _plan_limits(box)
    ax.set_xlim(xa * ps, xb * ps)
    ax.set_ylim(ya * ps, yb * ps)
    ax.set_xlabel(f"x ({pu})")
    ax.set_ylabel(_plan_aspect(ax, f"y ({pu})"))
    _cell_grid(ax, chart, units=units, color=_INK, lw=0.6, fontsize=7, columns=(start, stop))
    # the largest font that fits the narrowest cell (measured on the drawn axes), 4.5 to 9 points
    ax.apply_aspect()
    fig = ax.figure
    to_px = ax.transData.transform
    w_pt = min(abs(to_px((b, 0))[0] - to_px((a, 0))[0]) for a, b in zip(xe[:-1], xe[1:])) * 72 / fig.dpi
    h_pt = min(abs(to_px((0, b))[1] - to_px((0, a))[1]) for a, b in zip(ye[:-1], ye[1:])) * 72 / fig.dpi
    texts = [[_cell_time_text(T[j, i]) for i in range(stop - start)] for j in range(len(chart.rows))]
    chars = max(len(t) for row in texts for t in row)
    size = float(min(9.0, 0.6 * h_pt, (w_pt - 2.0) / (0.62 * chars)))
    size = max(size, 4.5)
    for j in range(len(chart.rows)):
        for i in range(stop - start):
            ax.text((xe[i] + xe[i + 1]) / 2, (ye[j] + ye[j + 1]) / 2, texts[j][i], ha="center", va="center",
                    fontsize=size, color=_INK, fontweight="bold" if T[j, i] > 0 else "normal", gid="cell-time",
                    zorder=4)
    unit = "min" if chart.time_unit == "min" else "passes"
    if title is None:
        title = f"time per cell ({unit}); columns A.. from the west, rows 1.. from the south"
    if title:
        ax.set_title(title, fontsize=10, loc="left", pad=13)
    return size


def _own_ls_deviation(x, y, z):
    """Heights about their own least-squares plane (µm), as :mod:`flatcheck.lapping` refers each survey."""
    from ...form import least_squares_plane

    p = least_squares_plane(x, y, z)
    return z - (p.a_um + p.b_um_per_mm * x + p.c_um_per_mm * y)


def compare_change_map(
    fig,
    x_mm,
    y_mm,
    before_um,
    after_um,
    removed_um,
    *,
    units: str = "um",
    length_mm: float | None = None,
    width_mm: float | None = None,
    own_planes: bool = True,
    rect=(0.09, 0.06, 0.95, 0.93),
    change_um=None,
    step_um: float | None = None,
):
    """The change map of ``flatcheck compare``: before, after, change and the least removal, on the matched nodes.

    Four plan views of the surface, each with its own colour bar (as tall as the view) and the
    matched nodes marked as open circles:

    1. *before* and 2. *after*: each survey about its own least-squares plane (the reference
       :func:`flatcheck.compare_surveys` uses), drawn on one shared colour scale so they compare;
    3. *change = after - before* (µm; negative = lower now), its zero contour drawn thick and the
       most-lowered node labelled (``gid`` "lowest");
    4. the *least removal* consistent with the change (µm, >= 0; ``Progress.removed_um``), its
       deepest node labelled (``gid`` "deepest").

    Colour scales are perceptually uniform (legible in grey) and every filled map carries labelled
    contour lines. A long surface is drawn as four views one above the other, a plate as a 2 x 2 grid;
    the views are sized to the surface's shape and stacked from the top of ``rect``.

    Parameters
    ----------
    fig : matplotlib Figure or None
        The figure to draw in; ``None`` makes an A4-wide figure as tall as the views need
        (``axes[0].figure``), e.g. for a PNG file.
    x_mm, y_mm : ndarray, shape (n,)
        Positions of the matched nodes (mm), e.g. ``Progress.x_mm``, ``Progress.y_mm``.
    before_um, after_um : ndarray, shape (n,)
        Heights of the two surveys at those nodes (µm), in the same order (the after survey's
        heights re-ordered by :func:`flatcheck.match_nodes`).
    removed_um : ndarray, shape (n,)
        Least removal consistent with the change (µm), e.g. ``Progress.removed_um``.
    units : {"um", "in"}
        Display units: µm and mm, or µin and inches.
    length_mm, width_mm : float, optional
        Outline of the surface (mm), drawn when given.
    own_planes : bool
        Refer each survey to its own least-squares plane first (default, as ``flatcheck compare``
        does, since each survey fixes its own height reference). With ``False`` the heights are
        drawn as given.
    rect : (left, bottom, right, top)
        Part of the figure the views fill (figure fractions).
    change_um : ndarray, shape (n,), optional
        The change referred to the plane of the least removal (``Progress.change_referred_um``, µm): drawn
        in the third view instead of the change about the least-squares planes, so that it reads 0 where
        nothing came off and ``-removed_um`` where something did. The third and fourth views then label one
        node with one depth.

    Returns
    -------
    list of Axes
        ``[before, after, change, removal]``.

    Raises
    ------
    InputValueError
        Arrays of different lengths, fewer than three nodes, or non-finite values.
    """
    from matplotlib.tri import Triangulation

    x = np.asarray(x_mm, float).ravel()
    y = np.asarray(y_mm, float).ravel()
    zb = np.asarray(before_um, float).ravel()
    za = np.asarray(after_um, float).ravel()
    rem = np.asarray(removed_um, float).ravel()
    if not (x.size == y.size == zb.size == za.size == rem.size):
        raise InputValueError("the change map needs one position, two heights and one removal per node",
                              fix="give arrays of the matched nodes, all of one length")
    if x.size < 3 or not all(np.all(np.isfinite(v)) for v in (x, y, zb, za, rem)):
        raise InputValueError("the change map needs at least three nodes with finite values",
                              fix="compare surveys with matched nodes")
    if own_planes:
        zb = _own_ls_deviation(x, y, zb)
        za = _own_ls_deviation(x, y, za)
    change = za - zb
    referred = change_um is not None
    if referred:
        change = np.asarray(change_um, float).ravel()
        if change.size != x.size or not np.all(np.isfinite(change)):
            raise InputValueError("the referred change needs one finite value per node",
                                  fix="give Progress.change_referred_um of the same nodes")
    hs, hu = _height_scale(units)
    ps, pu = _pos_scale(units)
    tri = Triangulation(x * ps, y * ps)
    L = (length_mm if length_mm else float(np.ptp(x))) * ps
    W = (width_mm if width_mm else float(np.ptp(y))) * ps
    x0 = 0.0 if length_mm else float(x.min()) * ps
    y0 = 0.0 if width_mm else float(y.min()) * ps
    pad = 0.04 * max(L, W)
    ratio = plan_ratio((x0, x0 + L, y0, y0 + W))
    if fig is None:  # a figure as tall as the views need: A4 wide
        fig = new_figure((A4_PORTRAIT_IN[0], 1.0))
        ncols = 1 if ratio > 2.0 else 2
        aw = (A4_PORTRAIT_IN[0] * (rect[2] - rect[0]) - ncols * 0.95 - (ncols - 1) * 0.75) / ncols
        rows_in = (4 // ncols) * (aw / ratio + 0.8)
        fig.set_size_inches(A4_PORTRAIT_IN[0], min(rows_in / (rect[3] - rect[1]), A4_PORTRAIT_IN[1]))
    axes, _ = plan_panels(fig, 4, 1 if ratio > 2.0 else 2, ratio, rect)
    shared = _levels(float(min(zb.min(), za.min()) * hs), float(max(zb.max(), za.max()) * hs), 10)
    panels = [
        (zb * hs, shared, HEIGHT_CMAP, "before (about its own LS plane)", f"height ({hu})"),
        (za * hs, shared, HEIGHT_CMAP, "after (about its own LS plane)", f"height ({hu})"),
        (change * hs, _levels(float(change.min() * hs), float(change.max() * hs), 10), HEIGHT_CMAP,
         "change = after - before" + (", referred to the plane of the least removal" if referred else
                                      " (each about its own LS plane)"), f"change ({hu}; < 0: lower)"),
        (rem * hs, _levels(0.0, max(float(rem.max() * hs), 1e-9), 10), FIELD_CMAP,
         "least removal consistent with the change", f"removed ({hu})"),
    ]
    for ax, (v, lev, cmap, title, label) in zip(axes, panels):
        cf = ax.tricontourf(tri, v, levels=lev, cmap=cmap)
        cs = ax.tricontour(tri, v, levels=lev, colors=_INK, linewidths=0.4, alpha=0.7)
        if len(lev) > 2:
            ax.clabel(cs, levels=cs.levels[::2], fmt=lambda t: f"{t:g}", fontsize=5.5)
        _colorbar_beside(ax, cf, label)
        ax.plot(x * ps, y * ps, "o", ms=2.5, mfc="white", mec=_INK, mew=0.5, ls="none", zorder=5)
        if length_mm and width_mm:
            ax.plot([0, L, L, 0, 0], [0, 0, W, W, 0], color=_INK, lw=0.8)
        ax.set_xlim(x0 - pad, x0 + L + pad)
        ax.set_ylim(y0 - pad, y0 + W + pad)
        ax.tick_params(labelsize=6.5)
        ax.set_xlabel(f"x ({pu})", fontsize=7)
        ax.set_ylabel(_plan_aspect(ax, f"y ({pu})"), fontsize=7)
        ax.set_title(title, fontsize=8, loc="left")
    if float(np.min(change)) < 0 and float(np.max(change)) > 0:
        axes[2].tricontour(tri, change * hs, levels=[0.0], colors=_INK, linewidths=1.6, linestyles="--")
    # one spot, one depth: the removal panel's deepest node is labelled in both views when the change is
    # referred to the plane of the least removal (there the change is exactly -removal); otherwise each view
    # labels its own extreme, worded so that a signed change and a removal depth are not confused
    i_deep = int(np.argmax(rem))
    i_low = i_deep if referred else int(np.argmin(change))
    for ax, v, i, tag, text in (
        (axes[2], change, i_low, "lowest", "most lowered"),
        (axes[3], rem, i_deep, "deepest", "deepest removal" if referred else "deepest"),
    ):
        fx = (x[i] * ps - x0) / max(L, 1e-12)
        fy = (y[i] * ps - y0) / max(W, 1e-12)
        ha = "left" if fx < 0.3 else "right" if fx > 0.7 else "center"
        va = "bottom" if fy < 0.5 else "top"
        ax.plot([x[i] * ps], [y[i] * ps], "v", ms=7, mfc="white", mec=_INK, mew=1.1, zorder=6)
        # to the step the coarser survey resolves (step_um), as the summary prints the change
        label = f"{text} {_fmt_step(v[i], units, step_um, signed=not (tag == 'deepest' and referred))}"
        ax.annotate(label, (x[i] * ps, y[i] * ps),
                    xytext=(6 if ha == "left" else -6 if ha == "right" else 0, 8 if va == "bottom" else -8),
                    textcoords="offset points", ha=ha, va=va, fontsize=7, fontweight="bold", color=_INK,
                    bbox=dict(boxstyle="round,pad=0.2", fc="white", ec=_INK, lw=0.5, alpha=0.9), zorder=7,
                    gid=tag)
    return axes
