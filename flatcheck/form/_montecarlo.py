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

References
----------
JCGM 101:2008, Evaluation of measurement data - Supplement 1 to the "Guide to the
expression of uncertainty in measurement" - Propagation of distributions using a
Monte Carlo method (clauses 7.6 estimate and standard uncertainty, 7.7 coverage
intervals).
JCGM 100:2008 (GUM), law of propagation of uncertainty.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ._minzone import minimum_zone_batch, solve_minimum_zone
from ..errors import InputValueError

__all__ = ["FlatnessUncertainty", "monte_carlo_flatness", "coverage_intervals"]

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
        what a GUM-style certificate states as ``U (k = 2)``; it does not include the
        bias, and for a skewed distribution the intervals are the better statement.
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
        proj = np.eye(x.size) - A @ np.linalg.pinv(A)  # residual maker of the LS plane
        r0 = proj @ heights0
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
            R = H @ proj.T
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
