"""How the grading is printed at the bench (used by ``grade`` and ``demo``)."""

from __future__ import annotations


from rich.markup import escape
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
        return "-" if v is None else format_height(v, units, unit=False, step_um=report.get("height_step_um"))

    def tol(v):
        """A limit at the precision its source gives it (issue 15, item 8): 0.1 µm steps show as one decimal,
        finer values to 0.01 µm; whole µin in inches (ASME states its grades in µin)."""
        if v is None:
            return "-"
        x = um_to(v, units)
        if units == "in":
            return f"{x:.0f}" if abs(x - round(x)) < 0.05 else f"{x:.1f}"
        return f"{x:.1f}" if abs(x * 10 - round(x * 10)) < 1e-6 else f"{x:.2f}"

    u_known = report["expanded_uncertainty_um"]

    def limit(v):
        """An acceptance or rejection limit (T -/+ U): at the decimals of U, else as the tolerance."""
        if v is None or u_known is None:
            return tol(v)
        from ..units import format_with_uncertainty

        return format_with_uncertainty(v, u_known, units, unit=False)[0]

    title = report["standard_title"] or "custom tolerance"
    con.print(f"[bold]Grading against {escape(title)}[/bold]  ({escape(str(report['input']))})")
    u = report["expanded_uncertainty_um"]
    f_text = h(report["flatness_um"])
    if u is not None and u > 0:
        from ..units import format_with_uncertainty

        # JCGM 100 7.2.6: U to two significant digits and F to the same decimal place
        f_text, u_text = format_with_uncertainty(report["flatness_um"], u, units, unit=False)
    con.print(f"Flatness F = {f_text} {hu} ({report['flatness_method']}, {report['points']} points)")
    con.print(f"Expanded uncertainty U = {u_text if u is not None and u > 0 else h(u)} {hu}" if u is not None
              else "Expanded uncertainty U: unknown")
    table = Table(title_justify="left")
    table.add_column("grade")
    table.add_column(f"T {hu}", justify="right")
    table.add_column("accept F <=", justify="right")
    table.add_column("reject F >", justify="right")
    table.add_column("verdict", no_wrap=True)
    table.add_column("note")
    doubtful = {}
    for g in report["grades"]:
        style = _VERDICT_STYLE[g["verdict"]]
        # where a limit comes from is said once, below the table, not beside each limit (issue 15, item 10)
        if g["status"] not in ("verified", "given by the user"):
            doubtful.setdefault(g["status"], []).append(g["grade"])
        table.add_row(
            escape(str(g["grade"])),
            tol(g["tolerance_um"]),
            limit(g["acceptance_limit_um"]),
            limit(g["rejection_limit_um"]),
            f"[{style}]{g['verdict']}[/{style}]",
            "" if g["in_range"] else "outside the standard's size range",
        )
    con.print(table)
    if doubtful:
        words = {"from memory": "recalled", "inferred": "from a formula inferred from makers' tables",
                 "secondary source": "from a secondary reproduction of the standard's table"}
        parts = "; ".join(f"grade{'s' if len(v) > 1 else ''} {', '.join(v)} {words.get(k, k)}" for k, v in doubtful.items())
        con.print(escape(f"Limits not checked against the standard's own text: {parts}. Where a decision depends on "
                         "one, give the limit from your copy of the standard with --tolerance-um."), soft_wrap=True)
    con.print(f"Rule: {escape(report['rule_statement'])}")
    if report["length_used_mm"] is not None:
        which = {"side": "longer side", "diagonal": "diagonal"}[report["length_basis"]]
        inch = f" = {report['length_used_mm'] / MM_PER_INCH:.2f} in" if units == "in" else ""
        con.print(
            f"Length used: {report['length_used_mm']:.1f} mm{inch} ({which}) of a {report['length_mm']:g} x "
            f"{report['width_mm']:g} mm plate; size: {_SIZE_SOURCE_TEXT[report['size_source']]}"
        )
    if report["formula"] and report["basis"] == "table":
        con.print(f"Values from a published table (secondary); the standard's formula: {escape(str(report['formula']))}")
    elif report["formula"]:
        con.print(f"Formula: {escape(str(report['formula']))}; rounding: {escape(str(report['rounding']))}")
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
        if _is_provenance(n):  # said once above
            continue
        con.print(f"[dim]note:[/dim] {escape(n)}")


def _is_provenance(note: str) -> bool:
    """A note that says where a limit's value comes from (said once after the table instead)."""
    n = note.lower()
    return "from memory" in n or "inferred" in n or "secondary reproduction" in n
