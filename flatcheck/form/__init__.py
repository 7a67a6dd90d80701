"""Form of a surface: height maps and the figures stated about them.

The lowest floor of the job: it knows nothing of surveys, bearings or files and
imports only :mod:`flatcheck.errors` and :mod:`flatcheck.units`.

Height maps
    HeightMap, regular_grid
Reference planes and flatness (ISO 12781)
    least_squares_plane, minimum_zone, PlaneFit, evaluate_flatness, FlatnessReport,
    FlatnessParameters, flatness_parameters, three_corner_plane, diagonal_plane,
    corner_stations
Exact minimum zone
    solve_minimum_zone, minimum_zone_batch, MinZoneSolution, check_points
Straightness (ISO 12780)
    evaluate_straightness, StraightnessReport, StraightnessParameters, minimum_zone_line
Local flatness
    local_flatness, LocalFlatness, smallest_window_mm
Monte Carlo (JCGM 101)
    monte_carlo_flatness, FlatnessUncertainty, coverage_intervals, K_EXPANDED,
    propagate_heights, HeightEffect, HeightPropagation, summarise_flatness
"""

from .._lazy import attach as _attach

__getattr__, __dir__, __all__ = _attach(
    __name__,
    {
        '_heightmap': (
            'regular_grid',
            'HeightMap',
        ),
        '_local': (
            'LocalFlatness',
            'local_flatness',
            'smallest_window_mm',
        ),
        '_minzone': (
            'MinZoneSolution',
            'check_points',
            'solve_minimum_zone',
            'minimum_zone_batch',
        ),
        '_montecarlo': (
            'K_EXPANDED',
            'FlatnessUncertainty',
            'coverage_intervals',
            'monte_carlo_flatness',
            'HeightEffect',
            'HeightPropagation',
            'propagate_heights',
            'summarise_flatness',
        ),
        '_planes': (
            'PlaneFit',
            'FlatnessParameters',
            'FlatnessReport',
            'least_squares_plane',
            'minimum_zone',
            'corner_stations',
            'three_corner_plane',
            'diagonal_plane',
            'flatness_parameters',
            'evaluate_flatness',
        ),
        '_straightness': (
            'StraightnessParameters',
            'StraightnessReport',
            'minimum_zone_line',
            'evaluate_straightness',
        ),
    },
)
