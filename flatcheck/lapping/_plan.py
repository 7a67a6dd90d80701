"""Lapping planner: least removal, lap model (Preston), dwell map, predicted surface and pass plan.

The chain is

1. :func:`least_removal` -- the removal map (µm at every node, never negative) that brings the surface
   within a target flatness while removing the least material, solved exactly as one linear program;
2. :class:`LapModel` -- the user's lap (round or rectangular) and its removal rate from their own
   calibration; removal follows the Preston equation ``dz/dt = Kp p v``, so the lap's footprint is the tool
   influence function (TIF);
3. :func:`deconvolve_dwell` -- where the lap should spend its time: a non-negative, optionally
   regularised deconvolution of the removal map by the footprint on a regular grid;
4. :func:`plan_lapping` -- the dwell map, the surface and flatness predicted after carrying it out, an
   ordered list of passes (highest first) and a chart of named cells with the time in each.

Everything here is pure: numpy arrays in, frozen dataclasses out; no printing, no files.

References
----------
.. [1] F. W. Preston, "The theory and design of plate glass polishing machines", J. Soc. Glass
   Technology 11 (1927) 214-256 (from memory; the equation dz/dt = Kp p v is the one used throughout
   the dwell-time literature).
.. [2] Dwell-time computation reviewed in Light: Advanced Manufacturing 5 (2024),
   doi:10.37188/lam.2024.021 (removal = TIF convolved with dwell, dwell >= 0, ill-posed).
.. [3] Tikhonov-regularised, bounded least squares for dwell: Applied Optics 54 (2015) 2747.
"""

from __future__ import annotations

import math
import string
from dataclasses import dataclass

import numpy as np

from ..errors import GeometryError, InputValueError
from ..form import minimum_zone
from ..form import HeightMap
from ..units import format_height

__all__ = [
    "LeastRemoval",
    "HighSpot",
    "LapModel",
    "Pass",
    "CellChart",
    "LapPlan",
    "Shortfall",
    "node_area_weights",
    "least_removal",
    "preston_rate_um_per_min",
    "lap_kernel",
    "removal_from_dwell",
    "deconvolve_dwell",
    "grid_interpolation_matrix",
    "plan_lapping",
    "cell_column_name",
    "chart_edges",
    "default_cell_mm",
    "MAX_CHART_CELLS",
    "HAND_MIN_PASS_MIN",
    "MAX_OVERHANG_FRACTION",
    "lap_centre_allowed",
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


# --------------------------------------------------------------------------- Preston and the lap
def preston_rate_um_per_min(kp_per_pa: float, pressure_pa: float, speed_m_per_s: float) -> float:
    """Removal rate by the Preston equation, ``dz/dt = Kp p v``, in µm per minute.

    Parameters
    ----------
    kp_per_pa : float
        Preston coefficient Kp in 1/Pa (m^2/N); it lumps abrasive, lap, fluid and work and is found by
        calibration: no published value for granite exists (common practice, no single source).
    pressure_pa : float
        Mean contact pressure under the lap in Pa.
    speed_m_per_s : float
        Mean relative speed between lap and work in m/s.

    Returns
    -------
    float
        Removal rate in µm/min (Kp p v is in m/s; x 1e6 µm/m x 60 s/min).

    References
    ----------
    Preston, J. Soc. Glass Technology 11 (1927) (from memory).
    """
    for name, v in (("Kp", kp_per_pa), ("pressure", pressure_pa), ("speed", speed_m_per_s)):
        if not (np.isfinite(v) and v >= 0):
            raise InputValueError(f"the Preston {name} {v} is not a number >= 0")
    return kp_per_pa * pressure_pa * speed_m_per_s * 1e6 * 60.0


@dataclass(frozen=True)
class LapModel:
    """The user's lap and its removal rate.

    The lap presses evenly over its footprint and moves at a similar speed everywhere under it, so by the
    Preston equation it removes material at the same rate over its whole footprint: the footprint is the
    tool influence function. The rate comes from the user's own calibration (a test pass measured before
    and after, e.g. with ``flatcheck compare``), not from a table.

    Attributes
    ----------
    shape : {"round", "rect"}
        Footprint shape.
    diameter_mm : float
        Diameter of a round lap (mm).
    length_mm, width_mm : float
        Size of a rectangular lap along x and y (mm).
    rate_um : float
        Depth removed under the lap per time unit (µm per minute or per pass).
    time_unit : {"min", "pass"}
        The unit of ``rate_um`` and of every dwell time in the plan.
    strokes_per_pass : int, optional
        Strokes in one pass (only with ``time_unit="pass"``), to state passes as strokes.
    stroke_mm : float
        Amplitude of the lap's back-and-forth motion about the spot it works (mm); it widens the
        influence function by a uniform smear of that width in x and y. 0 = footprint only.
    """

    shape: str = "round"
    diameter_mm: float = 0.0
    length_mm: float = 0.0
    width_mm: float = 0.0
    rate_um: float = 1.0
    time_unit: str = "min"
    strokes_per_pass: int | None = None
    stroke_mm: float = 0.0

    def __post_init__(self):
        if self.shape not in ("round", "rect"):
            raise InputValueError(f"unknown lap shape {self.shape!r}", fix="use 'round' or 'rect'")
        if self.shape == "round":
            if not (np.isfinite(self.diameter_mm) and self.diameter_mm > 0):
                raise InputValueError(f"lap diameter {self.diameter_mm} mm must be > 0", fix="give the lap diameter")
        elif not (
            np.isfinite(self.length_mm) and self.length_mm > 0 and np.isfinite(self.width_mm) and self.width_mm > 0
        ):
            raise InputValueError(
                f"lap size {self.length_mm} x {self.width_mm} mm must be > 0", fix="give the lap length and width"
            )
        if not (np.isfinite(self.rate_um) and self.rate_um > 0):
            raise InputValueError(
                f"removal rate {self.rate_um} µm per {self.time_unit} must be > 0", fix="give your calibrated rate"
            )
        if self.time_unit not in ("min", "pass"):
            raise InputValueError(f"unknown time unit {self.time_unit!r}", fix="use 'min' or 'pass'")
        if self.strokes_per_pass is not None and (self.time_unit != "pass" or self.strokes_per_pass < 1):
            raise InputValueError("strokes per pass need a rate per pass and must be >= 1")
        if not (np.isfinite(self.stroke_mm) and self.stroke_mm >= 0):
            raise InputValueError(f"stroke {self.stroke_mm} mm must be >= 0")

    @classmethod
    def from_preston(
        cls, kp_per_pa: float, load_n: float, speed_m_per_s: float, *, diameter_mm: float, stroke_mm: float = 0.0
    ) -> "LapModel":
        """A round lap whose rate follows from Preston's equation with the load spread over the footprint.

        Parameters
        ----------
        kp_per_pa : float
            Preston coefficient (1/Pa).
        load_n : float
            Load on the lap (N), own weight plus hand pressure.
        speed_m_per_s : float
            Mean relative speed (m/s).
        diameter_mm : float
            Lap diameter (mm).
        """
        area_m2 = math.pi * (diameter_mm / 2.0) ** 2 * 1e-6
        if area_m2 <= 0:
            raise InputValueError(f"lap diameter {diameter_mm} mm must be > 0")
        rate = preston_rate_um_per_min(kp_per_pa, load_n / area_m2, speed_m_per_s)
        return cls("round", diameter_mm=diameter_mm, rate_um=rate, time_unit="min", stroke_mm=stroke_mm)

    @property
    def area_mm2(self) -> float:
        """Footprint area (mm^2)."""
        if self.shape == "round":
            return math.pi * self.diameter_mm**2 / 4.0
        return self.length_mm * self.width_mm

    @property
    def half_size_mm(self) -> tuple[float, float]:
        """Half extent of the influence function along x and y (mm), stroke included."""
        if self.shape == "round":
            hx = hy = self.diameter_mm / 2.0
        else:
            hx, hy = self.length_mm / 2.0, self.width_mm / 2.0
        return hx + self.stroke_mm / 2.0, hy + self.stroke_mm / 2.0

    def covers(self, u_mm, v_mm) -> np.ndarray:
        """True where a point at offset (u, v) mm from the lap centre is under the footprint."""
        u = np.asarray(u_mm, float)
        v = np.asarray(v_mm, float)
        if self.shape == "round":
            return u * u + v * v <= (self.diameter_mm / 2.0) ** 2
        return (np.abs(u) <= self.length_mm / 2.0) & (np.abs(v) <= self.width_mm / 2.0)

    def describe(self) -> str:
        """A short description ("round lap 150 mm, 0.2 µm/min")."""
        size = f"{self.diameter_mm:g} mm" if self.shape == "round" else f"{self.length_mm:g} x {self.width_mm:g} mm"
        kind = "round" if self.shape == "round" else "rectangular"
        return f"{kind} lap {size}, {self.rate_um:g} µm per {self.time_unit}"


def lap_kernel(lap: LapModel, dx_mm: float, dy_mm: float, *, samples: int = 8) -> np.ndarray:
    """The lap's influence function on a grid of pitch ``dx_mm`` x ``dy_mm``.

    A dwell of one time unit at a grid node means the lap works the cell around that node (its centre
    spread evenly over the cell, plus the stroke). ``kernel[k, l]`` is the depth removed at the node
    ``(k - ky // 2, l - kx // 2)`` cells away: the rate times the fraction of that time the node is under
    the footprint (Preston: uniform pressure and speed give a uniform rate under the lap).

    Parameters
    ----------
    lap : LapModel
    dx_mm, dy_mm : float
        Grid pitch along x and y (mm), > 0.
    samples : int
        Sub-samples per cell side (and per stroke side) for the averaging.

    Returns
    -------
    ndarray, shape (ky, kx), odd sizes
        Depth in µm per time unit of dwell.
    """
    if not (dx_mm > 0 and dy_mm > 0):
        raise InputValueError(f"grid pitch {dx_mm} x {dy_mm} mm must be > 0")
    hx, hy = lap.half_size_mm
    nx = int(math.ceil((hx + dx_mm / 2.0) / dx_mm))
    ny = int(math.ceil((hy + dy_mm / 2.0) / dy_mm))
    # offsets of the lap centre from the dwell node: uniform over the cell, then over the stroke square
    f = (np.arange(samples) + 0.5) / samples - 0.5
    sx = (f[:, None] * dx_mm + f[None, :] * lap.stroke_mm).ravel()
    sy = (f[:, None] * dy_mm + f[None, :] * lap.stroke_mm).ravel()
    SX, SY = np.meshgrid(sx, sy)
    SX, SY = SX.ravel(), SY.ravel()
    kern = np.empty((2 * ny + 1, 2 * nx + 1))
    for k in range(-ny, ny + 1):
        for m in range(-nx, nx + 1):
            kern[k + ny, m + nx] = lap.covers(m * dx_mm - SX, k * dy_mm - SY).mean()
    return lap.rate_um * kern


def _conv_matrix(shape: tuple[int, int], kernel: np.ndarray):
    """Sparse matrix A with (A @ dwell.ravel()) = removal.ravel() for a centred kernel, zero outside."""
    from scipy.sparse import coo_matrix

    ny, nx = shape
    ky, kx = kernel.shape
    cy, cx = ky // 2, kx // 2
    J, I = np.meshgrid(np.arange(ny), np.arange(nx), indexing="ij")
    rows, cols, vals = [], [], []
    for k in range(ky):
        for m in range(kx):
            v = kernel[k, m]
            if v == 0:
                continue
            tj, ti = J + (k - cy), I + (m - cx)
            ok = (tj >= 0) & (tj < ny) & (ti >= 0) & (ti < nx)
            rows.append((tj * nx + ti)[ok])
            cols.append((J * nx + I)[ok])
            vals.append(np.full(ok.sum(), v))
    n = ny * nx
    if not rows:
        return coo_matrix((n, n)).tocsr()
    return coo_matrix((np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))), shape=(n, n)).tocsr()


def removal_from_dwell(dwell, kernel) -> np.ndarray:
    """Removal from a dwell map: the dwell convolved with the influence function (zero outside the grid).

    Parameters
    ----------
    dwell : ndarray, shape (ny, nx)
        Time at each grid node (minutes or passes).
    kernel : ndarray, shape (ky, kx), odd sizes
        Depth per time unit at each offset (µm per time unit), centred.

    Returns
    -------
    ndarray, shape (ny, nx)
        Removal in µm.
    """
    d = np.atleast_2d(np.asarray(dwell, float))
    kern = np.atleast_2d(np.asarray(kernel, float))
    _check_kernel(kern)
    return (_conv_matrix(d.shape, kern) @ d.ravel()).reshape(d.shape)


def _check_kernel(kern):
    if kern.ndim != 2 or kern.shape[0] % 2 == 0 or kern.shape[1] % 2 == 0:
        raise InputValueError(f"the influence function must be a 2-D array of odd sizes, got {kern.shape}")
    if not np.all(np.isfinite(kern)) or (kern < 0).any():
        raise InputValueError("the influence function must be finite and >= 0")


def _difference_matrix(shape: tuple[int, int]):
    """Sparse forward differences along x and y between neighbouring grid nodes, shape (edges, ny * nx).

    ``||D t||^2`` is the sum of squared steps of the dwell map between 4-neighbours (a discrete gradient
    norm, unit spacing); ``D^T D`` is the graph Laplacian of the grid, whose largest eigenvalue is below 8.
    """
    from scipy.sparse import coo_matrix

    ny, nx = shape
    idx = np.arange(ny * nx).reshape(ny, nx)
    a = np.concatenate([idx[:, :-1].ravel(), idx[:-1, :].ravel()])
    b = np.concatenate([idx[:, 1:].ravel(), idx[1:, :].ravel()])
    m = a.size
    rows = np.concatenate([np.arange(m), np.arange(m)])
    cols = np.concatenate([a, b])
    vals = np.concatenate([-np.ones(m), np.ones(m)])
    return coo_matrix((vals, (rows, cols)), shape=(m, ny * nx)).tocsr()


def grid_interpolation_matrix(xs_mm, ys_mm, x_mm, y_mm):
    """Sparse matrix of bilinear interpolation from a regular grid to points.

    ``(M @ values.ravel())[k]`` is the bilinear interpolant of ``values`` (shape (ny, nx), row-major, rows
    along y) at ``(x_mm[k], y_mm[k])``; points outside the grid take the nearest edge cell's plane.

    Parameters
    ----------
    xs_mm, ys_mm : ndarray, shapes (nx,), (ny,)
        Increasing grid lines (mm), at least two each.
    x_mm, y_mm : ndarray, shape (m,)
        Points (mm).

    Returns
    -------
    scipy.sparse.csr_matrix, shape (m, ny * nx)
    """
    from scipy.sparse import coo_matrix

    xs = np.asarray(xs_mm, float)
    ys = np.asarray(ys_mm, float)
    px = np.asarray(x_mm, float).ravel()
    py = np.asarray(y_mm, float).ravel()
    nx = xs.size
    i = np.clip(np.searchsorted(xs, px, side="right") - 1, 0, nx - 2)
    j = np.clip(np.searchsorted(ys, py, side="right") - 1, 0, ys.size - 2)
    fx = (px - xs[i]) / (xs[i + 1] - xs[i])
    fy = (py - ys[j]) / (ys[j + 1] - ys[j])
    rows = np.repeat(np.arange(px.size), 4)
    cols = np.column_stack([j * nx + i, j * nx + i + 1, (j + 1) * nx + i, (j + 1) * nx + i + 1]).ravel()
    vals = np.column_stack([(1 - fx) * (1 - fy), fx * (1 - fy), (1 - fx) * fy, fx * fy]).ravel()
    return coo_matrix((vals, (rows, cols)), shape=(px.size, ys.size * nx)).tocsr()


def deconvolve_dwell(removal_um, kernel, *, smoothing: float = 0.0, mask=None, smoothness: float = 0.0,
                     start=None, points=None, points_weight: float = 1.0, allowed=None) -> np.ndarray:
    """Non-negative dwell map whose convolution with ``kernel`` best reproduces ``removal_um``.

    Solves ``min ||M (A t - r)||^2 + lam^2 ||t||^2 + mu^2 ||D t||^2`` subject to ``t >= 0`` (``A`` is the
    convolution of :func:`removal_from_dwell`, ``M`` the mask, ``D`` the forward differences between
    neighbouring nodes, ``lam = smoothing * ||kernel||`` and ``mu = smoothness * ||kernel||``). The ``lam``
    term (zero-order Tikhonov) prefers less total time; the ``mu`` term (first-order Tikhonov) penalises
    steps between neighbouring nodes, so noise in the removal map does not turn into a blotchy dwell map
    (the deconvolution amplifies exactly the short wavelengths the lap cannot make). Small problems
    (<= 400 nodes) use scipy's active-set ``nnls`` (exact); larger ones an accelerated projected gradient
    (FISTA) on the sparse operators, which agrees with ``nnls`` to about 1e-12 in the objective where both
    can be run.

    Parameters
    ----------
    removal_um : ndarray, shape (ny, nx)
        Wanted removal in µm on a regular grid.
    kernel : ndarray, shape (ky, kx), odd sizes
        Influence function, µm per time unit (see :func:`lap_kernel`).
    smoothing : float
        Zero-order regularisation strength relative to the kernel's norm (dimensionless, >= 0).
    mask : ndarray of bool, shape (ny, nx), optional
        Nodes where the removal is known (outside the surveyed area: False, not fitted).
    smoothness : float
        First-order (gradient) regularisation strength relative to the kernel's norm (dimensionless, >= 0).
    start : ndarray, shape (ny, nx), optional
        Starting dwell for the iterative solver (a warm start; ignored by ``nnls``).
    points : tuple (P, r_points), optional
        Removal wanted at m further points (the survey's stations between grid nodes): ``P`` a sparse
        (m, ny * nx) matrix taking values on the grid to the points (e.g. :func:`grid_interpolation_matrix`)
        and ``r_points`` shape (m,) in µm. Their rows ``points_weight * (P A t - r_points)`` join the fit.
    points_weight : float
        Weight of each point's row relative to a grid node's (dimensionless, >= 0).
    allowed : ndarray of bool, shape (ny, nx), optional
        Nodes where the lap's centre may dwell (elsewhere the dwell is 0), e.g. away from the edges where
        the lap would overhang (:func:`lap_centre_allowed`). Default: every node.

    Returns
    -------
    ndarray, shape (ny, nx)
        Dwell time per node (the kernel's time unit), >= 0.

    References
    ----------
    Light: Advanced Manufacturing 5 (2024), doi:10.37188/lam.2024.021; Applied Optics 54 (2015) 2747
    (Tikhonov-regularised dwell with bounds). First-order Tikhonov (a difference operator in place of the
    identity): P. C. Hansen, "Rank-Deficient and Discrete Ill-Posed Problems", SIAM 1998 (from memory).
    """
    from scipy.optimize import nnls
    from scipy.sparse import diags, identity, vstack

    r = np.atleast_2d(np.asarray(removal_um, float))
    kern = np.atleast_2d(np.asarray(kernel, float))
    _check_kernel(kern)
    if not np.all(np.isfinite(r)):
        raise InputValueError("the removal map has non-finite values", fix="mask nodes outside the surface")
    for name, v in (("smoothing", smoothing), ("smoothness", smoothness)):
        if not (np.isfinite(v) and v >= 0):
            raise InputValueError(f"{name} {v} must be >= 0")
    m = np.ones(r.shape, bool) if mask is None else np.asarray(mask, bool).reshape(r.shape)
    C = _conv_matrix(r.shape, kern)
    A = diags(m.ravel().astype(float)) @ C
    b = np.where(m, r, 0.0).ravel()
    n = r.size
    if points is not None:
        P, rp = points
        rp = np.asarray(rp, float).ravel()
        if P.shape != (rp.size, n) or not np.all(np.isfinite(rp)):
            raise InputValueError("the points need an (m, grid nodes) matrix and m finite removals")
        if not (np.isfinite(points_weight) and points_weight >= 0):
            raise InputValueError(f"points weight {points_weight} must be >= 0")
        A = vstack([A, points_weight * (P @ C)], format="csr")
        b = np.concatenate([b, points_weight * rp])
    knorm = float(np.sqrt((kern**2).sum()))
    lam = smoothing * knorm
    mu = smoothness * knorm
    reg = []
    if lam > 0:
        reg.append(lam * identity(n, format="csr"))
    if mu > 0:
        reg.append(mu * _difference_matrix(r.shape))
    R = vstack(reg, format="csr") if reg else None
    free = np.ones(n, bool) if allowed is None else np.asarray(allowed, bool).reshape(r.shape).ravel()
    if not free.any():
        return np.zeros(r.shape)
    A = A.tocsc()[:, free].tocsr()
    if R is not None:
        R = R.tocsc()[:, free].tocsr()
    k = int(free.sum())
    if k <= _NNLS_MAX_NODES:
        if R is not None:
            A = vstack([A, R], format="csr")
            b = np.concatenate([b, np.zeros(R.shape[0])])
        t_free, _ = nnls(A.toarray(), b, maxiter=50 * k)
    else:
        t0 = None if start is None else np.maximum(np.asarray(start, float).ravel()[free], 0.0)
        t_free = _projected_gradient(A.tocsr(), b, lam, R=R, start=t0)
    t = np.zeros(n)
    t[free] = t_free
    return np.maximum(t, 0.0).reshape(r.shape)


#: How far the lap may hang over an edge of the surface, as a fraction of its size along that direction:
#: a lap hanging over by more than about a quarter tips on the edge and rounds it off (common practice, no
#: single source). The lap's centre is kept at least (1/2 - 1/4) of its size inside the surveyed area.
MAX_OVERHANG_FRACTION = 0.25


def lap_centre_allowed(xs_mm, ys_mm, lap: "LapModel", box_mm=None) -> np.ndarray:
    """Grid nodes where the lap's centre may dwell without hanging over an edge by more than
    :data:`MAX_OVERHANG_FRACTION` of its size.

    Parameters
    ----------
    xs_mm, ys_mm : ndarray, shapes (nx,), (ny,)
        The dwell grid (mm).
    lap : LapModel
    box_mm : (xmin, xmax, ymin, ymax), optional
        The surface's edges (mm): its stated outline, which may lie beyond the outer stations. Default: the
        grid's extent.

    Returns
    -------
    ndarray of bool, shape (ny, nx)
        Along a direction in which the surface is too narrow for any such position, the node(s) nearest the
        middle are allowed (the lap then spans the surface that way).
    """
    xs = np.asarray(xs_mm, float)
    ys = np.asarray(ys_mm, float)
    hx, hy = lap.half_size_mm
    x0, x1, y0, y1 = (xs[0], xs[-1], ys[0], ys[-1]) if box_mm is None else box_mm

    def band(v, half, lo, hi):
        inset = half - MAX_OVERHANG_FRACTION * 2.0 * half  # centre to edge, at the largest overhang
        ok = (v >= lo + inset - 1e-9) & (v <= hi - inset + 1e-9)
        if not ok.any():
            mid = 0.5 * (v[0] + v[-1])
            d = np.abs(v - mid)
            ok = d <= d.min() + 1e-9
        return ok

    return band(ys, hy, y0, y1)[:, None] & band(xs, hx, x0, x1)[None, :]


#: Largest problem solved by the exact active-set nnls (it is O(n^3): 0.05 s at 400 nodes, 0.8 s at 900,
#: minutes at 1600 on the development machine); larger ones use accelerated projected gradient.
_NNLS_MAX_NODES = 400


def _projected_gradient(A, b, lam: float, *, R=None, start=None, max_iter: int = 5000,
                        rtol: float = 1e-9) -> np.ndarray:
    """min ||A t - b||^2 + ||R t||^2, t >= 0, by FISTA with projection and adaptive restart.

    ``R`` stacks the regularisation operators (``lam I`` and ``mu D``); without it the penalty is
    ``lam^2 ||t||^2``. Beck & Teboulle, SIAM J. Imaging Sciences 2 (2009) 183-202 (accelerated proximal
    gradient; the proximal step of the bound t >= 0 is the projection max(0, .)); restart when the momentum
    points uphill (O'Donoghue & Candes, Found. Comput. Math. 15 (2015) 715-732). Each iteration costs two
    sparse products per operator.
    """
    At = A.T.tocsr()
    n = A.shape[1]
    if R is None:
        def hess(v):
            return At @ (A @ v) + lam**2 * v
    else:
        Rt = R.T.tocsr()

        def hess(v):
            return At @ (A @ v) + Rt @ (R @ v)
    v = np.ones(n) / math.sqrt(n)
    s = 1.0
    for _ in range(60):  # power iteration for the largest eigenvalue of the Hessian (Lipschitz constant)
        v = hess(v)
        s = float(np.linalg.norm(v))
        if s == 0:
            return np.zeros(n)
        v /= s
    L = 1.05 * s
    Atb = At @ b
    t = np.zeros(n) if start is None else start.copy()
    y = t.copy()
    theta = 1.0
    for _ in range(max_iter):
        g = hess(y) - Atb
        t_new = np.maximum(0.0, y - g / L)
        theta_new = 0.5 * (1.0 + math.sqrt(1.0 + 4.0 * theta * theta))
        if (y - t_new) @ (t_new - t) > 0:
            theta_new = 1.0
            y = t_new.copy()
        else:
            y = t_new + ((theta - 1.0) / theta_new) * (t_new - t)
        step = float(np.linalg.norm(t_new - t))
        t, theta = t_new, theta_new
        if step <= rtol * max(float(np.linalg.norm(t)), 1e-300):
            break
    return t


# --------------------------------------------------------------------------- the plan
def cell_column_name(i: int) -> str:
    """Spreadsheet-style column name: 0 -> A, 25 -> Z, 26 -> AA."""
    name = ""
    i += 1
    while i > 0:
        i, rem = divmod(i - 1, 26)
        name = string.ascii_uppercase[rem] + name
    return name


@dataclass(frozen=True)
class Pass:
    """One pass of the plan.

    Attributes
    ----------
    order : int
        1 = first.
    level : int
        Layer of the dwell map it belongs to (highest first).
    zone : str
        Chart cells it covers, as a range ("C3" or "B2:D4").
    cells : tuple of str
        Every chart cell it touches.
    centre_x_mm, centre_y_mm : float
        Centre of the zone (mm).
    extent_mm : tuple of float
        ``(xmin, xmax, ymin, ymax)`` of the lap centre's travel (mm).
    depth_um : float
        Deepest removal this pass makes (µm).
    time : float
        Working time in ``time_unit`` (lap moved evenly over the zone).
    time_unit : str
        ``"min"`` or ``"pass"``.
    strokes : int or None
        ``time`` in strokes when the lap's rate is per pass of known strokes.
    even : bool
        The lap is worked evenly over the zone (True), or longer in some of its cells than in others, as the
        bench chart shows (False: two layers of the dwell map over the same cells and travel, which the pass
        table could not tell apart, worked as one pass).
    """

    order: int
    level: int
    zone: str
    cells: tuple
    centre_x_mm: float
    centre_y_mm: float
    extent_mm: tuple
    depth_um: float
    time: float
    time_unit: str
    strokes: int | None
    even: bool = True


@dataclass(frozen=True, eq=False)
class CellChart:
    """The surface divided into named cells with the working time in each.

    Columns are lettered A.. from the west (small x), rows numbered 1.. from the south (small y).

    Attributes
    ----------
    columns : tuple of str
    rows : tuple of str
    x_edges_mm : ndarray, shape (ncol + 1,)
    y_edges_mm : ndarray, shape (nrow + 1,)
    time : ndarray, shape (nrow, ncol)
        Time per cell in ``time_unit``; row 0 is row "1" (south).
    time_unit : str
    """

    columns: tuple
    rows: tuple
    x_edges_mm: np.ndarray
    y_edges_mm: np.ndarray
    time: np.ndarray
    time_unit: str

    def cell_of(self, x_mm, y_mm) -> list[str]:
        """Names of the cells containing the given points (mm)."""
        i = np.clip(np.searchsorted(self.x_edges_mm, np.asarray(x_mm, float), side="right") - 1, 0, len(self.columns) - 1)
        j = np.clip(np.searchsorted(self.y_edges_mm, np.asarray(y_mm, float), side="right") - 1, 0, len(self.rows) - 1)
        return [f"{self.columns[a]}{self.rows[b]}" for a, b in zip(np.atleast_1d(i), np.atleast_1d(j))]


@dataclass(frozen=True)
class Shortfall:
    """Why a plan misses its target, split into its causes, with what to change.

    The plan's predicted flatness is reached in four steps, each of which can lose flatness: the lap's
    footprint (the best unrounded dwell, no smoothing), the smoothing of the dwell map, rounding the dwell to
    ``levels`` time steps, and tidying passes shorter than the minimum. Each loss is the flatness after the
    step minus the flatness before it (µm; the footprint's loss is measured from the target).

    Attributes
    ----------
    target_um : float
        Target flatness (µm).
    best_um : float
        Flatness after the best unrounded, unsmoothed dwell (µm): the best this lap can do in one plan.
    smoothed_um : float
        Flatness after the smoothed, unrounded dwell (µm).
    rounded_um : float
        Flatness after the dwell rounded to ``levels`` steps, before short passes were tidied (µm).
    plan_um : float
        Flatness after the plan as printed (µm).
    levels : int
        Time steps the dwell was rounded to.
    min_pass_time : float
        Shortest pass allowed (the lap's time unit).
    time_unit : str
        ``"min"`` or ``"pass"``.
    levels_suggested : int or None
        More time steps that bring the rounded dwell close to the unrounded one, when rounding is a cause.
    levels_suggested_um : float or None
        Flatness of the same dwell rounded to ``levels_suggested`` steps, before tidying (µm): an estimate of
        what a plan with that many steps reaches.
    levels_tried : tuple of (int, float)
        Every number of steps tried on the way, with that flatness (µm).
    """

    target_um: float
    best_um: float
    smoothed_um: float
    rounded_um: float
    plan_um: float
    levels: int
    min_pass_time: float
    time_unit: str
    levels_suggested: int | None = None
    levels_suggested_um: float | None = None
    levels_tried: tuple = ()

    @property
    def losses_um(self) -> dict:
        """Flatness lost at each step (µm, >= 0; a step that happened to gain counts 0), by cause."""
        return {
            "footprint": max(0.0, self.best_um - self.target_um),
            "smoothing": max(0.0, self.smoothed_um - self.best_um),
            "rounding": max(0.0, self.rounded_um - self.smoothed_um),
            "short_passes": max(0.0, self.plan_um - self.rounded_um),
        }

    @property
    def causes(self) -> tuple:
        """The causes that matter, largest first: each loses at least a fifth of the total shortfall."""
        loss = self.losses_um
        total = sum(loss.values())
        if total <= 0:
            return ()
        named = [k for k, v in sorted(loss.items(), key=lambda kv: -kv[1]) if v >= 0.2 * total]
        return tuple(named)

    def text(self, units: str = "um") -> str:
        """The shortfall and its remedies in one or two sentences (heights in ``units``: "um" or "in")."""

        def h(v):
            return format_height(v, units)

        loss = self.losses_um
        unit = "min" if self.time_unit == "min" else "passes"
        parts = []
        for cause in self.causes:
            v = h(loss[cause])
            if cause == "footprint":
                parts.append(
                    f"the lap's footprint costs {v} (even the unrounded dwell leaves {h(self.best_um)}: the lap is "
                    "wider than the shapes to remove; survey again after the plan and plan again, or use a "
                    "smaller lap)"
                )
            elif cause == "rounding":
                more = ""
                if self.levels_suggested is not None:
                    tried = [t for t in self.levels_tried if t[0] <= self.levels_suggested]
                    more = "; more steps cost less (" + ", ".join(f"{n} steps: about {h(f)}" for n, f in tried) + (
                        f"; flatcheck lap --levels {self.levels_suggested}, at the price of more passes)"
                    )
                parts.append(f"rounding the dwell to {self.levels} time steps costs {v}{more}")
            elif cause == "short_passes":
                parts.append(
                    f"tidying passes shorter than {self.min_pass_time:.2g} {unit} costs {v} (keep them with "
                    "flatcheck lap --min-pass-fraction 0)"
                )
            else:
                parts.append(f"smoothing the dwell map costs {v} (flatcheck lap --smoothness 0 turns it off)")
        head = (
            f"The plan misses the target {h(self.target_um)} by {h(self.plan_um - self.target_um)} "
            f"(predicted {h(self.plan_um)})"
        )
        if not parts:
            return head + "."
        return head + ": " + "; ".join(parts) + "."


@dataclass(frozen=True, eq=False)
class LapPlan:
    """A lapping plan and the surface predicted after it.

    Attributes
    ----------
    lap : LapModel
    removal : LeastRemoval
        The least-removal map the plan aims at.
    xs_mm, ys_mm : ndarray, shape (nx,), (ny,)
        The dwell grid (mm).
    wanted_um : ndarray, shape (ny, nx)
        Least-removal map on the dwell grid (µm; NaN outside the surveyed area).
    dwell : ndarray, shape (ny, nx)
        Dwell map from the deconvolution (time unit of the lap).
    plan_dwell : ndarray, shape (ny, nx)
        Dwell rounded to the plan's levels: what the passes add up to.
    achieved_um : ndarray, shape (ny, nx)
        Removal the plan makes on the dwell grid (µm).
    predicted_height_um : ndarray, shape (n,)
        Surface after the plan at the input nodes (µm, same reference as the input).
    predicted_flatness_um : float
        Minimum-zone flatness after the plan (µm).
    dwell_flatness_um : float
        Minimum-zone flatness after the unrounded dwell map (µm): the best this lap can do here.
    total_time : float
        Sum of the plan's time (time unit).
    passes : tuple of Pass
        Ordered, highest first; none shorter than ``min_pass_time``.
    chart : CellChart
    smoothness : float
        First-order regularisation used for the dwell map (dimensionless, see :func:`deconvolve_dwell`),
        chosen automatically unless given.
    min_pass_time : float
        Shortest pass allowed in the plan (time unit); shorter ones were dropped, merged or lengthened.
    passes_unmerged : int
        Passes the rounded dwell map was cut into before short ones were resolved.
    unmerged_flatness_um : float
        Minimum-zone flatness predicted for that unmerged plan (µm).
    merges : tuple of str
        What happened to each short pass, in order ("dropped", "merged into ...", "lengthened").
    pass_regions : tuple of ndarray of bool, shape (ny, nx)
        Dwell-grid nodes each pass works, aligned with ``passes``; the pass's time is spread evenly over
        them, so ``plan_dwell == sum(region * p.time / region.sum())``.
    levels : int
        Time steps the dwell was rounded to.
    best_flatness_um : float
        Flatness after the best unrounded dwell without smoothing (µm): the best this lap can do in one
        plan on this dwell grid.
    shortfall : Shortfall or None
        Why the plan misses the target and what to change; None when it reaches the target.
    too_short_by_hand : tuple of int
        Orders of the passes too short to work by hand (under :data:`HAND_MIN_PASS_MIN` minutes, or under
        one stroke), kept because dropping or merging them would lose flatness.
    flatness_skipping_short_um : float or None
        Minimum-zone flatness predicted if all of those passes are skipped (µm); None when there are none.
    """

    lap: LapModel
    removal: LeastRemoval
    xs_mm: np.ndarray
    ys_mm: np.ndarray
    wanted_um: np.ndarray
    dwell: np.ndarray
    plan_dwell: np.ndarray
    achieved_um: np.ndarray
    predicted_height_um: np.ndarray
    predicted_flatness_um: float
    dwell_flatness_um: float
    total_time: float
    passes: tuple
    chart: CellChart
    smoothness: float = 0.0
    min_pass_time: float = 0.0
    passes_unmerged: int = 0
    unmerged_flatness_um: float = float("nan")
    merges: tuple = ()
    pass_regions: tuple = ()
    levels: int = 4
    best_flatness_um: float = float("nan")
    shortfall: Shortfall | None = None
    too_short_by_hand: tuple = ()
    flatness_skipping_short_um: float | None = None


def _dwell_grid(hm: HeightMap, step_mm: float | None, max_nodes: int, lap: LapModel):
    """Regular grid over the surveyed extent; the input grid itself when it is one, small enough and not
    much finer than the lap can resolve (pitch >= 1/8 of the lap's smaller size)."""
    g = hm.grid
    lap_min = 2.0 * min(lap.half_size_mm)
    if step_mm is None and g is not None and g[0].size * g[1].size <= max_nodes:
        pitch = min(np.diff(g[0]).min(), np.diff(g[1]).min())
        if pitch >= lap_min / 8.0:
            return g[0], g[1], g[2]
    xmin, xmax, ymin, ymax = hm.extent_mm
    lx, ly = xmax - xmin, ymax - ymin
    if step_mm is None:
        # a quarter of the lap resolves its influence; never more than about max_nodes nodes
        step_mm = max(lap_min / 4.0, math.sqrt(max(lx * ly, 1e-12) / max_nodes))
    if not (np.isfinite(step_mm) and step_mm > 0):
        raise InputValueError(f"grid step {step_mm} mm must be > 0", fix="give a positive --step-mm")
    nx = max(2, int(math.ceil(lx / step_mm - 1e-9)) + 1)
    ny = max(2, int(math.ceil(ly / step_mm - 1e-9)) + 1)
    if nx * ny > 4 * max_nodes:
        raise InputValueError(
            f"a {step_mm:g} mm grid has {nx * ny} nodes, too many for the dwell solver",
            fix=f"use a coarser step (at least {math.sqrt(lx * ly / max_nodes):.3g} mm)",
        )
    return np.linspace(xmin, xmax, nx), np.linspace(ymin, ymax, ny), None


#: Gradient-penalty strengths tried by the automatic choice, in increasing order (dimensionless, relative to
#: the kernel's norm; see :func:`deconvolve_dwell`). The ladder steps by about 2 to 2.5.
_SMOOTHNESS_LADDER = (0.0, 0.01, 0.02, 0.05, 0.1, 0.2, 0.5, 1.0, 2.0, 5.0)

#: Weight of the survey's stations in the dwell fit on a grid finer than the survey, relative to the nodes
#: interpolated between them: the stations together weigh this many times the interpolated nodes together.
#: The plan is judged at the stations; the linear interpolant between them is an assumption that only
#: keeps the lap from digging between stations. Fitting it with equal weight cost flatness at the stations:
#: guideway sample, 80 mm lap, target 2 um: 2.001 um on its own 100 x 60 mm grid, 2.208 um on a 10 mm grid;
#: with this weight 2.005 um (a choice of this module, see docs/methods.md).
STATION_WEIGHT = 10.0

#: Predicted flatness the smoothing, and the tidying of short passes, may give away: this fraction of the
#: target (a choice of this module, stated in docs/methods.md).
DEFAULT_ALLOWANCE = 0.05

#: Shortest pass, as a fraction of the longest pass of the rounded plan (a choice of this module).
DEFAULT_MIN_PASS_FRACTION = 0.1


def plan_lapping(
    hm: HeightMap,
    removal: LeastRemoval,
    lap: LapModel,
    *,
    step_mm: float | None = None,
    cell_mm: float | None = None,
    levels: int = 4,
    smoothing: float = 0.01,
    max_nodes: int = 1600,
    smoothness: float | None = None,
    allowance: float = DEFAULT_ALLOWANCE,
    min_pass_fraction: float = DEFAULT_MIN_PASS_FRACTION,
    min_pass_time: float = 0.0,
) -> LapPlan:
    """Dwell map, pass plan and predicted surface for bringing ``hm`` down by ``removal`` with ``lap``.

    The least-removal map is put on a regular grid (the input grid itself when it is one, else a linear
    interpolation at pitch ``step_mm``) and deconvolved by the lap's influence function into a non-negative
    dwell map with a gradient penalty (:func:`deconvolve_dwell`). Unless ``smoothness`` is given, its
    strength is the largest on a fixed ladder whose dwell map still predicts a flatness within
    ``allowance * target`` of the unpenalised one (a discrepancy rule stated in the quantity the plan is
    judged by): the map is as smooth as the target allows. The dwell is rounded to ``levels`` equal steps
    and cut into layers: each connected region of a layer is one pass in which the lap is worked evenly over
    that region. A pass shorter than the minimum (``min_pass_fraction`` of the longest pass, at least
    ``min_pass_time``) is then, shortest first, dropped, merged into its neighbouring pass (its time spread
    evenly over that pass's zone) or lengthened to the minimum: the first of these whose predicted flatness
    stays within ``max(target, unmerged plan) + allowance * target``, else the best of the three. Passes are
    ordered from the top layer (the high spots) down to the widest. The predicted surface is the input minus
    the removal of the final plan (the passes as printed), evaluated at the input nodes; its flatness is the
    minimum zone.

    Parameters
    ----------
    hm : HeightMap
        The surface (µm at mm).
    removal : LeastRemoval
        Result of :func:`least_removal` for ``hm``.
    lap : LapModel
        The lap and its calibrated rate.
    step_mm : float, optional
        Dwell grid pitch (mm); default the input grid, or about ``max_nodes`` nodes over the extent.
    cell_mm : float, optional
        Side of the chart's cells (mm), measured from the south-west corner; default the lap's diameter (or
        longer side). See :func:`chart_edges` for the remainder at the edges.
    levels : int
        Number of equal time steps the dwell is rounded to (>= 1).
    smoothing : float
        Zero-order regularisation of the deconvolution, see :func:`deconvolve_dwell`.
    max_nodes : int
        Largest dwell grid used without an explicit step.
    smoothness : float, optional
        Gradient regularisation of the deconvolution (>= 0); default chosen automatically (see above).
    allowance : float
        Fraction of the target flatness (dimensionless, >= 0) that smoothing and pass tidying may cost.
    min_pass_fraction : float
        Shortest pass as a fraction of the longest (dimensionless, 0 <= f <= 1); 0 keeps every pass.
    min_pass_time : float
        Shortest pass in the lap's time unit (>= 0), e.g. one stroke cycle; the larger minimum applies.

    Returns
    -------
    LapPlan
    """
    if removal.remove_um.shape != hm.height_um.shape:
        raise InputValueError("the removal map does not belong to this surface")
    if int(levels) < 1:
        raise InputValueError(f"levels {levels} must be >= 1")
    for name, v, hi in (("allowance", allowance, math.inf), ("minimum pass fraction", min_pass_fraction, 1.0),
                        ("minimum pass time", min_pass_time, math.inf)):
        if not (np.isfinite(v) and 0 <= v <= hi):
            raise InputValueError(f"{name} {v} must be a number from 0 to {hi:g}")
    if smoothness is not None and not (np.isfinite(smoothness) and smoothness >= 0):
        raise InputValueError(f"smoothness {smoothness} must be >= 0")
    levels = int(levels)
    xs, ys, index = _dwell_grid(hm, step_mm, max_nodes, lap)
    if index is not None:
        wanted = removal.remove_um[index].astype(float)
        mask = np.ones(wanted.shape, bool)
    else:
        X, Y = np.meshgrid(xs, ys)
        rmap = HeightMap(hm.x_mm, hm.y_mm, removal.remove_um)
        wanted = rmap.sample(X, Y)
        mask = np.isfinite(wanted)
    dx = float(np.diff(xs).mean())
    dy = float(np.diff(ys).mean())
    kern = lap_kernel(lap, dx, dy)
    conv = _conv_matrix(wanted.shape, kern)
    target = np.where(mask, wanted, 0.0)
    fit = {}
    if index is None:
        # the stations carry the data the plan is judged by; the interpolated nodes only tie the surface
        # between them: the stations together weigh STATION_WEIGHT times the interpolated nodes
        to_nodes = grid_interpolation_matrix(xs, ys, hm.x_mm, hm.y_mm)
        fit = dict(points=(to_nodes, removal.remove_um),
                   points_weight=math.sqrt(STATION_WEIGHT * int(mask.sum()) / hm.n))
    # the lap's centre stays where the lap hangs over no edge by more than MAX_OVERHANG_FRACTION of its size
    outline = (0.0, float(hm.length_mm), 0.0, float(hm.width_mm)) if hm.length_mm and hm.width_mm else None
    fit["allowed"] = lap_centre_allowed(xs, ys, lap, outline)

    def _at_nodes(grid_vals):
        if index is not None:
            out = np.empty(hm.n)
            out[index] = grid_vals
            return out
        return to_nodes @ np.asarray(grid_vals, float).ravel()

    def _flatness_after(dwell_map) -> float:
        made = (conv @ dwell_map.ravel()).reshape(dwell_map.shape)
        return float(minimum_zone(hm.x_mm, hm.y_mm, hm.height_um - _at_nodes(made)).flatness_um)

    slack = allowance * removal.target_um

    def _plan_of(ls):
        out = np.zeros_like(target)
        for layer in ls:
            out += layer.dwell
        return out

    def _cut(dwell_map, n_levels=levels):
        """Layers of the dwell map rounded to ``n_levels`` steps and their predicted flatness."""
        tmax = float(dwell_map.max())
        if tmax <= 0:
            return [], _flatness_after(np.zeros_like(target))
        dl = tmax / n_levels
        steps = np.round(dwell_map / dl).astype(int)
        ls = [_Layer(level, reg, dl) for level, reg in _layer_regions(xs, ys, steps, n_levels, lap)]
        return ls, _flatness_after(_plan_of(ls))

    # candidate dwell maps: the given smoothness, or every admissible one on the ladder (discrepancy rule)
    if smoothness is not None:
        d = deconvolve_dwell(target, kern, smoothing=smoothing, mask=mask, smoothness=float(smoothness), **fit)
        candidates = [(float(smoothness), d, _flatness_after(d))]
    elif not removal.remove_um.any():
        z = np.zeros_like(target)
        candidates = [(0.0, z, _flatness_after(z))]
    else:
        d = deconvolve_dwell(target, kern, smoothing=smoothing, mask=mask, **fit)
        candidates = [(0.0, d, _flatness_after(d))]
        budget = candidates[0][2] + slack
        for cand in _SMOOTHNESS_LADDER[1:]:
            d = deconvolve_dwell(target, kern, smoothing=smoothing, mask=mask, smoothness=cand, start=d, **fit)
            f = _flatness_after(d)
            if f > budget * (1 + 1e-9) + 1e-12:
                break
            candidates.append((cand, d, f))
    cut = [_cut(c[1]) for c in candidates]
    # the limit every tidied plan must keep: the target, or the plain plan (least smoothing) where the lap
    # cannot reach the target, plus the allowance
    limit = max(removal.target_um, cut[0][1]) + slack
    best = None
    for (mu_c, dwell_c, flat_c), (layers_c, unmerged_flat_c) in zip(candidates, cut):
        t_min_c = max(min_pass_fraction * max((layer.time for layer in layers_c), default=0.0), float(min_pass_time))
        final, merges_c = _resolve_short(
            layers_c, t_min_c, lambda ls: _flatness_after(_plan_of(ls)), limit, xs, ys
        )
        final_flat = _flatness_after(_plan_of(final))
        within = final_flat <= limit * (1 + 1e-9) + 1e-12
        short = sum(layer.time < t_min_c * (1 - 1e-9) for layer in final)
        # fewest passes that keep the limit, then fewest short ones, then the smoothest dwell
        key = (not within, len(final), short, -mu_c)
        if best is None or key < best[0]:
            best = (key, mu_c, dwell_c, flat_c, final, merges_c, t_min_c, len(layers_c), unmerged_flat_c)
    _, mu, dwell, dwell_flat, layers, merges, t_min, unmerged, unmerged_flat = best
    layers, repeat_merges = _no_repeats(
        layers, conv, hm, lap, xs, ys, cell_mm, lambda ls: _flatness_after(_plan_of(ls)), limit, slack)
    merges = list(merges) + repeat_merges
    plan_dwell = _plan_of(layers)
    achieved = (conv @ plan_dwell.ravel()).reshape(plan_dwell.shape)
    predicted = hm.height_um - _at_nodes(achieved)
    pred_flat = minimum_zone(hm.x_mm, hm.y_mm, predicted).flatness_um

    best_flat = min(c[2] for c in candidates)
    shortfall = None
    if pred_flat > removal.target_um * (1 + 1e-7) + 1e-9:
        if smoothness is not None and smoothness > 0:
            d0 = deconvolve_dwell(target, kern, smoothing=smoothing, mask=mask, **fit)
            best_flat = min(best_flat, _flatness_after(d0))
        shortfall = Shortfall(
            target_um=removal.target_um, best_um=float(best_flat), smoothed_um=float(dwell_flat),
            rounded_um=float(unmerged_flat), plan_um=float(pred_flat), levels=levels, min_pass_time=float(t_min),
            time_unit=lap.time_unit,
        )
        if "rounding" in shortfall.causes:
            shortfall = _suggest_levels(shortfall, lambda n: _cut(dwell, n)[1], slack)
    chart = _chart(hm, lap, xs, ys, plan_dwell, cell_mm)
    depth = [float((conv @ layer.dwell.ravel()).max()) for layer in layers]
    order = range(len(layers))  # _no_repeats ordered them: top layer first, no zone twice running
    passes = tuple(_make_pass(k + 1, layers[i], depth[i], xs, ys, lap, chart) for k, i in enumerate(order))
    # an even pass's region (bool); an uneven one's dwell per node (float, proportional to its time there):
    # either way region * time / region.sum() is the pass's time at each node
    regions = tuple(layers[i].region if layers[i].per_node is None or not np.ndim(layers[i].per_node)
                    else layers[i].dwell for i in order)
    # passes too short to work by hand, and what skipping them all would cost
    by_hand = tuple(p.order for p in passes if _too_short_by_hand(p, lap))
    skip_flat = None
    if by_hand:
        rest = plan_dwell.copy()
        for o in by_hand:
            rest -= regions[o - 1] * (passes[o - 1].time / int(regions[o - 1].sum()))
        skip_flat = _flatness_after(np.maximum(rest, 0.0))
    for a in (xs, ys, wanted, dwell, plan_dwell, achieved, predicted, *regions):
        a.setflags(write=False)
    return LapPlan(
        lap=lap,
        removal=removal,
        xs_mm=xs,
        ys_mm=ys,
        wanted_um=np.where(mask, wanted, np.nan),
        dwell=dwell,
        plan_dwell=plan_dwell,
        achieved_um=achieved,
        predicted_height_um=predicted,
        predicted_flatness_um=float(pred_flat),
        dwell_flatness_um=float(dwell_flat),
        total_time=float(plan_dwell.sum()),
        passes=passes,
        chart=chart,
        smoothness=mu,
        min_pass_time=t_min,
        passes_unmerged=unmerged,
        unmerged_flatness_um=unmerged_flat,
        merges=tuple(merges),
        pass_regions=regions,
        levels=levels,
        best_flatness_um=float(best_flat),
        shortfall=shortfall,
        too_short_by_hand=by_hand,
        flatness_skipping_short_um=skip_flat,
    )


#: Shortest pass that can be worked evenly over its zone by hand, in minutes: 10 s. A lap is moved in
#: strokes of a second or two; a pass of a few seconds is a stroke or two and cannot spread its time evenly
#: (a choice of this module; common practice, no single source).
HAND_MIN_PASS_MIN = 10.0 / 60.0


def _too_short_by_hand(p: Pass, lap: LapModel) -> bool:
    """A pass under 10 s (time in minutes), or under one stroke (time in passes of known strokes)."""
    if p.time_unit == "min":
        return p.time < HAND_MIN_PASS_MIN * (1 - 1e-9)
    return p.strokes is not None and p.strokes < 1


#: Most time steps suggested for rounding the dwell (a plan of more layers is not worked by hand).
_MAX_SUGGESTED_LEVELS = 32


def _suggest_levels(shortfall: Shortfall, rounded_flatness, slack_um: float) -> Shortfall:
    """Try 2, 4, 8.. times the levels (at most ``_MAX_SUGGESTED_LEVELS``) until the rounding stays within
    ``slack_um`` of the unrounded dwell; ``rounded_flatness(n)`` is the flatness after rounding to n steps.
    The suggestion is the first that does, else the best tried; none if more steps do not help."""
    import dataclasses

    goal = max(shortfall.target_um, shortfall.smoothed_um) + slack_um
    tried = []
    n = shortfall.levels * 2
    while n <= _MAX_SUGGESTED_LEVELS:
        f = float(rounded_flatness(n))
        tried.append((n, f))
        if f <= goal:
            break
        n *= 2
    if not tried:
        return shortfall
    n, f = tried[-1] if tried[-1][1] <= goal else min(tried, key=lambda t: t[1])
    if f >= shortfall.rounded_um:
        return shortfall  # more steps do not help here
    return dataclasses.replace(shortfall, levels_suggested=n, levels_suggested_um=f, levels_tried=tuple(tried))


#: Most cells a printed chart holds (26 lettered columns x 99 numbered rows' worth).
MAX_CHART_CELLS = 26 * 99


def default_cell_mm(lap: LapModel) -> float:
    """The chart's default cell side (mm): the lap's diameter, or its longer side."""
    return lap.diameter_mm if lap.shape == "round" else max(lap.length_mm, lap.width_mm)


def chart_edges(hm: HeightMap, lap: LapModel, cell_mm: float | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Cell edges of the chart along x and y (mm), without the check on their number.

    The chart covers the whole surface when its size is known (origin at the south-west corner), else the
    extent of the measured points. Cells are exactly ``cell_mm`` square, measured from that corner, so they
    can be marked on the surface with a rule; what is left at the east and north edges is one more, narrower
    cell when it is more than half a cell wide, else it joins the last cell (at most 1.5 cells wide).

    Parameters
    ----------
    hm : HeightMap
    lap : LapModel
    cell_mm : float, optional
        Cell side (mm); default :func:`default_cell_mm`.

    Returns
    -------
    x_edges_mm, y_edges_mm : ndarray
        Increasing edges, shapes (ncol + 1,) and (nrow + 1,).
    """
    if cell_mm is None:
        cell_mm = default_cell_mm(lap)
    if not (np.isfinite(cell_mm) and cell_mm > 0):
        raise InputValueError(f"chart cell size {cell_mm} mm must be > 0")
    xmin, xmax, ymin, ymax = hm.extent_mm
    x0, x1 = (0.0, hm.length_mm) if hm.length_mm else (xmin, xmax)
    y0, y1 = (0.0, hm.width_mm) if hm.width_mm else (ymin, ymax)
    x0, x1 = min(x0, xmin), max(x1, xmax)
    y0, y1 = min(y0, ymin), max(y1, ymax)
    return _edges(x0, x1, cell_mm), _edges(y0, y1, cell_mm)


def _edges(a: float, b: float, cell: float) -> np.ndarray:
    """Edges every ``cell`` from ``a``; a remainder up to half a cell joins the last cell."""
    full = int(math.floor((b - a) / cell + 1e-9))
    rest = (b - a) - full * cell
    if full == 0:
        return np.array([a, b])
    inner = a + cell * np.arange(full + 1)
    if rest > 0.5 * cell + 1e-9 * cell:
        return np.append(inner, b)
    inner[-1] = b  # nothing left, or a sliver that joins the last cell
    return inner


def _chart(hm, lap, xs, ys, plan_dwell, cell_mm) -> CellChart:
    xe, ye = chart_edges(hm, lap, cell_mm)
    ncol, nrow = xe.size - 1, ye.size - 1
    if ncol * nrow > MAX_CHART_CELLS:
        raise InputValueError(
            f"{ncol} x {nrow} chart cells of {xe[1] - xe[0]:.3g} mm are too many to print",
            fix="give a larger cell size",
        )
    X, Y = np.meshgrid(xs, ys)
    ci = np.clip(np.searchsorted(xe, X.ravel(), side="right") - 1, 0, ncol - 1)
    cj = np.clip(np.searchsorted(ye, Y.ravel(), side="right") - 1, 0, nrow - 1)
    t = np.zeros((nrow, ncol))
    np.add.at(t, (cj, ci), plan_dwell.ravel())
    t.setflags(write=False)
    return CellChart(
        columns=tuple(cell_column_name(i) for i in range(ncol)),
        rows=tuple(str(j + 1) for j in range(nrow)),
        x_edges_mm=xe,
        y_edges_mm=ye,
        time=t,
        time_unit=lap.time_unit,
    )


@dataclass(frozen=True, eq=False)
class _Layer:
    """A pass before it is named: its level, the dwell-grid nodes it works and the time per node."""

    level: int
    region: np.ndarray
    per_node: object  # float: the same time at every node of the region; or an array on the grid (uneven pass)
    keep: bool = False

    @property
    def time(self) -> float:
        if np.ndim(self.per_node):
            return float(np.where(self.region, self.per_node, 0.0).sum())
        return self.per_node * int(self.region.sum())

    @property
    def dwell(self) -> np.ndarray:
        """Time at each grid node (zero outside the region)."""
        return np.where(self.region, self.per_node, 0.0)


def _layer_regions(xs, ys, steps, levels, lap):
    """(level, region) for every connected part of every layer of the rounded dwell, top layer first."""
    from scipy import ndimage

    # parts of a layer less than half a lap apart are worked in one pass: join them before labelling
    hx, hy = lap.half_size_mm
    dx, dy = float(np.diff(xs).mean()), float(np.diff(ys).mean())
    rx, ry = int(hx / 2.0 // dx), int(hy / 2.0 // dy)
    yy, xx = np.mgrid[-ry : ry + 1, -rx : rx + 1]
    disk = (xx * dx / max(hx, 1e-12)) ** 2 + (yy * dy / max(hy, 1e-12)) ** 2 <= 0.25
    out = []
    for level in range(levels, 0, -1):
        layer = steps >= level
        joined, nlab = ndimage.label(ndimage.binary_dilation(layer, structure=disk))
        lab = np.where(layer, joined, 0)
        for k in range(1, nlab + 1):
            reg = lab == k
            if reg.any():
                out.append((level, reg))
    return out


def _neighbour(layers, i, xs, ys):
    """Index of the pass that touches pass ``i`` most (nearest level on a tie), else the nearest by centre."""
    from scipy import ndimage

    grown = ndimage.binary_dilation(layers[i].region, structure=np.ones((3, 3), bool))
    best, key = None, None
    X, Y = np.meshgrid(xs, ys)
    ci = (X[layers[i].region].mean(), Y[layers[i].region].mean())
    for j, other in enumerate(layers):
        if j == i:
            continue
        touch = int((grown & other.region).sum())
        dist = math.hypot(X[other.region].mean() - ci[0], Y[other.region].mean() - ci[1])
        k = (-touch, abs(other.level - layers[i].level), dist)
        if key is None or k < key:
            best, key = j, k
    return best


def _resolve_short(layers, t_min, flatness_of, limit_um, xs, ys):
    """Drop, merge or lengthen passes shorter than ``t_min``, shortest first (see :func:`plan_lapping`).

    Returns the new layers and a description of each change.
    """
    layers = list(layers)
    log = []
    while True:
        short = [i for i, layer in enumerate(layers) if layer.time < t_min * (1 - 1e-9) and not layer.keep]
        if not short:
            return layers, log
        i = min(short, key=lambda k: (layers[k].time, -layers[k].level))
        me = layers[i]
        options = [("dropped", layers[:i] + layers[i + 1 :])]
        j = _neighbour(layers, i, xs, ys)
        if j is not None:
            nb = layers[j]
            merged = _Layer(nb.level, nb.region, nb.per_node + me.time / int(nb.region.sum()), nb.keep)
            rest = [merged if k == j else layer for k, layer in enumerate(layers) if k != i]
            options.append(("merged into the neighbouring pass", rest))
        longer = _Layer(me.level, me.region, t_min / int(me.region.sum()))
        options.append(("lengthened to the minimum", [longer if k == i else layer for k, layer in enumerate(layers)]))
        scored = [(what, ls, flatness_of(ls)) for what, ls in options]
        chosen = next((o for o in scored if o[2] <= limit_um * (1 + 1e-9) + 1e-12), None)
        if chosen is None:
            chosen = ("kept (every change would break the limit)", [
                _Layer(layer.level, layer.region, layer.per_node, keep=True) if k == i else layer
                for k, layer in enumerate(layers)
            ])
        X, Y = np.meshgrid(xs, ys)
        log.append(
            f"pass at x {X[me.region].mean():.0f}, y {Y[me.region].mean():.0f} mm "
            f"({me.time:.2g} of minimum {t_min:.2g}) {chosen[0]}"
        )
        layers = chosen[1]


def _no_repeats(layers, conv, hm, lap, xs, ys, cell_mm, flatness_of, limit_um, slack_um):
    """Order the layers top first (deepest first within a level) with no place worked twice running.

    Layers on exactly the same nodes are one pass (their times add; the plan is unchanged). Two passes in
    a row over the same place (the same chart cells and the same travel of the lap's centre: all the pass
    table prints) are joined into one pass over both regions, their summed time spread evenly, when that
    costs no predicted flatness; otherwise the second is moved after the next pass in another place, if there
    is one; and else the two are worked as one uneven pass that keeps each node's summed time (``Pass.even``
    False; the bench chart shows the time in each cell). The predicted flatness never changes. Returns the
    ordered layers and a description of each change (``limit_um`` and ``slack_um`` are not used: no change
    made here costs flatness).
    """
    log = []
    by_region = {}
    for layer in layers:  # identical regions: one pass, its time the sum
        key = layer.region.tobytes()
        if key in by_region:
            o = by_region[key]
            by_region[key] = _Layer(max(o.level, layer.level), o.region, o.per_node + layer.per_node, o.keep or layer.keep)
        else:
            by_region[key] = layer
    if len(by_region) < len(layers):
        log.append(f"{len(layers) - len(by_region)} pass(es) on the same nodes as another joined to it")
    layers = list(by_region.values())
    if len(layers) < 2:
        return layers, log
    X, Y = np.meshgrid(xs, ys)
    xe, ye = chart_edges(hm, lap, cell_mm)

    def zone(layer):
        """The place as the pass table prints it: the chart cells and the lap centre's travel (whole mm)."""
        xr, yr = X[layer.region], Y[layer.region]
        i = np.clip(np.searchsorted(xe, xr, side="right") - 1, 0, xe.size - 2)
        j = np.clip(np.searchsorted(ye, yr, side="right") - 1, 0, ye.size - 2)
        travel = tuple(round(float(v)) for v in (xr.min(), xr.max(), yr.min(), yr.max()))
        return (int(i.min()), int(i.max()), int(j.min()), int(j.max())), travel  # the printed range "B2:D4"

    def ordered(ls):
        depth = [float((conv @ la.dwell.ravel()).max()) for la in ls]
        return [ls[i] for i in sorted(range(len(ls)), key=lambda i: (-ls[i].level, -depth[i]))]

    layers = ordered(layers)
    baseline = None
    k = 0
    while k < len(layers) - 1:
        a, b = layers[k], layers[k + 1]
        if zone(a) != zone(b):
            k += 1
            continue
        union = a.region | b.region
        # one pass over both regions, its time their sum spread evenly (how the pass table is worked)
        joined = _Layer(max(a.level, b.level), union, (a.time + b.time) / int(union.sum()), a.keep or b.keep)
        trial = layers[:k] + [joined] + layers[k + 2:]
        if baseline is None:  # the plan as it came: an even join is taken only when it costs no flatness
            baseline = flatness_of(layers)
        if flatness_of(trial) <= baseline * (1 + 1e-9) + 1e-12:
            layers = trial
            log.append(f"two passes in a row over the same cells and travel (x {X[union].mean():.0f}, "
                       f"y {Y[union].mean():.0f} mm) joined into one")
            k = max(k - 1, 0)
            continue
        later = next((m for m in range(k + 2, len(layers)) if zone(layers[m]) != zone(b)), None)
        if later is not None:  # work somewhere else in between: the same plan in another order
            layers = layers[:k + 1] + [layers[later]] + [la for m, la in enumerate(layers[k + 1:], start=k + 1)
                                                          if m != later]
            log.append("a pass moved so that the same place is not worked twice running")
            k += 1
            continue
        # neither: one pass, uneven, keeping each node's summed time (the plan does not change; the bench chart
        # shows how long in each cell)
        layers = layers[:k] + [_Layer(max(a.level, b.level), union, a.dwell + b.dwell, a.keep or b.keep)] + layers[k + 2:]
        log.append(f"two passes in a row over the same cells and travel (x {X[union].mean():.0f}, "
                   f"y {Y[union].mean():.0f} mm) worked as one, longer where the bench chart says")
        k = max(k - 1, 0)
    return layers, log


def _make_pass(order, layer, depth, xs, ys, lap, chart) -> Pass:
    X, Y = np.meshgrid(xs, ys)
    reg = layer.region
    xr, yr = X[reg], Y[reg]
    cells = sorted(set(chart.cell_of(xr, yr)), key=lambda s: (_split_cell(s)[1], _split_cell(s)[0]))
    cols = [_split_cell(c)[0] for c in cells]
    rows = [_split_cell(c)[1] for c in cells]
    if len(cells) == 1:
        zone = cells[0]
    else:
        zone = f"{min(cols, key=lambda c: (len(c), c))}{min(rows)}:{max(cols, key=lambda c: (len(c), c))}{max(rows)}"
    time = layer.time
    strokes = None
    if lap.strokes_per_pass is not None:
        strokes = int(round(time * lap.strokes_per_pass))
    return Pass(
        order=order,
        level=layer.level,
        zone=zone,
        cells=tuple(cells),
        centre_x_mm=float(xr.mean()),
        centre_y_mm=float(yr.mean()),
        extent_mm=(float(xr.min()), float(xr.max()), float(yr.min()), float(yr.max())),
        depth_um=depth,
        time=float(time),
        time_unit=lap.time_unit,
        strokes=strokes,
        even=not np.ndim(layer.per_node),
    )


def _split_cell(name: str) -> tuple[str, int]:
    i = 0
    while i < len(name) and name[i].isalpha():
        i += 1
    return name[:i], int(name[i:])
