"""``flatcheck bearing``: is the measured surface fit for an air-bearing pad or carriage, and how will it move?"""

from __future__ import annotations

import math
from enum import Enum
from contextlib import contextmanager
from pathlib import Path

import typer

DEFAULT_GAP_FRACTION = 0.25  # the core's value (a test keeps them equal); importing it would load numpy when the CLI starts
DEFAULT_MARGINAL_FROM = 0.8  # the core's value (a test keeps them equal); importing it would load numpy when the CLI starts
from ..errors import FlatcheckError, InputValueError
from typing import TYPE_CHECKING

from ._app import app
from .common import (
    Interp,
    check_option_ranges,
    check_output,
    refuse_unused,
    SAFETY_LINES,
    auto_trials_option,
    default_auto_trials,
    emit_json,
    load_input,
    load_lab_defaults,
    progress_bar,
    refuse_overwriting_inputs,
    seed_option,
    stdout_console,
    u_height_option,
    uncertainty_defaults_option,
    Units,
    units_option,
)

if TYPE_CHECKING:  # annotations only
    from rich.table import Table

    from ..bearing import BearingResult


class PadKind(str, Enum):
    porous = "porous"
    orifice = "orifice"


def result_json(result: BearingResult, *, input_path: Path, label: str, units: str) -> dict:
    """The pinned JSON object of ``flatcheck bearing`` (heights always in µm, angles in arcsec, positions in mm)."""
    m = result.motion
    return {
        "command": "bearing",
        "input": str(input_path),
        "surface": label,
        "json_units": "heights um, positions mm, angles arcsec (whatever --units says)",
        "display_units": units,
        "carriage": result.carriage,
        "limit_um": result.limit_um,
        "gap_fraction": result.gap_fraction,
        "limit_basis": "fraction of the air gap: common practice, no published ratio",
        "marginal_from": result.marginal_from,
        "local_flatness_max_um": result.local_flatness_max_um,
        "clearance_min_um": result.clearance_min_um,
        "verdict": result.verdict,
        "checks": result.checks,
        "uncertainty": _uncertainty_json(result),
        "motion": {
            "straightness_um": m.straightness_um,
            "pitch_arcsec": m.pitch_arcsec,
            "roll_arcsec": m.roll_arcsec,
            "raw_straightness_um": m.raw_straightness_um,
            "x_mm": m.x_mm,
            "path_um": m.path_um,
            "pitch_path_arcsec": m.pitch_path_arcsec,
            "roll_path_arcsec": m.roll_path_arcsec,
            "raw_profile_um": m.raw_profile_um,
            # false: the pads stand on one line and do not fix that angle (its figures are then null)
            "pitch_determined": getattr(m, "pitch_determined", True),
            "roll_determined": getattr(m, "roll_determined", True),
        },
        "stations": result.stations,
        "excluded": [{"x_mm": x, "reason": why} for x, why in result.excluded],
        "skipped_pads": result.skipped_pads,
        "pad_face": result.pad_face,
        "sampling_pitch_mm": result.sampling_pitch_mm,
        "step_mm": result.step_mm,
        "notes": result.notes,
        "warnings": list(result.warnings),
        "safety": SAFETY_LINES["air"],
    }


def _check_options(positive: dict, *, travel=(None, None)) -> None:
    """Refuse bad numbers given on the command line, naming the option, before any work."""
    for opt, v in positive.items():
        if v is None:
            continue
        if not math.isfinite(v) or v <= 0:
            raise InputValueError(f"{v:g} is not a positive number", where=opt, fix=f"give {opt} above 0")
        if opt in ("--gap-fraction", "--marginal-from") and v > 1:
            example = "0.25" if opt == "--gap-fraction" else "0.8"
            raise InputValueError(f"{v:g} is not a fraction (above 1)", where=opt,
                                  fix=f"give {opt} as a fraction such as {example}")
    start, end = travel
    for opt, v in (("--travel-start-mm", start), ("--travel-end-mm", end)):
        if v is not None and not math.isfinite(v):
            raise InputValueError(f"{v:g} is not a number", where=opt, fix=f"give {opt} in mm")
    if start is not None and end is not None and end < start:
        raise InputValueError(
            f"the travel ends ({end:g} mm) before it starts ({start:g} mm)",
            where="--travel-start-mm/--travel-end-mm",
            fix="swap or correct the travel limits",
        )


@contextmanager
def _option_named(core_where: str, option: str):
    """Errors the core places at ``core_where`` (a parameter in its words) placed at the option as typed."""
    try:
        yield
    except FlatcheckError as exc:
        if exc.where != core_where:
            raise
        raise type(exc)(exc.message, where=option, fix=exc.fix) from None


def _origin(field: str | None, carriage, bearing: Path | None, step_mm, travel_start_mm, travel_end_mm):
    """Where a carriage field named by the core (``where="step_mm"``...) came from: an option or the file."""
    in_file = f"{bearing}, [carriage]" if bearing is not None else None

    def one(name, option, value):
        if value is not None:
            return option
        return f"{in_file}, field {name!r}" if in_file and getattr(carriage, name) is not None else None

    if field == "step_mm":
        return one("step_mm", "--step-mm", step_mm) or field
    if field == "travel_start_mm/travel_end_mm":
        parts = [one("travel_start_mm", "--travel-start-mm", travel_start_mm),
                 one("travel_end_mm", "--travel-end-mm", travel_end_mm)]
        parts = [p for p in parts if p]
        return " and ".join(parts) if parts else "travel"
    return field  # (a face no pad rides on is refused by the bearing file's reader, naming its field)


def _check_mesh(cells: int) -> None:
    """Refuse a film mesh too coarse to mean anything or too fine to solve, naming ``--film-mesh``."""
    from ..bearing import MAX_MESH_CELLS, MESH_LIMIT_REASON, MIN_MESH_CELLS

    if cells < MIN_MESH_CELLS:
        raise InputValueError(
            f"{cells} mesh cells a side are too few (at least {MIN_MESH_CELLS})", where="--film-mesh",
            fix="give e.g. 64 (the default)",
        )
    if cells > MAX_MESH_CELLS:
        raise InputValueError(
            f"{cells} mesh cells a side are too many (at most {MAX_MESH_CELLS}: {MESH_LIMIT_REASON})",
            where="--film-mesh", fix="give e.g. 64 (the default) or 128",
        )


def _fmt_where(where) -> str:
    if not where:
        return ""
    parts = [f"{a:.0f}" if abs(a - b) < 1e-9 else f"{a:.0f}–{b:.0f}" for a, b in where[:6]]
    more = f" (+{len(where) - 6} more)" if len(where) > 6 else ""
    return "x = " + ", ".join(parts) + " mm" + more


def render_summary(result: BearingResult, *, label: str, units: str, step_um: float | None = None) -> None:
    """Human summary on standard output (rich); heights without an uncertainty to ``step_um``, the step the
    surface's survey resolves, and limits as stated."""
    from rich.table import Table
    from ..units import format_height, format_limit, format_with_uncertainty, round_to_uncertainty

    con = stdout_console()

    def h(v):
        return format_height(v, units, step_um=step_um)

    colour = {"fit": "green", "marginal": "yellow", "unfit": "red"}[result.verdict]
    pads = result.carriage.active_pads
    from rich.markup import escape

    con.print(f"[bold]Air-bearing fitness[/bold]  {escape(label)}")
    for p in pads:
        con.print(f"  {escape(p.name)}: {escape(p.pad.describe())}, at {p.along_mm:g} / {p.across_mm:g} mm "
                  "(along / across)")
    if result.skipped_pads:
        con.print(f"  not evaluated (other face): {escape(', '.join(result.skipped_pads))}")
    m = result.motion
    con.print(
        f"  {len(result.stations)} positions x = {m.x_mm[0]:.1f}–{m.x_mm[-1]:.1f} mm, step {result.step_mm:.2f} mm; "
        f"surface sampled under each pad at ≤ {result.sampling_pitch_mm:.2f} mm"
    )
    if result.excluded:
        xs = [x for x, _ in result.excluded]
        con.print(
            f"  [yellow]{len(xs)} position(s) not evaluated (a pad leaves the surveyed area): "
            f"x = {min(xs):.1f}–{max(xs):.1f} mm[/yellow]"
        )
    for w in result.warnings:
        con.print(f"[yellow]Warning:[/yellow] {escape(w)}")
    table = Table(title="Checks", title_justify="left")
    for col in ("check", "result", "U (95 %)", "limit", "of limit", "status", "decision", "where"):
        table.add_column(col)
    for c in result.checks:
        u = getattr(c, "expanded_uncertainty", None)
        u_txt = "-"
        if c.unit == "um":
            val, lim = h(c.value), format_limit(c.limit, units)
            if u is not None:  # U to two significant digits, the value to the same decimal place
                val, u_txt = format_with_uncertainty(c.value, u, units)
        elif c.unit == "%":
            val, lim = f"{c.value:.1f} %", f"{c.limit:.1f} %"
        else:
            val, lim = f"{c.value:.2f} arcsec", f"{c.limit:.2f} arcsec"
            if u is not None:
                _, _, dec = round_to_uncertainty(c.value, u)
                val, u_txt = f"{c.value:.{max(dec, 0)}f} arcsec", f"{u:.{max(dec, 0)}f} arcsec"
        st = {"fit": "green", "marginal": "yellow", "unfit": "red"}[c.status]
        dec_txt = "-" if getattr(c, "decision", None) is None else (
            c.decision + (" (simple acceptance)" if c.rule == "simple-acceptance" else ""))
        table.add_row(escape(c.name), val, u_txt, lim, f"{100 * c.ratio:.0f} %", f"[{st}]{c.status}[/{st}]",
                      dec_txt, _fmt_where(c.where))
    con.print(table)
    info = getattr(result, "uncertainty", None)
    if info is not None:
        if info.rule == "iso14253-1":
            whole = ("" if info.surface_u_um is None else
                     f" (U of the whole surface's flatness {format_with_uncertainty(info.surface_u_um, info.surface_u_um, units)[1]})")
            con.print(f"Uncertainty: ISO 14253-1 decisions with U of each figure from {escape(info.source)}{whole}; "
                      f"{info.trials} trials carried to the figures under the pads (bound model, docs/methods.md)")
    raw = "n/a" if not (m.raw_straightness_um == m.raw_straightness_um) else h(m.raw_straightness_um)
    def angle(value, determined):  # an angle the pads cannot fix is said so, not given a number (issue 15, item 5)
        return f"{value:.2f} arcsec" if determined else "not determined by this carriage (its pads stand on one line)"

    con.print(
        f"Carriage motion: straightness {h(m.straightness_um)} (minimum zone; raw surface on the centre line {raw}), "
        f"pitch {angle(m.pitch_arcsec, getattr(m, 'pitch_determined', True))}, "
        f"roll {angle(m.roll_arcsec, getattr(m, 'roll_determined', True))} (peak-to-valley)"
    )
    con.print(
        f"Local flatness under the pads: max {h(result.local_flatness_max_um)}; least clearance "
        f"{h(result.clearance_min_um)}"
    )
    con.print(f"Verdict: [bold {colour}]{result.verdict.upper()}[/bold {colour}]")
    for note in result.notes:
        con.print(f"[dim]{escape(note)}[/dim]")
    con.print(f"[bold]Caution:[/bold] {SAFETY_LINES['air']}")


@app.command("bearing")
def bearing_cmd(
    input: Path = typer.Argument(..., help="Survey TOML or height-map CSV of the guide surface."),
    pad: str = typer.Option(None, "--pad", help="Pad size: LxW in mm (L along the travel), or dD for a circular pad."),
    gap_um: float = typer.Option(None, "--gap-um", help="Nominal air gap in µm."),
    kind: PadKind = typer.Option(
        None, "--kind", help="How the pads are fed with air (default porous; overrides the bearing file's kind)."
    ),
    bearing: Path = typer.Option(None, "--bearing", help="Bearing description (TOML): pads, carriage, travel, budget."),
    gap_fraction: float = typer.Option(
        None, "--gap-fraction", help=f"Local form limit as a fraction of the gap (default {DEFAULT_GAP_FRACTION:g}, common practice)."
    ),
    marginal_from: float = typer.Option(
        None, "--marginal-from", help=f"Marginal from this fraction of a limit (default {DEFAULT_MARGINAL_FROM:g})."
    ),
    pad_face: Path = typer.Option(None, "--pad-face", help="Height-map CSV of the pad face (µm, + towards the guide)."),
    y_mm: float = typer.Option(None, "--y-mm", help="Carriage centre across the face in mm (default: centred)."),
    travel_start_mm: float = typer.Option(None, "--travel-start-mm", help="First carriage position, mm."),
    travel_end_mm: float = typer.Option(None, "--travel-end-mm", help="Last carriage position, mm."),
    step_mm: float = typer.Option(None, "--step-mm", help="Travel step in mm (at most a tenth of the pad length)."),
    budget_straightness_um: float = typer.Option(None, "--budget-straightness-um", help="Motion budget: straightness, µm."),
    budget_pitch_arcsec: float = typer.Option(None, "--budget-pitch-arcsec", help="Motion budget: pitch (P-V), arcsec."),
    budget_roll_arcsec: float = typer.Option(None, "--budget-roll-arcsec", help="Motion budget: roll (P-V), arcsec."),
    sample_pitch_mm: float = typer.Option(None, "--sample-pitch-mm", help="Largest spacing of samples under a pad, mm."),
    interp: Interp = typer.Option(Interp.linear, "--interp", help="Interpolation between surveyed stations."),
    units: Units = units_option(),
    json_out: bool = typer.Option(False, "--json", help="Print one JSON object (µm, mm, arcsec) instead of the summary."),
    supply_kpa: float = typer.Option(None, "--supply-kpa", help="Porous-pad film: supply pressure, kPa gauge."),
    permeability_m2: float = typer.Option(None, "--permeability-m2", help="Porous-pad film: layer permeability, m²."),
    layer_mm: float = typer.Option(None, "--layer-mm", help="Porous-pad film: porous layer thickness, mm."),
    ambient_kpa: float = typer.Option(101.325, "--ambient-kpa", help="Porous-pad film: ambient pressure, kPa absolute."),
    load_n: float = typer.Option(
        None, "--load-n", help="Porous-pad film: load per pad, N (default: what the pad carries at --gap-um on a flat guide)."
    ),
    film_fixed: bool = typer.Option(
        False, "--film-fixed", help="Film: pads held level (default: on ball pivots, tilt free)."
    ),
    film_mesh: int = typer.Option(64, "--film-mesh", help="Film: mesh cells along each side of a pad (odd for orifices)."),
    orifice_mm: float = typer.Option(None, "--orifice-mm", help="Orifice-pad film: orifice bore diameter, mm."),
    cd: float = typer.Option(None, "--cd", help="Orifice-pad film: discharge coefficient (default 0.8)."),
    orifices: int = typer.Option(None, "--orifices", help="Orifice-pad film: orifices per pad (1 central; more on a ring or a row)."),
    pocket_mm: float = typer.Option(None, "--pocket-mm", help="Orifice-pad film: feed pocket diameter, mm (none by default)."),
    pocket_depth_um: float = typer.Option(None, "--pocket-depth-um", help="Orifice-pad film: feed pocket depth, µm."),
    plot_out: Path = typer.Option(
        None, "--plot", help="Write a PNG of the carriage path, rail profile, pitch and local flatness along the travel."
    ),
    no_uncertainty: bool = typer.Option(
        False, "--no-uncertainty",
        help="Do not evaluate U: the checks are then judged by simple acceptance (value against limit).",
    ),
    trials: int | None = auto_trials_option(),
    seed: int = seed_option(),
    u_height_um: float = u_height_option(),
    uncertainty_defaults: Path = uncertainty_defaults_option(),
) -> None:
    """Judge the surface for air-bearing pads: local flatness against the gap, clearance, carriage motion.

    Each check of the surface is decided by the ISO 14253-1 rule with U from the survey's uncertainty budget
    (as 'flatcheck grade'), carried to the figures under the pads."""
    from ..bearing import MotionBudget
    from ..bearing import carriage_from_options
    from ..bearing import evaluate_bearing
    from ..bearing import film_feed
    from ..io import read_bearing_toml
    from ..bearing import station_positions

    from ..io import read_heightmap_csv

    _check_options(
        {
            "--gap-fraction": gap_fraction,
            "--marginal-from": marginal_from,
            "--step-mm": step_mm,
            "--sample-pitch-mm": sample_pitch_mm,
            "--budget-straightness-um": budget_straightness_um,
            "--budget-pitch-arcsec": budget_pitch_arcsec,
            "--budget-roll-arcsec": budget_roll_arcsec,
        },
        travel=(travel_start_mm, travel_end_mm),
    )
    _check_mesh(film_mesh)
    if no_uncertainty:
        refuse_unused({"--trials": trials, "--seed": seed, "--u-height-um": u_height_um},
                      why="with --no-uncertainty", fix="drop --no-uncertainty, or drop the option")
    check_option_ranges([  # docs/limits.md, named as typed, before any file is read
        ("--gap-fraction", gap_fraction, "fraction", "the gap fraction"),
        ("--marginal-from", marginal_from, "fraction", "the marginal fraction"),
        ("--step-mm", step_mm, "step_mm", "the travel step"),
        ("--sample-pitch-mm", sample_pitch_mm, "length_mm", "the sampling pitch"),
        ("--budget-straightness-um", budget_straightness_um, "tolerance_um", "the straightness budget"),
        ("--budget-pitch-arcsec", budget_pitch_arcsec, "angle_arcsec", "the pitch budget"),
        ("--budget-roll-arcsec", budget_roll_arcsec, "angle_arcsec", "the roll budget"),
        ("--supply-kpa", supply_kpa, "pressure_kpa", "the supply pressure"),
        ("--ambient-kpa", ambient_kpa, "pressure_kpa", "the ambient pressure"),
        ("--permeability-m2", permeability_m2, "permeability_m2", "the permeability"),
        ("--layer-mm", layer_mm, "layer_mm", "the porous layer's thickness"),
        ("--load-n", load_n, "load_n", "the load per pad"),
        ("--orifice-mm", orifice_mm, "orifice_mm", "the orifice diameter"),
        ("--cd", cd, "discharge_coefficient", "the discharge coefficient"),
        ("--orifices", orifices, "count", "the number of orifices"),
        ("--pocket-mm", pocket_mm, "pocket_mm", "the pocket diameter"),
        ("--pocket-depth-um", pocket_depth_um, "pocket_depth_um", "the pocket depth"),
    ])
    check_output(plot_out, "--plot")
    from ..limits import check_range

    for opt, v, limit_kind in (("--y-mm", y_mm, "position_mm"), ("--travel-start-mm", travel_start_mm, "position_mm"),
                               ("--travel-end-mm", travel_end_mm, "position_mm"), ("--gap-um", gap_um, "gap_um")):
        if v is not None:  # named as given, before any file is read (docs/limits.md)
            check_range(v, limit_kind, where=opt, name={"--gap-um": "the air gap", "--y-mm": "the carriage position"}
                        .get(opt, opt.lstrip("-").replace("-", " ")))
    refuse_overwriting_inputs({"--plot": plot_out}, [input, bearing, pad_face])
    carriage, fraction, marginal, budget = carriage_from_options(
        None if bearing is None else read_bearing_toml(bearing),
        pad=pad,
        gap_um=gap_um,
        kind=None if kind is None else kind.value,
        y_mm=y_mm,
        travel_start_mm=travel_start_mm,
        travel_end_mm=travel_end_mm,
        step_mm=step_mm,
    )
    budget = MotionBudget(
        budget.straightness_um if budget_straightness_um is None else budget_straightness_um,
        budget.pitch_arcsec if budget_pitch_arcsec is None else budget_pitch_arcsec,
        budget.roll_arcsec if budget_roll_arcsec is None else budget_roll_arcsec,
    )
    fraction = gap_fraction if gap_fraction is not None else (fraction if fraction is not None else DEFAULT_GAP_FRACTION)
    marginal = marginal_from if marginal_from is not None else (marginal if marginal is not None else DEFAULT_MARGINAL_FROM)
    if trials is not None:
        check_range(trials, "trials", where="--trials", name="the number of trials")
    loaded = load_input(input)
    surface = loaded.heightmap
    face = read_heightmap_csv(pad_face) if pad_face is not None else None
    try:
        n = len(station_positions(surface, carriage)[0])
    except FlatcheckError as exc:
        raise type(exc)(
            exc.message, where=_origin(exc.where, carriage, bearing, step_mm, travel_start_mm, travel_end_mm),
            fix=exc.fix,
        ) from None
    errors, u_note = _survey_errors(loaded, no_uncertainty=no_uncertainty, trials=trials, seed=seed,
                                    u_height_um=u_height_um, uncertainty_defaults=uncertainty_defaults)
    with progress_bar("bearing positions", n, enabled=n * len(carriage.active_pads) > 200) as advance, \
            _option_named("sampling pitch", "--sample-pitch-mm"):
        result = evaluate_bearing(
            surface,
            carriage,
            gap_fraction=fraction,
            marginal_from=marginal,
            budget=budget,
            pad_face=face,
            sample_pitch_mm=sample_pitch_mm,
            method=interp.value,
            progress=advance,
            uncertainty=errors,
        )
    if u_note:
        import dataclasses

        result = dataclasses.replace(result, notes=tuple(result.notes) + (u_note,))
    film = None
    orifice_opts = {"--orifice-mm": orifice_mm, "--cd": cd, "--orifices": orifices, "--pocket-mm": pocket_mm,
                    "--pocket-depth-um": pocket_depth_um}
    if any(v is not None for v in (supply_kpa, permeability_m2, layer_mm, *orifice_opts.values())):
        feed = film_feed(carriage, supply_kpa, permeability_m2, layer_mm, ambient_kpa, orifice_opts,
                         kind_given=kind is not None, from_file=bearing is not None)
        film, result = _film(surface, carriage, result, feed, load_n, not film_fixed, film_mesh, interp.value)
    label = surface.label or input.name
    step = loaded.height_step_um(load_lab_defaults(uncertainty_defaults))  # printed heights' step
    if plot_out is not None:
        from ..output import _plots as plot

        fig = plot.new_figure((11.0, 7.0))
        plot.bearing_motion(fig, result, units=units.value, step_um=step)
        plot.save_png(fig, plot_out, dpi=120, caption=(
            label, f"{input.name} · pictured by flatcheck · air-bearing carriage over its travel: path, surface, "
            "pitch and local flatness under the pads"))
    if json_out:
        data = result_json(result, input_path=input, label=label, units=units.value)
        if film is not None:
            _add_film_json(data, film)
        emit_json(data)
    else:
        render_summary(result, label=label, units=units.value, step_um=step)
        if film is not None:
            _render_film(film, units=units.value)
        if plot_out is not None:
            stdout_console().print(f"picture written to {plot_out}")


def _survey_errors(loaded, *, no_uncertainty, trials, seed, u_height_um, uncertainty_defaults):
    """The survey's Monte Carlo height errors from its uncertainty budget (``SurveyErrors``), and a note when
    none could be had (then the checks are judged by simple acceptance, which the result says)."""
    from ..bearing import BEARING_TRIALS, SurveyErrors
    from ..evaluation import survey_uncertainty

    if no_uncertainty:
        return None, "U not evaluated (--no-uncertainty): simple acceptance."
    if loaded.survey is None and u_height_um is None:
        return None, ("U not evaluated: a height map carries no reading uncertainty (give --u-height-um for U "
                      "from a budget): simple acceptance.")
    n = loaded.heightmap.x_mm.size
    total = default_auto_trials(n) if trials is None else trials
    try:
        with progress_bar("Monte Carlo", total) as advance:
            mc = survey_uncertainty(loaded, trials=total, seed=seed, u_height_um=u_height_um, progress=advance,
                                    lab_defaults=load_lab_defaults(uncertainty_defaults), keep_trials=BEARING_TRIALS)
    except InputValueError as exc:
        if exc.where and str(exc.where).startswith("--"):  # an option of this command: the person's to fix
            raise
        return None, f"U not evaluated: {exc.message}: simple acceptance."
    return SurveyErrors.from_budget(mc.budget), None


def _uncertainty_json(result) -> dict | None:
    """Which U the checks used and where it came from (each check carries its own U)."""
    info = getattr(result, "uncertainty", None)
    if info is None:
        return None
    return {
        "rule": info.rule,
        "source": info.source,
        "model": info.model,
        "trials": info.trials,
        "coverage": info.coverage,
        "surface_expanded_uncertainty_um": info.surface_u_um,
        "seed": info.seed,
        "budget_trials": info.budget_trials,
    }


def _film(surface, carriage, result, feed, load_n, pivot, mesh, method):
    """Film at every station and the bearing result with the film checks added."""
    from ..bearing import bearing_film, check_carriage_load, with_film_checks

    check_carriage_load(carriage, feed, load_n)
    total = len(result.stations) * len(carriage.active_pads)
    with progress_bar("film at each position", total, enabled=total > 20) as advance:
        film = bearing_film(surface, carriage, result.stations, feed, load_n=load_n, pivot=pivot, n=mesh,
                            method=method, progress=advance)
    return film, with_film_checks(result, film)


def _add_film_json(data: dict, film) -> None:
    """Add the pinned ``film`` object and a ``film`` entry to each station object."""
    from .common import jsonable

    from ..bearing import KG_S_TO_MG_S, OrificeFeed, orifice_notes
    from ..units import normal_litres_per_min

    c = film.curve
    f = film.feed
    orifice = isinstance(f, OrificeFeed)
    if orifice:
        feed = {
            "kind": "orifice",
            "model": "orifice pad: isentropic orifice flow into feed regions of the isothermal Reynolds equation in p^2",
            "supply_kpa_gauge": f.supply_gauge_kpa,
            "ambient_kpa": f.ambient_kpa,
            "orifice_mm": f.orifice_mm,
            "cd": f.cd,
            "orifice_positions_mm": [list(xy) for xy in f.positions_mm],
            "pocket_mm": f.pocket_mm,
            "pocket_depth_um": f.pocket_depth_um,
            "notes": list(orifice_notes(f, film.meshes)),
        }
    else:
        feed = {
            "kind": "porous",
            "model": "porous pad: Darcy flow across a thin layer feeding the isothermal Reynolds equation in p^2",
            "supply_kpa_gauge": f.supply_gauge_kpa,
            "ambient_kpa": f.ambient_kpa,
            "permeability_m2": f.permeability_m2,
            "layer_mm": f.layer_mm,
        }
    curve = [
        {"gap_um": g, "load_n": w, "stiffness_n_per_um": k, "flow_l_per_min": q,
         "flow_nl_per_min": float(normal_litres_per_min(m)), "mass_flow_mg_per_s": m * KG_S_TO_MG_S}
        for g, w, k, q, m in zip(c.gap_um, c.load_n, c.stiffness_n_per_um, c.flow_l_per_min, c.mass_flow_kg_s)
    ]
    if orifice:
        for row, r in zip(curve, c.feed_pressure_ratio):
            row["feed_pressure_ratio"] = r
    data["film"] = {
        **feed,
        "pivot": film.pivot,
        "mesh_cells": film.mesh_cells,
        "pads": [
            {"pad": p.name, "load_n": p.load_n, "design_fly_height_um": p.design_fly_height_um,
             "design_stiffness_n_per_um": p.design_stiffness_n_per_um}
            for p in film.pads
        ],
        "curve_pad": film.curve_pad,
        "curve": curve,
        "peak_stiffness_gap_um": c.peak_stiffness_gap_um,
        "peak_stiffness_n_per_um": c.peak_stiffness_n_per_um,
        "peak_inside_curve": c.peak_inside,
        "assumptions": list(film.assumptions),
    }
    stations = jsonable(data["stations"])
    for i, st in enumerate(stations):
        st["film"] = film.station(i)  # the pad with the least film (pinned)
        st["film_pads"] = film.station_pads(i)  # every active pad, in the carriage's order
    data["stations"] = stations


def _sig3(v: float) -> str:
    """Three significant figures with fixed decimals (48.0, 112, 0.348), for table columns."""
    v = float(v)
    if not math.isfinite(v) or v == 0.0:
        return f"{v:g}"
    return f"{v:.{max(0, 2 - math.floor(math.log10(abs(v))))}f}"


def _curve_table(film, *, units: str, orifice: bool) -> Table:
    """A short table of the flat-guide curve: gaps from gap/4 to 4 gap, the nominal and peak-stiffness rows marked."""
    from rich.table import Table
    from ..units import format_height
    from ..units import height_unit_label
    import numpy as np

    from ..bearing import KG_S_TO_MG_S, curve_table_rows

    c = film.curve
    gap = film.curve_gap_um if film.curve_gap_um is not None else float(np.sqrt(c.gap_um[0] * c.gap_um[-1]))
    rows, nominal, peak = curve_table_rows(c, gap)
    whose = "" if len(film.pads) == 1 else f" (pad {film.curve_pad!r})"
    table = Table(title=f"Flat guide, uniform gap{whose}", title_justify="left")
    from ..units import normal_litres_per_min

    # air flow in normal litres per minute: litres at 0 °C and 101.325 kPa (DIN 1343), whatever the day's
    # pressure and temperature (issue 15, item 7); the mass flow beside it
    cols = [f"gap ({height_unit_label(units)})", "load (N)", "stiffness (N/µm)", "flow (NL/min)", "mass (mg/s)"]
    if orifice:
        cols.append("pr/ps")
    for col in cols:
        table.add_column(col, justify="right")
    table.add_column("")
    for i in rows:
        mark = ", ".join(m for m, ok in (("nominal gap", i == nominal), ("peak stiffness", i == peak)) if ok)
        cells = [
            format_height(float(c.gap_um[i]), units, unit=False),
            f"{c.load_n[i]:.1f}", f"{c.stiffness_n_per_um[i]:.2f}", _sig3(float(normal_litres_per_min(c.mass_flow_kg_s[i]))),
            _sig3(c.mass_flow_kg_s[i] * KG_S_TO_MG_S),
        ]
        if orifice:
            cells.append(f"{c.feed_pressure_ratio[i]:.3f}")
        table.add_row(*cells, f"[bold]{mark}[/bold]" if mark else "")
    return table


def _render_film(film, *, units: str) -> None:
    from ..units import format_height
    import numpy as np
    from ..bearing import OrificeFeed, orifice_notes

    con = stdout_console()

    def h(v):
        return format_height(v, units)

    c = film.curve
    f = film.feed
    orifice = isinstance(f, OrificeFeed)
    if orifice:
        pocket = f", pocket Ø{f.pocket_mm:g} mm x {f.pocket_depth_um:g} µm" if f.pocket_mm > 0 else ", no pocket"
        con.print(
            f"[bold]Orifice-pad film[/bold] ({'ball pivot' if film.pivot else 'held level'}, "
            f"{f.supply_gauge_kpa:g} kPa gauge, {len(f.positions_mm)} x Ø{f.orifice_mm:g} mm orifice, Cd {f.cd:g}{pocket})"
        )
    else:
        con.print(
            f"[bold]Porous-pad film[/bold] ({'ball pivot' if film.pivot else 'held level'}, "
            f"{f.supply_gauge_kpa:g} kPa gauge, k {f.permeability_m2:g} m², layer {f.layer_mm:g} mm)"
        )
    for p in film.pads:
        t = p.travel
        ok = t.converged
        lo = h(float(t.min_film_um[ok].min())) if ok.any() else "none (pad lands)"
        con.print(
            f"  {p.name}: load {p.load_n:.1f} N, flat-guide fly height {h(p.design_fly_height_um)}, "
            f"stiffness {p.design_stiffness_n_per_um:.1f} N/µm; least film over the travel {lo}"
            + (f"; stiffness {t.stiffness_n_per_um[ok].min():.1f}–{t.stiffness_n_per_um[ok].max():.1f} N/µm" if ok.any() else "")
        )
    con.print(_curve_table(film, units=units, orifice=orifice))
    con.print(
        f"  peak stiffness refined between the samples: {c.peak_stiffness_n_per_um:.1f} N/µm at a gap of "
        f"{h(c.peak_stiffness_gap_um)}" + ("" if c.peak_inside else " (at the end of the range)")
    )
    if orifice:
        i = int(np.argmin(np.abs(c.gap_um - film.pads[0].design_fly_height_um)))
        con.print(
            f"  pr/ps: feed pressure / supply (absolute, in the pocket or at the bore); {c.feed_pressure_ratio[i]:.3f} "
            "at the flat-guide fly height"
        )
        for note in orifice_notes(f, film.meshes):
            con.print(f"[yellow]Note:[/yellow] {note}")
        con.print(f"[bold]Caution:[/bold] {SAFETY_LINES['air']}")
    con.print("[dim]Film model assumptions: " + "; ".join(film.assumptions) + "[/dim]")
