"""``flatcheck register``: adding surveys, history, due dates, refusing bad registers unchanged."""

import csv
import hashlib
import io
import json
import shutil
import sqlite3
from pathlib import Path

import pytest

SAMPLES = Path(__file__).resolve().parents[2] / "sample_readings"
P3 = ["plate-KY-P3-2024-03-11.toml", "plate-KY-P3-after-lap-1.toml", "plate-KY-P3-after-lap-2.toml"]
FAST = ("--trials", "300")  # a short Monte Carlo run: these tests check records, not U


def _sha(path):
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()


def _copy(tmp_path, *names):
    out = []
    for n in names:
        shutil.copy(SAMPLES / n, tmp_path / n)
        out.append(tmp_path / n)
    return out


def test_three_surveys_out_of_order_come_back_in_date_order(cli, tmp_path):
    db = tmp_path / "reg.sqlite"
    files = _copy(tmp_path, P3[2], P3[0], P3[1])  # added out of date order
    code, out, err = cli("register", "add", *files, "--db", db, *FAST)
    assert code == 0 and err == "" and "3 added, 0 refused" in out
    code, out, err = cli("register", "history", "KY-P3", "--db", db, "--json")
    assert code == 0 and err == ""
    hist = json.loads(out)
    assert [h["date"] for h in hist] == ["2024-03-11", "2024-04-02", "2024-04-23"]  # the files' [conditions] dates
    # outside check: each flatness is what `flatcheck reduce --json` states for that file
    for h, name in zip(hist, P3):
        code, out, _ = cli("reduce", tmp_path / name, "--json")
        assert code == 0
        assert h["flatness_um"] == json.loads(out)["flatness"]["minimum_zone_um"]
        assert h["expanded_uncertainty_um"] > 0
    # the text table shows them in the same order, rounded as certificates state them
    code, out, err = cli("register", "history", "KY-P3", "--db", db)
    assert code == 0 and out.index("2024-03-11") < out.index("2024-04-02") < out.index("2024-04-23")


def test_history_json_is_the_pinned_list(cli, tmp_path):
    """Issue 20 pinned `register history --json` as a list of surveys in date order (docs/records.md says so),
    while every other command prints one object: the list stays a list, with the pinned keys."""
    db = tmp_path / "reg.sqlite"
    files = _copy(tmp_path, P3[1], P3[0])
    assert cli("register", "add", *files, "--db", db, *FAST)[0] == 0
    code, out, err = cli("register", "history", "KY-P3", "--db", db, "--json")
    assert code == 0 and err == ""
    hist = json.loads(out)
    assert isinstance(hist, list) and len(hist) == 2
    assert [h["date"] for h in hist] == sorted(h["date"] for h in hist)
    for h in hist:
        assert {"date", "flatness_um", "expanded_uncertainty_um"} <= set(h)
    assert cli("register", "surface", "KY-X1", "--db", db, "--kind", "surface plate")[0] == 0  # no survey yet
    code, out, err = cli("register", "history", "KY-X1", "--db", db, "--json")
    assert code == 0 and json.loads(out) == []


def test_due_date_follows_from_the_interval(cli, tmp_path):
    db = tmp_path / "reg.sqlite"
    files = _copy(tmp_path, *P3)
    assert cli("register", "add", *files, "--db", db, *FAST)[0] == 0
    code, out, err = cli("register", "surface", "KY-P3", "--db", db, "--interval-months", "12", "--json")
    assert code == 0 and json.loads(out)["interval"] == "12 months"
    code, out, err = cli("register", "due", "--db", db, "--on", "2025-04-10", "--json")
    assert code == 0 and err == ""
    due = json.loads(out)
    item = next(i for i in due["items"] if i["ident"] == "KY-P3")
    # hand calculation: last survey 2024-04-23 + 12 months = 2025-04-23, 13 days after 2025-04-10
    assert (item["due_date"], item["days_left"], item["status"]) == ("2025-04-23", 13, "due")
    code, out, _ = cli("register", "due", "--db", db, "--on", "2025-05-01", "--json")
    assert json.loads(out)["items"][0]["status"] == "overdue"
    code, out, _ = cli("register", "due", "--db", db, "--on", "2025-01-01", "--json")
    assert json.loads(out)["items"] == []  # not due yet
    cli("register", "surface", "KY-P3", "--db", db, "--interval-days", "30")
    code, out, _ = cli("register", "due", "--db", db, "--on", "2024-05-01", "--json", "--all")
    # 2024-04-23 + 30 days = 2024-05-23 (hand calculation: April has 30 days)
    assert json.loads(out)["items"][0]["due_date"] == "2024-05-23"


def test_corrupted_register_is_refused_and_left_unchanged(cli, tmp_path, one_line_error):
    db = tmp_path / "reg.sqlite"
    (f,) = _copy(tmp_path, P3[0])
    assert cli("register", "add", f, "--db", db, *FAST)[0] == 0
    data = bytearray(db.read_bytes())
    data[4096:4096 + 16] = b"\xff" * 16  # the b-tree header of page 2 (default page size 4096)
    db.write_bytes(bytes(data))
    before = _sha(db)
    # outside reference: SQLite's own integrity check finds the damage too
    con = sqlite3.connect(f"{db.as_uri()}?mode=ro", uri=True)
    try:
        assert con.execute("PRAGMA integrity_check").fetchall() != [("ok",)]
    except sqlite3.DatabaseError:
        pass
    finally:
        con.close()
    (g,) = _copy(tmp_path, P3[1])
    for args in (("register", "history", "KY-P3"), ("register", "add", g, *FAST), ("register", "due"),
                 ("register", "surface", "KY-P3", "--interval-months", "6")):
        code, out, err = cli(*args, "--db", db)
        one_line_error(code, err, "damaged", str(db))
        assert _sha(db) == before


def test_truncated_register_is_refused_unchanged(cli, tmp_path, one_line_error):
    db = tmp_path / "reg.sqlite"
    (f,) = _copy(tmp_path, P3[0])
    assert cli("register", "add", f, "--db", db, *FAST)[0] == 0
    db.write_bytes(db.read_bytes()[:20000])
    before = _sha(db)
    code, out, err = cli("register", "history", "KY-P3", "--db", db)
    one_line_error(code, err, "damaged")
    assert _sha(db) == before


def test_foreign_sqlite_file_is_refused_unchanged(cli, tmp_path, one_line_error):
    db = tmp_path / "inventory.sqlite"
    con = sqlite3.connect(db)
    con.execute("CREATE TABLE tools (id INTEGER PRIMARY KEY, name TEXT)")
    con.commit()
    con.close()
    before = _sha(db)
    (f,) = _copy(tmp_path, P3[0])
    code, out, err = cli("register", "add", f, "--db", db, *FAST)
    one_line_error(code, err, "not a flatcheck register")
    assert _sha(db) == before


@pytest.mark.parametrize("content, words", [
    (b"some notes\n", ("not an SQLite database",)),
    (b"", ("empty",)),
])
def test_other_files_as_db_are_refused_unchanged(cli, tmp_path, content, words, one_line_error):
    db = tmp_path / "notes.txt"
    db.write_bytes(content)
    (f,) = _copy(tmp_path, P3[0])
    code, out, err = cli("register", "add", f, "--db", db, *FAST)
    one_line_error(code, err, *words)
    assert db.read_bytes() == content


def test_no_register_yet_for_reading(cli, tmp_path, one_line_error):
    db = tmp_path / "none.sqlite"
    code, out, err = cli("register", "history", "KY-P3", "--db", db)
    one_line_error(code, err, "no register here yet")
    assert not db.exists()


def test_register_place_from_the_environment(cli, tmp_path, monkeypatch):
    db = tmp_path / "env.sqlite"
    monkeypatch.setenv("FLATCHECK_DB", str(db))
    (f,) = _copy(tmp_path, P3[0])
    code, out, err = cli("register", "add", f, *FAST)
    assert code == 0 and db.exists() and str(db) in out


def test_same_survey_twice_is_refused(cli, tmp_path, one_line_error):
    db = tmp_path / "reg.sqlite"
    (f,) = _copy(tmp_path, P3[0])
    assert cli("register", "add", f, "--db", db, *FAST)[0] == 0
    before = cli("register", "history", "KY-P3", "--db", db, "--json")[1]
    code, out, err = cli("register", "add", f, "--db", db, *FAST)
    one_line_error(code, err, "already in the register as survey 1", f.name)
    assert cli("register", "history", "KY-P3", "--db", db, "--json")[1] == before
    # a copy under another name, with Windows line ends, is the same survey
    g = tmp_path / "copy.toml"
    g.write_bytes(f.read_bytes().replace(b"\n", b"\r\n"))
    code, out, err = cli("register", "add", g, "--db", db, *FAST)
    one_line_error(code, err, "already in the register")


def test_many_files_one_bad_exit_2_others_added(cli, tmp_path):
    db = tmp_path / "reg.sqlite"
    folder = tmp_path / "surveys"
    folder.mkdir()
    for n in P3 + ["plate-KY-P7-grid.toml"]:
        shutil.copy(SAMPLES / n, folder / n)
    (folder / "broken.toml").write_text('format = "flatcheck-survey"\nversion = 1\n[surface]\n', encoding="utf-8")
    code, out, err = cli("register", "add", folder, "--db", db, *FAST, "--json")
    assert code == 2 and "Traceback" not in err
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("flatcheck: error: ") and "broken.toml" in lines[0]
    doc = json.loads(out)
    assert [a["file"] for a in doc["added"]] == [str(folder / n) for n in sorted(P3 + ["plate-KY-P7-grid.toml"])]
    assert [r["file"] for r in doc["refused"]] == [str(folder / "broken.toml")]
    code, out, _ = cli("register", "history", "KY-P3", "--db", db, "--json")
    assert len(json.loads(out)) == 3
    code, out, _ = cli("register", "history", "KY-P7", "--db", db, "--json")
    assert len(json.loads(out)) == 1


def test_a_file_without_ident_or_date_is_named(cli, tmp_path, one_line_error):
    db = tmp_path / "reg.sqlite"
    (pad,) = _copy(tmp_path, "pad-KY-B4-heights.csv")
    code, out, err = cli("register", "add", pad, "--db", db)
    one_line_error(code, err, "pad-KY-B4-heights.csv", "no ident", "--ident")
    code, out, err = cli("register", "add", pad, "--db", db, "--ident", "KY-B4")
    one_line_error(code, err, "no date", "--date")
    code, out, err = cli("register", "add", pad, "--db", db, "--ident", "KY-B4", "--date", "2024-03-15",
                         "--u-height-um", "0.02", *FAST, "--json")
    assert code == 0
    a = json.loads(out)["added"][0]
    assert a["ident"] == "KY-B4" and a["expanded_uncertainty_um"] > 0


def test_height_map_csv_with_identity_comments(cli, tmp_path):
    db = tmp_path / "reg.sqlite"
    text = (SAMPLES / "pad-KY-B4-heights.csv").read_text(encoding="utf-8")
    p = tmp_path / "pad.csv"
    p.write_text("# ident = KY-B4\n# date = 2024-03-15\n# length_mm = 80\n# width_mm = 80\n" + text, encoding="utf-8")
    code, out, err = cli("register", "add", p, "--db", db, "--json")
    assert code == 0, err
    a = json.loads(out)["added"][0]
    assert (a["ident"], a["date"], a["expanded_uncertainty_um"]) == ("KY-B4", "2024-03-15", None)
    code, out, _ = cli("register", "surface", "KY-B4", "--db", db, "--json")
    s = json.loads(out)
    assert (s["length_mm"], s["width_mm"]) == (80.0, 80.0)


def test_export_csv_reads_back(cli, tmp_path, one_line_error):
    db = tmp_path / "reg.sqlite"
    files = _copy(tmp_path, *P3)
    assert cli("register", "add", *files, "--db", db, *FAST)[0] == 0
    hist = json.loads(cli("register", "history", "KY-P3", "--db", db, "--json")[1])
    for table, n in (("results", 3), ("stations", 3 * 45), ("readings", 3 * 76)):
        out_csv = tmp_path / f"{table}.csv"
        code, out, err = cli("register", "export", out_csv, "--db", db, "--table", table)
        assert code == 0 and err == ""
        rows = list(csv.DictReader(io.StringIO(out_csv.read_text(encoding="utf-8-sig"))))
        assert len(rows) == n
    rows = list(csv.DictReader(io.StringIO((tmp_path / "results.csv").read_text(encoding="utf-8-sig"))))
    assert [float(r["flatness_um"]) for r in rows] == [h["flatness_um"] for h in hist]  # full precision
    code, out, err = cli("register", "export", db, "--db", db)
    one_line_error(code, err, "input file")


def test_certificate_station_heights_equal_reduce_json(cli, tmp_path):
    db = tmp_path / "reg.sqlite"
    (f,) = _copy(tmp_path, P3[0])
    assert cli("register", "add", f, "--db", db, *FAST)[0] == 0
    limits = tmp_path / "limits.toml"
    limits.write_text('''format = "flatcheck-limits"
version = 1
[[table]]
standard = "DIN 876"
source = "test table typed for flatcheck's tests"
unit = "um"
length_unit = "mm"
grades = ["00", "0"]
[table.formula]
"00" = { constant = 2.0, linear = 0.002 }
"0" = { constant = 4.0, linear = 0.004 }
''', encoding="utf-8")
    assert cli("register", "limits", limits, "--db", db)[0] == 0
    code, out, err = cli("register", "surface", "KY-P3", "--db", db, "--standard", "din 876", "--grade", "0",
                         "--owner", "KY tool room", "--interval-months", "12", "--json")
    assert code == 0 and json.loads(out)["standard"] == "DIN 876"  # the limits table's own spelling
    code, out, err = cli("register", "certificate", "KY-P3", "--db", db, "--prefix", "KY", "--issued",
                         "2026-01-05", "--json")
    assert code == 0, err
    c = json.loads(out)
    assert c["number"] == "KY-2026-0001" and c["customer"] == "KY tool room"
    assert c["next_due_on"] == "2025-03-11"  # 2024-03-11 + 12 months (hand calculation)
    assert c["limits_sources"] == ["test table typed for flatcheck's tests"]
    assert c["as_found"]["verdict"]["grade"] == "0" and c["as_left"] is None
    nodes = json.loads(cli("reduce", f, "--json")[1])["nodes"]
    assert [(s["name"], s["x_mm"], s["y_mm"], s["height_um"]) for s in c["stations"]] == \
        [(n["name"], n["x_mm"], n["y_mm"], n["height_um"]) for n in nodes]
    assert len(c["readings"]) == 76 and c["raw_text"] == f.read_text(encoding="utf-8")
    # the same survey keeps its number; the prefix is remembered
    code, out, _ = cli("register", "certificate", "KY-P3", "--db", db, "--json")
    assert json.loads(out)["number"] == "KY-2026-0001"


def test_out_of_calibration_survey_is_flagged(cli, tmp_path, one_line_error):
    db = tmp_path / "reg.sqlite"
    code, out, err = cli("register", "instrument", "KY-AC-114", "--db", db, "--kind", "autocollimator",
                         "--calibrated", "2023-01-10", "--interval-months", "12", "--certificate", "KY-CAL-0042")
    assert code == 0 and "2024-01-10" in out  # due = calibrated + 12 months
    (f,) = _copy(tmp_path, P3[0])
    assert cli("register", "add", f, "--db", db, "--instrument", "KY-AC-114", *FAST)[0] == 0
    code, out, err = cli("register", "due", "--db", db, "--on", "2024-03-20", "--json")
    d = json.loads(out)
    assert [(x["ident"], x["status"]) for x in d["items"]] == [("KY-AC-114", "overdue")]
    assert d["out_of_calibration_surveys"][0]["survey_id"] == 1
    assert "due for calibration on 2024-01-10" in d["out_of_calibration_surveys"][0]["reason"]
    code, out, err = cli("register", "add", f, "--db", db, "--instrument", "KY-NONE", *FAST)
    one_line_error(code, err, "already in the register")


def test_wear_between_two_surveys(cli, tmp_path, one_line_error):
    db = tmp_path / "reg.sqlite"
    files = _copy(tmp_path, *P3[:2])
    assert cli("register", "add", *files, "--db", db, *FAST)[0] == 0
    png = tmp_path / "wear.png"
    code, out, err = cli("register", "wear", "KY-P3", "--db", db, "--json", "--plot", png)
    assert code == 0 and err == ""
    w = json.loads(out)
    assert (w["from"]["date"], w["to"]["date"], w["matched_by"]) == ("2024-03-11", "2024-04-02", "station names")
    assert len(w["stations"]) == 45
    assert w["most_worn"]["change_um"] == min(s["change_um"] for s in w["stations"])
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    code, out, err = cli("register", "wear", "KY-P3", "--db", db, "--from", "2024-04-02", "--to", "2024-03-11")
    one_line_error(code, err, "older")


def test_history_plot_and_unknown_surface(cli, tmp_path, one_line_error):
    db = tmp_path / "reg.sqlite"
    files = _copy(tmp_path, *P3)
    assert cli("register", "add", *files, "--db", db, *FAST)[0] == 0
    png = tmp_path / "h.png"
    code, out, err = cli("register", "history", "KY-P3", "--db", db, "--plot", png)
    assert code == 0 and png.read_bytes()[:4] == b"\x89PNG"
    code, out, err = cli("register", "history", "KY-P9", "--db", db)
    one_line_error(code, err, "no surface 'KY-P9'", "KY-P3")
    code, out, err = cli("register", "history", "KY-P3", "--db", db, "--plot", db)
    one_line_error(code, err, "input file")


def test_user_text_is_printed_literally(cli, tmp_path):
    db = tmp_path / "reg.sqlite"
    code, out, err = cli("register", "surface", "KY-[b]P1[/b]", "--db", db, "--location", "bench :smile: [red]2")
    assert code == 0 and "KY-[b]P1[/b]" in out and "bench :smile: [red]2" in out


def _keys(obj, out=None):
    out = set() if out is None else out
    if isinstance(obj, dict):
        for k, v in obj.items():
            out.add(k)
            _keys(v, out)
    elif isinstance(obj, list):
        for v in obj:
            _keys(v, out)
    return out


def _section(command):
    text = (Path(__file__).resolve().parents[2] / "docs" / "records.md").read_text(encoding="utf-8")
    start = text.index(f"### `flatcheck register {command}`")
    end = text.find("\n### ", start + 1)
    return text[start: end if end > 0 else None]


def test_docs_name_every_json_key(cli, tmp_path):
    """docs/records.md lists every key the register commands print with --json."""
    db = tmp_path / "reg.sqlite"
    files = _copy(tmp_path, *P3)
    limits = tmp_path / "limits.toml"
    limits.write_text('format = "flatcheck-limits"\nversion = 1\nlab = "KY"\n[[table]]\nstandard = "DIN 876"\n'
                      'source = "test table"\nunit = "um"\nlength_unit = "mm"\ngrades = ["0"]\n[table.formula]\n'
                      '"0" = { constant = 4.0, linear = 0.004 }\n', encoding="utf-8")
    runs = {
        "instrument": [("KY-AC-114", "--kind", "autocollimator", "--calibrated", "2024-01-01", "--due", "2025-01-01")],
        "limits": [(limits,)],
        "surface": [("KY-P3", "--standard", "DIN 876", "--grade", "0", "--interval-months", "12",
                     "--length-mm", "1000", "--width-mm", "630")],
        "add": [(files[0], *FAST, "--instrument", "KY-AC-114"), (files[1], files[2], *FAST, "--state", "as-left")],
        "history": [("KY-P3",)],
        "wear": [("KY-P3", "--from", "2024-03-11", "--to", "2024-04-23")],
        "due": [("--on", "2025-06-01", "--all")],
        "certificate": [("KY-P3", "--prefix", "KY"), ("KY-P3", "--survey", "2024-03-11")],
    }
    for command, arglists in runs.items():
        section = _section(command)
        for args in arglists:
            code, out, err = cli("register", command, *args, "--db", db, "--json")
            assert code == 0, err
            missing = sorted(k for k in _keys(json.loads(out)) if f"`{k}`" not in section)
            assert not missing, f"register {command}: keys not in docs/records.md: {missing}"


def test_history_marks_a_survey_made_out_of_calibration(cli, tmp_path):
    db = tmp_path / "reg.sqlite"
    assert cli("register", "instrument", "KY-AC-114", "--db", db, "--calibrated", "2023-01-10", "--due",
               "2024-01-10")[0] == 0
    (f, g) = _copy(tmp_path, *P3[:2])
    assert cli("register", "add", f, "--db", db, "--instrument", "KY-AC-114", *FAST)[0] == 0
    assert cli("register", "add", g, "--db", db, *FAST)[0] == 0
    hist = json.loads(cli("register", "history", "KY-P3", "--db", db, "--json")[1])
    # 2024-03-11 is after the due date 2024-01-10; the second survey names no registered instrument
    assert [h["instrument_in_calibration"] for h in hist] == [False, None]
    code, out, _ = cli("register", "history", "KY-P3", "--db", db)
    assert "out of calibration" in out
