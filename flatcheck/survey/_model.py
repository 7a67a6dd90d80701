"""The survey: where the stations are, which lines join them, what was read.

A survey is a set of named *stations* (points on the surface, in mm) joined by
*lines*. Each line is walked in steps of one foot spacing from station to
station; each step gives one reading. A line may be walked several times
(*runs*, e.g. forward and back); the reduction uses every run.

Sign convention (explicit, the same for every instrument)
---------------------------------------------------------
A positive reading means the surface *rises* from the step's station nearer the
line's first station to the one nearer its last station, whatever order the
run was walked in. A run taken with the instrument turned round sets
``flip_sign``. Autocollimators are read as *mirror tilt*; an instrument that
reports the beam deviation (twice the tilt) is halved on reading.

Coordinates: x along the length (east), y along the width (north), origin at
the south-west corner of the surface, in mm. Heights in µm, positive up.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property

import numpy as np

from ..errors import InputValueError, LayoutError
from ..units import angle_unit, length_unit, rise_um

__all__ = [
    "INSTRUMENT_KINDS",
    "PATTERNS",
    "Station",
    "Run",
    "SurveyLine",
    "Instrument",
    "Surface",
    "Survey",
    "Observations",
    "observations",
    "MAX_SLOPE_RAD",
    "MAX_HEIGHT_UM",
    "check_plausible_readings",
]

#: Instruments flatcheck reduces. ``"level"`` and ``"differential-level"`` are
#: gravity-referenced (one zero shared by every line); an ``"autocollimator"``
#: is re-aimed per line (each line has its own zero); an ``"indicator"`` reads
#: heights from a common datum.
INSTRUMENT_KINDS = ("autocollimator", "level", "differential-level", "indicator")
PATTERNS = ("union-jack", "grid", "lines")

#: Largest slope (rad, or rise over run) a reading may imply: 0.02 = 20 mm/m ≈ 4125 arcsec. A surface
#: surveyed for flatness is set up level, or its instrument re-aimed, to far better than this (levels
#: and autocollimators read over a few hundred arcsec at most), so a larger reading is a slip: a wrong
#: unit, a misplaced decimal point or a keyed-in serial number. Common practice, no single source.
#: Beyond about 0.5 rad, base * tan(angle) would also stop meaning anything (tan changes sign at 90°).
MAX_SLOPE_RAD = 0.02

#: Largest indicator height accepted, µm (10 m): beyond any indicator or height gauge, so such a
#: number is a slip (a wrong unit or a keyed-in serial number). Common practice, no single source.
MAX_HEIGHT_UM = 1e7


@dataclass(frozen=True)
class Station:
    """A named point of the survey; ``x_mm``, ``y_mm`` in mm from the south-west corner."""

    name: str
    x_mm: float
    y_mm: float


@dataclass(frozen=True)
class Run:
    """One walk along a line.

    Attributes
    ----------
    readings : tuple of float
        Readings in the instrument's unit in the order taken: one per step for
        angle instruments, one per station for an indicator.
    order : {"forward", "reverse"}
        ``"forward"``: taken from the line's first station to its last;
        ``"reverse"``: from the last to the first.
    flip_sign : bool
        The instrument was turned round for this run (positive = falling).
    where : str
        Where the run is in its file, for messages ("plate.toml, line 'SW-NE', run 2").
    """

    readings: tuple
    order: str = "forward"
    flip_sign: bool = False
    where: str = ""

    def forward_readings(self) -> np.ndarray:
        """Readings re-ordered from the line's first station to its last, sign applied."""
        r = np.asarray(self.readings, dtype=float)
        if self.order == "reverse":
            r = r[::-1]
        return -r if self.flip_sign else r


@dataclass(frozen=True)
class SurveyLine:
    """A line of the survey: stations from first to last, foot spacing and runs.

    Attributes
    ----------
    name : str
        Unique name, e.g. ``"SW-NE"`` (from its end stations) or ``"row-3"``.
    stations : tuple of str
        Station names in order along the line (steps + 1 of them).
    foot_spacing_mm : float
        Base length of one step in mm (the distance between successive stations).
    runs : tuple of Run
        The walks along the line; empty in a planned (blank) survey.
    """

    name: str
    stations: tuple
    foot_spacing_mm: float
    runs: tuple = ()

    @property
    def steps(self) -> int:
        """Number of steps (stations - 1)."""
        return len(self.stations) - 1


@dataclass(frozen=True)
class Instrument:
    """The instrument and its reading unit.

    Attributes
    ----------
    kind : str
        One of :data:`INSTRUMENT_KINDS`.
    unit : str
        Reading unit (see :mod:`flatcheck.units`): an angle or slope unit for
        autocollimators and levels, a length unit for indicators.
    reports : {"mirror-tilt", "beam-deviation"}
        For autocollimators: what the scale shows. Beam deviation is halved.
    reading_uncertainty : float or None
        Standard uncertainty of one reading, in ``unit`` (for Monte Carlo).
    scale_uncertainty_rel : float or None
        Relative standard uncertainty of the instrument's scale (calibration).
    foot_spacing_uncertainty_mm : float or None
        Standard uncertainty of the foot spacing in mm.
    """

    kind: str
    unit: str
    reports: str = "mirror-tilt"
    reading_uncertainty: float | None = None
    scale_uncertainty_rel: float | None = None
    foot_spacing_uncertainty_mm: float | None = None
    model: str = ""

    @property
    def gravity_referenced(self) -> bool:
        """True for levels: every line shares one zero."""
        return self.kind in ("level", "differential-level")

    @property
    def reads_heights(self) -> bool:
        """True for indicators: readings are heights, not slopes."""
        return self.kind == "indicator"


@dataclass(frozen=True)
class Surface:
    """What was surveyed: description, identity and size in mm (x = length, y = width)."""

    description: str
    length_mm: float
    width_mm: float
    ident: str = ""
    material: str = ""


@dataclass(frozen=True)
class Survey:
    """A complete survey: surface, instrument, stations, lines and their readings."""

    surface: Surface
    instrument: Instrument
    pattern: str
    stations: tuple
    lines: tuple
    date: str = ""
    temperature_c: float | None = None
    operator: str = ""
    notes: str = ""
    source: str = ""
    meta: dict = field(default_factory=dict, compare=False)

    @cached_property
    def station_index(self) -> dict:
        """Map station name -> index into :attr:`stations`."""
        return {s.name: i for i, s in enumerate(self.stations)}

    @property
    def x_mm(self) -> np.ndarray:
        """Station x positions in mm, shape (n_stations,)."""
        return np.array([s.x_mm for s in self.stations], dtype=float)

    @property
    def y_mm(self) -> np.ndarray:
        """Station y positions in mm, shape (n_stations,)."""
        return np.array([s.y_mm for s in self.stations], dtype=float)

    def line(self, name: str) -> SurveyLine:
        """The line called ``name``."""
        for ln in self.lines:
            if ln.name == name:
                return ln
        raise KeyError(name)

    @property
    def has_readings(self) -> bool:
        """True when every line has at least one run."""
        return all(len(ln.runs) > 0 for ln in self.lines)


@dataclass(frozen=True, eq=False)
class Observations:
    """A survey's readings as flat arrays, one entry per reading, ready to reduce.

    For slope instruments each observation is one step: the surface rises
    ``value_um`` from station ``i_from`` to station ``i_to``. For an indicator
    each observation is a height: ``value_um`` at station ``i_to`` (``i_from`` is -1).

    Attributes
    ----------
    value_um : ndarray, shape (m,)
        Rise per step (slope instruments) or height (indicator), in µm.
    i_from, i_to : ndarray of int, shape (m,)
        Station indices.
    line : ndarray of int, shape (m,)
        Index of the line in ``Survey.lines``.
    run : ndarray of int, shape (m,)
        Run number within the line (0-based).
    step : ndarray of int, shape (m,)
        Step number along the line from its first station (0-based), or station
        number for indicators.
    base_mm : ndarray, shape (m,)
        Foot spacing of the step in mm (0 for indicators).
    um_per_unit : ndarray, shape (m,)
        Sensitivity: µm of ``value_um`` per unit of the raw reading, at the
        reading (for uncertainty propagation).
    reading : ndarray, shape (m,)
        The raw reading in the instrument's unit, in forward order and sign.
    """

    value_um: np.ndarray
    i_from: np.ndarray
    i_to: np.ndarray
    line: np.ndarray
    run: np.ndarray
    step: np.ndarray
    base_mm: np.ndarray
    um_per_unit: np.ndarray
    reading: np.ndarray


def _g(v: float) -> str:
    return f"{v:.4g}" if abs(v) < 1e6 else f"{v:.3g}"


def check_plausible_readings(line: SurveyLine, readings, instrument: Instrument, *, where: str | None = None) -> None:
    """Refuse readings no real survey gives (see :data:`MAX_SLOPE_RAD`, :data:`MAX_HEIGHT_UM`).

    Slope instruments: the slope of each reading (beam deviation halved) must not exceed
    :data:`MAX_SLOPE_RAD` in size. Indicators: each height must not exceed :data:`MAX_HEIGHT_UM`
    in size, and two successive heights along the line must not differ by more than
    :data:`MAX_SLOPE_RAD` times the station spacing (the same plausibility limit on slope).

    Parameters
    ----------
    line : SurveyLine
        The line read (its name and station spacing ``foot_spacing_mm``, mm).
    readings : sequence of float
        One run's readings in the instrument's unit, in the order taken (finite).
    instrument : Instrument
    where : str, optional
        Where the readings are, for the message (file, line, field).

    Raises
    ------
    InputValueError
        Naming the first implausible reading, its slope and the limit in the reading's unit.
    """
    r = np.asarray(readings, dtype=float)
    if r.size == 0:
        return
    if instrument.reads_heights:
        unit = length_unit(instrument.unit)
        with np.errstate(over="ignore", invalid="ignore"):
            h = r * unit.factor_um
            big = np.flatnonzero(~(np.abs(h) <= MAX_HEIGHT_UM))
        if big.size:
            k = int(big[0])
            raise InputValueError(
                f"height {k + 1} of line {line.name!r} is {r[k]:.10g} {unit.name}, more than the "
                f"{_g(MAX_HEIGHT_UM / unit.factor_um)} {unit.name} (10 m) flatcheck accepts",
                where=where,
                fix=f"check the reading and the [instrument] unit ({unit.name!r}, the unit of the readings as written)",
            )
        spacing = float(line.foot_spacing_mm)
        if r.size < 2 or not spacing > 0:
            return
        with np.errstate(over="ignore", invalid="ignore"):
            slope = np.abs(np.diff(h)) / (spacing * 1e3)
            bad = np.flatnonzero(~(slope <= MAX_SLOPE_RAD))
        if bad.size:
            k = int(bad[0])
            lim = MAX_SLOPE_RAD * spacing * 1e3 / unit.factor_um
            raise InputValueError(
                f"heights {k + 1} and {k + 2} of line {line.name!r} ({r[k]:.10g} and {r[k + 1]:.10g} {unit.name}) "
                f"differ by more than {_g(lim)} {unit.name} over the {spacing:.4g} mm between their stations, "
                f"a slope above the {MAX_SLOPE_RAD * 1e3:g} mm/m flatcheck accepts",
                where=where,
                fix=f"check the two readings and the [instrument] unit ({unit.name!r}); a surface measured for "
                "flatness has no such step",
            )
        return
    unit = angle_unit(instrument.unit)
    gain = 2.0 if (instrument.kind == "autocollimator" and instrument.reports == "beam-deviation") else 1.0
    limit_units = MAX_SLOPE_RAD * gain / unit.factor  # the limit as a reading, in the instrument's unit
    bad = np.flatnonzero(~(np.abs(r) <= limit_units))
    if bad.size:
        k = int(bad[0])
        slope_mm_per_m = abs(float(r[k])) / gain * unit.factor * 1e3
        raise InputValueError(
            f"reading {k + 1} of line {line.name!r} is {r[k]:.10g} {unit.name}, a slope of {_g(slope_mm_per_m)} mm/m: "
            f"more than the {MAX_SLOPE_RAD * 1e3:g} mm/m ({_g(limit_units)} {unit.name}) flatcheck accepts",
            where=where,
            fix=f"check the reading and the [instrument] unit ({unit.name!r}); a surface surveyed for flatness "
            "is set up to well under that slope",
        )


def observations(survey: Survey) -> Observations:
    """Turn a survey's runs into flat arrays of rises (or heights) in µm.

    Readings are converted exactly: ``rise = base * tan(angle)`` for angle units,
    ``rise = base * slope`` for slope units (µm/m, mm/m...), halved first for an
    autocollimator that reports beam deviation; indicator readings are converted
    to µm.

    Raises
    ------
    InputValueError
        If a run has the wrong number of readings or a reading is not finite.
    LayoutError
        If a line names an unknown station.
    """
    inst = survey.instrument
    idx = survey.station_index
    heights = inst.reads_heights
    if heights:
        lunit = length_unit(inst.unit, where="[instrument] unit")
    else:
        aunit = angle_unit(inst.unit, where="[instrument] unit")
    half = 0.5 if (inst.kind == "autocollimator" and inst.reports == "beam-deviation") else 1.0
    cols = {k: [] for k in ("value", "i_from", "i_to", "line", "run", "step", "base", "sens", "reading")}
    for li, ln in enumerate(survey.lines):
        try:
            st = np.array([idx[s] for s in ln.stations], dtype=np.int64)
        except KeyError as exc:
            raise LayoutError(
                f"line {ln.name!r} names station {exc.args[0]!r}, which is not in the survey",
                fix="check the station names",
            ) from None
        expected = st.size if heights else st.size - 1
        for ri, run in enumerate(ln.runs):
            r = run.forward_readings()
            where = run.where or f"line {ln.name!r}, run {ri + 1}"
            if r.size != expected:
                what = "stations" if heights else "steps"
                raise InputValueError(
                    f"{r.size} readings where the line has {expected} {what}",
                    where=where,
                    fix=f"give exactly {expected} readings, one per {what[:-1]} in the order taken",
                )
            bad = np.flatnonzero(~np.isfinite(r))
            if bad.size:
                raise InputValueError(
                    f"reading {bad[0] + 1} is not a finite number",
                    where=where,
                    fix="replace it with the value read, or repeat the run",
                )
            k = np.arange(r.size)
            if heights:
                value = r * lunit.factor_um
                sens = np.full(r.size, lunit.factor_um)
                cols["i_from"].append(np.full(r.size, -1))
                cols["i_to"].append(st)
                cols["base"].append(np.zeros(r.size))
            else:
                base = np.full(r.size, float(ln.foot_spacing_mm))
                value = rise_um(r * half, base, aunit)
                # derivative of base*tan(f*r*half) with respect to r, in µm per unit
                if aunit.kind == "angle":
                    sens = base * 1e3 * aunit.factor * half / np.cos(r * half * aunit.factor) ** 2
                else:
                    sens = base * 1e3 * aunit.factor * half
                cols["i_from"].append(st[:-1])
                cols["i_to"].append(st[1:])
                cols["base"].append(base)
            cols["value"].append(value)
            cols["sens"].append(sens)
            cols["line"].append(np.full(r.size, li))
            cols["run"].append(np.full(r.size, ri))
            cols["step"].append(k)
            cols["reading"].append(r)
    if not cols["value"]:
        raise InputValueError("the survey has no readings", fix="fill in the readings of every line")
    cat = {k: np.concatenate(v) for k, v in cols.items()}
    return Observations(
        value_um=cat["value"].astype(float),
        i_from=cat["i_from"].astype(np.int64),
        i_to=cat["i_to"].astype(np.int64),
        line=cat["line"].astype(np.int64),
        run=cat["run"].astype(np.int64),
        step=cat["step"].astype(np.int64),
        base_mm=cat["base"].astype(float),
        um_per_unit=cat["sens"].astype(float),
        reading=cat["reading"].astype(float),
    )
