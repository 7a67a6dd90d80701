"""Flatness evaluation: reference planes and ISO 12781-1 parameters.

Reference planes
----------------
``LSPL``
    Least-squares plane: minimises the sum of squared vertical deviations.
``MZPL``
    Minimum-zone plane: the mid-plane of the two parallel planes, closest
    together, that enclose every point (Chebyshev fit, the default association
    of ISO 1101 for form). Solved exactly by :mod:`flatcheck._minzone`.
``three-corner``
    The plane through three corner stations (the fourth corner shows the twist),
    as quoted on older plate certificates.
``diagonal``
    The plane containing one diagonal (south-west to north-east corner) and
    parallel to the other (south-east to north-west): the reference plane of the
    classic Union Jack reduction, so the two ends of the second diagonal sit at the
    same height.

Parameters (ISO 12781-1:2011, deviations from the reference plane)
------------------------------------------------------------------
``FLTt`` peak-to-valley, ``FLTp`` highest point above the plane, ``FLTv`` depth
of the lowest point below it (a positive number), ``FLTt = FLTp + FLTv``, and
``FLTq`` the root-mean-square deviation.

Deviations are taken *along z* (vertical). On a nearly level surface this is what
the trade reports; the zone width normal to the planes, ``t / sqrt(1 + b^2 + c^2)``
with the slopes made dimensionless, is given alongside (``normal_*`` fields).

Positions are in mm, heights in µm, slopes in µm/mm.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ._minzone import MinZoneSolution, check_points, solve_minimum_zone
from ..errors import GeometryError, InputValueError

__all__ = [
    "PlaneFit",
    "FlatnessParameters",
    "FlatnessReport",
    "least_squares_plane",
    "minimum_zone",
    "three_corner_plane",
    "diagonal_plane",
    "flatness_parameters",
    "evaluate_flatness",
    "corner_stations",
]

_UM_PER_MM = 1000.0  # a slope in µm/mm divided by this is dimensionless (exact)


def _normal(t_um: float, b_um_per_mm: float, c_um_per_mm: float) -> float:
    """Zone width normal to planes of slope (b, c) µm/mm whose vertical width is ``t_um``."""
    return t_um / math.sqrt(1.0 + (b_um_per_mm / _UM_PER_MM) ** 2 + (c_um_per_mm / _UM_PER_MM) ** 2)


@dataclass(frozen=True)
class PlaneFit:
    """A reference plane ``z = a + b*x + c*y`` and the zone about it.

    Attributes
    ----------
    a_um, b_um_per_mm, c_um_per_mm : float
        Plane coefficients (height in µm at x = y = 0, slopes in µm/mm). For the
        minimum zone this is the *lower* plane of the zone (every point is on or
        above it); for least squares it is the fitted plane itself.
    flatness_um : float
        Peak-to-valley of the heights about the plane, measured along z (µm).
    method : str
        ``"least_squares"`` or ``"minimum_zone"``.
    normal_flatness_um : float
        The same zone measured normal to the plane (µm).
    """

    a_um: float
    b_um_per_mm: float
    c_um_per_mm: float
    flatness_um: float
    method: str
    normal_flatness_um: float = float("nan")


@dataclass(frozen=True)
class FlatnessParameters:
    """ISO 12781-1 flatness parameters about one reference plane.

    Attributes
    ----------
    reference : str
        ``"LSPL"``, ``"MZPL"``, ``"three-corner"`` or ``"diagonal"``.
    a_um, b_um_per_mm, c_um_per_mm : float
        The reference plane ``z = a + b*x + c*y`` (µm, µm/mm, µm/mm). For MZPL the
        mid-plane of the zone.
    fltt_um : float
        Peak-to-valley deviation, ``fltp_um + fltv_um`` (µm, along z).
    fltp_um : float
        Largest deviation above the plane (µm).
    fltv_um : float
        Largest depth below the plane, as a positive number (µm).
    fltq_um : float
        Root-mean-square deviation from the plane (µm).
    normal_fltt_um : float
        ``fltt_um`` measured normal to the plane (µm).
    """

    reference: str
    a_um: float
    b_um_per_mm: float
    c_um_per_mm: float
    fltt_um: float
    fltp_um: float
    fltv_um: float
    fltq_um: float
    normal_fltt_um: float


@dataclass(frozen=True)
class FlatnessReport:
    """Flatness of a point set about every reference plane flatcheck knows.

    Attributes
    ----------
    lspl, mzpl : FlatnessParameters
        Least-squares and minimum-zone references.
    three_corner, diagonal : FlatnessParameters or None
        Corner-based references; ``None`` when four distinct corner stations cannot
        be found (see :func:`corner_stations`).
    mz_upper, mz_lower : tuple of int
        Indices of the points touching the upper and lower minimum-zone planes.
    corners : tuple of int or None
        Indices of the south-west, south-east, north-east and north-west corner stations.
    omitted_corner : str
        The corner left out of the three-corner plane.
    n_points : int
        Number of points evaluated.
    """

    lspl: FlatnessParameters
    mzpl: FlatnessParameters
    three_corner: FlatnessParameters | None
    diagonal: FlatnessParameters | None
    mz_upper: tuple
    mz_lower: tuple
    corners: tuple | None
    omitted_corner: str
    n_points: int

    @property
    def flatness_um(self) -> float:
        """Minimum-zone flatness (FLTt about MZPL, along z) in µm."""
        return self.mzpl.fltt_um


# ------------------------------------------------------------------- planes
def _ls_coef(x, y, z):
    xm, ym = x.mean(), y.mean()
    A = np.column_stack([np.ones_like(x), x - xm, y - ym])
    coef, *_ = np.linalg.lstsq(A, z, rcond=None)
    return coef[0] - coef[1] * xm - coef[2] * ym, coef[1], coef[2]


def least_squares_plane(x_mm, y_mm, height_um) -> PlaneFit:
    """Least-squares plane (LSPL) of the points and the peak-to-valley about it.

    Parameters
    ----------
    x_mm, y_mm : array_like, shape (n,)
        Positions in mm.
    height_um : array_like, shape (n,)
        Heights in µm.

    Returns
    -------
    PlaneFit
        ``method == "least_squares"``; ``flatness_um`` is the peak-to-valley of the
        vertical residuals (µm).

    Raises
    ------
    InputValueError
        Arrays differ in length, or a value is not finite (names the point).
    GeometryError
        Fewer than three points not on one line.

    Examples
    --------
    >>> fit = least_squares_plane([0, 1, 0, 1], [0, 0, 1, 1], [1.0, 3.0, 2.0, 4.0])
    >>> round(fit.flatness_um, 12), round(fit.b_um_per_mm, 12)
    (0.0, 2.0)
    """
    x, y, z = check_points(x_mm, y_mm, height_um)
    a, b, c = _ls_coef(x, y, z)
    r = z - (a + b * x + c * y)
    t = float(r.max() - r.min())
    return PlaneFit(float(a), float(b), float(c), t, "least_squares", _normal(t, b, c))


def _mz(x_mm, y_mm, height_um, method="auto") -> MinZoneSolution:
    return solve_minimum_zone(x_mm, y_mm, height_um, method=method)


def minimum_zone(x_mm, y_mm, height_um, *, method: str = "auto") -> PlaneFit:
    """Minimum-zone plane (MZPL, Chebyshev): exact, at any size.

    Solves ``min t`` subject to ``0 <= z_i - (a + b x_i + c y_i) <= t`` by a dual
    simplex on the four-unknown linear program, with an optimality certificate
    (see :mod:`flatcheck._minzone`).

    Parameters
    ----------
    x_mm, y_mm : array_like, shape (n,)
        Positions in mm.
    height_um : array_like, shape (n,)
        Heights in µm.
    method : {"auto", "hull", "lp"}
        Solver; all give the same zone ("hull" and "lp" use scipy's HiGHS).

    Returns
    -------
    PlaneFit
        The *lower* zone plane; ``flatness_um`` is the vertical zone width ``t`` (µm)
        and ``normal_flatness_um`` the width normal to the planes.

    Raises
    ------
    InputValueError
        Arrays differ in length, or a value is not finite (names the point).
    GeometryError
        Fewer than three points not on one line.

    Examples
    --------
    A tilted plane has zero flatness:

    >>> fit = minimum_zone([0, 100, 0, 100], [0, 0, 50, 50], [5.0, 6.0, 7.0, 8.0])
    >>> abs(fit.flatness_um) < 1e-12
    True
    """
    s = _mz(x_mm, y_mm, height_um, method)
    return PlaneFit(
        s.a_um, s.b_um_per_mm, s.c_um_per_mm, s.t_um, "minimum_zone", _normal(s.t_um, s.b_um_per_mm, s.c_um_per_mm)
    )


_CORNER_NAMES = ("sw", "se", "ne", "nw")


def corner_stations(x_mm, y_mm):
    """Indices of the corner stations: the points nearest the corners of the bounding box.

    Distances are measured after scaling x and y to [0, 1] so that long, narrow
    surfaces pick their true corners.

    Parameters
    ----------
    x_mm, y_mm : array_like, shape (n,)
        Positions in mm.

    Returns
    -------
    tuple of int or None
        ``(sw, se, ne, nw)``, or ``None`` if two corners share a station.
    """
    x = np.asarray(x_mm, float).ravel()
    y = np.asarray(y_mm, float).ravel()
    u = (x - x.min()) / max(np.ptp(x), 1e-300)
    v = (y - y.min()) / max(np.ptp(y), 1e-300)
    idx = tuple(int(np.argmin((u - cu) ** 2 + (v - cv) ** 2)) for cu, cv in ((0, 0), (1, 0), (1, 1), (0, 1)))
    return idx if len(set(idx)) == 4 else None


def three_corner_plane(x_mm, y_mm, height_um, *, omit: str = "ne"):
    """The plane through three corner stations.

    Parameters
    ----------
    x_mm, y_mm : array_like, shape (n,)
        Positions in mm.
    height_um : array_like, shape (n,)
        Heights in µm.
    omit : {"sw", "se", "ne", "nw"}
        The corner left out.

    Returns
    -------
    tuple (a_um, b_um_per_mm, c_um_per_mm)

    Raises
    ------
    GeometryError
        No four distinct corner stations, or the three are on one line.
    InputValueError
        Unknown corner name.
    """
    x, y, z = check_points(x_mm, y_mm, height_um)
    if omit not in _CORNER_NAMES:
        raise InputValueError(f"unknown corner {omit!r}", fix="use sw, se, ne or nw")
    corners = _corners_or_error(x, y)
    use = [c for name, c in zip(_CORNER_NAMES, corners) if name != omit]
    return _solve_plane(np.column_stack([np.ones(3), x[use], y[use]]), z[use])


def diagonal_plane(x_mm, y_mm, height_um):
    """The plane containing the SW-NE diagonal and parallel to the SE-NW diagonal.

    Conditions: the plane passes through the south-west and north-east corner
    stations, and its rise from the south-east to the north-west corner equals the
    measured rise, so both ends of that diagonal deviate by the same amount.

    Returns
    -------
    tuple (a_um, b_um_per_mm, c_um_per_mm)

    Raises
    ------
    GeometryError
        No four distinct corner stations, or the conditions are singular.
    """
    x, y, z = check_points(x_mm, y_mm, height_um)
    sw, se, ne, nw = _corners_or_error(x, y)
    A = np.array(
        [
            [1.0, x[sw], y[sw]],
            [1.0, x[ne], y[ne]],
            [0.0, x[nw] - x[se], y[nw] - y[se]],
        ]
    )
    return _solve_plane(A, np.array([z[sw], z[ne], z[nw] - z[se]]))


def _corners_or_error(x, y):
    corners = corner_stations(x, y)
    if corners is None:
        raise GeometryError(
            "cannot find four distinct corner stations", fix="use the least-squares or minimum-zone reference"
        )
    return corners


def _solve_plane(A, rhs):
    scale = np.abs(A).max(axis=0)
    scale[scale == 0] = 1.0
    As = A / scale
    if abs(np.linalg.det(As)) < 1e-12:
        raise GeometryError("the corner stations do not define a plane", fix="use the least-squares reference")
    coef = np.linalg.solve(As, rhs) / scale
    return float(coef[0]), float(coef[1]), float(coef[2])


def flatness_parameters(x_mm, y_mm, height_um, plane, reference: str) -> FlatnessParameters:
    """ISO 12781-1 parameters of the heights about a given plane.

    Parameters
    ----------
    x_mm, y_mm : array_like, shape (n,)
        Positions in mm.
    height_um : array_like, shape (n,)
        Heights in µm.
    plane : tuple (a_um, b_um_per_mm, c_um_per_mm)
        Reference plane ``z = a + b*x + c*y``.
    reference : str
        Its name, stored in the result.

    Returns
    -------
    FlatnessParameters
    """
    x, y, z = (np.asarray(v, float).ravel() for v in (x_mm, y_mm, height_um))
    a, b, c = (float(p) for p in plane)
    r = z - (a + b * x + c * y)
    p, v = float(r.max()), float(-r.min()) + 0.0  # + 0.0 turns -0.0 into 0.0
    t = p + v
    return FlatnessParameters(
        reference, a, b, c, t, p, v, float(np.sqrt(np.mean(r * r))), _normal(t, b, c)
    )


def evaluate_flatness(x_mm, y_mm, height_um, *, omit_corner: str = "ne", method: str = "auto") -> FlatnessReport:
    """Flatness about the LSPL, MZPL, three-corner and diagonal reference planes.

    Parameters
    ----------
    x_mm, y_mm : array_like, shape (n,)
        Positions in mm.
    height_um : array_like, shape (n,)
        Heights in µm.
    omit_corner : {"sw", "se", "ne", "nw"}
        Corner left out of the three-corner plane.
    method : {"auto", "hull", "lp"}
        Minimum-zone solver (all exact).

    Returns
    -------
    FlatnessReport

    Raises
    ------
    InputValueError
        Arrays differ in length, a value is not finite (names the point), unknown corner.
    GeometryError
        Fewer than three points not on one line.

    Notes
    -----
    For the minimum zone the reference is the mid-plane, so ``FLTp = FLTv = FLTt/2``.
    If several planes give the same minimum zone (ties on symmetric data), FLTq
    refers to the one the solver returns.

    Examples
    --------
    >>> import numpy as np
    >>> x, y = np.meshgrid([0.0, 1.0, 2.0], [0.0, 1.0, 2.0])
    >>> z = np.zeros((3, 3)); z[2, 2] = 1.0
    >>> rep = evaluate_flatness(x.ravel(), y.ravel(), z.ravel())
    >>> round(rep.mzpl.fltt_um, 6), round(rep.lspl.fltt_um, 4)
    (0.75, 0.8333)
    """
    if omit_corner not in _CORNER_NAMES:
        raise InputValueError(f"unknown corner {omit_corner!r}", fix="use sw, se, ne or nw")
    x, y, z = check_points(x_mm, y_mm, height_um)
    ls = flatness_parameters(x, y, z, _ls_coef(x, y, z), "LSPL")
    s = _mz(x, y, z, method)
    mz = flatness_parameters(x, y, z, (s.a_um + s.t_um / 2, s.b_um_per_mm, s.c_um_per_mm), "MZPL")
    corners = corner_stations(x, y)
    three = diag = None
    if corners is not None:
        try:
            three = flatness_parameters(x, y, z, three_corner_plane(x, y, z, omit=omit_corner), "three-corner")
        except GeometryError:
            three = None
        try:
            diag = flatness_parameters(x, y, z, diagonal_plane(x, y, z), "diagonal")
        except GeometryError:
            diag = None
    return FlatnessReport(ls, mz, three, diag, s.upper, s.lower, corners, omit_corner, int(x.size))
