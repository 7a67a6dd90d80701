"""``flatcheck report``: a multi-page PDF record of one surface, and optionally its pictures as PNG."""

from __future__ import annotations

from pathlib import Path

import typer

from ..errors import InputValueError, OutputError
from ._app import app
from .common import Units, emit_json, load_surface, progress_bar, stdout_console


def carriage_from_options(bearing: Path | None, pad: str | None, gap_um: float | None):
    """The carriage (and its limits) asked for by --bearing or --pad/--gap-um, or ``None``."""
    if bearing is None and pad is None and gap_um is None:
        return None, None, None, None
    from .bearing_cmd import build_carriage

    return build_carriage(bearing=bearing, pad=pad, gap_um=gap_um, kind="porous", y_mm=None,
                          travel_start_mm=None, travel_end_mm=None, step_mm=None)


def make_report(hm, red, *, output: Path, png: Path | None, units: str, show_progress: bool, **analysis):
    """Analyse and write the report with a progress bar on stderr; returns (content, files)."""
    from ..report import analyse, page_titles, write_report

    survey = analysis.pop("survey", None)
    folder = output.parent if str(output.parent) else Path(".")
    if not folder.is_dir():
        raise OutputError(f"cannot write {output}: folder {folder} does not exist", where="-o",
                          fix="create the folder or choose another path")
    if analysis.get("standard") is not None:
        from ..tolerance import get_standard

        get_standard(analysis["standard"])  # an unknown name fails here, before any work
    content = analyse(hm, survey=survey, reduction=red, **analysis)  # errors surface before any bar is drawn
    n = len(page_titles(content))
    with progress_bar("drawing pages", n, enabled=show_progress) as advance:
        files = write_report(output, content, units=units, png_dir=png, on_page=lambda: advance(1))
    return content, files


@app.command("report")
def report_cmd(
    input: Path = typer.Argument(..., help="Survey (.toml) or height map (.csv).", show_default=False),
    output: Path = typer.Option(..., "-o", "--output", help="PDF file to write (replaced if it exists)."),
    png: Path | None = typer.Option(None, "--png", help="Also write each picture as a PNG file into this folder."),
    standard: str | None = typer.Option(None, "--standard", help="Grade against: din-876, iso-8512-2, asme-b89.3.7."),
    rule: str = typer.Option("iso14253", "--rule", help="Decision rule for grades: iso14253 or simple."),
    bearing: Path | None = typer.Option(None, "--bearing", help="Bearing description (.toml): pads and travel."),
    pad: str | None = typer.Option(None, "--pad", help="One pad, e.g. 80x40 (mm) or d50 (diameter, mm)."),
    gap_um: float | None = typer.Option(None, "--gap-um", help="Nominal air gap of the pad, µm."),
    target_um: float | None = typer.Option(None, "--target-um", help="Target flatness, µm: adds a lapping plan."),
    units: Units = typer.Option(Units.um, "--units", help="Display units: um (µm, mm) or in (µin, inches)."),
    seed: int | None = typer.Option(None, "--seed", help="Seed of the Monte Carlo uncertainty (reproducible runs)."),
    trials: int | None = typer.Option(None, "--trials", help="Monte Carlo trials for the uncertainty."),
    method: str = typer.Option("least-squares", "--method", help="Survey reduction: least-squares or moody."),
    json_out: bool = typer.Option(False, "--json", help="Print one JSON object instead of the summary."),
) -> None:
    """Write a PDF report: identity, method, map, profiles, flatness with uncertainty, grades, cautions."""
    if output.suffix.lower() != ".pdf":
        raise OutputError(f"{output} does not end in .pdf", where="-o", fix="name the report file *.pdf")
    if png is not None and not png.is_dir():
        raise OutputError(f"{png} is not an existing folder", where="--png", fix="create the folder first")
    if trials is not None and trials < 1:
        raise InputValueError(f"--trials {trials} must be at least 1", where="--trials", fix="give e.g. --trials 2000")
    carriage, fraction, marginal, budget = carriage_from_options(bearing, pad, gap_um)
    hm, red = load_surface(input, method=method)
    survey = None
    if red is not None:
        from ..io.survey_toml import read_survey

        survey = read_survey(input)
    content, files = make_report(
        hm, red, output=output, png=png, units=units.value, show_progress=not json_out,
        survey=survey, standard=standard, rule=rule, carriage=carriage, gap_fraction=fraction,
        marginal_from=marginal, budget=budget, target_um=target_um, seed=seed, trials=trials,
    )
    if json_out:
        emit_json({
            "command": "report",
            "input": str(input),
            "pdf": str(files.pdf),
            "pages": files.pages,
            "png": [str(p) for p in files.pngs],
            "flatness_mz_um": content.mz.flatness_um,
            "flatness_ls_um": content.ls.flatness_um,
            "u_mz_um": content.u_mz_um,
            "grades": [{"grade": g.grade, "tolerance_um": g.tolerance_um, "verdict": g.verdict} for g in content.grades],
            "bearing_verdict": None if content.bearing is None else content.bearing.verdict,
        })
        return
    con = stdout_console()
    con.print(f"[bold]Report[/bold] {files.pdf} ({files.pages} pages) for {content.heightmap.label}")
    if files.pngs:
        con.print(f"pictures: {len(files.pngs)} PNG files in {png}")
