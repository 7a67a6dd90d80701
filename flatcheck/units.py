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


def format_height(v_um: float, units: str, *, unit: bool = True) -> str:
    """A height (µm) as displayed: µm to the nm, µin to 0.1 µin (about 2.5 nm), with its unit symbol.

    No more digits in µin than the µm figure carries. ``unit=False`` gives the number alone (table
    columns that name the unit in their header).
    """
    v = um_to(v_um, units)
    text = f"{v:.3f}" if units == "um" else f"{v:.1f}"
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
