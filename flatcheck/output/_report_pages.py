"""The report's pages about the surface itself: summary, maps, local flatness, line profiles, grades,
air bearing, and methods, sources and cautions.

Each ``_page_*(fig, content, units)`` draws one page of the report on an A4 figure from a
:class:`ReportContent` (:mod:`._report_content`) and returns its pictures as ``(name, [axes...])``
for ``--png``. The page geometry and the formatting helpers shared by every page group live here, the
lowest of the page modules: the survey pages (:mod:`._report_survey_pages`) and the lapping pages
(:mod:`._report_lapping_pages`) import them; :mod:`._report` lays the pages out. matplotlib is reached
only inside the drawing functions, through :mod:`._plots`.
"""

from __future__ import annotations

import numpy as np

from ._report_content import (
    HEIGHT_REFERENCE,
    SCOPE_STATEMENT,
    _h,
    _identity_rows,
    _in_units,
    _inches,
    _size_text,
    limits_provenance_text,
    uncertainty_text,
)


# =============================================================================== drawing
# Page geometry (figure fractions of A4 portrait): the frame's header ends above _TOP, its footer below _BOTTOM.
_TOP = 0.915
_BOTTOM = 0.065
_PLAN_RECT_LEFT = 0.11  # room for a two-line y label of a stretched plan view
_TEXT_FS = 8.0  # tables and notes on drawing pages


def _tolerance(v_um, units) -> str:
    """A limit at the precision its source gives it: one decimal for 0.1 µm steps, else 0.01 µm; whole µin."""
    from ..units import height_unit_label, um_to

    x = um_to(v_um, units)
    if units == "in":
        text = f"{x:.0f}" if abs(x - round(x)) < 0.05 else f"{x:.1f}"
    else:
        text = f"{x:.1f}" if abs(x * 10 - round(x * 10)) < 1e-6 else f"{x:.2f}"
    return f"{text} {height_unit_label(units)}"


def _pos(v_mm, units):
    from ..units import format_length

    return format_length(v_mm, units)


def _num(v_mm, units) -> str:
    """A position without its unit (the column heading names it): whole mm, or inches to 0.01."""
    from ..units import format_length

    return format_length(v_mm, units, unit=False)


def _window_text(win, units) -> str:
    """The local-flatness window in the report's length unit."""
    if units != "in":
        return win.text
    if win.shape == "circle":
        return f"d{_inches(win.length_mm)} in"
    return f"{_inches(win.length_mm)} x {_inches(win.width_mm)} in"


_REFERENCE_NAMES = {
    "MZPL": "minimum zone (MZ)",
    "LSPL": "least squares (LS)",
    "three-corner": "three corners",
    "diagonal": "diagonals",
}


def _page_summary(fig, c, units):
    from . import _plots as plot
    from ..units import format_with_uncertainty

    ax = fig.add_axes([0.06, 0.06, 0.88, 0.86])
    identity, method = _identity_rows(c.heightmap, c.survey, c.evaluation.loaded.reduction, units)
    y = 1.0
    y = plot.flow_table(ax, y, identity, col_x=(0.0, 0.3), title="What was measured", wrap_chars=(None, 80))
    y = plot.flow_table(ax, y, method, col_x=(0.0, 0.3), title="How it was measured", wrap_chars=(None, 80))
    fr = c.flatness
    u = {"MZPL": c.u_mz_um, "LSPL": c.u_ls_um}
    rows = []
    for p in (fr.mzpl, fr.lspl, fr.three_corner, fr.diagonal):
        if p is None:
            continue
        unc = u.get(p.reference)
        # with its U: U to two significant digits and the flatness to the same decimal place (JCGM 100:2008, 7.2.6)
        f_txt, u_txt = (_h(p.fltt_um, units, c.height_step_um), "" if p.reference not in u else "not evaluated") if unc is None else \
            format_with_uncertainty(p.fltt_um, unc, units)
        rows.append((_REFERENCE_NAMES.get(p.reference, p.reference), f_txt, _h(p.fltp_um, units, c.height_step_um),
                     _h(p.fltv_um, units, c.height_step_um), _h(p.fltq_um, units, c.height_step_um), u_txt))
    y = plot.flow_table(ax, y, rows, col_x=(0.0, 0.25, 0.41, 0.55, 0.69, 0.83),
                        col_labels=("reference plane", "flatness FLTt", "peak FLTp", "valley FLTv", "RMS FLTq", "U"),
                        title="Flatness about each reference plane", bold_cols=(1,), fontsize=8)
    text = [("The flatness of the surface is the minimum zone (ISO 1101 zone between two parallel planes); "
             "U is its expanded uncertainty. Uncertainty: " + uncertainty_text(c, units), "s")]
    if c.local is not None:
        lf = c.local
        text.append((f"Local flatness (minimum zone inside a {_window_text(c.window, units)} window moved over the "
                     f"surface): largest {_h(lf.worst_um, units, c.height_step_um)}, window centred at x = {_pos(lf.worst_x_mm, units)}, "
                     f"y = {_pos(lf.worst_y_mm, units)}.", "s"))
    elif c.local_missing and not any("window" in n for n in c.notes):  # said once: the notes may say it already
        text.append((_in_units(c.local_missing, units), "s"))
    y = plot.text_block(ax, text, y0=y, wrap_chars=110)
    if c.grades:
        rows = [(g.grade, _tolerance(g.tolerance_um, units), g.verdict) for g in c.grades]
        y = plot.flow_table(ax, y, rows, col_x=(0.0, 0.3, 0.55), col_labels=("grade", "tolerance", "verdict"),
                            title=f"Grades: {c.grades[0].standard}", bold_cols=(2,))
        y = plot.text_block(ax, [("Decision rule and details: see the grades page.", "s")], y0=y, wrap_chars=110)
    if c.bearing is not None:
        b = c.bearing
        y = plot.flow_table(ax, y, [("verdict", b.verdict), ("largest local flatness under a pad",
                                                            f"{_h(b.local_flatness_max_um, units, c.height_step_um)} (limit {_h(b.limit_um, units, c.height_step_um)})")],
                            col_x=(0.0, 0.45), title="Air bearing", bold_cols=(1,))
    if c.lapping is not None:
        lines = [("Lapping", "h")] + _support_first(c, units, style="") + [(lapping_summary(c, units), "")]
        y = plot.text_block(ax, lines, y0=y, fontsize=8.5, wrap_chars=110)
    lines = [("Note: " + _in_units(n, units), "s") for n in c.notes]
    lines += [("Statement", "h"), SCOPE_STATEMENT]
    plot.text_block(ax, lines, y0=y, fontsize=8.5, wrap_chars=110)
    return []


def _page_map(fig, c, units):
    from . import _plots as plot

    hm = c.heightmap
    ratio = plot.plan_ratio(plot.plan_box(hm))
    note = [] if c.local is not None or not c.local_missing else [
        ("Local flatness", "h"), (_in_units(c.local_missing, units), "")]
    note_in = plot.text_block_height_in(note, fontsize=8.5, wrap_chars=105) if note else 0.0
    fh = fig.get_figheight()
    (ax,), bottom = plot.plan_panels(fig, 1, 1, ratio, (_PLAN_RECT_LEFT, _BOTTOM, 0.94, _TOP), max_height_in=4.6)
    # one reference for every height shown, as in the terminal and in --map-out: the least-squares plane
    plot.contour_map(ax, hm, reference=c.ls, reference_name="least-squares plane", units=units, step_um=c.height_step_um,
                     title=f"heights about the {HEIGHT_REFERENCE} (open circles: stations)")
    low = _BOTTOM + (note_in + 0.15) / fh if note else _BOTTOM
    top3 = bottom - 0.035  # the 3-D view's title sits below the map's x label
    ax3 = fig.add_axes([0.06, low, 0.88, top3 - low], projection="3d")
    plot.surface_view(ax3, hm, reference=c.ls, units=units, reference_name="LS plane",
                      title="the same surface in three dimensions (heights exaggerated)")
    if note:
        tax = fig.add_axes([0.06, _BOTTOM, 0.88, note_in / fh])
        plot.text_block(tax, note, fontsize=8.5, wrap_chars=105)
    return [("surface-map", [ax]), ("surface-3d", [ax3])]


def _local_grid(lf):
    """Window centres of a local-flatness scan as a (ny, nx) grid (NaN where a window was left out)."""
    xs = np.unique(lf.centre_x_mm)
    ys = np.unique(lf.centre_y_mm)
    grid = np.full((ys.size, xs.size), np.nan)
    grid[np.searchsorted(ys, lf.centre_y_mm), np.searchsorted(xs, lf.centre_x_mm)] = lf.flatness_um
    return xs, ys, grid


def local_cover(lf, win, hm, n_long: int = 90):
    """The worst local flatness of any window that holds each point of the surveyed area.

    The scan gives one value per window centre, and centres keep half a window from the edges; this spreads
    each value over its whole window, so that the map covers the surveyed area and each point shows the
    largest local flatness of a window around it.

    Parameters
    ----------
    lf : LocalFlatness
        Window centres (mm) and their local flatness (µm).
    win : Window
        The window's shape and size (mm).
    hm : HeightMap
        The surface (its point extent is the surveyed area).
    n_long : int
        Grid points along the longer side.

    Returns
    -------
    xs, ys : ndarray, shapes (nx,), (ny,)
        Grid positions (mm).
    grid : ndarray, shape (ny, nx)
        µm; NaN where no window reaches.
    """
    x0, x1, y0, y1 = hm.extent_mm
    lx, ly = max(x1 - x0, 1e-9), max(y1 - y0, 1e-9)
    nx = n_long if lx >= ly else max(8, int(round(n_long * lx / ly)))
    ny = n_long if ly > lx else max(8, int(round(n_long * ly / lx)))
    xs, ys = np.linspace(x0, x1, nx), np.linspace(y0, y1, ny)
    cx, cy = np.asarray(lf.centre_x_mm, float), np.asarray(lf.centre_y_mm, float)
    val = np.asarray(lf.flatness_um, float)
    grid = np.full((ny, nx), -np.inf)
    tol = 1e-9 * max(lx, ly)
    for start in range(0, cx.size, 256):  # blocks of centres: memory stays (ny, nx, 256)
        bx, by, bv = cx[start:start + 256], cy[start:start + 256], val[start:start + 256]
        dx = xs[None, :, None] - bx[None, None, :]
        dy = ys[:, None, None] - by[None, None, :]
        if win.shape == "circle":
            inside = dx * dx + dy * dy <= (win.length_mm / 2.0 + tol) ** 2
        else:
            inside = (np.abs(dx) <= win.length_mm / 2.0 + tol) & (np.abs(dy) <= win.width_mm / 2.0 + tol)
        grid = np.maximum(grid, np.where(inside, bv[None, None, :], -np.inf).max(axis=2))
    grid[~np.isfinite(grid)] = np.nan
    return xs, ys, grid


def _page_local(fig, c, units):
    from . import _plots as plot

    lf, win = c.local, c.window
    hm = c.heightmap
    xs, ys, grid = _local_grid(lf)
    box = plot.plan_box(hm)
    fh = fig.get_figheight()
    if xs.size >= 2 and ys.size >= 2:
        title = f"worst local flatness of a {_window_text(win, units)} window holding each point"
        (ax,), bottom = plot.plan_panels(fig, 1, 1, plot.plan_ratio(box), (_PLAN_RECT_LEFT, _BOTTOM, 0.94, _TOP),
                                         max_height_in=4.6)
        cxs, cys, cover = local_cover(lf, win, hm)
        plot.local_flatness_map(ax, cxs, cys, cover, window_mm=win.length_mm, units=units, title=title, box_mm=box)
    else:  # one row or column of positions: a profile along it
        title = f"local flatness of a {_window_text(win, units)} window, by the position of its centre"
        ax = fig.add_axes([_PLAN_RECT_LEFT, _TOP - 3.3 / fh, 0.80, 2.8 / fh])
        bottom = _TOP - 3.8 / fh
        plot.local_flatness_profile(ax, xs if xs.size > 1 else ys, grid.ravel(), along="x" if xs.size > 1 else "y",
                                    units=units, title=title)
    plot.mark_window(ax, lf.worst_x_mm, lf.worst_y_mm, shape=win.shape, length_mm=win.length_mm,
                     width_mm=win.width_mm, label=f"worst {_h(lf.worst_um, units, c.height_step_um)}", units=units,
                     stations_xy_mm=np.column_stack([hm.x_mm, hm.y_mm]),
                     profile=not (xs.size >= 2 and ys.size >= 2), along="x" if xs.size > 1 else "y")
    tax = fig.add_axes([0.06, _BOTTOM, 0.88, bottom - 0.02 - _BOTTOM])
    rows = [
        ("window", f"{_window_text(win, units)} ({'circle' if win.shape == 'circle' else 'rectangle'})"),
        ("largest local flatness", _h(lf.worst_um, units, c.height_step_um)),
        ("at the window centred at", f"x = {_pos(lf.worst_x_mm, units)}, y = {_pos(lf.worst_y_mm, units)}"),
        ("window positions", f"{np.size(lf.flatness_um)}, centres {_pos(_step(xs, ys), units)} apart"),
        ("smallest local flatness", _h(float(np.min(lf.flatness_um)), units, c.height_step_um)),
        ("stations per window", f"{int(np.min(lf.stations_in_window))} to {int(np.max(lf.stations_in_window))}"),
        ("heights between stations", lf.interpolation),
    ]
    y = plot.flow_table(tax, 1.0, rows, col_x=(0.0, 0.35), title="Local flatness", bold_cols=(1,),
                        wrap_chars=(None, 75), fontsize=_TEXT_FS)
    text = ["The window is moved over the surveyed area (always wholly inside it) and the minimum-zone flatness "
            "of the surface inside it found at each position; the map shows at each point the largest of these "
            "for the windows that hold the point, so it covers the whole surveyed area (the outline is the "
            "surface). The outlined window is the worst one. ISO 8512-2 states a local tolerance over any "
            "250 x 250 mm area; its values are not built in here."]
    text += [_in_units(n, units) for n in lf.notes]
    plot.text_block(tax, [(_in_units(t, units), "s") for t in text], y0=y, fontsize=_TEXT_FS, wrap_chars=110)
    return [("local-flatness", [ax])]


def _step(xs, ys):
    d = [float(np.min(np.diff(v))) for v in (xs, ys) if v.size > 1]
    return min(d) if d else 0.0


def _page_profiles(fig, c, units, chunk):
    from . import _plots as plot

    profs = [
        plot.LineProfile(ln.name, ln.s_mm, ln.height_um, ln.straightness_um, ln.ref_offset_um, ln.ref_slope_um_per_mm)
        for ln in chunk
    ]
    # top at 0.86: room above for the caption of the picture written alone (--png), within the page's body
    axes = plot.line_profiles(fig, profs, units=units, rect=(0.1, 0.08, 0.94, 0.86), step_um=c.height_step_um)
    first = c.lines.index(chunk[0]) + 1
    return [(f"line-profiles-{first}-{first + len(chunk) - 1}", axes)]


def _page_grades(fig, c, units):
    from ..units import format_with_uncertainty
    from . import _plots as plot

    ax = fig.add_axes([0.06, 0.06, 0.88, 0.86])
    if c.u_mz_um is None:
        f_txt, u_txt = _h(c.mz.flatness_um, units, c.height_step_um), "not evaluated"
    else:  # U to two significant digits and F to its decimal place (JCGM 100:2008, 7.2.6)
        f_txt, u_txt = format_with_uncertainty(c.mz.flatness_um, c.u_mz_um, units)
    rows = [("minimum-zone flatness F", f_txt), ("expanded uncertainty U", u_txt)]
    y = plot.flow_table(ax, 1.0, rows, col_x=(0.0, 0.45), title="Result decided", bold_cols=(1,))
    rows = [(g.grade, _tolerance(g.tolerance_um, units), g.verdict, _in_units(g.note or "", units)) for g in c.grades]
    y = plot.flow_table(ax, y, rows, col_x=(0.0, 0.1, 0.27, 0.47), col_labels=("grade", "tolerance", "verdict", "note"),
                        title=c.grades[0].standard, bold_cols=(2,), wrap_chars=(None, None, None, 55))
    lines = [("Decision rule", "h"), _in_units(c.decision_rule, units),
             "Verdicts: 'conforms' = proven inside the tolerance; 'does not conform' = proven outside; "
             "'undecided' = the uncertainty interval straddles the limit (ISO 14253-1 default rule).",
             ]
    plot.text_block(ax, lines, y0=y, wrap_chars=105)
    return []


def _page_bearing(fig, c, units):
    from . import _plots as plot

    b = c.bearing
    from ..units import format_limit

    axes = plot.bearing_motion(fig, b, units=units, rect=(0.1, 0.50, 0.88, 0.90), step_um=c.height_step_um)
    ax = fig.add_axes([0.06, 0.06, 0.88, 0.36])
    rows = []
    for ch in b.checks:
        val = _h(ch.value, units, c.height_step_um) if ch.unit == "um" else f"{ch.value:.2f} arcsec"
        lim = format_limit(ch.limit, units) if ch.unit == "um" else f"{ch.limit:.2f} arcsec"
        u = getattr(ch, "expanded_uncertainty", None)
        if u is not None and ch.unit == "um":  # U to two significant digits, the value to the same place
            from ..units import format_with_uncertainty

            v_txt, u_txt = format_with_uncertainty(ch.value, u, units)
            val = f"{v_txt}, U {u_txt}"
        rows.append((_in_units(ch.name, units), val, lim, ch.status))
    y = plot.flow_table(ax, 1.0, rows, col_x=(0.0, 0.42, 0.66, 0.82), col_labels=("check", "value", "limit", "status"),
                        title=f"Verdict: {b.verdict}", bold_cols=(3,), wrap_chars=(60, None, None, None))
    pads = ", ".join(f"{p.pad.shape} {_size_text(p.pad.length_mm, p.pad.width_mm, units)}, "
                     f"gap {format_limit(p.pad.gap_um, units)}" for p in b.carriage.active_pads)
    lines = [f"Pads: {pads}.",
             "Both curves are drawn about their own straight line (minimum zone), so their shapes compare: the "
             "carriage follows the surface averaged over its pads."]
    lines += [_in_units(n, units) for n in b.notes]
    plot.text_block(ax, [(t, "s") for t in lines], y0=y, wrap_chars=110)
    return [("carriage-motion", list(axes))]


def _support_first(c, units, style: str = "b") -> list:
    """The sag check's message, stated before any lapping advice (empty when the supports are not in question)."""
    s = c.support_check
    if s is None or not s.flagged:
        return []
    return [("Supports first: " + _in_units(s.message, units) + ".", style)]


def lapping_summary(c, units: str = "um") -> str:
    """The lapping plan in one sentence (the whole of it when the target is already met)."""
    p = c.lapping
    rm = p.removal
    if not p.passes:
        return (f"The surface is already within the target {_h(rm.target_um, units, c.height_step_um)} "
                f"({_in_units(c.lapping_target, units)}): its flatness is {_h(rm.flatness_before_um, units, c.height_step_um)}, "
                "so no lapping is needed.")
    unit = "min" if p.lap.time_unit == "min" else "passes"
    return (f"Target {_h(rm.target_um, units, c.height_step_um)}: {len(p.passes)} passes, {p.total_time:.1f} {unit} in all, "
            f"{_h(p.predicted_flatness_um, units, c.height_step_um)} predicted; see the lapping pages.")


def _page_sources(fig, c, units):
    from . import _plots as plot

    lines = [("Sources of the methods used in this report", "h")]
    lines += [f"• {s}" for s in c.sources]
    provenance = limits_provenance_text(c.grades)
    if provenance:
        lines.append(f"• {provenance}")
    lines.append(("Cautions", "h"))
    lines += [f"• {v}" for v in c.cautions]
    lines.append("• flatcheck's numbers do not make handling, lapping or air work safe: local codes, the "
                 "employer's procedures and licensed practice take precedence over anything in this report.")
    lines.append(("Statement", "h"))
    lines.append(SCOPE_STATEMENT)
    ax = fig.add_axes([0.06, 0.06, 0.88, 0.86])
    plot.text_block(ax, lines, fontsize=8.5, wrap_chars=105)
    return []
