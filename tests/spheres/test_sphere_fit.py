"""Spheres: least squares, minimum zone, minimum circumscribed (flatcheck.spheres._fit), ISO 3290-1 grades,
ball-and-seat clearance, and the point-file reader."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from flatcheck.errors import GeometryError, InputFormatError, InputValueError
from flatcheck.io._points_csv import format_points_csv, read_points_csv
from flatcheck.spheres import (
    ISO_3290_1_FORM_UM,
    ball_grade,
    ball_seat_clearance,
    coverage_deg,
    least_squares_sphere,
    minimum_circumscribed_sphere,
    minimum_zone_sphere,
    surrounds_center,
)


def _directions(rng, n, cap_deg=180.0, concave=False):
    v = rng.normal(size=(8 * n, 3))
    v /= np.linalg.norm(v, axis=1)[:, None]
    v = v[np.degrees(np.arccos(v[:, 2])) <= cap_deg][:n]
    if concave:
        v[:, 2] = -v[:, 2]
    return v


def _form_um(v, amplitude_um, rng):
    """Known form: two lobes, a zonal term and a five-lobe term, plus a little noise (µm)."""
    az = np.arctan2(v[:, 1], v[:, 0])
    f = 0.5 * v[:, 0] * v[:, 1] + 0.3 * (3 * v[:, 2] ** 2 - 1) / 2 + 0.2 * np.sin(5 * az)
    return amplitude_um * f + rng.normal(0.0, 0.05 * amplitude_um, len(v))


def _points(rng, n=300, radius=12.7, center=(3.0, -2.0, 40.0), form=0.3, cap=180.0, concave=False):
    v = _directions(rng, n, cap, concave)
    return np.asarray(center) + (radius + _form_um(v, form, rng)[:, None] / 1000.0) * v


def _reference_ls(p):
    """Own least squares: the algebraic linear fit, then scipy.optimize.least_squares on the geometric distances."""
    from scipy.optimize import least_squares

    A = np.column_stack([2 * p, np.ones(len(p))])
    s, *_ = np.linalg.lstsq(A, np.sum(p * p, axis=1), rcond=None)
    x0 = np.r_[s[:3], np.sqrt(s[3] + s[:3] @ s[:3])]
    res = least_squares(lambda x: np.linalg.norm(p - x[:3], axis=1) - x[3], x0, xtol=1e-15, ftol=1e-15, gtol=1e-15)
    return res.x[:3], res.x[3]


def _reference_mz_search(p, c0):
    """Own minimum zone by direct search over trial centres, each zone evaluated exactly (no linearisation).

    For a fixed centre the zone is max r - min r; a pattern search over the 26 neighbours halves its
    step down to 1e-10 mm.
    """
    def zone(c):
        r = np.linalg.norm(p - c, axis=1)
        return r.max() - r.min()

    c = np.array(c0, dtype=float)
    f = zone(c)
    step = 1e-3  # mm
    dirs = np.array([[i, j, k] for i in (-1, 0, 1) for j in (-1, 0, 1) for k in (-1, 0, 1) if (i, j, k) != (0, 0, 0)], float)
    while step > 1e-10:
        trials = c + step * dirs
        z = np.array([zone(t) for t in trials])
        k = int(np.argmin(z))
        if z[k] < f:
            c, f = trials[k], z[k]
        else:
            step *= 0.5
    return c, f * 1000.0


def _reference_mz_lp(p):
    """Own exact LP: the thinnest shell in *squared* radii, which is linear after lifting.

    |p_i - c|^2 = |p_i|^2 - 2 p_i.c + |c|^2, so with A = Ro^2 - |c|^2 and B = Ri^2 - |c|^2 the
    constraints B <= |p_i|^2 - 2 p_i.c <= A are linear in (c, A, B), and Ro^2 - Ri^2 = A - B is minimised
    exactly by one LP (scipy HiGHS). Ro - Ri = (Ro^2 - Ri^2)/(Ro + Ri): for a shell microns thin on a radius
    of millimetres its centre is the minimum-zone centre to second order in zone/radius.
    """
    from scipy.optimize import linprog

    m = p.mean(axis=0)
    q = p - m
    n = len(q)
    s = np.sum(q * q, axis=1)
    A_ub = np.vstack([np.column_stack([-2 * q, -np.ones(n), np.zeros(n)]), np.column_stack([2 * q, np.zeros(n), np.ones(n)])])
    res = linprog([0, 0, 0, 1, -1], A_ub=A_ub, b_ub=np.concatenate([-s, s]), bounds=[(None, None)] * 5, method="highs")
    c = m + res.x[:3]
    r = np.linalg.norm(p - c, axis=1)
    return c, np.ptp(r) * 1000.0


@pytest.mark.parametrize("cap, concave", [(180.0, False), (60.0, True), (35.0, True)])
def test_least_squares_against_scipy(rng, cap, concave):
    p = _points(rng, cap=cap, concave=concave)
    fit = least_squares_sphere(p)
    c, r = _reference_ls(p)
    # reference: algebraic fit then scipy.optimize.least_squares (geometric distances)
    assert np.allclose(fit.center_mm, c, atol=1e-9)
    assert fit.radius_mm == pytest.approx(r, abs=1e-10)
    d = np.linalg.norm(p - c, axis=1)
    assert np.allclose(fit.residuals_um, (d - r) * 1000.0, atol=1e-6)
    assert fit.sphericity_um == pytest.approx(np.ptp(d) * 1000.0, abs=1e-6)


@pytest.mark.parametrize("cap, concave", [(180.0, False), (60.0, True), (35.0, True)])
def test_minimum_zone_against_an_exact_search(rng, cap, concave):
    p = _points(rng, n=200, cap=cap, concave=concave)
    mz = minimum_zone_sphere(p)
    ls = least_squares_sphere(p)
    c_ref, zone_ref = _reference_mz_search(p, ls.center_mm)
    c_lp, zone_lp = _reference_mz_lp(p)
    assert mz.converged
    # own direct search over exact distances: the zones agree to well under a nanometre
    assert mz.sphericity_um == pytest.approx(zone_ref, abs=2e-4)
    assert mz.sphericity_um <= zone_ref + 1e-6  # never worse than the reference
    # own exact LP in squared radii: the same zone to second order (zone/radius ~ 1e-5 here)
    assert mz.sphericity_um == pytest.approx(zone_lp, abs=1e-4)
    assert mz.sphericity_um <= zone_lp + 1e-6
    assert mz.sphericity_um <= ls.sphericity_um + 1e-9  # the LS centre is one candidate
    # Chebyshev: at least 5 points touch the two spheres (3 centre coordinates + 2 radii) generically
    assert len(mz.outer_points) + len(mz.inner_points) >= 5


def test_two_concentric_shells_give_their_distance(rng):
    # points all round on radii 10 mm and 10.0005 mm about one centre: the zone is exactly 0.5 µm (analytic)
    v = _directions(rng, 400)
    r = np.where(np.arange(400) % 2 == 0, 10.0, 10.0005)
    p = np.array([1.0, 2.0, 3.0]) + r[:, None] * v
    mz = minimum_zone_sphere(p)
    assert mz.sphericity_um == pytest.approx(0.5, abs=1e-6)
    assert np.allclose(mz.center_mm, [1.0, 2.0, 3.0], atol=1e-9)


def test_minimum_circumscribed(rng):
    # a ball with one point pressed in by 0.2 µm: the circumscribed sphere is the ball's (analytic),
    # and the deviation measured from it is the 0.2 µm dent
    v = _directions(rng, 300)
    r = np.full(300, 12.7)
    r[7] -= 0.0002
    p = r[:, None] * v
    assert surrounds_center(p, [0, 0, 0])
    mc = minimum_circumscribed_sphere(p)
    assert mc.radius_mm == pytest.approx(12.7, abs=1e-9)
    assert mc.sphericity_um == pytest.approx(0.2, abs=1e-6)
    # a cap does not surround its centre
    assert not surrounds_center(p[p[:, 2] > 5.0], [0, 0, 0])


@settings(max_examples=20)  # each example solves three minimum zones
@given(shift=st.tuples(*[st.floats(-100, 100)] * 3), scale=st.floats(0.5, 4.0))
def test_translation_and_scale(shift, scale):
    rng = np.random.default_rng(7)
    p = _points(rng, n=80, form=0.4)
    base = minimum_zone_sphere(p)
    moved = minimum_zone_sphere(p + np.array(shift))
    assert moved.sphericity_um == pytest.approx(base.sphericity_um, abs=1e-5)
    # scaling the whole point set scales the zone (a similarity)
    assert minimum_zone_sphere(p * scale).sphericity_um == pytest.approx(scale * base.sphericity_um, rel=1e-4)


def test_coverage():
    rng = np.random.default_rng(3)
    v = _directions(rng, 200, cap_deg=50.0)
    assert coverage_deg(10 * v, [0, 0, 0]) == pytest.approx(50.0, abs=2.0)


def test_degenerate_points():
    t = np.linspace(0, 2 * np.pi, 12, endpoint=False)
    circle = np.column_stack([np.cos(t), np.sin(t), np.zeros(12)])
    with pytest.raises(GeometryError):
        least_squares_sphere(circle)  # one plane: no sphere
    with pytest.raises(GeometryError):
        least_squares_sphere(circle[:4] + [0, 0, 1])  # too few
    with pytest.raises(InputValueError):
        least_squares_sphere(np.array([[0, 0, np.nan]] * 6))


# --------------------------------------------------------------------------- grades
def test_iso_3290_1_table():
    # ISO 3290-1:2014 deviation from spherical form tDw, µm (ball makers' reproductions; shared reference: G3-G40)
    table = dict(ISO_3290_1_FORM_UM)
    assert (table["G3"], table["G5"], table["G10"], table["G16"], table["G20"], table["G28"], table["G40"]) == (
        0.08, 0.13, 0.25, 0.4, 0.5, 0.7, 1.0)
    assert ball_grade(0.08).grade == "G3"  # on the limit: within
    assert ball_grade(0.0801).grade == "G5"
    assert ball_grade(5.01).grade is None
    g = ball_grade(0.2, expanded_uncertainty_um=0.1)  # ISO 14253-1: 0.3 µm must be within the limit
    assert g.grade == "G10" and g.proven_grade == "G16"


# --------------------------------------------------------------------------- clearance
def test_clearance_of_a_ball_in_its_seat(rng):
    v = _directions(rng, 200)
    cap = _directions(rng, 150, cap_deg=45.0, concave=True)
    ball_pts = 6.35 * v + [5, 5, 5]
    ball = least_squares_sphere(ball_pts)
    # perfect ball, perfect seat 8 µm larger (analytic): 8 µm of film everywhere, no variation
    c = ball_seat_clearance(ball, least_squares_sphere(6.358 * cap + [-1, 0, 2]))
    assert c.radial_clearance_um == pytest.approx(8.0, abs=1e-6)
    assert c.variation_um == pytest.approx(0.0, abs=1e-6) and not c.interference
    # a 0.4 µm high spot on the seat face: the film there, from the seat's own LS centre (scipy reference fits)
    bump = np.zeros(len(cap))
    bump[3] = -0.0004
    seat_pts = (6.358 + bump)[:, None] * cap + [-1, 0, 2]
    c = ball_seat_clearance(ball, least_squares_sphere(seat_pts))
    cs, rs = _reference_ls(seat_pts)
    _, rb = _reference_ls(ball_pts)
    film = (np.linalg.norm(seat_pts - cs, axis=1) - rb) * 1000.0
    assert np.allclose(c.film_um, film, atol=1e-6)
    assert c.film_min_um == pytest.approx(film[3], abs=1e-6) and c.film_min_um == pytest.approx(7.6, abs=0.01)
    # a ball with its own 0.3 µm high spot narrows the least film by it (it can turn over the seat's spot)
    ball_pts2 = ball_pts.copy()
    ball_pts2[0] = [5, 5, 5] + (6.35 + 0.0003) * v[0]
    c2 = ball_seat_clearance(least_squares_sphere(ball_pts2), least_squares_sphere(seat_pts))
    assert c2.least_film_um == pytest.approx(c2.film_min_um - least_squares_sphere(ball_pts2).residuals_um.max(), abs=1e-9)
    assert c2.least_film_um < c.film_min_um - 0.29


# --------------------------------------------------------------------------- point files
def test_points_file_round_trip(tmp_path, rng):
    p = _points(rng, n=20)
    f = tmp_path / "b.csv"
    f.write_text(format_points_csv(p, comment="ball", digits=9))
    assert np.allclose(read_points_csv(f), p, atol=1e-9)


@pytest.mark.parametrize(
    "text, kind, where",
    [
        ("x,y,z\n1,2,3\n", InputFormatError, "line 1"),
        ("x_mm,y_mm,height_um\n1,2,3\n", InputFormatError, "height map"),
        ("x_mm,y_mm,z_mm\n1,2,3\n1,2\n", InputFormatError, "line 3"),
        ("x_mm,y_mm,z_mm\n1,2,3\n1,2,abc\n", InputValueError, "line 3"),
        ("x_mm,y_mm,z_mm\n1,2,3\n", InputValueError, "at least 5"),
    ],
)
def test_bad_point_files(tmp_path, text, kind, where):
    f = tmp_path / "p.csv"
    f.write_text(text)
    with pytest.raises(kind) as exc:
        read_points_csv(f)
    assert where in str(exc.value) and str(f) in str(exc.value)
