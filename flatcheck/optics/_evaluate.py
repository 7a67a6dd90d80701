"""Everything flatcheck states about a map from an optical flat, in nm and in fringes.

The map (from a photograph or from written readings) becomes a :class:`flatcheck.HeightMap`
and is evaluated with flatcheck's own tools: minimum zone and least squares
(:func:`flatcheck.evaluate_flatness`, ISO 12781-1 parameters), local flatness
(:func:`flatcheck.local_flatness`) and the pad face's form against the film gap it must ride
on (the limit :data:`flatcheck.DEFAULT_GAP_FRACTION` of the gap, as the bearing command uses).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from ..errors import InputValueError

__all__ = ["OpticalMapEvaluation", "PadFaceCheck", "evaluate_optical_map"]

_SQRT3 = math.sqrt(3.0)  # rectangular distribution: u = half-width / sqrt(3) (JCGM 100:2008, 4.3.7)


@dataclass(frozen=True)
class PadFaceCheck:
    """A pad face's minimum-zone flatness against a share of the film gap.

    Attributes
    ----------
    gap_um : float
        Nominal film gap, µm.
    fraction : float
        Share of the gap allowed for the form.
    limit_um : float
        ``fraction * gap_um``, µm.
    flatness_um : float
        Minimum-zone flatness of the face, µm.
    ratio : float
        ``flatness_um / limit_um``.
    verdict : str
        ``"fit"`` (ratio <= 1) or ``"unfit"``.
    """

    gap_um: float
    fraction: float
    limit_um: float
    flatness_um: float
    ratio: float
    verdict: str


@dataclass(frozen=True)
class OpticalMapEvaluation:
    """Flatness of a map from an optical flat.

    Attributes
    ----------
    heightmap : flatcheck.HeightMap
        The evaluated points (mm, µm).
    wavelength_nm : float
    minimum_zone_nm, least_squares_nm : float
        FLTt about the minimum-zone and the least-squares plane, nm (along z).
    peak_nm, valley_nm, rms_nm : float
        FLTp, FLTv (positive) and FLTq about the least-squares plane, nm.
    standard_uncertainty_nm, expanded_uncertainty_nm : float or None
        From the optical flat's stated flatness only (k = 2), nm; None when it is not stated.
    local : flatcheck.LocalFlatness or None
        Local flatness over the stated window.
    pad_face : PadFaceCheck or None
        Against the stated film gap.
    """

    heightmap: object
    wavelength_nm: float
    minimum_zone_nm: float
    least_squares_nm: float
    peak_nm: float
    valley_nm: float
    rms_nm: float
    standard_uncertainty_nm: float | None
    expanded_uncertainty_nm: float | None
    local: object
    pad_face: PadFaceCheck | None

    @property
    def fringe_nm(self) -> float:
        """One fringe, half the wavelength, nm."""
        return self.wavelength_nm / 2.0


def evaluate_optical_map(
    heightmap,
    *,
    wavelength_nm: float,
    flat_flatness_nm: float | None = None,
    window: tuple | None = None,
    gap_um: float | None = None,
) -> OpticalMapEvaluation:
    """Minimum zone, least squares, local flatness and pad-face fitness of a map.

    Parameters
    ----------
    heightmap : flatcheck.HeightMap
        The map (positions mm, heights µm).
    wavelength_nm : float
        Wavelength of the light, nm (for statements in fringes).
    flat_flatness_nm : float, optional
        Peak-to-valley flatness of the optical flat from its certificate, nm. Its form is in the
        map; taken as a rectangular distribution of half-width its flatness, it gives the standard
        uncertainty ``flat / sqrt(3)`` of the flatness (JCGM 100:2008, 4.3.7).
    window : (str, size) , optional
        Local-flatness window: ``("rect", (length_mm, width_mm))`` or ``("circle", diameter_mm)``.
    gap_um : float, optional
        Nominal film gap of the pad face, µm: the face's flatness is compared with
        :data:`flatcheck.DEFAULT_GAP_FRACTION` of it.

    Returns
    -------
    OpticalMapEvaluation

    Raises
    ------
    InputValueError
        A negative flat flatness or gap; a window larger than the part (from local flatness).
    """
    from flatcheck import DEFAULT_GAP_FRACTION, evaluate_flatness, local_flatness

    hm = heightmap
    rep = evaluate_flatness(hm.x_mm, hm.y_mm, hm.height_um)
    ls, mz = rep.lspl, rep.mzpl
    u = U = None
    if flat_flatness_nm is not None:
        if not (math.isfinite(flat_flatness_nm) and flat_flatness_nm >= 0):
            raise InputValueError(f"flat flatness {flat_flatness_nm} nm is not a number >= 0", fix="give the flat's certificate value in nm")
        u = flat_flatness_nm / _SQRT3
        U = 2.0 * u
    local = None
    if window is not None:
        shape, size = window
        local = local_flatness(hm, size_mm=size, shape=shape)
    pad = None
    if gap_um is not None:
        if not (math.isfinite(gap_um) and gap_um > 0):
            raise InputValueError(f"film gap {gap_um} µm is not a positive number", fix="give the nominal gap in µm")
        limit = DEFAULT_GAP_FRACTION * gap_um
        ratio = mz.fltt_um / limit
        pad = PadFaceCheck(float(gap_um), float(DEFAULT_GAP_FRACTION), float(limit), float(mz.fltt_um), float(ratio),
                           "fit" if ratio <= 1.0 else "unfit")
    return OpticalMapEvaluation(
        heightmap=hm,
        wavelength_nm=float(wavelength_nm),
        minimum_zone_nm=1000.0 * mz.fltt_um,
        least_squares_nm=1000.0 * ls.fltt_um,
        peak_nm=1000.0 * ls.fltp_um,
        valley_nm=1000.0 * ls.fltv_um,
        rms_nm=1000.0 * ls.fltq_um,
        standard_uncertainty_nm=u,
        expanded_uncertainty_nm=U,
        local=local,
        pad_face=pad,
    )
