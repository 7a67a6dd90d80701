"""``flatcheck compare``: what a lapping session removed, the rate it implies, and the sessions still needed."""

from __future__ import annotations

from pathlib import Path

import typer

from ..errors import InputValueError
DEFAULT_MATCH_TOL_MM = 0.5  # the core's value (a test keeps them equal); importing it would load numpy when the CLI starts
from typing import TYPE_CHECKING

from ._app import app
from .common import (
    load_lab_defaults,
    refuse_unused,
    check_option_ranges,
    GAP_FRACTION_HELP,
    TARGET_GAP_HELP,
    auto_trials_option,
    budget_u,
    guard_band_option,
    seed_option,
    u_height_option,
    uncertainty_defaults_option,
    check_output,
    SAFETY_LINES,
    emit_json,
    load_input,
    refuse_overwriting_inputs,
    stdout_console,
    Units,
    units_option,
)

if TYPE_CHECKING:  # annotations only
    from ..lapping import LapModel, Progress


def cautions(pr: Progress) -> list:
    """Warnings about results that suggest a mistake in the input (files swapped, nothing removed)."""
    out = []
    if pr.flatness_after_um > pr.flatness_before_um * 1.01:
        out.append(
            "the surface is less flat after the session than before: if that is unexpected, check the files are "
            "given as BEFORE AFTER (a rate calibrated from swapped files is meaningless)"
        )
    if pr.dwell_min is not None and not pr.removed_volume_mm3 > 0:
        out.append("nothing was removed between the two surveys, so no removal rate can be calibrated")
    return out


def progress_json(pr: Progress, *, before: Path, after: Path, lap: LapModel | None, target_source, units: str) -> dict:
    """The JSON object of ``flatcheck compare``."""
    return {
        "command": "compare",
        "before": str(before),
        "after": str(after),
        "json_units": "heights um, positions mm, volumes mm^3, times min (whatever --units says)",
        "display_units": units,
        "match_tol_mm": pr.tol_mm,
        "nodes": int(pr.x_mm.size),
        "flatness_before_um": pr.flatness_before_um,
        "flatness_after_um": pr.flatness_after_um,
        "removed_volume_mm3": pr.removed_volume_mm3,
        "max_removed_um": pr.max_removed_um,
        "change": [
            {"x_mm": float(x), "y_mm": float(y), "change_um": float(c), "removed_um": float(r),
             "change_referred_um": float(cr)}
            for x, y, c, r, cr in zip(pr.x_mm, pr.y_mm, pr.change_um, pr.removed_um, pr.change_referred_um)
        ],
        "dwell_min": pr.dwell_min,
        # the lap's size only: compare builds it without a rate, so a rate here would be a placeholder; the
        # calibrated rate is rate_um_per_min
        "lap": None if lap is None else {
            "shape": lap.shape,
            "diameter_mm": lap.diameter_mm if lap.shape == "round" else None,
            "length_mm": lap.length_mm if lap.shape == "rect" else None,
            "width_mm": lap.width_mm if lap.shape == "rect" else None,
            "area_mm2": lap.area_mm2,
        },
        "volume_rate_mm3_per_min": pr.volume_rate_mm3_per_min,
        "rate_um_per_min": pr.rate_um_per_min,
        "rate_fit_rms_um": pr.rate_fit_rms_um,
        "target_um": pr.target_um,
        "target_source": target_source,
        "remaining_volume_mm3": pr.remaining_volume_mm3,
        "sessions_to_target": pr.sessions_to_target,
        "sessions_to_target_fraction": pr.sessions_fraction,
        "minutes_to_target": pr.minutes_to_target,
        "u_after_um": pr.u_after_um,
        "target_met_within_uncertainty": pr.met_within_uncertainty,
        "notes": cautions(pr) + [
            "each survey is referred to its own least-squares plane; the removal is the least consistent with the "
            "change (untouched areas read zero) and is a lower bound if the whole surface was lapped",
            "change_um is after - before about the least-squares plane of the difference; change_referred_um is "
            "the same change about the plane of the least removal (untouched areas read about 0)",
        ],
        "safety": SAFETY_LINES["dust"],
    }


#: Largest node grid printed in the summary (rows); wider grids are also limited by the terminal's width.
_MAX_GRID_ROWS = 30


def _change_grid(pr: Progress):
    """The matched nodes as a regular grid ``(xs, ys, index)`` (see :attr:`HeightMap.grid`), or None."""
    from ..form import HeightMap

    return HeightMap(pr.x_mm, pr.y_mm, pr.change_referred_um).grid


def change_grid_text(pr: Progress, units: str, width: int, grid=None, step_um: float | None = None) -> str | None:
    """The change on a grid of nodes as plain text rows (north at the top), or None if it does not fit.

    The values are after minus before referred to the plane of the least removal, so untouched areas read
    about 0 and lapped areas are negative. None when the nodes are not a complete regular grid, or the grid
    is wider than ``width`` characters or longer than ``_MAX_GRID_ROWS`` rows. ``grid`` is
    :func:`_change_grid` of ``pr`` when the caller has it already.
    """
    from ..units import format_height
    from ..units import height_unit_label

    grid = _change_grid(pr) if grid is None else grid
    if grid is None:
        return None
    xs, ys, index = grid
    if ys.size > _MAX_GRID_ROWS:
        return None

    def cell(v_um):
        s = format_height(v_um, units, unit=False, step_um=step_um)
        return "0" if float(s) == 0 else s  # no "-0.000"

    ylab = [f"{y:g}" for y in ys]
    yw = max(4, max(len(v) for v in ylab))
    cw = 1 + max(max(len(cell(v)) for v in pr.change_referred_um), max(len(f"{x:g}") for x in xs))
    if yw + 1 + xs.size * cw > width:
        return None
    hu = height_unit_label(units)
    lines = [
        f"Change map, after - before ({hu}; untouched areas read 0), x mm across:",
        f"{'y mm':>{yw}} " + "".join(f"{x:>{cw}g}" for x in xs),
    ]
    for j in range(ys.size - 1, -1, -1):
        lines.append(f"{ylab[j]:>{yw}} " + "".join(f"{cell(pr.change_referred_um[i]):>{cw}}" for i in index[j]))
    return "\n".join(lines)


def _why_no_grid(grid, width: int) -> str:
    """Why the change map is not printed as a grid (``grid`` from :func:`_change_grid`)."""
    if grid is None:
        return "are not a regular grid"
    if grid[1].size > _MAX_GRID_ROWS:
        return f"make a {grid[0].size} x {grid[1].size} grid, more rows than the summary prints ({_MAX_GRID_ROWS})"
    return f"make a {grid[0].size} x {grid[1].size} grid, too large for this terminal ({width} columns)"


def _fmt_minutes(t: float) -> str:
    if t < 1:
        return f"{t * 60:.0f} s" if t * 60 >= 1 else "under a second"
    return f"{t:.2g} min" if t < 10 else f"{t:.0f} min"


def sessions_text(pr: Progress) -> str:
    """What is left to the target, in plain words: the share of this session's removal, and the lapping
    time at this session's rate when it is known (not rounded up to whole sessions)."""
    left = f"{pr.remaining_volume_mm3:.4g} mm^3 still to remove"
    f = pr.sessions_fraction
    when = f" (about {_fmt_minutes(pr.minutes_to_target)} at this session's rate)" if pr.minutes_to_target else ""
    if f < 0.1:
        return (
            f"{left}, {100 * f:.2g} % of what this session removed{when}: the target is within reach by a short "
            "touch-up of the high spots (plan it with flatcheck lap on the after survey)"
        )
    if f < 1:
        return f"{left}, about {f:.1f} of a session like this one{when}"
    return f"{left}, about {f:.1f} more sessions like this one{when}"


def change_table(pr: Progress, names, units: str, step_um: float | None = None):
    """The change at each station by name (a layout that is not a regular grid, e.g. a Union Jack), or None.

    The change is after minus before referred to the plane of the least removal (untouched areas read about 0),
    with the least removal beside it.
    """
    from rich.markup import escape
    from rich.table import Table

    from ..units import format_height, format_length, height_unit_label

    if names is None or len(names) != pr.x_mm.size:
        return None
    hu = height_unit_label(units)
    lu = "in" if units == "in" else "mm"
    t = Table(title=f"Change at each station, after - before ({hu}; untouched areas read 0)", title_justify="left")
    for col, right in (("station", False), (f"x {lu}", True), (f"y {lu}", True), (f"change {hu}", True),
                       (f"removed {hu}", True)):
        t.add_column(col, justify="right" if right else "left", no_wrap=True)
    for n, x, y, c, r in zip(names, pr.x_mm, pr.y_mm, pr.change_referred_um, pr.removed_um):
        text = format_height(c, units, unit=False, step_um=step_um)
        t.add_row(escape(str(n)), format_length(x, units, unit=False), format_length(y, units, unit=False),
                  "0" if float(text) == 0 else text, format_height(r, units, unit=False, step_um=step_um))
    return t


def render_summary(pr: Progress, *, lap: LapModel | None, target_source, units: str, names=None, target=None,
                   decision=None, step_um: float | None = None) -> None:
    """Human summary on stdout; ``names`` are the stations' names (in the order of ``pr``'s nodes), if any;
    ``target`` (a ``LapTarget``) and ``decision`` (the after survey against its limit) for a limit to prove;
    heights without an uncertainty to ``step_um``, the coarser of the two surveys' height steps."""
    from ..units import format_height, format_with_uncertainty

    con = stdout_console()

    def h(v):
        return format_height(v, units, step_um=step_um)

    con.print(f"[bold]Progress[/bold] over {pr.x_mm.size} matched nodes (tolerance {pr.tol_mm:g} mm)")
    con.print(f"Flatness (minimum zone): before {h(pr.flatness_before_um)}, after {h(pr.flatness_after_um)}")
    con.print(f"Removed {pr.removed_volume_mm3:.4g} mm^3, deepest {h(pr.max_removed_um)}")
    grid = _change_grid(pr)
    text = change_grid_text(pr, units, con.width, grid, step_um)
    table = None if text is not None else change_table(pr, names, units, step_um)
    if text is not None:
        con.print(text, markup=False)
    elif table is not None:  # not a grid (a Union Jack): the change by station name (issue 15, item 12)
        con.print(table)
    else:
        deepest = int(pr.removed_um.argmax())
        where = (
            f"; the most came off at ({pr.x_mm[deepest]:g}, {pr.y_mm[deepest]:g}) mm" if pr.max_removed_um > 0 else ""
        )
        con.print(
            f"Change map: the {pr.x_mm.size} nodes {_why_no_grid(grid, con.width)}{where}; "
            "the change at every node is in --json, a picture with --plot FILE.png",
            markup=False,
        )
    for c in cautions(pr)[:1]:
        if c.startswith("the surface is less flat"):
            con.print(f"[bold]Warning:[/bold] {c}")
    if pr.dwell_min is not None:
        con.print(f"Lapping time {pr.dwell_min:g} min: {pr.volume_rate_mm3_per_min:.4g} mm^3/min")
    if pr.dwell_min is not None and not pr.removed_volume_mm3 > 0:
        con.print(
            "Nothing was removed between the two surveys, so no removal rate can be calibrated "
            "(check that the files are the surveys before and after the session, in that order).",
            markup=False,
        )
    elif pr.rate_um_per_min is not None and not pr.rate_um_per_min > 0:
        con.print(
            "The fitted rate is not positive: the change does not follow the logged dwell "
            "(check the log's positions and the lap size).",
            markup=False,
        )
    elif pr.rate_um_per_min is not None:
        how = "fitted to the logged dwell" if pr.rate_fit_rms_um is not None else "volume / (lap area x time)"
        extra = f", fit RMS {h(pr.rate_fit_rms_um)}" if pr.rate_fit_rms_um is not None else ""
        con.print(f"Calibrated rate for {lap.describe().split(',')[0]}: [bold]{pr.rate_um_per_min:.4g} µm/min[/bold] ({how}{extra})")
        con.print(f"  use it as: flatcheck lap SURVEY --rate-um-per-min {pr.rate_um_per_min:.4g} ...", markup=False)
    elif pr.dwell_min is not None:
        con.print("Give the lap size (--lap-diameter-mm or --lap-size-mm) to turn this into a depth rate.")
    if target is not None and decision is not None:  # a limit to prove (ISO 14253-1)
        v_txt, u_txt = format_with_uncertainty(pr.flatness_after_um, target.guard_band_um, units)
        verdict = {"conforms": "met and proven", "undecided": "not proven (undecided)",
                   "does-not-conform": "not met (non-conformity proven)"}[decision.verdict]
        con.print(f"Limit {h(target.limit_um)} ({target_source}): {verdict} by the after survey, {v_txt} with "
                  f"U = {u_txt} ({target.guard_band_source}); ISO 14253-1:2017: proven only when F + U is within "
                  "the limit.", markup=False)
        if pr.sessions_to_target not in (0, None):
            con.print(f"To prove it, aim at {h(target.aim_um)} (the limit less U): {sessions_text(pr)}", markup=False)
        elif pr.sessions_to_target is None:
            con.print(f"To prove it, aim at {h(target.aim_um)}: still {pr.remaining_volume_mm3:.4g} mm^3 to remove; "
                      "nothing was removed this session, so no estimate.", markup=False)
    elif target is not None and not target.proven and target.kind != "given":
        con.print(f"Note: guard band: {target.guard_band_source}", markup=False)
    if pr.target_um is not None and decision is None:
        if pr.sessions_to_target == 0:
            con.print(f"Target {h(pr.target_um)} ({target_source}) is met.", markup=False)
        elif pr.met_within_uncertainty:
            con.print(
                f"Target {h(pr.target_um)} ({target_source}): the target is met within the uncertainty: the after "
                f"survey's flatness {h(pr.flatness_after_um)} exceeds it by less than its expanded uncertainty "
                f"U = {h(pr.u_after_um)}, so more lapping cannot be shown to be needed (survey again to decide).",
                markup=False,
            )
        elif pr.sessions_to_target is None:
            con.print(f"Target {h(pr.target_um)}: still {pr.remaining_volume_mm3:.4g} mm^3 to remove; nothing was removed this session, so no estimate.")
        else:
            con.print(f"Target {h(pr.target_um)} ({target_source}): {sessions_text(pr)}", markup=False)
    con.print(
        "Note: each survey is referred to its own least-squares plane; removal is the least consistent with the "
        "change (a lower bound if the whole surface was lapped).",
        markup=False,
    )
    con.print(f"[bold]Caution:[/bold] {SAFETY_LINES['dust']}")


def _check_same_surface(lb, la) -> None:
    """Refuse two surveys that their own files say are of different surfaces (identity or size)."""
    if lb.survey is None or la.survey is None:
        return  # height maps carry no identity; node matching still checks the positions
    sb, sa = lb.survey.surface, la.survey.surface
    where = f"{lb.path} -> {la.path}"
    if sb.ident.strip() and sa.ident.strip() and sb.ident.strip() != sa.ident.strip():
        raise InputValueError(
            f"the surveys are of different surfaces: {sb.ident!r} before, {sa.ident!r} after",
            where=where,
            fix="compare two surveys of the same surface (or correct [surface] ident in one file)",
        )
    size_b, size_a = (sb.length_mm, sb.width_mm), (sa.length_mm, sa.width_mm)
    if any(abs(p - q) > 0.5 for p, q in zip(size_b, size_a)):
        raise InputValueError(
            f"the surveys are of different surfaces: {size_b[0]:g} x {size_b[1]:g} mm before, "
            f"{size_a[0]:g} x {size_a[1]:g} mm after",
            where=where,
            fix="compare two surveys of the same surface (or correct [surface] length_mm/width_mm in one file)",
        )


@app.command("compare")
def compare_cmd(
    before: Path = typer.Argument(..., help="Survey TOML or height-map CSV before the session."),
    after: Path = typer.Argument(..., help="Survey TOML or height-map CSV after the session (same stations)."),
    dwell_min: float = typer.Option(None, "--dwell-min", help="Total lapping time of the session (min)."),
    log: Path = typer.Option(None, "--log", help="Lapping log CSV x_mm,y_mm,minutes (where the lap worked)."),
    lap_diameter_mm: float = typer.Option(None, "--lap-diameter-mm", help="Round lap diameter (mm)."),
    lap_size_mm: str = typer.Option(None, "--lap-size-mm", help="Rectangular lap LENGTHxWIDTH (mm)."),
    target_um: float = typer.Option(None, "--target-um", help="Target flatness in µm (for the sessions estimate)."),
    target_grade: str = typer.Option(None, "--target-grade", help="Target as STANDARD:GRADE, e.g. din-876:0."),
    target_gap_um: float = typer.Option(None, "--target-gap-um", help=TARGET_GAP_HELP),
    gap_fraction: float = typer.Option(None, "--gap-fraction", help=GAP_FRACTION_HELP),
    match_tol_mm: float = typer.Option(DEFAULT_MATCH_TOL_MM, "--match-tol-mm", help="Node matching tolerance (mm)."),
    units: Units = units_option(),
    json_out: bool = typer.Option(False, "--json", help="One JSON object on stdout."),
    plot_out: Path = typer.Option(
        None, "--plot", help="Write a PNG of the change map: before, after, change and least removal."
    ),
    guard_band: str = guard_band_option(),
    trials: int | None = auto_trials_option(),
    seed: int = seed_option(),
    u_height_um: float = u_height_option(),
    uncertainty_defaults: Path = uncertainty_defaults_option(),
) -> None:
    """Change map, removed volume, flatness before/after, calibrated rate and sessions to the target.

    A target from a grade or an air gap is a limit to prove (ISO 14253-1): the after survey is decided against it
    with its own U, and the sessions still needed aim below it by that U (--guard-band)."""
    from ..lapping import LapModel
    from ..lapping import check_option
    from ..lapping import compare_surveys
    from ..lapping import match_nodes
    from ..lapping import parse_lap_size
    from ..lapping import resolve_target
    from ..lapping import guard_banded, needs_budget_u, parse_guard_band, target_kind

    if dwell_min is not None and log is not None:
        raise InputValueError("give --dwell-min or --log, not both", where="--dwell-min/--log")
    if lap_diameter_mm is not None and lap_size_mm is not None:
        raise InputValueError("give a round or a rectangular lap, not both", where="--lap-diameter-mm/--lap-size-mm")
    # options first, so a typing slip is reported before the surveys are reduced
    check_option(dwell_min, "--dwell-min", what="the session's lapping time in minutes")
    check_option(lap_diameter_mm, "--lap-diameter-mm", what="a diameter in mm")
    check_option(match_tol_mm, "--match-tol-mm", what="a distance in mm")
    if lap_size_mm is not None:
        parse_lap_size(lap_size_mm)
    check_option_ranges([  # docs/limits.md, named as typed
        ("--dwell-min", dwell_min, "session_min", "the session's lapping time"),
        ("--lap-diameter-mm", lap_diameter_mm, "lap_size_mm", "the lap diameter"),
        ("--match-tol-mm", match_tol_mm, "length_mm", "the matching tolerance"),
    ])
    mode = parse_guard_band(guard_band)
    if trials is not None:
        from ..limits import check_range

        check_range(trials, "trials", where="--trials", name="the number of trials")
    refuse_overwriting_inputs({"--plot": plot_out}, [before, after, log])
    check_output(plot_out, "--plot")
    lb = load_input(before)
    la = load_input(after)
    # printed heights: a change is known no finer than the coarser of the two surveys resolves
    lab = load_lab_defaults(uncertainty_defaults)
    step = max(lb.height_step_um(lab), la.height_step_um(lab))
    _check_same_surface(lb, la)
    hb, ha = lb.heightmap, la.heightmap
    try:
        idx = match_nodes(hb, ha, tol_mm=match_tol_mm)
    except InputValueError as exc:  # name both files: the message speaks of "before" and "after" surveys
        raise InputValueError(exc.message, where=f"{before} -> {after}", fix=exc.fix) from None
    lap = None
    if lap_size_mm is not None:
        l, w = parse_lap_size(lap_size_mm)
        lap = LapModel("rect", length_mm=l, width_mm=w)
    elif lap_diameter_mm is not None:
        lap = LapModel("round", diameter_mm=lap_diameter_mm)
    dlog = None
    if log is not None:
        from ..io import read_lap_log

        dlog = read_lap_log(log)
        if lap is None:
            raise InputValueError("a lapping log needs the lap's size", where="--log", fix="add --lap-diameter-mm or --lap-size-mm")
    target = source = tgt = decision = None
    if any(v is not None for v in (target_um, target_grade, target_gap_um, gap_fraction)):
        limit, limit_source = resolve_target(hb, target_um, target_grade, target_gap_um, gap_fraction)
        kind = target_kind(target_um, target_grade, target_gap_um)
        u = u_src = None
        if needs_budget_u(kind, mode):  # the after survey's own U, also the estimate of the next survey's
            u, u_src = budget_u(la, trials=trials, seed=seed, u_height_um=u_height_um,
                                uncertainty_defaults=uncertainty_defaults, what="the after survey")
        tgt = guard_banded(limit, limit_source, kind, mode, u, u_src)
        target, source = tgt.aim_um, limit_source
    if tgt is None or not needs_budget_u(kind, mode):  # no budget is evaluated: the option would be ignored
        refuse_unused({"--trials": trials, "--seed": seed, "--u-height-um": u_height_um},
                      why="unless a target's guard band comes from the after survey's uncertainty budget",
                      fix="drop the option, or give a target (--target-grade or --target-gap-um, or --guard-band "
                          "budget)")
    if tgt is not None and tgt.proven:
        # a limit to prove: the after survey decided by ISO 14253-1 with its U; the sessions aim at limit - U, so
        # "met within the uncertainty" (a gain inside U) does not apply: the guard band already holds U
        from ..conformance import decide
        from ..form import minimum_zone

        decision = decide(minimum_zone(ha.x_mm, ha.y_mm, ha.height_um).flatness_um, tgt.limit_um, tgt.guard_band_um)
        u_after = None
    else:
        u_after = _after_uncertainty(la, hb, ha, idx, target)
    pr = compare_surveys(hb, ha, tol_mm=match_tol_mm, dwell_min=dwell_min, lap=lap, log=dlog, target_um=target,
                         u_after_um=u_after)
    if plot_out is not None:
        from ..output import _plots as plot

        # the change referred to the plane of the least removal: the change and removal views label one spot
        # with one depth (issue 15, item 14)
        axes = plot.compare_change_map(None, pr.x_mm, pr.y_mm, hb.height_um, ha.height_um[idx], pr.removed_um,
                                       units=units.value, length_mm=hb.length_mm, width_mm=hb.width_mm,
                                       change_um=pr.change_referred_um,
                                       step_um=step)
        plot.save_png(axes[0].figure, plot_out, dpi=120, caption=_plot_caption(lb, la, before, after))
    if json_out:
        doc = progress_json(pr, before=before, after=after, lap=lap, target_source=source, units=units.value)
        if tgt is not None:
            doc.update(target_kind=tgt.kind, target_limit_um=tgt.limit_um, guard_band_um=tgt.guard_band_um,
                       guard_band_source=tgt.guard_band_source, guard_band_proves_limit=tgt.proven,
                       target_decision=None if decision is None else decision.verdict,
                       target_decision_rule=None if decision is None else decision.statement)
        emit_json(doc)
    else:
        render_summary(pr, lap=lap, target_source=source, units=units.value, names=hb.names, target=tgt,
                       decision=decision, step_um=step)
        if plot_out is not None:
            stdout_console().print(f"picture written to {plot_out}", markup=False)


def _after_uncertainty(la, hb, ha, idx, target):
    """Expanded uncertainty (µm) of the after survey's flatness when a target is given and not met as
    measured, from its own readings (Monte Carlo, few trials, fixed seed); None when it cannot be had."""
    if target is None or la.survey is None:
        return None
    from ..errors import FlatcheckError
    from ..evaluation import survey_uncertainty
    from ..form import minimum_zone

    if minimum_zone(ha.x_mm, ha.y_mm, ha.height_um).flatness_um <= target:
        return None
    try:  # 2000 trials give U to a few per cent (JCGM 101 adaptive scheme, from memory): enough to say "within U"
        return float(survey_uncertainty(la, trials=2000, seed=1).minimum_zone.expanded_um)
    except FlatcheckError:
        return None


def _plot_caption(lb, la, before: Path, after: Path) -> tuple:
    """Lines above the change picture: the surface, the two surveys' dates and what the picture shows."""
    def ident(loaded, path):
        sv = loaded.survey
        if sv is None:
            return loaded.heightmap.label or path.stem
        return " · ".join(v for v in (sv.surface.description, sv.surface.ident) if v) or path.stem

    def date(loaded):
        return (loaded.survey.date if loaded.survey is not None else "") or "date not stated"

    return (ident(lb, before),
            f"surveys of {date(lb)} ({before.name}) and {date(la)} ({after.name}) · pictured by flatcheck · "
            "before, after, the change between them and the least removal consistent with it")
