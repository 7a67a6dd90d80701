"""Local flatness: the worst minimum-zone flatness over any window of a given size.

Standards for plates state a tolerance for the whole surface *and* for any local
area (ISO 8512-2 uses 250 x 250 mm); an air-bearing pad cares about its own
footprint. This module scans a rectangular or circular window over a
:class:`~flatcheck.heightmap.HeightMap` and returns the map of local flatness
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

A window narrower than the station spacing sees at most a few stations: its
local flatness is then that of the interpolant, which cannot show form with
wavelengths shorter than about twice the spacing. The result says so.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ._minzone import solve_minimum_zone
from ..errors import GeometryError, InputValueError
from ._heightmap import HeightMap

__all__ = ["LocalFlatness", "local_flatness"]

_CIRCLE_SAMPLES = 180  # edge points of a circular window (every 2 degrees)


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
        True when some window holds fewer than 3 stations or is narrower than the
        station spacing (see the module notes).
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


def local_flatness(
    hmap: HeightMap,
    *,
    size_mm,
    shape: str = "rect",
    step_mm: float | None = None,
    method: str = "linear",
) -> LocalFlatness:
    """Scan a window over the surface; minimum-zone flatness inside each position.

    Parameters
    ----------
    hmap : HeightMap
        The surface (positions mm, heights µm).
    size_mm : float or (float, float)
        Rectangle ``(width along x, height along y)`` in mm (one number: a square),
        or the diameter of a circle in mm.
    shape : {"rect", "circle"}
        Window shape.
    step_mm : float, optional
        Spacing of window centres in mm; default a quarter of the smaller window
        dimension. Centres run from edge to edge of the surveyed area so that every
        window lies inside it (the first and last windows touch its edges).
    method : {"linear", "cubic"}
        Interpolation between stations (see the module notes).

    Returns
    -------
    LocalFlatness

    Raises
    ------
    InputValueError
        Bad size, step, shape or method; a window larger than the surveyed area.
    GeometryError
        Cubic interpolation asked for scattered stations.
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
    spacing = _spacing(hmap)
    interpolation = "bilinear on the station grid" if hmap.grid is not None else "piecewise linear on the Delaunay triangulation"
    hm = hmap
    if method == "cubic":
        if hmap.grid is None:
            raise GeometryError("cubic interpolation needs stations on a regular grid", fix="use linear interpolation")
        hm = hmap.resampled(spacing / 4.0, method="cubic")
        interpolation = "cubic spline through the grid, resampled at a quarter of the station spacing, bilinear between"
    xmin, xmax, ymin, ymax = hm.extent_mm
    if w > xmax - xmin + 1e-9 or h > ymax - ymin + 1e-9:
        raise InputValueError(
            f"a {w:g} x {h:g} mm window does not fit in the surveyed area "
            f"({xmax - xmin:g} x {ymax - ymin:g} mm)",
            fix="use a smaller window",
        )
    step = float(step_mm) if step_mm is not None else min(w, h) / 4.0
    if not (np.isfinite(step) and step > 0):
        raise InputValueError(f"step {step_mm!r} mm is not a positive number", fix="give the centre spacing in mm")

    def centres(lo, hi, size):
        a, b = lo + size / 2, hi - size / 2
        k = int(np.ceil((b - a) / step - 1e-9)) + 1 if b > a else 1
        return np.linspace(a, b, k) if k > 1 else np.array([(a + b) / 2])

    cx, cy = np.meshgrid(centres(xmin, xmax, w), centres(ymin, ymax, h))
    cx, cy = cx.ravel(), cy.ravel()
    edges = _edges(hm)
    x, y, z = hm.x_mm, hm.y_mm, hm.height_um
    sx, sy = hmap.x_mm, hmap.y_mm
    tol = 1e-9 * max(xmax - xmin, ymax - ymin)
    ang = np.linspace(0, 2 * np.pi, _CIRCLE_SAMPLES, endpoint=False)
    flat = np.full(cx.size, np.nan)
    nst = np.zeros(cx.size, dtype=int)
    for k, (ux, uy) in enumerate(zip(cx, cy)):
        if shape == "rect":
            x0, x1, y0, y1 = ux - w / 2, ux + w / 2, uy - h / 2, uy + h / 2
            inside = (x >= x0 - tol) & (x <= x1 + tol) & (y >= y0 - tol) & (y <= y1 + tol)
            nst[k] = int(np.sum((sx >= x0 - tol) & (sx <= x1 + tol) & (sy >= y0 - tol) & (sy <= y1 + tol)))
            bx, by = _rect_edge_points(hm, edges, x0, x1, y0, y1)
        else:
            R = w / 2
            inside = (x - ux) ** 2 + (y - uy) ** 2 <= R * R + tol
            nst[k] = int(np.sum((sx - ux) ** 2 + (sy - uy) ** 2 <= R * R + tol))
            bx, by = ux + R * np.cos(ang), uy + R * np.sin(ang)
        bz = hm.sample(bx, by, method="linear")
        if not np.all(np.isfinite(bz)):
            continue  # the window leaves the surveyed area (scattered stations: outside their hull)
        px = np.concatenate([x[inside], bx])
        py = np.concatenate([y[inside], by])
        pz = np.concatenate([z[inside], bz])
        flat[k] = solve_minimum_zone(px, py, pz).t_um
    ok = np.isfinite(flat)
    if not ok.any():
        raise InputValueError(
            "no window position lies wholly inside the surveyed area", fix="use a smaller window or a finer step"
        )
    cx, cy, flat, nst = cx[ok], cy[ok], flat[ok], nst[ok]
    j = int(np.argmax(flat))
    notes = []
    undersampled = bool(nst.min() < 3 or min(w, h) < spacing)
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
