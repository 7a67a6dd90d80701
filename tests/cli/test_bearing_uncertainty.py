"""``flatcheck bearing`` decides its checks with U from the survey's budget (ISO 14253-1:2017 default rule)."""

import json
from pathlib import Path

import pytest

SAMPLES = Path(__file__).resolve().parents[2] / "sample_readings"
GUIDEWAY = SAMPLES / "guideway-KY-G1.toml"
PAD_MAP = SAMPLES / "pad-KY-B4-heights.csv"


def _iso(value, limit, u):
    # ISO 14253-1:2017 default rule (REFERENCE section 5; worked values section 10, item 24)
    if value + u <= limit:
        return "conforms"
    if value - u > limit:
        return "does-not-conform"
    return "undecided"


def test_survey_checks_carry_u_from_the_budget(cli):
    code, out, err = cli("bearing", GUIDEWAY, "--pad", "120x80", "--gap-um", "8", "--budget-straightness-um", "2.5",
                         "--trials", "4000", "--seed", "1", "--json")
    assert code == 0, err
    doc = json.loads(out)
    unc = doc["uncertainty"]
    assert unc["rule"] == "iso14253-1" and unc["seed"] == 1 and unc["budget_trials"] == 4000
    assert "uncertainty budget" in unc["source"] and unc["trials"] >= 200
    assert unc["surface_expanded_uncertainty_um"] > 0
    for c in doc["checks"]:
        assert c["rule"] == "iso14253-1" and c["expanded_uncertainty"] > 0
        assert c["decision"] == _iso(c["value"], c["limit"], c["expanded_uncertainty"])
        # does not conform -> unfit, undecided -> marginal, conforms -> fit below marginal_from (docs/methods.md)
        expected = {"does-not-conform": "unfit", "undecided": "marginal"}.get(
            c["decision"], "marginal" if c["ratio"] >= doc["marginal_from"] else "fit")
        assert c["status"] == expected
    local = next(c for c in doc["checks"] if c["name"] == "local flatness under pads")
    # a thermal bow dominates the whole guideway's U but hardly touches a 120 mm footprint (docs/methods.md)
    assert local["expanded_uncertainty"] < 0.25 * unc["surface_expanded_uncertainty_um"]


def test_summary_states_u_and_the_rule(cli):
    code, out, err = cli("bearing", GUIDEWAY, "--pad", "120x80", "--gap-um", "8", "--trials", "2000", "--seed", "2")
    assert code == 0, err
    assert "U (95 %)" in out and "decision" in out
    assert "ISO 14253-1" in out and "uncertainty budget" in out


def test_height_map_without_u_says_simple_acceptance(cli):
    code, out, err = cli("bearing", PAD_MAP, "--pad", "d20", "--gap-um", "5", "--json")
    assert code == 0, err
    doc = json.loads(out)
    assert doc["uncertainty"]["rule"] == "simple-acceptance" and doc["uncertainty"]["trials"] == 0
    assert all(c["rule"] == "simple-acceptance" and c["expanded_uncertainty"] is None for c in doc["checks"])
    assert any("--u-height-um" in n for n in doc["notes"])


def test_height_map_with_u_height_gets_a_budget(cli):
    code, out, err = cli("bearing", PAD_MAP, "--pad", "d20", "--gap-um", "5", "--u-height-um", "0.01",
                         "--trials", "2000", "--seed", "4", "--json")
    assert code == 0, err
    doc = json.loads(out)
    assert doc["uncertainty"]["rule"] == "iso14253-1"
    assert all(c["expanded_uncertainty"] > 0 for c in doc["checks"])


def test_no_uncertainty_gives_simple_acceptance(cli):
    code, out, err = cli("bearing", GUIDEWAY, "--pad", "120x80", "--gap-um", "8", "--no-uncertainty", "--json")
    assert code == 0, err
    doc = json.loads(out)
    assert doc["uncertainty"]["rule"] == "simple-acceptance"
    assert any("--no-uncertainty" in n for n in doc["notes"])


@pytest.mark.parametrize("args, where", [
    (("--seed", "-1"), "--seed"),
    (("--trials", "50"), "--trials"),
    (("--u-height-um", "-1"), "--u-height-um"),
    (("--uncertainty-defaults", "/nonexistent/lab.toml"), "lab.toml"),
])
def test_bad_uncertainty_options_are_one_line_errors(cli, args, where):
    code, out, err = cli("bearing", GUIDEWAY, "--pad", "120x80", "--gap-um", "8", *args)
    assert code == 2
    assert err.count("\n") == 1 and "Traceback" not in err and where in err
