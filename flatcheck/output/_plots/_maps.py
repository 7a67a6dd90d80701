"""Maps of a surface: filled contour and 3-D views of heights, derived fields (local flatness) and windows."""

from __future__ import annotations

import numpy as np
from matplotlib.patches import Circle, Rectangle
from matplotlib.ticker import MaxNLocator

from ...errors import InputValueError
from ._common import (
    FIELD_CMAP, HEIGHT_CMAP, _ACCENT, _INK, _MAX_PLAN_RATIO, _colorbar_beside, _fmt_step, _height_scale, _levels,
    _plan_aspect, _plan_limits, _pos_scale, plan_box,
)


# ---------------------------------------------------------------------------- maps
def _fine_grid(hm, n_long: int = 160):
    """The surface sampled on a fine regular grid (NaN outside the surveyed area)."""
    xmin, xmax, ymin, ymax = hm.extent_mm
    lx, ly = max(xmax - xmin, 1e-9), max(ymax - ymin, 1e-9)
    nx = n_long if lx >= ly else max(8, int(round(n_long * lx / ly)))
    ny = n_long if ly > lx else max(8, int(round(n_long * ly / lx)))
    xs = np.linspace(xmin, xmax, nx)
    ys = np.linspace(ymin, ymax, ny)
    X, Y = np.meshgrid(xs, ys)
    Z = hm.sample(X, Y, method="linear")
    return X, Y, Z


def _deviation_um(hm, reference):
    """Heights about a reference plane (any object with a_um, b_um_per_mm, c_um_per_mm), µm."""
    if reference is None:
        return np.asarray(hm.height_um, float)
    plane = reference.a_um + reference.b_um_per_mm * hm.x_mm + reference.c_um_per_mm * hm.y_mm
    return hm.height_um - plane


def contour_map(
    ax,
    hm,
    *,
    reference=None,
    reference_name: str = "reference plane",
    units: str = "um",
    show_stations: bool = True,
    station_names: bool | None = None,
    title: str | None = None,
    colorbar: bool = True,
    step_um: float | None = None,
):
    """Filled contour map of a surface with stations and its high and low points (labelled to ``step_um``, the
    height step the measurement resolves; None: 1 nm).

    Parameters
    ----------
    ax : matplotlib Axes
        Where to draw (2D axes).
    hm : HeightMap
        The surface; positions in mm, heights in µm.
    reference : PlaneFit, optional
        A plane ``a_um + b_um_per_mm*x + c_um_per_mm*y`` (µm) to subtract first,
        e.g. the least-squares plane, so the map shows deviations from it.
    reference_name : str
        What the reference is, for the colour bar ("least-squares plane").
    units : {"um", "in"}
        Display units: µm and mm, or µin and inches.
    show_stations : bool
        Mark the measured stations (small open circles).
    station_names : bool, optional
        Write station names beside the marks (default: when there are at most 40).
    title : str, optional
        Axes title.
    colorbar : bool
        Draw a colour bar labelled with the height unit.

    Returns
    -------
    Axes
        ``ax``. The high and low points are annotated with their values in the
        display unit (the annotations carry ``gid`` "high" and "low").
    """
    hs, hu = _height_scale(units)
    ps, pu = _pos_scale(units)
    dev_um = _deviation_um(hm, reference)
    shown = hm.with_heights(dev_um)
    X, Y, Z = _fine_grid(shown)
    Zd = Z * hs
    zmin, zmax = float(np.min(dev_um) * hs), float(np.max(dev_um) * hs)
    lev = _levels(zmin, zmax)
    Zm = np.ma.masked_invalid(Zd)
    cf = ax.contourf(X * ps, Y * ps, Zm, levels=lev, cmap=HEIGHT_CMAP, extend="neither")
    cs = ax.contour(X * ps, Y * ps, Zm, levels=lev, colors=_INK, linewidths=0.45, alpha=0.8)
    if len(lev) > 2:
        ax.clabel(cs, levels=cs.levels[::2], fmt=lambda v: f"{v:g}", fontsize=6, inline=True, inline_spacing=2)
    if colorbar:
        _colorbar_beside(ax, cf, f"height ({hu})" if reference is None else f"height about the {reference_name} ({hu})",
                         fontsize=8)
    if show_stations:
        ax.plot(hm.x_mm * ps, hm.y_mm * ps, "o", ms=3, mfc="white", mec=_INK, mew=0.6, ls="none", zorder=4)
        if station_names is None:
            station_names = hm.names is not None and hm.n <= 40
        if station_names and hm.names is not None:
            for x, y, s in zip(hm.x_mm, hm.y_mm, hm.names):
                ax.annotate(s, (x * ps, y * ps), xytext=(3, 3), textcoords="offset points", fontsize=5.5,
                            color=_INK, zorder=5)
    ih, il = int(np.argmax(dev_um)), int(np.argmin(dev_um))
    xmin, xmax, ymin, ymax = hm.extent_mm
    for i, tag, marker in ((ih, "high", "^"), (il, "low", "v")):
        x, y = hm.x_mm[i] * ps, hm.y_mm[i] * ps
        # put the label on the side facing the middle of the surface so it is never clipped
        fx = (hm.x_mm[i] - xmin) / max(xmax - xmin, 1e-9)
        fy = (hm.y_mm[i] - ymin) / max(ymax - ymin, 1e-9)
        ha = "left" if fx < 0.25 else "right" if fx > 0.75 else "center"
        va = "bottom" if fy < 0.5 else "top"
        dx = 6 if ha == "left" else -6 if ha == "right" else 0
        dy = 9 if va == "bottom" else -9
        ax.plot([x], [y], marker, ms=8, mfc="white", mec=_INK, mew=1.2, zorder=6)
        ann = ax.annotate(
            f"{tag} {_fmt_step(dev_um[i], units, step_um, signed=True)}",
            (x, y),
            xytext=(dx, dy),
            textcoords="offset points",
            ha=ha,
            va=va,
            fontsize=7.5,
            fontweight="bold",
            color=_INK,
            bbox=dict(boxstyle="round,pad=0.2", fc="white", ec=_INK, lw=0.5, alpha=0.9),
            zorder=7,
            annotation_clip=False,
        )
        ann.set_gid(tag)
    if hm.length_mm and hm.width_mm:
        L, W = hm.length_mm * ps, hm.width_mm * ps
        ax.plot([0, L, L, 0, 0], [0, 0, W, W, 0], color=_INK, lw=1.0)
    # a margin round the surface, so the markers of high and low points at an edge are drawn whole
    (xa, xb), (ya, yb) = _plan_limits(plan_box(hm))
    ax.set_xlim(xa * ps, xb * ps)
    ax.set_ylim(ya * ps, yb * ps)
    ax.set_xlabel(f"x, along the length ({pu})")
    ax.set_ylabel(_plan_aspect(ax, f"y, across ({pu})"))
    if title:
        ax.set_title(title, fontsize=10, loc="left")
    return ax


def surface_view(ax3d, hm, *, reference=None, units: str = "um", title: str | None = None,
                 reference_name: str | None = None):
    """Three-dimensional view of the surface (heights greatly exaggerated).

    Parameters
    ----------
    ax3d : matplotlib 3D Axes
        Axes created with ``projection="3d"``.
    hm : HeightMap
        Positions in mm, heights in µm.
    reference : PlaneFit, optional
        Plane (µm) subtracted before drawing.
    units : {"um", "in"}
        Display units.

    Returns
    -------
    Axes3D
        ``ax3d``.
    """
    if getattr(ax3d, "name", "") != "3d":
        raise InputValueError("surface_view needs 3D axes", fix="create them with projection='3d'")
    hs, hu = _height_scale(units)
    ps, pu = _pos_scale(units)
    shown = hm.with_heights(_deviation_um(hm, reference))
    X, Y, Z = _fine_grid(shown, n_long=40)
    Zd = np.ma.masked_invalid(Z * hs)
    ax3d.plot_surface(X * ps, Y * ps, Zd, cmap=HEIGHT_CMAP, rstride=1, cstride=1, linewidth=0.15,
                      edgecolor=(0.1, 0.1, 0.1, 0.25), antialiased=True)
    ax3d.scatter(hm.x_mm * ps, hm.y_mm * ps, shown.height_um * hs, s=4, c=_INK, depthshade=False)
    lx = np.ptp(X) or 1.0
    ly = np.ptp(Y) or 1.0
    # a long surface drawn to scale is a line whose y ticks pile up: widen it as the plan views are
    wide = max(lx, ly) / _MAX_PLAN_RATIO
    bx, by = max(lx, wide), max(ly, wide)
    ax3d.set_box_aspect((bx, by, 0.35 * max(bx, by)))
    for axis in (ax3d.xaxis, ax3d.yaxis, ax3d.zaxis):
        axis.set_major_locator(MaxNLocator(nbins=5 if axis is not ax3d.yaxis or by >= 0.5 * bx else 3))
    stretched = by > ly * 1.01
    ax3d.set_xlabel(f"x ({pu})", labelpad=10, fontsize=8)
    ax3d.set_ylabel(f"y ({pu})", labelpad=10, fontsize=8)
    ax3d.set_zlabel(f"height ({hu})" if not reference_name else f"height about the {reference_name} ({hu})",
                    labelpad=6, fontsize=8)
    ax3d.tick_params(labelsize=6, pad=1)
    ax3d.view_init(elev=28, azim=-58)
    if title:
        ax3d.set_title(title + ("; drawn wider across than to scale" if stretched else ""), fontsize=10, loc="left")
    return ax3d


# ---------------------------------------------------------------------------- derived fields
def field_map(ax, x_mm, y_mm, values, *, label: str, cmap: str = FIELD_CMAP, units: str = "um",
              limit=None, title: str | None = None, scale: float = 1.0, box_mm=None):
    """Filled map of a derived field on a regular grid, with labelled contours.

    Parameters
    ----------
    ax : matplotlib Axes
    x_mm : ndarray, shape (nx,)
        Grid x positions, mm.
    y_mm : ndarray, shape (ny,)
        Grid y positions, mm.
    values : ndarray, shape (ny, nx)
        Field values already in the unit named by ``label`` (NaN = no value).
    label : str
        Colour-bar label including the unit, e.g. "local flatness (µm)".
    limit : float, optional
        A tolerance in the same unit: drawn as a thick accent contour and
        hatched where exceeded.
    scale : float
        Factor applied to ``values`` and ``limit`` before drawing (unit change).
    box_mm : (xmin, xmax, ymin, ymax), optional
        The whole surface (mm, e.g. :func:`plan_box`): the view shows it, outlined, even where the
        field has no values (window centres cover only the middle of a surface).

    Returns
    -------
    Axes
        ``ax``.
    """
    ps, pu = _pos_scale(units)
    V = np.ma.masked_invalid(np.asarray(values, float) * scale)
    x = np.asarray(x_mm, float) * ps
    y = np.asarray(y_mm, float) * ps
    if V.shape != (y.size, x.size):
        raise InputValueError(f"field of shape {V.shape} does not match the grid ({y.size}, {x.size})",
                              fix="give values[j, i] at (x[i], y[j])")
    if V.count() == 0:
        raise InputValueError("the field has no finite values", fix="check the window size against the surface")
    lev = _levels(float(V.min()), float(V.max()), 10)
    if x.size >= 2 and y.size >= 2:
        cf = ax.contourf(x, y, V, levels=lev, cmap=cmap)
        cs = ax.contour(x, y, V, levels=lev, colors=_INK, linewidths=0.4, alpha=0.7)
        if len(lev) > 2:
            ax.clabel(cs, levels=cs.levels[::2], fmt=lambda v: f"{v:g}", fontsize=6)
    else:
        cf = ax.pcolormesh(x, y, V, cmap=cmap)
    cb = _colorbar_beside(ax, cf, label, fontsize=8)
    box = box_mm if box_mm is not None else (x.min() / ps, x.max() / ps, y.min() / ps, y.max() / ps)
    if box_mm is not None:
        bx0, bx1, by0, by1 = (v * ps for v in box_mm)
        ax.plot([bx0, bx1, bx1, bx0, bx0], [by0, by0, by1, by1, by0], color=_INK, lw=0.8)
    (xa, xb), (ya, yb) = _plan_limits(box)
    ax.set_xlim(xa * ps, xb * ps)
    ax.set_ylim(ya * ps, yb * ps)
    if limit is not None and x.size >= 2 and y.size >= 2:
        lim = float(limit) * scale
        if float(V.max()) > lim:
            ax.contourf(x, y, V, levels=[lim, float(V.max()) + 1e-9], colors="none", hatches=["////"])
            ax.contour(x, y, V, levels=[lim], colors=_ACCENT, linewidths=1.6)
        cb.ax.axhline(lim, color=_ACCENT, lw=2)
    ax.set_xlabel(f"x ({pu})")
    ax.set_ylabel(_plan_aspect(ax, f"y ({pu})"))
    if title:
        ax.set_title(title, fontsize=10, loc="left")
    return ax


def local_flatness_map(ax, x_mm, y_mm, local_um, *, window_mm: float, limit_um=None, units: str = "um",
                       title: str | None = None, box_mm=None):
    """Map of local flatness (flatness within a moving window centred at each node).

    ``local_um`` has shape (ny, nx) in µm at the window centres ``x_mm`` (nx,)
    and ``y_mm`` (ny,); ``window_mm`` is the window's side in mm; ``limit_um``
    an optional local tolerance (µm) drawn and hatched where exceeded; ``box_mm`` the whole surface
    (mm), shown and outlined around the window centres.
    """
    hs, hu = _height_scale(units)
    ps, pu = _pos_scale(units)
    if title is None:
        title = f"local flatness in a {window_mm * ps:g} {pu} window"
    return field_map(ax, x_mm, y_mm, local_um, label=f"local flatness ({hu})", cmap=FIELD_CMAP, units=units,
                     limit=limit_um, title=title, scale=hs, box_mm=box_mm)


def local_flatness_profile(ax, s_mm, local_um, *, along: str = "x", units: str = "um", title: str | None = None):
    """Local flatness against the window centre when the centres lie on one line.

    ``s_mm`` (k,) are the centres' positions along ``along`` ("x" or "y") in mm and
    ``local_um`` (k,) the local flatness there in µm.
    """
    hs, hu = _height_scale(units)
    ps, pu = _pos_scale(units)
    s = np.asarray(s_mm, float) * ps
    v = np.asarray(local_um, float) * hs
    ax.plot(s, v, "-o", color=_INK, ms=3, mfc="white", lw=1.0)
    ax.set_xlabel(f"window centre {along} ({pu})")
    ax.set_ylabel(f"local flatness ({hu})")
    ax.grid(True, lw=0.3, color="0.75")
    if title:
        ax.set_title(title, fontsize=10, loc="left")
    return ax


def mark_window(ax, x_mm, y_mm, *, shape: str, length_mm: float, width_mm: float, label: str = "",
                units: str = "um", stations_xy_mm=None, profile: bool = False, along: str = "x"):
    """Outline one window (e.g. the worst local-flatness window) on a map, or its centre on a profile.

    Parameters
    ----------
    ax : matplotlib Axes
        A map drawn by :func:`local_flatness_map` (or a profile by :func:`local_flatness_profile`).
    x_mm, y_mm : float
        Centre of the window, mm.
    shape : {"rect", "circle"}
        Window shape.
    length_mm, width_mm : float
        Window size along x and y in mm (the diameter twice for a circle).
    label : str
        Text written beside the window (carries ``gid`` "window").
    stations_xy_mm : ndarray, shape (n, 2), optional
        Measured stations, drawn as small dots on a map.
    profile : bool
        ``ax`` is a profile: mark the centre with a vertical line instead.
    along : {"x", "y"}
        Axis of the profile.

    Returns
    -------
    Axes
        ``ax``.
    """
    ps, pu = _pos_scale(units)
    if profile:
        c = (x_mm if along == "x" else y_mm) * ps
        ax.axvline(c, color=_ACCENT, lw=1.4)
        ax.text(c, 1.0, f" {label}", transform=ax.get_xaxis_transform(), color=_ACCENT, fontsize=8,
                va="top", gid="window")
        return ax
    if stations_xy_mm is not None:
        xy = np.asarray(stations_xy_mm, float) * ps
        ax.plot(xy[:, 0], xy[:, 1], ".", color=_INK, ms=2.5, ls="none", zorder=5)
    cx, cy = x_mm * ps, y_mm * ps
    if shape == "circle":
        patch = Circle((cx, cy), length_mm * ps / 2, fill=False, ec=_ACCENT, lw=1.8, zorder=6)
    else:
        patch = Rectangle((cx - length_mm * ps / 2, cy - width_mm * ps / 2), length_mm * ps, width_mm * ps,
                          fill=False, ec=_ACCENT, lw=1.8, zorder=6)
    ax.add_patch(patch)
    ax.plot([cx], [cy], "+", color=_ACCENT, ms=9, mew=1.8, zorder=7)
    if label:
        ax.annotate(label, (cx, cy), xytext=(8, 8), textcoords="offset points", fontsize=8, color=_ACCENT,
                    fontweight="bold", gid="window", zorder=8,
                    bbox=dict(boxstyle="round,pad=0.2", fc="white", ec=_ACCENT, lw=0.6))
    return ax
