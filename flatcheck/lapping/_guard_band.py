"""Lapping targets that must be proven: the ISO 14253-1 guard band.

A lapping target taken from a grade (``--target-grade``) or from an air gap (``--target-gap-um``) is a
specification limit ``T`` that the survey after lapping must *prove*: by the default rule of ISO 14253-1:2017
the surface conforms only when the measured flatness ``F`` satisfies ``F + U <= T``, ``U`` being the expanded
uncertainty of that survey. A plan that aims at ``T`` itself leaves the next survey, at best, undecided. So
the plan aims at ``T - U`` (the acceptance limit of ISO 14253-1, the zone reduced by the guard band ``U``).
``U`` of the next survey is not known before it is made; the budget of the survey being planned from (same
surface, instrument and layout) is taken as its estimate, and the outputs say so.

A target given as a number (``--target-um``) is an aim as the person stated it and stays as given, unless a
guard band is asked for (``--guard-band budget`` or a number in µm). ``--guard-band none`` aims at any limit
itself (conformity is then judged later by simple acceptance, or left undecided).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from ..errors import InputValueError

__all__ = ["GUARD_BAND_MODES", "LapTarget", "target_kind", "parse_guard_band", "needs_budget_u", "guard_banded"]

#: ``--guard-band`` words (a number in µm is accepted too).
GUARD_BAND_MODES = ("auto", "budget", "none")


@dataclass(frozen=True)
class LapTarget:
    """What a lapping plan aims at, and why.

    Attributes
    ----------
    limit_um : float
        The target as stated: a number, a grade's tolerance, or the air-bearing limit (µm).
    aim_um : float
        What the plan aims at: ``limit_um - guard_band_um`` (µm).
    source : str
        Where the limit comes from.
    kind : {"given", "grade", "gap"}
        How the target was stated.
    guard_band_um : float
        The guard band (µm): the expected U of the survey after lapping; 0 when none.
    guard_band_source : str
        Where the guard band comes from, or why there is none.
    proven : bool
        True when the aim lets the next survey prove the limit under ISO 14253-1 (a guard band from a U).
    """

    limit_um: float
    aim_um: float
    source: str
    kind: str
    guard_band_um: float
    guard_band_source: str
    proven: bool

    def source_text(self, units: str = "um") -> str:
        """Where the plan's target comes from, with the guard band when there is one (display units; the limit
        as stated, :func:`flatcheck.units.format_limit`)."""
        from ..units import format_limit, format_with_uncertainty

        if self.guard_band_um <= 0:
            return self.source
        short = self.guard_band_source.split(" (Monte Carlo")[0]  # the run's details go in the notes and JSON
        return (f"limit {format_limit(self.limit_um, units)}: {self.source}; less the guard band U = "
                f"{format_with_uncertainty(self.guard_band_um, self.guard_band_um, units)[1]} ({short}), so that the "
                "survey after lapping can prove the limit (ISO 14253-1)")

    @property
    def notes(self) -> tuple:
        """The guard band's source, or why there is none, as notes for the plan."""
        if self.guard_band_um > 0:
            out = [f"guard band: {self.guard_band_source}; a survey after lapping conforms to the limit only when "
                   "its flatness plus its own U is within it (ISO 14253-1:2017 default rule)"]
            if self.kind == "gap":
                out.append("the air-bearing limit is applied here to the whole surface's flatness, with the whole "
                           "surface's U; 'flatcheck bearing' judges the form under each pad itself, with the "
                           "(usually much smaller) U of that local figure")
            return tuple(out)
        return (f"target {self.guard_band_source}",) if self.kind == "given" else (
            f"guard band: {self.guard_band_source}",)

    @property
    def text(self) -> str:
        """The target in a sentence (µm), for notes and plain-text plans."""
        if self.guard_band_um > 0:
            return (f"limit {self.limit_um:.4g} µm ({self.source}) less the guard band U = {self.guard_band_um:.2g} µm "
                    f"({self.guard_band_source}): the plan aims at {self.aim_um:.4g} µm, so that the survey after "
                    "lapping can prove the limit (ISO 14253-1:2017: conforms only when F + U is within it)")
        return f"{self.limit_um:.4g} µm ({self.source}); {self.guard_band_source}"


def target_kind(target_um, target_grade, target_gap_um) -> str:
    """``"grade"``, ``"gap"`` or ``"given"``: how the one target was stated (options as in :func:`resolve_target`)."""
    if target_grade is not None:
        return "grade"
    if target_gap_um is not None:
        return "gap"
    return "given"


def parse_guard_band(text) -> str | float:
    """``--guard-band``: ``"auto"`` (default: from the budget for a grade or a gap, none for a number),
    ``"budget"`` (from the budget for any target), ``"none"``, or a guard band in µm (>= 0).

    Raises
    ------
    InputValueError
        Anything else, naming ``--guard-band``.
    """
    if text is None:
        return "auto"
    s = str(text).strip().lower()
    if s in GUARD_BAND_MODES:
        return s
    try:
        v = float(s)
    except ValueError:
        raise InputValueError(
            f"{text!r} is not a guard band", where="--guard-band",
            fix="give auto, budget, none, or the expected U of the survey after lapping in µm (e.g. 0.4)",
        ) from None
    if not (math.isfinite(v) and v >= 0):
        raise InputValueError(f"a guard band of {text} µm is not allowed", where="--guard-band",
                              fix="give a number of µm, 0 or above (or none)")
    from ..limits import check_range

    return check_range(v, "uncertainty_um", where="--guard-band", name="the guard band") if v > 0 else 0.0


def needs_budget_u(kind: str, mode) -> bool:
    """Whether the guard band is to come from the survey's uncertainty budget."""
    return mode == "budget" or (mode == "auto" and kind in ("grade", "gap"))


def guard_banded(limit_um: float, source: str, kind: str, mode, u_um: float | None = None,
                 u_source: str | None = None) -> LapTarget:
    """The target a plan aims at (module notes).

    Parameters
    ----------
    limit_um : float
        The target as resolved (:func:`flatcheck.lapping.resolve_target`), µm.
    source : str
        Where it comes from.
    kind : {"given", "grade", "gap"}
    mode : str or float
        :func:`parse_guard_band`'s result.
    u_um : float, optional
        The expected U of the survey after lapping (µm), when the budget gave one.
    u_source : str, optional
        Where ``u_um`` comes from.

    Returns
    -------
    LapTarget

    Raises
    ------
    InputValueError
        ``--guard-band budget`` with no U to be had; a guard band as large as the limit (no survey with that
        uncertainty could prove conformity).
    """
    limit = float(limit_um)
    if isinstance(mode, float):
        u, why = mode, f"stated with --guard-band {mode:g}"
    elif mode == "none":
        why = ("no guard band (--guard-band none): the plan aims at the limit itself, so the survey after lapping "
               "cannot prove it (ISO 14253-1 leaves F near the limit undecided)" if kind != "given" else
               "taken as given (--guard-band none)")
        return LapTarget(limit, limit, source, kind, 0.0, why, False)
    elif not needs_budget_u(kind, mode):
        return LapTarget(limit, limit, source, kind, 0.0,
                         "taken as given, no guard band (add --guard-band budget, or a U in µm, to aim below it by the "
                         "uncertainty of the survey after lapping)", False)
    elif u_um is None:
        if mode == "budget":
            raise InputValueError(
                "--guard-band budget needs the survey's uncertainty budget, which this input does not give"
                + (f" ({u_source})" if u_source else ""),
                where="--guard-band",
                fix="give --u-height-um for a height map, or the guard band in µm (--guard-band 0.4), or none",
            )
        why = ("no guard band: " + (u_source or "no uncertainty known for this input")
               + "; the plan aims at the limit itself, which the survey after lapping cannot prove (give "
               "--u-height-um, or --guard-band U in µm)")
        return LapTarget(limit, limit, source, kind, 0.0, why, False)
    else:
        u, why = float(u_um), (u_source or "the survey's uncertainty budget")
    if u <= 0:
        return LapTarget(limit, limit, source, kind, 0.0, f"guard band 0 ({why})", True)
    if u >= limit:
        raise InputValueError(
            f"the guard band U = {u:.2g} µm ({why}) is as large as the limit {limit:.4g} µm: no survey with that "
            "uncertainty could prove conformity, so no plan can aim below it",
            where="--guard-band",
            fix="state the survey's uncertainties (defaults are cautious; see the budget in 'flatcheck reduce "
                "--uncertainty'), measure with a smaller uncertainty, or give --guard-band none to aim at the limit",
        )
    return LapTarget(limit, limit - u, source, kind, u, why, True)
