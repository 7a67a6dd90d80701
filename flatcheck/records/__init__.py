"""Records: a register of surfaces, instruments and surveys, their history, due dates and certificates.

The register is one SQLite file (Python's standard :mod:`sqlite3`), created on first use.
Its place: the ``--db`` option, else the ``FLATCHECK_DB`` environment variable, else
``flatcheck-register.sqlite`` in the current folder (:func:`register_path`). See
``docs/records.md`` for the schema, the commands and the limits-table format.

The register
    Register, register_path, RegisterError, DuplicateSurveyError, SurfaceInfo,
    InstrumentInfo, Calibration, SurveyRow, SurveyDetail, Verdict, AddResult,
    APPLICATION_ID, SCHEMA_VERSION, DEFAULT_DB_NAME, DB_ENV
What is stored of a survey
    SurveyEntry, survey_entry, BudgetRow, budget_rows, STATES
History and wear
    surface_history, SurfaceHistory, HistoryPoint, fit_wear_rate, WearRate,
    forecast_limit, Forecast, wear_map, survey_wear, WearMap, years_between
Recalibration
    due_list, DueList, DueItem, FlaggedSurvey, add_interval, due_status, DEFAULT_WITHIN_DAYS
Limits table (lab-editable TOML)
    read_limits, parse_limits, LimitsFile, LimitTable, GradeLimit, text_sha256
Certificates
    certificate_data, CertificateData, InstrumentEntry, StationHeight, Reading,
    StateResult, check_prefix, certified_result, evaluation_note, survey_height_step_um
Stating results
    round_to_uncertainty
"""

from ._certificate import (
    CertificateData,
    InstrumentEntry,
    Reading,
    StateResult,
    StationHeight,
    certificate_data,
    certified_result,
    check_prefix,
    evaluation_note,
    survey_height_step_um,
)
from ._due import DEFAULT_WITHIN_DAYS, DueItem, DueList, FlaggedSurvey, add_interval, due_list, due_status
from ._entry import STATES, BudgetRow, SurveyEntry, budget_rows, survey_entry
from ._history import (
    Forecast,
    HistoryPoint,
    SurfaceHistory,
    WearMap,
    WearRate,
    fit_wear_rate,
    forecast_limit,
    surface_history,
    survey_wear,
    wear_map,
    years_between,
)
from ._limits import GradeLimit, LimitsFile, LimitTable, parse_limits, read_limits, text_sha256
from ._register import DuplicateSurveyError, Register
from ._rows import AddResult, Calibration, InstrumentInfo, SurfaceInfo, SurveyDetail, SurveyRow, Verdict
from ._schema import APPLICATION_ID, DB_ENV, DEFAULT_DB_NAME, SCHEMA_VERSION, RegisterError, register_path
from ._rounding import round_to_uncertainty

__all__ = [
    # the register
    "Register", "register_path", "RegisterError", "DuplicateSurveyError", "SurfaceInfo", "InstrumentInfo",
    "Calibration", "SurveyRow", "SurveyDetail", "Verdict", "AddResult", "APPLICATION_ID", "SCHEMA_VERSION",
    "DEFAULT_DB_NAME", "DB_ENV",
    # what is stored of a survey
    "SurveyEntry", "survey_entry", "BudgetRow", "budget_rows", "STATES",
    # history and wear
    "surface_history", "SurfaceHistory", "HistoryPoint", "fit_wear_rate", "WearRate", "forecast_limit", "Forecast",
    "wear_map", "survey_wear", "WearMap", "years_between",
    # recalibration
    "due_list", "DueList", "DueItem", "FlaggedSurvey", "add_interval", "due_status", "DEFAULT_WITHIN_DAYS",
    # limits
    "read_limits", "parse_limits", "LimitsFile", "LimitTable", "GradeLimit", "text_sha256",
    # certificates
    "certificate_data", "CertificateData", "InstrumentEntry", "StationHeight", "Reading", "StateResult",
    "check_prefix", "certified_result", "evaluation_note", "survey_height_step_um",
    # stating results
    "round_to_uncertainty",
]
