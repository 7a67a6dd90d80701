"""Fringe photographs -> height maps (flatcheck.optics._fringe_photo), and the simulator.

The photographs of the accuracy checks are made here from the two-beam fringe formula, not by
flatcheck's simulator, so that the analysis is checked against an outside model:

- one fringe is half a wavelength of air film in reflection at normal incidence
  (R. Williamson, "Fringe elements", SPIE oemagazine, Oct 2004): I = A (1 - V cos(4 pi gap / lambda));
- the film is thinnest where the flat touches and thickens away from the contact
  (common practice, no single source), so gap = wedge * distance from the contact edge - height.
"""

import math

import numpy as np
import pytest

from flatcheck.errors import InputValueError
from flatcheck.optics import analyze_fringe_photo, crown_nm, simulate_fringe_photo

HELIUM_NM = 587.56  # helium yellow line (He 587.6 nm, Williamson 2004; extra digit from memory)
LIMIT_NM = HELIUM_NM / 50.0  # the acceptance: within lambda/50 RMS of the truth
N = 256
PIXEL_MM = 0.1


def _square():
    m = np.zeros((N, N), bool)
    m[20:236, 20:236] = True
    return m


def _disc():
    r, c = np.mgrid[0:N, 0:N]
    return (r - 127.5) ** 2 + (c - 127.5) ** 2 < 110.0**2


def _uv(mask):
    """Part coordinates -1..1 across the part's bounding box (u to the right, v up)."""
    rows, cols = np.nonzero(mask)
    r, c = np.mgrid[0:N, 0:N].astype(float)
    u = (c - 0.5 * (cols.min() + cols.max())) / (0.5 * np.ptp(cols))
    v = -(r - 0.5 * (rows.min() + rows.max())) / (0.5 * np.ptp(rows))
    return u, v


def crown(mask):  # convex: 150 nm high in the middle against the ends of the axes
    u, v = _uv(mask)
    return 150.0 * (1.0 - u * u - v * v)


def saddle(mask):  # astigmatic saddle with axes turned 30 degrees, +-120 nm at the ends of the axes
    u, v = _uv(mask)
    a = math.radians(30.0)
    up, vp = u * math.cos(a) + v * math.sin(a), -u * math.sin(a) + v * math.cos(a)
    return 120.0 * (up * up - vp * vp)


def turned_edge(mask):  # flat middle, rim 150 nm down, falling with the square of the distance from 0.7
    u, v = _uv(mask)
    rho = np.maximum(abs(u), abs(v)) if mask[20, 20] else np.hypot(u, v)
    t = np.clip((rho - 0.7) / 0.3, 0.0, None)
    return -150.0 * t * t


def photograph(height_nm, mask, *, edge="left", fringes=12.0, noise=0.02, lighting=0.35, exposure=0.45,
               visibility=0.8, seed=1234):
    """8-bit picture of the part under a tilted flat (two-beam formula above), with uneven light and noise."""
    r, c = np.mgrid[0:N, 0:N].astype(float)
    along = {"left": c, "right": N - 1 - c, "top": r, "bottom": N - 1 - r}[edge]
    span = np.ptp(along[mask])
    gap = along * fringes * (HELIUM_NM / 2) / span - height_nm
    gap -= gap[mask].min()
    x, y = (c - N / 2) / (N / 2), (r - N / 2) / (N / 2)
    light = exposure * (1 + lighting * (0.7 * x - 0.5 * y - 0.4 * (x * x + y * y)))  # uneven lighting
    img = np.where(mask, light * (1 - visibility * np.cos(4 * np.pi * gap / HELIUM_NM)), 0.12)
    img = img + np.random.default_rng(seed).normal(0.0, noise, img.shape)
    return np.clip(np.rint(img * 255), 0, 255) / 255.0


def _rms_about_plane(err, mask):
    rr, cc = np.nonzero(mask)
    A = np.column_stack([np.ones(rr.size), rr, cc])
    e = err[mask]
    e = e - A @ np.linalg.lstsq(A, e, rcond=None)[0]
    return float(np.sqrt(np.mean(e * e)))


@pytest.mark.parametrize("surface", [crown, saddle, turned_edge])
@pytest.mark.parametrize("shape", ["square", "disc"])
def test_map_within_lambda_over_50_and_sign_right(surface, shape):
    mask = _square() if shape == "square" else _disc()
    truth = np.where(mask, surface(mask), 0.0)
    img = photograph(truth, mask)
    fm = analyze_fringe_photo(img, wavelength_nm=HELIUM_NM, contact_edge="left", pixel_mm=PIXEL_MM, mask=mask)
    used = fm.mask
    assert used.sum() > 0.95 * mask.sum()
    err = np.where(used, fm.height_nm - truth, 0.0)
    # wedge removed on both sides: compare about the least-squares plane of the error
    rms = _rms_about_plane(err, used)
    assert rms < LIMIT_NM, f"{surface.__name__} on a {shape}: {rms:.2f} nm RMS against lambda/50 = {LIMIT_NM:.2f} nm"
    # sign: the map goes up where the truth does (a wrong sign gives a correlation near -1)
    assert np.corrcoef(fm.height_nm[used], truth[used])[0, 1] > 0.98


@pytest.mark.parametrize("edge", ["left", "right", "top", "bottom"])
def test_sign_from_every_contact_edge(edge):
    mask = _disc()
    truth = np.where(mask, crown(mask), 0.0)
    fm = analyze_fringe_photo(photograph(truth, mask, edge=edge), wavelength_nm=HELIUM_NM, contact_edge=edge,
                              pixel_mm=PIXEL_MM, mask=mask)
    assert _rms_about_plane(np.where(fm.mask, fm.height_nm - truth, 0.0), fm.mask) < LIMIT_NM
    # a crown: the middle stands above the rim (sign fixed by the contact edge)
    assert fm.height_nm[128, 128] > np.nanmean(fm.height_nm[fm.mask & (np.hypot(*np.mgrid[0:N, 0:N] - 127.5) > 100)]) + 100


def test_outline_found_from_the_fringes():
    mask = _disc()
    truth = np.where(mask, crown(mask), 0.0)
    fm = analyze_fringe_photo(photograph(truth, mask), wavelength_nm=HELIUM_NM, contact_edge="left", pixel_mm=PIXEL_MM)
    assert fm.mask_source == "outline"
    # the outline lies inside the part and covers most of it (drawn in by about half a fringe)
    assert not (fm.mask & ~mask).any()
    assert fm.mask.sum() > 0.75 * mask.sum()
    assert _rms_about_plane(np.where(fm.mask, fm.height_nm - truth, 0.0), fm.mask) < LIMIT_NM


def test_scale_from_the_part_width_and_heightmap_units():
    mask = _square()
    truth = np.where(mask, crown(mask), 0.0)
    img = photograph(truth, mask)
    fm = analyze_fringe_photo(img, wavelength_nm=HELIUM_NM, contact_edge="left", part_width_mm=43.2, mask=mask)
    assert fm.pixel_mm == pytest.approx(43.2 / 216)  # 216 pixels across the part
    hm = fm.heightmap(4)
    # positions in mm from the part's lower-left corner, heights in µm
    assert hm.x_mm.min() == pytest.approx(0.5 * fm.pixel_mm) and hm.x_mm.max() < 43.2
    assert np.ptp(hm.height_um) == pytest.approx(np.nanmax(fm.height_nm) / 1000 - np.nanmin(fm.height_nm) / 1000, rel=0.2)
    # one fringe is half the wavelength (Williamson 2004)
    assert fm.fringe_nm == pytest.approx(293.78)


# --------------------------------------------------------------------------- bad photographs
def _refused(img, mask=None, **kw):
    with pytest.raises(InputValueError) as exc:
        analyze_fringe_photo(img, wavelength_nm=HELIUM_NM, contact_edge=kw.pop("edge", "left"), pixel_mm=PIXEL_MM,
                             mask=mask, **kw)
    return str(exc.value)


def test_too_few_fringes_says_tilt_more():
    mask = _disc()
    text = _refused(photograph(np.zeros((N, N)), mask, fringes=3.0), mask)
    assert "fringes across the part" in text and "tilt the flat a little more" in text


def test_closed_fringes_say_tilt_more():
    # 3 fringes of crown on a wedge of 8: the fringes close around the crown
    mask = _disc()
    u, v = _uv(mask)
    text = _refused(photograph(np.where(mask, 3 * 293.78 * (1 - u * u - v * v), 0.0), mask, fringes=8.0), mask)
    assert "tilt the flat" in text


def test_fringes_too_dense_say_tilt_less():
    mask = _disc()
    text = _refused(photograph(np.zeros((N, N)), mask, fringes=75.0), mask)  # about 3 px per fringe
    assert "too dense" in text and "tilt the flat less" in text


def test_saturated_photograph_says_less_light():
    mask = _disc()
    text = _refused(photograph(np.zeros((N, N)), mask, exposure=1.0, noise=0.0), mask)
    assert "saturated" in text and "lower the light" in text


def test_glare_patch_names_the_lamp():
    mask = _disc()
    img = photograph(np.zeros((N, N)), mask)
    img[100:140, 100:140] = 1.0  # a reflection of the lamp
    text = _refused(img, mask)
    assert "reflection of the lamp" in text


def test_fringes_square_to_the_stated_edge_are_refused():
    # the flat touches along the top, so the fringes run left-right; the stated edge cannot fix the sign
    mask = _disc()
    text = _refused(photograph(np.where(mask, crown(mask), 0.0), mask, edge="top"), mask, edge="left")
    assert "contact edge cannot fix the sign" in text


def test_bad_parameters():
    mask = _disc()
    img = photograph(np.zeros((N, N)), mask)
    with pytest.raises(InputValueError):
        analyze_fringe_photo(img, wavelength_nm=HELIUM_NM, contact_edge="middle", pixel_mm=0.1)
    with pytest.raises(InputValueError):
        analyze_fringe_photo(img, wavelength_nm=HELIUM_NM, contact_edge="left")  # no scale
    with pytest.raises(InputValueError):
        analyze_fringe_photo(np.full((N, N), 0.5), wavelength_nm=HELIUM_NM, contact_edge="left", pixel_mm=0.1)


# --------------------------------------------------------------------------- the simulator
def test_simulator_follows_the_two_beam_formula():
    mask = _square()
    h = crown_nm(mask, 100.0)
    sim = simulate_fringe_photo(h, mask, wavelength_nm=HELIUM_NM, pixel_mm=0.1, contact_edge="left",
                                fringes_across=10.0, visibility=0.8, exposure=0.45, bits=16)
    gap = sim.gap_nm[mask]
    # the flat touches: the thinnest film is zero, and the film grows away from the contact edge on average
    assert gap.min() == pytest.approx(0.0, abs=1e-9)
    assert np.nanmean(sim.gap_nm[:, 200]) > np.nanmean(sim.gap_nm[:, 40])
    # even light, no noise: I = A (1 - V cos(4 pi gap / lambda)) to the 16-bit quantisation
    expect = 0.45 * (1 - 0.8 * np.cos(4 * np.pi * gap / HELIUM_NM))
    assert np.abs(sim.intensity[mask] - expect).max() < 1.0 / 65535
    # wedge only, from the gap: 10 fringes of half a wavelength across the part, less the crown
    assert np.ptp(sim.gap_nm[128, 20:236] + sim.height_nm[128, 20:236]) == pytest.approx(10 * HELIUM_NM / 2, rel=0.01)
