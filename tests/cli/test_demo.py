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
    # an earlier demo's report (a PDF flatcheck made: the demo replaces only those without --force)
    (tmp_path / "flatcheck-demo" / DEMO_FILES[0]).write_bytes(b"%PDF-1.4 earlier demo /Creator (flatcheck)")
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
    # stated with its U: U to two significant digits, the value to the same place (JCGM 100 7.2.6)
    from flatcheck.units import format_with_uncertainty

    value_text, _ = format_with_uncertainty(res.x[3], _expanded_u(copy))
    assert f"flatness (minimum zone): {value_text}, U = " in out
    assert mine.read_text() == "user's own file"  # never touches other files
    assert "replaced" in out and DEMO_FILES[0] in out  # and says when it replaces its own
    # then the bundled guideway, with the verdict and reason 'flatcheck guideway' gives for the same files and mesh
    import json

    from flatcheck.cli.demo_cmd import DEMO_FILM_MESH, DEMO_FRINGE_OPTIONS, DEMO_FRINGES, DEMO_GUIDEWAY

    body, carriage = (sample_path(DEMO_GUIDEWAY[0], name) for name in DEMO_GUIDEWAY[1:])
    code, gw, err = cli("guideway", body, "--carriage", carriage, "--film-mesh", DEMO_FILM_MESH, "--json")
    assert code == 0, err
    gw = json.loads(gw)
    flat = " ".join(out.split())
    assert f"{gw['verdict'].upper()} — {gw['reason']}" in flat
    assert flat.index(gw["reason"]) > flat.index("report ")
    # and the pad face's photograph, with the minimum zone 'flatcheck fringes' states for it
    o = DEMO_FRINGE_OPTIONS
    code, fr, err = cli("fringes", sample_path(DEMO_FRINGES), "--wavelength-nm", o["wavelength_nm"], "--pixel-mm",
                        o["pixel_mm"], "--contact-edge", o["contact_edge"], "--json")
    assert code == 0, err
    mz = json.loads(fr)["flatness"]["minimum_zone_nm"]
    assert f"flatness {mz:.0f} nm = " in flat and flat.index(f"flatness {mz:.0f} nm") > flat.index(gw["reason"])


def _expanded_u(path):
    return survey_uncertainty(load_input(path), trials=DEMO_TRIALS, seed=DEMO_SEED).minimum_zone.expanded_um


def test_bundled_guideway_and_photograph_are_the_repository_samples():
    # the demo's copies in flatcheck/data/ must not drift from sample_readings/ (file for file, byte for byte)
    from flatcheck.cli.demo_cmd import DEMO_FRINGES, DEMO_GUIDEWAY

    repo = Path(__file__).resolve().parents[2] / "sample_readings"
    folder = repo / DEMO_GUIDEWAY[0]
    names = sorted(p.name for p in folder.iterdir() if p.is_file())
    assert {"body.toml", "carriage.toml"} <= set(names)
    for name in names:
        assert sample_path(DEMO_GUIDEWAY[0], name).read_bytes() == (folder / name).read_bytes(), name
    copies = sorted(p.name for p in sample_path(DEMO_GUIDEWAY[0], "body.toml").parent.iterdir() if p.is_file())
    assert copies == names  # nothing extra in the copy either
    assert sample_path(DEMO_FRINGES).read_bytes() == (repo / DEMO_FRINGES).read_bytes()


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
