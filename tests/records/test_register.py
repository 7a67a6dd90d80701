"""The register: recognising its file, refusing others unchanged, transactions, limits, due dates, numbers."""

import hashlib
import sqlite3

import pytest

from flatcheck.errors import FlatcheckError, InputFormatError, InputValueError
from flatcheck.records import (
    APPLICATION_ID,
    SCHEMA_VERSION,
    Calibration,
    DuplicateSurveyError,
    Register,
    RegisterError,
    add_interval,
    due_list,
    due_status,
    parse_limits,
    register_path,
)


def _sha(path):
    return hashlib.sha256(path.read_bytes()).hexdigest()


LIMITS = '''
format = "flatcheck-limits"
version = 1
lab = "KY tool room (fictional)"

[[table]]
standard = "DIN 876"
source = "test table: values typed for flatcheck's tests from REFERENCE.md section 4.1"
unit = "um"
length_unit = "mm"
length = "longer-side"
grades = ["00", "0", "1", "2"]

[table.formula]
"00" = { constant = 2.0, linear = 0.002 }
"0" = { constant = 4.0, linear = 0.004 }
"1" = { constant = 10.0, linear = 0.01 }
"2" = { constant = 20.0, linear = 0.02 }

[[table]]
standard = "ASME B89.3.7"
source = "test table: the inch formula of REFERENCE.md section 4.3"
unit = "uin"
length_unit = "in"
length = "diagonal"
grades = ["AA", "A", "B"]

[table.formula]
"AA" = { constant = 40.0, quadratic = 0.04 }
"A" = { constant = 80.0, quadratic = 0.08 }
"B" = { constant = 160.0, quadratic = 0.16 }

[[table.size]]
size = [12, 12]
limits = { "AA" = 50.0 }
'''


# ----------------------------------------------------------------------------- the file
def test_new_register_is_recognised_by_sqlite_itself(tmp_path):
    db = tmp_path / "reg.sqlite"
    Register.open(db, create=True).close()
    # outside reference: SQLite's own reading of the header fields and its integrity check
    con = sqlite3.connect(db)
    assert con.execute("PRAGMA application_id").fetchone()[0] == APPLICATION_ID
    assert con.execute("PRAGMA user_version").fetchone()[0] == SCHEMA_VERSION
    assert con.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    assert con.execute("SELECT version FROM schema_version").fetchall() == [(SCHEMA_VERSION,)]
    indexes = {r[0] for r in con.execute("SELECT name FROM sqlite_master WHERE type = 'index'")}
    con.close()
    assert {"surveys_by_surface_date", "calibrations_by_instrument"} <= indexes
    # the header bytes as the SQLite file format documents them (section 1.3): magic, offsets 60 and 68
    head = db.read_bytes()[:100]
    assert head[:16] == b"SQLite format 3\x00"
    assert int.from_bytes(head[68:72], "big") == APPLICATION_ID == int.from_bytes(b"FCRG", "big")
    assert int.from_bytes(head[60:64], "big") == SCHEMA_VERSION


def test_register_path_order(tmp_path):
    assert register_path(tmp_path / "a.sqlite", env={"FLATCHECK_DB": "b.sqlite"}) == tmp_path / "a.sqlite"
    assert str(register_path(None, env={"FLATCHECK_DB": "b.sqlite"})) == "b.sqlite"
    assert str(register_path(None, env={})) == "flatcheck-register.sqlite"


def test_missing_register_is_not_created_for_reading(tmp_path):
    db = tmp_path / "none.sqlite"
    with pytest.raises(RegisterError, match="no register here yet"):
        Register.open(db, readonly=True)
    assert not db.exists()


@pytest.mark.parametrize("content, message", [
    (b"", "empty"),
    (b"x_mm,y_mm,height_um\n0,0,1\n", "not an SQLite database"),
    (b"SQLite format 3\x00" + b"\x00" * 20, "cut short"),
])
def test_files_that_are_not_registers_are_refused_unchanged(tmp_path, content, message):
    db = tmp_path / "x.sqlite"
    db.write_bytes(content)
    before = _sha(db)
    for kw in (dict(create=True), dict(readonly=True)):
        with pytest.raises(RegisterError, match=message):
            Register.open(db, **kw)
    assert _sha(db) == before


def test_foreign_sqlite_database_is_refused_unchanged(tmp_path):
    db = tmp_path / "other.sqlite"
    con = sqlite3.connect(db)
    con.execute("CREATE TABLE parts (id INTEGER PRIMARY KEY, name TEXT)")
    con.execute("INSERT INTO parts(name) VALUES ('gauge block')")
    con.commit()
    con.close()
    before = _sha(db)
    with pytest.raises(RegisterError, match="not a flatcheck register"):
        Register.open(db, create=True)
    assert _sha(db) == before
    con = sqlite3.connect(db)
    con.execute("PRAGMA application_id = 1234")
    con.commit()
    con.close()
    with pytest.raises(RegisterError, match="another program"):
        Register.open(db)


def test_newer_schema_is_refused(tmp_path):
    db = tmp_path / "reg.sqlite"
    Register.open(db, create=True).close()
    con = sqlite3.connect(db)
    con.execute(f"PRAGMA user_version = {SCHEMA_VERSION + 1}")
    con.commit()
    con.close()
    with pytest.raises(RegisterError, match="newer flatcheck"):
        Register.open(db)


def _filled(tmp_path, entry_of, samples):
    db = tmp_path / "reg.sqlite"
    with Register.open(db, create=True) as reg:
        reg.add_survey(entry_of(samples / "plate-KY-P3-2024-03-11.toml"))
    return db


def test_damaged_page_is_refused_unchanged(tmp_path, entry_of, samples):
    db = _filled(tmp_path, entry_of, samples)
    data = bytearray(db.read_bytes())
    page = 4096  # default page size; page 2 holds the first table made (a b-tree page)
    data[page:page + 16] = b"\xff" * 16  # its b-tree page header
    db.write_bytes(bytes(data))
    before = _sha(db)
    # outside reference: SQLite's own integrity check sees the damage
    con = sqlite3.connect(f"{db.as_uri()}?mode=ro", uri=True)
    try:
        sqlite_ok = con.execute("PRAGMA integrity_check").fetchall() == [("ok",)]
    except sqlite3.DatabaseError:  # "database disk image is malformed"
        sqlite_ok = False
    con.close()
    assert not sqlite_ok
    for kw in (dict(create=True), dict(readonly=True)):
        with pytest.raises(RegisterError, match="damaged"):
            Register.open(db, **kw)
    assert _sha(db) == before


def test_truncated_register_is_refused_unchanged(tmp_path, entry_of, samples):
    db = _filled(tmp_path, entry_of, samples)
    db.write_bytes(db.read_bytes()[: 4096 * 3])
    before = _sha(db)
    with pytest.raises(RegisterError, match="damaged"):
        Register.open(db, create=True)
    assert _sha(db) == before


def test_changed_survey_text_is_found_by_its_hash(tmp_path, entry_of, samples):
    db = _filled(tmp_path, entry_of, samples)
    con = sqlite3.connect(db)  # a change SQLite's structure check cannot see: a value inside a text
    con.execute("UPDATE surveys SET raw_text = replace(raw_text, '16.98', '19.98')")
    con.commit()
    con.close()
    with Register.open(db, readonly=True) as reg:
        with pytest.raises(RegisterError, match="does not match its content hash"):
            reg.survey_detail(1)


# ----------------------------------------------------------------------------- surveys
def test_add_survey_stores_what_reduce_states(tmp_path, entry_of, samples):
    e = entry_of(samples / "plate-KY-P3-2024-03-11.toml")
    with Register.open(tmp_path / "r.sqlite", create=True) as reg:
        r = reg.add_survey(e)
        assert r.new_surface and r.ident == "KY-P3" and r.measured_on == "2024-03-11"
        d = reg.survey_detail(r.survey_id)
        hm = reg.heights(r.survey_id)
    assert d.row.flatness_um == e.flatness_um
    assert d.raw_text == (samples / "plate-KY-P3-2024-03-11.toml").read_text(encoding="utf-8")
    assert hm.names == e.names
    assert (hm.height_um == e.height_um).all() and (hm.x_mm == e.x_mm).all()
    assert d.budget == e.budget  # the evaluation's own budget, stored row by row
    reading = next(b for b in d.budget if b.source == "reading")
    assert (reading.value, reading.unit, reading.default) == (0.15, "arcsec", False)  # as the file states
    combined = d.budget[-1]
    assert combined.source == "combined" and combined.value == pytest.approx(e.standard_uncertainty_um)


def test_same_survey_twice_is_refused_and_nothing_changes(tmp_path, entry_of, samples):
    e = entry_of(samples / "plate-KY-P3-2024-03-11.toml")
    db = tmp_path / "r.sqlite"
    with Register.open(db, create=True) as reg:
        reg.add_survey(e)
        counts = reg.counts()
        with pytest.raises(DuplicateSurveyError, match="already in the register as survey 1"):
            reg.add_survey(e)
        # CRLF line ends and trailing blanks do not make another survey
        crlf = (samples / "plate-KY-P3-2024-03-11.toml").read_text(encoding="utf-8").replace("\n", "  \r\n")
        e2 = entry_of(samples / "plate-KY-P3-2024-03-11.toml")
        import dataclasses

        from flatcheck.records import text_sha256

        e2 = dataclasses.replace(e2, content_sha256=text_sha256(crlf))
        with pytest.raises(DuplicateSurveyError):
            reg.add_survey(e2)
        assert reg.counts() == counts


def test_a_failed_add_leaves_no_trace(tmp_path, entry_of, samples):
    """One transaction: the new surface made for the survey is rolled back with it."""
    e = entry_of(samples / "plate-KY-P7-grid.toml", instrument_ident="KY-NOT-THERE")
    with Register.open(tmp_path / "r.sqlite", create=True) as reg:
        with pytest.raises(InputValueError, match="no instrument 'KY-NOT-THERE'"):
            reg.add_survey(e)
        assert reg.counts() == {"surfaces": 0, "instruments": 0, "surveys": 0}
        assert reg.surface("KY-P7") is None


def test_a_file_of_another_size_is_refused(tmp_path, entry_of, samples):
    with Register.open(tmp_path / "r.sqlite", create=True) as reg:
        reg.set_surface("KY-P3", length_mm=630.0, width_mm=400.0)
        with pytest.raises(InputValueError, match="630 x 400 mm, the file says 1000 x 630 mm"):
            reg.add_survey(entry_of(samples / "plate-KY-P3-2024-03-11.toml"))


def test_history_rows_come_in_date_order(tmp_path, entry_of, samples):
    files = ["plate-KY-P3-after-lap-2.toml", "plate-KY-P3-2024-03-11.toml", "plate-KY-P3-after-lap-1.toml"]
    with Register.open(tmp_path / "r.sqlite", create=True) as reg:
        for f in files:
            reg.add_survey(entry_of(samples / f))
        rows = reg.surveys_of("KY-P3")
        assert [r.measured_on for r in rows] == ["2024-03-11", "2024-04-02", "2024-04-23"]  # the files' dates
        assert [r.survey_id for r in rows] == [2, 3, 1]
        assert reg.find_survey("KY-P3", "2024-04-02").survey_id == 3
        with pytest.raises(InputValueError, match="no survey dated"):
            reg.find_survey("KY-P3", "2024-05-01")


def test_an_entry_needs_an_ident_and_a_date(entry_of, samples):
    with pytest.raises(InputValueError, match="no ident"):
        entry_of(samples / "pad-KY-B4-heights.csv")
    e = entry_of(samples / "pad-KY-B4-heights.csv", ident="KY-B4", measured_on="2024-03-15")
    assert e.kind == "height-map" and e.expanded_uncertainty_um is None
    with pytest.raises(InputValueError, match="YYYY-MM-DD"):
        entry_of(samples / "pad-KY-B4-heights.csv", ident="KY-B4", measured_on="15.03.2024")


# ----------------------------------------------------------------------------- limits and verdicts
def test_limits_formula_and_table_by_hand():
    lim = parse_limits(LIMITS, source="limits.toml")
    din = lim.table("din 876")  # letter case and spaces aside
    # hand calculation (REFERENCE.md 4.4 check table): 4 (1 + L/1000) with L = 1000 -> 8.0; 630 x 400 -> 6.52
    assert din.limit("0", 1000, 630).limit_um == pytest.approx(8.0, abs=1e-12)
    assert din.limit("0", 400, 630).limit_um == pytest.approx(6.52, abs=1e-12)
    assert din.limit("00", 1000, 630).limit_um == pytest.approx(4.0, abs=1e-12)
    asme = lim.table("ASME B89.3.7")
    # hand calculation: 300 x 300 mm, D = 424.264 mm = 16.7033 in; 40 + D^2/25 = 51.160 uin = 1.29946 um
    # (REFERENCE.md 4.4 gives 1.30 um for ASME AA at 300 x 300 mm); 1 uin = 0.0254 um exactly
    d_in = (300**2 + 300**2) ** 0.5 / 25.4
    assert asme.limit("AA", 300, 300).limit_um == pytest.approx((40 + d_in**2 / 25) * 0.0254, rel=1e-12)
    assert asme.limit("AA", 300, 300).limit_um == pytest.approx(1.30, abs=0.005)
    # a tabulated size wins over the formula: 12 x 12 in -> 50 uin (REFERENCE.md 4.4, published table)
    t = asme.limit("aa", 304.8, 304.8)
    assert t.grade == "AA" and t.limit_um == pytest.approx(50 * 0.0254) and "tabulated" in t.how
    assert "test table" in t.source


@pytest.mark.parametrize("bad, message", [
    (LIMITS.replace('unit = "um"', 'units = "um"', 1), "did you mean 'unit'"),
    (LIMITS.replace('"0" = { constant = 4.0', '"O" = { constant = 4.0', 1), "grade 'O' is not in grades"),
    (LIMITS.replace('format = "flatcheck-limits"', 'format = "x"'), "not a limits file"),
    (LIMITS.replace("source =", "#source =", 1), "'source' is missing"),
    ("format = ", "not valid TOML"),
])
def test_bad_limits_files_are_refused(bad, message):
    with pytest.raises(FlatcheckError, match=message):
        parse_limits(bad, source="limits.toml")


def test_no_limit_for_a_size_says_which_row_to_add():
    lim = parse_limits(LIMITS.replace('"1" = { constant = 10.0, linear = 0.01 }\n', ""))
    with pytest.raises(InputValueError, match="no limit of grade 1"):
        lim.table("DIN 876").limit("1", 1000, 630)


def test_verdicts_use_the_limits_table_and_iso_14253(tmp_path, entry_of, samples):
    with Register.open(tmp_path / "r.sqlite", create=True) as reg:
        reg.set_surface("KY-P3", length_mm=1000.0, width_mm=630.0, standard="DIN 876", grade="00")
        lid, new = reg.add_limits(parse_limits(LIMITS, source="limits.toml"))
        assert new and reg.add_limits(parse_limits(LIMITS, source="again.toml")) == (lid, False)
        e = entry_of(samples / "plate-KY-P3-2024-03-11.toml")
        r = reg.add_survey(e)
        by_grade = {v.grade: v for v in r.verdicts}
        sought = [v for v in r.verdicts if v.sought]
    assert [v.grade for v in sought] == ["00"]
    # ISO 14253-1 default rule by hand: conforms when F <= T - U
    F, U = e.flatness_um, e.expanded_uncertainty_um
    for g, T in (("00", 4.0), ("0", 8.0), ("1", 20.0), ("2", 40.0)):
        assert by_grade[g].limit_um == pytest.approx(T)
        assert by_grade[g].verdict == ("conforms" if F <= T - U else "undecided")
        assert by_grade[g].source.startswith("test table")


# ----------------------------------------------------------------------------- due dates and numbers
def test_add_interval_by_hand():
    assert add_interval("2024-04-23", months=12) == "2025-04-23"
    assert add_interval("2024-01-31", months=1) == "2024-02-29"  # 2024 is a leap year: last day of February
    assert add_interval("2023-01-31", months=1) == "2023-02-28"
    assert add_interval("2024-11-30", months=3) == "2025-02-28"
    assert add_interval("2024-04-23", days=365) == "2025-04-23"  # 2024-02-29 lies before April
    assert due_status("2025-04-23", "2025-04-10", 30) == ("due", 13)
    assert due_status("2025-04-23", "2025-05-01", 30) == ("overdue", -8)
    assert due_status("2025-04-23", "2025-01-01", 30) == ("ok", 112)


def test_due_list_and_out_of_calibration_survey(tmp_path, entry_of, samples):
    with Register.open(tmp_path / "r.sqlite", create=True) as reg:
        reg.set_instrument("KY-AC-114", kind="autocollimator",
                           calibration=Calibration("2023-02-01", "2024-02-01", "KY-CAL-77", "lab X to national angle"))
        reg.add_survey(entry_of(samples / "plate-KY-P3-2024-03-11.toml", instrument_ident="KY-AC-114"))
        reg.set_surface("KY-P3", interval_months=12)
        d = due_list(reg, on="2025-04-01", within_days=30)
        items = {(i.kind, i.ident): i for i in d.items}
        assert items["surface", "KY-P3"].due_date == "2025-03-11" and items["surface", "KY-P3"].status == "overdue"
        assert items["instrument", "KY-AC-114"].status == "overdue"
        # the survey of 2024-03-11 was made after the autocollimator's due date of 2024-02-01
        assert [(f.survey_id, f.instrument) for f in d.flagged] == [(1, "KY-AC-114")]
        assert "due for calibration on 2024-02-01" in d.flagged[0].reason
        # a calibration in force on the day clears the flag
        reg.set_instrument("KY-AC-114", calibration=Calibration("2024-03-01", "2025-03-01", "KY-CAL-91", ""))
        assert due_list(reg, on="2025-04-01").flagged == ()
        with pytest.raises(InputValueError, match="already has a calibration dated 2024-03-01"):
            reg.set_instrument("KY-AC-114", calibration=Calibration("2024-03-01", "2025-03-01", "", ""))


def test_certificate_numbers_run_per_prefix_and_year(tmp_path, entry_of, samples):
    with Register.open(tmp_path / "r.sqlite", create=True) as reg:
        for f in ("plate-KY-P3-2024-03-11.toml", "plate-KY-P3-after-lap-1.toml", "plate-KY-P3-after-lap-2.toml"):
            reg.add_survey(entry_of(samples / f))
        assert reg.certificate_number(1, "KY", "2026-01-05")[0] == "KY-2026-0001"
        assert reg.certificate_number(2, "KY", "2026-01-06")[0] == "KY-2026-0002"
        assert reg.certificate_number(1, "KY", "2026-02-01") == ("KY-2026-0001", "2026-01-05", False)  # kept
        assert reg.certificate_number(3, "KY", "2027-01-02")[0] == "KY-2027-0001"


def test_surface_fields_and_intervals(tmp_path):
    with Register.open(tmp_path / "r.sqlite", create=True) as reg:
        s, new = reg.set_surface("KY-P9", interval_months=12, owner="KY tool room", location="bench 4")
        assert new and s.interval_text == "12 months"
        s, new = reg.set_surface("KY-P9", interval_days=180)
        assert not new and s.interval_months is None and s.interval_text == "180 days"
        assert s.owner == "KY tool room"  # untouched fields stay
        with pytest.raises(InputValueError, match="not both"):
            reg.set_surface("KY-P9", interval_days=1, interval_months=1)
        with pytest.raises(InputValueError, match="ident is empty"):
            reg.set_surface("  ", kind="plate")


def test_reading_a_register_opened_read_only_does_not_change_it(tmp_path, entry_of, samples):
    db = _filled(tmp_path, entry_of, samples)
    before = _sha(db)
    with Register.open(db, readonly=True) as reg:
        reg.surveys_of("KY-P3")
        due_list(reg, on="2025-01-01", include_ok=True)
        reg.export_rows("readings")
    assert _sha(db) == before


def test_unknown_export_table(tmp_path):
    with Register.open(tmp_path / "r.sqlite", create=True) as reg:
        with pytest.raises(InputValueError, match="unknown table"):
            reg.export_rows("everything")
        with pytest.raises(InputValueError, match="no surface 'KY-X'"):
            reg.export_rows("results", "KY-X")


def test_limits_file_errors_name_the_file(tmp_path):
    from flatcheck.records import read_limits

    p = tmp_path / "limits.toml"
    p.write_text("")
    with pytest.raises(InputFormatError, match="empty"):
        read_limits(p)
