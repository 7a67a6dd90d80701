"""``flatcheck lap`` and ``compare`` aim a limit to prove below it by U from the budget (ISO 14253-1)."""

import json
from pathlib import Path

import pytest

SAMPLES = Path(__file__).resolve().parents[2] / "sample_readings"
GUIDEWAY = SAMPLES / "guideway-KY-G1.toml"
PLATE = SAMPLES / "plate-KY-P3-2024-03-11.toml"
AFTER = SAMPLES / "plate-KY-P3-after-lap-1.toml"
PAD_MAP = SAMPLES / "pad-KY-B4-heights.csv"


def _json(cli, *args):
    code, out, err = cli(*args, "--json")
    assert code == 0, err
    return json.loads(out)


def test_gap_target_is_guard_banded_by_the_budgets_u(cli):
    lap = _json(cli, "lap", GUIDEWAY, "--target-gap-um", "8", "--lap-diameter-mm", "80", "--trials", "3000",
                "--seed", "5")
    # 0.25 x 8 µm (common practice, no single source; REFERENCE section 6) is the limit
    assert lap["target_kind"] == "gap" and lap["target_limit_um"] == pytest.approx(2.0)
    # the guard band is the same U that 'grade' states for this survey (same budget, trials and seed)
    grade = _json(cli, "grade", GUIDEWAY, "--tolerance-um", "2", "--trials", "3000", "--seed", "5")
    assert lap["guard_band_um"] == pytest.approx(grade["expanded_uncertainty_um"], rel=1e-12)
    # ISO 14253-1: the plan aims at the acceptance limit T - U
    assert lap["target_um"] == pytest.approx(2.0 - lap["guard_band_um"], rel=1e-12)
    assert lap["guard_band_proves_limit"] and "next survey" in lap["guard_band_source"]


def test_a_number_stays_as_given_unless_asked(cli):
    plain = _json(cli, "lap", PLATE, "--target-um", "2", "--lap-diameter-mm", "150")
    assert plain["target_um"] == 2.0 and plain["guard_band_um"] == 0 and not plain["guard_band_proves_limit"]
    banded = _json(cli, "lap", PLATE, "--target-um", "2", "--lap-diameter-mm", "150", "--guard-band", "0.4")
    assert banded["target_um"] == pytest.approx(1.6)  # 2 - 0.4 (ISO 14253-1 acceptance limit)
    assert banded["guard_band_source"] == "stated with --guard-band 0.4"


def test_summary_prints_the_guard_band_and_its_source(cli):
    code, out, err = cli("lap", PLATE, "--target-grade", "din-876:00", "--lap-diameter-mm", "150", "--trials", "2000",
                         "--seed", "1")
    assert code == 0, err
    assert "guard band" in out and "uncertainty budget" in out


def test_height_map_without_u_aims_at_the_limit_and_says_so(cli):
    doc = _json(cli, "lap", PAD_MAP, "--target-gap-um", "2", "--lap-diameter-mm", "20")
    assert doc["target_um"] == doc["target_limit_um"] == pytest.approx(0.5)
    assert doc["guard_band_um"] == 0 and "--u-height-um" in doc["guard_band_source"]


@pytest.mark.parametrize("args, where", [
    (("--target-um", "2", "--guard-band", "lots"), "--guard-band"),
    (("--target-um", "0.2", "--guard-band", "budget", "--trials", "1000", "--seed", "1"), "--guard-band"),
    (("--target-um", "2", "--guard-band", "-1"), "--guard-band"),
])
def test_bad_guard_bands_are_one_line_errors(cli, args, where):
    code, out, err = cli("lap", PLATE, "--lap-diameter-mm", "150", *args)
    assert code == 2 and err.count("\n") == 1 and where in err and "Traceback" not in err


def test_compare_decides_a_limit_with_the_after_surveys_u(cli):
    doc = _json(cli, "compare", PLATE, AFTER, "--dwell-min", "40", "--target-um", "1.8", "--guard-band", "budget",
                "--lap-diameter-mm", "150", "--trials", "3000", "--seed", "2")
    F, T, U = doc["flatness_after_um"], doc["target_limit_um"], doc["guard_band_um"]
    # ISO 14253-1:2017 default rule (REFERENCE section 5)
    expected = "conforms" if F + U <= T else "does-not-conform" if F - U > T else "undecided"
    assert doc["target_decision"] == expected
    assert doc["target_um"] == pytest.approx(T - U) and not doc["target_met_within_uncertainty"]
    assert (doc["sessions_to_target"] == 0) == (expected == "conforms")


def test_compare_number_target_keeps_the_within_u_rule(cli):
    # issue 15 item 13: a target given as a number is not guard-banded; a remaining gain inside the after
    # survey's U still reads "met within the uncertainty"
    doc = _json(cli, "compare", PLATE, AFTER, "--dwell-min", "40", "--target-um", "1.5", "--lap-diameter-mm", "150")
    assert doc["guard_band_um"] == 0 and doc["target_decision"] is None
    assert doc["target_met_within_uncertainty"] == (doc["flatness_after_um"] - 1.5 <= doc["u_after_um"])
