"""A lab's own uncertainty defaults (TOML), overriding flatcheck's built-in ones.

The format is described in ``docs/survey-format.md`` (section "Lab-wide defaults"). In short::

    format = "flatcheck-uncertainty-defaults"
    version = 1

    [all]                 # any instrument: temperature_difference_u_k, expansion_coefficient_per_k, sampling_um
    [autocollimator]      # per instrument kind: unit, and any key of [instrument] / [uncertainty] of a survey
    [level]
    [differential-level]
    [indicator]

A command finds the file from ``--uncertainty-defaults FILE`` or, when that is not given, from the
environment variable ``FLATCHECK_UNCERTAINTY_DEFAULTS``.
"""

from __future__ import annotations

import math
import tomllib
from pathlib import Path

from ..errors import InputFormatError, InputValueError, UnitError
from ..evaluation import LabDefaults, check_plausible_uncertainty
from ..units import angle_unit, length_unit
from ._text import read_text

__all__ = ["DEFAULTS_FORMAT", "ENV_VAR", "read_uncertainty_defaults", "parse_uncertainty_defaults"]

DEFAULTS_FORMAT = "flatcheck-uncertainty-defaults"
#: Environment variable naming a lab defaults file when no option names one.
ENV_VAR = "FLATCHECK_UNCERTAINTY_DEFAULTS"

_KINDS = ("autocollimator", "level", "differential-level", "indicator")
_COMMON_KEYS = ("temperature_difference_u_k", "expansion_coefficient_per_k", "sampling_um", "calibration_uncertainty_rel")
_KIND_KEYS = _COMMON_KEYS + (
    "unit", "reading_uncertainty", "scale_uncertainty_rel", "foot_spacing_uncertainty_mm", "resolution", "zero_drift",
    "turbulence_per_m", "reference_level_uncertainty",
)
_READING_KEYS = ("reading_uncertainty", "resolution", "zero_drift", "turbulence_per_m", "reference_level_uncertainty")


def read_uncertainty_defaults(path) -> LabDefaults:
    """Read a lab defaults file (see the module notes).

    Raises
    ------
    InputFormatError, InputValueError, UnitError
        Not this format, unknown tables or keys, non-numbers, implausible values (naming the file,
        table and key).
    """
    path = Path(path)
    text = read_text(path, wanted='a lab uncertainty-defaults file (TOML, format = "flatcheck-uncertainty-defaults")')
    return parse_uncertainty_defaults(text, source=str(path))


def parse_uncertainty_defaults(text: str, *, source: str = "<defaults>") -> LabDefaults:
    """Parse the text of a lab defaults file; ``source`` names it in messages and in every basis."""
    from ._text import toml_loads

    try:  # toml_loads: no nesting deeper than any flatcheck file, no integer too large for a float
        data = toml_loads(text, where=source)
    except tomllib.TOMLDecodeError as exc:
        raise InputFormatError(f"not valid TOML: {exc}", where=source, fix="check quotes, brackets and '='") from None
    if data.get("format") != DEFAULTS_FORMAT:
        raise InputFormatError(f"this is not a lab uncertainty-defaults file (format = {data.get('format')!r})",
                               where=source, fix=f'start the file with format = "{DEFAULTS_FORMAT}" and version = 1')
    if data.get("version") != 1:
        raise InputFormatError(f"version {data.get('version')!r} is not supported", where=source, fix="write version = 1")
    common, by_kind = {}, {}
    for table, body in data.items():
        if table in ("format", "version"):
            continue
        if table not in ("all",) + _KINDS or not isinstance(body, dict):
            raise InputFormatError(f"unknown table [{table}]", where=source,
                                   fix="use [all] and instrument kinds: " + ", ".join(f"[{k}]" for k in _KINDS))
        valid = _COMMON_KEYS if table == "all" else _KIND_KEYS
        out = {}
        unit = None
        if table != "all":
            unit = body.get("unit")
            if any(k in body for k in _READING_KEYS):
                if not isinstance(unit, str):
                    raise InputFormatError(f"[{table}] gives reading values but no unit", where=f"{source} [{table}]",
                                           fix='add unit = "arcsec" (or the unit the values are written in)')
                try:
                    unit = length_unit(unit).name if table == "indicator" else angle_unit(unit).name
                except UnitError as exc:
                    raise UnitError(exc.message, where=f"{source} [{table}] unit", fix=exc.fix) from None
                out["unit"] = unit
        for key, v in body.items():
            where = f"{source} [{table}] {key}"
            if key not in valid:
                raise InputFormatError(f"unknown key {key!r}", where=where, fix="valid keys: " + ", ".join(valid))
            if key == "unit":
                continue
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(float(v)):
                raise InputValueError(f"{key} must be a finite number, got {v!r}", where=where, fix=f"write {key} = <number>")
            check_plausible_uncertainty(key, float(v), kind="indicator" if table == "indicator" else (
                table if table != "all" else "level"), unit=unit or "um/m", where=where)
            out[key] = float(v)
        if table == "all":
            common = out
        else:
            by_kind[table] = out
    return LabDefaults(source, common, by_kind)
