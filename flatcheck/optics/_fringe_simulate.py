"""Simulated photographs of a part under an optical flat, from a known surface.

The test and the sample photographs of flatcheck are made here, so that the analysis of
:mod:`flatcheck.optics._fringe_photo` can be checked against the surface that made them.

Model
-----
The flat rests on the part with its reference face tilted by a small wedge, touching along
the *contact edge*. The air film between flat and part is

    gap(x, y) = wedge * distance from the contact edge - height(x, y) + g0

with ``g0`` chosen so that the thinnest film over the part is zero (the flat touches the
highest point at the contact edge). In reflection at normal incidence one fringe is half a
wavelength of film (R. Williamson, "Fringe elements", SPIE oemagazine, Oct 2004), and the
reflection at the denser medium adds half a wave, so the film is dark where it is a whole
number of half wavelengths thick (common practice, no single source):

    I(x, y) = A(x, y) * (1 - V cos(4 pi gap / wavelength))

``A`` is the light (uneven lighting: a smooth tilt and fall-off across the picture), ``V`` the
fringe visibility. The camera adds Gaussian noise, clips at full scale (saturation) and rounds
to whole codes. Outside the part the picture shows a dull background with no fringes.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import InputValueError

__all__ = ["SimulatedPhoto", "simulate_fringe_photo", "crown_nm", "saddle_nm", "turned_edge_nm"]

_EDGES = ("left", "right", "top", "bottom")


@dataclass(frozen=True)
class SimulatedPhoto:
    """A simulated fringe photograph and the surface that made it.

    Attributes
    ----------
    codes : ndarray of uint8 or uint16, shape (ny, nx)
        Pixel values as a camera writes them (row 0 at the top of the picture).
    full_scale : int
        The largest code (255 for 8 bits); a pixel at this value is saturated.
    height_nm : ndarray, shape (ny, nx)
        The true surface height in nm (positive towards the flat), NaN off the part.
    mask : ndarray of bool, shape (ny, nx)
        True on the part.
    gap_nm : ndarray, shape (ny, nx)
        The air film between flat and part in nm (NaN off the part).
    wavelength_nm : float
        Wavelength of the light in nm.
    pixel_mm : float
        Size of one pixel on the part in mm.
    contact_edge : str
        Edge of the picture where the flat touches: left, right, top or bottom.
    """

    codes: np.ndarray
    full_scale: int
    height_nm: np.ndarray
    mask: np.ndarray
    gap_nm: np.ndarray
    wavelength_nm: float
    pixel_mm: float
    contact_edge: str

    @property
    def intensity(self) -> np.ndarray:
        """Pixel values scaled to 0..1 (1 = full scale), shape (ny, nx)."""
        return self.codes.astype(float) / float(self.full_scale)


def _unit_coords(mask: np.ndarray):
    """Coordinates of every pixel scaled to -1..1 over the part's bounding box (u across, v up)."""
    rows, cols = np.nonzero(mask)
    r0, r1, c0, c1 = rows.min(), rows.max(), cols.min(), cols.max()
    ny, nx = mask.shape
    cc, rr = np.meshgrid(np.arange(nx, dtype=float), np.arange(ny, dtype=float))
    u = (cc - 0.5 * (c0 + c1)) / max(0.5 * (c1 - c0), 1.0)
    v = -(rr - 0.5 * (r0 + r1)) / max(0.5 * (r1 - r0), 1.0)
    return u, v


def crown_nm(mask: np.ndarray, sag_nm: float) -> np.ndarray:
    """A crown (convex, high in the middle) of ``sag_nm`` from the centre to the ends of the axes.

    Parameters
    ----------
    mask : ndarray of bool, shape (ny, nx)
        The part in the picture.
    sag_nm : float
        Height of the centre above the ends of the part's axes in nm (negative: a hollow).

    Returns
    -------
    ndarray, shape (ny, nx)
        Heights in nm, NaN off the part.
    """
    u, v = _unit_coords(mask)
    return np.where(mask, sag_nm * (1.0 - u * u - v * v), np.nan)


def saddle_nm(mask: np.ndarray, amplitude_nm: float, angle_deg: float = 0.0) -> np.ndarray:
    """An astigmatic saddle ``amplitude * (u'^2 - v'^2)`` with axes turned by ``angle_deg``.

    Parameters
    ----------
    mask : ndarray of bool, shape (ny, nx)
    amplitude_nm : float
        Height at the ends of the first axis above the centre, nm (the second axis is as far below).
    angle_deg : float
        Turn of the saddle's axes from the picture's axes, degrees.

    Returns
    -------
    ndarray, shape (ny, nx)
        Heights in nm, NaN off the part.
    """
    u, v = _unit_coords(mask)
    a = math.radians(angle_deg)
    up, vp = u * math.cos(a) + v * math.sin(a), -u * math.sin(a) + v * math.cos(a)
    return np.where(mask, amplitude_nm * (up * up - vp * vp), np.nan)


def turned_edge_nm(mask: np.ndarray, drop_nm: float, start: float = 0.7) -> np.ndarray:
    """A turned-down edge: flat in the middle, falling by ``drop_nm`` at the rim.

    The fall starts at ``start`` of the way from the centre to the rim (Chebyshev distance, so a
    rectangular part rolls off along all four sides; a round one along its rim) and grows with the square of the distance beyond it.

    Parameters
    ----------
    mask : ndarray of bool, shape (ny, nx)
    drop_nm : float
        Depth of the rim below the flat middle, nm.
    start : float
        Where the fall begins, as a fraction of the half-size (0..1).

    Returns
    -------
    ndarray, shape (ny, nx)
        Heights in nm, NaN off the part.
    """
    u, v = _unit_coords(mask)
    # a part that fills its bounding box is rectangular: it rolls off along its sides; else along its rim
    rho = np.maximum(np.abs(u), np.abs(v)) if _box_fill(mask) > 0.95 else np.hypot(u, v)
    t = np.clip((rho - start) / (1.0 - start), 0.0, None)
    return np.where(mask, -drop_nm * t * t, np.nan)


def _box_fill(mask: np.ndarray) -> float:
    """Fraction of its bounding box that the part covers."""
    rows, cols = np.nonzero(mask)
    return rows.size / ((np.ptp(rows) + 1) * (np.ptp(cols) + 1))


def _distance_from_edge(shape, edge: str) -> np.ndarray:
    """Distance in pixels of each pixel from the named edge of the picture."""
    ny, nx = shape
    cc, rr = np.meshgrid(np.arange(nx, dtype=float), np.arange(ny, dtype=float))
    return {"left": cc, "right": (nx - 1) - cc, "top": rr, "bottom": (ny - 1) - rr}[edge]


def simulate_fringe_photo(
    height_nm,
    mask,
    *,
    wavelength_nm: float,
    pixel_mm: float,
    contact_edge: str = "left",
    fringes_across: float = 12.0,
    carrier_turn_deg: float = 0.0,
    visibility: float = 0.8,
    exposure: float = 0.45,
    lighting: float = 0.0,
    noise: float = 0.0,
    background: float = 0.15,
    bits: int = 8,
    rng=None,
) -> SimulatedPhoto:
    """Photograph of a part under a tilted optical flat.

    Parameters
    ----------
    height_nm : array_like, shape (ny, nx)
        Surface height in nm, positive towards the flat; values off the part are ignored.
    mask : array_like of bool, shape (ny, nx)
        True on the part.
    wavelength_nm : float
        Wavelength of the light in nm (e.g. 587.56 for the helium line).
    pixel_mm : float
        Size of one pixel on the part in mm (kept with the result).
    contact_edge : {"left", "right", "top", "bottom"}
        Edge of the picture along which the flat touches; the film thickens away from it.
    fringes_across : float
        Fringes of the wedge alone across the part, measured away from the contact edge.
    carrier_turn_deg : float
        Turn of the wedge from square to the contact edge, degrees (0: fringes parallel to it).
    visibility : float
        Fringe visibility V, 0..1.
    exposure : float
        Mean light as a fraction of full scale; ``exposure * (1 + visibility) > 1`` saturates
        the bright fringes.
    lighting : float
        Unevenness of the light: relative change of the light across the picture (0: even).
    noise : float
        Standard deviation of the camera noise as a fraction of full scale.
    background : float
        Light off the part, as a fraction of full scale.
    bits : {8, 16}
        Bits per pixel.
    rng : numpy.random.Generator or int, optional
        Random generator (or seed) of the noise.

    Returns
    -------
    SimulatedPhoto

    Raises
    ------
    InputValueError
        Shapes differ, no part in the mask, a parameter out of range.
    """
    mask = np.asarray(mask, dtype=bool)
    h = np.asarray(height_nm, dtype=float)
    if h.shape != mask.shape or h.ndim != 2:
        raise InputValueError(f"height_nm {h.shape} and mask {mask.shape} must be one 2-D shape")
    if not mask.any():
        raise InputValueError("the mask holds no pixel of the part", fix="mark the part with True")
    if contact_edge not in _EDGES:
        raise InputValueError(f"unknown contact edge {contact_edge!r}", fix="use left, right, top or bottom")
    if not (wavelength_nm > 0 and pixel_mm > 0 and 0 < visibility <= 1 and bits in (8, 16)):
        raise InputValueError("wavelength, pixel size and visibility must be positive, bits 8 or 16")
    h = np.where(mask, np.nan_to_num(h), 0.0)
    # the wedge: a plane rising away from the contact edge, turned by carrier_turn_deg
    ny, nx = mask.shape
    along = _distance_from_edge(mask.shape, contact_edge)
    across = _distance_from_edge(mask.shape, {"left": "bottom", "right": "top", "top": "left", "bottom": "right"}[contact_edge])
    t = math.radians(carrier_turn_deg)
    ramp = along * math.cos(t) + across * math.sin(t)
    span = float(np.ptp(ramp[mask])) or 1.0
    wedge_nm = ramp * (fringes_across * wavelength_nm / 2.0) / span
    gap = wedge_nm - h
    gap = gap - gap[mask].min()  # the flat touches the part: the thinnest film is zero
    # light: a smooth tilt plus a fall-off from the picture's centre (vignetting)
    cc, rr = np.meshgrid(np.linspace(-1, 1, nx), np.linspace(-1, 1, ny))
    light = exposure * (1.0 + lighting * (0.6 * cc - 0.4 * rr - 0.5 * (cc * cc + rr * rr)))
    fringe = light * (1.0 - visibility * np.cos(4.0 * np.pi * gap / wavelength_nm))
    picture = np.where(mask, fringe, background * (1.0 + 0.2 * lighting * cc))
    gen = np.random.default_rng(rng)
    if noise > 0:
        picture = picture + gen.normal(0.0, noise, picture.shape)
    full = (1 << bits) - 1
    codes = np.clip(np.rint(picture * full), 0, full).astype(np.uint8 if bits == 8 else np.uint16)
    return SimulatedPhoto(
        codes=codes,
        full_scale=full,
        height_nm=np.where(mask, h, np.nan),
        mask=mask,
        gap_nm=np.where(mask, gap, np.nan),
        wavelength_nm=float(wavelength_nm),
        pixel_mm=float(pixel_mm),
        contact_edge=contact_edge,
    )
