"""``flatcheck grade``: pinned JSON contract, exit codes, one-line errors."""

import json

import numpy as np
import pytest

PINNED = {"standard", "length_used_mm", "flatness_um", "expanded_uncertainty_um", "grades"}
VERDICTS = {"conforms", "does-not-conform", "undecided"}


def _write_map(path, z_fn, size=(1000.0, 630.0), step=(100.0, 90.0)):
    x, y = np.meshgrid(np.arange(0, size[0] + 1e-9, step[0]), np.arange(0, size[1] + 1e-9, step[1]))
    x, y = x.ravel(), y.ravel()
    z = z_fn(x, y)
    lines = ["x_mm,y_mm,height_um"] + [f"{a:g},{b:g},{c:.6f}" for a, b, c in zip(x, y, z)]
    path.write_text("\n".join(lines) + "\n")
    return path


@pytest.fixture
def dome(tmp_path):
    # A dome of 3 µm peak on a tilted 1000 x 630 mm plate (points at the corners, so extent = plate).
    # Minimum zone of z = 3 sin(pi x/L) sin(pi y/W) on this grid: corners 0, peak 3 -> F = 3 µm
    # (the tilt is removed by the zone; analytic, the peak node (500, 315) is on the grid).
    return _write_map(
        tmp_path / "dome.csv",
        lambda x, y: 3.0 * np.sin(np.pi * x / 1000) * np.sin(np.pi * y / 630) + 0.002 * x - 0.001 * y,
        step=(100.0, 105.0),
    )


def _json(cli, *args):
    code, out, err = cli(*args, "--json")
    assert code == 0, err
    return json.loads(out)


def test_pinned_contract(cli, dome):
    for std in ("din-876", "iso-8512-2", "asme-b89.3.7"):
        obj = _json(cli, "grade", dome, "--standard", std)
        assert PINNED <= set(obj)
        assert obj["standard"] == std
        assert obj["expanded_uncertainty_um"] is None
        assert obj["flatness_um"] == pytest.approx(3.0, abs=1e-6)
        assert obj["grades"] and all({"grade", "tolerance_um", "verdict"} <= set(g) for g in obj["grades"])
        assert all(g["verdict"] in VERDICTS for g in obj["grades"])


def test_din_values_and_verdicts(cli, dome):
    # DIN 876 with L = longer side, 1000 x 630 mm: 00 = 4, 0 = 8 µm (REFERENCE.md section 10 item 14, 4.4).
    # F = 3 µm, U = 1.5 µm: grade 00 -> 3 <= 4 + 1.5 but > 4 - 1.5 -> undecided (ISO 14253-1, item 24 rule);
    # grade 0 -> 3 <= 8 - 1.5 -> conforms.
    obj = _json(cli, "grade", dome, "--standard", "din-876", "--uncertainty-um", "1.5")
    g = {x["grade"]: x for x in obj["grades"]}
    assert obj["length_used_mm"] == pytest.approx(1000.0)
    assert g["00"]["tolerance_um"] == pytest.approx(4.0) and g["0"]["tolerance_um"] == pytest.approx(8.0)
    assert g["00"]["verdict"] == "undecided" and g["0"]["verdict"] == "conforms"
    assert obj["rule"] == "iso14253-1" and obj["expanded_uncertainty_um"] == 1.5
    assert obj["best_grade"] == "0"


def test_asme_diagonal_and_uin(cli, dome):
    # ASME AA for 1000 x 630 mm: 3.2158 µm (REFERENCE.md section 10 item 13), D = 1181.91 mm.
    obj = _json(cli, "grade", dome, "--standard", "asme", "--units", "in")
    assert obj["standard"] == "asme-b89.3.7"
    assert obj["length_used_mm"] == pytest.approx(1181.905, abs=1e-3)
    aa = obj["grades"][0]
    assert aa["grade"] == "AA" and aa["tolerance_um"] == pytest.approx(3.2158, abs=5e-5)
    # µin beside µm: 1 µin = 0.0254 µm exactly
    assert aa["tolerance_uin"] == pytest.approx(aa["tolerance_um"] / 0.0254)
    assert obj["flatness_uin"] == pytest.approx(3.0 / 0.0254, rel=1e-6)
    assert aa["verdict"] == "conforms"  # 3.0 <= 3.2158, simple acceptance fallback (no U)
    assert obj["rule"] == "simple-acceptance" and obj["rule_requested"] == "iso14253-1"
    assert any("uncertainty unknown" in n for n in obj["notes"])


def test_unknown_uncertainty_is_said_in_human_output(cli, dome):
    code, out, err = cli("grade", dome, "--standard", "din-876")
    assert code == 0 and err == ""
    assert "uncertainty" in out and "unknown" in out and "simple acceptance" in out
    assert "Length used: 1000.0 mm (longer side)" in out
    # grade 00's coefficient is recalled, not verified: said once after the table, not beside the limit
    # (issue 15, item 10)
    assert "grade 00 recalled" in out and "from memory" not in out


def test_simple_rule_explicit(cli, dome):
    obj = _json(cli, "grade", dome, "-s", "din-876", "--rule", "simple", "--uncertainty-um", "1.5")
    assert obj["rule"] == obj["rule_requested"] == "simple-acceptance"
    assert obj["grades"][0]["verdict"] == "conforms"  # 3 <= 4


def test_length_basis_and_size_override(cli, dome):
    # DIN grade 00 on the diagonal of 1000 x 630: 2 (1 + 1.18191) = 4.3638 µm (REFERENCE.md 4.4: 4.36).
    obj = _json(cli, "grade", dome, "-s", "din-876", "--grade", "00", "--length-basis", "diagonal")
    assert obj["length_basis"] == "diagonal"
    assert obj["grades"][0]["tolerance_um"] == pytest.approx(4.3638, abs=1e-4)
    obj = _json(cli, "grade", dome, "-s", "din-876", "--grade", "0", "--length-mm", "1200", "--width-mm", "800")
    # DIN grade 0, 1200 x 800 -> 8.80 µm (REFERENCE.md section 10 item 14)
    assert obj["size_source"] == "option" and obj["grades"][0]["tolerance_um"] == pytest.approx(8.8)


def test_table_basis(cli, dome):
    # ISO 8512-2 1000 x 630 grade 1 from the published table (secondary): 12 µm.
    obj = _json(cli, "grade", dome, "-s", "iso-8512-2", "--grade", "1", "--basis", "table")
    assert obj["grades"][0]["tolerance_um"] == 12.0 and obj["basis"] == "table"


def test_custom_tolerance(cli, dome):
    obj = _json(cli, "grade", dome, "--tolerance-um", "2.95", "--uncertainty-um", "0.1")
    assert obj["standard"] == "custom" and obj["length_used_mm"] is None
    # F = 3.0 lies between T - U = 2.85 and T + U = 3.05 -> undecided (ISO 14253-1, REFERENCE.md section 5)
    assert len(obj["grades"]) == 1 and obj["grades"][0]["verdict"] == "undecided"
    obj = _json(cli, "grade", dome, "--tolerance-um", "2.8", "--uncertainty-um", "0.1")
    assert obj["grades"][0]["verdict"] == "does-not-conform"  # 3.0 > 2.9
    obj = _json(cli, "grade", dome, "--tolerance-uin", "1000")  # 25.4 µm
    assert obj["grades"][0]["tolerance_um"] == pytest.approx(25.4)


def test_fail_on_reject(cli, dome):
    code, out, err = cli("grade", dome, "--tolerance-um", "2.0", "--uncertainty-um", "0.2")
    assert code == 0  # a reject is still a job done
    code, out, err = cli("grade", dome, "--tolerance-um", "2.0", "--uncertainty-um", "0.2", "--fail-on-reject")
    assert code == 1
    # the plate meets some DIN grade: no reject without --grade
    code, *_ = cli("grade", dome, "-s", "din-876", "--fail-on-reject")
    assert code == 0
    code, *_ = cli("grade", dome, "-s", "asme", "--grade", "AA", "--uncertainty-um", "0.1", "--fail-on-reject")
    assert code == 0  # 3.0 <= 3.2158 - 0.1 conforms
    code, *_ = cli("grade", dome, "-s", "din-876", "--grade", "00", "--tolerance-um", "1", "--fail-on-reject")
    assert code == 1


def test_repeat_reading_option(cli, tmp_path):
    flat = _write_map(tmp_path / "flat.csv", lambda x, y: 0.001 * x, size=(300.0, 300.0), step=(10.0, 10.0))
    obj = _json(cli, "grade", flat, "-s", "asme", "--repeat-radius-mm", "50", "--repeat-tolerance-um", "0.5")
    rr = obj["repeat_reading"]
    assert rr["variation_um"] == pytest.approx(0.0, abs=1e-6) and rr["verdict"] == "conforms"


@pytest.mark.parametrize(
    "args, fragment",
    [
        (("--standard", "jis-b-7513"), "unknown standard"),
        (("--standard", "din-876", "--grade", "AA"), "no grade 'AA'"),
        (("--standard", "asme", "--grade", "0"), "no grade '0'"),
        (("--standard", "asme", "--length-basis", "side"), "diagonal"),
        (("--standard", "asme", "--basis", "table"), "not a tabulated size"),
        (("--standard", "din-876", "--basis", "table"), "no table"),
        (("--standard", "din-876", "--rule", "lenient"), "lenient"),
        (("--standard", "din-876", "--uncertainty-um", "-1"), "uncertainty"),
        (("--standard", "din-876", "--length-mm", "1000"), "--width-mm"),
        (("--tolerance-um", "3", "--tolerance-uin", "100"), "only one"),
        ((), "no standard"),
        (("--standard", "din-876", "--repeat-radius-mm", "5"), "coarser"),
    ],
)
def test_bad_options_one_line(cli, dome, args, fragment):
    code, out, err = cli("grade", dome, *args)
    assert code == 2
    assert err.count("\n") == 1 and err.startswith("flatcheck: error:")
    assert fragment in err
    assert "Traceback" not in err and out == ""


def test_missing_file(cli, tmp_path):
    code, out, err = cli("grade", tmp_path / "none.csv", "-s", "din-876")
    assert code == 2 and "no such file" in err and err.count("\n") == 1


def test_survey_input_uses_surface_size(cli):
    # A survey file states its surface size; grading must use it (not the inset stations' extent).
    from pathlib import Path

    sample = Path(__file__).resolve().parents[2] / "sample_readings" / "plate-KY-P3-2024-03-11.toml"
    assert sample.exists(), "the bundled sample survey is part of the repository"
    obj = _json(cli, "grade", sample, "-s", "din-876", "--grade", "0")
    assert obj["size_source"] == "surface"
    # DIN 876 grade 0 uses the longer side: 4 (1 + L/1000) (REFERENCE.md 4.1)
    assert obj["grades"][0]["tolerance_um"] == pytest.approx(4 * (1 + obj["length_mm"] / 1000))
    assert obj["flatness_um"] > 0


def test_monte_carlo_uncertainty_matches_reduce(cli):
    # The grade's U is the one `flatcheck reduce --uncertainty` states for the same input and seed.
    from pathlib import Path

    plate = Path(__file__).resolve().parents[2] / "sample_readings" / "plate-KY-P3-2024-03-11.toml"
    mc = ("--uncertainty", "--trials", "3000", "--seed", "11")
    code, out, err = cli("grade", plate, "--standard", "din-876", "--json", *mc)
    assert code == 0, err
    g = json.loads(out)
    code, out, err = cli("reduce", plate, "--json", *mc)
    r = json.loads(out)["flatness"]
    assert g["expanded_uncertainty_um"] == pytest.approx(r["expanded_uncertainty_um"], rel=1e-12)
    assert g["flatness_um"] == pytest.approx(r["minimum_zone_um"], abs=1e-9)
    code, out, err = cli("grade", plate, "--standard", "din-876", "--uncertainty-um", "0.2", "--uncertainty")
    assert code == 2 and err.count("\n") == 1


@pytest.mark.parametrize(
    "args, where",
    [
        (["--tolerance-um", "nan"], "--tolerance-um"),
        (["--tolerance-uin", "0"], "--tolerance-uin"),
        (["--standard", "din-876", "--uncertainty-um", "-1"], "--uncertainty-um"),
        (["--standard", "din-876", "--uncertainty-uin", "nan"], "--uncertainty-uin"),
        (["--standard", "din-876", "--repeat-radius-mm", "-5"], "--repeat-radius-mm"),
        (["--standard", "din-876", "--repeat-radius-mm", "50", "--repeat-tolerance-um", "0"],
         "--repeat-tolerance-um"),
        (["--standard", "din-876", "--length-mm", "0", "--width-mm", "630"], "--length-mm"),
    ],
)
def test_bad_numbers_name_their_option(cli, dome, args, where):
    code, out, err = cli("grade", dome, *args)
    assert code == 2 and out == "" and "Traceback" not in err
    assert err.count("\n") == 1 and err.startswith(f"flatcheck: error: {where}: ")


def test_zero_uncertainty_is_accepted_and_decides_like_the_simple_rule(cli, dome):
    # ISO 14253-1 with U = 0: accept F <= T, reject F > T (the guard band vanishes)
    doc = _json(cli, "grade", dome, "--standard", "din-876", "--uncertainty-um", "0")
    for g in doc["grades"]:
        assert g["verdict"] == ("conforms" if doc["flatness_um"] <= g["tolerance_um"] else "does-not-conform")


def test_survey_gets_its_uncertainty_by_default_so_the_iso_rule_decides(cli):
    # ISO 14253-1:2017 (default rule): a verdict on a survey uses the expanded uncertainty from the flatness
    # engine without being asked; --no-uncertainty leaves it out and the rule falls back, saying so.
    from pathlib import Path

    plate = Path(__file__).resolve().parents[2] / "sample_readings" / "plate-KY-P3-2024-03-11.toml"
    seeded = ("--trials", "2000", "--seed", "5")
    auto = _json(cli, "grade", plate, "-s", "din-876", *seeded)
    asked = _json(cli, "grade", plate, "-s", "din-876", "--uncertainty", *seeded)
    assert auto["expanded_uncertainty_um"] is not None and auto["expanded_uncertainty_um"] > 0
    assert auto["expanded_uncertainty_um"] == pytest.approx(asked["expanded_uncertainty_um"], rel=1e-12)
    assert auto["rule"] == "iso14253-1"
    off = _json(cli, "grade", plate, "-s", "din-876", "--no-uncertainty")
    assert off["expanded_uncertainty_um"] is None and "--no-uncertainty" in off["uncertainty_note"]
    code, out, err = cli("grade", plate, "-s", "din-876", "--uncertainty", "--no-uncertainty")
    assert code == 2 and err.count("\n") == 1 and "--no-uncertainty" in err


def test_height_map_without_reading_uncertainty_says_why_there_is_no_u(cli, dome):
    obj = _json(cli, "grade", dome, "-s", "din-876")
    assert obj["expanded_uncertainty_um"] is None and "--u-height-um" in obj["uncertainty_note"]
    with_u = _json(cli, "grade", dome, "-s", "din-876", "--u-height-um", "0.05", "--trials", "2000", "--seed", "3")
    assert with_u["expanded_uncertainty_um"] > 0


def test_best_grade_of_a_plate_outside_the_range_is_called_indicative(cli, tmp_path):
    # 200 x 150 mm is below the smallest plate the federal spec considers (12 x 12 in; REFERENCE.md 4.3).
    small = _write_map(tmp_path / "small.csv", lambda x, y: 1e-4 * x, size=(200.0, 150.0), step=(50.0, 50.0))
    code, out, err = cli("grade", small, "-s", "asme-b89.3.7")
    assert code == 0, err
    line = next(ln for ln in out.splitlines() if ln.startswith("Finest grade"))
    assert "AA" in line and "outside" in " ".join(out.split())
    code, out, err = cli("grade", _write_map(tmp_path / "big.csv", lambda x, y: 1e-4 * x), "-s", "asme-b89.3.7")
    assert "indicative" not in out


def test_default_trials_shrink_for_large_surveys_but_not_below_ten_thousand(cli):
    # U is evaluated by default; a dense survey must not make that take minutes (about 8e6 station-trials),
    # while a plate survey of a few dozen stations keeps 100 000 trials.
    from flatcheck.evaluation import default_trials as default_auto_trials

    assert default_auto_trials(45) == 100_000
    assert default_auto_trials(228) == 40_000
    assert default_auto_trials(874) == 10_000 and default_auto_trials(40_000) == 10_000
    from pathlib import Path

    plate = Path(__file__).resolve().parents[2] / "sample_readings" / "plate-KY-P3-2024-03-11.toml"
    obj = _json(cli, "grade", plate, "-s", "din-876", "--seed", "2")
    assert "100000 trials" in obj["uncertainty_note"]
    obj = _json(cli, "grade", plate, "-s", "din-876", "--seed", "2", "--trials", "500")
    assert "500 trials" in obj["uncertainty_note"]
