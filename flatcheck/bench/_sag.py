"""A long beam that sags between its supports: flag it before any lapping advice.

A long, narrow surface (a granite straightedge, a guideway, a beam) bends under its own
weight between its supports. Its survey then shows a bow symmetric about the middle along
the length: the middle low when the supports are too near the ends, the ends low when they
are too far in. Lapping that shape away would only cut in a bow that comes back once the
supports are right, so the supports are checked first (:func:`check_sag`).

The self-weight deflection itself is :func:`flatcheck.bench._beam.beam_self_weight_deflection_um`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import InputValueError
from ._beam import GRANITE_DENSITY_KG_M3, GRANITE_E_GPA, beam_self_weight_deflection_um
from ._setup import airy_points, bessel_points, least_bow_points

__all__ = ["LONG_NARROW_ASPECT", "SYMMETRIC_SHARE", "SagCheck", "check_sag", "check_sag_of"]

#: A surface at least this many times longer than wide is "long and narrow" (a beam rather than a plate).
#: Common practice, no single source.
LONG_NARROW_ASPECT = 3.0
#: Share of the shape (squared deviation from the least-squares plane) a symmetric bow must explain to be
#: flagged as sag. Common practice, no single source.
SYMMETRIC_SHARE = 0.8


@dataclass(frozen=True)
class SagCheck:
    """Whether a surface's shape is a long beam's sag between its supports.

    Attributes
    ----------
    flagged : bool
        Long and narrow, and a symmetric bow along the length makes up most of the shape:
        check the supports before any lapping.
    long_narrow : bool
        At least :data:`LONG_NARROW_ASPECT` times longer than wide.
    aspect_ratio : float
        Length over width.
    axis : {"x", "y"}
        The long axis.
    length_mm : float
        Length along the long axis, mm.
    middle_minus_ends_um : float
        Height of the middle relative to the ends in the fitted symmetric bow, µm
        (negative: the middle is low, the beam sags between supports near its ends).
    symmetric_share : float
        Share (0 to 1) of the squared deviation from the least-squares plane that the bow explains.
    flatness_ls_um : float
        Peak-to-valley about the least-squares plane, µm.
    expected_sag_um : float or None
        Middle minus ends of the self-weight deflection on the stated supports, µm (None when
        the thickness or the supports are not given).
    message : str
        One or two sentences for the person; empty when not flagged.
    """

    flagged: bool
    long_narrow: bool
    aspect_ratio: float
    axis: str
    length_mm: float
    middle_minus_ends_um: float
    symmetric_share: float
    flatness_ls_um: float
    expected_sag_um: float | None
    message: str


def check_sag(x_mm, y_mm, height_um, *, length_mm: float | None = None, width_mm: float | None = None,
              thickness_mm: float | None = None, support_from_end_mm: float | None = None,
              density_kg_m3: float = GRANITE_DENSITY_KG_M3, youngs_modulus_gpa: float = GRANITE_E_GPA,
              min_aspect: float = LONG_NARROW_ASPECT, min_share: float = SYMMETRIC_SHARE) -> SagCheck:
    """Flag a long narrow surface whose shape is a symmetric bow along its length.

    The heights are fitted, by least squares, with a plane plus an even bow
    ``e (u^2 - mean(u^2))`` along the long axis (``u`` from -1 at one end to +1 at the other,
    about the surface's middle). The bow is flagged when the surface is long and narrow and
    the bow explains at least ``min_share`` of the squared deviation from the plane.

    Parameters
    ----------
    x_mm, y_mm : array_like, shape (n,)
        Positions, mm (x along the length, y along the width, as in a survey).
    height_um : array_like, shape (n,)
        Heights, µm.
    length_mm, width_mm : float, optional
        The surface's size, mm; by default the extent of the points.
    thickness_mm : float, optional
        The beam's depth, mm: with ``support_from_end_mm``, the expected self-weight sag is stated.
    support_from_end_mm : float, optional
        Where the beam stood during the survey: each support's distance from its end, mm.
    density_kg_m3, youngs_modulus_gpa : float
        Material data for the expected sag (granite by default).
    min_aspect, min_share : float
        Limits (see :data:`LONG_NARROW_ASPECT`, :data:`SYMMETRIC_SHARE`).

    Returns
    -------
    SagCheck

    Raises
    ------
    InputValueError
        Arrays of different shapes, non-finite values, fewer than four points.
    """
    x = np.asarray(x_mm, dtype=float).ravel()
    y = np.asarray(y_mm, dtype=float).ravel()
    h = np.asarray(height_um, dtype=float).ravel()
    if not (x.shape == y.shape == h.shape) or x.size < 4:
        raise InputValueError(f"{x.size}, {y.size} and {h.size} positions and heights", where="height_um",
                              fix="give at least four points, one height per position")
    if not (np.all(np.isfinite(x)) and np.all(np.isfinite(y)) and np.all(np.isfinite(h))):
        raise InputValueError("a position or height is not finite", where="height_um", fix="give finite numbers")
    L = float(length_mm) if length_mm is not None else float(x.max() - x.min())
    W = float(width_mm) if width_mm is not None else float(y.max() - y.min())
    if W > L:
        axis, along, length, width = "y", y, W, L
        mid = (W / 2.0) if width_mm is not None else float(y.min() + y.max()) / 2.0
    else:
        axis, along, length, width = "x", x, L, W
        mid = (L / 2.0) if length_mm is not None else float(x.min() + x.max()) / 2.0
    aspect = length / width if width > 0 else math.inf
    long_narrow = aspect >= min_aspect
    u = (along - mid) / (length / 2.0) if length > 0 else np.zeros_like(along)
    plane = np.column_stack([np.ones_like(x), x, y])
    res_plane = h - plane @ np.linalg.lstsq(plane, h, rcond=None)[0]
    flat = float(res_plane.max() - res_plane.min())
    ss_plane = float(res_plane @ res_plane)
    even = u**2 - np.mean(u**2)
    full = np.column_stack([plane, even])
    coef = np.linalg.lstsq(full, h, rcond=None)[0]
    res_bow = h - full @ coef
    share = 1.0 - float(res_bow @ res_bow) / ss_plane if ss_plane > 0 else 0.0
    middle_minus_ends = -float(coef[3])
    positions = np.unique(np.round(along, 6)).size
    tiny = flat <= 1e-9 * max(1.0, float(np.max(np.abs(h))))
    flagged = bool(long_narrow and positions >= 5 and not tiny and share >= min_share)
    expected = None
    if thickness_mm is not None and support_from_end_mm is not None:
        yy = beam_self_weight_deflection_um([0.0, length / 2.0], length, thickness_mm, support_from_end_mm,
                                            density_kg_m3=density_kg_m3, youngs_modulus_gpa=youngs_modulus_gpa)
        expected = float(yy[1] - yy[0])
    message = ""
    if flagged:
        shape = ("the middle low, as a beam sags between supports near its ends" if middle_minus_ends < 0 else
                 "the middle high, as a beam's ends droop beyond supports set too far in")
        a_airy, _ = airy_points(length)
        a_bessel, _ = bessel_points(length)
        a_least, _ = least_bow_points(length)
        message = (
            f"a symmetric bow of {abs(middle_minus_ends):.3g} µm along the {length:.0f} mm length ({shape}) makes up "
            f"{share:.0%} of the shape: check the supports before any lapping (least self-weight bow with supports "
            f"{a_least:.0f} mm from each end; Airy points {a_airy:.0f} mm, Bessel points {a_bessel:.0f} mm), "
            "then survey again"
        )
        if expected is not None:
            message += (
                f"; on supports {float(support_from_end_mm):.0f} mm from the ends a beam {float(thickness_mm):.0f} mm deep "
                f"sags {abs(expected):.3g} µm under its own weight (E {youngs_modulus_gpa:g} GPa, "
                f"{density_kg_m3:g} kg/m³)"
            )
    return SagCheck(flagged, bool(long_narrow), float(aspect), axis, float(length), middle_minus_ends,
                    float(share), flat, expected, message)


def check_sag_of(heightmap, *, thickness_mm: float | None = None, support_from_end_mm: float | None = None) -> SagCheck:
    """:func:`check_sag` of a height map (a reduced survey or a height-map file), on its stated outline.

    Parameters
    ----------
    heightmap : flatcheck.HeightMap
        Positions mm, heights µm; its ``length_mm`` and ``width_mm`` (when stated) give the outline,
        else the extent of its points.
    thickness_mm, support_from_end_mm : float, optional
        As :func:`check_sag` (the expected self-weight sag on those supports).

    Returns
    -------
    SagCheck
    """
    hm = heightmap
    return check_sag(hm.x_mm, hm.y_mm, hm.height_um, length_mm=hm.length_mm or None, width_mm=hm.width_mm or None,
                     thickness_mm=thickness_mm, support_from_end_mm=support_from_end_mm)
