"""The PDF report: a calibration-style record of one surface as measured.

Two steps, so that the numbers can be checked without drawing anything:

1. :func:`analyse` takes the shared evaluation of a surface
   (:func:`flatcheck.evaluation.evaluate_surface`, the one ``flatcheck reduce``
   states) and adds what only the report needs (grades, air bearing, lapping
   plan); it returns a frozen :class:`ReportContent` with every number the
   report states.
2. :func:`write_report` draws the pages from that content (through
   :mod:`flatcheck.plot`, the only module that imports matplotlib) and writes
   the PDF atomically, optionally with each picture as a PNG file.

Neither step prints or reads files; :func:`write_report` writes only the files
it is asked to write.
"""

from __future__ import annotations

import datetime as _dt
import math
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import InputValueError, OutputError
from ..form import HeightMap

__all__ = [
    "LineResult",
    "GradeRow",
    "ReportContent",
    "ReportFiles",
    "analyse",
    "uncertainty_text",
    "write_report",
    "page_titles",
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
    def heightmap(self) -> HeightMap:
        """The evaluated surface (positions mm, heights µm)."""
        return self.evaluation.heightmap

    @property
    def survey(self):
        """The survey the map was reduced from, or None for a height-map input."""
        return self.evaluation.loaded.survey

    @property
    def flatness(self):
        """The :class:`flatcheck.flatness.FlatnessReport` (every reference plane), µm."""
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
        """The :class:`flatcheck.local_flatness.LocalFlatness` of the evaluation's window, or None."""
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


@dataclass(frozen=True)
class ReportFiles:
    """What :func:`write_report` wrote: the PDF, its page count and the PNG pictures."""

    pdf: Path
    pages: int
    pngs: tuple = ()


# =============================================================================== analysis
def _survey_lines(evaluation) -> list:
    """Survey lines with their straightness zone (flatcheck.straightness) and the evaluation's closures."""
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
    mz = unc.minimum_zone
    corrected = getattr(mz, "corrected_interval_um", None)
    lo, hi = corrected if corrected is not None else mz.interval_um
    basis = unc.basis
    basis = _in_units(basis, units)  # the basis may quote a scatter in µm or a reading in um/m
    if corrected is None:
        return (f"Monte Carlo propagation (JCGM 101:2008), {mz.trials} trials, seed {mz.seed}; {basis}. "
                f"U is twice the standard deviation of the simulated flatness (k = 2 equivalent); "
                f"95 % interval of the minimum zone {_h(lo, units)} to {_h(hi, units)} "
                f"(simulated mean {_h(mz.mean_um, units)}).")
    return (f"Monte Carlo propagation of the whole uncertainty budget (JCGM 101:2008), {mz.trials} trials, seed "
            f"{mz.seed}; {basis}. U is at least twice the standard deviation of the simulated flatness and reaches "
            f"both ends of the 95 % interval of the minimum zone, {_h(lo, units)} to {_h(hi, units)}, which is "
            f"corrected for the noise bias (simulated mean {_h(mz.mean_um, units)}; see the uncertainty budget page).")


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


# =============================================================================== drawing
# Page geometry (figure fractions of A4 portrait): the frame's header ends above _TOP, its footer below _BOTTOM.
_TOP = 0.915
_BOTTOM = 0.065
_PLAN_RECT_LEFT = 0.11  # room for a two-line y label of a stretched plan view
_TEXT_FS = 8.0  # tables and notes on drawing pages


def page_titles(content: ReportContent) -> list:
    """Titles of the pages :func:`write_report` makes for ``content``, in order."""
    return [title for title, _ in _page_plan(content)]


def _page_plan(content):
    """The pages as ``(title, draw)``; ``draw(fig, content, units)`` returns the page's pictures.

    A picture is ``(name, [axes...])``: what ``--png`` writes on its own. Everything that does not fit
    on a page continues on the next one (line profiles, the residual histogram, the pass table).
    """
    plan = [("Summary", _page_summary), ("Surface map", _page_map)]
    if content.local is not None:
        plan.append(("Local flatness", _page_local))
    per_page = 8
    for k in range(0, len(content.lines), per_page):
        chunk = content.lines[k : k + per_page]
        plan.append((f"Line profiles ({k + 1}-{k + len(chunk)} of {len(content.lines)})",
                     lambda fig, c, u, chunk=chunk: _page_profiles(fig, c, u, chunk)))
    if content.survey is not None:
        together = _histogram_fits_on_layout_page(content)
        plan.append(("Survey layout and closure",
                     lambda fig, c, u, together=together: _page_layout(fig, c, u, histogram=together)))
        if not together and content.residual_um is not None and np.size(content.residual_um):
            plan.append(("Survey layout and closure (continued)", _page_residuals))
    if content.setup is not None:
        plan.append(("Set-up sheet", _page_setup))
    if getattr(content.uncertainty, "budget", None) is not None:
        plan.append(("Uncertainty budget", _page_uncertainty))
    if content.grades:
        plan.append(("Grades and decision rule", _page_grades))
    if content.bearing is not None:
        plan.append(("Air bearing: fitness and carriage motion", _page_bearing))
    if content.lapping is not None and content.lapping.passes:  # target met: one sentence on the summary
        together = _chart_fits_on_lapping_page(content)
        plan.append(("Lapping plan", lambda fig, c, u, together=together: _page_lapping(fig, c, u, chart=together)))
        if not together:
            plan.append(("Lapping plan: bench chart", _page_chart))
        chunks = _pass_pages(content)
        for k, (start, stop, last) in enumerate(chunks):
            title = "Lapping plan: passes" + (f" ({k + 1} of {len(chunks)})" if len(chunks) > 1 else "")
            plan.append((title, lambda fig, c, u, start=start, stop=stop, last=last:
                         _page_passes(fig, c, u, start, stop, last)))
    plan.append(("Methods, sources and cautions", _page_sources))
    from ._certificate_pages import certificate_plan  # with a certificate: its pages first, raw readings last

    return certificate_plan(content, plan, statement=SCOPE_STATEMENT)


def _frame(fig, content, title, page, pages):
    """Header and footer drawn on every page."""
    from . import _plots as plot

    hm = content.heightmap
    ident = dict(content.identity).get("identity", "")
    head = hm.label if not ident or ident == "not stated" else f"{hm.label} · {ident}"
    plot.page_frame(
        fig,
        left_head="FLATNESS REPORT" if content.certificate is None else
        f"CALIBRATION CERTIFICATE {content.certificate.number}",
        right_head=head,
        title=title,
        footer=(
            f"Heights are referred to the {HEIGHT_REFERENCE}. Results apply to the surface as measured; see the "
            "statement on page 1.",
            f"measurement date: {content.date} · report issued {content.issued} · flatcheck",
        ),
        page_text=f"page {page} of {pages}",
    )


def _h(v_um, units):
    from ..units import format_height

    return format_height(v_um, units)


def _closure(v_um, units) -> str:
    """A closure error at the precision a flatness instrument gives (issue 15, item 8): 0.01 µm (an
    autocollimator's 0.1 arcsec over a 100 mm base is 0.05 µm), or whole µin; never nanometres."""
    from ..units import height_unit_label, um_to

    x = um_to(v_um, units)
    text = f"{x:.0f}" if units == "in" else f"{x:.2f}"
    return f"{text.lstrip('-') if float(text) == 0 else text} {height_unit_label(units)}"


def _tolerance(v_um, units) -> str:
    """A limit at the precision its source gives it: one decimal for 0.1 µm steps, else 0.01 µm; whole µin."""
    from ..units import height_unit_label, um_to

    x = um_to(v_um, units)
    if units == "in":
        text = f"{x:.0f}" if abs(x - round(x)) < 0.05 else f"{x:.1f}"
    else:
        text = f"{x:.1f}" if abs(x * 10 - round(x * 10)) < 1e-6 else f"{x:.2f}"
    return f"{text} {height_unit_label(units)}"


def _pos(v_mm, units):
    from ..units import format_length

    return format_length(v_mm, units)


def _num(v_mm, units) -> str:
    """A position without its unit (the column heading names it): whole mm, or inches to 0.01."""
    from ..units import format_length

    return format_length(v_mm, units, unit=False)


def _window_text(win, units) -> str:
    """The local-flatness window in the report's length unit."""
    if units != "in":
        return win.text
    if win.shape == "circle":
        return f"d{_inches(win.length_mm)} in"
    return f"{_inches(win.length_mm)} x {_inches(win.width_mm)} in"


_REFERENCE_NAMES = {
    "MZPL": "minimum zone (MZ)",
    "LSPL": "least squares (LS)",
    "three-corner": "three corners",
    "diagonal": "diagonals",
}


def _page_summary(fig, c, units):
    from . import _plots as plot
    from ..units import format_with_uncertainty

    ax = fig.add_axes([0.06, 0.06, 0.88, 0.86])
    identity, method = _identity_rows(c.heightmap, c.survey, c.evaluation.loaded.reduction, units)
    y = 1.0
    y = plot.flow_table(ax, y, identity, col_x=(0.0, 0.3), title="What was measured", wrap_chars=(None, 80))
    y = plot.flow_table(ax, y, method, col_x=(0.0, 0.3), title="How it was measured", wrap_chars=(None, 80))
    fr = c.flatness
    u = {"MZPL": c.u_mz_um, "LSPL": c.u_ls_um}
    rows = []
    for p in (fr.mzpl, fr.lspl, fr.three_corner, fr.diagonal):
        if p is None:
            continue
        unc = u.get(p.reference)
        # with its U: U to two significant digits and the flatness to the same decimal place (JCGM 100:2008, 7.2.6)
        f_txt, u_txt = (_h(p.fltt_um, units), "" if p.reference not in u else "not evaluated") if unc is None else \
            format_with_uncertainty(p.fltt_um, unc, units)
        rows.append((_REFERENCE_NAMES.get(p.reference, p.reference), f_txt, _h(p.fltp_um, units),
                     _h(p.fltv_um, units), _h(p.fltq_um, units), u_txt))
    y = plot.flow_table(ax, y, rows, col_x=(0.0, 0.25, 0.41, 0.55, 0.69, 0.83),
                        col_labels=("reference plane", "flatness FLTt", "peak FLTp", "valley FLTv", "RMS FLTq", "U"),
                        title="Flatness about each reference plane", bold_cols=(1,), fontsize=8)
    text = [("The flatness of the surface is the minimum zone (ISO 1101 zone between two parallel planes); "
             "U is its expanded uncertainty. Uncertainty: " + uncertainty_text(c, units), "s")]
    if c.local is not None:
        lf = c.local
        text.append((f"Local flatness (minimum zone inside a {_window_text(c.window, units)} window moved over the "
                     f"surface): largest {_h(lf.worst_um, units)}, window centred at x = {_pos(lf.worst_x_mm, units)}, "
                     f"y = {_pos(lf.worst_y_mm, units)}.", "s"))
    elif c.local_missing and not any("window" in n for n in c.notes):  # said once: the notes may say it already
        text.append((_in_units(c.local_missing, units), "s"))
    y = plot.text_block(ax, text, y0=y, wrap_chars=110)
    if c.grades:
        rows = [(g.grade, _tolerance(g.tolerance_um, units), g.verdict) for g in c.grades]
        y = plot.flow_table(ax, y, rows, col_x=(0.0, 0.3, 0.55), col_labels=("grade", "tolerance", "verdict"),
                            title=f"Grades: {c.grades[0].standard}", bold_cols=(2,))
        y = plot.text_block(ax, [("Decision rule and details: see the grades page.", "s")], y0=y, wrap_chars=110)
    if c.bearing is not None:
        b = c.bearing
        y = plot.flow_table(ax, y, [("verdict", b.verdict), ("largest local flatness under a pad",
                                                            f"{_h(b.local_flatness_max_um, units)} (limit {_h(b.limit_um, units)})")],
                            col_x=(0.0, 0.45), title="Air bearing", bold_cols=(1,))
    if c.lapping is not None:
        lines = [("Lapping", "h")] + _support_first(c, units, style="") + [(lapping_summary(c, units), "")]
        y = plot.text_block(ax, lines, y0=y, fontsize=8.5, wrap_chars=110)
    lines = [("Note: " + _in_units(n, units), "s") for n in c.notes]
    lines += [("Statement", "h"), SCOPE_STATEMENT]
    plot.text_block(ax, lines, y0=y, fontsize=8.5, wrap_chars=110)
    return []


def _page_map(fig, c, units):
    from . import _plots as plot

    hm = c.heightmap
    ratio = plot.plan_ratio(plot.plan_box(hm))
    note = [] if c.local is not None or not c.local_missing else [
        ("Local flatness", "h"), (_in_units(c.local_missing, units), "")]
    note_in = plot.text_block_height_in(note, fontsize=8.5, wrap_chars=105) if note else 0.0
    fh = fig.get_figheight()
    (ax,), bottom = plot.plan_panels(fig, 1, 1, ratio, (_PLAN_RECT_LEFT, _BOTTOM, 0.94, _TOP), max_height_in=4.6)
    # one reference for every height shown, as in the terminal and in --map-out: the least-squares plane
    plot.contour_map(ax, hm, reference=c.ls, reference_name="least-squares plane", units=units,
                     title=f"heights about the {HEIGHT_REFERENCE} (open circles: stations)")
    low = _BOTTOM + (note_in + 0.15) / fh if note else _BOTTOM
    top3 = bottom - 0.035  # the 3-D view's title sits below the map's x label
    ax3 = fig.add_axes([0.06, low, 0.88, top3 - low], projection="3d")
    plot.surface_view(ax3, hm, reference=c.ls, units=units, reference_name="LS plane",
                      title="the same surface in three dimensions (heights exaggerated)")
    if note:
        tax = fig.add_axes([0.06, _BOTTOM, 0.88, note_in / fh])
        plot.text_block(tax, note, fontsize=8.5, wrap_chars=105)
    return [("surface-map", [ax]), ("surface-3d", [ax3])]


def _local_grid(lf):
    """Window centres of a local-flatness scan as a (ny, nx) grid (NaN where a window was left out)."""
    xs = np.unique(lf.centre_x_mm)
    ys = np.unique(lf.centre_y_mm)
    grid = np.full((ys.size, xs.size), np.nan)
    grid[np.searchsorted(ys, lf.centre_y_mm), np.searchsorted(xs, lf.centre_x_mm)] = lf.flatness_um
    return xs, ys, grid


def local_cover(lf, win, hm, n_long: int = 90):
    """The worst local flatness of any window that holds each point of the surveyed area.

    The scan gives one value per window centre, and centres keep half a window from the edges; this spreads
    each value over its whole window, so that the map covers the surveyed area and each point shows the
    largest local flatness of a window around it.

    Parameters
    ----------
    lf : LocalFlatness
        Window centres (mm) and their local flatness (µm).
    win : Window
        The window's shape and size (mm).
    hm : HeightMap
        The surface (its point extent is the surveyed area).
    n_long : int
        Grid points along the longer side.

    Returns
    -------
    xs, ys : ndarray, shapes (nx,), (ny,)
        Grid positions (mm).
    grid : ndarray, shape (ny, nx)
        µm; NaN where no window reaches.
    """
    x0, x1, y0, y1 = hm.extent_mm
    lx, ly = max(x1 - x0, 1e-9), max(y1 - y0, 1e-9)
    nx = n_long if lx >= ly else max(8, int(round(n_long * lx / ly)))
    ny = n_long if ly > lx else max(8, int(round(n_long * ly / lx)))
    xs, ys = np.linspace(x0, x1, nx), np.linspace(y0, y1, ny)
    cx, cy = np.asarray(lf.centre_x_mm, float), np.asarray(lf.centre_y_mm, float)
    val = np.asarray(lf.flatness_um, float)
    grid = np.full((ny, nx), -np.inf)
    tol = 1e-9 * max(lx, ly)
    for start in range(0, cx.size, 256):  # blocks of centres: memory stays (ny, nx, 256)
        bx, by, bv = cx[start:start + 256], cy[start:start + 256], val[start:start + 256]
        dx = xs[None, :, None] - bx[None, None, :]
        dy = ys[:, None, None] - by[None, None, :]
        if win.shape == "circle":
            inside = dx * dx + dy * dy <= (win.length_mm / 2.0 + tol) ** 2
        else:
            inside = (np.abs(dx) <= win.length_mm / 2.0 + tol) & (np.abs(dy) <= win.width_mm / 2.0 + tol)
        grid = np.maximum(grid, np.where(inside, bv[None, None, :], -np.inf).max(axis=2))
    grid[~np.isfinite(grid)] = np.nan
    return xs, ys, grid


def _page_local(fig, c, units):
    from . import _plots as plot

    lf, win = c.local, c.window
    hm = c.heightmap
    xs, ys, grid = _local_grid(lf)
    box = plot.plan_box(hm)
    fh = fig.get_figheight()
    if xs.size >= 2 and ys.size >= 2:
        title = f"worst local flatness of a {_window_text(win, units)} window holding each point"
        (ax,), bottom = plot.plan_panels(fig, 1, 1, plot.plan_ratio(box), (_PLAN_RECT_LEFT, _BOTTOM, 0.94, _TOP),
                                         max_height_in=4.6)
        cxs, cys, cover = local_cover(lf, win, hm)
        plot.local_flatness_map(ax, cxs, cys, cover, window_mm=win.length_mm, units=units, title=title, box_mm=box)
    else:  # one row or column of positions: a profile along it
        title = f"local flatness of a {_window_text(win, units)} window, by the position of its centre"
        ax = fig.add_axes([_PLAN_RECT_LEFT, _TOP - 3.3 / fh, 0.80, 2.8 / fh])
        bottom = _TOP - 3.8 / fh
        plot.local_flatness_profile(ax, xs if xs.size > 1 else ys, grid.ravel(), along="x" if xs.size > 1 else "y",
                                    units=units, title=title)
    plot.mark_window(ax, lf.worst_x_mm, lf.worst_y_mm, shape=win.shape, length_mm=win.length_mm,
                     width_mm=win.width_mm, label=f"worst {_h(lf.worst_um, units)}", units=units,
                     stations_xy_mm=np.column_stack([hm.x_mm, hm.y_mm]),
                     profile=not (xs.size >= 2 and ys.size >= 2), along="x" if xs.size > 1 else "y")
    tax = fig.add_axes([0.06, _BOTTOM, 0.88, bottom - 0.02 - _BOTTOM])
    rows = [
        ("window", f"{_window_text(win, units)} ({'circle' if win.shape == 'circle' else 'rectangle'})"),
        ("largest local flatness", _h(lf.worst_um, units)),
        ("at the window centred at", f"x = {_pos(lf.worst_x_mm, units)}, y = {_pos(lf.worst_y_mm, units)}"),
        ("window positions", f"{np.size(lf.flatness_um)}, centres {_pos(_step(xs, ys), units)} apart"),
        ("smallest local flatness", _h(float(np.min(lf.flatness_um)), units)),
        ("stations per window", f"{int(np.min(lf.stations_in_window))} to {int(np.max(lf.stations_in_window))}"),
        ("heights between stations", lf.interpolation),
    ]
    y = plot.flow_table(tax, 1.0, rows, col_x=(0.0, 0.35), title="Local flatness", bold_cols=(1,),
                        wrap_chars=(None, 75), fontsize=_TEXT_FS)
    text = ["The window is moved over the surveyed area (always wholly inside it) and the minimum-zone flatness "
            "of the surface inside it found at each position; the map shows at each point the largest of these "
            "for the windows that hold the point, so it covers the whole surveyed area (the outline is the "
            "surface). The outlined window is the worst one. ISO 8512-2 states a local tolerance over any "
            "250 x 250 mm area; its values are not built in here."]
    text += [_in_units(n, units) for n in lf.notes]
    plot.text_block(tax, [(_in_units(t, units), "s") for t in text], y0=y, fontsize=_TEXT_FS, wrap_chars=110)
    return [("local-flatness", [ax])]


def _step(xs, ys):
    d = [float(np.min(np.diff(v))) for v in (xs, ys) if v.size > 1]
    return min(d) if d else 0.0


def _page_profiles(fig, c, units, chunk):
    from . import _plots as plot

    profs = [
        plot.LineProfile(ln.name, ln.s_mm, ln.height_um, ln.straightness_um, ln.ref_offset_um, ln.ref_slope_um_per_mm)
        for ln in chunk
    ]
    # top at 0.86: room above for the caption of the picture written alone (--png), within the page's body
    axes = plot.line_profiles(fig, profs, units=units, rect=(0.1, 0.08, 0.94, 0.86))
    first = c.lines.index(chunk[0]) + 1
    return [(f"line-profiles-{first}-{first + len(chunk) - 1}", axes)]


def _layout_rows(c, units):
    rows = []
    for ln in c.lines:
        closure = "" if ln.closure_um is None else _closure(ln.closure_um, units) + (
            f" at {ln.closure_station}" if ln.closure_station else "")
        rows.append((ln.name, _pos(ln.s_mm[-1], units), f"{len(ln.s_mm) - 1}",
                     "" if ln.rms_residual_um is None else _h(ln.rms_residual_um, units),
                     "" if ln.run_spread_um is None else _h(ln.run_spread_um, units),
                     closure, _h(ln.straightness_um, units)))
    return rows


def _layout_notes(c):
    notes = ["rms residual: readings minus the adjusted surface, per line. run spread: largest difference between "
             "the end-to-end rises of the runs of a line walked more than once. straightness: minimum zone of the "
             "line's station heights (ISO 12780-1)."]
    meanings = sorted({ln.closure_meaning for ln in c.lines if ln.closure_meaning})
    notes += [f"closure: {m}." for m in meanings]
    return [(t, "s") for t in notes]


_LAYOUT_COLS = dict(col_x=(0.0, 0.13, 0.25, 0.33, 0.49, 0.64, 0.84), fontsize=_TEXT_FS,
                    col_labels=("line", "length", "steps", "rms residual", "run spread", "closure", "straightness"),
                    title="Lines")
_HISTOGRAM_IN = 2.1  # height of the residual histogram with its title and labels (inches)


def _layout_plan_bottom(c, fig) -> float:
    """Figure fraction where the survey plan (with its x label) ends; draws the plan's axes on ``fig``."""
    from . import _plots as plot

    sv = c.survey
    box = (0.0, sv.surface.length_mm, 0.0, sv.surface.width_mm) if sv.surface.length_mm and sv.surface.width_mm \
        else tuple(float(v) for v in c.heightmap.extent_mm)
    (ax,), bottom = plot.plan_panels(fig, 1, 1, plot.plan_ratio(box), (_PLAN_RECT_LEFT, _BOTTOM, 0.94, _TOP),
                                     max_height_in=4.2, right_in=0.2)
    return ax, bottom


def _histogram_fits_on_layout_page(c) -> bool:
    """Whether the residual histogram fits below the plan, the table of lines and its notes."""
    from . import _plots as plot

    if c.residual_um is None or not np.size(c.residual_um):
        return True
    scratch = plot.new_figure()
    _, bottom = _layout_plan_bottom(c, scratch)
    used = plot.flow_table_height_in(_layout_rows(c, "um"), col_labels=_LAYOUT_COLS["col_labels"],
                                     fontsize=_TEXT_FS, title="Lines")
    used += plot.text_block_height_in(_layout_notes(c), fontsize=_TEXT_FS, wrap_chars=110)
    free = (bottom - 0.02 - _BOTTOM) * scratch.get_figheight() - used
    return free >= _HISTOGRAM_IN


def _page_layout(fig, c, units, histogram=None):
    """Plan of the lines walked, the table of lines, and the residual histogram when it fits (``None``: if it fits)."""
    from . import _plots as plot

    if histogram is None:
        histogram = _histogram_fits_on_layout_page(c)
    sv = c.survey
    index = {s.name: i for i, s in enumerate(sv.stations)}
    lines = [(ln.name, np.array([index[s] for s in ln.stations])) for ln in sv.lines]
    notes = {ln.name: f"closure {_closure(ln.closure_um, units)}" for ln in c.lines if ln.closure_um is not None}
    ax, bottom = _layout_plan_bottom(c, fig)
    plot.survey_layout(ax, np.column_stack([sv.x_mm, sv.y_mm]), lines, length_mm=sv.surface.length_mm,
                       width_mm=sv.surface.width_mm, line_notes=notes, units=units,
                       station_names=[st.name for st in sv.stations],
                       title="lines walked (arrow: towards the line's last station)")
    fh = fig.get_figheight()
    tax = fig.add_axes([0.06, _BOTTOM, 0.88, bottom - 0.02 - _BOTTOM])
    y = plot.flow_table(tax, 1.0, _layout_rows(c, units), **_LAYOUT_COLS)
    y = plot.text_block(tax, _layout_notes(c), y0=y, fontsize=_TEXT_FS, wrap_chars=110)
    pictures = [("survey-layout", [ax])]
    if histogram and c.residual_um is not None and np.size(c.residual_um):
        top = _BOTTOM + (bottom - 0.02 - _BOTTOM) * y - 0.4 / fh  # below the notes, with room for the title
        height = (_HISTOGRAM_IN - 0.8) / fh
        hax = fig.add_axes([0.14, max(top - height, _BOTTOM + 0.45 / fh), 0.5, height])
        plot.residual_histogram(hax, c.residual_um, units=units)
        pictures.append(("reduction-residuals", [hax]))
    return pictures


def _page_residuals(fig, c, units):
    """The residual histogram when it did not fit under the table of lines."""
    from . import _plots as plot

    fh = fig.get_figheight()
    hax = fig.add_axes([0.14, _TOP - (_HISTOGRAM_IN + 0.6) / fh, 0.6, (_HISTOGRAM_IN + 0.3) / fh])
    plot.residual_histogram(hax, c.residual_um, units=units,
                            title="reduction residuals (readings minus the adjusted surface)")
    return [("reduction-residuals", [hax])]


def _support_first(c, units, style: str = "b") -> list:
    """The sag check's message, stated before any lapping advice (empty when the supports are not in question)."""
    s = c.support_check
    if s is None or not s.flagged:
        return []
    return [("Supports first: " + _in_units(s.message, units) + ".", style)]


#: Columns of the set-up table: with the autocollimator's place and distances, and without (an instrument that walks).
_SETUP_COLS = dict(col_x=(0.0, 0.04, 0.12, 0.255, 0.35, 0.47, 0.77, 0.95), fontsize=_TEXT_FS,
                   wrap_chars=(None, None, None, 12, None, 40, None, None))
_SETUP_COLS_WALKING = dict(col_x=(0.0, 0.05, 0.17, 0.32, 0.62, 0.78), fontsize=_TEXT_FS)


def _setup_rows(c, units):
    """One row per line of the set-up sheet, in the order to read them."""
    rows = []
    for ln in c.setup.lines:
        runs = " + ".join("back" if r == "reverse" else r for r in ln.runs)
        at = dist = "-"
        if ln.instrument_mm is not None:
            at = (f"{_num(ln.instrument_mm[0], units)}, {_num(ln.instrument_mm[1], units)} "
                  f"({'on the surface' if ln.on_surface else 'on a stand beside it'})")
            dist = f"{_num(ln.distance_mm[0], units)} to {_num(ln.distance_mm[1], units)}"
        row = (str(ln.order), ln.line, runs, f"{ln.start} to {ln.end}", _num(ln.length_mm, units), at, dist,
               f"{ln.minutes:.0f}")
        rows.append(row if c.setup.instrument == "autocollimator" else row[:5] + row[7:])
    return rows


def _setup_text(c, units) -> list:
    """The set-up sheet's notes: the instrument, the time, the supports, the soak and the lifting caution."""
    from ..safety import lifting_caution

    s = c.setup
    kind = s.instrument
    lines = []
    if kind == "autocollimator":
        first = s.lines[0]
        behind = first.distance_mm[0] - first.foot_spacing_mm / 2.0  # the mirror's centre is half a base on
        lines.append(f"The autocollimator stands on each line's extension, {_pos(behind, units)} behind its first "
                     "station (squares on the plan), aimed along the line; its working range must cover the distances "
                     "to the mirror.")
    elif kind == "level":
        lines.append("The level walks each line itself, its feet on successive stations.")
    elif kind == "differential-level":
        lines.append("The moving level walks each line; the reference level stays on one spot, off the lines, for the "
                     "whole survey.")
    else:
        lines.append("The indicator's stand rides the reference surface; touch each station in turn.")
    hours, minutes = divmod(int(round(s.minutes)), 60)
    lines.append(f"Time: about {hours} h {minutes:02d} min for {s.readings} readings ({s.pace.seconds_per_reading:g} s "
                 f"a reading, {s.pace.minutes_per_line:g} min to set up a line, {s.pace.minutes_per_extra_run:g} min "
                 "for each further run: illustrative figures, common practice, no single source); soak not included.")
    pts = "; ".join(f"({_num(x, units)}, {_num(y, units)})" for x, y in s.three_point_mm)
    lines.append(f"{s.notes[0]} Three points, x, y (triangles 1-3 on the plan): {pts}.")
    b = s.beam
    if b is not None:
        lines.append(
            f"Long beam on two supports: least self-weight bow with them {_pos(b.least_bow_from_end_mm, units)} from "
            f"each end; Airy points {_pos(b.airy_from_end_mm, units)} from each end ({_pos(b.airy_spacing_mm, units)} "
            f"apart, end faces vertical); Bessel points {_pos(b.bessel_from_end_mm, units)} from each end "
            f"({_pos(b.bessel_spacing_mm, units)} apart, least change of length). Sources: " + "; ".join(b.sources) + ".")
    lines += [_in_units(n, units) for n in s.notes[1:] if not n.startswith("Long beam")]
    if s.mass_kg is not None:
        lines.append(f"Mass of the surface as granite (2600-2800 kg/m³): {s.mass_kg[0]:.0f}-{s.mass_kg[1]:.0f} kg.")
    material = c.survey.surface.material if c.survey is not None else ""
    return [(t, "s") for t in lines] + [("Caution", "h"), (lifting_caution(material), "b")]


def _page_setup(fig, c, units):
    """The set-up sheet of the survey: supports and instrument places on the outline, the lines in order, the notes."""
    from . import _plots as plot

    s = c.setup
    sv = c.survey
    L, W = float(sv.surface.length_mm), float(sv.surface.width_mm)
    fh = fig.get_figheight()
    intro = [("How this survey is set up, line by line, for the next survey of this surface as for this one: where "
              "the surface stands, where the instrument stands, in what order the lines are read and how long it "
              "takes. x from the west edge, y from the south edge.", "s")]
    intro_in = plot.text_block_height_in(intro, fontsize=_TEXT_FS, wrap_chars=110)
    tax = fig.add_axes([0.06, _TOP - intro_in / fh, 0.88, intro_in / fh])
    plot.text_block(tax, intro, fontsize=_TEXT_FS, wrap_chars=110)
    instruments = [(ln.line, ln.instrument_mm[0], ln.instrument_mm[1]) for ln in s.lines
                   if ln.instrument_mm is not None]
    xs = [0.0, L] + [x for _, x, _ in instruments]
    ys = [0.0, W] + [y for _, _, y in instruments]
    box = (min(xs), max(xs), min(ys), max(ys))
    (ax,), bottom = plot.plan_panels(fig, 1, 1, plot.plan_ratio(box),
                                     (_PLAN_RECT_LEFT, _BOTTOM, 0.94, _TOP - intro_in / fh - 0.005),
                                     max_height_in=3.4, right_in=0.3, top_in=0.35)
    plot.support_plan(ax, L, W, three_point_mm=s.three_point_mm, beam=s.beam,
                      stations_xy_mm=np.column_stack([sv.x_mm, sv.y_mm]), instruments=instruments, units=units,
                      title="supports (triangles), " + ("instrument places (squares) and " if instruments else "")
                      + "stations")
    pu = "in" if units == "in" else "mm"
    yax = fig.add_axes([0.06, _BOTTOM, 0.88, bottom - 0.02 - _BOTTOM])
    if instruments:
        cols = dict(_SETUP_COLS, col_labels=("#", "line", "runs", "walk", f"length ({pu})",
                                             f"instrument at x, y ({pu})", f"to the mirror ({pu})", "min"))
    else:
        cols = dict(_SETUP_COLS_WALKING, col_labels=("#", "line", "runs", "walk", f"length ({pu})", "min"))
    y = plot.flow_table(yax, 1.0, _setup_rows(c, units), title="Lines in the order to read them", **cols)
    plot.text_block(yax, _setup_text(c, units), y0=y, fontsize=_TEXT_FS, wrap_chars=110)
    return [("setup-supports", [ax])]


def _page_uncertainty(fig, c, units):
    """The uncertainty budget: one row per source (value, distribution, basis, contribution), then u, U, and a
    bar chart of the contributions."""
    from . import _plots as plot
    from ..units import format_with_uncertainty

    b = c.uncertainty.budget
    mz = b.minimum_zone
    tax = fig.add_axes([0.06, 0.27, 0.88, 0.65])
    rows = []
    for e in b.entries:
        if not e.applies:
            value = "-"
        elif e.unit == "relative":
            value = f"{e.value * 100:.3g} %"
        elif e.unit in ("µm", "um"):
            value = _h(e.value, units)
        else:
            value = f"{e.value:.3g} {e.unit}"
        contrib = format_with_uncertainty(e.standard_uncertainty_um, b.combined_um or 1.0, units)[0]
        rows.append((e.name + (" (default)" if e.default and e.applies else ""), value,
                     e.distribution.split(";")[0], _in_units(e.basis, units), contrib))
    y = plot.flow_table(tax, 1.0, rows, col_x=(0.0, 0.2, 0.33, 0.5, 0.9),
                        col_labels=("source", "input", "distribution", "basis", "u"), title="Sources and contributions",
                        wrap_chars=(26, 18, 26, 64, None), fontsize=6.3)
    v_txt, U_txt = format_with_uncertainty(mz.estimate_um, b.expanded_um, units)
    lo, hi = b.interval_um
    lo_txt, _ = format_with_uncertainty(lo, b.expanded_um, units)
    hi_txt, _ = format_with_uncertainty(hi, b.expanded_um, units)
    _, uc_txt = format_with_uncertainty(mz.estimate_um, b.combined_um, units)
    summary = [("minimum-zone flatness F", v_txt), ("combined standard uncertainty u", uc_txt),
               ("expanded uncertainty U", f"{U_txt} (coverage factor {b.coverage_factor:.2f})"),
               ("95 % coverage interval", f"{lo_txt} to {hi_txt}, corrected for the noise bias "
                f"({format_with_uncertainty(mz.bias_um, b.combined_um or 1.0, units)[0]} estimated)"),
               ("Monte Carlo", f"{mz.trials} trials together, {b.contribution_trials} per source alone, seed {mz.seed}")]
    y = plot.flow_table(tax, y, summary, col_x=(0.0, 0.35), bold_cols=(1,), fontsize=6.8)
    notes = ["Each contribution is the standard deviation of the minimum zone with that source alone propagated "
             "through the reduction (JCGM 101:2008); u comes from all sources together. Rows marked (default) rest "
             "on values the survey file does not state: state them (docs/survey-format.md) for a firmer U."]
    notes += [_in_units(n, units) for n in b.notes]
    plot.text_block(tax, [(t, "s") for t in notes], y0=y, fontsize=6.5, wrap_chars=150)
    ax = fig.add_axes([0.30, 0.12, 0.62, 0.22])
    plot.budget_bars(ax, [e.name for e in b.entries], [e.standard_uncertainty_um for e in b.entries],
                     [e.default and e.applies for e in b.entries], combined_um=b.combined_um, units=units)
    return [("uncertainty-budget", [ax])]


def _page_grades(fig, c, units):
    from . import _plots as plot

    ax = fig.add_axes([0.06, 0.06, 0.88, 0.86])
    rows = [("minimum-zone flatness F", _h(c.mz.flatness_um, units)),
            ("expanded uncertainty U", "not evaluated" if c.u_mz_um is None else _h(c.u_mz_um, units))]
    y = plot.flow_table(ax, 1.0, rows, col_x=(0.0, 0.45), title="Result decided", bold_cols=(1,))
    rows = [(g.grade, _tolerance(g.tolerance_um, units), g.verdict, _in_units(g.note or "", units)) for g in c.grades]
    y = plot.flow_table(ax, y, rows, col_x=(0.0, 0.1, 0.27, 0.47), col_labels=("grade", "tolerance", "verdict", "note"),
                        title=c.grades[0].standard, bold_cols=(2,), wrap_chars=(None, None, None, 55))
    lines = [("Decision rule", "h"), _in_units(c.decision_rule, units),
             "Verdicts: 'conforms' = proven inside the tolerance; 'does not conform' = proven outside; "
             "'undecided' = the uncertainty interval straddles the limit (ISO 14253-1 default rule).",
             ]
    plot.text_block(ax, lines, y0=y, wrap_chars=105)
    return []


def _page_bearing(fig, c, units):
    from . import _plots as plot

    b = c.bearing
    axes = plot.bearing_motion(fig, b, units=units, rect=(0.1, 0.50, 0.88, 0.90))
    ax = fig.add_axes([0.06, 0.06, 0.88, 0.36])
    rows = []
    for ch in b.checks:
        val = _h(ch.value, units) if ch.unit == "um" else f"{ch.value:.2f} arcsec"
        lim = _h(ch.limit, units) if ch.unit == "um" else f"{ch.limit:.2f} arcsec"
        u = getattr(ch, "expanded_uncertainty", None)
        if u is not None and ch.unit == "um":  # U to two significant digits, the value to the same place
            from ..units import format_with_uncertainty

            v_txt, u_txt = format_with_uncertainty(ch.value, u, units)
            val = f"{v_txt}, U {u_txt}"
        rows.append((_in_units(ch.name, units), val, lim, ch.status))
    y = plot.flow_table(ax, 1.0, rows, col_x=(0.0, 0.45, 0.62, 0.8), col_labels=("check", "value", "limit", "status"),
                        title=f"Verdict: {b.verdict}", bold_cols=(3,), wrap_chars=(60, None, None, None))
    pads = ", ".join(f"{p.pad.shape} {_size_text(p.pad.length_mm, p.pad.width_mm, units)}, "
                     f"gap {_h(p.pad.gap_um, units)}" for p in b.carriage.active_pads)
    lines = [f"Pads: {pads}.",
             "Both curves are drawn about their own straight line (minimum zone), so their shapes compare: the "
             "carriage follows the surface averaged over its pads."]
    lines += [_in_units(n, units) for n in b.notes]
    plot.text_block(ax, [(t, "s") for t in lines], y0=y, wrap_chars=110)
    return [("carriage-motion", list(axes))]


def lapping_summary(c, units: str = "um") -> str:
    """The lapping plan in one sentence (the whole of it when the target is already met)."""
    p = c.lapping
    rm = p.removal
    if not p.passes:
        return (f"The surface is already within the target {_h(rm.target_um, units)} "
                f"({_in_units(c.lapping_target, units)}): its flatness is {_h(rm.flatness_before_um, units)}, "
                "so no lapping is needed.")
    unit = "min" if p.lap.time_unit == "min" else "passes"
    return (f"Target {_h(rm.target_um, units)}: {len(p.passes)} passes, {p.total_time:.1f} {unit} in all, "
            f"{_h(p.predicted_flatness_um, units)} predicted; see the lapping pages.")


def _lapping_text(c, units):
    p = c.lapping
    rm = p.removal
    unit = "min" if p.lap.time_unit == "min" else "passes"
    text = _support_first(c, units) + [(f"Target {_h(rm.target_um, units)} ({_in_units(c.lapping_target, units)}). Flatness now "
             f"{_h(rm.flatness_before_um, units)}; after the plan {_h(p.predicted_flatness_um, units)} predicted "
             f"(best this lap can do: {_h(p.dwell_flatness_um, units)}). {len(p.passes)} passes, total "
             f"{p.total_time:.1f} {unit}: see the passes page. Lap: {_in_units(p.lap.describe(), units)}.", "")]
    rate = _in_units(f"{p.lap.rate_um:g} µm per {p.lap.time_unit}", units)
    if c.lap_rate_assumed:
        text.append((f"The removal rate is assumed ({rate}), not calibrated: the times are relative. Measure the "
                     "rate on a test pass and plan again with it (--rate-um-per-min).", "b"))
    else:
        text.append((f"Removal rate as given by the user: {rate}.", "s"))
    return text


def _lapping_foot(c, units):
    p = c.lapping
    rm = p.removal
    text = []
    shortfall = getattr(p, "shortfall", None)
    if p.passes and shortfall is not None:  # why the plan misses its target, and what to change
        text.append((shortfall.text(units), "b"))
    elif p.passes and p.predicted_flatness_um > rm.target_um:
        text.append((f"The plan misses the target {_h(rm.target_um, units)} (predicted "
                     f"{_h(p.predicted_flatness_um, units)}): survey again after the plan and plan again.", "b"))
    text.append(("Lap wet or with extraction; see the cautions.", "s"))
    return text


_CHART_TOP_IN = 0.5  # room above each block of the bench chart: title and column letters (inches)
_CHART_BOTTOM_IN = 0.5  # below it: the x label


def _lapping_maps(fig, c, units):
    """Head text, removal and dwell maps at the top of the lapping page; returns (maps, bottom, foot)."""
    from . import _plots as plot

    fh = fig.get_figheight()
    head = _lapping_text(c, units)
    head_in = plot.text_block_height_in(head, fontsize=_TEXT_FS, wrap_chars=110)
    tax = fig.add_axes([0.06, _TOP - head_in / fh, 0.88, head_in / fh])
    plot.text_block(tax, head, fontsize=_TEXT_FS, wrap_chars=110)
    ratio = plot.plan_ratio(plot.plan_box(c.heightmap))
    side = ratio <= 2.0  # a plate: removal and dwell side by side; a long surface: one above the other
    maps, bottom = plot.plan_panels(fig, 2, 2 if side else 1, ratio,
                                    (_PLAN_RECT_LEFT, _BOTTOM, 0.94, _TOP - head_in / fh - 0.01),
                                    top_in=0.42, max_height_in=2.4 if side else 1.3, gap_in=0.9)
    return maps, bottom


def _chart_blocks(c, width_in):
    """Blocks of whole columns of the bench chart and the part of the surface each shows (mm)."""
    from . import _plots as plot

    p = c.lapping
    box = plot.plan_box(c.heightmap)
    blocks = plot.cell_chart_blocks(p.chart, width_in, box_mm=box)
    xe = np.asarray(p.chart.x_edges_mm, float)
    n = len(p.chart.columns)
    sub = [(box[0] if a == 0 else float(xe[a]), box[1] if b == n else float(xe[b]), box[2], box[3]) for a, b in blocks]
    return blocks, sub


_MIN_CELL_IN = 0.3  # narrowest legible chart cell (inches): holds "12.5" at 7 points


def _chart_height_in(c, width_in) -> float:
    """Least height (inches) the bench chart needs, at most ``width_in`` wide, with cells wide enough to read."""
    from . import _plots as plot

    blocks, sub = _chart_blocks(c, width_in)
    ratio = max(plot.plan_ratio(sb) for sb in sub)
    narrowest = float(np.min(np.diff(np.asarray(c.lapping.chart.x_edges_mm, float))))
    span = max(sb[1] - sb[0] for sb in sub)
    w = min(width_in, _MIN_CELL_IN * 1.08 * span / narrowest)  # as narrow as the cells allow
    return len(blocks) * (w / ratio + _CHART_TOP_IN + _CHART_BOTTOM_IN)


def _chart_width_in(fig) -> float:
    return (0.94 - _PLAN_RECT_LEFT) * fig.get_figwidth() - 0.3


def _chart_fits_on_lapping_page(c) -> bool:
    """Whether the bench chart fits below the maps at a legible size (else it gets a page of its own)."""
    from . import _plots as plot

    scratch = plot.new_figure()
    _, bottom = _lapping_maps(scratch, c, "um")
    foot_in = plot.text_block_height_in(_lapping_foot(c, "um"), fontsize=_TEXT_FS, wrap_chars=110)
    room = (bottom - 0.005 - _BOTTOM) * scratch.get_figheight() - foot_in - 0.1
    return _chart_height_in(c, _chart_width_in(scratch)) <= room


def _draw_chart(fig, c, units, rect):
    """The bench chart in ``rect``, cut into blocks of whole columns (west first) when its cells would be too
    narrow to read; returns its axes."""
    from . import _plots as plot

    p = c.lapping
    unit = "min" if p.lap.time_unit == "min" else "passes"
    blocks, sub = _chart_blocks(c, _chart_width_in(fig))
    caxes, _ = plot.plan_panels(fig, len(blocks), 1, max(plot.plan_ratio(sb) for sb in sub), rect,
                                top_in=_CHART_TOP_IN, bottom_in=_CHART_BOTTOM_IN, right_in=0.3, max_height_in=4.5)
    head = f"bench chart: time per cell ({unit}); columns A.. from the west, rows 1.. from the south, north up"
    for k, (cax, (a, b), sb) in enumerate(zip(caxes, blocks, sub)):
        cols = f"columns {p.chart.columns[a]}-{p.chart.columns[b - 1]}"
        title = head if len(blocks) == 1 else (f"bench chart: time per cell ({unit}), {cols}" if k == 0 else cols)
        plot.cell_chart(cax, p.chart, units=units, box_mm=sb, columns=(a, b), title=title)
    return list(caxes)


def _page_lapping(fig, c, units, chart=None):
    """Removal and dwell maps and (``chart``; ``None``: if it fits) the bench chart of cells with their times."""
    from . import _plots as plot

    p = c.lapping
    rm = p.removal
    fh = fig.get_figheight()
    if chart is None:
        chart = _chart_fits_on_lapping_page(c)
    box = plot.plan_box(c.heightmap)
    maps, bottom = _lapping_maps(fig, c, units)
    plot.removal_map(maps[0], p.xs_mm, p.ys_mm, p.wanted_um, units=units, box_mm=box,
                     title=f"least removal (deepest {_h(rm.max_depth_um, units)})")
    plot.dwell_map(maps[1], p.xs_mm, p.ys_mm, p.plan_dwell, dwell_unit=p.lap.time_unit, units=units, box_mm=box,
                   chart=p.chart, title="dwell, cells of the chart" + (" (rate assumed)" if c.lap_rate_assumed else ""))
    foot = _lapping_foot(c, units)
    if not chart:
        foot = [("The bench chart (time per cell) is on the next page.", "b")] + foot
    foot_in = plot.text_block_height_in(foot, fontsize=_TEXT_FS, wrap_chars=110)
    pictures = [("lapping-removal", [maps[0]]), ("lapping-dwell", [maps[1]])]
    if chart:
        rect = (_PLAN_RECT_LEFT, _BOTTOM + (foot_in + 0.1) / fh, 0.94, bottom - 0.005)
        pictures.append(("lapping-cell-chart", _draw_chart(fig, c, units, rect)))
        fax = fig.add_axes([0.06, _BOTTOM, 0.88, foot_in / fh])
    else:
        fax = fig.add_axes([0.06, bottom - 0.01 - foot_in / fh, 0.88, foot_in / fh])
    plot.text_block(fax, foot, fontsize=_TEXT_FS, wrap_chars=110)
    return pictures


def _page_chart(fig, c, units):
    """The bench chart on a page of its own (a long surface cut into blocks of columns)."""
    from . import _plots as plot

    note = [("Columns A.. from the west, rows 1.. from the south; north is up. Each number is the time the lap "
             "spends with its centre in that cell; '.' none. Cell edges are measured from the south-west corner of "
             "the surveyed area.", "s")]
    fh = fig.get_figheight()
    note_in = plot.text_block_height_in(note, fontsize=_TEXT_FS, wrap_chars=110)
    tax = fig.add_axes([0.06, _TOP - note_in / fh, 0.88, note_in / fh])
    plot.text_block(tax, note, fontsize=_TEXT_FS, wrap_chars=110)
    rect = (_PLAN_RECT_LEFT, _BOTTOM, 0.94, _TOP - note_in / fh - 0.01)
    return [("lapping-cell-chart", _draw_chart(fig, c, units, rect))]


def _pass_rows(c, units):
    p = c.lapping
    rows = []
    for q in p.passes:
        x0, x1, y0, y1 = (float(v) for v in q.extent_mm)
        t = f"{q.time:.2f} {'min' if q.time_unit == 'min' else 'passes'}"
        if q.strokes is not None:
            t += f" ({q.strokes} strokes)"
        if not getattr(q, "even", True):
            t += " (uneven)"
        rows.append((f"{q.order}", q.zone, f"{_num(q.centre_x_mm, units)}, {_num(q.centre_y_mm, units)}",
                     f"{_num(x0, units)} to {_num(x1, units)}, {_num(y0, units)} to {_num(y1, units)}",
                     _h(q.depth_um, units), t))
    return rows


def _pass_cols(units):
    pu = "in" if units == "in" else "mm"
    return dict(col_x=(0.0, 0.07, 0.22, 0.40, 0.70, 0.84), fontsize=_TEXT_FS,
                col_labels=("pass", "cells", f"centre x, y ({pu})", f"lap centre travels x, y ({pu})", "depth",
                            "time"), wrap_chars=(None, 14, None, None, None, 13))


def _pass_intro():
    return [("Passes, highest first: work the lap evenly over the zone, its centre travelling within the extent "
             "given, for the time given ('uneven': longer in some cells than in others, as the bench chart "
             "shows). Cells as on the bench chart.", "s")]


def _passes_foot(c, units):
    p = c.lapping
    rm = p.removal
    text = [(f"Dwell smoothness {p.smoothness:g}; {len(p.passes)} passes ({p.passes_unmerged} before passes shorter "
             f"than {p.min_pass_time:.2g} {p.lap.time_unit} were dropped, merged or lengthened). Removed volume "
             f"{rm.removed_volume_mm3:.4g} mm^3.", "s")] if p.passes else [
        ("No passes: the surface is already within the target.", "b")]
    text += [("Note: " + _in_units(n, units).rstrip(".") + ".", "s") for n in c.lapping_notes]
    text += _lapping_foot(c, units)
    return text


def _pass_pages(c) -> list:
    """How the pass table is cut into pages: ``(start, stop, last)``; the notes go after the last rows."""
    from . import _plots as plot

    rows = _pass_rows(c, "um")
    cols = _pass_cols("um")
    fh = 11.69
    room = (_TOP - _BOTTOM) * fh - plot.text_block_height_in(_pass_intro(), fontsize=_TEXT_FS, wrap_chars=110)
    fixed = plot.flow_table_height_in([], col_labels=cols["col_labels"], fontsize=_TEXT_FS, title="Passes")
    row_in = plot.flow_table_height_in(rows[:1] or [("",) * 6], col_labels=None, fontsize=_TEXT_FS) - \
        0.3 * _TEXT_FS * 1.45 / 72
    per_page = max(1, int((room - fixed) // row_in))
    foot = plot.text_block_height_in(_passes_foot(c, "um"), fontsize=_TEXT_FS, wrap_chars=110)
    pages = []
    start = 0
    n = len(rows)
    while True:
        stop = min(n, start + per_page)
        pages.append([start, stop, False])
        start = stop
        if start >= n:
            break
    used = fixed + (pages[-1][1] - pages[-1][0]) * row_in
    if used + foot > room and n:
        pages.append([n, n, False])  # the notes on a page of their own
    pages[-1][2] = True
    return [tuple(pg) for pg in pages]


def _page_passes(fig, c, units, start, stop, last):
    from . import _plots as plot

    ax = fig.add_axes([0.06, _BOTTOM, 0.88, _TOP - _BOTTOM])
    y = plot.text_block(ax, _pass_intro(), fontsize=_TEXT_FS, wrap_chars=110)
    rows = _pass_rows(c, units)[start:stop]
    n = len(c.lapping.passes)
    if rows:
        title = f"Passes {start + 1}-{stop} of {n}" if (start, stop) != (0, n) else f"Passes ({n})"
        y = plot.flow_table(ax, y, rows, title=title, **_pass_cols(units))
    if last:
        plot.text_block(ax, _passes_foot(c, units), y0=y, fontsize=_TEXT_FS, wrap_chars=110)
    return []


def _page_sources(fig, c, units):
    from . import _plots as plot

    lines = [("Sources of the methods used in this report", "h")]
    lines += [f"• {s}" for s in c.sources]
    provenance = limits_provenance_text(c.grades)
    if provenance:
        lines.append(f"• {provenance}")
    lines.append(("Cautions", "h"))
    lines += [f"• {v}" for v in c.cautions]
    lines.append("• flatcheck's numbers do not make handling, lapping or air work safe: local codes, the "
                 "employer's procedures and licensed practice take precedence over anything in this report.")
    lines.append(("Statement", "h"))
    lines.append(SCOPE_STATEMENT)
    ax = fig.add_axes([0.06, 0.06, 0.88, 0.86])
    plot.text_block(ax, lines, fontsize=8.5, wrap_chars=105)
    return []


def picture_caption(content, what: str) -> tuple:
    """The lines a picture written on its own carries: the surface, its identity, the dates and what it shows."""
    ident = dict(content.identity).get("identity", "")
    surface = content.heightmap.label or dict(content.identity).get("surface", "") or "surface"
    who = surface if not ident or ident == "not stated" else f"{surface} · {ident}"
    return (who, f"measured {content.date} · pictured {content.issued} by flatcheck · {what}")


def _picture_what(name: str, axes, page_title: str) -> str:
    """What a picture shows, in words: its first axes' title, else the page's title."""
    for ax in axes:
        title = ax.get_title(loc="left") or ax.get_title()
        if title:
            return title
    return page_title.lower() if page_title else name.replace("-", " ")


def _slug(text: str) -> str:
    slug = "".join(ch if ch.isalnum() else "-" for ch in text.lower()).strip("-")
    while "--" in slug:
        slug = slug.replace("--", "-")
    return slug


def write_report(path, content: ReportContent, *, units: str = "um", png_dir=None, on_page=None,
                 png_dpi: float = 150) -> ReportFiles:
    """Draw the report's pages and write the PDF (and optionally each picture on its own as PNG).

    Parameters
    ----------
    path : str or Path
        The PDF to write; replaced atomically.
    content : ReportContent
        From :func:`analyse`.
    units : {"um", "in"}
        Display units (µm and mm, or µin and inches).
    png_dir : str or Path, optional
        A folder for the pictures as PNG files (created, with its parents, when missing), each figure alone without the page's header,
        footer, tables or text (``NN-<picture>.png``, NN the page); text-only pages give none.
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
    from . import _plots as plot

    if units not in ("um", "in"):
        raise InputValueError(f"unknown display units {units!r}", fix="use 'um' or 'in'")
    path = Path(path)
    if png_dir is not None:  # created as needed, as demo --out does (issue 15, item 11)
        png_dir = Path(png_dir)
        if png_dir.exists() and not png_dir.is_dir():
            raise OutputError(f"cannot write pictures in {png_dir}: it is a file, not a folder",
                              fix="choose a folder for the pictures")
        try:
            png_dir.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise OutputError(f"cannot create the folder {png_dir}: {exc.strerror or exc}",
                              fix="choose a folder you can write to") from None
    plan = _page_plan(content)
    pngs = []
    title = f"Flatness report: {content.heightmap.label}"
    with plot.PdfBook(path, title=title, subject="flatness of a surface as measured") as book:
        for k, (page_title, draw) in enumerate(plan, start=1):
            fig = plot.new_figure()
            pictures = draw(fig, content, units) or []
            if png_dir is not None:  # before the page's head and foot are drawn: the caption sits above the picture
                for name, axes in pictures:
                    caption = picture_caption(content, _picture_what(name, axes, page_title))
                    pngs.append(plot.save_png(fig, png_dir / f"{k:02d}-{_slug(name)}.png", dpi=png_dpi, axes=axes,
                                              caption=caption))
            _frame(fig, content, page_title, k, len(plan))
            book.add(fig)
            if on_page is not None:
                on_page()
    return ReportFiles(path, len(plan), tuple(pngs))
