"""Tests of the uncertainty budget (flatcheck.evaluation._budget): each source against an outside reference.

References named beside each check: JCGM 100:2008 (GUM: law of propagation, rectangular distribution
a/sqrt(3), Type A pooled standard deviation), JCGM 101:2008 (Monte Carlo propagation), elementary
thin-plate thermal bending (Timoshenko & Woinowsky-Krieger; REFERENCE section 9 and its check value 19),
Efron & Tibshirani 1993 ch. 13 (reflected bootstrap interval), scipy's HiGHS LP and numpy as reference
implementations. Test surfaces are invented.
"""

import dataclasses
import math

import numpy as np
import pytest
from scipy.optimize import linprog

from flatcheck.errors import InputValueError
from flatcheck.evaluation import (
    LabDefaults,
    MeasuredSurface,
    SOURCE_NAMES,
    repeat_readings_summary,
    survey_uncertainty,
    uncertainty_budget,
)
from flatcheck.evaluation._budget_sources import KEYS
from flatcheck.form import HeightEffect, propagate_heights, summarise_flatness
from flatcheck.io import format_survey, parse_survey
from flatcheck.survey import Instrument, plan_grid, plan_union_jack, reduce_survey, simulate_survey

AC = Instrument("autocollimator", "arcsec")
LEVEL = Instrument("level", "um/m")


def crown(x, y):
    """Invented crowned plate: a paraboloid centred on the 1000 x 630 mm plate, 2e-5 µm/mm^2 (µm)."""
    return 2e-5 * ((np.asarray(x, float) - 500) ** 2 + (np.asarray(y, float) - 315) ** 2)


def lopsided(x, y):
    """Invented surface with no symmetric ties: an off-centre elongated dome with a bump (µm)."""
    x, y = np.asarray(x, float), np.asarray(y, float)
    return 3e-6 * ((x - 480) ** 2 + 1.3 * (y - 290) ** 2) + 0.3 * np.exp(-((x - 300) ** 2 + (y - 250) ** 2) / 1.6e4)


def loaded(survey):
    red = reduce_survey(survey)
    return MeasuredSurface("test.toml", red.heightmap, survey, red)


def stated_zero(s, **keep):
    """Every budget source stated as zero except those given (survey-file keys)."""
    meta = dict(s.meta)
    unc = {k: 0.0 for k in KEYS if k != "expansion_coefficient_per_k"}
    unc["expansion_coefficient_per_k"] = 6e-6
    inst = {"scale_uncertainty_rel": 0.0, "foot_spacing_uncertainty_mm": 0.0, "reading_uncertainty": 0.0}
    for k, v in keep.items():
        if k in inst:
            inst[k] = v
        elif k == "thickness_mm":
            meta["thickness_mm"] = v
        else:
            unc[k] = v
    meta["uncertainty"] = unc
    return dataclasses.replace(s, instrument=dataclasses.replace(s.instrument, **inst), meta=meta)


def uj(instrument=AC, **kw):
    return plan_union_jack(1000, 630, 100, margin_mm=30, instrument=instrument, **kw)


# ----------------------------------------------------------------------------- the pinned checks
def test_scale_contribution_is_flatness_times_relative_uncertainty():
    # A common scale error multiplies every height by (1 + d), so F* = F (1 + d) exactly (minimum zone is
    # positively homogeneous): the contribution is F x u_rel (JCGM 100 law of propagation, sensitivity F;
    # JCGM 101 gives the same for a linear model). The check allows 10 %; the Monte Carlo with
    # 10 000 trials is within 1.5 % (1/sqrt(2M) = 0.7 %).
    s = stated_zero(simulate_survey(uj(), crown), scale_uncertainty_rel=0.01)
    b = uncertainty_budget(loaded(s), trials=2000, seed=1, contribution_trials=10_000)
    F = b.minimum_zone.estimate_um
    assert b.entry("scale").standard_uncertainty_um == pytest.approx(F * 0.01, rel=0.03)
    assert not b.entry("scale").default and "stated" in b.entry("scale").basis


def test_thermal_contribution_is_the_elementary_bow_over_the_stations():
    # Free plate, temperature difference dT top to underside, linear through the thickness t: a sphere of
    # curvature alpha dT / t; corner to centre of a rectangle of diagonal D: alpha dT D^2 / (8 t)
    # (thin-plate thermal bending, Timoshenko & Woinowsky-Krieger; REFERENCE section 9). On a crowned plate
    # the minimum zone spans centre to corners, so its sensitivity to the bow is 1.
    s = simulate_survey(uj(), crown)
    s = stated_zero(s, temperature_difference_u_k=0.5, thickness_mm=150.0)
    b = uncertainty_budget(loaded(s), trials=2000, seed=2, contribution_trials=10_000)
    x, y = s.x_mm, s.y_mm
    D = math.hypot(np.ptp(x), np.ptp(y))
    bow = 6e-6 * 0.5 * D**2 / (8 * 150.0) * 1e3  # µm
    assert b.entry("thermal-gradient").standard_uncertainty_um == pytest.approx(bow, rel=0.05)  # issue: 15 %


def test_check_value_19_thermal_bow():
    # REFERENCE check value 19: alpha 6e-6/K, dT 0.5 K, t 150 mm, 1000 x 630 mm corner to centre -> 3.492 µm.
    # Stations on the corners and centre of a 1000 x 630 rectangle, a crown much larger than the bow.
    X, Y = np.meshgrid(np.linspace(0, 1000, 5), np.linspace(0, 630, 5))
    x, y = X.ravel(), Y.ravel()
    z = 4 * crown(x, y)
    shape = 6e-6 * ((x - 500) ** 2 + (y - 315) ** 2) / (2 * 150.0) * 1e3  # µm per K
    r = propagate_heights(x, y, z, [HeightEffect("thermal", np.array([0.5]), shape[None, :])], trials=20_000,
                          seed=3)
    assert r.mz_um.std(ddof=1) == pytest.approx(3.492, rel=0.02)


def test_a_budget_names_at_least_six_sources_with_numbers_and_a_basis():
    s = simulate_survey(uj(), crown, noise_sd=0.1, rng=4)
    u = survey_uncertainty(loaded(s), trials=500, seed=1, contribution_trials=300)
    rows = u.budget.to_list()
    names = [r["name"] for r in rows]
    assert len(set(names)) >= 6 and set(SOURCE_NAMES) == set(names)
    assert {"reading", "scale", "foot-spacing", "thermal-gradient"} <= set(names)  # pinned names
    for r in rows:
        assert isinstance(r["standard_uncertainty_um"], float) and math.isfinite(r["standard_uncertainty_um"])
        assert r["standard_uncertainty_um"] >= 0 and isinstance(r["default"], bool) and r["basis"]
    # JCGM 100 5.1.2: for uncorrelated inputs and a near-linear model the contributions add in quadrature
    # (here a crowned plate far above the noise); the Monte Carlo combined u within 10 % of their RSS
    assert u.budget.combined_um == pytest.approx(u.budget.rss_um, rel=0.10)
    # U of the whole budget: near-normal output, about 2 u (JCGM 100 6.2-6.3)
    assert u.minimum_zone.expanded_um == pytest.approx(2 * u.budget.combined_um, rel=0.10)


def test_a_bare_survey_walked_once_gets_marked_defaults():
    # no uncertainty statements at all; one run per line: redundancy 2 (< 3), so the reading repeatability
    # is a default too (no refusal)
    s = simulate_survey(uj(), crown, noise_sd=0.1, rng=5)
    ld = loaded(s)
    assert ld.reduction.redundancy < 3
    b = uncertainty_budget(ld, trials=500, seed=1, contribution_trials=300)
    assert len(b.defaults) >= 3
    assert {"reading", "scale", "foot-spacing", "thermal-gradient"} <= set(b.defaults)
    for name in b.defaults:
        assert "default" in b.entry(name).basis or "model" in b.entry(name).basis
    assert b.expanded_um > 0


def test_zero_scatter_is_not_zero_uncertainty():
    # issue 15 item 23: every reading 0 and no stated reading uncertainty: sigma0 = 0 exactly. A scatter of
    # exactly zero is no evidence of zero uncertainty: the default is used and said, and U > 0.
    p = plan_grid(1000, 630, 100, margin_mm=50, instrument=LEVEL)
    s = simulate_survey(p, lambda x, y: 0.0 * x)
    ld = loaded(s)
    assert ld.reduction.redundancy >= 3 and ld.reduction.sigma0_um == 0.0
    u = survey_uncertainty(ld, trials=500, seed=1, contribution_trials=200)
    assert u.budget.entry("reading").default
    assert any("scatter of exactly zero" in n or "no scatter at all" in n for n in u.notes)
    assert u.minimum_zone.expanded_um > 0.05  # default 0.2 µm/m over 100 mm steps: far from zero
    lo, hi = u.minimum_zone.corrected_interval_um
    assert lo >= 0 and hi > 0  # a flatness is never negative


def test_implausible_inputs_are_refused_with_the_reason():
    # issue 15 item 22: reading_uncertainty = 1e300 and scale_uncertainty_rel = 5 (500 %)
    text = format_survey(simulate_survey(uj(), crown))
    for old, new, words in [
        ("[instrument]\n", "[instrument]\nreading_uncertainty = 1e300\n", ("reading_uncertainty", "slip")),
        ("[instrument]\n", "[instrument]\nscale_uncertainty_rel = 5\n", ("500 %", "not a calibrated")),
        ("[layout]\n", "[uncertainty]\ntemperature_difference_u_k = 1e9\n\n[layout]\n", ("temperature", "10 K")),
        ("[layout]\n", "[uncertainty]\nexpansion_coefficient_per_k = 0.5\n\n[layout]\n", ("expansion", "5e-05")),
    ]:
        with pytest.raises(InputValueError) as exc:
            parse_survey(text.replace(old, new, 1), source="x.toml")
        msg = str(exc.value)
        assert all(w in msg for w in words), msg
        assert "x.toml, line" in msg


# ----------------------------------------------------------------------------- each source
def test_reading_contribution_matches_gum_propagation_in_the_linear_regime():
    # Noise far below the gaps between contact candidates: the minimum zone is linear in the heights,
    # t = sum c_i h_i, and heights = G r, so JCGM 100 gives u = u_r |(G * sens)^T c|. Sensitivities c from
    # finite differences of scipy's HiGHS LP (independent of flatcheck's solver). A surface without
    # symmetric ties, so that the contacts do not change under the noise.
    s = simulate_survey(uj(), lopsided)
    ld = loaded(stated_zero(s, reading_uncertainty=0.001))
    b = uncertainty_budget(ld, trials=500, seed=3, contribution_trials=20_000)
    red = ld.reduction
    from flatcheck.survey import observations

    obs = observations(ld.survey)
    order = np.array([ld.survey.station_index[n] for n in red.operator.station_names])
    x, y = ld.survey.x_mm[order], ld.survey.y_mm[order]
    h = red.operator.G @ obs.value_um

    def lp(z):
        n = z.size
        A = np.column_stack([np.ones(n), x - x.mean(), y - y.mean()])
        A_ub = np.vstack([np.column_stack([A, np.zeros(n)]), np.column_stack([-A, -np.ones(n)])])
        return linprog([0, 0, 0, 1], A_ub=A_ub, b_ub=np.concatenate([z, -z]), bounds=[(None, None)] * 4,
                       method="highs", options={"primal_feasibility_tolerance": 1e-10}).x[3]

    t0 = lp(h)
    c = np.array([(lp(h + 1e-3 * np.eye(h.size)[i]) - t0) / 1e-3 for i in range(h.size)])
    u_gum = 0.001 * np.linalg.norm((red.operator.G * obs.um_per_unit).T @ c)
    assert b.entry("reading").standard_uncertainty_um == pytest.approx(u_gum, rel=0.03)


def test_resolution_is_rectangular_with_standard_uncertainty_d_over_sqrt12():
    # JCGM 100:2008 4.3.7: a rectangular distribution of half-width a has u = a / sqrt(3); REFERENCE check
    # value 25: half-width 0.05 µm -> 0.028868 µm. Drawn on one corner of a square of four points, the zone
    # is |q| / 2 (a twist q x y over the unit square: its vertical minimum zone is q / 2 at the corners), so
    # its RMS is u / 2 and it never exceeds a / 2.
    x, y = np.array([0.0, 1.0, 0.0, 1.0]), np.array([0.0, 0.0, 1.0, 1.0])
    r = propagate_heights(x, y, np.zeros(4), [HeightEffect("res", np.array([0.05 / math.sqrt(3)]),
                                                           np.array([[0.0, 0.0, 0.0, 1.0]]), "rectangular")],
                          trials=40_000, seed=1)
    assert 2 * math.sqrt(np.mean(r.mz_um**2)) == pytest.approx(0.028868, rel=0.01)
    assert r.mz_um.max() <= 0.025 + 1e-12 and r.mz_um.max() > 0.0245


def test_foot_spacing_of_one_base_acts_like_a_scale_error():
    # A grid read with one base: every rise is base x slope, so a base error d is a relative error d/B of
    # every rise (the reading model of REFERENCE section 1): contribution F x u_B / B (as for the scale).
    p = plan_grid(1000, 630, 100, margin_mm=50, instrument=LEVEL)
    s = stated_zero(simulate_survey(p, crown), foot_spacing_uncertainty_mm=0.5)
    b = uncertainty_budget(loaded(s), trials=500, seed=2, contribution_trials=10_000)
    assert b.entry("foot-spacing").standard_uncertainty_um == pytest.approx(b.minimum_zone.estimate_um * 0.005,
                                                                            rel=0.03)


def test_zero_drift_and_turbulence_scale_linearly_with_their_inputs():
    # Both enter the heights linearly; in the linear regime (crowned plate, small errors) the contribution
    # is proportional to the input standard uncertainty (JCGM 100 5.1.3, sensitivity x u).
    s = simulate_survey(uj(), crown)
    one = uncertainty_budget(loaded(stated_zero(s, zero_drift=0.05, turbulence_per_m=0.05, reading_uncertainty=0.0)),
                             trials=300, seed=5, contribution_trials=10_000)
    two = uncertainty_budget(loaded(stated_zero(s, zero_drift=0.10, turbulence_per_m=0.10, reading_uncertainty=0.0)),
                             trials=300, seed=5, contribution_trials=10_000)
    for name in ("zero-drift", "turbulence"):
        a, b = one.entry(name).standard_uncertainty_um, two.entry(name).standard_uncertainty_um
        assert a > 0 and b == pytest.approx(2 * a, rel=0.03)
    assert one.entry("reference-level").applies is False  # an autocollimator has no reference level


def test_sampling_model_sees_the_curvature_between_stations():
    # A paraboloid k r^2 has the same second difference k s^2 ... along a line of spacing s (exact for a
    # quadratic): mid-span departure from the chord k s^2 / 4 / ... = |h(i-1) - 2 h(i) + h(i+1)| / 8.
    # With no reading noise the model's half-width is the RMS of that over the lines' station triples.
    p = plan_grid(1000, 630, 100, margin_mm=50, instrument=LEVEL)
    s = stated_zero(simulate_survey(p, crown))
    meta = dict(s.meta)
    del meta["uncertainty"]["sampling_um"]
    s = dataclasses.replace(s, meta=meta)
    b = uncertainty_budget(loaded(s), trials=300, seed=1, contribution_trials=300)
    # grid rows and columns at 100 mm: second difference of 2e-5 (x^2 + y^2) is 2e-5 x 2 x 100^2 = 0.4 µm
    assert b.entry("sampling").value == pytest.approx(0.4 / 8, rel=1e-6)
    assert b.entry("sampling").default and "model" in b.entry("sampling").basis


def test_lab_defaults_override_the_built_in_ones_and_stay_marked():
    s = simulate_survey(uj(), crown, noise_sd=0.1, rng=5)
    lab = LabDefaults("lab.toml", common={"temperature_difference_u_k": 0.05},
                      by_kind={"autocollimator": {"unit": "urad", "reading_uncertainty": 0.5, "zero_drift": 0.1}})
    b = uncertainty_budget(loaded(s), trials=300, seed=1, contribution_trials=200, lab_defaults=lab)
    assert b.entry("reading").value == pytest.approx(0.5 / 4.848136811, rel=1e-6)  # µrad -> arcsec (REFERENCE 1)
    assert b.entry("reading").default and "lab.toml" in b.entry("reading").basis
    assert b.entry("thermal-gradient").value == 0.05 and "lab.toml" in b.entry("thermal-gradient").basis


def test_repeat_readings_pool_and_judge():
    # JCGM 100:2008 4.2 (Type A) with series pooled: s^2 = sum (x - mean_i)^2 / sum (n_i - 1); numpy reference.
    series = ((1.0, 1.2, 0.9, 1.1), (3.0, 3.3, 3.1))
    rr = repeat_readings_summary({"kind": "instrument", "series": series, "tolerance": 0.25}, kind="level",
                                 unit="um/m")
    ss = sum(np.var(a, ddof=0) * len(a) for a in series)
    assert rr.dof == 5 and rr.s == pytest.approx(math.sqrt(ss / 5)) and rr.used
    assert rr.range_ == pytest.approx(0.3) and rr.verdict == "does-not-conform"
    g = repeat_readings_summary({"kind": "gauge", "unit": "um", "series": series, "tolerance": 0.5},
                                kind="autocollimator", unit="arcsec")
    assert not g.used and g.verdict == "conforms"  # heights cannot state an angle instrument's repeatability


def test_repeat_readings_become_the_reading_source_when_the_residuals_cannot():
    s = simulate_survey(uj(), crown, noise_sd=0.1, rng=6)  # redundancy 2: no scatter estimate
    text = format_survey(s).replace("[layout]\n", "[repeat_readings]\nreadings = [[1.0, 1.2, 0.9, 1.1], "
                                    "[3.0, 3.3, 3.1]]\n\n[layout]\n", 1)
    sv = parse_survey(text, source="r.toml")
    b = uncertainty_budget(loaded(sv), trials=300, seed=1, contribution_trials=200)
    e = b.entry("reading")
    assert not e.default and "repeat readings" in e.basis
    assert e.value == pytest.approx(math.sqrt((0.05 + 0.0466666667) / 5), rel=1e-6)  # 0.05 + 0.04667 by hand
    assert b.reading_dof == 5


def test_survey_file_keys_reach_the_budget():
    s = simulate_survey(uj(), crown)
    text = format_survey(s).replace('material = ""', 'material = ""\nthickness_mm = 120.0', 1).replace(
        "[layout]\n", "[uncertainty]\ntemperature_difference_u_k = 0.3\nexpansion_coefficient_per_k = 7e-6\n\n"
        "[layout]\n", 1)
    sv = parse_survey(text, source="t.toml")
    assert sv.meta["thickness_mm"] == 120.0
    b = uncertainty_budget(loaded(sv), trials=300, seed=1, contribution_trials=200)
    e = b.entry("thermal-gradient")
    assert e.value == 0.3 and not e.default and "7e-06" in e.basis and "stated" in e.basis
    again = parse_survey(format_survey(sv), source="again.toml")  # written back as read
    assert again.meta["uncertainty"] == sv.meta["uncertainty"] and again.meta["thickness_mm"] == 120.0


# ----------------------------------------------------------------------------- bias correction
def test_bias_corrected_interval():
    # Bootstrap bias estimate b = mean - F and corrected estimate F - b (Efron & Tibshirani 1993 ch. 10); the
    # correction's own uncertainty rectangular of half-width |b|, u = b / sqrt(3) (JCGM 100 4.3.7), combined in
    # quadrature with the Monte Carlo u (JCGM 100 5.1.2); interval +- 2 u_c (k = 2, JCGM 100 6.2-6.3).
    rng = np.random.default_rng(1234)
    vals = 10.0 + 0.5 + rng.normal(0, 0.2, 100_000)
    r = summarise_flatness(10.0, vals, seed=0)
    assert r.bias_um == pytest.approx(0.5, abs=0.01)
    assert r.corrected_estimate_um == pytest.approx(9.5, abs=0.01)
    u_c = math.sqrt(0.2**2 + 0.5**2 / 3)  # 0.3512 by hand
    assert r.corrected_std_um == pytest.approx(u_c, rel=0.01)
    assert r.corrected_interval_um == pytest.approx((9.5 - 2 * u_c, 9.5 + 2 * u_c), abs=0.01)
    # U holds the corrected interval about the value
    assert 10.0 - r.expanded_um <= r.corrected_interval_um[0] + 1e-12
    assert r.expanded_um == pytest.approx(0.5 + 2 * u_c, abs=0.01)
    # no bias, normal values: the interval is the k = 2 interval about the value and U = 2 u
    r0 = summarise_flatness(10.0, 10.0 + rng.normal(0, 0.2, 100_000), seed=0)
    assert r0.expanded_um == pytest.approx(0.4, rel=0.02)


def test_minimum_zone_of_propagated_trials_equals_one_highs_lp_per_trial():
    # the batched, warm-started, working-set solver against scipy's HiGHS LP on the very same heights
    X, Y = np.meshgrid(np.linspace(0, 1000, 21), np.linspace(0, 630, 21))
    x, y = X.ravel(), Y.ravel()
    z = crown(x, y) + np.random.default_rng(3).normal(0, 0.05, x.size)
    u = 0.05
    r = propagate_heights(x, y, z, [HeightEffect("reading", np.full(x.size, u))], trials=150, seed=42)
    rng = np.random.default_rng(42)
    H = z + u * rng.standard_normal((150, x.size))  # the same draws in µm (the frame scales them back)
    for k in range(150):
        n = x.size
        A = np.column_stack([np.ones(n), x - x.mean(), y - y.mean()])
        A_ub = np.vstack([np.column_stack([A, np.zeros(n)]), np.column_stack([-A, -np.ones(n)])])
        ref = linprog([0, 0, 0, 1], A_ub=A_ub, b_ub=np.concatenate([H[k], -H[k]]), bounds=[(None, None)] * 4,
                      method="highs").x[3]
        assert r.mz_um[k] == pytest.approx(ref, abs=1e-7)
        R = H[k] - A @ np.linalg.lstsq(A, H[k], rcond=None)[0]  # numpy least squares as reference
        assert r.ls_um[k] == pytest.approx(R.max() - R.min(), abs=1e-9)


# ----------------------------------------------------------------------------- digits
def test_u_to_two_significant_digits_and_the_value_to_the_same_place():
    # JCGM 100:2008 7.2.6 (from memory of the clause): state U with at most two significant digits and round
    # the value to the same decimal place; worked by hand below
    from flatcheck.units import format_with_uncertainty, round_to_uncertainty

    assert round_to_uncertainty(2.48624, 0.16723) == (2.49, 0.17, 2)
    assert round_to_uncertainty(3.8704, 0.02496) == (3.870, 0.025, 3)
    assert round_to_uncertainty(1234.5, 27.0) == (1234.0, 27.0, 0)
    assert format_with_uncertainty(2.48624, 0.0996) == ("2.49 µm", "0.10 µm")  # 0.0996 rounds up to 0.10
    # in µin (1 µin = 0.0254 µm exactly): 3.0 µm -> 118.11 µin, U 0.4 µm -> 15.748 µin -> 16
    assert format_with_uncertainty(3.0, 0.4, "in") == ("118 µin", "16 µin")
