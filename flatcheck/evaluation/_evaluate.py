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
    return win


#: Local area of the plate standards' local-flatness requirement, used when no window is given
#: (ISO 8512-2 states a local tolerance over 250 x 250 mm; scope verified, see docs/methods.md).
DEFAULT_WINDOW = Window("rect", 250.0, 250.0)


# ----------------------------------------------------------------------------- uncertainty
@dataclass(frozen=True)
class SurveyUncertainty:
    """Monte Carlo uncertainty of the flatness of a surface (µm).

    Attributes
    ----------
    minimum_zone, least_squares : flatcheck.uncertainty.FlatnessUncertainty
        Results for the minimum-zone and least-squares flatness.
    basis : str
        What was propagated (reading uncertainty and where it came from, scale, foot spacing).
    notes : tuple of str
        Cautions about the result (e.g. a reading scatter estimated with few degrees of freedom).
    u_dof : int or None
        Degrees of freedom of the reading uncertainty when it was estimated from the survey's
        own residuals (its uncertainty then propagated); None when it was stated.
    """

    minimum_zone: object
    least_squares: object
    basis: str
    notes: tuple = ()
    u_dof: int | None = None

    @property
    def note(self) -> str:
        """How the uncertainty was obtained, with its cautions."""
        mz = self.minimum_zone
        lo, hi = mz.interval_um
        text = (
            f"Monte Carlo propagation (JCGM 101:2008), {mz.trials} trials, seed {mz.seed}; {self.basis}. "
            f"U is twice the standard deviation of the simulated minimum-zone flatness (k = 2 equivalent); "
            f"95 % interval {lo:.3f} to {hi:.3f} µm, simulated mean {mz.mean_um:.3f} µm."
        )
        return " ".join([text] + [n[:1].upper() + n[1:] + "." for n in self.notes])


def survey_uncertainty(
    loaded: MeasuredSurface,
    *,
    trials: int = 100_000,
    seed: int | None = None,
    u_height_um: float | None = None,
    progress=None,
) -> SurveyUncertainty:
    """Propagate the reading uncertainty of a survey (or a height map) to its flatness.

    For a survey, the readings' standard uncertainty is the instrument's stated
    ``reading_uncertainty`` when the file gives one, else the survey's own scatter
    (sigma0 of the least-squares adjustment, scaled with the foot spacing). Such an
    estimate is itself uncertain: with ``nu`` = the redundancy, each trial draws the
    scatter as ``sigma0 * sqrt(nu / chi2_nu)`` (see :mod:`flatcheck.uncertainty`), so
    the interval keeps its 95 % coverage with few degrees of freedom; fewer than 3
    are refused, fewer than 10 noted. The instrument's scale and foot-spacing
    uncertainties, when stated, are added as common relative errors. The reduction
    is linear in the readings, so each trial is one product with the reduction
    operator.

    For a height map, ``u_height_um`` (standard uncertainty of each height, µm,
    independent) is required.

    Parameters
    ----------
    loaded : MeasuredSurface
    trials : int
        Monte Carlo trials (JCGM 101 suggests >= 1e4/(1-p), 2e5 for p = 0.95; 1e5 by default).
    seed : int, optional
        Seed for reproducible results (reported either way).
    u_height_um : float, optional
        Height-map inputs only: standard uncertainty of each height in µm.
    progress : callable, optional
        ``progress(k)`` after each batch of ``k`` trials.

    Raises
    ------
    InputValueError
        When there is nothing to propagate (no stated uncertainty and fewer than 3 degrees
        of freedom to estimate one) or the survey is too large for the dense operator.
    """
    from ..form import monte_carlo_flatness

    if seed is not None and (isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or seed < 0):
        raise InputValueError(f"the seed must be a whole number 0 or above, got {seed!r}", where="--seed",
                              fix="give --seed 0 or a larger whole number (or leave it out)")
    hm = loaded.heightmap
    notes = []
    u_dof = None
    if loaded.survey is None:
        if u_height_um is None:
            raise InputValueError(
                "a height map carries no reading uncertainty",
                where=loaded.path,
                fix="give the standard uncertainty of one height with --u-height-um",
            )
        kw = dict(G=None, u_value_um=float(u_height_um))
        basis = f"standard uncertainty {u_height_um:g} µm of each height, as given"
        values = hm.height_um
        x, y = hm.x_mm, hm.y_mm
    else:
        from ..survey import observations

        survey, red = loaded.survey, loaded.reduction
        op = red.operator
        if op is None:
            raise InputValueError(
                f"the survey has {red.rank.n_observations} readings, too many for the Monte Carlo operator",
                where=loaded.path,
                fix="evaluate the uncertainty on a coarser survey or state it from the instrument's calibration",
            )
        obs = observations(survey)
        inst = survey.instrument
        if inst.reading_uncertainty is not None:
            u = float(inst.reading_uncertainty) * np.abs(obs.um_per_unit)
            basis = f"reading standard uncertainty {inst.reading_uncertainty:g} {inst.unit} as stated for the instrument"
        else:
            nu = int(red.redundancy)
            if nu < 3 or not np.isfinite(red.sigma0_um):
                have = "no redundancy" if nu <= 0 else f"only {nu} degree{'s' if nu > 1 else ''} of freedom"
                raise InputValueError(
                    f"no reading uncertainty is stated, and the survey's residuals give {have} to estimate one "
                    "(with fewer than 3 the flatness has no finite standard uncertainty)",
                    where=loaded.path,
                    fix="state the instrument's reading uncertainty in the survey ([instrument] reading_uncertainty, "
                    "in the reading unit; see docs/survey-format.md), or walk lines forward and back so that the "
                    "readings check each other",
                )
            if red.ref_base_mm:
                u = red.sigma0_um * obs.base_mm / red.ref_base_mm
            else:
                u = np.full(obs.value_um.size, red.sigma0_um)
            u_dof = nu
            basis = (
                f"reading scatter from the survey's own residuals (sigma0 {red.sigma0_um:.3f} µm, "
                f"{nu} degrees of freedom; drawn per trial as sigma0 x sqrt({nu} / chi-squared({nu})) so that "
                "its own uncertainty is included)"
            )
            if nu < 10:
                notes.append(
                    f"the reading scatter is estimated from only {nu} degrees of freedom, so it is itself uncertain "
                    "and widens the interval; stating the instrument's reading uncertainty (reading_uncertainty "
                    "in the survey's instrument table) or walking lines forward and back gives a firmer figure"
                )
        kw = dict(G=op.G, u_value_um=u, u_dof=u_dof)
        if inst.scale_uncertainty_rel:
            kw["scale_u_rel"] = float(inst.scale_uncertainty_rel)
            basis += f", scale {inst.scale_uncertainty_rel:g} relative"
        if inst.foot_spacing_uncertainty_mm and not inst.reads_heights:
            kw["group"] = obs.base_mm
            kw["group_u_rel"] = {
                float(b): float(inst.foot_spacing_uncertainty_mm) / float(b) for b in np.unique(obs.base_mm) if b > 0
            }
            basis += f", foot spacing {inst.foot_spacing_uncertainty_mm:g} mm"
        order = np.array([survey.station_index[n] for n in op.station_names], dtype=int)
        x, y = survey.x_mm[order], survey.y_mm[order]
        values = obs.value_um
    # the progress bar counts both evaluations as one run of `trials`
    half = None if progress is None else (lambda k: progress(k / 2))
    mz = monte_carlo_flatness(x, y, values, trials=trials, seed=seed, progress=half, reference="minimum_zone", **kw)
    ls = monte_carlo_flatness(x, y, values, trials=trials, seed=mz.seed, progress=half, reference="least_squares", **kw)
    return SurveyUncertainty(mz, ls, basis, tuple(notes), u_dof)


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
    """

    loaded: MeasuredSurface
    flatness: FlatnessReport
    lines: tuple
    local: object
    window: Window | None
    uncertainty: SurveyUncertainty | None
    notes: tuple

    @property
    def heightmap(self) -> HeightMap:
        """The evaluated height map (µm about the least-squares plane for surveys)."""
        return self.loaded.heightmap

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
            flat.update(
                expanded_uncertainty_um=mz.expanded_um,
                standard_uncertainty_um=mz.std_um,
                coverage_interval_um=list(mz.interval_um),
                shortest_interval_um=list(mz.shortest_interval_um),
                monte_carlo_mean_um=mz.mean_um,
                least_squares_expanded_uncertainty_um=ls.expanded_um,
                monte_carlo={
                    "trials": mz.trials, "seed": mz.seed, "basis": self.uncertainty.basis,
                    # degrees of freedom of a reading scatter estimated from the residuals (None: stated)
                    "reading_dof": self.uncertainty.u_dof,
                },
            )
        surface = {"description": hm.label, "length_mm": hm.length_mm, "width_mm": hm.width_mm}
        doc = {
            "input": self.loaded.path,
            "kind": self.loaded.kind,
            "method": self.method,
            "units": "um",
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
) -> SurfaceEvaluation:
    """Evaluate a loaded surface: flatness, lines, local flatness and (optionally) uncertainty.

    Parameters
    ----------
    loaded : MeasuredSurface
    window : str or Window or None
        Local-flatness window (``"250x250"``, ``"d80"``), ``"auto"`` for 250 x 250 mm when it
        fits inside the surveyed area, ``"none"`` or None for no local flatness.
    monte_carlo : dict, optional
        Keyword arguments of :func:`survey_uncertainty` (trials, seed, u_height_um, progress);
        None for no uncertainty evaluation.
    """
    hm = loaded.heightmap
    notes = []
    flat = evaluate_flatness(hm.x_mm, hm.y_mm, hm.height_um)
    lines = _line_results(loaded)
    auto = isinstance(window, str) and window.strip().lower() == "auto"
    win = DEFAULT_WINDOW if auto else (parse_window(window) if isinstance(window, str) or window is None else window)
    local = None
    if win is not None:
        xmin, xmax, ymin, ymax = hm.extent_mm
        fits = win.length_mm <= xmax - xmin + 1e-9 and win.width_mm <= ymax - ymin + 1e-9
        if fits:
            local = _local(hm, win)
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
    return SurfaceEvaluation(loaded, flat, tuple(lines), local, win, unc, tuple(notes))


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


def _local(hm: HeightMap, win: Window):
    from ..form import local_flatness

    size = win.length_mm if win.shape == "circle" else (win.length_mm, win.width_mm)
    return local_flatness(hm, size_mm=size, shape=win.shape)
