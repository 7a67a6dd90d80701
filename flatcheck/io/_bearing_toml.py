"""Bearing description files (TOML): the pads, their places on a carriage, the travel and a motion budget.

Example::

    # two pads in tandem on the top face of a guideway
    [bearing]
    label = "inspection slide, top face"
    pad = "120x80"          # L x W in mm along x (travel) by y, or "d80" for a circular pad of 80 mm
    gap_um = 8.0            # nominal air gap, µm
    kind = "porous"         # or "orifice"
    gap_fraction = 0.25     # optional: local form limit as a fraction of the gap
    marginal_from = 0.8     # optional: marginal from this fraction of a limit

    [carriage]              # optional; without it the carriage is one pad
    face = "top"            # the face that was measured
    y_mm = 300              # optional: carriage centre across the face (default: centred)
    travel_start_mm = 100   # optional travel of the carriage reference point (default: all that fits)
    travel_end_mm = 800
    step_mm = 10            # optional, at most a tenth of the shortest pad length

    [[carriage.pad]]        # one table per pad; offsets from the carriage reference point
    name = "front"
    along_mm = 150
    across_mm = 0
    # face, pad, gap_um, kind and stiffness may be given per pad

    [[carriage.pad]]
    name = "rear"
    along_mm = -150

    [budget]                # optional motion budget
    straightness_um = 1.0
    pitch_arcsec = 2.0
    roll_arcsec = 2.0

Unknown keys are refused (a misspelt key must not be ignored silently). Lengths are in mm, gaps in µm,
angles in arcsec: the key names say so.
"""

from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass
from pathlib import Path

from ..bearing import Carriage, MotionBudget, Pad, PlacedPad
from ..bearing import parse_pad_size
from ..errors import FlatcheckError, InputFormatError, InputValueError
from ._text import read_text, toml_loads

__all__ = ["BearingDescription", "parse_pad_size", "read_bearing_toml", "parse_bearing_toml"]


_BEARING_KEYS = {"label", "pad", "gap_um", "kind", "gap_fraction", "marginal_from"}
_CARRIAGE_KEYS = {"face", "y_mm", "travel_start_mm", "travel_end_mm", "step_mm", "pad"}
_PAD_KEYS = {"name", "along_mm", "across_mm", "face", "pad", "gap_um", "kind", "stiffness"}
_BUDGET_KEYS = {"straightness_um", "pitch_arcsec", "roll_arcsec"}


@dataclass(frozen=True)
class BearingDescription:
    """What a bearing file describes.

    Attributes
    ----------
    carriage : Carriage
        Pads, their places and the travel.
    gap_fraction : float or None
        Local form limit as a fraction of the gap (``None``: the library default).
    marginal_from : float or None
        Fraction of a limit from which a result is marginal (``None``: the library default).
    budget : MotionBudget
        Motion budget (fields ``None`` when not given).
    """

    carriage: Carriage
    gap_fraction: float | None
    marginal_from: float | None
    budget: MotionBudget


def _shown(value) -> str:
    """A TOML value as a user would recognise it in a message (tables and long lists cut short)."""
    if isinstance(value, dict):
        return "a table"
    if isinstance(value, list) and value and all(isinstance(v, dict) for v in value):
        return "a list of tables"
    text = repr(value)
    return text if len(text) <= 40 else text[:37] + "..."


def _check_keys(table: dict, allowed: set, where: str) -> None:
    unknown = sorted(set(table) - allowed)
    if unknown:
        raise InputFormatError(
            f"unknown key {unknown[0]!r}", where=where, fix=f"use only: {', '.join(sorted(allowed))}"
        )


#: The range (flatcheck.limits) each number of a bearing file is checked against, by key.
_KINDS = {"gap_um": "gap_um", "along_mm": "position_mm", "across_mm": "position_mm", "y_mm": "position_mm",
          "travel_start_mm": "position_mm", "travel_end_mm": "position_mm", "step_mm": "length_mm"}


def _number(
    table: dict, key: str, where: str, default=None, *, positive: bool = False, at_most: float | None = None, what: str = ""
):
    if key not in table:
        return default
    v = table[key]
    here = f"{where}, field {key!r}"
    if isinstance(v, bool) or not isinstance(v, (int, float)):
        raise InputValueError(f"{key} must be a number, got {_shown(v)}", where=here, fix="give a number (no quotes)")
    v = float(v)
    if not math.isfinite(v):
        raise InputValueError(f"{key} is {v}, not a finite number", where=here, fix="give a number")
    if positive and not v > 0:
        raise InputValueError(f"{what or key} must be positive, got {v:g}", where=here, fix=f"give {key} > 0")
    if at_most is not None and v > at_most:
        raise InputValueError(f"{key} must be at most {at_most:g}, got {v:g}", where=here, fix="give a fraction such as 0.25")
    if key in _KINDS:
        from ..limits import check_range

        check_range(v, _KINDS[key], where=here, name=what or key)
    return v


def _text(table: dict, key: str, where: str, default=None):
    if key not in table:
        return default
    v = table[key]
    if not isinstance(v, str):
        fix = "write it as one quoted text value" if isinstance(v, (dict, list)) else "quote the value"
        raise InputValueError(f"{key} must be text, got {_shown(v)}", where=f"{where}, field {key!r}", fix=fix)
    return v


def _make_pad(size: str | None, gap_um, kind, where: str) -> Pad:
    if size is None:
        raise InputFormatError("no pad size", where=where, fix="add pad = \"LxW\" (mm) or pad = \"dD\"")
    if gap_um is None:
        raise InputFormatError("no air gap", where=where, fix="add gap_um = <nominal gap in µm>")
    shape, length, width = parse_pad_size(size, where=f"{where}, field 'pad'")
    try:
        return Pad(shape, length, width, gap_um, kind)
    except InputValueError as exc:
        raise InputValueError(exc.message, where=where, fix=exc.fix) from None


def parse_bearing_toml(text: str, *, source: str = "<bearing>") -> BearingDescription:
    """Parse the text of a bearing description file (see the module docstring for the format).

    Parameters
    ----------
    text : str
        TOML text.
    source : str
        File name for messages.

    Returns
    -------
    BearingDescription

    Raises
    ------
    InputFormatError
        Not TOML, a missing section or field, an unknown key.
    InputValueError
        A value of the wrong type or out of range.
    """
    try:
        doc = toml_loads(text, where=source)
    except tomllib.TOMLDecodeError as exc:
        raise InputFormatError(f"not a valid TOML file ({exc})", where=source, fix="check the TOML syntax") from None
    _check_keys(doc, {"bearing", "carriage", "budget"}, source)
    if "bearing" not in doc:
        raise InputFormatError("no [bearing] section", where=source, fix="add [bearing] with pad and gap_um")
    if not isinstance(doc["bearing"], dict):
        raise InputFormatError(
            f"bearing must be one table, got {_shown(doc['bearing'])}", where=f"{source}, field 'bearing'",
            fix="write it as a [bearing] section with pad and gap_um",
        )
    b = doc["bearing"]
    w = f"{source}, [bearing]"
    _check_keys(b, _BEARING_KEYS, w)
    size = _text(b, "pad", w)
    gap = _number(b, "gap_um", w, positive=True, what="air gap (µm)")
    kind = _text(b, "kind", w, "porous")
    label = _text(b, "label", w, "")
    gap_fraction = _number(b, "gap_fraction", w, positive=True, at_most=1.0)
    marginal_from = _number(b, "marginal_from", w, positive=True, at_most=1.0)

    c = doc.get("carriage", {})
    if not isinstance(c, dict):
        raise InputFormatError(
            f"carriage must be one table, got {_shown(c)}", where=f"{source}, field 'carriage'",
            fix="write it as a [carriage] section",
        )
    wc = f"{source}, [carriage]"
    _check_keys(c, _CARRIAGE_KEYS, wc)
    face = _text(c, "face", wc, "top")
    pad_tables = c.get("pad", [])
    if not isinstance(pad_tables, list):
        raise InputFormatError(
            f"pads must be [[carriage.pad]] tables, got {_shown(pad_tables)}", where=f"{wc}, field 'pad'",
            fix="write one [[carriage.pad]] section per pad (the pad size goes in [bearing] or in each pad's table)",
        )
    try:
        if not pad_tables:
            placed = [PlacedPad(_make_pad(size, gap, kind, w), name="pad", face=face)]
        else:
            placed, names = [], []
            for i, t in enumerate(pad_tables, start=1):
                wp = f"{source}, [[carriage.pad]] #{i}"
                if not isinstance(t, dict):
                    raise InputFormatError(
                        f"each pad must be a table, got {_shown(t)}", where=f"{wc}, field 'pad' entry #{i}",
                        fix="write one [[carriage.pad]] section per pad (with name, along_mm, across_mm...)",
                    )
                _check_keys(t, _PAD_KEYS, wp)
                name = _text(t, "name", wp, f"pad {i}")
                if name in names:
                    raise InputValueError(
                        f"pad name {name!r} is used twice (first in [[carriage.pad]] #{names.index(name) + 1})",
                        where=f"{wp}, field 'name'", fix="give each pad its own name",
                    )
                names.append(name)
                pad = _make_pad(
                    _text(t, "pad", wp, size), _number(t, "gap_um", wp, gap, positive=True, what="air gap (µm)"), _text(t, "kind", wp, kind), wp
                )
                placed.append(
                    PlacedPad(
                        pad,
                        along_mm=_number(t, "along_mm", wp, 0.0),
                        across_mm=_number(t, "across_mm", wp, 0.0),
                        name=name,
                        face=_text(t, "face", wp, face),
                        stiffness=_number(t, "stiffness", wp, 1.0, positive=True),
                    )
                )
        start, end = _number(c, "travel_start_mm", wc), _number(c, "travel_end_mm", wc)
        if start is not None and end is not None and end < start:
            raise InputValueError(
                f"the travel ends ({end:g} mm) before it starts ({start:g} mm)",
                where=f"{wc}, fields 'travel_start_mm' and 'travel_end_mm'", fix="swap or correct the travel limits",
            )
        if not any(p.face == face for p in placed):
            faces = sorted({p.face for p in placed})
            raise InputValueError(
                f"no pad rides on the face {face!r} (the pads are on {', '.join(repr(f) for f in faces)})",
                where=f"{wc}, field 'face'",
                fix="set face to the face that was measured, and each pad's face to the face it rides on",
            )
        carriage = Carriage(
            tuple(placed),
            face=face,
            y_mm=_number(c, "y_mm", wc),
            travel_start_mm=start,
            travel_end_mm=end,
            step_mm=_number(c, "step_mm", wc, positive=True),
            label=label,
        )
        bt = doc.get("budget", {})
        wb = f"{source}, [budget]"
        if not isinstance(bt, dict):
            raise InputFormatError(
                f"budget must be one table, got {_shown(bt)}", where=f"{source}, field 'budget'",
                fix="write it as a [budget] section",
            )
        _check_keys(bt, _BUDGET_KEYS, wb)
        budget = MotionBudget(
            *(_number(bt, k, wb, positive=True) for k in ("straightness_um", "pitch_arcsec", "roll_arcsec"))
        )
    except FlatcheckError as exc:
        if exc.where is None:
            raise type(exc)(exc.message, where=source, fix=exc.fix) from None
        raise
    return BearingDescription(carriage, gap_fraction, marginal_from, budget)


def read_bearing_toml(path) -> BearingDescription:
    """Read a bearing description file.

    Parameters
    ----------
    path : str or Path
        The TOML file.

    Returns
    -------
    BearingDescription

    Raises
    ------
    InputFormatError, InputValueError
        As :func:`parse_bearing_toml`, plus missing, empty or binary files.
    """
    path = Path(path)
    text = read_text(path, wanted="a bearing description (.toml with a [bearing] section)")
    return parse_bearing_toml(text, source=str(path))
