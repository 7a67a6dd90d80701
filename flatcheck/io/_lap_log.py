"""Lapping logs: where the lap worked and for how long, ``x_mm,y_mm,minutes`` per line.

Example::

    # session 3, round lap 150 mm
    x_mm,y_mm,minutes
    300,400,4.5
    250,380,2

``#`` starts a comment line; blank lines are ignored. The header is required and must name exactly these
columns in this order, so that a log kept in other units is never read silently as millimetres and minutes.
"""

from __future__ import annotations

import math
from pathlib import Path

from ..errors import InputFormatError, InputValueError
from ..lapping import DwellLog
from ..limits import check_range
from ._text import read_text

__all__ = ["LOG_HEADER", "read_lap_log"]

LOG_HEADER = ("x_mm", "y_mm", "minutes")


def read_lap_log(path) -> DwellLog:
    """Read a lapping log into a :class:`~flatcheck.DwellLog`.

    Raises
    ------
    InputFormatError
        Missing, empty or binary file; wrong header; wrong number of fields.
    InputValueError
        A value that is not a finite number, or a negative time.
    """
    path = Path(path)
    text = read_text(path, wanted="the lapping log CSV (x_mm,y_mm,minutes)")
    lines = text.splitlines()
    rows = [(no, s.strip()) for no, s in enumerate(lines, start=1) if s.strip() and not s.strip().startswith("#")]
    if not rows:
        raise InputFormatError("the log has no data", where=str(path), fix="add the header x_mm,y_mm,minutes")
    no, head = rows[0]
    if tuple(f.strip().lower() for f in head.split(",")) != LOG_HEADER:
        raise InputFormatError(
            f"the header is {head!r}", where=f"{path}, line {no}", fix="the first non-comment line must be x_mm,y_mm,minutes"
        )
    if len(rows) == 1:
        raise InputFormatError("the log has a header but no entries", where=str(path), fix="add one entry per line")
    xs, ys, ts = [], [], []
    for no, s in rows[1:]:
        fields = [f.strip() for f in s.split(",")]
        if len(fields) != 3:
            raise InputFormatError(
                f"{len(fields)} fields where 3 are needed", where=f"{path}, line {no}", fix="write x_mm,y_mm,minutes"
            )
        vals = []
        for name, f in zip(LOG_HEADER, fields):
            try:
                if "_" in f:  # Python reads "1_000" as 1000; a log written by hand means something else
                    raise ValueError
                v = float(f)
            except ValueError:
                raise InputValueError(f"{name} {f!r} is not a number", where=f"{path}, line {no}", fix="write a plain decimal number") from None
            if not math.isfinite(v):
                raise InputValueError(f"{name} is {f}", where=f"{path}, line {no}", fix="give a finite number")
            vals.append(v)
        if vals[2] < 0:
            raise InputValueError(f"negative time {fields[2]}", where=f"{path}, line {no}", fix="give the minutes spent (>= 0)")
        for kind, name, v in (("position_mm", "x_mm", vals[0]), ("position_mm", "y_mm", vals[1]),
                              ("minutes", "minutes", vals[2])):
            check_range(v, kind, where=f"{path}, line {no}, {name}", name=name)
        xs.append(vals[0])
        ys.append(vals[1])
        ts.append(vals[2])
    return DwellLog(xs, ys, ts, source=str(path))
