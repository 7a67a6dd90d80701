"""flatcheck: flatness of surface plates, guideways and air-bearing pads.

Contents of the public API (every function takes and returns positions in mm,
heights in µm, and states its units in its docstring):

Opening a surface file (the one way in)
    open_surface, MeasuredSurface
Surveys
    Survey, Station, SurveyLine, Run, Instrument, Surface, observations,
    plan_union_jack, plan_grid, plan_lines, reading_sequence, summarize_layout,
    simulate_survey, read_survey, write_survey, format_survey
Reduction
    reduce_survey, network_rank, Reduction, LineClosure, InstrumentZero, Outlier,
    LinearReduction, NetworkRank, OUTLIER_THRESHOLD, moody_reduce, MoodyResult
Height maps
    HeightMap, read_heightmap_csv, write_heightmap_csv
Flatness
    least_squares_plane, minimum_zone, PlaneFit, evaluate_flatness, FlatnessReport,
    FlatnessParameters, evaluate_straightness, StraightnessReport, local_flatness,
    LocalFlatness, monte_carlo_flatness, FlatnessUncertainty, evaluate_surface,
    SurfaceEvaluation, survey_uncertainty
Uncertainty budget
    uncertainty_budget, UncertaintyBudget, LabDefaults, read_uncertainty_defaults
Grades
    get_standard, tolerance, tolerances, plate_size, repeat_reading, Tolerance,
    Standard, RepeatReading, decide, assess_grades, Decision
Air bearings
    Pad, PlacedPad, Carriage, MotionBudget, evaluate_bearing, BearingResult,
    gap_field_um, GapField, DEFAULT_GAP_FRACTION, read_bearing_toml, parse_pad_size,
    PorousFeed, solve_film, film_equilibrium, film_along_travel, flat_guide_curve,
    FilmState, FilmCurve, FilmEquilibrium, FilmTravel, FILM_ASSUMPTIONS, OrificeFeed,
    orifice_mass_flow, critical_pressure_ratio, orifice_ring, ORIFICE_ASSUMPTIONS
Lapping
    least_removal, LeastRemoval, plan_lapping, LapPlan, LapModel, Pass, CellChart,
    preston_rate_um_per_min, deconvolve_dwell, removal_from_dwell, compare_surveys,
    Progress, DwellLog, match_nodes
Errors
    FlatcheckError and its subclasses, ExitStatus

The names load lazily from the domain subpackages (``flatcheck.form``, ``survey``,
``evaluation``, ``conformance``, ``bearing``, ``lapping``, ``io``), so that importing
flatcheck loads numpy and little else. Pictures and the PDF report live in
:mod:`flatcheck.output` (the only package that imports matplotlib).
"""

from ._lazy import attach as _attach

__version__ = "0.1.0"

__getattr__, __dir__, __all__ = _attach(
    __name__,
    {
        'io': (
            'read_survey',
            'write_survey',
            'format_survey',
            'read_heightmap_csv',
            'write_heightmap_csv',
            'read_bearing_toml',
            'open_surface',
            'read_uncertainty_defaults',
        ),
        'survey': (
            'Survey',
            'Station',
            'SurveyLine',
            'Run',
            'Instrument',
            'Surface',
            'observations',
            'plan_union_jack',
            'plan_grid',
            'plan_lines',
            'reading_sequence',
            'summarize_layout',
            'simulate_survey',
            'reduce_survey',
            'network_rank',
            'Reduction',
            'LineClosure',
            'InstrumentZero',
            'Outlier',
            'LinearReduction',
            'NetworkRank',
            'OUTLIER_THRESHOLD',
            'moody_reduce',
            'MoodyResult',
        ),
        'form': (
            'HeightMap',
            'least_squares_plane',
            'minimum_zone',
            'PlaneFit',
            'evaluate_flatness',
            'FlatnessReport',
            'FlatnessParameters',
            'evaluate_straightness',
            'StraightnessReport',
            'local_flatness',
            'LocalFlatness',
            'monte_carlo_flatness',
            'FlatnessUncertainty',
        ),
        'evaluation': (
            'evaluate_surface',
            'SurfaceEvaluation',
            'survey_uncertainty',
            'MeasuredSurface',
            'uncertainty_budget',
            'UncertaintyBudget',
            'LabDefaults',
        ),
        'conformance': (
            'get_standard',
            'tolerance',
            'tolerances',
            'plate_size',
            'repeat_reading',
            'Tolerance',
            'Standard',
            'RepeatReading',
            'decide',
            'assess_grades',
            'Decision',
        ),
        'bearing': (
            'Pad',
            'PlacedPad',
            'Carriage',
            'MotionBudget',
            'evaluate_bearing',
            'BearingResult',
            'gap_field_um',
            'GapField',
            'DEFAULT_GAP_FRACTION',
            'parse_pad_size',
            'PorousFeed',
            'solve_film',
            'film_equilibrium',
            'film_along_travel',
            'flat_guide_curve',
            'FilmState',
            'FilmCurve',
            'FilmEquilibrium',
            'FilmTravel',
            'FILM_ASSUMPTIONS',
            'OrificeFeed',
            'orifice_mass_flow',
            'critical_pressure_ratio',
            'orifice_ring',
            'ORIFICE_ASSUMPTIONS',
        ),
        'lapping': (
            'least_removal',
            'LeastRemoval',
            'plan_lapping',
            'LapPlan',
            'LapModel',
            'Pass',
            'CellChart',
            'preston_rate_um_per_min',
            'deconvolve_dwell',
            'removal_from_dwell',
            'compare_surveys',
            'Progress',
            'DwellLog',
            'match_nodes',
        ),
        'records': ('Register', 'register_path', 'surface_history', 'due_list', 'certificate_data', 'CertificateData'),
        'errors': (
            'FlatcheckError',
            'InputFormatError',
            'InputValueError',
            'UnitError',
            'LayoutError',
            'UnobservableError',
            'GeometryError',
            'OutputError',
            'ExitStatus',
        ),
    },
)
