"""The report's content: every number and sentence the PDF report states, before anything is drawn.

:func:`analyse` takes the shared evaluation of a surface
(:func:`flatcheck.evaluation.evaluate_surface`, the one ``flatcheck reduce`` states) and adds what only
the report needs (grades, air bearing, lapping plan, set-up sheet, sources and cautions); it returns a
frozen :class:`ReportContent` with its rows (:class:`LineResult`, :class:`GradeRow`), so that the
numbers can be checked without drawing anything. The text helpers that restate a sentence in the
report's units (:func:`uncertainty_text` and the private ``_in_units``, ``_h``, ``_inches``) live here
too, because the pages (:mod:`._report_pages` and its siblings) use them as well. Nothing here prints,
reads files or imports matplotlib.
"""

from __future__ import annotations

import datetime as _dt
import math
import re
from dataclasses import dataclass

import numpy as np

from ..errors import InputValueError
from ..form import HeightMap

__all__ = [
    "LineResult",
    "GradeRow",
    "ReportContent",
    "analyse",
    "uncertainty_text",
]

#: The one plane every height the report (and the terminal, and --map-out) shows is referred to; named on
#: every page. The flatness itself is the minimum zone, stated about its own planes.
HEIGHT_REFERENCE = "least-squares plane of all points"

#: Statement printed on every report (the scope of the results).
SCOPE_STATEMENT = (
    "These results describe the surface only as it was when and where it was measured, supported as stated, "
    "with the instrument and method named here; they say nothing of the surface at other times, on other "
    "supports or at other temperatures."
)


@dataclass(frozen=True)
class LineResult:
    """One measured line: where its stations are, its straightness and its closure.

    Attributes
    ----------
    name : str
    s_mm : ndarray, shape (k,)
        Distance along the line from its first station, mm.
    height_um : ndarray, shape (k,)
        Station heights from the height map, µm.
    straightness_um : float
        Minimum-zone straightness (ISO 12780-1 STRt about the MZLI), µm.
    ref_offset_um, ref_slope_um_per_mm : float
        Mid-line of the minimum zone (µm at s = 0, µm/mm).
    rms_residual_um : float or None
        RMS of the reduction residuals of this line's readings, µm.
    run_spread_um : float or None
        For a line walked more than once, the largest difference between its runs' end-to-end rises, µm.
    closure_um : float or None
        The reduction's closure error of the line, µm (see ``closure_meaning``).
    closure_station : str or None
        Station where the closure is taken (None for the classic centre closures).
    closure_meaning : str or None
        What the closure error means for this reduction.
    """

    name: str
    s_mm: np.ndarray
    height_um: np.ndarray
    straightness_um: float
    ref_offset_um: float
    ref_slope_um_per_mm: float
    rms_residual_um: float | None = None
    run_spread_um: float | None = None
    closure_um: float | None = None
    closure_station: str | None = None
    closure_meaning: str | None = None


@dataclass(frozen=True)
class GradeRow:
    """One grade verdict as the report states it (all heights in µm)."""

    standard: str
    grade: str
    tolerance_um: float
    verdict: str
    note: str = ""
    status: str = "verified"


@dataclass(frozen=True)
class ReportContent:
    """Everything the report states (heights µm, positions mm).

    Made by :func:`analyse` from a :class:`flatcheck.evaluation.SurfaceEvaluation`, so the
    report states the numbers ``flatcheck reduce`` and ``flatcheck grade`` state.

    Attributes
    ----------
    evaluation : SurfaceEvaluation
        The shared evaluation (flatness about every reference, lines, local flatness, uncertainty).
    identity : tuple of (str, str)
        Rows describing the surface (what, identity, size, material).
    method : tuple of (str, str)
        Rows describing the instrument, layout and reduction.
    mz, ls : PlaneFit
        The minimum-zone zone (its lower plane) and the least-squares plane, with their flatness (µm).
    lines : tuple of LineResult
        The measured lines (or grid rows/columns for a height map).
    grades : tuple of GradeRow
    decision_rule : str
    bearing : BearingResult or None
    lapping : LapPlan or None
    lapping_target : str
        Where the lapping target came from.
    lapping_notes : tuple of str
        What was assumed about the lap (size, removal rate), stated on the lapping page.
    lap_rate_assumed : bool
        True when the removal rate is a placeholder, not the user's calibration.
    notes : tuple of str
        Warnings and remarks stated in the report.
    uncertainty_missing : str
        Why there is no uncertainty, when there is none.
    date : str
        Measurement date (or "not stated").
    issued : str
        Date the report was made (ISO 8601).
    sources : tuple of str
        References of the methods used (only those this report uses).
    cautions : tuple of str
        Safety cautions that apply (worded for the surface's material when it is known).
    local_missing : str
        Why there is no local flatness, with the fix, when there is none (empty otherwise).
    setup : SetupSheet or None
        For a survey: its set-up sheet (:func:`flatcheck.bench.setup_sheet`, with the runs it was read in).
    support_check : SagCheck or None
        With a lapping plan: whether the surface is a long beam sagging between its supports
        (:func:`flatcheck.bench.check_sag`), said before any lapping advice.
    """

    evaluation: object
    identity: tuple
    method: tuple
    mz: object
    ls: object
    lines: tuple = ()
    grades: tuple = ()
    decision_rule: str = ""
    bearing: object | None = None
    lapping: object | None = None
    lapping_target: str = ""
    lapping_notes: tuple = ()
    lap_rate_assumed: bool = False
    notes: tuple = ()
    uncertainty_missing: str = ""
    date: str = "not stated"
    issued: str = ""
    sources: tuple = ()
    cautions: tuple = ()
    local_missing: str = ""
    setup: object | None = None
    support_check: object | None = None
    certificate: object | None = None  # flatcheck.records.CertificateData: the certificate's pages (report --db)

    @property
    def height_step_um(self) -> float:
        """The height step the measurement resolves: heights without an uncertainty print to it."""
        return self.evaluation.height_step_um

    @property
    def heightmap(self) -> HeightMap:
        """The evaluated surface (positions mm, heights µm)."""
        return self.evaluation.heightmap

    @property
    def survey(self):
        """The survey the map was reduced from, or None for a height-map input."""
        return self.evaluation.loaded.survey

    @property
    def flatness(self):
        """The :class:`flatcheck.FlatnessReport` (every reference plane), µm."""
        return self.evaluation.flatness

    @property
    def uncertainty(self):
        """The :class:`flatcheck.evaluation.SurveyUncertainty`, or None."""
        return self.evaluation.uncertainty

    @property
    def u_mz_um(self) -> float | None:
        """Expanded uncertainty of the minimum-zone flatness (k = 2 equivalent), µm, or None."""
        u = self.uncertainty
        return None if u is None else float(u.minimum_zone.expanded_um)

    @property
    def u_ls_um(self) -> float | None:
        """Expanded uncertainty of the least-squares flatness (k = 2 equivalent), µm, or None."""
        u = self.uncertainty
        return None if u is None else float(u.least_squares.expanded_um)

    @property
    def local(self):
        """The :class:`flatcheck.LocalFlatness` of the evaluation's window, or None."""
        return self.evaluation.local

    @property
    def window(self):
        """The local-flatness :class:`flatcheck.evaluation.Window`, or None."""
        return self.evaluation.window

    @property
    def residual_um(self):
        """Reduction residuals of every reading (µm, shape (m,)), or None."""
        red = self.evaluation.loaded.reduction
        return None if red is None else np.asarray(red.residual_um, float)


# =============================================================================== analysis
def _survey_lines(evaluation) -> list:
    """Survey lines with their straightness zone (flatcheck.form) and the evaluation's closures."""
    from ..form import evaluate_straightness

    loaded = evaluation.loaded
    hm, sv = loaded.heightmap, loaded.survey
    pos = {n: i for i, n in enumerate(hm.names or ())}
    rms = _line_rms(sv, loaded.reduction)
    stated = {ln["name"]: ln for ln in evaluation.lines}
    out = []
    for ln in sv.lines:
        idx = np.array([pos[s] for s in ln.stations], dtype=int)
        # distance from the first station, as the shared evaluation measures it (lines are straight)
        s = np.hypot(hm.x_mm[idx] - hm.x_mm[idx[0]], hm.y_mm[idx] - hm.y_mm[idx[0]])
        h = hm.height_um[idx]
        mzli = evaluate_straightness(s, h).mzli
        d = stated.get(ln.name, {})
        out.append(LineResult(
            ln.name, s, h, float(d.get("straightness_um", mzli.strt_um)), mzli.a_um, mzli.b_um_per_mm,
            rms.get(ln.name), d.get("run_spread_um"), d.get("closure_um"), d.get("closure_station"),
            d.get("meaning"),
        ))
    return out


def _grid_lines(hm: HeightMap, max_lines: int = 8) -> list:
    """Rows and two columns of a gridded height map, with their minimum-zone straightness."""
    from ..form import evaluate_straightness

    g = hm.grid
    if g is None:
        return []
    xs, ys, index = g
    raw = []
    rows = np.unique(np.linspace(0, ys.size - 1, min(ys.size, max_lines - 2)).round().astype(int))
    for j in rows:
        raw.append((f"y = {ys[j]:.4g} mm", xs - xs[0], hm.height_um[index[j]]))
    for i in np.unique([0, xs.size // 2]):
        raw.append((f"x = {xs[i]:.4g} mm", ys - ys[0], hm.height_um[index[:, i]]))
    out = []
    for name, s, h in raw:
        if s.size < 2:
            continue
        mzli = evaluate_straightness(s, h).mzli
        out.append(LineResult(name, s, h, mzli.strt_um, mzli.a_um, mzli.b_um_per_mm))
    return out


def _plane_fits(flat):
    """PlaneFit views of the shared flatness report: the zone's lower plane, and the LS plane."""
    from ..form import PlaneFit

    mz = flat.mzpl  # mid-plane of the zone; its lower plane lies FLTv below it
    ls = flat.lspl
    return (
        PlaneFit(mz.a_um - mz.fltv_um, mz.b_um_per_mm, mz.c_um_per_mm, mz.fltt_um, "minimum_zone", mz.normal_fltt_um),
        PlaneFit(ls.a_um, ls.b_um_per_mm, ls.c_um_per_mm, ls.fltt_um, "least_squares", ls.normal_fltt_um),
    )


def analyse(
    evaluation,
    *,
    standard: str | None = None,
    rule: str = "iso14253",
    carriage=None,
    gap_fraction: float | None = None,
    marginal_from: float | None = None,
    budget=None,
    target_um: float | None = None,
    target_source: str = "given",
    lap=None,
    lap_notes=(),
    lap_rate_assumed: bool = False,
    uncertainty_missing: str | None = None,
    notes=(),
    today: _dt.date | None = None,
    progress=None,
    window: str | None = None,
) -> ReportContent:
    """Gather what the report states about an evaluated surface.

    Parameters
    ----------
    evaluation : SurfaceEvaluation
        From :func:`flatcheck.evaluation.evaluate_surface`: flatness, lines, local flatness
        and (optionally) Monte Carlo uncertainty. The report states these numbers as they are.
    standard : str, optional
        Standard to grade against (``"din-876"``, ``"iso-8512-2"``, ``"asme-b89.3.7"``); every
        grade of it is decided on the minimum-zone flatness and its expanded uncertainty.
    rule : {"iso14253", "simple"}
        Decision rule for the grades.
    carriage : Carriage, optional
        Air-bearing pad or carriage to judge the surface for.
    gap_fraction, marginal_from, budget
        Bearing limits (library defaults when ``None``).
    target_um : float, optional
        Target flatness in µm: adds a lapping plan (needs ``lap``).
    target_source : str
        Where the target came from (stated on the lapping page).
    lap : LapModel, optional
        The lap and its removal rate for the plan.
    lap_notes : sequence of str
        What was assumed about the lap (e.g. an assumed removal rate); stated on the
        lapping page and among the summary's notes.
    lap_rate_assumed : bool
        The lap's removal rate is a placeholder (times are then relative); said on the lapping page.
    uncertainty_missing : str, optional
        Why the evaluation carries no uncertainty (stated instead of a value).
    notes : sequence of str
        Remarks to state in the report (e.g. what was assumed about the lap).
    today : date, optional
        Issue date (default: today).
    progress : callable, optional
        Called with a short text before each long step (never prints itself).
    window : str, optional
        The local-flatness window as the user asked for it ("auto", "none", "250x250"), so that a
        report without local flatness can say why and how to get it.

    Returns
    -------
    ReportContent

    Raises
    ------
    InputValueError
        Fewer than three points, or a target without a lap.
    """
    say = progress or (lambda text: None)
    loaded = evaluation.loaded
    hm, survey, reduction = loaded.heightmap, loaded.survey, loaded.reduction
    if hm.n < 3:
        raise InputValueError("a report needs at least three points", fix="measure more stations")
    if target_um is not None and lap is None:
        raise InputValueError("a lapping plan needs the lap", where="lap", fix="give a LapModel with its removal rate")
    mz, ls = _plane_fits(evaluation.flatness)
    identity, method = _identity_rows(hm, survey, reduction)
    lines = _survey_lines(evaluation) if survey is not None else _grid_lines(hm)
    all_notes = list(evaluation.notes) + list(notes) + (list(lap_notes) if target_um is not None else [])
    if reduction is not None:
        all_notes += list(getattr(reduction, "warnings", ()))
        n_out = len(getattr(reduction, "outliers", ()))
        if n_out:
            all_notes.append(f"{n_out} reading(s) flagged as possible outliers by the reduction; see the residuals")
    if evaluation.uncertainty is None and not uncertainty_missing:
        uncertainty_missing = ("not evaluated: a height map carries no reading uncertainty (give the uncertainty of "
                               "one height, or report a survey)" if survey is None else "not evaluated")
    grades = ()
    rule_text = ""
    if standard is not None:
        say("grading against the standard")
        u = evaluation.uncertainty
        grades, rule_text = _grades(hm, standard, evaluation.flatness.mzpl.fltt_um,
                                    None if u is None else float(u.minimum_zone.expanded_um), rule)
    bearing = None
    if carriage is not None:
        say("air bearing: the carriage over its travel")
        from ..bearing import evaluate_bearing

        kw = {}
        if gap_fraction is not None:
            kw["gap_fraction"] = gap_fraction
        if marginal_from is not None:
            kw["marginal_from"] = marginal_from
        u = evaluation.uncertainty
        kept = None if u is None or u.budget is None else getattr(u.budget, "trial_errors_um", None)
        if kept is not None:  # the checks decided with U from the budget, as 'flatcheck bearing' does
            from ..bearing import SurveyErrors

            kw["uncertainty"] = SurveyErrors.from_budget(u.budget)
        bearing = evaluate_bearing(hm, carriage, budget=budget, **kw)
    lapping = support_check = None
    if target_um is not None:
        from ..bench import check_sag_of

        support_check = check_sag_of(hm)  # a beam sagging between its supports: said before any lapping advice
        say("lapping plan: least removal, dwell map and passes")
        from ..lapping import least_removal, plan_lapping

        lapping = plan_lapping(hm, least_removal(hm, float(target_um)), lap)
    setup = None
    if survey is not None:
        from ..bench import setup_sheet

        runs = {ln.name: tuple(r.order for r in ln.runs) or ("forward",) for ln in survey.lines}
        setup = setup_sheet(survey, runs=runs, thickness_mm=(survey.meta or {}).get("thickness_mm"))
    issued = (today or _dt.date.today()).isoformat()
    date = survey.date if survey is not None and survey.date else "not stated"
    return ReportContent(
        evaluation=evaluation,
        identity=tuple(identity),
        method=tuple(method),
        mz=mz,
        ls=ls,
        lines=tuple(lines),
        grades=grades,
        decision_rule=rule_text,
        bearing=bearing,
        lapping=lapping,
        lapping_target=target_source if target_um is not None else "",
        lapping_notes=tuple(lap_notes) if target_um is not None else (),
        lap_rate_assumed=bool(lap_rate_assumed) and target_um is not None,
        notes=tuple(all_notes),
        uncertainty_missing=uncertainty_missing or "",
        date=date,
        issued=issued,
        sources=_sources_used(evaluation, grades, bearing, lapping),
        cautions=_cautions(hm, survey, bearing),
        local_missing=_local_missing(evaluation, window),
        setup=setup,
        support_check=support_check,
    )


_UM_NUMBER = re.compile(r"(-?\d+(?:\.\d+)?) [µu]m(?![/\w])")
_SLOPE_NUMBER = re.compile(r"(-?\d+(?:\.\d+)?) [µu]m/m\b")
_MM_PAIR = re.compile(r"(-?\d+(?:\.\d+)?) x (-?\d+(?:\.\d+)?) mm\b")
_MM_NUMBER = re.compile(r"(-?\d+(?:\.\d+)?) mm\b(?!\^)")


def _unit_symbol(unit: str) -> str:
    """A reading unit as printed: "um/m" -> "µm/m" (the ASCII spelling files and options use)."""
    return re.sub(r"\bu(m|in)\b", r"µ\1", unit)


def _in_units(text: str, units: str) -> str:
    """A sentence from elsewhere in flatcheck restated in the report's units.

    Heights "N µm" (or "N um") become µin and slopes "N um/m" µin/in with ``units == "in"``
    (1 µin = 0.0254 µm and 1 µm/m = 1 µin/in, exactly), lengths "N mm" and "N x M mm" inches;
    with ``"um"`` only the ASCII spellings become µm and µm/m.
    """
    if units != "in":
        text = _SLOPE_NUMBER.sub(lambda m: f"{m.group(1)} µm/m", text)
        return _UM_NUMBER.sub(lambda m: f"{m.group(1)} µm", text)
    text = _SLOPE_NUMBER.sub(lambda m: f"{m.group(1)} µin/in", text)
    text = _UM_NUMBER.sub(lambda m: _h(float(m.group(1)), units), text)
    text = _MM_PAIR.sub(lambda m: f"{_inches(float(m.group(1)))} x {_inches(float(m.group(2)))} in", text)
    return _MM_NUMBER.sub(lambda m: f"{_inches(float(m.group(1)))} in", text)


def uncertainty_text(content: ReportContent, units: str = "um") -> str:
    """How the uncertainty was obtained (or why there is none), in the display units.

    Parameters
    ----------
    content : ReportContent
    units : {"um", "in"}
        Heights in µm, or in µin with ``"in"`` (1 µin = 0.0254 µm exactly).

    Returns
    -------
    str
    """
    unc = content.uncertainty
    if unc is None:
        return content.uncertainty_missing
    from ..units import format_with_uncertainty

    mz = unc.minimum_zone
    corrected = getattr(mz, "corrected_interval_um", None)
    lo, hi = corrected if corrected is not None else mz.interval_um
    basis = unc.basis
    basis = _in_units(basis, units)  # the basis may quote a scatter in µm or a reading in um/m

    def v(x):  # ends of the interval and the mean: to the decimal place of U (JCGM 100:2008, 7.2.6)
        return format_with_uncertainty(x, mz.expanded_um, units)[0]

    if corrected is None:
        return (f"Monte Carlo propagation (JCGM 101:2008), {mz.trials} trials, seed {mz.seed}; {basis}. "
                f"U is twice the standard deviation of the simulated flatness (k = 2 equivalent); "
                f"95 % interval of the minimum zone {v(lo)} to {v(hi)} (simulated mean {v(mz.mean_um)}).")
    return (f"Monte Carlo propagation of the whole uncertainty budget (JCGM 101:2008), {mz.trials} trials, seed "
            f"{mz.seed}; {basis}. U is at least twice the standard deviation of the simulated flatness and reaches "
            f"both ends of the 95 % interval of the minimum zone, {v(lo)} to {v(hi)}, which is "
            f"corrected for the noise bias (simulated mean {v(mz.mean_um)}; see the uncertainty budget page).")


def _line_rms(survey, reduction) -> dict:
    """RMS residual of each line's readings (µm), from the reduction."""
    if survey is None or reduction is None:
        return {}
    from ..survey import observations

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
    from ..conformance import assess_grades
    from ..conformance import get_standard, plate_size, tolerances

    std = get_standard(standard)
    size = plate_size(hm)
    verdicts = assess_grades(flatness_um, tolerances(std, size.length_mm, size.width_mm), u_um, rule)
    rows = []
    for v in verdicts:
        t = v.tolerance
        # where a limit comes from (recalled, inferred, a secondary table) is said once, in the methods section
        # (issue 15, item 10): a certificate's table carries the limit, not doubts beside it
        notes = [n for n in t.notes if not _is_provenance_note(n)]
        rows.append(GradeRow(std.title, t.grade, t.tolerance_um, v.decision.verdict.replace("-", " "),
                             "; ".join(notes), getattr(t, "status", "verified")))
    size_note = {"option": "as given", "surface": "as stated for the surface",
                 "point-extent": "extent of the measured points (the plate itself may be larger)"}[size.source]
    rule_text = (verdicts[0].decision.statement.rstrip(". ") + ". " if verdicts else "") + (
        f"Plate size used: {size.length_mm:g} x {size.width_mm:g} mm, {size_note}. Flatness decided: minimum zone."
    )
    return tuple(rows), rule_text


def _is_provenance_note(note: str) -> bool:
    """A tolerance note that says where the value comes from rather than how it applies."""
    n = note.lower()
    return "from memory" in n or "inferred" in n or "secondary" in n or "not verified" in n


def limits_provenance_text(grades) -> str:
    """One sentence for the methods section naming the limits not checked against the standard's own text."""
    doubtful = [g for g in grades if g.status != "verified"]
    if not doubtful:
        return ""
    by_status = {}
    for g in doubtful:
        by_status.setdefault(g.status, []).append(g.grade)
    words = {"from memory": "recalled", "inferred": "computed from a formula inferred from makers' tables",
             "secondary source": "taken from a secondary reproduction of the standard's table"}
    parts = [f"grade{'s' if len(v) > 1 else ''} {', '.join(v)}: {words.get(k, k)}" for k, v in by_status.items()]
    return (f"Limits of {doubtful[0].standard} not checked against the standard's own text ({'; '.join(parts)}). "
            "Where a decision depends on one of them, state the limit from your copy of the standard "
            "(flatcheck grade --tolerance-um T) and decide on that.")


def _size_text(length_mm, width_mm, units: str = "um") -> str:
    if not length_mm or not width_mm:
        return "not stated"
    if units == "in":
        return f"{_inches(length_mm)} x {_inches(width_mm)} in"
    return f"{length_mm:g} x {width_mm:g} mm"


def _inches(v_mm: float) -> str:
    """A length in inches to 0.01 in (1 in = 25.4 mm exactly), without the unit."""
    from ..units import format_length

    return format_length(v_mm, "in", unit=False)


def _h(v_um, units, step_um: float | None = None):
    """A height with its unit, to the step the measurement resolves (:func:`flatcheck.units.height_decimals`)."""
    from ..units import format_height

    return format_height(v_um, units, step_um=step_um)


def _identity_rows(hm, survey, reduction, units: str = "um"):
    if survey is not None:
        sf = survey.surface
        identity = [
            ("surface", sf.description or hm.label or "not stated"),
            ("identity", sf.ident or "not stated"),
            ("size (length x width)", _size_text(sf.length_mm, sf.width_mm, units)),
            ("material", sf.material or "not stated"),
            ("measured on", survey.date or "not stated"),
            ("temperature", "not stated" if survey.temperature_c is None else f"{survey.temperature_c:g} °C"),
            ("operator", survey.operator or "not stated"),
        ]
        inst = survey.instrument
        method = [
            ("instrument", f"{inst.model} ({inst.kind}), read in {_unit_symbol(inst.unit)}" if inst.model else
             f"{inst.kind}, read in {_unit_symbol(inst.unit)}"),
            ("reference", "gravity (one zero for all lines)" if inst.gravity_referenced else
             "optical, re-aimed per line" if inst.kind == "autocollimator" else "common datum"),
            ("layout", f"{survey.pattern}: {len(survey.stations)} stations on {len(survey.lines)} lines"),
            ("foot spacing", ", ".join(sorted({f"{_inches(ln.foot_spacing_mm)} in" if units == "in" else
                                               f"{ln.foot_spacing_mm:g} mm" for ln in survey.lines}))),
            ("reduction", getattr(reduction, "method", None) or "least-squares network adjustment"),
            ("source file", survey.source or "not stated"),
        ]
    else:
        identity = [
            ("surface", hm.label or "height map"),
            ("size (length x width)", _size_text(hm.length_mm, hm.width_mm, units)),
            ("points", f"{hm.n}"),
        ]
        g = hm.grid
        method = [
            ("input", "height map (positions in mm, heights in µm)"),
            ("layout", "regular grid" if g is not None else "scattered points"),
        ]
    return identity, method


# =============================================================================== sources
_SRC = {
    "planes": "Minimum zone and least-squares reference planes: ISO 12781-1:2011 (flatness terms and parameters).",
    "lines": "Straightness of lines: ISO 12780-1:2011 (straightness terms), minimum-zone reference line.",
    "union-jack": "Union Jack layout and closure errors: Moody, 'How to calibrate surface plates in the plant', "
                  "The Tool Engineer, Oct. 1955.",
    "ls-union-jack": "Least-squares network reduction: 'Moody revisited: least-squares solutions of the Union Jack "
                     "surface plate measurement method', Metrology 6(2) 27 (2026), doi:10.3390/metrology6020027.",
    "ls-network": "Least-squares network reduction of the rises of every line (weighted least squares, one height "
                  "per station), as formulated for the Union Jack in 'Moody revisited', Metrology 6(2) 27 (2026), "
                  "doi:10.3390/metrology6020027, applied here to the layout walked.",
    "uncertainty": "Uncertainty by Monte Carlo propagation: JCGM 101:2008 (Supplement 1 to the GUM).",
    "rules": "Decision rules: ISO 14253-1:2017 (conformity with specifications, guard bands).",
    "grades": "Granite plate grades: DIN 876-1:1984; ISO 8512-2:1990; ASME B89.3.7-2013 (formerly Fed. Spec. "
              "GGG-P-463c).",
    "local": "Local flatness: minimum zone inside a window moved over the surface; ISO 8512-2:1990 states a local "
             "tolerance over any 250 x 250 mm area.",
    "bearing": "Air-bearing fitness: the carriage follows the surface averaged over each pad's footprint (pad "
               "averaging as a moving mean, J. Japan Soc. Precision Eng. 67(6):903-909, 2001); carriage "
               "straightness about the minimum-zone line (ISO 12780-1:2011); the limit as a fraction of the air "
               "gap is common practice, not a published standard.",
    "least-removal": "Lapping plan, least removal: the removal map that brings the surface within the target "
                     "zone with the least material, solved exactly as a linear program (material only removed, "
                     "the zone's plane free).",
    "preston": "Removal under the lap: the Preston equation, removal rate proportional to pressure and speed "
               "(F. W. Preston, 'The theory and design of plate glass polishing machines', J. Soc. Glass "
               "Technology 11 (1927) 214-256); the rate is the user's calibration or assumed as stated.",
    "dwell": "Dwell map: non-negative deconvolution of the removal map by the lap's footprint (dwell-time "
             "computation reviewed in Light: Advanced Manufacturing 5 (2024), doi:10.37188/lam.2024.021; "
             "regularised bounded least squares as in Applied Optics 54 (2015) 2747).",
}


def _sources_used(evaluation, grades, bearing, lapping) -> tuple:
    """The references of the methods this report uses, and no others."""
    loaded = evaluation.loaded
    survey, reduction = loaded.survey, loaded.reduction
    out = [_SRC["planes"]]
    if survey is not None or loaded.heightmap.grid is not None:
        out.append(_SRC["lines"])
    if survey is not None:
        method = getattr(reduction, "method", None) or "least-squares"
        union_jack = survey.pattern == "union-jack"
        if union_jack or method == "moody":
            out.append(_SRC["union-jack"])
        if method != "moody":
            out.append(_SRC["ls-union-jack"] if union_jack else _SRC["ls-network"])
    if evaluation.uncertainty is not None:
        out.append(_SRC["uncertainty"])
    if grades:
        out += [_SRC["rules"], _SRC["grades"]]
    if evaluation.local is not None:
        out.append(_SRC["local"])
    if bearing is not None:
        out.append(_SRC["bearing"])
    if lapping is not None:
        out += [_SRC["least-removal"], _SRC["preston"], _SRC["dwell"]]
    return tuple(out)


#: A surface this long (mm, longer side) is a plate or guideway lifted with gear, not by hand
#: (common practice, no single source).
_LARGE_MM = 300.0


def _cautions(hm, survey, bearing) -> tuple:
    """The cautions that apply: dust worded for the material, lifting for a large surface, air with a bearing."""
    from ..safety import cautions_for

    material = survey.surface.material if survey is not None else ""
    x0, x1, y0, y1 = hm.extent_mm
    longest = max(hm.length_mm or 0.0, hm.width_mm or 0.0, x1 - x0, y1 - y0)
    return cautions_for(material, large=longest >= _LARGE_MM, air=bearing is not None)


def _local_missing(evaluation, window: str | None) -> str:
    """Why a report has no local flatness, and the option that gives it (empty when it has one)."""
    if evaluation.local is not None:
        return ""
    from ..evaluation import DEFAULT_WINDOW

    asked = "auto" if window is None else str(window).strip().lower()
    if asked == "none":
        return "Local flatness: not evaluated (--window none)."
    x0, x1, y0, y1 = evaluation.heightmap.extent_mm
    lx, ly = x1 - x0, y1 - y0
    side = max(10.0, 10.0 * math.floor(min(lx, ly) / 10.0))
    fix = f"give a window that fits, e.g. --window {side:g}x{side:g} or --window d{side:g} (mm)"
    if asked == "auto":
        return (f"Local flatness: not evaluated. The automatic window, {DEFAULT_WINDOW.text} (the local area of "
                f"ISO 8512-2), does not fit inside the surveyed area ({lx:g} x {ly:g} mm): {fix}.")
    return f"Local flatness: not evaluated. The window {window} does not fit inside the surveyed area ({lx:g} x {ly:g} mm): {fix}."
