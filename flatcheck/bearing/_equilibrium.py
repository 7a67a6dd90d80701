"""Film solutions, flat-guide curves and equilibria of one pad (see ``_film``)."""

from __future__ import annotations

import math
import os
import threading
from concurrent.futures import ThreadPoolExecutor

import numpy as np

from ..errors import GeometryError, InputValueError
from ._feeds import _MM2_TO_M2, OrificeFeed, PorousFeed, _positive
from ._mesh import PadDeviation, PadMesh, pad_deviation
from ._solver import FilmCurve, FilmEquilibrium, FilmState, FilmTravel, _Contact, _Solver

__all__ = [
    "CAPACITY_FRACTION",
    "solve_film",
    "default_curve_gaps_um",
    "flat_guide_curve",
    "CURVE_TABLE_GAP_RATIOS",
    "curve_table_rows",
    "film_equilibrium",
    "film_along_travel",
]



def _check_load(mesh, feed, load_n):
    return _check_load_area(mesh.pad_area_mm2, feed, load_n)


#: Largest load solved, as a fraction of the closed-film load (gauge supply pressure times pad area). Near
#: that load the film hardly throttles the air, the stiffness falls towards zero and the fly height becomes
#: ill-conditioned; 98 % is a convention of this tool.
CAPACITY_FRACTION = 0.98


#: Smallest load solved, as a fraction of the closed-film load: below it a pad lifts to gaps of hundreds of
#: micrometres, no longer a thin film (a convention of this tool, like CAPACITY_FRACTION).
MIN_LOAD_FRACTION = 1e-3


def _capacity_n(area_mm2, feed):
    """Closed-film load (gauge supply pressure times area, N) and the largest load solved (N)."""
    cap = (feed.supply_pa - feed.ambient_pa) * area_mm2 * _MM2_TO_M2
    return cap, CAPACITY_FRACTION * cap


def _check_load_area(area_mm2, feed, load_n):
    load = _positive(load_n, "pad load (N)", "give the load carried by the pad in newtons")
    cap, limit = _capacity_n(area_mm2, feed)
    if load < MIN_LOAD_FRACTION * cap:
        raise InputValueError(
            f"a load of {load:.4g} N is too small for this pad: under {100 * MIN_LOAD_FRACTION:g} % of its closed-film "
            f"load ({cap:.4g} N, supply pressure times area) it would lift far beyond an air film, where the film "
            "model does not hold",
            fix="give the load the pad carries (its share of the weight and preload, in newtons)",
        )
    if load >= limit:
        raise InputValueError(
            f"a load of {load:.4g} N is beyond this pad's capacity: at most {limit:.4g} N "
            f"({100 * CAPACITY_FRACTION:.0f} % of supply pressure times area, {cap:.4g} N, where the film closes)",
            fix="raise the supply pressure, use a larger pad or share the load over more pads",
        )
    return load


def _check_design_load(mesh, feed, pad, design_load_n, name):
    """Refuse a pad whose film at its nominal gap carries nearly the closed-film load (no load was given)."""
    cap, limit = _capacity_n(mesh.pad_area_mm2, feed)
    if design_load_n < limit:
        return
    if isinstance(feed, OrificeFeed):
        why = "the orifices restrict the air too little for this gap and supply"
        change = "use smaller or fewer orifices (--orifice-mm, --orifices), a larger gap (--gap-um)"
    else:
        why = "the porous layer is too permeable (or too thin) for this gap and supply"
        change = "use a less permeable or thicker layer (--permeability-m2, --layer-mm), a larger gap (--gap-um)"
    raise InputValueError(
        f"at its nominal gap of {pad.gap_um:g} µm, pad {name!r} would carry {design_load_n:.4g} N, "
        f"{100 * design_load_n / cap:.1f} % of supply pressure times area ({cap:.4g} N): {why}, so the film "
        f"hardly throttles the air and the pad would have almost no stiffness (loads above {limit:.4g} N, "
        f"{100 * CAPACITY_FRACTION:.0f} %, are not solved)",
        where="film options",
        fix=f"{change}, or give the load per pad below {limit:.4g} N (--load-n)",
    )


# --------------------------------------------------------------------------- public API
def solve_film(
    mesh: PadMesh,
    feed: PorousFeed,
    *,
    fly_height_um: float,
    tilt_x_urad: float = 0.0,
    tilt_y_urad: float = 0.0,
    deviation=None,
) -> FilmState:
    """Air film of a pad held at a given height and tilt over a surface.

    The film is ``h = fly_height_um + tilt_x_urad * x / 1000 + tilt_y_urad * y / 1000 - s(x, y)`` (µm, x and
    y in mm from the pad centre), with ``s`` the surface deviation under the pad.

    Parameters
    ----------
    mesh : PadMesh
    feed : PorousFeed or OrificeFeed
    fly_height_um : float
        Height of the pad face's centre above the zero of ``s``, µm.
    tilt_x_urad, tilt_y_urad : float
        Slopes of the pad face along x and y, µrad.
    deviation : None, callable, array or PadDeviation
        Surface deviation ``s`` under the pad (see :func:`pad_deviation`); ``None`` for a flat guide.

    Returns
    -------
    FilmState

    Raises
    ------
    GeometryError
        If the film is not open everywhere (the pad touches the surface).

    Examples
    --------
    >>> mesh = circular_pad_mesh(50.0, n=32)
    >>> feed = PorousFeed(1e-15, 5.0, 600.0 - 101.325)
    >>> st = solve_film(mesh, feed, fly_height_um=5.0)
    >>> 600 < st.load_n < 660   # analytic value 628.0 N (docs/methods.md)
    True
    """
    dev = deviation if isinstance(deviation, PadDeviation) else pad_deviation(mesh, deviation)
    solver = _Solver(mesh, feed)
    h0 = float(fly_height_um)
    gap = solver.gap(dev.height_um, h0, float(tilt_x_urad), float(tilt_y_urad))
    try:
        sol = solver.solve(gap, False)
    except _Contact:
        raise GeometryError(
            f"the pad touches the surface (least film {gap.min():.3g} µm)",
            fix="raise the fly height or reduce the tilt",
        ) from None
    return solver.state(gap, sol, -sol["J"][0, 0])


def default_curve_gaps_um(gap_um: float, n: int = 33) -> np.ndarray:
    """Gaps for a performance curve around a nominal gap: ``n`` values from gap/4 to 4 gap, geometric."""
    g = _positive(gap_um, "gap (µm)", "give the nominal gap in µm")
    return np.geomspace(g / 4.0, 4.0 * g, int(n))


def flat_guide_curve(mesh: PadMesh, feed: PorousFeed, gaps_um) -> FilmCurve:
    """Load, stiffness and flow of a pad over a perfectly flat guide versus the uniform gap.

    Parameters
    ----------
    mesh : PadMesh
    feed : PorousFeed or OrificeFeed
    gaps_um : array_like, shape (k,)
        Uniform gaps in µm (k >= 3), sorted into increasing order.

    Returns
    -------
    FilmCurve
        With the gap of greatest stiffness refined by a bounded scalar search between the samples that
        surround the sampled maximum.
    """
    from scipy.optimize import minimize_scalar

    gaps = np.unique(np.asarray(gaps_um, dtype=float).ravel())
    if gaps.size < 3 or not np.isfinite(gaps).all() or gaps[0] <= 0:
        raise InputValueError("a film curve needs at least three positive gaps", fix="give gaps in µm above 0")
    solver = _Solver(mesh, feed)
    zero = np.zeros(mesh.probe_x_mm.size)
    loads, stiff, mass, ratio = [], [], [], []
    for g in gaps:
        gap = zero + g
        sol = solver.solve(gap, False)
        st = solver.state(gap, sol, -sol["J"][0, 0])
        loads.append(st.load_n)
        stiff.append(st.stiffness_n_per_um)
        mass.append(st.mass_flow_kg_s)
        ratio.append(st.feed_pressure_ratio)
    stiff = np.array(stiff)
    i = int(np.argmax(stiff))
    inside = 0 < i < gaps.size - 1
    if inside:
        def neg_k(g):
            sol = solver.solve(zero + g, False)
            return sol["J"][0, 0]

        res = minimize_scalar(neg_k, bounds=(gaps[i - 1], gaps[i + 1]), method="bounded",
                              options=dict(xatol=1e-4 * gaps[i]))
        g_peak, k_peak = float(res.x), float(-res.fun)
        if k_peak < stiff[i]:
            g_peak, k_peak = float(gaps[i]), float(stiff[i])
    else:
        g_peak, k_peak = float(gaps[i]), float(stiff[i])
    mass = np.array(mass)
    return FilmCurve(
        gap_um=gaps,
        load_n=np.array(loads),
        stiffness_n_per_um=stiff,
        mass_flow_kg_s=mass,
        flow_l_per_min=solver.litres_per_min(mass),
        peak_stiffness_gap_um=g_peak,
        peak_stiffness_n_per_um=k_peak,
        peak_inside=bool(inside),
        assumptions=solver.feed_assumptions,
        feed_pressure_ratio=np.array(ratio),
    )


#: Gaps shown in a short table of a flat-guide curve, as multiples of the nominal gap (gap/4 to 4 gap).
CURVE_TABLE_GAP_RATIOS = (0.25, 0.5, 2**-0.5, 1.0, 2**0.5, 2.0, 4.0)


def curve_table_rows(curve: FilmCurve, gap_um: float) -> tuple:
    """Which samples of a flat-guide curve to show in a short table.

    Parameters
    ----------
    curve : FilmCurve
        The curve (gaps increasing).
    gap_um : float
        The nominal gap, µm.

    Returns
    -------
    (rows, nominal, peak) : tuple
        ``rows``: sorted indices into the curve's arrays, the samples nearest (on a log scale) to
        ``CURVE_TABLE_GAP_RATIOS`` times ``gap_um`` plus the sample of greatest stiffness; ``nominal``: the
        index nearest ``gap_um``; ``peak``: the index of greatest stiffness.
    """
    lg = np.log(np.asarray(curve.gap_um, dtype=float))
    nearest = [int(np.argmin(np.abs(lg - math.log(r * gap_um)))) for r in CURVE_TABLE_GAP_RATIOS]
    peak = int(np.argmax(curve.stiffness_n_per_um))
    nominal = int(np.argmin(np.abs(lg - math.log(gap_um))))
    return tuple(sorted(set(nearest) | {peak})), nominal, peak


def film_equilibrium(
    mesh: PadMesh,
    feed: PorousFeed,
    load_n: float,
    *,
    deviation=None,
    pivot: bool = True,
    tilt_x_urad: float = 0.0,
    tilt_y_urad: float = 0.0,
    rtol: float = 1e-6,
) -> FilmEquilibrium:
    """Fly height (and, on a ball pivot, tilts) at which a pad carries ``load_n`` over a surface.

    Newton's method on ``W(h0) = load`` (and zero moments about the pivot at the pad centre for
    ``pivot=True``), with the exact derivatives of the discrete film from the reused LU factors.

    Parameters
    ----------
    mesh : PadMesh
    feed : PorousFeed or OrificeFeed
    load_n : float
        Load on the pad, N (below the closed-film capacity ``(ps - pa) * area``).
    deviation : None, callable, array or PadDeviation
        Surface under the pad (see :func:`pad_deviation`).
    pivot : bool
        True: the pad sits on a ball pivot at its centre and tilts freely (zero moment). False: the pad is
        held at ``tilt_x_urad, tilt_y_urad`` (µrad, in the surface's frame) and only its height floats.
    rtol : float
        Convergence: load within ``rtol * load`` and moments within ``rtol * load * half pad size``.

    Returns
    -------
    FilmEquilibrium

    Raises
    ------
    InputValueError
        Load beyond the pad's capacity.
    GeometryError
        No equilibrium with an open film (the pad would touch the surface).
    """
    load = _check_load(mesh, feed, load_n)
    dev = deviation if isinstance(deviation, PadDeviation) else pad_deviation(mesh, deviation)
    solver = _Solver(mesh, feed)
    try:
        h_flat = solver.flat_fly_height(load, rtol)
        out = solver.equilibrium(dev.height_um, load, pivot, (tilt_x_urad, tilt_y_urad), [h_flat, 0.0, 0.0], rtol)
    except _Contact:
        raise GeometryError(
            f"no film equilibrium for {load:g} N: the pad would touch the surface",
            fix="reduce the load, raise the supply pressure or flatten the surface under the pad",
        ) from None
    return _make_equilibrium(solver, out)


def _make_equilibrium(solver, out) -> FilmEquilibrium:
    u, sol, gap, k, pad, it = out
    st = solver.state(gap, sol, k)
    return FilmEquilibrium(
        fly_height_um=st.fly_height_um,
        min_film_um=st.min_film_um,
        pad_height_um=float(pad[0]),
        tilt_x_urad=float(pad[1]),
        tilt_y_urad=float(pad[2]),
        load_n=st.load_n,
        stiffness_n_per_um=float(k),
        mass_flow_kg_s=st.mass_flow_kg_s,
        flow_l_per_min=st.flow_l_per_min,
        iterations=int(it),
        state=st,
        assumptions=st.assumptions,
    )


def film_along_travel(
    mesh: PadMesh,
    feed: PorousFeed,
    load_n: float,
    deviations,
    *,
    pivot: bool = True,
    tilt_x_urad: float = 0.0,
    tilt_y_urad: float = 0.0,
    rtol: float = 1e-6,
    workers: int | None = None,
    progress=None,
) -> FilmTravel:
    """Film equilibrium of a pad at each carriage position.

    Parameters
    ----------
    mesh : PadMesh
    feed : PorousFeed or OrificeFeed
    load_n : float
        Load on the pad, N, the same at every position.
    deviations : sequence of (None, callable, array or PadDeviation), length k
        Surface under the pad at each position (see :func:`pad_deviation` and :func:`surface_under_pad`).
    pivot, tilt_x_urad, tilt_y_urad, rtol
        As in :func:`film_equilibrium`.
    workers : int, optional
        Threads sharing the positions (contiguous blocks; each block warm-starts Newton from its previous
        position). Default: ``min(2, os.cpu_count())``.
    progress : callable, optional
        Called as ``progress(1)`` after each position (from worker threads).

    Returns
    -------
    FilmTravel
    """
    load = _check_load(mesh, feed, load_n)
    devs = [d if isinstance(d, PadDeviation) else pad_deviation(mesh, d) for d in deviations]
    k = len(devs)
    if k == 0:
        raise InputValueError("no carriage positions", fix="give at least one position")
    solver = _Solver(mesh, feed)
    try:
        h_flat = solver.flat_fly_height(load, rtol)
    except _Contact:  # pragma: no cover - excluded by the capacity check
        raise GeometryError("no film equilibrium on a flat guide", fix="reduce the load") from None
    nw = max(1, min(int(workers or min(2, os.cpu_count() or 1)), k))
    names = ("fly", "minf", "padh", "tx", "ty", "load", "stiff", "mass", "flow", "it", "ratio")
    out = {nm: np.full(k, np.nan) for nm in names}
    conv = np.zeros(k, dtype=bool)
    failure = [""] * k
    lock = threading.Lock()

    def block(idx):
        guess = [h_flat, 0.0, 0.0]
        prev = None  # solution at the position before the last one, for a linear prediction
        for i in idx:
            try:
                res = solver.equilibrium(devs[i].height_um, load, pivot, (tilt_x_urad, tilt_y_urad), guess, rtol)
            except _Contact:
                failure[i] = "no equilibrium with an open film: the pad would touch the surface"
                guess, prev = [h_flat, 0.0, 0.0], None
            else:
                eq = _make_equilibrium(solver, res)
                vals = (eq.fly_height_um, eq.min_film_um, eq.pad_height_um, eq.tilt_x_urad, eq.tilt_y_urad,
                        eq.load_n, eq.stiffness_n_per_um, eq.mass_flow_kg_s, eq.flow_l_per_min, eq.iterations,
                        eq.state.feed_pressure_ratio)
                for nm, v in zip(names, vals):
                    out[nm][i] = v
                conv[i] = True
                last = np.array(list(res[0]) + [0.0] * (3 - len(res[0])))
                # predict the next position linearly from the last two (positions are evenly spaced in
                # practice; a poor prediction only costs a Newton step)
                guess = list(last if prev is None else 2.0 * last - prev)
                if guess[0] <= 0.5 * last[0]:
                    guess = list(last)
                prev = last
            if progress is not None:
                with lock:
                    progress(1)

    blocks = [b for b in np.array_split(np.arange(k), nw) if b.size]
    if len(blocks) == 1:
        block(blocks[0])
    else:
        with ThreadPoolExecutor(max_workers=len(blocks)) as ex:
            for f in [ex.submit(block, b) for b in blocks]:
                f.result()
    return FilmTravel(
        fly_height_um=out["fly"],
        min_film_um=out["minf"],
        pad_height_um=out["padh"],
        tilt_x_urad=out["tx"],
        tilt_y_urad=out["ty"],
        load_n=out["load"],
        stiffness_n_per_um=out["stiff"],
        mass_flow_kg_s=out["mass"],
        flow_l_per_min=out["flow"],
        iterations=out["it"].astype(float),
        converged=conv,
        failure=tuple(failure),
        assumptions=solver.feed_assumptions,
        feed_pressure_ratio=out["ratio"],
    )

