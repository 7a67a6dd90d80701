"""How a reduction is printed at the bench (used by ``reduce`` and ``demo``)."""

from __future__ import annotations


import numpy as np
from rich.markup import escape
from rich.table import Table

from ..units import MM_PER_INCH, format_height, format_length, height_unit_label
from .common import stdout_console


def _finite(v) -> bool:
    """True for a real, finite number (not None, NaN, infinite or text)."""
    try:
        return v is not None and not isinstance(v, bool) and bool(np.isfinite(float(v)))
    except (TypeError, ValueError):
        return False


def _fmt(v, units, step_um=None):
    """A height (µm) in the display unit, to the decimals that fit the measurement's height step
    (:func:`flatcheck.units.height_decimals`); '-' when there is none."""
    if not _finite(v):
        return "-"
    return format_height(v, units, unit=False, step_um=step_um)


def _window_text(lf: dict, units: str) -> str:
    """The local-flatness window in the display unit (the option takes mm)."""
    if units != "in":
        return lf["window"]
    a, b = lf["length_mm"] / MM_PER_INCH, lf["width_mm"] / MM_PER_INCH
    if lf.get("shape") == "circle":
        return f"d{a:.2f} in ({lf['window']})"
    return f"{a:.2f} x {b:.2f} in ({lf['window']})"


def _precision_text(ev, units) -> str:
    """Which step heights without an uncertainty are printed to, and why (one rule: units.height_decimals)."""
    from ..units import height_decimals, um_to

    hu = height_unit_label(units)
    d = height_decimals(ev.height_step_um, units)
    quantum = f"{10.0 ** -d:.{d}f} {hu}"
    if ev.loaded.survey is None:
        return f"heights to {quantum} (a height map states no instrument resolution)"
    return (f"heights to {quantum}: one reading resolves {um_to(ev.height_step_um, units):.2g} {hu} "
            "(instrument resolution over the shortest foot spacing)")


def _sd(v, units) -> str:
    """A standard deviation (µm) in the display unit, to two significant digits, as an uncertainty is."""
    from ..units import format_with_uncertainty

    return format_with_uncertainty(v, v, units, unit=False)[1]


def _scatter_text(res: dict, units: str, reading_unit: str) -> str:
    """One reading's standard deviation, or why there is none (no redundancy: sigma0 is NaN or missing)."""
    s0 = res.get("sigma0_um")
    if not _finite(s0) or not res.get("redundancy"):
        return "no redundancy: no scatter estimate"
    text = f"{_sd(s0, units)} {height_unit_label(units)}"
    s0r = res.get("sigma0_reading")
    if _finite(s0r):
        text += f" ({s0r:.3g} {reading_unit})"
    return text


def render_reduction(ev, doc, units, map_out) -> None:
    con = stdout_console()
    step = ev.height_step_um  # heights without an uncertainty print to the step the measurement resolves
    hu = height_unit_label(units)
    f = doc["flatness"]
    con.print(f"[bold]{escape(doc['surface']['description'] or 'Surface')}[/bold]  "
              f"{escape(doc['surface'].get('ident') or '')}")
    con.print(f"  input: {escape(str(doc['input']))} ({doc['kind']})")
    if doc.get("instrument"):
        ins = doc["instrument"]
        con.print(f"  instrument: {escape(str(ins['kind']))}, readings in {escape(str(ins['unit']))}; "
                  f"pattern {escape(str(doc.get('pattern')))}")
    con.print(f"  method: {ev.method_text}")
    con.print(f"  {_precision_text(ev, units)}")
    con.print(
        f"  {ev.heightmap.n} {'stations' if ev.loaded.survey is not None else 'points'}"
        + (f", {doc['residuals']['observations']} readings" if doc.get("residuals") else "")
    )
    con.print()
    t = Table(title=f"Flatness ({hu})", title_justify="left")
    t.add_column("reference")
    t.add_column("total (FLTt)", justify="right")
    t.add_column("peak (FLTp)", justify="right")
    t.add_column("valley (FLTv)", justify="right")
    t.add_column("RMS (FLTq)", justify="right")
    for row in doc["flatness"]["references"]:
        t.add_row(row["reference"], _fmt(row["fltt_um"], units, step), _fmt(row["fltp_um"], units, step), _fmt(row["fltv_um"], units, step), _fmt(row["fltq_um"], units, step))
    con.print(t)
    line = f"  flatness (minimum zone): [bold]{_fmt(f['minimum_zone_um'], units, step)} {hu}[/bold]"
    if f.get("expanded_uncertainty_um") is not None:
        from ..units import format_with_uncertainty

        U = f["expanded_uncertainty_um"]
        v_txt, u_txt = format_with_uncertainty(f["minimum_zone_um"], U, units)
        lo_txt, _ = format_with_uncertainty(f["coverage_interval_um"][0], U, units, unit=False)
        hi_txt, _ = format_with_uncertainty(f["coverage_interval_um"][1], U, units, unit=False)
        line = (
            f"  flatness (minimum zone): [bold]{v_txt}[/bold], U = {u_txt}; 95 % interval {lo_txt} to {hi_txt} {hu} "
            "(corrected for the noise bias)"
        )
    con.print(line)
    if ev.uncertainty is not None:
        render_budget(con, ev, units)
    lf = doc.get("local_flatness")
    if lf:
        con.print(
            f"  local flatness over {_window_text(lf, units)}: {_fmt(lf['max_um'], units, step)} {hu} at "
            f"x = {format_length(lf['x_mm'], units)}, y = {format_length(lf['y_mm'], units)}"
        )
    res = doc.get("residuals")
    if res:
        con.print()
        scatter = _scatter_text(res, units, (doc.get("instrument") or {}).get("unit", ""))
        if scatter.startswith("no redundancy"):
            con.print(f"  redundancy {res.get('redundancy', 0)}; {scatter}")
        else:
            con.print(f"  redundancy {res['redundancy']}; one reading's standard deviation from the residuals: {scatter}")
        lines = doc.get("lines") or []
        if lines:
            t = Table(title=f"Lines ({hu})", title_justify="left")
            t.add_column("line")
            t.add_column("closure", justify="right")
            t.add_column("at", no_wrap=True)
            t.add_column("straightness (MZ)", justify="right")
            t.add_column("runs spread", justify="right")
            for ln in lines:
                t.add_row(escape(ln["name"]), _fmt(ln["closure_um"], units, step), escape(ln.get("closure_station") or ""),
                          _fmt(ln.get("straightness_um"), units, step), _fmt(ln.get("run_spread_um"), units, step))
            con.print(t)
            meaning = {ln["meaning"] for ln in lines if ln.get("meaning")}
            for m in meaning:
                con.print(f"  [dim]closure: {escape(m)}[/dim]")
        # One line per suspect group (its text names the group); readings flagged only through a
        # suspect's error (group 0) are counted in the warnings, not listed.
        shown_groups = set()
        for o in res["outliers"]:
            group = o.get("group")
            if group == 0 or (group is not None and group in shown_groups):
                continue
            shown_groups.add(group)
            if o.get("group_size", 1) > 1:  # the layout cannot tell which: name the group, not one member
                names = o["group_lines"]
                lines = ("lines " if len(names) > 1 else "line ") + " and ".join(repr(n) for n in names)
                text = (f"one of {o['group_size']} readings of {lines} (|w| = {abs(o['w']):.2f}); "
                        "this layout cannot tell which (see the note below)")
            else:
                text = o["text"]
            con.print(f"  [bold red]suspect reading[/bold red]: {escape(text)}")
    for w in list(doc.get("notes") or []) + list(doc.get("warnings") or []):
        con.print(f"  [yellow]note:[/yellow] {escape(w)}")
    _render_map(con, ev, units)
    if map_out is not None:
        con.print(f"  height map written to {escape(str(map_out))} (heights about the least-squares plane)")


def _render_map(con, ev, units) -> None:
    hm = ev.heightmap_about_ls  # the plane the titles below name, for surveys and height maps alike
    step = ev.height_step_um
    hu = height_unit_label(units)
    if hm.grid is not None:
        xs, ys, index = hm.grid
        if xs.size > 16 or ys.size > 30:
            return
        Z = hm.grid_heights_um()
        cells = [[_fmt(z, units, step) for z in Z[j]] for j in range(ys.size - 1, -1, -1)]
        lu = "in" if units == "in" else "mm"
        if units == "in":
            ylab = [format_length(y, units, unit=False) for y in ys[::-1]]
            xlab = [format_length(x, units, unit=False) for x in xs]
        else:
            ylab = [f"{y:g}" for y in ys[::-1]]
            xlab = [f"{x:g}" for x in xs]
        # one character of padding each side of a cell and a rule between cells
        cw = max(max(len(c) for row in cells for c in row), max(len(v) for v in xlab))
        yw = max(len(f"y {lu}"), max(len(v) for v in ylab))
        need = yw + 3 + xs.size * (cw + 3) + 1
        if need > con.width:
            con.print(
                f"  height map ({xs.size} x {ys.size} points) needs {need} columns, the terminal has {con.width}: "
                "widen it, or use --map-out or --json"
            )
            return
        t = Table(
            title=f"Height map, {hu} about the least-squares plane (rows y {lu}, columns x {lu})",
            title_justify="left",
        )
        t.add_column(f"y {lu}", justify="right", no_wrap=True)
        for x in xlab:
            t.add_column(x, justify="right", no_wrap=True)
        for lab, row in zip(ylab, cells):
            t.add_row(lab, *row)
        con.print(t)
    elif hm.n <= 120 and hm.names is not None:
        t = Table(title=f"Station heights ({hu}, about the least-squares plane)", title_justify="left")
        for _ in range(2):
            t.add_column("station", no_wrap=True)
            t.add_column("x in" if units == "in" else "x mm", justify="right")
            t.add_column("y in" if units == "in" else "y mm", justify="right")
            t.add_column(hu, justify="right")
        cells = [
            (escape(n), format_length(x, units, unit=False), format_length(y, units, unit=False), _fmt(z, units, step))
            for n, x, y, z in zip(hm.names, hm.x_mm, hm.y_mm, hm.height_um)
        ]
        half = (len(cells) + 1) // 2
        for i in range(half):
            row = list(cells[i]) + (list(cells[i + half]) if i + half < len(cells) else [""] * 4)
            t.add_row(*row)
        con.print(t)


def render_budget(con, ev, units) -> None:
    """The uncertainty budget as a table: each source, its value and basis, its contribution; then u, U."""
    from ..units import format_with_uncertainty

    u = ev.uncertainty
    b = u.budget
    mz = u.minimum_zone
    hu = height_unit_label(units)
    if b is None:
        return
    t = Table(title=f"Uncertainty budget of the minimum-zone flatness ({hu})", title_justify="left")
    t.add_column("source", no_wrap=True)
    t.add_column("input", justify="right")
    t.add_column("distribution")
    t.add_column("basis")
    t.add_column(f"u ({hu})", justify="right")
    for e in b.entries:
        if not e.applies:
            value = "-"
        elif e.unit == "relative":
            value = f"{e.value * 100:.3g} %"
        else:
            value = f"{e.value:.3g} {e.unit}"
        contrib = format_with_uncertainty(e.standard_uncertainty_um, b.combined_um or 1.0, units, unit=False)[0] \
            if e.applies else "0"
        t.add_row(escape(e.name), escape(value), escape(e.distribution.split(",")[0].split(";")[0]),
                  escape(_short_basis(e)), contrib)
    con.print(t)
    con.print("  [dim]each source's full basis: --json (flatness.uncertainty_budget) or the report's uncertainty "
              "page[/dim]")
    _, uc = format_with_uncertainty(mz.estimate_um, b.combined_um, units)
    _, U = format_with_uncertainty(mz.estimate_um, b.expanded_um, units)
    con.print(
        f"  combined standard uncertainty u = {uc} (root sum of squares of the rows "
        f"{format_with_uncertainty(b.rss_um, b.combined_um or 1.0, units)[0]}); U = {U}, coverage factor "
        f"{b.coverage_factor:.2f}; estimated noise bias {format_with_uncertainty(mz.bias_um, b.combined_um or 1.0, units)[0]}"
    )
    con.print(
        f"  [dim]Monte Carlo (JCGM 101), {mz.trials} trials (each source alone {b.contribution_trials}), "
        f"seed {mz.seed}; U reaches both ends of the bias-corrected 95 % interval and is at least 2 u[/dim]"
    )
    for n in b.notes:
        con.print(f"  [dim]{escape(n)}[/dim]")
    if b.repeat is not None:
        r = b.repeat
        verdict = f"; range {r.range_:.3g} {r.unit} against tolerance {r.tolerance:g} {r.unit}: {r.verdict}" \
            if r.tolerance is not None else ""
        con.print(f"  repeat readings ({r.kind}): {escape(r.note)}{verdict}")


def _short_basis(e) -> str:
    """A budget row's basis in a few words (the full text is in the JSON and the report)."""
    b = e.basis
    if not e.applies:
        return "does not apply" if b.startswith("does not apply") else "in the residuals"
    if b.startswith("stated"):
        return "stated"
    if b.startswith("from the survey's own residuals"):
        return "residuals"
    if b.startswith("measured repeat readings"):
        return "repeat readings"
    if b.startswith("model"):
        return "DEFAULT: model"
    if b.startswith("lab default"):
        return "DEFAULT: lab file"
    for tag in ("from memory", "common practice", "trade data"):
        if tag in b:
            return f"DEFAULT: {tag}"
    return "DEFAULT" if e.default else "stated"
