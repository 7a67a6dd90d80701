"""At the bench: guided entry of readings, instrument logs and serial input, the set-up sheet.

Imports :mod:`flatcheck.errors`, :mod:`flatcheck.units` and, inside functions,
:mod:`flatcheck.survey` and :mod:`flatcheck.conformance`; pyserial only when a port is opened.

Guided entry (a pure state machine over a planned survey)
    plan_entry, start_entry, entry_limits, check_reading, enter_reading, correct_reading,
    undo_reading, run_readings, describe_slot, plate_map, EntryPlan, EntryState, EntryLimits,
    PlannedRun, Slot, Finding, ReadingRefused, DEFAULT_READING_SD_URAD, DEFAULT_READING_SD_UM,
    FLAG_Z, MAX_CLOSURE_UNKNOWNS
Closure of a line against the lines already read
    line_closure, ClosureCheck
Instrument logs (CSV or text)
    parse_log, convert_readings, find_gaps, check_log_count, InstrumentLog, LogGap,
    LONG_GAP_FACTOR, SHORT_GAP_FACTOR
Live from the instrument (serial port)
    SerialReadings, compile_reading_pattern, extract_reading, InstrumentError,
    InstrumentLost, DEFAULT_READING_PATTERN
Set-up sheet and supports
    setup_sheet, SetupSheet, LineSetup, Pace, three_point_support, airy_points,
    bessel_points, least_bow_points, beam_supports, BeamSupports, AIRY_SPACING_RATIO,
    BESSEL_SPACING_RATIO, THREE_POINT_INSET, SOAK_HOURS_SURFACE, SOAK_HOURS_INSTRUMENT
Sag of a long beam between its supports
    check_sag, check_sag_of, SagCheck, beam_self_weight_deflection_um
"""

from ._closure import ClosureCheck, line_closure
from ._entry import (
    DEFAULT_READING_SD_UM,
    DEFAULT_READING_SD_URAD,
    FLAG_Z,
    MAX_CLOSURE_UNKNOWNS,
    EntryLimits,
    EntryPlan,
    EntryState,
    Finding,
    PlannedRun,
    ReadingRefused,
    Slot,
    check_reading,
    correct_reading,
    enter_reading,
    entry_limits,
    plan_entry,
    run_readings,
    start_entry,
    undo_reading,
)
from ._log import (
    LONG_GAP_FACTOR,
    SHORT_GAP_FACTOR,
    InstrumentLog,
    LogGap,
    check_log_count,
    convert_readings,
    find_gaps,
    parse_log,
)
from ._beam import beam_self_weight_deflection_um
from ._sag import SagCheck, check_sag, check_sag_of
from ._serial import (
    DEFAULT_READING_PATTERN,
    InstrumentError,
    InstrumentLost,
    SerialReadings,
    compile_reading_pattern,
    extract_reading,
)
from ._setup import (
    AIRY_SPACING_RATIO,
    BESSEL_SPACING_RATIO,
    SOAK_HOURS_INSTRUMENT,
    SOAK_HOURS_SURFACE,
    THREE_POINT_INSET,
    BeamSupports,
    LineSetup,
    Pace,
    SetupSheet,
    airy_points,
    beam_supports,
    bessel_points,
    least_bow_points,
    setup_sheet,
    three_point_support,
)
from ._where import describe_slot, plate_map

__all__ = [
    # guided entry
    "plan_entry", "start_entry", "entry_limits", "check_reading", "enter_reading", "correct_reading",
    "undo_reading", "run_readings", "describe_slot", "plate_map", "EntryPlan", "EntryState", "EntryLimits",
    "PlannedRun", "Slot", "Finding", "ReadingRefused", "DEFAULT_READING_SD_URAD", "DEFAULT_READING_SD_UM",
    "FLAG_Z", "MAX_CLOSURE_UNKNOWNS",
    # closure
    "line_closure", "ClosureCheck",
    # logs
    "parse_log", "convert_readings", "find_gaps", "check_log_count", "InstrumentLog", "LogGap",
    "LONG_GAP_FACTOR", "SHORT_GAP_FACTOR",
    # serial
    "SerialReadings", "compile_reading_pattern", "extract_reading", "InstrumentError", "InstrumentLost",
    "DEFAULT_READING_PATTERN",
    # set-up sheet
    "setup_sheet", "SetupSheet", "LineSetup", "Pace", "three_point_support", "airy_points", "bessel_points",
    "least_bow_points", "beam_supports", "BeamSupports", "AIRY_SPACING_RATIO", "BESSEL_SPACING_RATIO",
    "THREE_POINT_INSET", "SOAK_HOURS_SURFACE", "SOAK_HOURS_INSTRUMENT",
    # sag
    "check_sag", "check_sag_of", "SagCheck", "beam_self_weight_deflection_um",
]
