"""``flatcheck reduce``: readings to a height map, with flatness, closures and residuals."""

from __future__ import annotations

from pathlib import Path

import typer

from ._app import app
from .common import (
    ScanProgress,
    Method,
    check_output,
    refuse_unused,
    emit_json,
    load_input,
    progress_bar,
    refuse_overwriting_inputs,
    seed_option,
    load_lab_defaults,
    trials_option,
    u_height_option,
    uncertainty_defaults_option,
    Units,
    units_option,
    window_option,
)


@app.command("reduce")
def reduce_cmd(
    ctx: typer.Context,
    input: Path = typer.Argument(..., help="Survey file (.toml) or height-map CSV (x_mm,y_mm,height_um)."),
    method: Method = typer.Option(
        Method.least_squares, "--method", help="least-squares network adjustment (any layout) or classic moody (Union Jack)."
    ),
    json_out: bool = typer.Option(False, "--json", help="Print one JSON object instead of the summary."),
    map_out: Path = typer.Option(None, "--map-out", help="Write the nodes as a height-map CSV (x_mm,y_mm,height_um), or as ISO 25178-72 X3P when the name ends in .x3p."),
    units: Units = units_option(),
    window: str = window_option(),
    uncertainty: bool = typer.Option(
        False, "--uncertainty", help="Monte Carlo uncertainty of the flatness (JCGM 101), with a progress bar."
    ),
    trials: int = trials_option(),
    seed: int = seed_option(),
    u_height_um: float = u_height_option(),
    uncertainty_defaults: Path = uncertainty_defaults_option(),
) -> None:
    """Reduce a survey (or read a height map) and state its flatness."""
    from ..evaluation import evaluate_surface
    from ._reduce_view import render_reduction
    from ..units import um_to
    from ..io import write_heightmap_csv

    if not uncertainty:
        source = ctx.get_parameter_source("trials")  # (the default value cannot tell "not given")
        given_trials = source is not None and source.name not in ("DEFAULT", "DEFAULT_MAP")
        refuse_unused({"--trials": trials if given_trials else None, "--seed": seed, "--u-height-um": u_height_um},
                      why="without --uncertainty", fix="add --uncertainty, or drop the option")
    refuse_overwriting_inputs({"--map-out": map_out}, [input, uncertainty_defaults])
    check_output(map_out, "--map-out")
    lab = load_lab_defaults(uncertainty_defaults)  # a named file is read (and a broken one refused) even unused
    loaded = load_input(input, method=method.value)
    mc = None
    if uncertainty:
        with progress_bar("Monte Carlo", trials, enabled=True) as advance:
            mc = dict(trials=trials, seed=seed, u_height_um=u_height_um, progress=advance,
                      lab_defaults=lab)
            ev = evaluate_surface(loaded, window=window, monte_carlo=mc)
    else:
        scan = ScanProgress("local flatness")  # a bar on long scans (a fine window over a dense map)
        try:
            ev = evaluate_surface(loaded, window=window, local_progress=scan)
        finally:
            scan.close()
    if map_out is not None and map_out.suffix.lower() == ".x3p":  # ISO 25178-72, for other surface software
        from ..io import write_x3p

        sv = loaded.survey
        meta = {} if sv is None else {"ident": sv.surface.ident, "description": sv.surface.description,
                                      "material": sv.surface.material, "date": sv.date,
                                      "length_mm": sv.surface.length_mm, "width_mm": sv.surface.width_mm}
        write_x3p(map_out, ev.heightmap, meta={k: v for k, v in meta.items() if v})
    elif map_out is not None:
        hm = ev.heightmap_about_ls  # as the header says (a height map's own heights are not), at full precision
        write_heightmap_csv(
            map_out,
            hm,
            comment=f"flatcheck reduce {input.name} ({ev.method}); heights in µm about the least-squares plane",
        )
    # a height map's nodes (up to millions) go out as columns, not one dict per point (cli._json)
    big = json_out and ev.loaded.survey is None
    doc = ev.to_dict(nodes=json_out and not big)
    if big:
        from ._json import node_rows

        doc["nodes"] = node_rows(ev.heightmap)
    # JSON values stay in µm and mm whatever --units says (scripts rely on the *_um / *_mm keys);
    # "units" names the unit of the *_um values, "display_units" what the summary shows.
    doc["units"] = "um"
    doc["display_units"] = units.value
    if units.value == "in":
        doc["units_note"] = (
            "--units in changes the summary only: every *_um value is in µm and every *_mm value in mm; "
            "flatness_uin repeats the flatness figures in µin, as *_uin keys (and, for older scripts, "
            "under their *_um names)"
        )
        uin = {
            k: (None if v is None else um_to(v, "in"))
            for k, v in doc["flatness"].items()
            if k.endswith("_um") and (v is None or isinstance(v, float))
        }
        # the first keys kept their *_um names though their values are µin; the *_uin twins say what they hold
        doc["flatness_uin"] = {**uin, **{k[:-3] + "_uin": v for k, v in uin.items()}}
    if json_out:
        emit_json(doc)
        return
    render_reduction(ev, doc, units.value, map_out)


