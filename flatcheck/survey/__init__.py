"""Surveys: the model, planning, simulation and reduction to a height map.

Imports :mod:`flatcheck.form`, :mod:`flatcheck.errors` and :mod:`flatcheck.units`.
The observation network both reductions share is private: its model and results
(``_network``), datum and rank analysis (``_rank``) and diagnostics (``_diagnostics``);
:func:`reduce_survey` is the one entry.

Survey model
    Survey, Station, SurveyLine, Run, Instrument, Surface, observations, Observations,
    INSTRUMENT_KINDS, PATTERNS, check_plausible_readings
Planning
    plan_union_jack, plan_grid, plan_lines, reading_sequence, summarize_layout,
    LayoutSummary, ReadingStep, UNION_JACK_LINES, DEFAULT_MARGIN_MM, grid_column_name
Simulation
    simulate_survey, surface_grid
Reduction
    reduce_survey, network_rank, Reduction, LinearReduction, LineClosure, InstrumentZero,
    Outlier, NetworkRank, OUTLIER_THRESHOLD, METHODS, moody_reduce, MoodyResult
"""

from .._lazy import attach as _attach

__getattr__, __dir__, __all__ = _attach(
    __name__,
    {
        '_diagnostics': (
            'OUTLIER_THRESHOLD',
            'WEAK_REDUNDANCY',
        ),
        '_model': (
            'INSTRUMENT_KINDS',
            'PATTERNS',
            'MAX_SLOPE_RAD',
            'MAX_HEIGHT_UM',
            'Station',
            'Run',
            'SurveyLine',
            'Instrument',
            'Surface',
            'Survey',
            'Observations',
            'check_plausible_readings',
            'observations',
        ),
        '_moody': (
            'MoodyResult',
            'moody_reduce',
        ),
        '_network': (
            'METHODS',
            'LineClosure',
            'InstrumentZero',
            'Outlier',
            'LinearReduction',
            'NetworkRank',
            'Reduction',
        ),
        '_planning': (
            'DEFAULT_MARGIN_MM',
            'UNION_JACK_LINES',
            'ReadingStep',
            'LayoutSummary',
            'MAX_READINGS_PER_PASS',
            'grid_column_name',
            'plan_union_jack',
            'plan_grid',
            'plan_lines',
            'reading_sequence',
            'summarize_layout',
        ),
        '_rank': (
            'network_rank',
        ),
        '_reduce': (
            'reduce_survey',
        ),
        '_simulate': (
            'RUN_KINDS',
            'DEFAULT_RANDOM_ZERO_RAD',
            'simulate_survey',
            'surface_grid',
        ),
    },
)
