"""Grades of balls by their deviation from spherical form (ISO 3290-1:2014).

ISO 3290-1 (steel balls; ISO 3290-2 gives the same figures for silicon nitride) ties each grade
G3 ... G200 to limits on the variation of ball diameter, the deviation from spherical form, the
roughness and the lot. flatcheck states which grades the measured *form* allows; the other limits
need their own measurements, so a form figure alone never makes a ball a grade.

Source of the table: ISO 3290-1:2014, deviation from spherical form tDw, as reproduced in ball
makers' tables (seen in two of them, identical; secondary source, the standard's own text not seen).
The shared reference lists G3-G40 the same way. The definition, from the same secondary sources:
the greatest radial distance, in any radial plane, between a sphere circumscribed around the ball
surface and any point of it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from ..errors import InputValueError

__all__ = ["ISO_3290_1_FORM_UM", "GRADE_SOURCE", "BallGrade", "ball_grade"]

#: Deviation from spherical form tDw (µm, maximum) per grade, ISO 3290-1:2014 (secondary source, see above).
ISO_3290_1_FORM_UM = (
    ("G3", 0.08),
    ("G5", 0.13),
    ("G10", 0.25),
    ("G16", 0.4),
    ("G20", 0.5),
    ("G24", 0.6),
    ("G28", 0.7),
    ("G40", 1.0),
    ("G60", 1.5),
    ("G100", 2.5),
    ("G200", 5.0),
)
GRADE_SOURCE = "ISO 3290-1:2014, deviation from spherical form tDw (table as reproduced by ball makers)"


@dataclass(frozen=True)
class BallGrade:
    """The ISO 3290-1 grades a ball's measured form allows.

    Attributes
    ----------
    deviation_um : float
        The form figure compared with the limits, µm.
    expanded_uncertainty_um : float or None
        Its expanded uncertainty (k = 2), µm, when stated.
    grade : str or None
        Finest grade whose limit is not exceeded by the deviation (None: coarser than G200).
    limit_um : float or None
        That grade's limit, µm.
    proven_grade : str or None
        Finest grade whose limit holds the deviation plus its uncertainty (ISO 14253-1
        conformance); None without an uncertainty or when no grade is proven.
    rows : tuple of (str, float, bool)
        Every grade with its limit and whether the deviation is within it.
    source : str
    """

    deviation_um: float
    expanded_uncertainty_um: float | None
    grade: str | None
    limit_um: float | None
    proven_grade: str | None
    rows: tuple
    source: str = GRADE_SOURCE


def ball_grade(deviation_um: float, *, expanded_uncertainty_um: float | None = None) -> BallGrade:
    """The finest ISO 3290-1 grade a deviation from spherical form allows.

    Parameters
    ----------
    deviation_um : float
        Deviation from spherical form, µm (>= 0).
    expanded_uncertainty_um : float, optional
        Its expanded uncertainty U (k = 2), µm; with it the grade *proven* under ISO 14253-1
        (deviation + U within the limit) is stated as well.

    Returns
    -------
    BallGrade

    Raises
    ------
    InputValueError
        A negative or non-finite deviation or uncertainty.

    Examples
    --------
    >>> ball_grade(0.12).grade          # G5 allows 0.13 µm, G3 only 0.08 µm
    'G5'
    >>> ball_grade(0.12, expanded_uncertainty_um=0.05).proven_grade
    'G10'
    """
    if not (math.isfinite(deviation_um) and deviation_um >= 0):
        raise InputValueError(f"deviation {deviation_um} µm is not a non-negative number")
    if expanded_uncertainty_um is not None and not (math.isfinite(expanded_uncertainty_um) and expanded_uncertainty_um >= 0):
        raise InputValueError(f"uncertainty {expanded_uncertainty_um} µm is not a non-negative number")
    rows = tuple((g, lim, deviation_um <= lim) for g, lim in ISO_3290_1_FORM_UM)
    within = [(g, lim) for g, lim, ok in rows if ok]
    grade, limit = within[0] if within else (None, None)
    proven = None
    if expanded_uncertainty_um is not None:
        ok = [g for g, lim in ISO_3290_1_FORM_UM if deviation_um + expanded_uncertainty_um <= lim]
        proven = ok[0] if ok else None
    return BallGrade(deviation_um, expanded_uncertainty_um, grade, limit, proven, rows)
