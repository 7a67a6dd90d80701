"""The surface under one pad: the footprint's sample points, the pad at one place, its gap field and the
form of a measured pad face.

A pad face is sampled by :func:`footprint` (a Simpson grid on a rectangle, equal-area rings on a disc,
at most :data:`MAX_FOOTPRINT_POINTS` points at a pitch of at most a :data:`SAMPLES_PER_PAD_SIDE`-th of its
smaller side). :func:`evaluate_pad_at` judges the surface under one pad at one place (:class:`PadStation`:
mean height, least-squares tilt, local minimum-zone flatness, least clearance), with the pad face resting
parallel to the least-squares plane of the surface under its footprint, the nominal gap above it;
:func:`gap_field_um` gives the film thickness under the pad so placed on a regular grid (:class:`GapField`,
the input of a film solver); :func:`pad_face_form` states the flatness and peak of a measured pad face
(:class:`PadFaceForm`). Positions in mm, heights µm, tilts arcsec.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import GeometryError, InputValueError
from ..form import least_squares_plane, minimum_zone
from ..form import HeightMap
from ..units import ARCSEC_TO_RAD
from ._carriage import Pad, _positive

__all__ = [
    "SAMPLES_PER_PAD_SIDE",
    "Footprint",
    "GapField",
    "PadStation",
    "PadFaceForm",
    "footprint",
    "evaluate_pad_at",
    "gap_field_um",
    "pad_face_form",
]

#: Footprint sampling: at least this many intervals along each side of a pad (pitch <= side / 20).
SAMPLES_PER_PAD_SIDE = 20
#: Most sample points under one pad face (a 400 x 400 grid).
MAX_FOOTPRINT_POINTS = 160_000

_UM_PER_MM_TO_ARCSEC = 1e-3 / ARCSEC_TO_RAD  # 1 µm/mm = 1e-3 rad, in arcsec (exact)


# --------------------------------------------------------------------------- sampling
@dataclass(frozen=True)
class Footprint:
    """Sample points of a pad face in pad coordinates, with quadrature weights.

    Attributes
    ----------
    u_mm, v_mm : ndarray, shape (m,)
        Positions relative to the pad centre (u along x, v along y), mm.
    weight : ndarray, shape (m,)
        Quadrature weights summing to 1 (the mean of ``f`` over the face is ``sum(weight * f)``); zero for
        points used only for form and clearance (edge and centre points of a circular pad).
    pitch_mm : float
        Target spacing of the points, mm.
    """

    u_mm: np.ndarray
    v_mm: np.ndarray
    weight: np.ndarray
    pitch_mm: float


def _simpson(n_intervals: int) -> np.ndarray:
    w = np.ones(n_intervals + 1)
    w[1:-1:2] = 4.0
    w[2:-1:2] = 2.0
    return w / w.sum()


def footprint(pad: Pad, *, pitch_mm: float | None = None) -> Footprint:
    """Sample points covering a pad face, edges included.

    Rectangular pads: a grid of nodes including the edges, with an even number of intervals along each side
    and a pitch of at most ``min(length, width) / 20`` (and at most ``pitch_mm``); the weights are the
    composite Simpson rule in each direction, so the mean is the integral mean over the face to fourth order.
    Circular pads: rings of points at the equal-area radii of annuli no wider than the pitch (exact for means
    of polynomials up to degree 2), plus the centre and a ring on the edge with zero weight (form only).

    Parameters
    ----------
    pad : Pad
        The pad.
    pitch_mm : float, optional
        Largest spacing of the points in mm (the default follows the pad size).

    Returns
    -------
    Footprint
    """
    h = min(pad.length_mm, pad.width_mm) / SAMPLES_PER_PAD_SIDE
    if pitch_mm is not None:
        h = min(h, _positive(pitch_mm, "sampling pitch (mm)"))
    if (pad.length_mm / h) * (pad.width_mm / h) > MAX_FOOTPRINT_POINTS:
        raise InputValueError(
            f"a sampling pitch of {h:.3g} mm puts about {(pad.length_mm / h) * (pad.width_mm / h):.3g} points under "
            f"a {pad.length_mm:g} x {pad.width_mm:g} mm pad; at most {MAX_FOOTPRINT_POINTS} are used",
            where="sampling pitch",
            fix=f"give a pitch of at least {math.sqrt(pad.length_mm * pad.width_mm / MAX_FOOTPRINT_POINTS):.3g} mm",
        )
    if pad.shape == "rect":
        nu = 2 * max(1, math.ceil(pad.length_mm / h / 2.0 - 1e-9))
        nv = 2 * max(1, math.ceil(pad.width_mm / h / 2.0 - 1e-9))
        u = np.linspace(-pad.length_mm / 2, pad.length_mm / 2, nu + 1)
        v = np.linspace(-pad.width_mm / 2, pad.width_mm / 2, nv + 1)
        U, V = np.meshgrid(u, v)
        W = np.outer(_simpson(nv), _simpson(nu))
        return Footprint(U.ravel(), V.ravel(), W.ravel(), h)
    radius = pad.length_mm / 2.0
    nr = max(2, math.ceil(radius / h - 1e-9))
    edges = np.linspace(0.0, radius, nr + 1)
    us, vs, ws = [np.zeros(1)], [np.zeros(1)], [np.zeros(1)]
    for r_in, r_out in zip(edges[:-1], edges[1:]):
        r = math.sqrt((r_in**2 + r_out**2) / 2.0)  # equal-area radius: exact mean of r^2 over the annulus
        m = max(8, math.ceil(2 * math.pi * r / h))
        t = (np.arange(m) + 0.5) * 2 * math.pi / m
        us.append(r * np.cos(t))
        vs.append(r * np.sin(t))
        ws.append(np.full(m, (r_out**2 - r_in**2) / radius**2 / m))
    m = max(16, math.ceil(2 * math.pi * radius / h))
    t = np.arange(m) * 2 * math.pi / m
    us.append(radius * np.cos(t))
    vs.append(radius * np.sin(t))
    ws.append(np.zeros(m))
    w = np.concatenate(ws)
    return Footprint(np.concatenate(us), np.concatenate(vs), w / w.sum(), h)


# --------------------------------------------------------------------------- one pad at one place
@dataclass(frozen=True)
class PadStation:
    """One pad at one carriage position.

    Attributes
    ----------
    name : str
        Pad name.
    x_mm, y_mm : float
        Pad centre on the surface, mm.
    mean_height_um : float
        Mean surface height under the footprint (area mean), µm.
    centre_height_um : float
        Surface height at the pad centre (the raw profile along the pad's centre line), µm.
    tilt_x_arcsec, tilt_y_arcsec : float
        Least-squares tilt of the surface under the footprint along x and y, arcsec.
    local_flatness_um : float
        Minimum-zone flatness of the surface within the footprint, µm.
    peak_um : float
        Highest point of the surface above the footprint's least-squares plane, µm.
    clearance_um : float
        Least clearance: ``gap - peak_um`` (minus the pad face's own peak when a face map is given), µm.
    """

    name: str
    x_mm: float
    y_mm: float
    mean_height_um: float
    centre_height_um: float
    tilt_x_arcsec: float
    tilt_y_arcsec: float
    local_flatness_um: float
    peak_um: float
    clearance_um: float


def _footprint_plane(fp: Footprint, z: np.ndarray):
    """Weighted least-squares plane ``mean + bx*u + by*v`` (the continuous LS plane of the footprint)."""
    keep = fp.weight > 0
    sw = np.sqrt(fp.weight[keep])
    A = np.column_stack([np.ones(keep.sum()), fp.u_mm[keep], fp.v_mm[keep]]) * sw[:, None]
    coef, *_ = np.linalg.lstsq(A, z[keep] * sw, rcond=None)
    return float(coef[0]), float(coef[1]), float(coef[2])


def evaluate_pad_at(
    surface: HeightMap,
    pad: Pad,
    x_mm: float,
    y_mm: float,
    *,
    name: str = "pad",
    fp: Footprint | None = None,
    face_peak_um: float = 0.0,
    method: str = "linear",
) -> PadStation | None:
    """Evaluate the surface under one pad centred at ``(x_mm, y_mm)``.

    Parameters
    ----------
    surface : HeightMap
        The measured surface (positions mm, heights µm).
    pad : Pad
        The pad.
    x_mm, y_mm : float
        Pad centre on the surface, mm.
    name : str
        Pad name for the result.
    fp : Footprint, optional
        Precomputed sample points (default: :func:`footprint` of the pad).
    face_peak_um : float
        Highest point of the pad face above its own least-squares plane, µm (0 for an ideal face).
    method : {"linear", "cubic"}
        Interpolation of the surface between its stations.

    Returns
    -------
    PadStation or None
        ``None`` when any part of the footprint lies outside the surveyed area (never extrapolated).
    """
    fp = footprint(pad) if fp is None else fp
    zc = surface.sample(np.append(x_mm + fp.u_mm, x_mm), np.append(y_mm + fp.v_mm, y_mm), method=method)
    return _pad_station(pad, fp, x_mm, y_mm, zc[:-1], float(zc[-1]), name, face_peak_um)


def _pad_station(pad, fp, x_mm, y_mm, z, centre_um, name, face_peak_um):
    """PadStation from the sampled heights ``z`` (shape (m,), µm) of the footprint; None if any is NaN."""
    if not np.isfinite(z).all():
        return None
    mean, bx, by = _footprint_plane(fp, z)
    peak = float(np.max(z - (mean + bx * fp.u_mm + by * fp.v_mm)))
    mz = minimum_zone(fp.u_mm, fp.v_mm, z)
    return PadStation(
        name=name,
        x_mm=float(x_mm),
        y_mm=float(y_mm),
        mean_height_um=float(np.sum(fp.weight * z)),
        centre_height_um=float(centre_um),
        tilt_x_arcsec=bx * _UM_PER_MM_TO_ARCSEC,
        tilt_y_arcsec=by * _UM_PER_MM_TO_ARCSEC,
        local_flatness_um=float(mz.flatness_um),
        peak_um=peak,
        clearance_um=pad.gap_um - peak - face_peak_um,
    )


@dataclass(frozen=True)
class GapField:
    """Film thickness under a pad on a regular grid (input for a film solver).

    Attributes
    ----------
    u_mm : ndarray, shape (nu,)
        Grid positions along x relative to the pad centre, mm (edges included).
    v_mm : ndarray, shape (nv,)
        Grid positions along y relative to the pad centre, mm (edges included).
    gap_um : ndarray, shape (nv, nu)
        Film thickness in µm: ``gap - (z - plane)``, with the pad face on the footprint's least-squares plane
        at the nominal gap; NaN outside a circular pad.
    inside : ndarray of bool, shape (nv, nu)
        True where the node lies on the pad face.
    tilt_x_arcsec, tilt_y_arcsec : float
        Tilt of the pad (the footprint's least-squares plane), arcsec.
    """

    u_mm: np.ndarray
    v_mm: np.ndarray
    gap_um: np.ndarray
    inside: np.ndarray
    tilt_x_arcsec: float
    tilt_y_arcsec: float


def gap_field_um(
    surface: HeightMap,
    pad: Pad,
    x_mm: float,
    y_mm: float,
    *,
    pitch_mm: float | None = None,
    method: str = "linear",
) -> GapField:
    """Film thickness under a pad centred at ``(x_mm, y_mm)`` on a regular grid.

    The pad face is placed as in :func:`evaluate_pad_at` (parallel to the least-squares plane of the footprint,
    the nominal gap above it), so ``nanmin(gap_um)`` equals that function's ``clearance_um`` up to sampling.

    Parameters
    ----------
    surface : HeightMap
        The measured surface (mm, µm).
    pad : Pad
        The pad.
    x_mm, y_mm : float
        Pad centre on the surface, mm.
    pitch_mm : float, optional
        Largest grid pitch in mm (default: the footprint sampling pitch, ``min(length, width) / 20``).
    method : {"linear", "cubic"}
        Interpolation of the surface.

    Returns
    -------
    GapField

    Raises
    ------
    GeometryError
        If the footprint leaves the surveyed area.
    """
    fp = footprint(pad, pitch_mm=pitch_mm)
    z = surface.sample(x_mm + fp.u_mm, y_mm + fp.v_mm, method=method)
    if not np.isfinite(z).all():
        raise GeometryError(
            f"the pad footprint at x = {x_mm:g} mm, y = {y_mm:g} mm leaves the surveyed area",
            fix="choose a pad position inside the measured surface",
        )
    mean, bx, by = _footprint_plane(fp, z)
    nu = max(2, math.ceil(pad.length_mm / fp.pitch_mm - 1e-9)) + 1
    nv = max(2, math.ceil(pad.width_mm / fp.pitch_mm - 1e-9)) + 1
    u = np.linspace(-pad.length_mm / 2, pad.length_mm / 2, nu)
    v = np.linspace(-pad.width_mm / 2, pad.width_mm / 2, nv)
    U, V = np.meshgrid(u, v)
    if pad.shape == "circle":
        inside = U**2 + V**2 <= (pad.length_mm / 2) ** 2 * (1 + 1e-12)
    else:
        inside = np.ones_like(U, dtype=bool)
    zz = np.full(U.shape, np.nan)
    zz[inside] = surface.sample(x_mm + U[inside], y_mm + V[inside], method=method)
    if not np.isfinite(zz[inside]).all():  # pragma: no cover - the footprint check above covers the face
        raise GeometryError("the pad face leaves the surveyed area", fix="choose a position inside the surface")
    gap = pad.gap_um - (zz - (mean + bx * U + by * V))
    return GapField(u, v, gap, inside, bx * _UM_PER_MM_TO_ARCSEC, by * _UM_PER_MM_TO_ARCSEC)


# --------------------------------------------------------------------------- pad face
@dataclass(frozen=True)
class PadFaceForm:
    """Form of a measured pad face.

    Attributes
    ----------
    flatness_um : float
        Minimum-zone flatness of the pad face, µm.
    peak_um : float
        Highest point of the face (towards the guide) above its least-squares plane, µm.
    n_points : int
        Number of measured points.
    """

    flatness_um: float
    peak_um: float
    n_points: int


def pad_face_form(face: HeightMap) -> PadFaceForm:
    """Minimum-zone flatness and peak of a pad face measured as a height map.

    Parameters
    ----------
    face : HeightMap
        The pad face, heights in µm positive away from the pad material (towards the guide).

    Returns
    -------
    PadFaceForm
    """
    ls = least_squares_plane(face.x_mm, face.y_mm, face.height_um)
    resid = face.height_um - (ls.a_um + ls.b_um_per_mm * face.x_mm + ls.c_um_per_mm * face.y_mm)
    mz = minimum_zone(face.x_mm, face.y_mm, face.height_um)
    return PadFaceForm(float(mz.flatness_um), float(resid.max()), face.n)
