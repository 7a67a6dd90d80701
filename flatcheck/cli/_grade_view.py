"""How the grading is printed at the bench (used by ``grade`` and ``demo``)."""

from __future__ import annotations


from rich.table import Table

from ..units import MM_PER_INCH, format_height, height_unit_label, um_to
from .common import stdout_console


_SIZE_SOURCE_TEXT = {
    "option": "given with --length-mm/--width-mm",
    "surface": "the surveyed surface's stated size",
    "point-extent": "the extent of the measured points (give --length-mm/--width-mm for the plate's own size)",
}


def _add_uin(report: dict) -> None:
    """Add µin values beside the pinned µm keys (1 µin = 0.0254 µm exactly)."""
    report["flatness_uin"] = um_to(report["flatness_um"], "in")
    u = report["expanded_uncertainty_um"]
    report["expanded_uncertainty_uin"] = None if u is None else um_to(u, "in")
    for g in report["grades"]:
        g["tolerance_uin"] = um_to(g["tolerance_um"], "in")
        g["acceptance_limit_uin"] = um_to(g["acceptance_limit_um"], "in")
        g["rejection_limit_uin"] = um_to(g["rejection_limit_um"], "in")
    if report["repeat_reading"] is not None:
        rr = report["repeat_reading"]
        rr["variation_uin"] = um_to(rr["variation_um"], "in")


_SHORT_STATUS = {"secondary source": "secondary", "given by the user": "user"}


_VERDICT_STYLE = {"conforms": "green", "does-not-conform": "red", "undecided": "yellow"}


def render_grades(report: dict, units: str) -> None:
    con = stdout_console()
    hu = height_unit_label(units)

    def h(v):
        return "-" if v is None else format_height(v, units, unit=False)

    title = report["standard_title"] or "custom tolerance"
    con.print(f"[bold]Grading against {title}[/bold]  ({report['input']})")
    con.print(f"Flatness F = {h(report['flatness_um'])} {hu} ({report['flatness_method']}, {report['points']} points)")
    u = report["expanded_uncertainty_um"]
    con.print(f"Expanded uncertainty U = {h(u)} {hu}" if u is not None else "Expanded uncertainty U: unknown")
    table = Table(title_justify="left")
    table.add_column("grade")
    table.add_column(f"T {hu}", justify="right")
    table.add_column("accept F <=", justify="right")
    table.add_column("reject F >", justify="right")
    table.add_column("verdict", no_wrap=True)
    table.add_column("value source")
    for g in report["grades"]:
        style = _VERDICT_STYLE[g["verdict"]]
        src = _SHORT_STATUS.get(g["status"], g["status"]) + ("" if g["in_range"] else ", out of range")
        table.add_row(
            g["grade"],
            h(g["tolerance_um"]),
            h(g["acceptance_limit_um"]),
            h(g["rejection_limit_um"]),
            f"[{style}]{g['verdict']}[/{style}]",
            src,
        )
    con.print(table)
    con.print(f"Rule: {report['rule_statement']}")
    if report["length_used_mm"] is not None:
        which = {"side": "longer side", "diagonal": "diagonal"}[report["length_basis"]]
        inch = f" = {report['length_used_mm'] / MM_PER_INCH:.2f} in" if units == "in" else ""
        con.print(
            f"Length used: {report['length_used_mm']:.1f} mm{inch} ({which}) of a {report['length_mm']:g} x "
            f"{report['width_mm']:g} mm plate; size: {_SIZE_SOURCE_TEXT[report['size_source']]}"
        )
    if report["formula"] and report["basis"] == "table":
        con.print(f"Values from a published table (secondary); the standard's formula: {report['formula']}")
    elif report["formula"]:
        con.print(f"Formula: {report['formula']}; rounding: {report['rounding']}")
    if report["best_grade"] is not None:
        how = "proven (ISO 14253-1)" if report["rule"] == "iso14253-1" else "under simple acceptance"
        best = next(g for g in report["grades"] if g["grade"] == report["best_grade"])
        outside = "" if best["in_range"] else " (the plate is outside the standard's size range: indicative only)"
        con.print(f"Finest grade that conforms, {how}: [bold]{report['best_grade']}[/bold]{outside}")
    rr = report["repeat_reading"]
    if rr is not None:
        extra = "" if rr["verdict"] is None else f" against {h(rr['tolerance_um'])} {hu}: {rr['verdict']} ({rr['rule']})"
        con.print(f"Repeat reading (simulated gage, feet at {rr['foot_radius_mm']:g} mm): {h(rr['variation_um'])} {hu}{extra}")
    for n in report["notes"]:
        con.print(f"[dim]note:[/dim] {n}")
