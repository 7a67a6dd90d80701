"""The PDF report: a calibration-style record of one surface as measured.

Two steps, so that the numbers can be checked without drawing anything:

1. :func:`analyse` runs the evaluations on a height map (and the survey and
   reduction it came from, when there is one) and returns a frozen
   :class:`ReportContent` with every number the report states.
2. :func:`write_report` draws the pages from that content (through
   :mod:`flatcheck.plot`, the only module that imports matplotlib) and writes
   the PDF atomically, optionally with each picture as a PNG file.

Neither step prints or reads files; :func:`write_report` writes only the files
it is asked to write.
"""

from __future__ import annotations

import datetime as _dt
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .errors import InputValueError, OutputError
from .flatness import least_squares_plane, minimum_zone
from .heightmap import HeightMap

__all__ = ["LineResult", "GradeRow", "ReportContent", "ReportFiles", "analyse", "write_report", "page_titles"]

#: Statement printed on every report (the scope of the results).
SCOPE_STATEMENT = (
    "These results describe the surface only as it was when and where it was measured, supported as stated, "
    "with the instrument and method named here; they say nothing of the surface at other times, on other "
    "supports or at other temperatures."
)


@dataclass(frozen=True)
class LineResult:
    """One measured line: where its stations are and its straightness.

    Attributes
    ----------
    name : str
    s_mm : ndarray, shape (k,)
        Distance along the line from its first station, mm.
    height_um : ndarray, shape (k,)
        Station heights from the height map, µm.
    straightness_um : float
        Minimum-zone straightness, µm.
    ref_offset_um, ref_slope_um_per_mm : float
        Reference line of the straightness (µm, µm/mm).
    rms_residual_um : float or None
        RMS of the reduction residuals of this line's readings, µm.
    run_spread_um : float or None
        For a line walked more than once, the largest difference between its runs' end-to-end rises, µm.
    """

    name: str
    s_mm: np.ndarray
    height_um: np.ndarray
    straightness_um: float
    ref_offset_um: float
    ref_slope_um_per_mm: float
    rms_residual_um: float | None = None
    run_spread_um: float | None = None


@dataclass(frozen=True)
class GradeRow:
    """One grade verdict as the report states it (all heights in µm)."""

    standard: str
    grade: str
    tolerance_um: float
    verdict: str
    note: str = ""


@dataclass(frozen=True)
class ReportContent:
    """Everything the report states, computed by :func:`analyse` (heights µm, positions mm).

    Attributes
    ----------
    heightmap : HeightMap
        The evaluated surface.
    identity : tuple of (str, str)
        Rows describing the surface (what, identity, size, material).
    method : tuple of (str, str)
        Rows describing the instrument, layout and reduction.
    mz, ls : PlaneFit
        Minimum-zone and least-squares reference planes and flatness (µm).
    u_mz_um, u_ls_um : float or None
        Expanded uncertainties (k = 2 or 95 % coverage) of the two flatness values, µm.
    uncertainty_note : str
        How the uncertainty was obtained (or why it is missing).
    lines : tuple of LineResult
        The measured lines (or grid rows/columns for a height map).
    closures : tuple of (str, float, float, float)
        ``(label, x_mm, y_mm, closure_um)``: classic closure errors (Union Jack centre
        lines) and where they close.
    residual_um : ndarray or None
        Reduction residuals of every reading, µm.
    grades : tuple of GradeRow
    decision_rule : str
    local : object or None
        Local-flatness result (grid of window centres and values).
    bearing : object or None
        Bearing verdict and carriage path.
    lapping : object or None
        Lapping plan.
    notes : tuple of str
        Warnings and remarks stated in the report.
    date : str
        Measurement date (or "not stated").
    issued : str
        Date the report was made (ISO 8601).
    sources : tuple of str
        References of the methods used.
    """

    heightmap: HeightMap
    identity: tuple
    method: tuple
    mz: object
    ls: object
    u_mz_um: float | None = None
    u_ls_um: float | None = None
    uncertainty_note: str = ""
    lines: tuple = ()
    closures: tuple = ()
    residual_um: np.ndarray | None = None
    survey: object | None = None
    grades: tuple = ()
    decision_rule: str = ""
    local: object | None = None
    bearing: object | None = None
    lapping: object | None = None
    notes: tuple = ()
    date: str = "not stated"
    issued: str = ""
    sources: tuple = ()
    extra: dict = field(default_factory=dict, compare=False)


@dataclass(frozen=True)
class ReportFiles:
    """What :func:`write_report` wrote: the PDF, its page count and the PNG pictures."""

    pdf: Path
    pages: int
    pngs: tuple = ()


# =============================================================================== analysis
def _straightness_1d(s_mm, h_um):
    """Minimum-zone straightness of a profile and its reference line: (width_um, offset_um, slope_um_per_mm).

    Chebyshev line fit by a linear program (scipy HiGHS): minimise t subject to
    0 <= h - (a + b s) <= t, the definition of the minimum-zone straightness
    (two parallel lines, vertical separation, ISO 12780-1 terms).
    """
    from scipy.optimize import linprog

    s = np.asarray(s_mm, float)
    h = np.asarray(h_um, float)
    if s.size < 3:
        return 0.0, float(h[0]) if h.size else 0.0, float((h[-1] - h[0]) / (s[-1] - s[0])) if s.size == 2 else 0.0
    sc = s - s.mean()
    A = np.column_stack([np.ones_like(sc), sc])
    n = s.size
    A_ub = np.vstack([np.column_stack([A, np.zeros(n)]), np.column_stack([-A, -np.ones(n)])])
    b_ub = np.concatenate([h, -h])
    res = linprog([0, 0, 1], A_ub=A_ub, b_ub=b_ub, bounds=[(None, None)] * 3, method="highs")
    a, b, t = res.x
    return max(float(t), 0.0), float(a - b * s.mean()), float(b)


def _lines_from_survey(hm: HeightMap, survey) -> list:
    index = {name: i for i, name in enumerate(hm.names or ())}
    out = []
    for ln in survey.lines:
        idx = [index.get(s) for s in ln.stations]
        if any(i is None for i in idx):
            continue
        idx = np.asarray(idx, int)
        x, y, h = hm.x_mm[idx], hm.y_mm[idx], hm.height_um[idx]
        s = np.concatenate([[0.0], np.cumsum(np.hypot(np.diff(x), np.diff(y)))])
        out.append((ln.name, s, h))
    return out


def _lines_from_grid(hm: HeightMap, max_lines: int = 8) -> list:
    g = hm.grid
    if g is None:
        return []
    xs, ys, index = g
    out = []
    rows = np.unique(np.linspace(0, ys.size - 1, min(ys.size, max_lines - 2)).round().astype(int))
    for j in rows:
        idx = index[j]
        out.append((f"y = {ys[j]:.4g} mm", xs - xs[0], hm.height_um[idx]))
    for i in np.unique([0, xs.size // 2]):
        idx = index[:, i]
        out.append((f"x = {xs[i]:.4g} mm", ys - ys[0], hm.height_um[idx]))
    return out


def analyse(
    hm: HeightMap,
    *,
    survey=None,
    reduction=None,
    standard: str | None = None,
    rule: str = "iso14253",
    carriage=None,
    gap_fraction: float | None = None,
    marginal_from: float | None = None,
    budget=None,
    target_um: float | None = None,
    lap=None,
    seed: int | None = None,
    trials: int | None = None,
    notes=(),
    today: _dt.date | None = None,
    progress=None,
) -> ReportContent:
    """Evaluate a surface for the report.

    Parameters
    ----------
    hm : HeightMap
        The surface (positions mm, heights µm).
    survey : Survey, optional
        The survey the map was reduced from (identity, instrument, lines).
    reduction : Reduction, optional
        The reduction of ``survey`` (closures, residuals).
    standard : str, optional
        Standard to grade against (``"din-876"``, ``"iso-8512-2"``, ``"asme-b89.3.7"``); every
        grade of it is decided.
    rule : {"iso14253", "simple"}
        Decision rule for the grades.
    carriage : Carriage, optional
        Air-bearing pad or carriage to judge the surface for.
    gap_fraction, marginal_from, budget
        Bearing limits (library defaults when ``None``).
    target_um : float, optional
        Target flatness in µm: adds a lapping plan.
    lap : LapModel, optional
        The lap for the plan (default: :func:`default_lap`, rate not calibrated).
    seed : int, optional
        Seed of the Monte Carlo uncertainty evaluation (reproducible when given).
    trials : int, optional
        Number of Monte Carlo trials.
    notes : sequence of str
        Remarks to state in the report.
    today : date, optional
        Issue date (default: today).
    progress : callable, optional
        Called with a short text before each long step (never prints itself).

    Returns
    -------
    ReportContent
    """
    say = progress or (lambda text: None)
    if hm.n < 3:
        raise InputValueError("a report needs at least three points", fix="measure more stations")
    say("flatness")
    mz = minimum_zone(hm.x_mm, hm.y_mm, hm.height_um)
    ls = least_squares_plane(hm.x_mm, hm.y_mm, hm.height_um)
    identity, method = _identity_rows(hm, survey, reduction)
    raw = _lines_from_survey(hm, survey) if survey is not None else _lines_from_grid(hm)
    rms = _line_rms(survey, reduction)
    spread = {c.line: c.run_spread_um for c in getattr(reduction, "closures", ())}
    lines = []
    for name, s, h in raw:
        t, a, b = _straightness_1d(s, h)
        lines.append(LineResult(name, s, h, t, a, b, rms.get(name), spread.get(name)))
    all_notes = list(notes)
    closures = ()
    residual = None
    if reduction is not None:
        say("closures")
        closures = _classic_closures(survey, reduction)
        residual = np.asarray(reduction.residual_um, float)
        all_notes += list(getattr(reduction, "warnings", ()))
        n_out = len(getattr(reduction, "outliers", ()))
        if n_out:
            all_notes.append(f"{n_out} reading(s) flagged as possible outliers by the reduction; see the residuals")
    u_mz = u_ls = None
    u_note = "not evaluated: a height map carries no reading uncertainty (report a survey to get one)"
    if reduction is not None:
        say("uncertainty")
        u_mz, u_ls, u_note = _uncertainty(survey, reduction, seed=seed, trials=trials or DEFAULT_TRIALS)
    grades = ()
    rule_text = ""
    if standard is not None:
        say("grades")
        grades, rule_text = _grades(hm, standard, mz.flatness_um, u_mz, rule)
    bearing = None
    if carriage is not None:
        say("air bearing")
        from .bearing import evaluate_bearing

        kw = {}
        if gap_fraction is not None:
            kw["gap_fraction"] = gap_fraction
        if marginal_from is not None:
            kw["marginal_from"] = marginal_from
        bearing = evaluate_bearing(hm, carriage, budget=budget, **kw)
    lapping = None
    if target_um is not None:
        say("lapping plan")
        from .lapping import least_removal, plan_lapping

        if lap is None:
            lap = default_lap(hm)
            all_notes.append(f"lapping plan with an assumed {lap.describe()}: the removal rate is not calibrated, so "
                             "times are relative; fit the rate from a measured test pass before lapping")
        lapping = plan_lapping(hm, least_removal(hm, float(target_um)), lap)
    issued = (today or _dt.date.today()).isoformat()
    date = survey.date if survey is not None and survey.date else "not stated"
    return ReportContent(
        heightmap=hm,
        identity=tuple(identity),
        method=tuple(method),
        mz=mz,
        ls=ls,
        u_mz_um=u_mz,
        u_ls_um=u_ls,
        uncertainty_note=u_note,
        lines=tuple(lines),
        closures=closures,
        residual_um=residual,
        survey=survey,
        grades=grades,
        decision_rule=rule_text,
        bearing=bearing,
        lapping=lapping,
        notes=tuple(all_notes),
        date=date,
        issued=issued,
        sources=_SOURCES,
    )


#: Monte Carlo trials when none are asked for. JCGM 101:2008 7.2 suggests M >= 1e4/(1-p), i.e. 2e5 for
#: p = 0.95 for stable interval ends; 2e4 gives the standard deviation (hence U) to about 1 % relative.
DEFAULT_TRIALS = 20_000


def _uncertainty(survey, reduction, *, seed, trials):
    """Expanded uncertainties (k = 2 equivalent, µm) of MZ and LS flatness by Monte Carlo, and how."""
    from .survey import observations
    from .uncertainty import monte_carlo_flatness

    op = getattr(reduction, "operator", None)
    if op is None:
        return None, None, "not evaluated: the survey is too large for the dense reduction operator"
    obs = observations(survey)
    inst = survey.instrument
    if inst.reading_uncertainty is not None:
        u = float(inst.reading_uncertainty) * np.abs(obs.um_per_unit)
        basis = f"reading standard uncertainty {inst.reading_uncertainty:g} {inst.unit} as stated for the instrument"
    elif np.isfinite(reduction.sigma0_um) and reduction.redundancy > 0:
        ref = reduction.ref_base_mm or 1.0
        u = reduction.sigma0_um * (obs.base_mm / ref if reduction.ref_base_mm else np.ones(obs.base_mm.size))
        basis = f"reading scatter estimated from the survey's own redundancy (sigma0 {reduction.sigma0_um:.3f} µm)"
    else:
        return None, None, "not evaluated: no reading uncertainty stated and no redundancy to estimate it"
    kw = dict(G=op.G, u_value_um=u, trials=trials, seed=seed)
    if inst.scale_uncertainty_rel:
        kw["scale_u_rel"] = float(inst.scale_uncertainty_rel)
        basis += f", scale {inst.scale_uncertainty_rel:g} relative"
    if inst.foot_spacing_uncertainty_mm and not inst.reads_heights:
        kw["group"] = obs.base_mm
        kw["group_u_rel"] = {b: float(inst.foot_spacing_uncertainty_mm) / b for b in np.unique(obs.base_mm) if b > 0}
        basis += f", foot spacing {inst.foot_spacing_uncertainty_mm:g} mm"
    mz = monte_carlo_flatness(survey.x_mm[_order(survey, op)], survey.y_mm[_order(survey, op)], obs.value_um,
                              reference="minimum_zone", **kw)
    ls = monte_carlo_flatness(survey.x_mm[_order(survey, op)], survey.y_mm[_order(survey, op)], obs.value_um,
                              reference="least_squares", **kw)
    lo, hi = mz.interval_um
    note = (f"Monte Carlo propagation (JCGM 101:2008), {mz.trials} trials, seed {mz.seed}; {basis}. "
            f"U is twice the standard deviation of the simulated flatness (k = 2 equivalent); "
            f"95 % interval of the minimum zone {lo:.3f} to {hi:.3f} µm (simulated mean {mz.mean_um:.3f} µm).")
    return float(mz.expanded_um), float(ls.expanded_um), note


def _order(survey, op):
    """Station indices of the survey in the row order of the reduction operator."""
    idx = survey.station_index
    return np.array([idx[n] for n in op.station_names], dtype=int)


def _classic_closures(survey, reduction) -> tuple:
    """Classic centre closures of a Union Jack, placed at the centre station: ``(label, x_mm, y_mm, um)``."""
    if survey is None or survey.pattern != "union-jack":
        return ()
    if reduction.method == "moody":
        moody = reduction
    else:
        from .reduction import reduce_survey

        moody = reduce_survey(survey, method="moody")
    out = []
    for c in moody.closures:
        try:
            ln = survey.line(c.line)
        except KeyError:
            continue
        mid = survey.stations[survey.station_index[ln.stations[len(ln.stations) // 2]]]
        out.append((f"line {c.line}", mid.x_mm, mid.y_mm, float(c.closure_um)))
    return tuple(out)


def default_lap(hm: HeightMap):
    """A round lap a fifth of the surveyed width across (10 mm steps, 50 to 250 mm), 1 µm per minute (assumed)."""
    from .lapping import LapModel

    xmin, xmax, ymin, ymax = hm.extent_mm
    d = float(np.clip(round(min(xmax - xmin, ymax - ymin) / 5 / 10) * 10, 50, 250))
    return LapModel(shape="round", diameter_mm=d, rate_um=1.0, time_unit="min")


def _line_rms(survey, reduction) -> dict:
    """RMS residual of each line's readings (µm), from the reduction."""
    if survey is None or reduction is None:
        return {}
    from .survey import observations

    obs = observations(survey)
    r = np.asarray(reduction.residual_um, float)
    if r.shape != obs.line.shape:
        return {}
    out = {}
    for li, ln in enumerate(survey.lines):
        sel = obs.line == li
        if sel.any():
            out[ln.name] = float(np.sqrt(np.mean(r[sel] ** 2)))
    return out


def _grades(hm, standard, flatness_um, u_um, rule):
    from .conformity import assess_grades
    from .tolerance import get_standard, plate_size, tolerances

    std = get_standard(standard)
    size = plate_size(hm)
    verdicts = assess_grades(flatness_um, tolerances(std, size.length_mm, size.width_mm), u_um, rule)
    rows = []
    for v in verdicts:
        t = v.tolerance
        rows.append(GradeRow(std.title, t.grade, t.tolerance_um, v.decision.verdict.replace("-", " "),
                             "; ".join(t.notes)))
    size_note = {"option": "as given", "surface": "as stated for the surface",
                 "point-extent": "extent of the measured points (the plate itself may be larger)"}[size.source]
    rule_text = (verdicts[0].decision.statement.rstrip(". ") + ". " if verdicts else "") + (
        f"Plate size used: {size.length_mm:g} x {size.width_mm:g} mm, {size_note}. Flatness decided: minimum zone."
    )
    return tuple(rows), rule_text


def _size_text(length_mm, width_mm) -> str:
    if not length_mm or not width_mm:
        return "not stated"
    return f"{length_mm:g} x {width_mm:g} mm"


def _identity_rows(hm, survey, reduction):
    if survey is not None:
        sf = survey.surface
        identity = [
            ("surface", sf.description or hm.label or "not stated"),
            ("identity", sf.ident or "not stated"),
            ("size (length x width)", _size_text(sf.length_mm, sf.width_mm)),
            ("material", sf.material or "not stated"),
            ("measured on", survey.date or "not stated"),
            ("temperature", "not stated" if survey.temperature_c is None else f"{survey.temperature_c:g} °C"),
            ("operator", survey.operator or "not stated"),
        ]
        inst = survey.instrument
        method = [
            ("instrument", f"{inst.model} ({inst.kind}), read in {inst.unit}" if inst.model else
             f"{inst.kind}, read in {inst.unit}"),
            ("reference", "gravity (one zero for all lines)" if inst.gravity_referenced else
             "optical, re-aimed per line" if inst.kind == "autocollimator" else "common datum"),
            ("layout", f"{survey.pattern}: {len(survey.stations)} stations on {len(survey.lines)} lines"),
            ("foot spacing", ", ".join(sorted({f"{ln.foot_spacing_mm:g} mm" for ln in survey.lines}))),
            ("reduction", getattr(reduction, "method", None) or "least-squares network adjustment"),
            ("source file", survey.source or "not stated"),
        ]
    else:
        identity = [
            ("surface", hm.label or "height map"),
            ("size (length x width)", _size_text(hm.length_mm, hm.width_mm)),
            ("points", f"{hm.n}"),
        ]
        g = hm.grid
        method = [
            ("input", "height map (positions in mm, heights in µm)"),
            ("layout", "regular grid" if g is not None else "scattered points"),
        ]
    return identity, method


# =============================================================================== sources
_SOURCES = (
    "Minimum zone and least-squares reference planes: ISO 12781-1:2011 (flatness terms and parameters).",
    "Straightness of lines: ISO 12780-1:2011 (straightness terms), minimum-zone reference line.",
    "Union Jack layout and closure errors: J. C. Moody, 'How to calibrate surface plates in the plant', "
    "The Tool Engineer, Oct. 1955.",
    "Least-squares network reduction: 'Moody revisited: least-squares solutions of the Union Jack surface plate "
    "measurement method', Metrology 6(2) 27 (2026), doi:10.3390/metrology6020027.",
    "Uncertainty by Monte Carlo propagation: JCGM 101:2008 (Supplement 1 to the GUM).",
    "Decision rules: ISO 14253-1:2017 (conformity with specifications, guard bands).",
    "Granite plate grades: DIN 876-1:1984; ISO 8512-2:1990; ASME B89.3.7-2013 (formerly Fed. Spec. GGG-P-463c).",
)


# =============================================================================== drawing
def page_titles(content: ReportContent) -> list:
    """Titles of the pages :func:`write_report` makes for ``content``, in order."""
    return [title for title, _ in _page_plan(content)]


def _page_plan(content):
    plan = [("Summary", _page_summary), ("Surface map", _page_map)]
    per_page = 8
    for k in range(0, len(content.lines), per_page):
        chunk = content.lines[k : k + per_page]
        plan.append((f"Line profiles ({k + 1}-{k + len(chunk)} of {len(content.lines)})",
                     lambda fig, c, u, chunk=chunk: _page_profiles(fig, c, u, chunk)))
    if content.survey is not None:
        plan.append(("Survey layout and closure", _page_layout))
    if content.grades:
        plan.append(("Grades and decision rule", _page_grades))
    if content.bearing is not None:
        plan.append(("Air bearing: fitness and carriage motion", _page_bearing))
    if content.lapping is not None:
        plan.append(("Lapping plan", _page_lapping))
    plan.append(("Methods, sources and cautions", _page_sources))
    return plan


def _frame(fig, content, title, page, pages):
    """Header and footer drawn on every page."""
    from . import plot

    hm = content.heightmap
    ident = dict(content.identity).get("identity", "")
    head = hm.label if not ident or ident == "not stated" else f"{hm.label} · {ident}"
    plot.page_frame(
        fig,
        left_head="FLATNESS REPORT",
        right_head=head,
        title=title,
        footer=(
            "Results apply to the surface as measured; see the statement on page 1.",
            f"measurement date: {content.date} · report issued {content.issued} · flatcheck",
        ),
        page_text=f"page {page} of {pages}",
    )


def _h(v_um, units):
    from .units import UM_PER_UIN

    if units == "in":
        return f"{v_um / UM_PER_UIN:.1f} µin"
    return f"{v_um:.3f} µm"


def _page_summary(fig, c, units):
    from . import plot

    ax = fig.add_axes([0.06, 0.06, 0.88, 0.86])
    y = 1.0
    y = plot.flow_table(ax, y, c.identity, col_x=(0.0, 0.3), title="What was measured", wrap_chars=(None, 80))
    y = plot.flow_table(ax, y, c.method, col_x=(0.0, 0.3), title="How it was measured", wrap_chars=(None, 80))
    rows = [
        ("minimum zone (MZ)", _h(c.mz.flatness_um, units),
         "not evaluated" if c.u_mz_um is None else _h(c.u_mz_um, units)),
        ("least squares (LS), peak to valley", _h(c.ls.flatness_um, units),
         "not evaluated" if c.u_ls_um is None else _h(c.u_ls_um, units)),
    ]
    for label, _x, _y, v in c.closures:
        rows.append((f"closure error at the centre, {label}", _h(v, units), ""))
    y = plot.flow_table(ax, y, rows, col_x=(0.0, 0.45, 0.65), col_labels=("flatness", "value", "expanded uncertainty"),
                        title="Results", bold_cols=(1,))
    if c.uncertainty_note:
        y = plot.text_block(ax, [("Uncertainty: " + c.uncertainty_note, "s")], y0=y, wrap_chars=110)
    if c.grades:
        rows = [(g.grade, _h(g.tolerance_um, units), g.verdict) for g in c.grades]
        y = plot.flow_table(ax, y, rows, col_x=(0.0, 0.3, 0.55), col_labels=("grade", "tolerance", "verdict"),
                            title=f"Grades: {c.grades[0].standard}", bold_cols=(2,))
        y = plot.text_block(ax, [("Decision rule and details: see the grades page.", "s")], y0=y, wrap_chars=110)
    if c.bearing is not None:
        b = c.bearing
        y = plot.flow_table(ax, y, [("verdict", b.verdict), ("largest local flatness under a pad",
                                                            f"{_h(b.local_flatness_max_um, units)} (limit {_h(b.limit_um, units)})")],
                            col_x=(0.0, 0.45), title="Air bearing", bold_cols=(1,))
    lines = [("Note: " + n, "s") for n in c.notes]
    lines += [("Statement", "h"), SCOPE_STATEMENT]
    plot.text_block(ax, lines, y0=y, fontsize=8.5, wrap_chars=110)


def _page_map(fig, c, units):
    from . import plot

    ax = fig.add_axes([0.09, 0.50, 0.80, 0.40])
    plot.contour_map(ax, c.heightmap, reference=c.mz, units=units,
                     title="deviation from the minimum-zone plane (open circles: stations)")
    ax3 = fig.add_axes([0.06, 0.07, 0.88, 0.40], projection="3d")
    plot.surface_view(ax3, c.heightmap, reference=c.mz, units=units,
                      title="the same surface in three dimensions (heights exaggerated)")


def _page_profiles(fig, c, units, chunk):
    from . import plot

    profs = [
        plot.LineProfile(ln.name, ln.s_mm, ln.height_um, ln.straightness_um, ln.ref_offset_um, ln.ref_slope_um_per_mm)
        for ln in chunk
    ]
    plot.line_profiles(fig, profs, units=units, rect=(0.1, 0.08, 0.94, 0.90))


def _page_layout(fig, c, units):
    from . import plot

    sv = c.survey
    index = {s.name: i for i, s in enumerate(sv.stations)}
    lines = [(ln.name, np.array([index[s] for s in ln.stations])) for ln in sv.lines]
    ax = fig.add_axes([0.09, 0.55, 0.84, 0.36])
    plot.survey_layout(ax, np.column_stack([sv.x_mm, sv.y_mm]), lines, length_mm=sv.surface.length_mm,
                       width_mm=sv.surface.width_mm, closures=c.closures, units=units,
                       title="lines walked (arrow: towards the line's last station)")
    rows = []
    for ln in c.lines:
        rows.append((ln.name, f"{ln.s_mm[-1]:.0f} mm", f"{len(ln.s_mm) - 1}",
                     "" if ln.rms_residual_um is None else _h(ln.rms_residual_um, units),
                     "" if ln.run_spread_um is None else _h(ln.run_spread_um, units),
                     _h(ln.straightness_um, units)))
    ax = fig.add_axes([0.06, 0.06, 0.88, 0.44])
    y = plot.flow_table(ax, 1.0, rows, col_x=(0.0, 0.16, 0.30, 0.40, 0.60, 0.80), fontsize=8,
                        col_labels=("line", "length", "steps", "rms residual", "run spread", "straightness"),
                        title="Lines")
    notes = ["rms residual: readings minus the adjusted surface, per line. run spread: largest difference between "
             "the end-to-end rises of the runs of a line walked more than once. straightness: minimum zone of the "
             "line's station heights."]
    if c.closures:
        notes.append("closure error (classic Union Jack): centre-line value at the centre minus the diagonals' "
                     "value there; it shows reading errors, not flatness.")
    y = plot.text_block(ax, [(t, "s") for t in notes], y0=y, fontsize=8, wrap_chars=110)
    if c.residual_um is not None and np.size(c.residual_um):
        bottom = 0.09
        top = 0.06 + 0.44 * y - 0.04
        if top - bottom > 0.08:
            ax = fig.add_axes([0.12, bottom, 0.5, top - bottom])
            plot.residual_histogram(ax, c.residual_um, units=units)


def _page_grades(fig, c, units):
    from . import plot

    ax = fig.add_axes([0.06, 0.06, 0.88, 0.86])
    rows = [("minimum-zone flatness F", _h(c.mz.flatness_um, units)),
            ("expanded uncertainty U", "not evaluated" if c.u_mz_um is None else _h(c.u_mz_um, units))]
    y = plot.flow_table(ax, 1.0, rows, col_x=(0.0, 0.45), title="Result decided", bold_cols=(1,))
    rows = [(g.grade, _h(g.tolerance_um, units), g.verdict, g.note or "") for g in c.grades]
    y = plot.flow_table(ax, y, rows, col_x=(0.0, 0.1, 0.27, 0.47), col_labels=("grade", "tolerance", "verdict", "note"),
                        title=c.grades[0].standard, bold_cols=(2,), wrap_chars=(None, None, None, 55))
    lines = [("Decision rule", "h"), c.decision_rule,
             "Verdicts: 'conforms' = proven inside the tolerance; 'does not conform' = proven outside; "
             "'undecided' = the uncertainty interval straddles the limit (ISO 14253-1 default rule).",
             ]
    plot.text_block(ax, lines, y0=y, wrap_chars=105)


def _page_bearing(fig, c, units):
    from . import plot

    b = c.bearing
    m = b.motion
    st = [s for s in b.stations]
    local = np.array([s.local_flatness_um for s in st]) if len(st) == len(m.x_mm) else None
    plot.carriage_path(fig, m.x_mm, m.raw_profile_um, m.path_um, pitch=m.pitch_path_arcsec, pitch_unit="arcsec",
                       local_um=local, local_limit_um=b.limit_um, units=units,
                       title=f"carriage over its travel: path straightness {_h(m.straightness_um, units)} "
                             f"(surface alone {_h(m.raw_straightness_um, units)})",
                       rect=(0.1, 0.50, 0.88, 0.90))
    ax = fig.add_axes([0.06, 0.06, 0.88, 0.36])
    rows = []
    for ch in b.checks:
        val = _h(ch.value, units) if ch.unit == "um" else f"{ch.value:.2f} arcsec"
        lim = _h(ch.limit, units) if ch.unit == "um" else f"{ch.limit:.2f} arcsec"
        rows.append((ch.name, val, lim, ch.status))
    y = plot.flow_table(ax, 1.0, rows, col_x=(0.0, 0.45, 0.62, 0.8), col_labels=("check", "value", "limit", "status"),
                        title=f"Verdict: {b.verdict}", bold_cols=(3,), wrap_chars=(60, None, None, None))
    pads = ", ".join(f"{p.pad.shape} {p.pad.length_mm:g} x {p.pad.width_mm:g} mm, gap {p.pad.gap_um:g} µm"
                     for p in b.carriage.active_pads)
    lines = [f"Pads: {pads}."] + list(b.notes)
    plot.text_block(ax, [(t, "s") for t in lines], y0=y, wrap_chars=110)


def _page_lapping(fig, c, units):
    from . import plot

    p = c.lapping
    rm = p.removal
    ax = fig.add_axes([0.10, 0.66, 0.80, 0.25])
    plot.removal_map(ax, p.xs_mm, p.ys_mm, p.wanted_um, units=units,
                     title=f"least removal to reach {_h(rm.target_um, units)} (deepest {_h(rm.max_depth_um, units)})")
    ax = fig.add_axes([0.10, 0.36, 0.80, 0.25])
    plot.dwell_map(ax, p.xs_mm, p.ys_mm, p.plan_dwell, dwell_unit=p.lap.time_unit, units=units,
                   title=f"dwell of the {p.lap.describe()}")
    ax = fig.add_axes([0.06, 0.06, 0.88, 0.26])
    rows = [(f"{q.order}", q.zone, _h(q.depth_um, units), f"{q.time:.2f} {q.time_unit}") for q in p.passes[:8]]
    y = plot.flow_table(ax, 1.0, rows, col_x=(0.0, 0.1, 0.45, 0.7), col_labels=("pass", "cells", "depth", "time"),
                        fontsize=7.5, title=f"Passes (first {len(rows)} of {len(p.passes)}, highest first)",
                        wrap_chars=(None, 40, None, None))
    text = (f"Flatness now {_h(rm.flatness_before_um, units)}; after the plan {_h(p.predicted_flatness_um, units)} "
            f"predicted (best this lap can do: {_h(p.dwell_flatness_um, units)}). Total time "
            f"{p.total_time:.1f} {p.lap.time_unit}. Cells: columns A.. from the west, rows 1.. from the south. "
            "Lap wet or with extraction; see the cautions.")
    plot.text_block(ax, [(text, "s")], y0=y, fontsize=8, wrap_chars=110)


def _page_sources(fig, c, units):
    from . import plot
    from .cli.common import SAFETY_LINES

    lines = [("Sources of the methods", "h")]
    lines += [f"• {s}" for s in c.sources]
    lines.append(("Cautions", "h"))
    lines += [f"• {v}" for v in SAFETY_LINES.values()]
    lines.append("• flatcheck's numbers do not make handling, lapping or air work safe: local codes, the "
                 "employer's procedures and licensed practice take precedence over anything in this report.")
    lines.append(("Statement", "h"))
    lines.append(SCOPE_STATEMENT)
    ax = fig.add_axes([0.06, 0.06, 0.88, 0.86])
    plot.text_block(ax, lines, fontsize=8.5, wrap_chars=105)


def write_report(path, content: ReportContent, *, units: str = "um", png_dir=None, on_page=None,
                 png_dpi: float = 150) -> ReportFiles:
    """Draw the report's pages and write the PDF (and optionally each page's picture as PNG).

    Parameters
    ----------
    path : str or Path
        The PDF to write; replaced atomically.
    content : ReportContent
        From :func:`analyse`.
    units : {"um", "in"}
        Display units (µm and mm, or µin and inches).
    png_dir : str or Path, optional
        An existing folder for the pictures as PNG files (``page-NN-<topic>.png``).
    on_page : callable, optional
        Called with no argument after each page is drawn (progress).

    Returns
    -------
    ReportFiles

    Raises
    ------
    OutputError
        If a file cannot be written (missing folder, no permission).
    """
    from . import plot

    if units not in ("um", "in"):
        raise InputValueError(f"unknown display units {units!r}", fix="use 'um' or 'in'")
    path = Path(path)
    if png_dir is not None:
        png_dir = Path(png_dir)
        if not png_dir.is_dir():
            raise OutputError(f"cannot write pictures in {png_dir}: no such folder",
                              fix="create the folder first or choose another")
    plan = _page_plan(content)
    pngs = []
    title = f"Flatness report: {content.heightmap.label}"
    with plot.PdfBook(path, title=title, subject="flatness of a surface as measured") as book:
        for k, (page_title, draw) in enumerate(plan, start=1):
            fig = plot.new_figure()
            draw(fig, content, units)
            _frame(fig, content, page_title, k, len(plan))
            book.add(fig)
            if png_dir is not None and k > 1:
                slug = "".join(ch if ch.isalnum() else "-" for ch in page_title.lower()).strip("-")
                while "--" in slug:
                    slug = slug.replace("--", "-")
                pngs.append(plot.save_png(fig, png_dir / f"page-{k:02d}-{slug}.png", dpi=png_dpi))
            if on_page is not None:
                on_page()
    return ReportFiles(path, len(plan), tuple(pngs))
