"""Geometry of guideway bodies (flatcheck.guideway._geometry) against independent references.

Bodies are built from known planes and forms; the references are own linear programs solved with
scipy.optimize.linprog (HiGHS), closed forms, and the definitions of ISO 1101 quoted in docs/guideway.md.
"""

import math

import numpy as np
import pytest
from scipy.optimize import linprog

from flatcheck.form import HeightMap
from flatcheck.guideway import (
    Face,
    GuidewayBody,
    HeightTie,
    SquarenessTie,
    ThicknessTie,
    TwistRun,
    evaluate_body,
    window_ptp,
)

L, W, H = 1000.0, 120.0, 160.0


def grid_face(name, normal, fn, *, width=W, nx=21, ns=7, centre=0.0, x0=0.0, x1=L):
    """A face measured on a regular grid: file y runs 0..width, body s = y - width/2 + centre."""
    xs = np.linspace(x0, x1, nx)
    ys = np.linspace(0.0, width, ns)
    X, Y = np.meshgrid(xs, ys)
    S = Y - width / 2 + centre
    return Face(name, normal, HeightMap(X.ravel(), Y.ravel(), np.asarray(fn(X, S), float).ravel()), name, centre)


def lp_min_zone_plane(x, y, z):
    """Own minimum-zone plane: min t s.t. 0 <= z - (a + b x + c y) <= t (scipy HiGHS); returns (b, c, t)."""
    A = np.column_stack([np.ones_like(x), x, y])
    A_ub = np.vstack([np.column_stack([A, np.zeros(x.size)]), np.column_stack([-A, -np.ones(x.size)])])
    b_ub = np.concatenate([z, -z])
    res = linprog([0, 0, 0, 1], A_ub=A_ub, b_ub=b_ub, bounds=[(None, None)] * 4, method="highs")
    assert res.status == 0
    return res.x[1], res.x[2], res.x[3]


def lp_zone_free_slope(x, r):
    """Own LP: the least t with r - (a + b x) in [0, t] for some a, b (zone free to tilt along x only)."""
    A = np.column_stack([np.ones_like(x), x])
    A_ub = np.vstack([np.column_stack([A, np.zeros(x.size)]), np.column_stack([-A, -np.ones(x.size)])])
    b_ub = np.concatenate([r, -r])
    res = linprog([0, 0, 1], A_ub=A_ub, b_ub=b_ub, bounds=[(None, None)] * 3, method="highs")
    assert res.status == 0
    return res.x[2]


def bump(X, S):
    return 0.4 * np.sin(2 * np.pi * X / 700.0) + 0.2 * np.cos(2 * np.pi * S / 150.0) + 0.1 * (X / L) ** 2


def dent(X, S):
    return -0.3 * np.exp(-((X - 300.0) ** 2 + S**2) / (2 * 80.0**2)) + 0.15 * np.sin(2 * np.pi * X / 450.0)


def test_parallelism_of_a_known_wedge_matches_an_own_lp():
    # Underside = dent + wedge plane (a, b, c); the top (datum) = bump. Thickness ties are the exact sums of the
    # outward heights, so the fit recovers the wedge; the parallelism of the underside to the top is then, by
    # ISO 1101, the range of (w_under + datum plane of the top) over the underside's stations, the datum plane
    # being the top's minimum-zone plane (ISO 5459) from an own LP.
    a, b, c = 0.7, 2.0e-3, -4.0e-3  # µm, µm/mm, µm/mm
    top = grid_face("top", "+z", bump)
    under = grid_face("underside", "-z", lambda X, S: dent(X, S) + a + b * X + c * S)
    ties = []
    for x in (50.0, 500.0, 950.0):
        for s in (-40.0, 40.0):  # grid nodes: bilinear sampling of the forms is exact there
            v = bump(np.array(x), np.array(s)) + dent(np.array(x), np.array(s)) + a + b * x + c * s
            ties.append(ThicknessTie(("underside", "top"), x, s, float(v)))
    g = evaluate_body(GuidewayBody("wedge", L, (top, under), tuple(ties)))
    plane = g.face("underside").plane
    # the fitted plane is the underside's least-squares plane in the body frame (numpy lstsq as reference)
    xs, ss = under.surface.x_mm, under.body_s(under.surface.y_mm)
    w_true = dent(xs, ss) + a + b * xs + c * ss
    coef = np.linalg.lstsq(np.column_stack([np.ones_like(xs), xs, ss]), w_true, rcond=None)[0]
    top_ls = np.linalg.lstsq(np.column_stack([np.ones_like(xs), xs, ss]),
                             bump(top.surface.x_mm, top.body_s(top.surface.y_mm)), rcond=None)[0]
    # the top is the datum: its LS plane is the frame's zero, so the underside's plane is relative to it
    assert plane.tilt_x_urad == pytest.approx(1e3 * (coef[1] + top_ls[1]), abs=1e-6)
    assert plane.tilt_across_urad == pytest.approx(1e3 * (coef[2] + top_ls[2]), abs=1e-6)
    p = next(q for q in g.parallelism if q.faces == ("underside", "top"))
    assert p.zone == "plane"
    tx, ty = top.surface.x_mm, top.body_s(top.surface.y_mm)
    bt, ct, _ = lp_min_zone_plane(tx, ty, bump(tx, ty))
    # in the frame of the truth: distance from the datum plane = w_under + datum plane (outward heights add)
    d = w_true + bt * xs + ct * ss
    assert p.value_um == pytest.approx(float(np.ptp(d)), abs=1e-6)
    assert g.redundancy == 3  # six ties, three unknowns (the underside's plane)
    assert max(abs(t.residual) for t in g.residuals) < 1e-9


def test_ties_on_one_line_leave_the_across_tilt_free_and_give_line_parallelism():
    # Every tie at s = 0: the underside's tilt across is not fixed; it must be reported free, and parallelism is
    # stated for the line element at s = 0 (ISO 1101, a line to a datum plane).
    b = 1.5e-3
    top = grid_face("top", "+z", lambda X, S: 0.0 * X)
    under = grid_face("underside", "-z", lambda X, S: b * X + 3e-3 * S)
    ties = tuple(ThicknessTie(("underside", "top"), x, 0.0, b * x) for x in (0.0, 250.0, 500.0, 1000.0))
    g = evaluate_body(GuidewayBody("line", L, (top, under), ties))
    assert g.face("underside").plane.free == ("tilt across",)
    assert "underside" in g.free_faces
    p = next(q for q in g.parallelism if q.faces == ("underside", "top"))
    assert p.zone == "line" and p.across_mm == 0.0
    assert p.value_um == pytest.approx(b * L, abs=1e-9)  # a straight wedge: b x over the length
    assert any("free" in w for w in g.warnings)


def test_a_face_no_tie_fixes_is_free_not_assumed():
    top = grid_face("top", "+z", bump)
    loose = grid_face("underside", "-z", dent)
    g = evaluate_body(GuidewayBody("loose", L, (top, loose)))
    assert set(g.face("underside").plane.free) == {"offset", "tilt along", "tilt across"}
    assert g.parallelism == ()
    assert any("tied to no other face" in w for w in g.warnings)


def test_squareness_angle_and_perpendicularity_zone():
    # A side (+y) leaning by c = 5 µm/m up its height on a top with an across slope of 2 µm/m: the angle between
    # the outward normals is 90° + (c_side + c_top), so 90° - angle = -(5 + 2) µrad (derivation in
    # docs/guideway.md). The ISO 1101 perpendicularity zone of the side: two planes perpendicular to the top's
    # minimum-zone plane, free to turn about its normal: own LP with the slope along z fixed.
    c_top, c_side = 2e-3, 5e-3
    top = grid_face("top", "+z", lambda X, S: bump(X, S) + c_top * S)
    side = grid_face("side", "+y", lambda X, S: dent(X, S) + c_side * S, width=H)
    # the squareness tie reads the true angle including the forms' across slopes at x (square across each face)
    from flatcheck.guideway._geometry import _Form

    ft, fs = _Form(top), _Form(side)
    x0 = 500.0
    true = -(1e3 * c_side + float(fs.across_slope_urad(x0)[0]) + 1e3 * c_top + float(ft.across_slope_urad(x0)[0]))
    body = GuidewayBody("sq", L, (top, side), squareness=(SquarenessTie(("side", "top"), x0, true),))
    g = evaluate_body(body)
    sq = next(s for s in g.squareness if s.faces == ("side", "top"))
    assert sq.determined
    # the angle of the least-squares planes (numpy lstsq of the true heights as reference)
    ls = lambda f, fn: np.linalg.lstsq(  # noqa: E731
        np.column_stack([np.ones(f.surface.n), f.surface.x_mm, f.body_s(f.surface.y_mm)]),
        fn(f.surface.x_mm, f.body_s(f.surface.y_mm)), rcond=None)[0]
    lt = ls(top, lambda X, S: bump(X, S) + c_top * S)
    lsd = ls(side, lambda X, S: dent(X, S) + c_side * S)
    # the tie holds at x0 with the forms' local slopes; the planes' angle differs from it by the forms' slopes there
    expected_planes = true + float(fs.across_slope_urad(x0)[0]) + float(ft.across_slope_urad(x0)[0])
    assert sq.angle_urad == pytest.approx(expected_planes, abs=1e-6)
    assert sq.angle_urad == pytest.approx(-1e3 * (lt[2] + lsd[2]), abs=1e-6)
    # perpendicularity zone against an own LP, in the frame of the truth
    tx, ty = top.surface.x_mm, top.body_s(top.surface.y_mm)
    _, ct, _ = lp_min_zone_plane(tx, ty, bump(tx, ty) + c_top * ty)
    sx, sz = side.surface.x_mm, side.body_s(side.surface.y_mm)
    w_side = dent(sx, sz) + c_side * sz
    # perpendicular to the datum: the side's slope up z must be -c_datum (sign rule of docs/guideway.md)
    r = w_side - (-ct) * sz
    assert sq.value_um == pytest.approx(lp_zone_free_slope(sx, r), abs=1e-6)


def test_twist_of_a_linearly_winding_face():
    # w = k x s / 1000: the across slope is theta(x) = k x µrad (k in µrad/mm): over the travel the twist is
    # k (x1 - x0), and within any 1000 mm it is k x 1000 (closed form).
    k = 0.004  # µrad per mm = 4 µrad/m
    top = grid_face("top", "+z", lambda X, S: 1e-3 * k * X * S, x1=2000.0, nx=41)
    g = evaluate_body(GuidewayBody("tw", 2000.0, (top,)))
    tw = next(t for t in g.twist if t.faces == ("top",) and t.source == "survey")
    assert tw.twist_urad == pytest.approx(k * 2000.0, rel=1e-9)
    assert tw.twist_per_m_urad == pytest.approx(k * 1000.0, rel=1e-9)
    # a twist run of differential levels, with an unknown zero and the same twist
    xr = np.linspace(100, 1900, 10)
    run = TwistRun(("top",), xr, k * xr + 17.0)
    g2 = evaluate_body(GuidewayBody("tw", 2000.0, (top,), twist=(run,)))
    tr = next(t for t in g2.twist if t.source == "twist run")
    assert tr.twist_urad == pytest.approx(k * 1800.0, rel=1e-12)
    # the run agrees with the survey: its residuals (after its fitted zero) vanish
    assert max(abs(t.residual) for t in g2.residuals) < 1e-6


def test_two_rails_height_difference_and_twist_between_them():
    # Two tops 600 mm apart: rail B rises by 1 µm/m along x relative to rail A and stands 2 µm higher at x = 0.
    # The bridge readings (wB - wA)/(sB - sA) change by 1 µm/m x L / 600 mm (closed form).
    ra = grid_face("rail-a", "+z", lambda X, S: 0.0 * X, width=60.0, centre=-300.0)
    rb = grid_face("rail-b", "+z", lambda X, S: 2.0 + 1e-3 * X, width=60.0, centre=300.0)
    ties = tuple(HeightTie(("rail-a", "rail-b"), x, (-300.0, 300.0), 2.0 + 1e-3 * x) for x in (0.0, 500.0, 1000.0))
    g = evaluate_body(GuidewayBody("rails", L, (ra, rb), heights=ties))
    r = g.rails[0]
    assert r.height_difference_min_um == pytest.approx(2.0, abs=1e-9)
    assert r.height_difference_max_um == pytest.approx(3.0, abs=1e-9)
    assert r.twist_urad == pytest.approx(1e3 * 1.0 / 600.0, rel=1e-9)
    p = next(q for q in g.parallelism if q.faces == ("rail-a", "rail-b"))
    assert p.value_um == pytest.approx(1.0, abs=1e-9)  # a straight rise of 1 µm/m over 1 m


def test_a_wrong_tie_stands_out_in_the_residuals():
    top = grid_face("top", "+z", bump)
    under = grid_face("underside", "-z", dent)
    ties = []
    for x in (0.0, 250.0, 500.0, 750.0, 1000.0):
        for s in (-40.0, 40.0):
            v = float(bump(np.array(x), np.array(s)) + dent(np.array(x), np.array(s)))
            ties.append(ThicknessTie(("underside", "top"), x, s, v + (3.0 if (x, s) == (500.0, 40.0) else 0.0),
                                     label=f"{x}/{s}"))
    g = evaluate_body(GuidewayBody("bad", L, (top, under), tuple(ties)))
    worst = max(g.residuals, key=lambda t: abs(t.normalized))
    assert worst.label == "500.0/40.0"
    assert any("times its standard uncertainty" in w for w in g.warnings)


def test_tie_outside_a_survey_is_refused():
    from flatcheck.errors import GeometryError

    top = grid_face("top", "+z", bump)
    under = grid_face("underside", "-z", dent)
    with pytest.raises(GeometryError, match="outside the survey"):
        evaluate_body(GuidewayBody("out", L, (top, under), (ThicknessTie(("underside", "top"), 1200.0, 0.0, 0.0),)))


def test_window_ptp_against_brute_force(rng):
    # numpy brute force over every window start as the reference
    x = np.sort(rng.uniform(0, 3000, 60))
    v = np.cumsum(rng.normal(0, 1, 60))
    ref = max(np.ptp(v[(x >= a) & (x <= a + 1000.0)]) for a in x)
    assert window_ptp(x, v, 1000.0) == pytest.approx(ref)
    assert math.isnan(window_ptp([1.0], [np.nan]))
