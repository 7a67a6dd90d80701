"""The bearing's verdicts with U from the survey's budget (flatcheck.bearing._uncertainty, ISO 14253-1).

Expected values come from the ISO 14253-1:2017 default rule's worked values (REFERENCE section 10, item 24:
upper limit 4.0 µm, U 0.4 µm: 3.5 conforms, 3.7 undecided, 4.5 does not conform), from closed forms stated
beside each check, and from the bearing's own evaluation of perturbed surfaces (the bound must hold trial by
trial: an inequality derived in docs/methods.md, checked here against a direct re-evaluation).
"""

import numpy as np
import pytest

from flatcheck.bearing import Carriage, MotionBudget, Pad, SurveyErrors, evaluate_bearing, local_uncertainty
from flatcheck.bearing import footprint, station_positions
from flatcheck.form import HeightMap


def _bowl():
    """A 1000 x 200 mm grid (50 mm pitch) of z = 1e-5 x^2 µm (x about the middle): convex and symmetric."""
    x = np.arange(-500.0, 500.0 + 1e-9, 50.0)
    y = np.arange(0.0, 200.0 + 1e-9, 50.0)
    X, Y = np.meshgrid(x, y)
    return HeightMap(X.ravel(), Y.ravel(), (1e-5 * X**2).ravel())


def _scale_like_errors(hm, ratio):
    """Trials whose errors are c_k times the heights (as a scale error), |c_k| = ratio * k / 190, k = 0..200.

    For such errors every figure's bound is |c_k| times the figure's own bound on the heights; the 95th
    percentile (numpy's linear interpolation: position 0.95 x 200 = 190) of |c_k| is exactly ``ratio``.
    """
    c = ratio * np.arange(201) / 190.0
    c[1::2] *= -1.0  # signs do not matter to a bound
    return SurveyErrors(c[:, None] * hm.height_um[None, :], "test: scale-like errors")


# ISO 14253-1:2017 default rule, worked values of REFERENCE section 10, item 24 (upper limit 4.0, U 0.4),
# scaled to the carriage's straightness F: limit T = 4.0 F / f and U = 0.4 F / f for a measured f.
@pytest.mark.parametrize(
    "f, decision, status",
    [(3.5, "conforms", "fit"), (3.7, "undecided", "marginal"), (4.5, "does-not-conform", "unfit")],
)
def test_straightness_verdict_follows_the_iso_14253_worked_values(f, decision, status):
    hm = _bowl()
    car = Carriage.single(Pad.rect(100, 80, 50.0))
    plain = evaluate_bearing(hm, car)
    F = plain.motion.straightness_um
    # the path of a convex symmetric profile: its minimum zone is the peak-to-valley about its (level)
    # least-squares line, so scale-like errors c F change it by at most |c| F (docs/methods.md bound)
    T = 4.0 * F / f
    res = evaluate_bearing(hm, car, budget=MotionBudget(straightness_um=T), marginal_from=0.9,
                           uncertainty=_scale_like_errors(hm, 0.4 / f))
    chk = next(c for c in res.checks if c.name == "carriage straightness")
    assert chk.expanded_uncertainty == pytest.approx(0.1 * T, rel=1e-9)  # U = 0.4 of 4.0 (REFERENCE s.10 #24)
    assert chk.decision == decision  # REFERENCE s.10 item 24 (ISO 14253-1 default rule)
    assert chk.status == status
    assert chk.rule == "iso14253-1"
    assert res.uncertainty.rule == "iso14253-1" and res.uncertainty.trials == 201


def test_without_u_the_checks_say_simple_acceptance():
    # no budget: simple acceptance, value against limit (ISO 14253-1 needs U; the rule says so)
    hm = _bowl()
    car = Carriage.single(Pad.rect(100, 80, 50.0))
    F = evaluate_bearing(hm, car).motion.straightness_um
    res = evaluate_bearing(hm, car, budget=MotionBudget(straightness_um=F * 4.0 / 3.7), marginal_from=0.95)
    chk = next(c for c in res.checks if c.name == "carriage straightness")
    assert chk.expanded_uncertainty is None and chk.rule == "simple-acceptance"
    assert chk.decision == "conforms" and chk.status == "fit"  # 3.7 <= 4.0: simple acceptance conforms
    assert res.uncertainty.rule == "simple-acceptance"
    assert any("simple acceptance" in n for n in res.notes)


def test_u_of_zero_leaves_the_statuses_of_the_value_alone():
    # with U = 0 the ISO rule reduces to value against limit: the statuses equal those without U (ISO 14253-1)
    hm = _bowl()
    car = Carriage.single(Pad.rect(100, 80, 50.0))
    zero = SurveyErrors(np.zeros((200, hm.x_mm.size)), "test: no error")
    F = evaluate_bearing(hm, car).motion.straightness_um
    for T in (F * 1.5, F * 1.1, F * 0.9):
        a = evaluate_bearing(hm, car, budget=MotionBudget(straightness_um=T))
        b = evaluate_bearing(hm, car, budget=MotionBudget(straightness_um=T), uncertainty=zero)
        assert [c.status for c in a.checks] == [c.status for c in b.checks]
        assert all(c.expanded_uncertainty == 0.0 for c in b.checks)


def test_a_smooth_bow_hardly_reaches_the_local_figures():
    # errors that are a pure sphere of sag s over the whole length: under a footprint of length l the sphere
    # departs from its best plane by about s (l/L)^2 (elementary: a parabola's zone scales with the square of
    # the span), so the local U is about (120/1000)^2 = 1.4 % of the whole surface's sag
    hm = _bowl()
    shape = hm.height_um / hm.height_um.max()  # sag 1 µm corner to middle along x
    E = SurveyErrors(np.linspace(-1, 1, 201)[:, None] * shape[None, :], "test: bows")
    car = Carriage.single(Pad.rect(120, 80, 8.0))
    res = evaluate_bearing(hm, car, uncertainty=E)
    lf = next(c for c in res.checks if c.name == "local flatness under pads")
    assert 0 < lf.expanded_uncertainty < 0.02 * 0.95  # about 1.4 % of the 95th percentile sag (0.95 µm)


def _figures(res):
    m = res.motion
    return {
        "local": res.local_flatness_max_um,
        "clearance": max(8.0 - s.clearance_um for s in res.stations),
        "straightness": m.straightness_um,
        "pitch": m.pitch_arcsec,
        "roll": m.roll_arcsec,
    }


def test_the_bound_holds_trial_by_trial_on_a_real_budget():
    # the U model's premise (docs/methods.md): for every trial, the change of each figure when the surface gets
    # that trial's errors is no more than the bound computed from the errors; checked against a re-evaluation
    from pathlib import Path

    from flatcheck import open_surface
    from flatcheck.evaluation import uncertainty_budget

    ms = open_surface(Path(__file__).resolve().parents[1] / "sample_readings" / "guideway-KY-G1.toml")
    budget = uncertainty_budget(ms, trials=500, contribution_trials=100, seed=7, keep_trials=12)
    hm = ms.heightmap
    pad = Pad.rect(120, 80, 8.0)
    car = Carriage.single(pad, travel_start_mm=400.0, travel_end_mm=900.0)
    base = _figures(evaluate_bearing(hm, car))
    xs, y0, _ = station_positions(hm, car)
    fps = [footprint(pad)]
    for e in budget.trial_errors_um:
        moved = _figures(evaluate_bearing(hm.with_heights(hm.height_um + e), car))
        b = local_uncertainty(hm, car.active_pads, fps, xs, y0, e[None, :], limits_um=[2.0], gaps_um=[8.0])
        assert abs(moved["local"] - base["local"]) <= b["local_ratio"] * 2.0 + 1e-9
        assert abs(moved["clearance"] - base["clearance"]) <= b["clearance_ratio"] * 8.0 + 1e-9
        assert abs(moved["straightness"] - base["straightness"]) <= b["straightness_um"] + 1e-9
        assert abs(moved["pitch"] - base["pitch"]) <= b["pitch_arcsec"] + 1e-9
        assert abs(moved["roll"] - base["roll"]) <= b["roll_arcsec"] + 1e-9


def test_budget_keeps_the_errors_of_its_trials_in_the_surface_order():
    # the kept errors reproduce the budget's own trials: the flatness of surface + errors is each trial's value
    # (numpy/scipy minimum zone as the reference: flatcheck.form.minimum_zone, the exact LP)
    from pathlib import Path

    from flatcheck import open_surface
    from flatcheck.evaluation import uncertainty_budget
    from flatcheck.form import minimum_zone

    ms = open_surface(Path(__file__).resolve().parents[1] / "sample_readings" / "plate-KY-P3-2024-03-11.toml")
    b = uncertainty_budget(ms, trials=400, contribution_trials=100, seed=3, keep_trials=400)
    hm = ms.heightmap
    mz = np.array([minimum_zone(hm.x_mm, hm.y_mm, hm.height_um + e).flatness_um for e in b.trial_errors_um])
    # same trials, so the same standard deviation as the budget's whole propagation (to rounding)
    assert np.std(mz, ddof=1) == pytest.approx(b.minimum_zone.std_um, rel=1e-9)
    se = SurveyErrors.from_budget(b)
    assert se.surface_u_um == b.expanded_um and "seed 3" in se.source
