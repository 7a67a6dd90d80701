"""Air-bearing fitness of a measured surface and the motion of a carriage riding on it.

An air-bearing pad floats on a film a few micrometres thick, so the guide surface under any pad footprint
must be flat to a small fraction of that gap, and the carriage carried by the pads follows the surface
*averaged* over each footprint. This module takes a measured surface (a :class:`~flatcheck.HeightMap`)
and a pad or a carriage of pads and computes, for each position of the carriage along its travel:

- per pad: the mean surface height under the footprint, the least-squares tilt of the footprint, the local
  minimum-zone flatness within it and the least clearance between pad face and surface;
- for the carriage: its height, pitch and roll, from the pad-averaged heights;

then the carriage's vertical straightness (minimum zone, ISO 12780 style), the peak-to-valley of pitch and
roll, and a verdict (fit, marginal, unfit) against gap-derived limits and an optional motion budget. The pads
and the carriage are described in :mod:`flatcheck.bearing._carriage` (which also sets the positions along the
travel); the surface under one pad, its gap field and a measured pad face in
:mod:`flatcheck.bearing._footprint`. This module holds the evaluation over the travel, its checks and
cautions, and the result (:class:`BearingResult`).

Conventions
-----------
- ``x`` runs along the travel (the surface's long axis), ``y`` across it; positions in mm, heights in µm,
  positive up (away from the guide material, towards the pad).
- The pad's plane: the pad face rests parallel to the least-squares plane of the surface under its footprint,
  at the nominal gap above it; that plane passes through the mean height at the pad centre. So the film
  thickness at a point of the footprint is ``gap - (z - plane)`` and the least clearance is
  ``gap - max(z - plane)``. When a pad-face height map is given, its own highest point above its least-squares
  plane is subtracted as well: while the pad travels, its face's high spot passes over every part of the track,
  so the two peaks are added (a bound that is reached when the peaks meet).
- Pitch is positive when the carriage's front (larger x) rises; roll is positive when its +y side rises.
- Gap-derived limit: ``gap_fraction * gap``; no published ratio exists, the default 1/4 is common practice.
- Verdict: each check gives a ratio ``value / limit`` and an ISO 14253-1:2017 decision with the U of its figure
  from the survey's budget (:mod:`flatcheck.bearing._uncertainty`; simple acceptance without one): *unfit* when
  non-conformity is proven (value - U above the limit), *marginal* when undecided or when the ratio lies in
  ``[marginal_from, 1]`` (default 0.8, i.e. within 80-100 % of a limit), else *fit*.

References
----------
ISO 12780-1:2011, Geometrical product specifications - Straightness (minimum-zone reference line).
Pad averaging as a moving mean over the pad length: J. Japan Soc. Precision Eng. 67(6):903-909 (2001).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..errors import GeometryError, InputValueError
from ..form import HeightMap
from ._carriage import Carriage, MotionBudget, PlacedPad, _positive, attitude_determined, station_positions
from ._footprint import _UM_PER_MM_TO_ARCSEC, PadFaceForm, _pad_station, footprint, pad_face_form

__all__ = [
    "DEFAULT_GAP_FRACTION",
    "DEFAULT_MARGINAL_FROM",
    "CarriageStation",
    "CarriageMotion",
    "Check",
    "BearingResult",
    "straightness_mz_um",
    "evaluate_bearing",
    "survey_spacing_mm",
    "COARSE_SURVEY_FRACTION",
    "PAD_FACE_SIZE_TOLERANCE",
]

#: Default limit on the local form error under a pad, as a fraction of the nominal gap. No standard gives a
#: ratio; keeping the form under a footprint to a quarter of the gap or less is common practice, no single source.
DEFAULT_GAP_FRACTION = 0.25
#: A result within 80-100 % of its limit is "marginal" (a convention of this tool, stated in every report).
DEFAULT_MARGINAL_FROM = 0.8


# --------------------------------------------------------------------------- straightness
def straightness_mz_um(x_mm, z_um) -> float:
    """Minimum-zone straightness of a profile: the least vertical distance between two parallel lines
    enclosing all points (ISO 12780-1 minimum-zone reference line, evaluated along z).

    Solved exactly as a linear program (scipy HiGHS): minimise ``t`` subject to ``0 <= z - (a + b x) <= t``.

    Parameters
    ----------
    x_mm : ndarray, shape (n,)
        Positions along the line, mm.
    z_um : ndarray, shape (n,)
        Heights, µm.

    Returns
    -------
    float
        Straightness in µm (0 for fewer than three points).
    """
    from scipy.optimize import linprog

    x = np.asarray(x_mm, float).ravel()
    z = np.asarray(z_um, float).ravel()
    if x.size < 3:
        return 0.0
    xc = (x - x.mean()) / max(np.ptp(x), 1e-300)
    A = np.column_stack([np.ones_like(xc), xc])
    A_ub = np.vstack([np.column_stack([A, np.zeros(x.size)]), np.column_stack([-A, -np.ones(x.size)])])
    b_ub = np.concatenate([z, -z])
    res = linprog([0, 0, 1], A_ub=A_ub, b_ub=b_ub, bounds=[(None, None)] * 3, method="highs")
    if res.status != 0:  # pragma: no cover - a feasible bounded LP always solves
        raise GeometryError(f"straightness LP failed: {res.message}")
    # the LP optimum is a vertex; recompute the zone from the line for an exact peak-to-valley
    r = z - A @ res.x[:2]
    return float(r.max() - r.min())


# --------------------------------------------------------------------------- carriage
@dataclass(frozen=True)
class CarriageStation:
    """The carriage at one position of its travel.

    Attributes
    ----------
    x_mm, y_mm : float
        Carriage reference point, mm.
    mean_height_um : float
        Carriage height at its reference point, µm (for a single pad: the mean surface height under it).
    pitch_arcsec, roll_arcsec : float
        Carriage attitude, arcsec (pitch + when the front rises, roll + when the +y side rises).
    local_flatness_um : float
        Largest local flatness under any pad at this position, µm.
    clearance_um : float
        Least clearance of any pad at this position, µm.
    pads : tuple of PadStation
        Per-pad results.
    """

    x_mm: float
    y_mm: float
    mean_height_um: float
    pitch_arcsec: float
    roll_arcsec: float
    local_flatness_um: float
    clearance_um: float
    pads: tuple


@dataclass(frozen=True)
class CarriageMotion:
    """The carriage path over the travel and how the pads average the surface.

    Attributes
    ----------
    x_mm : ndarray, shape (n,)
        Carriage positions (evaluated stations only), mm.
    path_um : ndarray, shape (n,)
        Carriage height at its reference point, µm.
    pitch_path_arcsec, roll_path_arcsec : ndarray, shape (n,)
        Carriage pitch and roll, arcsec.
    raw_profile_um : ndarray, shape (n,)
        Surface height on the carriage centre line at the same positions (no pad averaging), µm.
    straightness_um : float
        Minimum-zone straightness of ``path_um``, µm.
    raw_straightness_um : float
        Minimum-zone straightness of ``raw_profile_um``, µm.
    pitch_arcsec, roll_arcsec : float
        Peak-to-valley of pitch and roll over the travel, arcsec; NaN (with the path NaN too) when the pad
        layout does not determine that angle (see ``roll_determined``).
    pitch_determined, roll_determined : bool
        False when two or more pads stand on one line along the travel (roll) or across it (pitch): such
        pads, pivoting in their films, do not hold the carriage about that line, so its angle is set by
        whatever else guides the carriage, not by this surface.
    """

    x_mm: np.ndarray
    path_um: np.ndarray
    pitch_path_arcsec: np.ndarray
    roll_path_arcsec: np.ndarray
    raw_profile_um: np.ndarray
    straightness_um: float
    raw_straightness_um: float
    pitch_arcsec: float
    roll_arcsec: float
    pitch_determined: bool = True
    roll_determined: bool = True


@dataclass(frozen=True)
class Check:
    """One limit check.

    Attributes
    ----------
    name : str
        What is checked.
    value, limit : float
        Result and limit, in ``unit``.
    unit : str
        ``"um"`` or ``"arcsec"``.
    ratio : float
        ``value / limit``.
    status : {"fit", "marginal", "unfit"}
        ``unfit`` if ratio > 1, ``marginal`` if ratio >= marginal_from, else ``fit``.
    where : tuple of (float, float)
        Ranges of carriage position ``(x_from_mm, x_to_mm)`` where the check is marginal or unfit
        (for checks over the whole travel: the positions of its extremes).
    basis : str
        Where the limit comes from.
    expanded_uncertainty : float or None
        U of ``value`` in ``unit`` (coverage about 95 %) from the survey's budget; None when not known.
    decision : {"conforms", "undecided", "does-not-conform"} or None
        ISO 14253-1:2017 default rule with U (:func:`flatcheck.conformance.decide`), or simple acceptance
        when U is not known; ``status`` follows it: does not conform -> unfit, undecided -> marginal,
        conforms -> fit (marginal from ``marginal_from`` of the limit). None for checks judged otherwise.
    rule : {"iso14253-1", "simple-acceptance"} or None
        The rule applied.
    """

    name: str
    value: float
    limit: float
    unit: str
    ratio: float
    status: str
    where: tuple
    basis: str
    expanded_uncertainty: float | None = None
    decision: str | None = None
    rule: str | None = None


@dataclass(frozen=True)
class BearingResult:
    """Air-bearing fitness of a surface for a carriage.

    Attributes
    ----------
    carriage : Carriage
        The carriage evaluated.
    limit_um : float
        Gap-derived limit for the local flatness under a pad (``gap_fraction * gap``; the smallest over pads), µm.
    gap_fraction : float
        Fraction of the gap allowed as local form error (common practice default 1/4).
    marginal_from : float
        Fraction of a limit from which a result is marginal.
    local_flatness_max_um : float
        Largest local flatness under any pad anywhere on the travel, µm.
    clearance_min_um : float
        Least clearance anywhere on the travel, µm.
    stations : tuple of CarriageStation
        Evaluated positions.
    excluded : tuple of (float, str)
        Positions not evaluated and why (a footprint outside the surveyed area).
    skipped_pads : tuple of str
        Pads on other faces (not evaluated).
    motion : CarriageMotion
        Carriage path, pitch, roll and pad averaging.
    pad_face : PadFaceForm or None
        Measured pad face, when given.
    checks : tuple of Check
        All limit checks.
    verdict : {"fit", "marginal", "unfit"}
        Worst status over the checks.
    sampling_pitch_mm : float
        Largest spacing of the sample points under a pad, mm.
    step_mm : float
        Step between carriage positions, mm.
    notes : tuple of str
        Statements the report must carry (limit basis, marginal band, pad plane).
    warnings : tuple of str
        Cautions about this input: a surface longer across than along the travel, a survey too coarse to
        see the form under a pad, a pad-face map of another size than the pad.
    uncertainty : BearingUncertainty or None
        Which U the checks used and where it came from (:mod:`flatcheck.bearing._uncertainty`).
    """

    carriage: Carriage
    limit_um: float
    gap_fraction: float
    marginal_from: float
    local_flatness_max_um: float
    clearance_min_um: float
    stations: tuple
    excluded: tuple
    skipped_pads: tuple
    motion: CarriageMotion
    pad_face: PadFaceForm | None
    checks: tuple
    verdict: str
    sampling_pitch_mm: float
    step_mm: float
    notes: tuple = field(default=())
    warnings: tuple = field(default=())
    uncertainty: object = None


def _carriage_attitude(pads, stations):
    """Carriage height at its reference point and tilt (µm/mm) from the pad-averaged heights.

    Weighted least-squares plane through the pad centres at their mean heights (weights = stiffness). Tilt
    directions the pad layout cannot fix (one pad; pads in a line) take the stiffness-weighted mean of the
    pads' own footprint tilts.
    """
    k = np.array([p.stiffness for p in pads])
    d = np.array([[p.along_mm, p.across_mm] for p in pads])
    h = np.array([s.mean_height_um for s in stations])
    t0 = np.array([
        np.sum(k * [s.tilt_x_arcsec for s in stations]),
        np.sum(k * [s.tilt_y_arcsec for s in stations]),
    ]) / k.sum() / _UM_PER_MM_TO_ARCSEC
    dbar = k @ d / k.sum()
    hbar = k @ h / k.sum()
    dc = d - dbar
    r = h - hbar - dc @ t0
    sk = np.sqrt(k)
    delta = np.linalg.pinv(dc * sk[:, None], rcond=1e-9) @ (r * sk)  # min-norm: only determined directions
    g = t0 + delta
    return float(hbar - dbar @ g), float(g[0]), float(g[1])


def _ranges(x_mm: np.ndarray, flags: np.ndarray) -> tuple:
    """Contiguous runs of flagged positions as ``((x_from, x_to), ...)`` in mm."""
    out = []
    start = None
    for i, f in enumerate(flags):
        if f and start is None:
            start = i
        if not f and start is not None:
            out.append((float(x_mm[start]), float(x_mm[i - 1])))
            start = None
    if start is not None:
        out.append((float(x_mm[start]), float(x_mm[-1])))
    return tuple(out)


def evaluate_bearing(
    surface: HeightMap,
    carriage: Carriage,
    *,
    gap_fraction: float = DEFAULT_GAP_FRACTION,
    marginal_from: float = DEFAULT_MARGINAL_FROM,
    budget: MotionBudget | None = None,
    pad_face: HeightMap | None = None,
    sample_pitch_mm: float | None = None,
    method: str = "linear",
    progress=None,
    uncertainty=None,
) -> BearingResult:
    """Judge a measured surface for an air-bearing carriage and compute the carriage motion.

    Parameters
    ----------
    surface : HeightMap
        The measured guide surface (positions mm, heights µm).
    carriage : Carriage
        Pads, their places and the travel (:meth:`Carriage.single` for one pad).
    gap_fraction : float
        Limit on the local form error under a pad as a fraction of its gap (0 < f <= 1); the default 1/4 is
        common practice, no single source.
    marginal_from : float
        A result at or above this fraction of its limit (and not above the limit) is marginal (0 < m <= 1).
    budget : MotionBudget, optional
        Limits on straightness (µm), pitch and roll (arcsec) of the carriage motion.
    pad_face : HeightMap, optional
        Measured pad face (µm, positive towards the guide); checked against the same limit and its peak
        subtracted from every clearance.
    sample_pitch_mm : float, optional
        Largest spacing of the sample points under a pad (default ``min(length, width) / 20``), mm.
    method : {"linear", "cubic"}
        Interpolation of the surface between its stations.
    progress : callable, optional
        Called with 1 after each carriage position (for a progress bar); never prints itself.
    uncertainty : SurveyErrors, optional
        Monte Carlo height errors of ``surface``'s stations from its uncertainty budget: each check of the
        surface is then judged with the ISO 14253-1 default rule and the U the budget gives that figure
        (:mod:`flatcheck.bearing._uncertainty`); without it, simple acceptance (said in the notes).

    Returns
    -------
    BearingResult

    Raises
    ------
    InputValueError
        Bad fractions, a step above a tenth of a pad length.
    GeometryError
        No carriage position keeps all pads over the surveyed area.
    """
    gap_fraction = _positive(gap_fraction, "gap fraction")
    if gap_fraction > 1.0:
        raise InputValueError(f"gap fraction {gap_fraction:g} is above 1", fix="give a fraction such as 0.25")
    marginal_from = _positive(marginal_from, "marginal fraction")
    if marginal_from > 1.0:
        raise InputValueError(f"marginal fraction {marginal_from:g} is above 1", fix="give a fraction such as 0.8")
    budget = MotionBudget() if budget is None else budget
    pads = carriage.active_pads
    xs, y0, step = station_positions(surface, carriage)
    face = pad_face_form(pad_face) if pad_face is not None else None
    face_peak = 0.0 if face is None else max(face.peak_um, 0.0)
    fps = [footprint(p.pad, pitch_mm=sample_pitch_mm) for p in pads]

    # One interpolation call per pad for the whole travel (building the interpolant is the costly part):
    # samples[i] has shape (n_positions, m + 1), the last column being the pad centre.
    samples = []
    for p, fp in zip(pads, fps):
        u = np.append(fp.u_mm, 0.0)[None, :] + (xs + p.along_mm)[:, None]
        v = np.broadcast_to(np.append(fp.v_mm, 0.0)[None, :] + (y0 + p.across_mm), u.shape)
        samples.append(surface.sample(u, v, method=method))

    stations, excluded = [], []
    for k, x in enumerate(xs):
        per_pad = []
        for p, fp, zs in zip(pads, fps, samples):
            ps = _pad_station(
                p.pad, fp, x + p.along_mm, y0 + p.across_mm, zs[k, :-1], zs[k, -1], p.name, face_peak
            )
            if ps is None:
                excluded.append((float(x), f"pad {p.name!r} leaves the surveyed area"))
                break
            per_pad.append(ps)
        else:
            height, gx, gy = _carriage_attitude(pads, per_pad)
            stations.append(
                CarriageStation(
                    x_mm=float(x),
                    y_mm=y0,
                    mean_height_um=height,
                    pitch_arcsec=gx * _UM_PER_MM_TO_ARCSEC,
                    roll_arcsec=gy * _UM_PER_MM_TO_ARCSEC,
                    local_flatness_um=max(s.local_flatness_um for s in per_pad),
                    clearance_um=min(s.clearance_um for s in per_pad),
                    pads=tuple(per_pad),
                )
            )
        if progress is not None:
            progress(1)
    if not stations:
        xmin, xmax, ymin, ymax = surface.extent_mm
        raise GeometryError(
            "no carriage position keeps every pad over the surveyed area "
            f"(x {xmin:g} to {xmax:g} mm, y {ymin:g} to {ymax:g} mm)",
            where="travel / pad positions",
            fix="check the travel limits, the pad offsets and the y position (--y-mm) against the measured surface",
        )

    x_ok = np.array([s.x_mm for s in stations])
    path = np.array([s.mean_height_um for s in stations])
    pitch_fixed, roll_fixed = attitude_determined(pads)
    pitch = np.array([s.pitch_arcsec if pitch_fixed else np.nan for s in stations])
    roll = np.array([s.roll_arcsec if roll_fixed else np.nan for s in stations])
    raw = surface.sample(x_ok, np.full_like(x_ok, y0), method=method)
    raw_ok = np.isfinite(raw)
    motion = CarriageMotion(
        x_mm=x_ok,
        path_um=path,
        pitch_path_arcsec=pitch,
        roll_path_arcsec=roll,
        raw_profile_um=raw,
        straightness_um=straightness_mz_um(x_ok, path),
        raw_straightness_um=straightness_mz_um(x_ok[raw_ok], raw[raw_ok]) if raw_ok.sum() >= 3 else float("nan"),
        pitch_arcsec=float(np.ptp(pitch)) if pitch_fixed else float("nan"),
        roll_arcsec=float(np.ptp(roll)) if roll_fixed else float("nan"),
        pitch_determined=pitch_fixed,
        roll_determined=roll_fixed,
    )

    # ------------------------------------------------------------------ checks
    limits = {p.name: gap_fraction * p.pad.gap_um for p in pads}
    gaps = {p.name: p.pad.gap_um for p in pads}
    basis_gap = f"{gap_fraction:g} of the air gap (common practice, no published ratio)"
    # U of each figure from the survey's budget (ISO 14253-1 rule), or none (simple acceptance)
    unc_info, u_of = _check_uncertainties(surface, pads, fps, x_ok, y0, uncertainty, method, limits, gaps,
                                          pitch_fixed, roll_fixed)
    checks = []
    lf_ratio = np.array([max(ps.local_flatness_um / limits[ps.name] for ps in s.pads) for s in stations])
    worst = int(np.argmax(lf_ratio))
    worst_pad = max(stations[worst].pads, key=lambda ps: ps.local_flatness_um / limits[ps.name])
    lim = limits[worst_pad.name]
    checks.append(
        _make_check(
            "local flatness under pads", worst_pad.local_flatness_um, lim, "um",
            float(lf_ratio[worst]), marginal_from, x_ok, lf_ratio, basis_gap,
            u=None if u_of.get("local_ratio") is None else u_of["local_ratio"] * lim,
        )
    )
    # clearance: the surface peak (plus pad-face peak) consumes part of the gap; contact at ratio > 1
    cl_ratio = np.array([max((gaps[ps.name] - ps.clearance_um) / gaps[ps.name] for ps in s.pads) for s in stations])
    worst = int(np.argmax(cl_ratio))
    worst_pad = min(stations[worst].pads, key=lambda ps: ps.clearance_um / gaps[ps.name])
    gap = gaps[worst_pad.name]
    checks.append(
        _make_check(
            "form under pads against the gap (clearance)", gap - worst_pad.clearance_um,
            gap, "um", float(cl_ratio[worst]), marginal_from, x_ok, cl_ratio,
            "the nominal gap: at or above it the pad touches",
            u=None if u_of.get("clearance_ratio") is None else u_of["clearance_ratio"] * gap,
        )
    )
    if face is not None:  # a pad-face map states no uncertainty: simple acceptance
        lim = min(limits.values())
        r = face.flatness_um / lim
        status, dec = _judge(face.flatness_um, lim, None, r, marginal_from)
        checks.append(Check("pad face flatness", face.flatness_um, lim, "um", r, status, (), basis_gap, None,
                            dec.verdict, dec.rule))
    for name, value, lim, unit, series, key in (
        ("carriage straightness", motion.straightness_um, budget.straightness_um, "um", None, "straightness_um"),
        ("carriage pitch", motion.pitch_arcsec, budget.pitch_arcsec, "arcsec", pitch, "pitch_arcsec"),
        ("carriage roll", motion.roll_arcsec, budget.roll_arcsec, "arcsec", roll, "roll_arcsec"),
    ):
        if lim is None or not math.isfinite(value):  # an angle the pads do not determine: said in the notes
            continue
        r = value / lim
        u = u_of.get(key)
        status, dec = _judge(value, lim, u, r, marginal_from)
        if status == "fit":
            where = ()
        elif series is None:
            where = ((float(x_ok[0]), float(x_ok[-1])),)
        else:
            lo_x, hi_x = float(x_ok[int(np.argmin(series))]), float(x_ok[int(np.argmax(series))])
            where = ((lo_x, lo_x), (hi_x, hi_x))  # positions of the lowest and highest value
        checks.append(Check(name, value, lim, unit, r, status, where, "motion budget (user)", u, dec.verdict,
                            dec.rule))
    order = {"fit": 0, "marginal": 1, "unfit": 2}
    verdict = max((c.status for c in checks), key=order.__getitem__)

    notes = (
        f"Limit: local form under a pad <= {gap_fraction:g} x gap; no standard publishes this ratio, the default "
        "1/4 is common practice.",
        f"Marginal: a result within {marginal_from * 100:.0f}-100 % of its limit, or undecided (within U of it).",
        _rule_note(unc_info),
        "Pad plane: the pad face rests parallel to the least-squares plane of the surface under its footprint, "
        "the nominal gap above it; clearance = gap - highest point above that plane"
        + (" - pad face's highest point above its own least-squares plane." if face is not None else "."),
        "Carriage: least-squares plane through the pad-averaged heights (equal stiffness unless stated).",
    ) + tuple(
        f"{angle.capitalize()} is not determined by this carriage: its pads stand on one line, and pads "
        f"pivoting in their films do not hold the carriage about that line; its {angle} is set by whatever else "
        f"guides it, so no {angle} figure is given" + (f" and the {angle} budget is not checked." if lim is not None
                                                        else ".")
        for angle, fixed, lim in (("pitch", pitch_fixed, budget.pitch_arcsec), ("roll", roll_fixed, budget.roll_arcsec))
        if not fixed and len(pads) > 1
    ) + ((f"The surface is taken as the face {carriage.face!r} the pads ride on, its heights positive towards the "
          "pads; a survey made from above (level, autocollimator) describes a top face, so check that the file "
          "is a survey of this face.",) if carriage.face not in ("top",) else ())
    warnings = _input_warnings(surface, pads, xs, y0, pad_face)
    return BearingResult(
        carriage=carriage,
        limit_um=min(limits.values()),
        gap_fraction=gap_fraction,
        marginal_from=marginal_from,
        local_flatness_max_um=max(s.local_flatness_um for s in stations),
        clearance_min_um=min(s.clearance_um for s in stations),
        stations=tuple(stations),
        excluded=tuple(excluded),
        skipped_pads=tuple(p.name for p in carriage.pads if p.face != carriage.face),
        motion=motion,
        pad_face=face,
        checks=tuple(checks),
        verdict=verdict,
        sampling_pitch_mm=min(fp.pitch_mm for fp in fps),
        step_mm=step,
        notes=notes,
        warnings=warnings,
        uncertainty=unc_info,
    )


#: A survey whose stations are further apart than this fraction of a pad's size (along or across) cannot
#: show the form under the pad: the local flatness then comes mostly from interpolation (a convention of this
#: tool: with fewer than about three stations per pad length the footprint holds at most two of them).
COARSE_SURVEY_FRACTION = 0.5
#: A pad-face map whose extent differs from the pad's size by more than this fraction is probably of
#: another pad, or in other units (a convention of this tool).
PAD_FACE_SIZE_TOLERANCE = 0.10


def _size_mm(levels: np.ndarray, span: float) -> float:
    """Size represented by evenly spaced grid levels: the span plus one spacing (half a cell each side)."""
    return span * levels.size / (levels.size - 1) if levels.size > 1 else span


def _largest_gap(levels: np.ndarray, lo: float, hi: float) -> float:
    """Largest distance between consecutive sorted ``levels`` whose interval overlaps ``(lo, hi)``, mm."""
    if levels.size < 2:
        return float("inf")
    a, b = levels[:-1], levels[1:]
    overlap = (b > lo) & (a < hi)
    return float((b - a)[overlap].max()) if overlap.any() else 0.0


def survey_spacing_mm(surface: HeightMap, pad: PlacedPad, x_from_mm: float, x_to_mm: float, y_mm: float):
    """Spacing of the surveyed stations under a pad's track, along the travel and across it.

    Across: the largest gap between the stations' distinct y positions that overlaps the band the pad sweeps.
    Along: the largest gap between the distinct x positions of the stations inside that band (or, when none
    lies inside, on the nearest y positions either side) that overlaps the stretch the pad covers.

    Parameters
    ----------
    surface : HeightMap
        The measured surface.
    pad : PlacedPad
        The pad (its size and its offsets from the carriage reference point).
    x_from_mm, x_to_mm : float
        First and last position of the carriage reference point, mm.
    y_mm : float
        Carriage reference point across the face, mm.

    Returns
    -------
    (along_mm, across_mm) : tuple of float
    """
    x = np.round(surface.x_mm, 6)
    y = np.round(surface.y_mm, 6)
    half_l, half_w = pad.pad.length_mm / 2.0, pad.pad.width_mm / 2.0
    ylo, yhi = y_mm + pad.across_mm - half_w, y_mm + pad.across_mm + half_w
    xlo, xhi = x_from_mm + pad.along_mm - half_l, x_to_mm + pad.along_mm + half_l
    levels = np.unique(y)
    across = _largest_gap(levels, ylo, yhi)
    inside = (y >= ylo) & (y <= yhi)
    if not inside.any():
        below, above = levels[levels < ylo], levels[levels > yhi]
        near = [v[i] for v, i in ((below, -1), (above, 0)) if v.size]
        inside = np.isin(y, near)
    along = _largest_gap(np.unique(x[inside]), xlo, xhi)
    return along, across


def _input_warnings(surface: HeightMap, pads, xs: np.ndarray, y0: float, pad_face: HeightMap | None) -> tuple:
    """Cautions about the input that do not stop the evaluation (see ``BearingResult.warnings``)."""
    out = []
    xmin, xmax, ymin, ymax = surface.extent_mm
    lx = surface.length_mm or (xmax - xmin)
    ly = surface.width_mm or (ymax - ymin)
    if ly > lx:
        out.append(
            f"the surface is longer across (y, {ly:g} mm) than along x ({lx:g} mm), but the carriage travels "
            "along x with the pad length along x: check that x is the direction of travel"
        )
    worst = None
    for p in pads:
        along, across = survey_spacing_mm(surface, p, float(xs[0]), float(xs[-1]), y0)
        ratio = max(along / p.pad.length_mm, across / p.pad.width_mm)
        if ratio > COARSE_SURVEY_FRACTION and (worst is None or ratio > worst[0]):
            worst = (ratio, p, along, across)
    if worst is not None:
        _, p, along, across = worst
        who = "the pad" if len(pads) == 1 else f"pad {p.name!r}"
        size = (f"Ø{p.pad.length_mm:g} mm" if p.pad.shape == "circle"
                else f"{p.pad.length_mm:g} x {p.pad.width_mm:g} mm")
        along_max, across_max = COARSE_SURVEY_FRACTION * p.pad.length_mm, COARSE_SURVEY_FRACTION * p.pad.width_mm
        out.append(
            f"the surveyed stations are up to {along:.3g} mm apart along the travel and {across:.3g} mm across "
            f"under {who} ({size}), more than half its size: the local flatness under a pad comes mostly from "
            "interpolation between stations, not from measured form; to see that form, survey at most "
            + (f"{along_max:.3g} mm apart both ways" if along_max == across_max
               else f"{along_max:.3g} mm apart along and {across_max:.3g} mm across")
        )
    if pad_face is not None:
        grid = pad_face.grid
        fxmin, fxmax, fymin, fymax = pad_face.extent_mm
        if pad_face.length_mm and pad_face.width_mm:
            fx, fy = pad_face.length_mm, pad_face.width_mm
        elif grid is not None:
            fx, fy = _size_mm(grid[0], fxmax - fxmin), _size_mm(grid[1], fymax - fymin)
        else:
            fx, fy = fxmax - fxmin, fymax - fymin
        odd = sorted({
            (p.pad.shape, p.pad.length_mm, p.pad.width_mm) for p in pads
            if abs(fx - p.pad.length_mm) > PAD_FACE_SIZE_TOLERANCE * p.pad.length_mm
            or abs(fy - p.pad.width_mm) > PAD_FACE_SIZE_TOLERANCE * p.pad.width_mm
        })
        if odd:
            sizes = " and ".join(f"Ø{a:g} mm" if shape == "circle" else f"{a:g} x {b:g} mm" for shape, a, b in odd)
            out.append(
                f"the pad-face map covers {fx:.3g} x {fy:.3g} mm but the pad is {sizes} (more than "
                f"{100 * PAD_FACE_SIZE_TOLERANCE:.0f} % apart): check that the map is of this pad's face, in mm, "
                "with x along the travel"
            )
    return tuple(out)


def _judge(value: float, limit: float, u: float | None, ratio: float, marginal_from: float):
    """Status of one check and its ISO 14253-1 decision (:func:`flatcheck.conformance.decide`).

    Does not conform (value - U above the limit) -> unfit; undecided -> marginal; conforms (value + U within
    the limit) -> fit, or marginal from ``marginal_from`` of the limit. Without U, simple acceptance (the
    decision says so); with U = 0 this is the status of the value alone.
    """
    from ..conformance import CONFORMS, DOES_NOT_CONFORM, decide

    dec = decide(max(float(value), 0.0), float(limit), None if u is None else max(float(u), 0.0))
    if dec.verdict == DOES_NOT_CONFORM:
        return "unfit", dec
    if dec.verdict == CONFORMS and ratio < marginal_from:
        return "fit", dec
    return "marginal", dec


def _make_check(name, value, limit, unit, ratio, marginal_from, x_mm, ratios, basis, *, u=None) -> Check:
    status, dec = _judge(value, limit, u, ratio, marginal_from)
    du = 0.0 if u is None else float(u) / float(limit)  # U as a fraction of the limit, at every position
    if status == "unfit":
        flags = ratios - du > 1.0  # non-conformity proven there
    else:
        flags = (ratios + du > 1.0) | (ratios >= marginal_from)  # not proven fit there
    return Check(name, float(value), float(limit), unit, float(ratio), status, _ranges(x_mm, flags), basis,
                 None if u is None else float(u), dec.verdict, dec.rule)


def _check_uncertainties(surface, pads, fps, x_ok, y0, uncertainty, method, limits, gaps, pitch_fixed, roll_fixed):
    """(BearingUncertainty, {figure: U}) from the survey's Monte Carlo height errors, or simple acceptance."""
    from ._uncertainty import MODEL_TEXT, NO_U_TEXT, BearingUncertainty, bearing_trials, local_uncertainty

    if uncertainty is None:
        return BearingUncertainty("simple-acceptance", NO_U_TEXT, "-"), {}
    E = np.asarray(uncertainty.errors_um, dtype=float)
    per_trial = x_ok.size * sum(fp.u_mm.size for fp in fps)
    k = bearing_trials(E.shape[0], per_trial)
    u = local_uncertainty(surface, pads, fps, x_ok, y0, E[:k], method=method,
                          limits_um=[limits[p.name] for p in pads], gaps_um=[gaps[p.name] for p in pads],
                          pitch_fixed=pitch_fixed, roll_fixed=roll_fixed)
    lim = min(limits.values())
    gap = min(gaps.values())
    shown = {"local flatness under pads": u["local_ratio"] * lim,
             "form under pads against the gap (clearance)": u["clearance_ratio"] * gap,
             "carriage straightness": u["straightness_um"]}
    for name, key in (("carriage pitch", "pitch_arcsec"), ("carriage roll", "roll_arcsec")):
        if u[key] is not None:
            shown[name] = u[key]
    info = BearingUncertainty("iso14253-1", uncertainty.source, MODEL_TEXT, int(u["trials"]),
                              surface_u_um=uncertainty.surface_u_um, seed=uncertainty.seed,
                              budget_trials=uncertainty.budget_trials, expanded_uncertainty=shown)
    return info, u


def _rule_note(info) -> str:
    """The decision rule of the checks, in a sentence."""
    if info.rule != "iso14253-1":
        return f"Decision rule: {info.source}."
    return (f"Decision rule: ISO 14253-1:2017 default: fit only when value + U is within the limit, unfit only "
            f"when value - U is beyond it, otherwise marginal; U (95 %) of each figure from {info.source}, "
            f"{info.trials} trials carried to the figures under the pads (docs/methods.md); the pad-face map "
            "and the film checks state no uncertainty and are judged by simple acceptance.")
