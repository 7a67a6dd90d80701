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
#: The bundled guideway (a copy of sample_readings/guideway-KY-G2/) and the pad face's fringe photograph (a copy of
#: sample_readings/padface-KY-B4-fringes.png), shown after the plate.
DEMO_GUIDEWAY = ("guideway-KY-G2", "body.toml", "carriage.toml")
DEMO_FRINGES = "padface-KY-B4-fringes.png"
#: The photograph's light, scale and contact edge, as sample_readings/make_optics_samples.py made it.
DEMO_FRINGE_OPTIONS = dict(wavelength_nm=587.56, pixel_mm=0.25, contact_edge="left")
#: Film mesh of the demo's carriage: 16 cells a side (the command's default is 32) keeps the demo short; on the
#: sample the verdict and its pad are the same and the least film differs by 0.03 µm (measured when it was chosen).
DEMO_FILM_MESH = 16


def _written_by_a_demo(path: Path, sample: Path) -> bool:
    """True when ``path`` is what an earlier demo wrote: the bundled sample's copy, or a report flatcheck made."""
    try:
        if path.name == DEMO_FILES[1]:
            return path.is_file() and path.read_bytes() == sample.read_bytes()
        if not path.is_file() or path.stat().st_size > 64 * 1024 * 1024:
            return False
        data = path.read_bytes()
    except OSError:
        return False
    # the report's PDF names its maker in the document information (flatcheck.output.PdfBook)
    return data.startswith(b"%PDF-") and b"/Creator (flatcheck)" in data


def sample_path(*parts: str) -> Path:
    """Path of a bundled sample file (default: the plate's survey)."""
    parts = parts or (DEMO_SAMPLE,)
    ref = resources.files("flatcheck") / "data"
    for part in parts:
        ref = ref / part
    path = Path(str(ref))
    if not path.is_file():
        raise OutputError(f"the bundled sample {'/'.join(parts)} is missing from the installation",
                          fix="reinstall flatcheck (pip install .)")
    return path


def _show_guideway(con, units: str) -> None:
    """The bundled guideway and its carriage: a short summary (as 'flatcheck guideway' states it)."""
    from rich.markup import escape

    from ..guideway import carriage_stations, evaluate_body, judge, solve_carriage
    from ..io import read_carriage_toml, read_guideway_toml, wrap_carriage
    from ..units import format_height

    body_path = sample_path(DEMO_GUIDEWAY[0], DEMO_GUIDEWAY[1])
    carriage_path = sample_path(DEMO_GUIDEWAY[0], DEMO_GUIDEWAY[2])
    body = read_guideway_toml(body_path)
    carriage = wrap_carriage(read_carriage_toml(carriage_path), mesh=DEMO_FILM_MESH)
    geometry = evaluate_body(body)
    n = len(carriage_stations(geometry, carriage)[0])
    with progress_bar("guideway carriage", n, enabled=n > 1) as advance:
        result = solve_carriage(geometry, carriage, progress=advance)
    verdict = judge(result)
    con.print()
    con.print(f"[dim]4. a guideway and its wrap-around carriage, as 'flatcheck guideway {escape(str(body_path))} "
              f"--carriage {escape(str(carriage_path))} --film-mesh {DEMO_FILM_MESH}' states it (short):[/dim]",
              soft_wrap=True)
    con.print(f"guideway   {escape(body.ident)}" + (f": {escape(body.description)}" if body.description else ""),
              soft_wrap=True)
    con.print("faces      " + "; ".join(f"{escape(f.name)} flatness {format_height(f.flatness_um, units, step_um=body.height_step_um)}"
                                        for f in geometry.faces), soft_wrap=True)
    par = [p for p in geometry.parallelism if not p.reverse and p.value_um == p.value_um]
    if par:
        con.print("parallel   " + "; ".join(f"{escape(p.faces[0])} to {escape(p.faces[1])} "
                                            f"{format_height(p.value_um, units, step_um=body.height_step_um)}" for p in par), soft_wrap=True)
    m = result.motion
    con.print(f"carriage   {len(result.pads)} pads; pitch {m.pitch_range_arcsec:.2f}, yaw {m.yaw_range_arcsec:.2f}, "
              f"roll {m.roll_range_arcsec:.2f} arcsec over the travel", soft_wrap=True)
    colour = {"fit": "green", "marginal": "yellow", "unfit": "red"}[verdict.verdict]
    con.print(f"verdict    [bold {colour}]{verdict.verdict.upper()}[/bold {colour}] — {escape(verdict.reason)}",
              soft_wrap=True)


def _show_fringes(con, units: str) -> None:
    """The bundled fringe photograph of a pad face: its flatness (as 'flatcheck fringes' states it)."""
    from rich.markup import escape

    from ..io import read_picture
    from ..optics import analyze_fringe_photo, evaluate_optical_map
    from ..units import format_height

    path = sample_path(DEMO_FRINGES)
    o = DEMO_FRINGE_OPTIONS
    pic = read_picture(path)
    fm = analyze_fringe_photo(pic.intensity, wavelength_nm=o["wavelength_nm"], contact_edge=o["contact_edge"],
                              pixel_mm=o["pixel_mm"], saturated=pic.saturated)
    ev = evaluate_optical_map(fm.heightmap(None, label=path.stem), wavelength_nm=o["wavelength_nm"])
    con.print()
    con.print(f"[dim]5. a pad face under an optical flat, as 'flatcheck fringes {escape(str(path))} --wavelength-nm "
              f"{o['wavelength_nm']} --pixel-mm {o['pixel_mm']} --contact-edge {o['contact_edge']}' states it "
              "(short):[/dim]", soft_wrap=True)
    con.print(f"fringes    {fm.fringes_across:.1f} across the part; one fringe = {ev.fringe_nm:.2f} nm")
    con.print(f"flatness   {ev.minimum_zone_nm:.0f} nm = {ev.minimum_zone_nm / ev.fringe_nm:.2f} fringe "
              f"({format_height(ev.minimum_zone_nm / 1000.0, units)}, minimum zone)")


@app.command("demo")
def demo_cmd(
    out: Path = typer.Option(Path("flatcheck-demo"), "--out", help="Folder for the demo's report (created if needed)."),
    units: Units = units_option(),
    force: bool = typer.Option(
        False, "--force", help="Replace files of the demo's names in the folder even if an earlier demo did not write them."
    ),
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
    own = [name for name in replaced if not _written_by_a_demo(out / name, src)]
    if own and not force:  # a person's own file of that name is never replaced silently (issue 15, item 26)
        raise OutputError(
            f"{out / own[0]} exists and was not written by an earlier demo; the demo would replace it",
            where="--out", fix="choose another folder, or add --force to replace it",
        )
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
        length_basis=None, basis="formula", asme_form="inch", height_step_um=ev.height_step_um,
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
    _show_guideway(con, units.value)
    _show_fringes(con, units.value)
