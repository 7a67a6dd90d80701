"""``flatcheck demo``: the whole job on the bundled sample survey, ending with its PDF report."""

from __future__ import annotations

from importlib import resources
from pathlib import Path

import typer

from ..errors import OutputError
from ._app import app
from .common import load_input, progress_bar, stdout_console, Units, units_option

#: The bundled sample (a copy of sample_readings/plate-KY-P3-2024-03-11.toml, shipped as package data).
DEMO_SAMPLE = "plate-KY-P3-2024-03-11.toml"
#: The files the demo writes in its folder; nothing else there is ever touched.
DEMO_FILES = ("flatcheck-demo-report.pdf", "flatcheck-demo-survey.toml")
DEMO_STANDARD = "din-876"
DEMO_SEED = 20240311  # fixed so every run of the demo prints the same uncertainty
#: Monte Carlo trials of the demo: enough for U to about 1 % (JCGM 101 would ask 2e5 for stable interval ends).
DEMO_TRIALS = 20_000


def sample_path() -> Path:
    """Path of the bundled sample survey file."""
    ref = resources.files("flatcheck") / "data" / DEMO_SAMPLE
    path = Path(str(ref))
    if not path.is_file():
        raise OutputError(f"the bundled sample {DEMO_SAMPLE} is missing from the installation",
                          fix="reinstall flatcheck (pip install .)")
    return path


@app.command("demo")
def demo_cmd(
    out: Path = typer.Option(Path("flatcheck-demo"), "--out", help="Folder for the demo's report (created if needed)."),
    units: Units = units_option(),
) -> None:
    """Reduce the bundled sample as 'flatcheck reduce' does, grade it, and write its PDF report."""
    from ..evaluation import evaluate_surface
    from ..io import write_bytes_atomic
    from ..conformance import grade_surface
    from ._grade_view import render_grades
    from ._reduce_view import render_reduction
    from ._report_job import check_outputs, make_report

    if out.exists() and not out.is_dir():
        raise OutputError(f"{out} exists and is not a folder", where="--out", fix="choose another folder")
    src = sample_path()
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:  # no permission, read-only or special file system, a file in the way
        raise OutputError(
            f"cannot create the folder {out}: {exc.strerror or exc}", where="--out",
            fix="choose a folder you can write to (e.g. --out flatcheck-demo)",
        ) from None
    pdf = out / DEMO_FILES[0]
    check_outputs(pdf, None, DEMO_STANDARD)
    replaced = [name for name in DEMO_FILES if (out / name).exists()]
    survey_copy = out / DEMO_FILES[1]
    write_bytes_atomic(survey_copy, src.read_bytes())
    loaded = load_input(survey_copy)
    with progress_bar("Monte Carlo", DEMO_TRIALS) as advance:
        mc = dict(trials=DEMO_TRIALS, seed=DEMO_SEED, u_height_um=None, progress=advance)
        ev = evaluate_surface(loaded, window="auto", monte_carlo=mc)

    con = stdout_console()
    con.print("[bold]flatcheck demo[/bold]: a fictional tool room's granite plate, surveyed before lapping")
    con.print(f"[dim]1. as 'flatcheck reduce {survey_copy} --uncertainty --seed {DEMO_SEED} --trials {DEMO_TRIALS}' "
              "states it:[/dim]", soft_wrap=True)
    render_reduction(ev, ev.to_dict(), units.value, None)

    con.print()
    con.print(f"[dim]2. graded as 'flatcheck grade {survey_copy} --standard {DEMO_STANDARD} --uncertainty "
              f"--seed {DEMO_SEED} --trials {DEMO_TRIALS}' grades it:[/dim]", soft_wrap=True)
    grading = grade_surface(
        loaded.heightmap, standard=DEMO_STANDARD, grade=None, tolerance_um=None, rule="iso14253",
        expanded_uncertainty_um=ev.uncertainty.minimum_zone.expanded_um, length_mm=None, width_mm=None,
        length_basis=None, basis="formula", asme_form="inch",
    )
    grading["input"] = str(survey_copy)
    render_grades(grading, units.value)

    content, files = make_report(ev, output=pdf, png=None, units=units.value, show_progress=True,
                                 standard=DEMO_STANDARD)
    con.print()
    con.print(f"[dim]3. the report, as 'flatcheck report {survey_copy} -o {pdf} --standard {DEMO_STANDARD} "
              f"--seed {DEMO_SEED} --trials {DEMO_TRIALS}' writes it:[/dim]", soft_wrap=True)
    con.print(f"report     {files.pdf.resolve()} ({files.pages} pages)", soft_wrap=True)
    if replaced:
        con.print(f"           replaced the earlier demo files in {out}: {', '.join(replaced)}")
