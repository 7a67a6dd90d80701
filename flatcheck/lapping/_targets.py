"""Lapping targets and lap models from what a person states: checked, with notes on what was assumed.

Every command that plans or judges lapping (lap, compare, report) takes its target, lap and
options through these functions, so a slip reads the same everywhere. Errors name the
command-line option of the value (``where``), since that is what the person gave.
"""

from __future__ import annotations

import math

from ..errors import InputValueError
from ..limits import check_range
from ._dwell import LapModel

__all__ = [
    "ASSUMED_RATE_UM_PER_MIN",
    "resolve_target",
    "parse_lap_size",
    "check_option",
    "check_lap_fits",
    "check_lap_options",
    "check_lap_on_surface",
    "build_lap",
]

#: Placeholder rate when the user has not calibrated one: times are then "per µm/min" and scale by 1/rate.
ASSUMED_RATE_UM_PER_MIN = 1.0


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
        check_range(target_gap_um, "gap_um", where="--target-gap-um", name="the air gap")
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
        if target_um == 0:
            raise InputValueError(
                "a target flatness of 0 µm cannot be reached: every lapped surface keeps some form, and no "
                "measurement could prove zero", where="--target-um",
                fix="give the flatness you need, e.g. the tolerance of the grade (--target-grade din-876:00)")
        return check_range(target_um, "target_um", where="--target-um", name="the target flatness"), "given"
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


def parse_lap_size(text: str) -> tuple[float, float]:
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
    for v in (length, width):
        check_range(v, "lap_size_mm", where="--lap-size-mm", name="a side of the lap")
    return length, width


def check_option(value, option: str, *, minimum: float = 0.0, strict: bool = True, what: str = "a number") -> None:
    """Refuse an option value that is not finite or not above (``strict``) / at least ``minimum``.

    ``None`` (option not given) passes. The message names the option, so the user knows which one to fix.
    """
    if value is None:
        return
    try:
        v = float(value)
    except OverflowError:  # a whole number of hundreds of digits
        raise InputValueError(f"{len(str(abs(int(value))))} digits are too many", where=option,
                              fix=f"give {what}") from None
    ok = math.isfinite(v) and (v > minimum if strict else v >= minimum)
    if not ok:
        rel = ">" if strict else ">="
        raise InputValueError(f"{value:g} is not allowed", where=option, fix=f"give {what} {rel} {minimum:g}")


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
    if lap_diameter_mm is not None:
        check_range(lap_diameter_mm, "lap_size_mm", where="--lap-diameter-mm", name="the lap diameter")
    if lap_size_mm is not None:
        parse_lap_size(lap_size_mm)
    check_option(rate_um_per_min, "--rate-um-per-min", what="a removal rate in µm/min")
    check_option(rate_um_per_pass, "--rate-um-per-pass", what="a removal in µm per pass")
    check_option(strokes_per_pass, "--strokes-per-pass", minimum=1, strict=False, what="a whole number of strokes")
    check_option(stroke_mm, "--stroke-mm", strict=False, what="a stroke length in mm")
    check_option(step_mm, "--step-mm", what="a grid pitch in mm")
    check_option(cell_mm, "--cell-mm", what="a cell size in mm")
    check_option(levels, "--levels", minimum=1, strict=False, what="a whole number of levels")
    if levels is not None:
        check_range(levels, "levels", where="--levels", name="the number of time levels")
    for value, option, what in ((step_mm, "--step-mm", "the grid pitch"), (cell_mm, "--cell-mm", "the chart cell")):
        if value is not None:  # a sub-millimetre pitch or cell would take billions of grid points
            check_range(value, "window_mm", where=option, name=what)
    check_option(smoothing, "--smoothing", strict=False, what="a regularisation weight")
    check_option(smoothness, "--smoothness", strict=False, what="a gradient penalty")
    check_option(min_pass_fraction, "--min-pass-fraction", strict=False, what="a fraction (at most 1)")
    if min_pass_fraction is not None and min_pass_fraction > 1:
        raise InputValueError(f"{min_pass_fraction:g} is not allowed", where="--min-pass-fraction", fix="give a fraction from 0 to 1")
    # the ranges of docs/limits.md, so that no value reaches the planner that overflows it or says nothing
    for value, kind, option, what in (
        (rate_um_per_min, "rate_um", "--rate-um-per-min", "the removal rate per minute"),
        (rate_um_per_pass, "rate_um", "--rate-um-per-pass", "the removal per pass"),
        (strokes_per_pass, "count", "--strokes-per-pass", "the number of strokes"),
        (stroke_mm, "stroke_mm", "--stroke-mm", "the stroke length"),
        (smoothing, "smoothing", "--smoothing", "the regularisation weight"),
        (smoothness, "smoothing", "--smoothness", "the gradient penalty"),
        (min_pass_fraction, "fraction", "--min-pass-fraction", "the shortest pass's fraction"),
    ):
        if value is not None:
            check_range(value, kind, where=option, name=what)


def check_lap_on_surface(hm, lap: LapModel, *, lap_option: str, cell_mm: float | None = None,
                         cell_option: str | None = "--cell-mm") -> None:
    """Refuse a lap or chart cell that does not suit this surface, naming the option to change.

    The lap must not cover the whole surface from every position (:func:`check_lap_fits`), and the chart's
    cells (``cell_mm``, default the lap's size) must be few enough to print. ``cell_option`` is None for a
    command without a cell option: the error then names ``lap_option``.
    """
    from ._chart import MAX_CHART_CELLS, chart_edges, default_cell_mm

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
    if cell_option is not None and cell_mm is not None:  # name the option the person gave, never one they did not
        raise InputValueError(
            f"{what} are too many to print (at most {MAX_CHART_CELLS})",
            where=cell_option,
            fix=f"give {cell_option} {math.ceil(need):g} or more" + ("" if cell_mm is not None else ", or check the lap size"),
        )
    raise InputValueError(
        f"a lap this small makes {what}, too many to print (at most {MAX_CHART_CELLS})",
        where=lap_option,
        fix=f"check the lap size: the chart needs cells of at least {math.ceil(need):g} mm"
            + (f" (or give {cell_option} {math.ceil(need):g} for larger chart cells)" if cell_option else ""),
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
        rate, unit = ASSUMED_RATE_UM_PER_MIN, "min"
        notes.append(
            f"no removal rate given: times assume {ASSUMED_RATE_UM_PER_MIN:g} µm/min; divide them by your calibrated "
            "rate (measure one with 'flatcheck compare BEFORE AFTER --dwell-min M')"
        )
    if size_mm is not None:
        l, w = parse_lap_size(size_mm)
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
