"""Spheres and spherical seats: form of balls and seats, ball grades, ball-and-seat clearance.

Positions in mm, radial deviations and form in µm (positive away from the centre).

Fitting (see :mod:`flatcheck.spheres._fit` for the methods and their sources)
    least_squares_sphere, minimum_zone_sphere, minimum_circumscribed_sphere, SphereFit,
    coverage_deg, surrounds_center
Ball grades (ISO 3290-1:2014, deviation from spherical form)
    ball_grade, BallGrade, ISO_3290_1_FORM_UM, GRADE_SOURCE
Matched ball and seat (the film of a spherical air bearing)
    ball_seat_clearance, Clearance
"""

from ._clearance import Clearance, ball_seat_clearance
from ._fit import (
    SphereFit,
    coverage_deg,
    least_squares_sphere,
    minimum_circumscribed_sphere,
    minimum_zone_sphere,
    surrounds_center,
)
from ._grades import GRADE_SOURCE, ISO_3290_1_FORM_UM, BallGrade, ball_grade

__all__ = [
    "least_squares_sphere",
    "minimum_zone_sphere",
    "minimum_circumscribed_sphere",
    "SphereFit",
    "coverage_deg",
    "surrounds_center",
    "ball_grade",
    "BallGrade",
    "ISO_3290_1_FORM_UM",
    "GRADE_SOURCE",
    "ball_seat_clearance",
    "Clearance",
]
