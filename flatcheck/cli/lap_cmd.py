"""``flatcheck lap``: where to lap, how long, and what the surface will look like afterwards."""

from __future__ import annotations

import math
import sys
import textwrap
from pathlib import Path

import typer
from rich.table import Table

from ..errors import InputValueError, OutputError
from ..lapping import LapModel, LapPlan, least_removal, plan_lapping
from ..units import format_height, height_unit_label
from ._app import app
from .common import (
    SAFETY_LINES,
    emit_json,
    load_input,
    progress_bar,
    refuse_overwriting_inputs,
    stdout_console,
    Units,
    units_option,
)

#: Placeholder rate when the user has not calibrated one: times are then "per µm/min" and scale by 1/rate.
_ASSUMED_RATE_UM_PER_MIN = 1.0


#: Help of the air-bearing target options, shared by the commands that take a target (lap, compare).
TARGET_GAP_HELP = "Target: the air-bearing limit for this gap in µm (a fraction of it, see --gap-fraction)."
GAP_FRACTION_HELP = "With --target-gap-um: the fraction of the gap (default 0.25, common practice)."


def resolve_target(
    hm,
    target_um: float | None,
    target_grade: str | None,
    target_gap_um: float | None = None,
    gap_fraction: float | None = None,
) -> tuple[float, str]:
    """Target flatness in µm and a description of where it came from.

    The target is a number (``target_um``), a grade of a standard (``target_grade``,
    STANDARD:GRADE) or the air-bearing limit for a gap (``target_gap_um``): the
    fraction ``gap_fraction`` of the gap (flatcheck.bearing's default when None)
    applied to the whole surface, which is conservative, since the bearing limit
    applies to the form under each pad's footprint.
    """
    given = [v is not None for v in (target_um, target_grade, target_gap_um)]
    if gap_fraction is not None and target_gap_um is None:
        other = "--target-um" if target_um is not None else "--target-grade" if target_grade is not None else None
        raise InputValueError(
            "the fraction of the gap is only used with --target-gap-um" + (f", not with {other}" if other else ""),
            where="--gap-fraction",
            fix="leave --gap-fraction out, or give the target as --target-gap-um GAP",
        )
    if sum(given) != 1:
        raise InputValueError(
            "give exactly one target",
            where="--target-um/--target-grade/--target-gap-um",
            fix="e.g. --target-um 3, --target-grade din-876:0 or --target-gap-um 8",
        )
    if target_gap_um is not None:
        from ..bearing import DEFAULT_GAP_FRACTION

        check_option(target_gap_um, "--target-gap-um", what="an air gap in µm")
        fraction = DEFAULT_GAP_FRACTION if gap_fraction is None else gap_fraction
        check_option(fraction, "--gap-fraction", what="a fraction of the gap")
        if fraction >= 1:
            raise InputValueError(f"gap fraction {fraction:g} is not below 1", where="--gap-fraction", fix="e.g. 0.25")
        return float(fraction * target_gap_um), (
            f"air-bearing limit {fraction:g} x {target_gap_um:g} µm gap (the local limit under a pad, applied to "
            "the whole surface: conservative; the fraction is common practice, not a published standard)"
        )
    if target_um is not None:
        if not (math.isfinite(target_um) and target_um >= 0):
            raise InputValueError(f"target {target_um} µm must be >= 0", where="--target-um", fix="give a flatness in µm")
        return float(target_um), "given"
    from ..conformance import plate_size, tolerance

    std, sep, grade = target_grade.partition(":")
    if not sep or not std or not grade:
        raise InputValueError(
            f"grade {target_grade!r} is not STANDARD:GRADE", where="--target-grade", fix="e.g. din-876:0 or asme-b89.3.7:AA"
        )
    size = plate_size(hm)
    try:
        tol = tolerance(std.strip(), grade.strip(), size.length_mm, size.width_mm)
    except InputValueError as exc:  # the tables name --standard/--grade; here both come from --target-grade
        raise InputValueError(exc.message, where="--target-grade", fix=exc.fix) from None
    where = "the surface's stated size" if size.source == "surface" else "the extent of the measured points"
    return tol.tolerance_um, (
        f"{tol.standard} grade {tol.grade} for {size.length_mm:g} x {size.width_mm:g} mm ({where}; {tol.status})"
    )


def _parse_size(text: str) -> tuple[float, float]:
    parts = text.lower().replace("×", "x").replace("mm", "").split("x")
    try:
        if len(parts) != 2:
            raise ValueError
        length, width = float(parts[0]), float(parts[1])
    except ValueError:
        raise InputValueError(f"lap size {text!r} is not LENGTHxWIDTH in mm", where="--lap-size-mm", fix="e.g. 200x100") from None
    if not (math.isfinite(length) and math.isfinite(width) and length > 0 and width > 0):
        raise InputValueError(
            f"lap size {text!r} must be two positive lengths", where="--lap-size-mm", fix="e.g. 200x100 (mm)"
        )
    return length, width


def check_option(value, option: str, *, minimum: float = 0.0, strict: bool = True, what: str = "a number") -> None:
    """Refuse an option value that is not finite or not above (``strict``) / at least ``minimum``.

    ``None`` (option not given) passes. The message names the option, so the user knows which one to fix.
    """
    if value is None:
        return
    ok = math.isfinite(value) and (value > minimum if strict else value >= minimum)
    if not ok:
        rel = ">" if strict else ">="
        raise InputValueError(f"{value:g} is not allowed", where=option, fix=f"give {what} {rel} {minimum:g}")


def check_output(path: Path | None, option: str) -> None:
    """Refuse, before any work, an output path whose folder is missing or which is a folder."""
    if path is None:
        return
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise OutputError(
            f"cannot write {path}: folder {folder} does not exist", where=option, fix="create the folder or choose another path"
        )
    if path.is_dir():
        raise OutputError(f"cannot write {path}: it is a folder", where=option, fix="give a file name")


def check_lap_fits(hm, lap: LapModel, option: str) -> None:
    """Refuse a lap that covers the whole surface from every position: it removes evenly and cannot level anything."""
    xmin, xmax, ymin, ymax = hm.extent_mm
    span_x, span_y = xmax - xmin, ymax - ymin
    if lap.shape == "round":
        too_big = lap.diameter_mm >= 2.0 * math.hypot(span_x, span_y)
        size = f"{lap.diameter_mm:g} mm"
    else:
        too_big = lap.length_mm >= 2.0 * span_x and lap.width_mm >= 2.0 * span_y
        size = f"{lap.length_mm:g} x {lap.width_mm:g} mm"
    if too_big:
        raise InputValueError(
            f"a {size} lap is more than twice the size of the surveyed area ({span_x:g} x {span_y:g} mm): it would "
            "cover everything wherever it stands and cannot lower the high spots alone",
            where=option,
            fix="give the lap's real size in mm",
        )


def check_lap_options(
    *,
    lap_diameter_mm=None,
    lap_size_mm=None,
    rate_um_per_min=None,
    rate_um_per_pass=None,
    strokes_per_pass=None,
    stroke_mm=None,
    step_mm=None,
    cell_mm=None,
    levels=None,
    smoothing=None,
    smoothness=None,
    min_pass_fraction=None,
) -> None:
    """Refuse bad lap and plan options before any file is read, naming the option (``flatcheck lap``'s names).

    Every argument is the option's value, or None when the command has no such option or it was not given.
    Any command that plans lapping (lap, report) calls this first, so a slip reads the same everywhere.

    Raises
    ------
    InputValueError
        ``where`` is the option, e.g. ``--lap-diameter-mm: -5 is not allowed; give a diameter in mm > 0``.
    """
    if lap_diameter_mm is not None and lap_size_mm is not None:
        raise InputValueError("give a round or a rectangular lap, not both", where="--lap-diameter-mm/--lap-size-mm")
    if rate_um_per_min is not None and rate_um_per_pass is not None:
        raise InputValueError("give one removal rate", where="--rate-um-per-min/--rate-um-per-pass")
    if strokes_per_pass is not None and rate_um_per_pass is None:
        raise InputValueError("strokes per pass go with a rate per pass", where="--strokes-per-pass", fix="add --rate-um-per-pass")
    check_option(lap_diameter_mm, "--lap-diameter-mm", what="a diameter in mm")
    if lap_size_mm is not None:
        _parse_size(lap_size_mm)
    check_option(rate_um_per_min, "--rate-um-per-min", what="a removal rate in µm/min")
    check_option(rate_um_per_pass, "--rate-um-per-pass", what="a removal in µm per pass")
    check_option(strokes_per_pass, "--strokes-per-pass", minimum=1, strict=False, what="a whole number of strokes")
    check_option(stroke_mm, "--stroke-mm", strict=False, what="a stroke length in mm")
    check_option(step_mm, "--step-mm", what="a grid pitch in mm")
    check_option(cell_mm, "--cell-mm", what="a cell size in mm")
    check_option(levels, "--levels", minimum=1, strict=False, what="a whole number of levels")
    check_option(smoothing, "--smoothing", strict=False, what="a regularisation weight")
    check_option(smoothness, "--smoothness", strict=False, what="a gradient penalty")
    check_option(min_pass_fraction, "--min-pass-fraction", strict=False, what="a fraction (at most 1)")
    if min_pass_fraction is not None and min_pass_fraction > 1:
        raise InputValueError(f"{min_pass_fraction:g} is not allowed", where="--min-pass-fraction", fix="give a fraction from 0 to 1")


def check_lap_on_surface(hm, lap: LapModel, *, lap_option: str, cell_mm: float | None = None,
                         cell_option: str | None = "--cell-mm") -> None:
    """Refuse a lap or chart cell that does not suit this surface, naming the option to change.

    The lap must not cover the whole surface from every position (:func:`check_lap_fits`), and the chart's
    cells (``cell_mm``, default the lap's size) must be few enough to print. ``cell_option`` is None for a
    command without a cell option: the error then names ``lap_option``.
    """
    from ..lapping import MAX_CHART_CELLS, chart_edges, default_cell_mm

    check_lap_fits(hm, lap, lap_option)
    xe, ye = chart_edges(hm, lap, cell_mm)
    ncol, nrow = xe.size - 1, ye.size - 1
    if ncol * nrow <= MAX_CHART_CELLS:
        return
    size = cell_mm if cell_mm is not None else default_cell_mm(lap)
    need = size
    while True:  # the smallest cell (to 1 %) that fits
        need *= 1.01
        a, b = chart_edges(hm, lap, need)
        if (a.size - 1) * (b.size - 1) <= MAX_CHART_CELLS:
            break
    what = f"{ncol} x {nrow} chart cells of {size:g} mm" + ("" if cell_mm is not None else " (the lap's size)")
    if cell_option is not None:
        raise InputValueError(
            f"{what} are too many to print (at most {MAX_CHART_CELLS})",
            where=cell_option,
            fix=f"give {cell_option} {math.ceil(need):g} or more" + ("" if cell_mm is not None else ", or check the lap size"),
        )
    raise InputValueError(
        f"{what} are too many to print (at most {MAX_CHART_CELLS})",
        where=lap_option,
        fix=f"check the lap size: the chart needs cells of at least {math.ceil(need):g} mm",
    )


def build_lap(hm, diameter_mm, size_mm, rate_per_min, rate_per_pass, strokes_per_pass, stroke_mm) -> tuple[LapModel, list]:
    """The lap model from the options, with notes on what was assumed.

    The values are checked first (:func:`check_lap_options`), so a bad one is reported by its option's name.
    """
    check_lap_options(lap_diameter_mm=diameter_mm, lap_size_mm=size_mm, rate_um_per_min=rate_per_min,
                      rate_um_per_pass=rate_per_pass, strokes_per_pass=strokes_per_pass, stroke_mm=stroke_mm)
    notes = []
    if rate_per_pass is not None:
        rate, unit = rate_per_pass, "pass"
    elif rate_per_min is not None:
        rate, unit = rate_per_min, "min"
    else:
        rate, unit = _ASSUMED_RATE_UM_PER_MIN, "min"
        notes.append(
            f"no removal rate given: times assume {_ASSUMED_RATE_UM_PER_MIN:g} µm/min; divide them by your calibrated "
            "rate (measure one with 'flatcheck compare BEFORE AFTER --dwell-min M')"
        )
    if size_mm is not None:
        l, w = _parse_size(size_mm)
        lap = LapModel("rect", length_mm=l, width_mm=w, rate_um=rate, time_unit=unit,
                       strokes_per_pass=strokes_per_pass, stroke_mm=stroke_mm)
    else:
        if diameter_mm is None:
            xmin, xmax, ymin, ymax = hm.extent_mm
            diameter_mm = max(5.0, 5.0 * round(min(xmax - xmin, ymax - ymin) / 4.0 / 5.0))
            notes.append(f"no lap size given: a round lap of {diameter_mm:g} mm (a quarter of the shorter side) is assumed")
        lap = LapModel("round", diameter_mm=diameter_mm, rate_um=rate, time_unit=unit,
                       strokes_per_pass=strokes_per_pass, stroke_mm=stroke_mm)
    return lap, notes


def plan_json(plan: LapPlan, *, input_path: Path, label: str, target_source: str, notes: list, units: str) -> dict:
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
            "text": plan.shortfall.text(units),
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


def _fmt_time(t: float, unit: str) -> str:
    # two significant figures below 10: a pass of a few seconds must not read "0.0 min"
    if unit == "min":
        return f"{t:.1f} min" if t >= 10 else f"{t:.2g} min"
    return f"{t:.1f} passes" if t >= 10 else f"{t:.2g} passes"


def _fmt_pass_time(plan: LapPlan, p) -> str:
    """A pass's time for the table: strokes when known, seconds and a "!" mark when too short by hand."""
    t = _fmt_time(p.time, p.time_unit) + (f" ({p.strokes} strokes)" if p.strokes is not None else "")
    if p.order in plan.too_short_by_hand:
        t += f" ({p.time * 60:.0f} s) !" if p.time_unit == "min" else " !"
    return t


def short_by_hand_line(plan: LapPlan, units: str) -> str:
    """The footnote of the passes marked "!" (empty when there are none)."""
    n = len(plan.too_short_by_hand)
    if not n:
        return ""
    what = "under 10 s" if plan.lap.time_unit == "min" else "under one stroke"
    orders = ", ".join(str(o) for o in plan.too_short_by_hand)
    return (
        f"! pass{'es' if n > 1 else ''} {orders}: {what}, too short to work evenly by hand; add the time to the "
        f"pass before or skip it (skipping {'all ' + str(n) if n > 1 else 'it'}: predicted "
        f"{format_height(plan.flatness_skipping_short_um, units)} instead of {format_height(plan.predicted_flatness_um, units)})"
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


def plan_text(plan: LapPlan, *, label: str, target_source: str, notes: list, units: str) -> str:
    """The whole plan as plain text: summary, passes, chart, caution."""
    lr = plan.removal

    def h(v):
        return format_height(v, units)

    out = [
        f"Lapping plan for {label}",
        f"Target flatness {h(lr.target_um)} ({target_source}); now {h(lr.flatness_before_um)}",
        f"Least removal: {lr.removed_volume_mm3:.4g} mm^3, deepest {h(lr.max_depth_um)}",
        f"Lap: {plan.lap.describe()}",
        f"Predicted flatness after the plan: {h(plan.predicted_flatness_um)} "
        f"(unrounded dwell {h(plan.dwell_flatness_um)}); total {_fmt_time(plan.total_time, plan.lap.time_unit)}",
        tidy_line(plan),
        *([plan.shortfall.text(units)] if plan.shortfall is not None else []),
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
            out.append(short_by_hand_line(plan, units))
        out += ["", chart_text(plan)]
    out.append("")
    out += [f"Note: {n}" for n in notes]
    out.append(f"Caution: {SAFETY_LINES['dust']}")
    # 96 characters fit a printed A4 page in a monospaced font; the chart is already cut to fit.
    return "\n".join(textwrap.fill(line, width=96, subsequent_indent="  ") if len(line) > 96 and "\n" not in line else line
                     for line in out) + "\n"


def render_summary(plan: LapPlan, *, label: str, target_source: str, notes: list, units: str) -> None:
    """Human summary on stdout (rich)."""
    con = stdout_console()
    lr = plan.removal
    hu = height_unit_label(units)

    def h(v):
        return format_height(v, units)

    con.print(f"[bold]Lapping plan[/bold] for {label}")
    con.print(f"Target flatness {h(lr.target_um)} ({target_source}); minimum zone now {h(lr.flatness_before_um)}")
    con.print(f"Least removal {lr.removed_volume_mm3:.4g} mm^3, deepest {h(lr.max_depth_um)}")
    for s in lr.high_spots[:5]:
        con.print(f"  high spot at ({s.x_mm:g}, {s.y_mm:g}) mm: {h(s.depth_um)} over {s.nodes} node(s)")
    con.print(f"Lap: {plan.lap.describe()}")
    con.print(
        f"Predicted flatness after the plan: [bold]{h(plan.predicted_flatness_um)}[/bold] "
        f"(unrounded dwell {h(plan.dwell_flatness_um)}); total {_fmt_time(plan.total_time, plan.lap.time_unit)}"
    )
    if plan.passes:
        con.print(tidy_line(plan), markup=False)
    if plan.shortfall is not None:
        con.print(plan.shortfall.text(units), markup=False)
    table = Table(title="Passes, highest first", title_justify="left")
    for col in ("#", "zone", "centre (mm)", "extent x, y (mm)", f"depth ({hu})", "time"):
        table.add_column(col)
    for p in plan.passes:
        t = _fmt_pass_time(plan, p)
        table.add_row(
            str(p.order), p.zone, f"{p.centre_x_mm:.0f}, {p.centre_y_mm:.0f}",
            _fmt_extent(p.extent_mm),
            format_height(p.depth_um, units, unit=False), t,
        )
    if plan.passes:
        con.print(table)
        if plan.too_short_by_hand:
            con.print(short_by_hand_line(plan, units), markup=False)
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
) -> None:
    """Least-removal map, dwell map and a pass plan to bring the surface within a target flatness."""
    from ..io import write_text_atomic

    # options first, so a typing slip is reported before the survey is reduced
    check_lap_options(
        lap_diameter_mm=lap_diameter_mm, lap_size_mm=lap_size_mm, rate_um_per_min=rate_um_per_min,
        rate_um_per_pass=rate_um_per_pass, strokes_per_pass=strokes_per_pass, stroke_mm=stroke_mm, step_mm=step_mm,
        cell_mm=cell_mm, levels=levels, smoothing=smoothing, smoothness=smoothness, min_pass_fraction=min_pass_fraction,
    )
    refuse_overwriting_inputs({"--removal-csv": removal_csv, "--plan-out": plan_out}, [input])
    check_output(removal_csv, "--removal-csv")
    check_output(plan_out, "--plan-out")
    hm = load_input(input).heightmap
    target, source = resolve_target(hm, target_um, target_grade, target_gap_um, gap_fraction)
    lap, notes = build_lap(hm, lap_diameter_mm, lap_size_mm, rate_um_per_min, rate_um_per_pass, strokes_per_pass, stroke_mm)
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
    if plan_out is not None:
        write_text_atomic(plan_out, plan_text(plan, label=label, target_source=source, notes=notes, units=units.value))
    if json_out:
        emit_json(plan_json(plan, input_path=input, label=label, target_source=source, notes=notes, units=units.value))
    else:
        render_summary(plan, label=label, target_source=source, notes=notes, units=units.value)
