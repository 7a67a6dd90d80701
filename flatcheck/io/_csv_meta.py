"""Identity, size and date of a height-map CSV, from its header comment lines.

A height-map CSV may state what it is in ``#`` comment lines before its header, one
``key = value`` per line::

    # ident = KY-B4
    # description = lapped graphite air-bearing pad face
    # length_mm = 80
    # width_mm = 80
    # date = 2024-03-15
    x_mm,y_mm,height_um
    5,5,-0.49
    ...

Keys (all optional): ``ident``, ``description``, ``material`` (text), ``length_mm`` and
``width_mm`` (or ``length_in`` / ``width_in``, 1 in = 25.4 mm exactly), ``date``
(``YYYY-MM-DD``). A value may be written in double quotes, which are removed. Comment lines
that are not ``key = value`` (free text) are left alone, and so are other keys, which are
kept in :attr:`CsvMeta.extra`. Only the comment lines before the header are read: a
comment further down is about the points, not the file.

This module only reads the lines; ``read_heightmap_csv`` can call :func:`parse_csv_meta`
on the lines before its header to give the :class:`~flatcheck.HeightMap` its size and label.
"""

from __future__ import annotations

import datetime as _dt
import math
import re
from dataclasses import dataclass
from pathlib import Path

from ..errors import InputValueError
from ..units import MM_PER_INCH

__all__ = ["CsvMeta", "META_KEYS", "parse_csv_meta", "read_csv_meta", "parse_iso_date"]

#: Keys that the header comments may state, with what each holds.
META_KEYS = {
    "ident": "serial or asset number of the surface",
    "description": "what the surface is",
    "material": "material of the surface",
    "length_mm": "length of the whole surface along x, mm (or length_in)",
    "width_mm": "width of the whole surface along y, mm (or width_in)",
    "date": "date of the measurement, YYYY-MM-DD",
}

_KEY_LINE = re.compile(r"^#\s*([A-Za-z_][A-Za-z0-9_]*)\s*=\s*(.*?)\s*$")
_ISO_DATE = re.compile(r"^\d{4}-\d{2}-\d{2}$")


@dataclass(frozen=True)
class CsvMeta:
    """What the header comments of a height-map CSV say about the surface.

    Attributes
    ----------
    ident, description, material : str
        Text as written ("" when not stated).
    length_mm, width_mm : float or None
        Size of the whole surface in mm (converted exactly from inches when given so).
    date : str
        ``YYYY-MM-DD``, or "" when not stated.
    extra : tuple of (str, str)
        Other ``key = value`` comment lines, in file order.
    """

    ident: str = ""
    description: str = ""
    material: str = ""
    length_mm: float | None = None
    width_mm: float | None = None
    date: str = ""
    extra: tuple = ()

    @property
    def stated(self) -> bool:
        """True when the comments stated anything at all."""
        return bool(self.ident or self.description or self.material or self.date or self.extra
                    or self.length_mm is not None or self.width_mm is not None)


def parse_iso_date(text: str, *, where: str, fix: str = "write the date as YYYY-MM-DD, e.g. 2024-03-11") -> str:
    """Check that ``text`` is a calendar date written ``YYYY-MM-DD``; return it stripped.

    Raises
    ------
    InputValueError
        For any other form (``11.03.2024``, ``2024-3-11``) or a day that does not exist
        (``2024-02-30``), naming ``where``.
    """
    s = str(text).strip()
    if not _ISO_DATE.match(s):
        raise InputValueError(f"date {s!r} is not written YYYY-MM-DD", where=where, fix=fix)
    try:
        _dt.date.fromisoformat(s)
    except ValueError:
        raise InputValueError(f"date {s!r} is not a day of the calendar", where=where, fix=fix) from None
    return s


def _length(value: str, key: str, where: str) -> float:
    try:
        v = float(value)
    except ValueError:
        raise InputValueError(f"{key} {value!r} is not a number", where=where,
                              fix=f"write {key} as a plain number, e.g. {key} = 1000") from None
    if not math.isfinite(v) or v <= 0:
        raise InputValueError(f"{key} {value!r} is not a positive size", where=where,
                              fix=f"write the size of the whole surface, e.g. {key} = 1000")
    from ..limits import check_range

    return check_range(v * MM_PER_INCH if key.endswith("_in") else v, "length_mm", where=where, name=key)


def parse_csv_meta(lines, *, source: str = "<csv>", first_line: int = 1) -> CsvMeta:
    """Read the ``# key = value`` comment lines among ``lines`` (the lines before the CSV header).

    Parameters
    ----------
    lines : sequence of str
        The file's lines before its header ``x_mm,y_mm,height_um``; blank lines and
        lines that are not comments are skipped.
    source : str
        The file, for messages.
    first_line : int
        Line number of ``lines[0]`` in the file (1-based), for messages.

    Returns
    -------
    CsvMeta

    Raises
    ------
    InputValueError
        A known key given twice (or both in mm and in inches), a size that is not a
        positive number, a date not written ``YYYY-MM-DD``; the message names the file and line.
    """
    found: dict[str, tuple[str, int]] = {}
    extra = []
    for k, raw in enumerate(lines):
        no = first_line + k
        m = _KEY_LINE.match(raw.strip())
        if not m:
            continue
        key, value = m.group(1).lower(), m.group(2)
        if len(value) >= 2 and value[0] == value[-1] == '"':
            value = value[1:-1]
        canonical = {"length_in": "length_mm", "width_in": "width_mm"}.get(key, key)
        if canonical not in META_KEYS:
            extra.append((m.group(1), value))
            continue
        if canonical in found:
            prev_no = found[canonical][1]
            raise InputValueError(
                f"{canonical.replace('_mm', '')} is stated twice (first on line {prev_no})",
                where=f"{source}, line {no}", fix="keep one of the two lines",
            )
        found[canonical] = (value, no, key)
    out = {}
    for canonical, (value, no, key) in found.items():
        where = f"{source}, line {no} ({key})"
        if canonical in ("length_mm", "width_mm"):
            out[canonical] = _length(value, key, where)
        elif canonical == "date":
            out["date"] = parse_iso_date(value, where=where)
        else:
            out[canonical] = value
    return CsvMeta(extra=tuple(extra), **out)


def read_csv_meta(path) -> CsvMeta:
    """Read the header comments of a height-map CSV file (see :func:`parse_csv_meta`).

    Only the lines before the first line that is neither blank nor a comment (the
    header) are read. A file that cannot be read gives an empty :class:`CsvMeta`: the
    height-map reader reports what is wrong with it.
    """
    path = Path(path)
    head = []
    try:
        with open(path, encoding="utf-8-sig", errors="replace") as fh:
            for raw in fh:
                s = raw.strip()
                if s and not s.startswith("#"):
                    break
                head.append(raw.rstrip("\r\n"))
    except OSError:
        return CsvMeta()
    return parse_csv_meta(head, source=str(path))
