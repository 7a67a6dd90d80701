"""``flatcheck demo``: the bundled sample, the printed summary and the report it leaves behind."""

from pathlib import Path

import numpy as np
import pytest

from flatcheck import open_surface as load_input
from flatcheck.cli.demo_cmd import DEMO_FILES, DEMO_SEED, DEMO_STANDARD, DEMO_TRIALS, sample_path
from flatcheck.evaluation import survey_uncertainty
from flatcheck.io import read_survey
from flatcheck.survey import reduce_survey


def test_demo_prints_the_results_and_writes_its_report(cli, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "flatcheck-demo").mkdir()
    mine = tmp_path / "flatcheck-demo" / "notes.txt"
    mine.write_text("user's own file")
    (tmp_path / "flatcheck-demo" / DEMO_FILES[0]).write_bytes(b"earlier demo")
    code, out, err = cli("demo")
    assert code == 0 and "Traceback" not in err
    pdf = tmp_path / "flatcheck-demo" / DEMO_FILES[0]
    assert pdf.read_bytes()[:5] == b"%PDF-" and str(pdf.resolve()) in out.replace("\n", "")
    # the demo prints what `flatcheck reduce` prints for the same input, seed and trials, line for line
    copy = Path("flatcheck-demo") / DEMO_FILES[1]
    code, reduced, err = cli("reduce", copy, "--uncertainty", "--seed", str(DEMO_SEED), "--trials", str(DEMO_TRIALS))
    assert code == 0, err
    assert reduced.strip() and reduced.strip() in out
    # then the grade, as `flatcheck grade` states it with the same uncertainty
    code, graded, err = cli("grade", copy, "--standard", DEMO_STANDARD, "--uncertainty-um",
                            f"{_expanded_u(copy):.17g}")
    assert code == 0, err
    table = graded[graded.index("┏"):graded.index("Rule:")]
    assert table in out and out.index(table) > out.index(reduced.strip())
    assert out.index("report ") > out.index(table)
    # reference: minimum zone of the reduced sample by a direct scipy LP (independent of flatcheck's solvers)
    from scipy.optimize import linprog

    hm = reduce_survey(read_survey(sample_path())).heightmap
    n = hm.n
    A = np.column_stack([np.ones(n), hm.x_mm, hm.y_mm])
    res = linprog([0, 0, 0, 1], A_ub=np.vstack([np.column_stack([A, np.zeros(n)]), np.column_stack([-A, -np.ones(n)])]),
                  b_ub=np.concatenate([hm.height_um, -hm.height_um]), bounds=[(None, None)] * 4, method="highs")
    assert f"flatness (minimum zone): {res.x[3]:.3f} µm" in out
    assert mine.read_text() == "user's own file"  # never touches other files
    assert "replaced" in out and DEMO_FILES[0] in out  # and says when it replaces its own


def _expanded_u(path):
    return survey_uncertainty(load_input(path), trials=DEMO_TRIALS, seed=DEMO_SEED).minimum_zone.expanded_um


def test_demo_refuses_a_file_as_folder(cli, tmp_path):
    f = tmp_path / "file"
    f.write_text("x")
    code, out, err = cli("demo", "--out", f)
    assert code == 2 and err.count("\n") == 1 and "Traceback" not in err
    assert f.read_text() == "x"


def test_bundled_sample_is_the_repository_sample():
    from pathlib import Path

    repo = Path(__file__).resolve().parents[2] / "sample_readings" / sample_path().name
    if repo.exists():  # in a source checkout the package copy must not drift from sample_readings/
        assert repo.read_bytes() == sample_path().read_bytes()
    else:
        pytest.fail(f"{repo} is missing from the source tree")


def test_demo_folder_that_cannot_be_created_is_a_one_line_error(cli, tmp_path):
    # a folder below a plain file cannot be created (was an internal error, exit 3)
    f = tmp_path / "file"
    f.write_text("keep")
    code, out, err = cli("demo", "--out", f / "sub")
    assert code == 2
    assert len(err.strip().splitlines()) == 1 and "Traceback" not in err
    assert err.startswith("flatcheck: error: --out: cannot create the folder")
    assert f.read_text() == "keep"
