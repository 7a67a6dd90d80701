"""Tests of the least-squares survey reduction (flatcheck.reduction).

Reference values come from outside the reduction: exact readings computed from
known surfaces (the heights they must give back), numpy's least squares and
pseudo-inverse on an independently built dense design matrix, the classic
least-squares results E[r^T W r] = sigma^2 (m - rank) and Cov = sigma^2 N^+, and
the check values of REFERENCE.md sections 1 and 10.
"""

import dataclasses
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from flatcheck.errors import GeometryError, InputValueError, LayoutError, UnobservableError
from flatcheck.survey import plan_grid, plan_lines, plan_union_jack
from flatcheck.survey import OUTLIER_THRESHOLD, network_rank
from flatcheck.survey import reduce_survey
from flatcheck.survey import simulate_survey
from flatcheck.survey import Instrument, Run, Station, Surface, Survey, SurveyLine, observations
from flatcheck.units import ARCSEC_TO_RAD

INSTRUMENTS = {
    "autocollimator": Instrument("autocollimator", "arcsec"),
    "level": Instrument("level", "um/m"),
    "differential-level": Instrument("differential-level", "arcsec"),
    "indicator": Instrument("indicator", "um"),
}


def surface_um(x, y):
    """Invented test surface on a 1000 x 600 mm plate: plane + bowl + twist + local bump (µm)."""
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    plane = 0.3 + 0.002 * x - 0.001 * y
    bowl = 1.5 * ((x - 500) ** 2 + (y - 300) ** 2) / 500**2
    twist = 0.8 * (x - 500) * (y - 300) / (500 * 300)
    bump = 0.5 * np.exp(-((x - 300) ** 2 + (y - 200) ** 2) / (2 * 80.0**2))
    return plane + bowl + twist + bump


def expected_heights(survey, fn=surface_um):
    """Truth at the stations minus its least-squares plane (numpy lstsq as the reference)."""
    x, y = survey.x_mm, survey.y_mm
    z = fn(x, y)
    X = np.column_stack([np.ones_like(x), x, y])
    coef, *_ = np.linalg.lstsq(X, z, rcond=None)
    return z - X @ coef


def plan(layout, kind):
    inst = INSTRUMENTS[kind]
    if layout == "union-jack":
        return plan_union_jack(1000, 600, 100, margin_mm=50, instrument=inst)
    if layout == "grid":
        # rows + columns; the autocollimator needs the diagonals (square grid) to see twist
        if kind == "autocollimator":
            return plan_grid(600, 600, 100, margin_mm=50, instrument=inst, diagonals=True)
        return plan_grid(1000, 600, 100, margin_mm=50, instrument=inst)
    # free lines: a box with a cross (no centre lines) plus one offset row
    lines = [
        ("south", (100, 100), (900, 100), 8),
        ("north", (100, 500), (900, 500), 8),
        ("west", (100, 100), (100, 500), 4),
        ("east", (900, 100), (900, 500), 4),
        ("diag-a", (100, 100), (900, 500), 8),
        ("diag-b", (900, 100), (100, 500), 8),
        ("mid-row", (100, 300), (900, 300), 8),
    ]
    return plan_lines(lines, length_mm=1000, width_mm=600, instrument=inst)


# ------------------------------------------------------------------ readings to rises
def _one_step_survey(unit, reading, base_mm, kind="autocollimator", reports="mirror-tilt"):
    st_ = (Station("a", 0.0, 0.0), Station("b", base_mm, 0.0))
    ln = SurveyLine("l", ("a", "b"), base_mm, (Run((reading,)),))
    return Survey(Surface("s", 500, 500), Instrument(kind, unit, reports=reports), "lines", st_, (ln,))


def test_readings_to_rises_check_values():
    # Source: REFERENCE.md s.10 item 1 and definition of the second of arc: 1" = pi/648000 rad
    assert ARCSEC_TO_RAD == pytest.approx(math.pi / 648000.0, rel=1e-15)
    assert ARCSEC_TO_RAD == pytest.approx(4.848137e-6, rel=1e-6)
    # Source: REFERENCE.md s.10 item 2: 1 arcsec over 100 mm rises 0.48481 µm (B*tan(theta))
    v = observations(_one_step_survey("arcsec", 1.0, 100.0)).value_um[0]
    assert v == pytest.approx(100e3 * math.tan(math.pi / 648000.0), rel=1e-14)
    assert v == pytest.approx(0.48481, abs=5e-6)
    # Source: definition of µm/m: 1 µm/m over 100 mm = 0.1 µm
    assert observations(_one_step_survey("um/m", 1.0, 100.0, "level")).value_um[0] == pytest.approx(0.1, rel=1e-14)
    # Source: REFERENCE.md s.10 item 3: 0.01 mm/m over 200 mm -> 2.000 µm; 5 µm/m over 150 mm -> 0.750 µm
    assert observations(_one_step_survey("mm/m", 0.01, 200.0, "level")).value_um[0] == pytest.approx(2.0, rel=1e-12)
    assert observations(_one_step_survey("um/m", 5.0, 150.0, "level")).value_um[0] == pytest.approx(0.75, rel=1e-12)
    # Source: REFERENCE.md s.10 item 5 (autocollimator principle): beam deviation 2" = mirror tilt 1"
    bd = observations(_one_step_survey("arcsec", 2.0, 100.0, reports="beam-deviation")).value_um[0]
    assert bd == pytest.approx(v, rel=1e-14)


# ------------------------------------------------------------------ round trips, no noise
CASES = [
    ("union-jack", "autocollimator"),
    ("union-jack", "level"),
    ("union-jack", "differential-level"),
    ("union-jack", "indicator"),
    ("grid", "autocollimator"),
    ("grid", "level"),
    ("grid", "differential-level"),
    ("grid", "indicator"),
    ("lines", "autocollimator"),
    ("lines", "level"),
    ("lines", "differential-level"),
    ("lines", "indicator"),
]

# reading noise per instrument, in its reading unit (illustrative sizes)
NOISE_SD = {"autocollimator": 0.3, "level": 0.3, "differential-level": 0.3, "indicator": 0.1}


@pytest.mark.parametrize("layout,kind", CASES)
def test_round_trip_exact(layout, kind):
    # Analytic: exact readings of a known surface must give it back, less its LS plane
    p = plan(layout, kind)
    runs = ("forward", "reverse") if kind != "indicator" else ("forward",)
    s = simulate_survey(p, surface_um, instrument_zero="random", runs=runs, rng=7)
    red = reduce_survey(s)
    assert red.method == "least-squares"
    np.testing.assert_allclose(red.heightmap.height_um, expected_heights(s), rtol=0, atol=1e-9)
    assert red.heightmap.names == tuple(st_.name for st_ in s.stations)
    assert np.max(np.abs(red.residual_um)) < 1e-9
    assert red.residual_um.shape == observations(s).value_um.shape
    assert red.outliers == ()
    for c in red.closures:
        assert abs(c.closure_um) < 1e-9


@pytest.mark.parametrize("layout,kind", CASES)
def test_round_trip_with_noise_within_the_predicted_covariance(layout, kind):
    # Gauss-Markov: with independent reading noise of sd sigma_k (µm), the adjusted heights scatter about
    # the truth (less its LS plane) with covariance C = G diag(sigma_k^2) G^T, G the reduction's own
    # operator. So e^T C^+ e is chi-squared with rank(C) degrees of freedom for each noisy survey; summed
    # over 8 seeded surveys it must lie within the two-sided 0.1 % quantiles (scipy.stats.chi2), which
    # fails both for too much scatter and for a covariance that overstates it.
    from scipy.stats import chi2

    p = plan(layout, kind)
    runs = ("forward", "reverse") if kind != "indicator" else ("forward",)
    sd = NOISE_SD[kind]
    exact = simulate_survey(p, surface_um, instrument_zero="random", runs=runs, rng=7)
    red0 = reduce_survey(exact)
    sigma_um = sd * np.abs(observations(exact).um_per_unit)
    C = red0.operator.G @ (sigma_um[:, None] ** 2 * red0.operator.G.T)
    evals, evecs = np.linalg.eigh(C)
    keep = evals > 1e-9 * evals.max()
    truth = expected_heights(exact)
    rng = np.random.default_rng(2024)
    stat, dof, worst = 0.0, 0, 0.0
    for _ in range(8):
        s = simulate_survey(p, surface_um, instrument_zero="random", runs=runs, noise_sd=sd, rng=rng)
        e = reduce_survey(s).heightmap.height_um - truth
        z = (evecs[:, keep].T @ e) / np.sqrt(evals[keep])
        stat += float(z @ z)
        dof += int(keep.sum())
        worst = max(worst, float(np.max(np.abs(e) / np.sqrt(np.diag(C)))))
        assert np.linalg.norm(e - evecs[:, keep] @ (evecs[:, keep].T @ e)) < 1e-6 * max(np.linalg.norm(e), 1e-12)
    print(f"\n[noisy round trip {layout} {kind}] e^T C^+ e / dof = {stat / dof:.3f} (dof {dof})")
    assert chi2.ppf(0.0005, dof) < stat < chi2.ppf(0.9995, dof), (stat, dof)
    assert worst < 5.0  # no single station beyond 5 predicted sd


def test_round_trip_beam_deviation_and_flipped_runs():
    # An autocollimator turned round is set up and aimed anew: its turned runs get a zero
    # of their own, so any zero on them round-trips
    inst = Instrument("autocollimator", "arcsec", reports="beam-deviation")
    p = plan_union_jack(1000, 600, 100, margin_mm=50, instrument=inst)
    s = simulate_survey(p, surface_um, runs=("forward", "reverse-flipped"), instrument_zero="random", rng=3)
    red = reduce_survey(s)
    np.testing.assert_allclose(red.heightmap.height_um, expected_heights(s), atol=1e-9)
    assert len(red.instrument_zeros) == 2 * len(s.lines)
    assert sum(z.turned for z in red.instrument_zeros) == len(s.lines)
    G_ref, _, _ = reference_operator(s)
    np.testing.assert_allclose(red.operator.G, G_ref, atol=1e-10)


def test_level_zero_recovered_against_gravity():
    # Analytic: a level reads slope + zero against gravity, so its zero is absolute
    p = plan("union-jack", "level")
    s = simulate_survey(p, surface_um, instrument_zero=12.5, rng=1)
    red = reduce_survey(s)
    (z,) = red.instrument_zeros
    assert z.value == pytest.approx(12.5, abs=1e-9)
    assert z.unit == "um/m"
    assert z.rise_um == pytest.approx(12.5 * 100e-3, abs=1e-9)  # 12.5 µm/m over 100 mm
    assert set(z.lines) == {ln.name for ln in s.lines}


def test_autocollimator_zeros_referred_to_ls_plane():
    # Analytic: relative to the LS plane z = a + b x + c y, a line of direction (dx, dy)
    # reads zero' = zero + atan(b dx + c dy) (plane gradient along the line), in arcsec
    p = plan("union-jack", "autocollimator")
    zeros = np.linspace(-30, 30, len(p.lines))
    s = simulate_survey(p, surface_um, instrument_zero=zeros)
    red = reduce_survey(s)
    x, y = s.x_mm, s.y_mm
    coef, *_ = np.linalg.lstsq(np.column_stack([np.ones_like(x), x, y]), surface_um(x, y), rcond=None)
    for z_true, rec, ln in zip(zeros, red.instrument_zeros, s.lines):
        a, b = s.station_index[ln.stations[0]], s.station_index[ln.stations[-1]]
        d = np.array([x[b] - x[a], y[b] - y[a]])
        d /= np.linalg.norm(d)
        grad = (coef[1] * d[0] + coef[2] * d[1]) * 1e-3  # µm/mm -> dimensionless slope
        assert rec.lines == (ln.name,)
        assert rec.value == pytest.approx(z_true + math.atan(grad) / ARCSEC_TO_RAD, abs=1e-6)


def _reversal_grid(zero_umpm, flips):
    """Level rows+columns read with physically exact reversal (own model, not the simulator).

    A level turned round reads ``-slope + zero``; its stored forward reading is
    the negation, ``slope - zero`` (survey sign convention, flip_sign set).
    """
    p = plan_grid(600, 500, 100, margin_mm=50, instrument=Instrument("level", "um/m"))
    h = surface_um(p.x_mm, p.y_mm)
    idx = p.station_index
    lines = []
    for ln in p.lines:
        st_ = [idx[s_] for s_ in ln.stations]
        slope = (h[st_[1:]] - h[st_[:-1]]) / (ln.foot_spacing_mm * 1e3) * 1e6  # µm/m
        runs = [Run(tuple(slope + zero_umpm))]
        if flips:
            runs.append(Run(tuple(-slope + zero_umpm), flip_sign=True))
        lines.append(dataclasses.replace(ln, runs=tuple(runs)))
    return dataclasses.replace(p, lines=tuple(lines))


def test_reversal_separates_level_zero_from_tilt():
    # Rows + columns with a level: the zero trades against a tilt along the bisector
    # (REFERENCE.md s.10 item 11: gravity deficiency 2 on a grid). Reversed runs
    # (instrument turned round) observe the zero: deficiency 1 and the true zero back.
    plain = _reversal_grid(7.0, flips=False)
    assert network_rank(plain).deficiency == 2
    red = reduce_survey(plain)
    assert any("two directions" in w for w in red.warnings)
    rev = _reversal_grid(7.0, flips=True)
    assert network_rank(rev).deficiency == 1
    red = reduce_survey(rev)
    assert red.instrument_zeros[0].value == pytest.approx(7.0, abs=1e-9)
    np.testing.assert_allclose(red.heightmap.height_um, expected_heights(rev), atol=1e-9)


# ------------------------------------------------------------------ rank check
def test_rank_counts_reference_values():
    # Source: REFERENCE.md s.10 item 11 (derived there with numpy)
    grid_ac = simulate_survey(plan_grid(460, 360, 100, margin_mm=30, instrument=INSTRUMENTS["autocollimator"]), surface_um)
    assert len(grid_ac.stations) == 20  # 5 x 4 stations
    r = network_rank(grid_ac)
    assert r.deficiency == 4
    assert any("twist" in u for u in r.unobservable)
    grid_lv = simulate_survey(plan_grid(460, 360, 100, margin_mm=30, instrument=INSTRUMENTS["level"]), surface_um)
    r = network_rank(grid_lv)
    assert r.deficiency == 2 and r.unobservable == ()
    uj = plan_union_jack(900, 700, 100, margin_mm=50, instrument=INSTRUMENTS["autocollimator"])
    assert (uj.meta["layout"]["steps_x"], uj.meta["layout"]["steps_y"], uj.meta["layout"]["steps_diagonal"]) == (8, 6, 10)
    r = network_rank(simulate_survey(uj, surface_um))
    assert (r.deficiency, r.redundancy, r.exact) == (3, 2, True)
    uj_lv = dataclasses.replace(uj, instrument=INSTRUMENTS["level"])
    r = network_rank(simulate_survey(uj_lv, surface_um))
    assert (r.deficiency, r.redundancy) == (1, 7)


def test_rank_matches_numpy_matrix_rank():
    # Reference: numpy.linalg.matrix_rank of an independently built dense design matrix
    for layout, kind in (("union-jack", "autocollimator"), ("grid", "level"), ("lines", "autocollimator")):
        s = simulate_survey(plan(layout, kind), surface_um)
        A, _, _ = dense_design(s)
        r = network_rank(s)
        assert r.rank == np.linalg.matrix_rank(A)
        assert r.redundancy == A.shape[0] - np.linalg.matrix_rank(A)


def test_twist_unobservable_on_autocollimator_grid():
    s = simulate_survey(plan_grid(600, 500, 100, margin_mm=50, instrument=INSTRUMENTS["autocollimator"]), surface_um)
    with pytest.raises(UnobservableError) as exc:
        reduce_survey(s)
    msg = str(exc.value)
    assert "twist" in msg and "diagonal" in msg and "gravity-referenced" in msg
    # Analytic (REFERENCE.md s.2): twist k*x*y gives the same readings as a flat surface,
    # once each line's own zero absorbs its slope
    twist = simulate_survey(s, lambda x, y: 3e-5 * x * y)
    flat = simulate_survey(s, lambda x, y: 0 * x)
    for lt, lf in zip(twist.lines, flat.lines):
        r = np.array(lt.runs[0].readings) - np.array(lf.runs[0].readings)
        assert np.ptp(r) < 1e-9  # constant along the line: absorbed by the zero


def test_disconnected_stations_are_named():
    p = plan("union-jack", "level")
    extra = (Station("island.0", 950, 20), Station("island.1", 990, 20))
    ln = SurveyLine("island", ("island.0", "island.1"), 40.0)
    p2 = dataclasses.replace(p, stations=p.stations + extra, lines=p.lines + (ln,))
    s = simulate_survey(p2, surface_um)
    with pytest.raises(UnobservableError) as exc:
        reduce_survey(s)
    assert "'island.0'" in str(exc.value) and "not connected" in str(exc.value)
    # a station on no line at all
    p3 = dataclasses.replace(p, stations=p.stations + (Station("lonely", 960, 10),))
    with pytest.raises(UnobservableError, match="lonely"):
        reduce_survey(simulate_survey(p3, surface_um))


def test_hanging_autocollimator_line_is_named():
    # A line tied to the network at one station only can pivot about it with its own zero:
    # found by the general (dense) rank check, which names the stations that move
    p = plan("union-jack", "autocollimator")
    c = p.stations[p.station_index["NE"]]
    extra = tuple(Station(f"spur.{k}", c.x_mm - 30 * k, c.y_mm + 10 * k) for k in (1, 2))
    ln = SurveyLine("spur", ("NE", "spur.1", "spur.2"), math.hypot(30, 10))
    p2 = dataclasses.replace(p, stations=p.stations + extra, lines=p.lines + (ln,))
    with pytest.raises(UnobservableError) as exc:
        reduce_survey(simulate_survey(p2, surface_um))
    assert "spur.1" in str(exc.value) and "spur.2" in str(exc.value)


def test_collinear_stations_rejected():
    lines = [("a", (100, 100), (900, 100), 8), ("b", (100, 100), (900, 100), 4)]
    s = simulate_survey(plan_lines(lines, length_mm=1000, width_mm=600, instrument=INSTRUMENTS["level"]), surface_um)
    with pytest.raises(GeometryError, match="straight line"):
        reduce_survey(s)


def test_bad_method_and_missing_readings():
    s = simulate_survey(plan("grid", "level"), surface_um)
    with pytest.raises(InputValueError, match="unknown reduction method"):
        reduce_survey(s, method="fancy")
    with pytest.raises(LayoutError, match="Union Jack"):
        reduce_survey(s, method="moody")
    blank = plan("grid", "level")
    with pytest.raises(InputValueError, match="no readings"):
        reduce_survey(blank)


# ------------------------------------------------------------------ independent dense reference
def dense_design(survey):
    """Dense design matrix, weights and observations built directly from the survey (test-side).

    Model (module notes): rise = h_to - h_from + s*B*zero*1e-3, weights (B_median/B)^2;
    indicator: value = h + s*offset, unit weights; autocollimator zeros per line and flip state.
    """
    obs = observations(survey)
    n = len(survey.stations)
    inst = survey.instrument
    flip = np.array([survey.lines[a].runs[b].flip_sign for a, b in zip(obs.line, obs.run)])
    if inst.kind == "autocollimator":  # one zero per line and turned/not turned
        groups = sorted({(int(a), bool(f)) for a, f in zip(obs.line, flip)})
        zi_of = {g: i for i, g in enumerate(groups)}
    else:
        zi_of = None
    nz = len(zi_of) if zi_of else 1
    A = np.zeros((obs.value_um.size, n + nz))
    for k in range(obs.value_um.size):
        s_ = -1.0 if flip[k] else 1.0
        zi = n + (zi_of[(int(obs.line[k]), bool(flip[k]))] if zi_of else 0)
        A[k, obs.i_to[k]] += 1.0
        if inst.reads_heights:
            A[k, zi] = s_
        else:
            A[k, obs.i_from[k]] -= 1.0
            A[k, zi] = s_ * obs.base_mm[k] * 1e-3
    if inst.reads_heights:
        w = np.ones(obs.value_um.size)
    else:
        w = (np.median(obs.base_mm) / obs.base_mm) ** 2
    return A, w, obs.value_um


def reference_operator(survey):
    """G = (I - P) [N^+ A^T W]_heights with numpy's pseudo-inverse (P: LS plane projector)."""
    A, w, _ = dense_design(survey)
    n = len(survey.stations)
    N = A.T @ (w[:, None] * A)
    K = np.linalg.pinv(N) @ (A.T * w[None, :])
    x, y = survey.x_mm, survey.y_mm
    X = np.column_stack([np.ones(n), x, y])
    P = X @ np.linalg.pinv(X)
    return (np.eye(n) - P) @ K[:n], A, w


@pytest.mark.parametrize("layout,kind", [("union-jack", "autocollimator"), ("union-jack", "level"), ("grid", "level"), ("lines", "indicator")])
def test_operator_matches_numpy_pseudo_inverse(layout, kind):
    # Reference: numpy.linalg.pinv on the dense normal matrix (minimum-norm solution);
    # after removing the plane every solution of the normal equations gives the same heights
    s = simulate_survey(plan(layout, kind), surface_um, noise_sd=0.3, rng=5)
    red = reduce_survey(s)
    G_ref, A, w = reference_operator(s)
    np.testing.assert_allclose(red.operator.G, G_ref, atol=1e-10)
    l = observations(s).value_um
    if kind in ("level", "indicator"):  # linear units: the heights are G @ readings exactly
        np.testing.assert_allclose(red.heightmap.height_um, G_ref @ l, atol=1e-10)
        np.testing.assert_allclose(red.operator.heights_um(l), red.heightmap.height_um, atol=1e-10)
        # redundancy numbers: diagonal of I - A N^+ A^T W (numpy reference)
        N = A.T @ (w[:, None] * A)
        H = A @ np.linalg.pinv(N) @ (A.T * w[None, :])
        np.testing.assert_allclose(red.redundancy_numbers, 1 - np.diag(H), atol=1e-9)
        assert red.redundancy_numbers.sum() == pytest.approx(red.redundancy, abs=1e-8)  # trace = m - rank
    batch = np.vstack([l, 2 * l])
    np.testing.assert_allclose(red.operator.heights_um(batch)[1], 2 * red.operator.heights_um(l), atol=1e-10)


# ------------------------------------------------------------------ noise
def test_noise_scatter_and_sigma0_match_theory():
    # Theory (weighted least squares, Gauss-Markov): E[r^T W r] = sigma^2 (m - rank) and
    # Cov(h) = sigma^2 G W^-1 G^T. Seeded Monte Carlo, 300 trials, level on a Union Jack.
    sd = 0.4  # µm/m reading noise
    s0 = simulate_survey(plan("union-jack", "level"), surface_um)
    red0 = reduce_survey(s0)
    G = red0.operator.G
    obs = observations(s0)
    sd_um = sd * obs.um_per_unit  # µm per observation
    cov = G @ (sd_um[:, None] ** 2 * G.T)
    rng = np.random.default_rng(1234)
    trials = 300
    errs = np.empty((trials, G.shape[0]))
    s2 = np.empty(trials)
    truth = expected_heights(s0)
    for t in range(trials):
        s = simulate_survey(s0, surface_um, noise_sd=sd, instrument_zero=3.0, rng=rng)
        if t < 40:  # full reductions for sigma0; the rest by the operator (linear in µm/m)
            red = reduce_survey(s)
            s2[t] = red.sigma0_um**2
            errs[t] = red.heightmap.height_um - truth
        else:
            errs[t] = G @ observations(s).value_um - truth
    # unit-weight sigma in µm: noise over the median foot spacing (100 mm)
    sigma_ref = sd * 100e-3
    dof = red0.redundancy
    # mean of 40 chi2(dof)/dof has relative sd sqrt(2/(40*dof)) ~ 8 % for dof = 7
    assert np.mean(s2[:40]) == pytest.approx(sigma_ref**2, rel=0.3)
    var_mc = errs.var(axis=0, ddof=0) + errs.mean(axis=0) ** 2
    ratio = var_mc.sum() / np.trace(cov)
    assert ratio == pytest.approx(1.0, rel=0.12)  # 300 trials: ~8 % sd on a single variance, less summed
    assert np.abs(errs.mean(axis=0)).max() < 4 * np.sqrt(np.diag(cov)).max() / np.sqrt(trials) * 3


def test_miskeyed_reading_found_by_name():
    p = plan_grid(800, 700, 100, margin_mm=50, instrument=Instrument("level", "um/m"))
    s = simulate_survey(p, surface_um, noise_sd=0.2, rng=11)
    # digits swapped when keying step 4 of row-3: add 9 µm/m to that reading
    lines = list(s.lines)
    li = next(i for i, ln in enumerate(lines) if ln.name == "row-3")
    r = list(lines[li].runs[0].readings)
    r[3] += 9.0
    lines[li] = dataclasses.replace(lines[li], runs=(Run(tuple(r), where="plate.toml, line 'row-3', run 1"),))
    bad = dataclasses.replace(s, lines=tuple(lines))
    red = reduce_survey(bad)
    assert red.outliers, "the mis-keyed reading must be flagged"
    top = red.outliers[0]
    assert (top.line, top.run, top.step) == ("row-3", 1, 4)
    assert abs(top.w) > OUTLIER_THRESHOLD
    assert top.where == "plate.toml, line 'row-3', run 1"
    assert "row-3" in top.describe() and "step 4" in top.describe()
    assert any("row-3" in w for w in red.warnings)
    # with the instrument's stated reading uncertainty (Baarda's test with a-priori sigma)
    bad_u = dataclasses.replace(bad, instrument=dataclasses.replace(bad.instrument, reading_uncertainty=0.2))
    top_u = reduce_survey(bad_u).outliers[0]
    assert (top_u.line, top_u.step) == ("row-3", 4)
    # the clean survey: |w| follows N(0,1); with ~110 readings at 0.1 % none should be flagged
    clean = reduce_survey(dataclasses.replace(s, instrument=bad_u.instrument))
    assert len(clean.outliers) <= 1
    w = clean.standardized_residual[np.isfinite(clean.standardized_residual)]
    assert 0.7 < np.std(w) < 1.3  # standard normal under the model


def test_closures_and_run_spread():
    p = plan("union-jack", "autocollimator")
    s = simulate_survey(p, surface_um, noise_sd=0.3, runs=("forward", "reverse"), instrument_zero="random", rng=4)
    red = reduce_survey(s)
    assert [c.line for c in red.closures] == [ln.name for ln in s.lines]
    obs = observations(s)
    shared = {}
    for ln in s.lines:
        for name in ln.stations:
            shared[name] = shared.get(name, 0) + 1
    for li, c in enumerate(red.closures):
        # definition: at the line's tie stations (shared with another line), the mean over runs of the
        # residuals summed from the line's first station; the closure is the largest in magnitude
        sel = obs.line == li
        ln = s.lines[li]
        candidates = {}
        for k in range(1, len(ln.stations)):
            if shared[ln.stations[k]] > 1:
                per_run = [red.residual_um[sel & (obs.run == run) & (obs.step < k)].sum() for run in (0, 1)]
                candidates[ln.stations[k]] = np.mean(per_run)
        worst = max(candidates, key=lambda n: abs(candidates[n]))
        assert c.station == worst
        assert c.closure_um == pytest.approx(candidates[worst], abs=1e-12)
        # run spread: difference of the runs' end-to-end rises (zero is common to both runs)
        ends = [obs.value_um[sel & (obs.run == k)].sum() for k in (0, 1)]
        assert c.run_spread_um == pytest.approx(abs(ends[0] - ends[1]), abs=1e-6)
        assert "not from flatness" in c.meaning


def test_no_redundancy_warns():
    s = simulate_survey(plan("grid", "indicator"), surface_um, noise_sd=0.1, rng=2)
    red = reduce_survey(s)
    assert red.redundancy == 0 and math.isnan(red.sigma0_um)
    assert any("no redundancy" in w for w in red.warnings)


# ------------------------------------------------------------------ properties
@settings(max_examples=15)
@given(
    a=st.floats(-50, 50),
    b=st.floats(-0.05, 0.05),
    c=st.floats(-0.05, 0.05),
    k=st.floats(-3, 3).filter(lambda v: abs(v) > 0.1),
)
def test_added_plane_ignored_and_scaling(a, b, c, k):
    # Invariants: a plane added to the surface leaves the heights unchanged; scaling the
    # surface by k scales the heights by k (exact readings, level in µm/m: linear)
    p = plan("union-jack", "level")
    base = reduce_survey(simulate_survey(p, surface_um)).heightmap.height_um
    tilted = reduce_survey(simulate_survey(p, lambda x, y: surface_um(x, y) + a + b * x + c * y)).heightmap.height_um
    np.testing.assert_allclose(tilted, base, atol=1e-9)
    scaled = reduce_survey(simulate_survey(p, lambda x, y: k * surface_um(x, y))).heightmap.height_um
    np.testing.assert_allclose(scaled, k * base, atol=1e-9)


def test_turned_level_measures_its_zero():
    # Physics of a level (common practice, no single source): turned end for end it reads the slope
    # negated while its zero keeps its sign, so forward + turned runs of a line separate slope and zero:
    # zero = (r_forward + r_turned) / 2 for every step.
    from flatcheck.survey import Instrument

    plan = plan_grid(600.0, 400.0, 100.0, instrument=Instrument("level", "um/m"))
    surface = lambda x, y: 1e-6 * (x - 300) ** 2 - 2e-6 * (y - 200) ** 2  # noqa: E731
    sv = simulate_survey(plan, surface, instrument_zero=7.0, runs=("forward", "forward-flipped"))
    red = reduce_survey(sv)
    (zero,) = red.instrument_zeros
    assert zero.value == pytest.approx(7.0, abs=1e-9)
    truth = surface(red.heightmap.x_mm, red.heightmap.y_mm)
    A = np.column_stack([np.ones_like(truth), red.heightmap.x_mm, red.heightmap.y_mm])
    truth = truth - A @ np.linalg.lstsq(A, truth, rcond=None)[0]
    assert np.allclose(red.heightmap.height_um, truth, atol=1e-9)


# ------------------------------------------------------------------ mis-keyed readings on a Union Jack
UJ_AC = Instrument("autocollimator", "arcsec", reading_uncertainty=0.15)
# the main sample's layout: sides and W-E read forward and back, the other lines once
UJ_RUNS = {"SW-SE": ("forward", "reverse"), "NW-NE": ("forward", "reverse"), "W-E": ("forward", "reverse")}


def _uj_survey(runs=UJ_RUNS, noise_sd=0.0, inst=UJ_AC):
    p = plan_union_jack(1000, 630, 100, margin_mm=30, instrument=inst)
    assert (p.meta["layout"]["steps_x"], p.meta["layout"]["steps_y"], p.meta["layout"]["steps_diagonal"]) == (8, 4, 8)
    return simulate_survey(p, surface_um, runs=runs, instrument_zero="random", noise_sd=noise_sd, rng=21)


def _miskey(s, line, step, add, run=0):
    """The survey with ``add`` (reading units) added to reading ``step`` (1-based, as written) of a run."""
    lines = list(s.lines)
    li = next(i for i, ln in enumerate(lines) if ln.name == line)
    runs = list(lines[li].runs)
    r = list(runs[run].readings)
    r[step - 1] += add
    runs[run] = dataclasses.replace(runs[run], readings=tuple(r))
    lines[li] = dataclasses.replace(lines[li], runs=tuple(runs))
    return dataclasses.replace(s, lines=tuple(lines))


def _residual_correlation(s):
    """Correlation of the residuals of every pair of readings, from numpy's pseudo-inverse (reference).

    R = I - W^1/2 A N^+ A^T W^1/2 is the projector of the weighted residuals; rho_jk = R_jk / sqrt(R_jj R_kk).
    """
    A, w, _ = dense_design(s)
    sw = np.sqrt(w)
    As = A * sw[:, None]
    R = np.eye(A.shape[0]) - As @ np.linalg.pinv(As.T @ As) @ As.T
    d = np.sqrt(np.clip(np.diag(R), 1e-30, None))
    return R / d[:, None] / d[None, :], np.diag(R)


def _indistinguishable(s, k):
    """Readings the layout cannot tell from reading k: |rho| = 1 (numpy reference)."""
    rho, _ = _residual_correlation(s)
    return set(np.flatnonzero(np.abs(rho[k]) > 1 - 1e-9).tolist())


def _obs_index(s, line, step, run=0):
    obs = observations(s)
    li = next(i for i, ln in enumerate(s.lines) if ln.name == line)
    return int(np.flatnonzero((obs.line == li) & (obs.run == run) & (obs.step == step - 1))[0])


def test_union_jack_miskeyed_diagonal_names_both_diagonals_not_one_by_luck():
    # SW-NE step 3 keyed 71.24 for 17.24 (+54 arcsec). In a Union Jack read once along the diagonals, the
    # two diagonals check the network only through the sum of their mid-point heights (their difference
    # is the plate's twist), so the 16 readings of both have perfectly correlated residuals (numpy
    # reference below): the message must name that group and say it cannot tell which.
    s = _uj_survey()
    bad = _miskey(s, "SW-NE", 3, 54.0)
    red = reduce_survey(bad)
    k = _obs_index(bad, "SW-NE", 3)
    group = _indistinguishable(bad, k)
    obs = observations(bad)
    assert {s.lines[int(obs.line[j])].name for j in group} == {"SW-NE", "SE-NW"} and len(group) == 16
    suspects = [o for o in red.outliers if o.group == 1]
    assert len(suspects) == 16 and {o.line for o in suspects} == {"SW-NE", "SE-NW"}
    assert red.outliers[: len(suspects)] == tuple(suspects)
    # equal |w| to ~1e-7: the tangent of the angle unit is not quite linear over a 54 arcsec error
    assert np.ptp([abs(o.w) for o in suspects]) < 1e-6 * abs(suspects[0].w)
    # every other flagged reading is flagged only through that error
    assert len(red.outliers) > 40
    assert all(o.group == 0 and abs(o.w_after) <= OUTLIER_THRESHOLD for o in red.outliers[16:])
    first = red.warnings[0]
    assert "'SW-NE' (run 1, steps 1-8) and 'SE-NW' (run 1, steps 1-8)" in first
    assert "cannot tell which" in first and "forward and back" in first
    assert f"{len(red.outliers)} of {obs.value_um.size} readings exceed" in red.warnings[1]
    assert "one of 16 readings of lines 'SW-NE' and 'SE-NW' that this layout cannot tell apart" in suspects[0].describe()


def test_union_jack_miskeyed_centre_line_names_the_line():
    # S-N 9.63 keyed 6.93 (-2.7 arcsec, 18 sigma): S-N is read once between S, C and N, so its four
    # readings always have the same |w| (they differ only by sign): the line is named, not a step.
    s = _uj_survey()
    bad = _miskey(s, "S-N", 3, -2.7)
    red = reduce_survey(bad)
    k = _obs_index(bad, "S-N", 3)
    obs = observations(bad)
    assert {s.lines[int(obs.line[j])].name for j in _indistinguishable(bad, k)} == {"S-N"}
    suspects = [o for o in red.outliers if o.group == 1]
    assert [(o.line, o.step) for o in suspects] == [("S-N", 1), ("S-N", 2), ("S-N", 3), ("S-N", 4)]
    first = red.warnings[0]
    assert "one of the readings of line 'S-N', run 1, steps 1-4" in first and "cannot tell which" in first
    assert "re-read the line, or walk it forward and back" in first


def test_union_jack_miskeyed_side_found_or_said_to_be_weakly_checked():
    s = _uj_survey()
    # +2.7 arcsec on SW-NW (18 sigma of 0.15 arcsec): the side's redundancy number is about 0.03, so the
    # test cannot see it. Baarda's minimal detectable error delta0 * sigma / sqrt(r), delta0 = 4.13
    # (0.1 % level, 80 % power), is above 2.7 arcsec: the weak line must be named with that figure.
    small = reduce_survey(_miskey(s, "SW-NW", 3, 2.7))
    k = _obs_index(s, "SW-NW", 3)
    _, r_ref = _residual_correlation(s)
    assert small.redundancy_numbers[k] == pytest.approx(r_ref[k], abs=1e-9) and r_ref[k] < 0.1
    mdb = 4.1321 * 0.15 / np.sqrt(r_ref[k])
    assert mdb > 2.7
    weak = [w for w in small.warnings if w.startswith("weakly checked")]
    assert len(weak) == 1 and "'SW-NW'" in weak[0] and "'SE-NE'" in weak[0]
    assert f"{mdb:.2g} arcsec" in weak[0] and "forward and back" in weak[0]
    assert "'S-N'" not in weak[0] and "'W-E'" not in weak[0]  # 0.115 and 0.53: checked
    # +10 arcsec is found: SW-NW and SE-NE enter the checks only through their sum, so both are named
    big = reduce_survey(_miskey(s, "SW-NW", 3, 10.0))
    suspects = [o for o in big.outliers if o.group == 1]
    assert {o.line for o in suspects} == {"SW-NW", "SE-NE"} and len(suspects) == 8
    assert {(o.line, o.step) for o in suspects} >= {("SW-NW", 3)}
    assert "'SW-NW' (run 1, steps 1-4) and 'SE-NE' (run 1, steps 1-4)" in big.warnings[0]


def test_union_jack_miskeyed_reading_on_a_line_walked_twice_is_named_exactly():
    # W-E is read forward and back: each reading is checked against its repeat, so a swapped pair of
    # digits is pinned to one reading (Baarda's w test, largest |w|), with noise on every reading.
    s = _uj_survey(noise_sd=0.15)
    bad = _miskey(s, "W-E", 6, 3.0, run=1)  # run 2 was walked E -> W: its 6th reading is step 3
    red = reduce_survey(bad)
    top = red.outliers[0]
    assert (top.line, top.run, top.step, top.group, top.group_size) == ("W-E", 2, 3, 1, 1)
    assert red.warnings[0].startswith("suspect reading (largest |w| = ")
    assert "line 'W-E', run 2, step 3" in red.warnings[0]


def test_set_aside_update_matches_a_readjustment_with_the_bias_as_unknown():
    # Two mis-keyed readings on a level grid: iterated data snooping finds both. The w of the other
    # readings once they are set aside equals the w test of an adjustment with one bias unknown per
    # suspect (numpy pseudo-inverse of the augmented dense design; a-posteriori sigma re-estimated
    # with m - rank - 2 degrees of freedom, as in Pope's tau test).
    p = plan_grid(800, 700, 100, margin_mm=50, instrument=Instrument("level", "um/m"))
    s = simulate_survey(p, surface_um, noise_sd=0.2, rng=11)
    bad = _miskey(_miskey(s, "row-3", 4, 9.0), "col-C", 2, -7.0)
    red = reduce_survey(bad)
    ks = [_obs_index(bad, "row-3", 4), _obs_index(bad, "col-C", 2)]
    assert [(o.line, o.step, o.group) for o in red.outliers[:2]] == [("row-3", 4, 1), ("col-C", 2, 2)]
    A, w, l = dense_design(bad)
    E = np.zeros((A.shape[0], 2))
    E[ks, [0, 1]] = 1.0
    Aa = np.hstack([A, E])
    sw = np.sqrt(w)
    As = Aa * sw[:, None]
    R = np.eye(A.shape[0]) - As @ np.linalg.pinv(As.T @ As) @ As.T
    v = R @ (l * sw)
    dof = A.shape[0] - np.linalg.matrix_rank(Aa)
    s0 = np.sqrt(v @ v / dof)
    rdiag = np.diag(R)
    ok = rdiag > 1e-8
    w_ref = np.full(l.size, np.nan)
    w_ref[ok] = v[ok] / (s0 * np.sqrt(rdiag[ok]))
    after = red.standardized_residual_after
    keep = np.isfinite(w_ref)
    keep[ks] = False
    assert np.isnan(after[ks]).all() and keep.sum() > 80
    np.testing.assert_allclose(after[keep], w_ref[keep], rtol=1e-6, atol=1e-9)
    said = [w for w in red.warnings if w.startswith("suspect reading")]
    assert "row-3" in said[0] and "col-C" in said[1]
    assert "the largest once the suspects above are set aside" in said[1]


def test_set_aside_update_with_stated_sigma_matches_numpy():
    # The smeared case: one gross error on a diagonal with the instrument's stated sigma (Baarda). Once
    # the suspect is set aside (a bias unknown for it), w of every reading equals the w test of that
    # augmented adjustment (numpy pseudo-inverse reference), and none exceeds the limit.
    s = _uj_survey(noise_sd=0.15)
    bad = _miskey(s, "SW-NE", 3, 54.0)
    red = reduce_survey(bad)
    k = _obs_index(bad, "SW-NE", 3)
    A, w, l = dense_design(bad)
    # the linearised observations of the adjustment (angle zero moved inside the tangent) are what
    # the residuals refer to: take them from the reduction's own residuals and design
    obs = observations(bad)
    sigma = 0.15 * np.abs(obs.um_per_unit) * np.sqrt(w)  # stated sigma in the weighted form
    sw = np.sqrt(w)
    # a bias on reading k: any reading of the suspect group spans the same (their columns of R are parallel)
    E = np.zeros((A.shape[0], 1))
    E[k, 0] = 1.0
    As = np.hstack([A, E]) * sw[:, None]
    R = np.eye(A.shape[0]) - As @ np.linalg.pinv(As.T @ As) @ As.T
    v = R @ (red.residual_um * sw)  # R projects the first adjustment's residuals as it would the data
    rdiag = np.diag(R)
    ok = rdiag > 1e-6
    w_ref = np.full(l.size, np.nan)
    w_ref[ok] = v[ok] / (sigma[ok] * np.sqrt(rdiag[ok]))
    after = red.standardized_residual_after
    both = np.isfinite(after)
    assert both.sum() > 40 and not np.isfinite(after[k])
    assert np.array_equal(both, ok)  # the 16 diagonal readings are set aside together
    np.testing.assert_allclose(after[both], w_ref[both], rtol=1e-6, atol=1e-9)
    assert np.all(np.abs(after[both]) <= OUTLIER_THRESHOLD)


@pytest.mark.parametrize("layout,kind", [("union-jack", "autocollimator"), ("grid", "indicator"), ("lines", "level")])
def test_closures_of_exact_readings_are_exactly_zero(layout, kind):
    # exact readings close exactly; the rounding noise (~1e-15 µm) must not show as -0.000
    runs = ("forward", "reverse") if kind != "indicator" else ("forward",)
    s = simulate_survey(plan(layout, kind), surface_um, runs=runs, instrument_zero="random", rng=7)
    for c in reduce_survey(s).closures:
        assert c.closure_um == 0.0 and math.copysign(1.0, c.closure_um) == 1.0
        if c.run_spread_um is not None:
            assert c.run_spread_um == 0.0 and math.copysign(1.0, c.run_spread_um) == 1.0


# ------------------------------------------------------------------ sizes (issue 18, issue 15 item 20)
def test_lazy_operator_of_a_mid_size_grid_matches_numpy_pseudo_inverse():
    # A 22 x 22 level grid has 484 stations + 44 zeros: above the size where the reduction forms its
    # dense inverse itself, so the operator is formed only when read; it must equal the numpy
    # reference (pinv of the dense normal matrix), and the heights must be G @ readings (linear units)
    size = 21 * 10.0 + 20.0
    p = plan_grid(size, size, 10.0, margin_mm=10.0, instrument=Instrument("level", "um/m"))
    s = simulate_survey(p, surface_um, noise_sd=0.3, instrument_zero="random", rng=5)
    red = reduce_survey(s)
    assert red.rank.n_unknowns > 450 and callable(red.operator._G)  # not formed yet
    G_ref, _, _ = reference_operator(s)
    np.testing.assert_allclose(red.operator.G, G_ref, atol=1e-9)
    np.testing.assert_allclose(red.heightmap.height_um, G_ref @ observations(s).value_um, atol=1e-9)


def test_oversized_layout_says_what_is_handled():
    # a 2000 x 2000 station grid (about 8 million readings) is refused, and the message says the
    # largest survey handled and why (figures measured in tests/benchmarks/bench_reduction_sizes.py)
    with pytest.raises(LayoutError) as exc:
        plan_grid(1999 * 10 + 60, 1999 * 10 + 60, 10)
    msg = exc.value.message
    assert "largest survey it handles is about a 350 x 350 station grid" in msg
    assert "8 s" in msg and "450 MB" in msg and "docs/performance.md" in msg
