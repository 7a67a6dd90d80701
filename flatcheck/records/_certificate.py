"""The content of a calibration certificate, made from the register and one survey.

A certificate carries (common practice for calibration certificates, no single source;
ISO/IEC 17025 lists similar items, from memory): a unique number, the lab, the customer and
the location, the identity of the surface and of every instrument with its calibration
traceability, the method, the uncertainty budget, the results as found and as left with
their verdicts against the grade sought and the source of each limit, a table of the
station heights (numbers, about the plane the table names), the raw readings, the next
due date, and lines for the person who measured and the person who approved.

:func:`certificate_data` gathers these from the register into a frozen
:class:`CertificateData`; the PDF pages are drawn from it elsewhere. Issuing a
certificate stores its number in the register: numbers run ``PREFIX-YYYY-NNNN`` per prefix
and year of issue, and a survey keeps the number it was given first.
"""

from __future__ import annotations

import datetime as _dt
import json
import re
from dataclasses import dataclass

from ..errors import InputValueError
from ._due import add_interval
from ._rounding import round_to_uncertainty

__all__ = ["InstrumentEntry", "StationHeight", "Reading", "StateResult", "CertificateData", "certificate_data",
           "check_prefix", "certified_result", "evaluation_note"]

_PREFIX = re.compile(r"^[A-Za-z0-9][A-Za-z0-9-]{0,15}$")


@dataclass(frozen=True)
class InstrumentEntry:
    """An instrument used for the survey and its calibration on the day.

    Attributes
    ----------
    ident : str
        Register ident, or "" when the instrument is not in the register.
    description : str
        Kind, model and serial (or the survey file's description of the instrument).
    calibrated_on, due_on, certificate_ref, traceability : str
        Of the calibration in force on the survey's day ("" when none is on record).
    in_calibration : bool or None
        Whether a calibration was in force (None: the instrument is not in the register).
    note : str
    """

    ident: str
    description: str
    calibrated_on: str
    due_on: str
    certificate_ref: str
    traceability: str
    in_calibration: bool | None
    note: str


@dataclass(frozen=True)
class StationHeight:
    """One row of the station-height table: name ("" for a height-map point), position mm, height µm."""

    name: str
    x_mm: float
    y_mm: float
    height_um: float


@dataclass(frozen=True)
class Reading:
    """One raw reading (in the reading unit, as written) and its residual (µm)."""

    line: str
    run: int
    step: int
    from_station: str
    to_station: str
    reading: float
    residual_um: float | None


@dataclass(frozen=True)
class StateResult:
    """The result of the as-found or the as-left survey.

    ``flatness_text`` and ``uncertainty_text`` are rounded as certificates state them (U to two
    significant digits, the value to the same place); ``verdict`` is the grade sought's.
    """

    survey_id: int
    date: str
    state: str
    flatness_um: float
    expanded_uncertainty_um: float | None
    flatness_text: str
    uncertainty_text: str
    verdict: object


@dataclass(frozen=True)
class CertificateData:
    """Everything a calibration certificate of one survey states (µm, mm, dates ``YYYY-MM-DD``).

    Attributes
    ----------
    number, issued_on, lab : str
    survey_id : int
        The survey certified.
    customer, location : str
        The surface's owner and where it stands.
    surface_ident, surface_kind, surface_description, material : str
    length_mm, width_mm : float or None
    standard, grade_sought : str
    instruments : tuple of InstrumentEntry
    method : str
    uncertainty_note : str
    budget : tuple of BudgetRow
    height_reference : str
        What the station heights are measured from.
    stations : tuple of StationHeight
        In the order of the reduction (equal to ``reduce --json``'s nodes).
    reading_unit : str
    readings : tuple of Reading
    raw_text, source_name : str
        The survey file as given, and its name.
    as_found, as_left : StateResult or None
        ``as_left`` None: no adjustment recorded, the surface was left as found.
    verdicts : tuple of Verdict
        Of this survey, every grade of the standard.
    limits_sources : tuple of str
        Source lines of the limits tables used.
    next_due_on : str or None
    interval : str
    measured_on, measured_by : str
    temperature_c : float or None
    approved_by : str
        "" leaves a line to sign.
    notes : tuple of str
    height_step_um : float or None
        The height step the survey resolves: station heights print to it (None: 1 nm).
    """

    number: str
    issued_on: str
    lab: str
    survey_id: int
    customer: str
    location: str
    surface_ident: str
    surface_kind: str
    surface_description: str
    material: str
    length_mm: float | None
    width_mm: float | None
    standard: str
    grade_sought: str
    instruments: tuple
    method: str
    uncertainty_note: str
    budget: tuple
    height_reference: str
    stations: tuple
    reading_unit: str
    readings: tuple
    raw_text: str
    source_name: str
    as_found: StateResult | None
    as_left: StateResult | None
    verdicts: tuple
    limits_sources: tuple
    next_due_on: str | None
    interval: str
    measured_on: str
    measured_by: str
    temperature_c: float | None
    approved_by: str
    notes: tuple
    height_step_um: float | None = None


def check_prefix(prefix: str) -> str:
    """A certificate-number prefix: 1-16 letters, digits or hyphens, starting with a letter or digit.

    Raises
    ------
    InputValueError
        Any other text.
    """
    p = str(prefix).strip()
    if not _PREFIX.match(p):
        raise InputValueError(f"certificate prefix {prefix!r} is not 1-16 letters, digits or hyphens", where="--prefix",
                              fix="give a short lab code such as KY")
    return p


def _state_result(row, verdicts) -> StateResult:
    sought = next((v for v in verdicts if v.sought), None)
    ft, ut = round_to_uncertainty(row.flatness_um, row.expanded_uncertainty_um)
    return StateResult(row.survey_id, row.measured_on, row.state, row.flatness_um, row.expanded_uncertainty_um,
                       ft, ut, sought)


def _verdicts_of(register, row, notes: list) -> tuple:
    stored = register.survey_detail(row.survey_id).verdicts
    if stored:
        return stored
    verdicts, vnotes = register.judge(row.ident, row.flatness_um, row.expanded_uncertainty_um)
    if verdicts:
        notes.append(f"verdicts of survey {row.survey_id} made at issue with the register's current limits table")
    notes.extend(vnotes)
    return verdicts


def certificate_data(register, survey_id: int, *, prefix: str | None = None, issued_on: str | None = None,
                     lab: str | None = None, approved_by: str = "") -> CertificateData:
    """Gather a certificate's content for one survey, issuing its number (stored in the register).

    Parameters
    ----------
    register : Register
        Open for writing (the number is stored).
    survey_id : int
    prefix : str, optional
        Certificate-number prefix (e.g. ``"KY"``); default the register's ``certificate_prefix``
        setting.
    issued_on : str, optional
        Day of issue, ``YYYY-MM-DD`` (today by default); its year is part of a new number.
    lab : str, optional
        The lab's name; default the register's ``lab`` setting, else the limits table's ``lab``.
    approved_by : str
        Name of the person who approves ("" leaves a line).

    Raises
    ------
    InputValueError
        No such survey, no prefix, a bad prefix or date.
    """
    from ..io._csv_meta import parse_iso_date

    detail = register.survey_detail(survey_id)
    row = detail.row
    pfx = prefix if prefix is not None else register.setting("certificate_prefix")
    if not pfx:
        raise InputValueError("the register has no certificate-number prefix yet", where="--prefix",
                              fix="give the lab's prefix once with --prefix (e.g. --prefix KY)")
    pfx = check_prefix(pfx)
    issued = parse_iso_date(issued_on, where="--issued") if issued_on else _dt.date.today().isoformat()
    number, issued, _ = register.certificate_number(row.survey_id, pfx, issued)
    s = register.require_surface(row.ident)
    notes: list = []
    # instruments
    instruments = []
    if row.instrument_ident:
        inst = register.instrument(row.instrument_ident)
        cal = inst.covering(row.measured_on)
        desc = ", ".join(p for p in (inst.kind, inst.model, f"serial {inst.serial}" if inst.serial else "") if p)
        if cal is None:
            last = inst.latest
            note = (f"no calibration in force on {row.measured_on}" + (f" (last calibrated {last.calibrated_on}, due "
                    f"{last.due_on})" if last else " (no calibration on record)"))
            instruments.append(InstrumentEntry(inst.ident, desc or detail.instrument_text, "", "", "", "", False, note))
            notes.append(f"instrument {inst.ident}: {note}")
        else:
            instruments.append(InstrumentEntry(inst.ident, desc or detail.instrument_text, cal.calibrated_on,
                                               cal.due_on, cal.certificate_ref, cal.traceability, True, ""))
    elif detail.instrument_text:
        note = "not in the register: its calibration and traceability are not on record"
        instruments.append(InstrumentEntry("", detail.instrument_text, "", "", "", "", None, note))
        notes.append(f"instrument ({detail.instrument_text}): {note}")
    # method, readings
    doc = json.loads(detail.report_json)
    n_st = len(detail.x_mm)
    if row.kind == "survey":
        n_read = (doc.get("residuals") or {}).get("observations")
        method = (f"survey of {n_st} stations ({doc.get('pattern')} layout) with {detail.instrument_text}; "
                  f"station heights by the {row.method} reduction of all {n_read} readings")
    else:
        method = f"height map of {n_st} points, heights as given"
    readings = tuple(
        Reading(r["line"], int(r["run"]), int(r["step"]), r["from"], r["to"], float(r["reading"]), r.get("residual_um"))
        for r in (doc.get("residuals") or {}).get("readings", [])
    )
    names = detail.names if detail.names is not None else ("",) * n_st
    stations = tuple(StationHeight(str(n), float(x), float(y), float(z))
                     for n, x, y, z in zip(names, detail.x_mm, detail.y_mm, detail.height_um))
    # as found / as left
    verdicts = _verdicts_of(register, row, notes)
    this = _state_result(row, verdicts)
    as_found, as_left = this, None
    if row.state == "as-left":
        as_left = this
        earlier = [r for r in register.surveys_of(row.ident)
                   if r.state == "as-found" and r.measured_on <= row.measured_on and r.survey_id != row.survey_id]
        as_found = _state_result(earlier[-1], _verdicts_of(register, earlier[-1], notes)) if earlier else None
        if as_found is None:
            notes.append("no as-found survey of the surface is in the register before this one")
    next_due = None
    if s.interval_text:
        next_due = add_interval(row.measured_on, months=s.interval_months, days=s.interval_days)
    sources = tuple(dict.fromkeys(v.source for v in verdicts))
    lab_name = lab if lab is not None else (register.setting("lab") or "")
    if not lab_name:
        cur = register.limits()
        lab_name = cur[1].lab if cur else ""
    return CertificateData(
        number=number, issued_on=issued, lab=lab_name, survey_id=row.survey_id, customer=s.owner, location=s.location,
        surface_ident=s.ident, surface_kind=s.kind, surface_description=s.description, material=s.material,
        length_mm=s.length_mm, width_mm=s.width_mm, standard=s.standard, grade_sought=s.grade,
        instruments=tuple(instruments), method=method, uncertainty_note=detail.uncertainty_note,
        budget=detail.budget, height_reference=detail.height_reference, stations=stations,
        reading_unit=detail.reading_unit, readings=readings, raw_text=detail.raw_text, source_name=row.source_name,
        as_found=as_found, as_left=as_left, verdicts=tuple(verdicts), limits_sources=sources, next_due_on=next_due,
        interval=s.interval_text, measured_on=row.measured_on, measured_by=row.operator,
        temperature_c=detail.temperature_c, approved_by=approved_by, notes=tuple(notes),
        height_step_um=_height_step(doc, row.kind, detail.raw_text, row.source_name),
    )


def survey_height_step_um(register, survey_id: int) -> float | None:
    """The height step a registered survey resolves (µm; :meth:`flatcheck.MeasuredSurface.height_step_um`):
    what its heights are printed to. None when the register cannot tell (a height map: 1 nm)."""
    detail = register.survey_detail(survey_id)
    return _height_step(json.loads(detail.report_json), detail.row.kind, detail.raw_text, detail.row.source_name)


def _height_step(doc: dict, kind: str, raw_text: str, source: str) -> float | None:
    """The height step of a registered survey: from its stored evaluation, or (registers made before the
    evaluation stored it) from the survey file kept in the register; None when neither tells."""
    step = doc.get("height_step_um")
    if step is not None or kind != "survey" or not raw_text:
        return step
    from ..errors import FlatcheckError
    from ..evaluation import MeasuredSurface
    from ..io import parse_survey

    try:
        survey = parse_survey(raw_text, source=source or "<register>")
    except FlatcheckError:
        return None
    return MeasuredSurface(source, None, survey).height_step_um()


def certified_result(c: CertificateData) -> StateResult:
    """The result of the survey the certificate is of (its as-left result when that survey is the as-left one)."""
    if c.as_left is not None and c.as_left.survey_id == c.survey_id:
        return c.as_left
    return c.as_found


def evaluation_note(c: CertificateData, flatness_um: float, expanded_uncertainty_um: float | None) -> str:
    """A note when another evaluation of the survey states other numbers than the certificate ("" when equal).

    The certificate states the register's result; a report evaluates the survey again (its Monte Carlo
    run with the register's trials and seed gives the same numbers). Both are compared as they are
    stated: rounded to the uncertainty (:func:`round_to_uncertainty`).

    Parameters
    ----------
    c : CertificateData
    flatness_um, expanded_uncertainty_um : float, float or None
        Minimum-zone flatness and its U from the other evaluation, µm.
    """
    res = certified_result(c)
    ref = res.expanded_uncertainty_um if res.expanded_uncertainty_um is not None else expanded_uncertainty_um
    mine = round_to_uncertainty(res.flatness_um, ref)[0], res.uncertainty_text
    other_f = round_to_uncertainty(flatness_um, ref)[0]
    other_u = "" if expanded_uncertainty_um is None else round_to_uncertainty(flatness_um, expanded_uncertainty_um)[1]
    if (other_f, other_u) == mine:
        return ""
    told = f"{other_f} µm" + (f", U = {other_u} µm" if other_u else " without U")
    return (f"the report's pages after the certificate evaluate the survey again and state {told}; the certificate "
            f"states the register's result ({res.flatness_text} µm" +
            (f", U = {res.uncertainty_text} µm" if res.uncertainty_text else "") + "): other Monte Carlo trials or "
            "seed, other uncertainty defaults or another reduction were used")
