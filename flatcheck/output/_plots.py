"""Pictures of surfaces, surveys, bearings and lapping plans.

This is the only module of flatcheck that imports matplotlib. Every figure is a
plain :class:`matplotlib.figure.Figure` drawn by the Agg backend (attached
explicitly, so pyplot's global state and the user's interactive backend are
never touched). Drawing functions take an ``ax`` (or a figure for multi-panel
pictures) and the data, draw, and return what they were given; nothing is
shown and nothing is written except by :func:`save_png` and :class:`PdfBook`.

Design rules of the pictures
----------------------------
- Colour scales are perceptually uniform (``cividis`` for heights, ``viridis``
  for local flatness and dwell) so that a grey print keeps the order of values.
- Every filled map also carries labelled contour lines, so a grey print or a
  colour-blind reader can still read the values without the colour bar.
- Every axis names its quantity and unit. Heights are in µm (or µin with
  ``units="in"``), positions in mm (or inches with ``units="in"``).
"""

from __future__ import annotations

import contextlib
from dataclasses import dataclass
from pathlib import Path

import numpy as np

# Figures are drawn on an explicitly attached Agg canvas: no pyplot, no global backend switch.
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Circle, Rectangle
from matplotlib.ticker import MaxNLocator

from ..errors import InputValueError
from ..units import MM_PER_INCH, UM_PER_UIN

__all__ = [
    "HEIGHT_CMAP",
    "FIELD_CMAP",
    "A4_PORTRAIT_IN",
    "LineProfile",
    "new_figure",
    "save_png",
    "PdfBook",
    "contour_map",
    "surface_view",
    "line_profiles",
    "survey_layout",
    "field_map",
    "plan_panels",
    "plan_box",
    "plan_ratio",
    "cell_chart",
    "cell_chart_blocks",
    "bearing_motion",
    "local_flatness_map",
    "local_flatness_profile",
    "mark_window",
    "removal_map",
    "dwell_map",
    "carriage_path",
    "residual_histogram",
    "text_block",
    "table",
    "page_frame",
    "flow_table",
    "flow_table_height_in",
    "text_block_height_in",
    "compare_change_map",
]

HEIGHT_CMAP = "cividis"  #: heights: perceptually uniform, legible in grey and for red-green colour blindness
FIELD_CMAP = "viridis"  #: derived fields (local flatness, dwell): perceptually uniform
A4_PORTRAIT_IN = (8.27, 11.69)  #: ISO 216 A4, 210 x 297 mm, in inches
_INK = "#1a1a1a"
_ACCENT = "#b5473a"  # one warm accent for limits and warnings; dark enough to print grey


# ---------------------------------------------------------------------------- units
def _height_scale(units: str) -> tuple[float, str]:
    """Factor from µm to the display unit and its symbol."""
    if units == "um":
        return 1.0, "µm"
    if units == "in":
        return 1.0 / UM_PER_UIN, "µin"
    raise InputValueError(f"unknown display units {units!r}", fix="use 'um' or 'in'")


def _pos_scale(units: str) -> tuple[float, str]:
    """Factor from mm to the display position unit and its symbol."""
    if units == "um":
        return 1.0, "mm"
    if units == "in":
        return 1.0 / MM_PER_INCH, "in"
    raise InputValueError(f"unknown display units {units!r}", fix="use 'um' or 'in'")


def _fmt(v: float, unit: str) -> str:
    """A height with a sensible number of decimals for its size."""
    a = abs(v)
    dec = 3 if a < 1 else 2 if a < 100 else 1 if a < 1000 else 0
    v = round(v, dec) + 0.0  # no "-0.000"
    return f"{v:+.{dec}f} {unit}" if v else f"{0:.{dec}f} {unit}"


def _fmt_abs(v: float, unit: str) -> str:
    a = abs(v)
    dec = 3 if a < 1 else 2 if a < 100 else 1 if a < 1000 else 0
    return f"{round(v, dec) + 0.0:.{dec}f} {unit}"


# ---------------------------------------------------------------------------- figures and files
def new_figure(size_in=A4_PORTRAIT_IN, *, dpi: float = 100) -> Figure:
    """A blank figure on the Agg canvas.

    Parameters
    ----------
    size_in : (float, float)
        Width and height in inches (default A4 portrait).
    dpi : float
        Dots per inch for raster output.
    """
    fig = Figure(figsize=size_in, dpi=dpi)
    FigureCanvasAgg(fig)
    return fig


def save_png(fig: Figure, path, *, dpi: float = 150, axes=None, pad_in: float = 0.08) -> Path:
    """Write ``fig`` as a PNG file atomically; returns the path.

    Parameters
    ----------
    fig : Figure
    path : str or Path
    dpi : float
    axes : sequence of Axes, optional
        Write only the picture these axes make (with their titles, labels, colour bars and
        annotations), cut out of the figure: e.g. one map of a report page without the page's
        header, footer or tables.
    pad_in : float
        Margin round that picture, inches.

    Raises
    ------
    OutputError
        If the file cannot be written.
    """
    from matplotlib.transforms import Bbox

    from ..io import atomic_path

    path = Path(path)
    bbox = None
    if axes:
        fig.canvas.draw()
        r = fig.canvas.get_renderer()
        boxes = []
        for a in axes:
            boxes.append(a.get_tightbbox(r))
            boxes += [c.get_tightbbox(r) for c in getattr(a, "child_axes", ())]
        box = Bbox.union([b for b in boxes if b is not None and b.width > 0])
        bbox = box.transformed(fig.dpi_scale_trans.inverted()).padded(pad_in)
    with atomic_path(path, suffix=".png") as tmp:
        fig.savefig(tmp, format="png", dpi=dpi, bbox_inches=bbox)
    return path


class PdfBook:
    """A multi-page PDF written atomically: pages are added one figure at a time.

    Use as a context manager; the PDF replaces ``path`` only when the block ends
    without an error, so a failure never leaves a half-written report::

        with PdfBook("report.pdf", title="...") as book:
            book.add(fig)
    """

    def __init__(self, path, *, title: str = "", subject: str = "", creator: str = "flatcheck"):
        self.path = Path(path)
        self._meta = {"Title": title, "Subject": subject, "Creator": creator}
        self.pages = 0
        self._stack = None
        self._pdf = None

    def __enter__(self) -> "PdfBook":
        from matplotlib.backends.backend_pdf import PdfPages

        from ..io import atomic_path

        self._stack = contextlib.ExitStack()
        tmp = self._stack.enter_context(atomic_path(self.path, suffix=".pdf"))
        self._pdf = self._stack.enter_context(PdfPages(tmp, metadata=self._meta))
        return self

    def add(self, fig: Figure) -> None:
        """Append ``fig`` as the next page."""
        self._pdf.savefig(fig)
        self.pages += 1

    def __exit__(self, *exc) -> bool:
        return bool(self._stack.__exit__(*exc))


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


def _levels(zmin: float, zmax: float, n: int = 12) -> np.ndarray:
    if not np.isfinite(zmin) or not np.isfinite(zmax) or zmax - zmin < 1e-12:
        c = 0.0 if not np.isfinite(zmin) else zmin
        return np.array([c - 0.5, c + 0.5])
    lev = MaxNLocator(nbins=n, steps=[1, 2, 2.5, 5, 10]).tick_values(zmin, zmax)
    return lev


def contour_map(
    ax,
    hm,
    *,
    reference=None,
    units: str = "um",
    show_stations: bool = True,
    station_names: bool | None = None,
    title: str | None = None,
    colorbar: bool = True,
):
    """Filled contour map of a surface with stations and its high and low points.

    Parameters
    ----------
    ax : matplotlib Axes
        Where to draw (2D axes).
    hm : HeightMap
        The surface; positions in mm, heights in µm.
    reference : PlaneFit, optional
        A plane ``a_um + b_um_per_mm*x + c_um_per_mm*y`` (µm) to subtract first,
        e.g. the minimum-zone plane, so the map shows deviations from it.
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
        _colorbar_beside(ax, cf, f"height ({hu})" if reference is None else f"deviation from reference plane ({hu})",
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
        x, y, v = hm.x_mm[i] * ps, hm.y_mm[i] * ps, dev_um[i] * hs
        # put the label on the side facing the middle of the surface so it is never clipped
        fx = (hm.x_mm[i] - xmin) / max(xmax - xmin, 1e-9)
        fy = (hm.y_mm[i] - ymin) / max(ymax - ymin, 1e-9)
        ha = "left" if fx < 0.25 else "right" if fx > 0.75 else "center"
        va = "bottom" if fy < 0.5 else "top"
        dx = 6 if ha == "left" else -6 if ha == "right" else 0
        dy = 9 if va == "bottom" else -9
        ax.plot([x], [y], marker, ms=8, mfc="white", mec=_INK, mew=1.2, zorder=6)
        ann = ax.annotate(
            f"{tag} {_fmt(v, hu)}",
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


def surface_view(ax3d, hm, *, reference=None, units: str = "um", title: str | None = None):
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
    ax3d.set_zlabel(f"height ({hu})", labelpad=6, fontsize=8)
    ax3d.tick_params(labelsize=6, pad=1)
    ax3d.view_init(elev=28, azim=-58)
    if title:
        ax3d.set_title(title + ("; drawn wider across than to scale" if stretched else ""), fontsize=10, loc="left")
    return ax3d


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
                  rect=(0.09, 0.08, 0.97, 0.95)):
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
        unc = "" if p.uncertainty_um is None else f" ± {_fmt_abs(p.uncertainty_um * hs, hu)}"
        ax.set_title(f"{p.name}: straightness {_fmt_abs(p.straightness_um * hs, hu)}{unc}", fontsize=8, loc="left")
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
        ax.annotate("", xy=p[-1], xytext=p[-2], arrowprops=dict(arrowstyle="-|>", color=_INK, lw=1.0), zorder=3)
    ax.set_xlabel(f"x ({pu})")
    ax.set_ylabel(_plan_aspect(ax, f"y ({pu})"))
    texts = []
    for name, _ in lines:
        note = None if not line_notes or name not in line_notes else line_notes[name]
        texts.append((name, note))
    _place_line_labels(ax, polylines, texts, xy, fontsize=6)
    ax.plot(xy[:, 0], xy[:, 1], "o", ms=2.5, mfc="white", mec=_INK, mew=0.6, ls="none", zorder=5)
    for k, (label, x, y, c_um) in enumerate(closures):
        # several closures at one station (the two centre lines of a Union Jack): fan the labels out
        offsets = [(14, -22), (14, 14), (-90, -22), (-90, 14)]
        ax.annotate(
            f"{label}\nclosure {_fmt(c_um * hs, hu)}",
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


_MAX_PLAN_RATIO = 4.0  # longest drawn length : width of a plan view


def _plan_aspect(ax, ylabel: str) -> str:
    """Equal scales on a plan view, unless the surface is long and narrow.

    A 2000 x 200 mm guideway drawn to scale is a strip too thin to read; such a
    view is stretched across so that it is drawn at most ``_MAX_PLAN_RATIO`` times
    longer than wide, and the returned axis label says by how much.

    Returns
    -------
    str
        ``ylabel``, with the stretch factor added when there is one.
    """
    x0, x1 = ax.get_xlim()
    y0, y1 = ax.get_ylim()
    ratio = abs(x1 - x0) / max(abs(y1 - y0), 1e-12)
    if ratio <= _MAX_PLAN_RATIO:
        ax.set_aspect("equal")
        return ylabel
    stretch = ratio / _MAX_PLAN_RATIO
    ax.set_aspect(stretch)  # one unit across is drawn `stretch` times as long as one unit along
    return f"{ylabel}\ndrawn {stretch:.2g}x the x scale"


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


# ---------------------------------------------------------------------------- survey to survey
def _colorbar_beside(ax, mappable, label: str, *, width_in: float = 0.12, pad_in: float = 0.08,
                     fontsize: float = 7):
    """A colour bar exactly as tall as ``ax``, just right of it, that follows the axes' drawn box.

    Drawn as an inset of ``ax`` (axes coordinates), so a plan view shrunk to its aspect
    still has its colour bar beside it, as tall as the map and never taller.
    """
    fw = ax.figure.get_figwidth() * ax.get_position().width
    cax = ax.inset_axes([1.0 + pad_in / fw, 0.0, width_in / fw, 1.0])
    cb = ax.figure.colorbar(mappable, cax=cax)
    cb.set_label(label, fontsize=fontsize)
    cb.ax.tick_params(labelsize=fontsize - 0.5)
    return cb


def plan_panels(fig, n: int, ncols: int, ratio: float, rect, *, top_in: float = 0.3, bottom_in: float = 0.5,
                right_in: float = 0.95, gap_in: float = 0.75, max_height_in: float | None = None):
    """Axes for ``n`` plan views of one surface, sized to its drawn shape and stacked from the top of ``rect``.

    Parameters
    ----------
    fig : Figure
    n, ncols : int
        Number of views and views per row.
    ratio : float
        Drawn length : width of each view (see :func:`plan_ratio`).
    rect : (left, bottom, right, top)
        Figure fractions the views (with their titles, labels and colour bars) must stay inside.
    top_in, bottom_in, right_in, gap_in : float
        Room in inches above each view (title), below it (x label), right of it (colour bar) and
        between columns.
    max_height_in : float, optional
        Tallest a view may be drawn (inches).

    Returns
    -------
    (list of Axes, float)
        The axes in reading order, and the figure fraction where the lowest x label ends.
    """
    fw, fh = fig.get_figwidth(), fig.get_figheight()
    left, bottom, right, top = rect
    width_in, height_in = (right - left) * fw, (top - bottom) * fh
    nrows = int(np.ceil(n / ncols))
    aw = (width_in - ncols * right_in - (ncols - 1) * gap_in) / ncols
    ah = aw / ratio
    room = height_in - nrows * (top_in + bottom_in)
    cap = room / nrows if max_height_in is None else min(room / nrows, max_height_in)
    if ah > cap:  # too tall for the space: shrink every view alike
        ah = max(cap, 0.3)
        aw = ah * ratio
    axes = []
    for k in range(n):
        r, c = divmod(k, ncols)
        x_in = left * fw + c * (aw + right_in + gap_in)
        y_in = top * fh - top_in - r * (ah + top_in + bottom_in) - ah
        axes.append(fig.add_axes([x_in / fw, y_in / fh, aw / fw, ah / fh]))
    end = top * fh - nrows * (ah + top_in + bottom_in)
    return axes, end / fh


def plan_box(hm) -> tuple:
    """The area a plan view of ``hm`` shows, ``(xmin, xmax, ymin, ymax)`` in mm.

    The stated outline ``0..length_mm`` by ``0..width_mm`` when the surface has one, else the
    extent of its points.
    """
    if hm.length_mm and hm.width_mm:
        return (0.0, float(hm.length_mm), 0.0, float(hm.width_mm))
    return tuple(float(v) for v in hm.extent_mm)


def _plan_limits(box, pad_fraction: float = 0.04):
    """Axis limits around a plan box with a margin, so markers and labels at the edges are not cut."""
    x0, x1, y0, y1 = box
    pad = pad_fraction * max(x1 - x0, y1 - y0, 1e-9)
    return (x0 - pad, x1 + pad), (y0 - pad, y1 + pad)


def plan_ratio(box, pad_fraction: float = 0.04) -> float:
    """Drawn length : width of a plan view of ``box`` (mm), after the stretch of long surfaces."""
    (a, b), (c, d) = _plan_limits(box, pad_fraction)
    r = (b - a) / max(d - c, 1e-12)
    return float(min(max(r, 1.0 / _MAX_PLAN_RATIO), _MAX_PLAN_RATIO))


def _own_ls_deviation(x, y, z):
    """Heights about their own least-squares plane (µm), as :mod:`flatcheck.progress` refers each survey."""
    from ..form import least_squares_plane

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
):
    """The change map of ``flatcheck compare``: before, after, change and the least removal, on the matched nodes.

    Four plan views of the surface, each with its own colour bar (as tall as the view) and the
    matched nodes marked as open circles:

    1. *before* and 2. *after*: each survey about its own least-squares plane (the reference
       :func:`flatcheck.progress.compare_surveys` uses), drawn on one shared colour scale so they compare;
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
        heights re-ordered by :func:`flatcheck.progress.match_nodes`).
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
         "change = after - before", f"change ({hu}; < 0: lower)"),
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
    for ax, v, i, tag, text in (
        (axes[2], change, int(np.argmin(change)), "lowest", "most lowered"),
        (axes[3], rem, int(np.argmax(rem)), "deepest", "deepest"),
    ):
        fx = (x[i] * ps - x0) / max(L, 1e-12)
        fy = (y[i] * ps - y0) / max(W, 1e-12)
        ha = "left" if fx < 0.3 else "right" if fx > 0.7 else "center"
        va = "bottom" if fy < 0.5 else "top"
        ax.plot([x[i] * ps], [y[i] * ps], "v", ms=7, mfc="white", mec=_INK, mew=1.1, zorder=6)
        ax.annotate(f"{text} {_fmt(v[i] * hs, hu)}", (x[i] * ps, y[i] * ps),
                    xytext=(6 if ha == "left" else -6 if ha == "right" else 0, 8 if va == "bottom" else -8),
                    textcoords="offset points", ha=ha, va=va, fontsize=7, fontweight="bold", color=_INK,
                    bbox=dict(boxstyle="round,pad=0.2", fc="white", ec=_INK, lw=0.5, alpha=0.9), zorder=7,
                    gid=tag)
    return axes


# ---------------------------------------------------------------------------- carriage
def carriage_path(
    fig,
    travel_mm,
    rail_um,
    carriage_um,
    *,
    pitch=None,
    pitch_unit: str = "arcsec",
    local_um=None,
    local_limit_um=None,
    local_window_mm=None,
    units: str = "um",
    title: str | None = None,
    rect=(0.1, 0.1, 0.9, 0.92),
):
    """The rail profile beside the carriage's path over the travel, and local flatness along it.

    Parameters
    ----------
    fig : matplotlib Figure
        The figure to draw in.
    rect : (left, bottom, right, top)
        Part of the figure the panels fill (figure fractions).
    travel_mm : ndarray, shape (m,)
        Carriage position along the travel, mm.
    rail_um : ndarray, shape (m,)
        Raw profile of the guideway under the carriage's centre, µm.
    carriage_um : ndarray, shape (m,)
        Height of the carriage's reference point over the travel, µm.
    pitch : ndarray, shape (m,), optional
        Carriage pitch in ``pitch_unit`` (drawn on a second axis).
    pitch_unit : str
        Unit of ``pitch`` for the axis label ("arcsec", "µrad").
    local_um : ndarray, shape (m,), optional
        Local flatness along the travel (µm), e.g. under the pad footprint.
    local_limit_um : float, optional
        Its limit, drawn as an accent line.

    Returns
    -------
    list of Axes
    """
    hs, hu = _height_scale(units)
    ps, pu = _pos_scale(units)
    t = np.asarray(travel_mm, float) * ps
    n = 2 if local_um is not None else 1
    left, bottom, right, top = rect
    gs = fig.add_gridspec(n, 1, hspace=0.12, left=left, right=right, top=top, bottom=bottom,
                          height_ratios=[2, 1][:n])
    axes = [fig.add_subplot(gs[0, 0])]
    if n == 2:
        axes.append(fig.add_subplot(gs[1, 0], sharex=axes[0]))
        axes[0].tick_params(labelbottom=False)
    ax = axes[0]
    ax.plot(t, np.asarray(rail_um, float) * hs, color="0.55", lw=1.0, label="surface under the carriage centre (raw)")
    ax.plot(t, np.asarray(carriage_um, float) * hs, color=_INK, lw=1.8, label="carriage path (pads average)")
    ax.set_ylabel(f"height ({hu})")
    ax.grid(True, lw=0.3, color="0.8")
    handles, labels = ax.get_legend_handles_labels()
    # headroom above the curves for the legend, so it never hides them
    lo, hi = ax.get_ylim()
    ax.set_ylim(lo, hi + 0.3 * (hi - lo))
    if pitch is not None:
        ax2 = ax.twinx()
        ax2.plot(t, np.asarray(pitch, float), color=_ACCENT, lw=0.9, ls="--", label="carriage pitch")
        ax2.set_ylabel(f"pitch ({pitch_unit})", color=_ACCENT)
        lo2, hi2 = ax2.get_ylim()
        ax2.set_ylim(lo2, hi2 + 0.3 * (hi2 - lo2))
        h2, l2 = ax2.get_legend_handles_labels()
        handles += h2
        labels += l2
    ax.legend(handles, labels, fontsize=7, loc="upper center", ncol=len(labels), framealpha=0.9)
    if local_um is not None:
        a = axes[1]
        a.plot(t, np.asarray(local_um, float) * hs, color=_INK, lw=1.2)
        if local_limit_um is not None:
            a.axhline(local_limit_um * hs, color=_ACCENT, lw=1.4, ls="--", label="limit")
            a.legend(fontsize=7, loc="best")
        w = "" if local_window_mm is None else f" over {local_window_mm * ps:g} {pu}"
        a.set_ylabel(f"local flatness{w} ({hu})", fontsize=8)
        a.grid(True, lw=0.3, color="0.8")
    axes[-1].set_xlabel(f"carriage position along the travel ({pu})")
    if title:
        axes[0].set_title(title, fontsize=10, loc="left")
    return list(axes)


def residual_histogram(ax, residual_um, *, units: str = "um", title: str | None = "reduction residuals"):
    """Histogram of the reduction's residuals (µm) with their RMS marked."""
    hs, hu = _height_scale(units)
    r = np.asarray(residual_um, float).ravel() * hs
    r = r[np.isfinite(r)]
    if r.size == 0:
        raise InputValueError("no residuals to draw", fix="reduce a survey with redundant readings")
    rms = float(np.sqrt(np.mean(r**2)))
    ax.hist(r, bins=max(5, min(30, r.size // 3)), color="0.6", ec=_INK, lw=0.5)
    for s in (-rms, rms):
        ax.axvline(s, color=_ACCENT, lw=1.0, ls="--")
    ax.set_xlabel(f"residual ({hu})")
    ax.set_ylabel("readings")
    ax.text(0.98, 0.95, f"RMS {_fmt_abs(rms, hu)}\n{r.size} readings", transform=ax.transAxes, ha="right",
            va="top", fontsize=7)
    if title:
        ax.set_title(title, fontsize=10, loc="left")
    return ax


# ---------------------------------------------------------------------------- text and tables
def text_block(ax, lines, *, fontsize: float = 8.5, y0: float = 1.0, line_height: float | None = None,
               wrap_chars: int = 100):
    """Write paragraphs top-down in an axes with no frame; returns the y where writing stopped.

    ``lines`` is a sequence of strings or ``(text, style)`` pairs with style one
    of "h" (heading), "b" (bold), "s" (small) or "" (plain). Long lines are
    wrapped at ``wrap_chars`` characters.
    """
    import textwrap

    ax.set_axis_off()
    lh = line_height if line_height is not None else _line_step(ax, fontsize)
    y = y0
    for item in lines:
        text, style = (item, "") if isinstance(item, str) else item
        size = fontsize * (1.25 if style == "h" else 0.85 if style == "s" else 1.0)
        weight = "bold" if style in ("h", "b") else "normal"
        width = int(wrap_chars * fontsize / size)
        parts = textwrap.wrap(text, width=width) or [""]
        if style == "h":
            y -= 0.4 * lh
        for part in parts:
            ax.text(0.0, y, part, transform=ax.transAxes, fontsize=size, fontweight=weight, va="top", ha="left",
                    color=_INK, gid="text")
            y -= lh * size / fontsize
    return y


def table(ax, rows, *, col_labels, col_widths=None, fontsize: float = 8, title: str | None = None,
          highlight_col: int | None = None):
    """A plain ruled table filling ``ax`` (axes frame hidden).

    ``rows`` is a sequence of equal-length sequences of strings. The table is
    drawn top-aligned in the axes; returns the matplotlib Table.
    """
    ax.set_axis_off()
    rows = [[str(c) for c in r] for r in rows]
    if not rows:
        rows = [["—"] * len(col_labels)]
    tab = ax.table(cellText=rows, colLabels=list(col_labels), colWidths=col_widths, loc="upper left",
                   cellLoc="left", colLoc="left", edges="horizontal")
    tab.auto_set_font_size(False)
    tab.set_fontsize(fontsize)
    tab.scale(1.0, 1.35)
    for (r, c), cell in tab.get_celld().items():
        cell.set_edgecolor("0.6")
        cell.set_linewidth(0.5)
        if r == 0:
            cell.set_text_props(fontweight="bold")
            cell.set_facecolor("0.92")
        elif highlight_col is not None and c == highlight_col:
            cell.set_text_props(fontweight="bold")
    if title:
        ax.set_title(title, fontsize=10, loc="left", pad=4)
    return tab


def page_frame(fig, *, left_head: str, right_head: str, title: str, footer=(), page_text: str = "",
               margin: float = 0.06):
    """Header (running head, rule, page title) and footer (rule, small print, page number) of a report page.

    Positions are fractions of the figure; the drawing area left free is
    roughly ``margin`` to ``1 - margin`` across and 0.06 to 0.93 down.
    """
    fig.text(margin, 0.975, left_head, fontsize=8, fontweight="bold", va="top", color="0.25")
    fig.text(1 - margin, 0.975, right_head, fontsize=8, va="top", ha="right", color="0.25")
    fig.add_artist(Line2D([margin, 1 - margin], [0.963, 0.963], transform=fig.transFigure, color="0.3", lw=0.6))
    fig.text(margin, 0.955, title, fontsize=14, fontweight="bold", va="top", color=_INK)
    fig.add_artist(Line2D([margin, 1 - margin], [0.047, 0.047], transform=fig.transFigure, color="0.3", lw=0.6))
    for k, ln in enumerate(footer):
        fig.text(margin, 0.040 - 0.013 * k, ln, fontsize=6.5, va="top", color="0.3")
    if page_text:
        fig.text(1 - margin, 0.040, page_text, fontsize=8, va="top", ha="right", color=_INK)
    return fig


def _line_step(ax, fontsize: float) -> float:
    """Height of one text line of ``fontsize`` points as a fraction of the axes height."""
    return fontsize * 1.45 / 72 / (ax.get_position().height * ax.figure.get_figheight())


def flow_table(ax, y: float, rows, *, col_x, col_labels=None, fontsize: float = 8.5, title: str | None = None,
               bold_cols=(), wrap_chars=None) -> float:
    """Draw a ruled table top-down from height ``y`` (axes fraction); return the y below it.

    Used to stack several tables and paragraphs on one page without gaps.
    ``col_x`` are the left edges of the columns (axes fraction); ``wrap_chars``
    optionally gives, per column, the characters after which a cell wraps.
    """
    import textwrap

    ax.set_axis_off()
    lh = _line_step(ax, fontsize)
    if title:
        y -= 0.5 * lh
        ax.text(0.0, y, title, transform=ax.transAxes, fontsize=fontsize * 1.25, fontweight="bold", va="top",
                color=_INK, gid="text")
        y -= 1.35 * lh
    def rule(yy, lw=0.5):
        ax.plot([0, 1], [yy, yy], transform=ax.transAxes, color="0.55", lw=lw)
    if col_labels:
        rule(y + 0.2 * lh, 0.8)
        for x, lab in zip(col_x, col_labels):
            ax.text(x, y, str(lab), transform=ax.transAxes, fontsize=fontsize * 0.9, fontweight="bold", va="top",
                    color="0.2", gid="text")
        y -= lh
        rule(y + 0.2 * lh, 0.8)
    for row in rows:
        n_lines = 1
        for c, (x, cell) in enumerate(zip(col_x, row)):
            text = str(cell)
            if wrap_chars and c < len(wrap_chars) and wrap_chars[c]:
                text = "\n".join(textwrap.wrap(text, wrap_chars[c])) or ""
            n_lines = max(n_lines, text.count("\n") + 1)
            ax.text(x, y, text, transform=ax.transAxes, fontsize=fontsize, va="top", color=_INK,
                    fontweight="bold" if c in bold_cols else "normal", linespacing=1.3, gid="text")
        y -= lh * (1 + 0.93 * (n_lines - 1)) + 0.2 * lh
        rule(y + 0.25 * lh, 0.3)
    return y - 0.3 * lh


def _lines_in(text: str, wrap) -> int:
    import textwrap

    return max(1, len(textwrap.wrap(text, wrap))) if wrap else str(text).count("\n") + 1


def flow_table_height_in(rows, *, col_labels=None, fontsize: float = 8.5, title: str | None = None,
                         wrap_chars=None) -> float:
    """Height in inches that :func:`flow_table` takes for these rows (same steps, nothing drawn)."""
    lh = fontsize * 1.45 / 72
    h = 1.85 * lh if title else 0.0
    if col_labels:
        h += lh
    for row in rows:
        n = 1
        for c, cell in enumerate(row):
            wrap = wrap_chars[c] if wrap_chars and c < len(wrap_chars) else None
            n = max(n, _lines_in(str(cell), wrap))
        h += lh * (1 + 0.93 * (n - 1)) + 0.2 * lh
    return h + 0.3 * lh


def text_block_height_in(lines, *, fontsize: float = 8.5, wrap_chars: int = 100) -> float:
    """Height in inches that :func:`text_block` takes for these paragraphs (same steps, nothing drawn)."""
    import textwrap

    lh = fontsize * 1.45 / 72
    h = 0.0
    for item in lines:
        text, style = (item, "") if isinstance(item, str) else item
        size = fontsize * (1.25 if style == "h" else 0.85 if style == "s" else 1.0)
        parts = textwrap.wrap(text, width=int(wrap_chars * fontsize / size)) or [""]
        if style == "h":
            h += 0.4 * lh
        h += len(parts) * lh * size / fontsize
    return h


def bearing_motion(fig, result, *, units: str = "um", rect=(0.1, 0.1, 0.9, 0.92)):
    """The carriage path, rail profile, pitch and local flatness of an air-bearing result.

    Parameters
    ----------
    fig : matplotlib Figure
    result : flatcheck.bearing.BearingResult
        Heights in µm, positions in mm, pitch in arcsec.
    units : {"um", "in"}
        Display units (µm or µin).
    rect : (left, bottom, right, top)
        Part of the figure the panels fill (figure fractions).
    """
    m = result.motion
    st = list(result.stations)
    local = np.array([s.local_flatness_um for s in st]) if len(st) == len(m.x_mm) else None
    hs, u = _height_scale(units)
    dec = 3 if units == "um" else 1
    axes = carriage_path(
        fig, m.x_mm, _about_straightness_line(m.x_mm, m.raw_profile_um), _about_straightness_line(m.x_mm, m.path_um),
        pitch=m.pitch_path_arcsec, pitch_unit="arcsec", local_um=local, local_limit_um=result.limit_um, units=units,
        title=(f"carriage over its travel: path straightness {m.straightness_um * hs:.{dec}f} {u} "
               f"(surface alone {m.raw_straightness_um * hs:.{dec}f} {u})"),
        rect=rect,
    )
    # both curves are drawn about their own straightness line, so their shapes and spreads compare directly
    axes[0].set_ylabel(f"deviation from straight ({u})")
    return axes


def _about_straightness_line(x_mm, h_um):
    """Heights about their own minimum-zone straightness line, centred in the zone (µm; NaN kept).

    The guideway's raw profile and the carriage path are heights of different things (the surface on
    the centre line, the pad-averaged carriage), so each is drawn about its own straight line: the
    curves then share one datum and span exactly their stated straightness.
    """
    from ..form import evaluate_straightness

    x = np.asarray(x_mm, float)
    h = np.asarray(h_um, float)
    ok = np.isfinite(h)
    if ok.sum() < 3:
        return h
    s = x - x[ok][0]
    mz = evaluate_straightness(s[ok], h[ok]).mzli
    d = h - (mz.a_um + mz.b_um_per_mm * s)
    return d - (np.nanmax(d) + np.nanmin(d)) / 2
