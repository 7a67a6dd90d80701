"""The lab's limits table: flatness limits of each grade, filled in from the lab's own copy of each standard.

flatcheck ships no limit values for certificates. A lab writes the values of the standards
it works to into a small TOML file, with a source line for each table saying where the
values came from; the register keeps every version of the file it was given, each
verdict names the version it used, and a certificate prints the table's own source line.

Format (``format = "flatcheck-limits"``, ``version = 1``)::

    format = "flatcheck-limits"
    version = 1
    lab = "KY tool room, metrology bench"          # optional

    [[table]]
    standard = "DIN 876"                   # the standard, named as it names itself
    source = "DIN 876-1:1984 clause 4; lab copy 2; entered 2026-01-12 by R.T."
    unit = "um"                            # unit of the limits: um | uin
    length_unit = "mm"                     # unit of L and of sizes: mm | in
    length = "longer-side"                 # the L of the formula: longer-side | diagonal
    grades = ["00", "0", "1", "2"]         # grade names as the standard writes them, finest first
    # round_to = 0.5                       # optional: round each limit to this step (in `unit`)

    [table.formula]                        # limit = constant + linear * L + quadratic * L^2
    "00" = { constant = 2.0, linear = 0.002 }
    "0"  = { constant = 4.0, linear = 0.004 }

    [[table.size]]                         # tabulated sizes win over the formula
    size = [1000, 630]                     # length x width in `length_unit`, either order
    limits = { "00" = 4.0, "0" = 8.0 }

A grade is looked up first in the ``[[table.size]]`` rows (a plate whose two sides are each
within 1 % of a row's sides, in either order), then in ``[table.formula]``. A grade with
neither for the plate's size has no limit, and the lookup says which row to add.
"""

from __future__ import annotations

import difflib
import hashlib
import math
import tomllib
from dataclasses import dataclass
from pathlib import Path

from ..errors import InputFormatError, InputValueError
from ..limits import check_range
from ..units import MM_PER_INCH, UM_PER_UIN

__all__ = [
    "LIMITS_FORMAT",
    "LIMITS_VERSION",
    "GradeFormula",
    "SizeRow",
    "LimitTable",
    "LimitsFile",
    "GradeLimit",
    "parse_limits",
    "read_limits",
    "text_sha256",
]

LIMITS_FORMAT = "flatcheck-limits"
LIMITS_VERSION = 1

#: Relative difference of each side for a plate to match a tabulated size (1 %, the matching
#: used for published tables elsewhere in flatcheck; tables list nominal sizes).
SIZE_MATCH_REL = 0.01

_UNITS_UM = {"um": 1.0, "uin": UM_PER_UIN}  # µm per unit; 1 µin = 0.0254 µm exactly
_LENGTH_MM = {"mm": 1.0, "in": MM_PER_INCH}  # mm per unit; 1 in = 25.4 mm exactly
_LENGTHS = ("longer-side", "diagonal")
_TOP_KEYS = ("format", "version", "lab", "table")
_TABLE_KEYS = ("standard", "source", "quantity", "unit", "length_unit", "length", "grades", "round_to",
               "formula", "size")
_FORMULA_KEYS = ("constant", "linear", "quadratic")
_SIZE_KEYS = ("size", "limits")


def text_sha256(text: str) -> str:
    """SHA-256 (hex) of a text with line ends and trailing blanks normalised.

    Two copies of one file that differ only in CRLF/LF line ends, a byte-order mark or
    trailing spaces have the same hash.
    """
    t = text.lstrip("\ufeff").replace("\r\n", "\n").replace("\r", "\n")
    norm = "\n".join(line.rstrip() for line in t.split("\n")).strip("\n") + "\n"
    return hashlib.sha256(norm.encode("utf-8")).hexdigest()


@dataclass(frozen=True)
class GradeFormula:
    """``limit = constant + linear * L + quadratic * L**2`` in the table's units."""

    grade: str
    constant: float
    linear: float = 0.0
    quadratic: float = 0.0


@dataclass(frozen=True)
class SizeRow:
    """A tabulated size: sides in mm and ``limits`` as ((grade, value in the table's unit), ...)."""

    length_mm: float
    width_mm: float
    limits: tuple

    def value(self, grade: str) -> float | None:
        """The row's limit of ``grade`` in the table's unit, or None."""
        for g, v in self.limits:
            if g == grade:
                return v
        return None


@dataclass(frozen=True)
class GradeLimit:
    """One grade's flatness limit for one plate.

    Attributes
    ----------
    standard, grade : str
        As the table names them.
    limit_um : float
        The limit in µm (converted exactly from µin when the table is in µin).
    source : str
        The table's source line, printed on certificates.
    how : str
        How the value was found (the size row, or the formula with the L used).
    """

    standard: str
    grade: str
    limit_um: float
    source: str
    how: str


@dataclass(frozen=True)
class LimitTable:
    """The limits of one standard (see the module docstring for the fields)."""

    standard: str
    source: str
    unit: str
    length_unit: str
    length: str
    grades: tuple
    formulas: tuple
    sizes: tuple
    round_to: float | None = None
    quantity: str = "flatness"

    def grade_name(self, grade: str, *, where: str = "grade") -> str:
        """The table's spelling of ``grade`` (exact match first, then ignoring letter case).

        Raises
        ------
        InputValueError
            The table has no such grade.
        """
        g = str(grade).strip()
        if g in self.grades:
            return g
        for name in self.grades:
            if name.lower() == g.lower():
                return name
        raise InputValueError(
            f"the limits table for {self.standard} has no grade {g!r}", where=where,
            fix=f"use one of {', '.join(self.grades)} (as the table writes them)",
        )

    def limit(self, grade: str, length_mm: float, width_mm: float) -> GradeLimit:
        """The limit of ``grade`` for a plate of ``length_mm`` x ``width_mm``.

        Parameters
        ----------
        grade : str
            Grade name as the table writes it (letter case aside).
        length_mm, width_mm : float
            The plate's sides in mm, either order.

        Returns
        -------
        GradeLimit

        Raises
        ------
        InputValueError
            Unknown grade, sizes that are not positive, or no size row and no formula giving the
            grade for this size.
        """
        g = self.grade_name(grade)
        a, b = float(length_mm), float(width_mm)
        if not (math.isfinite(a) and math.isfinite(b) and a > 0 and b > 0):
            raise InputValueError(f"plate size {length_mm} x {width_mm} mm is not a size", where="size",
                                  fix="state the surface's length and width in mm")
        long_mm, short_mm = max(a, b), min(a, b)
        to_um = _UNITS_UM[self.unit]
        per_mm = _LENGTH_MM[self.length_unit]
        for row in self.sizes:
            rl, rs = max(row.length_mm, row.width_mm), min(row.length_mm, row.width_mm)
            if abs(long_mm - rl) <= SIZE_MATCH_REL * rl and abs(short_mm - rs) <= SIZE_MATCH_REL * rs:
                v = row.value(g)
                if v is not None:
                    size_text = f"{rl / per_mm:g} x {rs / per_mm:g} {self.length_unit}"
                    v = self._rounded(v)
                    return GradeLimit(self.standard, g, v * to_um, self.source,
                                 f"tabulated for {size_text}: {v:g} {self.unit}")
        for f in self.formulas:
            if f.grade == g:
                L_mm = long_mm if self.length == "longer-side" else math.hypot(a, b)
                L = L_mm / per_mm
                v = f.constant + f.linear * L + f.quadratic * L * L
                r = self._rounded(v)
                text = f"{f.constant:g} + {f.linear:g} L"
                if f.quadratic:
                    text += f" + {f.quadratic:g} L^2"
                how = (f"formula {text} {self.unit} with L = {L:.6g} {self.length_unit} "
                       f"({'longer side' if self.length == 'longer-side' else 'diagonal'})")
                if self.round_to:
                    how += f", rounded to {self.round_to:g} {self.unit}"
                return GradeLimit(self.standard, g, r * to_um, self.source, how + f": {r:.6g} {self.unit}")
        raise InputValueError(
            f"the limits table for {self.standard} gives no limit of grade {g} for a plate "
            f"{long_mm:g} x {short_mm:g} mm", where="limits table",
            fix="add a [[table.size]] row for this size, or a [table.formula] entry for the grade, "
            "from the lab's copy of the standard",
        )

    def _rounded(self, v: float) -> float:
        if not self.round_to:
            return float(v)
        step = float(self.round_to)
        return float(math.floor(v / step + 0.5) * step)  # half up


@dataclass(frozen=True)
class LimitsFile:
    """A limits file as read: its tables, its text and the hash that names its version."""

    lab: str
    tables: tuple
    text: str
    sha256: str
    source_name: str = ""

    def table(self, standard: str, *, where: str = "standard") -> LimitTable:
        """The table of ``standard`` (exact name first, then ignoring letter case and spaces).

        Raises
        ------
        InputValueError
            No table of that name.
        """
        s = str(standard).strip()
        for t in self.tables:
            if t.standard == s:
                return t
        key = "".join(s.lower().split())
        for t in self.tables:
            if "".join(t.standard.lower().split()) == key:
                return t
        names = ", ".join(repr(t.standard) for t in self.tables) or "none"
        raise InputValueError(f"the limits table has no table for standard {s!r} (it has {names})", where=where,
                              fix="name the standard as the limits table does, or add its table")

    @property
    def standards(self) -> tuple:
        """Names of the standards, in file order."""
        return tuple(t.standard for t in self.tables)


def _nearest(word: str, valid) -> str:
    m = difflib.get_close_matches(word, list(valid), n=1)
    return f"; did you mean {m[0]!r}?" if m else f"; valid keys: {', '.join(valid)}"


def _check_keys(data: dict, valid, where: str) -> None:
    for k in data:
        if k not in valid:
            raise InputFormatError(f"unknown key {k!r}{_nearest(k, valid)}", where=where,
                                   fix="correct or remove the key (see docs/records.md)")


def _number(v, where: str, *, positive: bool = False) -> float:
    if isinstance(v, bool) or not isinstance(v, (int, float)):
        raise InputValueError(f"{v!r} is not a number", where=where, fix="write a plain number")
    x = float(v)
    if not math.isfinite(x) or (positive and x <= 0):
        raise InputValueError(f"{v!r} is not a {'positive ' if positive else ''}finite number", where=where,
                              fix="write a positive number" if positive else "write a finite number")
    return x


def _in_range(value: float, unit: str, where: str, name: str) -> None:
    """Refuse a limit (or a coefficient or step of one) beyond the range of a flatness limit (docs/limits.md)."""
    check_range(value * _UNITS_UM[unit], "flatness_limit_um", where=where, name=f"{name} (in µm)")


def _text(v, where: str, *, required: bool = True) -> str:
    if v is None and not required:
        return ""
    if not isinstance(v, str) or (required and not v.strip()):
        raise InputValueError(f"{v!r} is not a text" if not isinstance(v, str) else "the text is empty",
                              where=where, fix="write it in double quotes")
    return v.strip()


def _choice(v, valid, where: str) -> str:
    if v not in valid:
        raise InputValueError(f"{v!r} is not one of {', '.join(valid)}", where=where,
                              fix=f"write one of {', '.join(repr(x) for x in valid)}")
    return v


def _table(t: dict, k: int, src: str) -> LimitTable:
    label = f"{src}, [[table]] {k}"
    if not isinstance(t, dict):
        raise InputFormatError("a table must be a [[table]] section", where=label, fix="write it as [[table]]")
    _check_keys(t, _TABLE_KEYS, label)
    for req in ("standard", "source", "unit", "length_unit", "grades"):
        if req not in t:
            raise InputFormatError(f"the key {req!r} is missing", where=label,
                                   fix=f"add {req} = ... (see docs/records.md)")
    standard = _text(t["standard"], f"{label} standard")
    label = f"{src}, [[table]] {k} ({standard})"
    source = _text(t["source"], f"{label} source")
    quantity = _choice(t.get("quantity", "flatness"), ("flatness",), f"{label} quantity")
    unit = _choice(t["unit"], tuple(_UNITS_UM), f"{label} unit")
    length_unit = _choice(t["length_unit"], tuple(_LENGTH_MM), f"{label} length_unit")
    grades_raw = t["grades"]
    if not isinstance(grades_raw, list) or not grades_raw:
        raise InputValueError("grades must be a list of names, finest first", where=f"{label} grades",
                              fix='write e.g. grades = ["00", "0", "1"]')
    grades = tuple(_text(g, f"{label} grades") for g in grades_raw)
    if len(set(grades)) != len(grades):
        raise InputValueError("a grade is named twice", where=f"{label} grades", fix="name each grade once")
    round_to = None
    if "round_to" in t:
        round_to = _number(t["round_to"], f"{label} round_to", positive=True)
        _in_range(round_to, unit, f"{label} round_to", "round_to")
    formulas = []
    fdata = t.get("formula", {})
    if not isinstance(fdata, dict):
        raise InputFormatError("formula must be a [table.formula] section", where=f"{label} formula",
                               fix='write [table.formula] with one line per grade, e.g. "0" = { constant = 4.0 }')
    for g, coef in fdata.items():
        w = f"{label} formula {g!r}"
        if g not in grades:
            raise InputValueError(f"grade {g!r} is not in grades", where=w, fix="add it to grades or correct its name")
        if not isinstance(coef, dict):
            raise InputFormatError("a formula must be an inline table", where=w,
                                   fix=f'write "{g}" = {{ constant = ..., linear = ... }}')
        _check_keys(coef, _FORMULA_KEYS, w)
        if "constant" not in coef:
            raise InputFormatError("the key 'constant' is missing", where=w, fix="give constant = ... (0 if none)")
        values = [_number(coef.get(c, 0.0), f"{w} {c}") for c in _FORMULA_KEYS]
        for c, v in zip(_FORMULA_KEYS, values):
            _in_range(abs(v), unit, f"{w} {c}", c)
        formulas.append(GradeFormula(g, *values))
    sizes = []
    sdata = t.get("size", [])
    if not isinstance(sdata, list):
        raise InputFormatError("size must be [[table.size]] rows", where=f"{label} size", fix="write [[table.size]]")
    for j, row in enumerate(sdata, start=1):
        w = f"{label} size row {j}"
        if not isinstance(row, dict):
            raise InputFormatError("a size row must be a [[table.size]] section", where=w, fix="write [[table.size]]")
        _check_keys(row, _SIZE_KEYS, w)
        sz = row.get("size")
        if not isinstance(sz, list) or len(sz) != 2:
            raise InputValueError("size must be [length, width]", where=f"{w} size",
                                  fix=f"write e.g. size = [1000, 630] in {length_unit}")
        a, b = (_number(v, f"{w} size", positive=True) * _LENGTH_MM[length_unit] for v in sz)
        for side in (a, b):
            check_range(side, "length_mm", where=f"{w} size", name="a side (in mm)")
        lim = row.get("limits")
        if not isinstance(lim, dict) or not lim:
            raise InputValueError("limits must name at least one grade", where=f"{w} limits",
                                  fix='write e.g. limits = { "0" = 8.0 }')
        pairs = []
        for g, v in lim.items():
            if g not in grades:
                raise InputValueError(f"grade {g!r} is not in grades", where=f"{w} limits",
                                      fix="add it to grades or correct its name")
            pairs.append((g, _number(v, f"{w} limits {g!r}", positive=True)))
            _in_range(pairs[-1][1], unit, f"{w} limits {g!r}", f"the limit of grade {g!r}")
        sizes.append(SizeRow(a, b, tuple(pairs)))
    length = _choice(t.get("length", "longer-side"), _LENGTHS, f"{label} length")
    if not formulas and not sizes:
        raise InputValueError("the table gives no limits", where=label,
                              fix="add [table.formula] entries or [[table.size]] rows")
    return LimitTable(standard, source, unit, length_unit, length, grades, tuple(formulas), tuple(sizes),
                      round_to, quantity)


def parse_limits(text: str, *, source: str = "<limits>") -> LimitsFile:
    """Read a limits file's text.

    Parameters
    ----------
    text : str
        The TOML text.
    source : str
        The file, for messages.

    Returns
    -------
    LimitsFile

    Raises
    ------
    InputFormatError
        Not TOML, not a limits file, an unknown key (the nearest valid key is suggested),
        a missing key.
    InputValueError
        A value of the wrong kind, a grade not in ``grades``, a table with no limits,
        two tables for one standard.
    """
    from ..io._text import toml_loads

    try:  # toml_loads: no nesting deeper than any flatcheck file, no integer too large for a float
        data = toml_loads(text.lstrip("\ufeff"), where=source)
    except tomllib.TOMLDecodeError as exc:
        raise InputFormatError(f"not valid TOML ({exc})", where=source, fix="correct the TOML syntax") from None
    if data.get("format") != LIMITS_FORMAT:
        raise InputFormatError(f"not a limits file (format = {data.get('format')!r})", where=source,
                               fix=f'the file must start with format = "{LIMITS_FORMAT}" and version = {LIMITS_VERSION}')
    _check_keys(data, _TOP_KEYS, source)
    if data.get("version") != LIMITS_VERSION:
        raise InputFormatError(f"limits file version {data.get('version')!r} is not known", where=source,
                               fix=f"write version = {LIMITS_VERSION}")
    raw = data.get("table", [])
    if not isinstance(raw, list) or not raw:
        raise InputFormatError("the file has no [[table]]", where=source,
                               fix="add one [[table]] per standard (see docs/records.md)")
    tables = tuple(_table(t, k, source) for k, t in enumerate(raw, start=1))
    names = [" ".join(t.standard.lower().split()) for t in tables]
    for k, n in enumerate(names):
        if n in names[:k]:
            raise InputValueError(f"two tables for standard {tables[k].standard!r}", where=f"{source}, [[table]] {k + 1}",
                                  fix="keep one table per standard")
    lab = _text(data.get("lab"), f"{source} lab", required=False)
    return LimitsFile(lab, tables, text, text_sha256(text), source)


def read_limits(path) -> LimitsFile:
    """Read a limits file (see :func:`parse_limits`).

    Raises
    ------
    InputFormatError
        A missing, empty, binary or non-UTF-8 file, or any error of :func:`parse_limits`.
    """
    from ..io import read_text

    path = Path(path)
    text = read_text(path, wanted="the lab's limits table (TOML, format = \"flatcheck-limits\")")
    return parse_limits(text, source=str(path))
