"""Accuracy of the film solutions at small gaps and with feed pockets, against independent references.

References (all evaluated here with numpy/scipy, none uses flatcheck's film code):

- porous rectangle, uniform gap: the separated solution of ``div(grad Pn) = lam² (Pn - 1)``, ``Pn = 0`` on the
  edge (lam² = 12 k / (H h³), REFERENCE.md section 6): ``1 - Pn = cosh(lam y)/cosh(lam b) + sum_n B_n cos(nu_n y)
  cosh(kappa_n x)/cosh(kappa_n a)`` with ``nu_n = (2n+1) pi/(2b)``, ``kappa_n² = lam² + nu_n²``,
  ``B_n = (2/b)(-1)^n lam²/(nu_n (lam² + nu_n²))`` (derived here by separation of variables); the load is the
  integral of ``p - pa`` by composite Gauss-Legendre quadrature graded towards the edges (the boundary layer is
  ``1/lam`` thick), the flow is the Darcy inflow ``k dP/(2 mu R T H) ∫(1 - Pn) dA`` integrated term by term;
- porous disc, uniform gap: the exact Bessel solution ``p² = ps² - (ps² - pa²) I0(lam r)/I0(lam R)`` (REFERENCE.md
  section 6), load by scipy ``quad``, flow from the edge gradient ``2 pi R h³ dP lam I1/(24 mu R T I0)``;
- orifice pad with a feed pocket, uniform gap: the 1-D radial solution ``P = pr² + (pa² - pr²) ln(r/r0)/ln(R/r0)``
  outside the pocket and ``P = pr²`` in it, the feed pressure from the isentropic-nozzle balance (standard gas
  dynamics, REFERENCE.md section 6, from memory there) solved by scipy ``brentq``;
- stiffness of each reference: a central difference of its load in the gap (step 1e-4 of the gap).

Run as a script (``python tests/test_film_accuracy.py``) to print the error table of docs/guideway.md.
"""

import math

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.optimize import brentq
from scipy.special import i0e, i1e

from flatcheck.bearing import OrificeFeed, Pad, PorousFeed, orifice_mass_flow, pad_film_mesh, solve_film

PA = 101325.0
PS = 600000.0
MU, RG, T = 1.81e-5, 287.05, 293.15
K, H_LAYER = 1e-15, 5e-3
POROUS = PorousFeed(K, H_LAYER * 1e3, (PS - PA) / 1e3)
DP = PS**2 - PA**2
GAPS = (1.0, 1.5, 2.0, 3.0, 5.0, 8.0, 12.0, 20.0, 40.0)


def _lam(h_um):
    return math.sqrt(12 * K / (H_LAYER * (h_um * 1e-6) ** 3))  # per m


def _graded_nodes(a, lam, n_panels=48, order=8):
    """Gauss-Legendre nodes and weights on [-a, a], panels graded geometrically towards both ends."""
    t, w = np.polynomial.legendre.leggauss(order)
    bl = min(a, 1.0 / lam)
    # half-interval [0, a]: panels from the edge inwards, first width bl/8 growing to cover a
    widths = []
    wdt, total = bl / 8, 0.0
    while total < a:
        widths.append(min(wdt, a - total))
        total += widths[-1]
        wdt *= 1.25
    edges = a - np.concatenate([[0.0], np.cumsum(widths)])  # from a down to 0
    xs, ws = [], []
    for hi, lo in zip(edges[:-1], edges[1:]):
        xs.append(0.5 * (hi + lo) + 0.5 * (hi - lo) * t)
        ws.append(0.5 * (hi - lo) * w)
    x = np.concatenate(xs)
    wt = np.concatenate(ws)
    return np.concatenate([-x, x]), np.concatenate([wt, wt])


def rect_reference(length_mm, width_mm, h_um, terms=4000):
    """Porous rectangle over a uniform gap: (load N, mass flow kg/s)."""
    a, b = length_mm / 2e3, width_mm / 2e3  # m, x along the length
    lam = _lam(h_um)
    n = np.arange(terms)
    nu = (2 * n + 1) * math.pi / (2 * b)
    kap = np.sqrt(lam**2 + nu**2)
    B = (2 / b) * (-1.0) ** n * lam**2 / (nu * (lam**2 + nu**2))
    x, wx = _graded_nodes(a, lam)
    y, wy = _graded_nodes(b, lam)

    def cosh_ratio(z, q, half):  # cosh(q z)/cosh(q half) without overflow
        return np.exp(q * (np.abs(z) - half)) * (1 + np.exp(-2 * q * np.abs(z))) / (1 + np.exp(-2 * q * half))

    phi1 = cosh_ratio(y, lam, b)  # (ny,)
    CX = cosh_ratio(x[:, None], kap[None, :], a)  # (nx, terms)
    CY = np.cos(np.outer(y, nu))  # (ny, terms)
    phi = phi1[None, :] + (CX * B[None, :]) @ CY.T  # (nx, ny)
    pn = np.clip(1.0 - phi, 0.0, 1.0)
    p = np.sqrt(PA**2 + DP * pn)
    load = float(wx @ (p - PA) @ wy)
    # ∫phi dA term by term: ∫∫phi1 = 2a * 2 tanh(lam b)/lam; ∫∫psi = sum B (2 (-1)^n/nu)(2 tanh(kap a)/kap)
    int_phi = 2 * a * 2 * math.tanh(lam * b) / lam + float(np.sum(B * 2 * (-1.0) ** n / nu * 2 * np.tanh(kap * a) / kap))
    flow = K * DP / (2 * MU * RG * T * H_LAYER) * int_phi
    return load, flow


def disc_reference(diameter_mm, h_um):
    """Porous disc over a uniform gap (Bessel solution): (load N, mass flow kg/s)."""
    R = diameter_mm / 2e3
    lam = _lam(h_um)

    def ratio(r):  # I0(lam r)/I0(lam R) with exponential scaling
        return i0e(lam * r) / i0e(lam * R) * math.exp(lam * (r - R))

    def p(r):
        return math.sqrt(PS**2 - DP * ratio(r))

    bl = min(R, 1.0 / lam)
    pts = [R - bl * f for f in (8, 4, 2, 1, 0.5, 0.25) if R - bl * f > 0]
    load = quad(lambda r: (p(r) - PA) * 2 * math.pi * r, 0, R, points=pts, limit=400, epsabs=1e-10, epsrel=1e-12)[0]
    h = h_um * 1e-6
    flow = 2 * math.pi * R * h**3 * DP * lam * (i1e(lam * R) / i0e(lam * R)) / (24 * MU * RG * T)
    return load, flow


def orifice_reference(diameter_mm, h_um, d_mm, pocket_mm, depth_um, cd=0.8):
    """Central orifice behind a pocket, uniform gap (1-D radial): (load N, mass flow kg/s, pr/ps)."""
    R = diameter_mm / 2e3
    r0 = pocket_mm / 2e3
    area = min(math.pi * (d_mm * 1e-3) ** 2 / 4, math.pi * d_mm * 1e-3 * (h_um + depth_um) * 1e-6)
    cond = 2 * math.pi * (h_um * 1e-6) ** 3 / (math.log(R / r0) * 24 * MU * RG * T)
    pr = brentq(lambda q: orifice_mass_flow(q, PS, area, cd=cd) - cond * (q**2 - PA**2), PA, PS, xtol=1e-10)

    def p(r):
        return math.sqrt(pr**2 + (PA**2 - pr**2) * math.log(r / r0) / math.log(R / r0))

    load = (pr - PA) * math.pi * r0**2 + quad(lambda r: (p(r) - PA) * 2 * math.pi * r, r0, R, limit=400,
                                              epsabs=1e-10, epsrel=1e-12)[0]
    return load, cond * (pr**2 - PA**2), pr / PS


def _stiffness(fn, h):
    e = 1e-4 * h
    return -(fn(h + e)[0] - fn(h - e)[0]) / (2 * e)


ORIFICE = dict(diameter_mm=60.0, d_mm=0.2, pocket_mm=4.0, depth_um=20.0)


def orifice_feed():
    return OrificeFeed(ORIFICE["d_mm"], (PS - PA) / 1e3, 0.8, pocket_mm=ORIFICE["pocket_mm"],
                       pocket_depth_um=ORIFICE["depth_um"])


def cases(disc_cells=64, least_film_um=None):
    """(name, reference(h) -> (load, flow, ...), film(h) -> FilmState) for the three pads of issue 17, on the meshes
    the film commands use (``pad_film_mesh``, 64 cells a side asked for; 65 for the orifice pad; the porous disc
    gets the cells its resolution rule asks for at ``least_film_um``, by default 1 µm: 130)."""
    rect = pad_film_mesh(Pad.rect(80.0, 60.0, 5.0), 64, POROUS)
    disc = pad_film_mesh(Pad.circle(50.0, 5.0), disc_cells, POROUS, least_film_um=least_film_um)
    disc_cells = disc.x_edges_mm.size - 1
    feed = orifice_feed()
    ori = pad_film_mesh(Pad.circle(60.0, 8.0, "orifice"), 64, feed)
    return [
        ("porous 80 x 60 mm", lambda h: rect_reference(80.0, 60.0, h),
         lambda h: solve_film(rect, POROUS, fly_height_um=h)),
        (f"porous Ø50 mm ({disc_cells} cells)", lambda h: disc_reference(50.0, h),
         lambda h: solve_film(disc, POROUS, fly_height_um=h)),
        ("orifice Ø60 mm, Ø4 mm pocket", lambda h: orifice_reference(h_um=h, **ORIFICE),
         lambda h: solve_film(ori, feed, fly_height_um=h)),
    ]


def errors(name, ref, film, h):
    """Relative errors (load, stiffness, flow) of the film model against the reference at gap h."""
    r = ref(h)
    s = film(h)
    k_ref = _stiffness(ref, h)
    return (s.load_n / r[0] - 1, s.stiffness_n_per_um / k_ref - 1, s.mass_flow_kg_s / r[1] - 1)


def test_references_agree_with_the_check_values():
    # REFERENCE.md section 10 item 15: porous disc R 25 mm, h 5 µm -> W 628.0 N, mass flow 2.1845e-5 kg/s,
    # dW/dh about 89 N/µm, W(3 µm) 803.4 N, W(12 µm) 199.2 N (derived there with numpy/scipy)
    w, m = disc_reference(50.0, 5.0)
    assert w == pytest.approx(628.0, abs=0.1)
    assert m == pytest.approx(2.1845e-5, rel=1e-4)
    assert _stiffness(lambda h: disc_reference(50.0, h), 5.0) == pytest.approx(89, abs=1)
    assert disc_reference(50.0, 3.0)[0] == pytest.approx(803.4, abs=0.1)
    assert disc_reference(50.0, 12.0)[0] == pytest.approx(199.2, abs=0.1)
    # the rectangle series against the separated series of tests/test_film.py (a different expansion), and its
    # flow against the edge outflow of the long-strip limit: a 2000 x 20 mm pad per metre -> 5184 N/m (item 16)
    w_strip, _ = rect_reference(20000.0, 20.0, 5.0)
    assert w_strip / 20.0 == pytest.approx(5184, rel=5e-4)  # a 20 m strip: its two ends cost about 0.03 %


@pytest.mark.parametrize("case", [0, 2], ids=["rect", "orifice-pocket"])
def test_film_within_one_percent_from_1_to_40_um(case):
    # Issue 17, item 4: load, stiffness and flow within 1 % of the references at every gap from 1 to 40 µm, on the
    # meshes the commands use. Measured before the graded mesh, the centroid quadrature of cut cells and the
    # pockets' true edges (64/65 cells): rectangle 8.6 % stiffness and 12 % flow at 1 µm (5.6 % and 3.2 % at
    # 1.5 µm); pocketed orifice 17 % stiffness, 7 % flow and 4.8 % load.
    name, ref, film = cases()[case]
    worst = 0.0
    for h in GAPS:
        worst = max(worst, max(abs(e) for e in errors(name, ref, film, h)))
    assert worst < 0.01, f"{name}: largest error {100 * worst:.2f} %"


def test_porous_disc_within_one_percent():
    # The disc's edge is not a mesh line. Measured with 64 even cells a side: load and flow within 1 % from 1 to
    # 40 µm, stiffness 1.8 % low at 1.0 µm (0.5 % at 1.5 µm); before the centroid quadrature, flow 3.8 % high at
    # 1 µm. pad_film_mesh's resolution rule (cells at most 0.6 of the boundary layer at the least film, 1 µm by
    # default) now gives the default call 130 cells, and every figure holds from 1.0 µm.
    name, ref, film = cases()[1]
    assert "(130 cells)" in name
    for h in GAPS:
        el, ek, ef = errors(name, ref, film, h)
        assert abs(el) < 0.01 and abs(ek) < 0.01 and abs(ef) < 0.01, (h, el, ek, ef)
    name, ref, film = cases(128)[1]
    worst = max(max(abs(e) for e in errors(name, ref, film, h)) for h in GAPS)
    assert worst < 0.01, f"{name}: largest error {100 * worst:.2f} %"


def test_porous_disc_resolved_at_half_its_gap():
    # The commands resolve a disc down to half its nominal gap (RESOLVED_GAP_FRACTION): a Ø50 mm pad at a 4 µm gap
    # is resolved at 2 µm (boundary layer sqrt(h³ H / (12 k)) = 1.82 mm, REFERENCE.md section 6, so 64 cells of
    # 0.78 mm suffice) and its figures hold from 2 to 40 µm against the Bessel solution.
    name, ref, film = cases(64, least_film_um=2.0)[1]
    assert "(64 cells)" in name
    for h in [g for g in GAPS if g >= 2.0]:
        el, ek, ef = errors(name, ref, film, h)
        assert abs(el) < 0.01 and abs(ek) < 0.01 and abs(ef) < 0.01, (h, el, ek, ef)


def main():  # pragma: no cover - a report for docs/guideway.md
    for name, ref, film in cases() + cases(64, least_film_um=40.0)[1:2]:
        print(name)
        print("  gap µm   load %   stiffness %   flow %")
        for h in GAPS:
            el, ek, ef = errors(name, ref, film, h)
            print(f"  {h:6.1f} {100 * el:8.2f} {100 * ek:12.2f} {100 * ef:8.2f}")


if __name__ == "__main__":  # pragma: no cover
    main()
