"""Least removal: the least material whose removal brings a measured surface within a target flatness.

Here live the area each node stands for (:func:`node_area_weights`), the least-removal linear program
(:func:`least_removal`) and its result (:class:`LeastRemoval`, with the connected :class:`HighSpot` regions it
lowers): the first step of the lapping chain, whose removal map the dwell deconvolution
(:mod:`flatcheck.lapping._dwell`) and the pass plan (:mod:`flatcheck.lapping._plan`) then aim at. Everything
here is pure: numpy arrays in, frozen dataclasses out; no printing, no files.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import GeometryError, InputValueError
from ..form import minimum_zone
from ..form import HeightMap

__all__ = [
    "LeastRemoval",
    "HighSpot",
    "node_area_weights",
    "least_removal",
]

#: Depth below which a node counts as untouched, µm (1 pm: far below any measurement).
_ZERO_UM = 1e-6


# --------------------------------------------------------------------------- weights
def node_area_weights(x_mm, y_mm) -> np.ndarray:
    """Area represented by each node, so that ``sum(w * r)`` is a volume.

    On a complete regular grid each node gets its trapezoid-rule cell (half cells on the edges, quarter cells
    at the corners): ``sum(w * r)`` is then exactly the volume under the bilinear interpolant of ``r`` (the
    integral of a bilinear patch is its area times the mean of its four corners). On scattered stations each node
    gets one third of the area of every Delaunay triangle it belongs to, so ``sum(w * r)`` is exactly the
    volume under the piecewise-linear interpolant of ``r``.

    Parameters
    ----------
    x_mm, y_mm : ndarray, shape (n,)
        Node positions in mm.

    Returns
    -------
    ndarray, shape (n,)
        Areas in mm^2; they sum to the area of the grid's rectangle or of the stations' convex hull.

    Raises
    ------
    GeometryError
        Fewer than three points, or all points on one line (no area).
    """
    from ..form import regular_grid

    x = np.asarray(x_mm, float).ravel()
    y = np.asarray(y_mm, float).ravel()
    if x.size < 3:
        raise GeometryError(f"an area needs at least three points, got {x.size}")
    grid = regular_grid(x, y)
    if grid is not None:
        xs, ys, index = grid
        wx = _trapezoid_weights(xs)
        wy = _trapezoid_weights(ys)
        w = np.empty(x.size)
        w[index] = np.outer(wy, wx)
        return w
    from scipy.spatial import Delaunay, QhullError

    pts = np.column_stack([x - x.mean(), y - y.mean()])
    try:
        tri = Delaunay(pts)
    except QhullError:
        raise GeometryError(
            "the points lie on one line: they enclose no area", fix="give a surface survey, not a single line"
        ) from None
    s = tri.simplices
    p0, p1, p2 = pts[s[:, 0]], pts[s[:, 1]], pts[s[:, 2]]
    area = 0.5 * np.abs((p1[:, 0] - p0[:, 0]) * (p2[:, 1] - p0[:, 1]) - (p2[:, 0] - p0[:, 0]) * (p1[:, 1] - p0[:, 1]))
    w = np.zeros(x.size)
    for k in range(3):
        np.add.at(w, s[:, k], area / 3.0)
    return w


def _trapezoid_weights(v: np.ndarray) -> np.ndarray:
    d = np.diff(v)
    w = np.zeros(v.size)
    w[:-1] += d / 2.0
    w[1:] += d / 2.0
    return w


def _neighbours(x: np.ndarray, y: np.ndarray):
    """Pairs (i, j) of neighbouring nodes: grid 4-neighbours, else Delaunay edges."""
    from ..form import regular_grid

    grid = regular_grid(x, y)
    if grid is not None:
        index = grid[2]
        a = np.concatenate([index[:, :-1].ravel(), index[:-1, :].ravel()])
        b = np.concatenate([index[:, 1:].ravel(), index[1:, :].ravel()])
        return a, b
    from scipy.spatial import Delaunay

    s = Delaunay(np.column_stack([x - x.mean(), y - y.mean()])).simplices
    a = np.concatenate([s[:, 0], s[:, 1], s[:, 2]])
    b = np.concatenate([s[:, 1], s[:, 2], s[:, 0]])
    return a, b


def _components(mask: np.ndarray, a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Label connected groups of ``mask`` nodes (-1 outside the mask)."""
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    n = mask.size
    keep = mask[a] & mask[b]
    g = coo_matrix((np.ones(keep.sum()), (a[keep], b[keep])), shape=(n, n))
    _, lab = connected_components(g, directed=False)
    out = np.full(n, -1, dtype=np.int64)
    if mask.any():
        _, out[mask] = np.unique(lab[mask], return_inverse=True)
    return out


# --------------------------------------------------------------------------- least removal
@dataclass(frozen=True)
class HighSpot:
    """One connected region that must be lowered.

    Attributes
    ----------
    x_mm, y_mm : float
        Position of its deepest node (mm).
    depth_um : float
        Removal needed at that node (µm).
    nodes : int
        Number of nodes in the region.
    volume_mm3 : float
        Material to remove from the region (mm^3).
    """

    x_mm: float
    y_mm: float
    depth_um: float
    nodes: int
    volume_mm3: float


@dataclass(frozen=True, eq=False)
class LeastRemoval:
    """The least-removal map for a target flatness.

    Attributes
    ----------
    x_mm, y_mm : ndarray, shape (n,)
        Node positions (mm), those of the input height map.
    remove_um : ndarray, shape (n,)
        Material to remove at each node (µm, >= 0).
    weight_mm2 : ndarray, shape (n,)
        Area represented by each node (mm^2), see :func:`node_area_weights`.
    target_um : float
        Target flatness (µm).
    plane : tuple of float
        ``(a_um, b_um_per_mm, c_um_per_mm)``: the lower face ``z = a + b x + c y`` of the target zone in the
        input's height reference; the upper face is ``target_um`` above it.
    removed_volume_mm3 : float
        ``sum(weight_mm2 * remove_um) / 1000`` (µm x mm^2 = 1e-3 mm^3).
    max_depth_um : float
        Deepest removal (µm).
    high_spots : tuple of HighSpot
        Connected regions with removal, deepest first.
    flatness_before_um, flatness_after_um : float
        Minimum-zone flatness before and after the removal (µm).
    """

    x_mm: np.ndarray
    y_mm: np.ndarray
    remove_um: np.ndarray
    weight_mm2: np.ndarray
    target_um: float
    plane: tuple
    removed_volume_mm3: float
    max_depth_um: float
    high_spots: tuple
    flatness_before_um: float
    flatness_after_um: float


def least_removal(hm: HeightMap, target_um: float, *, weight_mm2=None) -> LeastRemoval:
    """The removal map with the least (area-weighted) material that brings the surface within ``target_um``.

    Material can only be removed, so the new surface is ``z_i - r_i`` with ``r_i >= 0``. It is within the
    target if some plane ``p(x, y) = a + b x + c y`` (free: any tilt, any height) has
    ``p_i <= z_i - r_i <= p_i + T`` at every node. The least removal is the linear program

    .. math::

        \\min_{a, b, c, r} \\sum_i w_i r_i \\quad\\text{s.t.}\\quad
        r_i \\ge z_i - p_i - T,\\quad p_i + r_i \\le z_i,\\quad r_i \\ge 0

    (the lower face must lie under every lowered node; the upper face over it). For a fixed plane the best
    ``r_i`` is ``max(0, z_i - p_i - T)``, so the program finds the plane jointly with the removal; it is
    always feasible (a plane low enough) and bounded (``r >= 0``), and is solved exactly by scipy's HiGHS.

    Parameters
    ----------
    hm : HeightMap
        The surface (heights in µm at positions in mm), n >= 3 points not on one line.
    target_um : float
        Target flatness in µm, >= 0.
    weight_mm2 : ndarray, shape (n,), optional
        Area represented by each node in mm^2; default :func:`node_area_weights`.

    Returns
    -------
    LeastRemoval

    Raises
    ------
    InputValueError
        A negative or non-finite target, or bad weights.
    GeometryError
        Points on one line.

    Examples
    --------
    One high node of 1 µm on a flat 3 x 3 grid needs 1 - T of removal there, nothing elsewhere:

    >>> hm = HeightMap([0, 1, 2] * 3, [0] * 3 + [1] * 3 + [2] * 3, [0, 0, 0, 0, 1, 0, 0, 0, 0])
    >>> round(float(least_removal(hm, 0.25).remove_um[4]), 6)
    0.75
    """
    from scipy.optimize import linprog
    from scipy.sparse import csr_matrix, hstack, identity, vstack

    if not (np.isfinite(target_um) and target_um >= 0):
        raise InputValueError(f"target flatness {target_um} µm is not a number >= 0", fix="give a target >= 0 µm")
    x, y, z = hm.x_mm, hm.y_mm, hm.height_um
    n = z.size
    w = node_area_weights(x, y) if weight_mm2 is None else np.asarray(weight_mm2, float).ravel()
    if w.shape != (n,) or not np.all(np.isfinite(w)) or (w < 0).any() or w.sum() <= 0:
        raise InputValueError("the node weights must be n finite areas >= 0, not all zero")
    # Centre and scale positions (and heights) so the LP is well conditioned; undone below.
    xm, ym = x.mean(), y.mean()
    span = max(float(np.ptp(x)), float(np.ptp(y)), 1e-12)
    zm = z.min()
    zs = z - zm
    P = np.column_stack([np.ones(n), (x - xm) / span, (y - ym) / span])
    I = identity(n, format="csr")
    Pc = csr_matrix(P)
    # rows 1: -p_i - r_i <= -z_i + T ; rows 2: p_i + r_i <= z_i
    A_ub = vstack([hstack([-Pc, -I]), hstack([Pc, I])], format="csr")
    b_ub = np.concatenate([-zs + target_um, zs])
    cost = np.concatenate([np.zeros(3), w / w.sum()])
    bounds = [(None, None)] * 3 + [(0, None)] * n
    res = linprog(cost, A_ub=A_ub, b_ub=b_ub, bounds=bounds, method="highs")
    if res.status != 0:  # pragma: no cover - the LP is always feasible and bounded
        raise GeometryError(f"the least-removal program failed: {res.message}")
    a0, b0, c0 = res.x[:3]
    # exact removal for the optimal plane (cleans solver round-off to exactly 0 where nothing is removed)
    p = P @ res.x[:3]
    r = np.maximum(0.0, zs - p - target_um)
    r[r < _ZERO_UM * 1e-3] = 0.0
    b_mm, c_mm = b0 / span, c0 / span
    plane = (float(a0 - b_mm * xm - c_mm * ym + zm), float(b_mm), float(c_mm))
    vol = float(w @ r) / 1000.0
    spots = _high_spots(x, y, r, w)
    before = minimum_zone(x, y, z).flatness_um
    after = minimum_zone(x, y, z - r).flatness_um
    r.setflags(write=False)
    return LeastRemoval(
        x_mm=x,
        y_mm=y,
        remove_um=r,
        weight_mm2=w,
        target_um=float(target_um),
        plane=plane,
        removed_volume_mm3=vol,
        max_depth_um=float(r.max()),
        high_spots=spots,
        flatness_before_um=float(before),
        flatness_after_um=float(after),
    )


def _high_spots(x, y, r, w) -> tuple:
    mask = r > _ZERO_UM
    if not mask.any():
        return ()
    a, b = _neighbours(x, y)
    lab = _components(mask, a, b)
    spots = []
    for k in range(lab.max() + 1):
        idx = np.flatnonzero(lab == k)
        j = idx[np.argmax(r[idx])]
        spots.append(HighSpot(float(x[j]), float(y[j]), float(r[j]), int(idx.size), float(w[idx] @ r[idx]) / 1000.0))
    spots.sort(key=lambda s: -s.depth_um)
    return tuple(spots)
