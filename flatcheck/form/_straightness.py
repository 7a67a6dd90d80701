"""Straightness of a measured line (ISO 12780-1:2011 parameters).

A profile is heights ``z_um`` at positions ``s_mm`` along one line. Reference lines:

``LSLI``  least-squares line.
``MZLI``  minimum-zone line: mid-line of the two parallel lines, closest together
          along z, that enclose the profile. Exact: the zone width
          ``w(b) = max(z - b s) - min(z - b s)`` is convex and piecewise linear in the
          slope ``b`` with breakpoints only at slopes of edges of the profile's convex
          hull, so the minimum is found by evaluating ``w`` at those slopes.
``end-point``  the line through the first and last points (traditional).

Parameters about each reference: ``STRt`` (peak-to-valley), ``STRp`` (peak),
``STRv`` (valley depth, positive), ``STRq`` (RMS); deviations along z, with the
width normal to the line (slope made dimensionless) alongside.

Positions in mm, heights in µm, slopes in µm/mm.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import GeometryError, InputValueError

__all__ = ["StraightnessParameters", "StraightnessReport", "minimum_zone_line", "evaluate_straightness"]


@dataclass(frozen=True)
class StraightnessParameters:
    """ISO 12780-1 parameters about one reference line ``z = a + b*s``.

    Attributes
    ----------
    reference : str
        ``"LSLI"``, ``"MZLI"`` or ``"end-point"``.
    a_um, b_um_per_mm : float
        Reference line (µm at s = 0, slope µm/mm); for MZLI the mid-line.
    strt_um, strp_um, strv_um, strq_um : float
        Peak-to-valley, peak, valley depth (positive) and RMS deviation, along z (µm).
    normal_strt_um : float
        ``strt_um`` measured normal to the line (µm).
    """

    reference: str
    a_um: float
    b_um_per_mm: float
    strt_um: float
    strp_um: float
    strv_um: float
    strq_um: float
    normal_strt_um: float


@dataclass(frozen=True)
class StraightnessReport:
    """Straightness of one profile about each reference line.

    Attributes
    ----------
    lsli, mzli, endpoint : StraightnessParameters
    n_points : int
    """

    lsli: StraightnessParameters
    mzli: StraightnessParameters
    endpoint: StraightnessParameters
    n_points: int

    @property
    def straightness_um(self) -> float:
        """Minimum-zone straightness (STRt about MZLI) in µm."""
        return self.mzli.strt_um


def _check(s_mm, z_um):
    s = np.asarray(s_mm, dtype=float).ravel()
    z = np.asarray(z_um, dtype=float).ravel()
    if s.size != z.size:
        raise InputValueError(f"s and height arrays differ in length ({s.size}, {z.size})", fix="one height per position")
    for name, arr in (("s_mm", s), ("height_um", z)):
        bad = np.flatnonzero(~np.isfinite(arr))
        if bad.size:
            raise InputValueError(f"{name} is not a finite number", where=f"point {bad[0] + 1}", fix="remove it or give a number")
    if s.size < 2 or np.ptp(s) == 0:
        raise GeometryError("straightness needs points at two or more positions along the line", fix="measure more stations")
    return s, z


def _hull_chains(S, Z):
    """Lower and upper convex hull chains (Andrew's monotone chain) of points sorted by (S, Z)."""

    def chain(idx):
        out = []
        for i in idx:
            while len(out) >= 2:
                o, a = out[-2], out[-1]
                cross = (S[a] - S[o]) * (Z[i] - Z[o]) - (Z[a] - Z[o]) * (S[i] - S[o])
                if cross <= 0:
                    out.pop()
                else:
                    break
            out.append(i)
        return out

    order = np.lexsort((Z, S))
    lower = chain(order)
    upper = chain(order[::-1])
    return np.array(lower), np.array(upper)


def minimum_zone_line(s_mm, z_um):
    """Exact minimum-zone (vertical Chebyshev) line of a profile.

    Parameters
    ----------
    s_mm : array_like, shape (n,)
        Positions along the line in mm.
    z_um : array_like, shape (n,)
        Heights in µm.

    Returns
    -------
    tuple (a_um, b_um_per_mm, t_um)
        Lower zone line ``z = a + b*s`` and the vertical zone width ``t`` (µm).

    Raises
    ------
    InputValueError, GeometryError
        Bad arrays, or fewer than two distinct positions.

    References
    ----------
    Andrew's monotone chain for the hull (A.M. Andrew, Inf. Process. Lett. 9 (1979) 216-219).
    """
    s, z = _check(s_mm, z_um)
    s0, ss = s.mean(), np.ptp(s) / 2
    S = (s - s0) / ss
    zr = np.ptp(z)
    zs = zr if zr > 0 else 1.0
    Z = (z - z.mean()) / zs
    lower, upper = _hull_chains(S, Z)
    verts = np.unique(np.concatenate([lower, upper]))
    slopes = []
    for ch in (lower, upper):
        ds = np.diff(S[ch])
        ok = ds != 0
        slopes.append(np.diff(Z[ch])[ok] / ds[ok])
    b = np.unique(np.concatenate(slopes + [np.zeros(1)]))
    # w(b) on the hull vertices for every candidate slope, in chunks to bound memory
    best_w, best_b = np.inf, 0.0
    Sv, Zv = S[verts], Z[verts]
    for k in range(0, b.size, 512):
        bb = b[k : k + 512, None]
        R = Zv[None, :] - bb * Sv[None, :]
        w = R.max(axis=1) - R.min(axis=1)
        j = int(np.argmin(w))
        if w[j] < best_w:
            best_w, best_b = float(w[j]), float(bb[j, 0])
    r = Z - best_b * S
    lo = r.min()
    t = (r.max() - lo) * zs
    b_real = best_b * zs / ss
    a_real = z.mean() + lo * zs - b_real * s0
    return float(a_real), float(b_real), float(t)


def _params(ref, s, z, a, b):
    r = z - (a + b * s)
    p, v = float(r.max()), float(-r.min()) + 0.0
    t = p + v
    return StraightnessParameters(ref, float(a), float(b), t, p, v, float(np.sqrt(np.mean(r * r))), t / math.sqrt(1 + (b / 1000.0) ** 2))


def evaluate_straightness(s_mm, z_um) -> StraightnessReport:
    """Straightness of a profile about the LSLI, MZLI and end-point lines.

    Parameters
    ----------
    s_mm : array_like, shape (n,)
        Positions along the line in mm.
    z_um : array_like, shape (n,)
        Heights in µm.

    Returns
    -------
    StraightnessReport

    Raises
    ------
    InputValueError, GeometryError
        Bad arrays, or fewer than two distinct positions.

    Examples
    --------
    A circular-arc-like bow z = s^2 on [-1, 1] has minimum-zone straightness 1:

    >>> import numpy as np
    >>> s = np.linspace(-1, 1, 21)
    >>> round(evaluate_straightness(s, s**2).straightness_um, 12)
    1.0
    """
    s, z = _check(s_mm, z_um)
    sm = s.mean()
    b_ls = float(np.sum((s - sm) * (z - z.mean())) / np.sum((s - sm) ** 2))
    a_ls = float(z.mean() - b_ls * sm)
    a, b, t = minimum_zone_line(s, z)
    i0, i1 = int(np.argmin(s)), int(np.argmax(s))
    b_e = (z[i1] - z[i0]) / (s[i1] - s[i0])
    a_e = z[i0] - b_e * s[i0]
    return StraightnessReport(
        _params("LSLI", s, z, a_ls, b_ls),
        _params("MZLI", s, z, a + t / 2, b),
        _params("end-point", s, z, a_e, b_e),
        int(s.size),
    )
