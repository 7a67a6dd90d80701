"""Guideways as bodies: faces tied together, their geometry, and a carriage that wraps them.

Imports :mod:`flatcheck.form`, :mod:`flatcheck.bearing`, :mod:`flatcheck.errors` and :mod:`flatcheck.units`.

The body
    GuidewayBody, Face, ThicknessTie, HeightTie, SquarenessTie, TwistRun, NORMALS
Geometry (ISO 1101 zones, ISO 5459 datums, faces fitted to their ties)
    evaluate_body, BodyGeometry, FaceGeometry, FacePlane, TieResidual, Parallelism, Squareness, Twist,
    RailPair, window_ptp, TWIST_WINDOW_MM
The carriage (static equilibrium on the air films, ISO 230-1 error motions)
    WrapCarriage, GuidewayBudget, solve_carriage, carriage_stations, WrapResult, WrapMotion, PadTravel,
    MOTION_NAMES, DEFAULT_FILM_MESH
Verdict and lapping advice
    judge, GuidewayVerdict, GuidewayCheck, lapping_advice, LappingAdvice
Plain summaries (JSON and reports)
    body_summary, carriage_summary, verdict_summary, advice_summary
"""

from .._lazy import attach as _attach

__getattr__, __dir__, __all__ = _attach(
    __name__,
    {
        "_body": (
            "GuidewayBody",
            "Face",
            "ThicknessTie",
            "HeightTie",
            "SquarenessTie",
            "TwistRun",
            "NORMALS",
        ),
        "_geometry": (
            "evaluate_body",
            "BodyGeometry",
            "FaceGeometry",
            "FacePlane",
            "TieResidual",
            "Parallelism",
            "Squareness",
            "Twist",
            "RailPair",
            "window_ptp",
            "TWIST_WINDOW_MM",
        ),
        "_carriage": (
            "WrapCarriage",
            "GuidewayBudget",
            "solve_carriage",
            "carriage_stations",
            "WrapResult",
            "WrapMotion",
            "PadTravel",
            "MOTION_NAMES",
        ),
        "_film_table": ("DEFAULT_FILM_MESH",),
        "_verdict": ("judge", "GuidewayVerdict", "GuidewayCheck"),
        "_advice": ("lapping_advice", "LappingAdvice"),
        "_summary": ("body_summary", "carriage_summary", "verdict_summary", "advice_summary", "guideway_summary"),
    },
)
