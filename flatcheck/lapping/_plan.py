"""Lapping planner: the dwell map, the surface and flatness predicted after it, and the pass plan.

The chain is

1. :func:`~flatcheck.lapping._removal.least_removal` -- the removal map (µm at every node, never negative)
   that brings the surface within a target flatness while removing the least material, solved exactly as one
   linear program (:mod:`flatcheck.lapping._removal`);
2. :class:`~flatcheck.lapping._dwell.LapModel` -- the user's lap (round or rectangular) and its removal rate
   from their own calibration; removal follows the Preston equation ``dz/dt = Kp p v``, so the lap's footprint
   is the tool influence function (TIF) (:mod:`flatcheck.lapping._dwell`);
3. :func:`~flatcheck.lapping._dwell.deconvolve_dwell` -- where the lap should spend its time: a non-negative,
   optionally regularised deconvolution of the removal map by the footprint on a regular grid
   (:mod:`flatcheck.lapping._dwell`);
4. :func:`plan_lapping` -- the dwell map, the surface and flatness predicted after carrying it out, an ordered
   list of passes (highest first, :mod:`flatcheck.lapping._passes`) and a chart of named cells with the time
   in each (:mod:`flatcheck.lapping._chart`).

This module holds the last step: the choice of the dwell grid and of the smoothing, the plan's result
(:class:`LapPlan`) and, when it misses its target, why (:class:`Shortfall`). Everything here is pure: numpy
arrays in, frozen dataclasses out; no printing, no files.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import InputValueError
from ..form import minimum_zone
from ..form import HeightMap
from ..units import format_height
from ._chart import CellChart, _chart
from ._dwell import (
    LapModel,
    _conv_matrix,
    deconvolve_dwell,
    grid_interpolation_matrix,
    lap_centre_allowed,
    lap_kernel,
)
from ._passes import _Layer, _layer_regions, _make_pass, _no_repeats, _resolve_short, _too_short_by_hand
from ._removal import LeastRemoval

__all__ = [
    "LapPlan",
    "Shortfall",
    "plan_lapping",
]


@dataclass(frozen=True)
class Shortfall:
    """Why a plan misses its target, split into its causes, with what to change.

    The plan's predicted flatness is reached in four steps, each of which can lose flatness: the lap's
    footprint (the best unrounded dwell, no smoothing), the smoothing of the dwell map, rounding the dwell to
    ``levels`` time steps, and tidying passes shorter than the minimum. Each loss is the flatness after the
    step minus the flatness before it (µm; the footprint's loss is measured from the target).

    Attributes
    ----------
    target_um : float
        Target flatness (µm).
    best_um : float
        Flatness after the best unrounded, unsmoothed dwell (µm): the best this lap can do in one plan.
    smoothed_um : float
        Flatness after the smoothed, unrounded dwell (µm).
    rounded_um : float
        Flatness after the dwell rounded to ``levels`` steps, before short passes were tidied (µm).
    plan_um : float
        Flatness after the plan as printed (µm).
    levels : int
        Time steps the dwell was rounded to.
    min_pass_time : float
        Shortest pass allowed (the lap's time unit).
    time_unit : str
        ``"min"`` or ``"pass"``.
    levels_suggested : int or None
        More time steps that bring the rounded dwell close to the unrounded one, when rounding is a cause.
    levels_suggested_um : float or None
        Flatness of the same dwell rounded to ``levels_suggested`` steps, before tidying (µm): an estimate of
        what a plan with that many steps reaches.
    levels_tried : tuple of (int, float)
        Every number of steps tried on the way, with that flatness (µm).
    """

    target_um: float
    best_um: float
    smoothed_um: float
    rounded_um: float
    plan_um: float
    levels: int
    min_pass_time: float
    time_unit: str
    levels_suggested: int | None = None
    levels_suggested_um: float | None = None
    levels_tried: tuple = ()

    @property
    def losses_um(self) -> dict:
        """Flatness lost at each step (µm, >= 0; a step that happened to gain counts 0), by cause."""
        return {
            "footprint": max(0.0, self.best_um - self.target_um),
            "smoothing": max(0.0, self.smoothed_um - self.best_um),
            "rounding": max(0.0, self.rounded_um - self.smoothed_um),
            "short_passes": max(0.0, self.plan_um - self.rounded_um),
        }

    @property
    def causes(self) -> tuple:
        """The causes that matter, largest first: each loses at least a fifth of the total shortfall."""
        loss = self.losses_um
        total = sum(loss.values())
        if total <= 0:
            return ()
        named = [k for k, v in sorted(loss.items(), key=lambda kv: -kv[1]) if v >= 0.2 * total]
        return tuple(named)

    def text(self, units: str = "um", step_um: float | None = None) -> str:
        """The shortfall and its remedies in one or two sentences (heights in ``units``: "um" or "in", to the
        height step ``step_um`` the survey resolves)."""

        def h(v):
            return format_height(v, units, step_um=step_um)

        loss = self.losses_um
        unit = "min" if self.time_unit == "min" else "passes"
        parts = []
        for cause in self.causes:
            v = h(loss[cause])
            if cause == "footprint":
                parts.append(
                    f"the lap's footprint costs {v} (even the unrounded dwell leaves {h(self.best_um)}: the lap is "
                    "wider than the shapes to remove; survey again after the plan and plan again, or use a "
                    "smaller lap)"
                )
            elif cause == "rounding":
                more = ""
                if self.levels_suggested is not None:
                    tried = [t for t in self.levels_tried if t[0] <= self.levels_suggested]
                    more = "; more steps cost less (" + ", ".join(f"{n} steps: about {h(f)}" for n, f in tried) + (
                        f"; flatcheck lap --levels {self.levels_suggested}, at the price of more passes)"
                    )
                parts.append(f"rounding the dwell to {self.levels} time steps costs {v}{more}")
            elif cause == "short_passes":
                parts.append(
                    f"tidying passes shorter than {self.min_pass_time:.2g} {unit} costs {v} (keep them with "
                    "flatcheck lap --min-pass-fraction 0)"
                )
            else:
                parts.append(f"smoothing the dwell map costs {v} (flatcheck lap --smoothness 0 turns it off)")
        head = (
            f"The plan misses the target {h(self.target_um)} by {h(self.plan_um - self.target_um)} "
            f"(predicted {h(self.plan_um)})"
        )
        if not parts:
            return head + "."
        return head + ": " + "; ".join(parts) + "."


@dataclass(frozen=True, eq=False)
class LapPlan:
    """A lapping plan and the surface predicted after it.

    Attributes
    ----------
    lap : LapModel
    removal : LeastRemoval
        The least-removal map the plan aims at.
    xs_mm, ys_mm : ndarray, shape (nx,), (ny,)
        The dwell grid (mm).
    wanted_um : ndarray, shape (ny, nx)
        Least-removal map on the dwell grid (µm; NaN outside the surveyed area).
    dwell : ndarray, shape (ny, nx)
        Dwell map from the deconvolution (time unit of the lap).
    plan_dwell : ndarray, shape (ny, nx)
        Dwell rounded to the plan's levels: what the passes add up to.
    achieved_um : ndarray, shape (ny, nx)
        Removal the plan makes on the dwell grid (µm).
    predicted_height_um : ndarray, shape (n,)
        Surface after the plan at the input nodes (µm, same reference as the input).
    predicted_flatness_um : float
        Minimum-zone flatness after the plan (µm).
    dwell_flatness_um : float
        Minimum-zone flatness after the unrounded dwell map (µm): the best this lap can do here.
    total_time : float
        Sum of the plan's time (time unit).
    passes : tuple of Pass
        Ordered, highest first; none shorter than ``min_pass_time``.
    chart : CellChart
    smoothness : float
        First-order regularisation used for the dwell map (dimensionless, see :func:`deconvolve_dwell`),
        chosen automatically unless given.
    min_pass_time : float
        Shortest pass allowed in the plan (time unit); shorter ones were dropped, merged or lengthened.
    passes_unmerged : int
        Passes the rounded dwell map was cut into before short ones were resolved.
    unmerged_flatness_um : float
        Minimum-zone flatness predicted for that unmerged plan (µm).
    merges : tuple of str
        What happened to each short pass, in order ("dropped", "merged into ...", "lengthened").
    pass_regions : tuple of ndarray of bool, shape (ny, nx)
        Dwell-grid nodes each pass works, aligned with ``passes``; the pass's time is spread evenly over
        them, so ``plan_dwell == sum(region * p.time / region.sum())``.
    levels : int
        Time steps the dwell was rounded to.
    best_flatness_um : float
        Flatness after the best unrounded dwell without smoothing (µm): the best this lap can do in one
        plan on this dwell grid.
    shortfall : Shortfall or None
        Why the plan misses the target and what to change; None when it reaches the target.
    too_short_by_hand : tuple of int
        Orders of the passes too short to work by hand (under :data:`HAND_MIN_PASS_MIN` minutes, or under
        one stroke), kept because dropping or merging them would lose flatness.
    flatness_skipping_short_um : float or None
        Minimum-zone flatness predicted if all of those passes are skipped (µm); None when there are none.
    """

    lap: LapModel
    removal: LeastRemoval
    xs_mm: np.ndarray
    ys_mm: np.ndarray
    wanted_um: np.ndarray
    dwell: np.ndarray
    plan_dwell: np.ndarray
    achieved_um: np.ndarray
    predicted_height_um: np.ndarray
    predicted_flatness_um: float
    dwell_flatness_um: float
    total_time: float
    passes: tuple
    chart: CellChart
    smoothness: float = 0.0
    min_pass_time: float = 0.0
    passes_unmerged: int = 0
    unmerged_flatness_um: float = float("nan")
    merges: tuple = ()
    pass_regions: tuple = ()
    levels: int = 4
    best_flatness_um: float = float("nan")
    shortfall: Shortfall | None = None
    too_short_by_hand: tuple = ()
    flatness_skipping_short_um: float | None = None


def _dwell_grid(hm: HeightMap, step_mm: float | None, max_nodes: int, lap: LapModel):
    """Regular grid over the surveyed extent; the input grid itself when it is one, small enough and not
    much finer than the lap can resolve (pitch >= 1/8 of the lap's smaller size)."""
    g = hm.grid
    lap_min = 2.0 * min(lap.half_size_mm)
    if step_mm is None and g is not None and g[0].size * g[1].size <= max_nodes:
        pitch = min(np.diff(g[0]).min(), np.diff(g[1]).min())
        if pitch >= lap_min / 8.0:
            return g[0], g[1], g[2]
    xmin, xmax, ymin, ymax = hm.extent_mm
    lx, ly = xmax - xmin, ymax - ymin
    if step_mm is None:
        # a quarter of the lap resolves its influence; never more than about max_nodes nodes
        step_mm = max(lap_min / 4.0, math.sqrt(max(lx * ly, 1e-12) / max_nodes))
    if not (np.isfinite(step_mm) and step_mm > 0):
        raise InputValueError(f"grid step {step_mm} mm must be > 0", fix="give a positive --step-mm")
    nx = max(2, int(math.ceil(lx / step_mm - 1e-9)) + 1)
    ny = max(2, int(math.ceil(ly / step_mm - 1e-9)) + 1)
    if nx * ny > 4 * max_nodes:
        raise InputValueError(
            f"a {step_mm:g} mm grid has {nx * ny} nodes, too many for the dwell solver",
            fix=f"use a coarser step (at least {math.sqrt(lx * ly / max_nodes):.3g} mm)",
        )
    return np.linspace(xmin, xmax, nx), np.linspace(ymin, ymax, ny), None


#: Gradient-penalty strengths tried by the automatic choice, in increasing order (dimensionless, relative to
#: the kernel's norm; see :func:`deconvolve_dwell`). The ladder steps by about 2 to 2.5.
_SMOOTHNESS_LADDER = (0.0, 0.01, 0.02, 0.05, 0.1, 0.2, 0.5, 1.0, 2.0, 5.0)

#: Weight of the survey's stations in the dwell fit on a grid finer than the survey, relative to the nodes
#: interpolated between them: the stations together weigh this many times the interpolated nodes together.
#: The plan is judged at the stations; the linear interpolant between them is an assumption that only
#: keeps the lap from digging between stations. Fitting it with equal weight cost flatness at the stations:
#: guideway sample, 80 mm lap, target 2 um: 2.001 um on its own 100 x 60 mm grid, 2.208 um on a 10 mm grid;
#: with this weight 2.005 um (a choice of this module, see docs/methods.md).
STATION_WEIGHT = 10.0

#: Predicted flatness the smoothing, and the tidying of short passes, may give away: this fraction of the
#: target (a choice of this module, stated in docs/methods.md).
DEFAULT_ALLOWANCE = 0.05

#: Shortest pass, as a fraction of the longest pass of the rounded plan (a choice of this module).
DEFAULT_MIN_PASS_FRACTION = 0.1


def plan_lapping(
    hm: HeightMap,
    removal: LeastRemoval,
    lap: LapModel,
    *,
    step_mm: float | None = None,
    cell_mm: float | None = None,
    levels: int = 4,
    smoothing: float = 0.01,
    max_nodes: int = 1600,
    smoothness: float | None = None,
    allowance: float = DEFAULT_ALLOWANCE,
    min_pass_fraction: float = DEFAULT_MIN_PASS_FRACTION,
    min_pass_time: float = 0.0,
) -> LapPlan:
    """Dwell map, pass plan and predicted surface for bringing ``hm`` down by ``removal`` with ``lap``.

    The least-removal map is put on a regular grid (the input grid itself when it is one, else a linear
    interpolation at pitch ``step_mm``) and deconvolved by the lap's influence function into a non-negative
    dwell map with a gradient penalty (:func:`deconvolve_dwell`). Unless ``smoothness`` is given, its
    strength is the largest on a fixed ladder whose dwell map still predicts a flatness within
    ``allowance * target`` of the unpenalised one (a discrepancy rule stated in the quantity the plan is
    judged by): the map is as smooth as the target allows. The dwell is rounded to ``levels`` equal steps
    and cut into layers: each connected region of a layer is one pass in which the lap is worked evenly over
    that region. A pass shorter than the minimum (``min_pass_fraction`` of the longest pass, at least
    ``min_pass_time``) is then, shortest first, dropped, merged into its neighbouring pass (its time spread
    evenly over that pass's zone) or lengthened to the minimum: the first of these whose predicted flatness
    stays within ``max(target, unmerged plan) + allowance * target``, else the best of the three. Passes are
    ordered from the top layer (the high spots) down to the widest. The predicted surface is the input minus
    the removal of the final plan (the passes as printed), evaluated at the input nodes; its flatness is the
    minimum zone.

    Parameters
    ----------
    hm : HeightMap
        The surface (µm at mm).
    removal : LeastRemoval
        Result of :func:`least_removal` for ``hm``.
    lap : LapModel
        The lap and its calibrated rate.
    step_mm : float, optional
        Dwell grid pitch (mm); default the input grid, or about ``max_nodes`` nodes over the extent.
    cell_mm : float, optional
        Side of the chart's cells (mm), measured from the south-west corner; default the lap's diameter (or
        longer side). See :func:`chart_edges` for the remainder at the edges.
    levels : int
        Number of equal time steps the dwell is rounded to (>= 1).
    smoothing : float
        Zero-order regularisation of the deconvolution, see :func:`deconvolve_dwell`.
    max_nodes : int
        Largest dwell grid used without an explicit step.
    smoothness : float, optional
        Gradient regularisation of the deconvolution (>= 0); default chosen automatically (see above).
    allowance : float
        Fraction of the target flatness (dimensionless, >= 0) that smoothing and pass tidying may cost.
    min_pass_fraction : float
        Shortest pass as a fraction of the longest (dimensionless, 0 <= f <= 1); 0 keeps every pass.
    min_pass_time : float
        Shortest pass in the lap's time unit (>= 0), e.g. one stroke cycle; the larger minimum applies.

    Returns
    -------
    LapPlan
    """
    if removal.remove_um.shape != hm.height_um.shape:
        raise InputValueError("the removal map does not belong to this surface")
    if int(levels) < 1:
        raise InputValueError(f"levels {levels} must be >= 1")
    for name, v, hi in (("allowance", allowance, math.inf), ("minimum pass fraction", min_pass_fraction, 1.0),
                        ("minimum pass time", min_pass_time, math.inf)):
        if not (np.isfinite(v) and 0 <= v <= hi):
            raise InputValueError(f"{name} {v} must be a number from 0 to {hi:g}")
    if smoothness is not None and not (np.isfinite(smoothness) and smoothness >= 0):
        raise InputValueError(f"smoothness {smoothness} must be >= 0")
    levels = int(levels)
    xs, ys, index = _dwell_grid(hm, step_mm, max_nodes, lap)
    if index is not None:
        wanted = removal.remove_um[index].astype(float)
        mask = np.ones(wanted.shape, bool)
    else:
        X, Y = np.meshgrid(xs, ys)
        rmap = HeightMap(hm.x_mm, hm.y_mm, removal.remove_um)
        wanted = rmap.sample(X, Y)
        mask = np.isfinite(wanted)
    dx = float(np.diff(xs).mean())
    dy = float(np.diff(ys).mean())
    kern = lap_kernel(lap, dx, dy)
    conv = _conv_matrix(wanted.shape, kern)
    target = np.where(mask, wanted, 0.0)
    fit = {}
    if index is None:
        # the stations carry the data the plan is judged by; the interpolated nodes only tie the surface
        # between them: the stations together weigh STATION_WEIGHT times the interpolated nodes
        to_nodes = grid_interpolation_matrix(xs, ys, hm.x_mm, hm.y_mm)
        fit = dict(points=(to_nodes, removal.remove_um),
                   points_weight=math.sqrt(STATION_WEIGHT * int(mask.sum()) / hm.n))
    # the lap's centre stays where the lap hangs over no edge by more than MAX_OVERHANG_FRACTION of its size
    outline = (0.0, float(hm.length_mm), 0.0, float(hm.width_mm)) if hm.length_mm and hm.width_mm else None
    fit["allowed"] = lap_centre_allowed(xs, ys, lap, outline)

    def _at_nodes(grid_vals):
        if index is not None:
            out = np.empty(hm.n)
            out[index] = grid_vals
            return out
        return to_nodes @ np.asarray(grid_vals, float).ravel()

    def _flatness_after(dwell_map) -> float:
        made = (conv @ dwell_map.ravel()).reshape(dwell_map.shape)
        return float(minimum_zone(hm.x_mm, hm.y_mm, hm.height_um - _at_nodes(made)).flatness_um)

    slack = allowance * removal.target_um

    def _plan_of(ls):
        out = np.zeros_like(target)
        for layer in ls:
            out += layer.dwell
        return out

    def _cut(dwell_map, n_levels=levels):
        """Layers of the dwell map rounded to ``n_levels`` steps and their predicted flatness."""
        tmax = float(dwell_map.max())
        if tmax <= 0:
            return [], _flatness_after(np.zeros_like(target))
        dl = tmax / n_levels
        steps = np.round(dwell_map / dl).astype(int)
        ls = [_Layer(level, reg, dl) for level, reg in _layer_regions(xs, ys, steps, n_levels, lap)]
        return ls, _flatness_after(_plan_of(ls))

    # candidate dwell maps: the given smoothness, or every admissible one on the ladder (discrepancy rule)
    if smoothness is not None:
        d = deconvolve_dwell(target, kern, smoothing=smoothing, mask=mask, smoothness=float(smoothness), **fit)
        candidates = [(float(smoothness), d, _flatness_after(d))]
    elif not removal.remove_um.any():
        z = np.zeros_like(target)
        candidates = [(0.0, z, _flatness_after(z))]
    else:
        d = deconvolve_dwell(target, kern, smoothing=smoothing, mask=mask, **fit)
        candidates = [(0.0, d, _flatness_after(d))]
        budget = candidates[0][2] + slack
        for cand in _SMOOTHNESS_LADDER[1:]:
            d = deconvolve_dwell(target, kern, smoothing=smoothing, mask=mask, smoothness=cand, start=d, **fit)
            f = _flatness_after(d)
            if f > budget * (1 + 1e-9) + 1e-12:
                break
            candidates.append((cand, d, f))
    cut = [_cut(c[1]) for c in candidates]
    # the limit every tidied plan must keep: the target, or the plain plan (least smoothing) where the lap
    # cannot reach the target, plus the allowance
    limit = max(removal.target_um, cut[0][1]) + slack
    best = None
    for (mu_c, dwell_c, flat_c), (layers_c, unmerged_flat_c) in zip(candidates, cut):
        t_min_c = max(min_pass_fraction * max((layer.time for layer in layers_c), default=0.0), float(min_pass_time))
        final, merges_c = _resolve_short(
            layers_c, t_min_c, lambda ls: _flatness_after(_plan_of(ls)), limit, xs, ys
        )
        final_flat = _flatness_after(_plan_of(final))
        within = final_flat <= limit * (1 + 1e-9) + 1e-12
        short = sum(layer.time < t_min_c * (1 - 1e-9) for layer in final)
        # fewest passes that keep the limit, then fewest short ones, then the smoothest dwell
        key = (not within, len(final), short, -mu_c)
        if best is None or key < best[0]:
            best = (key, mu_c, dwell_c, flat_c, final, merges_c, t_min_c, len(layers_c), unmerged_flat_c)
    _, mu, dwell, dwell_flat, layers, merges, t_min, unmerged, unmerged_flat = best
    layers, repeat_merges = _no_repeats(
        layers, conv, hm, lap, xs, ys, cell_mm, lambda ls: _flatness_after(_plan_of(ls)), limit, slack)
    merges = list(merges) + repeat_merges
    plan_dwell = _plan_of(layers)
    achieved = (conv @ plan_dwell.ravel()).reshape(plan_dwell.shape)
    predicted = hm.height_um - _at_nodes(achieved)
    pred_flat = minimum_zone(hm.x_mm, hm.y_mm, predicted).flatness_um

    best_flat = min(c[2] for c in candidates)
    shortfall = None
    if pred_flat > removal.target_um * (1 + 1e-7) + 1e-9:
        if smoothness is not None and smoothness > 0:
            d0 = deconvolve_dwell(target, kern, smoothing=smoothing, mask=mask, **fit)
            best_flat = min(best_flat, _flatness_after(d0))
        shortfall = Shortfall(
            target_um=removal.target_um, best_um=float(best_flat), smoothed_um=float(dwell_flat),
            rounded_um=float(unmerged_flat), plan_um=float(pred_flat), levels=levels, min_pass_time=float(t_min),
            time_unit=lap.time_unit,
        )
        if "rounding" in shortfall.causes:
            shortfall = _suggest_levels(shortfall, lambda n: _cut(dwell, n)[1], slack)
    chart = _chart(hm, lap, xs, ys, plan_dwell, cell_mm)
    depth = [float((conv @ layer.dwell.ravel()).max()) for layer in layers]
    order = range(len(layers))  # _no_repeats ordered them: top layer first, no zone twice running
    passes = tuple(_make_pass(k + 1, layers[i], depth[i], xs, ys, lap, chart) for k, i in enumerate(order))
    # an even pass's region (bool); an uneven one's dwell per node (float, proportional to its time there):
    # either way region * time / region.sum() is the pass's time at each node
    regions = tuple(layers[i].region if layers[i].per_node is None or not np.ndim(layers[i].per_node)
                    else layers[i].dwell for i in order)
    # passes too short to work by hand, and what skipping them all would cost
    by_hand = tuple(p.order for p in passes if _too_short_by_hand(p, lap))
    skip_flat = None
    if by_hand:
        rest = plan_dwell.copy()
        for o in by_hand:
            rest -= regions[o - 1] * (passes[o - 1].time / int(regions[o - 1].sum()))
        skip_flat = _flatness_after(np.maximum(rest, 0.0))
    for a in (xs, ys, wanted, dwell, plan_dwell, achieved, predicted, *regions):
        a.setflags(write=False)
    return LapPlan(
        lap=lap,
        removal=removal,
        xs_mm=xs,
        ys_mm=ys,
        wanted_um=np.where(mask, wanted, np.nan),
        dwell=dwell,
        plan_dwell=plan_dwell,
        achieved_um=achieved,
        predicted_height_um=predicted,
        predicted_flatness_um=float(pred_flat),
        dwell_flatness_um=float(dwell_flat),
        total_time=float(plan_dwell.sum()),
        passes=passes,
        chart=chart,
        smoothness=mu,
        min_pass_time=t_min,
        passes_unmerged=unmerged,
        unmerged_flatness_um=unmerged_flat,
        merges=tuple(merges),
        pass_regions=regions,
        levels=levels,
        best_flatness_um=float(best_flat),
        shortfall=shortfall,
        too_short_by_hand=by_hand,
        flatness_skipping_short_um=skip_flat,
    )


#: Most time steps suggested for rounding the dwell (a plan of more layers is not worked by hand).
_MAX_SUGGESTED_LEVELS = 32


def _suggest_levels(shortfall: Shortfall, rounded_flatness, slack_um: float) -> Shortfall:
    """Try 2, 4, 8.. times the levels (at most ``_MAX_SUGGESTED_LEVELS``) until the rounding stays within
    ``slack_um`` of the unrounded dwell; ``rounded_flatness(n)`` is the flatness after rounding to n steps.
    The suggestion is the first that does, else the best tried; none if more steps do not help."""
    import dataclasses

    goal = max(shortfall.target_um, shortfall.smoothed_um) + slack_um
    tried = []
    n = shortfall.levels * 2
    while n <= _MAX_SUGGESTED_LEVELS:
        f = float(rounded_flatness(n))
        tried.append((n, f))
        if f <= goal:
            break
        n *= 2
    if not tried:
        return shortfall
    n, f = tried[-1] if tried[-1][1] <= goal else min(tried, key=lambda t: t[1])
    if f >= shortfall.rounded_um:
        return shortfall  # more steps do not help here
    return dataclasses.replace(shortfall, levels_suggested=n, levels_suggested_um=f, levels_tried=tuple(tried))
