"""Spheres fitted to measured points: least squares, minimum zone and minimum circumscribed.

Least squares (LS)
    Minimises ``sum (|p_i - c| - R)^2`` over the centre ``c`` and radius ``R`` (the geometric
    least-squares sphere that ISO 10360-6 tests with reference data sets). Started from the
    algebraic fit ``|p|^2 = 2 c.p + (R^2 - |c|^2)`` (linear in ``c`` and ``R^2 - |c|^2``), then
    Gauss-Newton steps on the centred and scaled points, with step halving when a step does not
    lower the sum.
Minimum zone (MZ)
    The two concentric spheres closest together that hold every point; sphericity is their radial
    distance (Chebyshev fit; NIST reference algorithms: C. M. Shakarji, "Least-squares fitting
    algorithms of the NIST algorithm testing system", J. Res. NIST 103(6):633, 1998). Solved here
    by a linear program on the distances linearised about the centre,
    ``r_i(c0 + d) ~ r_i(c0) - u_i . d``, minimising ``t_out - t_in`` subject to
    ``t_in <= r_i(c0) - u_i . d <= t_out`` (scipy HiGHS), iterated with a trust region and a step
    accepted only when the exact zone shrinks. It stops when the linear program finds no
    improvement beyond 1e-7 µm about the exact distances: a first-order stationary (Chebyshev)
    point, and for the small form errors of balls and seats the minimum (the problem is then
    nearly linear; derived).
Minimum circumscribed (MC)
    The smallest sphere holding every point, ``min max r_i`` (convex, so its minimum is unique),
    by the same iterated linear program. ISO 3290-1 measures a ball's deviation from spherical
    form from a circumscribed sphere; ``R_mc - min r_i`` about its centre is that figure.

Distances are computed in mm and the linear programs work in µm about the mean radius, so that
the solver's absolute tolerances (1e-7) are far below the form being measured.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import GeometryError, InputValueError

__all__ = [
    "SphereFit",
    "least_squares_sphere",
    "minimum_zone_sphere",
    "minimum_circumscribed_sphere",
    "coverage_deg",
    "surrounds_center",
]

_UM_PER_MM = 1000.0  # exact
_LP_TOL_UM = 1e-7  # improvement below which the linear program is taken to find none (µm)


@dataclass(frozen=True)
class SphereFit:
    """A sphere fitted to points.

    Attributes
    ----------
    center_mm : ndarray, shape (3,)
        Centre ``(x, y, z)`` in mm.
    radius_mm : float
        Radius in mm (MZ: the mean of the two zone radii; MC: the circumscribed radius).
    residuals_um : ndarray, shape (n,)
        Radial deviation of each point from the sphere, µm, positive away from the centre.
    sphericity_um : float
        Largest minus smallest radial distance about this centre, µm (for MZ the zone width).
    method : str
        ``"least_squares"``, ``"minimum_zone"`` or ``"minimum_circumscribed"``.
    outer_radius_mm, inner_radius_mm : float
        Largest and smallest distance of a point from the centre, mm.
    outer_points, inner_points : tuple of int
        Indices of the points on the outer and inner sphere (MZ, MC; to 1e-6 µm).
    iterations : int
        Linearisations (MZ, MC) or Gauss-Newton steps (LS).
    converged : bool
        True when the stopping test was met (see the module notes).
    """

    center_mm: np.ndarray
    radius_mm: float
    residuals_um: np.ndarray
    sphericity_um: float
    method: str
    outer_radius_mm: float
    inner_radius_mm: float
    outer_points: tuple = ()
    inner_points: tuple = ()
    iterations: int = 0
    converged: bool = True

    @property
    def rms_um(self) -> float:
        """Root-mean-square radial deviation, µm."""
        return float(np.sqrt(np.mean(self.residuals_um**2)))


def _check(points_mm) -> np.ndarray:
    p = np.asarray(points_mm, dtype=float)
    if p.ndim != 2 or p.shape[1] != 3:
        raise InputValueError(f"points must be an array of shape (n, 3), not {p.shape}", fix="give x, y, z per point")
    bad = np.flatnonzero(~np.isfinite(p).all(axis=1))
    if bad.size:
        raise InputValueError(f"point {bad[0] + 1} is not finite", fix="remove it or give numbers")
    if p.shape[0] < 5:
        raise GeometryError(
            f"only {p.shape[0]} points: a sphere needs at least 4, its form at least 5",
            fix="measure more points spread over the surface",
        )
    q = p - p.mean(axis=0)
    s = np.linalg.svd(q, compute_uv=False)
    if s[2] <= 1e-9 * s[0]:
        raise GeometryError(
            "all points lie in one plane (one circle), which does not fix a sphere",
            fix="measure points off that plane too (a second great circle, or points towards the pole)",
        )
    return p


def _frame(p: np.ndarray):
    """Centre and scale of the points (the fits run on (p - m) / s, of order 1)."""
    m = p.mean(axis=0)
    s = float(np.sqrt(np.mean(np.sum((p - m) ** 2, axis=1))))
    return m, s


def least_squares_sphere(points_mm) -> SphereFit:
    """Geometric least-squares sphere of the points.

    Parameters
    ----------
    points_mm : array_like, shape (n, 3)
        Point coordinates in mm (n >= 5).

    Returns
    -------
    SphereFit
        ``method="least_squares"``.

    Raises
    ------
    InputValueError
        Wrong shape, a non-finite coordinate.
    GeometryError
        Fewer than 5 points, all points in one plane, or no convergence.

    Examples
    --------
    >>> import numpy as np
    >>> t = np.linspace(0, np.pi, 7)
    >>> pts = np.array([[np.sin(a) * np.cos(b), np.sin(a) * np.sin(b), np.cos(a)] for a in t for b in t * 2])
    >>> fit = least_squares_sphere(5.0 * pts + [1.0, 2.0, 3.0])
    >>> np.round(fit.center_mm, 9).tolist(), round(fit.radius_mm, 9)
    ([1.0, 2.0, 3.0], 5.0)
    """
    p = _check(points_mm)
    m, s = _frame(p)
    q = (p - m) / s
    # algebraic start: |q|^2 = 2 c.q + k, linear in (c, k)
    A = np.column_stack([2 * q, np.ones(len(q))])
    sol, *_ = np.linalg.lstsq(A, np.sum(q * q, axis=1), rcond=None)
    c = sol[:3]
    R = math.sqrt(max(sol[3] + c @ c, 1e-300))

    def cost(c, R):
        r = np.linalg.norm(q - c, axis=1) - R
        return r, float(r @ r)

    r, f = cost(c, R)
    converged = False
    it = 0
    for it in range(1, 201):
        d = q - c
        dist = np.linalg.norm(d, axis=1)
        J = np.column_stack([-d / dist[:, None], -np.ones(len(q))])
        step, *_ = np.linalg.lstsq(J, -r, rcond=None)
        lam = 1.0
        while True:
            c_new, R_new = c + lam * step[:3], R + lam * step[3]
            r_new, f_new = cost(c_new, R_new)
            if f_new <= f or lam < 1e-6:
                break
            lam *= 0.5
        small = np.max(np.abs(lam * step)) < 1e-15 * max(1.0, R)
        c, R, r, f = c_new, R_new, r_new, f_new
        if small:
            converged = True
            break
    if not converged:
        raise GeometryError(
            "the least-squares sphere did not converge", fix="check that the points lie on one sphere (or a cap of it)"
        )
    center = m + s * c
    dist = np.linalg.norm(p - center, axis=1)
    radius = float(np.mean(dist))  # the LS radius is the mean distance at the LS centre (normal equation in R)
    res = (dist - radius) * _UM_PER_MM
    return SphereFit(
        center, radius, res, float(np.ptp(res)), "least_squares", float(dist.max()), float(dist.min()),
        iterations=it, converged=True,
    )


def _lp_step(p, c0, trust_um, kind):
    """One linear program about centre ``c0``: returns (step in mm, predicted objective in µm, r0 in µm about R0)."""
    from scipy.optimize import linprog

    d = p - c0
    r = np.linalg.norm(d, axis=1)
    u = d / r[:, None]
    R0 = float(np.mean(r))
    e = (r - R0) * _UM_PER_MM  # distances about the mean radius, µm
    n = len(p)
    if kind == "zone":
        # variables (dx, dy, dz, t_out, t_in) in µm; minimise t_out - t_in
        cost = np.array([0.0, 0.0, 0.0, 1.0, -1.0])
        A_ub = np.vstack([
            np.column_stack([-u, -np.ones(n), np.zeros(n)]),  # e - u.d <= t_out
            np.column_stack([u, np.zeros(n), np.ones(n)]),  # t_in <= e - u.d
        ])
        b_ub = np.concatenate([-e, e])
        bounds = [(-trust_um, trust_um)] * 3 + [(None, None)] * 2
    else:
        # minimum circumscribed: variables (dx, dy, dz, t_out); minimise t_out
        cost = np.array([0.0, 0.0, 0.0, 1.0])
        A_ub = np.column_stack([-u, -np.ones(n)])
        b_ub = -e
        bounds = [(-trust_um, trust_um)] * 3 + [(None, None)]
    res = linprog(cost, A_ub=A_ub, b_ub=b_ub, bounds=bounds, method="highs")
    if res.status != 0:
        raise GeometryError(f"the linear program of the sphere fit failed ({res.message})",
                            fix="check the points (a sphere or a cap of one)")
    return res.x[:3] / _UM_PER_MM, float(res.fun)


def _objective(p, c, kind) -> float:
    """Exact zone width (or circumscribed radius) about centre ``c``, µm."""
    r = np.linalg.norm(p - c, axis=1) * _UM_PER_MM
    return float(np.ptp(r)) if kind == "zone" else float(r.max())


def _chebyshev(points_mm, kind: str, start_mm=None, max_iterations: int = 200) -> SphereFit:
    p = _check(points_mm)
    c = least_squares_sphere(p).center_mm if start_mm is None else np.asarray(start_mm, dtype=float)
    f = _objective(p, c, kind)
    # first trust region: a generous share of the spread of the distances (at least 1 µm)
    trust = max(1.0, 10.0 * _objective(p, c, "zone"))
    converged = False
    it = 0
    for it in range(1, max_iterations + 1):
        step, predicted = _lp_step(p, c, trust, kind)
        base = f - (0.0 if kind == "zone" else np.mean(np.linalg.norm(p - c, axis=1)) * _UM_PER_MM)
        if base - predicted <= _LP_TOL_UM:  # the linear model about the exact distances sees no improvement
            converged = True
            break
        c_new = c + step
        f_new = _objective(p, c_new, kind)
        if f_new < f:
            c, f = c_new, f_new
            if np.max(np.abs(step)) * _UM_PER_MM > 0.5 * trust:
                trust *= 2.0
        else:
            trust *= 0.25
            if trust < 1e-9:
                converged = True  # no step of any size improves the exact objective
                break
    dist = np.linalg.norm(p - c, axis=1)
    ro, ri = float(dist.max()), float(dist.min())
    if kind == "zone":
        radius, method = 0.5 * (ro + ri), "minimum_zone"
    else:
        radius, method = ro, "minimum_circumscribed"
    res = (dist - radius) * _UM_PER_MM
    tol = 1e-6  # µm
    outer = tuple(int(i) for i in np.flatnonzero((ro - dist) * _UM_PER_MM <= tol))
    inner = tuple(int(i) for i in np.flatnonzero((dist - ri) * _UM_PER_MM <= tol))
    return SphereFit(
        c, radius, res, float((ro - ri) * _UM_PER_MM), method, ro, ri, outer, inner, it, converged
    )


def minimum_zone_sphere(points_mm, *, start_mm=None) -> SphereFit:
    """Minimum-zone sphere: the thinnest shell between two concentric spheres holding every point.

    Parameters
    ----------
    points_mm : array_like, shape (n, 3)
        Point coordinates in mm (n >= 5).
    start_mm : array_like, shape (3,), optional
        Starting centre in mm; default the least-squares centre.

    Returns
    -------
    SphereFit
        ``method="minimum_zone"``; ``sphericity_um`` is the zone width, ``radius_mm`` the mean of
        the outer and inner radii, ``outer_points``/``inner_points`` the points touching them.

    Raises
    ------
    InputValueError, GeometryError
        As :func:`least_squares_sphere`.

    References
    ----------
    .. [1] C. M. Shakarji, J. Res. NIST 103(6):633-641 (1998).

    Examples
    --------
    Points on a perfect sphere have no form:

    >>> import numpy as np
    >>> rng = np.random.default_rng(0)
    >>> v = rng.normal(size=(50, 3)); v /= np.linalg.norm(v, axis=1)[:, None]
    >>> fit = minimum_zone_sphere(12.7 * v)
    >>> bool(fit.sphericity_um < 1e-6)
    True
    """
    return _chebyshev(points_mm, "zone", start_mm)


def minimum_circumscribed_sphere(points_mm, *, start_mm=None) -> SphereFit:
    """Smallest sphere that holds every point (for balls measured all round).

    Parameters
    ----------
    points_mm : array_like, shape (n, 3)
        Point coordinates in mm (n >= 5).
    start_mm : array_like, shape (3,), optional
        Starting centre in mm; default the least-squares centre.

    Returns
    -------
    SphereFit
        ``method="minimum_circumscribed"``; ``radius_mm`` is the circumscribed radius and
        ``sphericity_um`` the deviation from spherical form measured from it (largest radial
        distance inwards of a point, ISO 3290-1 wording).
    """
    return _chebyshev(points_mm, "circumscribed", start_mm)


def coverage_deg(points_mm, center_mm) -> float:
    """Half-angle of the smallest cap (about the points' mean direction) holding every point, degrees.

    180 means points all round (the mean direction is undefined or points lie beyond a hemisphere
    on every side); a seat measured over its working face gives well under 90.
    """
    p = np.asarray(points_mm, dtype=float)
    u = p - np.asarray(center_mm, dtype=float)
    u = u / np.linalg.norm(u, axis=1)[:, None]
    mean = u.mean(axis=0)
    norm = float(np.linalg.norm(mean))
    if norm < 1e-6:
        return 180.0
    cosang = np.clip(u @ (mean / norm), -1.0, 1.0)
    return float(np.degrees(np.arccos(cosang.min())))


def surrounds_center(points_mm, center_mm) -> bool:
    """True when the centre lies inside the convex hull of the points (a ball measured all round).

    Only then is the smallest circumscribed sphere the ball's own; about a cap (a seat, or a ball
    probed on one side) it is a smaller sphere through the cap's rim.
    """
    from scipy.optimize import linprog

    p = np.asarray(points_mm, dtype=float)
    c = np.asarray(center_mm, dtype=float)
    # c = sum w_i p_i with w >= 0, sum w = 1: a feasibility linear program
    n = len(p)
    A_eq = np.vstack([(p - c).T, np.ones((1, n))])
    b_eq = np.concatenate([np.zeros(3), [1.0]])
    res = linprog(np.zeros(n), A_eq=A_eq, b_eq=b_eq, bounds=[(0, None)] * n, method="highs")
    return bool(res.status == 0)
