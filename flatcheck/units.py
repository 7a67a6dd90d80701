"""Units and exact conversions used by flatcheck.

Internally flatcheck works in millimetres for positions, micrometres for heights
and radians (or µrad) for angles. Conversion happens once, at the input/output
boundary, from a unit that the file or a command-line option declares; the
numbers are never inspected to guess a unit.

All factors below are exact by definition unless marked otherwise:

- 1 arcsec = pi / 648000 rad (definition of the degree and its sexagesimal parts).
- 1 inch = 25.4 mm exactly (international yard and pound agreement, 1959).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING

if TYPE_CHECKING:  # annotations only; numpy loads where it is used, not when the CLI starts
    import numpy as np


__all__ = [
    "ARCSEC_TO_RAD",
    "URAD_TO_ARCSEC",
    "MM_PER_INCH",
    "UM_PER_UIN",
    "AngleUnit",
    "LengthUnit",
    "ANGLE_UNITS",
    "LENGTH_UNITS",
    "angle_unit",
    "length_unit",
    "rise_um",
    "um_to",
    "height_unit_label",
    "format_height",
    "format_length",
    "round_to_uncertainty",
    "format_with_uncertainty",
    "NORMAL_AIR_DENSITY_KG_M3",
    "NORMAL_CONDITIONS",
    "normal_litres_per_min",
]

ARCSEC_TO_RAD = math.pi / 648000.0  # exact: pi/(180*3600)
URAD_TO_ARCSEC = 0.648 / math.pi  # 1 µrad in arcsec, exact inverse of the above (x 1e-6)
MM_PER_INCH = 25.4  # exact since 1959
UM_PER_UIN = 0.0254  # 1 µin = 25.4e-3 µm, exact


@dataclass(frozen=True)
class AngleUnit:
    """An angle-like reading unit.

    Attributes
    ----------
    name : str
        Canonical name as written in survey files.
    kind : {"angle", "ratio"}
        ``"angle"``: the reading is an angle and the rise is ``base * tan(angle)``.
        ``"ratio"``: the reading is already a slope (rise over run), so the rise is
        ``base * reading`` exactly (electronic levels graduated in µm/m, mm/m...).
    factor : float
        Radians per unit (angle) or dimensionless slope per unit (ratio).
    """

    name: str
    kind: str
    factor: float
    description: str


@dataclass(frozen=True)
class LengthUnit:
    """A length unit for indicator readings or foot spacings; ``factor_um`` is µm per unit."""

    name: str
    factor_um: float
    description: str


# Canonical names first, then aliases. Keys are compared in lower case.
_ANGLE = [
    (("arcsec", "arc-second", "arcseconds", '"'), "angle", ARCSEC_TO_RAD, "second of arc"),
    (("urad", "µrad", "microradian"), "angle", 1e-6, "microradian"),
    (("mrad", "milliradian"), "angle", 1e-3, "milliradian"),
    (("um/m", "µm/m"), "ratio", 1e-6, "micrometre per metre (= µrad for small angles)"),
    (("mm/m",), "ratio", 1e-3, "millimetre per metre"),
    (("uin/in", "µin/in"), "ratio", 1e-6, "microinch per inch (= µm/m)"),
    (("in/ft",), "ratio", 1.0 / 12.0, "inch per foot"),
    (("in/10in", "0.0001in/10in"), "ratio", 1e-5, "ten-thousandth of an inch per 10 inches (1e-5 slope)"),
]
_LENGTH = [
    (("um", "µm", "micrometre", "micron"), 1.0, "micrometre"),
    (("nm",), 1e-3, "nanometre"),
    (("mm",), 1e3, "millimetre"),
    (("uin", "µin", "microinch"), UM_PER_UIN, "microinch"),
    (("in", "inch"), MM_PER_INCH * 1e3, "inch"),
]

ANGLE_UNITS: dict[str, AngleUnit] = {}
for _names, _kind, _factor, _desc in _ANGLE:
    _unit = AngleUnit(_names[0], _kind, _factor, _desc)
    for _n in _names:
        ANGLE_UNITS[_n.lower()] = _unit
LENGTH_UNITS: dict[str, LengthUnit] = {}
for _names, _factor, _desc in _LENGTH:
    _unit = LengthUnit(_names[0], _factor, _desc)
    for _n in _names:
        LENGTH_UNITS[_n.lower()] = _unit


def _canonical_list(table: dict) -> str:
    seen = []
    for unit in table.values():
        if unit.name not in seen:
            seen.append(unit.name)
    return ", ".join(seen)


def angle_unit(name: str, *, where: str | None = None) -> AngleUnit:
    """Look up an angle or slope reading unit by name (case-insensitive).

    Raises
    ------
    UnitError
        If the name is unknown; the message lists the accepted names.
    """
    from .errors import UnitError

    unit = ANGLE_UNITS.get(str(name).strip().lower())
    if unit is None:
        raise UnitError(
            f"unknown angle unit {name!r}",
            where=where,
            fix=f"use one of: {_canonical_list(ANGLE_UNITS)}",
        )
    return unit


def length_unit(name: str, *, where: str | None = None) -> LengthUnit:
    """Look up a length unit by name (case-insensitive).

    Raises
    ------
    UnitError
        If the name is unknown; the message lists the accepted names.
    """
    from .errors import UnitError

    unit = LENGTH_UNITS.get(str(name).strip().lower())
    if unit is None:
        raise UnitError(
            f"unknown length unit {name!r}",
            where=where,
            fix=f"use one of: {_canonical_list(LENGTH_UNITS)}",
        )
    return unit


def rise_um(reading, base_mm, unit: AngleUnit) -> np.ndarray:
    """Height rise in µm over one foot spacing for angle or slope readings.

    Parameters
    ----------
    reading : array_like
        Readings in ``unit``.
    base_mm : array_like
        Foot spacing (base length) in mm, broadcast against ``reading``.
    unit : AngleUnit
        The reading unit.

    Returns
    -------
    ndarray
        ``base * tan(angle)`` for angle units, ``base * slope`` for ratio units, in µm.

    Examples
    --------
    1 arcsec over a 100 mm base rises 0.4848 µm:

    >>> round(float(rise_um(1.0, 100.0, angle_unit("arcsec"))), 5)
    0.48481
    """
    import numpy as np

    reading = np.asarray(reading, dtype=float)
    base_um = np.asarray(base_mm, dtype=float) * 1e3
    if unit.kind == "angle":
        return base_um * np.tan(reading * unit.factor)
    return base_um * (reading * unit.factor)


def um_to(values_um, units: str):
    """Convert heights from µm to the display system: ``"um"`` (identity) or ``"in"`` (µin)."""
    from .errors import UnitError
    import numpy as np

    if units == "um":
        return values_um
    if units == "in":
        return np.asarray(values_um, dtype=float) / UM_PER_UIN if np.ndim(values_um) else (
            None if values_um is None else float(values_um) / UM_PER_UIN
        )
    raise UnitError(f"unknown display units {units!r}", fix="use 'um' or 'in'")


def height_unit_label(units: str) -> str:
    """Symbol of the height unit for the display system ``"um"`` or ``"in"``."""
    return "µm" if units == "um" else "µin"


#: Finest and coarsest decimals a height is printed with, in µm (1 nm .. 1 µm) and µin (0.1 .. 1 µin).
_HEIGHT_DECIMALS = {"um": (0, 3), "in": (0, 1)}


def height_decimals(step_um: float | None, units: str) -> int:
    """Decimals for heights resolved to ``step_um`` (µm), in the display system ``"um"`` or ``"in"``.

    The one rule for a height printed without an uncertainty: its last digit is the power of ten
    nearest (on a log scale) to the height step the measurement resolves, so that no digit is finer
    than about a third of that step and none coarser than about three steps; µm to between 1 µm and
    1 nm, µin to between 1 µin and 0.1 µin. ``None`` (no instrument known) gives the finest. A value
    with an uncertainty follows :func:`round_to_uncertainty` instead.

    Examples
    --------
    An autocollimator's 0.05 arcsec over 100 mm (0.024 µm) prints to 0.01 µm, or to 1 µin:

    >>> height_decimals(0.024, "um"), height_decimals(0.024, "in")
    (2, 0)
    >>> height_decimals(0.1, "um"), height_decimals(None, "um")
    (1, 3)
    """
    lo, hi = _HEIGHT_DECIMALS["in" if units == "in" else "um"]
    if step_um is None or not math.isfinite(step_um) or step_um <= 0.0:
        return hi
    step = step_um / UM_PER_UIN if units == "in" else step_um
    return int(min(max(-round(math.log10(step)), lo), hi))


def format_height(v_um: float, units: str, *, unit: bool = True, step_um: float | None = None) -> str:
    """A height (µm) as displayed, with its unit symbol, to the decimals that fit ``step_um``.

    ``step_um`` is the height step the measurement resolves
    (:meth:`flatcheck.evaluation.MeasuredSurface.height_step_um`); see :func:`height_decimals`.
    Without it, µm to the nm and µin to 0.1 µin. A height that rounds to zero has no sign. ``unit=False``
    gives the number alone (table columns that name the unit in their header).

    Examples
    --------
    >>> format_height(2.48624, "um", step_um=0.024), format_height(2.48624, "um")
    ('2.49 µm', '2.486 µm')
    """
    v = um_to(v_um, units)
    text = f"{v:.{height_decimals(step_um, units)}f}"
    if text.startswith("-") and float(text) == 0.0:  # a tiny negative height rounds to zero: no sign on it
        text = text[1:]
    return f"{text} {height_unit_label(units)}" if unit else text


def format_limit(v_um: float, units: str, *, unit: bool = True) -> str:
    """A limit or tolerance (µm) as it is stated, not measured: no trailing zeros, µm to at most 1 nm and
    µin to at most 0.1 µin.

    Examples
    --------
    >>> format_limit(4.0, "um"), format_limit(2.5, "um"), format_limit(4.0, "in")
    ('4 µm', '2.5 µm', '157.5 µin')
    """
    v = um_to(v_um, units)
    text = f"{round(v, 1 if units == 'in' else 3):g}"
    return f"{text} {height_unit_label(units)}" if unit else text


def format_length(v_mm: float, units: str, *, unit: bool = True) -> str:
    """A position or size (mm) as displayed: whole mm, or inches to 0.01 in (1 in = 25.4 mm exactly).

    ``units`` is the display system (``"um"``: lengths in mm; ``"in"``: inches). ``unit=False`` gives the
    number alone.
    """
    if units == "in":
        text, symbol = f"{v_mm / MM_PER_INCH:.2f}", "in"
    else:
        text, symbol = f"{v_mm:.0f}", "mm"
    return f"{text} {symbol}" if unit else text


# Air flow is stated at normal conditions, so that a figure does not depend on the day's weather: 0 °C and
# 101.325 kPa (DIN 1343 normal conditions; ISO 8778's "standard reference atmosphere" is 20 °C and 100 kPa,
# so "standard litres" are ambiguous and not used). Dry air's density there from the ideal gas law:
# rho = p M / (R T) with p = 101325 Pa (exact), M = 0.0289647 kg/mol (dry air, ISO 2533 / ICAO standard
# atmosphere), R = 8.314462618 J/(mol K) (exact since 2019), T = 273.15 K (exact): 1.29226 kg/m^3.
NORMAL_CONDITIONS = "0 °C, 101.325 kPa (DIN 1343)"
NORMAL_AIR_DENSITY_KG_M3 = 101325.0 * 0.0289647 / (8.314462618 * 273.15)


def normal_litres_per_min(mass_kg_s):
    """An air mass flow (kg/s) as normal litres per minute (NL/min: litres at 0 °C and 101.325 kPa).

    Examples
    --------
    >>> round(float(normal_litres_per_min(NORMAL_AIR_DENSITY_KG_M3 / 60000.0)), 12)  # 1 litre a minute
    1.0
    """
    import numpy as np

    return np.asarray(mass_kg_s, float) / NORMAL_AIR_DENSITY_KG_M3 * 1000.0 * 60.0


def round_to_uncertainty(value: float, uncertainty: float, *, digits: int = 2) -> tuple[float, float, int]:
    """Round an uncertainty to ``digits`` significant digits and the value to the same decimal place.

    The usual rule for stating a result (JCGM 100:2008, 7.2.6: an uncertainty with at most two
    significant digits, the value rounded to match; from memory of the clause).

    Parameters
    ----------
    value, uncertainty : float
        The value and its (standard or expanded) uncertainty, in one unit.
    digits : int
        Significant digits of the uncertainty (2).

    Returns
    -------
    value, uncertainty : float
        Both rounded.
    decimals : int
        Decimal places kept (negative: rounded to tens, hundreds...).

    Examples
    --------
    >>> round_to_uncertainty(2.48624, 0.16723)
    (2.49, 0.17, 2)
    >>> round_to_uncertainty(1234.5, 27.0)
    (1234.0, 27.0, 0)
    """
    u = abs(float(uncertainty))
    if not math.isfinite(u) or u <= 1e-9 * abs(float(value)) or u == 0.0 or not math.isfinite(float(value)):
        return float(value), u, 3  # no uncertainty to round to: the usual three decimals
    decimals = digits - 1 - math.floor(math.log10(u))
    u_r = round(u, decimals)
    if u_r >= 10 ** (digits - decimals):  # 0.0996 -> 0.100: one digit more than asked; round again
        decimals -= 1
        u_r = round(u, decimals)
    return round(float(value), decimals), u_r, decimals


#: The most decimals a height is printed with: 6 in µm is a picometre, finer than any flatness measurement.
MAX_DECIMALS = 6


def format_with_uncertainty(value_um: float, u_um: float, units: str = "um", *, unit: bool = True) -> tuple[str, str]:
    """A height and its uncertainty as displayed: the uncertainty to two significant digits, the value to
    the same decimal place (:func:`round_to_uncertainty`), in µm or µin.

    Parameters
    ----------
    value_um, u_um : float
        Value and uncertainty in µm.
    units : {"um", "in"}
        Display system (µin for ``"in"``).
    unit : bool
        Append the unit symbol to both texts.

    Returns
    -------
    value_text, uncertainty_text : str

    Examples
    --------
    >>> format_with_uncertainty(2.48624, 0.16723)
    ('2.49 µm', '0.17 µm')
    """
    v, u = um_to(value_um, units), um_to(u_um, units)
    _, _, dec = round_to_uncertainty(v, u)
    # never more decimals than a picometre (in µm; 1e-6 µin): a vanishing U (1e-300) would print hundreds of zeros
    dec = min(dec, MAX_DECIMALS)
    fmt = f"{{:.{max(dec, 0)}f}}"
    if dec < 0:
        vt, ut = fmt.format(round(v, dec)), fmt.format(round(u, dec))
    else:
        vt, ut = fmt.format(v), fmt.format(u)
    if unit:
        sym = height_unit_label(units)
        return f"{vt} {sym}", f"{ut} {sym}"
    return vt, ut
