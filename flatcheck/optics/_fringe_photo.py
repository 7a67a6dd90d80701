"""A photograph of a part under an optical flat, reduced to a height map.

Method
------
1. **The part.** A stated mask, or the outline found from where the picture carries fringes:
   the amplitude of the carrier lobe (step 3) is high on the part and low off it; Otsu's
   threshold separates the two, small specks are dropped and the largest piece is kept.
2. **Light and contrast.** The slowly varying light is removed inside the part by a normalised
   Gaussian average over about one fringe spacing, and the fringes are scaled to unit amplitude
   by their local root-mean-square, so that uneven lighting and falling contrast do not bias
   the phase.
3. **Fourier-transform (carrier) method** (Takeda, Ina & Kobayashi, J. Opt. Soc. Am. 72(1):156,
   1982). The flat is tilted so that the fringes are open; their mean spacing is a carrier, a peak
   in the 2-D spectrum away from zero. One sideband around that peak is kept by a window of
   half the carrier frequency (flat top, raised-cosine flanks), moved back by the inverse
   transform, and its angle is the phase of the fringes modulo 2 pi. Outside the part, the
   fringes are first continued by alternately keeping the two sidebands and restoring the
   measured picture on the part (the Gerchberg-type extrapolation of Roddier & Roddier, Appl.
   Opt. 26(9):1668, 1987, from memory), which keeps the window's smoothing from pulling the phase
   at the outline.
4. **Unwrapping** in two dimensions with :func:`skimage.restoration.unwrap_phase` (Herráez,
   Burton, Lalor & Gdeisat, Appl. Opt. 41(35):7437, 2002), over the part only.
5. **Wedge and sign.** The least-squares plane of the phase is the wedge of the flat (and the
   carrier); it is removed. One fringe is half a wavelength of air film (R. Williamson, "Fringe
   elements", SPIE oemagazine, Oct 2004). The film is thinnest where the flat touches, so it
   must thicken away from the stated contact edge (common practice, no single source): that
   fixes the sign, which one picture cannot give otherwise. The height of the part is the
   film taken with the opposite sign: a high spot is a thin spot of air.

Quality checks refuse a picture that would give a wrong map, naming what to change at the
flat: too few fringes (tilt the flat more), fringes too dense for the camera (tilt it less or
photograph the part larger), closed fringes (the form outgrows the wedge: tilt the flat more),
saturated fringes (less light or a shorter exposure), a wedge that does not rise away from the
stated contact edge.

Limits
------
Detail finer than about two fringe spacings is smoothed by the sideband window; the map is
the film between part and flat, so the flat's own error is in it (see its certificate).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import GeometryError, InputValueError

__all__ = ["FringeMap", "analyze_fringe_photo", "CONTACT_EDGES", "MIN_FRINGES", "MIN_PERIOD_PX"]

CONTACT_EDGES = ("left", "right", "top", "bottom")

#: Fewest carrier fringes across the part. Below this the sideband cannot be told from the light's
#: own slow variation; the carrier method wants the carrier well clear of zero frequency (Takeda et
#: al. 1982); 6 is this tool's margin, common practice no single source.
MIN_FRINGES = 6.0
#: Closest fringe spacing in pixels. Sampling needs more than 2 pixels per fringe (Nyquist); the
#: sideband window needs room beyond the carrier, so 4 px is this tool's limit.
MIN_PERIOD_PX = 4.0
#: Largest saturated share of the part's pixels. Clipped fringe tops add harmonics that the window
#: rejects (simulated crowns with 14-37 % of the part clipped came back within 1.3 nm RMS); beyond a
#: quarter of the part the sensor's own blooming, which the simulation lacks, is likely.
MAX_SATURATED = 0.25
#: Largest share of the part in saturated patches wider than half a fringe (a reflection of the
#: lamp): there the picture holds no fringe at all.
MAX_GLARE = 0.005
#: Share of the part where the carrier lobe may lose its amplitude (closed or unresolved fringes)
#: before the picture is refused.
MAX_LOST = 0.01
#: A pixel "loses" the carrier when its normalised lobe amplitude falls below this (1 = full).
LOST_LEVEL = 0.35
#: Iterations of the fringe continuation outside the part (Roddier & Roddier 1987).
CONTINUATION_ITERATIONS = 40
#: Most pixels the analysis handles after averaging down (memory of the FFTs).
MAX_PIXELS = 16_000_000
#: Pictures of more than BIN_ABOVE_PIXELS pixels with fringes wider than twice this (px) are averaged
#: down to about this spacing first: nothing is lost, since the window keeps no detail finer than two
#: fringes, and the transforms get faster.
TARGET_PERIOD_PX = 12.0
BIN_ABOVE_PIXELS = 4_000_000

#: Radius of the sideband window as a fraction of the carrier frequency, and the share of it that is
#: flat. Takeda et al. (1982) keep the sideband clear of zero frequency; with the light removed and
#: the fringes continued outside the part little is left there, so the window reaches a little past
#: half the carrier (0.6 was best of 0.5-0.8 on simulated crowns, saddles and turned-down edges).
WINDOW_RADIUS = 0.6
FLAT_TOP = 0.5
_DIRECTION = {"left": (0.0, 1.0), "right": (0.0, -1.0), "top": (1.0, 0.0), "bottom": (-1.0, 0.0)}  # (row, col)


@dataclass(frozen=True)
class FringeMap:
    """The height map recovered from one fringe photograph.

    Attributes
    ----------
    height_nm : ndarray, shape (ny, nx)
        Height of the part in nm about its least-squares plane, positive towards the flat;
        NaN off the part. Row 0 is the top of the picture.
    mask : ndarray of bool, shape (ny, nx)
        The pixels of the part used.
    x_mm : ndarray, shape (nx,)
        Position of each column on the part in mm (left to right, from the part's left edge).
    y_mm : ndarray, shape (ny,)
        Position of each row in mm (from the part's bottom edge, upwards).
    pixel_mm : float
        Size of one (possibly averaged) pixel on the part, mm.
    binning : int
        Pixels of the photograph averaged into one of the map along each side (1: none).
    wavelength_nm : float
        Wavelength of the light, nm.
    contact_edge : str
        Edge where the flat touches (left, right, top, bottom of the picture).
    fringes_across : float
        Carrier (wedge) fringes across the part.
    period_px : float
        Mean fringe spacing in pixels of the map.
    carrier_angle_deg : float
        Direction of the wedge's rise in the picture, degrees anticlockwise from "right".
    resolution_mm : float
        Shortest detail the map can show, about two fringe spacings, mm.
    saturated_fraction : float
        Share of the part's pixels at full scale.
    lost_fraction : float
        Share of the part where the carrier lobe lost its amplitude.
    modulation : float
        Median normalised lobe amplitude over the part (1 = every fringe captured).
    mask_source : str
        ``"stated"`` or ``"outline"`` (found from the fringes).
    """

    height_nm: np.ndarray
    mask: np.ndarray
    x_mm: np.ndarray
    y_mm: np.ndarray
    pixel_mm: float
    binning: int
    wavelength_nm: float
    contact_edge: str
    fringes_across: float
    period_px: float
    carrier_angle_deg: float
    resolution_mm: float
    saturated_fraction: float
    lost_fraction: float
    modulation: float
    mask_source: str

    @property
    def fringe_nm(self) -> float:
        """Height of one fringe, half the wavelength, nm."""
        return self.wavelength_nm / 2.0

    @property
    def default_step_px(self) -> int:
        """Sampling step of :meth:`heightmap` that loses nothing: a third of a fringe spacing."""
        return max(1, int(self.period_px // 3))

    def heightmap(self, step_px: int | None = None, *, label: str = ""):
        """The map as a :class:`flatcheck.HeightMap` (positions mm, heights µm).

        Parameters
        ----------
        step_px : int, optional
            Take every ``step_px``-th row and column (default :attr:`default_step_px`); the map
            keeps no detail finer than two fringe spacings, so sampling at a third of a spacing
            loses nothing.
        label : str
            Description kept with the map.

        Returns
        -------
        flatcheck.HeightMap
        """
        from flatcheck import HeightMap

        step = self.default_step_px if step_px is None else int(step_px)
        if step < 1:
            raise InputValueError(f"step {step_px} px is not a positive whole number", fix="give 1 or more")
        rows, cols = np.nonzero(self.mask)
        r0, c0 = rows.min() % step, cols.min() % step
        sub = np.zeros_like(self.mask)
        sub[r0::step, c0::step] = True
        keep = sub & self.mask
        rr, cc = np.nonzero(keep)
        if rr.size < 3:
            raise InputValueError(f"a step of {step} px leaves fewer than 3 points", fix="give a smaller step")
        w = (np.ptp(cols) + 1) * self.pixel_mm
        h = (np.ptp(rows) + 1) * self.pixel_mm
        return HeightMap(
            self.x_mm[cc], self.y_mm[rr], self.height_nm[rr, cc] / 1000.0, length_mm=w, width_mm=h, label=label
        )


# ----------------------------------------------------------------------------- helpers
def _gaussian_masked(values: np.ndarray, weight: np.ndarray, sigma: float) -> np.ndarray:
    """Normalised Gaussian average of ``values`` over the pixels where ``weight`` is 1."""
    from scipy.ndimage import gaussian_filter

    num = gaussian_filter(values * weight, sigma, mode="constant")
    den = gaussian_filter(weight.astype(float), sigma, mode="constant")
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(den > 1e-6, num / np.maximum(den, 1e-300), 0.0)


def _freq_grid(shape):
    """Spatial frequencies (cycles per pixel) of an FFT of ``shape``: (f_row, f_col) arrays."""
    fr = np.fft.fftfreq(shape[0])[:, None]
    fc = np.fft.fftfreq(shape[1])[None, :]
    return fr, fc


def _lobe_window(shape, k0, radius: float) -> np.ndarray:
    """Sideband window around ``k0`` (cycles/px): flat to half the radius, raised cosine to the radius."""
    fr, fc = _freq_grid(shape)
    d = np.hypot(fr - k0[0], fc - k0[1]) / radius
    ft = FLAT_TOP
    w = np.where(d <= ft, 1.0, np.where(d < 1.0, 0.5 * (1.0 + np.cos(np.pi * (d - ft) / (1 - ft))), 0.0))
    return w


def _find_carrier(signal: np.ndarray, weight: np.ndarray):
    """Carrier frequency (cycles/px, (row, col)) of the fringes: the strongest peak away from zero.

    Parameters
    ----------
    signal : ndarray, shape (ny, nx)
        The picture with its slow light removed (zero off the part).
    weight : ndarray, shape (ny, nx)
        Apodisation (1 on the part, tapering off), to keep the part's outline from ringing.

    Returns
    -------
    (ndarray shape (2,), float)
        The carrier ``(f_row, f_col)`` refined to a fraction of a bin, and the share of the
        spectrum's energy (away from zero frequency) within half a carrier of the peak pair.
    """
    ny, nx = signal.shape
    F = np.fft.fft2(signal * weight)
    P = np.abs(F) ** 2
    fr, fc = _freq_grid(signal.shape)
    # ignore the lowest 1.5 cycles per picture (what is left of the light), keep one half-plane
    low = np.hypot(fr * ny, fc * nx) < 1.5
    half = (fc > 0) | ((fc == 0) & (fr > 0))
    Q = np.where(low | ~half, 0.0, P)
    i, j = np.unravel_index(int(np.argmax(Q)), Q.shape)
    # refine by the power-weighted centroid of the 3 x 3 neighbourhood (a fraction of a bin)
    ii = (np.arange(i - 1, i + 2) % ny)[:, None]
    jj = (np.arange(j - 1, j + 2) % nx)[None, :]
    wts = P[ii, jj]
    k = np.array([fr[i, 0], fc[0, j]])
    dr = np.array([-1.0, 0.0, 1.0])[:, None] / ny
    dc = np.array([-1.0, 0.0, 1.0])[None, :] / nx
    k = k + np.array([(wts * dr).sum(), (wts * dc).sum()]) / wts.sum()
    radius = 0.5 * math.hypot(*k)
    near = (np.hypot(fr - k[0], fc - k[1]) < radius) | (np.hypot(fr + k[0], fc + k[1]) < radius)
    total = P[~low].sum()
    share = float(P[near & ~low].sum() / total) if total > 0 else 0.0
    return k, share


def _outline(picture: np.ndarray) -> np.ndarray:
    """The part: where the picture carries fringes.

    The fringe contrast (local standard deviation over local mean, in a square of one fringe
    spacing) is high on the part and low on a background without fringes; Otsu's threshold
    separates the two. A brightness step at the outline raises the contrast within half a
    window of it, so the part found is eroded by a whole window. Where the part and the
    background differ clearly in mean brightness, the edge is then placed within that band by
    the brightness alone, a quarter of a fringe spacing and two pixels inside; otherwise the part
    stays drawn in by about half a fringe spacing.
    """
    from scipy import ndimage
    from skimage.filters import threshold_otsu

    ones = np.ones_like(picture)
    hp = picture - _gaussian_masked(picture, ones, max(picture.shape) / 16.0)
    ny, nx = picture.shape
    k, _ = _find_carrier(hp, np.outer(np.hanning(ny), np.hanning(nx)))
    period = 1.0 / max(math.hypot(*k), 1e-9)
    size = int(min(max(3, round(period)), min(picture.shape) // 4)) | 1
    mean = ndimage.uniform_filter(picture, size)
    var = np.maximum(ndimage.uniform_filter(picture * picture, size) - mean * mean, 0.0)
    contrast = np.sqrt(var) / np.maximum(mean, 1e-3 * max(float(picture.max()), 1e-12))
    if np.ptp(contrast) <= 0:
        raise InputValueError(
            "no fringes found in the picture",
            fix="photograph the part under the flat in monochromatic light, with the flat tilted to show 8-20 fringes",
        )
    part = contrast > threshold_otsu(contrast)
    part = ndimage.binary_opening(part, iterations=2)
    lab, n = ndimage.label(part)
    if n == 0:
        raise InputValueError("no part with fringes found in the picture", fix="give the part's outline as a mask")
    sizes = ndimage.sum(part, lab, index=np.arange(1, n + 1))
    part = ndimage.binary_fill_holes(lab == (1 + int(np.argmax(sizes))))
    # the threshold's crossing wanders with the fringes along the outline by up to half a window:
    # a round erosion by a whole window keeps clear of the background (and round parts round)
    core = ndimage.distance_transform_edt(part) > size
    # where part and background differ clearly in brightness, the edge itself is placed in the band
    # between: the local mean over one fringe spacing crosses halfway between the part's and the
    # background's own levels nearby (each averaged over a few windows, so uneven light is followed)
    off = ndimage.distance_transform_edt(~part) > size
    if core.sum() > 100 and off.sum() > 100:
        on_level = _gaussian_masked(mean, core.astype(float), 2.0 * size)
        off_level = _gaussian_masked(mean, off.astype(float), 2.0 * size)
        band = ~core & ~off
        step = on_level - off_level
        clear = np.abs(step) > 0.25 * np.maximum(np.abs(on_level), 1e-12)
        if band.any() and np.mean(clear[band]) > 0.95 and np.all(np.sign(step[band]) == np.sign(np.median(step[band]))):
            inside = (mean - 0.5 * (on_level + off_level)) * np.sign(step) > 0
            edge = core | (band & inside)
            edge = _largest_piece(ndimage.binary_fill_holes(edge))
            # the fringe under the window moves the crossing by up to a quarter window, and the
            # pixels at the edge mix part and background: keep that far in
            return ndimage.distance_transform_edt(edge) > 0.25 * size + 2.0
    return core


def _largest_piece(mask: np.ndarray) -> np.ndarray:
    from scipy import ndimage

    lab, n = ndimage.label(mask)
    if n <= 1:
        return mask
    sizes = ndimage.sum(mask, lab, index=np.arange(1, n + 1))
    return lab == (1 + int(np.argmax(sizes)))


def _bin(picture: np.ndarray, mask: np.ndarray, saturated: np.ndarray, f: int):
    """Average ``f`` x ``f`` blocks; a block is on the part only when all its pixels are."""
    ny, nx = (picture.shape[0] // f) * f, (picture.shape[1] // f) * f

    def blocks(a):
        return a[:ny, :nx].reshape(ny // f, f, nx // f, f)

    return (
        blocks(picture).mean(axis=(1, 3)),
        blocks(mask).all(axis=(1, 3)),
        blocks(saturated).any(axis=(1, 3)),
    )


def _plane_fit(values: np.ndarray, mask: np.ndarray):
    """Least-squares plane ``p0 + pr * row + pc * col`` of ``values`` over ``mask``; returns (p0, pr, pc)."""
    rr, cc = np.nonzero(mask)
    A = np.column_stack([np.ones(rr.size), rr - rr.mean(), cc - cc.mean()])
    coef, *_ = np.linalg.lstsq(A, values[rr, cc], rcond=None)
    p0 = coef[0] - coef[1] * rr.mean() - coef[2] * cc.mean()
    return p0, coef[1], coef[2]


# ----------------------------------------------------------------------------- analysis
def analyze_fringe_photo(
    intensity,
    *,
    wavelength_nm: float,
    contact_edge: str,
    pixel_mm: float | None = None,
    part_width_mm: float | None = None,
    mask=None,
    saturated=None,
) -> FringeMap:
    """Reduce a photograph of open fringes under an optical flat to a height map.

    Parameters
    ----------
    intensity : array_like, shape (ny, nx)
        The picture, 0..1 of full scale, row 0 at the top.
    wavelength_nm : float
        Wavelength of the light in nm (helium 587.56 nm, sodium 589.0, ...).
    contact_edge : {"left", "right", "top", "bottom"}
        Edge of the picture where the flat touches the part (the film is thinnest there).
    pixel_mm : float, optional
        Size of one pixel on the part in mm. Give this or ``part_width_mm``.
    part_width_mm : float, optional
        Width of the part from its left to its right edge in the picture, mm; the pixel size
        is this over the width of the part's outline in pixels.
    mask : array_like of bool, shape (ny, nx), optional
        True on the part. By default the outline is found from where the picture has fringes.
    saturated : array_like of bool, shape (ny, nx), optional
        Pixels at the camera's full scale; by default those at 1.0.

    Returns
    -------
    FringeMap

    Raises
    ------
    InputValueError
        A bad parameter, or a picture that cannot give a right map: too few fringes, fringes
        too dense, closed fringes, saturation, a wedge not rising from the stated contact edge.
        The message names what to change at the flat.
    GeometryError
        A part too small to analyse.

    References
    ----------
    .. [1] M. Takeda, H. Ina, S. Kobayashi, "Fourier-transform method of fringe-pattern analysis
       for computer-based topography and interferometry", J. Opt. Soc. Am. 72(1):156 (1982).
    .. [2] F. Roddier, C. Roddier, "Interferogram analysis using Fourier transform techniques",
       Appl. Opt. 26(9):1668 (1987) (from memory).
    .. [3] M. A. Herráez, D. R. Burton, M. J. Lalor, M. A. Gdeisat, "Fast two-dimensional phase-
       unwrapping algorithm based on sorting by reliability following a noncontinuous path",
       Appl. Opt. 41(35):7437 (2002).

    Examples
    --------
    A simulated crown of 100 nm comes back within a few nm:

    >>> import numpy as np
    >>> from flatcheck.optics import simulate_fringe_photo, crown_nm
    >>> mask = np.zeros((128, 128), bool); mask[8:120, 8:120] = True
    >>> sim = simulate_fringe_photo(crown_nm(mask, 100.0), mask, wavelength_nm=587.56, pixel_mm=0.1)
    >>> fm = analyze_fringe_photo(sim.intensity, wavelength_nm=587.56, contact_edge="left", pixel_mm=0.1, mask=mask)
    >>> bool(fm.height_nm[64, 64] > fm.height_nm[64, 12] + 60)   # high in the middle
    True
    """
    from scipy import ndimage

    img = np.asarray(intensity, dtype=float)
    if img.ndim != 2:
        raise InputValueError(f"the picture has {img.ndim} dimensions, not 2", fix="give a grey picture")
    if min(img.shape) < 32:
        raise GeometryError(
            f"the picture is {img.shape[1]} x {img.shape[0]} pixels", fix="give at least 32 x 32 pixels of the part"
        )
    if not np.all(np.isfinite(img)):
        raise InputValueError("the picture holds values that are not numbers", fix="give a normal photograph")
    if contact_edge not in CONTACT_EDGES:
        raise InputValueError(
            f"unknown contact edge {contact_edge!r}", fix="give the edge where the flat touches: left, right, top or bottom"
        )
    if not (wavelength_nm is not None and math.isfinite(wavelength_nm) and 200.0 <= wavelength_nm <= 2000.0):
        raise InputValueError(
            f"wavelength {wavelength_nm} nm is outside 200-2000 nm",
            fix="give the wavelength in nm (helium 587.56, sodium 589.0, mercury green 546.07)",
        )
    if (pixel_mm is None) == (part_width_mm is None):
        raise InputValueError(
            "the scale of the picture is needed once", fix="give either the pixel size in mm or the part's width in mm"
        )
    for name, v in (("pixel size", pixel_mm), ("part width", part_width_mm)):
        if v is not None and not (math.isfinite(v) and v > 0):
            raise InputValueError(f"{name} {v} mm is not a positive number", fix=f"give the {name} in mm")
    sat = (img >= 1.0 - 1e-9) if saturated is None else np.asarray(saturated, dtype=bool)
    if sat.shape != img.shape:
        raise InputValueError("the saturation mask and the picture differ in size")
    if np.ptp(img) <= 0:
        raise InputValueError(
            "the picture is one flat tone, without fringes",
            fix="photograph the part under the flat in monochromatic light, with the flat tilted to show 8-20 fringes",
        )

    if mask is None:
        part = _outline(img)
        source = "outline"
    else:
        part = np.asarray(mask, dtype=bool)
        if part.shape != img.shape:
            raise InputValueError(
                f"the mask is {part.shape[1]} x {part.shape[0]} pixels, the picture {img.shape[1]} x {img.shape[0]}",
                where="mask",
                fix="give a mask of the picture's size (white on the part)",
            )
        source = "stated"
        biggest = _largest_piece(part)
        if biggest.sum() < 0.9 * max(part.sum(), 1):
            raise InputValueError(
                f"the mask is in pieces (the largest holds {100 * biggest.sum() / max(part.sum(), 1):.0f} % of its area)",
                where="mask",
                fix="draw the part as one white area on black",
            )
    part = _largest_piece(part)
    if part.sum() < 32 * 32:
        raise GeometryError(
            f"the part covers only {int(part.sum())} pixels", fix="photograph the part larger (at least 32 x 32 pixels)"
        )

    # scale: the part's own width in the picture
    rows, cols = np.nonzero(part)
    width_px = int(np.ptp(cols)) + 1
    px_mm = float(pixel_mm) if pixel_mm is not None else float(part_width_mm) / width_px

    # saturation: a share of the part at full scale
    sat_frac = float(sat[part].mean())
    if sat_frac > MAX_SATURATED:
        raise InputValueError(
            f"{100 * sat_frac:.1f} % of the part is saturated (at full scale)",
            fix="lower the light or shorten the exposure until the bright fringes stay below full scale",
        )

    # glare: a saturated patch (a reflection of the lamp) holds no fringes at all
    glare = ndimage.binary_erosion(sat & part, iterations=3)
    glare_frac = float(glare.sum() / part.sum())
    if glare_frac > MAX_GLARE:
        raise InputValueError(
            f"{100 * glare_frac:.1f} % of the part is a saturated patch without fringes (a reflection of the lamp)",
            fix="move the lamp or the camera so that its reflection falls off the part, or lower the light",
        )

    # a first look at the carrier, to average big pictures down and to check the spacing
    ones = part.astype(float)
    bg = _gaussian_masked(img, ones, max(4.0, min(img.shape) / 32.0))
    k, _ = _find_carrier(np.where(part, img - bg, 0.0), ndimage.gaussian_filter(ones, 2.0))
    period = 1.0 / max(math.hypot(*k), 1e-12)
    binning = 1
    if period > 2 * TARGET_PERIOD_PX and img.size > BIN_ABOVE_PIXELS:
        binning = int(period // TARGET_PERIOD_PX)
        img, part, sat = _bin(img, part, sat, binning)
        part = _largest_piece(part)
        rows, cols = np.nonzero(part)
        px_mm *= binning
    # crop to the part with a margin (the continuation fills it), so the FFT stays small
    margin = int(max(16, 3 * period / binning))
    r0, r1 = max(rows.min() - margin, 0), min(rows.max() + margin + 1, img.shape[0])
    c0, c1 = max(cols.min() - margin, 0), min(cols.max() + margin + 1, img.shape[1])
    full_shape = img.shape
    img, part = img[r0:r1, c0:c1], part[r0:r1, c0:c1]
    from scipy.fft import next_fast_len

    pad_r = next_fast_len(img.shape[0] + 2 * margin) - img.shape[0]
    pad_c = next_fast_len(img.shape[1] + 2 * margin) - img.shape[1]
    pads = ((pad_r // 2, pad_r - pad_r // 2), (pad_c // 2, pad_c - pad_c // 2))
    img = np.pad(img, pads, mode="edge")
    part_p = np.pad(part, pads, mode="constant")
    if img.size > MAX_PIXELS:
        raise GeometryError(
            f"the part spans {img.shape[1]} x {img.shape[0]} pixels at this fringe spacing, more than this tool handles",
            fix="photograph the part smaller in the frame, or with fewer, wider fringes",
        )

    # light and contrast (step 2)
    w = part_p.astype(float)
    k, _ = _find_carrier(np.where(part_p, img - _gaussian_masked(img, w, max(4.0, period / binning)), 0.0),
                         ndimage.gaussian_filter(w, 2.0))
    f0 = math.hypot(*k)
    period_px = 1.0 / f0
    extent = _extent_along(part_p, k)
    fringes = extent * f0
    if period_px < MIN_PERIOD_PX:
        raise InputValueError(
            f"the fringes are {period_px:.1f} pixels apart, too dense to resolve (at least {MIN_PERIOD_PX:g} needed)",
            fix="tilt the flat less (fewer fringes), or photograph the part larger in the frame",
        )
    if fringes < MIN_FRINGES:
        raise InputValueError(
            f"only {fringes:.1f} fringes across the part (at least {MIN_FRINGES:g} needed for the carrier method)",
            fix="tilt the flat a little more (a wider air wedge, e.g. a slip of lens tissue under the edge opposite "
            "the contact) to get 8-20 fringes across the part",
        )
    sigma = max(2.0, period_px)
    bg = _gaussian_masked(img, w, sigma)
    hp = np.where(part_p, img - bg, 0.0)
    env = np.sqrt(2.0 * _gaussian_masked(hp * hp, w, sigma))
    floor = 0.05 * float(np.median(env[part_p]))
    g = np.where(part_p, hp / np.maximum(env, max(floor, 1e-12)), 0.0)

    # carrier method with continuation outside the part (step 3)
    radius = WINDOW_RADIUS * f0
    W = _lobe_window(g.shape, k, radius)
    W2 = W + _lobe_window(g.shape, -k, radius)
    ext = g.copy()
    for _ in range(CONTINUATION_ITERATIONS):
        rec = np.real(np.fft.ifft2(np.fft.fft2(ext) * W2))
        ext = np.where(part_p, g, rec)
    c = np.fft.ifft2(np.fft.fft2(ext) * W)
    amp = 2.0 * np.abs(c)  # 1 where the lobe holds every fringe of unit amplitude

    # closed or unresolved fringes: the lobe loses its amplitude (away from the outline)
    inner = ndimage.binary_erosion(part_p, iterations=max(1, int(round(period_px))))
    judge = inner if inner.sum() > 0.25 * part_p.sum() else part_p
    lost = float(np.mean(amp[judge] < LOST_LEVEL))
    modulation = float(np.median(amp[part_p]))
    phase_w = np.angle(c)
    from skimage.restoration import unwrap_phase

    phase = unwrap_phase(np.ma.masked_array(phase_w, mask=~part_p), rng=0)
    phase = np.ma.filled(phase, np.nan)
    # closed fringes also show as a fringe frequency that turns back against the carrier
    gr, gc = np.gradient(np.where(part_p, phase, 0.0))
    along = (gr * k[0] + gc * k[1]) / (2 * np.pi * f0 * f0)  # local frequency along the carrier, in carriers
    back = float(np.mean(along[judge] < 0.25))
    if lost > MAX_LOST or back > MAX_LOST:
        raise InputValueError(
            f"the fringes curve too much for this tilt of the flat (closed or nearly closed fringes) on "
            f"{100 * max(lost, back):.1f} % of the part: the carrier method needs open fringes that run across the "
            "whole part",
            fix="tilt the flat more, with the flat touching along one edge, until the fringes run across the part "
            "without closing (more, closer fringes)",
        )

    # wedge and sign (step 5)
    p0, pr, pc = _plane_fit(phase, part_p)
    dr, dc = _DIRECTION[contact_edge]
    rise = pr * dr + pc * dc
    slope = math.hypot(pr, pc)
    if abs(rise) < 0.5 * slope:
        angle = math.degrees(math.atan2(-pr, pc))
        raise InputValueError(
            f"the fringes do not run along the {contact_edge} edge (the wedge rises at {angle:.0f} degrees in the picture), "
            "so the contact edge cannot fix the sign",
            fix="state the edge where the flat touches, and turn the flat so that the fringes run parallel to that edge",
        )
    sign = 1.0 if rise > 0 else -1.0
    rr, cc = np.mgrid[0 : phase.shape[0], 0 : phase.shape[1]]
    psi = sign * (phase - (p0 + pr * rr + pc * cc))
    height = np.where(part_p, -psi * wavelength_nm / (4.0 * np.pi), np.nan)
    carrier_angle = math.degrees(math.atan2(-sign * pr, sign * pc))

    # back to the (binned) picture's frame
    height = height[pads[0][0] : pads[0][0] + (r1 - r0), pads[1][0] : pads[1][0] + (c1 - c0)]
    full_h = np.full(full_shape, np.nan)
    full_m = np.zeros(full_shape, dtype=bool)
    full_h[r0:r1, c0:c1] = height
    full_m[r0:r1, c0:c1] = part
    rows, cols = np.nonzero(full_m)
    x_mm = (np.arange(full_shape[1]) - cols.min() + 0.5) * px_mm
    y_mm = (rows.max() - np.arange(full_shape[0]) + 0.5) * px_mm
    return FringeMap(
        height_nm=full_h,
        mask=full_m,
        x_mm=x_mm,
        y_mm=y_mm,
        pixel_mm=px_mm,
        binning=binning,
        wavelength_nm=float(wavelength_nm),
        contact_edge=contact_edge,
        fringes_across=float(fringes),
        period_px=float(period_px),
        carrier_angle_deg=float(carrier_angle),
        resolution_mm=float(2.0 * period_px * px_mm),
        saturated_fraction=sat_frac,
        lost_fraction=max(lost, back),
        modulation=modulation,
        mask_source=source,
    )


def _extent_along(mask: np.ndarray, k) -> float:
    """Extent of the part in pixels along the direction of ``k`` (row, col)."""
    rr, cc = np.nonzero(mask)
    u = np.array(k, dtype=float) / math.hypot(*k)
    s = rr * u[0] + cc * u[1]
    return float(np.ptp(s) + 1.0)
