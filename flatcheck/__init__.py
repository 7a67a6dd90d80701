"""flatcheck: flatness of surface plates, guideways and air-bearing pads.

Contents of the public API (every function takes and returns positions in mm,
heights in µm, and states its units in its docstring):

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

Pictures and the PDF report live in :mod:`flatcheck.plot` and :mod:`flatcheck.report`
(imported on their own so that the package does not load matplotlib).
"""

from .bearing import (
    DEFAULT_GAP_FRACTION,
    BearingResult,
    Carriage,
    GapField,
    MotionBudget,
    Pad,
    PlacedPad,
    evaluate_bearing,
    gap_field_um,
)
from .conformity import Decision, assess_grades, decide
from .errors import (
    ExitStatus,
    FlatcheckError,
    GeometryError,
    InputFormatError,
    InputValueError,
    LayoutError,
    OutputError,
    UnitError,
    UnobservableError,
)
from .evaluation import SurfaceEvaluation, evaluate_surface, survey_uncertainty
from .film import (
    FILM_ASSUMPTIONS,
    FilmCurve,
    FilmEquilibrium,
    FilmState,
    FilmTravel,
    ORIFICE_ASSUMPTIONS,
    OrificeFeed,
    PorousFeed,
    critical_pressure_ratio,
    orifice_mass_flow,
    orifice_ring,
    film_along_travel,
    film_equilibrium,
    flat_guide_curve,
    solve_film,
)
from .flatness import (
    FlatnessParameters,
    FlatnessReport,
    PlaneFit,
    evaluate_flatness,
    least_squares_plane,
    minimum_zone,
)
from .heightmap import HeightMap
from .io.bearing_toml import parse_pad_size, read_bearing_toml
from .io.heightmap_csv import read_heightmap_csv, write_heightmap_csv
from .io.survey_toml import format_survey, read_survey, write_survey
from .lapping import (
    CellChart,
    LapModel,
    LapPlan,
    LeastRemoval,
    Pass,
    deconvolve_dwell,
    least_removal,
    plan_lapping,
    preston_rate_um_per_min,
    removal_from_dwell,
)
from .layout import plan_grid, plan_lines, plan_union_jack, reading_sequence, summarize_layout
from .local_flatness import LocalFlatness, local_flatness
from .moody import MoodyResult, moody_reduce
from .progress import DwellLog, Progress, compare_surveys, match_nodes
from .reduction import (
    OUTLIER_THRESHOLD,
    InstrumentZero,
    LinearReduction,
    LineClosure,
    NetworkRank,
    Outlier,
    Reduction,
    network_rank,
    reduce_survey,
)
from .simulate import simulate_survey
from .straightness import StraightnessReport, evaluate_straightness
from .survey import Instrument, Run, Station, Surface, Survey, SurveyLine, observations
from .tolerance import RepeatReading, Standard, Tolerance, get_standard, plate_size, repeat_reading, tolerance, tolerances
from .uncertainty import FlatnessUncertainty, monte_carlo_flatness

__version__ = "0.1.0"

__all__ = [
    # surveys
    "Survey", "Station", "SurveyLine", "Run", "Instrument", "Surface", "observations",
    "plan_union_jack", "plan_grid", "plan_lines", "reading_sequence", "summarize_layout",
    "simulate_survey", "read_survey", "write_survey", "format_survey",
    # reduction
    "reduce_survey", "network_rank", "Reduction", "LineClosure", "InstrumentZero", "Outlier",
    "LinearReduction", "NetworkRank", "OUTLIER_THRESHOLD", "moody_reduce", "MoodyResult",
    # height maps
    "HeightMap", "read_heightmap_csv", "write_heightmap_csv",
    # flatness
    "least_squares_plane", "minimum_zone", "PlaneFit", "evaluate_flatness", "FlatnessReport",
    "FlatnessParameters", "evaluate_straightness", "StraightnessReport", "local_flatness",
    "LocalFlatness", "monte_carlo_flatness", "FlatnessUncertainty", "evaluate_surface",
    "SurfaceEvaluation", "survey_uncertainty",
    # grades
    "get_standard", "tolerance", "tolerances", "plate_size", "repeat_reading", "Tolerance",
    "Standard", "RepeatReading", "decide", "assess_grades", "Decision",
    # air bearings
    "Pad", "PlacedPad", "Carriage", "MotionBudget", "evaluate_bearing", "BearingResult",
    "gap_field_um", "GapField", "DEFAULT_GAP_FRACTION", "read_bearing_toml", "parse_pad_size",
    "PorousFeed", "solve_film", "film_equilibrium", "film_along_travel", "flat_guide_curve",
    "FilmState", "FilmCurve", "FilmEquilibrium", "FilmTravel", "FILM_ASSUMPTIONS",
    "OrificeFeed", "orifice_mass_flow", "critical_pressure_ratio", "orifice_ring", "ORIFICE_ASSUMPTIONS",
    # lapping
    "least_removal", "LeastRemoval", "plan_lapping", "LapPlan", "LapModel", "Pass", "CellChart",
    "preston_rate_um_per_min", "deconvolve_dwell", "removal_from_dwell", "compare_surveys",
    "Progress", "DwellLog", "match_nodes",
    # errors
    "FlatcheckError", "InputFormatError", "InputValueError", "UnitError", "LayoutError",
    "UnobservableError", "GeometryError", "OutputError", "ExitStatus",
]
