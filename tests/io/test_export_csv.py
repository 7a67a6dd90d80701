"""Spreadsheet-friendly CSV export: read back with Python's csv module (RFC 4180 quoting)."""

import csv
import io

import pytest

from flatcheck.errors import InputValueError
from flatcheck.io._export_csv import EXPORT_TABLES, format_export_csv, write_export_csv


def test_rows_read_back_with_the_csv_module(tmp_path):
    rows = [
        {"survey_id": 1, "ident": "KY-P3", "date": "2024-03-11", "flatness_um": 2.4862469279810364,
         "expanded_uncertainty_um": None, "operator": 'R.T. "inspector", bench 2', "instrument_in_calibration": True},
        {"survey_id": 2, "ident": "KY-P3", "date": "2024-04-02", "flatness_um": float("nan")},
    ]
    p = tmp_path / "results.csv"
    write_export_csv(p, "results", rows)
    raw = p.read_bytes()
    assert raw.startswith(b"\xef\xbb\xbf")  # UTF-8 byte-order mark for spreadsheet programs
    assert b"\r\n" in raw  # RFC 4180 line ends
    back = list(csv.DictReader(io.StringIO(raw.decode("utf-8-sig"))))
    assert list(back[0]) == list(EXPORT_TABLES["results"])
    assert float(back[0]["flatness_um"]) == rows[0]["flatness_um"]  # full precision
    assert back[0]["expanded_uncertainty_um"] == "" and back[1]["flatness_um"] == ""  # none, NaN: empty cells
    assert back[0]["operator"] == 'R.T. "inspector", bench 2'  # quoted and restored literally
    assert back[0]["instrument_in_calibration"] == "yes"


def test_unknown_table():
    with pytest.raises(InputValueError, match="unknown table"):
        format_export_csv("everything", [])
