"""The uncertainty of the bearing's verdicts: the survey's budget carried to the figures under the pads.

The bearing judges figures of the surface under a pad (local flatness, the highest point above the pad's
plane) and of the carriage's motion (straightness, pitch and roll over the travel), each against a limit,
with the ISO 14253-1:2017 default rule (:func:`flatcheck.conformance.decide`): *conforms* only when the value
plus U is inside the limit, *does not conform* only when the value minus U is outside, otherwise *undecided*.
U of such a figure is not the U of the whole surface's flatness: a thermal bow or a scale error, which
dominate a long guideway's budget, hardly change the form under a 120 mm pad, while the reading noise and
the form between stations do. So the budget is carried to each figure.

Model (stated in docs/methods.md, "Uncertainty of the bearing's verdicts"). The survey's budget is propagated
by Monte Carlo (JCGM 101:2008): each trial ``k`` draws every source at once and gives a height error ``e_k``
at every station (:attr:`flatcheck.evaluation.UncertaintyBudget.trial_errors_um`). Every figure the bearing
judges is built from the surface interpolated under the footprints, which is linear in the station heights;
the figures themselves are not linear (a minimum zone, a peak, a peak-to-valley), but each is bounded:

- local flatness under a pad (minimum zone of the samples ``z`` of the footprint): for any change ``d`` of
  the samples, ``|MZ(z + d) - MZ(z)| <= max(r) - min(r)``, where ``r = d - LS(d)`` is ``d`` about its own
  (weighted) least-squares plane over the footprint, since the minimum zone of ``z + d`` is no wider than the
  zone of ``z`` about its own best plane widened by ``r``'s peak-to-valley (and the same the other way);
- the highest point above the pad's plane, ``max(z - LS(z))``: the plane is linear in ``z``, so the
  change lies between ``min(r)`` and ``max(r)``: ``|change| <= max |r|``;
- the largest of such figures over the travel (what the check judges): its change is at most the largest
  change at any position (``|max a - max b| <= max |a - b|``);
- the carriage's straightness (minimum-zone line through its path): at most the peak-to-valley of the
  path's change about its own least-squares line; pitch and roll peak-to-valley: at most the
  peak-to-valley of the change of the angle along the travel.

For each trial the bound is computed from ``e_k`` (interpolated under every footprint at every position the
same way as the surface itself); U of a figure is the 95th percentile of its bound over the trials. Then
``|measured - true| <= U`` at least 95 % of the time under the budget's model, whatever the figure's
non-linearity, so U is a conservative coverage half-width (JCGM 101:2008, 7.7: a coverage interval from the
trials; here of a bound rather than of the figure itself). It needs no correction for the noise bias of a
minimum zone (issue 16, item 5): the bound holds trial by trial, including the bias.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..errors import InputValueError

__all__ = [
    "SurveyErrors",
    "BearingUncertainty",
    "BEARING_TRIALS",
    "BEARING_COVERAGE",
    "bearing_trials",
    "local_uncertainty",
]

#: Most trials of the budget carried to the bearing's figures. A 95th percentile from M trials has a relative
#: standard error of about sqrt(0.05 x 0.95 / M) / (f(q) q) (order statistics; from memory), 3 % at M = 1000
#: for a normal-like error: U to two significant digits.
BEARING_TRIALS = 2000
#: Fewest trials used, however long the travel (JCGM 101:2008 asks M >> 1/(1 - p) = 20 for p = 0.95).
MIN_BEARING_TRIALS = 200
#: Work per run: about this many interpolated sample values in all (trials x positions x footprint points),
#: a few seconds here; longer travels get fewer trials (never below MIN_BEARING_TRIALS).
_WORK = 1.0e8
#: Sample values per batch (memory: about 8 bytes each, a few arrays of that size).
_BATCH_VALUES = 3.0e6
#: Coverage probability of U.
BEARING_COVERAGE = 0.95

_UM_PER_MM_TO_ARCSEC = 1e-3 / (math.pi / 648000.0)  # 1 µm/mm = 1e-3 rad, in arcsec (exact)


@dataclass(frozen=True, eq=False)
class SurveyErrors:
    """Monte Carlo height errors of a surface from its uncertainty budget: the input of the bearing's U.

    Attributes
    ----------
    errors_um : ndarray, shape (k, n)
        Height error of each station (µm) in each of ``k`` trials, every source of the budget drawn at once,
        columns in the order of the surface's stations
        (:attr:`flatcheck.evaluation.UncertaintyBudget.trial_errors_um`).
    source : str
        Where the trials come from, in words (the budget, its trials and seed).
    surface_u_um : float, optional
        U of the whole surface's minimum-zone flatness from the same budget (µm), for comparison.
    seed : int, optional
        Seed of the budget's run.
    budget_trials : int, optional
        Trials of the budget's whole run.
    """

    errors_um: np.ndarray
    source: str
    surface_u_um: float | None = None
    seed: int | None = None
    budget_trials: int | None = None

    @classmethod
    def from_budget(cls, budget, *, what: str = "the survey's uncertainty budget") -> "SurveyErrors":
        """From an :class:`flatcheck.evaluation.UncertaintyBudget` run with ``keep_trials``.

        Raises
        ------
        InputValueError
            When the budget kept no trials.
        """
        e = getattr(budget, "trial_errors_um", None)
        if e is None or np.size(e) == 0:
            raise InputValueError("the uncertainty budget kept no trials", fix="run it with keep_trials")
        mz = budget.minimum_zone
        defaults = tuple(budget.defaults)
        text = (f"{what} (Monte Carlo, JCGM 101:2008, {budget.trials} trials, seed {budget.seed}; "
                + (f"defaults for {', '.join(defaults)}" if defaults else "no defaults") + ")")
        return cls(np.asarray(e, dtype=float), text, float(mz.expanded_um), int(budget.seed), int(budget.trials))


@dataclass(frozen=True)
class BearingUncertainty:
    """Which U the bearing's verdicts used, and where it came from.

    Attributes
    ----------
    rule : {"iso14253-1", "simple-acceptance"}
        The decision rule applied to the checks of the surface (simple acceptance when no U is known).
    source : str
        Where U comes from, in words.
    model : str
        How the budget reaches each figure, in a line (module notes; docs/methods.md).
    trials : int
        Trials of the budget carried through the bearing's figures (0 without a budget).
    coverage : float
        Coverage probability of U.
    surface_u_um : float or None
        U of the whole surface's minimum-zone flatness (µm), same budget.
    seed, budget_trials : int or None
        The budget's seed and trials.
    expanded_uncertainty : dict
        Check name -> U in the check's unit (µm or arcsec).
    """

    rule: str
    source: str
    model: str
    trials: int = 0
    coverage: float = BEARING_COVERAGE
    surface_u_um: float | None = None
    seed: int | None = None
    budget_trials: int | None = None
    expanded_uncertainty: dict = field(default_factory=dict)


#: The model in a line, for outputs.
MODEL_TEXT = (
    "the budget's Monte Carlo trials (every source at once) carried through the interpolated surface under each "
    "footprint; U is the 95th percentile over the trials of a bound on each figure's change (its error about "
    "its own least-squares plane or line: peak-to-valley for a minimum zone or a peak-to-valley, largest "
    "deviation for a peak), the largest over the travel (docs/methods.md)"
)
#: What is said when no U is known.
NO_U_TEXT = ("no uncertainty known for this surface (a height map with no stated uncertainty of its heights, or "
             "the uncertainty not evaluated): simple acceptance, value against limit, which proves nothing about "
             "the measurement uncertainty")


def bearing_trials(available: int, values_per_trial: int) -> int:
    """Trials to carry through the bearing's figures: at most ``available`` and :data:`BEARING_TRIALS`, fewer
    when one trial costs many sample values (long travels), never below :data:`MIN_BEARING_TRIALS` (unless
    fewer are available)."""
    by_work = int(_WORK // max(int(values_per_trial), 1))
    return int(min(int(available), BEARING_TRIALS, max(MIN_BEARING_TRIALS, by_work)))


def _plane_operator(u_mm, v_mm, weight):
    """The weighted least-squares plane of a footprint as a linear operator: ``coef = C @ z`` (3, m) with
    ``coef = (a, b_x, b_y)`` of ``a + b_x u + b_y v``, and the design ``A`` (m, 3); the same fit as the
    bearing's own (weights > 0 only)."""
    keep = weight > 0
    sw = np.sqrt(weight[keep])
    A = np.column_stack([np.ones(u_mm.size), u_mm, v_mm])
    C = np.zeros((3, u_mm.size))
    C[:, keep] = np.linalg.pinv(A[keep] * sw[:, None]) * sw[None, :]
    return C, A


def _weights(surface, pts, method: str):
    """Interpolation weights ``W`` (sparse, (p, n)): the surface's interpolation at ``pts`` (x, y in mm) of any
    station heights ``h`` is ``W @ h``, as :meth:`HeightMap.sample` gives it (both interpolations are linear in
    the heights). Built by interpolating the stations' unit heights, a block of stations at a time."""
    from scipy import sparse
    from scipy.interpolate import LinearNDInterpolator, RegularGridInterpolator

    from ..errors import GeometryError

    n = surface.x_mm.size
    grid = surface.grid
    if grid is not None:
        xs, ys, index = grid
        if method == "cubic" and (xs.size < 4 or ys.size < 4):
            method = "linear"
        if method == "linear":  # bilinear: four weights per point, written out (what RegularGridInterpolator does)
            i = np.clip(np.searchsorted(xs, pts[:, 0], side="right") - 1, 0, xs.size - 2)
            j = np.clip(np.searchsorted(ys, pts[:, 1], side="right") - 1, 0, ys.size - 2)
            tx = (pts[:, 0] - xs[i]) / (xs[i + 1] - xs[i])
            ty = (pts[:, 1] - ys[j]) / (ys[j + 1] - ys[j])
            r = np.arange(pts.shape[0])
            rows = np.concatenate([r, r, r, r])
            cols = np.concatenate([index[j, i], index[j, i + 1], index[j + 1, i], index[j + 1, i + 1]])
            vals = np.concatenate([(1 - tx) * (1 - ty), tx * (1 - ty), (1 - tx) * ty, tx * ty])
            return sparse.csr_matrix((vals, (rows, cols)), shape=(pts.shape[0], n))
        q = pts[:, ::-1]
    elif method != "linear":
        raise GeometryError(f"{method} interpolation needs stations on a regular grid",
                            fix="use linear interpolation for scattered stations")
    else:
        from scipy.spatial import Delaunay

        tri = Delaunay(surface.xy_mm)
    block = int(max(1, min(n, _BATCH_VALUES // max(pts.shape[0], 1))))
    rows, cols, vals = [], [], []
    for start in range(0, n, block):
        stop = min(n, start + block)
        unit = np.zeros((n, stop - start))
        unit[np.arange(start, stop), np.arange(stop - start)] = 1.0
        if grid is not None:
            w = RegularGridInterpolator((ys, xs), unit[index], method=method, bounds_error=False,
                                        fill_value=np.nan)(q)
        else:
            w = LinearNDInterpolator(tri, unit, fill_value=np.nan)(pts)
        r, c = np.nonzero(w)
        rows.append(r)
        cols.append(c + start)
        vals.append(w[r, c])
    return sparse.csr_matrix((np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))),
                             shape=(pts.shape[0], n))


def local_uncertainty(surface, pads, fps, x_mm, y_mm: float, errors_um, *, method: str = "linear",
                      limits_um=None, gaps_um=None, pitch_fixed: bool = True, roll_fixed: bool = True,
                      coverage: float = BEARING_COVERAGE) -> dict:
    """U of the bearing's figures from Monte Carlo height errors (module notes).

    Parameters
    ----------
    surface : HeightMap
        The measured surface (positions mm).
    pads : sequence of PlacedPad
        The pads on the analysed face.
    fps : sequence of Footprint
        Their sample points (as the evaluation used them).
    x_mm : ndarray, shape (P,)
        The evaluated carriage positions (every pad over the surveyed area), mm.
    y_mm : float
        The carriage's reference point across the face, mm.
    errors_um : ndarray, shape (k, n)
        Height errors of the stations in ``k`` trials (µm), columns in the surface's order.
    method : {"linear", "cubic"}
        Interpolation, as for the surface.
    limits_um, gaps_um : sequence of float
        Each pad's local-flatness limit and gap (µm): the local and clearance checks judge the largest ratio.
    pitch_fixed, roll_fixed : bool
        Whether the pad layout fixes pitch and roll (else no U for them).
    coverage : float
        Coverage probability (0.95).

    Returns
    -------
    dict
        ``local_ratio`` and ``clearance_ratio``: U of the largest ratio value / limit of the local flatness
        and of the form against the gap (dimensionless: times a pad's limit or gap gives µm);
        ``straightness_um``; ``pitch_arcsec`` and ``roll_arcsec`` (None when not fixed); ``trials``.

    Raises
    ------
    InputValueError
        Errors of another number of stations than the surface.
    """
    E = np.asarray(errors_um, dtype=float)
    if E.ndim != 2 or E.shape[1] != surface.x_mm.size:
        raise InputValueError(f"height errors of shape {E.shape} for {surface.x_mm.size} stations",
                              fix="give one column per station of the surface")
    x = np.asarray(x_mm, dtype=float)
    P = x.size
    K = E.shape[0]
    limits = np.asarray(limits_um if limits_um is not None else [p.pad.gap_um for p in pads], dtype=float)
    gaps = np.asarray(gaps_um if gaps_um is not None else [p.pad.gap_um for p in pads], dtype=float)
    ops = [_plane_operator(fp.u_mm, fp.v_mm, fp.weight) for fp in fps]
    pts = [np.column_stack([((x + p.along_mm)[:, None] + fp.u_mm[None, :]).ravel(),
                            np.broadcast_to((y_mm + p.across_mm) + fp.v_mm[None, :], (P, fp.u_mm.size)).ravel()])
           for p, fp in zip(pads, fps)]
    W = [_weights(surface, q, method) for q in pts]
    m_all = sum(fp.u_mm.size for fp in fps)
    batch = int(max(1, min(K, _BATCH_VALUES // max(P * m_all, 1))))
    k_st = np.array([p.stiffness for p in pads], dtype=float)
    d = np.array([[p.along_mm, p.across_mm] for p in pads], dtype=float)
    ks = k_st.sum()
    dbar = k_st @ d / ks
    dc = d - dbar
    sk = np.sqrt(k_st)
    M = np.linalg.pinv(dc * sk[:, None], rcond=1e-9)  # (2, pads): as the carriage's own attitude
    Ax = np.column_stack([np.ones(P), x - x.mean()])
    Px = np.linalg.pinv(Ax)
    out = {name: np.empty(K) for name in ("local", "clearance", "straightness", "pitch", "roll")}
    for start in range(0, K, batch):
        stop = min(K, start + batch)
        c = stop - start
        Et = np.ascontiguousarray(E[start:stop].T)  # (n, c)
        h = np.empty((len(pads), P, c))
        tx = np.empty((len(pads), P, c))
        ty = np.empty((len(pads), P, c))
        lf = np.full(c, -np.inf)
        cl = np.full(c, -np.inf)
        for i, (fp, (C, A), Wi) in enumerate(zip(fps, ops, W)):
            Z = np.asarray(Wi @ Et).reshape(P, fp.u_mm.size, c)
            coef = np.matmul(C, Z)  # (P, 3, c)
            R = Z - np.matmul(A, coef)
            hi, lo = R.max(axis=1), R.min(axis=1)  # (P, c)
            lf = np.maximum(lf, ((hi - lo) / limits[i]).max(axis=0))
            cl = np.maximum(cl, (np.maximum(hi, -lo) / gaps[i]).max(axis=0))
            h[i] = np.einsum("m,pmc->pc", fp.weight, Z)
            tx[i], ty[i] = coef[:, 1, :], coef[:, 2, :]
        out["local"][start:stop] = lf
        out["clearance"][start:stop] = cl
        # the carriage: stiffness-weighted plane through the pad-averaged heights (as _carriage_attitude)
        t0 = np.stack([np.einsum("i,ipc->pc", k_st, tx), np.einsum("i,ipc->pc", k_st, ty)]) / ks  # (2, P, c)
        hbar = np.einsum("i,ipc->pc", k_st, h) / ks
        r = h - hbar[None] - np.einsum("ij,jpc->ipc", dc, t0)
        g = t0 + np.einsum("ji,ipc->jpc", M, r * sk[:, None, None])
        path = hbar - np.einsum("j,jpc->pc", dbar, g)
        res = path - Ax @ (Px @ path)
        out["straightness"][start:stop] = np.ptp(res, axis=0) if P >= 3 else 0.0
        out["pitch"][start:stop] = np.ptp(g[0], axis=0) * _UM_PER_MM_TO_ARCSEC
        out["roll"][start:stop] = np.ptp(g[1], axis=0) * _UM_PER_MM_TO_ARCSEC

    def q(v):
        return float(np.quantile(v, coverage))

    return {
        "local_ratio": q(out["local"]),
        "clearance_ratio": q(out["clearance"]),
        "straightness_um": q(out["straightness"]),
        "pitch_arcsec": q(out["pitch"]) if pitch_fixed else None,
        "roll_arcsec": q(out["roll"]) if roll_fixed else None,
        "trials": K,
    }
