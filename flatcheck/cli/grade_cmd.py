"""``flatcheck grade``: the surface's flatness against standard grades, with a stated decision rule.

Exit status 0 whatever the verdicts. With ``--fail-on-reject`` the exit status is 1 when the
result is a reject: with ``--grade`` or a given tolerance, when that one verdict is
``does-not-conform``; without, when every grade of the standard is ``does-not-conform``
(the surface meets no grade).
"""

from __future__ import annotations

import math
import sys

from enum import Enum
from pathlib import Path

import typer

from ..errors import ExitStatus, InputValueError
from ._app import app
from .common import (
    check_option_ranges,
    refuse_unused,
    Rule,
    auto_trials_option,
    default_auto_trials,
    emit_json,
    load_input,
    progress_bar,
    seed_option,
    u_height_option,
    uncertainty_defaults_option,
    load_lab_defaults,
    Units,
    units_option,
)


class LengthBasis(str, Enum):
    side = "side"
    diagonal = "diagonal"


class Basis(str, Enum):
    formula = "formula"
    table = "table"


class AsmeForm(str, Enum):
    inch = "inch"
    metric = "metric"


def _one_of(um: float | None, uin: float | None, name: str) -> float | None:
    from ..units import UM_PER_UIN
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
    from ..limits import check_range

    kind, what = ("tolerance_um", "the tolerance") if name == "tolerance" else ("uncertainty_um", "the uncertainty")
    if uin is not None:  # the range in µm, named by the option as typed
        return check_range(float(uin) * UM_PER_UIN, kind, where=f"--{name}-uin", name=f"{what} (in µm)")
    return None if um is None else check_range(float(um), kind, where=f"--{name}-um", name=what)


def _check_positive(options: dict) -> None:
    """Refuse a size or tolerance option that is not a positive finite number, naming the option."""
    for opt, v in options.items():
        if v is not None and (not math.isfinite(v) or v <= 0):
            raise InputValueError(f"{v:g} is not a positive number", where=opt, fix=f"give {opt} above 0")


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
    uncertainty_defaults: Path = uncertainty_defaults_option(),
) -> None:
    """Grade the surface's flatness against a standard, with an ISO 14253-1 decision rule."""
    from ._grade_view import _add_uin
    from ..conformance import grade_surface
    from ._grade_view import render_grades
    from ..evaluation import survey_uncertainty

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
    if no_uncertainty:
        refuse_unused({"--trials": trials, "--seed": seed, "--u-height-um": u_height_um},
                      why="with --no-uncertainty", fix="drop --no-uncertainty, or drop the option")
    elif unc is not None:
        stated = "--uncertainty-um" if uncertainty_um is not None else "--uncertainty-uin"
        refuse_unused({"--trials": trials, "--seed": seed, "--u-height-um": u_height_um},
                      why=f"with a stated uncertainty ({stated})", fix=f"drop {stated}, or drop the option")
    _check_positive({"--length-mm": length_mm, "--width-mm": width_mm,
                     "--repeat-radius-mm": repeat_foot_radius_mm, "--repeat-tolerance-um": repeat_tolerance_um})
    from ..limits import check_range

    for opt, v in (("--length-mm", length_mm), ("--width-mm", width_mm)):  # docs/limits.md, before any work
        if v is not None:
            check_range(v, "length_mm", where=opt, name="the plate's size")
    if u_height_um is not None:
        check_range(u_height_um, "uncertainty_um", where="--u-height-um", name="the uncertainty")
    check_option_ranges([("--repeat-radius-mm", repeat_foot_radius_mm, "length_mm", "the gage's foot radius"),
                         ("--repeat-tolerance-um", repeat_tolerance_um, "tolerance_um", "the repeat-reading tolerance")])
    if trials is not None:
        check_range(trials, "trials", where="--trials", name="the number of trials")
    loaded = load_input(input)
    hm = loaded.heightmap
    lab = load_lab_defaults(uncertainty_defaults)
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
                mc = survey_uncertainty(loaded, trials=trials, seed=seed, u_height_um=u_height_um, progress=advance,
                                        lab_defaults=lab)
        except InputValueError as exc:
            if monte_carlo:
                raise
            mc_note = f"U not evaluated: {exc.message}"
        else:
            unc = mc.minimum_zone.expanded_um
            mc_note = mc.note
    report = grade_surface(
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
        height_step_um=loaded.height_step_um(lab=lab),
    )
    report["input"] = str(input)
    if length_basis is not None and length_basis.value == "diagonal" and standard and standard.lower().startswith("asme"):
        report.setdefault("notes", []).append(
            "--length-basis diagonal changes nothing for ASME B89.3.7: its tolerance formula is defined on the "
            "plate's diagonal anyway (the option chooses the length for DIN 876 only)")
    if mc_note is None and unc is None:
        mc_note = ("U not evaluated (--no-uncertainty)" if no_uncertainty else
                   "U not evaluated: a height map carries no reading uncertainty (give --u-height-um or --uncertainty-um)")
    if mc_note is not None:
        report["uncertainty_note"] = mc_note
        report.setdefault("notes", []).append(mc_note)
    units_value = units.value
    if units_value == "in":
        _add_uin(report)
    for w in report.get("warnings", ()):  # one line each on standard error, like errors
        sys.stderr.write(f"flatcheck: warning: {' '.join(str(w).split())}\n")
    if json_out:
        emit_json(report)
    else:
        render_grades(report, units_value)
    if fail_on_reject and report["reject"]:
        raise typer.Exit(code=int(ExitStatus.REJECT))
