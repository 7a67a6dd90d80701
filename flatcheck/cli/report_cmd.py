"""``flatcheck report``: a multi-page PDF record of one surface, and optionally its pictures as PNG.

The numbers come from the shared evaluation (:func:`flatcheck.evaluation.evaluate_surface`),
so for the same input, ``--seed`` and ``--trials`` the report states what ``flatcheck reduce
--uncertainty`` and ``flatcheck grade --uncertainty`` state.
"""

from __future__ import annotations

from pathlib import Path

import typer

from ._app import app
from .common import (
    refuse_unused,
    GAP_FRACTION_HELP,
    TARGET_GAP_HELP,
    Method,
    Rule,
    auto_trials_option,
    default_auto_trials,
    emit_json,
    guard_band_option,
    load_input,
    refuse_overwriting_inputs,
    seed_option,
    stdout_console,
    u_height_option,
    uncertainty_defaults_option,
    load_lab_defaults,
    Units,
    units_option,
    window_option,
)


@app.command("report")
def report_cmd(
    input: Path = typer.Argument(..., help="Survey (.toml) or height map (.csv).", show_default=False),
    output: Path = typer.Option(..., "-o", "--output", help="PDF file to write (replaced if it exists)."),
    png: Path | None = typer.Option(
        None, "--png", help="Also write each picture as a PNG file into this folder (created if needed)."),
    standard: str | None = typer.Option(None, "--standard", help="Grade against: din-876, iso-8512-2, asme-b89.3.7."),
    rule: Rule = typer.Option(Rule.iso14253, "--rule", help="Decision rule for grades: iso14253 or simple."),
    bearing: Path | None = typer.Option(None, "--bearing", help="Bearing description (.toml): pads and travel."),
    pad: str | None = typer.Option(None, "--pad", help="One pad, e.g. 80x40 (mm) or d50 (diameter, mm)."),
    gap_um: float | None = typer.Option(None, "--gap-um", help="Nominal air gap of the pad, µm."),
    window: str = window_option(),
    target_um: float | None = typer.Option(None, "--target-um", help="Target flatness, µm: adds a lapping plan."),
    target_grade: str | None = typer.Option(None, "--target-grade", help="Target as STANDARD:GRADE, e.g. din-876:0."),
    target_gap_um: float | None = typer.Option(None, "--target-gap-um", help=TARGET_GAP_HELP),
    gap_fraction: float | None = typer.Option(None, "--gap-fraction", help=GAP_FRACTION_HELP),
    lap_diameter_mm: float | None = typer.Option(None, "--lap-diameter-mm", help="Round lap diameter (mm)."),
    lap_size_mm: str | None = typer.Option(
        None, "--lap-size-mm", help="Rectangular lap LENGTHxWIDTH (mm), length along x."),
    rate_um_per_min: float | None = typer.Option(
        None, "--rate-um-per-min", help="Your calibrated removal rate under the lap (default: assumed, said so)."),
    rate_um_per_pass: float | None = typer.Option(
        None, "--rate-um-per-pass", help="Removal per pass (times then in passes)."),
    strokes_per_pass: int | None = typer.Option(
        None, "--strokes-per-pass", help="Strokes in one pass (with a rate per pass)."),
    stroke_mm: float = typer.Option(0.0, "--stroke-mm", help="Length of the lap's working strokes about each spot (mm)."),
    guard_band: str | None = guard_band_option(),
    units: Units = units_option(),
    no_uncertainty: bool = typer.Option(
        False, "--no-uncertainty", help="Leave out the Monte Carlo uncertainty of the flatness (JCGM 101)."),
    seed: int | None = seed_option(),
    trials: int | None = auto_trials_option(),
    u_height_um: float | None = u_height_option(),
    uncertainty_defaults: Path = uncertainty_defaults_option(),
    method: Method = typer.Option(Method.least_squares, "--method", help="Survey reduction: least-squares or moody."),
    db: Path | None = typer.Option(
        None, "--db", help="Register holding this survey: the report starts with its calibration certificate."),
    prefix: str | None = typer.Option(
        None, "--prefix", help="With --db: certificate-number prefix, e.g. KY (remembered by the register)."),
    json_out: bool = typer.Option(False, "--json", help="Print one JSON object instead of the summary."),
) -> None:
    """Write a PDF report: identity, method, map, local flatness, profiles, flatness with uncertainty, grades."""
    from ._report_job import StatusLine
    from ._report_job import carriage_from_options
    from ..lapping import check_lap_options
    from ._report_job import check_outputs
    from ._report_job import evaluate_for_report
    from ._report_job import lapping_from_options
    from ._report_job import make_report
    from ._report_job import refuse_pictures_over_inputs
    from ._report_job import report_json

    from ..lapping import parse_guard_band

    parse_guard_band(guard_band)  # a bad --guard-band is refused before any work
    if no_uncertainty and db is None:
        refuse_unused({"--trials": trials, "--seed": seed, "--u-height-um": u_height_um},
                      why="with --no-uncertainty", fix="drop --no-uncertainty, or drop the option")
    check_outputs(output, png, standard)
    refuse_overwriting_inputs({"-o": output}, [input, bearing, uncertainty_defaults, db])
    refuse_pictures_over_inputs(png, [input, bearing])
    check_lap_options(lap_diameter_mm=lap_diameter_mm, lap_size_mm=lap_size_mm, rate_um_per_min=rate_um_per_min,
                      rate_um_per_pass=rate_um_per_pass, strokes_per_pass=strokes_per_pass, stroke_mm=stroke_mm)
    carriage, fraction, marginal, budget = carriage_from_options(bearing, pad, gap_um)
    with StatusLine(not json_out) as status:
        status.say(f"reading {input.name}")
        loaded = load_input(input, method=method.value)
        from ._report_job import certificate_for_report

        certificate, trials, seed = certificate_for_report(db, input, prefix=prefix, standard=standard,
                                                           method=method.value, trials=trials, seed=seed)
        lapping = lapping_from_options(
            loaded.heightmap, target_um=target_um, target_grade=target_grade, lap_diameter_mm=lap_diameter_mm,
            lap_size_mm=lap_size_mm, rate_um_per_min=rate_um_per_min, rate_um_per_pass=rate_um_per_pass,
            strokes_per_pass=strokes_per_pass, stroke_mm=stroke_mm, target_gap_um=target_gap_um,
            gap_fraction=gap_fraction,
        )
        if trials is None:
            trials = default_auto_trials(loaded.heightmap.x_mm.size)
        ev, why_not = evaluate_for_report(loaded, window=window, uncertainty=not no_uncertainty, trials=trials,
                                          seed=seed, u_height_um=u_height_um, show_progress=not json_out,
                                          status=status, lab_defaults=load_lab_defaults(uncertainty_defaults))
        if lapping:  # a limit to prove is aimed below by the report's own U (ISO 14253-1), as 'flatcheck lap'
            from ._report_job import guard_band_lapping

            lapping = guard_band_lapping(lapping, ev, why_not, target_um=target_um, target_grade=target_grade,
                                         target_gap_um=target_gap_um, guard_band=guard_band, units=units.value)
    content, files = make_report(
        ev, output=output, png=png, units=units.value, show_progress=not json_out, certificate=certificate,
        standard=standard, rule=rule.value, carriage=carriage, gap_fraction=fraction,
        marginal_from=marginal, budget=budget, uncertainty_missing=why_not, window=window, **lapping,
    )
    if json_out:
        emit_json(report_json(content, files, input))
        return
    from rich.markup import escape

    con = stdout_console()
    con.print(f"[bold]Report[/bold] {escape(str(files.pdf))} ({files.pages} pages) for {escape(content.heightmap.label)}")
    if certificate is not None:
        con.print(escape(f"calibration certificate {certificate.number} (register {db}), "
                         f"issued {certificate.issued_on}"))
    if files.pngs:
        con.print(f"pictures: {len(files.pngs)} PNG files in {escape(str(png))} (each figure on its own)")


