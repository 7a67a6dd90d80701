"""Air bearings over a surface: pads and carriages, and the air film under them.

Imports :mod:`flatcheck.form`, :mod:`flatcheck.conformance` (the ISO 14253-1 rule of its verdicts),
:mod:`flatcheck.errors` and :mod:`flatcheck.units`.

Pads and carriages (footprint model)
    Pad, PlacedPad, Carriage, MotionBudget, evaluate_bearing, BearingResult,
    gap_field_um, GapField, DEFAULT_GAP_FRACTION, footprint, pad_face_form
Air film (Reynolds equation)
    PorousFeed, OrificeFeed, solve_film, film_equilibrium, film_along_travel,
    flat_guide_curve, bearing_film, FilmState, FilmCurve, FilmEquilibrium, FilmTravel,
    orifice_mass_flow, critical_pressure_ratio, orifice_ring, FILM_ASSUMPTIONS,
    ORIFICE_ASSUMPTIONS
A pad's film as a force law (for carriages that share their load)
    PadFilmModel, FilmResponse
Uncertainty of the verdicts (the survey's budget carried to the figures under the pads)
    SurveyErrors, BearingUncertainty, BEARING_TRIALS, bearing_trials, local_uncertainty
"""

from .._lazy import attach as _attach

__getattr__, __dir__, __all__ = _attach(
    __name__,
    {
        '_feeds': (
            'AIR_VISCOSITY_20C_PA_S',
            'AIR_GAS_CONSTANT_J_PER_KG_K',
            'ROOM_TEMPERATURE_K',
            'STANDARD_AMBIENT_KPA',
            'FILM_ASSUMPTIONS',
            'KG_S_TO_MG_S',
            'PorousFeed',
            'AIR_HEAT_CAPACITY_RATIO',
            'CARRIAGE_FILM_ASSUMPTION',
            'ORIFICE_ASSUMPTIONS',
            'critical_pressure_ratio',
            'orifice_mass_flow',
            'OrificeFeed',
            'orifice_ring',
        ),
        '_mesh': (
            'MIN_MESH_CELLS',
            'MAX_MESH_CELLS',
            'MESH_LIMIT_REASON',
            'PadMesh',
            'circular_pad_mesh',
            'rectangular_pad_mesh',
            'graded_edges',
            'PadDeviation',
            'pad_deviation',
            'surface_under_pad',
        ),
        '_solver': (
            'FilmState',
            'FilmCurve',
            'FilmEquilibrium',
            'FilmTravel',
        ),
        '_equilibrium': (
            'CAPACITY_FRACTION',
            'solve_film',
            'default_curve_gaps_um',
            'flat_guide_curve',
            'CURVE_TABLE_GAP_RATIOS',
            'curve_table_rows',
            'film_equilibrium',
            'film_along_travel',
        ),
        '_bearing_film': (
            'pad_film_mesh',
            'RESOLVED_FILM_UM',
            'DISC_CELL_FRACTION',
            'RESOLVED_GAP_FRACTION',
            'disc_cells_for',
            'DEFAULT_STIFFNESS_CHANGE_LIMIT',
            'PadFilmTravel',
            'BearingFilm',
            'bearing_film',
            'orifice_notes',
            'check_carriage_load',
            'with_film_checks',
        ),
        '_build': (
            'parse_pad_size',
            'carriage_from_options',
            'film_feed',
        ),
        '_response': (
            'FilmResponse',
            'PadFilmModel',
        ),
        '_uncertainty': (
            'SurveyErrors',
            'BearingUncertainty',
            'BEARING_TRIALS',
            'bearing_trials',
            'local_uncertainty',
        ),
        '_carriage': (
            'MAX_STEP_FRACTION',
            'MAX_POSITIONS',
            'Pad',
            'PlacedPad',
            'Carriage',
            'MotionBudget',
            'station_positions',
        ),
        '_footprint': (
            'SAMPLES_PER_PAD_SIDE',
            'MAX_FOOTPRINT_POINTS',
            'Footprint',
            'footprint',
            'PadStation',
            'evaluate_pad_at',
            'GapField',
            'gap_field_um',
            'PadFaceForm',
            'pad_face_form',
        ),
        '_pads': (
            'DEFAULT_GAP_FRACTION',
            'DEFAULT_MARGINAL_FROM',
            'straightness_mz_um',
            'CarriageStation',
            'CarriageMotion',
            'Check',
            'BearingResult',
            'evaluate_bearing',
            'COARSE_SURVEY_FRACTION',
            'PAD_FACE_SIZE_TOLERANCE',
            'survey_spacing_mm',
        ),
    },
)
