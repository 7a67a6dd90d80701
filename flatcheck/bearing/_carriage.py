"""Pads and carriages as described: the pad, its place on a carriage, the carriage and its travel.

Here live the description of an air-bearing carriage, checked as it is built: :class:`Pad` (shape, size,
nominal gap, feed), :class:`PlacedPad` (its offsets from the carriage reference point, the face it rides
on, its relative stiffness), :class:`Carriage` (its pads, the analysed face and the travel) and
:class:`MotionBudget` (optional limits on the carriage motion); then what follows from the description
alone: the carriage positions along its travel (:func:`station_positions`, bounded by
:data:`MAX_STEP_FRACTION` and :data:`MAX_POSITIONS`) and whether the pad layout fixes the carriage's pitch
and roll (:func:`attitude_determined`). Positions in mm, gaps in µm; ``x`` runs along the travel, ``y``
across it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import GeometryError, InputValueError
from ..form import HeightMap

__all__ = [
    "Pad",
    "PlacedPad",
    "Carriage",
    "MotionBudget",
    "station_positions",
]

#: Travel step: at most this fraction of the shortest pad length along the travel.
MAX_STEP_FRACTION = 0.1
#: Most carriage positions evaluated along one travel (a 2 m guideway at 0.02 mm steps).
MAX_POSITIONS = 100_000

_SHAPES = ("rect", "circle")
_KINDS = ("porous", "orifice")


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


# --------------------------------------------------------------------------- travel
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
            where="pad size / travel step" if carriage.step_mm is None else "step_mm",
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
