"""The lap and where it should dwell: the Preston rate, the lap model, its influence function and the
deconvolution of a removal map into a non-negative dwell map.

:class:`LapModel` is the user's lap (round or rectangular) with its removal rate from their own calibration;
removal follows the Preston equation ``dz/dt = Kp p v`` (:func:`preston_rate_um_per_min`), so the lap's
footprint is the tool influence function (TIF, :func:`lap_kernel`). :func:`removal_from_dwell` convolves a
dwell map with it; :func:`deconvolve_dwell` finds where the lap should spend its time: a non-negative,
optionally regularised deconvolution of the removal map by the footprint on a regular grid (exact ``nnls`` for
small grids, accelerated projected gradient for larger ones), with the lap's centre kept where it hangs over
no edge too far (:func:`lap_centre_allowed`). The sparse operators it builds
(:func:`grid_interpolation_matrix` and the private convolution and difference matrices) are shared with the
plan (:mod:`flatcheck.lapping._plan`). Everything here is pure: numpy arrays in, arrays and frozen dataclasses
out.

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
from dataclasses import dataclass

import numpy as np

from ..errors import InputValueError

__all__ = [
    "LapModel",
    "preston_rate_um_per_min",
    "lap_kernel",
    "removal_from_dwell",
    "deconvolve_dwell",
    "grid_interpolation_matrix",
    "MAX_OVERHANG_FRACTION",
    "lap_centre_allowed",
]


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
