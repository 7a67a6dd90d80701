"""Tests of instrument-log parsing (flatcheck.bench._log)."""

import math

import numpy as np
import pytest

from flatcheck.bench import check_log_count, convert_readings, find_gaps, parse_log
from flatcheck.errors import InputFormatError, InputValueError, UnitError


def test_csv_with_header_time_and_two_numeric_columns():
    text = "time,tilt,temp_c\n10:00:00,1.5,20.1\n10:00:20,-0.25,20.1\n10:00:41,2,20.2\n"
    with pytest.raises(InputFormatError, match="cannot tell which column"):
        parse_log(text, source="log.csv")  # tilt and temp_c both hold numbers
    lg = parse_log(text, source="log.csv", column="TILT")
    assert lg.values.tolist() == [1.5, -0.25, 2.0]
    assert lg.rows == (2, 3, 4) and lg.column == "column 'tilt'" and lg.time_column == "column 'time'"
    assert lg.times_s.tolist() == [0.0, 20.0, 41.0]
    assert parse_log(text, column="2").values.tolist() == [1.5, -0.25, 2.0]
    assert parse_log(text, column="2", time_column="none").times_s is None


def test_semicolons_and_a_decimal_comma():
    text = "Zeit;Neigung\n2024-03-11 10:00:00;1,5\n2024-03-11 10:00:30;-0,25\n"
    lg = parse_log(text, decimal=",")
    assert lg.values.tolist() == [1.5, -0.25] and lg.times_s.tolist() == [0.0, 30.0]
    with pytest.raises(InputFormatError, match="--decimal ,"):
        parse_log(text, decimal=".", column="Neigung")


def test_whitespace_text_log_without_header():
    text = "# level log\n08:59:50   0.0012\n09:00:10   0.0015\n\n09:00:31   -0.0001\n"
    lg = parse_log(text)
    assert lg.values.tolist() == [0.0012, 0.0015, -0.0001]
    assert lg.column == "column 2" and lg.time_column == "column 1" and lg.rows == (2, 3, 5)
    with pytest.raises(InputValueError, match="no header row"):
        parse_log(text, column="tilt")


@pytest.mark.parametrize(
    "stamps, expected",
    [
        (["23:59:40", "23:59:59", "00:00:19"], [0.0, 19.0, 39.0]),  # past midnight
        (["11.03.2024 10:00:00", "11.03.2024 10:01:00"], [0.0, 60.0]),
        (["2024-03-11T10:00:00", "2024-03-11T10:00:02.5"], [0.0, 2.5]),
        (["100.0", "112.5"], [0.0, 12.5]),
    ],
)
def test_timestamp_forms(stamps, expected):
    text = "time,reading\n" + "".join(f"{s},1.0\n" for s in stamps)
    assert parse_log(text).times_s.tolist() == pytest.approx(expected)


def test_slashed_dates_are_refused_as_ambiguous():
    text = "time,reading\n03/11/2024 10:00,1.0\n"
    with pytest.raises(InputFormatError, match="ISO 8601") as exc:
        parse_log(text, source="log.csv")
    assert "log.csv, line 2" in str(exc.value)


def test_a_reading_that_is_not_a_number_names_its_line():
    text = "time,reading\n10:00:00,1.0\n10:00:20,OVER\n"
    with pytest.raises(InputFormatError, match="'OVER'") as exc:
        parse_log(text, source="log.csv", column="reading")
    assert "log.csv, line 3" in str(exc.value)


def test_unknown_column_suggests_the_nearest():
    with pytest.raises(InputValueError, match="did you mean 'tilt_arcsec'"):
        parse_log("time,tilt_arcsec\n1,2\n", column="tilt")
    with pytest.raises(InputValueError, match="not 5"):
        parse_log("time,tilt_arcsec\n1,2\n", column="5")


def test_unit_conversions_are_exact():
    # 1 arcsec = pi/648000 rad exactly (definition); 1 µrad = 0.206265 arcsec (REFERENCE.md check value 1)
    assert convert_readings([1.0], "urad", "arcsec", heights=False)[0] == pytest.approx(0.206265, rel=2e-6)
    assert convert_readings([648000.0], "arcsec", "mrad", heights=False)[0] == pytest.approx(math.pi * 1e3, rel=1e-15)
    # angle -> slope is tan, slope -> angle atan (a slope unit is rise over run)
    assert convert_readings([1000.0], "urad", "um/m", heights=False)[0] == pytest.approx(math.tan(1e-3) * 1e6, rel=1e-15)
    assert convert_readings([1.0], "mm/m", "urad", heights=False)[0] == pytest.approx(math.atan(1e-3) * 1e6, rel=1e-15)
    # 1 µin = 0.0254 µm exactly (1 in = 25.4 mm)
    assert convert_readings([100.0], "uin", "um", heights=True)[0] == pytest.approx(2.54, rel=1e-15)
    with pytest.raises(UnitError):
        convert_readings([1.0], "um", "arcsec", heights=False)


def test_gaps_within_runs_are_found_and_run_changes_are_not():
    t = np.array([0, 20, 40, 60, 240, 260, 280, 300, 302, 322, 400, 420], dtype=float)
    gaps = find_gaps(t, breaks=[3])
    # 60 -> 240 is a run change (break after reading 4); 300 -> 302 a repeat; 322 -> 400 a missed reading
    assert [(g.after, g.kind) for g in gaps] == [(7, "short"), (9, "long")]
    assert gaps[1].typical_s == 20.0
    assert "readings 10 and 11" in gaps[1].describe() and "missed" in gaps[1].describe()
    assert find_gaps(np.array([0.0, 20.0, 10.0, 30.0, 50.0, 70.0]))[0].kind == "backwards"


def test_count_mismatch_names_both_counts_and_the_suspect_interval():
    # readings every 10 s, but 20 s between the 5th and the 6th: the reading in between is missing
    times = [0, 10, 20, 30, 40, 60, 70, 80, 90]
    rows = ["time,reading"] + [f"{t},{k}" for k, t in enumerate(times)]
    lg = parse_log("\n".join(rows) + "\n", source="log.csv")
    with pytest.raises(InputValueError) as exc:
        check_log_count(lg, 10, first_reading="reading 1")
    msg = str(exc.value)
    assert "has 9 readings but the survey needs 10" in msg and "1 reading short" in msg
    assert "readings 5 and 6 (lines 6 and 7)" in msg
    check_log_count(lg, 9)  # the right count passes
    with pytest.raises(InputValueError, match="too many"):
        check_log_count(lg, 8)
