"""``flatcheck grade``: the surface's flatness against standard grades, with a stated decision rule.

Exit status 0 whatever the verdicts. With ``--fail-on-reject`` the exit status is 1 when the
result is a reject: with ``--grade`` or a given tolerance, when that one verdict is
``does-not-conform``; without, when every grade of the standard is ``does-not-conform``
(the surface meets no grade).
"""

from __future__ import annotations

import math

from enum import Enum
from pathlib import Path

import typer
from rich.table import Table

from ..conformance import CONFORMS, DOES_NOT_CONFORM, assess_grades
from ..errors import ExitStatus, InputValueError
from ..form import minimum_zone
from ..conformance import (
    Tolerance,
    get_standard,
    plate_size,
    reference_length_mm,
    repeat_reading,
    tolerance,
    tolerances,
)
from ..units import MM_PER_INCH, UM_PER_UIN, format_height, height_unit_label, um_to
from ._app import app
from ..evaluation import survey_uncertainty
from .common import (
    auto_trials_option,
    default_auto_trials,
    emit_json,
    load_input,
    progress_bar,
    seed_option,
    stdout_console,
    u_height_option,
    Units,
    units_option,
)


class Rule(str, Enum):
    iso14253 = "iso14253"
    simple = "simple"


class LengthBasis(str, Enum):
    side = "side"
    diagonal = "diagonal"


class Basis(str, Enum):
    formula = "formula"
    table = "table"


class AsmeForm(str, Enum):
    inch = "inch"
    metric = "metric"


_SIZE_SOURCE_TEXT = {
    "option": "given with --length-mm/--width-mm",
    "surface": "the surveyed surface's stated size",
    "point-extent": "the extent of the measured points (give --length-mm/--width-mm for the plate's own size)",
}


def _one_of(um: float | None, uin: float | None, name: str) -> float | None:
    if um is not None and uin is not None:
        raise InputValueError(
            f"both --{name}-um and --{name}-uin given", where=f"--{name}-um/--{name}-uin", fix="give only one"
        )
    for opt, v in ((f"--{name}-um", um), (f"--{name}-uin", uin)):
        if v is None:
            continue
        # a tolerance must be above 0; an expanded uncertainty may be 0 (not stated as negligible, but allowed)
        bad = not math.isfinite(v) or (v <= 0 if name == "tolerance" else v < 0)
        if bad:
            need = "a positive number" if name == "tolerance" else "a number 0 or above"
            raise InputValueError(f"{name} {v:g} is not {need}", where=opt, fix=f"give {opt} as {need}")
    if uin is not None:
        return float(uin) * UM_PER_UIN  # 1 µin = 0.0254 µm exactly
    return None if um is None else float(um)


def _check_positive(options: dict) -> None:
    """Refuse a size or tolerance option that is not a positive finite number, naming the option."""
    for opt, v in options.items():
        if v is not None and (not math.isfinite(v) or v <= 0):
            raise InputValueError(f"{v:g} is not a positive number", where=opt, fix=f"give {opt} above 0")


def build_grade_report(
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
) -> dict:
    """Everything the command reports, as a JSON-ready dict (heights in µm, lengths in mm).

    ``expanded_uncertainty_um`` feeds the decision directly; a Monte Carlo evaluation can
    supply it instead of the option.
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
            from ..conformance import decide

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
        "length_used_mm": None if length_used != length_used else length_used,  # NaN -> null
        "length_basis": tols[0].length_basis if std is not None else None,
        "basis": tols[0].basis,
        "formula": None if std is None else std.formula,
        "rounding": None if std is None else std.rounding,
        "flatness_um": flatness_um,
        "flatness_method": "minimum zone (vertical, linear program)",
        "points": hm.n,
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


def _add_uin(report: dict) -> None:
    """Add µin values beside the pinned µm keys (1 µin = 0.0254 µm exactly)."""
    report["flatness_uin"] = um_to(report["flatness_um"], "in")
    u = report["expanded_uncertainty_um"]
    report["expanded_uncertainty_uin"] = None if u is None else um_to(u, "in")
    for g in report["grades"]:
        g["tolerance_uin"] = um_to(g["tolerance_um"], "in")
        g["acceptance_limit_uin"] = um_to(g["acceptance_limit_um"], "in")
        g["rejection_limit_uin"] = um_to(g["rejection_limit_um"], "in")
    if report["repeat_reading"] is not None:
        rr = report["repeat_reading"]
        rr["variation_uin"] = um_to(rr["variation_um"], "in")


_SHORT_STATUS = {"secondary source": "secondary", "given by the user": "user"}
_VERDICT_STYLE = {"conforms": "green", "does-not-conform": "red", "undecided": "yellow"}


def render_grades(report: dict, units: str) -> None:
    con = stdout_console()
    hu = height_unit_label(units)

    def h(v):
        return "-" if v is None else format_height(v, units, unit=False)

    title = report["standard_title"] or "custom tolerance"
    con.print(f"[bold]Grading against {title}[/bold]  ({report['input']})")
    con.print(f"Flatness F = {h(report['flatness_um'])} {hu} ({report['flatness_method']}, {report['points']} points)")
    u = report["expanded_uncertainty_um"]
    con.print(f"Expanded uncertainty U = {h(u)} {hu}" if u is not None else "Expanded uncertainty U: unknown")
    table = Table(title_justify="left")
    table.add_column("grade")
    table.add_column(f"T {hu}", justify="right")
    table.add_column("accept F <=", justify="right")
    table.add_column("reject F >", justify="right")
    table.add_column("verdict", no_wrap=True)
    table.add_column("value source")
    for g in report["grades"]:
        style = _VERDICT_STYLE[g["verdict"]]
        src = _SHORT_STATUS.get(g["status"], g["status"]) + ("" if g["in_range"] else ", out of range")
        table.add_row(
            g["grade"],
            h(g["tolerance_um"]),
            h(g["acceptance_limit_um"]),
            h(g["rejection_limit_um"]),
            f"[{style}]{g['verdict']}[/{style}]",
            src,
        )
    con.print(table)
    con.print(f"Rule: {report['rule_statement']}")
    if report["length_used_mm"] is not None:
        which = {"side": "longer side", "diagonal": "diagonal"}[report["length_basis"]]
        inch = f" = {report['length_used_mm'] / MM_PER_INCH:.2f} in" if units == "in" else ""
        con.print(
            f"Length used: {report['length_used_mm']:.1f} mm{inch} ({which}) of a {report['length_mm']:g} x "
            f"{report['width_mm']:g} mm plate; size: {_SIZE_SOURCE_TEXT[report['size_source']]}"
        )
    if report["formula"] and report["basis"] == "table":
        con.print(f"Values from a published table (secondary); the standard's formula: {report['formula']}")
    elif report["formula"]:
        con.print(f"Formula: {report['formula']}; rounding: {report['rounding']}")
    if report["best_grade"] is not None:
        how = "proven (ISO 14253-1)" if report["rule"] == "iso14253-1" else "under simple acceptance"
        best = next(g for g in report["grades"] if g["grade"] == report["best_grade"])
        outside = "" if best["in_range"] else " (the plate is outside the standard's size range: indicative only)"
        con.print(f"Finest grade that conforms, {how}: [bold]{report['best_grade']}[/bold]{outside}")
    rr = report["repeat_reading"]
    if rr is not None:
        extra = "" if rr["verdict"] is None else f" against {h(rr['tolerance_um'])} {hu}: {rr['verdict']} ({rr['rule']})"
        con.print(f"Repeat reading (simulated gage, feet at {rr['foot_radius_mm']:g} mm): {h(rr['variation_um'])} {hu}{extra}")
    for n in report["notes"]:
        con.print(f"[dim]note:[/dim] {n}")


@app.command("grade")
def grade_cmd(
    input: Path = typer.Argument(..., help="Survey TOML or height-map CSV (x_mm,y_mm,height_um)."),
    standard: str = typer.Option(None, "--standard", "-s", help="din-876, iso-8512-2 or asme-b89.3.7 (aliases allowed)."),
    grade: str = typer.Option(None, "--grade", "-g", help="Judge only this grade (default: every grade)."),
    tolerance_um: float = typer.Option(None, "--tolerance-um", help="Use this tolerance in µm instead of the standard's."),
    tolerance_uin: float = typer.Option(None, "--tolerance-uin", help="Use this tolerance in µin instead of the standard's."),
    rule: Rule = typer.Option(Rule.iso14253, "--rule", help="iso14253 (guard band U, default) or simple (F <= T)."),
    uncertainty_um: float = typer.Option(None, "--uncertainty-um", help="Expanded uncertainty U of the flatness in µm."),
    uncertainty_uin: float = typer.Option(None, "--uncertainty-uin", help="Expanded uncertainty U in µin."),
    units: Units = units_option(),
    json_out: bool = typer.Option(False, "--json", help="Print one JSON object on stdout."),
    fail_on_reject: bool = typer.Option(False, "--fail-on-reject", help="Exit 1 when the verdict is a reject."),
    length_mm: float = typer.Option(None, "--length-mm", help="Plate length in mm (with --width-mm)."),
    width_mm: float = typer.Option(None, "--width-mm", help="Plate width in mm (with --length-mm)."),
    length_basis: LengthBasis = typer.Option(None, "--length-basis", help="DIN 876 only: side (default) or diagonal."),
    basis: Basis = typer.Option(Basis.formula, "--basis", help="formula (default, any size) or table (tabulated sizes)."),
    asme_form: AsmeForm = typer.Option(AsmeForm.inch, "--asme-form", help="ASME formula in inch form (default) or metric."),
    repeat_foot_radius_mm: float = typer.Option(
        None, "--repeat-radius-mm", help="Simulate a repeat-reading gage whose three feet sit at this radius (mm)."
    ),
    repeat_tolerance_um: float = typer.Option(None, "--repeat-tolerance-um", help="Repeat-reading tolerance in µm."),
    monte_carlo: bool = typer.Option(
        False, "--uncertainty",
        help="Evaluate U by Monte Carlo (JCGM 101), as 'flatcheck reduce --uncertainty'; an error if it cannot be "
        "had (default: evaluated whenever the input allows).",
    ),
    no_uncertainty: bool = typer.Option(
        False, "--no-uncertainty", help="Do not evaluate U: only a stated U, or simple acceptance, decides."
    ),
    trials: int | None = auto_trials_option(),
    seed: int = seed_option(),
    u_height_um: float = u_height_option(),
) -> None:
    """Grade the surface's flatness against a standard, with an ISO 14253-1 decision rule."""
    tol = _one_of(tolerance_um, tolerance_uin, "tolerance")
    unc = _one_of(uncertainty_um, uncertainty_uin, "uncertainty")
    if monte_carlo and unc is not None:
        raise InputValueError(
            "both --uncertainty and a stated uncertainty given", where="--uncertainty", fix="give only one"
        )
    if monte_carlo and no_uncertainty:
        raise InputValueError(
            "both --uncertainty and --no-uncertainty given", where="--no-uncertainty", fix="give only one"
        )
    _check_positive({"--length-mm": length_mm, "--width-mm": width_mm,
                     "--repeat-radius-mm": repeat_foot_radius_mm, "--repeat-tolerance-um": repeat_tolerance_um})
    loaded = load_input(input)
    hm = loaded.heightmap
    mc_note = None
    # By default U comes from the flatness engine whenever the input carries what it needs (a survey's
    # readings, or a height map with --u-height-um), so that the ISO 14253-1 rule can decide.
    automatic = not (monte_carlo or no_uncertainty or unc is not None) and (
        loaded.survey is not None or u_height_um is not None)
    if monte_carlo or automatic:
        try:
            if trials is None:
                trials = default_auto_trials(hm.x_mm.size)
            with progress_bar("Monte Carlo", trials) as advance:
                mc = survey_uncertainty(loaded, trials=trials, seed=seed, u_height_um=u_height_um, progress=advance)
        except InputValueError as exc:
            if monte_carlo:
                raise
            mc_note = f"U not evaluated: {exc.message}"
        else:
            unc = mc.minimum_zone.expanded_um
            mc_note = mc.note
    report = build_grade_report(
        hm,
        standard=standard,
        grade=grade,
        tolerance_um=tol,
        rule=rule.value,
        expanded_uncertainty_um=unc,
        length_mm=length_mm,
        width_mm=width_mm,
        length_basis=None if length_basis is None else length_basis.value,
        basis=basis.value,
        asme_form=asme_form.value,
        repeat_foot_radius_mm=repeat_foot_radius_mm,
        repeat_tolerance_um=repeat_tolerance_um,
    )
    report["input"] = str(input)
    if mc_note is None and unc is None:
        mc_note = ("U not evaluated (--no-uncertainty)" if no_uncertainty else
                   "U not evaluated: a height map carries no reading uncertainty (give --u-height-um or --uncertainty-um)")
    if mc_note is not None:
        report["uncertainty_note"] = mc_note
        report.setdefault("notes", []).append(mc_note)
    units_value = units.value
    if units_value == "in":
        _add_uin(report)
    if json_out:
        emit_json(report)
    else:
        render_grades(report, units_value)
    if fail_on_reject and report["reject"]:
        raise typer.Exit(code=int(ExitStatus.REJECT))
