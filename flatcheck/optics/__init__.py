"""Optical flats and fringes: pad faces and small lapped parts under an optical flat.

Heights in nm (one fringe is half the wavelength), positions in mm; maps convert to
:class:`flatcheck.HeightMap` (µm) for every evaluation flatcheck has.

Written fringe readings (bend of a fringe, rings) -> surface estimate, flatness, uncertainty
    reduce_fringe_readings, FringeReadings, FringeReading, FringeEstimate, LIGHT_SOURCES,
    EYE_LIMIT_FRINGES, wavelength_of
Fringe photographs (Fourier-transform carrier method) -> height map
    analyze_fringe_photo, FringeMap, CONTACT_EDGES, MIN_FRINGES, MIN_PERIOD_PX
Evaluating a map (minimum zone, least squares, local flatness, pad face against the film gap)
    evaluate_optical_map, OpticalMapEvaluation, PadFaceCheck
Simulated photographs from a known surface (tests, samples)
    simulate_fringe_photo, SimulatedPhoto, crown_nm, saddle_nm, turned_edge_nm

Methods and their published sources are in the private modules' notes and in
docs/optics-and-spheres.md.
"""

from ._evaluate import OpticalMapEvaluation, PadFaceCheck, evaluate_optical_map
from ._fringe_photo import CONTACT_EDGES, MIN_FRINGES, MIN_PERIOD_PX, FringeMap, analyze_fringe_photo
from ._fringe_readings import (
    EYE_LIMIT_FRINGES,
    LIGHT_SOURCES,
    FringeEstimate,
    FringeReading,
    FringeReadings,
    reduce_fringe_readings,
    wavelength_of,
)
from ._fringe_simulate import SimulatedPhoto, crown_nm, saddle_nm, simulate_fringe_photo, turned_edge_nm

__all__ = [
    "reduce_fringe_readings",
    "FringeReadings",
    "FringeReading",
    "FringeEstimate",
    "LIGHT_SOURCES",
    "EYE_LIMIT_FRINGES",
    "wavelength_of",
    "analyze_fringe_photo",
    "FringeMap",
    "CONTACT_EDGES",
    "MIN_FRINGES",
    "MIN_PERIOD_PX",
    "evaluate_optical_map",
    "OpticalMapEvaluation",
    "PadFaceCheck",
    "simulate_fringe_photo",
    "SimulatedPhoto",
    "crown_nm",
    "saddle_nm",
    "turned_edge_nm",
]
