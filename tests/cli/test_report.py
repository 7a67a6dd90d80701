"""``flatcheck report``: exit codes, one-line errors, the files it writes."""

import json
import shutil
import subprocess

import numpy as np
import pytest

from flatcheck.heightmap import HeightMap
from flatcheck.io.heightmap_csv import write_heightmap_csv


@pytest.fixture
def plate_csv(tmp_path):
    """A 600 x 400 mm height map: a 2 µm crown (invented shape) on a 7 x 5 grid."""
    x, y = np.meshgrid(np.linspace(0, 600, 7), np.linspace(0, 400, 5))
    z = 2.0 * (1 - ((x - 300) / 300) ** 2) * (1 - ((y - 200) / 200) ** 2)
    path = tmp_path / "crown.csv"
    write_heightmap_csv(path, HeightMap(x.ravel(), y.ravel(), z.ravel()))
    return path


def _one_line_error(code, err):
    assert code == 2
    assert err.startswith("flatcheck: error: ") and err.count("\n") == 1
    assert "Traceback" not in err


def test_report_writes_pdf_and_pictures(cli, plate_csv, tmp_path):
    pics = tmp_path / "pics"
    pics.mkdir()
    code, out, err = cli("report", plate_csv, "-o", tmp_path / "r.pdf", "--png", pics, "--json", "--standard", "din-876")
    assert code == 0 and "Traceback" not in err
    data = json.loads(out)  # exactly one JSON object on stdout
    assert data["pages"] >= 4 and len(data["png"]) == data["pages"] - 1
    # Analytic: the crown peaks at 2 µm in the middle and is 0 along the edges, so its minimum zone
    # (through the zero edges, horizontal) is 2 µm.
    assert data["flatness_mz_um"] == pytest.approx(2.0, abs=1e-9)
    assert (tmp_path / "r.pdf").read_bytes()[:5] == b"%PDF-"
    assert all(p.startswith(str(pics)) for p in data["png"])
    # Source: DIN 876 form c (1 + L/1000), L = 600 mm longer side: grade 0 -> 4 x 1.6 = 6.4 µm
    assert {g["grade"]: g["tolerance_um"] for g in data["grades"]}["0"] == pytest.approx(6.4)
    pdftoppm = shutil.which("pdftoppm")
    assert pdftoppm, "pdftoppm is not installed: install Debian's poppler-utils"
    subprocess.run([pdftoppm, "-png", "-r", "20", "-f", "1", "-l", "1", str(tmp_path / "r.pdf"), str(tmp_path / "p")],
                   check=True)
    assert list(tmp_path.glob("p-*.png"))


def test_report_human_summary(cli, plate_csv, tmp_path):
    code, out, err = cli("report", plate_csv, "-o", tmp_path / "r.pdf", "--units", "in")
    assert code == 0 and "r.pdf" in out and "pages" in out


@pytest.mark.parametrize(
    "args",
    [
        ("-o", "report.txt"),  # not a PDF name
        ("-o", "missing-folder/r.pdf"),
        ("-o", "r.pdf", "--png", "no-such-folder"),
        ("-o", "r.pdf", "--trials", "0"),
        ("-o", "r.pdf", "--standard", "no-such-standard"),
        ("-o", "r.pdf", "--pad", "80x40"),  # a pad without its gap
    ],
)
def test_bad_options_are_one_line_errors(cli, plate_csv, tmp_path, monkeypatch, args):
    monkeypatch.chdir(tmp_path)
    code, out, err = cli("report", plate_csv, *args)
    _one_line_error(code, err)
    assert not (tmp_path / "r.pdf").exists()


def test_missing_input_is_a_one_line_error(cli, tmp_path):
    code, out, err = cli("report", tmp_path / "nothing.csv", "-o", tmp_path / "r.pdf")
    _one_line_error(code, err)
