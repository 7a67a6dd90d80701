"""``flatcheck guideway``: a guideway as a body (faces tied together) and the carriage that wraps it."""

from __future__ import annotations

from pathlib import Path

import typer

from ..errors import InputValueError
from ._app import app
from .common import (
    check_option_ranges,
    Interp,
    Units,
    check_output,
    emit_json,
    progress_bar,
    refuse_overwriting_inputs,
    stdout_console,
    units_option,
)


def _x(v) -> str:
    """A position along the travel for the screen: whole mm."""
    return f"{v:.0f}"


def _num(v, digits=2) -> str:
    try:
        v = float(v)
    except (TypeError, ValueError):
        return "–"
    if v != v:  # NaN
        return "–"
    return f"{v:.{digits}f}"


def _check_options(values: dict) -> None:
    import math

    for opt, v in values.items():
        if v is None:
            continue
        if not math.isfinite(v) or v <= 0:
            raise InputValueError(f"{v:g} is not a positive number", where=opt, fix=f"give {opt} above 0")


def build_json(body_path, carriage_path, body, geometry, result, verdict, advice, safety) -> dict:
    """The JSON object of ``flatcheck guideway`` (µm, mm, arcsec, µrad as the keys say; pinned keys in docs)."""
    from ..guideway import guideway_summary

    data = {
        "command": "guideway",
        "input": str(body_path),
        "carriage_file": None if carriage_path is None else str(carriage_path),
        "json_units": "heights um, positions mm, angles arcsec or urad as each key says",
    }
    data.update(guideway_summary(body, geometry, result, verdict, advice, safety))
    return data


def render(data: dict, *, units: str) -> None:
    """The summary on standard output (rich), from the JSON object (user text printed literally)."""
    from rich.markup import escape
    from rich.table import Table

    from ..units import format_height, height_unit_label

    con = stdout_console()
    step = data.get("height_step_um")

    def h(v):
        return "–" if v is None or v != v else format_height(v, units, step_um=step)

    g = data["guideway"]
    title = f"[bold]Guideway[/bold] {escape(g['ident'])}"
    if g["description"]:
        title += f"  {escape(g['description'])}"
    con.print(title + f"  ({g['length_mm']:g} mm)")
    hu = height_unit_label(units)

    def hn(v):
        return "–" if v is None or v != v else format_height(v, units, unit=False, step_um=step)

    t = Table(title="Faces (heights outward; offset and tilts: where the ties put each face)", title_justify="left")
    for col in ("face", "normal", f"flatness {hu}", f"straightness {hu}", f"offset {hu}", "tilt along µrad",
                "tilt across µrad", "free"):
        t.add_column(col)
    for f in data["faces"]:
        t.add_row(escape(f["name"]), f["normal"], hn(f["flatness_um"]), hn(f["straightness_um"]), hn(f["offset_um"]),
                  _num(f["tilt_x_urad"], 1), _num(f["tilt_across_urad"], 1),
                  escape(", ".join(f["free"])) or {"primary": "1st datum", "secondary": "2nd datum"}.get(f["datum"], ""))
    con.print(t)
    con.print("Surveys: " + "; ".join(f"{escape(f['name'])} {escape(f['survey'])} ({f['n_points']} points)"
                                      for f in data["faces"]))
    ties = data["ties"]
    if ties["count"]:
        con.print(f"Ties: {ties['count']} readings, redundancy {ties['redundancy']}, residuals "
                  f"{_num(ties['rms_normalized'])} (RMS) and {_num(ties['max_normalized'])} (largest) standard "
                  "uncertainties")
    else:
        con.print("Ties: none — every face but the datum is free")
    if data["parallelism"]:
        t = Table(title="Parallelism (ISO 1101, datum: minimum-zone plane of the datum face)", title_justify="left")
        for col in ("face", "datum", "zone width", "zone"):
            t.add_column(col)
        for p in data["parallelism"]:
            zone = p["zone"] + (f" at {p['across_mm']:g} mm across" if p["zone"] == "line" else "")
            t.add_row(escape(p["faces"][0]), escape(p["faces"][1]), h(p["value_um"]), zone)
        con.print(t)
    if data["squareness"]:
        t = Table(title="Squareness (90° − angle between outward normals; + = open corner)", title_justify="left")
        for col in ("face", "datum", "angle", "± u", "perpendicularity zone"):
            t.add_column(col)
        for s in data["squareness"]:
            if s["determined"]:
                t.add_row(escape(s["faces"][0]), escape(s["faces"][1]), f"{_num(s['angle_arcsec'])} arcsec",
                          f"{_num(s['u_urad'] * 0.206265 if s['u_urad'] == s['u_urad'] else None)} arcsec",
                          h(s["value_um"]))
            else:
                t.add_row(escape(s["faces"][0]), escape(s["faces"][1]), "free (no tie fixes it)", "", "")
        con.print(t)
    if data["twist"]:
        t = Table(title="Twist (change of the across slope along the travel)", title_justify="left")
        for col in ("faces", "from", "over the travel", "within 1 m"):
            t.add_column(col)
        for tw in data["twist"]:
            t.add_row(escape(" / ".join(tw["faces"])), escape(tw["source"]), f"{_num(tw['twist_urad'], 1)} µrad",
                      f"{_num(tw['twist_per_m_urad'], 1)} µrad")
        con.print(t)
    for r in data["rails"]:
        con.print(f"Rails {escape(r['faces'][0])} / {escape(r['faces'][1])}: height difference "
                  f"{h(r['height_difference_min_um'])} to {h(r['height_difference_max_um'])}, twist "
                  f"{_num(r['twist_urad'], 1)} µrad")
    c = data["carriage"]
    if c is not None:
        con.print(f"[bold]Carriage[/bold] {escape(c['label'])}: {len(c['pads'])} pads "
                  f"({'ball pivots' if c['pivot'] else 'fixed'}), load {c['load_n']:.0f} N "
                  f"(design {c['design_load_n']:.0f} N), {c['stations']} stations x = {_x(c['x_from_mm'])}–"
                  f"{_x(c['x_to_mm'])} mm, step {c['step_mm']:.1f} mm")
        t = Table(title="Pads (film model; quick = pad-averaging estimate)", title_justify="left")
        for col in ("pad", "face", "gap", "least film", "at x (mm)", "quick", "load (N)", "local form"):
            t.add_column(col)
        for p in c["pads"]:
            colour = "red" if p["touches_at_mm"] or (p["min_film_um"] == p["min_film_um"]
                                                    and p["min_film_um"] < p["margin_um"]) else ""
            least = "touches" if p["touches_at_mm"] else h(p["min_film_um"])
            t.add_row(escape(p["name"]), escape(p["face"]), h(p["gap_um"]),
                      f"[{colour}]{least}[/{colour}]" if colour else least, _x(p["min_film_x_mm"]) if
                      p["min_film_x_mm"] == p["min_film_x_mm"] else "–", h(p["quick_min_film_um"]),
                      f"{_num(p['load_min_n'], 0)}–{_num(p['load_max_n'], 0)}", h(p["local_flatness_max_um"]))
        con.print(t)
        m, q, d = c["motion"], c["quick_estimate"], c["difference"]
        t = Table(title="Error motions over the travel (ISO 230-1)", title_justify="left")
        for col in ("motion", "film model", "quick estimate", "largest difference along the travel"):
            t.add_column(col)
        rows = (("vertical straightness", "vertical_straightness_um", "vertical_um", "um"),
                ("horizontal straightness", "horizontal_straightness_um", "horizontal_um", "um"),
                ("pitch", "pitch_arcsec", "pitch_arcsec", "arcsec"),
                ("yaw", "yaw_arcsec", "yaw_arcsec", "arcsec"),
                ("roll", "roll_arcsec", "roll_arcsec", "arcsec"))
        for label, key, dkey, unit in rows:
            if m[key] is None or m[key] != m[key]:
                t.add_row(label, "free (no pad holds it)", "", "")
                continue
            if unit == "um":
                t.add_row(label, h(m[key]), h(q[key]), h(d[dkey]))
            else:
                t.add_row(label, f"{_num(m[key])} arcsec", f"{_num(q[key])} arcsec", f"{_num(d[dkey])} arcsec")
        con.print(t)
        s = c["stiffness"]
        con.print(f"Stiffness (others free to follow): vertical {_num(s['vertical_n_per_um']['min'], 0)}–"
                  f"{_num(s['vertical_n_per_um']['max'], 0)} N/µm, horizontal {_num(s['horizontal_n_per_um']['min'], 0)}–"
                  f"{_num(s['horizontal_n_per_um']['max'], 0)} N/µm, roll {_num(s['roll_nm_per_urad']['min'])}, pitch "
                  f"{_num(s['pitch_nm_per_urad']['min'])}, yaw {_num(s['yaw_nm_per_urad']['min'])} N·m/µrad (least)")
        con.print(f"[dim]{c['film_solutions']} film solutions, {c['solutions_per_pad_station']:.2f} per pad per "
                  f"station; mesh {c['mesh_cells']} cells a side[/dim]")
        for w in c["warnings"]:
            con.print(f"[yellow]Warning:[/yellow] {escape(w)}")
        for n in c["notes"]:
            con.print(f"[dim]{escape(n)}[/dim]")
    if data["verdict"] is not None:
        t = Table(title="Checks", title_justify="left")
        for col in ("check", "result", "limit", "of limit", "status", "where"):
            t.add_column(col)
        for ch in data["checks"]:
            if ch["unit"] == "um":
                val, lim = h(ch["value"]), h(ch["limit"])
            else:
                val, lim = f"{_num(ch['value'])} arcsec", f"{_num(ch['limit'])} arcsec"
            ratio = "–" if ch["ratio"] is None or ch["ratio"] == float("inf") else f"{100 * ch['ratio']:.0f} %"
            st = {"fit": "green", "marginal": "yellow", "unfit": "red"}[ch["status"]]
            t.add_row(escape(ch["name"]), val, lim, ratio, f"[{st}]{ch['status']}[/{st}]", escape(ch["where"]))
        con.print(t)
        colour = {"fit": "green", "marginal": "yellow", "unfit": "red"}[data["verdict"]]
        con.print(f"Verdict: [bold {colour}]{data['verdict'].upper()}[/bold {colour}] — {escape(data['reason'])}")
    else:
        con.print(f"Verdict: none — {data['reason']} (give --carriage CARRIAGE.toml)")
    for a in data["advice"]:
        con.print(f"Lapping: {escape(a['text'])}")
    for w in data["warnings"]:
        con.print(f"[yellow]Warning:[/yellow] {escape(w)}")
    for n in data["notes"]:
        con.print(f"[dim]{escape(n)}[/dim]")
    for line in data["safety"]:
        con.print(f"[bold]Caution:[/bold] {escape(line)}")


@app.command("guideway")
def guideway_cmd(
    body_path: Path = typer.Argument(..., metavar="BODY.toml", help="Guideway body file: faces, their surveys, ties."),
    carriage_path: Path = typer.Option(
        None, "--carriage", metavar="CARRIAGE.toml", help="Carriage file: a bearing file with pads on the body's faces."
    ),
    gap_um: float = typer.Option(None, "--gap-um", help="Nominal air gap of every pad, µm (overrides the file)."),
    load_n: float = typer.Option(None, "--load-n", help="External load on the carriage, N downward (overrides the file)."),
    supply_kpa: float = typer.Option(None, "--supply-kpa", help="Film: supply pressure, kPa gauge."),
    permeability_m2: float = typer.Option(None, "--permeability-m2", help="Porous film: layer permeability, m²."),
    layer_mm: float = typer.Option(None, "--layer-mm", help="Porous film: layer thickness, mm."),
    orifice_mm: float = typer.Option(None, "--orifice-mm", help="Orifice film: orifice bore, mm."),
    film_mesh: int = typer.Option(None, "--film-mesh", help="Film: mesh cells along each side of a pad (default 32)."),
    travel_start_mm: float = typer.Option(None, "--travel-start-mm", help="First carriage position, mm."),
    travel_end_mm: float = typer.Option(None, "--travel-end-mm", help="Last carriage position, mm."),
    step_mm: float = typer.Option(None, "--step-mm", help="Travel step, mm (at most a tenth of the shortest pad)."),
    interp: Interp = typer.Option(Interp.linear, "--interp", help="Interpolation between surveyed stations."),
    units: Units = units_option(),
    json_out: bool = typer.Option(False, "--json", help="Print one JSON object (µm, mm, arcsec) instead of the summary."),
    plot_prefix: Path = typer.Option(
        None, "--plot", metavar="PREFIX",
        help="Write PREFIX-faces.png, PREFIX-thickness.png and, with a carriage, PREFIX-films.png, PREFIX-motions.png.",
    ),
    png_dir: Path = typer.Option(None, "--png", metavar="DIR",
                                 help="Write the pictures into DIR (guideway-*.png; with --report also each page)."),
    report_path: Path = typer.Option(None, "--report", metavar="OUT.pdf",
                                     help="Write the report pages (identity, faces, thickness, films, motions, "
                                          "verdict, advice, methods, cautions) as one PDF."),
) -> None:
    """Judge a guideway as a body: faces tied together, parallelism, squareness, twist, and a wrap-around carriage."""
    from ..errors import OutputError

    _check_options({"--gap-um": gap_um, "--supply-kpa": supply_kpa, "--permeability-m2": permeability_m2,
                    "--layer-mm": layer_mm, "--orifice-mm": orifice_mm, "--step-mm": step_mm})
    check_option_ranges([  # docs/limits.md, named as typed, before any file is read
        ("--gap-um", gap_um, "gap_um", "the air gap"),
        ("--load-n", load_n, "load_n", "the load on the carriage"),
        ("--supply-kpa", supply_kpa, "pressure_kpa", "the supply pressure"),
        ("--permeability-m2", permeability_m2, "permeability_m2", "the permeability"),
        ("--layer-mm", layer_mm, "layer_mm", "the porous layer's thickness"),
        ("--orifice-mm", orifice_mm, "orifice_mm", "the orifice diameter"),
        ("--travel-start-mm", travel_start_mm, "position_mm", "the first carriage position"),
        ("--travel-end-mm", travel_end_mm, "position_mm", "the last carriage position"),
        ("--step-mm", step_mm, "step_mm", "the travel step"),
    ])
    if film_mesh is not None and not 4 <= film_mesh <= 512:
        raise InputValueError(f"{film_mesh} mesh cells a side: give 4 to 512", where="--film-mesh", fix="give e.g. 32")
    if plot_prefix is not None and png_dir is not None:
        raise InputValueError("--plot and --png both name where the pictures go", where="--plot/--png",
                              fix="give one of them")
    if png_dir is not None and not png_dir.is_dir():
        raise OutputError(f"{png_dir} is not a folder", where="--png", fix="create the folder or give another")
    film_opts = {"supply_kpa": supply_kpa, "permeability_m2": permeability_m2, "layer_mm": layer_mm,
                 "orifice_mm": orifice_mm}
    if carriage_path is None:
        given = [k for k, v in {"--gap-um": gap_um, "--load-n": load_n, "--film-mesh": film_mesh,
                                "--travel-start-mm": travel_start_mm, "--travel-end-mm": travel_end_mm,
                                "--step-mm": step_mm, **{"--" + k.replace("_", "-"): v for k, v in film_opts.items()}}.items()
                 if v is not None]
        if given:
            raise InputValueError(f"{given[0]} is for the carriage, but no carriage is given", where=given[0],
                                  fix="add --carriage CARRIAGE.toml, or drop the option")

    from ..io import read_carriage_toml, read_guideway_toml, wrap_carriage
    from ..output import guideway_png_paths

    outputs = {}
    if plot_prefix is not None or png_dir is not None:
        check_output(plot_prefix.with_name(plot_prefix.name + "-faces.png") if plot_prefix else None, "--plot")
        for key, path in guideway_png_paths(prefix=plot_prefix, folder=png_dir,
                                            carriage=carriage_path is not None).items():
            outputs[f"{'--plot' if plot_prefix is not None else '--png'} ({key})"] = path
    if report_path is not None:
        check_output(report_path, "--report")
        outputs["--report"] = report_path
    refuse_overwriting_inputs(outputs, [body_path, carriage_path])

    body = read_guideway_toml(body_path)
    refuse_overwriting_inputs(outputs, [Path(body_path).parent / f.survey for f in body.faces])
    desc = read_carriage_toml(carriage_path) if carriage_path is not None else None

    from ..guideway import carriage_stations, evaluate_body, judge, lapping_advice, solve_carriage
    from ..safety import cautions_for

    geometry = evaluate_body(body)
    result = verdict = None
    if desc is not None:
        carriage = wrap_carriage(desc, gap_um=gap_um, film=film_opts, mesh=film_mesh,
                                 travel=(travel_start_mm, travel_end_mm), step_mm=step_mm)
        if load_n is not None:
            import dataclasses

            carriage = dataclasses.replace(carriage, load_n=load_n)
        n = len(carriage_stations(geometry, carriage)[0])
        with progress_bar("carriage along the travel", n, enabled=n > 1) as advance:
            try:
                result = solve_carriage(geometry, carriage, method=interp.value, progress=advance)
            except InputValueError as exc:  # a film the options changed: name them beside the file's [film]
                given = [("--" + k.replace("_", "-")) for k, v in film_opts.items() if v is not None]
                given += ["--gap-um"] if gap_um is not None else []
                if not given or not str(exc.where or "").endswith("[film]"):
                    raise
                raise InputValueError(exc.message, where=f"{exc.where} with {', '.join(given)}", fix=exc.fix) from None
        verdict = judge(result)
    advice = lapping_advice(geometry)
    safety = cautions_for(body.material or "granite", large=True, air=result is not None)
    if not advice:
        safety = tuple(s for s in safety if "lapping" not in s.lower())
    data = build_json(body_path, carriage_path, body, geometry, result, verdict, advice, safety)
    written = []
    if plot_prefix is not None or png_dir is not None:
        from ..output import write_guideway_pngs

        written = write_guideway_pngs(geometry, result, prefix=plot_prefix, folder=png_dir)
    if report_path is not None:
        from ..output import write_guideway_report

        files = write_guideway_report(report_path, body, geometry, result, verdict, advice, safety,
                                      units=units.value, body_file=body_path, carriage_file=carriage_path,
                                      png_dir=png_dir)
        written = [*written, files.pdf, *files.pngs]
    if json_out:
        emit_json(data)
    else:
        render(data, units=units.value)
        for p in written:
            what = "report" if Path(p).suffix.lower() == ".pdf" else "picture"
            stdout_console().print(f"{what} written to {p}", markup=False, highlight=False)
