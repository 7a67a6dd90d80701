"""What the residuals of a survey's reduction say: closures, outliers, data snooping and weak lines.

From the adjusted network (:mod:`flatcheck.survey._network`, :mod:`flatcheck.survey._rank`): each
line's closure at the stations it shares with other lines, the a-posteriori standard deviation and
the standardised residual of every reading, the suspect readings found by iterated data snooping
and the warnings that name them, and the lines whose readings are barely checked. Both reductions
use the closures and ``sigma0``; the outlier tests are the least-squares reduction's.

Outliers. The standardised residual of observation ``k`` is
``w_k = r_k / (sigma_k * sqrt(r_kk))`` where ``r_kk`` is the redundancy number
(diagonal of ``I - A N^- A^T W``) and ``sigma_k`` the standard deviation of the
observation: the instrument's stated reading uncertainty when given (Baarda's
data snooping), else the a-posteriori value ``sigma0`` (Pope's tau test).
``|w_k| > 3.29`` is flagged (two-sided 0.1 % point of the standard normal).

One gross error shows in the residuals of every reading that checks it, so many
readings may be flagged for one mis-keyed number. The flagged readings are
therefore diagnosed by iterated data snooping (common practice, no single
source): the reading of largest ``|w|`` is set aside (an extra unknown, its
bias), the others are tested again, and so on. The update needs only the
columns of the projector ``R = I - W^1/2 A N^- A^T W^1/2`` of the readings set
aside: ``w_j`` becomes ``(w_j - rho_jk w_k) / sqrt(1 - rho_jk^2)`` for one
reading ``k``, with ``rho_jk`` the correlation of the two residuals. Readings
whose residuals are perfectly correlated (``|rho| = 1``: every reading of a
line walked once between two tie stations, or lines that enter the checks
only through their sum) always have equal ``|w|``: the layout cannot tell them
apart, and they are named as a group, never one of them by chance.

Reliability. A reading with a small redundancy number is barely checked: the
smallest error the test finds with 80 % probability at the 0.1 % level is
``delta0 * sigma / sqrt(r_kk)``, ``delta0 = 3.29 + 0.84 = 4.13`` (Baarda's
minimal detectable bias). Lines whose readings have ``r_kk < 0.1`` are named
as weakly checked (a limit common in geodetic network design, from memory).

References
----------
W. Baarda, "A testing procedure for use in geodetic networks", Netherlands
Geodetic Commission, Publications on Geodesy 2(5), 1968 (data snooping).
A.J. Pope, "The statistics of residuals and the detection of outliers", NOAA
Technical Report NOS 65 NGS 1, 1976 (tau test).
"""

from __future__ import annotations

import numpy as np

from ._network import LineClosure, Outlier, _Model

__all__ = ["OUTLIER_THRESHOLD", "WEAK_REDUNDANCY"]

#: Flag limit for standardised residuals: two-sided 0.1 % point of the standard
#: normal distribution, 3.2905 (Baarda 1968 uses alpha = 0.1 % for data snooping).
OUTLIER_THRESHOLD = 3.29

#: Non-centrality of Baarda's test: two-sided 0.1 % level (3.2905) plus the normal quantile
#: of 80 % power (0.8416), 4.1321; its square 17.07 is Baarda's lambda_0 (1968).
_DELTA0 = 3.2905 + 0.8416
#: Redundancy number below which a reading is "weakly checked" (common limit in geodetic
#: network design, from memory: r < 0.1 poorly controlled).
WEAK_REDUNDANCY = 0.1
# Readings whose residuals have |correlation| >= 1 - _TIE_RTOL cannot be told apart: their |w|
# agree to about this relative amount whatever the readings (structural ties agree to rounding on
# slope units; the tangent of angle units leaves ~1e-7 for a 50 arcsec error). Without the dense
# operator the test falls back to |w| equal to this relative amount.
_TIE_RTOL = 1e-6
# At most this many suspect groups are set aside one after the other.
_SNOOP_MAX_GROUPS = 5


def _clean_zero(value: float, scale: float) -> float:
    """``value`` with rounding noise (below 1e-12 of ``scale``) and negative zero shown as 0.0.

    A closure of exact readings is rounding noise (~1e-15 µm) that would print as "-0.000".
    """
    value = float(value)
    return 0.0 if abs(value) <= 1e-12 * abs(float(scale)) else value + 0.0


def _line_closures(model: _Model, l: np.ndarray, u: np.ndarray, r: np.ndarray) -> tuple:
    """Closure of each line at the stations it shares with other lines.

    For slope instruments the line's own profile (its readings integrated from its
    first station, zero removed, mean of its runs) is compared with the adjusted
    heights at every station the line shares with another line (its tie stations,
    the first excepted); the closure is the largest of these differences, signed,
    and the station where it occurs. This is the classic notion (a line's end or
    midpoint failing to meet what the other lines say) for any layout. With a
    per-line autocollimator zero the line's far end closes by construction, so its
    interior tie stations (e.g. the centre of a Union Jack) carry the information.
    """
    survey = model.survey
    obs = model.obs
    reads = survey.instrument.reads_heights
    zero_part = model.A[:, model.n :] @ u[model.n :]
    corrected = l - zero_part
    lines_at = {}
    for ln in survey.lines:
        for name in set(ln.stations):
            lines_at[name] = lines_at.get(name, 0) + 1
    scale = float(np.max(np.abs(l))) if l.size else 0.0
    out = []
    for li, ln in enumerate(survey.lines):
        sel = obs.line == li
        runs = np.unique(obs.run[sel])
        if reads:
            closure = _clean_zero(np.mean(r[sel]), scale)
            meaning = "mean residual of the line's indicator readings (observed minus adjusted height)"
            out.append(LineClosure(ln.name, closure, meaning, None))
            continue
        steps = len(ln.stations) - 1
        cum = np.zeros((runs.size, steps + 1))
        for j, k in enumerate(runs):
            m = sel & (obs.run == k)
            per_step = np.zeros(steps)
            per_step[obs.step[m]] = r[m]
            cum[j, 1:] = np.cumsum(per_step)
        mean_cum = cum.mean(axis=0)
        ties = [k for k in range(1, steps + 1) if lines_at.get(ln.stations[k], 0) > 1]
        if not ties:
            ties = [steps]
        k_worst = max(ties, key=lambda k: abs(mean_cum[k]))
        closure = _clean_zero(mean_cum[k_worst], scale)
        meaning = (
            "largest difference, at a station shared with another line, between the line's own integrated "
            "profile (zero removed, mean of its runs) and the adjusted heights; it comes from reading errors, "
            "not from flatness"
        )
        ends = np.array([corrected[sel & (obs.run == k)].sum() for k in runs])
        # Runs with zeros of their own (a run walked with the instrument turned round) have their
        # end-to-end rise fitted by that zero, so their spread is zero by construction: not stated.
        zero_sets = {
            tuple(np.unique(model.A[np.flatnonzero(sel & (obs.run == k)), model.n :].tocoo().col)) for k in runs
        }
        spread = _clean_zero(ends.max() - ends.min(), scale) if runs.size > 1 and len(zero_sets) == 1 else None
        out.append(LineClosure(ln.name, closure, meaning, spread, ln.stations[k_worst]))
    return tuple(out)


def _steps_text(steps) -> str:
    """``[1, 2, 3, 5]`` -> ``"steps 1-3, 5"`` (1-based step numbers)."""
    steps = sorted(set(int(k) for k in steps))
    parts, start, prev = [], steps[0], steps[0]
    for k in steps[1:] + [None]:
        if k is not None and k == prev + 1:
            prev = k
            continue
        parts.append(f"{start}-{prev}" if prev > start else f"{start}")
        if k is not None:
            start = prev = k
    return ("steps " if len(steps) > 1 else "step ") + ", ".join(parts)


def _group_text(model: _Model, members: np.ndarray) -> tuple[str, tuple]:
    """Words naming a group of readings by line, run and steps, and the lines' names."""
    survey, obs = model.survey, model.obs
    by_line: dict = {}
    for k in members:
        by_line.setdefault(int(obs.line[k]), {}).setdefault(int(obs.run[k]), []).append(int(obs.step[k]) + 1)
    parts, names = [], []
    for li in sorted(by_line):
        name = survey.lines[li].name
        names.append(name)
        runs = by_line[li]
        parts.append(", ".join(f"run {ri + 1}, {_steps_text(runs[ri])}" for ri in sorted(runs)))
    if len(names) == 1:
        return f"line {names[0]!r}, {parts[0]}", tuple(names)
    items = [f"{n!r} ({p})" for n, p in zip(names, parts)]
    return "lines " + ", ".join(items[:-1]) + " and " + items[-1], tuple(names)


def _snoop(model: _Model, K, r: np.ndarray, red: np.ndarray, w_std: np.ndarray, sigma_um: np.ndarray,
           apriori: bool, dof: int):
    """Iterated data snooping (module notes).

    Returns ``(groups, w_after)``: the suspect groups (index arrays, in the order found;
    each holds the readings with the same ``|w|``, which the layout cannot tell apart)
    and ``w`` of every reading once they are set aside (NaN for the suspects, for
    untestable readings, and for every reading when ``K`` is None: only the largest
    group is then named).
    """
    m = r.size
    a = np.abs(w_std)
    a[~np.isfinite(a)] = 0.0
    if m == 0 or a.max() <= OUTLIER_THRESHOLD:
        return [], np.where(np.isfinite(w_std), w_std, np.nan)
    if K is None:  # no dense operator: name the top group only
        k = int(np.argmax(a))
        return [np.flatnonzero(np.abs(a - a[k]) <= _TIE_RTOL * a[k])], np.full(m, np.nan)
    sw = np.sqrt(model.w)
    vt = sw * r  # residuals in the symmetric form W^1/2 r
    st = sigma_um * sw  # sigma in that form (constant when the weights follow sigma)
    omega = float(vt @ vt)
    w_cur = w_std.copy()
    red_now = red.copy()
    suspect = np.zeros(m, dtype=bool)
    groups, reps, cols = [], [], []

    def cols_now(k):
        if not cols:
            return 0.0
        C = np.column_stack(cols)
        return C @ np.linalg.solve(C[reps], C[k])
    for _ in range(_SNOOP_MAX_GROUPS):
        a = np.abs(w_cur)
        a[~np.isfinite(a) | suspect] = 0.0
        k = int(np.argmax(a))
        if a[k] <= OUTLIER_THRESHOLD:
            break
        c = -np.asarray(model.A @ K[:, k]).ravel() * sw / sw[k]  # column k of R (symmetric form)
        c[k] += 1.0
        # readings whose residuals are perfectly correlated with k's, once the earlier suspects are
        # set aside (column k of R - C M^-1 C^T): the layout cannot tell them from k
        c_now = c - cols_now(k)
        with np.errstate(invalid="ignore", divide="ignore"):
            rho = c_now / np.sqrt(np.clip(red_now, 1e-300, None) * max(red_now[k], 1e-300))
        members = np.flatnonzero((np.abs(rho) >= 1.0 - _TIE_RTOL) & (red_now > 1e-8))
        members = np.union1d(members, [k]).astype(np.int64)
        groups.append(members)
        suspect[members] = True
        reps.append(k)
        if not apriori and dof - len(reps) < 1:
            w_cur = np.full(m, np.nan)  # nothing left to estimate sigma from
            break
        cols.append(c)
        C = np.column_stack(cols)
        M = C[reps]
        try:
            coef = np.linalg.solve(M, vt[reps])
            CMi = np.linalg.solve(M, C.T).T
        except np.linalg.LinAlgError:  # pragma: no cover - reps are independent by construction
            break
        v2 = vt - C @ coef
        red2 = red - np.einsum("ij,ij->i", CMi, C)
        red_now = np.clip(red2, 0.0, None)
        if apriori:
            s2 = st
        else:
            s0sq = (omega - float(vt[reps] @ coef)) / (dof - len(reps))
            if not s0sq > 1e-24 * max(omega, 1e-300):
                w_cur = np.full(m, np.nan)
                break
            s2 = np.sqrt(s0sq)
        with np.errstate(invalid="ignore", divide="ignore"):
            w_cur = v2 / (s2 * np.sqrt(np.clip(red2, 0.0, None)))
        w_cur[~(red2 > np.maximum(1e-8, 1e-6 * red))] = np.nan
    w_after = w_cur.copy()
    w_after[suspect] = np.nan
    return groups, w_after


def _outliers(model: _Model, r: np.ndarray, w_std: np.ndarray, groups=(), w_after=None, diagnosed=True) -> tuple:
    """Flagged readings: the suspect groups first (in the order found, each in line, run and
    step order), then the others by decreasing ``|w|``."""
    survey = model.survey
    obs = model.obs
    m = r.size
    if w_after is None:
        w_after = np.full(m, np.nan)
    flag = np.flatnonzero(np.abs(np.nan_to_num(w_std)) > OUTLIER_THRESHOLD)
    group_of = {}
    info = []
    order = []
    for g, members in enumerate(groups, start=1):
        members = np.asarray(members)
        members = members[np.lexsort((obs.step[members], obs.run[members], obs.line[members]))]
        _, names = _group_text(model, members)
        info.append((members.size, names))
        for k in members:
            group_of[int(k)] = g
            order.append(int(k))
    rest = np.array([k for k in flag if int(k) not in group_of], dtype=np.int64)
    rest = rest[np.argsort(-np.abs(w_std[rest]), kind="stable")]
    order += [int(k) for k in rest]
    out = []
    for k in order:
        ln = survey.lines[int(obs.line[k])]
        run = ln.runs[int(obs.run[k])]
        st = int(obs.step[k])
        if survey.instrument.reads_heights:
            s_from, s_to = "", ln.stations[st]
        else:
            s_from, s_to = ln.stations[st], ln.stations[st + 1]
        g = group_of.get(k)
        if g is None and diagnosed and np.isfinite(w_after[k]) and abs(w_after[k]) <= OUTLIER_THRESHOLD:
            g = 0
        size, names = info[g - 1] if g else (1, ())
        out.append(
            Outlier(
                line=ln.name,
                run=int(obs.run[k]) + 1,
                step=st + 1,
                station_from=s_from,
                station_to=s_to,
                reading=float(obs.reading[k]),
                residual_um=float(r[k]),
                w=float(w_std[k]),
                where=run.where or f"line {ln.name!r}, run {int(obs.run[k]) + 1}",
                group=g,
                group_size=int(size),
                group_lines=tuple(names),
                w_after=float(w_after[k]),
            )
        )
    return tuple(out)


def _outlier_warnings(model: _Model, outliers: tuple, groups, w_std: np.ndarray, diagnosed: bool) -> list:
    """What the flagged readings say: each suspect group named, and how many were flagged."""
    if not outliers:
        return []
    m = w_std.size
    out = []
    a = np.abs(w_std)
    for g, members in enumerate(groups, start=1):
        text, names = _group_text(model, np.asarray(members))
        w_top = float(np.nanmax(a[members]))
        rank = f"largest |w| = {w_top:.2f}" if g == 1 else f"|w| = {w_top:.2f}, the largest once the suspects above are set aside"
        if len(members) == 1:
            o = next(o for o in outliers if o.group == g)
            out.append(
                f"suspect reading ({rank}): {o.describe()}; probably mis-keyed or misread: check "
                "it against the record, or re-read that step"
            )
        else:
            them = "the line" if len(names) == 1 else "these lines"
            it = "it" if len(names) == 1 else "them"
            out.append(
                f"suspect readings ({rank}, shared by {len(members)} readings): one of the "
                f"readings of {text} is probably wrong, and this layout cannot tell which; re-read {them}, or walk "
                f"{it} forward and back so that each reading is checked against its repeat"
            )
    n_flag = len(outliers)
    n_suspect = sum(1 for o in outliers if o.group is not None and o.group >= 1)
    n_through = sum(1 for o in outliers if o.group == 0)
    n_left = n_flag - n_suspect - n_through
    head = f"{n_flag} of {m} readings exceed |w| > {OUTLIER_THRESHOLD} (standardised residual)"
    if not diagnosed:
        head += "; the network is too large to set suspects aside and test again, so some may be flagged only " \
                "through another reading's error"
    elif n_through and not n_left:
        head += f"; {n_through} of them only through the suspect reading(s) named: with those set aside, none of these exceeds it"
    elif n_through or n_left:
        head += (
            f"; with the suspect reading(s) set aside, {n_through} fall within the limit and {n_left} still exceed it"
        )
    out.append(head)
    return out


def _weak_lines(model: _Model, red: np.ndarray, sigma_reading: float) -> list:
    """Lines whose readings are barely checked (redundancy number below WEAK_REDUNDANCY) or not at all."""
    survey, obs = model.survey, model.obs
    unit = survey.instrument.unit
    weak, unchecked = {}, {}
    for li, ln in enumerate(survey.lines):
        r_line = red[obs.line == li]
        if r_line.size == 0:
            continue
        n_zero = int(np.sum(r_line <= 1e-8))
        low = r_line[(r_line > 1e-8) & (r_line < WEAK_REDUNDANCY)]
        if n_zero:
            share = "" if n_zero == r_line.size else f"{n_zero} of {r_line.size} readings"
            unchecked.setdefault(share, []).append(ln.name)
        if low.size:
            share = "" if low.size == r_line.size else f"{low.size} of {r_line.size} readings, "
            weak.setdefault((round(float(low.min()), 3), share), []).append((ln.name, float(low.min())))
    if survey.instrument.reads_heights:
        fix = "read {them} again (a second run), so that each height is checked against its repeat"
    else:
        fix = "walk {them} forward and back, or add a run, so that each reading is checked against its repeat"
    out = []
    if weak:
        has_sigma = bool(np.isfinite(sigma_reading) and sigma_reading > 0)
        parts = []
        for (r_min, share) in sorted(weak):
            names = " and ".join(repr(n) for n, _ in weak[(r_min, share)])
            mdb = ""
            if has_sigma:  # Baarda's minimal detectable error, 0.1 % level and 80 % power
                r_low = min(r for _, r in weak[(r_min, share)])
                mdb = f", {_DELTA0 * sigma_reading / np.sqrt(r_low):.2g} {unit}"
            parts.append(f"{names} ({share}redundancy number {'down to ' if share else ''}{r_min:.3f}{mdb})")
        many = sum(len(v) for v in weak.values()) > 1
        why = (
            " (a wrong reading there is found reliably only when it is off by more than the amount given)"
            if has_sigma else " (a wrong reading there can pass unseen)"
        )
        out.append(
            f"weakly checked line{'s' if many else ''}{why}: " + "; ".join(parts) + ". "
            + fix.format(them="them" if many else "it").capitalize()
        )
    if unchecked:
        parts = []
        for share in sorted(unchecked):
            names = ", ".join(repr(n) for n in unchecked[share])
            parts.append(f"{names}" + (f" ({share})" if share else ""))
        many = sum(len(v) for v in unchecked.values()) > 1
        out.append(
            f"readings not checked at all (redundancy number 0): line{'s' if many else ''} " + "; ".join(parts)
            + ": a wrong reading there cannot be seen; " + fix.format(them="them" if many else "it")
            + ", or add a line that crosses them"
        )
    return out


def _sigma0(model: _Model, r: np.ndarray, dof: int) -> tuple[float, float]:
    if dof <= 0:
        return float("nan"), float("nan")
    s0 = float(np.sqrt(np.sum(model.w * r * r) / dof))
    if model.survey.instrument.reads_heights:
        return s0, s0 / model.slope_factor
    # µm over ref_base -> reading unit: rise = base_um * factor * reading (small angles)
    return s0, s0 / (model.ref_base_mm * 1e3 * model.slope_factor)


def _obs_sigma(model: _Model, sigma0_um: float) -> tuple[np.ndarray, bool]:
    """Standard deviation of each observation (µm) used by the test, and whether it is stated a priori."""
    inst = model.survey.instrument
    if inst.reading_uncertainty is not None and inst.reading_uncertainty > 0:
        return inst.reading_uncertainty * np.abs(model.obs.um_per_unit), True  # Baarda: a-priori sigma
    return sigma0_um / np.sqrt(model.w), False  # Pope: a-posteriori sigma


def _standardize(model: _Model, r: np.ndarray, red: np.ndarray, sigma0_um: float, sigma: np.ndarray) -> np.ndarray:
    """``w`` of every observation, ``sigma`` (µm) from :func:`_obs_sigma`; NaN where it cannot be tested."""
    inst = model.survey.instrument
    with np.errstate(invalid="ignore", divide="ignore"):
        w = r / (sigma * np.sqrt(red))
    w[~(red > 1e-8)] = np.nan
    if inst.reading_uncertainty is None:
        # no a-priori sigma: nothing to test without redundancy, or when the residuals
        # are rounding noise (exact, e.g. simulated, readings)
        scale = float(np.sqrt(np.mean(model.obs.value_um**2))) if r.size else 0.0
        if not np.isfinite(sigma0_um) or sigma0_um <= 1e-10 * max(scale, 1e-300):
            w[:] = np.nan
    return w
