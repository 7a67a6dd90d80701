"""Survey files in TOML: reading, writing and checking them.

The format is described in ``docs/survey-format.md``. In short::

    format = "flatcheck-survey"
    version = 1
    positive = "rises-toward-line-end"

    [surface]       description, ident, length_mm, width_mm, material
    [instrument]    kind, unit, reports, reading_uncertainty, ...
    [layout]        pattern, margin_mm, foot_spacing_mm, steps_x, steps_y, ...
    [conditions]    temperature_c, date, operator, notes
    [[line]]        name, readings, order, flip_sign   (or several [[line.run]])

The stations are not listed in the file: they are rebuilt from ``[layout]``
with :mod:`flatcheck.survey`, so a file cannot disagree with its own layout.
Every problem is reported as a :class:`~flatcheck.errors.FlatcheckError` naming
the file, the TOML line and the field, with a way to fix it.
"""

from __future__ import annotations

import dataclasses
import datetime as _dt
import difflib
import json
import math
import re
import tomllib
from pathlib import Path

from ..errors import InputFormatError, InputValueError, LayoutError, UnitError
from ..survey import plan_grid, plan_lines, plan_union_jack
from ..survey import INSTRUMENT_KINDS, PATTERNS, Instrument, Run, Surface, Survey, check_plausible_readings
from ..units import MM_PER_INCH, angle_unit, length_unit
from ._atomic import write_text_atomic
from ._heightmap_csv import HEADER as _CSV_HEADER
from ._text import read_text, toml_loads

__all__ = [
    "FORMAT_NAME",
    "FORMAT_VERSION",
    "SIGN_CONVENTIONS",
    "read_survey",
    "parse_survey",
    "require_readings",
    "format_survey",
    "write_survey",
]

FORMAT_NAME = "flatcheck-survey"
FORMAT_VERSION = 1

#: Accepted values of the top-level ``positive`` key and whether they flip the sign.
SIGN_CONVENTIONS = {
    "rises-toward-line-end": False,  # slope instruments: positive = surface rises toward the last station
    "falls-toward-line-end": True,
    "height-up": False,  # indicators: positive = higher surface
    "height-down": True,
}

_TOP_KEYS = (
    "format", "version", "positive", "surface", "instrument", "layout", "conditions", "uncertainty", "repeat_readings",
    "line",
)
_SURFACE_KEYS = (
    "description", "ident", "length_mm", "width_mm", "length_in", "width_in", "material", "thickness_mm", "thickness_in",
)
#: Keys of the optional [uncertainty] table (flatcheck.evaluation._budget_sources.KEYS; docs/survey-format.md).
_UNCERTAINTY_KEYS = (
    "temperature_difference_u_k",
    "expansion_coefficient_per_k",
    "resolution",
    "zero_drift",
    "turbulence_per_m",
    "reference_level_uncertainty",
    "sampling_um",
    "calibration_uncertainty_rel",
)
_REPEAT_KEYS = ("kind", "unit", "readings", "tolerance", "notes")
_REPEAT_KINDS = ("instrument", "gauge")
_INSTRUMENT_KEYS = (
    "kind",
    "unit",
    "reports",
    "model",
    "reading_uncertainty",
    "scale_uncertainty_rel",
    "foot_spacing_uncertainty_mm",
    "foot_spacing_uncertainty_in",
)
_LAYOUT_KEYS = (
    "pattern",
    "margin_mm",
    "margin_in",
    "foot_spacing_mm",
    "foot_spacing_in",
    "diagonal_foot_spacing_mm",
    "diagonal_foot_spacing_in",
    "steps_x",
    "steps_y",
    "steps_diagonal",
    "diagonals",
)
_CONDITION_KEYS = ("temperature_c", "date", "operator", "notes")
_LINE_KEYS = (
    "name",
    "steps",
    "start_mm",
    "end_mm",
    "start_in",
    "end_in",
    "foot_spacing_mm",
    "foot_spacing_in",
    "readings",
    "order",
    "flip_sign",
    "run",
    "notes",
)
_RUN_KEYS = ("readings", "order", "flip_sign", "notes")
_REPORTS = ("mirror-tilt", "beam-deviation")
_ORDERS = ("forward", "reverse")
_BASE_TOLERANCE = 0.02  # a line's own foot spacing may differ from the station spacing by 2 % at most


# ---------------------------------------------------------------------------
# locating keys and tables in the text (tomllib does not report positions)

_HEADER = re.compile(r"^\s*(\[\[?)\s*([A-Za-z0-9_.\-\" ]+?)\s*(\]\]?)\s*(#.*)?$")
_KEY = re.compile(r"^\s*([A-Za-z0-9_\-]+|\"[^\"]*\")\s*=")


class _Locator:
    """Line numbers of tables and keys, found by scanning the text."""

    def __init__(self, text: str):
        self.tables: dict[tuple, int] = {(): 0}
        self.keys: dict[tuple, int] = {}
        current: tuple = ()
        n_line = -1
        n_run = -1
        in_multiline = None
        for no, raw in enumerate(text.splitlines(), start=1):
            if in_multiline:
                if raw.count(in_multiline) % 2 == 1:
                    in_multiline = None
                continue
            m = _HEADER.match(raw)
            if m and not _KEY.match(raw):
                name = m.group(2).replace('"', "").replace(" ", "")
                if m.group(1) == "[[" and name == "line":
                    n_line += 1
                    n_run = -1
                    current = ("line", n_line)
                elif m.group(1) == "[[" and name == "line.run":
                    n_run += 1
                    current = ("line", n_line, "run", n_run)
                else:
                    current = (name,)
                self.tables.setdefault(current, no)
                continue
            k = _KEY.match(raw)
            if k:
                key = k.group(1).strip('"')
                self.keys.setdefault(current + (key,), no)
                for quote in ('"""', "'''"):
                    if raw.count(quote) % 2 == 1:
                        in_multiline = quote

    def table(self, path: tuple) -> int | None:
        return self.tables.get(path)

    def key(self, path: tuple, key: str) -> int | None:
        return self.keys.get(path + (key,), self.tables.get(path))


class _Ctx:
    def __init__(self, path, text):
        self.path = str(path)
        self.loc = _Locator(text)

    def where(self, table: tuple, key: str | None = None, label: str | None = None) -> str:
        no = self.loc.key(table, key) if key else self.loc.table(table)
        if label is None:
            label = _table_label(table)
            if key:
                label = f"{label} {key}" if label else key
        parts = [self.path]
        if no:
            parts.append(f"line {no}")
        s = ", ".join(parts)
        return f"{s} ({label})" if label else s


def _table_label(table: tuple) -> str:
    if not table:
        return ""
    if table[0] == "line":
        lab = f"[[line]] {table[1] + 1}"
        if len(table) > 2:
            lab += f" [[line.run]] {table[3] + 1}"
        return lab
    return f"[{table[0]}]"


def _nearest(word: str, valid) -> str:
    close = difflib.get_close_matches(str(word), list(valid), n=1, cutoff=0.5)
    if close:
        return f"did you mean {close[0]!r}?"
    return "valid names: " + ", ".join(valid)


def _check_keys(ctx: _Ctx, table: tuple, data: dict, valid) -> None:
    for key in data:
        if key not in valid:
            raise InputFormatError(
                f"unknown key {key!r}",
                where=ctx.where(table, key),
                fix=_nearest(key, valid),
            )


# ---------------------------------------------------------------------------
# typed getters


def _get_str(ctx, table, data, key, *, required=False, default=""):
    if key not in data:
        if required:
            raise InputFormatError(
                f"the key {key!r} is missing", where=ctx.where(table), fix=f"add {key} = \"...\" to {_table_label(table) or 'the top of the file'}"
            )
        return default
    v = data[key]
    if isinstance(v, (_dt.date, _dt.datetime, _dt.time)):
        return v.isoformat()
    if not isinstance(v, str):
        raise InputValueError(f"{key} must be text, got {v!r}", where=ctx.where(table, key), fix=f'write {key} = "..."')
    return v


def _get_number(ctx, table, data, key, *, positive=False, nonneg=False, required=False):
    if key not in data:
        if required:
            raise InputFormatError(f"the key {key!r} is missing", where=ctx.where(table), fix=f"add {key} = <number>")
        return None
    v = data[key]
    if isinstance(v, bool) or not isinstance(v, (int, float)):
        raise InputValueError(f"{key} must be a number, got {v!r}", where=ctx.where(table, key), fix=f"write {key} = <number>")
    v = float(v)
    if not math.isfinite(v):
        raise InputValueError(f"{key} is {v}, not a finite number", where=ctx.where(table, key), fix="give a finite number")
    if positive and v <= 0:
        raise InputValueError(f"{key} must be positive, got {v:g}", where=ctx.where(table, key), fix=f"give a positive {key}")
    if nonneg and v < 0:
        raise InputValueError(f"{key} must be zero or positive, got {v:g}", where=ctx.where(table, key), fix=f"give {key} >= 0")
    return v


def _get_length_mm(ctx, table, data, base, *, positive=True, nonneg=False, required=False):
    """A length given as ``<base>_mm`` or ``<base>_in`` (never both), in mm."""
    k_mm, k_in = f"{base}_mm", f"{base}_in"
    if k_mm in data and k_in in data:
        raise InputValueError(
            f"both {k_mm} and {k_in} are given", where=ctx.where(table, k_in), fix="give the length once, in mm or in inches"
        )
    if k_in in data:
        v = _get_number(ctx, table, data, k_in, positive=positive, nonneg=nonneg)
        return _in_range(ctx, table, k_in, base, v * MM_PER_INCH)  # 1 in = 25.4 mm exactly
    v = _get_number(ctx, table, data, k_mm, positive=positive, nonneg=nonneg)
    if v is None and required:
        raise InputFormatError(
            f"the key {k_mm!r} is missing", where=ctx.where(table), fix=f"add {k_mm} = <number> (or {k_in} in inches)"
        )
    return _in_range(ctx, table, k_mm, base, v)


def _in_range(ctx, table, key, base, v_mm):
    """A length in mm inside its range of docs/limits.md (flatcheck.limits), checked before any layout is built."""
    if v_mm is None:
        return None
    from ..limits import check_range

    kind = {"foot_spacing": "foot_spacing_mm", "diagonal_foot_spacing": "foot_spacing_mm", "length": "length_mm",
            "width": "length_mm"}.get(base, "position_mm")
    check_range(v_mm, kind, where=ctx.where(table, key), name=key)
    return v_mm


def _get_int(ctx, table, data, key):
    if key not in data:
        return None
    v = data[key]
    if isinstance(v, bool) or not isinstance(v, int):
        raise InputValueError(f"{key} must be a whole number, got {v!r}", where=ctx.where(table, key), fix=f"write {key} = <whole number>")
    return v


def _get_bool(ctx, table, data, key, default=False):
    if key not in data:
        return default
    v = data[key]
    if not isinstance(v, bool):
        raise InputValueError(f"{key} must be true or false, got {v!r}", where=ctx.where(table, key), fix=f"write {key} = true or false")
    return v


def _get_choice(ctx, table, data, key, valid, *, required=False, default=None):
    if key not in data:
        if required:
            raise InputFormatError(
                f"the key {key!r} is missing", where=ctx.where(table), fix=f"add {key} = one of {', '.join(valid)}"
            )
        return default
    v = data[key]
    if not isinstance(v, str) or v not in valid:
        raise InputValueError(
            f"{key} is {v!r}", where=ctx.where(table, key), fix=f"use one of {', '.join(valid)} ({_nearest(v, valid)})"
        )
    return v


def _get_table(ctx, data, key, *, required=True) -> dict:
    if key not in data:
        if required:
            raise InputFormatError(
                f"the [{key}] section is missing", where=ctx.path, fix=f"add a [{key}] section (see docs/survey-format.md)"
            )
        return {}
    v = data[key]
    if not isinstance(v, dict):
        raise InputFormatError(f"{key} must be a [{key}] section", where=ctx.where((), key), fix=f"write it as [{key}]")
    return v


# ---------------------------------------------------------------------------
# reading


def read_survey(path) -> Survey:
    """Read a TOML survey file.

    Parameters
    ----------
    path : str or Path
        The file.

    Returns
    -------
    Survey
        Stations rebuilt from ``[layout]``, lines with their runs (readings in
        the instrument's unit, normalised to the sign convention
        "rises-toward-line-end"), ``meta["layout"]`` with the layout parameters.

    Raises
    ------
    InputFormatError
        Missing, empty, binary or non-TOML file; missing sections or keys;
        unknown keys (the nearest valid name is suggested).
    InputValueError
        Wrong types, NaN or infinite values, wrong reading counts, duplicate
        lines, non-positive foot spacings.
    UnitError
        Unknown instrument unit.
    LayoutError
        A layout that cannot be built, a missing line of the pattern, or a line
        that does not belong to it.
    """
    path = Path(path)
    text = read_text(path)
    return parse_survey(text, source=str(path))


def parse_survey(text: str, *, source: str = "<survey>") -> Survey:
    """Parse the text of a survey file (see :func:`read_survey`); ``source`` names it in messages."""
    ctx = _Ctx(source, text)
    try:
        data = toml_loads(text, where=source)
    except tomllib.TOMLDecodeError as exc:
        msg = str(exc)
        m = re.search(r"\(at line (\d+), column (\d+)\)", msg)
        where = f"{source}, line {m.group(1)}, column {m.group(2)}" if m else source
        what = re.sub(r"\s*\(at line \d+, column \d+\)", "", msg) or "syntax error"
        fix = 'check quotes, brackets and commas (keys are written name = value; text needs "quotes")'
        first = next((ln.strip() for ln in text.splitlines() if ln.strip() and not ln.strip().startswith("#")), "")
        if "," in first and "=" not in first and not first.startswith("["):
            fix = (
                f"it looks like a table of values: a height map needs the header {','.join(_CSV_HEADER)} as its "
                "first line (other units converted first); a survey is TOML (docs/survey-format.md)"
            )
        raise InputFormatError(f"not valid TOML: {what}", where=where, fix=fix) from None
    if not data:
        raise InputFormatError("the file holds no TOML keys", where=source, fix="start from a file written by 'flatcheck plan'")
    # ---- marker
    if "format" not in data:
        raise InputFormatError(
            "this is not a flatcheck survey file (no format key)",
            where=source,
            fix=f'add format = "{FORMAT_NAME}" and version = {FORMAT_VERSION} at the top',
        )
    if data["format"] != FORMAT_NAME:
        raise InputFormatError(
            f"format is {data['format']!r}", where=ctx.where((), "format"), fix=f'write format = "{FORMAT_NAME}"'
        )
    version = _get_int(ctx, (), data, "version")
    if version is None:
        raise InputFormatError("the key 'version' is missing", where=ctx.where(()), fix=f"add version = {FORMAT_VERSION}")
    if version != FORMAT_VERSION:
        raise InputFormatError(
            f"version {version} is not supported (this flatcheck reads version {FORMAT_VERSION})",
            where=ctx.where((), "version"),
            fix="update flatcheck or convert the file",
        )
    _check_keys(ctx, (), data, _TOP_KEYS)
    # ---- surface
    sd = _get_table(ctx, data, "surface")
    _check_keys(ctx, ("surface",), sd, _SURFACE_KEYS)
    length = _get_length_mm(ctx, ("surface",), sd, "length", required=True)
    width = _get_length_mm(ctx, ("surface",), sd, "width", required=True)
    surface = Surface(
        description=_get_str(ctx, ("surface",), sd, "description"),
        length_mm=length,
        width_mm=width,
        ident=_get_str(ctx, ("surface",), sd, "ident"),
        material=_get_str(ctx, ("surface",), sd, "material"),
    )
    # ---- instrument
    idt = _get_table(ctx, data, "instrument")
    it = ("instrument",)
    _check_keys(ctx, it, idt, _INSTRUMENT_KEYS)
    kind = _get_choice(ctx, it, idt, "kind", INSTRUMENT_KINDS, required=True)
    unit = _get_str(ctx, it, idt, "unit", required=True)
    try:
        if kind == "indicator":
            unit = length_unit(unit).name
        else:
            unit = angle_unit(unit).name
    except UnitError as exc:
        raise UnitError(
            exc.message + f" for {'an' if kind[0] in 'aeiou' else 'a'} {kind}",
            where=ctx.where(it, "unit"),
            fix=exc.fix,
        ) from None
    reports = _get_choice(ctx, it, idt, "reports", _REPORTS, default="mirror-tilt")
    if kind != "autocollimator" and reports != "mirror-tilt":
        raise InputValueError(
            f"reports = {reports!r} applies to autocollimators only", where=ctx.where(it, "reports"), fix="remove the key"
        )
    fsu = _get_length_mm(ctx, it, idt, "foot_spacing_uncertainty", positive=False, nonneg=True)
    ru = _get_number(ctx, it, idt, "reading_uncertainty", nonneg=True)
    su = _get_number(ctx, it, idt, "scale_uncertainty_rel", nonneg=True)
    from ..evaluation import check_plausible_uncertainty

    if ru is not None:
        check_plausible_uncertainty("reading_uncertainty", ru, kind=kind, unit=unit,
                                    where=ctx.where(it, "reading_uncertainty"))
    if su is not None:
        check_plausible_uncertainty("scale_uncertainty_rel", su, kind=kind, unit=unit,
                                    where=ctx.where(it, "scale_uncertainty_rel"))
    instrument = Instrument(
        kind=kind,
        unit=unit,
        reports=reports,
        reading_uncertainty=ru,
        scale_uncertainty_rel=su,
        foot_spacing_uncertainty_mm=fsu,
        model=_get_str(ctx, it, idt, "model"),
    )
    thickness = _get_length_mm(ctx, ("surface",), sd, "thickness")
    if thickness is not None:
        key = "thickness_in" if "thickness_in" in sd else "thickness_mm"
        check_plausible_uncertainty("thickness_mm", thickness, kind=kind, unit=unit, where=ctx.where(("surface",), key))
    unc = _read_uncertainty_table(ctx, data, kind, unit)
    repeat = _read_repeat_readings(ctx, data, kind, unit)
    # ---- sign convention
    if "positive" not in data:
        raise InputFormatError(
            "the sign convention is not stated (no 'positive' key)",
            where=source,
            fix='add positive = "rises-toward-line-end" at the top (or "height-up" for an indicator) after checking '
            "how your instrument reads",
        )
    valid_signs = ("height-up", "height-down") if kind == "indicator" else ("rises-toward-line-end", "falls-toward-line-end")
    positive = _get_choice(ctx, (), data, "positive", valid_signs)
    global_flip = SIGN_CONVENTIONS[positive]
    # ---- conditions
    cd = _get_table(ctx, data, "conditions", required=False)
    ct = ("conditions",)
    _check_keys(ctx, ct, cd, _CONDITION_KEYS)
    temperature = _get_number(ctx, ct, cd, "temperature_c")
    if temperature is not None:
        from ..limits import check_range

        check_range(temperature, "temperature_c", where=ctx.where(ct, "temperature_c"), name="temperature_c")
    # ---- layout and lines
    ld = _get_table(ctx, data, "layout")
    lt = ("layout",)
    _check_keys(ctx, lt, ld, _LAYOUT_KEYS)
    pattern = _get_choice(ctx, lt, ld, "pattern", PATTERNS, required=True)
    raw_lines = data.get("line", [])
    if not isinstance(raw_lines, list) or not raw_lines:
        raise InputFormatError(
            "the survey has no [[line]] tables", where=source, fix="add one [[line]] table per line (name = ..., readings = [...])"
        )
    names = []
    for i, item in enumerate(raw_lines):
        tab = ("line", i)
        if not isinstance(item, dict):
            raise InputFormatError("line must be a [[line]] table", where=ctx.where(tab), fix="write [[line]] tables")
        _check_keys(ctx, tab, item, _LINE_KEYS)
        name = _get_str(ctx, tab, item, "name", required=True)
        if not name.strip():
            raise InputValueError("the line name is empty", where=ctx.where(tab, "name"), fix="give the line's name")
        if name in names:
            raise InputValueError(
                f"line {name!r} appears twice (first as [[line]] {names.index(name) + 1})",
                where=ctx.where(tab, "name"),
                fix="merge the two tables into one [[line]] with several [[line.run]] tables, or rename one",
            )
        names.append(name)

    plan = _build_plan(ctx, pattern, ld, raw_lines, names, surface, instrument)
    plan_names = [ln.name for ln in plan.lines]
    for i, name in enumerate(names):
        if name not in plan_names:
            raise LayoutError(
                f"line {name!r} does not belong to the {pattern} layout",
                where=ctx.where(("line", i), "name"),
                fix=f"{_nearest(name, plan_names)} (the layout's lines: {', '.join(plan_names)})",
            )
    for pn in plan_names:
        if pn not in names:
            raise LayoutError(
                f"line {pn!r} of the {pattern} layout is missing",
                where=ctx.where(lt, "pattern"),
                fix=f'add a [[line]] table with name = "{pn}" (readings = [] if not read yet)',
            )
    by_name = {ln.name: ln for ln in plan.lines}
    lines = []
    for i, name in enumerate(names):
        lines.append(_read_line(ctx, ("line", i), raw_lines[i], by_name[name], plan, instrument, global_flip))
    meta = dict(plan.meta)
    # where each line's readings are (file, TOML line, table), for messages about a whole line
    places = {name: ctx.where(("line", i), "readings") for i, name in enumerate(names)}
    inch_keys = ("length_in", "width_in", "margin_in", "foot_spacing_in")
    inches = any(k in sd for k in inch_keys[:2]) or any(k in ld for k in inch_keys[2:]) or any(
        isinstance(it, dict) and "start_in" in it for it in raw_lines
    )
    meta["file"] = {"positive": positive, "line_where": places, "inches": inches,
                    "uncertainty_where": {k: ctx.where(("uncertainty",), k) for k in unc}}
    if fsu is not None and not instrument.reads_heights:
        smallest = min(float(ln.foot_spacing_mm) for ln in lines)
        key = "foot_spacing_uncertainty_in" if "foot_spacing_uncertainty_in" in idt else "foot_spacing_uncertainty_mm"
        check_plausible_uncertainty("foot_spacing_uncertainty_mm", fsu, kind=kind, unit=unit,
                                    where=ctx.where(it, key), foot_spacing_mm=smallest)
    if unc:
        meta["uncertainty"] = unc
    if thickness is not None:
        meta["thickness_mm"] = thickness
    if repeat is not None:
        meta["repeat_readings"] = repeat
    return dataclasses.replace(
        plan,
        lines=tuple(lines),
        date=_get_str(ctx, ct, cd, "date"),
        temperature_c=temperature,
        operator=_get_str(ctx, ct, cd, "operator"),
        notes=_get_str(ctx, ct, cd, "notes"),
        source=source,
        meta=meta,
    )


def _read_uncertainty_table(ctx, data, kind, unit) -> dict:
    """The optional ``[uncertainty]`` table: budget inputs, each checked for plausibility."""
    from ..evaluation import check_plausible_uncertainty

    ud = _get_table(ctx, data, "uncertainty", required=False)
    ut = ("uncertainty",)
    _check_keys(ctx, ut, ud, _UNCERTAINTY_KEYS)
    out = {}
    for key in _UNCERTAINTY_KEYS:
        v = _get_number(ctx, ut, ud, key, nonneg=True)
        if v is None:
            continue
        check_plausible_uncertainty(key, v, kind=kind, unit=unit, where=ctx.where(ut, key))
        out[key] = v
    return out


def _read_repeat_readings(ctx, data, kind, unit):
    """The optional ``[repeat_readings]`` table: series of repeated readings (docs/survey-format.md)."""
    if "repeat_readings" not in data:
        return None
    rd = _get_table(ctx, data, "repeat_readings", required=False)
    rt = ("repeat_readings",)
    _check_keys(ctx, rt, rd, _REPEAT_KEYS)
    rkind = _get_choice(ctx, rt, rd, "kind", _REPEAT_KINDS, default="instrument")
    if rkind == "gauge":
        runit = _get_str(ctx, rt, rd, "unit", required=True)
        try:
            runit = length_unit(runit).name
        except UnitError as exc:
            raise UnitError(exc.message + " for a repeat-reading gauge (it reads heights)", where=ctx.where(rt, "unit"),
                            fix=exc.fix) from None
    else:
        if "unit" in rd and rd["unit"] != unit:
            raise InputValueError(
                f"unit {rd['unit']!r} differs from the instrument's {unit!r}", where=ctx.where(rt, "unit"),
                fix="give the survey instrument's repeat readings in its own unit (or leave unit out), or set "
                'kind = "gauge" for a repeat-reading gauge')
        runit = unit
    raw = rd.get("readings")
    if raw is None:
        raise InputFormatError("the key 'readings' is missing", where=ctx.where(rt),
                               fix="add readings = [r1, r2, ...] (or a list of such lists, one per place)")
    if not isinstance(raw, list) or not raw:
        raise InputValueError("readings must be a list of numbers or of lists of numbers", where=ctx.where(rt, "readings"),
                              fix="write readings = [r1, r2, ...] or [[...], [...]]")
    series = raw if all(isinstance(v, list) for v in raw) else [raw]
    clean = []
    for i, ser in enumerate(series, start=1):
        if not isinstance(ser, list) or not ser:
            raise InputValueError(f"series {i} is empty or not a list", where=ctx.where(rt, "readings"),
                                  fix="give each series as a list of numbers")
        for k, v in enumerate(ser, start=1):
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(float(v)):
                raise InputValueError(f"reading {k} of series {i} is {v!r}, not a finite number",
                                      where=ctx.where(rt, "readings"), fix="write plain numbers")
            if abs(float(v)) > 1e6:
                raise InputValueError(f"reading {k} of series {i} is {v!r}: no repeat reading is that large",
                                      where=ctx.where(rt, "readings"), fix=f"check the value and the unit ({runit!r})")
        clean.append(tuple(float(v) for v in ser))
    if sum(len(c) for c in clean) - len(clean) < 1:
        raise InputValueError("the repeat readings have no series with two or more readings",
                              where=ctx.where(rt, "readings"), fix="repeat a reading at least twice in one place")
    tol = _get_number(ctx, rt, rd, "tolerance", positive=True)
    return {"kind": rkind, "unit": runit, "series": tuple(clean), "tolerance": tol,
            "notes": _get_str(ctx, rt, rd, "notes"), "where": ctx.where(rt)}


def require_readings(survey: Survey) -> None:
    """Refuse a survey with a line that has no readings (a blank from ``flatcheck plan`` half filled in).

    Raises
    ------
    InputValueError
        Naming the first such line, with the file and TOML line of its ``readings`` when the
        survey was read from a file.
    """
    places = (survey.meta.get("file") or {}).get("line_where") or {}
    for ln in survey.lines:
        if ln.runs:
            continue
        n = len(ln.stations) if survey.instrument.reads_heights else ln.steps
        where = places.get(ln.name) or (f"{survey.source}, line {ln.name!r}" if survey.source else f"line {ln.name!r}")
        raise InputValueError(
            f"line {ln.name!r} has no readings",
            where=where,
            fix=f"fill in its {n} readings (readings = [...]) in the order taken",
        )


def _twin(key: str) -> str:
    """``margin_mm`` <-> ``margin_in``."""
    if key.endswith("_mm"):
        return key[:-3] + "_in"
    if key.endswith("_in"):
        return key[:-3] + "_mm"
    return key


def _build_plan(ctx, pattern, ld, raw_lines, names, surface, instrument) -> Survey:
    lt = ("layout",)
    L, W = surface.length_mm, surface.width_mm
    if pattern == "lines":
        # errors about positions speak the unit the lines' ends are written in
        units = "in" if any(isinstance(it, dict) and ("start_in" in it or "end_in" in it) for it in raw_lines) else "mm"
        for key in ("margin_mm", "margin_in", "foot_spacing_mm", "foot_spacing_in", "steps_x", "steps_y", "steps_diagonal", "diagonals"):
            if key in ld:
                raise InputFormatError(
                    f"{key} does not apply to pattern 'lines'", where=ctx.where(lt, key),
                    fix="give start_mm, end_mm and steps in each [[line]] instead",
                )
        spec = []
        for i, item in enumerate(raw_lines):
            tab = ("line", i)
            ends = []
            for base in ("start", "end"):
                k_mm, k_in = f"{base}_mm", f"{base}_in"
                if k_mm in item and k_in in item:
                    raise InputValueError(f"both {k_mm} and {k_in} are given", where=ctx.where(tab, k_in), fix="give it once")
                key = k_in if k_in in item else k_mm
                if key not in item:
                    raise InputFormatError(
                        f"line {names[i]!r} has no {k_mm} (or {k_in})", where=ctx.where(tab),
                        fix=f"free lines need {k_mm} = [x, y] in mm (or {k_in} in inches) from the south-west corner, "
                        "the other end and steps",
                    )
                v = item[key]
                if (
                    not isinstance(v, list) or len(v) != 2
                    or any(isinstance(c, bool) or not isinstance(c, (int, float)) or not math.isfinite(c) for c in v)
                ):
                    raise InputValueError(f"{key} must be [x, y], got {v!r}", where=ctx.where(tab, key), fix=f"write {key} = [x, y]")
                f = MM_PER_INCH if key.endswith("_in") else 1.0
                ends.append((float(v[0]) * f, float(v[1]) * f))
            steps = _get_int(ctx, tab, item, "steps")
            if steps is None or steps < 1:
                raise InputValueError(
                    f"line {names[i]!r} needs steps >= 1", where=ctx.where(tab, "steps"),
                    fix="give steps = the number of foot spacings along the line",
                )
            spec.append((names[i], ends[0], ends[1], steps))
        try:
            return plan_lines(spec, length_mm=L, width_mm=W, instrument=instrument, surface=surface, units=units)
        except LayoutError as exc:
            idx = next((i for i, n in enumerate(names) if exc.where and repr(n) in exc.where), None)
            where = ctx.where(("line", idx)) if idx is not None else ctx.where(lt)
            raise LayoutError(exc.message, where=where, fix=exc.fix) from None
    base = _get_length_mm(ctx, lt, ld, "foot_spacing", required=True)
    margin = _get_length_mm(ctx, lt, ld, "margin", positive=False, nonneg=True)
    kw = {} if margin is None else {"margin_mm": margin}
    # layout errors speak the unit the foot spacing is written in
    kw["units"] = "in" if "foot_spacing_in" in ld else "mm"
    sx, sy = _get_int(ctx, lt, ld, "steps_x"), _get_int(ctx, lt, ld, "steps_y")
    try:
        if pattern == "union-jack":
            if "diagonals" in ld:
                raise InputFormatError("diagonals applies to grids only", where=ctx.where(lt, "diagonals"), fix="remove it")
            sd = _get_int(ctx, lt, ld, "steps_diagonal")
            given = [s is not None for s in (sx, sy, sd)]
            if any(given) and not all(given):
                raise InputFormatError(
                    "give steps_x, steps_y and steps_diagonal together (or none, to let flatcheck choose)",
                    where=ctx.where(lt), fix="add the missing steps keys",
                )
            plan = plan_union_jack(L, W, base, instrument=instrument, surface=surface,
                                   steps=(sx, sy, sd) if all(given) else None, **kw)
            bd = _get_length_mm(ctx, lt, ld, "diagonal_foot_spacing")
            if bd is not None:
                geo = plan.meta["layout"]["diagonal_foot_spacing_mm"]
                key = "diagonal_foot_spacing_in" if "diagonal_foot_spacing_in" in ld else "diagonal_foot_spacing_mm"
                if abs(bd - geo) > _BASE_TOLERANCE * geo:
                    nd = plan.meta["layout"]["steps_diagonal"]
                    f, u = (MM_PER_INCH, "in") if key.endswith("_in") else (1.0, "mm")
                    raise LayoutError(
                        f"diagonal foot spacing {bd / f:.6g} {u} does not fit the layout: {nd} steps along the "
                        f"{geo * nd / f:.4g} {u} diagonal are {geo / f:.4f} {u} each",
                        where=ctx.where(lt, key),
                        fix="correct the spacing, or set steps_diagonal to match it",
                    )
                lines = tuple(
                    dataclasses.replace(ln, foot_spacing_mm=bd) if ln.name in ("SW-NE", "SE-NW") else ln for ln in plan.lines
                )
                meta = dict(plan.meta)
                meta["layout"] = dict(meta["layout"], diagonal_foot_spacing_mm=bd)
                plan = dataclasses.replace(plan, lines=lines, meta=meta)
            return plan
        for key in ("steps_diagonal", "diagonal_foot_spacing_mm", "diagonal_foot_spacing_in"):
            if key in ld:
                raise InputFormatError(f"{key} applies to union-jack only", where=ctx.where(lt, key), fix="remove it")
        if (sx is None) != (sy is None):
            raise InputFormatError("give steps_x and steps_y together (or neither)", where=ctx.where(lt), fix="add the missing key")
        return plan_grid(L, W, base, instrument=instrument, surface=surface,
                         diagonals=_get_bool(ctx, lt, ld, "diagonals"),
                         steps=(sx, sy) if sx is not None else None, **kw)
    except LayoutError as exc:
        field = exc.where if exc.where in _LAYOUT_KEYS else None
        if field is not None and field not in ld and _twin(field) in ld:
            field = _twin(field)  # the error's unit guess differs from this key's: point at the key written
        raise LayoutError(exc.message, where=ctx.where(lt, field), fix=exc.fix) from None


def _read_readings(ctx, tab, data, line, instrument):
    if "readings" not in data:
        return None
    v = data["readings"]
    if not isinstance(v, list):
        raise InputValueError(
            f"readings must be a list [r1, r2, ...], got {v!r}", where=ctx.where(tab, "readings"), fix="write readings = [...]"
        )
    if not v:
        return ()
    for k, r in enumerate(v, start=1):
        if isinstance(r, bool) or not isinstance(r, (int, float)):
            raise InputValueError(
                f"reading {k} of line {line.name!r} is {r!r}, not a number",
                where=ctx.where(tab, "readings"),
                fix="write plain numbers in the instrument's unit, separated by commas",
            )
        if not math.isfinite(r):
            raise InputValueError(
                f"reading {k} of line {line.name!r} is {r}", where=ctx.where(tab, "readings"),
                fix="replace it with the value read, or repeat the run",
            )
    expected = len(line.stations) if instrument.reads_heights else line.steps
    if len(v) != expected:
        what = "stations" if instrument.reads_heights else "steps"
        raise InputValueError(
            f"line {line.name!r} has {len(v)} readings but {expected} {what}",
            where=ctx.where(tab, "readings"),
            fix=f"give exactly {expected} readings, one per {what[:-1]} in the order taken",
        )
    check_plausible_readings(line, v, instrument, where=ctx.where(tab, "readings"))
    return tuple(float(r) for r in v)


def _read_line(ctx, tab, item, line, plan, instrument, global_flip):
    steps = _get_int(ctx, tab, item, "steps")
    if steps is not None and plan.pattern != "lines" and steps != line.steps:
        raise LayoutError(
            f"line {line.name!r} has steps = {steps} but the layout gives it {line.steps}",
            where=ctx.where(tab, "steps"),
            fix="correct steps, or the [layout] foot spacing/steps",
        )
    base = _get_length_mm(ctx, tab, item, "foot_spacing")
    if base is not None:
        geo = line.foot_spacing_mm
        key = "foot_spacing_in" if "foot_spacing_in" in item else "foot_spacing_mm"
        if abs(base - geo) > _BASE_TOLERANCE * geo:
            f, u = (MM_PER_INCH, "in") if key.endswith("_in") else (1.0, "mm")
            raise LayoutError(
                f"line {line.name!r}: foot spacing {base / f:.6g} {u} is far from its station spacing {geo / f:.4f} {u}",
                where=ctx.where(tab, key),
                fix="a line's own foot spacing is for a calibrated base; change the layout to change the step",
            )
        line = dataclasses.replace(line, foot_spacing_mm=base)
    runs_raw = item.get("run")
    if runs_raw is not None and ("readings" in item or "order" in item or "flip_sign" in item):
        raise InputFormatError(
            f"line {line.name!r} has both readings (or order/flip_sign) and [[line.run]] tables",
            where=ctx.where(tab, "readings" if "readings" in item else None),
            fix="put every run in its own [[line.run]] table",
        )
    top = _read_readings(ctx, tab, item, line, instrument)
    runs = []
    if runs_raw is not None:
        if not isinstance(runs_raw, list):
            raise InputFormatError("run must be [[line.run]] tables", where=ctx.where(tab, "run"), fix="write [[line.run]]")
        for r_i, rd in enumerate(runs_raw):
            rt = tab + ("run", r_i)
            if not isinstance(rd, dict):
                raise InputFormatError("run must be a [[line.run]] table", where=ctx.where(rt), fix="write [[line.run]]")
            _check_keys(ctx, rt, rd, _RUN_KEYS)
            readings = _read_readings(ctx, rt, rd, line, instrument)
            if readings is None:
                raise InputFormatError(
                    f"a run of line {line.name!r} has no readings", where=ctx.where(rt), fix="add readings = [...]"
                )
            if readings:
                runs.append(_make_run(ctx, rt, rd, readings, global_flip))
    elif top:
        runs.append(_make_run(ctx, tab, item, top, global_flip))
    return dataclasses.replace(line, runs=tuple(runs))


def _make_run(ctx, tab, data, readings, global_flip) -> Run:
    order = _get_choice(ctx, tab, data, "order", _ORDERS, default="forward")
    flip = _get_bool(ctx, tab, data, "flip_sign") != global_flip
    no = ctx.loc.key(tab, "readings")
    where = f"{ctx.path}, line {no} ({_table_label(tab)})" if no else ctx.where(tab)
    return Run(readings=readings, order=order, flip_sign=flip, where=where)


# ---------------------------------------------------------------------------
# writing


def _f(v: float) -> str:
    """A float as TOML, exactly (shortest round-trip repr)."""
    v = float(v)
    if not math.isfinite(v):
        raise InputValueError(f"cannot write the non-finite number {v}", fix="remove it from the survey")
    s = repr(v)
    return s if ("." in s or "e" in s or "n" in s) else s + ".0"


def _s(v: str) -> str:
    return json.dumps(str(v), ensure_ascii=False)


def _readings_block(readings, indent="    ", per_line=8) -> str:
    vals = [_f(r) for r in readings]
    if len(vals) <= per_line:
        return "[" + ", ".join(vals) + "]"
    rows = [", ".join(vals[i : i + per_line]) for i in range(0, len(vals), per_line)]
    return "[\n" + ",\n".join(indent + r for r in rows) + ",\n]"


def _layout_of(survey: Survey) -> dict:
    lay = dict(survey.meta.get("layout") or {})
    if lay.get("pattern") == survey.pattern:
        return lay
    # not from layout.py: describe every line by its ends (free lines)
    pos = {s.name: (s.x_mm, s.y_mm) for s in survey.stations}
    return {
        "pattern": "lines",
        "lines": [(ln.name, pos[ln.stations[0]], pos[ln.stations[-1]], ln.steps) for ln in survey.lines],
    }


def _inch(v_mm: float) -> float:
    """A length in mm as inches, rounded to 9 decimals when that is within rounding error.

    A size typed in inches (40 in -> 1016 mm) is written back as typed (40.0), so that
    reading the file gives the very same mm; other lengths keep every digit.
    """
    t = float(v_mm) / MM_PER_INCH
    r = round(t, 9)
    return r if abs(r - t) <= 1e-12 * max(1.0, abs(t)) else t


def format_survey(survey: Survey, *, inches: bool | None = None, blank_runs=None) -> str:
    """The survey as TOML text in the flatcheck survey format (see ``docs/survey-format.md``).

    Readings are written in the sign convention "rises-toward-line-end" (or
    "height-up"), with each run's ``order`` and ``flip_sign``; numbers are
    written exactly, so reading the text back gives the same survey.

    Parameters
    ----------
    survey : Survey
    inches : bool, optional
        Write every length with the ``_in`` keys (inches, 1 in = 25.4 mm exactly) instead of
        ``_mm``. By default, as the survey was read (``meta["file"]["inches"]``), else mm.
    blank_runs : sequence of {"forward", "reverse"}, optional
        For a line with no runs yet (a planned survey): one ``[[line.run]]`` table per entry, with
        ``readings = []`` and that ``order`` (``("forward", "reverse")``: a forward and a back run of
        every line). By default such a line gets its own ``readings = []`` and ``order = "forward"``.
    """
    if blank_runs is not None:
        blank_runs = tuple(blank_runs)
        if not blank_runs or any(r not in _ORDERS for r in blank_runs):
            raise InputValueError(f"blank runs {blank_runs!r}", where="blank_runs",
                                  fix=f"give one or more of {', '.join(_ORDERS)}")
    if inches is None:
        inches = bool((survey.meta.get("file") or {}).get("inches"))
    lu = "in" if inches else "mm"

    def ln_(v_mm: float) -> str:
        return _f(_inch(v_mm) if inches else v_mm)

    inst, surf = survey.instrument, survey.surface
    lay = _layout_of(survey)
    pattern = lay["pattern"]
    heights = inst.reads_heights
    out = []
    w = out.append
    w("# flatcheck survey file (format: docs/survey-format.md)")
    w("# Readings go in the order taken, in the instrument unit below; units are never guessed.")
    w(f'format = "{FORMAT_NAME}"')
    w(f"version = {FORMAT_VERSION}")
    if heights:
        w("# an indicator reading is a height: larger = higher surface")
        w('positive = "height-up"')
    else:
        w("# a positive reading = the surface rises toward the line's last station (whatever the walking order)")
        w('positive = "rises-toward-line-end"')
    w("")
    w("[surface]")
    w(f"description = {_s(surf.description)}")
    w(f"ident = {_s(surf.ident)}")
    w(f"length_{lu} = {ln_(surf.length_mm)}")
    w(f"width_{lu} = {ln_(surf.width_mm)}")
    w(f"material = {_s(surf.material)}")
    if survey.meta.get("thickness_mm") is not None:
        w(f"thickness_{lu} = {ln_(survey.meta['thickness_mm'])}")
    w("")
    w("[instrument]")
    w(f"kind = {_s(inst.kind)}")
    w(f"unit = {_s(inst.unit)}")
    if inst.kind == "autocollimator":
        w(f"reports = {_s(inst.reports)}   # mirror-tilt | beam-deviation (twice the tilt; halved on reading)")
    if inst.model:
        w(f"model = {_s(inst.model)}")
    for key, label in (
        ("reading_uncertainty", f"standard uncertainty of one reading, {inst.unit}"),
        ("scale_uncertainty_rel", "relative standard uncertainty of the scale"),
        ("foot_spacing_uncertainty_mm", f"standard uncertainty of the foot spacing, {lu}"),
    ):
        v = getattr(inst, key)
        name = key[:-3] + "_in" if (inches and key.endswith("_mm")) else key
        if v is None:
            w(f"# {name} = ...   # {label}")
        else:
            w(f"{name} = {ln_(v) if name != key else _f(v)}")
    w("")
    w("[layout]")
    w(f"pattern = {_s(pattern)}")
    if pattern != "lines":
        w(f"margin_{lu} = {ln_(lay['margin_mm'])}")
        w(f"foot_spacing_{lu} = {ln_(lay['foot_spacing_mm'])}")
        w(f"steps_x = {int(lay['steps_x'])}")
        w(f"steps_y = {int(lay['steps_y'])}")
    if pattern == "union-jack":
        w(f"steps_diagonal = {int(lay['steps_diagonal'])}")
        w(f"diagonal_foot_spacing_{lu} = {ln_(lay['diagonal_foot_spacing_mm'])}   # second base, for the diagonals")
    if pattern == "grid":
        w(f"diagonals = {'true' if lay.get('diagonals') else 'false'}")
    w("")
    w("[conditions]")
    for key, v, example in (
        ("temperature_c", survey.temperature_c, "20.0"),
        ("date", survey.date, '"YYYY-MM-DD"'),
        ("operator", survey.operator, '"initials / role"'),
        ("notes", survey.notes, '"..."'),
    ):
        if v is None or v == "":
            w(f"# {key} = {example}")
        else:
            w(f"{key} = {_f(v) if key == 'temperature_c' else _s(v)}")
    unc = survey.meta.get("uncertainty") or {}
    if unc:
        w("")
        w("[uncertainty]")
        for key in _UNCERTAINTY_KEYS:
            if key in unc:
                w(f"{key} = {_f(unc[key])}")
    rep = survey.meta.get("repeat_readings")
    if rep:
        w("")
        w("[repeat_readings]")
        w(f"kind = {_s(rep['kind'])}")
        w(f"unit = {_s(rep['unit'])}")
        w("readings = [" + ", ".join(_readings_block(ser) for ser in rep["series"]) + "]")
        if rep.get("tolerance") is not None:
            w(f"tolerance = {_f(rep['tolerance'])}")
        if rep.get("notes"):
            w(f"notes = {_s(rep['notes'])}")
    free = {spec[0]: spec for spec in lay.get("lines", [])} if pattern == "lines" else {}
    diag_base = lay.get("diagonal_foot_spacing_mm")
    for ln in survey.lines:
        w("")
        w("[[line]]")
        w(f"name = {_s(ln.name)}")
        n_read = len(ln.stations) if heights else ln.steps
        if heights:
            w(f"# {ln.stations[0]} -> {ln.stations[-1]}: {n_read} stations, {n_read} heights per run")
        else:
            step = f"{ln.foot_spacing_mm / MM_PER_INCH:.4f} in" if inches else f"{ln.foot_spacing_mm:.3f} mm"
            w(f"# {ln.stations[0]} -> {ln.stations[-1]}: {ln.steps} steps of {step}, {n_read} readings per run")
        if pattern == "lines":
            _, a, b, steps = free.get(ln.name, (ln.name, None, None, ln.steps))
            if a is None:
                pos = {s.name: (s.x_mm, s.y_mm) for s in survey.stations}
                a, b = pos[ln.stations[0]], pos[ln.stations[-1]]
            w(f"start_{lu} = [{ln_(a[0])}, {ln_(a[1])}]")
            w(f"end_{lu} = [{ln_(b[0])}, {ln_(b[1])}]")
            w(f"steps = {int(steps)}")
            geo = math.hypot(b[0] - a[0], b[1] - a[1]) / steps
        else:
            w(f"steps = {ln.steps}")
            if ln.name in ("SW-NE", "SE-NW") and pattern == "union-jack":
                geo = diag_base
            elif pattern == "grid" and not (ln.name.startswith("row-") or ln.name.startswith("col-")):
                geo = lay["foot_spacing_mm"] * math.sqrt(2.0)
            else:
                geo = lay["foot_spacing_mm"]
        if not heights and geo is not None and float(ln.foot_spacing_mm) != float(geo):
            w(f"foot_spacing_{lu} = {ln_(ln.foot_spacing_mm)}   # this line's own (calibrated) base")
        if not ln.runs and blank_runs is not None:
            for order in blank_runs:
                w("[[line.run]]")
                if order == "reverse":
                    w(f"# back run: walked from {ln.stations[-1]} to {ln.stations[0]}, readings listed as walked")
                w("readings = []   # fill in, in the order taken")
                w(f"order = {_s(order)}")
        elif not ln.runs:
            w("readings = []   # fill in, in the order taken")
            w('order = "forward"')
        elif len(ln.runs) == 1:
            r = ln.runs[0]
            w(f"readings = {_readings_block(r.readings)}")
            w(f"order = {_s(r.order)}")
            w(f"flip_sign = {'true' if r.flip_sign else 'false'}")
        else:
            for r in ln.runs:
                w("[[line.run]]")
                w(f"readings = {_readings_block(r.readings)}")
                w(f"order = {_s(r.order)}")
                w(f"flip_sign = {'true' if r.flip_sign else 'false'}")
    return "\n".join(out) + "\n"


def write_survey(path, survey: Survey, *, inches: bool | None = None, blank_runs=None) -> None:
    """Write ``survey`` to ``path`` atomically (see :func:`format_survey`; ``inches`` and ``blank_runs`` as there).

    Raises
    ------
    OutputError
        The folder does not exist or cannot be written.
    """
    write_text_atomic(path, format_survey(survey, inches=inches, blank_runs=blank_runs))
