"""Spreadsheet-friendly CSV export of the register: results, station heights and readings.

One table per file, because a spreadsheet opens one table per CSV file:

``results``
    one row per survey: identity, date, state, flatness and its uncertainty, verdict;
``stations``
    one row per station (or height-map point) of each survey: position and height;
``readings``
    one row per reading of each survey: line, run, step, stations, reading and residual.

Spreadsheet-friendly means (common practice, no single source): UTF-8 with a byte-order
mark (so that spreadsheet programs recognise UTF-8 and keep "µm" intact), comma
separators, quoting and CRLF line ends as RFC 4180 describes (Python's :mod:`csv`), one
header row whose names carry their units (``flatness_um``, ``x_mm``), dates as
``YYYY-MM-DD``, numbers in full precision with a decimal point, and an empty cell for
a value that does not exist. Text is written as it was entered.
"""

from __future__ import annotations

import csv
import io
import math

from ..errors import InputValueError
from ._atomic import write_bytes_atomic

__all__ = ["EXPORT_TABLES", "format_export_csv", "write_export_csv"]

#: The columns of each table, in order (units in the names).
EXPORT_TABLES = {
    "results": (
        "survey_id", "ident", "date", "state", "kind", "method", "flatness_um", "expanded_uncertainty_um",
        "standard_uncertainty_um", "least_squares_um", "local_flatness_um", "local_window", "trials", "seed",
        "standard", "grade_sought", "tolerance_um", "verdict", "instrument", "instrument_in_calibration",
        "operator", "temperature_c", "file", "content_sha256",
    ),
    "stations": ("survey_id", "ident", "date", "state", "station", "x_mm", "y_mm", "height_um"),
    "readings": (
        "survey_id", "ident", "date", "line", "run", "step", "from_station", "to_station", "reading", "unit",
        "residual_um",
    ),
}


def _cell(v) -> str:
    if v is None:
        return ""
    if isinstance(v, bool):
        return "yes" if v else "no"
    if isinstance(v, float):
        return repr(v) if math.isfinite(v) else ""
    return str(v)


def format_export_csv(table: str, rows) -> str:
    """The rows of one export table as CSV text (with the byte-order mark).

    Parameters
    ----------
    table : {"results", "stations", "readings"}
    rows : iterable of mapping
        One mapping per row, keyed by the column names of :data:`EXPORT_TABLES`; a missing
        key is an empty cell.

    Raises
    ------
    InputValueError
        An unknown table.
    """
    if table not in EXPORT_TABLES:
        raise InputValueError(f"unknown table {table!r}", where="--table",
                              fix=f"use one of {', '.join(EXPORT_TABLES)}")
    cols = EXPORT_TABLES[table]
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\r\n")
    w.writerow(cols)
    for row in rows:
        w.writerow([_cell(row.get(c)) for c in cols])
    return "\ufeff" + buf.getvalue()


def write_export_csv(path, table: str, rows) -> None:
    """Write one export table to ``path`` atomically (see :func:`format_export_csv`).

    Raises
    ------
    OutputError
        The folder does not exist or cannot be written.
    """
    write_bytes_atomic(path, format_export_csv(table, rows).encode("utf-8"))
