"""Pictures of a survey: line profiles, the lines walked with their labels, and the reduction's residuals."""

from __future__ import annotations

import numpy as np
from dataclasses import dataclass

from matplotlib.patches import Rectangle

from ...errors import InputValueError
from ._common import (
    _ACCENT, _INK, _fmt_abs, _fmt_step, _height_scale, _plan_aspect, _pos_scale,
)


# ---------------------------------------------------------------------------- line profiles
@dataclass(frozen=True)
class LineProfile:
    """A measured line's heights and its straightness, ready to draw.

    Attributes
    ----------
    name : str
        Line name.
    s_mm : ndarray, shape (k,)
        Distance along the line from its first station, mm.
    height_um : ndarray, shape (k,)
        Heights of the stations, µm (in the map's datum).
    straightness_um : float
        Straightness (width of the zone between two parallel lines), µm.
    ref_offset_um, ref_slope_um_per_mm : float
        The reference line of the straightness ``offset + slope*s`` (µm); the
        profile is drawn as deviations from it.
    method : str
        Name of the reference ("minimum zone", "least squares").
    uncertainty_um : float or None
        Expanded uncertainty of the straightness, µm (k = 2), when known.
    """

    name: str
    s_mm: np.ndarray
    height_um: np.ndarray
    straightness_um: float
    ref_offset_um: float = 0.0
    ref_slope_um_per_mm: float = 0.0
    method: str = "minimum zone"
    uncertainty_um: float | None = None

    def deviation_um(self) -> np.ndarray:
        """Heights minus the reference line, µm, shape (k,)."""
        s = np.asarray(self.s_mm, float)
        return np.asarray(self.height_um, float) - (self.ref_offset_um + self.ref_slope_um_per_mm * s)


def line_profiles(fig, profiles, *, units: str = "um", ncols: int = 2, title: str | None = None,
                  rect=(0.09, 0.08, 0.97, 0.95), step_um: float | None = None):
    """One small panel per measured line: deviation from its reference line and its straightness.

    Each panel draws the stations, the zone of the straightness (two parallel
    lines bounding the deviations, shaded) and states the straightness in its
    title. All panels share one height scale so lines can be compared.

    Parameters
    ----------
    fig : matplotlib Figure
        The figure to draw in.
    rect : (left, bottom, right, top)
        Part of the figure the panels fill (figure fractions).
    profiles : sequence of LineProfile
        The lines, drawn in order.
    step_um : float, optional
        The height step the survey resolves: each straightness is printed to it (with an uncertainty, to
        the uncertainty's two significant digits instead).
    units : {"um", "in"}
        Display units.
    ncols : int
        Panels per row.

    Returns
    -------
    list of Axes
        One per profile.
    """
    profiles = list(profiles)
    if not profiles:
        raise InputValueError("no line profiles to draw", fix="give at least one measured line")
    hs, hu = _height_scale(units)
    ps, pu = _pos_scale(units)
    nrows = int(np.ceil(len(profiles) / ncols))
    devs = [p.deviation_um() * hs for p in profiles]
    lo = min(float(d.min()) for d in devs)
    hi = max(float(d.max()) for d in devs)
    span = max(hi - lo, 1e-9)
    left, bottom, right, top = rect
    gs = fig.add_gridspec(nrows, ncols, hspace=0.6, wspace=0.22, left=left, right=right, top=top, bottom=bottom)
    out = []
    for k in range(len(profiles)):
        ax = fig.add_subplot(gs[k // ncols, k % ncols])
        p, d = profiles[k], devs[k]
        s = np.asarray(p.s_mm, float) * ps
        ax.fill_between(s, d.min(), d.max(), color="0.88", lw=0, zorder=0)
        ax.axhline(d.min(), color=_INK, lw=0.6, ls="--")
        ax.axhline(d.max(), color=_INK, lw=0.6, ls="--")
        ax.plot(s, d, "-", color=_INK, lw=1.0)
        ax.plot(s, d, "o", ms=3, mfc="white", mec=_INK, mew=0.7)
        if p.uncertainty_um is None:
            text = _fmt_step(p.straightness_um, units, step_um)
        else:  # U to two significant digits, the value to its place (JCGM 100:2008, 7.2.6)
            from ...units import format_with_uncertainty

            v_txt, u_txt = format_with_uncertainty(p.straightness_um, p.uncertainty_um, units)
            text = f"{v_txt} ± {u_txt}"
        ax.set_title(f"{p.name}: straightness {text}", fontsize=8, loc="left")
        ax.set_ylim(lo - 0.12 * span, hi + 0.12 * span)
        ax.tick_params(labelsize=7)
        ax.grid(True, lw=0.3, color="0.75")
        if k % ncols == 0:
            ax.set_ylabel(f"deviation ({hu})", fontsize=7)
        if k + ncols >= len(profiles):
            ax.set_xlabel(f"along the line ({pu})", fontsize=7)
        out.append(ax)
    if title:
        fig.suptitle(title, fontsize=11, x=0.02, ha="left")
    return out


# ---------------------------------------------------------------------------- survey layout
def survey_layout(
    ax,
    stations_xy_mm,
    lines,
    *,
    length_mm: float | None = None,
    width_mm: float | None = None,
    closures=(),
    line_notes=None,
    units: str = "um",
    title: str | None = None,
    station_names=None,
    step_um: float | None = None,
):
    """The survey's lines on the surface, with closure errors written where they close.

    Parameters
    ----------
    ax : matplotlib Axes
    stations_xy_mm : ndarray, shape (n, 2)
        Station positions in mm.
    lines : sequence of (str, ndarray of int)
        Each line's name and the indices of its stations in order.
    length_mm, width_mm : float, optional
        Outline of the surface in mm.
    closures : sequence of (str, float, float, float)
        ``(label, x_mm, y_mm, closure_um)``: a closure error (µm) and where it is
        written (e.g. the centre station for the two centre lines).
    line_notes : dict of str -> str, optional
        Short text written at each line's midpoint (e.g. its RMS residual).
    units : {"um", "in"}
    station_names : sequence of str, optional
        One name per station, written small beside it (``gid`` "station-name").

    Returns
    -------
    Axes
        ``ax``. Each line's name (and note) is written horizontally where its drawn box overlaps no
        other label and covers no station (``gid`` "line-label"); place ``ax`` on the figure first.
    """
    hs, hu = _height_scale(units)
    ps, pu = _pos_scale(units)
    xy = np.asarray(stations_xy_mm, float) * ps
    if length_mm and width_mm:
        L, W = length_mm * ps, width_mm * ps
        ax.add_patch(Rectangle((0, 0), L, W, fc="0.95", ec=_INK, lw=1.0, zorder=0))
        pad = 0.04 * max(L, W)
        ax.set_xlim(-pad, L + pad)
        ax.set_ylim(-pad, W + pad)
    elif len(xy):  # no outline: the stations' extent with a margin, fixed before the labels are placed
        lo, hi = xy.min(axis=0), xy.max(axis=0)
        pad = 0.08 * max(float(np.max(hi - lo)), 1e-9)
        ax.set_xlim(lo[0] - pad, hi[0] + pad)
        ax.set_ylim(lo[1] - pad, hi[1] + pad)
    dash = ["-", "--", "-.", ":"]
    polylines = []
    for k, (name, idx) in enumerate(lines):
        idx = np.asarray(idx, int)
        p = xy[idx]
        polylines.append(p)
        ax.plot(p[:, 0], p[:, 1], dash[k % len(dash)], color=_INK, lw=1.0, zorder=2)
        # the arrowhead three quarters of the way along, not at the end: lines meeting at a corner would
        # stack their heads on one another there
        seg = np.hypot(*np.diff(p, axis=0).T)
        s_along = np.r_[0.0, np.cumsum(seg)]
        if s_along[-1] > 0:
            tip_s, tail_s = 0.78 * s_along[-1], 0.70 * s_along[-1]
            tip = (np.interp(tip_s, s_along, p[:, 0]), np.interp(tip_s, s_along, p[:, 1]))
            tail = (np.interp(tail_s, s_along, p[:, 0]), np.interp(tail_s, s_along, p[:, 1]))
            ax.annotate("", xy=tip, xytext=tail, arrowprops=dict(arrowstyle="-|>", color=_INK, lw=1.0,
                                                                 shrinkA=0, shrinkB=0), zorder=3, gid="direction")
    ax.set_xlabel(f"x ({pu})")
    ax.set_ylabel(_plan_aspect(ax, f"y ({pu})"))
    texts = []
    for name, _ in lines:
        note = None if not line_notes or name not in line_notes else line_notes[name]
        texts.append((name, note))
    labels = _place_line_labels(ax, polylines, texts, xy, fontsize=6)
    ax.plot(xy[:, 0], xy[:, 1], "o", ms=2.5, mfc="white", mec=_INK, mew=0.6, ls="none", zorder=5)
    if station_names is not None:
        _place_station_names(ax, xy, station_names, labels)
    for k, (label, x, y, c_um) in enumerate(closures):
        # several closures at one station (the two centre lines of a Union Jack): fan the labels out
        offsets = [(14, -22), (14, 14), (-90, -22), (-90, 14)]
        ax.annotate(
            f"{label}\nclosure {_fmt_step(c_um, units, step_um, signed=True)}",
            (x * ps, y * ps),
            xytext=offsets[k % len(offsets)],
            textcoords="offset points",
            fontsize=7,
            color=_ACCENT,
            fontweight="bold",
            arrowprops=dict(arrowstyle="-", color=_ACCENT, lw=0.8),
            bbox=dict(boxstyle="round,pad=0.25", fc="white", ec=_ACCENT, lw=0.6),
            zorder=8,
        )
    if title:
        ax.set_title(title, fontsize=10, loc="left")
    return ax


def _segments_hit_box(P, box) -> int:
    """How many of the segments of polyline ``P`` (display coordinates, shape (k, 2)) cross ``box``."""
    x0, y0, x1, y1 = box
    hits = 0
    for (ax_, ay), (bx, by) in zip(P[:-1], P[1:]):
        # Liang-Barsky clipping of the segment against the box
        t0, t1 = 0.0, 1.0
        dx, dy = bx - ax_, by - ay
        ok = True
        for p_, q_ in ((-dx, ax_ - x0), (dx, x1 - ax_), (-dy, ay - y0), (dy, y1 - ay)):
            if p_ == 0:
                if q_ < 0:
                    ok = False
                    break
                continue
            t = q_ / p_
            if p_ < 0:
                t0 = max(t0, t)
            else:
                t1 = min(t1, t)
            if t0 > t1:
                ok = False
                break
        hits += ok
    return hits


def _align_for(d) -> tuple[str, str]:
    """Text alignment that puts a label on the side of its anchor that ``d`` (display direction) points to."""
    ha = "left" if d[0] > 0.35 else "right" if d[0] < -0.35 else "center"
    va = "bottom" if d[1] > 0.35 else "top" if d[1] < -0.35 else "center"
    return ha, va


def _place_station_names(ax, xy, names, labels, *, fontsize: float = 4.8):
    """Write each station's name beside it, on the first side (below right, above right, below left, above
    left) where it overlaps no line label, no other name and no station mark and stays inside the axes; a
    name with no free side is left out (the tables name every station)."""
    fig = ax.figure
    r = fig.canvas.get_renderer()
    px = fig.dpi / 72.0
    taken = [t.get_window_extent(r) for t in labels if t is not None]
    axbox = ax.get_window_extent(r)
    marks = ax.transData.transform(np.asarray(xy, float)) if len(xy) else np.zeros((0, 2))
    sides = (((2.5, -2.5), "left", "top"), ((2.5, 2.5), "left", "bottom"), ((-2.5, -2.5), "right", "top"),
             ((-2.5, 2.5), "right", "bottom"))
    for k, ((sx, sy), name) in enumerate(zip(xy, names)):
        t = ax.annotate(str(name), (sx, sy), xytext=sides[0][0], textcoords="offset points", fontsize=fontsize,
                        color="0.25", ha="left", va="top", zorder=4, gid="station-name")
        for off, ha, va in sides:
            t.set_position(off)
            t.set_ha(ha)
            t.set_va(va)
            bb = t.get_window_extent(r)
            inside = bb.x0 >= axbox.x0 and bb.x1 <= axbox.x1 and bb.y0 >= axbox.y0 and bb.y1 <= axbox.y1
            others = np.delete(marks, k, axis=0)
            on_mark = bool(np.any((others[:, 0] > bb.x0 - 2 * px) & (others[:, 0] < bb.x1 + 2 * px)
                                  & (others[:, 1] > bb.y0 - 2 * px) & (others[:, 1] < bb.y1 + 2 * px)))
            if inside and not on_mark and not any(bb.overlaps(o) for o in taken):
                taken.append(bb)
                break
        else:
            t.remove()


def _place_line_labels(ax, polylines, texts, stations, *, fontsize: float = 6, gap_px: float = 5.0):
    """Write each line's label where its drawn box overlaps no other label and covers no station.

    Candidate spots are tried on the rendered figure (matplotlib's text extents): beyond either end of
    the line along its direction, beside its ends and beside points along it, each with the label on one
    line or two. A spot is refused if its box leaves the axes or touches a label already placed; among the
    others the one covering the fewest stations, then crossing the fewest other lines, is taken (the
    first such in the order above). Labels are horizontal so they read without turning the page.

    Parameters
    ----------
    ax : Axes
        A plan view whose limits and aspect are already set.
    polylines : list of ndarray, shape (k, 2)
        Each line's station positions in data units, in walking order.
    texts : list of (str, str or None)
        Each line's name and an optional note (e.g. its closure).
    stations : ndarray, shape (n, 2)
        Every station (data units), which labels must not cover.

    Returns
    -------
    list of Text
        The labels (``gid`` "line-label"), in the order of ``polylines``.
    """
    fig = ax.figure
    ax.apply_aspect()
    r = fig.canvas.get_renderer()
    T = ax.transData
    axbox = ax.get_window_extent(r)
    px = fig.dpi / 72.0  # pixels per point
    st = T.transform(np.asarray(stations, float)) if len(stations) else np.zeros((0, 2))
    disp = [T.transform(p) for p in polylines]
    placed_boxes = []
    out = [None] * len(disp)
    # short lines first: they have the fewest free spots, long lines have many along their length
    order_of = sorted(range(len(disp)), key=lambda j: float(np.sum(np.hypot(*np.diff(disp[j], axis=0).T))))
    for k in order_of:
        (name, note), P = texts[k], disp[k]
        variants = [name] if not note else [f"{name}: {note}", f"{name}\n{note}"]
        t = ax.text(0, 0, variants[0], fontsize=fontsize, color=_INK, zorder=6, gid="line-label",
                    transform=None, linespacing=1.1,
                    bbox=dict(boxstyle="round,pad=0.15", fc="white", ec="none", alpha=0.85))
        cands = []  # (anchor in display units, direction the label lies in, alignment or None)
        for end, nxt in ((P[0], P[1]), (P[-1], P[-2])):
            d = end - nxt
            d = d / max(np.hypot(*d), 1e-9)
            anchor = end + d * gap_px * px * (2.2 if end is P[-1] else 1.0)
            cands.append((anchor, d, None))
            ha, va = _align_for(d)
            # beyond an end, the label may also slide along the edge it faces (clear of a neighbour or the frame)
            if abs(d[1]) > abs(d[0]):
                cands += [(anchor, d, ("left", va)), (anchor, d, ("right", va))]
            else:
                cands += [(anchor, d, (ha, "bottom")), (anchor, d, (ha, "top"))]
        seg = np.hypot(*np.diff(P, axis=0).T)
        s = np.r_[0.0, np.cumsum(seg)]
        for frac in (0.5, 0.3, 0.7, 0.15, 0.85, 0.0, 1.0):
            q = np.array([np.interp(frac * s[-1], s, P[:, 0]), np.interp(frac * s[-1], s, P[:, 1])])
            d = P[-1] - P[0]
            n = np.array([-d[1], d[0]]) / max(np.hypot(*d), 1e-9)
            for sign in (1, -1):
                cands.append((q + sign * n * gap_px * px, sign * n, None))
        best = None
        for order, (anchor, d, align) in enumerate(cands):
            ha, va = align or _align_for(d)
            # above or below an end a narrow (two-line) label keeps clear of its neighbours; beside, a flat one
            ordered = variants[::-1] if abs(d[1]) > abs(d[0]) else variants
            for v, text in enumerate(ordered):
                t.set_text(text)
                t.set_position(tuple(anchor))
                t.set_ha(ha)
                t.set_va(va)
                bb = t.get_window_extent(r).padded(1.5 * px)
                box = (bb.x0, bb.y0, bb.x1, bb.y1)
                if bb.x0 < axbox.x0 or bb.x1 > axbox.x1 or bb.y0 < axbox.y0 or bb.y1 > axbox.y1:
                    continue
                if any(bb.overlaps(o) for o in placed_boxes):
                    continue
                covered = int(np.sum((st[:, 0] > bb.x0 - 3 * px) & (st[:, 0] < bb.x1 + 3 * px)
                                     & (st[:, 1] > bb.y0 - 3 * px) & (st[:, 1] < bb.y1 + 3 * px)))
                crossed = sum(_segments_hit_box(Q, box) for j, Q in enumerate(disp) if j != k)
                own = _segments_hit_box(P, box)
                cost = (covered, crossed + 0.5 * own, order + 0.5 * v)
                if best is None or cost < best[0]:
                    best = (cost, text, tuple(anchor), ha, va, bb)
        if best is None:  # nowhere free: beside the middle of the line, as before
            mid = P[len(P) // 2]
            best = (None, variants[-1], tuple(mid), "center", "bottom", None)
        _, text, anchor, ha, va, bb = best
        t.set_text(text)
        t.set_ha(ha)
        t.set_va(va)
        # keep the label in data coordinates so it follows the axes if the figure is saved at another size
        t.set_transform(ax.transData)
        t.set_position(tuple(T.inverted().transform(anchor)))
        if bb is not None:
            placed_boxes.append(bb)
        out[k] = t
    return out


def residual_histogram(ax, residual_um, *, units: str = "um", title: str | None = "reduction residuals"):
    """Histogram of the reduction's residuals (µm) with their RMS marked."""
    hs, hu = _height_scale(units)
    r = np.asarray(residual_um, float).ravel() * hs
    r = r[np.isfinite(r)]
    if r.size == 0:
        raise InputValueError("no residuals to draw", fix="reduce a survey with redundant readings")
    rms = float(np.sqrt(np.mean(r**2)))
    ax.hist(r, bins=max(5, min(30, r.size // 3)), color="0.6", ec=_INK, lw=0.5)
    for k, s in enumerate((-rms, rms)):
        ax.axvline(s, color=_ACCENT, lw=1.0, ls="--", label="± RMS of the residuals" if k == 0 else None)
    ax.legend(loc="upper left", fontsize=6.5, frameon=False, handlelength=1.6)
    ax.set_xlabel(f"residual ({hu})")
    ax.set_ylabel("readings")
    ax.text(0.98, 0.95, f"RMS {_fmt_abs(rms, hu)}\n{r.size} readings", transform=ax.transAxes, ha="right",
            va="top", fontsize=7)
    if title:
        ax.set_title(title, fontsize=10, loc="left")
    return ax
