"""Flatness evaluation: least-squares and minimum-zone reference planes.

(First version: exact minimum zone by one linear program over all points. The
fast hull-based engine replaces the solver behind the same functions.)
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .errors import GeometryError

__all__ = ["PlaneFit", "least_squares_plane", "minimum_zone"]


@dataclass(frozen=True)
class PlaneFit:
    """A reference plane ``z = a + b*x + c*y`` and the zone about it.

    Attributes
    ----------
    a_um, b_um_per_mm, c_um_per_mm : float
        Plane coefficients (height in µm at the origin, slopes in µm/mm).
    flatness_um : float
        Peak-to-valley of the heights about the plane, measured along z (µm).
    method : str
        ``"least_squares"`` or ``"minimum_zone"``.
    """

    a_um: float
    b_um_per_mm: float
    c_um_per_mm: float
    flatness_um: float
    method: str


def _check(x_mm, y_mm, height_um):
    x = np.asarray(x_mm, float).ravel()
    y = np.asarray(y_mm, float).ravel()
    z = np.asarray(height_um, float).ravel()
    if not (x.size == y.size == z.size):
        raise GeometryError("x, y and height arrays differ in length")
    if x.size < 3:
        raise GeometryError(f"flatness needs at least three points, got {x.size}")
    return x, y, z


def least_squares_plane(x_mm, y_mm, height_um) -> PlaneFit:
    """Least-squares plane (LSPL) of the points and the peak-to-valley about it."""
    x, y, z = _check(x_mm, y_mm, height_um)
    A = np.column_stack([np.ones_like(x), x - x.mean(), y - y.mean()])
    coef, *_ = np.linalg.lstsq(A, z, rcond=None)
    r = z - A @ coef
    a = coef[0] - coef[1] * x.mean() - coef[2] * y.mean()
    return PlaneFit(float(a), float(coef[1]), float(coef[2]), float(r.max() - r.min()), "least_squares")


def minimum_zone(x_mm, y_mm, height_um) -> PlaneFit:
    """Minimum-zone plane (MZPL, Chebyshev) by one linear program (scipy HiGHS)."""
    from scipy.optimize import linprog

    x, y, z = _check(x_mm, y_mm, height_um)
    xc, yc = x - x.mean(), y - y.mean()
    n = x.size
    # unknowns (a, b, c, t): 0 <= z - (a + b x + c y) <= t
    A = np.column_stack([np.ones(n), xc, yc])
    A_ub = np.vstack([np.column_stack([A, np.zeros(n)]), np.column_stack([-A, -np.ones(n)])])
    b_ub = np.concatenate([z, -z])
    res = linprog([0, 0, 0, 1], A_ub=A_ub, b_ub=b_ub, bounds=[(None, None)] * 4, method="highs")
    a, b, c, t = res.x
    return PlaneFit(float(a - b * x.mean() - c * y.mean()), float(b), float(c), float(t), "minimum_zone")
