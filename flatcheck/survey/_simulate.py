"""Simulated readings: fill a planned survey from a known surface.

The readings are computed *exactly* from a height function, so that reducing
them gives the surface back (up to what the instrument cannot see: a plane for
an autocollimator survey, a height offset and a tilt for levels). Used by the
tests and by ``sample_readings/make_samples.py``.

Model of one reading (slope instruments), in the survey's sign convention
(positive = the surface rises toward the line's last station)::

    reading = g * u(h_to - h_from, B) + zero + noise

with ``u`` the exact inverse of :func:`flatcheck.units.rise_um` (``atan`` for
angle units, a plain ratio for slope units), ``g = 2`` for an autocollimator that
reports beam deviation (twice the mirror tilt) and 1
otherwise. The zero is per line for an autocollimator (re-aimed for every line)
and one for all lines for levels (gravity is the common reference); it is the
same for every run of a line. An indicator reads ``height + datum + noise`` at
each station.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Mapping

import numpy as np

from ..errors import InputValueError
from ..form import HeightMap
from ._model import Run, Survey
from ..units import ARCSEC_TO_RAD, angle_unit, length_unit

__all__ = ["RUN_KINDS", "simulate_survey", "DEFAULT_RANDOM_ZERO_RAD", "surface_grid"]

#: Run kinds accepted by :func:`simulate_survey`: walking order, and whether the
#: instrument was turned round (readings stored negated with ``flip_sign``).
RUN_KINDS = ("forward", "reverse", "forward-flipped", "reverse-flipped")

#: Standard deviation of a random instrument zero, as an angle: 20 arcsec (an
#: illustrative value for a re-aimed autocollimator or an unzeroed level).
DEFAULT_RANDOM_ZERO_RAD = 20.0 * ARCSEC_TO_RAD


def _rng(rng):
    if isinstance(rng, np.random.Generator):
        return rng
    return np.random.default_rng(rng)


def simulate_survey(
    plan: Survey,
    height_fn,
    *,
    instrument_zero=None,
    noise_sd: float = 0.0,
    runs=("forward",),
    rng=None,
    unit: str | None = None,
) -> Survey:
    """Fill every line of ``plan`` with readings computed from a surface.

    Parameters
    ----------
    plan : Survey
        A planned survey (from :mod:`flatcheck.survey`); existing runs are replaced.
    height_fn : callable
        ``height_fn(x_mm, y_mm) -> height_um``, vectorised over arrays of shape (n,).
    instrument_zero : None, float, "random", sequence or mapping
        Instrument zero in reading units. ``None``: no zero. A number: that zero
        for every line. ``"random"``: drawn from ``rng`` with standard deviation
        :data:`DEFAULT_RANDOM_ZERO_RAD` (20 arcsec) in reading units, one per line
        for an autocollimator, ONE for all lines for levels, one datum for an
        indicator (standard deviation 10 µm). A sequence (one per line, in line
        order) or a mapping line name -> zero: autocollimators only.
    noise_sd : float
        Standard deviation of the Gaussian noise of each reading, in reading units.
    runs : sequence of str, or mapping line name -> sequence of str
        The runs of each line, from :data:`RUN_KINDS`. ``"reverse"`` runs are
        listed in walking order (last station first); ``"-flipped"`` runs were
        taken with the instrument turned round (the slope read negated, the
        instrument's zero unchanged; ``flip_sign`` set).
        A mapping gives the runs per line (lines not in it get one forward run).
    rng : numpy.random.Generator or int or None
        Source of the random zero and noise (a seed is accepted). Not used when
        there is neither noise nor a random zero.
    unit : str, optional
        Reading unit; defaults to the plan's instrument unit (the returned
        survey's instrument is changed to it).

    Returns
    -------
    Survey
        A copy of ``plan`` with runs, and ``meta["simulation"]`` recording the
        true heights (µm, shape (n_stations,)), the zeros and the noise.

    Raises
    ------
    InputValueError
        Unknown run kinds, bad noise, per-line zeros for a gravity-referenced
        instrument, or a height function that does not return finite heights
        of the right shape.
    UnitError
        An unknown unit, or a unit of the wrong kind for the instrument.
    """
    inst = plan.instrument
    if unit is not None:
        inst = dataclasses.replace(inst, unit=str(unit))
    heights_mode = inst.reads_heights
    if heights_mode:
        lu = length_unit(inst.unit, where="unit")
    else:
        au = angle_unit(inst.unit, where="unit")
    noise_sd = float(noise_sd)
    if not math.isfinite(noise_sd) or noise_sd < 0:
        raise InputValueError(f"noise_sd is {noise_sd}", where="noise_sd", fix="give a standard deviation >= 0")
    x, y = plan.x_mm, plan.y_mm
    h = np.asarray(height_fn(x, y), dtype=float)
    if h.shape != x.shape:
        h = np.broadcast_to(h, x.shape).astype(float) if h.ndim == 0 else h
    if h.shape != x.shape or not np.all(np.isfinite(h)):
        raise InputValueError(
            f"the height function returned shape {h.shape} or non-finite values for {x.size} stations",
            where="height_fn",
            fix="return one finite height in µm per (x_mm, y_mm) pair",
        )
    n_lines = len(plan.lines)
    generator = None

    def gen():
        nonlocal generator
        if generator is None:
            generator = _rng(rng)
        return generator

    # ---- zeros, in reading units, one per line
    if heights_mode:
        zero_sd = 10.0 / lu.factor_um  # 10 µm datum spread, illustrative
    else:
        zero_sd = DEFAULT_RANDOM_ZERO_RAD / au.factor  # same for angle and ratio (small angles)
    per_line_allowed = inst.kind == "autocollimator"
    if instrument_zero is None:
        zeros = np.zeros(n_lines)
    elif isinstance(instrument_zero, str):
        if instrument_zero != "random":
            raise InputValueError(
                f"instrument_zero is {instrument_zero!r}", where="instrument_zero", fix="give a number, 'random' or None"
            )
        if per_line_allowed:
            zeros = gen().normal(0.0, zero_sd, n_lines)
        else:
            zeros = np.full(n_lines, gen().normal(0.0, zero_sd))
    elif isinstance(instrument_zero, Mapping) or (np.ndim(instrument_zero) == 1):
        if not per_line_allowed:
            raise InputValueError(
                f"per-line zeros were given for a {inst.kind}, which has one zero for all lines",
                where="instrument_zero",
                fix="give one number",
            )
        if isinstance(instrument_zero, Mapping):
            unknown = set(instrument_zero) - {ln.name for ln in plan.lines}
            if unknown:
                raise InputValueError(
                    f"zeros given for unknown lines {sorted(unknown)}", where="instrument_zero", fix="use the plan's line names"
                )
            zeros = np.array([float(instrument_zero.get(ln.name, 0.0)) for ln in plan.lines])
        else:
            zeros = np.asarray(instrument_zero, dtype=float)
            if zeros.shape != (n_lines,):
                raise InputValueError(
                    f"{zeros.size} zeros for {n_lines} lines", where="instrument_zero", fix="give one zero per line"
                )
    else:
        zeros = np.full(n_lines, float(instrument_zero))
    if not np.all(np.isfinite(zeros)):
        raise InputValueError("an instrument zero is not finite", where="instrument_zero", fix="give finite zeros")

    # ---- runs per line
    def runs_of(name):
        kinds = runs.get(name, ("forward",)) if isinstance(runs, Mapping) else runs
        if isinstance(kinds, str):
            kinds = (kinds,)
        kinds = tuple(kinds)
        bad = [k for k in kinds if k not in RUN_KINDS]
        if bad or not kinds:
            raise InputValueError(
                f"run kinds {bad or kinds!r} for line {name!r}", where="runs", fix=f"use some of {', '.join(RUN_KINDS)}"
            )
        return kinds

    if isinstance(runs, Mapping):
        unknown = set(runs) - {ln.name for ln in plan.lines}
        if unknown:
            raise InputValueError(f"runs given for unknown lines {sorted(unknown)}", where="runs", fix="use the plan's line names")

    idx = plan.station_index
    gain = 2.0 if (inst.kind == "autocollimator" and inst.reports == "beam-deviation") else 1.0
    new_lines = []
    for li, ln in enumerate(plan.lines):
        st = np.array([idx[s] for s in ln.stations], dtype=np.int64)
        if heights_mode:
            exact = h[st] / lu.factor_um
        else:
            rise_um = h[st[1:]] - h[st[:-1]]
            slope = rise_um / (float(ln.foot_spacing_mm) * 1e3)  # rise over run, dimensionless
            if au.kind == "angle":
                exact = np.arctan(slope) / au.factor
            else:
                exact = slope / au.factor
            exact = gain * exact
        out_runs = []
        for kind in runs_of(ln.name):
            flip = kind.endswith("-flipped")
            # A turned instrument reads the slope negated, but its zero is its own and keeps its sign.
            r = (-exact if flip else exact) + zeros[li]
            if noise_sd > 0:
                r = r + gen().normal(0.0, noise_sd, r.size)
            if kind.startswith("reverse"):
                r = r[::-1]
            out_runs.append(
                Run(tuple(float(v) for v in r), order="reverse" if kind.startswith("reverse") else "forward", flip_sign=flip)
            )
        new_lines.append(dataclasses.replace(ln, runs=tuple(out_runs)))
    meta = dict(plan.meta)
    meta["simulation"] = {
        "height_um": h.copy(),
        "zeros": zeros.copy(),
        "noise_sd": noise_sd,
        "unit": inst.unit,
    }
    return dataclasses.replace(plan, instrument=inst, lines=tuple(new_lines), meta=meta)


def surface_grid(height_fn, length_mm: float, width_mm: float, pitch_mm: float, *, label: str = "") -> HeightMap:
    """A known surface sampled on a regular grid from (0, 0) to (length, width), as a height map.

    Parameters
    ----------
    height_fn : callable
        ``height_fn(X_mm, Y_mm) -> height_um`` on arrays.
    length_mm, width_mm : float
        Extent along x and y in mm (the last node lies on the edge when the pitch divides it).
    pitch_mm : float
        Grid pitch in mm.

    Examples
    --------
    >>> hm = surface_grid(lambda x, y: 0.001 * x, 100.0, 50.0, 25.0)
    >>> hm.n, float(hm.height_um.max())
    (15, 0.1)
    """
    x = np.arange(0.0, length_mm + 1e-9, pitch_mm)
    y = np.arange(0.0, width_mm + 1e-9, pitch_mm)
    X, Y = np.meshgrid(x, y)
    Z = np.broadcast_to(np.asarray(height_fn(X, Y), dtype=float), X.shape)
    return HeightMap(X.ravel(), Y.ravel(), Z.ravel(), length_mm=length_mm, width_mm=width_mm, label=label)
