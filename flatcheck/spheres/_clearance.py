"""Radial clearance of a matched ball and seat: the film of a spherical air bearing.

With the ball centred in its seat (the bearing lifted and unloaded), the film at a point of the
seat is the seat's distance from the common centre less the ball's radius. From least-squares fits
of both parts:

    film_i = R_seat + e_seat,i - R_ball        (e_seat,i: the seat's radial deviation at point i)

The ball turns in its seat, so any point of the ball can come over any point of the seat: its own
form (radial deviations from ``e_ball,min`` to ``e_ball,max``) narrows the least film to
``min film_i - e_ball,max`` and widens the largest to ``max film_i - e_ball,min`` (a bound, reached
when a high spot of the ball meets a high spot of the seat). Under load the ball moves off centre
and the film grows on one side and thins on the other; that is the bearing's stiffness, not form,
and is not evaluated here.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import InputValueError

__all__ = ["Clearance", "ball_seat_clearance"]


@dataclass(frozen=True)
class Clearance:
    """Film between a centred ball and its seat.

    Attributes
    ----------
    radial_clearance_um : float
        Seat radius minus ball radius (least-squares radii), µm.
    film_um : ndarray, shape (n_seat,)
        Film at each seat point with a perfect ball of the fitted radius, centred, µm.
    film_min_um, film_max_um : float
        Least and largest of ``film_um``, µm.
    film_std_um : float
        Standard deviation of ``film_um`` over the seat's points, µm.
    least_film_um, largest_film_um : float
        Bounds with the ball's own form added (see the module notes), µm.
    variation_um : float
        ``largest_film_um - least_film_um``, µm: how much the film can vary over the seat.
    ball_form_um : float
        Peak-to-valley of the ball's radial deviations about its least-squares sphere, µm.
    interference : bool
        True when the least film is not positive: the ball cannot turn freely in the seat.
    """

    radial_clearance_um: float
    film_um: np.ndarray
    film_min_um: float
    film_max_um: float
    film_std_um: float
    least_film_um: float
    largest_film_um: float
    variation_um: float
    ball_form_um: float
    interference: bool


def ball_seat_clearance(ball, seat) -> Clearance:
    """Radial clearance and its variation for a ball in a seat.

    Parameters
    ----------
    ball : SphereFit
        Least-squares fit of the ball (convex), residuals in µm.
    seat : SphereFit
        Least-squares fit of the seat (concave), residuals in µm, positive away from the centre.

    Returns
    -------
    Clearance

    Raises
    ------
    InputValueError
        A fit that is not least squares.

    Examples
    --------
    A 10.000 mm ball in a 10.005 mm seat, both perfect: 5 µm of film everywhere.

    >>> import numpy as np
    >>> from flatcheck.spheres import least_squares_sphere
    >>> rng = np.random.default_rng(0)
    >>> v = rng.normal(size=(40, 3)); v /= np.linalg.norm(v, axis=1)[:, None]
    >>> cap = v[v[:, 2] > 0.5]
    >>> c = ball_seat_clearance(least_squares_sphere(10.0 * v), least_squares_sphere(10.005 * cap))
    >>> round(c.radial_clearance_um, 6), round(c.variation_um, 6)
    (5.0, 0.0)
    """
    for name, fit in (("ball", ball), ("seat", seat)):
        if fit.method != "least_squares":
            raise InputValueError(f"the {name} fit is {fit.method}, not least squares", fix="fit both by least squares")
    c_um = (seat.radius_mm - ball.radius_mm) * 1000.0
    film = c_um + np.asarray(seat.residuals_um, dtype=float)
    b = np.asarray(ball.residuals_um, dtype=float)
    least = float(film.min() - b.max())
    largest = float(film.max() - b.min())
    return Clearance(
        radial_clearance_um=float(c_um),
        film_um=film,
        film_min_um=float(film.min()),
        film_max_um=float(film.max()),
        film_std_um=float(film.std()),
        least_film_um=least,
        largest_film_um=largest,
        variation_um=largest - least,
        ball_form_um=float(np.ptp(b)),
        interference=least <= 0.0,
    )
