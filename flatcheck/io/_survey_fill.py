"""Readings written into a survey file's own text, keeping everything else as the person wrote it.

``flatcheck enter`` fills a planned survey (the blank file ``flatcheck plan`` writes) one
reading at a time. Rewriting the whole file with :func:`flatcheck.io.format_survey` would
drop the person's comments, notes and layout, and a half-filled run (fewer readings than
steps) is not a survey :func:`flatcheck.io.read_survey` accepts. This module therefore

- reads a planned survey as a *form*: the layout (through :func:`flatcheck.io.parse_survey`
  on the text with every ``readings`` array emptied, so the file's line numbers stay the
  same), and for every run, in file order, its walking order, sign and the readings
  already written, however few;
- writes readings back by replacing only the text of each ``readings = [...]`` array,
  checks the result by parsing it again, and saves it atomically
  (:func:`flatcheck.io.write_text_atomic`), refusing to overwrite a file that changed on
  disk since it was read.

A run is a ``readings`` array of a ``[[line]]`` table (a line walked once) or of a
``[[line.run]]`` table (one of several walks), as described in ``docs/survey-format.md``.
"""

from __future__ import annotations

import dataclasses
import math
import re
import tomllib
from pathlib import Path

from ..errors import InputFormatError, InputValueError, OutputError

__all__ = ["RunForm", "SurveyForm", "read_form", "parse_form", "fill_text", "save_form", "format_readings"]

_HEADER = re.compile(r"^\s*(\[\[?)\s*([A-Za-z0-9_.\-\" ]+?)\s*(\]\]?)\s*(#.*)?$")
_READINGS_KEY = re.compile(r"^(\s*)(readings|\"readings\")\s*=\s*\[")
_KEY = re.compile(r"^\s*([A-Za-z0-9_\-]+|\"[^\"]*\")\s*=")

#: Readings per text line when a run's array is long (as format_survey writes them).
_PER_LINE = 8


@dataclasses.dataclass(frozen=True)
class RunForm:
    """One run of a planned survey, as the file states it.

    Attributes
    ----------
    line : str
        The line's name.
    line_table : int
        0-based index of the line's ``[[line]]`` table in the file.
    run_table : int or None
        0-based index of the ``[[line.run]]`` table inside it, or None for the line's own ``readings``.
    order : {"forward", "reverse"}
        Walking order of the run as written.
    flip_sign : bool
        The run's ``flip_sign`` as written.
    readings : tuple of float
        The readings already written, in the unit of ``[instrument] unit``, in file order
        (possibly fewer than the run needs).
    key_line : int
        1-based text line of the run's ``readings`` key.
    where : str
        ``"plate.toml, line 57 ([[line]] 7 [[line.run]] 2)"``, for messages.
    """

    line: str
    line_table: int
    run_table: int | None
    order: str
    flip_sign: bool
    readings: tuple
    key_line: int
    where: str


@dataclasses.dataclass(frozen=True)
class SurveyForm:
    """A planned survey read for entry: its layout, its runs and its text.

    Attributes
    ----------
    path : str
        The file.
    text : str
        The file's text as read (or as last saved).
    survey : flatcheck.Survey
        Stations, lines and instrument as the file defines them; the lines carry no runs.
    runs : tuple of RunForm
        Every run in file order: line by line, run by run.
    falls : bool
        True when the file's ``positive`` key says readings are negated
        (``"falls-toward-line-end"`` or ``"height-down"``).
    """

    path: str
    text: str
    survey: object
    runs: tuple
    falls: bool


@dataclasses.dataclass(frozen=True)
class _Span:
    line_table: int
    run_table: int | None
    start: int  # offset of "["
    end: int  # offset just after the matching "]"
    key_line: int  # 1-based
    indent: str


def _find_spans(text: str, source: str) -> list[_Span]:
    """Every ``readings = [...]`` array of a ``[[line]]`` or ``[[line.run]]`` table, in text order."""
    spans: list[_Span] = []
    offsets = [0]
    for ln in text.splitlines(keepends=True):
        offsets.append(offsets[-1] + len(ln))
    lines = text.splitlines(keepends=True)
    n_line = -1
    n_run = -1
    table: tuple = ()
    in_multiline = None
    i = 0
    while i < len(lines):
        raw = lines[i]
        if in_multiline:
            if raw.count(in_multiline) % 2 == 1:
                in_multiline = None
            i += 1
            continue
        m = _HEADER.match(raw.rstrip("\r\n"))
        if m and not _KEY.match(raw):
            name = m.group(2).replace('"', "").replace(" ", "")
            if m.group(1) == "[[" and name == "line":
                n_line += 1
                n_run = -1
                table = ("line", n_line, None)
            elif m.group(1) == "[[" and name == "line.run":
                n_run += 1
                table = ("line", n_line, n_run)
            else:
                table = (name,)
            i += 1
            continue
        k = _READINGS_KEY.match(raw)
        if k and table and table[0] == "line":
            start = offsets[i] + raw.index("[", len(k.group(0)) - 1)
            end = _match_bracket(text, start, source)
            spans.append(_Span(table[1], table[2], start, end, i + 1, k.group(1)))
            # continue after the array's last line
            while i < len(lines) and offsets[i + 1] <= end - 1:
                i += 1
            i += 1
            continue
        if _KEY.match(raw):
            for quote in ('"""', "'''"):
                if raw.count(quote) % 2 == 1:
                    in_multiline = quote
        i += 1
    return spans


def _match_bracket(text: str, start: int, source: str) -> int:
    """Offset just after the ``]`` closing the array that opens at ``start``."""
    depth = 0
    j = start
    n = len(text)
    while j < n:
        c = text[j]
        if c == "#":
            nl = text.find("\n", j)
            j = n if nl < 0 else nl
            continue
        if c in "\"'":
            close = text.find(c, j + 1)
            if close < 0:
                break
            j = close + 1
            continue
        if c == "[":
            depth += 1
        elif c == "]":
            depth -= 1
            if depth == 0:
                return j + 1
        j += 1
    line_no = text.count("\n", 0, start) + 1
    raise InputFormatError(
        "a readings array is not closed", where=f"{source}, line {line_no}", fix="end it with ]"
    )


def _where(source: str, span: _Span) -> str:
    label = f"[[line]] {span.line_table + 1}"
    if span.run_table is not None:
        label += f" [[line.run]] {span.run_table + 1}"
    return f"{source}, line {span.key_line} ({label} readings)"


def format_readings(values, indent: str = "") -> str:
    """A TOML array of readings, each written exactly (the shortest text that reads back the same float).

    Parameters
    ----------
    values : sequence of float
        Finite readings.
    indent : str
        Indentation of the ``readings`` key; long arrays continue on lines indented four more spaces.

    Returns
    -------
    str
        ``"[]"``, ``"[1.4, -0.25]"``, or a bracketed block of :data:`_PER_LINE` readings per line.
    """
    out = []
    for v in values:
        v = float(v)
        if not math.isfinite(v):
            raise InputValueError(f"cannot write the non-finite reading {v}", fix="give a finite number")
        s = repr(v)
        out.append(s if ("." in s or "e" in s or "n" in s) else s + ".0")
    if len(out) <= _PER_LINE:
        return "[" + ", ".join(out) + "]"
    rows = [", ".join(out[i : i + _PER_LINE]) for i in range(0, len(out), _PER_LINE)]
    inner = indent + "    "
    return "[\n" + ",\n".join(inner + r for r in rows) + ",\n" + indent + "]"


def _blank(text: str, spans: list[_Span]) -> str:
    """The text with every readings array emptied, keeping its line count (so line numbers stay)."""
    parts = []
    last = 0
    for sp in spans:
        parts.append(text[last : sp.start])
        parts.append("[" + "\n" * text.count("\n", sp.start, sp.end) + "]")
        last = sp.end
    parts.append(text[last:])
    return "".join(parts)


def _raw_runs(data: dict) -> dict:
    """(line_table, run_table) -> the TOML table holding that run's readings, from parsed data."""
    out = {}
    for i, item in enumerate(data.get("line", []) if isinstance(data.get("line"), list) else []):
        if not isinstance(item, dict):
            continue
        if "readings" in item:
            out[(i, None)] = item
        runs = item.get("run")
        if isinstance(runs, list):
            for j, rd in enumerate(runs):
                if isinstance(rd, dict) and "readings" in rd:
                    out[(i, j)] = rd
    return out


def parse_form(text: str, *, source: str = "<survey>"):
    """Parse the text of a planned (blank or partly filled) survey file (see :func:`read_form`)."""
    import flatcheck.io as fio

    try:
        from ._text import toml_loads

        data = toml_loads(text, where=source)
    except tomllib.TOMLDecodeError:
        fio.parse_survey(text, source=source)  # raises the survey reader's own message
        raise  # pragma: no cover - parse_survey always raises on text tomllib refuses
    spans = _find_spans(text, source)
    blank = _blank(text, spans)
    survey = fio.parse_survey(blank, source=source)  # layout, keys, units, names: every check of the reader
    raw = _raw_runs(data)
    found = {(sp.line_table, sp.run_table): sp for sp in spans}
    if set(found) != set(raw):
        missing = sorted(set(raw) - set(found), key=lambda k: (k[0], -1 if k[1] is None else k[1]))
        first = missing[0] if missing else None
        label = "" if first is None else f"[[line]] {first[0] + 1}" + (
            "" if first[1] is None else f" [[line.run]] {first[1] + 1}")
        raise InputFormatError(
            f"cannot find where to write the readings of {label or 'a run'} in the text",
            where=source,
            fix="write each run's readings as readings = [...] on its own line of its [[line]] or [[line.run]] "
            "table, as flatcheck plan does (not as an inline table)",
        )
    heights = survey.instrument.reads_heights
    by_name = {ln.name: ln for ln in survey.lines}
    names = [item.get("name") for item in data["line"]]
    runs = []
    for sp in spans:
        tab = raw[(sp.line_table, sp.run_table)]
        name = names[sp.line_table]
        line = by_name[name]
        where = _where(source, sp)
        values = tab["readings"]
        if not isinstance(values, list):
            raise InputValueError(
                f"readings must be a list [r1, r2, ...], got {values!r}", where=where, fix="write readings = [...]"
            )
        for k, r in enumerate(values, start=1):
            if isinstance(r, bool) or not isinstance(r, (int, float)) or not math.isfinite(r):
                raise InputValueError(
                    f"reading {k} of line {name!r} is {r!r}, not a finite number", where=where,
                    fix="write plain numbers in the instrument's unit, separated by commas",
                )
        expected = len(line.stations) if heights else line.steps
        if len(values) > expected:
            what = "stations" if heights else "steps"
            raise InputValueError(
                f"line {name!r} has {len(values)} readings but {expected} {what}",
                where=where,
                fix=f"give at most {expected} readings, one per {what[:-1]} in the order taken",
            )
        if values:
            import flatcheck.survey as fsv

            fsv.check_plausible_readings(line, values, survey.instrument, where=where)
        order = tab.get("order", "forward")
        if order not in ("forward", "reverse"):
            raise InputValueError(f"order is {order!r}", where=where.replace(" readings)", " order)"),
                                  fix="use one of forward, reverse")
        flip = tab.get("flip_sign", False)
        if not isinstance(flip, bool):
            raise InputValueError(f"flip_sign must be true or false, got {flip!r}",
                                  where=where.replace(" readings)", " flip_sign)"), fix="write flip_sign = true or false")
        runs.append(RunForm(name, sp.line_table, sp.run_table, order, bool(flip),
                            tuple(float(v) for v in values), sp.key_line, where))
    # a [[line]] whose readings key is missing entirely has nowhere to write
    lines_with_runs = {r.line for r in runs}
    for i, name in enumerate(names):
        if name not in lines_with_runs:
            raise InputFormatError(
                f"line {name!r} has no readings key", where=f"{source} ([[line]] {i + 1})",
                fix="add readings = [] to its [[line]] table (or to each of its [[line.run]] tables)",
            )
    falls = data.get("positive") in ("falls-toward-line-end", "height-down")
    return SurveyForm(source, text, survey, tuple(runs), falls)


def read_form(path) -> SurveyForm:
    """Read a planned (blank or partly filled) survey file for entry.

    Parameters
    ----------
    path : str or Path
        A survey file written by ``flatcheck plan`` (or by hand in the same format).

    Returns
    -------
    SurveyForm
        The layout, every run in file order with the readings already written, and the text.

    Raises
    ------
    InputFormatError
        Not a survey file, not TOML, a run whose readings array cannot be located.
    InputValueError
        A run with more readings than its line has steps (stations, for an indicator), a
        reading that is not a finite number, or one no survey gives (the reader's plausibility limits).
    UnitError, LayoutError
        As :func:`flatcheck.io.read_survey`.
    """
    import flatcheck.io as fio

    path = Path(path)
    text = fio.read_text(path, wanted="a planned survey file (.toml) written by flatcheck plan")
    return parse_form(text, source=str(path))


def fill_text(form: SurveyForm, readings) -> str:
    """The form's text with each run's readings replaced by ``readings``.

    Parameters
    ----------
    form : SurveyForm
    readings : sequence of sequence of float
        One sequence per run of ``form.runs``, in the same order (file order of each run).

    Returns
    -------
    str
        The new text; everything outside the ``readings`` arrays is unchanged.

    Raises
    ------
    InputValueError
        The number of runs does not match, or a reading is not finite.
    InputFormatError
        The new text does not read back as the intended readings (the file's layout of
        ``readings`` keys is one this writer does not handle); nothing is written then.
    """
    readings = [tuple(float(v) for v in r) for r in readings]
    if len(readings) != len(form.runs):
        raise InputValueError(
            f"{len(readings)} runs of readings for a survey with {len(form.runs)} runs",
            fix="give one sequence of readings per run",
        )
    spans = _find_spans(form.text, form.path)
    by_key = {(sp.line_table, sp.run_table): sp for sp in spans}
    edits = []
    for run, values in zip(form.runs, readings):
        sp = by_key[(run.line_table, run.run_table)]
        edits.append((sp.start, sp.end, format_readings(values, sp.indent)))
    edits.sort()
    parts = []
    last = 0
    for start, end, new in edits:
        parts.append(form.text[last:start])
        parts.append(new)
        last = end
    parts.append(form.text[last:])
    text = "".join(parts)
    # check by reading it back: every run holds exactly the readings intended
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputFormatError(
            f"writing the readings would break the file ({exc})", where=form.path,
            fix="write each run's readings as readings = [...] in its own table, as flatcheck plan does",
        ) from None
    raw = _raw_runs(data)
    for run, values in zip(form.runs, readings):
        got = raw.get((run.line_table, run.run_table), {}).get("readings")
        if got is None or len(got) != len(values) or any(float(a) != b for a, b in zip(got, values)):
            raise InputFormatError(
                f"the readings of line {run.line!r} do not read back as written", where=run.where,
                fix="write each run's readings as readings = [...] in its own table, as flatcheck plan does",
            )
    return text


def save_form(form: SurveyForm, readings) -> SurveyForm:
    """Write ``readings`` into the form's file atomically; return the form with the new text.

    The file is written to a temporary file beside it and moved over it
    (:func:`flatcheck.io.write_text_atomic`), so an interruption leaves either the old or
    the new file, never half of one.

    Parameters
    ----------
    form : SurveyForm
        As last read or saved.
    readings : sequence of sequence of float
        One sequence per run (see :func:`fill_text`).

    Returns
    -------
    SurveyForm
        ``form`` with ``text`` and each run's ``readings`` updated.

    Raises
    ------
    OutputError
        The file changed on disk since it was read (someone edited it), or it cannot be written.
    """
    import flatcheck.io as fio

    text = fill_text(form, readings)
    path = Path(form.path)
    try:
        on_disk = path.read_bytes().decode("utf-8-sig")
    except (OSError, UnicodeDecodeError):
        on_disk = None
    if on_disk != form.text:
        raise OutputError(
            f"{form.path} changed on disk while readings were being entered; not overwriting it",
            where=form.path,
            fix="close any editor that has the file open and run flatcheck enter again: it resumes at the first "
            "missing reading",
        )
    if text != form.text:
        fio.write_text_atomic(path, text)
    runs = tuple(dataclasses.replace(r, readings=tuple(float(v) for v in values)) for r, values in zip(form.runs, readings))
    return dataclasses.replace(form, text=text, runs=runs)
