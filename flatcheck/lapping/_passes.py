"""Passes: the rounded dwell map cut into passes the lap works evenly, tidied and put in order.

A pass (:class:`Pass`) is one connected region of one layer of the rounded dwell map, in which the lap is
worked evenly. Here live the layers before they are named, the cutting of a rounded dwell map into them, the
resolving of passes too short to work (dropped, merged into a neighbour or lengthened), the ordering that
never works one place twice running, the naming of a pass by its chart cells, and the shortest pass that can
be worked by hand (:data:`HAND_MIN_PASS_MIN`). :func:`~flatcheck.lapping._plan.plan_lapping` drives these
steps and judges each by the flatness it predicts.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ._chart import _split_cell, chart_edges
from ._dwell import LapModel

__all__ = [
    "Pass",
    "HAND_MIN_PASS_MIN",
]


@dataclass(frozen=True)
class Pass:
    """One pass of the plan.

    Attributes
    ----------
    order : int
        1 = first.
    level : int
        Layer of the dwell map it belongs to (highest first).
    zone : str
        Chart cells it covers, as a range ("C3" or "B2:D4").
    cells : tuple of str
        Every chart cell it touches.
    centre_x_mm, centre_y_mm : float
        Centre of the zone (mm).
    extent_mm : tuple of float
        ``(xmin, xmax, ymin, ymax)`` of the lap centre's travel (mm).
    depth_um : float
        Deepest removal this pass makes (µm).
    time : float
        Working time in ``time_unit`` (lap moved evenly over the zone).
    time_unit : str
        ``"min"`` or ``"pass"``.
    strokes : int or None
        ``time`` in strokes when the lap's rate is per pass of known strokes.
    even : bool
        The lap is worked evenly over the zone (True), or longer in some of its cells than in others, as the
        bench chart shows (False: two layers of the dwell map over the same cells and travel, which the pass
        table could not tell apart, worked as one pass).
    """

    order: int
    level: int
    zone: str
    cells: tuple
    centre_x_mm: float
    centre_y_mm: float
    extent_mm: tuple
    depth_um: float
    time: float
    time_unit: str
    strokes: int | None
    even: bool = True


#: Shortest pass that can be worked evenly over its zone by hand, in minutes: 10 s. A lap is moved in
#: strokes of a second or two; a pass of a few seconds is a stroke or two and cannot spread its time evenly
#: (a choice of this module; common practice, no single source).
HAND_MIN_PASS_MIN = 10.0 / 60.0


def _too_short_by_hand(p: Pass, lap: LapModel) -> bool:
    """A pass under 10 s (time in minutes), or under one stroke (time in passes of known strokes)."""
    if p.time_unit == "min":
        return p.time < HAND_MIN_PASS_MIN * (1 - 1e-9)
    return p.strokes is not None and p.strokes < 1


@dataclass(frozen=True, eq=False)
class _Layer:
    """A pass before it is named: its level, the dwell-grid nodes it works and the time per node."""

    level: int
    region: np.ndarray
    per_node: object  # float: the same time at every node of the region; or an array on the grid (uneven pass)
    keep: bool = False

    @property
    def time(self) -> float:
        if np.ndim(self.per_node):
            return float(np.where(self.region, self.per_node, 0.0).sum())
        return self.per_node * int(self.region.sum())

    @property
    def dwell(self) -> np.ndarray:
        """Time at each grid node (zero outside the region)."""
        return np.where(self.region, self.per_node, 0.0)


def _layer_regions(xs, ys, steps, levels, lap):
    """(level, region) for every connected part of every layer of the rounded dwell, top layer first."""
    from scipy import ndimage

    # parts of a layer less than half a lap apart are worked in one pass: join them before labelling
    hx, hy = lap.half_size_mm
    dx, dy = float(np.diff(xs).mean()), float(np.diff(ys).mean())
    rx, ry = int(hx / 2.0 // dx), int(hy / 2.0 // dy)
    yy, xx = np.mgrid[-ry : ry + 1, -rx : rx + 1]
    disk = (xx * dx / max(hx, 1e-12)) ** 2 + (yy * dy / max(hy, 1e-12)) ** 2 <= 0.25
    out = []
    for level in range(levels, 0, -1):
        layer = steps >= level
        joined, nlab = ndimage.label(ndimage.binary_dilation(layer, structure=disk))
        lab = np.where(layer, joined, 0)
        for k in range(1, nlab + 1):
            reg = lab == k
            if reg.any():
                out.append((level, reg))
    return out


def _neighbour(layers, i, xs, ys):
    """Index of the pass that touches pass ``i`` most (nearest level on a tie), else the nearest by centre."""
    from scipy import ndimage

    grown = ndimage.binary_dilation(layers[i].region, structure=np.ones((3, 3), bool))
    best, key = None, None
    X, Y = np.meshgrid(xs, ys)
    ci = (X[layers[i].region].mean(), Y[layers[i].region].mean())
    for j, other in enumerate(layers):
        if j == i:
            continue
        touch = int((grown & other.region).sum())
        dist = math.hypot(X[other.region].mean() - ci[0], Y[other.region].mean() - ci[1])
        k = (-touch, abs(other.level - layers[i].level), dist)
        if key is None or k < key:
            best, key = j, k
    return best


def _resolve_short(layers, t_min, flatness_of, limit_um, xs, ys):
    """Drop, merge or lengthen passes shorter than ``t_min``, shortest first (see :func:`plan_lapping`).

    Returns the new layers and a description of each change.
    """
    layers = list(layers)
    log = []
    while True:
        short = [i for i, layer in enumerate(layers) if layer.time < t_min * (1 - 1e-9) and not layer.keep]
        if not short:
            return layers, log
        i = min(short, key=lambda k: (layers[k].time, -layers[k].level))
        me = layers[i]
        options = [("dropped", layers[:i] + layers[i + 1 :])]
        j = _neighbour(layers, i, xs, ys)
        if j is not None:
            nb = layers[j]
            merged = _Layer(nb.level, nb.region, nb.per_node + me.time / int(nb.region.sum()), nb.keep)
            rest = [merged if k == j else layer for k, layer in enumerate(layers) if k != i]
            options.append(("merged into the neighbouring pass", rest))
        longer = _Layer(me.level, me.region, t_min / int(me.region.sum()))
        options.append(("lengthened to the minimum", [longer if k == i else layer for k, layer in enumerate(layers)]))
        scored = [(what, ls, flatness_of(ls)) for what, ls in options]
        chosen = next((o for o in scored if o[2] <= limit_um * (1 + 1e-9) + 1e-12), None)
        if chosen is None:
            chosen = ("kept (every change would break the limit)", [
                _Layer(layer.level, layer.region, layer.per_node, keep=True) if k == i else layer
                for k, layer in enumerate(layers)
            ])
        X, Y = np.meshgrid(xs, ys)
        log.append(
            f"pass at x {X[me.region].mean():.0f}, y {Y[me.region].mean():.0f} mm "
            f"({me.time:.2g} of minimum {t_min:.2g}) {chosen[0]}"
        )
        layers = chosen[1]


def _no_repeats(layers, conv, hm, lap, xs, ys, cell_mm, flatness_of, limit_um, slack_um):
    """Order the layers top first (deepest first within a level) with no place worked twice running.

    Layers on exactly the same nodes are one pass (their times add; the plan is unchanged). Two passes in
    a row over the same place (the same chart cells and the same travel of the lap's centre: all the pass
    table prints) are joined into one pass over both regions, their summed time spread evenly, when that
    costs no predicted flatness; otherwise the second is moved after the next pass in another place, if there
    is one; and else the two are worked as one uneven pass that keeps each node's summed time (``Pass.even``
    False; the bench chart shows the time in each cell). The predicted flatness never changes. Returns the
    ordered layers and a description of each change (``limit_um`` and ``slack_um`` are not used: no change
    made here costs flatness).
    """
    log = []
    by_region = {}
    for layer in layers:  # identical regions: one pass, its time the sum
        key = layer.region.tobytes()
        if key in by_region:
            o = by_region[key]
            by_region[key] = _Layer(max(o.level, layer.level), o.region, o.per_node + layer.per_node, o.keep or layer.keep)
        else:
            by_region[key] = layer
    if len(by_region) < len(layers):
        log.append(f"{len(layers) - len(by_region)} pass(es) on the same nodes as another joined to it")
    layers = list(by_region.values())
    if len(layers) < 2:
        return layers, log
    X, Y = np.meshgrid(xs, ys)
    xe, ye = chart_edges(hm, lap, cell_mm)

    def zone(layer):
        """The place as the pass table prints it: the chart cells and the lap centre's travel (whole mm)."""
        xr, yr = X[layer.region], Y[layer.region]
        i = np.clip(np.searchsorted(xe, xr, side="right") - 1, 0, xe.size - 2)
        j = np.clip(np.searchsorted(ye, yr, side="right") - 1, 0, ye.size - 2)
        travel = tuple(round(float(v)) for v in (xr.min(), xr.max(), yr.min(), yr.max()))
        return (int(i.min()), int(i.max()), int(j.min()), int(j.max())), travel  # the printed range "B2:D4"

    def ordered(ls):
        depth = [float((conv @ la.dwell.ravel()).max()) for la in ls]
        return [ls[i] for i in sorted(range(len(ls)), key=lambda i: (-ls[i].level, -depth[i]))]

    layers = ordered(layers)
    baseline = None
    k = 0
    while k < len(layers) - 1:
        a, b = layers[k], layers[k + 1]
        if zone(a) != zone(b):
            k += 1
            continue
        union = a.region | b.region
        # one pass over both regions, its time their sum spread evenly (how the pass table is worked)
        joined = _Layer(max(a.level, b.level), union, (a.time + b.time) / int(union.sum()), a.keep or b.keep)
        trial = layers[:k] + [joined] + layers[k + 2:]
        if baseline is None:  # the plan as it came: an even join is taken only when it costs no flatness
            baseline = flatness_of(layers)
        if flatness_of(trial) <= baseline * (1 + 1e-9) + 1e-12:
            layers = trial
            log.append(f"two passes in a row over the same cells and travel (x {X[union].mean():.0f}, "
                       f"y {Y[union].mean():.0f} mm) joined into one")
            k = max(k - 1, 0)
            continue
        later = next((m for m in range(k + 2, len(layers)) if zone(layers[m]) != zone(b)), None)
        if later is not None:  # work somewhere else in between: the same plan in another order
            layers = layers[:k + 1] + [layers[later]] + [la for m, la in enumerate(layers[k + 1:], start=k + 1)
                                                          if m != later]
            log.append("a pass moved so that the same place is not worked twice running")
            k += 1
            continue
        # neither: one pass, uneven, keeping each node's summed time (the plan does not change; the bench chart
        # shows how long in each cell)
        layers = layers[:k] + [_Layer(max(a.level, b.level), union, a.dwell + b.dwell, a.keep or b.keep)] + layers[k + 2:]
        log.append(f"two passes in a row over the same cells and travel (x {X[union].mean():.0f}, "
                   f"y {Y[union].mean():.0f} mm) worked as one, longer where the bench chart says")
        k = max(k - 1, 0)
    return layers, log


def _make_pass(order, layer, depth, xs, ys, lap, chart) -> Pass:
    X, Y = np.meshgrid(xs, ys)
    reg = layer.region
    xr, yr = X[reg], Y[reg]
    cells = sorted(set(chart.cell_of(xr, yr)), key=lambda s: (_split_cell(s)[1], _split_cell(s)[0]))
    cols = [_split_cell(c)[0] for c in cells]
    rows = [_split_cell(c)[1] for c in cells]
    if len(cells) == 1:
        zone = cells[0]
    else:
        zone = f"{min(cols, key=lambda c: (len(c), c))}{min(rows)}:{max(cols, key=lambda c: (len(c), c))}{max(rows)}"
    time = layer.time
    strokes = None
    if lap.strokes_per_pass is not None:
        strokes = int(round(time * lap.strokes_per_pass))
    return Pass(
        order=order,
        level=layer.level,
        zone=zone,
        cells=tuple(cells),
        centre_x_mm=float(xr.mean()),
        centre_y_mm=float(yr.mean()),
        extent_mm=(float(xr.min()), float(xr.max()), float(yr.min()), float(yr.max())),
        depth_um=depth,
        time=float(time),
        time_unit=lap.time_unit,
        strokes=strokes,
        even=not np.ndim(layer.per_node),
    )
