"""Tests of orifice-fed pads in the film solver (flatcheck.film.OrificeFeed).

References: REFERENCE.md section 10 item 17 (orifice flow check values, derived there with numpy) and the exact
radial solution of div(h³ grad P) = 0 with uniform h around a central feed of radius r0,
P(r) = pr² + (pa² - pr²) ln(r/r0) / ln(R/r0), whose load and outflow are evaluated here with
scipy.integrate.quad and the feed pressure found with scipy.optimize.brentq.
"""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.integrate import quad
from scipy.optimize import brentq

from flatcheck.errors import GeometryError, InputValueError
from flatcheck.bearing import (
    ORIFICE_ASSUMPTIONS,
    OrificeFeed,
    circular_pad_mesh,
    critical_pressure_ratio,
    film_along_travel,
    film_equilibrium,
    flat_guide_curve,
    orifice_mass_flow,
    orifice_ring,
    pad_deviation,
    rectangular_pad_mesh,
    solve_film,
)

PA, PS = 101325.0, 600000.0
MU, RG, T = 1.81e-5, 287.05, 293.15
R_PAD = 0.025  # m
A_BORE = math.pi * (0.2e-3) ** 2 / 4.0


# --------------------------------------------------------------------------- the orifice formula
def test_orifice_flow_check_values():
    # Source: REFERENCE.md §10 item 17 (d 0.2 mm, Cd 0.8, ps 0.6 MPa abs, g 1.4, T 293.15 K), [D] there
    assert critical_pressure_ratio(1.4) == pytest.approx(0.52828, abs=1e-5)
    assert orifice_mass_flow(0.2e6, PS, A_BORE, cd=0.8) == pytest.approx(3.5595e-5, rel=1e-4)  # choked
    assert orifice_mass_flow(0.4e6, PS, A_BORE, cd=0.8) == pytest.approx(3.4050e-5, rel=1e-4)
    # choked flow does not depend on the downstream pressure (standard gas dynamics)
    assert orifice_mass_flow(0.1e6, PS, A_BORE) == orifice_mass_flow(0.3e6, PS, A_BORE)
    assert orifice_mass_flow(PS, PS, A_BORE) == 0.0


def test_orifice_flow_continuous_at_critical_ratio():
    # Source: REFERENCE.md §6 ("the two agree at the critical ratio" [D]); closed-form choked flow
    # Cd A ps sqrt(g/(RT)) (2/(g+1))^((g+1)/(2(g-1))) written out here independently
    g = 1.4
    rc = critical_pressure_ratio(g)
    choked = 0.8 * A_BORE * PS * math.sqrt(g / (RG * T)) * (2 / (g + 1)) ** ((g + 1) / (2 * (g - 1)))
    for eps in (1e-6, 1e-9):
        below = orifice_mass_flow((rc - eps) * PS, PS, A_BORE)
        above = orifice_mass_flow((rc + eps) * PS, PS, A_BORE)
        assert below == pytest.approx(choked, rel=1e-12)
        assert above == pytest.approx(choked, rel=1e-9)
    # the subsonic branch peaks at the critical ratio (its maximum): slightly above it flows less
    assert orifice_mass_flow((rc + 0.01) * PS, PS, A_BORE) < choked


# --------------------------------------------------------------------------- exact radial solution
def _radial(h_um, d_mm, r0_mm=None, depth_um=0.0, R=R_PAD, cd=0.8):
    """Central feed on a circular pad, uniform gap: feed pressure, load, mass flow (closed form + brentq/quad)."""
    r0 = (r0_mm if r0_mm else d_mm / 2) * 1e-3
    area = min(math.pi * (d_mm * 1e-3) ** 2 / 4, math.pi * d_mm * 1e-3 * (h_um + depth_um) * 1e-6)
    cond = 2 * math.pi * (h_um * 1e-6) ** 3 / (math.log(R / r0) * 24 * MU * RG * T)  # kg/s per Pa²

    def balance(pr):
        return orifice_mass_flow(pr, PS, area, cd=cd) - cond * (pr**2 - PA**2)

    pr = brentq(balance, PA, PS, xtol=1e-9)

    def p(r):
        return math.sqrt(pr**2 + (PA**2 - pr**2) * math.log(r / r0) / math.log(R / r0))

    load = (pr - PA) * math.pi * r0**2 + quad(lambda r: (p(r) - PA) * 2 * math.pi * r, r0, R, limit=200)[0]
    return pr, load, cond * (pr**2 - PA**2)


FEED = OrificeFeed(0.2, (PS - PA) / 1e3, 0.8)


def test_central_orifice_matches_radial_solution():
    mesh = circular_pad_mesh(50.0, 63)
    for h in (5.0, 10.0, 20.0):
        pr, load, mdot = _radial(h, 0.2)
        s = solve_film(mesh, FEED, fly_height_um=h)
        assert s.feed_pressure_ratio * PS == pytest.approx(pr, rel=1e-4)
        assert s.load_n == pytest.approx(load, rel=1e-3)
        assert s.mass_flow_kg_s == pytest.approx(mdot, rel=1e-4)
        # the node pressures follow the log profile away from the feed (within 0.5 % of ps - pa)
        r = np.hypot(mesh.x_mm, mesh.y_mm) * 1e-3
        far = r > 2e-3
        p_exact = np.sqrt(pr**2 + (PA**2 - pr**2) * np.log(r[far] / 1e-4) / math.log(R_PAD / 1e-4))
        assert np.max(np.abs(s.pressure_pa[far] - p_exact)) < 0.005 * (PS - PA)


def test_radial_convergence_order():
    # Reference: the radial closed form above. A narrow orifice (0.05 mm) keeps the feed below Peaceman's
    # well-block radius on every mesh. Measured: errors 1.4e-3, 6.2e-4, 2.3e-4, 8.7e-5, 4.0e-5 (15..63 cells),
    # fitted order about 2.4.
    d = 0.05
    feed = OrificeFeed(d, (PS - PA) / 1e3, 0.8)
    _, load, _ = _radial(10.0, d)
    ns = np.array([15, 21, 31, 45, 63])
    errs = np.array([solve_film(circular_pad_mesh(50.0, n), feed, fly_height_um=10.0).load_n / load - 1 for n in ns])
    order = -np.polyfit(np.log(ns), np.log(np.abs(errs)), 1)[0]
    assert 1.8 < order < 3.2
    assert abs(errs[-1]) < 1e-4


def test_pocket_region_converges_to_radial_solution():
    # Reference: radial closed form with the feed radius at the pocket's edge (5 mm), bore 0.2 mm behind a
    # 20 µm pocket. The pocket is cut out of the mesh at its true radius and its outflow taken through a contour of
    # faces round it: measured load errors -0.21 % (15 cells), -0.022 % (31), -0.005 % (91); flow -0.001 % at 31.
    # (With the pocket's nodes held as a staircase, before issue 17: 1.0 % at 31 cells, 0.26 % at 127.)
    feed = OrificeFeed(0.2, (PS - PA) / 1e3, 0.8, pocket_mm=10.0, pocket_depth_um=20.0)
    pr, load, mdot = _radial(10.0, 0.2, r0_mm=5.0, depth_um=20.0)
    e31 = solve_film(circular_pad_mesh(50.0, 31), feed, fly_height_um=10.0)
    e91 = solve_film(circular_pad_mesh(50.0, 91), feed, fly_height_um=10.0)
    assert abs(e31.load_n / load - 1) < 0.001
    assert abs(e91.load_n / load - 1) < 0.0002
    assert abs(e91.mass_flow_kg_s / mdot - 1) < 0.0002


def test_mass_balance_orifice_inflow_equals_edge_outflow():
    # Continuity: what the orifices feed leaves at the pad's edge (computed there from the edge gradients)
    mesh = circular_pad_mesh(50.0, 63)
    bump = lambda x, y: 0.8 * np.exp(-((x - 10.0) ** 2 + y**2) / 100.0)  # noqa: E731
    ring = OrificeFeed(0.2, 500.0, 0.8, positions_mm=orifice_ring("circle", 50.0, 50.0, 4))
    for feed, kw in ((FEED, {}), (ring, dict(tilt_x_urad=40.0, deviation=bump))):
        s = solve_film(mesh, feed, fly_height_um=10.0, **kw)
        assert s.edge_outflow_kg_s == pytest.approx(s.mass_flow_kg_s, rel=0.003)
        # free air at ambient: Q = mdot R T / pa (ideal gas), l/min
        assert s.flow_l_per_min == pytest.approx(s.mass_flow_kg_s * RG * T / PA * 60e3, rel=1e-9)


def test_load_vanishes_with_the_orifice():
    # Analytic limit: d -> 0 gives mdot -> 0, so pr -> pa and the film carries nothing
    mesh = circular_pad_mesh(50.0, 31)
    loads = [solve_film(mesh, OrificeFeed(d, 500.0), fly_height_um=10.0).load_n for d in (0.2, 0.02, 0.002, 0.0002)]
    assert all(np.diff(loads) < 0)
    assert loads[-1] < 1e-3 * loads[0]


# --------------------------------------------------------------------------- stiffness and the curve
def test_stiffness_is_the_derivative_of_the_load():
    # central difference of the solver's own load as an independent differentiation; both feed couplings
    mesh = circular_pad_mesh(50.0, 33)
    bump = lambda x, y: 1.0 * np.exp(-((x - 20.0) ** 2 + y**2) / 200.0)  # noqa: E731
    feeds = (FEED, OrificeFeed(0.2, 500.0, positions_mm=orifice_ring("circle", 50, 50, 4)),
             OrificeFeed(0.2, 500.0, pocket_mm=2.0, pocket_depth_um=20.0))
    for feed in feeds:
        s = solve_film(mesh, feed, fly_height_um=8.0, tilt_x_urad=30.0, deviation=bump)
        e = 1e-2
        wp = solve_film(mesh, feed, fly_height_um=8.0 + e, tilt_x_urad=30.0, deviation=bump).load_n
        wm = solve_film(mesh, feed, fly_height_um=8.0 - e, tilt_x_urad=30.0, deviation=bump).load_n
        assert s.stiffness_n_per_um == pytest.approx(-(wp - wm) / (2 * e), rel=1e-4)


def test_curve_stiffness_positive_with_an_inner_peak():
    mesh = circular_pad_mesh(50.0, 31)
    curve = flat_guide_curve(mesh, FEED, np.geomspace(1.0, 60.0, 41))
    assert np.all(np.diff(curve.load_n) < 0)  # physical: more gap, less load
    assert np.all(curve.stiffness_n_per_um > 0)
    assert np.all(np.diff(curve.feed_pressure_ratio) < 0)  # wider gap, more outflow, lower feed pressure
    assert np.all(np.diff(curve.flow_l_per_min) >= 0)
    # past h = d/4 the bore, not the curtain, restricts, and at pr/ps < 0.528 it is choked: the flow is the
    # choked bore flow, 3.5595e-5 kg/s at ps 0.6 MPa (REFERENCE.md §10 item 17)
    assert curve.mass_flow_kg_s[-1] == pytest.approx(3.5595e-5, rel=1e-4)
    # Expected shape (common practice, no single source): stiffness rises from a small gap, where the
    # film barely leaks and pr ~ ps, to a maximum, and falls as the orifice chokes and pr -> pa
    assert curve.peak_inside
    assert curve.stiffness_n_per_um[0] < 0.5 * curve.peak_stiffness_n_per_um
    assert curve.stiffness_n_per_um[-1] < 0.5 * curve.peak_stiffness_n_per_um
    assert curve.feed_pressure_ratio[0] > 0.95
    assert curve.assumptions == ORIFICE_ASSUMPTIONS
    dW = -np.gradient(curve.load_n, np.log(curve.gap_um)) / curve.gap_um  # numpy as an independent derivative
    assert np.allclose(dW[3:-3], curve.stiffness_n_per_um[3:-3], rtol=0.03)


@settings(max_examples=15, deadline=None)
@given(ps=st.floats(200.0, 800.0), h=st.floats(3.0, 25.0))
def test_feed_pressure_between_ambient_and_supply(ps, h):
    feed = OrificeFeed(0.2, ps, 0.7)
    s = solve_film(circular_pad_mesh(30.0, 15), feed, fly_height_um=h)
    pa, psa = feed.ambient_pa, feed.supply_pa
    assert pa / psa < s.feed_pressure_ratio < 1.0
    assert np.all(s.pressure_pa >= pa - 1e-6) and np.all(s.pressure_pa <= s.feed_pressure_ratio * psa + 1e-3)
    # orifice flow at the solved feed pressure equals the reported flow (formula of REFERENCE.md §6)
    area = feed.restriction_area_m2(h)
    assert s.mass_flow_kg_s == pytest.approx(orifice_mass_flow(s.feed_pressure_ratio * psa, psa, area, cd=0.7),
                                             rel=1e-9)


# --------------------------------------------------------------------------- equilibrium along a travel
def test_equilibrium_and_travel_share_the_porous_path():
    mesh = circular_pad_mesh(40.0, 25)
    flat = film_equilibrium(mesh, FEED, 80.0)
    s = solve_film(mesh, FEED, fly_height_um=flat.fly_height_um)
    assert s.load_n == pytest.approx(80.0, rel=1e-5)
    plane = lambda x, y: 2.0 + 0.02 * x - 0.01 * y  # noqa: E731  (exact: a pivoted pad copies a plane)
    eq = film_equilibrium(mesh, FEED, 80.0, deviation=plane)
    assert eq.tilt_x_urad == pytest.approx(20.0, abs=1e-3)
    assert eq.fly_height_um == pytest.approx(flat.fly_height_um, abs=1e-5)
    assert eq.assumptions == ORIFICE_ASSUMPTIONS
    devs = [pad_deviation(mesh, lambda x, y, c=c: 0.5 * np.sin(2 * np.pi * (x + c) / 70.0)) for c in range(0, 40, 8)]
    tr = film_along_travel(mesh, FEED, 80.0, devs, workers=2)
    assert tr.converged.all()
    assert np.allclose(tr.load_n, 80.0, rtol=1e-5)
    assert np.all((tr.feed_pressure_ratio > 0.2) & (tr.feed_pressure_ratio < 1.0))
    one = film_equilibrium(mesh, FEED, 80.0, deviation=devs[2])
    assert tr.fly_height_um[2] == pytest.approx(one.fly_height_um, abs=1e-4)


def test_rectangular_pad_with_a_row_of_orifices():
    mesh = rectangular_pad_mesh(60.0, 30.0, 31, 31)
    feed = OrificeFeed(0.2, 500.0, positions_mm=orifice_ring("rect", 60.0, 30.0, 3))
    s = solve_film(mesh, feed, fly_height_um=8.0)
    assert s.feed_pressure_ratios.shape == (3,)
    assert s.feed_pressure_ratios[0] == pytest.approx(s.feed_pressure_ratios[2], rel=1e-9)  # mirror symmetry
    assert abs(s.moment_x_nmm) < 1e-9 * s.load_n * 30
    assert s.edge_outflow_kg_s == pytest.approx(s.mass_flow_kg_s, rel=0.005)


def test_orifice_errors():
    with pytest.raises(InputValueError):
        OrificeFeed(-0.2, 500.0)
    with pytest.raises(InputValueError):
        OrificeFeed(0.2, 500.0, cd=1.5)
    with pytest.raises(InputValueError, match="pocket"):
        OrificeFeed(0.2, 500.0, pocket_mm=2.0)
    with pytest.raises(InputValueError, match="pocket"):
        OrificeFeed(0.2, 500.0, pocket_mm=0.1, pocket_depth_um=10.0)
    with pytest.raises(GeometryError, match="edge"):
        solve_film(circular_pad_mesh(50.0, 31), OrificeFeed(0.2, 500.0, positions_mm=((24.0, 0.0),)), fly_height_um=5.0)
    with pytest.raises(InputValueError):
        orifice_ring("circle", 50.0, 50.0, 0)
