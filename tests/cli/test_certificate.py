"""``flatcheck report SURVEY --db REGISTER``: the calibration certificate's pages in the PDF.

The outside references are the pinned ``flatcheck reduce --json`` (station heights as ``nodes``, the
minimum zone and its U with ``--uncertainty``), a lab limits table typed here with its limit worked
out by hand, and the register's file bytes (a refused register is left byte for byte as it was).
The PDF is read back with pypdfium2 (the ``pdf_tools`` fixture).
"""

import hashlib
import math
import json
import re
import shutil
from pathlib import Path

import pytest

SAMPLES = Path(__file__).resolve().parents[2] / "sample_readings"
P3 = ["plate-KY-P3-2024-03-11.toml", "plate-KY-P3-after-lap-1.toml"]
FAST = ("--trials", "300", "--seed", "7")  # a short Monte Carlo run with a known seed
LIMITS_SOURCE = "KY test table, typed for flatcheck's tests from the lab copy (invented)"
LIMITS = f'''format = "flatcheck-limits"
version = 1
lab = "KY tool room, metrology bench"
[[table]]
standard = "DIN 876"
source = "{LIMITS_SOURCE}"
unit = "um"
length_unit = "mm"
length = "longer-side"
grades = ["00", "0", "1"]
[table.formula]
"00" = {{ constant = 2.0, linear = 0.002 }}
"0" = {{ constant = 4.0, linear = 0.004 }}
"1" = {{ constant = 10.0, linear = 0.01 }}
'''
# A station-table row as the page prints it: name, x and y (mm to 0.1), height (µm to 0.001).
ROW = re.compile(r"^(\S+) (-?\d+\.\d) (-?\d+\.\d) (-?\d+\.\d+)$")


def _sha(path):
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()


def _printed(v: float, digits: int = 3) -> str:
    """A number to the digits the page prints, without a '-0.000'."""
    text = f"{v:.{digits}f}"
    return text[1:] if text.startswith("-") and float(text) == 0 else text


@pytest.fixture
def register(cli, tmp_path):
    """A register with the as-found survey of KY-P3 (seed 7), a calibrated instrument, a limits table and
    the surface's customer, grade sought and interval; returns ``(db, survey_file)``."""
    db = tmp_path / "reg.sqlite"
    f = tmp_path / P3[0]
    shutil.copy(SAMPLES / P3[0], f)
    (tmp_path / "limits.toml").write_text(LIMITS, encoding="utf-8")
    assert cli("register", "instrument", "KY-AC-114", "--db", db, "--kind", "autocollimator", "--serial",
               "114-0097", "--calibrated", "2024-01-05", "--interval-months", "12", "--certificate", "KY-CAL-0042",
               "--traceability", "KY angle standard KY-REF-3 (invented)")[0] == 0
    assert cli("register", "limits", tmp_path / "limits.toml", "--db", db)[0] == 0
    code, out, err = cli("register", "add", f, "--db", db, "--instrument", "KY-AC-114", *FAST)
    assert code == 0, err
    code, out, err = cli("register", "surface", "KY-P3", "--db", db, "--standard", "DIN 876", "--grade", "0",
                         "--owner", "KY tool room", "--location", "inspection bench 2", "--interval-months", "12")
    assert code == 0, err
    return db, f


def _report(cli, tmp_path, survey, db, *extra):
    pdf = tmp_path / "cert.pdf"
    code, out, err = cli("report", survey, "--db", db, "-o", pdf, "--json", *extra)
    assert code == 0, err
    assert err == ""
    doc = json.loads(out)
    return pdf, doc


def _pages(pdf_tools, pdf):
    _, pdf_text = pdf_tools
    return pdf_text(pdf).split("\f")


def test_certificate_number_and_station_heights_are_text_in_the_pdf(cli, tmp_path, register, pdf_tools):
    db, survey = register
    pdf, doc = _report(cli, tmp_path, survey, db, "--prefix", "KY")
    number = doc["certificate"]
    assert re.fullmatch(r"KY-\d{4}-0001", number)  # the register's first number of prefix KY (docs/records.md)
    pages = _pages(pdf_tools, pdf)
    assert len(pages) == doc["pages"]
    assert all(number in p for p in pages)  # every page carries the certificate's number
    front = pages[0]
    assert "Calibration certificate" in front and "Certificate number" in front
    # the customer, the grade as the limits table names it, the instrument's traceability
    for text in ("KY tool room", "inspection bench 2", "DIN 876 grade 0", "KY-CAL-0042", "KY angle standard KY-REF-3"):
        assert text in front
    # the limits table's own source line, and its limit: hand calculation 4 + 0.004 x 1000 mm = 8 µm
    assert LIMITS_SOURCE in front and "limit 8 µm" in front
    assert "from memory" not in front
    # next due: 2024-03-11 (the survey's date) + 12 months (hand calculation)
    assert "2025-03-11" in front
    assert "Measured by" in front and "Approved by" in front and "R.T. (inspector)" in front

    # outside reference: the pinned `flatcheck reduce --json` nodes, to the digits the page prints
    code, out, _ = cli("reduce", survey, "--json")
    assert code == 0
    reduced = json.loads(out)
    nodes = reduced["nodes"]
    # heights print to the step the survey resolves: the sample's autocollimator reads to 0.05 arcsec (the
    # default display step) over 100 mm, 100 mm x tan(0.05") = 0.0242 µm (hand calculation), so to 0.01 µm
    assert reduced["height_step_um"] == pytest.approx(100e3 * math.tan(math.radians(0.05 / 3600.0)), rel=1e-9)
    digits = 2
    station_pages = [p for p in pages if "Certificate: station heights" in p]
    assert station_pages
    printed = {}
    for page in station_pages:
        for line in page.splitlines():
            m = ROW.match(line.strip())
            if m:
                printed[m.group(1)] = m.groups()[1:]
    assert len(printed) == len(nodes) == 45
    for n in nodes:
        assert printed[n["name"]] == (_printed(n["x_mm"], 1), _printed(n["y_mm"], 1), _printed(n["height_um"], digits)), n
    assert len({h for _, _, h in printed.values()}) > 10  # real heights, not a column of zeros

    # the raw readings are the appendix at the end, which closes the certificate
    assert "Appendix: raw readings" in pages[-1] or any("Appendix: raw readings" in p for p in pages[-3:])
    assert f"End of certificate {number}." in pages[-1]
    # the same survey keeps its number
    pdf2, doc2 = _report(cli, tmp_path, survey, db)
    assert doc2["certificate"] == number


def test_budget_rows_and_result_agree_with_reduce(cli, tmp_path, register, pdf_tools):
    db, survey = register
    pdf, doc = _report(cli, tmp_path, survey, db, "--prefix", "KY")
    pages = _pages(pdf_tools, pdf)
    budget_page = next(p for p in pages if "Uncertainty budget of the minimum-zone flatness" in p)
    # outside reference: `flatcheck reduce --uncertainty` with the register's trials and seed (FAST)
    code, out, _ = cli("reduce", survey, "--json", "--uncertainty", *FAST)
    assert code == 0
    fl = json.loads(out)["flatness"]
    rows = [e for e in fl["uncertainty_budget"] if e["applies"]]
    assert len(rows) >= 3

    def squeeze(text):  # names wrap inside their column ("thermal-" / "gradient"): compare without breaks
        return re.sub(r"[\s\-\ufffe\u00ad]", "", text)

    words = budget_page.split()
    for e in rows:
        assert squeeze(e["name"]) in squeeze(budget_page), e["name"]
        assert f"{e['standard_uncertainty_um']:.2g}" in words, e["name"]  # its contribution, 2 significant digits
    assert f"{fl['standard_uncertainty_um']:.2g}" in words  # the combined u
    # the certificate's result is reduce's, stated as certificates state it (U to two significant digits)
    from flatcheck.records import round_to_uncertainty

    f_txt, u_txt = round_to_uncertainty(fl["minimum_zone_um"], fl["expanded_uncertainty_um"])
    assert f"{f_txt} µm" in pages[0] and f"{u_txt} µm" in pages[0]
    # the report's own pages evaluate with the register's trials and seed: they agree with the certificate
    assert doc["monte_carlo"] == {"trials": 300, "seed": 7}
    assert doc["flatness_mz_um"] == fl["minimum_zone_um"]
    assert "evaluate the survey again" not in pages[0]


def test_as_found_and_as_left_on_one_certificate(cli, tmp_path, register, pdf_tools):
    db, _ = register
    g = tmp_path / P3[1]
    shutil.copy(SAMPLES / P3[1], g)
    assert cli("register", "add", g, "--db", db, "--state", "as-left", "--instrument", "KY-AC-114", *FAST)[0] == 0
    pdf, doc = _report(cli, tmp_path, g, db, "--prefix", "KY")
    front = _pages(pdf_tools, pdf)[0]
    hist = json.loads(cli("register", "history", "KY-P3", "--db", db, "--json")[1])
    from flatcheck.records import round_to_uncertainty

    for label, h in (("as found", hist[0]), ("as left", hist[1])):
        f_txt, u_txt = round_to_uncertainty(h["flatness_um"], h["expanded_uncertainty_um"])
        assert re.search(rf"{label} {h['date']} {h['survey_id']} {re.escape(f_txt)} µm {re.escape(u_txt)} µm", front)
    assert "register survey 2 (as left)" in front


def test_an_unregistered_survey_is_aone_line_error(cli, tmp_path, register, one_line_error):
    db, _ = register
    other = tmp_path / P3[1]
    shutil.copy(SAMPLES / P3[1], other)
    before = _sha(db)
    pdf = tmp_path / "cert.pdf"
    code, out, err = cli("report", other, "--db", db, "-o", pdf)
    one_line_error(code, err, str(other), "not in the register", "flatcheck register add")
    assert not pdf.exists() and _sha(db) == before


def test_a_damaged_register_is_refused_unchanged(cli, tmp_path, register, one_line_error):
    db, survey = register
    data = bytearray(db.read_bytes())
    data[4096:4096 + 16] = b"\xff" * 16  # the b-tree header of page 2 (SQLite's default page size is 4096)
    db.write_bytes(bytes(data))
    before = _sha(db)
    pdf = tmp_path / "cert.pdf"
    code, out, err = cli("report", survey, "--db", db, "-o", pdf, "--trials", "300")
    one_line_error(code, err, "damaged", str(db))
    assert _sha(db) == before and not pdf.exists()


@pytest.mark.parametrize("args, words", [
    (("--standard", "din-876"), ("--standard", "limits table")),  # two sources of limits on one certificate
    (("--method", "moody"), ("--method", "least-squares")),  # the register reduced it by least squares
    ((), ("--prefix", "no certificate-number prefix")),  # a first certificate needs the lab's prefix
])
def test_options_that_would_contradict_the_register_are_refused(cli, tmp_path, register, args, words, one_line_error):
    db, survey = register
    before = _sha(db)
    code, out, err = cli("report", survey, "--db", db, "-o", tmp_path / "c.pdf", "--trials", "300", *args)
    one_line_error(code, err, *words)
    assert _sha(db) == before


def test_prefix_without_register_and_report_without_db_as_before(cli, tmp_path, pdf_tools, one_line_error):
    f = tmp_path / P3[0]
    shutil.copy(SAMPLES / P3[0], f)
    code, out, err = cli("report", f, "-o", tmp_path / "a.pdf", "--prefix", "KY")
    one_line_error(code, err, "--prefix", "--db")
    pdf = tmp_path / "b.pdf"
    code, out, err = cli("report", f, "-o", pdf, "--trials", "300", "--json")
    assert code == 0 and err == ""
    doc = json.loads(out)
    assert doc["certificate"] is None
    pages = _pages(pdf_tools, pdf)
    assert "Calibration certificate" not in pages[0] and "CALIBRATION CERTIFICATE" not in "".join(pages)
    assert "Summary" in pages[0] and "What was measured" in pages[0]


def test_height_map_certificate_and_its_size(cli, tmp_path, pdf_tools):
    """A CSV's '# key = value' lines give the report the size (not 'not stated') and the register the identity."""
    text = (SAMPLES / "pad-KY-B4-heights.csv").read_text(encoding="utf-8")
    p = tmp_path / "pad.csv"
    p.write_text("# ident = KY-B4\n# description = lapped graphite pad face\n# date = 2024-03-15\n"
                 "# length_mm = 80\n# width_mm = 80\n" + text, encoding="utf-8")
    # without a register: the report states the size from the comments
    pdf0 = tmp_path / "plain.pdf"
    assert cli("report", p, "-o", pdf0)[0] == 0
    summary = _pages(pdf_tools, pdf0)[0]
    assert "80 x 80 mm" in summary and "lapped graphite pad face" in summary
    # with a register: a certificate whose table holds the heights as given
    db = tmp_path / "reg.sqlite"
    assert cli("register", "add", p, "--db", db, "--u-height-um", "0.02", *FAST)[0] == 0
    pdf, doc = _report(cli, tmp_path, p, db, "--prefix", "KY", "--u-height-um", "0.02")
    pages = _pages(pdf_tools, pdf)
    assert "80 x 80 mm" in pages[0] and "KY-B4" in pages[0]
    nodes = json.loads(cli("reduce", p, "--json")[1])["nodes"]
    rows = set()
    for page in pages:
        if "Certificate: heights" in page:
            for line in page.splitlines():
                m = ROW.match(line.strip())
                if m:
                    rows.add(m.groups())
    # points are numbered in the file's order; outside reference: reduce --json's nodes
    expected = {(str(k), _printed(n["x_mm"], 1), _printed(n["y_mm"], 1), _printed(n["height_um"]))
                for k, n in enumerate(nodes, start=1)}
    assert rows == expected
    assert any("Appendix: raw data" in pg for pg in pages) and f"End of certificate {doc['certificate']}." in pages[-1]
