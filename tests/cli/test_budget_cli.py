"""The uncertainty budget through the command line: reduce --uncertainty --json, grade --json, lab defaults.

Surveys are written in the documented format (docs/survey-format.md) from invented surfaces. References:
elementary thin-plate thermal bending (REFERENCE section 9, check value 19), the homogeneity of the minimum
zone under a common scale (JCGM 100 law of propagation with sensitivity F), JCGM 100 7.2.6 for the digits.
"""

import json
import math

import numpy as np
import pytest

from flatcheck.io import format_survey
from flatcheck.survey import Instrument, plan_union_jack, simulate_survey

TRIALS = ("--trials", "2000", "--seed", "3")


def crown(x, y):
    """Invented crowned plate, centred on the 1000 x 630 mm plate (µm)."""
    return 2e-5 * ((np.asarray(x, float) - 500) ** 2 + (np.asarray(y, float) - 315) ** 2)


def survey_text(noise=0.0, rng=1, instrument=Instrument("autocollimator", "arcsec")):
    plan = plan_union_jack(1000, 630, 100, margin_mm=30, instrument=instrument)
    return format_survey(simulate_survey(plan, crown, noise_sd=noise, rng=rng))


def with_uncertainty(text, instrument_keys="", uncertainty_keys="", surface_keys=""):
    """The survey text with keys added to [instrument], [uncertainty] and [surface] (docs/survey-format.md)."""
    if instrument_keys:
        text = text.replace("[instrument]\n", "[instrument]\n" + instrument_keys + "\n", 1)
    if surface_keys:
        text = text.replace("[surface]\n", "[surface]\n" + surface_keys + "\n", 1)
    if uncertainty_keys:
        text = text.replace("[layout]\n", "[uncertainty]\n" + uncertainty_keys + "\n\n[layout]\n", 1)
    return text


ZERO = ("temperature_difference_u_k = 0.0\nresolution = 0.0\nzero_drift = 0.0\nturbulence_per_m = 0.0\n"
        "sampling_um = 0.0")


def reduce_json(cli, path, *extra):
    code, out, err = cli("reduce", path, "--uncertainty", "--json", *TRIALS, *extra)
    assert code == 0, err
    return json.loads(out)["flatness"]


def row(flat, name):
    return next(r for r in flat["uncertainty_budget"] if r["name"] == name)


def test_scale_contribution_through_the_cli(cli, tmp_path):
    # minimum zone is positively homogeneous: a common scale error d gives F (1 + d), so the contribution is
    # F x scale_uncertainty_rel (JCGM 100 law of propagation, sensitivity F); the check: within 10 %
    p = tmp_path / "scale.toml"
    p.write_text(with_uncertainty(survey_text(), "reading_uncertainty = 0.0\nscale_uncertainty_rel = 0.01\n"
                                  "foot_spacing_uncertainty_mm = 0.0", ZERO), encoding="utf-8")
    flat = reduce_json(cli, p)
    assert row(flat, "scale")["standard_uncertainty_um"] == pytest.approx(flat["minimum_zone_um"] * 0.01, rel=0.05)
    assert row(flat, "scale")["default"] is False


def test_thermal_contribution_through_the_cli(cli, tmp_path):
    # curvature alpha dT / t; corner to centre of the stations' rectangle (diagonal D): alpha dT D^2 / (8 t)
    # (thin-plate thermal bending, REFERENCE section 9); the check: within 15 %
    p = tmp_path / "thermal.toml"
    p.write_text(with_uncertainty(survey_text(), "reading_uncertainty = 0.0\nscale_uncertainty_rel = 0.0",
                                  ZERO.replace("temperature_difference_u_k = 0.0", "temperature_difference_u_k = 0.3"),
                                  "thickness_mm = 120.0"), encoding="utf-8")
    code, out, err = cli("reduce", p, "--json")
    nodes = json.loads(out)["nodes"]
    xs, ys = [n["x_mm"] for n in nodes], [n["y_mm"] for n in nodes]
    D = math.hypot(max(xs) - min(xs), max(ys) - min(ys))
    bow = 6e-6 * 0.3 * D**2 / (8 * 120.0) * 1e3
    flat = reduce_json(cli, p)
    assert row(flat, "thermal-gradient")["standard_uncertainty_um"] == pytest.approx(bow, rel=0.08)


def test_budget_rows_and_u_in_grade(cli, tmp_path):
    p = tmp_path / "plate.toml"
    p.write_text(survey_text(noise=0.1, rng=2), encoding="utf-8")
    flat = reduce_json(cli, p)
    rows = flat["uncertainty_budget"]
    assert len({r["name"] for r in rows}) >= 6
    assert {"reading", "scale", "foot-spacing", "thermal-gradient"} <= {r["name"] for r in rows}
    for r in rows:
        assert set(r) >= {"name", "standard_uncertainty_um", "basis", "default"}
        assert isinstance(r["standard_uncertainty_um"], float) and isinstance(r["default"], bool)
    # a survey walked once with no statements: at least three sources from marked defaults
    assert sum(r["default"] for r in rows if r["applies"]) >= 3
    # near-normal output: U about twice the root sum of squares of the contributions (JCGM 100 6.2-6.3)
    rss = math.sqrt(sum(r["standard_uncertainty_um"] ** 2 for r in rows))
    assert flat["expanded_uncertainty_um"] == pytest.approx(2 * rss, rel=0.15)
    # grade uses that U (same trials and seed: the same number)
    code, out, err = cli("grade", p, "-s", "din-876", "--json", *TRIALS)
    assert code == 0, err
    assert json.loads(out)["expanded_uncertainty_um"] == pytest.approx(flat["expanded_uncertainty_um"], rel=1e-12)


def test_zero_scatter_does_not_prove_with_u_zero(cli, tmp_path):
    # issue 15 item 23: every reading 0, no stated reading uncertainty
    text = survey_text()
    lines = []
    for ln in text.splitlines():
        if ln.startswith("readings = ["):
            n = ln.count(",") + 1
            ln = "readings = [" + ", ".join(["0.0"] * n) + "]"
        lines.append(ln)
    p = tmp_path / "zeros.toml"
    p.write_text("\n".join(lines) + "\n", encoding="utf-8")
    code, out, err = cli("grade", p, "-s", "din-876", "--json", *TRIALS)
    assert code == 0, err
    doc = json.loads(out)
    assert doc["expanded_uncertainty_um"] > 0.0
    assert "default" in doc["uncertainty_note"]


@pytest.mark.parametrize("key, value, words", [
    ("reading_uncertainty", "1e300", "slip"),
    ("scale_uncertainty_rel", "5", "500 %"),
])
def test_implausible_inputs_are_refused(cli, tmp_path, key, value, words):
    # issue 15 item 22
    p = tmp_path / "bad.toml"
    p.write_text(survey_text().replace("[instrument]\n", f"[instrument]\n{key} = {value}\n", 1), encoding="utf-8")
    code, out, err = cli("reduce", p, "--uncertainty")
    assert code == 2 and out == ""
    assert err.count("\n") == 1 and "Traceback" not in err and words in err and key in err


def test_lab_defaults_by_option_and_environment(cli, tmp_path, monkeypatch):
    p = tmp_path / "plate.toml"
    p.write_text(survey_text(noise=0.1, rng=2), encoding="utf-8")
    lab = tmp_path / "lab.toml"
    lab.write_text('format = "flatcheck-uncertainty-defaults"\nversion = 1\n\n[all]\ntemperature_difference_u_k = 0.02\n'
                   '\n[autocollimator]\nunit = "arcsec"\nzero_drift = 0.2\n', encoding="utf-8")
    flat = reduce_json(cli, p, "--uncertainty-defaults", lab)
    assert row(flat, "zero-drift")["default"] and "lab.toml" in row(flat, "zero-drift")["basis"]
    assert row(flat, "thermal-gradient")["basis"].startswith("dT: lab default")
    monkeypatch.setenv("FLATCHECK_UNCERTAINTY_DEFAULTS", str(lab))
    flat2 = reduce_json(cli, p)
    assert row(flat2, "zero-drift")["basis"] == row(flat, "zero-drift")["basis"]
    bad = tmp_path / "bad.toml"
    bad.write_text('format = "flatcheck-uncertainty-defaults"\nversion = 1\n[level]\nunit = "um/m"\n'
                   'reading_uncertainty = 1e9\n', encoding="utf-8")
    code, out, err = cli("reduce", p, "--uncertainty", "--uncertainty-defaults", bad)
    assert code == 2 and "reading_uncertainty" in err and err.count("\n") == 1


def test_summary_states_u_to_two_digits_and_marks_defaults(cli, tmp_path):
    # JCGM 100 7.2.6: U to two significant digits, the value to the same decimal place
    p = tmp_path / "plate.toml"
    p.write_text(survey_text(noise=0.1, rng=2), encoding="utf-8")
    code, out, err = cli("reduce", p, "--uncertainty", *TRIALS)
    assert code == 0, err
    flat = reduce_json(cli, p)
    from flatcheck.units import format_with_uncertainty

    v, u = format_with_uncertainty(flat["minimum_zone_um"], flat["expanded_uncertainty_um"])
    assert f"{v}, U = {u}" in out
    assert "Uncertainty budget" in out and "DEFAULT" in out
