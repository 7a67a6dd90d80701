"""``flatcheck demo``: the whole job on the bundled sample survey, ending with its PDF report."""

from __future__ import annotations

from importlib import resources
from pathlib import Path

import typer

from ..errors import OutputError
from ._app import app
from .common import Units, load_surface, stdout_console

#: The bundled sample (a copy of sample_readings/plate-KY-P3-2024-03-11.toml, shipped as package data).
DEMO_SAMPLE = "plate-KY-P3-2024-03-11.toml"
#: The files the demo writes in its folder; nothing else there is ever touched.
DEMO_FILES = ("flatcheck-demo-report.pdf", "flatcheck-demo-survey.toml")
DEMO_STANDARD = "din-876"
DEMO_SEED = 20240311  # fixed so every run of the demo prints the same uncertainty


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
    units: Units = typer.Option(Units.um, "--units", help="Display units: um or in."),
) -> None:
    """Reduce the bundled sample survey, print its flatness, closure and grade, and write its PDF report."""
    from ..io.atomic import write_bytes_atomic
    from ..io.survey_toml import read_survey
    from ..units import height_unit_label, um_to
    from .report_cmd import make_report

    if out.exists() and not out.is_dir():
        raise OutputError(f"{out} exists and is not a folder", where="--out", fix="choose another folder")
    src = sample_path()
    out.mkdir(parents=True, exist_ok=True)
    replaced = [name for name in DEMO_FILES if (out / name).exists()]
    survey_copy = out / DEMO_FILES[1]
    write_bytes_atomic(survey_copy, src.read_bytes())
    hm, red = load_surface(survey_copy)
    survey = read_survey(survey_copy)
    pdf = out / DEMO_FILES[0]
    content, files = make_report(hm, red, output=pdf, png=None, units=units.value, show_progress=True,
                                 survey=survey, standard=DEMO_STANDARD, seed=DEMO_SEED)

    hu = height_unit_label(units.value)

    def h(v):
        return "not evaluated" if v is None else f"{um_to(v, units.value):.3f} {hu}"

    con = stdout_console()
    ident = dict(content.identity)
    con.print("[bold]flatcheck demo[/bold]: a fictional tool room's granite plate, surveyed before lapping")
    con.print(f"surface    {ident.get('surface')} ({ident.get('identity')}), {ident.get('size (length x width)')}")
    meth = dict(content.method)
    con.print(f"method     {meth.get('instrument')}; {meth.get('layout')}; reduction: {meth.get('reduction')}")
    con.print(f"flatness   minimum zone [bold]{h(content.mz.flatness_um)}[/bold]  U = {h(content.u_mz_um)}")
    con.print(f"           least squares {h(content.ls.flatness_um)}  U = {h(content.u_ls_um)}"
              "  (U: k = 2 equivalent, Monte Carlo)")
    for label, _x, _y, v in content.closures:
        con.print(f"closure    {label}: {h(v)} (classic Union Jack centre closure)")
    if content.residual_um is not None:
        import numpy as np

        rms = float(np.sqrt(np.mean(np.asarray(content.residual_um) ** 2)))
        con.print(f"residuals  rms {h(rms)} over {np.size(content.residual_um)} readings")
    best = next((g for g in content.grades if g.verdict == "conforms"), None)
    std = content.grades[0].standard if content.grades else DEMO_STANDARD
    if best is not None:
        con.print(f"grade      {std}: finest grade proven: [bold]{best.grade}[/bold] "
                  f"(tolerance {h(best.tolerance_um)}{'; ' + best.note if best.note else ''})")
    else:
        con.print(f"grade      {std}: no grade proven")
    con.print(f"rule       {content.decision_rule}", soft_wrap=True)
    con.print(f"report     {files.pdf.resolve()} ({files.pages} pages)")
    if replaced:
        con.print(f"           replaced the earlier demo files in {out}: {', '.join(replaced)}")
