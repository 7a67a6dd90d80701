"""Local flatness: the worst minimum-zone flatness over any window of a given size.

Standards for plates state a tolerance for the whole surface *and* for any local
area (ISO 8512-2 uses 250 x 250 mm); an air-bearing pad cares about its own
footprint. This module scans a rectangular or circular window over a
:class:`~flatcheck.form.HeightMap` and returns the map of local flatness
(window centre -> minimum-zone flatness of the surface inside the window) and
the worst window.

Between stations the surface is the height map's interpolant
(:meth:`HeightMap.sample`): bilinear on a regular grid, piecewise linear on the
Delaunay triangulation of scattered stations (Union Jack). Both are linear along
every grid line / triangle edge and, inside a cell, bilinear or linear, so
*surface minus any plane* takes its extremes over a rectangular window at:
stations inside the window, crossings of the window edges with grid lines or
triangle edges, and the window corners. flatcheck evaluates exactly those
points, so the local flatness of a rectangular window is exact for the
interpolated surface. A circular window's edge is sampled every 2 degrees (plus the
stations inside): a close approximation from below. ``method="cubic"`` (regular
grids only) resamples the cubic interpolant at a quarter of the station spacing
first and then proceeds as above.

How the scan stays fast for small windows
-----------------------------------------
On a regular grid the windows fall into a few *classes*: windows whose edges sit at
the same offsets from the grid lines see the same pattern of points (same relative
positions, only other heights). Each class is solved as one batch
(:func:`~flatcheck.form.minimum_zone_batch`, every zone certified), so the cost per
window is a few vectorised array operations instead of one solver call. Scattered
stations are solved window by window (their windows are few: a window is never
smaller than the station spacing).

A window smaller than the station spacing is refused: inside it only the
interpolation between stations shows, not the surface. The number of window
positions is bounded (:data:`MAX_POSITIONS`) and checked before anything is
allocated, so a map whose coordinates are in the wrong unit gets a clear message
instead of an endless scan.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ._minzone import solve_minimum_zone
from ..errors import GeometryError, InputValueError
from ._heightmap import HeightMap

__all__ = ["LocalFlatness", "local_flatness", "smallest_window_mm", "MAX_POSITIONS"]

_CIRCLE_SAMPLES = 180  # edge points of a circular window (every 2 degrees)

#: Most window positions one scan evaluates (checked before any allocation). At the
#: measured cost of a batched window (tens of µs on small windows, docs/performance.md)
#: this bounds a scan to well under a minute on two cores.
MAX_POSITIONS = 400_000

#: Station spacing above which a map is most likely in the wrong unit (µm read as mm):
#: neighbouring stations 2 m apart are beyond any surface plate or guideway survey
#: (common practice, no single source: plates reach about 4 m, with 8+ stations a side).
IMPLAUSIBLE_SPACING_MM = 2000.0

# Candidate points per window up to which a class is solved as one batch; larger
# windows go to the single-set solver, whose subset strategy suits many points.
_BATCH_MAX_POINTS = 20000
# Points held at once per batch (windows x points): about 4 MB per float64 array.
_BATCH_CELLS = 500_000


@dataclass(frozen=True)
class LocalFlatness:
    """Local minimum-zone flatness of a scanned window.

    Attributes
    ----------
    centre_x_mm, centre_y_mm : ndarray, shape (k,)
        Window centres in mm.
    flatness_um : ndarray, shape (k,)
        Vertical minimum-zone flatness inside each window (µm).
    stations_in_window : ndarray of int, shape (k,)
        Measured stations inside each window.
    worst_um : float
        Largest local flatness (µm).
    worst_x_mm, worst_y_mm : float
        Centre of the worst window (mm).
    shape : str
        ``"rect"`` or ``"circle"``.
    size_mm : tuple of float
        ``(width, height)`` of a rectangle or ``(diameter, diameter)`` of a circle (mm).
    station_spacing_mm : float
        Typical station spacing (grid pitch, or median nearest-neighbour distance).
    interpolation : str
        How heights between stations were obtained.
    undersampled : bool
        True when some window holds fewer than 3 stations (see the module notes).
    notes : tuple of str
        Plain-language remarks for reports.
    """

    centre_x_mm: np.ndarray
    centre_y_mm: np.ndarray
    flatness_um: np.ndarray
    stations_in_window: np.ndarray
    worst_um: float
    worst_x_mm: float
    worst_y_mm: float
    shape: str
    size_mm: tuple
    station_spacing_mm: float
    interpolation: str
    undersampled: bool
    notes: tuple


def _spacing(hm: HeightMap) -> float:
    if hm.grid is not None:
        xs, ys, _ = hm.grid
        return float(max(np.diff(xs).max(), np.diff(ys).max()))
    from scipy.spatial import cKDTree

    d, _ = cKDTree(hm.xy_mm).query(hm.xy_mm, k=2)
    return float(np.median(d[:, 1]))


def smallest_window_mm(hmap: HeightMap) -> float:
    """The smallest local-flatness window (mm) that sees the surface, not only the interpolation.

    Parameters
    ----------
    hmap : HeightMap
        The surface (positions in mm).

    Returns
    -------
    float
        The station spacing in mm: the grid pitch (the larger of the two directions) on
        a regular grid, else the median distance from a station to its nearest neighbour.
        A window (rectangle side or circle diameter) must be at least this large.
    """
    return _spacing(hmap)


def _round_up(v: float) -> float:
    """``v`` rounded up to three significant digits (for messages)."""
    if not (v > 0 and math.isfinite(v)):
        return v
    e = math.floor(math.log10(v)) - 2
    return math.ceil(v / 10.0**e - 1e-9) * 10.0**e


def _unit_hint(hmap: HeightMap, spacing: float) -> str:
    """A sentence when the map's extent is implausible for its number of points, else ''."""
    if spacing <= IMPLAUSIBLE_SPACING_MM:
        return ""
    xmin, xmax, ymin, ymax = hmap.extent_mm
    return (
        f" (the {hmap.n} points span {xmax - xmin:g} x {ymax - ymin:g} mm, about {spacing:g} mm apart: "
        "implausible for a surveyed surface, so the coordinates are probably in another unit, µm read as mm?)"
    )


def _edges(hm: HeightMap):
    """Segments (p, q) along which the interpolant is linear: grid lines or Delaunay edges."""
    if hm.grid is not None:
        return None
    from scipy.spatial import Delaunay

    tri = Delaunay(hm.xy_mm)
    e = np.concatenate([tri.simplices[:, [0, 1]], tri.simplices[:, [1, 2]], tri.simplices[:, [0, 2]]])
    e = np.unique(np.sort(e, axis=1), axis=0)
    P = hm.xy_mm
    return P[e[:, 0]], P[e[:, 1]]


def _rect_edge_points(hm, edges, x0, x1, y0, y1):
    """Corners and crossings of the rectangle's edges with grid lines / triangle edges."""
    px = [x0, x1, x1, x0]
    py = [y0, y0, y1, y1]
    if edges is None:
        xs, ys, _ = hm.grid
        gx = xs[(xs > x0) & (xs < x1)]
        gy = ys[(ys > y0) & (ys < y1)]
        px += list(gx) * 2 + [x0] * gy.size + [x1] * gy.size
        py += [y0] * gx.size + [y1] * gx.size + list(gy) * 2
        return np.array(px, float), np.array(py, float)
    P, Q = edges
    X, Y = [np.array(px, float)], [np.array(py, float)]
    for axis, c, lo, hi in ((0, x0, y0, y1), (0, x1, y0, y1), (1, y0, x0, x1), (1, y1, x0, x1)):
        a, b = P[:, axis], Q[:, axis]
        cross = (a - c) * (b - c) < 0
        t = (c - a[cross]) / (b[cross] - a[cross])
        other = P[cross, 1 - axis] + t * (Q[cross, 1 - axis] - P[cross, 1 - axis])
        keep = (other >= lo) & (other <= hi)
        if axis == 0:
            X.append(np.full(keep.sum(), c))
            Y.append(other[keep])
        else:
            X.append(other[keep])
            Y.append(np.full(keep.sum(), c))
    return np.concatenate(X), np.concatenate(Y)


def _centres(lo: float, hi: float, size: float, step: float) -> np.ndarray:
    """Window centres along one axis (first and last windows touch the ends)."""
    a, b = lo + size / 2, hi - size / 2
    k = _count(lo, hi, size, step)
    return np.linspace(a, b, k) if k > 1 else np.array([(a + b) / 2])


def _count(lo: float, hi: float, size: float, step: float) -> int:
    """How many centres :func:`_centres` gives, computed without allocating (a float, may be huge)."""
    a, b = lo + size / 2, hi - size / 2
    if not b > a:
        return 1
    q = (b - a) / step
    if not q < 1e15:  # a step so small the count overflows: as good as endless
        return 10**15
    return int(math.ceil(q - 1e-9)) + 1


def _axis_classes(nodes: np.ndarray, lo_edges: np.ndarray, size: float, tol: float):
    """Per window position along one axis: the grid nodes inside and the grid lines strictly inside.

    Returns ``(first, count, s_first, s_count, cls, keys)``: index and number of the nodes inside
    the window (within ``tol``), index and number of the grid lines strictly inside (where the
    window's edges cross them), a class id per position and per class its ``(count, s_count)``.
    Windows whose classes agree along both axes have the same number of points of each kind, so
    they are built and solved together.
    """
    first = np.searchsorted(nodes, lo_edges - tol, side="left")
    count = np.searchsorted(nodes, lo_edges + size + tol, side="right") - first
    s_first = np.searchsorted(nodes, lo_edges, side="right")
    s_count = np.searchsorted(nodes, lo_edges + size, side="left") - s_first
    keys, cls = np.unique(np.column_stack([count, s_count]), axis=0, return_inverse=True)
    return first, count, s_first, s_count, cls.ravel(), keys


def local_flatness(
    hmap: HeightMap,
    *,
    size_mm,
    shape: str = "rect",
    step_mm: float | None = None,
    method: str = "linear",
    progress=None,
) -> LocalFlatness:
    """Scan a window over the surface; minimum-zone flatness inside each position.

    Parameters
    ----------
    hmap : HeightMap
        The surface (positions mm, heights µm).
    size_mm : float or (float, float)
        Rectangle ``(width along x, height along y)`` in mm (one number: a square),
        or the diameter of a circle in mm. Each side must be at least the station
        spacing (:func:`smallest_window_mm`).
    shape : {"rect", "circle"}
        Window shape.
    step_mm : float, optional
        Spacing of window centres in mm; default a quarter of the smaller window
        dimension. Centres run from edge to edge of the surveyed area so that every
        window lies inside it (the first and last windows touch its edges).
    method : {"linear", "cubic"}
        Interpolation between stations (see the module notes).
    progress : callable, optional
        Called as ``progress(k)`` each time ``k`` more window positions are done
        (for a progress bar); the calls add up to the number of positions. If it has a
        ``start`` method, ``start(total)`` is called first with the number of positions.

    Returns
    -------
    LocalFlatness

    Raises
    ------
    InputValueError
        Bad size, step, shape or method; a window larger than the surveyed area or
        smaller than the station spacing (the message gives the smallest window that
        means anything); a scan of more than :data:`MAX_POSITIONS` positions.
    GeometryError
        Cubic interpolation asked for scattered stations.

    Examples
    --------
    A tilted plane has no local form:

    >>> import numpy as np
    >>> X, Y = np.meshgrid(np.arange(11) * 10.0, np.arange(6) * 10.0)
    >>> hm = HeightMap(X.ravel(), Y.ravel(), 0.01 * X.ravel() - 0.02 * Y.ravel())
    >>> float(local_flatness(hm, size_mm=30).worst_um) < 1e-9
    True
    """
    if shape not in ("rect", "circle"):
        raise InputValueError(f"unknown window shape {shape!r}", fix="use rect or circle")
    if method not in ("linear", "cubic"):
        raise InputValueError(f"unknown interpolation {method!r}", fix="use linear or cubic")
    size = np.atleast_1d(np.asarray(size_mm, dtype=float)).ravel()
    if shape == "circle" or size.size == 1:
        size = np.array([size[0], size[0]])
    if size.size != 2 or not np.all(np.isfinite(size)) or np.any(size <= 0):
        raise InputValueError(f"window size {size_mm!r} is not one or two positive numbers", fix="e.g. 250 or 250,150 (mm)")
    w, h = float(size[0]), float(size[1])
    xmin, xmax, ymin, ymax = hmap.extent_mm
    if w > xmax - xmin + 1e-9 or h > ymax - ymin + 1e-9:
        raise InputValueError(
            f"a {w:g} x {h:g} mm window does not fit in the surveyed area "
            f"({xmax - xmin:g} x {ymax - ymin:g} mm)",
            fix="use a smaller window",
        )
    spacing = _spacing(hmap)
    what = f"a circle of {w:g} mm diameter" if shape == "circle" else f"a {w:g} x {h:g} mm window"
    if min(w, h) < spacing * (1 - 1e-9):
        least = _round_up(spacing)
        smallest = f"d{least:g}" if shape == "circle" else f"{max(w, least):g}x{max(h, least):g}"
        raise InputValueError(
            f"{what} is smaller than the station spacing ({spacing:g} mm): inside it only the "
            f"interpolation between stations shows, not the surface{_unit_hint(hmap, spacing)}",
            where="window",
            fix=f"use a window of at least {least:g} mm a side (e.g. {smallest}), or survey with closer stations",
        )
    step = float(step_mm) if step_mm is not None else min(w, h) / 4.0
    if not (np.isfinite(step) and step > 0):
        raise InputValueError(f"step {step_mm!r} mm is not a positive number", fix="give the centre spacing in mm")
    kx, ky = _count(xmin, xmax, w, step), _count(ymin, ymax, h, step)
    if kx * ky > MAX_POSITIONS:
        area = (xmax - xmin) * (ymax - ymin)
        if step_mm is not None:  # the step was chosen: a step that keeps the count within the bound
            fix = f"use a step of at least {_round_up(1.1 * math.sqrt(area / MAX_POSITIONS)):g} mm"
        else:  # default step, a quarter of the window: a window that keeps it within the bound
            fix = f"use a larger window (about {_round_up(4.5 * math.sqrt(area / MAX_POSITIONS)):g} mm a side or more)"
        raise InputValueError(
            f"scanning {what} in steps of {step:g} mm over {xmax - xmin:g} x {ymax - ymin:g} mm needs "
            f"{(f'{kx * ky:,}' if kx * ky < 10**9 else f'{float(kx * ky):.1e}')} positions, more than the "
            f"{MAX_POSITIONS:,} one scan evaluates"
            f"{_unit_hint(hmap, spacing)}",
            where="window",
            fix=fix,
        )
    interpolation = "bilinear on the station grid" if hmap.grid is not None else "piecewise linear on the Delaunay triangulation"
    hm = hmap
    if method == "cubic":
        if hmap.grid is None:
            raise GeometryError("cubic interpolation needs stations on a regular grid", fix="use linear interpolation")
        hm = hmap.resampled(spacing / 4.0, method="cubic")
        interpolation = "cubic spline through the grid, resampled at a quarter of the station spacing, bilinear between"
    xmin, xmax, ymin, ymax = hm.extent_mm
    cxs, cys = _centres(xmin, xmax, w, step), _centres(ymin, ymax, h, step)
    tol = 1e-9 * max(xmax - xmin, ymax - ymin)
    report = progress if progress is not None else (lambda k: None)
    start = getattr(progress, "start", None)
    if start is not None:  # a bar that wants the number of positions before the first one is done
        start(int(cxs.size * cys.size))
    if hm.grid is not None:
        flat = _scan_grid(hm, cxs, cys, w, h, shape, tol, report)
    else:
        flat = _scan_scattered(hm, cxs, cys, w, h, shape, tol, report)
    cx, cy = np.meshgrid(cxs, cys)
    cx, cy, flat = cx.ravel(), cy.ravel(), flat.ravel()
    nst = _stations_inside(hmap, cx, cy, w, h, shape, tol)
    ok = np.isfinite(flat)
    if not ok.any():
        raise InputValueError(
            "no window position lies wholly inside the surveyed area", fix="use a smaller window or a finer step"
        )
    cx, cy, flat, nst = cx[ok], cy[ok], flat[ok], nst[ok]
    j = int(np.argmax(flat))
    notes = []
    undersampled = bool(nst.min() < 3)
    if undersampled:
        notes.append(
            f"the window ({w:g} x {h:g} mm) is small for the station spacing ({spacing:g} mm): "
            f"some windows hold only {nst.min()} station(s), so their local flatness is that of the "
            f"interpolated surface and cannot show form shorter than about {2 * spacing:g} mm"
        )
    if shape == "circle":
        notes.append(f"circular window edge sampled every {360 // _CIRCLE_SAMPLES} degrees")
    return LocalFlatness(
        centre_x_mm=cx,
        centre_y_mm=cy,
        flatness_um=flat,
        stations_in_window=nst,
        worst_um=float(flat[j]),
        worst_x_mm=float(cx[j]),
        worst_y_mm=float(cy[j]),
        shape=shape,
        size_mm=(w, h),
        station_spacing_mm=spacing,
        interpolation=interpolation,
        undersampled=undersampled,
        notes=tuple(notes),
    )


def _stations_inside(hmap: HeightMap, cx, cy, w, h, shape, tol) -> np.ndarray:
    """Measured stations inside each window (int array like ``cx``)."""
    sx, sy = hmap.x_mm, hmap.y_mm
    if shape == "circle":
        from scipy.spatial import cKDTree

        R = w / 2
        # inside when |p - c|^2 <= R^2 + tol, as the scan tests it
        return np.asarray(
            cKDTree(hmap.xy_mm).query_ball_point(np.column_stack([cx, cy]), math.sqrt(R * R + tol), return_length=True),
            dtype=int,
        )
    if hmap.grid is not None:
        xs, ys, _ = hmap.grid
        nx = np.searchsorted(xs, cx + w / 2 + tol, "right") - np.searchsorted(xs, cx - w / 2 - tol, "left")
        ny = np.searchsorted(ys, cy + h / 2 + tol, "right") - np.searchsorted(ys, cy - h / 2 - tol, "left")
        return (nx * ny).astype(int)
    out = np.empty(cx.size, dtype=int)
    for k in range(cx.size):
        out[k] = int(np.count_nonzero(
            (np.abs(sx - cx[k]) <= w / 2 + tol) & (np.abs(sy - cy[k]) <= h / 2 + tol)
        ))
    return out


class _Batches:
    """Collects windows' point sets and solves them in batches of similar size (module notes).

    ``out`` is the flat result array; ``report(k)`` is told each time ``k`` windows are done.
    """

    def __init__(self, out: np.ndarray, report):
        self.out, self.report = out, report
        self.pending, self.cells = [], 0

    def add(self, dest, X, Y, Z):
        """Window sets ``X, Y, Z`` (k, n) for result positions ``dest`` (k,)."""
        k, n = Z.shape
        if n > _BATCH_MAX_POINTS:  # large windows: the single-set solver's subset strategy
            for j in range(k):
                self.out[dest[j]] = solve_minimum_zone(X[j], Y[j], Z[j]).t_um
            self.report(k)
            return
        self.pending.append((dest, X, Y, Z))
        self.cells += Z.size
        if self.cells >= _BATCH_CELLS:
            self.flush()

    def flush(self):
        if not self.pending:
            return
        n = max(p[3].shape[1] for p in self.pending)
        m = sum(p[3].shape[0] for p in self.pending)
        X, Y, Z = (np.empty((m, n)) for _ in range(3))
        dest = np.empty(m, dtype=np.int64)
        r = 0
        for d, x, y, z in self.pending:
            k, nk = z.shape
            for full, part in ((X, x), (Y, y), (Z, z)):
                full[r:r + k, :nk] = part
                full[r:r + k, nk:] = part[:, :1]  # fill with a repeat of the first point
            dest[r:r + k] = d
            r += k
        self.out[dest] = _zones(X, Y, Z)
        self.report(m)
        self.pending, self.cells = [], 0


def _scan_scattered(hm, cxs, cys, w, h, shape, tol, report) -> np.ndarray:
    """Window by window on scattered stations; returns flatness (ky, kx), NaN outside the hull."""
    edges = _edges(hm) if shape == "rect" else None
    x, y, z = hm.x_mm, hm.y_mm, hm.height_um
    ang = np.linspace(0, 2 * np.pi, _CIRCLE_SAMPLES, endpoint=False)
    flat = np.full(cys.size * cxs.size, np.nan)
    batches = _Batches(flat, report)
    for b, uy in enumerate(cys):
        for a, ux in enumerate(cxs):
            if shape == "rect":
                x0, x1, y0, y1 = ux - w / 2, ux + w / 2, uy - h / 2, uy + h / 2
                inside = (x >= x0 - tol) & (x <= x1 + tol) & (y >= y0 - tol) & (y <= y1 + tol)
                bx, by = _rect_edge_points(hm, edges, x0, x1, y0, y1)
            else:
                R = w / 2
                inside = (x - ux) ** 2 + (y - uy) ** 2 <= R * R + tol
                bx, by = ux + R * np.cos(ang), uy + R * np.sin(ang)
            bz = hm.sample(bx, by, method="linear")
            if not np.all(np.isfinite(bz)):  # the window leaves the stations' hull
                report(1)
                continue
            px, py, pz = (np.concatenate([v[inside], bv])[None, :] for v, bv in ((x, bx), (y, by), (z, bz)))
            batches.add(np.array([b * cxs.size + a]), px, py, pz)
    batches.flush()
    return flat.reshape(cys.size, cxs.size)


def _scan_grid(hm, cxs, cys, w, h, shape, tol, report) -> np.ndarray:
    """All windows on a regular grid, built and solved class by class (module notes); returns (ky, kx)."""
    xs, ys, index = hm.grid
    Zg = hm.height_um[index]  # (ny, nx)
    x0s, y0s = cxs - w / 2, cys - h / 2
    fx, _, sfx, _, clx, kx = _axis_classes(xs, x0s, w, tol)
    fy, _, sfy, _, cly, ky = _axis_classes(ys, y0s, h, tol)
    flat = np.full(cys.size * cxs.size, np.nan)
    batches = _Batches(flat, report)
    R = w / 2
    ang = np.linspace(0, 2 * np.pi, _CIRCLE_SAMPLES, endpoint=False)
    for cxk, (nnx, nsx) in enumerate(kx):
        A = np.flatnonzero(clx == cxk)  # x positions of this class
        for cyk, (nny, nsy) in enumerate(ky):
            B = np.flatnonzero(cly == cyk)
            di, dj = np.meshgrid(np.arange(nnx), np.arange(nny))
            di, dj = di.ravel(), dj.ravel()
            AA, BB = np.meshgrid(A, B)
            AA, BB = AA.ravel(), BB.ravel()  # every window of the class
            npts = di.size + (4 + 2 * nsx + 2 * nsy if shape == "rect" else _CIRCLE_SAMPLES)
            chunk = max(1, _BATCH_CELLS // npts) if npts <= _BATCH_MAX_POINTS else 1
            for s in range(0, AA.size, chunk):
                a, b = AA[s:s + chunk], BB[s:s + chunk]
                x0, y0 = x0s[a][:, None], y0s[b][:, None]
                ix, iy = fx[a][:, None] + di[None, :], fy[b][:, None] + dj[None, :]
                nxp, nyp, nz = xs[ix], ys[iy], Zg[iy, ix]  # nodes inside (k, nodes)
                if shape == "rect":
                    gx = xs[sfx[a][:, None] + np.arange(nsx)[None, :]]  # grid lines crossing the edges
                    gy = ys[sfy[b][:, None] + np.arange(nsy)[None, :]]
                    x1, y1 = x0 + w, y0 + h
                    bx = np.concatenate([x0, x1, x1, x0, gx, gx, np.repeat(x0, nsy, 1), np.repeat(x1, nsy, 1)], axis=1)
                    by = np.concatenate([y0, y0, y1, y1, np.repeat(y0, nsx, 1), np.repeat(y1, nsx, 1), gy, gy], axis=1)
                else:
                    bx = x0 + R + R * np.cos(ang)[None, :]
                    by = y0 + R + R * np.sin(ang)[None, :]
                    # nodes of the bounding box outside the circle take the place of a point on its
                    # edge (a repeated point leaves the zone unchanged)
                    out = (nxp - x0 - R) ** 2 + (nyp - y0 - R) ** 2 > R * R + tol
                    nxp = np.where(out, bx[:, :1], nxp)
                    nyp = np.where(out, by[:, :1], nyp)
                    nz = np.where(out, np.nan, nz)
                bz = hm.sample(bx, by)
                if shape != "rect":
                    nz = np.where(np.isnan(nz), bz[:, :1], nz)
                X = np.concatenate([nxp, bx], axis=1)
                Y = np.concatenate([nyp, by], axis=1)
                H = np.concatenate([nz, bz], axis=1)
                batches.add(b * cxs.size + a, X, Y, H)
    batches.flush()
    return flat.reshape(cys.size, cxs.size)


# --------------------------------------------------------------------------- batched zones
_TOL = 1e-11  # primal feasibility on heights scaled to a range of 1 (as the single-set solver)
_PIVOT_EPS = 1e-9  # smallest usable pivot element in the ratio test
_CERT_TOL = 1e-9  # certificate: multipliers >= -tol, every point inside the zone within tol
_SUBSET = 12  # points taken from each side of a set's plane for its working set (and per round)
_ROUNDS = 6  # working-set rounds before the remaining sets run on all their points
_C = np.array([0.0, 0.0, 0.0, 1.0])  # objective: minimise the zone width t


def _basis_rows(Xn, Yn, B):
    """Constraint rows (m, 4, 4) of bases B (m, 4) over sets with their own positions (m, n).

    Row id k < n: lower constraint of point k; k >= n: upper constraint of point k - n (as in
    flatcheck.form._minzone).
    """
    n = Xn.shape[1]
    i = B % n
    up = B >= n
    sg = np.where(up, 1.0, -1.0)
    G = np.empty(B.shape + (4,))
    G[..., 0] = sg
    G[..., 1] = sg * np.take_along_axis(Xn, i, axis=1)
    G[..., 2] = sg * np.take_along_axis(Yn, i, axis=1)
    G[..., 3] = up
    return G, i, sg


def _simplex(Xn, Yn, Zn, B, max_iter):
    """Dual simplex on sets with their own positions, all (m, n); returns v (m, 4), B, done (m,)."""
    m, n = Zn.shape
    B = B.copy()
    v = np.zeros((m, 4))
    done = np.zeros(m, dtype=bool)
    act = np.arange(m)
    for _ in range(max_iter + 1):
        if act.size == 0:
            break
        G, i, sg = _basis_rows(Xn[act], Yn[act], B[act])
        h = sg * np.take_along_axis(Zn[act], i, axis=1)
        good = np.abs(np.linalg.det(G)) > 1e-14
        if not good.all():  # a singular basis: leave those sets to the single-set solver
            act, G, h = act[good], G[good], h[good]
            if act.size == 0:
                break
        va = np.linalg.solve(G, h[..., None])[..., 0]
        v[act] = va
        Xa, Ya = Xn[act], Yn[act]
        r = Zn[act] - (va[:, 0:1] + va[:, 1:2] * Xa + va[:, 2:3] * Ya)
        lo_arg, up_arg = r.argmin(axis=1), r.argmax(axis=1)
        ar = np.arange(act.size)
        lo_min, up_min = r[ar, lo_arg], va[:, 3] - r[ar, up_arg]
        fin = np.minimum(lo_min, up_min) >= -_TOL
        done[act[fin]] = True
        keep = ~fin
        if not keep.any():
            break
        act, G, Xa, Ya = act[keep], G[keep], Xa[keep], Ya[keep]
        lo_arg, up_arg, lo_min, up_min = lo_arg[keep], up_arg[keep], lo_min[keep], up_min[keep]
        q = np.where(lo_min <= up_min, lo_arg, up_arg + n)  # entering row
        qi = q % n
        qs = np.where(q >= n, 1.0, -1.0)
        ar = np.arange(act.size)
        Gq = np.column_stack([qs, qs * Xa[ar, qi], qs * Ya[ar, qi], (q >= n).astype(float)])
        sol = np.linalg.solve(np.swapaxes(G, 1, 2), np.stack([np.broadcast_to(_C, Gq.shape), Gq], axis=2))
        lam, w = sol[..., 0], sol[..., 1]
        pos = w > _PIVOT_EPS
        ratio = np.where(pos, np.maximum(lam, 0.0) / np.where(pos, w, 1.0), np.inf)
        leave = ratio.argmin(axis=1)
        stuck = ~np.isfinite(ratio[ar, leave])
        Bk = B[act]
        Bk[ar, leave] = q
        B[act] = Bk
        act = act[~stuck]
    return v, B, done


def _zones(X, Y, Z, max_iter: int = 60) -> np.ndarray:
    """Exact vertical minimum zones (µm) of many small point sets, one set per row.

    The dual simplex of :mod:`flatcheck.form._minzone` (same basis rules), vectorised over
    sets that each have their own positions. Every answer is certified (multipliers of
    the final contact basis >= 0, i.e. dual feasible, and every point inside the zone:
    linear programming duality); a set that is not certified within ``max_iter`` pivots
    is solved again by :func:`solve_minimum_zone`.

    Parameters
    ----------
    X, Y : ndarray, shape (m, n)
        Positions in mm, one row per set (a set may repeat a point to fill its row).
    Z : ndarray, shape (m, n)
        Heights in µm.

    Returns
    -------
    ndarray, shape (m,)
        Zone widths along z in µm.
    """
    m, n = Z.shape
    x0 = 0.5 * (X.max(axis=1) + X.min(axis=1))
    y0 = 0.5 * (Y.max(axis=1) + Y.min(axis=1))
    s = 0.5 * np.maximum(np.ptp(X, axis=1), np.ptp(Y, axis=1))
    s = np.where(s > 0, s, 1.0)
    Xn = (X - x0[:, None]) / s[:, None]
    Yn = (Y - y0[:, None]) / s[:, None]
    # heights about each set's least-squares plane, scaled to a range of 1
    sx, sy = Xn.sum(axis=1), Yn.sum(axis=1)
    sxx, sxy, syy = (Xn * Xn).sum(axis=1), (Xn * Yn).sum(axis=1), (Yn * Yn).sum(axis=1)
    N = np.stack([np.stack([np.full(m, float(n)), sx, sy], -1), np.stack([sx, sxx, sxy], -1),
                  np.stack([sy, sxy, syy], -1)], 1)  # normal equations of z = a + bX + cY, (m, 3, 3)
    rhs = np.stack([Z.sum(axis=1), (Xn * Z).sum(axis=1), (Yn * Z).sum(axis=1)], -1)
    try:
        coef = np.linalg.solve(N, rhs[..., None])[..., 0]
    except np.linalg.LinAlgError:  # a set on one line: let the single-set solver say so
        return np.array([solve_minimum_zone(X[k], Y[k], Z[k]).t_um for k in range(m)])
    Zn = Z - (coef[:, 0:1] + coef[:, 1:2] * Xn + coef[:, 2:3] * Yn)
    zs = np.ptp(Zn, axis=1)
    zs = np.where(zs > 0, zs, 1.0)
    Zn /= zs[:, None]
    rows = np.arange(m)
    # dual-feasible start: lower plane through a large triangle, upper contact on a vertex
    i1 = np.argmax((Xn - Xn.mean(axis=1, keepdims=True)) ** 2 + (Yn - Yn.mean(axis=1, keepdims=True)) ** 2, axis=1)
    dx, dy = Xn - Xn[rows, i1][:, None], Yn - Yn[rows, i1][:, None]
    i2 = np.argmax(dx * dx + dy * dy, axis=1)
    i3 = np.argmax(np.abs(dx * dy[rows, i2][:, None] - dy * dx[rows, i2][:, None]), axis=1)
    del dx, dy
    B = np.column_stack([i1, i2, i3, i1 + n]).astype(np.int64)
    v = np.zeros((m, 4))
    done = np.zeros(m, dtype=bool)
    if n > 2 * _SUBSET:
        # working set first: the points farthest above and below each set's least-squares plane
        # and the start triangle; each zone found there is checked against every point, and sets
        # with points outside take the worst of them into their working set and continue from
        # their basis (constraint generation); what is left after a few rounds runs on all points
        sub = np.concatenate([np.argpartition(Zn, _SUBSET, axis=1)[:, :_SUBSET],
                              np.argpartition(-Zn, _SUBSET, axis=1)[:, :_SUBSET],
                              np.column_stack([i1, i2, i3])], axis=1)
        k = sub.shape[1]
        Bs = np.column_stack([np.full(m, k - 3), np.full(m, k - 2), np.full(m, k - 1), np.full(m, 2 * k - 3)])
        todo = rows
        for _ in range(_ROUNDS):
            k = sub.shape[1]
            Xs, Ys, Zs = (np.take_along_axis(A[todo], sub, axis=1) for A in (Xn, Yn, Zn))
            vs, Bs, ds = _simplex(Xs, Ys, Zs, Bs, max_iter)
            Bf = np.where(Bs >= k, np.take_along_axis(sub, np.where(Bs >= k, Bs - k, 0), axis=1) + n,
                          np.take_along_axis(sub, Bs % k, axis=1))
            B[todo] = Bf
            r = Zn[todo] - (vs[:, 0:1] + vs[:, 1:2] * Xn[todo] + vs[:, 2:3] * Yn[todo])
            inside = (r.min(axis=1) >= -_TOL) & (r.max(axis=1) <= vs[:, 3] + _TOL)
            fin = ds & inside
            v[todo[fin]], done[todo[fin]] = vs[fin], True
            more = ds & ~inside
            if not more.any() or sub.shape[1] + 2 * _SUBSET > n:
                break
            rm = r[more]
            low = np.argpartition(rm, _SUBSET, axis=1)[:, :_SUBSET]
            high = np.argpartition(vs[more, 3:4] - rm, _SUBSET, axis=1)[:, :_SUBSET]
            sub = np.concatenate([sub[more], low, high], axis=1)
            Bs = Bs[more]
            Bs = np.where(Bs >= k, Bs + 2 * _SUBSET, Bs)  # upper-row ids move with the longer working set
            todo = todo[more]
        rest = np.flatnonzero(~done)
    else:
        rest = rows
    if rest.size:
        vr, Br, dr = _simplex(Xn[rest], Yn[rest], Zn[rest], B[rest], max_iter)
        v[rest], B[rest], done[rest] = vr, Br, dr
    t = np.full(m, np.nan)
    ok = np.flatnonzero(done)
    if ok.size:
        G, _, _ = _basis_rows(Xn[ok], Yn[ok], B[ok])
        lam = np.linalg.solve(np.swapaxes(G, 1, 2), np.broadcast_to(_C, (ok.size, 4))[..., None])[..., 0]
        vo = v[ok]
        r = Zn[ok] - (vo[:, 0:1] + vo[:, 1:2] * Xn[ok] + vo[:, 2:3] * Yn[ok])
        lo, hi = r.min(axis=1), r.max(axis=1)
        cert = np.all(lam >= -_CERT_TOL, axis=1) & (lo >= -_CERT_TOL) & (hi <= vo[:, 3] + _CERT_TOL)
        # the zone actually achieved by the certified plane (never below the optimum)
        t[ok[cert]] = (hi[cert] - lo[cert]) * zs[ok[cert]]
    for k in np.flatnonzero(~np.isfinite(t)):
        t[k] = solve_minimum_zone(X[k], Y[k], Z[k]).t_um
    return t
