"""The report's lapping pages: removal and dwell maps, the bench chart of cells with their times, and
the table of passes.

Drawn from the :class:`flatcheck.lapping.LapPlan` a :class:`ReportContent` carries
(:mod:`._report_content`), with the page geometry and formatting helpers of :mod:`._report_pages`
(which also holds the plan's one-sentence summary and the supports-first message, stated on the
summary page as well). Also here is how the chart and the pass table are cut to fit the pages, which
:mod:`._report` asks when it lays the report out. matplotlib is reached only inside the drawing
functions, through :mod:`._plots`.
"""

from __future__ import annotations

import numpy as np

from ._report_content import _h, _in_units
from ._report_pages import _BOTTOM, _PLAN_RECT_LEFT, _TEXT_FS, _TOP, _num, _support_first


def _lapping_text(c, units):
    p = c.lapping
    rm = p.removal
    unit = "min" if p.lap.time_unit == "min" else "passes"
    text = _support_first(c, units) + [(f"Target {_h(rm.target_um, units, c.height_step_um)} ({_in_units(c.lapping_target, units)}). Flatness now "
             f"{_h(rm.flatness_before_um, units, c.height_step_um)}; after the plan {_h(p.predicted_flatness_um, units, c.height_step_um)} predicted "
             f"(best this lap can do: {_h(p.dwell_flatness_um, units, c.height_step_um)}). {len(p.passes)} passes, total "
             f"{p.total_time:.1f} {unit}: see the passes page. Lap: {_in_units(p.lap.describe(), units)}.", "")]
    rate = _in_units(f"{p.lap.rate_um:g} µm per {p.lap.time_unit}", units)
    if c.lap_rate_assumed:
        text.append((f"The removal rate is assumed ({rate}), not calibrated: the times are relative. Measure the "
                     "rate on a test pass and plan again with it (--rate-um-per-min).", "b"))
    else:
        text.append((f"Removal rate as given by the user: {rate}.", "s"))
    return text


def _lapping_foot(c, units):
    p = c.lapping
    rm = p.removal
    text = []
    shortfall = getattr(p, "shortfall", None)
    if p.passes and shortfall is not None:  # why the plan misses its target, and what to change
        text.append((shortfall.text(units, c.height_step_um), "b"))
    elif p.passes and p.predicted_flatness_um > rm.target_um:
        text.append((f"The plan misses the target {_h(rm.target_um, units, c.height_step_um)} (predicted "
                     f"{_h(p.predicted_flatness_um, units, c.height_step_um)}): survey again after the plan and plan again.", "b"))
    text.append(("Lap wet or with extraction; see the cautions.", "s"))
    return text


_CHART_TOP_IN = 0.5  # room above each block of the bench chart: title and column letters (inches)
_CHART_BOTTOM_IN = 0.5  # below it: the x label


def _lapping_maps(fig, c, units):
    """Head text, removal and dwell maps at the top of the lapping page; returns (maps, bottom, foot)."""
    from . import _plots as plot

    fh = fig.get_figheight()
    head = _lapping_text(c, units)
    head_in = plot.text_block_height_in(head, fontsize=_TEXT_FS, wrap_chars=110)
    tax = fig.add_axes([0.06, _TOP - head_in / fh, 0.88, head_in / fh])
    plot.text_block(tax, head, fontsize=_TEXT_FS, wrap_chars=110)
    ratio = plot.plan_ratio(plot.plan_box(c.heightmap))
    side = ratio <= 2.0  # a plate: removal and dwell side by side; a long surface: one above the other
    maps, bottom = plot.plan_panels(fig, 2, 2 if side else 1, ratio,
                                    (_PLAN_RECT_LEFT, _BOTTOM, 0.94, _TOP - head_in / fh - 0.01),
                                    top_in=0.42, max_height_in=2.4 if side else 1.3, gap_in=0.9)
    return maps, bottom


def _chart_blocks(c, width_in):
    """Blocks of whole columns of the bench chart and the part of the surface each shows (mm)."""
    from . import _plots as plot

    p = c.lapping
    box = plot.plan_box(c.heightmap)
    blocks = plot.cell_chart_blocks(p.chart, width_in, box_mm=box)
    xe = np.asarray(p.chart.x_edges_mm, float)
    n = len(p.chart.columns)
    sub = [(box[0] if a == 0 else float(xe[a]), box[1] if b == n else float(xe[b]), box[2], box[3]) for a, b in blocks]
    return blocks, sub


_MIN_CELL_IN = 0.3  # narrowest legible chart cell (inches): holds "12.5" at 7 points


def _chart_height_in(c, width_in) -> float:
    """Least height (inches) the bench chart needs, at most ``width_in`` wide, with cells wide enough to read."""
    from . import _plots as plot

    blocks, sub = _chart_blocks(c, width_in)
    ratio = max(plot.plan_ratio(sb) for sb in sub)
    narrowest = float(np.min(np.diff(np.asarray(c.lapping.chart.x_edges_mm, float))))
    span = max(sb[1] - sb[0] for sb in sub)
    w = min(width_in, _MIN_CELL_IN * 1.08 * span / narrowest)  # as narrow as the cells allow
    return len(blocks) * (w / ratio + _CHART_TOP_IN + _CHART_BOTTOM_IN)


def _chart_width_in(fig) -> float:
    return (0.94 - _PLAN_RECT_LEFT) * fig.get_figwidth() - 0.3


def _chart_fits_on_lapping_page(c) -> bool:
    """Whether the bench chart fits below the maps at a legible size (else it gets a page of its own)."""
    from . import _plots as plot

    scratch = plot.new_figure()
    _, bottom = _lapping_maps(scratch, c, "um")
    foot_in = plot.text_block_height_in(_lapping_foot(c, "um"), fontsize=_TEXT_FS, wrap_chars=110)
    room = (bottom - 0.005 - _BOTTOM) * scratch.get_figheight() - foot_in - 0.1
    return _chart_height_in(c, _chart_width_in(scratch)) <= room


def _draw_chart(fig, c, units, rect):
    """The bench chart in ``rect``, cut into blocks of whole columns (west first) when its cells would be too
    narrow to read; returns its axes."""
    from . import _plots as plot

    p = c.lapping
    unit = "min" if p.lap.time_unit == "min" else "passes"
    blocks, sub = _chart_blocks(c, _chart_width_in(fig))
    caxes, _ = plot.plan_panels(fig, len(blocks), 1, max(plot.plan_ratio(sb) for sb in sub), rect,
                                top_in=_CHART_TOP_IN, bottom_in=_CHART_BOTTOM_IN, right_in=0.3, max_height_in=4.5)
    head = f"bench chart: time per cell ({unit}); columns A.. from the west, rows 1.. from the south, north up"
    for k, (cax, (a, b), sb) in enumerate(zip(caxes, blocks, sub)):
        cols = f"columns {p.chart.columns[a]}-{p.chart.columns[b - 1]}"
        title = head if len(blocks) == 1 else (f"bench chart: time per cell ({unit}), {cols}" if k == 0 else cols)
        plot.cell_chart(cax, p.chart, units=units, box_mm=sb, columns=(a, b), title=title)
    return list(caxes)


def _page_lapping(fig, c, units, chart=None):
    """Removal and dwell maps and (``chart``; ``None``: if it fits) the bench chart of cells with their times."""
    from . import _plots as plot

    p = c.lapping
    rm = p.removal
    fh = fig.get_figheight()
    if chart is None:
        chart = _chart_fits_on_lapping_page(c)
    box = plot.plan_box(c.heightmap)
    maps, bottom = _lapping_maps(fig, c, units)
    plot.removal_map(maps[0], p.xs_mm, p.ys_mm, p.wanted_um, units=units, box_mm=box,
                     title=f"least removal (deepest {_h(rm.max_depth_um, units, c.height_step_um)})")
    plot.dwell_map(maps[1], p.xs_mm, p.ys_mm, p.plan_dwell, dwell_unit=p.lap.time_unit, units=units, box_mm=box,
                   chart=p.chart, title="dwell, cells of the chart" + (" (rate assumed)" if c.lap_rate_assumed else ""))
    foot = _lapping_foot(c, units)
    if not chart:
        foot = [("The bench chart (time per cell) is on the next page.", "b")] + foot
    foot_in = plot.text_block_height_in(foot, fontsize=_TEXT_FS, wrap_chars=110)
    pictures = [("lapping-removal", [maps[0]]), ("lapping-dwell", [maps[1]])]
    if chart:
        rect = (_PLAN_RECT_LEFT, _BOTTOM + (foot_in + 0.1) / fh, 0.94, bottom - 0.005)
        pictures.append(("lapping-cell-chart", _draw_chart(fig, c, units, rect)))
        fax = fig.add_axes([0.06, _BOTTOM, 0.88, foot_in / fh])
    else:
        fax = fig.add_axes([0.06, bottom - 0.01 - foot_in / fh, 0.88, foot_in / fh])
    plot.text_block(fax, foot, fontsize=_TEXT_FS, wrap_chars=110)
    return pictures


def _page_chart(fig, c, units):
    """The bench chart on a page of its own (a long surface cut into blocks of columns)."""
    from . import _plots as plot

    note = [("Columns A.. from the west, rows 1.. from the south; north is up. Each number is the time the lap "
             "spends with its centre in that cell; '.' none. Cell edges are measured from the south-west corner of "
             "the surveyed area.", "s")]
    fh = fig.get_figheight()
    note_in = plot.text_block_height_in(note, fontsize=_TEXT_FS, wrap_chars=110)
    tax = fig.add_axes([0.06, _TOP - note_in / fh, 0.88, note_in / fh])
    plot.text_block(tax, note, fontsize=_TEXT_FS, wrap_chars=110)
    rect = (_PLAN_RECT_LEFT, _BOTTOM, 0.94, _TOP - note_in / fh - 0.01)
    return [("lapping-cell-chart", _draw_chart(fig, c, units, rect))]


def _pass_rows(c, units):
    p = c.lapping
    rows = []
    for q in p.passes:
        x0, x1, y0, y1 = (float(v) for v in q.extent_mm)
        t = f"{q.time:.2f} {'min' if q.time_unit == 'min' else 'passes'}"
        if q.strokes is not None:
            t += f" ({q.strokes} strokes)"
        if not getattr(q, "even", True):
            t += " (uneven)"
        rows.append((f"{q.order}", q.zone, f"{_num(q.centre_x_mm, units)}, {_num(q.centre_y_mm, units)}",
                     f"{_num(x0, units)} to {_num(x1, units)}, {_num(y0, units)} to {_num(y1, units)}",
                     _h(q.depth_um, units, c.height_step_um), t))
    return rows


def _pass_cols(units):
    pu = "in" if units == "in" else "mm"
    return dict(col_x=(0.0, 0.07, 0.22, 0.40, 0.70, 0.84), fontsize=_TEXT_FS,
                col_labels=("pass", "cells", f"centre x, y ({pu})", f"lap centre travels x, y ({pu})", "depth",
                            "time"), wrap_chars=(None, 14, None, None, None, 13))


def _pass_intro():
    return [("Passes, highest first: work the lap evenly over the zone, its centre travelling within the extent "
             "given, for the time given ('uneven': longer in some cells than in others, as the bench chart "
             "shows). Cells as on the bench chart.", "s")]


def _passes_foot(c, units):
    p = c.lapping
    rm = p.removal
    text = [(f"Dwell smoothness {p.smoothness:g}; {len(p.passes)} passes ({p.passes_unmerged} before passes shorter "
             f"than {p.min_pass_time:.2g} {p.lap.time_unit} were dropped, merged or lengthened). Removed volume "
             f"{rm.removed_volume_mm3:.4g} mm^3.", "s")] if p.passes else [
        ("No passes: the surface is already within the target.", "b")]
    text += [("Note: " + _in_units(n, units).rstrip(".") + ".", "s") for n in c.lapping_notes]
    text += _lapping_foot(c, units)
    return text


def _pass_pages(c) -> list:
    """How the pass table is cut into pages: ``(start, stop, last)``; the notes go after the last rows."""
    from . import _plots as plot

    rows = _pass_rows(c, "um")
    cols = _pass_cols("um")
    fh = 11.69
    room = (_TOP - _BOTTOM) * fh - plot.text_block_height_in(_pass_intro(), fontsize=_TEXT_FS, wrap_chars=110)
    fixed = plot.flow_table_height_in([], col_labels=cols["col_labels"], fontsize=_TEXT_FS, title="Passes")
    row_in = plot.flow_table_height_in(rows[:1] or [("",) * 6], col_labels=None, fontsize=_TEXT_FS) - \
        0.3 * _TEXT_FS * 1.45 / 72
    per_page = max(1, int((room - fixed) // row_in))
    foot = plot.text_block_height_in(_passes_foot(c, "um"), fontsize=_TEXT_FS, wrap_chars=110)
    pages = []
    start = 0
    n = len(rows)
    while True:
        stop = min(n, start + per_page)
        pages.append([start, stop, False])
        start = stop
        if start >= n:
            break
    used = fixed + (pages[-1][1] - pages[-1][0]) * row_in
    if used + foot > room and n:
        pages.append([n, n, False])  # the notes on a page of their own
    pages[-1][2] = True
    return [tuple(pg) for pg in pages]


def _page_passes(fig, c, units, start, stop, last):
    from . import _plots as plot

    ax = fig.add_axes([0.06, _BOTTOM, 0.88, _TOP - _BOTTOM])
    y = plot.text_block(ax, _pass_intro(), fontsize=_TEXT_FS, wrap_chars=110)
    rows = _pass_rows(c, units)[start:stop]
    n = len(c.lapping.passes)
    if rows:
        title = f"Passes {start + 1}-{stop} of {n}" if (start, stop) != (0, n) else f"Passes ({n})"
        y = plot.flow_table(ax, y, rows, title=title, **_pass_cols(units))
    if last:
        plot.text_block(ax, _passes_foot(c, units), y0=y, fontsize=_TEXT_FS, wrap_chars=110)
    return []
