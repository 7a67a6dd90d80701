"""Everything flatcheck states about one surface: flatness, lines, local flatness, uncertainty.

This module joins the pieces of the core for the commands that report on a
surface (``reduce``, ``grade``, ``report``, ``demo``) so that they all state the
same numbers computed the same way. It is pure: it takes a loaded input
(height map, and for surveys the survey and its reduction) and returns a frozen
:class:`SurfaceEvaluation`; its :meth:`SurfaceEvaluation.to_dict` is the JSON
document of ``flatcheck reduce --json``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import InputValueError
from ..form import FlatnessReport, evaluate_flatness
from ..form import HeightMap
from ._measured import MeasuredSurface

__all__ = [
    "Window",
    "parse_window",
    "SurveyUncertainty",
    "survey_uncertainty",
    "SurfaceEvaluation",
    "evaluate_surface",
]


@dataclass(frozen=True)
class Window:
    """A window for local flatness: rectangle ``length_mm`` x ``width_mm`` or circle of ``diameter_mm``."""

    shape: str  # "rect" | "circle"
    length_mm: float
    width_mm: float

    @property
    def text(self) -> str:
        """The window as written on the command line (``250x250`` or ``d80``), with mm."""
        if self.shape == "circle":
            return f"d{self.length_mm:g} mm"
        return f"{self.length_mm:g} x {self.width_mm:g} mm"


def parse_window(text: str | None, *, where: str = "--window") -> Window | None:
    """Parse ``"250x250"`` (mm), ``"d80"`` (circle, mm), ``"none"`` or ``"auto"`` (returns None for both).

    Raises
    ------
    InputValueError
        If the text is not of one of these forms or a size is not positive.
    """
    if text is None:
        return None
    s = str(text).strip().lower().replace(" ", "")
    if s in ("", "none", "auto", "off"):
        return None
    try:
        if s.startswith("d"):
            d = float(s[1:])
            win = Window("circle", d, d)
        else:
            a, b = s.split("x")
            win = Window("rect", float(a), float(b))
    except ValueError:
        raise InputValueError(
            f"window {text!r} is not a size", where=where, fix="write LxW in mm (e.g. 250x250) or dD for a circle (e.g. d80)"
        ) from None
    if not (win.length_mm > 0 and win.width_mm > 0 and np.isfinite(win.length_mm) and np.isfinite(win.width_mm)):
        raise InputValueError(f"window {text!r} must have positive sizes", where=where, fix="e.g. 250x250")
    from ..limits import check_range

    for v in {win.length_mm, win.width_mm}:  # before any scan is sized from it (docs/limits.md)
        check_range(v, "window_mm", where=where, name=f"window {text!r}: a side of")
    return win


#: Local area of the plate standards' local-flatness requirement, used when no window is given
#: (ISO 8512-2 states a local tolerance over 250 x 250 mm; scope verified, see docs/methods.md).
DEFAULT_WINDOW = Window("rect", 250.0, 250.0)


# ----------------------------------------------------------------------------- uncertainty
@dataclass(frozen=True)
class SurveyUncertainty:
    """Monte Carlo uncertainty of the flatness of a surface (µm), from its whole budget.

    Attributes
    ----------
    minimum_zone, least_squares : flatcheck.form.FlatnessUncertainty
        Results for the minimum-zone and least-squares flatness from one set of trials with every
        source of the budget; ``expanded_um`` is the U of the whole budget (bias-corrected, see
        :class:`flatcheck.evaluation.UncertaintyBudget`).
    basis : str
        What was propagated, in a line (the budget has the details).
    notes : tuple of str
        Cautions about the result (e.g. a reading scatter estimated with few degrees of freedom).
    u_dof : int or None
        Degrees of freedom of the reading uncertainty when it was estimated (residuals or repeat
        readings; its own uncertainty then propagated); None when stated or a default.
    budget : UncertaintyBudget or None
        The budget: every source, its basis and contribution.
    """

    minimum_zone: object
    least_squares: object
    basis: str
    notes: tuple = ()
    u_dof: int | None = None
    budget: object = None

    @property
    def note(self) -> str:
        """How the uncertainty was obtained, with its cautions."""
        mz = self.minimum_zone
        lo, hi = mz.corrected_interval_um if mz.corrected_interval_um is not None else mz.interval_um
        text = (
            f"Monte Carlo propagation of the whole budget (JCGM 101:2008), {mz.trials} trials, seed {mz.seed}; "
            f"{self.basis}. U covers the 95 % interval {lo:.3g} to {hi:.3g} µm, corrected for the noise bias of the "
            f"minimum zone (estimated bias {(mz.estimated_bias_um or mz.bias_um):+.2g} µm); at least twice the standard "
            "uncertainty."
        )
        return " ".join([text] + [n[:1].upper() + n[1:] + "." for n in self.notes])


def _basis_line(budget) -> str:
    """The budget in one line: each source that contributes, marked when a default."""
    parts = []
    for e in budget.entries:
        if not e.applies or e.standard_uncertainty_um <= 0:
            continue
        text = f"{e.name} {e.standard_uncertainty_um:.2g} µm" + (" (default)" if e.default else "")
        if e.name == "reading" and budget.reading_scatter_um is not None:
            text += f" (scatter of the residuals sigma0 {budget.reading_scatter_um:.2g} µm, {budget.reading_dof} dof)"
        parts.append(text)
    return "sources (contribution to u): " + ", ".join(parts) if parts else "no source contributes"


def survey_uncertainty(
    loaded: MeasuredSurface,
    *,
    trials: int = 100_000,
    seed: int | None = None,
    u_height_um: float | None = None,
    progress=None,
    lab_defaults=None,
    contribution_trials: int | None = None,
    keep_trials: int = 0,
) -> SurveyUncertainty:
    """The uncertainty of a surface's flatness from its whole budget (:func:`uncertainty_budget`).

    Every source of a survey is propagated together by Monte Carlo through the reduction
    operator and the exact minimum zone (JCGM 101:2008), minimum zone and least squares from the
    same trials; each source is also propagated alone for its contribution. A source the survey
    file does not state takes a marked default (``lab_defaults`` or the built-in one), so a
    survey with no statements gets a budget of marked defaults; with fewer than 3 degrees of
    freedom in its residuals (or a scatter of exactly zero) the reading repeatability is the
    default too.

    Parameters
    ----------
    loaded : MeasuredSurface
    trials : int
        Monte Carlo trials of the whole budget (JCGM 101 suggests >= 1e4/(1-p); 1e5 by default).
    seed : int, optional
        Seed for reproducible results (reported either way).
    u_height_um : float, optional
        Height-map inputs only: standard uncertainty of each height in µm.
    progress : callable, optional
        ``progress(k)``; the increments add up to ``trials``.
    lab_defaults : LabDefaults, optional
        A lab's own defaults (:func:`flatcheck.io.read_uncertainty_defaults`).
    contribution_trials : int, optional
        Trials of each source alone (default ``min(trials, 10 000)``).
    keep_trials : int
        Keep the height errors of this many trials (``budget.trial_errors_um``), e.g. for the bearing's
        local figures.

    Raises
    ------
    InputValueError
        A height map without ``u_height_um``, a survey too large for the dense operator, an
        implausible uncertainty input.
    """
    from ._budget import uncertainty_budget

    budget = uncertainty_budget(loaded, trials=trials, seed=seed, progress=progress, lab_defaults=lab_defaults,
                                u_height_um=u_height_um, contribution_trials=contribution_trials,
                                keep_trials=keep_trials)
    return SurveyUncertainty(budget.minimum_zone, budget.least_squares, _basis_line(budget), budget.notes,
                             budget.reading_dof, budget)


# ----------------------------------------------------------------------------- evaluation
@dataclass(frozen=True, eq=False)
class SurfaceEvaluation:
    """What flatcheck states about one surface.

    Attributes
    ----------
    loaded : MeasuredSurface
    flatness : FlatnessReport
        Reference planes (LS, MZ, corner planes) and ISO 12781-1 parameters, µm.
    lines : tuple of dict
        Per measured line: name, closure_um, meaning, run_spread_um, straightness_um
        (minimum zone, ISO 12780-1) and straightness_ls_um.
    local : object or None
        Local flatness result for ``window`` (None when no window fits the surface).
    window : Window or None
    uncertainty : SurveyUncertainty or None
    notes : tuple of str
    height_step_um : float
        The height step the measurement resolves (µm, :meth:`MeasuredSurface.height_step_um`):
        heights printed without an uncertainty are rounded to it.
    """

    loaded: MeasuredSurface
    flatness: FlatnessReport
    lines: tuple
    local: object
    window: Window | None
    uncertainty: SurveyUncertainty | None
    notes: tuple
    height_step_um: float = 0.001

    @property
    def heightmap(self) -> HeightMap:
        """The evaluated height map (µm about the least-squares plane for surveys)."""
        return self.loaded.heightmap

    @property
    def heightmap_about_ls(self) -> HeightMap:
        """The heights referred to the least-squares plane of all points (µm), as the terminal, ``--map-out``
        and the report show them: a survey's heights already are (to rounding); a height map's are not."""
        p = self.flatness.lspl
        hm = self.heightmap
        return hm.with_heights(hm.height_um - (p.a_um + p.b_um_per_mm * hm.x_mm + p.c_um_per_mm * hm.y_mm))

    @property
    def method(self) -> str:
        """``"least-squares"``, ``"moody"`` or ``"height-map"``."""
        red = self.loaded.reduction
        return red.method if red is not None else "height-map"

    @property
    def method_text(self) -> str:
        """The reduction method in words."""
        return {
            "least-squares": "least-squares network adjustment of all readings",
            "moody": "classic Union Jack (Moody) worksheet, referred to the least-squares plane",
            "height-map": "heights as given (height-map file)",
        }[self.method]

    @property
    def uncertainty_note(self) -> str:
        """How the uncertainty was obtained, or an empty string."""
        return "" if self.uncertainty is None else self.uncertainty.note

    def to_dict(self, *, nodes: bool = True) -> dict:
        """The JSON document of ``flatcheck reduce --json`` (heights in µm, positions in mm).

        ``nodes=False`` leaves the (possibly very long) list of nodes out.
        """
        hm = self.heightmap
        fr = self.flatness
        node_list = self._nodes() if nodes else []
        refs = [fr.mzpl, fr.lspl] + [p for p in (fr.three_corner, fr.diagonal) if p is not None]
        flat = {
            "minimum_zone_um": fr.mzpl.fltt_um,
            "least_squares_um": fr.lspl.fltt_um,
            # peak, valley and RMS about the least-squares plane (ISO 12781-1 FLTp, FLTv, FLTq of the LSPL)
            "rms_um": fr.lspl.fltq_um,
            "peak_um": fr.lspl.fltp_um,
            "valley_um": fr.lspl.fltv_um,
            "minimum_zone_normal_um": fr.mzpl.normal_fltt_um,
            "references": [
                {
                    "reference": p.reference,
                    "fltt_um": p.fltt_um,
                    "fltp_um": p.fltp_um,
                    "fltv_um": p.fltv_um,
                    "fltq_um": p.fltq_um,
                    "plane": {"a_um": p.a_um, "b_um_per_mm": p.b_um_per_mm, "c_um_per_mm": p.c_um_per_mm},
                }
                for p in refs
            ],
        }
        if self.uncertainty is not None:
            mz, ls = self.uncertainty.minimum_zone, self.uncertainty.least_squares
            b = self.uncertainty.budget
            flat.update(
                expanded_uncertainty_um=mz.expanded_um,
                standard_uncertainty_um=mz.std_um,
                coverage_interval_um=list(mz.corrected_interval_um or mz.interval_um),
                monte_carlo_interval_um=list(mz.interval_um),
                shortest_interval_um=list(mz.shortest_interval_um),
                monte_carlo_mean_um=mz.mean_um,
                bias_um=mz.estimated_bias_um if mz.estimated_bias_um is not None else mz.bias_um,
                bias_corrected_um=mz.corrected_estimate_um,
                coverage_factor=(mz.expanded_um / mz.std_um) if mz.std_um > 0 else None,
                least_squares_expanded_uncertainty_um=ls.expanded_um,
                least_squares_standard_uncertainty_um=ls.std_um,
                monte_carlo={
                    "trials": mz.trials, "seed": mz.seed, "basis": self.uncertainty.basis,
                    # degrees of freedom of a reading scatter estimated from the residuals (None: stated)
                    "reading_dof": self.uncertainty.u_dof,
                    "contribution_trials": None if b is None else b.contribution_trials,
                },
            )
            if b is not None:
                flat["uncertainty_budget"] = b.to_list()
                flat["root_sum_of_squares_um"] = b.rss_um
                if b.repeat is not None:
                    r = b.repeat
                    flat["repeat_readings"] = {
                        "kind": r.kind, "unit": r.unit, "readings": r.n, "dof": r.dof,
                        "standard_deviation": r.s if np.isfinite(r.s) else None, "range": r.range_,
                        "tolerance": r.tolerance, "verdict": r.verdict, "used": r.used, "note": r.note,
                    }
        surface = {"description": hm.label, "length_mm": hm.length_mm, "width_mm": hm.width_mm}
        doc = {
            "input": self.loaded.path,
            "kind": self.loaded.kind,
            "method": self.method,
            "units": "um",
            # the height step the measurement resolves: printed heights are rounded to it
            "height_step_um": self.height_step_um,
            "surface": surface,
            "nodes": node_list,
            "flatness": flat,
            "lines": list(self.lines),
            "local_flatness": self._local_dict(),
            "notes": list(self.notes),
        }
        sv, red = self.loaded.survey, self.loaded.reduction
        if sv is not None:
            surface.update(
                description=sv.surface.description, ident=sv.surface.ident, material=sv.surface.material,
                length_mm=sv.surface.length_mm, width_mm=sv.surface.width_mm,
            )
            ins = sv.instrument
            doc["instrument"] = {"kind": ins.kind, "unit": ins.unit, "reports": ins.reports}
            doc["pattern"] = sv.pattern
            doc["conditions"] = {"date": sv.date, "temperature_c": sv.temperature_c, "notes": sv.notes}
            doc["residuals"] = {
                "observations": int(red.rank.n_observations),
                "redundancy": int(red.redundancy),
                # None when the readings give no scatter estimate, with the reason beside it
                "sigma0_um": float(red.sigma0_um) if np.isfinite(red.sigma0_um) else None,
                "sigma0_reading": float(red.sigma0_reading) if np.isfinite(red.sigma0_reading) else None,
                "sigma0_reason": None if np.isfinite(red.sigma0_um) else "no redundancy: no scatter estimate",
                "outliers": [
                    {
                        "line": o.line, "run": o.run, "step": o.step, "from": o.station_from, "to": o.station_to,
                        "reading": o.reading, "residual_um": o.residual_um, "w": o.w, "text": o.describe(),
                        # diagnosis: suspect group (1, 2...), 0 = flagged only through a suspect, None = not
                        # diagnosed; readings in the group; w once the suspects are set aside
                        "group": o.group, "group_size": o.group_size, "group_lines": list(o.group_lines),
                        "w_after": o.w_after if np.isfinite(o.w_after) else None,
                    }
                    for o in red.outliers
                ],
                "readings": self._readings() if nodes else [],
            }
            doc["instrument_zeros"] = [
                {"lines": list(z.lines), "value": z.value, "unit": z.unit, "rise_um": z.rise_um, "turned": z.turned}
                for z in red.instrument_zeros
            ]
            doc["warnings"] = list(red.warnings)
        return doc

    def _readings(self) -> list:
        """Every reading with its residual (µm), standardised residual w and redundancy number.

        Order of :func:`flatcheck.survey.observations` (line by line, run by run, step by step from the
        line's first station). ``reading`` is the value as written in the run (its order and sign); ``w``
        is None where the reading cannot be tested (redundancy number 0, or no scatter to test against).
        """
        from ..survey import observations

        sv, red = self.loaded.survey, self.loaded.reduction
        obs = observations(sv)
        reads_heights = sv.instrument.reads_heights
        w = red.standardized_residual
        out = []
        for k in range(obs.value_um.size):
            ln = sv.lines[int(obs.line[k])]
            run = ln.runs[int(obs.run[k])]
            st = int(obs.step[k])
            written = len(run.readings) - 1 - st if run.order == "reverse" else st
            wk = float(w[k])
            out.append(
                {
                    "line": ln.name,
                    "run": int(obs.run[k]) + 1,
                    "step": st + 1,
                    "from": "" if reads_heights else ln.stations[st],
                    "to": ln.stations[st] if reads_heights else ln.stations[st + 1],
                    "reading": float(run.readings[written]),
                    "residual_um": float(red.residual_um[k]) + 0.0,
                    "w": wk if np.isfinite(wk) else None,
                    "redundancy": float(red.redundancy_numbers[k]),
                }
            )
        return out

    def _nodes(self) -> list:
        hm = self.heightmap
        xs, ys, zs = hm.x_mm.tolist(), hm.y_mm.tolist(), hm.height_um.tolist()
        if hm.names is None:
            return [{"x_mm": x, "y_mm": y, "height_um": z} for x, y, z in zip(xs, ys, zs)]
        return [{"name": n, "x_mm": x, "y_mm": y, "height_um": z} for n, x, y, z in zip(hm.names, xs, ys, zs)]

    def _local_dict(self):
        if self.local is None or self.window is None:
            return None
        loc = self.local
        return {
            "window": self.window.text,
            "shape": self.window.shape,
            "length_mm": self.window.length_mm,
            "width_mm": self.window.width_mm,
            "max_um": float(loc.worst_um),
            "x_mm": float(loc.worst_x_mm),
            "y_mm": float(loc.worst_y_mm),
            "positions": int(np.size(loc.flatness_um)),
        }


def _auto_window_note(hm: HeightMap) -> str | None:
    """Why the automatic 250 x 250 mm window gave no local flatness, and a window that fits.

    Parameters
    ----------
    hm : HeightMap
        The evaluated surface (positions in mm).

    Returns
    -------
    str or None
        The note, or None when the window fits both ways.
    """
    xmin, xmax, ymin, ymax = hm.extent_mm
    span_x, span_y = xmax - xmin, ymax - ymin
    L, W = DEFAULT_WINDOW.length_mm, DEFAULT_WINDOW.width_mm
    short = [d for d, span, size in (("x", span_x, L), ("y", span_y, W)) if span < size - 1e-9]
    if not short:
        return None
    fit_x, fit_y = min(L, math.floor(span_x + 1e-9)), min(W, math.floor(span_y + 1e-9))
    if len(short) == 2:
        return (
            f"no local flatness: the whole surveyed area ({span_x:.0f} x {span_y:.0f} mm) is smaller than the default "
            f"{DEFAULT_WINDOW.text} window, so the flatness above is also the local flatness over any such area; "
            "give a smaller --window for a local figure"
        )
    text = (
        f"no local flatness: the default {DEFAULT_WINDOW.text} window is larger than the surveyed area "
        f"({span_x:.0f} x {span_y:.0f} mm) along {' and '.join(short)}"
    )
    if fit_x >= 1 and fit_y >= 1:
        text += f"; give a window that fits, e.g. --window {fit_x:g}x{fit_y:g}"
    return text


def evaluate_surface(
    loaded: MeasuredSurface,
    *,
    window: str | Window | None = "auto",
    monte_carlo: dict | None = None,
    local_progress=None,
) -> SurfaceEvaluation:
    """Evaluate a loaded surface: flatness, lines, local flatness and (optionally) uncertainty.

    Parameters
    ----------
    loaded : MeasuredSurface
    window : str or Window or None
        Local-flatness window (``"250x250"``, ``"d80"``), ``"auto"`` for 250 x 250 mm when it
        fits inside the surveyed area, ``"none"`` or None for no local flatness.
    monte_carlo : dict, optional
        Keyword arguments of :func:`survey_uncertainty` (trials, seed, u_height_um, progress,
        lab_defaults, contribution_trials);
        None for no uncertainty evaluation.
    local_progress : callable, optional
        Progress of the local-flatness scan, as :func:`flatcheck.form.local_flatness` takes it.
    """
    hm = loaded.heightmap
    notes = list(getattr(hm, "notes", ()))  # what the reader noticed (repeats averaged, an implausible extent)
    flat = evaluate_flatness(hm.x_mm, hm.y_mm, hm.height_um)
    lines = _line_results(loaded)
    auto = isinstance(window, str) and window.strip().lower() == "auto"
    win = DEFAULT_WINDOW if auto else (parse_window(window) if isinstance(window, str) or window is None else window)
    local = None
    if win is not None:
        xmin, xmax, ymin, ymax = hm.extent_mm
        fits = win.length_mm <= xmax - xmin + 1e-9 and win.width_mm <= ymax - ymin + 1e-9
        if fits:
            try:
                local = _local(hm, win, progress=local_progress)
            except InputValueError as exc:  # the default window is below the station spacing
                if not auto:
                    raise
                notes.append(f"no local flatness over the default {win.text} window: {exc.message}")
                win = None
        elif auto:
            note = _auto_window_note(hm)
            if note:
                notes.append(note)
            win = None
        else:
            notes.append(f"the window {win.text} does not fit inside the surveyed area; no local flatness")
            win = None
    unc = None
    if monte_carlo is not None:
        unc = survey_uncertainty(loaded, **monte_carlo)
        notes.extend(unc.notes)
    step = loaded.height_step_um(lab=(monte_carlo or {}).get("lab_defaults"))
    return SurfaceEvaluation(loaded, flat, tuple(lines), local, win, unc, tuple(notes), step)


def _line_results(loaded: MeasuredSurface) -> list:
    sv, red = loaded.survey, loaded.reduction
    if sv is None:
        return []
    from ..form import evaluate_straightness

    hm = loaded.heightmap
    pos = {n: i for i, n in enumerate(hm.names)}
    closures = {c.line: c for c in red.closures}
    out = []
    for ln in sv.lines:
        idx = np.array([pos[s] for s in ln.stations])
        s_mm = np.hypot(hm.x_mm[idx] - hm.x_mm[idx[0]], hm.y_mm[idx] - hm.y_mm[idx[0]])
        st = evaluate_straightness(s_mm, hm.height_um[idx])
        c = closures.get(ln.name)
        out.append(
            {
                "name": ln.name,
                "stations": len(ln.stations),
                "foot_spacing_mm": ln.foot_spacing_mm,
                "closure_um": None if c is None else c.closure_um,
                "closure_station": None if c is None else c.station,
                "meaning": None if c is None else c.meaning,
                "run_spread_um": None if c is None else c.run_spread_um,
                "straightness_um": st.mzli.strt_um,
                "straightness_ls_um": st.lsli.strt_um,
            }
        )
    return out


def _local(hm: HeightMap, win: Window, progress=None):
    from ..form import local_flatness

    size = win.length_mm if win.shape == "circle" else (win.length_mm, win.width_mm)
    return local_flatness(hm, size_mm=size, shape=win.shape, progress=progress)
