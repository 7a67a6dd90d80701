"""The range every numeric input must lie in, with the reason, checked before any work or allocation.

One table, :data:`LIMITS`, states each range once; the readers, the core's entry points and the command line
check values against it with :func:`check_range`, and ``docs/limits.md`` prints the same table (a test keeps
them equal). A value outside its range is refused with a message that names the input as the person gave it
(a file's field and line, or an option), the range, and why the range is what it is.

The ranges are deliberately wide: they refuse what cannot be a measurement of a flat surface (a typing or
unit mistake, or a value chosen to break the program), never an unusual but real one. Where a bound exists
to keep the work bounded (memory or time), the reason says so.

This module imports only :mod:`flatcheck.errors` (it sits on the lowest floor, beside units).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from .errors import InputValueError

__all__ = ["Limit", "LIMITS", "check_range", "check_count", "check_points_in_range", "limits_table_markdown"]


@dataclass(frozen=True)
class Limit:
    """The accepted range of one kind of input.

    Attributes
    ----------
    low, high : float
        Inclusive bounds, in ``unit``.
    unit : str
        Unit of the bounds as printed (``"mm"``, ``"µm"``, ``""`` for a count).
    reason : str
        Why the range is what it is (printed in refusals and in docs/limits.md).
    low_open : bool
        The lower bound itself is refused (``value > low``), e.g. a size that must be positive.
    """

    low: float
    high: float
    unit: str
    reason: str
    low_open: bool = False

    def text(self) -> str:
        """The range in words, e.g. ``"more than 0 and at most 100000 mm"``."""
        lo = f"more than {self.low:g}" if self.low_open else f"at least {self.low:g}"
        if self.low == -self.high and not self.low_open:
            return f"between {self.low:g} and {self.high:g}{' ' + self.unit if self.unit else ''}"
        return f"{lo} and at most {self.high:g}{' ' + self.unit if self.unit else ''}"


# Bounds of a flat surface and of what is measured on it. Sources: the largest granite surface plates
# and machine beds listed by makers are a few metres long (common practice, no single source); 100 m covers
# any machine bed and still refuses micrometres read as millimetres over a metre plate.
_SIZE_MM = 100_000.0
_SIZE_REASON = ("no surface plate, guideway or machine bed is longer than 100 m; a larger value is most likely a "
                "value in µm read as mm")

#: Every numeric input flatcheck takes, by kind. Keys are referred to by the readers and the command line.
LIMITS: dict[str, Limit] = {
    "length_mm": Limit(0.1, _SIZE_MM, "mm", _SIZE_REASON + "; under 0.1 mm there is no surface to survey (a slip)"),
    "position_mm": Limit(-_SIZE_MM, _SIZE_MM, "mm", _SIZE_REASON),
    "foot_spacing_mm": Limit(1.0, 10_000.0, "mm",
                             "an instrument's foot spacing (base length) is between a few millimetres and a few "
                             "hundred; under 1 mm or over 10 m is a typing or unit mistake"),
    "height_um": Limit(-1.0e6, 1.0e6, "µm",
                       "a height of a flat surface (even an uncorrected indicator or machine reading) is within "
                       "1 m; squares of larger values overflow the arithmetic"),
    "temperature_c": Limit(-50.0, 100.0, "°C",
                           "surveys are made in rooms, near 20 °C (ISO 1 reference temperature); outside "
                           "-50 to +100 °C the value is a typing mistake"),
    "gap_um": Limit(0.1, 1000.0, "µm",
                    "air-bearing gaps are a few micrometres to a few tens; under 0.1 µm no air film flows and "
                    "1 mm is no longer an air film"),
    "window_mm": Limit(1.0, _SIZE_MM, "mm",
                       "a local-flatness window smaller than 1 mm is smaller than any instrument's foot and would "
                       "take billions of window positions"),
    "lap_size_mm": Limit(1.0, _SIZE_MM, "mm",
                         "a lap smaller than 1 mm is not a lap; the dwell grid is made from the lap's size, so a "
                         "microscopic lap would take billions of grid cells"),
    "target_um": Limit(0.001, 1.0e6, "µm",
                       "a flatness of exactly zero cannot be reached by lapping or proven by any measurement, and "
                       "no surface is lapped to, or measured flat within, less than a nanometre (a smaller target "
                       "is a slip: a wrong unit or a misplaced decimal point)"),
    "minutes": Limit(0.0, 1440.0, "min",
                     "one dwell or lapping-log row longer than a day (1440 min) is a typing mistake"),
    "session_min": Limit(0.1, 1440.0, "min",
                         "a lapping session lasts minutes to hours; under 6 s (0.1 min) or over a day (1440 min) is a "
                         "typing mistake, and would make a calibrated rate of no meaning"),
    "interval_months": Limit(1.0, 1200.0, "months",
                             "a calibration interval is months to a few years; over 100 years is a typing mistake"),
    "days": Limit(0.0, 36_525.0, "days",
                  "a calibration interval or a look-ahead is days to a few years; over 100 years (36525 days) is a "
                  "typing mistake and beyond any calendar date arithmetic"),
    "trials": Limit(1.0, 1.0e6, "",
                    "JCGM 101 finds 10^6 trials enough for a 95 % coverage interval (from memory, clause 7.2); more "
                    "add nothing a certificate can show and every trial costs memory and time"),
    "levels": Limit(1.0, 64.0, "",
                    "a dwell map is rounded to a few time levels a person can follow at the bench; more than 64 "
                    "levels is no rounding and takes minutes to plan"),
    "uncertainty_um": Limit(0.0, 1.0e4, "µm",
                            "an uncertainty of a flatness survey larger than 10 mm means nothing was measured"),
    "tolerance_um": Limit(0.001, 1.0e4, "µm",
                          "a flatness or motion tolerance under 1 nm is finer than any measurement can prove, and "
                          "one larger than 10 mm is no tolerance of a flat surface or a guided motion"),
    "angle_arcsec": Limit(0.001, 3600.0, "arcsec",
                          "a pitch or roll budget of a guided motion is a few arcseconds; under 0.001 arcsec no "
                          "instrument can prove it and more than a degree (3600 arcsec) is a unit mistake"),
    "step_mm": Limit(0.01, _SIZE_MM, "mm",
                     "a carriage travel step under 0.01 mm would take millions of carriage positions"),
    "fraction": Limit(0.0, 1.0, "", "a fraction of a limit or of the longest pass lies between 0 and 1"),
    "seed": Limit(0.0, float(2**63), "",
                  "a Monte Carlo seed is a whole number of 0 or more; 63 bits (up to about 9.2e18, as flatcheck's "
                  "own seeds) are enough to repeat any run, and the seed is printed on every result and stored"),
    "pressure_kpa": Limit(1.0, 10_000.0, "kPa",
                          "air bearings are fed at a few hundred kPa and work in air near 101 kPa; under 1 kPa no "
                          "film forms and over 10 MPa (100 bar) is no shop air supply"),
    "permeability_m2": Limit(1.0e-20, 1.0e-9, "m²",
                             "porous bearing materials (graphite, sintered bronze, ceramics) lie near 1e-16 to "
                             "1e-13 m²; outside 1e-20 to 1e-9 m² the value is a unit slip (mm², darcy)"),
    "layer_mm": Limit(0.1, 100.0, "mm",
                      "a porous bearing layer is a few millimetres thick; under 0.1 mm or over 100 mm is a typing "
                      "or unit mistake"),
    "orifice_mm": Limit(0.01, 10.0, "mm",
                        "a bearing's orifice bore is a few tenths of a millimetre; under 0.01 mm or over 10 mm is "
                        "a typing or unit mistake"),
    "discharge_coefficient": Limit(0.1, 1.0, "",
                                   "an orifice's discharge coefficient is near 0.6 to 0.9 and never above 1"),
    "pocket_mm": Limit(0.0, 1000.0, "mm",
                       "a feed pocket lies inside a pad (0 for none); over 1 m is a unit mistake"),
    "pocket_depth_um": Limit(0.0, 1000.0, "µm",
                             "a feed pocket is some micrometres deep (0 for none); 1 mm is no longer a pocket"),
    "load_n": Limit(-1.0e6, 1.0e6, "N",
                    "an air-bearing pad or carriage carries newtons to a few tonnes; more than 1 MN (100 t) is a "
                    "unit mistake"),
    "baud": Limit(50.0, 4_000_000.0, "bit/s",
                  "serial instruments talk at 50 to some hundred thousand bit/s (300-115200 common); the fastest "
                  "USB serial adapters reach 4 Mbit/s"),
    "count": Limit(1.0, 10_000.0, "",
                   "a count of orifices, strokes or pixels steps a person can set up is at most a few thousand; "
                   "more takes unbounded memory or time"),
    "rate_um": Limit(1.0e-6, 1000.0, "µm",
                     "lapping removes some micrometres a minute or a pass; below a picometre the plan would take "
                     "longer than anyone laps, and 1 mm is grinding, not lapping"),
    "stroke_mm": Limit(0.0, 10_000.0, "mm",
                       "a lap's working stroke about each spot is some tens of millimetres (0 for none); over 10 m "
                       "is a unit mistake, and the lap's footprint grid grows with the stroke"),
    "smoothing": Limit(0.0, 100.0, "",
                       "a regularisation weight relative to the removal's own scale: 0 for none, about 0.01 by "
                       "default; over 100 the dwell map ignores the surface"),
    "wavelength_nm": Limit(200.0, 2000.0, "nm",
                           "fringes are seen in visible or near-infrared light (about 400 to 1100 nm); outside "
                           "200 to 2000 nm the value is a unit mistake"),
    "pixel_mm": Limit(1.0e-4, 100.0, "mm",
                      "one pixel of a photograph of a part is some micrometres to a millimetre on the part; under "
                      "0.1 µm or over 100 mm is a unit mistake, and tiny pixels overflow the arithmetic"),
    "flat_nm": Limit(0.0, 10_000.0, "nm",
                     "an optical flat is flat to some tens of nanometres; a certificate value over 10 µm is no "
                     "optical flat"),
    "tilt_urad": Limit(-1.0e6, 1.0e6, "µrad",
                       "a squareness, twist or tilt reading of a guideway is some seconds of arc (a few µrad); more "
                       "than a radian (about 57 degrees) is a unit mistake"),
    "fringes": Limit(0.0, 1000.0, "fringes",
                     "a reading under an optical flat counts a few fringes, tens at most; more than 1000 fringes "
                     "(about 0.3 mm of form) is not read with an optical flat"),
    "direction_deg": Limit(-360.0, 360.0, "degrees", "a direction on the part is an angle from x within one turn"),
    "flatness_limit_um": Limit(0.0, 1.0e4, "µm",
                               "a flatness limit of a grade is some micrometres to a few hundred; more than 10 mm "
                               "is no limit of a flat surface, most likely a unit mistake"),
}


def check_range(value, kind: str, *, where: str, name: str | None = None) -> float:
    """``value`` as a float when it is a finite number inside the range of ``kind``, else refuse it.

    Parameters
    ----------
    value : float or int
        The value as read (a TOML integer may be too large for a float: that is refused too).
    kind : str
        A key of :data:`LIMITS`.
    where : str
        The input as the person gave it: ``"plate.toml, line 12, length_mm"`` or ``"--lap-diameter-mm"``.
    name : str, optional
        What the value is, in words, for the message (default: the kind).

    Returns
    -------
    float

    Raises
    ------
    InputValueError
        Not a number, not finite, or outside the range (the message gives the range and its reason).
    """
    lim = LIMITS[kind]
    what = name or kind.replace("_", " ")
    try:
        v = float(value)
    except OverflowError:
        raise InputValueError(f"{what} is too large to be a number of this kind ({len(str(abs(int(value))))} digits)",
                              where=where, fix=f"give a value {lim.text()} ({lim.reason})") from None
    except (TypeError, ValueError):
        raise InputValueError(f"{what} is not a number: {value!r}", where=where, fix=f"give a value {lim.text()}") from None
    if not math.isfinite(v):
        raise InputValueError(f"{what} must be a finite number, not {value!r}", where=where,
                              fix=f"give a value {lim.text()}")
    if v > lim.high or v < lim.low or (lim.low_open and v == lim.low):
        raise InputValueError(f"{what} {v:g}{' ' + lim.unit if lim.unit else ''} is out of range", where=where,
                              fix=f"give a value {lim.text()}: {lim.reason}")
    return v


def check_count(value, kind: str, *, where: str, name: str | None = None) -> int:
    """Like :func:`check_range` for a whole count (trials, levels): the value as an int."""
    v = check_range(value, kind, where=where, name=name)
    if v != math.floor(v):
        raise InputValueError(f"{name or kind} must be a whole number, not {value!r}", where=where,
                              fix=f"give a whole number {LIMITS[kind].text()}")
    return int(v)


def check_points_in_range(x_mm, y_mm, height_um, *, where: str) -> None:
    """Refuse the first point of a height map whose position or height is outside its range, naming it.

    Parameters
    ----------
    x_mm, y_mm, height_um : array_like, shape (n,)
        Positions (mm) and heights (µm), finite.
    where : str
        The file, for the message (the point is named by its position).

    Raises
    ------
    InputValueError
        ``"<where>, the point at x = .., y = .., x_mm: x_mm 1e+15 mm is out of range; ..."``.
    """
    import numpy as np

    arrays = {"x_mm": np.asarray(x_mm, float), "y_mm": np.asarray(y_mm, float),
              "height_um": np.asarray(height_um, float)}
    for name, kind in (("x_mm", "position_mm"), ("y_mm", "position_mm"), ("height_um", "height_um")):
        values, lim = arrays[name], LIMITS[kind]
        bad = np.flatnonzero((values < lim.low) | (values > lim.high))
        if bad.size:
            i = int(bad[0])
            check_range(values[i], kind, name=name, where=f"{where}, the point at x = {arrays['x_mm'][i]:.6g} mm, "
                                                            f"y = {arrays['y_mm'][i]:.6g} mm, {name}")


def limits_table_markdown() -> str:
    """The table of :data:`LIMITS` as Markdown rows (docs/limits.md prints it)."""
    rows = ["| input | accepted range | why |", "|---|---|---|"]
    for kind, lim in LIMITS.items():
        rows.append(f"| `{kind}` | {lim.text()} | {lim.reason} |")
    return "\n".join(rows)
