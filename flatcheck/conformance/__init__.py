"""Conformance: standard grades, ISO 14253-1 decision rules and grading.

Imports :mod:`flatcheck.form`, :mod:`flatcheck.errors` and :mod:`flatcheck.units`.

Tolerances
    get_standard, tolerance, tolerances, Standard, Tolerance, STANDARDS, plate_size,
    PlateSize, repeat_reading, RepeatReading, reference_length_mm, ...
Decision rules
    decide, assess_grades, Decision, GradeVerdict, CONFORMS, DOES_NOT_CONFORM,
    UNDECIDED, ISO14253, SIMPLE, RULES
"""

from .._lazy import attach as _attach

__getattr__, __dir__, __all__ = _attach(
    __name__,
    {
        '_decision': (
            'CONFORMS',
            'DOES_NOT_CONFORM',
            'UNDECIDED',
            'ISO14253',
            'SIMPLE',
            'RULES',
            'Decision',
            'GradeVerdict',
            'normalise_rule',
            'decide',
            'assess_grades',
        ),
        '_grading': (
            'grade_surface',
        ),
        '_tolerance': (
            'LENGTH_BASES',
            'BASES',
            'ASME_FORMS',
            'VERIFIED',
            'SECONDARY',
            'FROM_MEMORY',
            'INFERRED',
            'Standard',
            'Tolerance',
            'ISO8512_2_TABLE_UM',
            'ASME_TABLE_AA_UIN',
            'STANDARDS',
            'get_standard',
            'reference_length_mm',
            'din876_tolerance_um',
            'iso8512_2_tolerance_um',
            'asme_aa_tolerance_uin',
            'asme_tolerance_um',
            'size_check',
            'tolerance',
            'tolerances',
            'PlateSize',
            'plate_size',
            'RepeatReading',
            'repeat_reading',
        ),
    },
)
