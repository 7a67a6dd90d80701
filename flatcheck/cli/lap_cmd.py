"""``flatcheck lap``: where to lap, how long, and what the surface will look like afterwards."""

from __future__ import annotations

from rich.markup import escape

import sys
import textwrap
from pathlib import Path

import typer

from typing import TYPE_CHECKING

from ._app import app
from .common import (
    refuse_unused,
    load_lab_defaults,
    GAP_FRACTION_HELP,
    TARGET_GAP_HELP,
    auto_trials_option,
    budget_u,
    check_output,
    guard_band_option,
    SAFETY_LINES,
    emit_json,
    load_input,
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
    from ..lapping import LapPlan


def plan_json(plan: LapPlan, *, input_path: Path, label: str, target_source: str, notes: list, units: str,
              step_um: float | None = None) -> dict:
    """The pinned JSON object of ``flatcheck lap``."""
    lr = plan.removal
    return {
        "command": "lap",
        "input": str(input_path),
        "label": label,
        "json_units": "heights um, positions mm, volumes mm^3, times in time_unit (whatever --units says)",
        "display_units": units,
        "target_um": lr.target_um,
        "target_source": target_source,
        "flatness_before_um": lr.flatness_before_um,
        "flatness_after_least_removal_um": lr.flatness_after_um,
        "removal": [
            {"x_mm": float(x), "y_mm": float(y), "remove_um": float(r)}
            for x, y, r in zip(lr.x_mm, lr.y_mm, lr.remove_um)
        ],
        "removed_volume_mm3": lr.removed_volume_mm3,
        "max_depth_um": lr.max_depth_um,
        "high_spots": lr.high_spots,
        "zone_plane": {"a_um": lr.plane[0], "b_um_per_mm": lr.plane[1], "c_um_per_mm": lr.plane[2]},
        "lap": plan.lap,
        "time_unit": plan.lap.time_unit,
        "total_time": plan.total_time,
        "predicted_flatness_um": plan.predicted_flatness_um,
        "predicted_flatness_unrounded_dwell_um": plan.dwell_flatness_um,
        "predicted_height": [
            {"x_mm": float(x), "y_mm": float(y), "height_um": float(z)}
            for x, y, z in zip(lr.x_mm, lr.y_mm, plan.predicted_height_um)
        ],
        "dwell_grid": {"xs_mm": plan.xs_mm, "ys_mm": plan.ys_mm, "dwell": plan.plan_dwell},
        "passes": plan.passes,
        "dwell_smoothness": plan.smoothness,
        "min_pass_time": plan.min_pass_time,
        "passes_before_tidying": plan.passes_unmerged,
        "predicted_flatness_before_tidying_um": plan.unmerged_flatness_um,
        "short_passes": list(plan.merges),
        "predicted_flatness_best_um": plan.best_flatness_um,
        "passes_too_short_by_hand": list(plan.too_short_by_hand),
        "predicted_flatness_skipping_them_um": plan.flatness_skipping_short_um,
        "shortfall": None if plan.shortfall is None else {
            "causes": list(plan.shortfall.causes),
            "losses_um": plan.shortfall.losses_um,
            "levels": plan.shortfall.levels,
            "levels_suggested": plan.shortfall.levels_suggested,
            "levels_suggested_flatness_um": plan.shortfall.levels_suggested_um,
            "text": plan.shortfall.text(units, step_um),
        },
        "chart": {
            "columns": plan.chart.columns,
            "rows": plan.chart.rows,
            "x_edges_mm": plan.chart.x_edges_mm,
            "y_edges_mm": plan.chart.y_edges_mm,
            "time": plan.chart.time,
            "time_unit": plan.chart.time_unit,
        },
        "notes": notes,
        "safety": SAFETY_LINES["dust"],
    }


def target_source_text(tgt, units: str) -> str:
    """Where the plan's target comes from, with its guard band when there is one (display units)."""
    return tgt.source_text(units)


def guard_band_notes(tgt) -> list:
    """The guard band's source (or why there is none), as notes."""
    return list(tgt.notes)


def target_json(tgt) -> dict:
    """The target's limit and guard band (JSON keys of lap; ``target_um`` is what the plan aims at)."""
    return {
        "target_kind": tgt.kind,
        "target_limit_um": tgt.limit_um,
        "guard_band_um": tgt.guard_band_um,
        "guard_band_source": tgt.guard_band_source,
        "guard_band_proves_limit": tgt.proven,
    }


def _fmt_time(t: float, unit: str) -> str:
    # two significant figures below 10: a pass of a few seconds must not read "0.0 min"
    if unit == "min":
        return f"{t:.1f} min" if t >= 10 else f"{t:.2g} min"
    return f"{t:.1f} passes" if t >= 10 else f"{t:.2g} passes"


def _fmt_pass_time(plan: LapPlan, p) -> str:
    """A pass's time for the table: strokes when known, seconds and a "!" mark when too short by hand."""
    t = _fmt_time(p.time, p.time_unit) + (f" ({p.strokes} strokes)" if p.strokes is not None else "")
    if not getattr(p, "even", True):  # longer in some cells than others: the chart says where
        t += " (uneven, see chart)"
    if p.order in plan.too_short_by_hand:
        t += f" ({p.time * 60:.0f} s) !" if p.time_unit == "min" else " !"
    return t


def short_by_hand_line(plan: LapPlan, units: str, step_um: float | None = None) -> str:
    """The footnote of the passes marked "!" (empty when there are none)."""
    from ..units import format_height

    n = len(plan.too_short_by_hand)
    if not n:
        return ""
    what = "under 10 s" if plan.lap.time_unit == "min" else "under one stroke"
    orders = ", ".join(str(o) for o in plan.too_short_by_hand)
    return (
        f"! pass{'es' if n > 1 else ''} {orders}: {what}, too short to work evenly by hand; add the time to the "
        f"pass before or skip it (skipping {'all ' + str(n) if n > 1 else 'it'}: predicted "
        f"{format_height(plan.flatness_skipping_short_um, units, step_um=step_um)} instead of "
        f"{format_height(plan.predicted_flatness_um, units, step_um=step_um)})"
    )


def _fmt_extent(extent_mm) -> str:
    """``x0-x1, y0-y1`` in whole mm (a single spot as one number)."""
    x0, x1, y0, y1 = (float(v) for v in extent_mm)

    def span(a, b):
        return f"{a:.0f}" if round(a) == round(b) else f"{a:.0f}-{b:.0f}"

    return f"{span(x0, x1)}, {span(y0, y1)}"


def tidy_line(plan: LapPlan) -> str:
    """One line on how the dwell was smoothed and the short passes resolved."""
    if not plan.passes:
        return ""
    kept = sum("kept" in m for m in plan.merges)
    if plan.min_pass_time <= 0:
        return f"Dwell smoothness {plan.smoothness:g}; {len(plan.passes)} passes (no shortest pass: every one kept)"
    line = (
        f"Dwell smoothness {plan.smoothness:g}; {len(plan.passes)} passes "
        f"({plan.passes_unmerged} before passes shorter than {_fmt_time(plan.min_pass_time, plan.lap.time_unit)} "
        "were dropped, merged or lengthened)"
    )
    if kept:
        line += f"; {kept} short pass(es) kept: changing them would lose flatness"
    return line


def _fmt_cell(t: float) -> str:
    if t <= 0:
        return "."
    return f"{t:.1f}" if t >= 0.05 else "<0.1"


def chart_text(plan: LapPlan, max_width: int = 96) -> str:
    """The cell chart as plain text (north at the top), for printing and taking to the bench.

    A chart wider than ``max_width`` characters is cut into blocks of whole columns, west block first,
    each with its own column letters, so that no line wraps on a terminal or a printed page.
    """
    ch = plan.chart
    unit = "min" if ch.time_unit == "min" else "passes"
    width = max(6, max((len(f"{t:.1f}") for t in ch.time.ravel()), default=3) + 1)
    per_block = max(1, (max_width - 4) // width)
    n_cols = len(ch.columns)
    lines = [f"Time per cell ({unit}); columns A.. from west, rows 1.. from south; north is up"]
    for start in range(0, n_cols, per_block):
        stop = min(n_cols, start + per_block)
        if n_cols > per_block:
            lines.append(f"  columns {ch.columns[start]}-{ch.columns[stop - 1]}:")
        lines.append("    " + "".join(f"{c:>{width}}" for c in ch.columns[start:stop]))
        for j in range(len(ch.rows) - 1, -1, -1):
            cells = "".join(f"{_fmt_cell(t):>{width}}" for t in ch.time[j, start:stop])
            lines.append(f"{ch.rows[j]:>3} {cells}")
    edges_x = ", ".join(f"{round(float(v), 1):g}" for v in ch.x_edges_mm)
    edges_y = ", ".join(f"{round(float(v), 1):g}" for v in ch.y_edges_mm)
    for label, edges in (("x", edges_x), ("y", edges_y)):
        lines.append(textwrap.fill(f"cell edges {label} (mm): {edges}", width=max_width, subsequent_indent="    "))
    return "\n".join(lines)


def plan_text(plan: LapPlan, *, label: str, target_source: str, notes: list, units: str,
              step_um: float | None = None) -> str:
    """The whole plan as plain text: summary, passes, chart, caution."""
    from ..units import format_height

    lr = plan.removal

    def h(v):
        return format_height(v, units, step_um=step_um)

    if not plan.passes:  # one sentence, not an empty plan (issue 15, item 13)
        return already_met_text(plan, label=label, target_source=target_source, units=units, step_um=step_um) + "\n"
    out = [
        f"Lapping plan for {label}",
        f"Target flatness {h(lr.target_um)} ({target_source}); now {h(lr.flatness_before_um)}",
        f"Least removal: {lr.removed_volume_mm3:.4g} mm^3, deepest {h(lr.max_depth_um)}",
        f"Lap: {plan.lap.describe()}",
        f"Predicted flatness after the plan: {h(plan.predicted_flatness_um)} "
        f"(unrounded dwell {h(plan.dwell_flatness_um)}); total {_fmt_time(plan.total_time, plan.lap.time_unit)}",
        tidy_line(plan),
        *([plan.shortfall.text(units, step_um)] if plan.shortfall is not None else []),
        "",
        "Passes, highest first (work the lap evenly over the zone for the time given):",
        f"{'#':>3}  {'zone':<10} {'centre x, y (mm)':<18} {'extent x, y (mm)':<26} {'depth':>12}  time",
    ]
    for p in plan.passes:
        ext = _fmt_extent(p.extent_mm)
        t = _fmt_pass_time(plan, p)
        out.append(
            f"{p.order:>3}  {p.zone:<10} {f'{p.centre_x_mm:.0f}, {p.centre_y_mm:.0f}':<18} {ext:<26} {h(p.depth_um):>12}  {t}"
        )
    if not plan.passes:
        out.append("  none: the surface is already within the target")
    else:
        if plan.too_short_by_hand:
            out.append(short_by_hand_line(plan, units, step_um))
        out += ["", chart_text(plan)]
    out.append("")
    out += [f"Note: {n}" for n in notes]
    out.append(f"Caution: {SAFETY_LINES['dust']}")
    # 96 characters fit a printed A4 page in a monospaced font; the chart is already cut to fit.
    return "\n".join(textwrap.fill(line, width=96, subsequent_indent="  ") if len(line) > 96 and "\n" not in line else line
                     for line in out) + "\n"


def already_met_text(plan: LapPlan, *, label: str, target_source: str, units: str,
                     step_um: float | None = None) -> str:
    """The whole plan when the surface is already within the target: one sentence."""
    from ..units import format_height

    lr = plan.removal
    return (f"{label} is already within the target {format_height(lr.target_um, units, step_um=step_um)} "
            f"({target_source}): its flatness is {format_height(lr.flatness_before_um, units, step_um=step_um)}, so no "
            "lapping is needed.")


def render_summary(plan: LapPlan, *, label: str, target_source: str, notes: list, units: str,
                   step_um: float | None = None) -> None:
    """Human summary on stdout (rich)."""
    from rich.table import Table
    from ..units import format_height
    from ..units import height_unit_label

    con = stdout_console()
    lr = plan.removal
    hu = height_unit_label(units)

    def h(v):
        return format_height(v, units, step_um=step_um)

    if not plan.passes:  # one sentence, not an empty plan (issue 15, item 13)
        con.print(already_met_text(plan, label=label, target_source=target_source, units=units, step_um=step_um),
                  markup=False)
        return
    con.print(f"[bold]Lapping plan[/bold] for {escape(label)}")
    con.print(f"Target flatness {h(lr.target_um)} ({escape(target_source)}); minimum zone now {h(lr.flatness_before_um)}",
              markup=True)
    con.print(f"Least removal {lr.removed_volume_mm3:.4g} mm^3, deepest {h(lr.max_depth_um)}")
    for s in lr.high_spots[:5]:
        con.print(f"  high spot at ({s.x_mm:g}, {s.y_mm:g}) mm: {h(s.depth_um)} over {s.nodes} node(s)")
    con.print(f"Lap: {escape(plan.lap.describe())}")
    con.print(
        f"Predicted flatness after the plan: [bold]{h(plan.predicted_flatness_um)}[/bold] "
        f"(unrounded dwell {h(plan.dwell_flatness_um)}); total {_fmt_time(plan.total_time, plan.lap.time_unit)}"
    )
    if plan.passes:
        con.print(tidy_line(plan), markup=False)
    if plan.shortfall is not None:
        con.print(plan.shortfall.text(units, step_um), markup=False)
    table = Table(title="Passes, highest first", title_justify="left")
    for col in ("#", "zone", "centre (mm)", "extent x, y (mm)", f"depth ({hu})", "time"):
        table.add_column(col)
    for p in plan.passes:
        t = _fmt_pass_time(plan, p)
        table.add_row(
            str(p.order), escape(p.zone), f"{p.centre_x_mm:.0f}, {p.centre_y_mm:.0f}",
            _fmt_extent(p.extent_mm),
            format_height(p.depth_um, units, unit=False, step_um=step_um), escape(t),
        )
    if plan.passes:
        con.print(table)
        if plan.too_short_by_hand:
            con.print(short_by_hand_line(plan, units, step_um), markup=False)
        con.print(chart_text(plan, max_width=max(40, con.width)), markup=False)
    else:
        con.print("No passes: the surface is already within the target.")
    for n in notes:
        con.print(f"Note: {n}", markup=False)
    con.print(f"[bold]Caution:[/bold] {SAFETY_LINES['dust']}")


@app.command("lap")
def lap_cmd(
    input: Path = typer.Argument(..., help="Survey TOML or height-map CSV."),
    target_um: float = typer.Option(None, "--target-um", help="Target flatness in µm."),
    target_grade: str = typer.Option(None, "--target-grade", help="Target as STANDARD:GRADE, e.g. din-876:0."),
    target_gap_um: float = typer.Option(None, "--target-gap-um", help=TARGET_GAP_HELP),
    gap_fraction: float = typer.Option(None, "--gap-fraction", help=GAP_FRACTION_HELP),
    lap_diameter_mm: float = typer.Option(None, "--lap-diameter-mm", help="Round lap diameter (mm)."),
    lap_size_mm: str = typer.Option(None, "--lap-size-mm", help="Rectangular lap LENGTHxWIDTH (mm), length along x."),
    rate_um_per_min: float = typer.Option(None, "--rate-um-per-min", help="Your calibrated removal rate under the lap."),
    rate_um_per_pass: float = typer.Option(None, "--rate-um-per-pass", help="Removal per pass (times then in passes)."),
    strokes_per_pass: int = typer.Option(None, "--strokes-per-pass", help="Strokes in one pass (with a rate per pass)."),
    stroke_mm: float = typer.Option(0.0, "--stroke-mm", help="Length of the lap's working strokes about each spot (mm)."),
    step_mm: float = typer.Option(None, "--step-mm", help="Dwell grid pitch (mm); default the survey grid."),
    cell_mm: float = typer.Option(None, "--cell-mm", help="Chart cell size (mm), from the south-west corner; default the lap size (a remainder of half a cell or less joins the last cell)."),
    levels: int = typer.Option(4, "--levels", help="Time steps the dwell map is rounded to (more = more passes)."),
    smoothing: float = typer.Option(0.01, "--smoothing", help="Regularisation of the dwell deconvolution."),
    smoothness: float = typer.Option(
        None, "--smoothness", help="Gradient penalty on the dwell map (default: chosen from the target, see docs)."
    ),
    min_pass_fraction: float = typer.Option(
        0.1, "--min-pass-fraction", help="Shortest pass as a fraction of the longest (0 keeps every pass)."
    ),
    removal_csv: Path = typer.Option(None, "--removal-csv", help="Write the least-removal map (x_mm,y_mm,remove_um); replaced if it exists."),
    plan_out: Path = typer.Option(None, "--plan-out", help="Write the plan and cell chart as a text file for the bench; replaced if it exists."),
    units: Units = units_option(),
    json_out: bool = typer.Option(False, "--json", help="One JSON object on stdout."),
    guard_band: str = guard_band_option(),
    trials: int | None = auto_trials_option(),
    seed: int = seed_option(),
    u_height_um: float = u_height_option(),
    uncertainty_defaults: Path = uncertainty_defaults_option(),
) -> None:
    """Least-removal map, dwell map and a pass plan to bring the surface within a target flatness.

    A target from a grade or an air gap is a limit the survey after lapping must prove (ISO 14253-1): the plan
    aims below it by the expected U of that survey, from this survey's uncertainty budget (--guard-band)."""
    from ..lapping import build_lap
    from ..lapping import check_lap_on_surface
    from ..lapping import check_lap_options
    from ..lapping import least_removal
    from ..lapping import plan_lapping
    from ..lapping import resolve_target
    from ..lapping import guard_banded, needs_budget_u, parse_guard_band, target_kind

    from ..io import write_text_atomic

    # options first, so a typing slip is reported before the survey is reduced
    check_lap_options(
        lap_diameter_mm=lap_diameter_mm, lap_size_mm=lap_size_mm, rate_um_per_min=rate_um_per_min,
        rate_um_per_pass=rate_um_per_pass, strokes_per_pass=strokes_per_pass, stroke_mm=stroke_mm, step_mm=step_mm,
        cell_mm=cell_mm, levels=levels, smoothing=smoothing, smoothness=smoothness, min_pass_fraction=min_pass_fraction,
    )
    mode = parse_guard_band(guard_band)
    if trials is not None:
        from ..limits import check_range

        check_range(trials, "trials", where="--trials", name="the number of trials")
    refuse_overwriting_inputs({"--removal-csv": removal_csv, "--plan-out": plan_out}, [input])
    check_output(removal_csv, "--removal-csv")
    check_output(plan_out, "--plan-out")
    loaded = load_input(input)
    hm = loaded.heightmap
    from ..bench import check_sag_of

    sag = check_sag_of(hm)  # a long beam sagging between its supports: said before any lapping advice
    limit, limit_source = resolve_target(hm, target_um, target_grade, target_gap_um, gap_fraction)
    kind = target_kind(target_um, target_grade, target_gap_um)
    u = u_src = None
    if needs_budget_u(kind, mode):  # the expected U of the survey after lapping: this survey's budget
        u, u_src = budget_u(loaded, trials=trials, seed=seed, u_height_um=u_height_um,
                            uncertainty_defaults=uncertainty_defaults, what="this survey")
    else:  # no budget is evaluated: a Monte Carlo option would be silently ignored
        refuse_unused({"--trials": trials, "--seed": seed, "--u-height-um": u_height_um},
                      why="unless the guard band comes from the survey's uncertainty budget",
                      fix="drop the option, or aim by the budget (--target-grade or --target-gap-um, or "
                          "--guard-band budget)")
    tgt = guard_banded(limit, limit_source, kind, mode, u, u_src)
    step = loaded.height_step_um(lab=load_lab_defaults(uncertainty_defaults))  # printed heights' step
    target, source = tgt.aim_um, target_source_text(tgt, units.value)
    lap, notes = build_lap(hm, lap_diameter_mm, lap_size_mm, rate_um_per_min, rate_um_per_pass, strokes_per_pass, stroke_mm)
    notes = guard_band_notes(tgt) + notes
    check_lap_on_surface(hm, lap, lap_option="--lap-size-mm" if lap_size_mm is not None else "--lap-diameter-mm",
                         cell_mm=cell_mm)
    with progress_bar("planning", 2, enabled=sys.stderr.isatty() and not json_out) as advance:
        lr = least_removal(hm, target)
        advance(1)
        plan = plan_lapping(hm, lr, lap, step_mm=step_mm, cell_mm=cell_mm, levels=levels, smoothing=smoothing,
                            smoothness=smoothness, min_pass_fraction=min_pass_fraction)
        advance(1)
    label = hm.label or input.stem
    if removal_csv is not None:
        rows = ["x_mm,y_mm,remove_um"] + [f"{x:.6g},{y:.6g},{r:.4f}" for x, y, r in zip(lr.x_mm, lr.y_mm, lr.remove_um)]
        write_text_atomic(removal_csv, f"# least-removal map for {label}, target {target:g} um\n" + "\n".join(rows) + "\n")
    first = f"Supports first: {sag.message}." if sag.flagged else ""
    if plan_out is not None:
        text = plan_text(plan, label=label, target_source=source, notes=notes, units=units.value, step_um=step)
        if first:
            text = textwrap.fill(first, width=96, subsequent_indent="  ") + "\n\n" + text
        write_text_atomic(plan_out, text)
    if json_out:
        doc = plan_json(plan, input_path=input, label=label, target_source=source, notes=notes, units=units.value,
                        step_um=step)
        doc.update(target_json(tgt))
        doc["support_check"] = sag
        emit_json(doc)
    else:
        if first:
            stdout_console().print(first, markup=False, highlight=False, style="bold")
        render_summary(plan, label=label, target_source=source, notes=notes, units=units.value, step_um=step)
