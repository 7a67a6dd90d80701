"""Is the guideway fit for the carriage at its design gap? Checks, the verdict and its reason in one line.

Every check gives ``ratio = value / limit``. *Unfit*: some ratio above 1 (or a pad that would touch);
*marginal*: the largest ratio at or above ``marginal_from`` (default 0.8) and not above 1; *fit*: every
ratio below ``marginal_from``. The same bands as ``flatcheck bearing`` (a convention of this tool).

Checks
------
- each pad's film: the film it loses, ``gap - least film`` over the travel, against ``gap - margin``
  (margin: ``[carriage] min_film_um``, else ``(1 - gap_fraction) x gap``; gap fraction 1/4 by default,
  common practice, no single source); a station with no open-film equilibrium counts as the pad touching;
- local form under the pads: the largest minimum-zone flatness of a face under any pad's footprint against
  ``gap_fraction x gap`` (as ``flatcheck bearing``);
- the error motions against the user's budget (``[budget]``): vertical and horizontal straightness (µm),
  pitch, yaw and roll (arcsec, peak-to-valley over the travel).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["GuidewayCheck", "GuidewayVerdict", "judge"]

_ORDER = {"fit": 0, "marginal": 1, "unfit": 2}
_MOTION_TEXT = {
    "vertical_straightness_um": ("vertical straightness", "um"),
    "horizontal_straightness_um": ("horizontal straightness", "um"),
    "pitch_arcsec": ("pitch", "arcsec"),
    "yaw_arcsec": ("yaw", "arcsec"),
    "roll_arcsec": ("roll", "arcsec"),
}


@dataclass(frozen=True)
class GuidewayCheck:
    """One check of the guideway for the carriage.

    Attributes
    ----------
    name : str
        What is checked (``"film of pad 'top-front'"``).
    value, limit : float
        In ``unit``.
    unit : {"um", "arcsec"}
    ratio : float
        ``value / limit`` (infinite for a pad that would touch).
    status : {"fit", "marginal", "unfit"}
    where : str
        Where along the travel (``"x = 420 mm"``), empty when fit.
    basis : str
        Where the limit comes from.
    reason : str
        The check's finding in one line.
    """

    name: str
    value: float
    limit: float
    unit: str
    ratio: float
    status: str
    where: str
    basis: str
    reason: str


@dataclass(frozen=True)
class GuidewayVerdict:
    """Fit, marginal or unfit, with the reason in one line and every check."""

    verdict: str
    reason: str
    checks: tuple


def _status(ratio: float, marginal_from: float) -> str:
    if not ratio <= 1.0:
        return "unfit"
    if ratio >= marginal_from:
        return "marginal"
    return "fit"


def judge(result) -> GuidewayVerdict:
    """Judge the guideway for the carriage from the carriage's result.

    Parameters
    ----------
    result : WrapResult
        The carriage over the travel (:func:`solve_carriage`).

    Returns
    -------
    GuidewayVerdict
    """
    c = result.carriage
    mf = c.marginal_from
    x = result.x_mm
    checks = []
    failed = {}
    for xf, pad, _why in result.failures:
        failed.setdefault(pad, []).append(xf)
    for p in result.pads:
        limit = p.gap_um - p.margin_um
        basis = (f"margin {p.margin_um:.3g} µm: " + ("[carriage] min_film_um" if c.min_film_um is not None
                 else f"(1 - {c.gap_fraction:g}) x gap, common practice, no published ratio"))
        if p.name in failed:
            xs = failed[p.name]
            where = f"x = {xs[0]:.0f} mm" + (f" (+{len(xs) - 1} more)" if len(xs) > 1 else "")
            checks.append(GuidewayCheck(
                f"film of pad {p.name!r}", p.gap_um, limit, "um", float("inf"), "unfit", where, basis,
                f"pad {p.name!r} would touch the {p.face} at {where}",
            ))
            continue
        ok = np.isfinite(p.min_film_um)
        if not ok.any():
            continue
        i = int(np.nanargmin(p.min_film_um))
        lost = max(p.gap_um - float(p.min_film_um[i]), 0.0)  # a film that grew has lost nothing
        ratio = lost / limit if limit > 0 else float("inf")
        st = _status(ratio, mf)
        checks.append(GuidewayCheck(
            f"film of pad {p.name!r}", lost, limit, "um", ratio, st, "" if st == "fit" else f"x = {x[i]:.0f} mm", basis,
            f"pad {p.name!r} keeps {p.min_film_um[i]:.2f} µm of its {p.gap_um:g} µm film at x = {x[i]:.0f} mm "
            f"(margin {p.margin_um:.2f} µm)",
        ))
    # local form under the pads
    worst = None
    for p in result.pads:
        lim = c.gap_fraction * p.gap_um
        r = p.local_flatness_um / lim
        i = int(np.nanargmax(r))
        if worst is None or r[i] > worst[0]:
            worst = (float(r[i]), p, i, lim)
    if worst is not None:
        r, p, i, lim = worst
        st = _status(r, mf)
        checks.append(GuidewayCheck(
            "local form under the pads", float(p.local_flatness_um[i]), lim, "um", r, st,
            "" if st == "fit" else f"x = {x[i]:.0f} mm",
            f"{c.gap_fraction:g} of the gap (common practice, no published ratio)",
            f"the {p.face} is {p.local_flatness_um[i]:.2f} µm out of flat under pad {p.name!r} at x = {x[i]:.0f} mm "
            f"(limit {lim:.2f} µm)",
        ))
    summary = result.motion.summary()
    for key, lim, unit in c.budget.items():
        v = summary[key]
        label, _ = _MOTION_TEXT[key]
        if not np.isfinite(v):
            continue  # a motion no pad holds is named in the notes, not judged
        r = v / lim
        st = _status(r, mf)
        u = "µm" if unit == "um" else "arcsec"
        checks.append(GuidewayCheck(
            f"carriage {label}", v, lim, unit, r, st, "" if st == "fit" else "over the travel", "motion budget (user)",
            f"{label} {v:.2f} {u} over the travel against a budget of {lim:g} {u}",
        ))
    if not checks:
        return GuidewayVerdict("unfit", "no station of the travel has an equilibrium", ())
    verdict = max((ch.status for ch in checks), key=_ORDER.__getitem__)
    worst_check = max(checks, key=lambda ch: (_ORDER[ch.status], ch.ratio))
    if verdict == "fit":
        films = [ch for ch in checks if ch.name.startswith("film of pad")]
        least = min(result.pads, key=lambda p: p.least_film_um if np.isfinite(p.least_film_um) else np.inf)
        i = int(np.nanargmin(least.min_film_um))
        reason = (f"every pad keeps at least {least.min_film_um[i]:.2f} µm of film (pad {least.name!r} on the "
                  f"{least.face} at x = {x[i]:.0f} mm)")
        if any(ch.unit == "arcsec" or ch.name.endswith("straightness") for ch in checks):
            reason += "; motions within budget"
        if not films:
            reason = worst_check.reason
    else:
        reason = worst_check.reason
    return GuidewayVerdict(verdict, reason, tuple(checks))
