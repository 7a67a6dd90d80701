"""Conformity decisions for a flatness tolerance (ISO 14253-1:2017 decision rules).

Flatness has only an upper specification limit ``T`` (a zone of width ``T``; the measured
flatness ``F`` is never negative). With an expanded uncertainty ``U`` (coverage about 95 %,
``U = k u_c``), the default rule of ISO 14253-1:2017 counts the uncertainty against whoever
makes the claim:

* ``conforms``          when ``F <= T - U`` (conformity proven),
* ``does-not-conform``  when ``F >  T + U`` (non-conformity proven),
* ``undecided``         otherwise (``T - U < F <= T + U``).

*Simple acceptance* (no guard band: ``conforms`` when ``F <= T``, else ``does-not-conform``)
is available when chosen explicitly and is labelled as such; it ignores the uncertainty.

When the ISO 14253-1 rule is requested but ``U`` is not known, the rule cannot be applied.
flatcheck then falls back to simple acceptance and says so in the decision
(``rule = "simple-acceptance"``, ``rule_requested = "iso14253-1"``,
``uncertainty_known = False`` and a statement that the verdict proves nothing about the
uncertainty). It never applies a rule silently.

Values equal to within ``1e-9`` of the tolerance (relative) count as equal, so that a
flatness typed as 3.6 µm sits exactly on the limit ``4.0 - 0.4``.

References
----------
.. [1] ISO 14253-1:2017, Geometrical product specifications (GPS) - Inspection by
       measurement of workpieces and measuring equipment - Part 1: Decision rules for
       verifying conformity or nonconformity with specifications (default rule, clause 5).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from ..errors import InputValueError

__all__ = [
    "RULES",
    "CONFORMS",
    "DOES_NOT_CONFORM",
    "UNDECIDED",
    "Decision",
    "GradeVerdict",
    "decide",
    "assess_grades",
    "normalise_rule",
]

CONFORMS = "conforms"
DOES_NOT_CONFORM = "does-not-conform"
UNDECIDED = "undecided"

ISO14253 = "iso14253-1"
SIMPLE = "simple-acceptance"
#: Accepted rule names (command line and library) -> canonical rule.
RULES = {
    "iso14253": ISO14253,
    "iso14253-1": ISO14253,
    "iso-14253-1": ISO14253,
    "iso": ISO14253,
    "simple": SIMPLE,
    "simple-acceptance": SIMPLE,
}

_REL_EQ = 1e-9  # relative tolerance for "equal to the limit"


@dataclass(frozen=True)
class Decision:
    """The verdict of one flatness result against one tolerance.

    Attributes
    ----------
    verdict : {"conforms", "does-not-conform", "undecided"}
        The decision.
    rule : {"iso14253-1", "simple-acceptance"}
        The rule actually applied.
    rule_requested : {"iso14253-1", "simple-acceptance"}
        The rule asked for (differs from ``rule`` only when ``U`` was unknown).
    flatness_um : float
        Measured flatness F in µm.
    tolerance_um : float
        Tolerance T (upper limit) in µm.
    expanded_uncertainty_um : float or None
        Expanded uncertainty U in µm, ``None`` when unknown.
    uncertainty_known : bool
        Whether U was given.
    acceptance_limit_um : float
        The largest F that conforms (``T - U`` or ``T``), in µm.
    rejection_limit_um : float
        F above this does not conform (``T + U`` or ``T``), in µm.
    statement : str
        The rule in words, as it should appear in a report.
    """

    verdict: str
    rule: str
    rule_requested: str
    flatness_um: float
    tolerance_um: float
    expanded_uncertainty_um: float | None
    uncertainty_known: bool
    acceptance_limit_um: float
    rejection_limit_um: float
    statement: str


@dataclass(frozen=True)
class GradeVerdict:
    """One grade's tolerance (a :class:`flatcheck.Tolerance`) and its decision."""

    tolerance: object
    decision: Decision


def normalise_rule(rule: str) -> str:
    """Canonical rule name (``"iso14253-1"`` or ``"simple-acceptance"``) for a user's spelling.

    Raises
    ------
    InputValueError
        For an unknown rule name.
    """
    key = str(rule).strip().lower()
    if key not in RULES:
        raise InputValueError(f"unknown decision rule {rule!r}", where="--rule", fix="use 'iso14253' or 'simple'")
    return RULES[key]


def _finite(name: str, value, *, positive: bool = False) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputValueError(f"{name} {value!r} is not a number", fix=f"give {name} as a number in µm") from None
    if not math.isfinite(v) or v < 0 or (positive and v == 0):
        need = "positive" if positive else "non-negative"
        raise InputValueError(f"{name} {v:g} µm is not a {need} finite number", fix=f"give a {need} {name} in µm")
    return v


def _le(a: float, b: float, scale: float) -> bool:
    """``a <= b`` with values equal to within ``_REL_EQ * scale`` counted as equal."""
    return a <= b + _REL_EQ * max(scale, 1e-300)


def decide(
    flatness_um: float,
    tolerance_um: float,
    expanded_uncertainty_um: float | None = None,
    rule: str = "iso14253",
) -> Decision:
    """Decide conformity of a flatness result with an upper tolerance limit.

    Parameters
    ----------
    flatness_um : float
        Measured flatness F in µm (>= 0).
    tolerance_um : float
        Tolerance T in µm (> 0); flatness has only this upper limit.
    expanded_uncertainty_um : float, optional
        Expanded uncertainty U of F in µm (>= 0), coverage about 95 %. ``None``: unknown.
    rule : {"iso14253", "simple"}
        ``"iso14253"`` (default): the ISO 14253-1:2017 default rule with guard band U;
        ``"simple"``: simple acceptance, F <= T, no guard band.

    Returns
    -------
    Decision

    Raises
    ------
    InputValueError
        Negative or non-finite values, T = 0, unknown rule.

    Examples
    --------
    ISO 14253-1 with T = 4.0 µm and U = 0.4 µm:

    >>> [decide(f, 4.0, 0.4).verdict for f in (3.5, 3.7, 4.5)]
    ['conforms', 'undecided', 'does-not-conform']
    """
    F = _finite("flatness", flatness_um)
    T = _finite("tolerance", tolerance_um, positive=True)
    U = None if expanded_uncertainty_um is None else _finite("expanded uncertainty", expanded_uncertainty_um)
    requested = normalise_rule(rule)
    applied = requested
    scale = max(T, F)
    if requested == ISO14253 and U is None:
        applied = SIMPLE
        statement = (
            "expanded uncertainty unknown: the ISO 14253-1 rule cannot be applied, so simple acceptance "
            "(conforms if F <= T) is used instead; this verdict does not account for measurement uncertainty"
        )
        lo = hi = T
    elif applied == SIMPLE:
        lo = hi = T
        statement = "simple acceptance (chosen explicitly): conforms if F <= T, else does not conform; no guard band"
        if U is not None:
            statement += f"; the expanded uncertainty U = {U:.3g} um is reported but not used"
    else:
        lo, hi = T - U, T + U
        statement = (
            "ISO 14253-1:2017 default rule: conforms if F <= T - U, does not conform if F > T + U, "
            "otherwise undecided"
        )
        if U >= T:
            statement += "; here U >= T, so conformity could only be proven for F <= T - U <= 0"
    if applied == SIMPLE:
        verdict = CONFORMS if _le(F, T, scale) else DOES_NOT_CONFORM
    else:
        if lo >= 0 and _le(F, lo, scale):
            verdict = CONFORMS
        elif not _le(F, hi, scale):
            verdict = DOES_NOT_CONFORM
        else:
            verdict = UNDECIDED
    return Decision(
        verdict=verdict,
        rule=applied,
        rule_requested=requested,
        flatness_um=F,
        tolerance_um=T,
        expanded_uncertainty_um=U,
        uncertainty_known=U is not None,
        acceptance_limit_um=float(lo),
        rejection_limit_um=float(hi),
        statement=statement,
    )


def assess_grades(
    flatness_um: float,
    tolerances,
    expanded_uncertainty_um: float | None = None,
    rule: str = "iso14253",
) -> tuple:
    """Decide conformity with each of several grade tolerances.

    Parameters
    ----------
    flatness_um : float
        Measured flatness in µm.
    tolerances : sequence of Tolerance
        One per grade (objects with a ``tolerance_um`` attribute), finest first.
    expanded_uncertainty_um : float, optional
        Expanded uncertainty in µm, ``None`` when unknown.
    rule : {"iso14253", "simple"}
        Decision rule (see :func:`decide`).

    Returns
    -------
    tuple of GradeVerdict
        In the order given.
    """
    return tuple(
        GradeVerdict(t, decide(flatness_um, t.tolerance_um, expanded_uncertainty_um, rule)) for t in tolerances
    )
