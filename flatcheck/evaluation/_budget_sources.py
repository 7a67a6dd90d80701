"""The sources of an uncertainty budget: what each one is, its default, and its plausible range.

Every source of :mod:`flatcheck.evaluation._budget` takes its input value from, in this
order: the survey file (``[instrument]``, ``[surface] thickness_mm``, ``[uncertainty]``,
``[repeat_readings]``), a lab-wide defaults file (:class:`LabDefaults`), or the built-in
default for the instrument kind in :data:`BUILTIN_DEFAULTS`. A value from a defaults file or
a built-in default is marked as a default in every output, with its basis.

The built-in defaults are typical figures, not measured ones: each states its basis
("common practice, no single source", "from memory" where recalled and not verified, or
stone suppliers' trade data). A lab that knows its instruments states its own
values in the survey file or in its defaults file (docs/survey-format.md).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from ..errors import InputValueError
from ..units import angle_unit, length_unit

__all__ = [
    "KEYS",
    "BUILTIN_DEFAULTS",
    "PLAUSIBLE",
    "LabDefaults",
    "Resolved",
    "resolve",
    "check_plausible_uncertainty",
    "default_thickness_mm",
]

#: Keys of the ``[uncertainty]`` table of a survey (and of a lab defaults file), with what they hold.
#: "reading unit" = the ``[instrument] unit`` of the survey (a length unit for an indicator).
KEYS = {
    "temperature_difference_u_k": "standard uncertainty of the top-minus-underside temperature difference, K",
    "expansion_coefficient_per_k": "linear expansion coefficient of the surface's material, 1/K",
    "resolution": "resolution (digit step) of the instrument, reading unit (rectangular, +- half a step)",
    "zero_drift": "standard uncertainty of the zero's drift from the first reading of a run to its last, reading unit",
    "turbulence_per_m": "autocollimators: standard uncertainty of a reading from air turbulence per metre of beam "
    "path, reading unit per m",
    "reference_level_uncertainty": "differential levels: standard uncertainty of one reading of the reference "
    "level, reading unit",
    "sampling_um": "half-width of the form between stations that the stations do not see, µm (rectangular)",
    "calibration_uncertainty_rel": "relative standard uncertainty the calibration certificate states for the "
    "scale calibration itself",
}

# Reading-unit keys: their values convert with the instrument unit.
_READING_KEYS = ("reading_uncertainty", "resolution", "zero_drift", "turbulence_per_m", "reference_level_uncertainty")

_CP = "common practice, no single source"
_FM = "from memory, not verified against a published source"

#: Built-in defaults by instrument kind: key -> {kind or "*": (value, unit, basis)}. A kind that is
#: missing means the source does not apply to that instrument (its contribution is 0).
BUILTIN_DEFAULTS = {
    "reading_uncertainty": {
        "autocollimator": (0.1, "arcsec", f"typical repeatability of a precision autocollimator read by a person ({_FM})"),
        "level": (0.2, "um/m", f"typical repeatability of an electronic precision level ({_FM})"),
        "differential-level": (0.2, "um/m", f"typical repeatability of an electronic precision level ({_FM})"),
        "indicator": (0.1, "um", f"typical repeatability of a fine electronic indicator ({_FM})"),
    },
    "scale_uncertainty_rel": {
        "autocollimator": (0.005, "", f"0.5 % of reading: typical scale error of an uncorrected autocollimator ({_FM})"),
        "level": (0.01, "", f"1 % of reading: typical scale (sensitivity) error of an electronic level ({_FM})"),
        "differential-level": (0.01, "", f"1 % of reading: typical scale error of an electronic level ({_FM})"),
        "indicator": (0.01, "", f"1 % of reading: typical scale error of an electronic indicator ({_FM})"),
    },
    "calibration_uncertainty_rel": {
        "*": (0.0, "", "not stated: the scale uncertainty is taken to include the calibration's own uncertainty"),
    },
    "resolution": {
        "autocollimator": (0.05, "arcsec", f"a common display step of a precision autocollimator ({_FM})"),
        "level": (0.1, "um/m", f"a common display step of an electronic precision level ({_FM})"),
        "differential-level": (0.1, "um/m", f"a common display step of an electronic precision level ({_FM})"),
        "indicator": (0.01, "um", f"a common display step of a fine electronic indicator ({_FM})"),
    },
    "foot_spacing_uncertainty_mm": {
        "autocollimator": (0.05, "mm", f"a base measured with a calliper or against gauge blocks ({_CP})"),
        "level": (0.05, "mm", f"a base measured with a calliper or against gauge blocks ({_CP})"),
        "differential-level": (0.05, "mm", f"a base measured with a calliper or against gauge blocks ({_CP})"),
    },
    "zero_drift": {
        "autocollimator": (0.05, "arcsec", f"zero drift of an autocollimator and its stand over one run of a few "
                           f"minutes ({_FM})"),
        "level": (0.2, "um/m", f"zero drift of an electronic level over one run of a few minutes ({_FM})"),
        "differential-level": (0.1, "um/m", f"zero drift of a differential level pair over one run; the reference "
                               f"level takes out the common tilt ({_FM})"),
        "indicator": (0.05, "um", f"drift of an indicator's datum over one run ({_FM})"),
    },
    "turbulence_per_m": {
        "autocollimator": (0.05, "arcsec", f"air turbulence in a closed temperature-controlled room, growing with "
                           f"the beam path ({_FM})"),
    },
    "reference_level_uncertainty": {
        "differential-level": (0.2, "um/m", f"typical repeatability of the reference level, an electronic "
                               f"precision level ({_FM})"),
    },
    "temperature_difference_u_k": {
        "*": (0.1, "K", f"top-minus-underside difference of a soaked plate in a temperature-controlled room with "
              f"vertical stratification ({_FM})"),
    },
    "expansion_coefficient_per_k": {
        "*": (6e-6, "1/K", "granite: 6-8e-6/K typical for metrology stone, 4.7-9.0e-6/K quoted (trade data "
              "of stone suppliers); the low end of the typical range"),
    },
}

#: Plausibility limits (inclusive upper bounds) of the uncertainty inputs, with the reason stated in
#: the refusal. Slope-like values are bounded as slopes (rad), indicator values as µm.
PLAUSIBLE = {
    "reading_slope_rad": (1e-3, "a reading uncertainty above 1 mm/m (206 arcsec) would drown any plate's form; "
                          "it is a slip (a wrong unit or a misplaced decimal point)"),
    "reading_um": (100.0, "an indicator whose single reading is uncertain by more than 100 µm cannot survey "
                   "flatness; it is a slip (a wrong unit or a misplaced decimal point)"),
    "relative": (0.1, "a scale uncertain by more than 10 % of reading is not a calibrated instrument"),
    "temperature_k": (10.0, "a temperature difference through a plate uncertain by more than 10 K means the plate "
                      "was not at rest in a room fit for measuring it"),
    "expansion_per_k": (5e-5, "no material of a flat reference surface expands by more than 5e-5 per K "
                        "(aluminium 2.3e-5, granite 6-8e-6)"),
    "thickness_mm": (3000.0, "no surface plate is thicker than 3 m"),
    "sampling_um": (1000.0, "form of more than 1 mm between stations is not a flatness survey"),
    "foot_spacing_rel": (0.1, "a foot spacing uncertain by more than 10 % of itself is not a measured base"),
}


def default_thickness_mm(length_mm: float, width_mm: float) -> float:
    """A plate's thickness when none is stated: 15 % of its longer side, at least 50 mm (mm).

    Common practice, no single source: granite plates are made about 1/6 to 1/7 as thick as they are
    long (a 1000 x 630 mm plate about 150 mm, a 630 x 400 mm one about 100 mm).
    """
    return max(50.0, 0.15 * max(float(length_mm), float(width_mm)))


@dataclass(frozen=True)
class LabDefaults:
    """A lab's own defaults, overriding the built-in ones (read by :func:`flatcheck.io.read_uncertainty_defaults`).

    Attributes
    ----------
    path : str
        The file they came from (stated in every basis).
    common : dict
        Keys for every instrument kind (``temperature_difference_u_k``...), in their units.
    by_kind : dict
        Instrument kind -> {key: value, "unit": reading unit of that kind's reading-unit keys}.
    """

    path: str
    common: dict = field(default_factory=dict)
    by_kind: dict = field(default_factory=dict)


@dataclass(frozen=True)
class Resolved:
    """One input value of the budget and where it came from.

    Attributes
    ----------
    key : str
        The survey-file key.
    value : float or None
        The value in the survey's reading unit (reading-unit keys) or the key's own unit;
        None when the source does not apply to this instrument.
    default : bool
        True when not stated in the survey file (a lab default or a built-in one).
    basis : str
        Where the value came from, in words.
    """

    key: str
    value: float | None
    default: bool
    basis: str


def _a(word: str) -> str:
    """The word with its indefinite article."""
    return ("an " if word[:1] in "aeiou" else "a ") + word


def _to_reading_unit(value: float, unit: str, kind: str, target_unit: str) -> float:
    """Convert a reading-unit value given in ``unit`` to the survey's ``target_unit``."""
    if unit == target_unit:
        return float(value)
    if kind == "indicator":
        return value * length_unit(unit).factor_um / length_unit(target_unit).factor_um
    return value * angle_unit(unit).factor / angle_unit(target_unit).factor


def resolve(key: str, stated, *, kind: str, unit: str, lab: LabDefaults | None = None,
            stated_where: str = "") -> Resolved:
    """The value of one budget input: stated, else the lab's default, else the built-in one.

    Parameters
    ----------
    key : str
        A key of :data:`KEYS`, ``reading_uncertainty``, ``scale_uncertainty_rel`` or
        ``foot_spacing_uncertainty_mm``.
    stated : float or None
        The survey file's value (reading-unit keys in the survey's unit).
    kind : str
        Instrument kind.
    unit : str
        The survey's reading unit.
    lab : LabDefaults, optional
    stated_where : str
        Where the statement is (``"[uncertainty] zero_drift"``), for the basis.

    Returns
    -------
    Resolved
    """
    table = BUILTIN_DEFAULTS.get(key, {})
    applies = kind in table or "*" in table
    if not applies and key in BUILTIN_DEFAULTS:
        extra = " (the value stated is not used)" if stated is not None else ""
        return Resolved(key, None, stated is None, f"does not apply to {_a(kind)}{extra}")
    if stated is not None:
        return Resolved(key, float(stated), False, f"stated in the survey file ({stated_where or key})")
    if lab is not None:
        kt = lab.by_kind.get(kind, {})
        if key in kt and key not in _READING_KEYS:
            return Resolved(key, float(kt[key]), True, f"lab default for {_a(kind)} from {lab.path}")
        if key in kt:
            v = float(kt[key])
            if key in _READING_KEYS:
                v = _to_reading_unit(v, kt.get("unit", unit), kind, unit)
            return Resolved(key, v, True, f"lab default for {_a(kind)} from {lab.path}")
        if key in lab.common and key not in _READING_KEYS:
            return Resolved(key, float(lab.common[key]), True, f"lab default from {lab.path}")
    if not applies:
        return Resolved(key, None, True, f"does not apply to {_a(kind)}")
    v, vu, basis = table.get(kind, table.get("*"))
    if key in _READING_KEYS:
        shown = f"{v:g} {vu}"
        v = _to_reading_unit(v, vu, kind, unit)
        basis = f"default for {_a(kind)}, {shown}: {basis}"
    else:
        basis = f"default: {basis}"
    return Resolved(key, float(v), True, basis)


def check_plausible_uncertainty(key: str, value: float, *, kind: str, unit: str, where: str | None = None,
                                foot_spacing_mm: float | None = None) -> None:
    """Refuse an uncertainty input no real survey has (:data:`PLAUSIBLE`), with the reason.

    Parameters
    ----------
    key : str
        The key as written (``reading_uncertainty``, ``scale_uncertainty_rel``, a key of :data:`KEYS`,
        ``thickness_mm``, ``foot_spacing_uncertainty_mm``).
    value : float
        Its value (reading-unit keys in ``unit``; ``turbulence_per_m`` per metre).
    kind, unit : str
        The instrument's kind and reading unit.
    where : str, optional
        Where the value is (file, line, field).
    foot_spacing_mm : float, optional
        The smallest foot spacing of the survey (mm), for ``foot_spacing_uncertainty_mm``.

    Raises
    ------
    InputValueError
        A negative, non-finite or implausibly large value, naming the limit and why.
    """
    v = float(value)
    if not math.isfinite(v) or v < 0:
        raise InputValueError(f"{key} is {value!r}; it must be a finite number 0 or above", where=where,
                              fix=f"give {key} as a standard uncertainty >= 0")
    if key in _READING_KEYS:
        if kind == "indicator":
            lim_key, as_limit = "reading_um", v * length_unit(unit).factor_um
            limit_text = f"{PLAUSIBLE['reading_um'][0] / length_unit(unit).factor_um:.4g} {unit}"
        else:
            lim_key, as_limit = "reading_slope_rad", v * angle_unit(unit).factor
            limit_text = f"{PLAUSIBLE['reading_slope_rad'][0] / angle_unit(unit).factor:.4g} {unit}"
        limit, why = PLAUSIBLE[lim_key]
        if as_limit > limit:
            raise InputValueError(f"{key} = {v:.6g} {unit} is more than the {limit_text} flatcheck accepts: {why}",
                                  where=where, fix=f"check {key} and the [instrument] unit ({unit!r})")
        return
    lim_key = {
        "scale_uncertainty_rel": "relative",
        "calibration_uncertainty_rel": "relative",
        "temperature_difference_u_k": "temperature_k",
        "expansion_coefficient_per_k": "expansion_per_k",
        "thickness_mm": "thickness_mm",
        "sampling_um": "sampling_um",
    }.get(key)
    if key == "foot_spacing_uncertainty_mm" and foot_spacing_mm:
        limit, why = PLAUSIBLE["foot_spacing_rel"]
        if v > limit * foot_spacing_mm:
            raise InputValueError(
                f"{key} = {v:.6g} mm is more than 10 % of the {foot_spacing_mm:.6g} mm foot spacing: {why}",
                where=where, fix="give the standard uncertainty of the base length in mm")
        return
    if lim_key is None:
        return
    limit, why = PLAUSIBLE[lim_key]
    if key == "thickness_mm" and v <= 0:
        raise InputValueError("thickness_mm must be above 0", where=where, fix="give the plate's thickness in mm")
    if key == "expansion_coefficient_per_k" and v <= 0:
        raise InputValueError("expansion_coefficient_per_k must be above 0", where=where,
                              fix="give the material's linear expansion coefficient (granite about 6e-6 per K)")
    if v > limit:
        shown = f"{v:.6g}" + ("" if lim_key != "relative" else f" ({v * 100:.6g} %)")
        lim_shown = f"{limit:g}" + ("" if lim_key != "relative" else f" ({limit * 100:g} %)")
        raise InputValueError(f"{key} = {shown} is more than the {lim_shown} flatcheck accepts: {why}", where=where,
                              fix=f"check {key}" + (" (a relative value: 0.002 is 0.2 %)" if lim_key == "relative" else ""))
