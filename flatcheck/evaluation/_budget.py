"""The uncertainty budget of a flatness figure: every source, propagated by Monte Carlo (JCGM 101).

A survey's reduction is linear in its readings (``heights = G @ rises``), so each source of
error is a linear effect on the station heights (:class:`flatcheck.form.HeightEffect`):

================== ==================================================== ==========================
source             model (per trial)                                    input
================== ==================================================== ==========================
reading            independent error of every reading, normal           stated, residuals (t, nu),
                                                                        repeat readings, default
scale              one relative error of every reading, normal          ``scale_uncertainty_rel``
calibration-       one relative error, normal (the certificate's own    ``calibration_uncertainty_rel``
certificate        uncertainty, when stated apart from the scale's)
resolution         independent rounding of every reading, rectangular   ``resolution`` (+- half a step)
                   +- half a digit step
foot-spacing       one relative error per base length (lines sharing    ``foot_spacing_uncertainty_mm``
                   a base share it), normal
thermal-gradient   a sphere of curvature alpha dT / t added to the      ``temperature_difference_u_k``,
                   surface (free plate, linear temperature difference   ``expansion_coefficient_per_k``,
                   dT top minus underside); dT normal                   ``thickness_mm``
zero-drift         the zero drifts linearly from a run's first reading  ``zero_drift``
                   to its last, one drift per run, normal
sampling           each station's height stands for the surface near    ``sampling_um``, or the
                   it, +- a (rectangular, independent per station)      survey's own curvature
turbulence         autocollimator: independent reading error growing    ``turbulence_per_m``
                   with the beam path, sd = c * distance, normal
reference-level    differential level: the reference level's reading    ``reference_level_uncertainty``
                   error, independent per reading, normal
================== ==================================================== ==========================

Thermal bending: a free plate with a temperature difference dT between its top and underside,
linear through the thickness t, bends into a stress-free sphere of curvature alpha dT / t
(Timoshenko & Woinowsky-Krieger, Theory of Plates and Shells, thin-plate thermal bending, from
memory; thin-plate thermal bending): sag over a span L is alpha dT L^2 / (8 t), corner to centre of a
rectangle of diagonal D alpha dT D^2 / (8 t).

Sampling model (stated here because no standard gives one): along each line, three successive
stations show the surface's curvature; a parabola through them departs from the chord between
two stations by ``|h(i-1) - 2 h(i) + h(i+1)| / 8`` at mid-span. The half-width ``a`` is the
root-mean-square of that over the survey's lines, after the part the reading errors alone put
into the second differences is taken out (their variance from the reading source's propagation);
each station then carries an independent rectangular error of half-width ``a``. A surface with
no curvature between its stations gets ``a = 0``.

Propagation (JCGM 101:2008): one set of ``trials`` with every source gives the combined
distribution (minimum zone and least squares from the same heights); each source is then
propagated alone (``contribution_trials`` trials) and the standard deviation of the minimum
zone it gives is its contribution, the Monte Carlo counterpart of a sensitivity-weighted row of
a JCGM 100 table. For a near-linear output the contributions add in quadrature to the combined
standard uncertainty; the table states both.

Bias: noise inflates a minimum zone; the coverage interval is about the bias-corrected estimate
``F - b`` (``b`` = Monte Carlo mean minus value), with the correction's own uncertainty ``|b| / sqrt(3)``
combined (:func:`flatcheck.form.summarise_flatness`), and U the larger of 2 u and the distances from
the value to that interval's ends.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import InputValueError
from ._budget_sources import LabDefaults, default_thickness_mm, resolve, check_plausible_uncertainty
from ._measured import MeasuredSurface

__all__ = [
    "BudgetEntry",
    "RepeatReadings",
    "UncertaintyBudget",
    "uncertainty_budget",
    "repeat_readings_summary",
    "SOURCE_NAMES",
    "CONTRIBUTION_TRIALS",
]

#: The sources of every survey budget, in table order.
SOURCE_NAMES = (
    "reading", "scale", "calibration-certificate", "resolution", "foot-spacing", "thermal-gradient", "zero-drift",
    "sampling", "turbulence", "reference-level",
)

#: Trials of each source propagated alone (JCGM 101 asks M >> 1/(1-p) for an interval; a standard deviation
#: from 10 000 normal values is within 0.7 % of its own (1/sqrt(2M)), enough for a contribution to 2 digits).
CONTRIBUTION_TRIALS = 10_000

_QUANTITY = {
    "reading": "reading repeatability",
    "scale": "instrument scale (calibration)",
    "calibration-certificate": "the calibration certificate's own uncertainty of the scale",
    "resolution": "instrument resolution",
    "foot-spacing": "foot spacing (base length)",
    "thermal-gradient": "temperature difference top to underside (thermal bow)",
    "zero-drift": "zero drift along a run",
    "sampling": "form between stations",
    "turbulence": "air turbulence along the beam path",
    "reference-level": "reference level (differential mode)",
}


@dataclass(frozen=True)
class BudgetEntry:
    """One row of the budget (JCGM 100 style, contributions by Monte Carlo).

    Attributes
    ----------
    name : str
        One of :data:`SOURCE_NAMES`.
    quantity : str
        What the source is, in words.
    value : float
        Its input value in ``unit`` (a standard uncertainty; for a rectangular distribution the
        half-width), 0 when it does not apply.
    unit : str
        Unit of ``value``.
    distribution : str
        How it was drawn.
    basis : str
        Where the value comes from (stated / default and its source).
    default : bool
        True when the value is a default (lab or built-in), not stated in the survey.
    applies : bool
        False when the source does not apply to this instrument or input.
    standard_uncertainty_um : float
        Its contribution to the standard uncertainty of the minimum-zone flatness (µm): the standard
        deviation of the minimum zone with this source alone propagated.
    """

    name: str
    quantity: str
    value: float
    unit: str
    distribution: str
    basis: str
    default: bool
    applies: bool
    standard_uncertainty_um: float


@dataclass(frozen=True)
class RepeatReadings:
    """Measured repeat readings (``[repeat_readings]`` of a survey) and their judgement.

    Attributes
    ----------
    kind : {"instrument", "gauge"}
        The survey's own instrument read again and again at one place, or a repeat-reading gauge
        moved over the surface (the repeat measurement the plate standards describe).
    unit : str
        Unit of the readings.
    n : int
        Readings in all.
    dof : int
        Degrees of freedom of the pooled standard deviation (readings minus series).
    s : float
        Pooled standard deviation of one reading, in ``unit``.
    range_ : float
        Largest range (max - min) of a series, in ``unit``.
    tolerance : float or None
        Repeat-reading tolerance in ``unit``, as stated.
    verdict : str or None
        ``"conforms"`` or ``"does-not-conform"`` by simple acceptance of the range against the
        tolerance (no uncertainty of the gauge is stated); None without a tolerance.
    used : bool
        Whether the scatter became the reading-repeatability source.
    note : str
        What was done with them, in words.
    """

    kind: str
    unit: str
    n: int
    dof: int
    s: float
    range_: float
    tolerance: float | None
    verdict: str | None
    used: bool
    note: str


@dataclass(frozen=True, eq=False)
class UncertaintyBudget:
    """The uncertainty budget of a surface's flatness.

    Attributes
    ----------
    entries : tuple of BudgetEntry
        One row per source (:data:`SOURCE_NAMES`; a height map has fewer).
    minimum_zone : FlatnessUncertainty
        The whole budget for the minimum-zone flatness: standard uncertainty (``std_um``),
        bias-corrected interval (``corrected_interval_um``) and U (``expanded_um``).
    least_squares : FlatnessUncertainty
        The same for the least-squares peak-to-valley, from the same trials.
    rss_um : float
        Root sum of squares of the contributions (µm); about ``minimum_zone.std_um`` for a
        near-linear output.
    trials, contribution_trials, seed : int
        Trials of the whole propagation and of each source alone; the seed.
    reading_dof : int or None
        Degrees of freedom of a reading repeatability estimated from residuals or repeat readings.
    repeat : RepeatReadings or None
    notes : tuple of str
    reading_scatter_um : float or None
        The residuals' sigma0 (µm per step of the reference base) when the reading repeatability came from it.
    trial_errors_um : ndarray, shape (k, n), or None
        The height errors (µm) of the first ``k`` trials of the whole propagation, every source drawn, one
        column per station in the order of ``loaded.heightmap`` (kept when asked with ``keep_trials``): for
        propagating the same budget through other figures (the bearing's local ones).
    """

    entries: tuple
    minimum_zone: object
    least_squares: object
    rss_um: float
    trials: int
    contribution_trials: int
    seed: int
    reading_dof: int | None = None
    repeat: RepeatReadings | None = None
    notes: tuple = ()
    reading_scatter_um: float | None = None
    trial_errors_um: np.ndarray | None = None

    @property
    def combined_um(self) -> float:
        """Combined standard uncertainty of the minimum-zone flatness (µm)."""
        return float(self.minimum_zone.std_um)

    @property
    def expanded_um(self) -> float:
        """U of the minimum-zone flatness (µm)."""
        return float(self.minimum_zone.expanded_um)

    @property
    def coverage_factor(self) -> float:
        """``U / u_c`` (2 for a near-normal, unbiased output)."""
        u = self.combined_um
        return float(self.expanded_um / u) if u > 0 else float("nan")

    @property
    def interval_um(self) -> tuple:
        """The bias-corrected 95 % coverage interval (µm)."""
        return self.minimum_zone.corrected_interval_um

    @property
    def bias_um(self) -> float:
        """Estimated bias of the minimum zone from the reading noise: Monte Carlo mean minus value (µm)."""
        return float(self.minimum_zone.bias_um)

    @property
    def defaults(self) -> tuple:
        """Names of the sources filled from defaults (that apply)."""
        return tuple(e.name for e in self.entries if e.default and e.applies)

    def entry(self, name: str) -> BudgetEntry:
        """The row of source ``name``."""
        for e in self.entries:
            if e.name == name:
                return e
        raise KeyError(name)

    def to_list(self) -> list:
        """The rows as JSON objects (``flatness.uncertainty_budget`` of ``reduce --json``)."""
        return [
            {
                "name": e.name,
                "quantity": e.quantity,
                "value": e.value,
                "unit": e.unit,
                "distribution": e.distribution,
                "basis": e.basis,
                "default": bool(e.default),
                "applies": bool(e.applies),
                "standard_uncertainty_um": float(e.standard_uncertainty_um),
            }
            for e in self.entries
        ]


# ----------------------------------------------------------------------------- repeat readings
def repeat_readings_summary(rr: dict, *, kind: str, unit: str) -> RepeatReadings:
    """Pool and judge the repeat readings of a survey (``survey.meta["repeat_readings"]``).

    Parameters
    ----------
    rr : dict
        ``kind`` ("instrument" or "gauge"), ``unit``, ``series`` (tuple of tuples of readings),
        ``tolerance`` (or None), as read from the survey file.
    kind, unit : str
        The survey instrument's kind and reading unit.

    Returns
    -------
    RepeatReadings
        ``used`` tells whether the pooled scatter can stand for the survey's reading
        repeatability: readings of the survey's own instrument, or gauge readings (heights)
        for an indicator survey. At least two readings in one series are needed.

    Notes
    -----
    Pooled standard deviation (JCGM 100:2008 4.2, Type A; pooling of series with a common
    variance, from memory of H.2.3): ``s^2 = sum_i sum_j (x_ij - mean_i)^2 / sum_i (n_i - 1)``.
    """
    series = [np.asarray(s, dtype=float) for s in rr["series"]]
    n = int(sum(s.size for s in series))
    dof = int(sum(s.size - 1 for s in series))
    ss = float(sum(((s - s.mean()) ** 2).sum() for s in series))
    s = math.sqrt(ss / dof) if dof > 0 else float("nan")
    rng_ = float(max(float(s_.max() - s_.min()) for s_ in series))
    tol = rr.get("tolerance")
    verdict = None
    if tol is not None:
        verdict = "conforms" if rng_ <= tol else "does-not-conform"
    rkind = rr.get("kind", "instrument")
    runit = rr.get("unit") or unit
    usable = rkind == "instrument" or kind == "indicator"
    if dof < 1:
        note = "one reading per series: no scatter to pool"
        usable = False
    elif not usable:
        note = ("gauge readings are heights; they cannot state the repeatability of an angle instrument's readings, "
                "so they are judged only")
    else:
        note = f"pooled standard deviation {s:.4g} {runit} of {n} readings in {len(series)} series ({dof} dof)"
    return RepeatReadings(rkind, runit, n, dof, s, rng_, tol, verdict, usable, note)


# ----------------------------------------------------------------------------- building the sources
def _second_differences(lines, pos: dict, h: np.ndarray):
    """Index triples (a, b, c) of successive stations along every line, and h[a] - 2 h[b] + h[c]."""
    tri = []
    for stations in lines:
        idx = [pos[s] for s in stations if s in pos]
        for k in range(1, len(idx) - 1):
            tri.append((idx[k - 1], idx[k], idx[k + 1]))
    if not tri:
        return np.zeros((0, 3), dtype=int), np.zeros(0)
    T = np.array(tri, dtype=int)
    return T, h[T[:, 0]] - 2.0 * h[T[:, 1]] + h[T[:, 2]]


def _sampling_half_width(T, d2, cov) -> tuple[float, float]:
    """Half-width ``a`` (µm) of the form between stations from the curvature shown, and the RMS mid-span sag."""
    if d2.size == 0:
        return 0.0, 0.0
    if cov is None:
        noise = np.zeros(d2.size)
    else:
        a, b, c = T[:, 0], T[:, 1], T[:, 2]
        noise = (cov[a, a] + 4 * cov[b, b] + cov[c, c] - 4 * cov[a, b] - 4 * cov[b, c] + 2 * cov[a, c])
    shown = float(np.sqrt(np.mean(d2**2)) / 8.0)
    return float(np.sqrt(max(float(np.mean(d2**2 - noise)), 0.0)) / 8.0), shown


def _cov(effect) -> np.ndarray | None:
    """Covariance (n, n) of the height changes of a normal or rectangular source (its variance only)."""
    if effect is None:
        return None
    E = effect.effect
    if E is None:
        return np.diag(effect.sd**2)
    W = E * effect.sd[:, None]
    return W.T @ W


@dataclass
class _Source:
    name: str
    value: float
    unit: str
    distribution: str
    basis: str
    default: bool
    applies: bool
    effect: object = None  # HeightEffect or None (contribution 0)
    whole: object = None  # the effect used in the whole propagation when it differs (normal approximation)


def _survey_sources(loaded: MeasuredSurface, lab: LabDefaults | None, notes: list):
    """The sources of a survey's budget, with their height effects, and the station order (x, y, h0, dof, repeat)."""
    from ..form import HeightEffect
    from ..survey import observations

    survey, red = loaded.survey, loaded.reduction
    op = red.operator
    if op is None:
        raise InputValueError(
            f"the survey has {red.rank.n_observations} readings, too many for the Monte Carlo operator",
            where=loaded.path,
            fix="evaluate the uncertainty on a coarser survey or state it from the instrument's calibration",
        )
    inst = survey.instrument
    kind, unit = inst.kind, inst.unit
    obs = observations(survey)
    G = np.asarray(op.G, dtype=float)
    n, m = G.shape
    sens = np.asarray(obs.um_per_unit, dtype=float)
    Gs_T = (G * sens[None, :]).T  # (m, n): height change per unit of each reading
    hm = loaded.heightmap
    names = list(op.station_names)
    hpos = {nm: i for i, nm in enumerate(hm.names)}
    order = np.array([hpos[nm] for nm in names], dtype=int)
    x, y, h0 = hm.x_mm[order], hm.y_mm[order], hm.height_um[order]
    spos = {nm: i for i, nm in enumerate(names)}
    meta_u = dict(survey.meta.get("uncertainty") or {})
    where_u = dict((survey.meta.get("file") or {}).get("uncertainty_where") or {})

    def res(key, stated):
        return resolve(key, stated, kind=kind, unit=unit, lab=lab, stated_where=where_u.get(key, key))

    sources = []
    # --- reading repeatability
    reading_dof = None
    repeat = None
    if survey.meta.get("repeat_readings"):
        repeat = repeat_readings_summary(survey.meta["repeat_readings"], kind=kind, unit=unit)
    if inst.reading_uncertainty is not None:
        u = float(inst.reading_uncertainty)
        sources.append(_Source("reading", u, unit, "normal, independent per reading",
                               "stated in the survey file ([instrument] reading_uncertainty)", False, True,
                               HeightEffect("reading", np.full(m, u), Gs_T)))
        from_residuals = False
        if repeat is not None:
            repeat = _replace_used(repeat, False, "judged only: the survey states its reading uncertainty")
    else:
        nu = int(red.redundancy)
        s0 = float(red.sigma0_um)
        zero = np.isfinite(s0) and s0 <= 1e-12 * max(1.0, float(np.max(np.abs(obs.value_um))))
        from_residuals = nu >= 3 and np.isfinite(s0) and not zero
        if zero and nu >= 1:
            notes.append(
                "the readings show no scatter at all about the adjusted surface (sigma0 = 0): a scatter of exactly "
                "zero is not evidence of zero uncertainty, so the reading repeatability is not taken from it")
        if from_residuals:
            u_um = s0 * obs.base_mm / red.ref_base_mm if red.ref_base_mm else np.full(m, s0)
            reading_dof = nu
            sources.append(_Source(
                "reading", float(red.sigma0_reading), unit,
                f"normal, independent per reading; its own uncertainty drawn per trial (scaled chi-squared, {nu} dof)",
                f"from the survey's own residuals: sigma0 {s0:.4g} µm per step of {red.ref_base_mm:g} mm "
                f"({nu} degrees of freedom)" if red.ref_base_mm else
                f"from the survey's own residuals: sigma0 {s0:.4g} µm ({nu} degrees of freedom)",
                False, True, HeightEffect("reading", u_um, G.T, "normal", float(nu))))
            if nu < 10:
                notes.append(
                    f"the reading scatter is estimated from only {nu} degrees of freedom, so it is itself uncertain "
                    "and widens the interval; stating the instrument's reading uncertainty or walking lines forward "
                    "and back gives a firmer figure")
            if repeat is not None:
                repeat = _replace_used(repeat, False, "judged only: the survey's residuals give the repeatability")
        elif repeat is not None and repeat.used:
            s_r = repeat.s
            if repeat.unit != unit:
                from ._budget_sources import _to_reading_unit
                s_r = _to_reading_unit(s_r, repeat.unit, kind, unit)
            reading_dof = repeat.dof if repeat.dof >= 3 else None
            dist = "normal, independent per reading"
            if reading_dof is not None:
                dist += f"; its own uncertainty drawn per trial (scaled chi-squared, {repeat.dof} dof)"
            sources.append(_Source("reading", float(s_r), unit, dist,
                                   f"measured repeat readings ([repeat_readings]): {repeat.note}", False, True,
                                   HeightEffect("reading", np.full(m, s_r), Gs_T, "normal", reading_dof)))
            if repeat.dof < 3:
                notes.append("the repeat readings give fewer than 3 degrees of freedom; their scatter is used as if known")
        else:
            r = res("reading_uncertainty", None)
            why = ("no redundancy" if nu <= 0 else f"only {nu} degree{'s' if nu != 1 else ''} of freedom") if not zero \
                else "a scatter of exactly zero"
            sources.append(_Source("reading", r.value, unit, "normal, independent per reading",
                                   f"{r.basis} (no reading uncertainty stated; the residuals give {why})", True, True,
                                   HeightEffect("reading", np.full(m, r.value), Gs_T)))
            if repeat is not None and not repeat.used:
                pass
    reading_effect = sources[-1].effect
    # --- scale and calibration certificate
    r = res("scale_uncertainty_rel", inst.scale_uncertainty_rel)
    sources.append(_Source("scale", r.value, "relative", "normal, common to every reading", r.basis, r.default, True,
                           HeightEffect("scale", np.array([r.value]), h0[None, :])))
    r = res("calibration_uncertainty_rel", meta_u.get("calibration_uncertainty_rel"))
    sources.append(_Source("calibration-certificate", r.value, "relative", "normal, common to every reading", r.basis,
                           r.default, True, HeightEffect("calibration-certificate", np.array([r.value]), h0[None, :])))
    # --- resolution (rectangular +- half a step)
    r = res("resolution", meta_u.get("resolution"))
    sd_res = r.value / math.sqrt(12.0)  # JCGM 100:2008 4.3.7 / F.2.2.1: rectangular, half-width d/2
    eff = HeightEffect("resolution", np.full(m, sd_res), Gs_T, "rectangular")
    whole = None
    if m > n:
        whole = HeightEffect("resolution", np.full(m, sd_res), Gs_T, "normal")
    sources.append(_Source("resolution", r.value, unit, "rectangular, +- half a step, independent per reading",
                           r.basis, r.default, True, eff, whole))
    # --- foot spacing
    if inst.reads_heights:
        sources.append(_Source("foot-spacing", 0.0, "mm", "-", "does not apply to an indicator (it reads heights)",
                               False, False))
    else:
        r = res("foot_spacing_uncertainty_mm", inst.foot_spacing_uncertainty_mm)
        bases = np.unique(obs.base_mm[obs.base_mm > 0])
        rows = np.array([G @ (obs.value_um * (obs.base_mm == b) / b) for b in bases])  # µm per mm of base error
        sources.append(_Source("foot-spacing", r.value, "mm", "normal, common to the readings of one base length",
                               r.basis, r.default, True,
                               HeightEffect("foot-spacing", np.full(bases.size, r.value), rows)))
    # --- thermal gradient
    sources.append(_thermal_source(survey.meta, x, y, survey.surface.length_mm, survey.surface.width_mm,
                                   survey.surface.material, res, meta_u, where_u))
    # --- zero drift along a run (linear from the first reading taken to the last)
    r = res("zero_drift", meta_u.get("zero_drift"))
    rows = []
    for li, ln in enumerate(survey.lines):
        for ri, run in enumerate(ln.runs):
            sel = np.flatnonzero((obs.line == li) & (obs.run == ri))
            N = sel.size
            if N < 2:
                continue
            step = obs.step[sel]
            t_idx = step if run.order == "forward" else (N - 1 - step)
            sign = -1.0 if run.flip_sign else 1.0
            v = np.zeros(m)
            v[sel] = sign * (t_idx / (N - 1)) * sens[sel]
            rows.append(G @ v)
    rows = np.array(rows) if rows else np.zeros((0, n))
    sources.append(_Source("zero-drift", r.value, unit, "normal, one linear drift per run", r.basis, r.default, True,
                           HeightEffect("zero-drift", np.full(rows.shape[0], r.value), rows) if rows.shape[0] else None))
    # --- sampling between stations
    T, d2 = _second_differences([ln.stations for ln in survey.lines], spos, h0)
    sources.append(_sampling_source(meta_u, where_u, T, d2, reading_effect, n, lab))
    # --- turbulence (autocollimators) and the reference level (differential levels)
    r = res("turbulence_per_m", meta_u.get("turbulence_per_m"))
    if r.value is None:
        sources.append(_Source("turbulence", 0.0, f"{unit} per m", "-", r.basis, False, False))
    elif from_residuals:
        sources.append(_Source("turbulence", r.value, f"{unit} per m", "-",
                               "included in the scatter of the residuals (the reading source)", False, False))
    else:
        dist_mm = np.zeros(m)
        for li, ln in enumerate(survey.lines):
            for ri, run in enumerate(ln.runs):
                sel = np.flatnonzero((obs.line == li) & (obs.run == ri))
                N = sel.size
                t_idx = obs.step[sel] if run.order == "forward" else (N - 1 - obs.step[sel])
                dist_mm[sel] = (t_idx + 1) * obs.base_mm[sel]
        sd = r.value * dist_mm / 1000.0
        sources.append(_Source("turbulence", r.value, f"{unit} per m",
                               "normal, independent per reading, sd = value x beam path (instrument at the run's "
                               "first station)", r.basis, r.default, True, HeightEffect("turbulence", sd, Gs_T)))
    r = res("reference_level_uncertainty", meta_u.get("reference_level_uncertainty"))
    if r.value is None:
        sources.append(_Source("reference-level", 0.0, unit, "-", r.basis, False, False))
    elif from_residuals:
        sources.append(_Source("reference-level", r.value, unit, "-",
                               "included in the scatter of the residuals (the reading source)", False, False))
    else:
        sources.append(_Source("reference-level", r.value, unit, "normal, independent per reading", r.basis, r.default,
                               True, HeightEffect("reference-level", np.full(m, r.value), Gs_T)))
    return sources, x, y, h0, reading_dof, repeat


def _replace_used(rep: RepeatReadings, used: bool, note: str) -> RepeatReadings:
    import dataclasses

    if not rep.used:  # never usable: its note already says why
        return rep
    return dataclasses.replace(rep, used=used, note=f"{rep.note}; {note}")


def _thermal_source(meta, x, y, length_mm, width_mm, material, res, meta_u, where_u):
    from ..form import HeightEffect

    ru = res("temperature_difference_u_k", meta_u.get("temperature_difference_u_k"))
    ra = res("expansion_coefficient_per_k", meta_u.get("expansion_coefficient_per_k"))
    t_stated = meta.get("thickness_mm")
    if t_stated is not None:
        t_mm, t_basis, t_default = float(t_stated), "thickness stated ([surface] thickness_mm)", False
    else:
        L = length_mm if length_mm else float(np.ptp(x))
        W = width_mm if width_mm else float(np.ptp(y))
        t_mm = default_thickness_mm(L, W)
        t_basis = (f"thickness not stated: {t_mm:.0f} mm assumed (15 % of the longer side, at least 50 mm; "
                   "common practice, no single source)")
        t_default = True
    cx, cy = 0.5 * (x.min() + x.max()), 0.5 * (y.min() + y.max())
    # sphere of curvature alpha dT / t (1/mm): height alpha dT r^2 / (2 t) mm = 1e3 x that in µm, per K of dT
    shape = ra.value * ((x - cx) ** 2 + (y - cy) ** 2) / (2.0 * t_mm) * 1e3
    basis = f"dT: {ru.basis}; alpha {ra.value:g}/K: {ra.basis}; {t_basis}"
    mat = (material or "").lower()
    if ra.default and mat and "granite" not in mat and "stone" not in mat:
        basis += f"; the surface is {material!r}: the default coefficient is granite's, state expansion_coefficient_per_k"
    return _Source("thermal-gradient", ru.value, "K", f"normal; bow of curvature alpha dT / t, t = {t_mm:.4g} mm",
                   basis, ru.default or ra.default or t_default, True,
                   HeightEffect("thermal-gradient", np.array([ru.value]), shape[None, :]))


def _sampling_source(meta_u, where_u, T, d2, reading_effect, n, lab):
    from ..form import HeightEffect

    stated = meta_u.get("sampling_um")
    if stated is not None:
        a = float(stated)
        basis = f"stated in the survey file ({where_u.get('sampling_um', 'sampling_um')})"
        default = False
    elif lab is not None and "sampling_um" in lab.common:
        a = float(lab.common["sampling_um"])
        basis, default = f"lab default from {lab.path}", True
    else:
        a, shown = _sampling_half_width(T, d2, _cov(reading_effect))
        basis = (f"model (docs/methods.md): from the curvature the survey itself shows, the RMS mid-span departure "
                 f"|h(i-1) - 2 h(i) + h(i+1)| / 8 along the lines ({shown:.3g} µm) less what the reading errors "
                 f"alone put there ({len(d2)} station triples)")
        default = True
    eff = HeightEffect("sampling", np.full(n, a / math.sqrt(3.0)), None, "rectangular") if a > 0 else None
    return _Source("sampling", a, "µm", "rectangular, +- value, independent per station", basis, default, True, eff)


def _heightmap_sources(loaded: MeasuredSurface, u_height_um: float, lab, notes):
    from ..form import HeightEffect

    hm = loaded.heightmap
    x, y, h0 = hm.x_mm, hm.y_mm, hm.height_um
    n = x.size

    def res(key, stated):
        return resolve(key, stated, kind="height-map", unit="um", lab=lab)

    u = float(u_height_um)
    check_plausible_uncertainty("reading_uncertainty", u, kind="indicator", unit="um", where="--u-height-um")
    sources = [_Source("reading", u, "µm", "normal, independent per point", "stated (--u-height-um)", False, True,
                       HeightEffect("reading", np.full(n, u), None))]
    sources.append(_Source("scale", 0.0, "relative", "-", "not known for a height map: include it in U stated with "
                           "--uncertainty-um if it matters", False, False))
    sources.append(_thermal_source({}, x, y, hm.length_mm, hm.width_mm, "", res, {}, {}))
    grid = hm.grid
    lines = []
    if grid is not None:
        xs, ys, _ = grid
        key = {(float(a), float(b)): i for i, (a, b) in enumerate(zip(x, y))}
        for yy in ys:
            lines.append([key[(float(xx), float(yy))] for xx in xs if (float(xx), float(yy)) in key])
        for xx in xs:
            lines.append([key[(float(xx), float(yy))] for yy in ys if (float(xx), float(yy)) in key])
    pos = {i: i for i in range(n)}
    T, d2 = _second_differences(lines, pos, h0)
    sources.append(_sampling_source({}, {}, T, d2, sources[0].effect, n, lab))
    return sources, x, y, h0


# ----------------------------------------------------------------------------- the budget
def uncertainty_budget(
    loaded: MeasuredSurface,
    *,
    trials: int = 100_000,
    seed: int | None = None,
    progress=None,
    lab_defaults: LabDefaults | None = None,
    u_height_um: float | None = None,
    contribution_trials: int | None = None,
    coverage: float = 0.95,
    keep_trials: int = 0,
) -> UncertaintyBudget:
    """The full uncertainty budget of a surface's flatness (module notes).

    Parameters
    ----------
    loaded : MeasuredSurface
        A reduced survey (or a height map with ``u_height_um``).
    trials : int
        Trials of the whole propagation (JCGM 101: 1e5 by default).
    seed : int, optional
        Seed; drawn and reported when None.
    progress : callable, optional
        ``progress(k)`` with increments that add up to ``trials`` over the whole run (every
        source's own propagation included).
    lab_defaults : LabDefaults, optional
        A lab's defaults, overriding the built-in ones.
    u_height_um : float, optional
        Height maps: standard uncertainty of each height (µm).
    contribution_trials : int, optional
        Trials of each source alone (default ``min(trials, CONTRIBUTION_TRIALS)``).
    coverage : float
        Coverage probability of the interval.
    keep_trials : int
        Keep the height errors of the first ``keep_trials`` trials of the whole propagation
        (``UncertaintyBudget.trial_errors_um``; at most ``trials``).

    Returns
    -------
    UncertaintyBudget

    Raises
    ------
    InputValueError
        A height map without ``u_height_um``; a survey too large for the dense operator; an
        implausible input.
    """
    from ..form import propagate_heights, solve_minimum_zone, summarise_flatness

    if seed is not None and (isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or seed < 0):
        raise InputValueError(f"the seed must be a whole number 0 or above, got {seed!r}", where="--seed",
                              fix="give --seed 0 or a larger whole number (or leave it out)")
    notes = []
    reading_dof = None
    repeat = None
    if loaded.survey is None:
        if u_height_um is None:
            raise InputValueError("a height map carries no reading uncertainty", where=loaded.path,
                                  fix="give the standard uncertainty of one height with --u-height-um")
        sources, x, y, h0 = _heightmap_sources(loaded, u_height_um, lab_defaults, notes)
    else:
        sources, x, y, h0, reading_dof, repeat = _survey_sources(loaded, lab_defaults, notes)
    trials = int(trials)
    ct = int(contribution_trials) if contribution_trials is not None else min(trials, CONTRIBUTION_TRIALS)
    ct = max(ct, 100)
    if seed is None:
        seed = int(np.random.SeedSequence().entropy % (2**63))
    active = [s for s in sources if s.applies and s.effect is not None and np.any(np.asarray(s.effect.sd) > 0)]
    total = trials + ct * len(active)
    tick = None if progress is None else (lambda k: progress(k * trials / total))
    start = solve_minimum_zone(x, y, h0)
    effects = [s.whole or s.effect for s in active]
    keep = max(0, min(int(keep_trials), trials))
    whole = propagate_heights(x, y, h0, effects, trials=trials, seed=seed, progress=tick, start=start, keep_heights=keep)
    errors = None
    if keep:  # the kept heights are the estimate about its least-squares plane plus each trial's errors
        A = np.column_stack([np.ones_like(x), x - x.mean(), y - y.mean()])
        about = h0 - A @ np.linalg.lstsq(A, h0, rcond=None)[0]
        errors = np.empty((keep, x.size))
        hm = loaded.heightmap
        if loaded.survey is None:
            errors[:] = whole.heights_um - about
        else:  # back to the height map's station order
            pos = {nm: i for i, nm in enumerate(hm.names)}  # the order _survey_sources took them in
            cols = np.array([pos[nm] for nm in loaded.reduction.operator.station_names], dtype=int)
            errors[:, cols] = whole.heights_um - about
    contrib = {}
    for j, s in enumerate(active):
        sub_seed = int(np.random.SeedSequence([int(seed), j + 1]).generate_state(1)[0])
        eff = s.effect
        if eff.distribution == "rectangular" and eff.effect is not None and eff.sd.size * x.size > 2_000_000:
            eff = s.whole or eff  # very large surveys: the normal approximation of the same variance
        one = propagate_heights(x, y, h0, [eff], trials=ct, seed=sub_seed, progress=tick, least_squares=False,
                                start=start)
        contrib[s.name] = float(one.mz_um.std(ddof=1))
    mz = summarise_flatness(whole.estimate_mz_um, whole.mz_um, seed=whole.seed, coverage=coverage,
                            n_fallback=whole.n_fallback, reference="minimum_zone")
    ls = summarise_flatness(whole.estimate_ls_um, whole.ls_um, seed=whole.seed, coverage=coverage,
                            reference="least_squares")
    entries = tuple(
        BudgetEntry(s.name, _QUANTITY[s.name], float(s.value or 0.0), s.unit, s.distribution, s.basis,
                    bool(s.default), bool(s.applies), contrib.get(s.name, 0.0))
        for s in sources
    )
    rss = float(math.sqrt(sum(e.standard_uncertainty_um**2 for e in entries)))
    if any(s.whole is not None for s in active):
        notes.append("in the whole propagation the rounding of many readings enters each height as a normal error of "
                     "the same variance (each height combines many readings: central limit); alone it is drawn "
                     "rectangular")
    if mz.estimated_bias_um is not None and mz.estimated_bias_um > 0.5 * mz.std_um:
        notes.append(
            f"random errors inflate the measured minimum zone by about {mz.estimated_bias_um:.2g} µm (Monte Carlo "
            "mean minus value): the coverage interval is about the corrected value, and U reaches its ends")
    scatter = None
    if loaded.survey is not None and reading_dof is not None and entries[0].basis.startswith("from the survey's own"):
        scatter = float(loaded.reduction.sigma0_um)
    return UncertaintyBudget(entries, mz, ls, rss, trials, ct, int(seed), reading_dof, repeat, tuple(notes), scatter,
                             errors)
