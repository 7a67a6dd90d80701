"""``flatcheck plan``: lay out a survey and write the blank survey file to fill in."""

from __future__ import annotations

import enum
import sys
import math
from pathlib import Path

import typer

from ..errors import InputValueError, LayoutError, OutputError
DEFAULT_MARGIN_MM = 30.0  # the core's value (a test keeps them equal); importing it would load numpy when the CLI starts
from ._app import app
from .common import check_output, emit_json, stdout_console


class Pattern(str, enum.Enum):
    union_jack = "union-jack"
    grid = "grid"


class Kind(str, enum.Enum):
    autocollimator = "autocollimator"
    level = "level"
    differential_level = "differential-level"
    indicator = "indicator"


class Reports(str, enum.Enum):
    mirror_tilt = "mirror-tilt"
    beam_deviation = "beam-deviation"


#: Layout parameter -> command-line option, for error messages.
_OPTION_OF = {
    "length_mm": "--length-mm",
    "width_mm": "--width-mm",
    "foot_spacing_mm": "--foot-spacing-mm",
    "margin_mm": "--margin-mm",
    "length_in": "--length-in",
    "width_in": "--width-in",
    "foot_spacing_in": "--foot-spacing-in",
    "margin_in": "--margin-in",
    "diagonals": "--diagonals",
}

#: Default margin when the sizes are given in inches: 1.25 in (31.75 mm), within the 1.0-1.5 in that
#: common practice keeps the lines in from the edges (layout.DEFAULT_MARGIN_MM is 30 mm).
DEFAULT_MARGIN_IN = 1.25


#: The range (docs/limits.md) of each size option, and what it is in words.
_SIZE_LIMITS = {"length": ("length_mm", "the length"), "width": ("length_mm", "the width"),
                "foot-spacing": ("foot_spacing_mm", "the foot spacing"), "margin": ("position_mm", "the margin")}


def _size_mm(name: str, v_mm, v_in, *, required: bool = True):
    """One size given as ``--<name>-mm`` or ``--<name>-in``: (value in mm or None, unit it was given in)."""
    from ..units import MM_PER_INCH

    if v_mm is not None and v_in is not None:
        raise InputValueError(
            f"both --{name}-mm and --{name}-in are given", where=f"--{name}-in", fix="give the size once, in mm or in inches"
        )
    from ..limits import LIMITS, check_range

    kind, what = _SIZE_LIMITS[name]
    # the upper end of docs/limits.md (1e300 would make the layout's messages print hundreds of digits); the
    # layout itself refuses small, zero, negative and non-finite sizes in the unit they were typed in
    if v_in is not None and math.isfinite(v_in) and abs(v_in) * MM_PER_INCH > LIMITS[kind].high:
        check_range(float(v_in) * MM_PER_INCH, kind, where=f"--{name}-in", name=f"{what} (in mm)")
    if v_mm is not None and math.isfinite(v_mm) and abs(v_mm) > LIMITS[kind].high:
        check_range(v_mm, kind, where=f"--{name}-mm", name=what)
    if v_in is not None:
        return float(v_in) * MM_PER_INCH, "in"  # 1 in = 25.4 mm exactly
    if v_mm is None and required:
        raise InputValueError(
            f"the {name.replace('-', ' ')} is missing", where=f"--{name}-mm", fix=f"give --{name}-mm (or --{name}-in in inches)"
        )
    return (None if v_mm is None else float(v_mm)), "mm"


def _check_output_path(path: Path) -> None:
    """Refuse an output path whose folder is missing or which is a folder (before doing any work)."""
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise OutputError(
            f"cannot write {path}: folder {folder} does not exist", where="--output",
            fix="create the folder or choose another path",
        )
    if path.is_dir():
        raise OutputError(f"cannot write {path}: it is a folder", where="--output", fix="give a file name, e.g. survey.toml")


_DEFAULT_UNIT = {"autocollimator": "arcsec", "level": "um/m", "differential-level": "um/m", "indicator": "um"}


def _layout_warnings(survey) -> list[str]:
    """What ``flatcheck reduce`` will refuse in this layout once it is read, with the fix as options.

    The layout is filled with exact zero readings and put through the reduction's own rank check
    (:func:`flatcheck.network_rank`), so plan and reduce can never disagree.
    """
    if survey.instrument.reads_heights:
        return []  # an indicator reads every height from one datum: nothing but the plane is hidden
    import numpy as np

    from ..errors import FlatcheckError
    from ..survey._rank import _article, network_rank
    from ..survey import simulate_survey

    filled = simulate_survey(survey, lambda x, y: np.zeros_like(x))
    try:
        info = network_rank(filled)
    except FlatcheckError as exc:
        return [f"flatcheck reduce will refuse this layout once read: {exc.message}; {exc.fix}"]
    out = []
    lay = survey.meta.get("layout", {})
    for shape in info.unobservable:
        if "twist" in shape and survey.pattern == "grid":
            nx, ny = lay.get("steps_x"), lay.get("steps_y")
            diag = "add --diagonals" if nx == ny else f"add --diagonals to a square grid (this one is {nx} x {ny} steps)"
            fix = f"{diag}, plan a Union Jack (--pattern union-jack), or survey with a level (--instrument level)"
        elif "twist" in shape:
            fix = "plan a Union Jack (--pattern union-jack), or survey with a level (--instrument level)"
        else:
            fix = "plan a Union Jack (--pattern union-jack)"
        what = "rows and columns" if survey.pattern == "grid" else "this layout"
        out.append(
            f"{what} read with {_article(survey.instrument.kind)} {survey.instrument.kind} cannot see {shape}: a surface of that shape "
            f"reads like a flat one, and flatcheck reduce will refuse the filled-in survey; {fix}"
        )
    return out


@app.command("plan")
def plan_cmd(
    pattern: Pattern = typer.Option(Pattern.union_jack, "--pattern", help="Survey pattern."),
    length_mm: float = typer.Option(None, "--length-mm", help="Length of the surface along x (west-east), mm."),
    width_mm: float = typer.Option(None, "--width-mm", help="Width of the surface along y (south-north), mm."),
    foot_spacing_mm: float = typer.Option(None, "--foot-spacing-mm", help="Foot spacing (base) of the instrument, mm."),
    margin_mm: float = typer.Option(
        None, "--margin-mm", help=f"Inset of the lines from the edges, mm (default {DEFAULT_MARGIN_MM:g})."
    ),
    length_in: float = typer.Option(None, "--length-in", help="Length in inches (instead of --length-mm)."),
    width_in: float = typer.Option(None, "--width-in", help="Width in inches (instead of --width-mm)."),
    foot_spacing_in: float = typer.Option(None, "--foot-spacing-in", help="Foot spacing in inches."),
    margin_in: float = typer.Option(None, "--margin-in", help=f"Inset in inches (default {DEFAULT_MARGIN_IN:g} in)."),
    instrument: Kind = typer.Option(Kind.autocollimator, "--instrument", help="Instrument kind."),
    unit: str = typer.Option(None, "--unit", help="Reading unit (default: arcsec, um/m for levels, um for indicators)."),
    reports: Reports = typer.Option(Reports.mirror_tilt, "--reports", help="Autocollimators: what the scale shows."),
    diagonals: bool = typer.Option(False, "--diagonals", help="Grid: add the corner-to-corner diagonals (square grids)."),
    description: str = typer.Option("surface plate", "--description", help="What the surface is."),
    ident: str = typer.Option("", "--ident", help="Identity of the surface (serial or asset number)."),
    material: str = typer.Option("", "--material", help="Material, e.g. granite."),
    output: Path = typer.Option(None, "-o", "--output", help="Write the blank survey file here (TOML)."),
    force: bool = typer.Option(False, "--force", help="Overwrite an existing output file."),
    single_run: bool = typer.Option(
        False, "--single-run", help="Plan one (forward) run per line instead of a forward and a back run."),
    json_out: bool = typer.Option(False, "--json", help="Print the layout as one JSON object."),
) -> None:
    """Lay out a Union Jack or grid survey, show the reading order and the set-up sheet, and write the blank
    survey file.

    Every line is planned with a forward and a back run (--single-run: forward only): the back run lets
    flatcheck name a mis-keyed reading. Sizes are given in mm (--length-mm...) or in inches (--length-in...);
    with any size in inches the blank file writes every length in inches (length_in, foot_spacing_in...) and
    the summary shows inches.
    """
    from ..survey import Instrument
    from ..units import MM_PER_INCH
    from ..survey import Surface
    from rich.table import Table
    from ..units import angle_unit
    from ..units import length_unit
    from ..survey import plan_grid
    from ..survey import plan_union_jack
    from ..survey import reading_sequence
    from ..survey import summarize_layout
    from ..io import write_survey

    L, u_l = _size_mm("length", length_mm, length_in)
    W, u_w = _size_mm("width", width_mm, width_in)
    B, u_b = _size_mm("foot-spacing", foot_spacing_mm, foot_spacing_in)
    m, u_m = _size_mm("margin", margin_mm, margin_in, required=False)
    inches = "in" in (u_l, u_w, u_b, u_m)
    if m is None:
        m = DEFAULT_MARGIN_IN * MM_PER_INCH if inches else DEFAULT_MARGIN_MM
    # layout errors name the option of the size they are about, in the unit it was given in
    given_margin = margin_mm is not None or margin_in is not None
    units_of = {"length": u_l, "width": u_w, "foot_spacing": u_b, "margin": u_m if given_margin else ("in" if inches else "mm")}
    kind = instrument.value
    unit = unit or _DEFAULT_UNIT[kind]
    unit = (length_unit(unit, where="--unit") if kind == "indicator" else angle_unit(unit, where="--unit")).name
    if kind != "autocollimator" and reports is Reports.beam_deviation:
        from ..errors import InputValueError

        raise InputValueError("--reports beam-deviation applies to autocollimators only", where="--reports", fix="omit it")
    inst = Instrument(kind, unit, reports=reports.value)
    lu = "in" if inches else "mm"
    surface = Surface(description, L, W, ident=ident, material=material)
    if output is not None:  # before any work: a bad output path is reported first
        if output.exists() and not force and not output.is_dir():
            raise OutputError(f"{output} exists", where="--output", fix="choose another name or add --force to overwrite it")
        _check_output_path(output)
        check_output(output, "--output")  # a device, a named pipe or a read-only file
    try:
        if pattern is Pattern.union_jack:
            if diagonals:
                from ..errors import InputValueError

                raise InputValueError("--diagonals applies to grids only", where="--diagonals", fix="omit it (a Union Jack has them)")
            survey = plan_union_jack(L, W, B, margin_mm=m, instrument=inst, surface=surface, units=lu)
        else:
            survey = plan_grid(L, W, B, margin_mm=m, instrument=inst, surface=surface, diagonals=diagonals, units=lu)
    except LayoutError as exc:
        # the layout names its parameters; on the command line they are options, in the unit typed
        where = exc.where
        if isinstance(where, str) and where[:-3] in units_of and where[-3:] in ("_mm", "_in"):
            where = f"{where[:-3]}_{units_of[where[:-3]]}"
        raise LayoutError(exc.message, where=_OPTION_OF.get(where, where), fix=exc.fix) from None
    warnings = _layout_warnings(survey)
    runs = ("forward",) if single_run else ("forward", "reverse")
    if output is not None:  # a single run keeps the one-run layout (readings = [] in the [[line]] table)
        write_survey(output, survey, inches=inches, blank_runs=None if single_run else runs)
    from ..bench import setup_sheet

    sheet = setup_sheet(survey, runs=runs)
    for w in warnings:  # one line each, like errors, whatever the terminal's width
        sys.stderr.write(f"flatcheck: warning: {w}\n")
    summary = summarize_layout(survey)
    seq = reading_sequence(survey)
    lay = survey.meta["layout"]
    if json_out:
        emit_json(
            {
                "pattern": survey.pattern,
                "surface": survey.surface,
                "instrument": survey.instrument,
                "layout": lay,
                "n_stations": summary.n_stations,
                "n_lines": summary.n_lines,
                "readings_per_pass": summary.readings_per_pass,
                "foot_spacings_mm": summary.foot_spacings_mm,
                "extent_mm": summary.extent_mm,
                "stations": [{"name": s.name, "x_mm": s.x_mm, "y_mm": s.y_mm} for s in survey.stations],
                "lines": [
                    {"name": ln.name, "steps": ln.steps, "foot_spacing_mm": ln.foot_spacing_mm, "stations": ln.stations}
                    for ln in survey.lines
                ],
                "sequence": [
                    {"number": r.number, "line": r.line, "from": r.from_station, "to": r.to_station} for r in seq
                ],
                "runs": list(runs),
                "setup": _setup_json(sheet, survey.surface.material),
                "output": str(output) if output is not None else None,
                "file_lengths": "in" if inches else "mm",  # the unit of the blank file's _mm/_in keys
                "warnings": warnings,
            }
        )
        return
    con = stdout_console()
    s = survey.surface
    if inches:  # every length shown in inches, as typed (1 in = 25.4 mm exactly)
        def size(v_mm, digits=4):
            return f"{v_mm / MM_PER_INCH:.{digits}g}"

        def fixed(v_mm):
            return f"{v_mm / MM_PER_INCH:.3f}"
    else:
        def size(v_mm, digits=None):
            return f"{v_mm:g}"

        def fixed(v_mm):
            return f"{v_mm:.2f}"
    from rich.markup import escape

    con.print(f"[bold]{survey.pattern} survey[/bold] of {escape(s.description)} {size(s.length_mm, 6)} x {size(s.width_mm, 6)} {lu}, "
              f"{inst.kind} reading {inst.unit}")
    con.print(_diagram(survey), markup=False, highlight=False)
    ext = summary.extent_mm
    con.print(
        f"lines inset {size(lay['margin_mm'])} {lu} or more; surveyed area x {fixed(ext[0])}-{fixed(ext[1])} {lu}, "
        f"y {fixed(ext[2])}-{fixed(ext[3])} {lu}"
    )
    if survey.pattern == "union-jack":
        con.print(
            f"foot spacing: sides and centre lines {size(lay['foot_spacing_mm'], 6)} {lu}; "
            f"diagonals [bold]{fixed(lay['diagonal_foot_spacing_mm'])} {lu}[/bold] (a second base)"
        )
    elif not inst.reads_heights:
        con.print("foot spacing: " + ", ".join(f"{fixed(b)} {lu}" for b in summary.foot_spacings_mm))
    table = Table(title="Lines, each walked first -> last station", title_justify="left")
    for col in ("line", "from", "to", "steps", f"base {lu}", "readings"):
        table.add_column(col, justify="right" if col in ("steps", f"base {lu}", "readings") else "left")
    for ln in survey.lines:
        n_read = len(ln.stations) if inst.reads_heights else ln.steps
        base = "-" if inst.reads_heights else fixed(ln.foot_spacing_mm)
        table.add_row(ln.name, ln.stations[0], ln.stations[-1], str(ln.steps), base, str(n_read))
    con.print(table)
    if single_run:
        runs_text = "one forward run of each line (--single-run)"
    else:
        runs_text = f"a forward and a back run of each line: {sheet.readings} readings in all"
    con.print(
        f"{summary.n_stations} stations, {summary.n_lines} lines, {summary.readings_per_pass} readings per pass; "
        f"{runs_text}", markup=False, highlight=False,
    )
    con.print("[bold]Reading sequence[/bold]")
    by_line: dict[str, list] = {}
    for r in seq:
        by_line.setdefault(r.line, []).append(r)
    for name, steps in by_line.items():
        if inst.reads_heights:
            path = " ".join(r.to_station for r in steps)
        else:
            path = " > ".join([steps[0].from_station] + [r.to_station for r in steps])
        con.print(f"  {name}: {path}", markup=False, highlight=False)
    _render_setup(con, sheet, survey, "in" if inches else "um")
    if output is not None:
        con.print(f"blank survey written to {output}; fill in readings = [...] for every run of every line, or "
                  f"let flatcheck enter {output} lead you reading by reading", markup=False, highlight=False)


def _setup_json(sheet, material: str) -> dict:
    """The ``setup`` object of ``plan --json`` (lengths mm, times min, masses kg; docs/json-output.md)."""
    from ..safety import lifting_caution

    beam = sheet.beam
    return {
        "lines": [
            {"order": ln.order, "line": ln.line, "runs": list(ln.runs), "start": ln.start, "end": ln.end,
             "heading": ln.heading, "length_mm": ln.length_mm, "steps": ln.steps,
             "foot_spacing_mm": ln.foot_spacing_mm, "readings": ln.readings, "instrument_mm": ln.instrument_mm,
             "on_surface": ln.on_surface, "distance_mm": ln.distance_mm, "instruction": ln.instruction,
             "minutes": ln.minutes}
            for ln in sheet.lines
        ],
        "readings": sheet.readings,
        "minutes": sheet.minutes,
        "pace": sheet.pace,
        "three_point_mm": [list(p) for p in sheet.three_point_mm],
        "beam": None if beam is None else {
            "airy_from_end_mm": beam.airy_from_end_mm, "airy_spacing_mm": beam.airy_spacing_mm,
            "bessel_from_end_mm": beam.bessel_from_end_mm, "bessel_spacing_mm": beam.bessel_spacing_mm,
            "least_bow_from_end_mm": beam.least_bow_from_end_mm, "least_bow_spacing_mm": beam.least_bow_spacing_mm,
            "sources": list(beam.sources),
        },
        "soak_hours_surface": sheet.soak_hours_surface,
        "soak_hours_instrument": sheet.soak_hours_instrument,
        "notes": list(sheet.notes),
        "caution": lifting_caution(material),
    }


def _render_setup(con, sheet, survey, units: str) -> None:
    """The set-up sheet on the terminal: lines in order with where the instrument stands, time, supports, soak."""
    from rich.markup import escape
    from rich.table import Table

    from ..safety import lifting_caution
    from ..units import format_length

    def pos(v_mm):
        return format_length(v_mm, units)

    def num(v_mm):
        return format_length(v_mm, units, unit=False)

    def xy(p):
        return f"{num(p[0])}, {pos(p[1])}"

    lu = "in" if units == "in" else "mm"
    kind = survey.instrument.kind
    con.print()
    con.print("[bold]Set-up sheet[/bold] (x from the west edge, y from the south edge)")
    from rich import box

    con.print(f"Lines in the order to read them (lengths in {'inches' if lu == 'in' else 'mm'})", markup=False,
              highlight=False)
    table = Table(box=box.SIMPLE_HEAD, pad_edge=False)
    cols = ["#", "line", "runs", "length"]  # where each line starts and ends: the table of lines above
    if kind == "autocollimator":
        cols += ["instrument x, y", "to mirror"]
    cols.append("min")
    for col in cols:
        table.add_column(col, justify="left" if col in ("line", "runs", "instrument x, y") else "right", no_wrap=True)
    for ln in sheet.lines:
        runs = " + ".join("back" if r == "reverse" else r for r in ln.runs)
        row = [str(ln.order), ln.line, runs, num(ln.length_mm)]
        if kind == "autocollimator":
            where = "on the surface" if ln.on_surface else "beside"
            x, y = ln.instrument_mm
            row += [f"{num(x)}, {num(y)} ({where})", f"{num(ln.distance_mm[0])}-{num(ln.distance_mm[1])}"]
        row.append(f"{ln.minutes:.0f}")
        table.add_row(*(escape(c) for c in row))
    con.print(table)
    if kind == "autocollimator":
        con.print("  The autocollimator stands on each line's extension behind its first station (beside: on a "
                  "stand beside the surface, at its height), aimed along the line; its working range must cover the "
                  "distances to the mirror.", markup=False, highlight=False)
    elif kind == "level":
        con.print("  The level walks each line itself, its feet on successive stations.", markup=False,
                  highlight=False)
    elif kind == "differential-level":
        con.print("  The moving level walks each line; the reference level stays on one spot, off the lines, for "
                  "the whole survey.", markup=False, highlight=False)
    else:
        con.print("  The indicator's stand rides the reference surface; touch each station in turn.", markup=False,
                  highlight=False)
    hours, minutes = divmod(int(round(sheet.minutes)), 60)
    pace = sheet.pace
    con.print(
        f"  Time: about {hours} h {minutes:02d} min for {sheet.readings} readings ({pace.seconds_per_reading:g} s "
        f"a reading, {pace.minutes_per_line:g} min to set up a line, {pace.minutes_per_extra_run:g} min for each "
        "further run: illustrative figures, common practice, no single source); soak not included.",
        markup=False, highlight=False,
    )
    pts = "; ".join(f"({xy(p)})" for p in sheet.three_point_mm)
    con.print(f"  {sheet.notes[0]} Three points, x, y: {pts}.", markup=False, highlight=False)
    b = sheet.beam
    if b is not None:
        con.print(
            f"  Long beam on two supports: least self-weight bow with them {pos(b.least_bow_from_end_mm)} from each "
            f"end; Airy points {pos(b.airy_from_end_mm)} from each end ({pos(b.airy_spacing_mm)} apart, end faces "
            f"vertical); Bessel points {pos(b.bessel_from_end_mm)} from each end ({pos(b.bessel_spacing_mm)} apart, "
            "least change of length). Sources: " + "; ".join(b.sources) + ".",
            markup=False, highlight=False,
        )
    con.print(f"  {sheet.notes[1]}", markup=False, highlight=False)
    con.print(f"[bold]Caution:[/bold] {escape(lifting_caution(survey.surface.material))}")


def _diagram(survey, width: int = 49) -> str:
    """A small character drawing of the stations and lines (north up)."""
    x, y = survey.x_mm, survey.y_mm
    x0, x1, y0, y1 = x.min(), x.max(), y.min(), y.max()
    span_x = max(x1 - x0, 1e-9)
    span_y = max(y1 - y0, 1e-9)
    height = int(round(width * span_y / span_x / 2.2)) + 1
    height = max(5, min(height, 21))
    cols, rows = width, height
    canvas = [[" "] * cols for _ in range(rows)]

    def cell(px, py):
        c = int(round((px - x0) / span_x * (cols - 1)))
        r = rows - 1 - int(round((py - y0) / span_y * (rows - 1)))
        return r, c

    idx = survey.station_index
    for ln in survey.lines:
        a = survey.stations[idx[ln.stations[0]]]
        b = survey.stations[idx[ln.stations[-1]]]
        (ra, ca), (rb, cb) = cell(a.x_mm, a.y_mm), cell(b.x_mm, b.y_mm)
        if ra == rb:
            ch = "-"
        elif ca == cb:
            ch = "|"
        else:
            ch = "/" if (rb - ra) * (cb - ca) < 0 else "\\"
        n = max(abs(rb - ra), abs(cb - ca), 1)
        for k in range(n + 1):
            r = int(round(ra + (rb - ra) * k / n))
            c = int(round(ca + (cb - ca) * k / n))
            if canvas[r][c] == " ":
                canvas[r][c] = ch
    for st in survey.stations:
        r, c = cell(st.x_mm, st.y_mm)
        canvas[r][c] = "o"
    if survey.pattern == "union-jack":
        for name in ("SW", "S", "SE", "E", "NE", "N", "NW", "W", "C"):
            st = survey.stations[idx[name]]
            r, c = cell(st.x_mm, st.y_mm)
            c = min(max(c - (len(name) - 1 if c > cols // 2 else 0), 0), cols - len(name))
            for k, ch in enumerate(name):
                canvas[r][c + k] = ch
    return "\n".join("  " + "".join(row).rstrip() for row in canvas)
