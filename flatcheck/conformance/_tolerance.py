"""Flatness tolerances of standard surface-plate grades.

Each supported standard is described by a frozen :class:`Standard` record that
states its formula, the length the formula uses, its rounding rule (none of the
rounding rules could be verified, so values are returned unrounded), the plate
sizes it covers and how well each coefficient is sourced. :func:`tolerance`
computes the tolerance of one grade for a plate of given size and returns a
:class:`Tolerance` that carries its own provenance, so that a report can say
which values are verified and which are from memory.

Supported standards (command-line names in brackets)
----------------------------------------------------
DIN 876-1:1984 (``din-876``)
    ``t = c (1 + L/1000)`` µm, ``L`` in mm. ``c = 4, 10, 20, 40`` for grades 0, 1, 2, 3
    as reproduced for DIN 876 (cast-iron edition) in the form ``4 + L/250`` ...; ``c = 2``
    for grade 00 is from memory. ``L`` is the length of the longer side according to the
    reproductions; the diagonal can be chosen instead (``length_basis="diagonal"``).
ISO 8512-2:1990 (``iso-8512-2``; IS 7327:2003 is identical)
    Granite plates 160 x 100 to 2500 x 1600 mm, grades 0..3, length basis: the diagonal
    ``d``. The standard's own text was not available. Formula (inferred, not verified):
    ``t = k (2.5 + 0.003 d)`` µm with ``k = 1, 2, 4, 8``, which reproduces a maker's
    published table "as per IS 7327-2003" to within 0.33 µm x k (see :data:`ISO8512_2_TABLE_UM`).
ASME B89.3.7-2013 / GGG-P-463c (``asme-b89.3.7``)
    Grade AA ``= 40 + D^2/25`` µin with ``D`` the diagonal in inches; A = 2 AA, B = 4 AA.
    flatcheck uses this inch form, converted exactly (1 in = 25.4 mm), because it is the
    form the specification defines; the metric form ``1 + 1.6e-6 D^2`` µm (``D`` in mm) is a
    rounded conversion (3.2350 instead of 3.2158 µm for 1000 x 630 mm) and can be chosen with
    ``asme_form="metric"``. A published table (GGG-P-463c) departs from the formula in both
    directions; it is available separately as ``basis="table"``.

References
----------
.. [1] DIN 876-1:1984, Prüfplatten aus Naturhartgestein (first page seen; tolerance form from
       supplier reproductions of DIN 876).
.. [2] ISO 8512-2:1990, Surface plates - Part 2: Granite (scope seen, tolerance clause not seen).
.. [3] ASME B89.3.7-2013, Granite Surface Plates; Federal Specification GGG-P-463c (1973).
       Formula as quoted in Sandia report SAND2008-2571C.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import GeometryError, InputValueError
from ..units import MM_PER_INCH, UM_PER_UIN

__all__ = [
    "Standard",
    "Tolerance",
    "STANDARDS",
    "LENGTH_BASES",
    "BASES",
    "ASME_FORMS",
    "ISO8512_2_TABLE_UM",
    "ASME_TABLE_AA_UIN",
    "get_standard",
    "reference_length_mm",
    "din876_tolerance_um",
    "iso8512_2_tolerance_um",
    "asme_aa_tolerance_uin",
    "asme_tolerance_um",
    "size_check",
    "PlateSize",
    "plate_size",
    "tolerance",
    "tolerances",
    "RepeatReading",
    "repeat_reading",
]

LENGTH_BASES = ("side", "diagonal")
BASES = ("formula", "table")
ASME_FORMS = ("inch", "metric")

# Provenance labels carried by every value.
VERIFIED = "verified"  # seen in the standard or a faithful reproduction
SECONDARY = "secondary source"  # seen only in a maker's or lab's reproduction
FROM_MEMORY = "from memory"  # recalled, not checked against any published text
INFERRED = "inferred"  # form recalled, coefficients fitted to a secondary table


@dataclass(frozen=True)
class Standard:
    """A surface-plate standard: its grades, formula, length basis, rounding and range.

    Attributes
    ----------
    key : str
        Command-line name (``"din-876"``, ``"iso-8512-2"``, ``"asme-b89.3.7"``).
    title : str
        Full designation.
    grades : tuple of str
        Grade names, finest first.
    grade_status : tuple of str
        Provenance of each grade's formula coefficient (same order as ``grades``).
    length_basis : {"side", "diagonal"}
        The length the standard's formula uses by default.
    allowed_length_bases : tuple of str
        Length bases a user may choose.
    formula : str
        The formula in words, with units.
    rounding : str
        The rounding rule, or a statement that none is verified.
    size_range : str
        The plate sizes the standard covers, in words.
    has_table : bool
        Whether a tabulated basis is available.
    source : str
        Where the formula comes from.
    aliases : tuple of str
        Other accepted names (lower case).
    """

    key: str
    title: str
    grades: tuple
    grade_status: tuple
    length_basis: str
    allowed_length_bases: tuple
    formula: str
    rounding: str
    size_range: str
    has_table: bool
    source: str
    aliases: tuple = ()


@dataclass(frozen=True)
class Tolerance:
    """The flatness tolerance of one grade for one plate.

    Attributes
    ----------
    standard : str
        Standard key.
    grade : str
        Grade name.
    tolerance_um : float
        Flatness tolerance (width of the zone) in µm, unrounded.
    length_used_mm : float
        The length the formula used, in mm (longer side or diagonal).
    length_basis : {"side", "diagonal"}
        Which length ``length_used_mm`` is.
    basis : {"formula", "table"}
        Whether the value comes from the formula or a table lookup.
    status : str
        Provenance: "verified", "secondary source", "inferred" or "from memory".
    table_um : float or None
        The tabulated value for this plate size in µm when one is known (also when
        ``basis == "formula"``, for comparison), else ``None``.
    in_range : bool
        Whether the plate size is inside the range the standard covers (or, for sizes the
        range is unknown, not known to be outside).
    notes : tuple of str
        Remarks for the report (unverified values, size out of range...).
    """

    standard: str
    grade: str
    tolerance_um: float
    length_used_mm: float
    length_basis: str
    basis: str
    status: str
    table_um: float | None
    in_range: bool
    notes: tuple = ()


# --------------------------------------------------------------------------- DIN 876
# c in t = c (1 + L/1000) µm. Grades 0..3: supplier reproductions of DIN 876 give
# 4 + L/250, 10 + L/100, 20 + L/50, 40 + L/25 (L = longest side) [secondary]; grade 00: c = 2
# from memory. Not verified that Part 1 (granite) uses the same c for grades 1, 2 or has grade 3.
_DIN_C = {"00": 2.0, "0": 4.0, "1": 10.0, "2": 20.0, "3": 40.0}
_DIN_STATUS = {"00": FROM_MEMORY, "0": SECONDARY, "1": SECONDARY, "2": SECONDARY, "3": SECONDARY}
_DIN_MAX_L_MM = 2500.0  # DIN 876-1 minimum-thickness table ends at l = 2500 mm [V: first page]

# --------------------------------------------------------------------------- ISO 8512-2
# Inferred formula t = k (2.5 + 0.003 d) µm (d = diagonal in mm), k = 1, 2, 4, 8 for grades 0..3.
_ISO_K = {"0": 1.0, "1": 2.0, "2": 4.0, "3": 8.0}
_ISO_A_UM = 2.5
_ISO_B_UM_PER_MM = 0.003
_ISO_MIN = (160.0, 100.0)  # ISO 8512-2 scope: 160 x 100 to 2500 x 1600 mm [V: scope]
_ISO_MAX = (2500.0, 1600.0)

#: ISO 8512-2 grade 0/1/2/3 tolerances in µm by plate size (length, width) in mm, as published
#: by a granite-plate maker "as per IS 7327-2003" (IS 7327 is identical to ISO 8512-2). Secondary
#: source (gmtmachinetools.blogspot.com, 2013-09-04, product table), not checked against the
#: standard; the values look rounded to 0.5 µm (grade 0) and 1 µm (grades 1-3).
ISO8512_2_TABLE_UM = {
    (250.0, 250.0): (3.5, 7.0, 15.0, 30.0),
    (300.0, 300.0): (3.5, 7.0, 15.0, 30.0),
    (400.0, 250.0): (4.0, 8.0, 16.0, 32.0),
    (400.0, 400.0): (4.5, 9.0, 17.0, 34.0),
    (500.0, 300.0): (4.5, 9.0, 17.0, 34.0),
    (630.0, 400.0): (5.0, 10.0, 20.0, 39.0),
    (630.0, 630.0): (5.0, 10.0, 21.0, 42.0),
    (800.0, 500.0): (5.0, 10.0, 21.0, 42.0),
    (1000.0, 630.0): (6.0, 12.0, 24.0, 49.0),
    (1000.0, 1000.0): (7.0, 14.0, 28.0, 56.0),
    (1200.0, 800.0): (7.0, 14.0, 28.0, 56.0),
    (1600.0, 1000.0): (8.0, 16.0, 33.0, 66.0),
    (2000.0, 1000.0): (9.5, 19.0, 38.0, 75.0),
}

# --------------------------------------------------------------------------- ASME B89.3.7
_ASME_MULT = {"AA": 1.0, "A": 2.0, "B": 4.0}  # A = 2 AA, B = 4 AA [V: lab/supplier pages]
_ASME_MIN_IN = (12.0, 12.0)  # smallest plate the federal spec considers [secondary: supplier page]

#: Grade AA flatness in µin by plate size (length, width) in inches, from a calibration lab's FAQ
#: reproducing GGG-P-463c (dlmcal.com/html/faq3.html) [secondary]; A and B are 2x and 4x.
ASME_TABLE_AA_UIN = {
    (12.0, 12.0): 50.0,
    (18.0, 12.0): 50.0,
    (24.0, 18.0): 75.0,
    (36.0, 24.0): 100.0,
    (48.0, 36.0): 200.0,
    (72.0, 48.0): 350.0,
    (96.0, 48.0): 500.0,
}

STANDARDS = {
    "din-876": Standard(
        key="din-876",
        title="DIN 876-1:1984 (granite/hard-rock plates)",
        grades=("00", "0", "1", "2", "3"),
        grade_status=tuple(_DIN_STATUS[g] for g in ("00", "0", "1", "2", "3")),
        length_basis="side",
        allowed_length_bases=LENGTH_BASES,
        formula="t = c (1 + L/1000) um, L in mm; c = 2 (00), 4 (0), 10 (1), 20 (2), 40 (3)",
        rounding="none verified; values are not rounded",
        size_range="l up to 2500 mm (thickness table of DIN 876-1); no lower limit verified",
        has_table=False,
        source="DIN 876 tolerance form as reproduced by suppliers (L = longest side); grade 00 from memory",
        aliases=("din876", "din-876-1", "din"),
    ),
    "iso-8512-2": Standard(
        key="iso-8512-2",
        title="ISO 8512-2:1990 (granite surface plates; = IS 7327:2003)",
        grades=("0", "1", "2", "3"),
        grade_status=(INFERRED,) * 4,
        length_basis="diagonal",
        allowed_length_bases=("diagonal",),
        formula="t = k (2.5 + 0.003 d) um, d = diagonal in mm; k = 1 (0), 2 (1), 4 (2), 8 (3) [inferred]",
        rounding="none verified (a published table appears rounded to 0.5 um for grade 0, 1 um otherwise)",
        size_range="160 x 100 mm to 2500 x 1600 mm",
        has_table=True,
        source="scope of ISO 8512-2; coefficients inferred from a maker's table as per IS 7327-2003",
        aliases=("iso8512-2", "iso-8512", "iso8512", "iso", "is-7327", "is7327"),
    ),
    "asme-b89.3.7": Standard(
        key="asme-b89.3.7",
        title="ASME B89.3.7-2013 (revises Federal Specification GGG-P-463c)",
        grades=("AA", "A", "B"),
        grade_status=(VERIFIED, SECONDARY, SECONDARY),  # AA: Sandia quoting the spec; A, B: lab pages
        length_basis="diagonal",
        allowed_length_bases=("diagonal",),
        formula="AA = 40 + D^2/25 uin, D = diagonal in inches (exactly 1.016 + 1.5748e-6 D^2 um, D in mm); "
        "A = 2 AA; B = 4 AA",
        rounding="none verified; values are not rounded",
        size_range="from 12 x 12 in (upper limit not verified; table to 48 x 96 in)",
        has_table=True,
        source="Sandia SAND2008-2571C quoting GGG-P-463c; A/B multiples from lab and supplier pages",
        aliases=("asme", "asme-b89.3.7-2013", "asme-b89", "b89.3.7", "ggg-p-463c", "ggg-p-463", "federal"),
    ),
}

_ALIASES = {}
for _std in STANDARDS.values():
    _ALIASES[_std.key] = _std
    for _a in _std.aliases:
        _ALIASES[_a] = _std


def get_standard(name: str) -> Standard:
    """Look up a standard by its command-line name or an alias (case-insensitive).

    Raises
    ------
    InputValueError
        If the name is unknown; the message lists the accepted names.
    """
    std = _ALIASES.get(str(name).strip().lower())
    if std is None:
        raise InputValueError(
            f"unknown standard {name!r}",
            where="--standard",
            fix=f"use one of: {', '.join(STANDARDS)}",
        )
    return std


def _grade_of(std: Standard, grade: str) -> str:
    g = str(grade).strip()
    for known in std.grades:
        if g.upper() == known.upper():
            return known
    raise InputValueError(
        f"{std.key} has no grade {grade!r}",
        where="--grade",
        fix=f"use one of: {', '.join(std.grades)}",
    )


def _check_size(length_mm: float, width_mm: float) -> tuple[float, float]:
    l, w = float(length_mm), float(width_mm)
    for name, v in (("length", l), ("width", w)):
        if not math.isfinite(v) or v <= 0.0:
            raise InputValueError(
                f"plate {name} {v:g} mm is not a positive number",
                fix="give the plate size in mm (--length-mm, --width-mm)",
            )
    return max(l, w), min(l, w)


def reference_length_mm(length_mm: float, width_mm: float, basis: str) -> float:
    """The length a tolerance formula uses, in mm.

    Parameters
    ----------
    length_mm, width_mm : float
        Plate sides in mm (either order).
    basis : {"side", "diagonal"}
        ``"side"``: the longer side; ``"diagonal"``: ``sqrt(l^2 + w^2)``.

    Returns
    -------
    float
        Length in mm.

    Examples
    --------
    >>> round(reference_length_mm(1000, 630, "diagonal"), 2)
    1181.91
    >>> reference_length_mm(630, 1000, "side")
    1000.0
    """
    l, w = _check_size(length_mm, width_mm)
    if basis == "side":
        return l
    if basis == "diagonal":
        return math.hypot(l, w)
    raise InputValueError(f"unknown length basis {basis!r}", where="--length-basis", fix="use 'side' or 'diagonal'")


def din876_tolerance_um(grade: str, length_mm: float) -> float:
    """DIN 876 flatness tolerance ``c (1 + L/1000)`` in µm.

    Parameters
    ----------
    grade : {"00", "0", "1", "2", "3"}
        Grade.
    length_mm : float
        The reference length ``L`` in mm (longer side by default; see :func:`tolerance`).

    Returns
    -------
    float
        Tolerance in µm, unrounded.

    Examples
    --------
    >>> din876_tolerance_um("0", 1200.0)
    8.8
    """
    g = _grade_of(STANDARDS["din-876"], grade)
    return _DIN_C[g] * (1.0 + float(length_mm) / 1000.0)


def iso8512_2_tolerance_um(grade: str, diagonal_mm: float) -> float:
    """ISO 8512-2 flatness tolerance by the inferred formula ``k (2.5 + 0.003 d)`` in µm.

    The form and coefficients are NOT verified against the standard (see the module notes).

    Parameters
    ----------
    grade : {"0", "1", "2", "3"}
        Grade.
    diagonal_mm : float
        Plate diagonal ``d`` in mm.

    Returns
    -------
    float
        Tolerance in µm, unrounded.
    """
    g = _grade_of(STANDARDS["iso-8512-2"], grade)
    return _ISO_K[g] * (_ISO_A_UM + _ISO_B_UM_PER_MM * float(diagonal_mm))


def asme_aa_tolerance_uin(diagonal_in: float) -> float:
    """Grade AA flatness ``40 + D^2/25`` in µin, ``D`` the diagonal in inches.

    Examples
    --------
    >>> asme_aa_tolerance_uin(30.0)
    76.0
    """
    d = float(diagonal_in)
    return 40.0 + d * d / 25.0


def asme_tolerance_um(grade: str, diagonal_mm: float, *, form: str = "inch") -> float:
    """ASME B89.3.7 flatness tolerance of grade AA, A or B in µm.

    Parameters
    ----------
    grade : {"AA", "A", "B"}
        Grade.
    diagonal_mm : float
        Plate diagonal in mm.
    form : {"inch", "metric"}
        ``"inch"`` (default): ``40 + D^2/25`` µin with D in inches, converted exactly;
        ``"metric"``: the rounded metric form ``1 + 1.6e-6 D^2`` µm with D in mm.

    Returns
    -------
    float
        Tolerance in µm, unrounded.
    """
    g = _grade_of(STANDARDS["asme-b89.3.7"], grade)
    d_mm = float(diagonal_mm)
    if form == "inch":
        aa_um = asme_aa_tolerance_uin(d_mm / MM_PER_INCH) * UM_PER_UIN
    elif form == "metric":
        aa_um = 1.0 + 1.6e-6 * d_mm * d_mm
    else:
        raise InputValueError(f"unknown ASME formula form {form!r}", where="--asme-form", fix="use 'inch' or 'metric'")
    return _ASME_MULT[g] * aa_um


def _table_key(table: dict, l: float, w: float, rel: float = 0.01):
    """The table entry whose (sorted) sides match ``(l, w)`` to within ``rel`` (1 %)."""
    for (tl, tw), value in table.items():
        a, b = max(tl, tw), min(tl, tw)
        if abs(a - l) <= rel * a and abs(b - w) <= rel * b:
            return (tl, tw), value
    return None, None


def _table_um(std: Standard, grade: str, l_mm: float, w_mm: float) -> float | None:
    if std.key == "iso-8512-2":
        _, row = _table_key(ISO8512_2_TABLE_UM, l_mm, w_mm)
        return None if row is None else row[std.grades.index(grade)]
    if std.key == "asme-b89.3.7":
        _, aa = _table_key(ASME_TABLE_AA_UIN, l_mm / MM_PER_INCH, w_mm / MM_PER_INCH)
        return None if aa is None else _ASME_MULT[grade] * aa * UM_PER_UIN
    return None


def size_check(std: Standard, length_mm: float, width_mm: float) -> tuple[bool, str]:
    """Whether a plate size lies inside the range the standard covers.

    Returns
    -------
    (bool, str)
        ``(True, "")`` when inside (or no limit is known on that side), else ``(False, reason)``.
    """
    l, w = _check_size(length_mm, width_mm)
    if std.key == "din-876":
        if l > _DIN_MAX_L_MM:
            return False, f"longer side {l:g} mm exceeds the 2500 mm covered by DIN 876-1"
    elif std.key == "iso-8512-2":
        if l < _ISO_MIN[0] or w < _ISO_MIN[1]:
            return False, f"plate {l:g} x {w:g} mm is smaller than the 160 x 100 mm covered by ISO 8512-2"
        if l > _ISO_MAX[0] or w > _ISO_MAX[1]:
            return False, f"plate {l:g} x {w:g} mm is larger than the 2500 x 1600 mm covered by ISO 8512-2"
    elif std.key == "asme-b89.3.7":
        l_in, w_in = l / MM_PER_INCH, w / MM_PER_INCH
        if l_in < _ASME_MIN_IN[0] - 1e-9 or w_in < _ASME_MIN_IN[1] - 1e-9:
            return False, f"plate {l_in:.3g} x {w_in:.3g} in is smaller than the 12 x 12 in the federal spec considers"
    return True, ""


def tolerance(
    standard: str | Standard,
    grade: str,
    length_mm: float,
    width_mm: float,
    *,
    length_basis: str | None = None,
    basis: str = "formula",
    asme_form: str = "inch",
) -> Tolerance:
    """The flatness tolerance of one grade of a standard for a plate of given size.

    Parameters
    ----------
    standard : str or Standard
        Standard name or alias (``"din-876"``, ``"iso-8512-2"``, ``"asme-b89.3.7"``).
    grade : str
        Grade name (case-insensitive).
    length_mm, width_mm : float
        Plate sides in mm (either order).
    length_basis : {"side", "diagonal"}, optional
        Length used by the formula; default the standard's own (DIN: longer side; ISO, ASME:
        diagonal). Only DIN 876 accepts a choice.
    basis : {"formula", "table"}
        ``"formula"`` (default): the standard's formula, valid for every size;
        ``"table"``: a published table, only for tabulated sizes (ISO 8512-2, ASME).
    asme_form : {"inch", "metric"}
        Which form of the ASME formula (see :func:`asme_tolerance_um`).

    Returns
    -------
    Tolerance
        The value in µm with its provenance and notes.

    Raises
    ------
    InputValueError
        Unknown standard, grade, basis or length basis; a size not in the table with
        ``basis="table"``; non-positive sizes.

    Examples
    --------
    >>> t = tolerance("din-876", "00", 1000, 630)
    >>> round(t.tolerance_um, 3), t.length_basis
    (4.0, 'side')
    """
    std = standard if isinstance(standard, Standard) else get_standard(standard)
    g = _grade_of(std, grade)
    l, w = _check_size(length_mm, width_mm)
    lb = std.length_basis if length_basis is None else str(length_basis).strip().lower()
    if lb not in LENGTH_BASES:
        raise InputValueError(f"unknown length basis {length_basis!r}", where="--length-basis", fix="use 'side' or 'diagonal'")
    if lb not in std.allowed_length_bases:
        raise InputValueError(
            f"{std.key} defines its tolerance on the {std.length_basis}, not the {lb}",
            where="--length-basis",
            fix=f"omit --length-basis or use '{std.length_basis}' for {std.key}",
        )
    if basis not in BASES:
        raise InputValueError(f"unknown basis {basis!r}", where="--basis", fix="use 'formula' or 'table'")
    length_used = reference_length_mm(l, w, lb)
    status = std.grade_status[std.grades.index(g)]
    notes = []
    table_value = _table_um(std, g, l, w)

    if std.key == "din-876":
        value = din876_tolerance_um(g, length_used)
        if lb != std.length_basis:
            notes.append("length basis 'diagonal' chosen by the user; the reproductions of DIN 876 use the longer side")
    elif std.key == "iso-8512-2":
        value = iso8512_2_tolerance_um(g, length_used)
    else:
        value = asme_tolerance_um(g, length_used, form=asme_form)
        if asme_form == "metric":
            notes.append("ASME metric form 1 + 1.6e-6 D^2 um (a rounded conversion of the inch formula)")

    if basis == "table":
        if not std.has_table:
            raise InputValueError(
                f"no table is available for {std.key}", where="--basis", fix="use --basis formula"
            )
        if table_value is None:
            raise InputValueError(
                f"plate {l:g} x {w:g} mm is not a tabulated size of {std.key}",
                where="--basis",
                fix="use --basis formula, or give the nominal size with --length-mm/--width-mm",
            )
        value = table_value
        status = SECONDARY
        notes.append("tabulated value from a secondary reproduction of the standard's table")
    elif table_value is not None and abs(table_value - value) > 1e-9:
        notes.append(f"a published table gives {table_value:.3g} um for this size (--basis table)")

    if status == FROM_MEMORY:
        notes.append(f"grade {g} coefficient is from memory, not verified")
    elif status == INFERRED:
        notes.append("ISO 8512-2 formula inferred, not verified against the standard's text")
    ok, why = size_check(std, l, w)
    if not ok:
        notes.append(f"outside the standard's range: {why}")
    return Tolerance(
        standard=std.key,
        grade=g,
        tolerance_um=float(value),
        length_used_mm=float(length_used),
        length_basis=lb,
        basis=basis,
        status=status,
        table_um=None if table_value is None else float(table_value),
        in_range=ok,
        notes=tuple(notes),
    )


def tolerances(standard: str | Standard, length_mm: float, width_mm: float, **kwargs) -> tuple:
    """Tolerances of every grade of a standard, finest first (keywords as :func:`tolerance`)."""
    std = standard if isinstance(standard, Standard) else get_standard(standard)
    return tuple(tolerance(std, g, length_mm, width_mm, **kwargs) for g in std.grades)


@dataclass(frozen=True)
class PlateSize:
    """The plate size used for a tolerance and where it came from.

    Attributes
    ----------
    length_mm, width_mm : float
        Sides in mm (length >= width).
    source : {"option", "surface", "point-extent"}
        ``"option"``: given by the user; ``"surface"``: the surveyed surface's stated size;
        ``"point-extent"``: the extent of the measured points (smaller than the plate when the
        stations are inset from the edges).
    """

    length_mm: float
    width_mm: float
    source: str


def plate_size(hm, length_mm: float | None = None, width_mm: float | None = None) -> PlateSize:
    """Plate size for grading: the user's values, else the surface's size, else the points' extent.

    Parameters
    ----------
    hm : HeightMap
        The surface; its ``length_mm``/``width_mm`` are used when set.
    length_mm, width_mm : float, optional
        Sizes in mm given by the user; both or neither.

    Returns
    -------
    PlateSize

    Raises
    ------
    InputValueError
        Only one of ``length_mm``/``width_mm`` given, or a non-positive size.
    GeometryError
        The points span no area and no size is known.
    """
    if (length_mm is None) != (width_mm is None):
        raise InputValueError(
            "only one of the plate's length and width was given",
            where="--length-mm/--width-mm",
            fix="give both --length-mm and --width-mm, or neither",
        )
    if length_mm is not None:
        l, w = _check_size(length_mm, width_mm)
        return PlateSize(l, w, "option")
    if hm.length_mm is not None and hm.width_mm is not None:
        l, w = _check_size(hm.length_mm, hm.width_mm)
        return PlateSize(l, w, "surface")
    xmin, xmax, ymin, ymax = hm.extent_mm
    if xmax - xmin <= 0 or ymax - ymin <= 0:
        raise GeometryError(
            "the measured points span no area, so the plate size is unknown",
            fix="give the plate size with --length-mm and --width-mm",
        )
    l, w = _check_size(xmax - xmin, ymax - ymin)
    return PlateSize(l, w, "point-extent")


# --------------------------------------------------------------------------- repeat reading
@dataclass(frozen=True)
class RepeatReading:
    """Simulated repeat-reading gage variation over a height map.

    Attributes
    ----------
    variation_um : float
        Range (max - min) of the simulated gage readings in µm.
    foot_radius_mm : float
        Distance of each of the gage's three feet from its probe, in mm.
    positions : int
        Number of gage positions evaluated.
    min_reading_um, max_reading_um : float
        Extreme readings in µm (probe height minus the mean height under the feet).
    """

    variation_um: float
    foot_radius_mm: float
    positions: int
    min_reading_um: float
    max_reading_um: float


def repeat_reading(hm, foot_radius_mm: float, *, step_mm: float | None = None) -> RepeatReading:
    """Simulate a repeat-reading gage moved over the surface.

    The gage is modelled as a rigid base on three feet at 120 degrees on a circle of radius
    ``foot_radius_mm`` around its probe. The base rests on the plane through the three foot
    heights, whose height at the centre of an equilateral triangle is the mean of the three,
    so the reading at position ``p`` is ``h(p) - mean(h(foot_k))``. The gage is placed at
    every node of a grid of pitch ``step_mm`` (default: the map's own grid pitch) where the
    probe and all feet lie inside the measured area, in two orientations (0 and 60 degrees);
    the result is the range of the readings. Heights between stations are interpolated
    linearly (:meth:`HeightMap.sample`).

    The map must resolve the gage: it must be a regular grid whose pitch is no larger than
    ``foot_radius_mm`` (otherwise the interpolation, not the surface, sets the answer).

    Parameters
    ----------
    hm : HeightMap
        The surface (positions mm, heights µm).
    foot_radius_mm : float
        Probe-to-foot distance of the gage in mm.
    step_mm : float, optional
        Pitch of the gage positions in mm.

    Returns
    -------
    RepeatReading

    Raises
    ------
    GeometryError
        The map is not a regular grid, is too coarse for the gage, or no gage position fits.
    InputValueError
        Non-positive foot radius or step.
    """
    r = float(foot_radius_mm)
    if not math.isfinite(r) or r <= 0:
        raise InputValueError(f"gage foot radius {foot_radius_mm!r} mm is not positive", fix="give a radius in mm")
    grid = hm.grid
    if grid is None:
        raise GeometryError(
            "a repeat-reading check needs heights on a regular grid",
            fix="use a grid survey or a gridded height map",
        )
    xs, ys, _ = grid
    pitch = max(float(np.max(np.diff(xs))), float(np.max(np.diff(ys))))
    if pitch > r * (1 + 1e-9):
        raise GeometryError(
            f"the height map's pitch {pitch:g} mm is coarser than the gage foot radius {r:g} mm",
            fix="survey with a finer grid or give a larger gage",
        )
    step = pitch if step_mm is None else float(step_mm)
    if not math.isfinite(step) or step <= 0:
        raise InputValueError(f"step {step_mm!r} mm is not positive", fix="give a step in mm")
    xmin, xmax, ymin, ymax = hm.extent_mm
    px = np.arange(xmin + r, xmax - r + 1e-9, step)
    py = np.arange(ymin + r, ymax - r + 1e-9, step)
    if px.size == 0 or py.size == 0:
        raise GeometryError(
            f"no gage position with feet at {r:g} mm fits inside the measured area",
            fix="use a smaller gage foot radius",
        )
    X, Y = np.meshgrid(px, py)
    X, Y = X.ravel(), Y.ravel()
    readings = []
    for rot in (0.0, math.pi / 3.0):
        ang = rot + np.array([math.pi / 2, math.pi / 2 + 2 * math.pi / 3, math.pi / 2 + 4 * math.pi / 3])
        fx = X[:, None] + r * np.cos(ang)[None, :]
        fy = Y[:, None] + r * np.sin(ang)[None, :]
        h_probe = hm.sample(X, Y)
        h_feet = hm.sample(fx, fy)
        rd = h_probe - h_feet.mean(axis=1)
        readings.append(rd[np.isfinite(rd)])
    rd = np.concatenate(readings)
    if rd.size == 0:
        raise GeometryError(
            "no gage position has all feet on measured surface", fix="use a smaller gage foot radius"
        )
    return RepeatReading(
        variation_um=float(rd.max() - rd.min()),
        foot_radius_mm=r,
        positions=int(rd.size),
        min_reading_um=float(rd.min()),
        max_reading_um=float(rd.max()),
    )
