"""Progress from survey to survey: what a lapping session removed, the rate it implies, what is left.

Two surveys of one surface are matched node by node (by position, within a stated tolerance). Each survey's
heights are referred to its own least-squares plane, because each survey fixes its own height reference: the
plate may have been re-levelled, an autocollimator is re-aimed for every line, and the reduction leaves the
plane arbitrary. A difference of tilt or height between two surveys therefore says nothing about material
removed. Referring both to their LS planes is the same as removing the LS plane of the difference (the LS
fit is linear), so the change map has no relative plane left.

The change is known only up to a plane, so the depth removed is not observable from the surveys alone. The
removal reported is the *least* removal consistent with the change: the change is referred to the highest
plane that lies nowhere above the material lost (a small linear program), so the untouched parts read zero.
That is exact when at least three non-collinear nodes were not lapped, which is the case for local
correction; if the whole surface was lapped, the reported depth and volume are lower bounds.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import GeometryError, InputValueError
from ..form import least_squares_plane, minimum_zone
from ..form import HeightMap
from ._dwell import LapModel
from ._removal import least_removal, node_area_weights

__all__ = ["DwellLog", "Progress", "match_nodes", "compare_surveys"]

#: Default position tolerance for matching the nodes of two surveys (mm). Stations are marked on the
#: surface and re-used, so their positions repeat to well under a millimetre (common practice, no single
#: source); 0.5 mm still separates the closest stations used (tens of millimetres apart).
DEFAULT_MATCH_TOL_MM = 0.5


def _node_label(hm: HeightMap, i: int) -> str:
    pos = f"({hm.x_mm[i]:g}, {hm.y_mm[i]:g}) mm"
    if hm.names is not None:
        return f"node {hm.names[i]} at {pos}"
    return f"point {i + 1} at {pos}"


def match_nodes(before: HeightMap, after: HeightMap, *, tol_mm: float = DEFAULT_MATCH_TOL_MM) -> np.ndarray:
    """Index of the node of ``after`` at each node of ``before``.

    Parameters
    ----------
    before, after : HeightMap
        Two surveys of one surface (positions in mm).
    tol_mm : float
        Largest distance (mm) between the positions of one node in the two surveys.

    Returns
    -------
    ndarray of int, shape (n,)
        ``after`` index for each ``before`` node (a permutation).

    Raises
    ------
    InputValueError
        The surveys do not have the same nodes; the message names the first node without a partner.
    """
    from scipy.spatial import cKDTree

    if not (np.isfinite(tol_mm) and tol_mm > 0):
        raise InputValueError(f"matching tolerance {tol_mm} mm must be > 0")
    tree = cKDTree(after.xy_mm)
    dist, idx = tree.query(before.xy_mm, k=1)
    bad = np.flatnonzero(dist > tol_mm)
    if bad.size:
        i = int(bad[0])
        raise InputValueError(
            f"the surveys do not match: before-survey {_node_label(before, i)} has no after-survey node within "
            f"{tol_mm:g} mm (nearest {dist[i]:.3g} mm away)",
            fix="compare two surveys made on the same stations, or widen --match-tol-mm",
        )
    counts = np.bincount(idx, minlength=after.n)
    if (counts > 1).any():
        j = int(np.flatnonzero(counts > 1)[0])
        raise InputValueError(
            f"the surveys do not match: after-survey {_node_label(after, j)} is the partner of "
            f"{counts[j]} before-survey nodes",
            fix=f"use a matching tolerance smaller than half the station spacing (now {tol_mm:g} mm)",
        )
    if (counts == 0).any():
        j = int(np.flatnonzero(counts == 0)[0])
        raise InputValueError(
            f"the surveys do not match: after-survey {_node_label(after, j)} has no before-survey node within "
            f"{tol_mm:g} mm",
            fix="compare two surveys made on the same stations, or widen --match-tol-mm",
        )
    return idx


@dataclass(frozen=True, eq=False)
class DwellLog:
    """Where the lap worked and for how long during the session.

    Attributes
    ----------
    x_mm, y_mm : ndarray, shape (k,)
        Centres of the lap's working spots (mm).
    minutes : ndarray, shape (k,)
        Time spent about each spot (min), >= 0.
    source : str
        Where the log came from (a file name), named in error messages; may be empty.
    """

    x_mm: np.ndarray
    y_mm: np.ndarray
    minutes: np.ndarray
    source: str = ""

    def __post_init__(self):
        x = np.asarray(self.x_mm, float).ravel()
        y = np.asarray(self.y_mm, float).ravel()
        t = np.asarray(self.minutes, float).ravel()
        if not (x.size == y.size == t.size) or x.size == 0:
            raise InputValueError("the dwell log needs one x, y and time per entry")
        if not (np.all(np.isfinite(x)) and np.all(np.isfinite(y)) and np.all(np.isfinite(t))) or (t < 0).any():
            raise InputValueError("the dwell log has a non-finite position or a negative time")
        object.__setattr__(self, "x_mm", x)
        object.__setattr__(self, "y_mm", y)
        object.__setattr__(self, "minutes", t)

    @property
    def total_min(self) -> float:
        """Total logged time (min)."""
        return float(self.minutes.sum())


@dataclass(frozen=True, eq=False)
class Progress:
    """What one session did, and what is left.

    Attributes
    ----------
    x_mm, y_mm : ndarray, shape (n,)
        Node positions (mm) of the before survey.
    change_um : ndarray, shape (n,)
        After minus before, each referred to its own LS plane (µm; negative = lower).
    removed_um : ndarray, shape (n,)
        Least removal consistent with the change (µm, >= 0), see the module notes.
    removed_volume_mm3 : float
        Volume of ``removed_um`` (mm^3).
    max_removed_um : float
        Deepest removal (µm).
    flatness_before_um, flatness_after_um : float
        Minimum-zone flatness of each survey (µm).
    tol_mm : float
        Matching tolerance used (mm).
    dwell_min : float or None
        Total lapping time of the session (min), from the option or the log.
    volume_rate_mm3_per_min : float or None
        Removed volume per minute of lapping.
    rate_um_per_min : float or None
        Depth removed under the lap per minute: the calibrated rate for the lap model. From a log it is
        the least-squares scale of the logged dwell's predicted removal to the measured change (with a free
        plane); from a total time it is volume / (lap area x time).
    rate_fit_rms_um : float or None
        RMS residual of that fit (µm), log only.
    target_um : float or None
        Target flatness (µm).
    remaining_volume_mm3 : float or None
        Least removal still needed after this session for the target (mm^3).
    sessions_to_target : int or None
        Sessions like this one still needed (remaining volume / volume this session, rounded up);
        0 when the target is met; None when nothing was removed or no target was given.
    sessions_fraction : float or None
        The same ratio unrounded (dimensionless): 0.001 means a thousandth of this session's removal is
        left, a short touch-up rather than "1 more session". None as for ``sessions_to_target``.
    minutes_to_target : float or None
        Remaining volume / this session's volume rate (min): lapping time at this session's rate; None
        without a lapping time.
    change_referred_um : ndarray, shape (n,)
        The change referred to the plane of the least removal instead of the LS plane (µm): untouched
        areas read about 0 (small positive values are survey noise), lapped areas negative; it equals
        ``-removed_um`` wherever it is negative. The same change, only another plane: the one a user
        reads "how much came off where" from.
    u_after_um : float or None
        Expanded uncertainty of the after survey's flatness (µm), when it was given.
    met_within_uncertainty : bool
        The target is not met by the flatness as measured, but the gain still wanted (after flatness minus
        target) is no larger than ``u_after_um``: more lapping cannot be shown to be needed, so the remaining
        time is not a prediction worth acting on (ISO 14253-1: the measurement cannot tell the two apart).
    """

    x_mm: np.ndarray
    y_mm: np.ndarray
    change_um: np.ndarray
    removed_um: np.ndarray
    removed_volume_mm3: float
    max_removed_um: float
    flatness_before_um: float
    flatness_after_um: float
    tol_mm: float
    dwell_min: float | None
    volume_rate_mm3_per_min: float | None
    rate_um_per_min: float | None
    rate_fit_rms_um: float | None
    target_um: float | None
    remaining_volume_mm3: float | None
    sessions_to_target: int | None
    change_referred_um: np.ndarray | None = None
    sessions_fraction: float | None = None
    minutes_to_target: float | None = None
    u_after_um: float | None = None
    met_within_uncertainty: bool = False


def _lowest_supporting_removal(x, y, u, w) -> tuple[np.ndarray, np.ndarray]:
    """``u - p`` for the plane p <= u with the largest weighted sum (least removal >= 0), and ``p``."""
    from scipy.optimize import linprog

    xm, ym = x.mean(), y.mean()
    span = max(float(np.ptp(x)), float(np.ptp(y)), 1e-12)
    P = np.column_stack([np.ones_like(x), (x - xm) / span, (y - ym) / span])
    res = linprog(-(w @ P), A_ub=P, b_ub=u, bounds=[(None, None)] * 3, method="highs")
    if res.status != 0:  # pragma: no cover - bounded as soon as three points are not collinear
        raise GeometryError(f"cannot refer the change to a plane: {res.message}")
    p = P @ res.x
    r = np.maximum(0.0, u - p)
    r[r < 1e-9] = 0.0
    return r, p


def compare_surveys(
    before: HeightMap,
    after: HeightMap,
    *,
    tol_mm: float = DEFAULT_MATCH_TOL_MM,
    dwell_min: float | None = None,
    lap: LapModel | None = None,
    log: DwellLog | None = None,
    target_um: float | None = None,
    u_after_um: float | None = None,
) -> Progress:
    """Compare two surveys of one surface made before and after a lapping session.

    Parameters
    ----------
    before, after : HeightMap
        The surveys (µm at mm), on the same nodes within ``tol_mm``.
    tol_mm : float
        Node matching tolerance (mm).
    dwell_min : float, optional
        Total lapping time of the session (min).
    lap : LapModel, optional
        The lap used; its footprint area turns a volume rate into a depth rate, and its footprint is
        needed to fit the rate to a dwell log.
    log : DwellLog, optional
        Where and how long the lap worked; its total replaces ``dwell_min``.
    target_um : float, optional
        Target flatness (µm) for the estimate of the sessions still needed.
    u_after_um : float, optional
        Expanded uncertainty of the after survey's minimum-zone flatness (µm, >= 0): a remaining gain no larger
        than it is stated as "met within the uncertainty" (``Progress.met_within_uncertainty``).

    Returns
    -------
    Progress

    Raises
    ------
    InputValueError
        Unmatched nodes, a bad time or target, a log without a lap.
    """
    idx = match_nodes(before, after, tol_mm=tol_mm)
    x, y = before.x_mm, before.y_mm
    zb = before.height_um
    za = after.height_um[idx]
    lb = least_squares_plane(x, y, zb)
    la = least_squares_plane(x, y, za)
    change = (za - (la.a_um + la.b_um_per_mm * x + la.c_um_per_mm * y)) - (
        zb - (lb.a_um + lb.b_um_per_mm * x + lb.c_um_per_mm * y)
    )
    w = node_area_weights(x, y)
    removed, support = _lowest_supporting_removal(x, y, -change, w)
    # the change referred to the plane of the least removal: untouched areas about 0, lapped areas negative
    change_referred = change + support
    change_referred[np.abs(change_referred) < 1e-9] = 0.0
    vol = float(w @ removed) / 1000.0
    f_before = minimum_zone(x, y, zb).flatness_um
    f_after = minimum_zone(x, y, za).flatness_um

    if log is not None and dwell_min is not None:
        raise InputValueError("give either a total dwell time or a dwell log, not both")
    if dwell_min is not None and not (np.isfinite(dwell_min) and dwell_min > 0):
        raise InputValueError(f"dwell time {dwell_min} min must be > 0", fix="give the session's lapping minutes")
    rate = rms = None
    if log is not None:
        if lap is None:
            raise InputValueError("fitting the rate to a dwell log needs the lap's size", fix="give the lap size")
        if lap.time_unit != "min":
            raise InputValueError("a dwell log is in minutes; give the lap's size without a rate per pass")
        dwell_min = log.total_min
        if dwell_min <= 0:
            raise InputValueError(
                "the dwell log's total time is zero", where=log.source or None,
                fix="log the minutes the lap spent about each spot",
            )
        rate, rms = _fit_rate(x, y, -change, w, lap, log)
    vrate = None
    if dwell_min is not None:
        vrate = vol / dwell_min
        if rate is None and lap is not None:
            rate = vol * 1000.0 / (lap.area_mm2 * dwell_min)  # mm^3 -> µm*mm^2, over mm^2*min

    remaining = sessions = fraction = minutes = None
    if target_um is not None:
        if not (np.isfinite(target_um) and target_um >= 0):
            raise InputValueError(f"target flatness {target_um} µm must be >= 0")
        hm_after = HeightMap(x, y, za)
        remaining = least_removal(hm_after, target_um, weight_mm2=w).removed_volume_mm3
        if remaining <= 0:
            sessions, fraction, minutes = 0, 0.0, (0.0 if vrate is not None else None)
        elif vol > 0:
            fraction = remaining / vol
            sessions = int(math.ceil(fraction - 1e-9))
            if vrate is not None:
                minutes = remaining / vrate
    within = False
    if u_after_um is not None:
        if not (np.isfinite(u_after_um) and u_after_um >= 0):
            raise InputValueError(f"uncertainty {u_after_um} µm must be >= 0")
        within = bool(target_um is not None and sessions != 0 and f_after - target_um <= u_after_um)
    for a in (change, change_referred, removed):
        a.setflags(write=False)
    return Progress(
        x_mm=x,
        y_mm=y,
        change_um=change,
        removed_um=removed,
        change_referred_um=change_referred,
        removed_volume_mm3=vol,
        max_removed_um=float(removed.max()),
        flatness_before_um=float(f_before),
        flatness_after_um=float(f_after),
        tol_mm=float(tol_mm),
        dwell_min=None if dwell_min is None else float(dwell_min),
        volume_rate_mm3_per_min=vrate,
        rate_um_per_min=rate,
        rate_fit_rms_um=rms,
        target_um=None if target_um is None else float(target_um),
        remaining_volume_mm3=remaining,
        sessions_to_target=sessions,
        sessions_fraction=fraction,
        minutes_to_target=minutes,
        u_after_um=None if u_after_um is None else float(u_after_um),
        met_within_uncertainty=within,
    )


def _fit_rate(x, y, lost_um, w, lap: LapModel, log: DwellLog):
    """Least-squares rate (µm/min) and RMS residual: lost = rate * shape + plane, area-weighted."""
    # shape: minutes each node spent under the footprint (Preston: uniform rate under the lap)
    under = lap.covers(x[:, None] - log.x_mm[None, :], y[:, None] - log.y_mm[None, :])
    shape = under.astype(float) @ log.minutes
    if not (shape > 0).any():
        raise InputValueError(
            "no surveyed node lies under the lap at any logged position", where=log.source or None,
            fix="check the log's positions (mm from the surface's south-west corner) and the lap size",
        )
    xm, ym = x.mean(), y.mean()
    span = max(float(np.ptp(x)), float(np.ptp(y)), 1e-12)
    M = np.column_stack([shape, np.ones_like(x), (x - xm) / span, (y - ym) / span])
    sw = np.sqrt(w / w.mean())
    coef, *_ = np.linalg.lstsq(M * sw[:, None], lost_um * sw, rcond=None)
    res = lost_um - M @ coef
    return float(coef[0]), float(np.sqrt(np.average(res**2, weights=w)))
