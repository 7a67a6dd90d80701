"""Monte Carlo uncertainty of flatness (JCGM 101:2008, propagation of distributions).

Flatness (minimum zone, or peak-to-valley about the least-squares plane) is not a
linear function of the readings: the contact points change from one possible
data set to another and random errors collect at the extremes. The law of
propagation of uncertainty (JCGM 100) therefore does not apply in general, and
flatcheck propagates distributions instead (JCGM 101:2008):

1. Draw ``M`` perturbed observation vectors: each observation gets independent
   Gaussian noise (standard deviation ``u_value_um``); all observations share one
   relative scale error (instrument calibration, standard uncertainty
   ``scale_u_rel``); all observations of a ``group`` (lines sharing one foot
   spacing) share one relative base-length error (``group_u_rel``).
2. Reduce each to heights, ``heights = G @ observations`` (``G`` is the linear
   operator of the survey reduction; ``G = None`` when the observations are the
   heights themselves).
3. Evaluate the flatness of each height set exactly (certified dual simplex
   warm-started from the contacts of the unperturbed data, see
   :mod:`flatcheck._minzone`).
4. Summarise the M values: mean, standard deviation, coverage intervals.

Perturbation model, for observation ``k`` in group ``g(k)``::

    v_k* = v_k * (1 + d_scale) * (1 + d_g(k)) + c * e_k,
    d_scale ~ N(0, scale_u_rel^2),  d_g ~ N(0, group_u_rel[g]^2),  e_k ~ N(0, u_k^2),

with ``c = 1`` when the ``u_k`` are known, and, when they are an estimate with
``nu`` degrees of freedom (a survey's own scatter sigma0 from its residuals),
one ``c = sqrt(nu / chi2_nu)`` drawn per trial, shared by all observations:
``sigma = s * c`` is then drawn from the distribution of sigma given the
estimate ``s`` under the usual non-informative prior (``nu s^2 / sigma^2`` is
chi-squared with ``nu`` degrees of freedom). For a single quantity this is
exactly the scaled and shifted t-distribution that JCGM 101:2008 assigns to the
mean of repeated indications (clause 6.4.9, from memory; a normal draw divided by
``sqrt(chi2_nu / nu)`` is how a t variate is formed); here it extends to every
height and so to the flatness, so the interval covers the truth about 95 % of
the time even with few degrees of freedom. Its variance is ``nu / (nu - 2)``
times that of ``e_k``, finite only for ``nu > 2``: fewer than 3 are refused.

Whole budgets (:func:`propagate_heights`): every error source is given as its linear
effect on the station heights (:class:`HeightEffect`: a reading error through the
reduction operator, a scale error as the heights themselves, a thermal bow as a
sphere...), drawn independently per trial, normal or rectangular, and added; each
trial's minimum zone and least-squares peak-to-valley come from the same heights.
:func:`summarise_flatness` states the result with the bias correction (the measured
minimum zone is biased upward by noise; see its notes). The uncertainty budget of a
survey (:mod:`flatcheck.evaluation`) is built on these two.

References
----------
JCGM 101:2008, Evaluation of measurement data - Supplement 1 to the "Guide to the
expression of uncertainty in measurement" - Propagation of distributions using a
Monte Carlo method (clauses 7.6 estimate and standard uncertainty, 7.7 coverage
intervals).
JCGM 100:2008 (GUM), law of propagation of uncertainty.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ._minzone import _batch_normalised, _frame, _warm_basis, minimum_zone_batch, solve_minimum_zone
from ..errors import InputValueError

__all__ = [
    "FlatnessUncertainty",
    "monte_carlo_flatness",
    "coverage_intervals",
    "HeightEffect",
    "HeightPropagation",
    "propagate_heights",
    "summarise_flatness",
]

#: Coverage factor of the "k = 2 equivalent" expanded uncertainty (JCGM 100:2008, 6.2-6.3:
#: k = 2 gives about 95 % coverage for a normal distribution).
K_EXPANDED = 2.0


@dataclass(frozen=True)
class FlatnessUncertainty:
    """Result of a Monte Carlo evaluation of flatness uncertainty.

    Attributes
    ----------
    estimate_um : float
        Flatness of the unperturbed data (µm): the value to report.
    mean_um : float
        Mean of the Monte Carlo flatness values (µm).
    std_um : float
        Their standard deviation: the standard uncertainty (µm, JCGM 101 7.6).
    bias_um : float
        ``mean_um - estimate_um`` (µm). Positive when random errors inflate the
        zone, as they usually do for minimum zone and peak-to-valley.
    interval_um : tuple of float
        Probabilistically symmetric coverage interval (µm; 2.5 % of the values below
        and 2.5 % above for ``coverage = 0.95``; JCGM 101 7.7.1).
    shortest_interval_um : tuple of float
        Shortest coverage interval (µm; JCGM 101 7.7.2).
    coverage : float
        Coverage probability of both intervals.
    expanded_um : float
        "k = 2 equivalent" expanded uncertainty: ``K_EXPANDED * std_um`` (µm). It is
        what a GUM-style certificate states as ``U (k = 2)``. Without the bias
        correction it does not include the bias. With it (:func:`summarise_flatness`
        with ``bias_correction=True``) it is the larger of ``K_EXPANDED * std_um`` and the
        distances from the estimate to both ends of ``corrected_interval_um``, so that
        ``estimate +- U`` holds the corrected interval.
    trials : int
        Number of Monte Carlo trials M.
    seed : int
        Seed of the random generator (repeat the run by passing it back).
    reference : str
        ``"minimum_zone"`` or ``"least_squares"``.
    n_fallback : int
        Trials whose zone needed the HiGHS fallback (diagnostic).
    samples_um : ndarray, shape (trials,), or None
        The M flatness values (µm) when requested.
    corrected_interval_um : tuple of float or None
        Bias-corrected 95 % interval (µm): ``F - b +- 2 sqrt(u^2 + b^2/3)`` about the
        bias-corrected estimate (:func:`summarise_flatness`); None when not asked for.
    corrected_estimate_um : float or None
        Bias-corrected estimate ``F - estimated_bias_um`` (µm); None when not asked for.
    estimated_bias_um : float or None
        The bias of the measured value that the correction removes (µm, ``bias_um``); None when
        not asked for.
    corrected_std_um : float or None
        Standard uncertainty of the corrected estimate: ``sqrt(std_um^2 + bias_um^2 / 3)`` (µm; see
        :func:`summarise_flatness`); None when not asked for.
    """

    estimate_um: float
    mean_um: float
    std_um: float
    bias_um: float
    interval_um: tuple
    shortest_interval_um: tuple
    coverage: float
    expanded_um: float
    trials: int
    seed: int
    reference: str
    n_fallback: int
    samples_um: np.ndarray | None = field(default=None, repr=False)
    corrected_interval_um: tuple | None = None
    corrected_estimate_um: float | None = None
    estimated_bias_um: float | None = None
    corrected_std_um: float | None = None


def coverage_intervals(samples, coverage: float = 0.95):
    """Probabilistically symmetric and shortest coverage intervals of Monte Carlo values.

    Follows JCGM 101:2008 7.7 (from memory of the clause): sort the M values,
    ``q = p*M`` if that is an integer, else ``int(p*M + 1/2)``; the symmetric
    interval is ``[y(r), y(r+q)]`` with ``r = (M - q)/2`` (``int((M - q + 1)/2)``
    if not an integer); the shortest is the ``[y(r), y(r+q)]`` of least width.
    Indices are 1-based as in the Supplement.

    Parameters
    ----------
    samples : array_like, shape (M,)
        Monte Carlo values (any unit).
    coverage : float
        Coverage probability p, 0 < p < 1.

    Returns
    -------
    symmetric, shortest : tuple of float
        ``(low, high)`` in the unit of ``samples``.
    """
    y = np.sort(np.asarray(samples, dtype=float).ravel())
    M = y.size
    pm = coverage * M
    q = int(pm) if float(pm).is_integer() else int(pm + 0.5)
    q = min(max(q, 1), M - 1)
    half = (M - q) / 2
    r = int(half) if float(half).is_integer() else int((M - q + 1) / 2)
    r = max(r, 1)
    sym = (float(y[r - 1]), float(y[r - 1 + q]))
    widths = y[q:] - y[: M - q]
    k = int(np.argmin(widths))
    return sym, (float(y[k]), float(y[k + q]))


def _as_per_obs(u, n, name):
    arr = np.broadcast_to(np.asarray(u, dtype=float), (n,)).copy() if np.ndim(u) == 0 else np.asarray(u, float)
    if arr.shape != (n,):
        raise InputValueError(f"{name} has {arr.size} values for {n} observations", fix="give one value or one per observation")
    if not np.all(np.isfinite(arr)) or np.any(arr < 0):
        raise InputValueError(f"{name} must be finite and not negative", fix="give standard uncertainties >= 0")
    return arr


def monte_carlo_flatness(
    x_mm,
    y_mm,
    value_um,
    *,
    G=None,
    u_value_um,
    scale_u_rel: float = 0.0,
    group=None,
    group_u_rel=None,
    trials: int = 100_000,
    seed: int | None = None,
    progress=None,
    coverage: float = 0.95,
    reference: str = "minimum_zone",
    batch: int = 10_000,
    keep_samples: bool = False,
    u_dof: float | None = None,
) -> FlatnessUncertainty:
    """Uncertainty of flatness by Monte Carlo propagation (JCGM 101:2008).

    Parameters
    ----------
    x_mm, y_mm : array_like, shape (n_stations,)
        Station positions in mm.
    value_um : array_like, shape (n_obs,)
        Observations in µm: rises per step (with ``G``) or heights (``G = None``).
    G : array_like, shape (n_stations, n_obs), optional
        Linear reduction operator, heights = ``G @ value_um``. ``None``: identity.
    u_value_um : float or array_like, shape (n_obs,)
        Standard uncertainty of each observation in µm (independent Gaussian).
    scale_u_rel : float
        Relative standard uncertainty of the common instrument scale (e.g. 0.002).
    group : array_like, shape (n_obs,), optional
        Group label of each observation (e.g. the line it belongs to, or its foot
        spacing); observations of a group share one relative base-length error.
    group_u_rel : float or dict, optional
        Relative standard uncertainty of each group's base length: one value for all
        groups, or ``{label: u_rel}``.
    trials : int
        Number of Monte Carlo trials M (JCGM 101 suggests M >= 1e4/(1-p); 1e5 for 95 %).
    seed : int, optional
        Seed of the random generator; ``None`` draws one from the operating system
        and reports it in the result.
    progress : callable, optional
        Called as ``progress(k)`` after each batch with the number ``k`` of trials
        just finished (an increment), e.g. a progress bar's ``advance``.
    coverage : float
        Coverage probability of the intervals.
    reference : {"minimum_zone", "least_squares"}
        Flatness definition: vertical minimum zone, or peak-to-valley about the
        least-squares plane.
    batch : int
        Trials evaluated together (memory ~ batch x n_stations x 8 bytes x a few).
    keep_samples : bool
        Return the M flatness values in ``samples_um``.
    u_dof : float, optional
        Degrees of freedom ``nu`` of ``u_value_um`` when it is an estimate (e.g. the
        sigma0 of a least-squares adjustment, ``nu`` = its redundancy): each trial's
        reading noise is scaled by one draw of ``sqrt(nu / chi2_nu)`` (module notes).
        ``None`` (or infinity): ``u_value_um`` is known. At least 3.

    Returns
    -------
    FlatnessUncertainty

    Raises
    ------
    InputValueError
        Shapes that do not match, negative or non-finite uncertainties, bad options.
    GeometryError
        Stations that cannot define a plane.

    Examples
    --------
    A pure scale error scales the flatness: its standard uncertainty is
    ``estimate * scale_u_rel``.

    >>> import numpy as np
    >>> x, y = np.meshgrid(np.arange(5.0) * 100, np.arange(4.0) * 100)
    >>> z = 1e-4 * ((x - 200) ** 2 + (y - 150) ** 2)
    >>> r = monte_carlo_flatness(x.ravel(), y.ravel(), z.ravel(), u_value_um=0.0,
    ...                          scale_u_rel=0.01, trials=20000, seed=1)
    >>> abs(r.std_um / (r.estimate_um * 0.01) - 1) < 0.03
    True
    """
    x = np.asarray(x_mm, dtype=float).ravel()
    y = np.asarray(y_mm, dtype=float).ravel()
    v = np.asarray(value_um, dtype=float).ravel()
    if not np.all(np.isfinite(v)):
        bad = int(np.flatnonzero(~np.isfinite(v))[0])
        raise InputValueError("observation is not a finite number", where=f"observation {bad + 1}", fix="remove it or give a number")
    if reference not in ("minimum_zone", "least_squares"):
        raise InputValueError(f"unknown reference {reference!r}", fix="use minimum_zone or least_squares")
    if not (0.0 < coverage < 1.0):
        raise InputValueError(f"coverage {coverage} is not between 0 and 1", fix="use e.g. 0.95")
    trials = int(trials)
    if trials < 100:
        raise InputValueError(f"{trials} trials are too few for a coverage interval", fix="use at least 100 (1e5 recommended)")
    n_obs = v.size
    if G is None:
        Gm = None
        if n_obs != x.size:
            raise InputValueError(
                f"{n_obs} heights for {x.size} stations", fix="give one height per station or pass the reduction operator G"
            )
    else:
        Gm = np.asarray(G, dtype=float)
        if Gm.shape != (x.size, n_obs):
            raise InputValueError(
                f"G has shape {Gm.shape}, expected ({x.size}, {n_obs})", fix="G maps observations to station heights"
            )
    u = _as_per_obs(u_value_um, n_obs, "u_value_um")
    if u_dof is not None:
        u_dof = float(u_dof)
        if not (u_dof >= 3):  # also NaN
            raise InputValueError(
                f"u_dof is {u_dof:g}: an uncertainty estimated with fewer than 3 degrees of freedom has no finite "
                "standard deviation (t-distribution)",
                fix="state the uncertainty from the instrument's calibration, or gather more degrees of freedom",
            )
        if not np.isfinite(u_dof):
            u_dof = None
    if not (np.isfinite(scale_u_rel) and scale_u_rel >= 0):
        raise InputValueError("scale_u_rel must be finite and not negative", fix="give a relative standard uncertainty")
    ginv, gu = None, None
    if group is not None:
        labels = np.asarray(group).ravel()
        if labels.size != n_obs:
            raise InputValueError(f"group has {labels.size} labels for {n_obs} observations", fix="one label per observation")
        uniq, ginv = np.unique(labels, return_inverse=True)
        if group_u_rel is None:
            raise InputValueError("group given without group_u_rel", fix="give the relative base-length uncertainty")
        if isinstance(group_u_rel, dict):
            missing = [g for g in uniq.tolist() if g not in group_u_rel]
            if missing:
                raise InputValueError(f"no group_u_rel for group {missing[0]!r}", fix="give one value per group")
            gu = np.array([float(group_u_rel[g]) for g in uniq.tolist()])
        else:
            gu = np.full(uniq.size, float(group_u_rel))
        if not np.all(np.isfinite(gu)) or np.any(gu < 0):
            raise InputValueError("group_u_rel must be finite and not negative", fix="give relative standard uncertainties")

    if seed is None:
        seed = int(np.random.SeedSequence().entropy % (2**63))
    rng = np.random.default_rng(seed)

    heights0 = v if Gm is None else Gm @ v
    if reference == "minimum_zone":
        start = solve_minimum_zone(x, y, heights0)
        estimate = start.t_um
    else:
        A = np.column_stack([np.ones_like(x), x - x.mean(), y - y.mean()])
        P = np.linalg.pinv(A)  # (3, n): least-squares plane coefficients of a height set
        r0 = heights0 - A @ (P @ heights0)
        estimate = float(r0.max() - r0.min())

    out = np.empty(trials)
    n_fallback = 0
    done = 0
    while done < trials:
        m = min(batch, trials - done)
        obs = np.broadcast_to(v, (m, n_obs)).copy()
        if scale_u_rel > 0:
            obs *= 1.0 + scale_u_rel * rng.standard_normal((m, 1))
        if ginv is not None:
            obs *= (1.0 + gu * rng.standard_normal((m, gu.size)))[:, ginv]
        noise = u * rng.standard_normal((m, n_obs))
        if u_dof is not None:  # the estimated sigma's own uncertainty: one scale per trial
            noise *= np.sqrt(u_dof / rng.chisquare(u_dof, m))[:, None]
        obs += noise
        H = obs if Gm is None else obs @ Gm.T
        if reference == "minimum_zone":
            t, fb = minimum_zone_batch(x, y, H, start=start)
            n_fallback += fb
        else:
            R = H - (H @ P.T) @ A.T  # residuals about each trial's least-squares plane
            t = R.max(axis=1) - R.min(axis=1)
        out[done : done + m] = t
        done += m
        if progress is not None:
            progress(m)

    mean = float(out.mean())
    std = float(out.std(ddof=1))
    sym, short = coverage_intervals(out, coverage)
    return FlatnessUncertainty(
        estimate_um=float(estimate),
        mean_um=mean,
        std_um=std,
        bias_um=mean - float(estimate),
        interval_um=sym,
        shortest_interval_um=short,
        coverage=float(coverage),
        expanded_um=K_EXPANDED * std,
        trials=trials,
        seed=int(seed),
        reference=reference,
        n_fallback=int(n_fallback),
        samples_um=out if keep_samples else None,
    )


# ----------------------------------------------------------------------------- error sources as height effects
_DISTRIBUTIONS = ("normal", "rectangular")
_SQRT3 = float(np.sqrt(3.0))


@dataclass(frozen=True, eq=False)
class HeightEffect:
    """One independent error source, as its linear effect on the station heights (a JCGM 101 input).

    The source is ``k`` input quantities ``q_j`` (a reading error per reading, one scale
    error, one temperature difference...), each drawn independently per trial with
    standard deviation ``sd[j]``; the station heights change by ``q @ effect`` (µm). A
    survey's reduction is linear in its readings, so every error of the readings reaches
    the heights this way (``effect = (G * sensitivity).T``).

    Attributes
    ----------
    name : str
        Short name of the source (e.g. ``"reading"``).
    sd : ndarray, shape (k,)
        Standard deviation of each input quantity, in the quantity's own unit.
    effect : ndarray, shape (k, n), or None
        Height change in µm per unit of each quantity; None for the identity (``k = n``,
        the quantities are height errors in µm).
    distribution : {"normal", "rectangular"}
        Distribution of each quantity (rectangular: half-width ``sd * sqrt(3)``).
    dof : float or None
        Normal quantities only: ``sd`` is an estimate with ``dof`` degrees of freedom; each
        trial scales all ``k`` draws by one ``sqrt(dof / chi2_dof)`` (module notes). At least 3.
    """

    name: str
    sd: np.ndarray
    effect: np.ndarray | None = None
    distribution: str = "normal"
    dof: float | None = None

    @property
    def sd_scalar(self) -> float | None:
        """The common standard deviation when all ``k`` are equal (a scalar multiply is cheaper), else None."""
        sd = np.asarray(self.sd)
        return float(sd.flat[0]) if sd.size and np.all(sd == sd.flat[0]) else None

    def compressed(self) -> "HeightEffect":
        """The same normal source with at most ``n`` quantities (one draw per station, not per reading).

        A normal vector ``q`` with covariance ``diag(sd^2)`` gives heights with covariance
        ``C = effect.T diag(sd^2) effect`` (n x n); any factor ``C = L.T L`` gives the same
        distribution. ``L`` from the eigen-decomposition keeps only the nonzero directions,
        so a survey with many more readings than stations costs ``n`` draws per trial, not
        one per reading. Rectangular sources and sources already small are returned as they are.
        """
        if self.distribution != "normal" or self.effect is None or self.effect.shape[0] <= self.effect.shape[1]:
            return self
        E = self.effect * self.sd[:, None]
        C = E.T @ E
        w, V = np.linalg.eigh(C)
        keep = w > max(float(w.max()), 0.0) * 1e-13
        if not keep.any():
            return HeightEffect(self.name, np.zeros(1), np.zeros((1, E.shape[1])), "normal", self.dof)
        L = (V[:, keep] * np.sqrt(w[keep])).T  # (r, n), L.T L = C
        return HeightEffect(self.name, np.ones(L.shape[0]), L, "normal", self.dof)


def _check_effect(e: HeightEffect, n: int) -> HeightEffect:
    sd = np.atleast_1d(np.asarray(e.sd, dtype=float))
    if e.distribution not in _DISTRIBUTIONS:
        raise InputValueError(f"unknown distribution {e.distribution!r} of {e.name}", fix="use normal or rectangular")
    if not np.all(np.isfinite(sd)) or np.any(sd < 0):
        raise InputValueError(f"the standard deviations of {e.name} must be finite and not negative",
                              fix="give standard uncertainties >= 0")
    eff = None if e.effect is None else np.asarray(e.effect, dtype=float)
    k = n if eff is None else eff.shape[0]
    if eff is not None and (eff.ndim != 2 or eff.shape[1] != n):
        raise InputValueError(f"the effect of {e.name} has shape {eff.shape}, expected (k, {n})",
                              fix="one row per input quantity, one column per station")
    if sd.size == 1 and k != 1:
        sd = np.full(k, float(sd[0]))
    if sd.size != k:
        raise InputValueError(f"{e.name} has {sd.size} standard deviations for {k} quantities", fix="one per quantity")
    dof = e.dof
    if dof is not None:
        dof = float(dof)
        if not (dof >= 3):
            raise InputValueError(
                f"{e.name}: {dof:g} degrees of freedom: an uncertainty estimated with fewer than 3 has no finite "
                "standard deviation (t-distribution)", fix="use a stated or default uncertainty instead")
        if not np.isfinite(dof):
            dof = None
    return HeightEffect(e.name, sd, eff, e.distribution, dof)


def _draw(e: HeightEffect, m: int, rng, out=None) -> np.ndarray:
    """Height changes (m, n) in µm of one source for ``m`` trials (into ``out`` for an identity effect)."""
    k = e.sd.size
    if e.distribution == "normal":
        q = rng.standard_normal((m, k)) if out is None or e.effect is not None else rng.standard_normal(out=out)
    else:
        q = rng.uniform(-_SQRT3, _SQRT3, (m, k))  # unit variance
    if e.sd_scalar is not None:
        q *= e.sd_scalar
    else:
        q *= e.sd
    if e.dof is not None:
        q *= np.sqrt(e.dof / rng.chisquare(e.dof, m))[:, None]
    return q if e.effect is None else q @ e.effect


@dataclass(frozen=True, eq=False)
class HeightPropagation:
    """Monte Carlo flatness values of one set of trials, minimum zone and least squares together.

    Attributes
    ----------
    heights_um : ndarray, shape (k, n), or None
        Heights of the first ``k`` trials when asked for (µm, about the least-squares plane of the
        estimate's heights).
    estimate_mz_um, estimate_ls_um : float
        Flatness of the unperturbed heights (µm): minimum zone, and peak-to-valley about
        the least-squares plane.
    mz_um, ls_um : ndarray, shape (trials,)
        The same for every trial (µm), from the same perturbed heights.
    trials, seed, n_fallback : int
        Trials M, the seed used, and trials whose zone needed the HiGHS fallback.
    """

    estimate_mz_um: float
    estimate_ls_um: float
    mz_um: np.ndarray
    ls_um: np.ndarray
    trials: int
    seed: int
    n_fallback: int
    heights_um: np.ndarray | None = None


def _default_batch(n: int) -> int:
    """Trials per batch: about 2e6 height values (16 MB as float64), so that the passes over a batch stay
    mostly in the processor's cache; between 500 and 10 000 trials."""
    return int(max(500, min(10_000, 2_000_000 // max(n, 1))))


def propagate_heights(
    x_mm,
    y_mm,
    height_um,
    effects,
    *,
    trials: int = 100_000,
    seed: int | None = None,
    progress=None,
    batch: int | None = None,
    least_squares: bool = True,
    start=None,
    keep_heights: int = 0,
) -> HeightPropagation:
    """Propagate independent error sources to the flatness of a set of station heights (JCGM 101:2008).

    Each trial draws every source of ``effects`` (:class:`HeightEffect`), adds their height
    changes to ``height_um`` and evaluates the flatness of the result twice from the same
    heights: the exact vertical minimum zone (dual simplex warm-started from the
    estimate's contact basis, :func:`flatcheck.form.minimum_zone_batch`) and the
    peak-to-valley about the least-squares plane. The model is additive: a relative error
    (scale, base length) enters as ``d * heights`` (first order in the error).

    Parameters
    ----------
    x_mm, y_mm : array_like, shape (n,)
        Station positions in mm.
    height_um : array_like, shape (n,)
        The measured heights (µm): the estimate the errors are added to.
    effects : sequence of HeightEffect
        The sources; sources whose standard deviations are all zero are skipped.
    trials : int
        Number of trials M (at least 100).
    seed : int, optional
        Seed of the random generator; drawn from the operating system when None (and reported).
    progress : callable, optional
        ``progress(k)`` after each batch of ``k`` trials.
    batch : int, optional
        Trials per batch (memory about batch x n x 8 bytes x a few); by default sized by ``n``.
    least_squares : bool
        Also evaluate the least-squares peak-to-valley (cheap: one 3-column fit per trial).
    start : MinZoneSolution, optional
        The minimum zone of ``height_um`` when already known.
    keep_heights : int
        Keep the heights (µm, about the least-squares plane of ``height_um``) of the first
        ``keep_heights`` trials in ``heights_um`` (for second-level runs).

    Returns
    -------
    HeightPropagation

    Raises
    ------
    InputValueError
        Bad shapes, negative or non-finite standard deviations, fewer than 100 trials.
    GeometryError
        Stations that cannot define a plane.

    Examples
    --------
    A common scale error scales the flatness exactly, so its standard deviation is the
    flatness times the relative uncertainty:

    >>> import numpy as np
    >>> x, y = np.meshgrid(np.arange(5.0) * 100, np.arange(4.0) * 100)
    >>> z = (1e-4 * ((x - 200) ** 2 + (y - 150) ** 2)).ravel()
    >>> scale = HeightEffect("scale", np.array([0.01]), z[None, :])
    >>> r = propagate_heights(x.ravel(), y.ravel(), z, [scale], trials=20000, seed=1)
    >>> bool(abs(r.mz_um.std() / (r.estimate_mz_um * 0.01) - 1) < 0.03)
    True
    """
    x = np.asarray(x_mm, dtype=float).ravel()
    y = np.asarray(y_mm, dtype=float).ravel()
    h0 = np.asarray(height_um, dtype=float).ravel()
    n = x.size
    if h0.size != n or y.size != n:
        raise InputValueError(f"{h0.size} heights for {n} stations", fix="give one height per station")
    if not np.all(np.isfinite(h0)):
        raise InputValueError("a height is not a finite number", fix="remove it or give a number")
    trials = int(trials)
    if trials < 100:
        raise InputValueError(f"{trials} trials are too few for a coverage interval", fix="use at least 100 (1e5 recommended)")
    eff = [_check_effect(e, n) for e in effects]
    eff = [e.compressed() for e in eff if np.any(e.sd > 0)]
    if seed is None:
        seed = int(np.random.SeedSequence().entropy % (2**63))
    rng = np.random.default_rng(seed)
    if start is None:
        start = solve_minimum_zone(x, y, h0)
    # Work in the minimum-zone solver's normalised heights: positions centred and scaled, heights about
    # their least-squares plane divided by their peak-to-valley zs. Both flatness figures ignore planes and
    # scale with the heights, so each trial's figures are its normalised ones times zs, and no batch needs
    # converting: the sources' effects are divided by zs once.
    frame, h0n = _frame(x, y, h0)
    zs = frame.zs
    eff = [HeightEffect(e.name, e.sd / zs if e.effect is None else e.sd,
                        None if e.effect is None else e.effect / zs, e.distribution, e.dof) for e in eff]
    B0 = _warm_basis(frame, start)
    A = np.column_stack([np.ones(n), frame.X, frame.Y])
    P = np.linalg.pinv(A)
    est_ls = float(h0n.max() - h0n.min()) * zs  # h0n is already about the least-squares plane
    batch = _default_batch(n) if batch is None else max(1, int(batch))
    mz = np.empty(trials)
    ls = np.empty(trials) if least_squares else np.full(trials, np.nan)
    n_fallback = 0
    done = 0
    kept = [] if keep_heights else None
    with _one_blas_thread():
        while done < trials:
            m = min(batch, trials - done)
            done, nf = _propagate_batch(x, y, m, done, n, h0n, eff, rng, P, A, zs, frame, B0, mz, ls, least_squares,
                                        kept, keep_heights)
            n_fallback += nf
            if progress is not None:
                progress(m)
    heights = None if kept is None else np.concatenate(kept)[:keep_heights] * zs
    return HeightPropagation(float(start.t_um), est_ls, mz, ls, trials, int(seed), int(n_fallback), heights)


def _one_blas_thread():
    """One BLAS thread while the trials run: their matrix products are small (m x 3 x n), and on a busy
    machine several BLAS threads per product cost more than they give. threadpoolctl when installed."""
    import contextlib

    try:
        from threadpoolctl import threadpool_limits
    except ImportError:  # pragma: no cover - optional
        return contextlib.nullcontext()
    return threadpool_limits(1, user_api="blas")


def _propagate_batch(x, y, m, done, n, h0n, eff, rng, P, A, zs, frame, B0, mz, ls, least_squares, kept=None,
                     keep=0):
    """One batch of :func:`propagate_heights`: fills ``mz``/``ls`` from ``done``; returns (done, fallbacks)."""
    Zn = np.empty((m, n))
    first = True
    for e in eff:
        if first and e.effect is None and e.distribution == "normal":
            _draw(e, m, rng, out=Zn)  # the first identity source is drawn straight into the batch
        elif first:
            Zn[:] = _draw(e, m, rng)
        else:
            Zn += _draw(e, m, rng)
        first = False
    if first:
        Zn[:] = h0n
    else:
        Zn += h0n
    if kept is not None and done < keep:
        kept.append(Zn[: keep - done].copy())
    if least_squares:
        R = np.matmul(Zn @ P.T, A.T)
        np.subtract(Zn, R, out=R)
        ls[done : done + m] = (R.max(axis=1) - R.min(axis=1)) * zs
        del R
    t, ok = _batch_normalised(frame, h0n, Zn, B0)
    t *= zs
    for k in np.flatnonzero(~ok):  # not certified: solve that trial on its own (HiGHS fallback)
        t[k] = solve_minimum_zone(x, y, Zn[k]).t_um * zs
    mz[done : done + m] = t
    return done + m, int((~ok).sum())


def summarise_flatness(
    estimate_um: float,
    samples_um,
    *,
    seed: int,
    reference: str = "minimum_zone",
    coverage: float = 0.95,
    n_fallback: int = 0,
    bias_correction: bool = True,
    keep_samples: bool = False,
) -> FlatnessUncertainty:
    """Summarise Monte Carlo flatness values (JCGM 101:2008 7.6, 7.7), with the bias correction.

    Random errors collect at the extremes, so they inflate a minimum zone (and a
    peak-to-valley): the measured value ``F`` is itself biased upward, and a Monte Carlo
    started from it adds about the same bias again, ``b = mean - F`` (the bootstrap estimate
    of bias; Efron & Tibshirani, An Introduction to the Bootstrap, 1993, ch. 10). The
    bias-corrected estimate is ``F - b``. The bias seen from the noisy ``F`` is not the bias
    at the true surface (the estimate is rougher than the truth; measured both ways in
    docs/methods.md), so the correction is taken as uncertain by its own size: rectangular
    with half-width ``|b|``, standard uncertainty ``|b| / sqrt(3)`` (JCGM 100:2008 4.3.7),
    combined with the Monte Carlo standard deviation ``u``. The corrected interval is

        F - b +- 2 sqrt(u^2 + b^2 / 3)      (coverage factor 2, JCGM 100 6.2-6.3)

    A flatness is never negative: an interval that would start below zero is moved up to
    start at zero with its width kept. ``expanded_um`` is then the larger of ``2 u`` and the
    distances from ``F`` to both ends, so that ``F +- U`` holds the corrected interval.

    Parameters
    ----------
    estimate_um : float
        Flatness of the measured data ``F`` (µm).
    samples_um : array_like, shape (M,)
        Monte Carlo values (µm).
    seed : int
        Seed the values were drawn with (reported).
    reference : str
        ``"minimum_zone"`` or ``"least_squares"``.
    coverage : float
        Coverage probability of the Monte Carlo intervals (JCGM 101 7.7).
    n_fallback : int
        Trials that needed the HiGHS fallback (reported).
    bias_correction : bool
        Add the corrected interval and estimate; ``expanded_um`` then holds the corrected
        interval (see :class:`FlatnessUncertainty`).
    keep_samples : bool
        Keep the values in the result.

    Returns
    -------
    FlatnessUncertainty
    """
    out = np.asarray(samples_um, dtype=float).ravel()
    F = float(estimate_um)
    mean = float(out.mean())
    std = float(out.std(ddof=1))
    tiny = 1e-12 * max(abs(F), abs(mean))  # rounding noise of identical trials: no spread, no bias
    if std <= tiny:
        std, mean = 0.0, F
    sym, short = coverage_intervals(out, coverage)
    U = K_EXPANDED * std
    corr = corr_est = b = u_t = None
    if bias_correction:
        b = mean - F
        u_t = math.sqrt(std**2 + b**2 / 3.0)
        corr_est = F - b
        corr = (corr_est - K_EXPANDED * u_t, corr_est + K_EXPANDED * u_t)
        if corr[0] < 0.0:
            corr = (0.0, corr[1] - corr[0])
        corr_est = max(corr_est, 0.0)
        U = max(U, F - corr[0], corr[1] - F)
    return FlatnessUncertainty(
        estimate_um=F,
        mean_um=mean,
        std_um=std,
        bias_um=mean - F,
        interval_um=sym,
        shortest_interval_um=short,
        coverage=float(coverage),
        expanded_um=float(U),
        trials=int(out.size),
        seed=int(seed),
        reference=reference,
        n_fallback=int(n_fallback),
        samples_um=out if keep_samples else None,
        corrected_interval_um=corr,
        corrected_estimate_um=corr_est,
        estimated_bias_um=b,
        corrected_std_um=u_t,
    )
