"""Instrument logs: readings from the CSV or text file an electronic level or autocollimator writes.

A log is a table, one reading per row: usually a timestamp column and a reading column,
perhaps more columns, perhaps a header row naming them. Separators and the decimal mark
vary with the instrument's locale, so:

- the reading column is chosen by its header name or by its 1-based number; without one,
  the only column (apart from the timestamp) that holds numbers on every row;
- the decimal separator is ``"."`` or ``","`` as the caller states (never guessed from the
  numbers); the field separator is found from the header or first row: a tab, ``;``,
  ``,`` (only with a decimal point) or else white space;
- the unit is the caller's: readings are converted exactly into the survey's unit
  (:func:`convert_readings`);
- timestamps may be ISO 8601 date-times (``2024-03-11 10:15:02``), times of day
  (``10:15:02``, midnight crossings allowed), ``DD.MM.YYYY hh:mm:ss`` or plain seconds;
  slashed dates (03/11/2024) are refused as ambiguous.

The readings are assigned to the planned readings in walking order; a count that does not
match is an error (:func:`check_log_count`), and intervals between timestamps far longer or
shorter than usual within a run (:func:`find_gaps`) point at a missed or repeated reading.
"""

from __future__ import annotations

import datetime as _dt
import difflib
import math
import re
from dataclasses import dataclass

import numpy as np

from ..errors import InputFormatError, InputValueError, UnitError
from ..units import angle_unit, length_unit

__all__ = [
    "InstrumentLog",
    "LogGap",
    "LONG_GAP_FACTOR",
    "SHORT_GAP_FACTOR",
    "parse_log",
    "convert_readings",
    "find_gaps",
    "check_log_count",
]

#: An interval within a run longer than this many times the typical interval suggests a missed
#: reading (one missed reading about doubles the interval); shorter than SHORT_GAP_FACTOR times it,
#: a repeated one (a double press). Common practice, no single source: a person reads a run at a
#: steady pace.
LONG_GAP_FACTOR = 1.7
SHORT_GAP_FACTOR = 0.4

_NUMBER = re.compile(r"^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$")
_TIME_OF_DAY = re.compile(r"^(\d{1,2}):(\d{2})(?::(\d{2}(?:\.\d+)?))?$")
_EURO = re.compile(r"^(\d{1,2})\.(\d{1,2})\.(\d{4})[ T](\d{1,2}):(\d{2})(?::(\d{2}(?:\.\d+)?))?$")
_TIME_WORDS = ("time", "date", "stamp", "zeit", "heure")


@dataclass(frozen=True)
class InstrumentLog:
    """The readings of a log, in its order.

    Attributes
    ----------
    values : ndarray, shape (n,)
        Readings in the log's unit, as written (decimal separator applied).
    rows : tuple of int
        1-based text line of each reading, for messages.
    times_s : ndarray, shape (n,), or None
        Timestamps in seconds from the first reading; None when the log has no time column.
    column : str
        The reading column in words (``"column 'tilt'"`` or ``"column 2"``).
    time_column : str or None
        The timestamp column in words, or None.
    source : str
        The log's name, for messages.
    """

    values: np.ndarray
    rows: tuple
    times_s: np.ndarray | None
    column: str
    time_column: str | None
    source: str


@dataclass(frozen=True)
class LogGap:
    """An unusual interval between two successive readings.

    Attributes
    ----------
    after : int
        0-based index of the reading before the interval.
    interval_s : float
        The interval, s.
    typical_s : float
        The median interval between readings of one run, s.
    kind : {"long", "short", "backwards"}
        Longer than :data:`LONG_GAP_FACTOR` times typical (a missed reading?), shorter than
        :data:`SHORT_GAP_FACTOR` times typical (a repeated reading?), or time going backwards.
    """

    after: int
    interval_s: float
    typical_s: float
    kind: str

    def describe(self, rows=None) -> str:
        """One phrase: ``"readings 12 and 13: 95 s apart where 20 s is usual (a missed reading?)"``.

        ``rows`` (the log's text line of each reading) adds where they are in the log.
        """
        where = "" if rows is None else f" (lines {rows[self.after]} and {rows[self.after + 1]})"
        what = {
            "long": "a missed reading?",
            "short": "a repeated reading?",
            "backwards": "the clock goes backwards; rows out of order?",
        }[self.kind]
        return (f"readings {self.after + 1} and {self.after + 2}{where}: {self.interval_s:.3g} s apart where "
                f"{self.typical_s:.3g} s is usual ({what})")


def _split(line: str, delimiter: str | None) -> list[str]:
    fields = line.split() if delimiter is None else line.split(delimiter)
    return [f.strip().strip('"').strip("'").strip() for f in fields]


def _number(text: str, decimal: str) -> float | None:
    t = text.strip().replace(" ", "")
    if decimal == ",":
        if "." in t:
            return None
        t = t.replace(",", ".")
    elif "," in t:
        return None
    if not _NUMBER.match(t):
        return None
    v = float(t)
    return v if math.isfinite(v) else None


def _time_s(text: str) -> tuple[float, str] | None:
    """Seconds and the kind of timestamp ("absolute", "time-of-day", "seconds"), or None."""
    t = text.strip()
    if not t:
        return None
    if _NUMBER.match(t):
        return float(t), "seconds"
    m = _TIME_OF_DAY.match(t)
    if m:
        h, mi, s = int(m.group(1)), int(m.group(2)), float(m.group(3) or 0.0)
        if h < 24 and mi < 60 and s < 61:
            return h * 3600.0 + mi * 60.0 + s, "time-of-day"
        return None
    m = _EURO.match(t)
    if m:
        d, mo, y, h, mi = (int(m.group(k)) for k in range(1, 6))
        s = float(m.group(6) or 0.0)
        try:
            dt = _dt.datetime(y, mo, d, h, mi, tzinfo=_dt.timezone.utc)
        except ValueError:
            return None
        return dt.timestamp() + s, "absolute"
    if "/" in t:
        return None
    try:
        dt = _dt.datetime.fromisoformat(t)
    except ValueError:
        return None
    if dt.tzinfo is None:
        dt = dt.replace(tzinfo=_dt.timezone.utc)  # naive stamps: read as given, no daylight-saving jumps
    return dt.timestamp(), "absolute"


def _delimiter(sample: str, decimal: str) -> str | None:
    for d in ("\t", ";"):
        if d in sample:
            return d
    if decimal == "." and "," in sample:
        return ","
    return None


def _pick(spec: str, header: list[str] | None, n_cols: int, source: str, option: str) -> int:
    """Column index (0-based) from a name or a 1-based number."""
    s = str(spec).strip()
    if s.isdigit():
        k = int(s)
        if not 1 <= k <= n_cols:
            raise InputValueError(
                f"the log has {n_cols} columns, not {k}", where=option, fix=f"give a column from 1 to {n_cols}"
            )
        return k - 1
    if header is None:
        raise InputValueError(
            f"the log has no header row to find the column {s!r} by name", where=option,
            fix=f"give the column's number (1 to {n_cols}) instead",
        )
    low = [h.lower() for h in header]
    if s.lower() in low:
        return low.index(s.lower())
    close = difflib.get_close_matches(s, header, n=1, cutoff=0.5)
    hint = f"did you mean {close[0]!r}? " if close else ""
    raise InputValueError(
        f"the log {source} has no column {s!r}", where=option,
        fix=f"{hint}its columns: {', '.join(repr(h) for h in header)}",
    )


def parse_log(text: str, *, source: str = "<log>", column: str | None = None, time_column: str | None = None,
              decimal: str = ".") -> InstrumentLog:
    """Read the readings (and timestamps) of an instrument log.

    Parameters
    ----------
    text : str
        The log's text. Blank lines and lines starting with ``#`` are skipped.
    source : str
        Its name, for messages.
    column : str, optional
        The reading column: a header name (case-insensitive) or a 1-based number. By default
        the one column other than the timestamp that holds a number on every row.
    time_column : str, optional
        The timestamp column, a name or number; ``"none"`` for no timestamps. By default a
        header naming a time or date, or a first column of times or dates.
    decimal : {".", ","}
        The decimal separator of the log's numbers.

    Returns
    -------
    InstrumentLog

    Raises
    ------
    InputFormatError
        No rows, a row with too few fields, a reading or timestamp that cannot be read (the
        message names the text line), no column that could hold the readings.
    InputValueError
        An unknown column name or number, a bad decimal separator.
    """
    if decimal not in (".", ","):
        raise InputValueError(f"the decimal separator {decimal!r} is not '.' or ','", where="--decimal",
                              fix="give --decimal . or --decimal ,")
    rows = [(no, ln) for no, ln in enumerate(text.splitlines(), start=1)
            if ln.strip() and not ln.lstrip().startswith("#")]
    if not rows:
        raise InputFormatError("the log holds no rows", where=source, fix="give the log the instrument wrote")
    delim = _delimiter(rows[0][1], decimal)
    first = _split(rows[0][1], delim)
    is_header = any(_number(f, decimal) is None and _time_s(f) is None for f in first)
    header = first if is_header else None
    data = rows[1:] if is_header else rows
    if not data:
        raise InputFormatError("the log has a header but no readings", where=source, fix="give the whole log")
    table = [(no, _split(ln, delim)) for no, ln in data]
    n_cols = max(len(f) for _, f in table) if header is None else len(header)
    # --- the time column
    t_idx = None
    if time_column is not None and str(time_column).strip().lower() != "none":
        t_idx = _pick(time_column, header, n_cols, source, "--time-column")
    elif time_column is None:
        if header is not None:
            for k, h in enumerate(header):
                if any(w in h.lower() for w in _TIME_WORDS):
                    t_idx = k
                    break
        elif all(len(f) > 0 and _time_s(f[0]) is not None and _time_s(f[0])[1] != "seconds" for _, f in table):
            t_idx = 0
    # --- the reading column
    if column is not None:
        r_idx = _pick(column, header, n_cols, source, "--column")
    else:
        numeric = [k for k in range(n_cols) if k != t_idx and all(
            len(f) > k and _number(f[k], decimal) is not None for _, f in table)]
        if len(numeric) != 1:
            names = ", ".join(repr(h) for h in header) if header else f"{n_cols} unnamed columns"
            what = "no column holds a number on every row" if not numeric else (
                f"{len(numeric)} columns hold numbers")
            raise InputFormatError(
                f"cannot tell which column holds the readings: {what} (decimal separator {decimal!r})",
                where=source,
                fix=f"name it with --column NAME or --column NUMBER (columns: {names}); check --decimal",
            )
        r_idx = numeric[0]
    label = f"column {header[r_idx]!r}" if header else f"column {r_idx + 1}"
    values, lines, times = [], [], []
    kind0 = None
    for no, f in table:
        if len(f) <= r_idx or (t_idx is not None and len(f) <= t_idx):
            raise InputFormatError(
                f"the row has {len(f)} fields, too few for {label}", where=f"{source}, line {no}",
                fix="complete or delete the row",
            )
        v = _number(f[r_idx], decimal)
        if v is None:
            raise InputFormatError(
                f"{label} holds {f[r_idx]!r}, not a reading (decimal separator {decimal!r})",
                where=f"{source}, line {no}",
                fix="delete the row or repeat the reading; if the log uses the other decimal separator, "
                f"give --decimal {',' if decimal == '.' else '.'}",
            )
        values.append(v)
        lines.append(no)
        if t_idx is not None:
            ts = _time_s(f[t_idx])
            if ts is None:
                raise InputFormatError(
                    f"cannot read the timestamp {f[t_idx]!r}", where=f"{source}, line {no}",
                    fix="timestamps must be ISO 8601 (2024-03-11 10:15:02), a time of day (10:15:02), "
                    "DD.MM.YYYY hh:mm:ss or seconds; or give --time-column none",
                )
            if kind0 is None:
                kind0 = ts[1]
            times.append(ts[0])
    t = None
    t_label = None
    if t_idx is not None:
        t = np.asarray(times, dtype=float)
        if kind0 == "time-of-day":  # past midnight the clock starts again
            for i in range(1, t.size):
                while t[i] < t[i - 1] - 43200.0:
                    t[i:] += 86400.0
        t = t - t[0]
        t_label = f"column {header[t_idx]!r}" if header else f"column {t_idx + 1}"
    return InstrumentLog(np.asarray(values, dtype=float), tuple(lines), t, label, t_label, source)


def convert_readings(values, from_unit: str, to_unit: str, *, heights: bool, where: str = "--unit") -> np.ndarray:
    """Readings converted exactly from the log's unit to the survey's.

    Angle to angle and slope to slope use the exact ratio of the units' definitions (to
    floating-point rounding); an angle to a slope is
    ``tan(angle)``, a slope to an angle ``atan(slope)`` (a slope unit is rise over run).

    Parameters
    ----------
    values : array_like, shape (n,)
        Readings in ``from_unit``.
    from_unit, to_unit : str
        Unit names (see ``flatcheck units``).
    heights : bool
        Indicator readings (length units) rather than angles or slopes.
    where : str
        Where ``from_unit`` was given, for messages.

    Returns
    -------
    ndarray, shape (n,)
        Readings in ``to_unit``.

    Raises
    ------
    UnitError
        An unknown unit, or a unit of the wrong kind for the instrument.

    Examples
    --------
    >>> round(float(convert_readings([1.0], "mrad", "urad", heights=False)[0]), 9)
    1000.0
    """
    v = np.asarray(values, dtype=float)
    if heights:
        a, b = length_unit(from_unit, where=where), length_unit(to_unit)
        return v * (a.factor_um / b.factor_um)
    try:
        a = angle_unit(from_unit, where=where)
    except UnitError as exc:
        raise UnitError(exc.message + " for a slope instrument's log", where=where, fix=exc.fix) from None
    b = angle_unit(to_unit)
    if a.kind == b.kind:
        return v * (a.factor / b.factor)
    if a.kind == "angle":
        return np.tan(v * a.factor) / b.factor
    return np.arctan(v * a.factor) / b.factor


def find_gaps(times_s, breaks=(), *, long_factor: float = LONG_GAP_FACTOR,
              short_factor: float = SHORT_GAP_FACTOR) -> tuple:
    """Intervals between successive readings that suggest a missed or repeated reading.

    Parameters
    ----------
    times_s : array_like, shape (n,)
        Timestamps of the readings, s.
    breaks : iterable of int
        Indices ``i`` such that reading ``i + 1`` starts a new run (the instrument moves to
        another line there, so a long interval is expected and not reported).
    long_factor, short_factor : float
        Limits as multiples of the typical (median) interval within runs.

    Returns
    -------
    tuple of LogGap
        In log order; empty with fewer than four intervals within runs.
    """
    t = np.asarray(times_s, dtype=float)
    if t.size < 2:
        return ()
    dt = np.diff(t)
    within = np.ones(dt.size, dtype=bool)
    for b in breaks:
        if 0 <= int(b) < dt.size:
            within[int(b)] = False
    inside = dt[within & (dt > 0)]
    if inside.size < 3:
        return ()
    typical = float(np.median(inside))
    out = []
    for i in range(dt.size):
        if dt[i] < 0:
            out.append(LogGap(i, float(dt[i]), typical, "backwards"))
        elif within[i] and dt[i] > long_factor * typical:
            out.append(LogGap(i, float(dt[i]), typical, "long"))
        elif within[i] and dt[i] < short_factor * typical:
            out.append(LogGap(i, float(dt[i]), typical, "short"))
    return tuple(out)


def check_log_count(log: InstrumentLog, n_needed: int, *, first_reading: str = "", n_in_file: int = 0,
                    breaks=()) -> None:
    """Refuse a log whose number of readings differs from the readings still to enter.

    Parameters
    ----------
    log : InstrumentLog
    n_needed : int
        Readings the survey still needs.
    first_reading : str
        The first missing reading in words (line, run, step), for the message.
    n_in_file : int
        Readings the survey file already holds.
    breaks : iterable of int
        Planned run changes among the readings needed: reading ``i + 1`` starts a new run. An
        interval there, or where it lands once the missing (or extra) readings shift it, is
        expected (the instrument moves to another line) and not named.

    Raises
    ------
    InputValueError
        Naming both counts, what differs, and the unusual intervals between timestamps that
        point at the missed or repeated readings.
    """
    n = int(log.values.size)
    if n == n_needed:
        return
    more = n > n_needed
    what = (f"{n - n_needed} reading{'s' if n - n_needed != 1 else ''} too many" if more else
            f"{n_needed - n} reading{'s' if n_needed - n != 1 else ''} short")
    need = f"the survey needs {n_needed}"
    if n_in_file:
        need += f" more (it already holds {n_in_file}"
        need += f"; the next is {first_reading})" if first_reading else ")"
    elif first_reading:
        need += f" (from {first_reading})"
    hints = ""
    if log.times_s is not None:
        shift = abs(n - n_needed)
        expected = {b + (j if more else -j) for b in breaks for j in range(shift + 1)}
        gaps = [g for g in find_gaps(log.times_s) if g.after not in expected]
        if more:
            gaps = [g for g in gaps if g.kind != "long"]  # an extra reading shows as a short interval

        def strength(g):
            return g.interval_s / g.typical_s if g.kind == "long" else g.typical_s / max(g.interval_s, 1e-9)

        gaps = sorted(sorted(gaps, key=strength, reverse=True)[:4], key=lambda g: g.after)
        if gaps:
            hints = "; timestamps: " + "; ".join(g.describe(log.rows) for g in gaps)
    fix = ("delete the repeated readings from the log" if more else "add the missing readings to the log, "
           "or enter the survey by hand with flatcheck enter")
    if n_in_file and n == n_in_file + n_needed:
        fix = "the log holds the whole survey but the file already has readings: give a blank copy of the plan"
    raise InputValueError(f"{log.column} of the log has {n} readings but {need}: {what}{hints}",
                          where=log.source, fix=fix)
