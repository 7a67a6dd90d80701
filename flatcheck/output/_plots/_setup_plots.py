"""Picture of the set-up: the surface's outline with its supports, the stations and where the instrument stands."""

from __future__ import annotations

import numpy as np
from matplotlib.patches import Rectangle

from ._common import _ACCENT, _INK, _plan_aspect, _pos_scale


def support_plan(ax, length_mm: float, width_mm: float, *, three_point_mm=(), beam=None, stations_xy_mm=None,
                 instruments=(), units: str = "um", title: str | None = None):
    """The surface seen from above, with the supports to stand it on and where the instrument stands.

    Parameters
    ----------
    ax : matplotlib Axes
    length_mm, width_mm : float
        The surface's outline, mm (x west to east, y south to north, origin at the south-west corner).
    three_point_mm : sequence of (float, float)
        Three support points ``(x, y)``, mm, drawn as filled triangles labelled 1, 2, 3.
    beam : BeamSupports, optional
        A long beam's two-point supports (:class:`flatcheck.bench.BeamSupports`): the Airy and Bessel
        points drawn as lines across the surface, at their distance from each end along its longer side.
    stations_xy_mm : ndarray, shape (n, 2), optional
        The survey's stations, mm, drawn small and light.
    instruments : sequence of (str, float, float)
        ``(label, x_mm, y_mm)``: where the instrument stands for a line (an autocollimator behind the
        line's first station), drawn as a small square with its label; may lie outside the outline.
    units : {"um", "in"}
        Positions in mm, or inches with ``"in"``.
    title : str, optional

    Returns
    -------
    Axes
        ``ax``.
    """
    ps, pu = _pos_scale(units)
    L, W = float(length_mm) * ps, float(width_mm) * ps
    ax.add_patch(Rectangle((0, 0), L, W, fc="0.95", ec=_INK, lw=1.0, zorder=0))
    xs = [0.0, L] + [float(x) * ps for _, x, _ in instruments]
    ys = [0.0, W] + [float(y) * ps for _, _, y in instruments]
    # a margin of 4 % of the longer drawn side; a long surface is drawn stretched across (at most 4:1), so its
    # margin across is taken from a quarter of its length
    span_x, span_y = max(xs) - min(xs), max(ys) - min(ys)
    pad_x = 0.04 * max(span_x, span_y)
    pad_y = 0.04 * max(span_y, min(span_x, 4.0 * span_y) / 4.0)
    ax.set_xlim(min(xs) - pad_x, max(xs) + pad_x)
    ax.set_ylim(min(ys) - pad_y, max(ys) + pad_y)
    if stations_xy_mm is not None and len(stations_xy_mm):
        xy = np.asarray(stations_xy_mm, float) * ps
        ax.plot(xy[:, 0], xy[:, 1], "o", ms=2.0, mfc="white", mec="0.55", mew=0.5, ls="none", zorder=2,
                gid="station")
    if beam is not None:
        along_x = L >= W
        span = L if along_x else W
        for a_mm, style, name in ((beam.airy_from_end_mm, "--", "Airy"), (beam.bessel_from_end_mm, ":", "Bessel")):
            a = float(a_mm) * ps
            for pos in (a, span - a):
                if along_x:
                    ax.plot([pos, pos], [0, W], style, color=_INK, lw=0.9, zorder=3, gid=f"{name.lower()}-points")
                else:
                    ax.plot([0, L], [pos, pos], style, color=_INK, lw=0.9, zorder=3, gid=f"{name.lower()}-points")
            # named inside the outline, by its west (south) line: "Airy" nearer the edge, "Bessel" above it
            label = f"{name} points"
            if along_x:
                ax.annotate(label, (a, 0), xytext=(3, 2 if name == "Airy" else 9), textcoords="offset points",
                            fontsize=6, color=_INK, zorder=6, va="bottom")
            else:
                ax.annotate(label, (0, a), xytext=(2 if name == "Airy" else 40, 3), textcoords="offset points",
                            fontsize=6, color=_INK, zorder=6, va="bottom")
    for k, (x, y) in enumerate(three_point_mm, start=1):
        ax.plot([float(x) * ps], [float(y) * ps], "^", ms=9, mfc=_ACCENT, mec=_INK, mew=0.6, zorder=5,
                gid="support")
        ax.annotate(str(k), (float(x) * ps, float(y) * ps), xytext=(6, -3), textcoords="offset points", fontsize=7,
                    fontweight="bold", color=_ACCENT, zorder=6)
    for label, x, y in instruments:
        ax.plot([float(x) * ps], [float(y) * ps], "s", ms=4, mfc=_INK, mec=_INK, zorder=5, gid="instrument")
        ax.annotate(label, (float(x) * ps, float(y) * ps), xytext=(3, 3), textcoords="offset points", fontsize=5.5,
                    color=_INK, zorder=6)
    ax.set_xlabel(f"x ({pu}) from the west edge")
    ax.set_ylabel(_plan_aspect(ax, f"y ({pu}) from the south edge"))
    ax.tick_params(labelsize=7)
    if title:
        ax.set_title(title, fontsize=10, loc="left")
    return ax
