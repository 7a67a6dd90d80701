"""Everything stated about one surface: flatness, lines, local flatness and uncertainty.

Used alike by ``reduce``, ``grade``, the report and the demo. Imports
:mod:`flatcheck.form` and :mod:`flatcheck.survey`.

    MeasuredSurface, evaluate_surface, SurfaceEvaluation, survey_uncertainty,
    SurveyUncertainty, Window, parse_window, DEFAULT_WINDOW, default_trials
Uncertainty budget
    uncertainty_budget, UncertaintyBudget, BudgetEntry, RepeatReadings, LabDefaults,
    BUILTIN_DEFAULTS, PLAUSIBLE, SOURCE_NAMES, check_plausible_uncertainty
"""

from .._lazy import attach as _attach

__getattr__, __dir__, __all__ = _attach(
    __name__,
    {
        '_measured': (
            'MeasuredSurface',
        ),
        '_trials': (
            'DEFAULT_TRIALS',
            'default_trials',
        ),
        '_budget': (
            'BudgetEntry',
            'RepeatReadings',
            'UncertaintyBudget',
            'uncertainty_budget',
            'repeat_readings_summary',
            'SOURCE_NAMES',
            'CONTRIBUTION_TRIALS',
        ),
        '_budget_sources': (
            'LabDefaults',
            'BUILTIN_DEFAULTS',
            'PLAUSIBLE',
            'check_plausible_uncertainty',
            'default_thickness_mm',
        ),
        '_evaluate': (
            'Window',
            'parse_window',
            'DEFAULT_WINDOW',
            'SurveyUncertainty',
            'survey_uncertainty',
            'SurfaceEvaluation',
            'evaluate_surface',
        ),
    },
)
