"""Lapping: least removal, the lap model, dwell and pass plans, and session-to-session progress.

Imports :mod:`flatcheck.form`, :mod:`flatcheck.errors` and :mod:`flatcheck.units`.

Plans
    least_removal, LeastRemoval, plan_lapping, LapPlan, LapModel, Pass, CellChart,
    preston_rate_um_per_min, deconvolve_dwell, removal_from_dwell, default_cell_mm
Sessions
    compare_surveys, Progress, DwellLog, match_nodes
Targets that must be proven (ISO 14253-1 guard band)
    LapTarget, guard_banded, parse_guard_band, target_kind, needs_budget_u
"""

from .._lazy import attach as _attach

__getattr__, __dir__, __all__ = _attach(
    __name__,
    {
        '_removal': (
            'node_area_weights',
            'HighSpot',
            'LeastRemoval',
            'least_removal',
        ),
        '_dwell': (
            'preston_rate_um_per_min',
            'LapModel',
            'lap_kernel',
            'removal_from_dwell',
            'grid_interpolation_matrix',
            'deconvolve_dwell',
            'MAX_OVERHANG_FRACTION',
            'lap_centre_allowed',
        ),
        '_chart': (
            'cell_column_name',
            'CellChart',
            'MAX_CHART_CELLS',
            'default_cell_mm',
            'chart_edges',
        ),
        '_passes': (
            'Pass',
            'HAND_MIN_PASS_MIN',
        ),
        '_plan': (
            'Shortfall',
            'LapPlan',
            'STATION_WEIGHT',
            'DEFAULT_ALLOWANCE',
            'DEFAULT_MIN_PASS_FRACTION',
            'plan_lapping',
        ),
        '_targets': (
            'ASSUMED_RATE_UM_PER_MIN',
            'resolve_target',
            'parse_lap_size',
            'check_option',
            'check_lap_fits',
            'check_lap_options',
            'check_lap_on_surface',
            'build_lap',
        ),
        '_guard_band': (
            'GUARD_BAND_MODES',
            'LapTarget',
            'target_kind',
            'parse_guard_band',
            'needs_budget_u',
            'guard_banded',
        ),
        '_sessions': (
            'DEFAULT_MATCH_TOL_MM',
            'match_nodes',
            'DwellLog',
            'Progress',
            'compare_surveys',
        ),
    },
)
