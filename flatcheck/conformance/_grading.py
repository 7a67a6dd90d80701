"""Grading: one surface against a standard's grades or a given tolerance, with a stated decision rule."""

from __future__ import annotations

from ..errors import InputValueError
from ..form import minimum_zone
from ._decision import CONFORMS, DOES_NOT_CONFORM, assess_grades
from ._tolerance import Tolerance, get_standard, plate_size, reference_length_mm, repeat_reading, tolerance, tolerances

__all__ = ["grade_surface"]


#: A size given with --length-mm/--width-mm further than this fraction from the file's stated size is warned
#: about: the tolerance would be that of another plate (common practice, no single source: sizes are stated
#: to the nearest few millimetres, so 10 % is no rounding).
SIZE_MISMATCH_FRACTION = 0.10


def size_warnings(hm, size) -> list[str]:
    """Warnings when the plate size given as options does not fit the surface measured.

    Parameters
    ----------
    hm : HeightMap
        The surface; its stated ``length_mm``/``width_mm`` (mm) when the file gives them, and its points.
    size : PlateSize
        The size used for grading (mm); only a size from the options (``source == "option"``) is checked.

    Returns
    -------
    list of str
        One sentence per mismatch: the given size far from the file's stated size (sides compared longer with
        longer), or smaller than the measured points' extent, or far larger than it without a stated size.
    """
    if size.source != "option":
        return []
    given = sorted((size.length_mm, size.width_mm), reverse=True)
    xmin, xmax, ymin, ymax = hm.extent_mm
    extent = sorted((xmax - xmin, ymax - ymin), reverse=True)
    out = []
    if hm.length_mm is not None and hm.width_mm is not None:
        stated = sorted((float(hm.length_mm), float(hm.width_mm)), reverse=True)
        if any(abs(g - s) > SIZE_MISMATCH_FRACTION * s for g, s in zip(given, stated)):
            out.append(f"--length-mm/--width-mm give a {size.length_mm:g} x {size.width_mm:g} mm plate, but the "
                       f"file states {hm.length_mm:g} x {hm.width_mm:g} mm: the tolerances are those of the size "
                       "given; check the options (or leave them out to use the file's size)")
            return out
    if any(g < e * (1 - 1e-6) for g, e in zip(given, extent)):
        out.append(f"--length-mm/--width-mm give a {size.length_mm:g} x {size.width_mm:g} mm plate, smaller than the "
                   f"measured points span ({extent[0]:g} x {extent[1]:g} mm): check the options")
    elif hm.length_mm is None and any(g > 2.0 * e + 100.0 for g, e in zip(given, extent)):
        out.append(f"--length-mm/--width-mm give a {size.length_mm:g} x {size.width_mm:g} mm plate, far larger than "
                   f"the measured points span ({extent[0]:g} x {extent[1]:g} mm): the tolerances are those of the "
                   "size given; check the options")
    return out


def grade_surface(
    hm,
    *,
    standard: str | None,
    grade: str | None,
    tolerance_um: float | None,
    rule: str,
    expanded_uncertainty_um: float | None,
    length_mm: float | None,
    width_mm: float | None,
    length_basis: str | None,
    basis: str,
    asme_form: str,
    repeat_foot_radius_mm: float | None = None,
    repeat_tolerance_um: float | None = None,
    height_step_um: float | None = None,
) -> dict:
    """Grade a surface: its minimum-zone flatness against a standard's grades or a given tolerance.

    The one grading used by ``flatcheck grade``, the report and the demo.

    Parameters
    ----------
    hm : HeightMap
        The surface (heights in µm, positions in mm).
    standard : str or None
        A standard's key or alias (``din-876``, ``iso-8512-2``, ``asme-b89.3.7``); None with a tolerance.
    grade : str or None
        Judge only this grade (None: every grade, finest first).
    tolerance_um : float or None
        A tolerance given by the person instead of the standard's (µm).
    rule : {"iso14253", "simple"}
        The decision rule (ISO 14253-1 with U, or simple acceptance).
    expanded_uncertainty_um : float or None
        U of the flatness (µm), from the uncertainty budget or stated; None: unknown.
    length_mm, width_mm : float or None
        The plate's size (mm) when it differs from the surface's stated size.
    length_basis, basis, asme_form : str
        How the tolerance is computed (see :func:`flatcheck.conformance.tolerance`).
    repeat_foot_radius_mm, repeat_tolerance_um : float or None
        A simulated repeat-reading gage over the map and its tolerance.
    height_step_um : float or None
        The height step the measurement resolves (:meth:`flatcheck.MeasuredSurface.height_step_um`),
        carried into the result for the summary's digits.

    Returns
    -------
    dict
        Everything stated, JSON-ready (heights in µm, lengths in mm): flatness, U, rule, one entry per
        grade with its verdict and acceptance/rejection limits, the finest grade proven, notes.
        ``"input"`` is None for the caller to fill in.
    """
    if standard is None and tolerance_um is None:
        raise InputValueError(
            "no standard and no tolerance given", where="--standard", fix="give --standard S or --tolerance-um T"
        )
    std = None if standard is None else get_standard(standard)
    size = plate_size(hm, length_mm, width_mm)
    fit = minimum_zone(hm.x_mm, hm.y_mm, hm.height_um)
    notes: list[str] = []

    if tolerance_um is not None:
        if tolerance_um <= 0:
            raise InputValueError(f"tolerance {tolerance_um:g} µm is not positive", where="--tolerance-um", fix="give T > 0")
        label = "custom" if grade is None else str(grade)
        lb = length_basis or (std.length_basis if std is not None else "diagonal")
        used = None if std is None else reference_length_mm(size.length_mm, size.width_mm, lb)
        tols = (
            Tolerance(
                standard="custom" if std is None else std.key,
                grade=label,
                tolerance_um=float(tolerance_um),
                length_used_mm=float("nan") if used is None else used,
                length_basis=lb,
                basis="given",
                status="given by the user",
                table_um=None,
                in_range=True,
                notes=("tolerance given by the user, not computed from the standard",),
            ),
        )
    elif grade is not None:
        tols = (
            tolerance(std, grade, size.length_mm, size.width_mm, length_basis=length_basis, basis=basis, asme_form=asme_form),
        )
    else:
        tols = tolerances(std, size.length_mm, size.width_mm, length_basis=length_basis, basis=basis, asme_form=asme_form)

    flatness_um = max(0.0, fit.flatness_um)  # the LP may return -1e-15 for a perfect plane
    verdicts = assess_grades(flatness_um, tols, expanded_uncertainty_um, rule)
    first = verdicts[0].decision
    if not first.uncertainty_known and first.rule_requested == "iso14253-1":
        notes.append(
            "expanded uncertainty unknown: the ISO 14253-1 rule could not be applied; verdicts use simple "
            "acceptance and do not account for measurement uncertainty (evaluate it with --uncertainty, "
            "or state U with --uncertainty-um or --uncertainty-uin)"
        )
    for v in verdicts:
        for n in v.tolerance.notes:
            if n not in notes and not n.startswith("a published table gives"):
                notes.append(n)
    tabulated = [(v.tolerance.grade, v.tolerance.table_um) for v in verdicts if v.tolerance.table_um is not None]
    if tabulated and tols[0].basis == "formula":
        listed = ", ".join(f"{g}: {t:.3g}" for g, t in tabulated)
        notes.append(f"a published table gives for this size (um) {listed}; use --basis table to grade by it")
    if size.source == "point-extent":
        notes.append("plate size taken from the extent of the measured points; tolerances may be too small")
    warnings = size_warnings(hm, size)

    best = None
    if tolerance_um is None and grade is None:
        for v in verdicts:  # finest first
            if v.decision.verdict == CONFORMS:
                best = v.tolerance.grade
                break
    rejected = all(v.decision.verdict == DOES_NOT_CONFORM for v in verdicts)

    repeat = None
    if repeat_foot_radius_mm is not None:
        rr = repeat_reading(hm, repeat_foot_radius_mm)
        repeat = {
            "variation_um": rr.variation_um,
            "foot_radius_mm": rr.foot_radius_mm,
            "positions": rr.positions,
            "tolerance_um": repeat_tolerance_um,
            "verdict": None,
            "rule": None,
            "method": "three-foot gage, feet at 120 degrees on the given radius; reading = probe height minus "
            "mean foot height; range over all positions on the map's grid, two orientations",
        }
        if repeat_tolerance_um is not None:
            from ._decision import decide

            d = decide(rr.variation_um, repeat_tolerance_um, None, "simple")
            repeat["verdict"] = d.verdict
            repeat["rule"] = "simple acceptance (no uncertainty for the repeat reading)"
        notes.append("repeat-reading tolerance values of the standard are not built in (not verified); give your own")
    elif repeat_tolerance_um is not None:
        raise InputValueError(
            "--repeat-tolerance-um needs --repeat-radius-mm", where="--repeat-tolerance-um", fix="give the gage's foot radius"
        )

    length_used = tols[0].length_used_mm
    return {
        "input": None,
        "standard": "custom" if std is None else std.key,
        "standard_title": None if std is None else std.title,
        "length_mm": size.length_mm,
        "width_mm": size.width_mm,
        "size_source": size.source,
        "warnings": warnings,
        "length_used_mm": None if length_used != length_used else length_used,  # NaN -> null
        "length_basis": tols[0].length_basis if std is not None else None,
        "basis": tols[0].basis,
        "formula": None if std is None else std.formula,
        "rounding": None if std is None else std.rounding,
        "flatness_um": flatness_um,
        "flatness_method": "minimum zone (vertical, linear program)",
        "points": hm.n,
        # the height step the measurement resolves (MeasuredSurface.height_step_um): the summary prints
        # heights without an uncertainty to it; None when not known (printed to 1 nm)
        "height_step_um": height_step_um,
        "expanded_uncertainty_um": first.expanded_uncertainty_um,
        "rule": first.rule,
        "rule_requested": first.rule_requested,
        "rule_statement": first.statement,
        "grades": [
            {
                "grade": v.tolerance.grade,
                "tolerance_um": v.tolerance.tolerance_um,
                "verdict": v.decision.verdict,
                "acceptance_limit_um": v.decision.acceptance_limit_um,
                "rejection_limit_um": v.decision.rejection_limit_um,
                "status": v.tolerance.status,
                "basis": v.tolerance.basis,
                "table_tolerance_um": v.tolerance.table_um,
                "in_range": v.tolerance.in_range,
            }
            for v in verdicts
        ],
        "best_grade": best,
        "reject": rejected,
        "repeat_reading": repeat,
        "notes": notes,
    }
