"""What the register keeps of one survey: a :class:`SurveyEntry`, built from an evaluated surface.

The entry is made where the survey is evaluated (in a worker process when many files are
added at once) and carries everything the register stores: the file's text as given (the
raw readings), its content hash, the identity of the surface, the date, the state (as
found / as left), the station heights, the flatness with its uncertainty, the uncertainty
budget and the full ``reduce --json`` document. It is a frozen dataclass of plain values
and numpy arrays, so it passes between processes.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass

import numpy as np

from ..errors import InputValueError
from ..io._csv_meta import parse_iso_date
from ._limits import text_sha256

__all__ = ["STATES", "BudgetRow", "SurveyEntry", "survey_entry", "budget_rows", "to_json"]

#: States of a survey: before any adjustment (lapping) of the surface, or after it.
STATES = ("as-found", "as-left")


@dataclass(frozen=True)
class BudgetRow:
    """One row of an uncertainty budget.

    Attributes
    ----------
    source : str
        The source ("reading", "scale", "thermal-gradient"...), or ``"combined"`` for the last
        row, the output: the minimum-zone flatness.
    quantity : str
        What the source is, in words.
    value : float
        Its input value in ``unit`` (a standard uncertainty, or the half-width of a rectangular
        distribution); for the combined row the combined standard uncertainty in µm.
    unit : str
    distribution : str
        How it was drawn in the Monte Carlo propagation.
    basis : str
        Where the value comes from (stated in the survey, estimated, or a default and its source).
    contribution_um : float or None
        Its contribution to the standard uncertainty of the minimum-zone flatness (µm): the
        standard deviation with this source alone propagated; None when the evaluation did
        not propagate sources one at a time.
    default : bool
        True when the value is a default, not stated for this survey.
    """

    source: str
    quantity: str
    value: float
    unit: str
    distribution: str
    basis: str
    contribution_um: float | None
    default: bool = False


@dataclass(frozen=True, eq=False)
class SurveyEntry:
    """One survey as the register stores it.

    Attributes
    ----------
    content_sha256 : str
        Hash of the file's text (line ends and trailing blanks normalised): the same survey
        twice has the same hash.
    source_name : str
        The file as given on the command line.
    raw_text : str
        The file's text as given (the raw readings).
    kind : {"survey", "height-map"}
    method : str
        ``"least-squares"``, ``"moody"`` or ``"height-map"``.
    ident, description, material : str
        The surface as the file names it (``ident`` required).
    length_mm, width_mm : float or None
        Its size in mm.
    measured_on : str
        Date of the survey, ``YYYY-MM-DD``.
    state : {"as-found", "as-left"}
    instrument_ident : str or None
        Register ident of the instrument used, as given with ``--instrument`` (must be registered).
    instrument_model : str
        The survey's ``[instrument] model`` text; the register links the survey to the
        instrument of that ident when there is one and no ``instrument_ident`` was given.
    instrument_text : str
        The instrument as the file describes it (kind, unit, model).
    reading_unit : str
        Unit of the readings ("" for height maps).
    operator : str
    temperature_c : float or None
    flatness_um : float
        Minimum-zone flatness (µm).
    least_squares_um : float
        Peak-to-valley about the least-squares plane (µm).
    expanded_uncertainty_um, standard_uncertainty_um : float or None
        U (about 95 % coverage, as the evaluation states it) and u of the minimum-zone flatness (µm),
        None when not evaluated.
    interval_um : tuple of float or None
        95 % coverage interval (µm).
    trials, seed : int or None
        Of the Monte Carlo run.
    uncertainty_note : str
        How the uncertainty was obtained.
    local_flatness_um : float or None
    local_window : str
    height_reference : str
        What the station heights are measured from.
    names : tuple of str or None
        Station names (None for a height map).
    x_mm, y_mm, height_um : ndarray, shape (n,)
        Station positions (mm) and heights (µm), in the order of the reduction.
    budget : tuple of BudgetRow
    report_json : str
        The ``flatcheck reduce --json`` document with nodes and readings.
    notes : tuple of str
        Remarks made while building the entry.
    """

    content_sha256: str
    source_name: str
    raw_text: str
    kind: str
    method: str
    ident: str
    description: str
    material: str
    length_mm: float | None
    width_mm: float | None
    measured_on: str
    state: str
    instrument_ident: str | None
    instrument_model: str
    instrument_text: str
    reading_unit: str
    operator: str
    temperature_c: float | None
    flatness_um: float
    least_squares_um: float
    expanded_uncertainty_um: float | None
    standard_uncertainty_um: float | None
    interval_um: tuple | None
    trials: int | None
    seed: int | None
    uncertainty_note: str
    local_flatness_um: float | None
    local_window: str
    height_reference: str
    names: tuple | None
    x_mm: np.ndarray
    y_mm: np.ndarray
    height_um: np.ndarray
    budget: tuple
    report_json: str
    notes: tuple = ()


def _plain(obj):
    """numpy scalars and arrays, tuples and non-finite floats made JSON-ready (NaN -> None)."""
    if isinstance(obj, dict):
        return {str(k): _plain(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_plain(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return _plain(obj.tolist())
    if isinstance(obj, np.bool_):
        return bool(obj)
    if isinstance(obj, np.integer):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        v = float(obj)
        return v if math.isfinite(v) else None
    return obj


def to_json(obj) -> str:
    """``obj`` as compact JSON text (numpy values converted, NaN and infinities as null)."""
    return json.dumps(_plain(obj), ensure_ascii=False, allow_nan=False, separators=(",", ":"))


def budget_rows(ev, *, u_height_um: float | None = None) -> tuple:
    """The uncertainty budget of an evaluated surface: every source that applies, then the output.

    Parameters
    ----------
    ev : SurfaceEvaluation
        With its Monte Carlo uncertainty (``ev.uncertainty``); None gives no rows.
    u_height_um : float, optional
        Height maps: the standard uncertainty of each height (µm) that was propagated (used
        when the evaluation carries no budget table of its own).

    Returns
    -------
    tuple of BudgetRow
        The evaluation's own budget (``ev.uncertainty.budget``: each source's input value, basis
        and Monte Carlo contribution), the sources that do not apply left out, and last the
        ``"combined"`` row: the standard uncertainty of the minimum-zone flatness, with U, its
        coverage interval, trials and seed in its basis. Without a budget table, the rows state
        the inputs as the survey file gives them and the output.
    """
    unc = ev.uncertainty
    if unc is None:
        return ()
    mz = unc.minimum_zone
    interval = getattr(mz, "corrected_interval_um", None) or mz.interval_um
    rows = []
    budget = getattr(unc, "budget", None)
    if budget is not None:
        for e in budget.entries:
            if e.applies:
                rows.append(BudgetRow(e.name, e.quantity, float(e.value), e.unit, e.distribution, e.basis,
                                      float(e.standard_uncertainty_um), bool(e.default)))
    elif ev.loaded.survey is None:
        if u_height_um is not None:
            rows.append(BudgetRow("height", "height of each point", float(u_height_um), "um",
                                  "normal, independent per point", "as stated for the height map (--u-height-um)",
                                  None))
    else:
        inst = ev.loaded.survey.instrument
        if inst.reading_uncertainty is not None:
            rows.append(BudgetRow("reading", "reading repeatability", float(inst.reading_uncertainty), inst.unit,
                                  "normal, independent per reading", "stated in the survey file", None))
        else:
            rows.append(BudgetRow("reading", "reading repeatability", float(ev.loaded.reduction.sigma0_um), "um",
                                  f"t, {unc.u_dof} degrees of freedom", "the survey's own residuals", None))
        if inst.scale_uncertainty_rel:
            rows.append(BudgetRow("scale", "instrument scale", float(inst.scale_uncertainty_rel), "relative",
                                  "normal, common to all readings", "stated in the survey file", None))
        if inst.foot_spacing_uncertainty_mm and not inst.reads_heights:
            rows.append(BudgetRow("foot-spacing", "foot spacing", float(inst.foot_spacing_uncertainty_mm), "mm",
                                  "normal, common to the readings of one base", "stated in the survey file", None))
    rows.append(BudgetRow(
        "combined", "flatness (minimum zone): combined standard uncertainty", float(mz.std_um), "um",
        "Monte Carlo output (JCGM 101:2008)",
        f"{mz.trials} trials, seed {mz.seed}; U = {mz.expanded_um:.3g} um; "
        f"95 % interval {interval[0]:.4g} to {interval[1]:.4g} um",
        float(mz.std_um),
    ))
    return tuple(rows)


def _pick(*values):
    for v in values:
        if v not in (None, ""):
            return v
    return None


def survey_entry(
    ev,
    raw_text: str,
    *,
    source_name: str,
    ident: str | None = None,
    measured_on: str | None = None,
    state: str = "as-found",
    instrument_ident: str | None = None,
    meta=None,
    u_height_um: float | None = None,
) -> SurveyEntry:
    """Build the register's entry of an evaluated surface.

    Parameters
    ----------
    ev : SurfaceEvaluation
        From :func:`flatcheck.evaluate_surface` (with ``monte_carlo`` for U).
    raw_text : str
        The file's text as read.
    source_name : str
        The file, as given.
    ident, measured_on : str, optional
        Override the surface ident and the date the file states (``YYYY-MM-DD``).
    state : {"as-found", "as-left"}
    instrument_ident : str, optional
        Register ident of the instrument (else the register links by the survey's
        ``[instrument] model`` text, when an instrument has that ident).
    meta : CsvMeta, optional
        Header comments of a height-map CSV (ident, size, date).
    u_height_um : float, optional
        Height maps: the standard uncertainty of each height (µm) given to the evaluation.

    Raises
    ------
    InputValueError
        No ident or no date anywhere, a date not written ``YYYY-MM-DD``, an unknown state.
    """
    loaded = ev.loaded
    sv = loaded.survey
    where = source_name
    if state not in STATES:
        raise InputValueError(f"unknown state {state!r}", where="--state", fix="use as-found or as-left")
    sf = sv.surface if sv is not None else None
    hm = ev.heightmap
    ident_v = _pick(ident, sf.ident if sf else None, meta.ident if meta else None)
    if ident_v is None or not str(ident_v).strip():
        raise InputValueError(
            "the file does not name the surface (no ident)", where=where,
            fix="write ident = \"...\" in the survey's [surface] table (or '# ident = ...' above a height-map "
            "CSV's header), or give --ident",
        )
    date_v = _pick(measured_on, sv.date if sv is not None else None, meta.date if meta else None)
    if date_v is None:
        raise InputValueError(
            "the file states no date", where=where,
            fix="write date = \"YYYY-MM-DD\" in the survey's [conditions] table (or '# date = ...' in a height-map "
            "CSV), or give --date",
        )
    date_v = parse_iso_date(str(date_v), where=f"{where} (date)" if measured_on is None else "--date")
    fl = ev.flatness
    unc = ev.uncertainty
    mz = unc.minimum_zone if unc is not None else None
    doc = ev.to_dict(nodes=True)
    if sv is not None:
        inst = sv.instrument
        instrument_text = ", ".join(p for p in (inst.kind, f"readings in {inst.unit}", inst.model) if p)
        reading_unit = inst.unit
        model = inst.model or ""
        description = sf.description
        material = sf.material
        length_mm, width_mm = sf.length_mm, sf.width_mm
        height_reference = "least-squares plane of the stations"
    else:
        instrument_text, reading_unit, model = "", "", ""
        description = _pick(meta.description if meta else None, hm.label) or ""
        material = (meta.material if meta else "") or ""
        length_mm = _pick(meta.length_mm if meta else None, hm.length_mm)
        width_mm = _pick(meta.width_mm if meta else None, hm.width_mm)
        height_reference = "heights as given in the height map"
    local = doc.get("local_flatness") or None
    return SurveyEntry(
        content_sha256=text_sha256(raw_text),
        source_name=str(source_name),
        raw_text=raw_text,
        kind=loaded.kind,
        method=ev.method,
        ident=str(ident_v).strip(),
        description=description or "",
        material=material or "",
        length_mm=None if length_mm is None else float(length_mm),
        width_mm=None if width_mm is None else float(width_mm),
        measured_on=date_v,
        state=state,
        instrument_ident=instrument_ident or None,
        instrument_model=model,
        instrument_text=instrument_text,
        reading_unit=reading_unit,
        operator=(sv.operator if sv is not None else "") or "",
        temperature_c=sv.temperature_c if sv is not None else None,
        flatness_um=float(fl.mzpl.fltt_um),
        least_squares_um=float(fl.lspl.fltt_um),
        expanded_uncertainty_um=None if mz is None else float(mz.expanded_um),
        standard_uncertainty_um=None if mz is None else float(mz.std_um),
        interval_um=None if mz is None else tuple(float(v) for v in (
            getattr(mz, "corrected_interval_um", None) or mz.interval_um)),
        trials=None if mz is None else int(mz.trials),
        seed=None if mz is None else int(mz.seed),
        uncertainty_note=ev.uncertainty_note,
        local_flatness_um=None if local is None else float(local["max_um"]),
        local_window="" if local is None else str(local["window"]),
        height_reference=height_reference,
        names=hm.names,
        x_mm=np.array(hm.x_mm),
        y_mm=np.array(hm.y_mm),
        height_um=np.array(hm.height_um),
        budget=budget_rows(ev, u_height_um=u_height_um),
        report_json=to_json(doc),
    )
