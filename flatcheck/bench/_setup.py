"""The set-up sheet: how to lay out the work at the bench before the first reading.

For a planned survey, :func:`setup_sheet` says for each line, in the order of the survey
file, where the instrument stands and at what distance, which runs to walk, and about how
long the survey takes; where the surface's supports go; and how long to let surface and
instrument soak in the room first.

Supports
--------
- A plate stands on **three points** (a three-legged stool never rocks); DIN 876-1 states
  flatness with the plate on three support points set and marked by its maker.
  Without marks, common practice (no single source) puts them about a fifth
  of the length in from the ends and of the width in from the sides: two under one end,
  one under the middle of the other. A beam model puts supports about 0.2 L in from the
  ends and finds the self-weight bow about ten times smaller than on supports at the ends
  (thin-plate thermal bending, derived).
- A **long beam** on two supports (:func:`airy_points`, :func:`bessel_points`,
  :func:`least_bow_points`): the **Airy points**, ``L / sqrt(3) = 0.5774 L`` apart, leave the
  end faces vertical (zero slope at the ends; exact from beam theory, see
  :mod:`flatcheck.bench._beam`); the **Bessel points**, ``0.5594 L`` apart, change the beam's
  length least (from memory; the test derives 0.55938 L from beam
  theory); supports ``0.2231 L`` from the ends give the least peak-to-valley self-weight bow
  (derived numerically here).

Soak
----
Let the surface stand in the room for 24 h after it was moved in or the room's temperature
changed, and the instrument for an hour, before reading: common practice, no single source.
DIN 876-1 asks for no one-sided heating or cooling, at most 2 K temperature difference in
the plate and at least 2 h drying after wet cleaning (DIN 876-1). Why it
matters: a vertical temperature difference ``dT`` bows a plate of thickness ``t`` by
``alpha dT L^2 / (8 t)`` over a length ``L`` (thin-plate thermal bending).
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np

from ..errors import InputValueError
from ._beam import beam_self_weight_deflection_um

__all__ = [
    "AIRY_SPACING_RATIO",
    "BESSEL_SPACING_RATIO",
    "THREE_POINT_INSET",
    "SOAK_HOURS_SURFACE",
    "SOAK_HOURS_INSTRUMENT",
    "DRY_HOURS_AFTER_WET_CLEANING",
    "GRANITE_CTE_PER_K",
    "Pace",
    "BeamSupports",
    "LineSetup",
    "SetupSheet",
    "airy_points",
    "bessel_points",
    "least_bow_points",
    "three_point_support",
    "beam_supports",
    "setup_sheet",
]

#: Airy points: spacing / length = 1/sqrt(3) (zero end slope of a uniform beam on two symmetric
#: supports; exact from beam theory; 0.5774 L).
AIRY_SPACING_RATIO = 1.0 / math.sqrt(3.0)
#: Bessel points: spacing / length = 0.5594 (least change of length; from memory).
BESSEL_SPACING_RATIO = 0.5594
#: Three-point support without the maker's marks: inset as a fraction of length and width.
#: Common practice, no single source (supports about 0.2 L in, beam model).
THREE_POINT_INSET = 0.2
#: Soak before reading, h: the surface after it was moved or the room changed; the instrument.
#: Common practice, no single source.
SOAK_HOURS_SURFACE = 24.0
SOAK_HOURS_INSTRUMENT = 1.0
#: Drying time after wet cleaning, h (DIN 876-1).
DRY_HOURS_AFTER_WET_CLEANING = 2.0
#: Thermal expansion of metrology granite, 1/K: 6e-6, inside the typical 6-8e-6 (trade data of stone suppliers).
GRANITE_CTE_PER_K = 6e-6

_COMPASS = ("east", "north-east", "north", "north-west", "west", "south-west", "south", "south-east")


@dataclass(frozen=True)
class Pace:
    """How long the work takes; illustrative figures (common practice, no single source).

    Attributes
    ----------
    seconds_per_reading : float
        Place the instrument, let it settle, read and note one reading, s.
    minutes_per_line : float
        Clean the line and set up (or aim) the instrument for it, min.
    minutes_per_extra_run : float
        Turn round for each further run of a line, min.
    """

    seconds_per_reading: float = 30.0
    minutes_per_line: float = 5.0
    minutes_per_extra_run: float = 2.0


@dataclass(frozen=True)
class BeamSupports:
    """Two-point supports of a long beam, mm from each end and apart.

    Attributes
    ----------
    length_mm : float
    airy_from_end_mm, airy_spacing_mm : float
        Airy points (end faces vertical).
    bessel_from_end_mm, bessel_spacing_mm : float
        Bessel points (least change of length).
    least_bow_from_end_mm, least_bow_spacing_mm : float
        Least peak-to-valley self-weight bow.
    sources : tuple of str
    """

    length_mm: float
    airy_from_end_mm: float
    airy_spacing_mm: float
    bessel_from_end_mm: float
    bessel_spacing_mm: float
    least_bow_from_end_mm: float
    least_bow_spacing_mm: float
    sources: tuple


@dataclass(frozen=True)
class LineSetup:
    """One line of the set-up sheet.

    Attributes
    ----------
    order : int
        1-based place in the work.
    line : str
    runs : tuple of str
        The runs to walk, e.g. ``("forward", "reverse")``.
    start, end : str
        First and last station.
    start_mm, end_mm : tuple of float
        Their ``(x, y)``, mm from the south-west corner.
    heading : str
        Compass direction from start to end (north = +y), e.g. ``"south-west -> north-east"``.
    length_mm : float
        First to last station, mm.
    steps : int
    foot_spacing_mm : float
        Base, mm (0 for an indicator).
    readings : int
        Readings of all its runs.
    instrument_mm : tuple of float or None
        Autocollimators: where it stands, ``(x, y)`` mm, on the line's extension behind ``start``.
    on_surface : bool or None
        Whether that spot is on the surface (else on a stand beside it).
    distance_mm : tuple of float or None
        Autocollimators: nearest and farthest distance from the instrument to the mirror's
        centre, mm (the working range the instrument must cover).
    instruction : str
        What to set up, in words.
    minutes : float
        Time for the line, min.
    """

    order: int
    line: str
    runs: tuple
    start: str
    end: str
    start_mm: tuple
    end_mm: tuple
    heading: str
    length_mm: float
    steps: int
    foot_spacing_mm: float
    readings: int
    instrument_mm: tuple | None
    on_surface: bool | None
    distance_mm: tuple | None
    instruction: str
    minutes: float


@dataclass(frozen=True)
class SetupSheet:
    """Everything to set up before the first reading.

    Attributes
    ----------
    pattern, instrument : str
        The survey's pattern and instrument kind.
    lines : tuple of LineSetup
        In the order of the work.
    readings : int
        All readings of all runs.
    minutes : float
        Estimated time of the survey (readings, set-ups, turns), min; soak not included.
    pace : Pace
        The figures behind ``minutes``.
    three_point_mm : tuple of (float, float)
        Three support points ``(x, y)``, mm, when the maker's marks are missing.
    beam : BeamSupports or None
        Two-point supports, for a long narrow surface.
    soak_hours_surface, soak_hours_instrument : float
    thermal_bow_um_per_0p1k : float or None
        Bow over the length from a 0.1 K top-to-bottom temperature difference, µm (needs the thickness).
    mass_kg : tuple of float or None
        Mass range for granite 2600-2800 kg/m^3, kg (needs the thickness).
    notes : tuple of str
        Sentences to print with the sheet (supports, soak, sources).
    """

    pattern: str
    instrument: str
    lines: tuple
    readings: int
    minutes: float
    pace: Pace
    three_point_mm: tuple
    beam: BeamSupports | None
    soak_hours_surface: float
    soak_hours_instrument: float
    thermal_bow_um_per_0p1k: float | None
    mass_kg: tuple | None
    notes: tuple


def _length(length_mm) -> float:
    L = float(length_mm)
    if not (math.isfinite(L) and L > 0):
        raise InputValueError(f"length {length_mm!r} mm is not a positive number", where="length_mm",
                              fix="give the length in mm")
    return L


def airy_points(length_mm: float) -> tuple:
    """Airy points of a beam: ``(distance from each end, spacing)`` in mm.

    Examples
    --------
    >>> [round(v, 1) for v in airy_points(1000.0)]
    [211.3, 577.4]
    """
    L = _length(length_mm)
    s = L * AIRY_SPACING_RATIO
    return ((L - s) / 2.0, s)


def bessel_points(length_mm: float) -> tuple:
    """Bessel points of a beam: ``(distance from each end, spacing)`` in mm."""
    L = _length(length_mm)
    s = L * BESSEL_SPACING_RATIO
    return ((L - s) / 2.0, s)


@functools.lru_cache(maxsize=1)
def _least_bow_ratio() -> float:
    """Support distance from the ends / length with the least peak-to-valley self-weight bow (derived)."""
    x = np.linspace(0.0, 500.0, 2001)  # half a 1000 mm beam is enough: the bow is symmetric

    def pv(r):
        y = beam_self_weight_deflection_um(x, 1000.0, 100.0, 1000.0 * r)
        return float(y.max() - y.min())

    lo, hi = 0.15, 0.30  # golden-section search; PV is unimodal in between
    g = (math.sqrt(5.0) - 1.0) / 2.0
    a, b = hi - g * (hi - lo), lo + g * (hi - lo)
    fa, fb = pv(a), pv(b)
    for _ in range(80):
        if fa < fb:
            hi, b, fb = b, a, fa
            a = hi - g * (hi - lo)
            fa = pv(a)
        else:
            lo, a, fa = a, b, fb
            b = lo + g * (hi - lo)
            fb = pv(b)
    return (lo + hi) / 2.0


def least_bow_points(length_mm: float) -> tuple:
    """Supports giving the least peak-to-valley self-weight bow: ``(from each end, spacing)``, mm.

    Found by minimising the bow of :func:`flatcheck.bench._beam.beam_self_weight_deflection_um`
    (about 0.2231 L from each end; the ratio does not depend on size or material).
    """
    L = _length(length_mm)
    a = L * _least_bow_ratio()
    return (a, L - 2.0 * a)


def three_point_support(length_mm: float, width_mm: float) -> tuple:
    """Three support points of a rectangular plate without the maker's marks, ``(x, y)`` mm.

    Two under the west end at :data:`THREE_POINT_INSET` of the width from the sides, one under
    the middle of the east end; all :data:`THREE_POINT_INSET` of the length in from their end.

    Examples
    --------
    >>> three_point_support(1000.0, 630.0)
    ((200.0, 126.0), (200.0, 504.0), (800.0, 315.0))
    """
    L, W = _length(length_mm), _length(width_mm)
    f = THREE_POINT_INSET
    return ((f * L, f * W), (f * L, (1.0 - f) * W), ((1.0 - f) * L, W / 2.0))


def beam_supports(length_mm: float) -> BeamSupports:
    """Airy, Bessel and least-bow supports of a long beam (see the module's docstring)."""
    L = _length(length_mm)
    a = airy_points(L)
    b = bessel_points(L)
    c = least_bow_points(L)
    return BeamSupports(
        L, a[0], a[1], b[0], b[1], c[0], c[1],
        (
            "Airy points L/sqrt(3) apart: zero end slope of a uniform beam (beam theory)",
            "Bessel points 0.5594 L apart: least change of length (from memory)",
            "least self-weight bow about 0.2231 L from the ends (derived from beam theory here)",
        ),
    )


def _heading(dx: float, dy: float) -> str:
    ang = math.degrees(math.atan2(dy, dx)) % 360.0
    k = int(round(ang / 45.0)) % 8
    return f"{_COMPASS[(k + 4) % 8]} -> {_COMPASS[k]}"


def setup_sheet(survey, *, runs=("forward", "reverse"), standoff_mm: float = 150.0, pace: Pace = Pace(),
                thickness_mm: float | None = None) -> SetupSheet:
    """The set-up sheet of a planned survey.

    Parameters
    ----------
    survey : flatcheck.Survey
        A planned survey (stations, lines, instrument; runs are not used).
    runs : sequence of str or mapping
        The runs of every line (``"forward"``, ``"reverse"``), or a mapping line name -> runs.
    standoff_mm : float
        Autocollimators: distance of the instrument behind each line's first station, mm
        (illustrative default 150 mm; the mirror must stay inside the instrument's range).
    pace : Pace
        Time figures for the estimate.
    thickness_mm : float, optional
        The surface's thickness, mm: gives the mass and the thermal bow per 0.1 K.

    Returns
    -------
    SetupSheet

    Raises
    ------
    InputValueError
        An unknown run kind, a negative stand-off, a bad thickness or pace.
    """
    inst = survey.instrument
    kind = inst.kind
    heights = inst.reads_heights
    L, W = float(survey.surface.length_mm), float(survey.surface.width_mm)
    so = float(standoff_mm)
    if not (math.isfinite(so) and so >= 0):
        raise InputValueError(f"stand-off {standoff_mm!r} mm", where="standoff_mm", fix="give a distance >= 0 in mm")
    for name in ("seconds_per_reading", "minutes_per_line", "minutes_per_extra_run"):
        v = getattr(pace, name)
        if not (math.isfinite(float(v)) and float(v) >= 0):
            raise InputValueError(f"{name} is {v!r}", where=name, fix="give a time >= 0")
    pos = {s.name: (s.x_mm, s.y_mm) for s in survey.stations}
    out = []
    total_readings = 0
    for i, ln in enumerate(survey.lines, start=1):
        line_runs = tuple(runs.get(ln.name, ("forward",)) if hasattr(runs, "get") else runs)
        bad = [r for r in line_runs if r not in ("forward", "reverse")]
        if bad or not line_runs:
            raise InputValueError(f"runs {line_runs!r} for line {ln.name!r}", where="runs",
                                  fix="use forward and/or reverse")
        a, b = pos[ln.stations[0]], pos[ln.stations[-1]]
        dx, dy = b[0] - a[0], b[1] - a[1]
        length = math.hypot(dx, dy)
        base = 0.0 if heights else float(ln.foot_spacing_mm)
        n_read = (len(ln.stations) if heights else ln.steps) * len(line_runs)
        total_readings += n_read
        back = " The back run walks from {e} to {s}.".format(e=ln.stations[-1], s=ln.stations[0]) if (
            "reverse" in line_runs) else ""
        inst_xy = on = dist = None
        if kind == "autocollimator":
            ux, uy = dx / length, dy / length
            inst_xy = (a[0] - so * ux, a[1] - so * uy)
            on = bool(0.0 <= inst_xy[0] <= L and 0.0 <= inst_xy[1] <= W)
            dist = (so + base / 2.0, so + length - base / 2.0)
            where = "on the surface" if on else "off the surface, on a stand beside it at the surface's height"
            instruction = (
                f"Autocollimator {so:.0f} mm behind {ln.stations[0]} on the line's extension ({where}), aimed along "
                f"the line toward {ln.stations[-1]}; the mirror on its {base:.1f} mm base walks from {ln.stations[0]} "
                f"to {ln.stations[-1]}, {dist[0]:.0f} to {dist[1]:.0f} mm from the instrument.{back}"
            )
        elif kind == "level":
            instruction = (f"The level on its {base:.1f} mm base walks the line from {ln.stations[0]} to "
                           f"{ln.stations[-1]}, feet on successive stations.{back}")
        elif kind == "differential-level":
            instruction = (f"The moving level on its {base:.1f} mm base walks the line from {ln.stations[0]} to "
                           f"{ln.stations[-1]}; the reference level stays on its one spot, off the lines, for the "
                           f"whole survey.{back}")
        else:
            instruction = (f"The indicator's stand on the reference surface; touch the stations from "
                           f"{ln.stations[0]} to {ln.stations[-1]} in turn.{back}")
        minutes = (n_read * pace.seconds_per_reading / 60.0 + pace.minutes_per_line
                   + pace.minutes_per_extra_run * (len(line_runs) - 1))
        out.append(LineSetup(i, ln.name, line_runs, ln.stations[0], ln.stations[-1], a, b, _heading(dx, dy),
                             length, ln.steps, base, n_read, inst_xy, on, dist, instruction, minutes))
    long_narrow = max(L, W) >= 3.0 * min(L, W)
    beam = beam_supports(max(L, W)) if long_narrow else None
    bow = mass = None
    notes = [
        "Supports: keep the surface on the three points its maker set and marked (DIN 876-1 states flatness "
        "on them); without marks use the three points below (common practice, no single source).",
        f"Soak: let the surface stand in the room {SOAK_HOURS_SURFACE:.0f} h after it was moved in or the room's "
        f"temperature changed, and the instrument {SOAK_HOURS_INSTRUMENT:.0f} h, before reading (common practice, "
        f"no single source); after wet cleaning let it dry {DRY_HOURS_AFTER_WET_CLEANING:.0f} h, and keep sun, "
        "heaters and draughts off it (DIN 876-1).",
    ]
    if thickness_mm is not None:
        t = float(thickness_mm)
        if not (math.isfinite(t) and t > 0):
            raise InputValueError(f"thickness {thickness_mm!r} mm", where="thickness_mm", fix="give it in mm")
        span = max(L, W)
        bow = GRANITE_CTE_PER_K * 0.1 * (span * 1e-3) ** 2 / (8.0 * t * 1e-3) * 1e6
        vol = L * W * t * 1e-9
        mass = (2600.0 * vol, 2800.0 * vol)  # granite 2600-2800 kg/m^3 (thin-plate thermal bending)
        notes.append(
            f"A 0.1 K difference between top and bottom bows this surface by about {bow:.2g} µm over its "
            f"{span:.0f} mm length (alpha {GRANITE_CTE_PER_K:g}/K)."
        )
    if beam is not None:
        notes.append(
            f"Long beam: on two supports, the least self-weight bow is with them {beam.least_bow_from_end_mm:.0f} mm "
            f"from each end; Airy points {beam.airy_from_end_mm:.0f} mm, Bessel points {beam.bessel_from_end_mm:.0f} mm."
        )
    minutes = float(sum(x.minutes for x in out))
    return SetupSheet(survey.pattern, kind, tuple(out), total_readings, minutes, pace, three_point_support(L, W),
                      beam, SOAK_HOURS_SURFACE, SOAK_HOURS_INSTRUMENT, bow, mass, tuple(notes))
