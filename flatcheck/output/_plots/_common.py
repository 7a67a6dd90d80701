"""Shared ground of the pictures: figures and files, display units, plan views, colour bars.

Every picture module imports its matplotlib pieces from here or inside its functions; figures are drawn on an
explicitly attached Agg canvas (no pyplot, no global backend switch).
"""

from __future__ import annotations

import contextlib
from pathlib import Path

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.ticker import MaxNLocator

from ...errors import InputValueError
from ...units import MM_PER_INCH, UM_PER_UIN

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


def _fmt_step(v_um: float, units: str, step_um: float | None, *, signed: bool = False) -> str:
    """A height (µm) with its unit, to the step the measurement resolves (:func:`flatcheck.units.format_height`);
    ``signed`` puts a + before a rise; never "-0.00"."""
    from ...units import format_height

    text = format_height(v_um, units, step_um=step_um)
    return "+" + text if signed and not text.startswith("-") and text.strip("0. µmin") else text


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


def save_png(fig: Figure, path, *, dpi: float = 150, axes=None, pad_in: float = 0.08, caption=None) -> Path:
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
    caption : sequence of str, optional
        Lines written above the picture in the PNG only (never on the figure as shown elsewhere): the
        surface's identity, the date and what the picture shows, so that the file stands alone.

    Raises
    ------
    OutputError
        If the file cannot be written.
    """
    from matplotlib.transforms import Bbox

    from ...io import atomic_path

    path = Path(path)
    bbox = None
    added = None
    if axes or caption:
        fig.canvas.draw()
        r = fig.canvas.get_renderer()
        if axes:
            boxes = []
            for a in axes:
                boxes.append(a.get_tightbbox(r))
                boxes += [c.get_tightbbox(r) for c in getattr(a, "child_axes", ())]
                # a twin (a second y axis, e.g. pitch beside heights) shares the x axis: its labels belong too
                boxes += [t.get_tightbbox(r) for t in a.get_shared_x_axes().get_siblings(a) if t is not a]
            box = Bbox.union([b for b in boxes if b is not None and b.width > 0])
        else:
            box = fig.bbox
        if caption:
            # the caption sits just above the picture, left-aligned with it (display units -> figure fraction)
            gap = 4.0 * fig.dpi / 72.0
            fx, fy = fig.transFigure.inverted().transform((box.x0, box.y1 + gap))
            import textwrap

            # wrapped to the picture's width (about 0.55 em a character), so the caption never widens the file
            chars = max(30, int(box.width / (0.55 * 7.5 * fig.dpi / 72.0)))
            lines = [part for c in caption for part in (textwrap.wrap(str(c), chars) or [""])]
            added = fig.text(fx, fy, "\n".join(lines), fontsize=7.5, color="0.2", va="bottom", ha="left",
                             linespacing=1.25, gid="caption")
            box = Bbox.union([box, added.get_window_extent(r)])
        if axes or caption:
            bbox = box.transformed(fig.dpi_scale_trans.inverted()).padded(pad_in)
    try:
        with atomic_path(path, suffix=".png") as tmp:
            fig.savefig(tmp, format="png", dpi=dpi, bbox_inches=bbox)
    finally:
        if added is not None:
            added.remove()
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

        from ...io import atomic_path

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


def _levels(zmin: float, zmax: float, n: int = 12) -> np.ndarray:
    if not np.isfinite(zmin) or not np.isfinite(zmax) or zmax - zmin < 1e-12:
        c = 0.0 if not np.isfinite(zmin) else zmin
        return np.array([c - 0.5, c + 0.5])
    lev = MaxNLocator(nbins=n, steps=[1, 2, 2.5, 5, 10]).tick_values(zmin, zmax)
    return lev


# ---------------------------------------------------------------------------- plan views
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
