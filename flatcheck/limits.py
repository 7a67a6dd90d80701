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
    "length_mm": Limit(0.0, _SIZE_MM, "mm", _SIZE_REASON, low_open=True),
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
    "gap_um": Limit(0.0, 1000.0, "µm",
                    "air-bearing gaps are a few micrometres to a few tens; 1 mm is no longer an air film",
                    low_open=True),
    "window_mm": Limit(1.0, _SIZE_MM, "mm",
                       "a local-flatness window smaller than 1 mm is smaller than any instrument's foot and would "
                       "take billions of window positions"),
    "lap_size_mm": Limit(1.0, _SIZE_MM, "mm",
                         "a lap smaller than 1 mm is not a lap; the dwell grid is made from the lap's size, so a "
                         "microscopic lap would take billions of grid cells"),
    "target_um": Limit(0.0, 1.0e6, "µm",
                       "a flatness of exactly zero cannot be reached by lapping or proven by any measurement",
                       low_open=True),
    "minutes": Limit(0.0, 1440.0, "min",
                     "one dwell or lapping-log row longer than a day (1440 min) is a typing mistake"),
    "trials": Limit(1.0, 1.0e6, "",
                    "JCGM 101 finds 10^6 trials enough for a 95 % coverage interval (from memory, clause 7.2); more "
                    "add nothing a certificate can show and every trial costs memory and time"),
    "levels": Limit(1.0, 64.0, "",
                    "a dwell map is rounded to a few time levels a person can follow at the bench; more than 64 "
                    "levels is no rounding and takes minutes to plan"),
    "uncertainty_um": Limit(0.0, 1.0e4, "µm",
                            "an uncertainty of a flatness survey larger than 10 mm means nothing was measured"),
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
