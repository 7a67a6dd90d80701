"""Air-bearing fitness of a measured surface and the motion of a carriage riding on it.

An air-bearing pad floats on a film a few micrometres thick, so the guide surface under any pad footprint
must be flat to a small fraction of that gap, and the carriage carried by the pads follows the surface
*averaged* over each footprint. This module takes a measured surface (a :class:`~flatcheck.heightmap.HeightMap`)
and a pad or a carriage of pads and computes, for each position of the carriage along its travel:

- per pad: the mean surface height under the footprint, the least-squares tilt of the footprint, the local
  minimum-zone flatness within it and the least clearance between pad face and surface;
- for the carriage: its height, pitch and roll, from the pad-averaged heights;

then the carriage's vertical straightness (minimum zone, ISO 12780 style), the peak-to-valley of pitch and
roll, and a verdict (fit, marginal, unfit) against gap-derived limits and an optional motion budget.

Conventions
-----------
- ``x`` runs along the travel (the surface's long axis), ``y`` across it; positions in mm, heights in µm,
  positive up (away from the guide material, towards the pad).
- The pad's plane: the pad face rests parallel to the least-squares plane of the surface under its footprint,
  at the nominal gap above it; that plane passes through the mean height at the pad centre. So the film
  thickness at a point of the footprint is ``gap - (z - plane)`` and the least clearance is
  ``gap - max(z - plane)``. When a pad-face height map is given, its own highest point above its least-squares
  plane is subtracted as well: while the pad travels, its face's high spot passes over every part of the track,
  so the two peaks are added (a bound that is reached when the peaks meet).
- Pitch is positive when the carriage's front (larger x) rises; roll is positive when its +y side rises.
- Gap-derived limit: ``gap_fraction * gap``; no published ratio exists, the default 1/4 is common practice.
- Verdict: each check gives a ratio ``value / limit`` and an ISO 14253-1:2017 decision with the U of its figure
  from the survey's budget (:mod:`flatcheck.bearing._uncertainty`; simple acceptance without one): *unfit* when
  non-conformity is proven (value - U above the limit), *marginal* when undecided or when the ratio lies in
  ``[marginal_from, 1]`` (default 0.8, i.e. within 80-100 % of a limit), else *fit*.

References
----------
ISO 12780-1:2011, Geometrical product specifications - Straightness (minimum-zone reference line).
Pad averaging as a moving mean over the pad length: J. Japan Soc. Precision Eng. 67(6):903-909 (2001).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..errors import GeometryError, InputValueError
from ..form import least_squares_plane, minimum_zone
from ..form import HeightMap
from ..units import ARCSEC_TO_RAD

__all__ = [
    "DEFAULT_GAP_FRACTION",
    "DEFAULT_MARGINAL_FROM",
    "SAMPLES_PER_PAD_SIDE",
    "Pad",
    "PlacedPad",
    "Carriage",
    "MotionBudget",
    "Footprint",
    "GapField",
    "PadStation",
    "CarriageStation",
    "CarriageMotion",
    "PadFaceForm",
    "Check",
    "BearingResult",
    "footprint",
    "station_positions",
    "evaluate_pad_at",
    "gap_field_um",
    "pad_face_form",
    "straightness_mz_um",
    "evaluate_bearing",
    "survey_spacing_mm",
    "COARSE_SURVEY_FRACTION",
    "PAD_FACE_SIZE_TOLERANCE",
]

#: Default limit on the local form error under a pad, as a fraction of the nominal gap. No standard gives a
#: ratio; keeping the form under a footprint to a quarter of the gap or less is common practice, no single source.
DEFAULT_GAP_FRACTION = 0.25
#: A result within 80-100 % of its limit is "marginal" (a convention of this tool, stated in every report).
DEFAULT_MARGINAL_FROM = 0.8
#: Footprint sampling: at least this many intervals along each side of a pad (pitch <= side / 20).
SAMPLES_PER_PAD_SIDE = 20
#: Travel step: at most this fraction of the shortest pad length along the travel.
MAX_STEP_FRACTION = 0.1
#: Most carriage positions evaluated along one travel (a 2 m guideway at 0.02 mm steps).
MAX_POSITIONS = 100_000
#: Most sample points under one pad face (a 400 x 400 grid).
MAX_FOOTPRINT_POINTS = 160_000

_SHAPES = ("rect", "circle")
_KINDS = ("porous", "orifice")
_UM_PER_MM_TO_ARCSEC = 1e-3 / ARCSEC_TO_RAD  # 1 µm/mm = 1e-3 rad, in arcsec (exact)


def _positive(value, name: str, where: str | None = None) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputValueError(f"{name} must be a number, got {value!r}", where=where, fix=f"give {name} as a number") from None
    if not math.isfinite(v) or v <= 0.0:
        raise InputValueError(f"{name} must be a positive number, got {value!r}", where=where, fix=f"give {name} above 0")
    return v


# --------------------------------------------------------------------------- description
@dataclass(frozen=True)
class Pad:
    """One air-bearing pad.

    Attributes
    ----------
    shape : {"rect", "circle"}
        Rectangular or circular face.
    length_mm : float
        Size along the travel (x) in mm; the diameter for a circular pad.
    width_mm : float
        Size across the travel (y) in mm; the diameter for a circular pad.
    gap_um : float
        Nominal air gap (film thickness) in µm.
    kind : {"porous", "orifice"}
        How the air is fed. Recorded and reported; the limits do not depend on it.
    """

    shape: str
    length_mm: float
    width_mm: float
    gap_um: float
    kind: str = "porous"

    def __post_init__(self):
        if self.shape not in _SHAPES:
            raise InputValueError(f"unknown pad shape {self.shape!r}", fix="use 'rect' or 'circle'")
        if self.kind not in _KINDS:
            raise InputValueError(f"unknown pad kind {self.kind!r}", fix="use 'porous' or 'orifice'")
        object.__setattr__(self, "length_mm", _positive(self.length_mm, "pad length (mm)"))
        object.__setattr__(self, "width_mm", _positive(self.width_mm, "pad width (mm)"))
        object.__setattr__(self, "gap_um", _positive(self.gap_um, "air gap (µm)"))
        if self.shape == "circle" and self.length_mm != self.width_mm:
            raise InputValueError("a circular pad has one diameter", fix="give equal length and width")

    @classmethod
    def rect(cls, length_mm: float, width_mm: float, gap_um: float, kind: str = "porous") -> "Pad":
        """A rectangular pad ``length_mm`` (along x) by ``width_mm`` (across), gap in µm."""
        return cls("rect", length_mm, width_mm, gap_um, kind)

    @classmethod
    def circle(cls, diameter_mm: float, gap_um: float, kind: str = "porous") -> "Pad":
        """A circular pad of diameter ``diameter_mm``, gap in µm."""
        return cls("circle", diameter_mm, diameter_mm, gap_um, kind)

    @property
    def area_mm2(self) -> float:
        """Face area in mm²."""
        if self.shape == "circle":
            return math.pi * self.length_mm**2 / 4.0
        return self.length_mm * self.width_mm

    def describe(self) -> str:
        """Short text such as ``"120 x 80 mm rect, 8 µm porous"``."""
        size = f"Ø{self.length_mm:g} mm" if self.shape == "circle" else f"{self.length_mm:g} x {self.width_mm:g} mm"
        return f"{size} {self.kind} pad, gap {self.gap_um:g} µm"


@dataclass(frozen=True)
class PlacedPad:
    """A pad at its place on a carriage.

    Attributes
    ----------
    pad : Pad
        The pad.
    along_mm, across_mm : float
        Offset of the pad centre from the carriage reference point, along the travel (x) and across it (y), mm.
    name : str
        Label in reports.
    face : str
        The guide face the pad rides on (``"top"``, ``"side"``...). Only pads on the analysed face are evaluated.
    stiffness : float
        Relative film stiffness (dimensionless weight of the pad in the carriage fit; equal by default).
    """

    pad: Pad
    along_mm: float = 0.0
    across_mm: float = 0.0
    name: str = "pad"
    face: str = "top"
    stiffness: float = 1.0

    def __post_init__(self):
        for name in ("along_mm", "across_mm"):
            v = float(getattr(self, name))
            if not math.isfinite(v):
                raise InputValueError(f"pad {self.name!r}: {name} is not a finite number", fix="give a number in mm")
            object.__setattr__(self, name, v)
        object.__setattr__(self, "stiffness", _positive(self.stiffness, f"pad {self.name!r} stiffness"))


@dataclass(frozen=True)
class Carriage:
    """A rigid carriage on one or more pads, and its travel.

    Attributes
    ----------
    pads : tuple of PlacedPad
        The pads (at least one).
    face : str
        The face the measured surface is (pads on other faces are listed but not evaluated).
    y_mm : float or None
        Position of the carriage reference point across the face in mm; ``None``: centred on the surveyed area.
    travel_start_mm, travel_end_mm : float or None
        First and last position of the carriage reference point along x in mm; ``None``: the longest travel
        that keeps every pad over the surveyed area.
    step_mm : float or None
        Step between positions in mm; ``None``: the largest even step not above a tenth of the shortest pad
        length. A step above a tenth of a pad length is refused.
    label : str
        Description for reports.
    """

    pads: tuple
    face: str = "top"
    y_mm: float | None = None
    travel_start_mm: float | None = None
    travel_end_mm: float | None = None
    step_mm: float | None = None
    label: str = ""

    def __post_init__(self):
        pads = tuple(self.pads)
        if not pads:
            raise InputValueError("the carriage has no pads", fix="give at least one pad")
        object.__setattr__(self, "pads", pads)
        if self.step_mm is not None:
            object.__setattr__(self, "step_mm", _positive(self.step_mm, "travel step (mm)"))
        names = [p.name for p in pads]
        if len(set(names)) != len(names):
            raise InputValueError("two pads have the same name", fix="give each pad its own name")

    @classmethod
    def single(cls, pad: Pad, **kwargs) -> "Carriage":
        """The simplest carriage: one pad, centred on the carriage reference point."""
        return cls((PlacedPad(pad, name="pad"),), **kwargs)

    @property
    def active_pads(self) -> tuple:
        """The pads on the analysed face."""
        return tuple(p for p in self.pads if p.face == self.face)


@dataclass(frozen=True)
class MotionBudget:
    """Optional limits on the carriage motion (``None``: not checked).

    Attributes
    ----------
    straightness_um : float or None
        Vertical straightness (minimum zone) of the carriage path, µm.
    pitch_arcsec, roll_arcsec : float or None
        Peak-to-valley of pitch and roll over the travel, arcsec.
    """

    straightness_um: float | None = None
    pitch_arcsec: float | None = None
    roll_arcsec: float | None = None

    def __post_init__(self):
        for name in ("straightness_um", "pitch_arcsec", "roll_arcsec"):
            v = getattr(self, name)
            if v is not None:
                object.__setattr__(self, name, _positive(v, f"motion budget {name}"))


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


# --------------------------------------------------------------------------- straightness
def straightness_mz_um(x_mm, z_um) -> float:
    """Minimum-zone straightness of a profile: the least vertical distance between two parallel lines
    enclosing all points (ISO 12780-1 minimum-zone reference line, evaluated along z).

    Solved exactly as a linear program (scipy HiGHS): minimise ``t`` subject to ``0 <= z - (a + b x) <= t``.

    Parameters
    ----------
    x_mm : ndarray, shape (n,)
        Positions along the line, mm.
    z_um : ndarray, shape (n,)
        Heights, µm.

    Returns
    -------
    float
        Straightness in µm (0 for fewer than three points).
    """
    from scipy.optimize import linprog

    x = np.asarray(x_mm, float).ravel()
    z = np.asarray(z_um, float).ravel()
    if x.size < 3:
        return 0.0
    xc = (x - x.mean()) / max(np.ptp(x), 1e-300)
    A = np.column_stack([np.ones_like(xc), xc])
    A_ub = np.vstack([np.column_stack([A, np.zeros(x.size)]), np.column_stack([-A, -np.ones(x.size)])])
    b_ub = np.concatenate([z, -z])
    res = linprog([0, 0, 1], A_ub=A_ub, b_ub=b_ub, bounds=[(None, None)] * 3, method="highs")
    if res.status != 0:  # pragma: no cover - a feasible bounded LP always solves
        raise GeometryError(f"straightness LP failed: {res.message}")
    # the LP optimum is a vertex; recompute the zone from the line for an exact peak-to-valley
    r = z - A @ res.x[:2]
    return float(r.max() - r.min())


# --------------------------------------------------------------------------- carriage
@dataclass(frozen=True)
class CarriageStation:
    """The carriage at one position of its travel.

    Attributes
    ----------
    x_mm, y_mm : float
        Carriage reference point, mm.
    mean_height_um : float
        Carriage height at its reference point, µm (for a single pad: the mean surface height under it).
    pitch_arcsec, roll_arcsec : float
        Carriage attitude, arcsec (pitch + when the front rises, roll + when the +y side rises).
    local_flatness_um : float
        Largest local flatness under any pad at this position, µm.
    clearance_um : float
        Least clearance of any pad at this position, µm.
    pads : tuple of PadStation
        Per-pad results.
    """

    x_mm: float
    y_mm: float
    mean_height_um: float
    pitch_arcsec: float
    roll_arcsec: float
    local_flatness_um: float
    clearance_um: float
    pads: tuple


@dataclass(frozen=True)
class CarriageMotion:
    """The carriage path over the travel and how the pads average the surface.

    Attributes
    ----------
    x_mm : ndarray, shape (n,)
        Carriage positions (evaluated stations only), mm.
    path_um : ndarray, shape (n,)
        Carriage height at its reference point, µm.
    pitch_path_arcsec, roll_path_arcsec : ndarray, shape (n,)
        Carriage pitch and roll, arcsec.
    raw_profile_um : ndarray, shape (n,)
        Surface height on the carriage centre line at the same positions (no pad averaging), µm.
    straightness_um : float
        Minimum-zone straightness of ``path_um``, µm.
    raw_straightness_um : float
        Minimum-zone straightness of ``raw_profile_um``, µm.
    pitch_arcsec, roll_arcsec : float
        Peak-to-valley of pitch and roll over the travel, arcsec; NaN (with the path NaN too) when the pad
        layout does not determine that angle (see ``roll_determined``).
    pitch_determined, roll_determined : bool
        False when two or more pads stand on one line along the travel (roll) or across it (pitch): such
        pads, pivoting in their films, do not hold the carriage about that line, so its angle is set by
        whatever else guides the carriage, not by this surface.
    """

    x_mm: np.ndarray
    path_um: np.ndarray
    pitch_path_arcsec: np.ndarray
    roll_path_arcsec: np.ndarray
    raw_profile_um: np.ndarray
    straightness_um: float
    raw_straightness_um: float
    pitch_arcsec: float
    roll_arcsec: float
    pitch_determined: bool = True
    roll_determined: bool = True


@dataclass(frozen=True)
class Check:
    """One limit check.

    Attributes
    ----------
    name : str
        What is checked.
    value, limit : float
        Result and limit, in ``unit``.
    unit : str
        ``"um"`` or ``"arcsec"``.
    ratio : float
        ``value / limit``.
    status : {"fit", "marginal", "unfit"}
        ``unfit`` if ratio > 1, ``marginal`` if ratio >= marginal_from, else ``fit``.
    where : tuple of (float, float)
        Ranges of carriage position ``(x_from_mm, x_to_mm)`` where the check is marginal or unfit
        (for checks over the whole travel: the positions of its extremes).
    basis : str
        Where the limit comes from.
    expanded_uncertainty : float or None
        U of ``value`` in ``unit`` (coverage about 95 %) from the survey's budget; None when not known.
    decision : {"conforms", "undecided", "does-not-conform"} or None
        ISO 14253-1:2017 default rule with U (:func:`flatcheck.conformance.decide`), or simple acceptance
        when U is not known; ``status`` follows it: does not conform -> unfit, undecided -> marginal,
        conforms -> fit (marginal from ``marginal_from`` of the limit). None for checks judged otherwise.
    rule : {"iso14253-1", "simple-acceptance"} or None
        The rule applied.
    """

    name: str
    value: float
    limit: float
    unit: str
    ratio: float
    status: str
    where: tuple
    basis: str
    expanded_uncertainty: float | None = None
    decision: str | None = None
    rule: str | None = None


@dataclass(frozen=True)
class BearingResult:
    """Air-bearing fitness of a surface for a carriage.

    Attributes
    ----------
    carriage : Carriage
        The carriage evaluated.
    limit_um : float
        Gap-derived limit for the local flatness under a pad (``gap_fraction * gap``; the smallest over pads), µm.
    gap_fraction : float
        Fraction of the gap allowed as local form error (common practice default 1/4).
    marginal_from : float
        Fraction of a limit from which a result is marginal.
    local_flatness_max_um : float
        Largest local flatness under any pad anywhere on the travel, µm.
    clearance_min_um : float
        Least clearance anywhere on the travel, µm.
    stations : tuple of CarriageStation
        Evaluated positions.
    excluded : tuple of (float, str)
        Positions not evaluated and why (a footprint outside the surveyed area).
    skipped_pads : tuple of str
        Pads on other faces (not evaluated).
    motion : CarriageMotion
        Carriage path, pitch, roll and pad averaging.
    pad_face : PadFaceForm or None
        Measured pad face, when given.
    checks : tuple of Check
        All limit checks.
    verdict : {"fit", "marginal", "unfit"}
        Worst status over the checks.
    sampling_pitch_mm : float
        Largest spacing of the sample points under a pad, mm.
    step_mm : float
        Step between carriage positions, mm.
    notes : tuple of str
        Statements the report must carry (limit basis, marginal band, pad plane).
    warnings : tuple of str
        Cautions about this input: a surface longer across than along the travel, a survey too coarse to
        see the form under a pad, a pad-face map of another size than the pad.
    uncertainty : BearingUncertainty or None
        Which U the checks used and where it came from (:mod:`flatcheck.bearing._uncertainty`).
    """

    carriage: Carriage
    limit_um: float
    gap_fraction: float
    marginal_from: float
    local_flatness_max_um: float
    clearance_min_um: float
    stations: tuple
    excluded: tuple
    skipped_pads: tuple
    motion: CarriageMotion
    pad_face: PadFaceForm | None
    checks: tuple
    verdict: str
    sampling_pitch_mm: float
    step_mm: float
    notes: tuple = field(default=())
    warnings: tuple = field(default=())
    uncertainty: object = None


def station_positions(surface: HeightMap, carriage: Carriage) -> tuple[np.ndarray, float, float]:
    """Carriage positions along the travel.

    Parameters
    ----------
    surface : HeightMap
        The measured surface (its extent bounds the default travel).
    carriage : Carriage
        The carriage (pads on the analysed face set the default travel and step).

    Returns
    -------
    x_mm : ndarray, shape (n,)
        Positions of the carriage reference point, mm, evenly spaced, both ends included.
    y_mm : float
        Position of the carriage reference point across the face, mm.
    step_mm : float
        The step, mm (at most a tenth of the shortest pad length along x).

    Raises
    ------
    InputValueError
        A step above a tenth of a pad length, or a travel that ends before it starts.
    GeometryError
        No pad on the analysed face, or a carriage longer than the surveyed area.
    """
    pads = carriage.active_pads
    if not pads:
        raise GeometryError(
            f"no pad rides on the face {carriage.face!r}",
            where="face",
            fix="set the pads' face to the face that was measured",
        )
    xmin, xmax, ymin, ymax = surface.extent_mm
    y = 0.5 * (ymin + ymax) if carriage.y_mm is None else float(carriage.y_mm)
    lo = min(p.along_mm - p.pad.length_mm / 2 for p in pads)
    hi = max(p.along_mm + p.pad.length_mm / 2 for p in pads)
    start = xmin - lo if carriage.travel_start_mm is None else float(carriage.travel_start_mm)
    end = xmax - hi if carriage.travel_end_mm is None else float(carriage.travel_end_mm)
    if carriage.travel_start_mm is None and carriage.travel_end_mm is None and end < start - 1e-9:
        raise GeometryError(
            f"the carriage is {hi - lo:g} mm long but the surveyed area is only {xmax - xmin:g} mm long",
            where="pad size / carriage",
            fix="use a smaller pad or carriage, or measure a longer surface",
        )
    if end < start:
        if carriage.travel_end_mm is None:
            what = (f"the travel starts at {start:g} mm, beyond its last position that keeps every pad over the "
                    f"surveyed area ({end:g} mm)")
        elif carriage.travel_start_mm is None:
            what = (f"the travel ends at {end:g} mm, before its first position that keeps every pad over the "
                    f"surveyed area ({start:g} mm)")
        else:
            what = f"the travel ends ({end:g} mm) before it starts ({start:g} mm)"
        raise InputValueError(
            what,
            where="travel_start_mm/travel_end_mm",
            fix="swap or correct the travel limits" if None not in (carriage.travel_start_mm, carriage.travel_end_mm)
            else f"keep the travel within {xmin - lo:g} to {xmax - hi:g} mm (every pad over the surveyed area)",
        )
    max_step = MAX_STEP_FRACTION * min(p.pad.length_mm for p in pads)
    if carriage.step_mm is not None and carriage.step_mm > max_step * (1 + 1e-9):
        raise InputValueError(
            f"a travel step of {carriage.step_mm:g} mm is larger than a tenth of the pad length ({max_step:g} mm)",
            where="step_mm",
            fix=f"use a step of at most {max_step:g} mm",
        )
    step = max_step if carriage.step_mm is None else carriage.step_mm
    span = end - start
    if span <= 0:
        return np.array([start]), y, step
    n = max(1, math.ceil(span / step - 1e-9))
    if n + 1 > MAX_POSITIONS:
        raise InputValueError(
            f"{n + 1:.3g} carriage positions ({span:g} mm of travel in steps of {step:.3g} mm); "
            f"at most {MAX_POSITIONS} are evaluated",
            where="pad size / travel step",
            fix=(
                f"the step follows the pad length ({min(p.pad.length_mm for p in pads):.3g} mm): check the pad size, "
                "which is in mm"
                if carriage.step_mm is None
                else f"give a travel step of at least {span / (MAX_POSITIONS - 1):.3g} mm"
            ),
        )
    return np.linspace(start, end, n + 1), y, span / n


def attitude_determined(pads) -> tuple[bool, bool]:
    """Whether the pad layout fixes the carriage's pitch and roll: ``(pitch, roll)``.

    Pads pivoting in their films hold the carriage only through their heights, so the carriage's attitude is
    fixed only when the pad centres span an area. Two or more pads on one line leave the rotation about that
    line free: along the travel, roll; across it, pitch; an oblique line, both. A single pad is the carriage
    itself: its footprint tilt is its attitude, so both count as determined.

    Parameters
    ----------
    pads : sequence of PlacedPad
        The pads on the analysed face (offsets in mm).

    Returns
    -------
    tuple of bool
    """
    if len(pads) < 2:
        return True, True
    d = np.array([[p.along_mm, p.across_mm] for p in pads], float)
    d = d - d.mean(axis=0)
    size = max(max(p.pad.length_mm, p.pad.width_mm) for p in pads)
    scale = max(size, float(np.abs(d).max()), 1.0)
    u, sv, vt = np.linalg.svd(d, full_matrices=False)
    tol = 1e-9 * scale  # the same position within rounding
    rank = int(np.sum(sv > tol * math.sqrt(len(pads))))
    if rank >= 2:
        return True, True
    if rank == 0:  # every pad at one spot
        return False, False
    along, across = abs(vt[0, 0]), abs(vt[0, 1])  # direction of the line the pads stand on
    return bool(across < 1e-9), bool(along < 1e-9)


def _carriage_attitude(pads, stations):
    """Carriage height at its reference point and tilt (µm/mm) from the pad-averaged heights.

    Weighted least-squares plane through the pad centres at their mean heights (weights = stiffness). Tilt
    directions the pad layout cannot fix (one pad; pads in a line) take the stiffness-weighted mean of the
    pads' own footprint tilts.
    """
    k = np.array([p.stiffness for p in pads])
    d = np.array([[p.along_mm, p.across_mm] for p in pads])
    h = np.array([s.mean_height_um for s in stations])
    t0 = np.array([
        np.sum(k * [s.tilt_x_arcsec for s in stations]),
        np.sum(k * [s.tilt_y_arcsec for s in stations]),
    ]) / k.sum() / _UM_PER_MM_TO_ARCSEC
    dbar = k @ d / k.sum()
    hbar = k @ h / k.sum()
    dc = d - dbar
    r = h - hbar - dc @ t0
    sk = np.sqrt(k)
    delta = np.linalg.pinv(dc * sk[:, None], rcond=1e-9) @ (r * sk)  # min-norm: only determined directions
    g = t0 + delta
    return float(hbar - dbar @ g), float(g[0]), float(g[1])


def _ranges(x_mm: np.ndarray, flags: np.ndarray) -> tuple:
    """Contiguous runs of flagged positions as ``((x_from, x_to), ...)`` in mm."""
    out = []
    start = None
    for i, f in enumerate(flags):
        if f and start is None:
            start = i
        if not f and start is not None:
            out.append((float(x_mm[start]), float(x_mm[i - 1])))
            start = None
    if start is not None:
        out.append((float(x_mm[start]), float(x_mm[-1])))
    return tuple(out)


def evaluate_bearing(
    surface: HeightMap,
    carriage: Carriage,
    *,
    gap_fraction: float = DEFAULT_GAP_FRACTION,
    marginal_from: float = DEFAULT_MARGINAL_FROM,
    budget: MotionBudget | None = None,
    pad_face: HeightMap | None = None,
    sample_pitch_mm: float | None = None,
    method: str = "linear",
    progress=None,
    uncertainty=None,
) -> BearingResult:
    """Judge a measured surface for an air-bearing carriage and compute the carriage motion.

    Parameters
    ----------
    surface : HeightMap
        The measured guide surface (positions mm, heights µm).
    carriage : Carriage
        Pads, their places and the travel (:meth:`Carriage.single` for one pad).
    gap_fraction : float
        Limit on the local form error under a pad as a fraction of its gap (0 < f <= 1); the default 1/4 is
        common practice, no single source.
    marginal_from : float
        A result at or above this fraction of its limit (and not above the limit) is marginal (0 < m <= 1).
    budget : MotionBudget, optional
        Limits on straightness (µm), pitch and roll (arcsec) of the carriage motion.
    pad_face : HeightMap, optional
        Measured pad face (µm, positive towards the guide); checked against the same limit and its peak
        subtracted from every clearance.
    sample_pitch_mm : float, optional
        Largest spacing of the sample points under a pad (default ``min(length, width) / 20``), mm.
    method : {"linear", "cubic"}
        Interpolation of the surface between its stations.
    progress : callable, optional
        Called with 1 after each carriage position (for a progress bar); never prints itself.
    uncertainty : SurveyErrors, optional
        Monte Carlo height errors of ``surface``'s stations from its uncertainty budget: each check of the
        surface is then judged with the ISO 14253-1 default rule and the U the budget gives that figure
        (:mod:`flatcheck.bearing._uncertainty`); without it, simple acceptance (said in the notes).

    Returns
    -------
    BearingResult

    Raises
    ------
    InputValueError
        Bad fractions, a step above a tenth of a pad length.
    GeometryError
        No carriage position keeps all pads over the surveyed area.
    """
    gap_fraction = _positive(gap_fraction, "gap fraction")
    if gap_fraction > 1.0:
        raise InputValueError(f"gap fraction {gap_fraction:g} is above 1", fix="give a fraction such as 0.25")
    marginal_from = _positive(marginal_from, "marginal fraction")
    if marginal_from > 1.0:
        raise InputValueError(f"marginal fraction {marginal_from:g} is above 1", fix="give a fraction such as 0.8")
    budget = MotionBudget() if budget is None else budget
    pads = carriage.active_pads
    xs, y0, step = station_positions(surface, carriage)
    face = pad_face_form(pad_face) if pad_face is not None else None
    face_peak = 0.0 if face is None else max(face.peak_um, 0.0)
    fps = [footprint(p.pad, pitch_mm=sample_pitch_mm) for p in pads]

    # One interpolation call per pad for the whole travel (building the interpolant is the costly part):
    # samples[i] has shape (n_positions, m + 1), the last column being the pad centre.
    samples = []
    for p, fp in zip(pads, fps):
        u = np.append(fp.u_mm, 0.0)[None, :] + (xs + p.along_mm)[:, None]
        v = np.broadcast_to(np.append(fp.v_mm, 0.0)[None, :] + (y0 + p.across_mm), u.shape)
        samples.append(surface.sample(u, v, method=method))

    stations, excluded = [], []
    for k, x in enumerate(xs):
        per_pad = []
        for p, fp, zs in zip(pads, fps, samples):
            ps = _pad_station(
                p.pad, fp, x + p.along_mm, y0 + p.across_mm, zs[k, :-1], zs[k, -1], p.name, face_peak
            )
            if ps is None:
                excluded.append((float(x), f"pad {p.name!r} leaves the surveyed area"))
                break
            per_pad.append(ps)
        else:
            height, gx, gy = _carriage_attitude(pads, per_pad)
            stations.append(
                CarriageStation(
                    x_mm=float(x),
                    y_mm=y0,
                    mean_height_um=height,
                    pitch_arcsec=gx * _UM_PER_MM_TO_ARCSEC,
                    roll_arcsec=gy * _UM_PER_MM_TO_ARCSEC,
                    local_flatness_um=max(s.local_flatness_um for s in per_pad),
                    clearance_um=min(s.clearance_um for s in per_pad),
                    pads=tuple(per_pad),
                )
            )
        if progress is not None:
            progress(1)
    if not stations:
        xmin, xmax, ymin, ymax = surface.extent_mm
        raise GeometryError(
            "no carriage position keeps every pad over the surveyed area "
            f"(x {xmin:g} to {xmax:g} mm, y {ymin:g} to {ymax:g} mm)",
            where="travel / pad positions",
            fix="check the travel limits, the pad offsets and the y position (--y-mm) against the measured surface",
        )

    x_ok = np.array([s.x_mm for s in stations])
    path = np.array([s.mean_height_um for s in stations])
    pitch_fixed, roll_fixed = attitude_determined(pads)
    pitch = np.array([s.pitch_arcsec if pitch_fixed else np.nan for s in stations])
    roll = np.array([s.roll_arcsec if roll_fixed else np.nan for s in stations])
    raw = surface.sample(x_ok, np.full_like(x_ok, y0), method=method)
    raw_ok = np.isfinite(raw)
    motion = CarriageMotion(
        x_mm=x_ok,
        path_um=path,
        pitch_path_arcsec=pitch,
        roll_path_arcsec=roll,
        raw_profile_um=raw,
        straightness_um=straightness_mz_um(x_ok, path),
        raw_straightness_um=straightness_mz_um(x_ok[raw_ok], raw[raw_ok]) if raw_ok.sum() >= 3 else float("nan"),
        pitch_arcsec=float(np.ptp(pitch)) if pitch_fixed else float("nan"),
        roll_arcsec=float(np.ptp(roll)) if roll_fixed else float("nan"),
        pitch_determined=pitch_fixed,
        roll_determined=roll_fixed,
    )

    # ------------------------------------------------------------------ checks
    limits = {p.name: gap_fraction * p.pad.gap_um for p in pads}
    gaps = {p.name: p.pad.gap_um for p in pads}
    basis_gap = f"{gap_fraction:g} of the air gap (common practice, no published ratio)"
    # U of each figure from the survey's budget (ISO 14253-1 rule), or none (simple acceptance)
    unc_info, u_of = _check_uncertainties(surface, pads, fps, x_ok, y0, uncertainty, method, limits, gaps,
                                          pitch_fixed, roll_fixed)
    checks = []
    lf_ratio = np.array([max(ps.local_flatness_um / limits[ps.name] for ps in s.pads) for s in stations])
    worst = int(np.argmax(lf_ratio))
    worst_pad = max(stations[worst].pads, key=lambda ps: ps.local_flatness_um / limits[ps.name])
    lim = limits[worst_pad.name]
    checks.append(
        _make_check(
            "local flatness under pads", worst_pad.local_flatness_um, lim, "um",
            float(lf_ratio[worst]), marginal_from, x_ok, lf_ratio, basis_gap,
            u=None if u_of.get("local_ratio") is None else u_of["local_ratio"] * lim,
        )
    )
    # clearance: the surface peak (plus pad-face peak) consumes part of the gap; contact at ratio > 1
    cl_ratio = np.array([max((gaps[ps.name] - ps.clearance_um) / gaps[ps.name] for ps in s.pads) for s in stations])
    worst = int(np.argmax(cl_ratio))
    worst_pad = min(stations[worst].pads, key=lambda ps: ps.clearance_um / gaps[ps.name])
    gap = gaps[worst_pad.name]
    checks.append(
        _make_check(
            "form under pads against the gap (clearance)", gap - worst_pad.clearance_um,
            gap, "um", float(cl_ratio[worst]), marginal_from, x_ok, cl_ratio,
            "the nominal gap: at or above it the pad touches",
            u=None if u_of.get("clearance_ratio") is None else u_of["clearance_ratio"] * gap,
        )
    )
    if face is not None:  # a pad-face map states no uncertainty: simple acceptance
        lim = min(limits.values())
        r = face.flatness_um / lim
        status, dec = _judge(face.flatness_um, lim, None, r, marginal_from)
        checks.append(Check("pad face flatness", face.flatness_um, lim, "um", r, status, (), basis_gap, None,
                            dec.verdict, dec.rule))
    for name, value, lim, unit, series, key in (
        ("carriage straightness", motion.straightness_um, budget.straightness_um, "um", None, "straightness_um"),
        ("carriage pitch", motion.pitch_arcsec, budget.pitch_arcsec, "arcsec", pitch, "pitch_arcsec"),
        ("carriage roll", motion.roll_arcsec, budget.roll_arcsec, "arcsec", roll, "roll_arcsec"),
    ):
        if lim is None or not math.isfinite(value):  # an angle the pads do not determine: said in the notes
            continue
        r = value / lim
        u = u_of.get(key)
        status, dec = _judge(value, lim, u, r, marginal_from)
        if status == "fit":
            where = ()
        elif series is None:
            where = ((float(x_ok[0]), float(x_ok[-1])),)
        else:
            lo_x, hi_x = float(x_ok[int(np.argmin(series))]), float(x_ok[int(np.argmax(series))])
            where = ((lo_x, lo_x), (hi_x, hi_x))  # positions of the lowest and highest value
        checks.append(Check(name, value, lim, unit, r, status, where, "motion budget (user)", u, dec.verdict,
                            dec.rule))
    order = {"fit": 0, "marginal": 1, "unfit": 2}
    verdict = max((c.status for c in checks), key=order.__getitem__)

    notes = (
        f"Limit: local form under a pad <= {gap_fraction:g} x gap; no standard publishes this ratio, the default "
        "1/4 is common practice.",
        f"Marginal: a result within {marginal_from * 100:.0f}-100 % of its limit, or undecided (within U of it).",
        _rule_note(unc_info),
        "Pad plane: the pad face rests parallel to the least-squares plane of the surface under its footprint, "
        "the nominal gap above it; clearance = gap - highest point above that plane"
        + (" - pad face's highest point above its own least-squares plane." if face is not None else "."),
        "Carriage: least-squares plane through the pad-averaged heights (equal stiffness unless stated).",
    ) + tuple(
        f"{angle.capitalize()} is not determined by this carriage: its pads stand on one line, and pads "
        f"pivoting in their films do not hold the carriage about that line; its {angle} is set by whatever else "
        f"guides it, so no {angle} figure is given" + (f" and the {angle} budget is not checked." if lim is not None
                                                        else ".")
        for angle, fixed, lim in (("pitch", pitch_fixed, budget.pitch_arcsec), ("roll", roll_fixed, budget.roll_arcsec))
        if not fixed and len(pads) > 1
    ) + ((f"The surface is taken as the face {carriage.face!r} the pads ride on, its heights positive towards the "
          "pads; a survey made from above (level, autocollimator) describes a top face, so check that the file "
          "is a survey of this face.",) if carriage.face not in ("top",) else ())
    warnings = _input_warnings(surface, pads, xs, y0, pad_face)
    return BearingResult(
        carriage=carriage,
        limit_um=min(limits.values()),
        gap_fraction=gap_fraction,
        marginal_from=marginal_from,
        local_flatness_max_um=max(s.local_flatness_um for s in stations),
        clearance_min_um=min(s.clearance_um for s in stations),
        stations=tuple(stations),
        excluded=tuple(excluded),
        skipped_pads=tuple(p.name for p in carriage.pads if p.face != carriage.face),
        motion=motion,
        pad_face=face,
        checks=tuple(checks),
        verdict=verdict,
        sampling_pitch_mm=min(fp.pitch_mm for fp in fps),
        step_mm=step,
        notes=notes,
        warnings=warnings,
        uncertainty=unc_info,
    )


#: A survey whose stations are further apart than this fraction of a pad's size (along or across) cannot
#: show the form under the pad: the local flatness then comes mostly from interpolation (a convention of this
#: tool: with fewer than about three stations per pad length the footprint holds at most two of them).
COARSE_SURVEY_FRACTION = 0.5
#: A pad-face map whose extent differs from the pad's size by more than this fraction is probably of
#: another pad, or in other units (a convention of this tool).
PAD_FACE_SIZE_TOLERANCE = 0.10


def _size_mm(levels: np.ndarray, span: float) -> float:
    """Size represented by evenly spaced grid levels: the span plus one spacing (half a cell each side)."""
    return span * levels.size / (levels.size - 1) if levels.size > 1 else span


def _largest_gap(levels: np.ndarray, lo: float, hi: float) -> float:
    """Largest distance between consecutive sorted ``levels`` whose interval overlaps ``(lo, hi)``, mm."""
    if levels.size < 2:
        return float("inf")
    a, b = levels[:-1], levels[1:]
    overlap = (b > lo) & (a < hi)
    return float((b - a)[overlap].max()) if overlap.any() else 0.0


def survey_spacing_mm(surface: HeightMap, pad: PlacedPad, x_from_mm: float, x_to_mm: float, y_mm: float):
    """Spacing of the surveyed stations under a pad's track, along the travel and across it.

    Across: the largest gap between the stations' distinct y positions that overlaps the band the pad sweeps.
    Along: the largest gap between the distinct x positions of the stations inside that band (or, when none
    lies inside, on the nearest y positions either side) that overlaps the stretch the pad covers.

    Parameters
    ----------
    surface : HeightMap
        The measured surface.
    pad : PlacedPad
        The pad (its size and its offsets from the carriage reference point).
    x_from_mm, x_to_mm : float
        First and last position of the carriage reference point, mm.
    y_mm : float
        Carriage reference point across the face, mm.

    Returns
    -------
    (along_mm, across_mm) : tuple of float
    """
    x = np.round(surface.x_mm, 6)
    y = np.round(surface.y_mm, 6)
    half_l, half_w = pad.pad.length_mm / 2.0, pad.pad.width_mm / 2.0
    ylo, yhi = y_mm + pad.across_mm - half_w, y_mm + pad.across_mm + half_w
    xlo, xhi = x_from_mm + pad.along_mm - half_l, x_to_mm + pad.along_mm + half_l
    levels = np.unique(y)
    across = _largest_gap(levels, ylo, yhi)
    inside = (y >= ylo) & (y <= yhi)
    if not inside.any():
        below, above = levels[levels < ylo], levels[levels > yhi]
        near = [v[i] for v, i in ((below, -1), (above, 0)) if v.size]
        inside = np.isin(y, near)
    along = _largest_gap(np.unique(x[inside]), xlo, xhi)
    return along, across


def _input_warnings(surface: HeightMap, pads, xs: np.ndarray, y0: float, pad_face: HeightMap | None) -> tuple:
    """Cautions about the input that do not stop the evaluation (see ``BearingResult.warnings``)."""
    out = []
    xmin, xmax, ymin, ymax = surface.extent_mm
    lx = surface.length_mm or (xmax - xmin)
    ly = surface.width_mm or (ymax - ymin)
    if ly > lx:
        out.append(
            f"the surface is longer across (y, {ly:g} mm) than along x ({lx:g} mm), but the carriage travels "
            "along x with the pad length along x: check that x is the direction of travel"
        )
    worst = None
    for p in pads:
        along, across = survey_spacing_mm(surface, p, float(xs[0]), float(xs[-1]), y0)
        ratio = max(along / p.pad.length_mm, across / p.pad.width_mm)
        if ratio > COARSE_SURVEY_FRACTION and (worst is None or ratio > worst[0]):
            worst = (ratio, p, along, across)
    if worst is not None:
        _, p, along, across = worst
        who = "the pad" if len(pads) == 1 else f"pad {p.name!r}"
        size = (f"Ø{p.pad.length_mm:g} mm" if p.pad.shape == "circle"
                else f"{p.pad.length_mm:g} x {p.pad.width_mm:g} mm")
        along_max, across_max = COARSE_SURVEY_FRACTION * p.pad.length_mm, COARSE_SURVEY_FRACTION * p.pad.width_mm
        out.append(
            f"the surveyed stations are up to {along:.3g} mm apart along the travel and {across:.3g} mm across "
            f"under {who} ({size}), more than half its size: the local flatness under a pad comes mostly from "
            "interpolation between stations, not from measured form; to see that form, survey at most "
            + (f"{along_max:.3g} mm apart both ways" if along_max == across_max
               else f"{along_max:.3g} mm apart along and {across_max:.3g} mm across")
        )
    if pad_face is not None:
        grid = pad_face.grid
        fxmin, fxmax, fymin, fymax = pad_face.extent_mm
        if pad_face.length_mm and pad_face.width_mm:
            fx, fy = pad_face.length_mm, pad_face.width_mm
        elif grid is not None:
            fx, fy = _size_mm(grid[0], fxmax - fxmin), _size_mm(grid[1], fymax - fymin)
        else:
            fx, fy = fxmax - fxmin, fymax - fymin
        odd = sorted({
            (p.pad.shape, p.pad.length_mm, p.pad.width_mm) for p in pads
            if abs(fx - p.pad.length_mm) > PAD_FACE_SIZE_TOLERANCE * p.pad.length_mm
            or abs(fy - p.pad.width_mm) > PAD_FACE_SIZE_TOLERANCE * p.pad.width_mm
        })
        if odd:
            sizes = " and ".join(f"Ø{a:g} mm" if shape == "circle" else f"{a:g} x {b:g} mm" for shape, a, b in odd)
            out.append(
                f"the pad-face map covers {fx:.3g} x {fy:.3g} mm but the pad is {sizes} (more than "
                f"{100 * PAD_FACE_SIZE_TOLERANCE:.0f} % apart): check that the map is of this pad's face, in mm, "
                "with x along the travel"
            )
    return tuple(out)


def _judge(value: float, limit: float, u: float | None, ratio: float, marginal_from: float):
    """Status of one check and its ISO 14253-1 decision (:func:`flatcheck.conformance.decide`).

    Does not conform (value - U above the limit) -> unfit; undecided -> marginal; conforms (value + U within
    the limit) -> fit, or marginal from ``marginal_from`` of the limit. Without U, simple acceptance (the
    decision says so); with U = 0 this is the status of the value alone.
    """
    from ..conformance import CONFORMS, DOES_NOT_CONFORM, decide

    dec = decide(max(float(value), 0.0), float(limit), None if u is None else max(float(u), 0.0))
    if dec.verdict == DOES_NOT_CONFORM:
        return "unfit", dec
    if dec.verdict == CONFORMS and ratio < marginal_from:
        return "fit", dec
    return "marginal", dec


def _make_check(name, value, limit, unit, ratio, marginal_from, x_mm, ratios, basis, *, u=None) -> Check:
    status, dec = _judge(value, limit, u, ratio, marginal_from)
    du = 0.0 if u is None else float(u) / float(limit)  # U as a fraction of the limit, at every position
    if status == "unfit":
        flags = ratios - du > 1.0  # non-conformity proven there
    else:
        flags = (ratios + du > 1.0) | (ratios >= marginal_from)  # not proven fit there
    return Check(name, float(value), float(limit), unit, float(ratio), status, _ranges(x_mm, flags), basis,
                 None if u is None else float(u), dec.verdict, dec.rule)


def _check_uncertainties(surface, pads, fps, x_ok, y0, uncertainty, method, limits, gaps, pitch_fixed, roll_fixed):
    """(BearingUncertainty, {figure: U}) from the survey's Monte Carlo height errors, or simple acceptance."""
    from ._uncertainty import MODEL_TEXT, NO_U_TEXT, BearingUncertainty, bearing_trials, local_uncertainty

    if uncertainty is None:
        return BearingUncertainty("simple-acceptance", NO_U_TEXT, "-"), {}
    E = np.asarray(uncertainty.errors_um, dtype=float)
    per_trial = x_ok.size * sum(fp.u_mm.size for fp in fps)
    k = bearing_trials(E.shape[0], per_trial)
    u = local_uncertainty(surface, pads, fps, x_ok, y0, E[:k], method=method,
                          limits_um=[limits[p.name] for p in pads], gaps_um=[gaps[p.name] for p in pads],
                          pitch_fixed=pitch_fixed, roll_fixed=roll_fixed)
    lim = min(limits.values())
    gap = min(gaps.values())
    shown = {"local flatness under pads": u["local_ratio"] * lim,
             "form under pads against the gap (clearance)": u["clearance_ratio"] * gap,
             "carriage straightness": u["straightness_um"]}
    for name, key in (("carriage pitch", "pitch_arcsec"), ("carriage roll", "roll_arcsec")):
        if u[key] is not None:
            shown[name] = u[key]
    info = BearingUncertainty("iso14253-1", uncertainty.source, MODEL_TEXT, int(u["trials"]),
                              surface_u_um=uncertainty.surface_u_um, seed=uncertainty.seed,
                              budget_trials=uncertainty.budget_trials, expanded_uncertainty=shown)
    return info, u


def _rule_note(info) -> str:
    """The decision rule of the checks, in a sentence."""
    if info.rule != "iso14253-1":
        return f"Decision rule: {info.source}."
    return (f"Decision rule: ISO 14253-1:2017 default: fit only when value + U is within the limit, unfit only "
            f"when value - U is beyond it, otherwise marginal; U (95 %) of each figure from {info.source}, "
            f"{info.trials} trials carried to the figures under the pads (docs/methods.md); the pad-face map "
            "and the film checks state no uncertainty and are judged by simple acceptance.")
