"""Survey reduction: from readings to a height map.

The readings of a survey (one rise per step for angle and slope instruments,
one height per station for an indicator) are adjusted by weighted least squares
over the whole network of lines, whatever the layout (Union Jack, grid, free
lines). The unknowns are

- the height of every station (µm), and
- the instrument zero: one per line for an autocollimator (it is re-aimed for
  every line; runs taken with it turned round get one of their own, as it is
  set up anew), one shared by every line for a gravity-referenced level or
  differential level (a turned-round level reads ``-slope + zero``, so
  reversed runs measure its zero), one shared datum offset for an indicator.

Observation model (µm), for step ``k`` of a line walked with sign ``s``
(``s = -1`` when the run sets ``flip_sign``, the instrument turned round)::

    rise_k = h[to] - h[from] + s * base_k * zero          (slope instruments)
    value_k = h[station] + s * offset                     (indicator)

with ``zero`` in µrad and ``base_k`` in mm (``base * zero * 1e-3`` is in µm).
Angle units enter the rise as ``base * tan(angle)``; the zero is an *angle*, so
it is removed inside the tangent by a short fixed-point iteration (exact to
rounding on noise-free data; the linear model is exact for slope units).

Each rise is weighted by ``(b_ref / base)**2`` (equal angular reading noise on
every step; ``b_ref`` the median foot spacing), indicator readings equally.

This module holds that model (:class:`_Model`, built by ``_build_model``), the
result records both reductions return (:class:`Reduction`,
:class:`LinearReduction`, :class:`LineClosure`, :class:`InstrumentZero`,
:class:`Outlier`, :class:`NetworkRank`) and the small steps between them (zeros
inside the tangent, the zero records, the height map). The datum and rank
analysis and the minimal-constraint solver are in :mod:`flatcheck.survey._rank`;
closures, outliers, data snooping and weakly checked lines in
:mod:`flatcheck.survey._diagnostics`; :func:`flatcheck.survey.reduce_survey`
(:mod:`flatcheck.survey._reduce`) puts them together.
"""

from __future__ import annotations

import contextlib
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from ..errors import InputValueError
from ..form import HeightMap
from ._model import Survey, observations
from ..units import angle_unit, length_unit

__all__ = [
    "METHODS",
    "LineClosure",
    "InstrumentZero",
    "Outlier",
    "LinearReduction",
    "NetworkRank",
    "Reduction",
]

METHODS = ("least-squares", "moody")

# Above these sizes the dense operator G is not formed (a dense inverse of the normal
# matrix, ~n_unknowns**3 flops); below them it is formed when first asked for (Monte Carlo).
_OPERATOR_MAX_OBS = 6000
_OPERATOR_MAX_UNKNOWNS = 1500
# Up to this many unknowns the exact redundancy numbers (and the full outlier diagnosis) come
# from the dense inverse during the reduction itself; above it the mean redundancy number is used.
# The limit sits where the dense path costs at most about 1.5x the sparse one on one thread
# (measured for 16 x 16 to 45 x 45 grids, docs/performance.md), so the time grows smoothly across
# it instead of falling by 5-7x at the switch, as it did at 1500 unknowns. (A selected inverse on
# the sparse factor, Takahashi's recurrence, gave the exact numbers at any size but, written in
# Python column by column, cost 4x the whole sparse reduction at 38 x 38: not used.)
_REDUNDANCY_DENSE_MAX = 450


def blas_one_thread():
    """Context manager: BLAS pinned to one thread for small dense algebra.

    Dense factorisations of a few hundred to a few thousand unknowns gain little from a
    second thread, and on a busy machine the threads compete (measured: the rank analysis
    of a 200 x 200 autocollimator grid took 13x longer under load with the default threads).
    Uses threadpoolctl, imported here; without it, nothing is pinned.
    """
    try:
        from threadpoolctl import threadpool_limits
    except ImportError:  # pragma: no cover - a declared dependency
        return contextlib.nullcontext()
    return threadpool_limits(limits=1, user_api="blas")


# --------------------------------------------------------------------------- records
@dataclass(frozen=True)
class LineClosure:
    """Closure error of one line.

    Attributes
    ----------
    line : str
        Line name.
    closure_um : float
        Closure error in µm (meaning below).
    meaning : str
        What the number is, in words.
    run_spread_um : float or None
        For a line walked more than once: largest difference between the runs'
        end-to-end rises (zero removed), in µm; ``None`` for a single run.
    station : str or None
        The station where the closure is taken (least squares).
    """

    line: str
    closure_um: float
    meaning: str
    run_spread_um: float | None = None
    station: str | None = None


@dataclass(frozen=True)
class InstrumentZero:
    """An adjusted instrument zero.

    Attributes
    ----------
    lines : tuple of str
        The lines it applies to (one line for an autocollimator, all for a level).
    value : float
        The zero in the instrument's reading unit (as read, before any halving of
        beam deviation): the reading the instrument gives on a step parallel to
        the reference (the least-squares plane of the stations for an
        autocollimator; gravity for a level; the datum for an indicator).
    unit : str
        The reading unit.
    rise_um : float
        The zero as a rise in µm over ``base_mm`` (indicator: the datum offset, µm).
    base_mm : float
        Foot spacing in mm used for ``rise_um`` (the median of the lines'; 0 for indicators).
    turned : bool
        Autocollimator only: the zero of the runs of the line taken with the
        instrument turned round (``flip_sign``), which was set up and aimed anew.
        Its ``value`` is on the instrument's own scale as read.
    """

    lines: tuple
    value: float
    unit: str
    rise_um: float
    base_mm: float
    turned: bool = False


@dataclass(frozen=True)
class Outlier:
    """A reading whose standardised residual exceeds :data:`OUTLIER_THRESHOLD`.

    Attributes
    ----------
    line : str
        Line name.
    run : int
        Run number, 1-based.
    step : int
        Step number along the line from its first station, 1-based (station
        number for indicators).
    station_from, station_to : str
        The step's stations in the line's forward direction (``station_from`` is
        ``""`` for indicators).
    reading : float
        The reading as given (forward order and sign), in the instrument's unit.
    residual_um : float
        Residual in µm (observed minus adjusted).
    w : float
        Standardised residual (dimensionless).
    where : str
        Where the run is in its file.
    group : int or None
        Diagnosis by iterated data snooping (module notes): ``k >= 1`` for a
        reading of the k-th suspect group (the most likely wrong readings, in
        the order found); ``0`` for a reading flagged only through a suspect's
        error (its ``w_after`` is within the limit); ``None`` when not diagnosed
        (large networks) or, with ``w_after`` above the limit, still suspect
        after the search stopped.
    group_size : int
        Number of readings in its suspect group (readings the layout cannot
        tell apart: equal ``|w|``); 1 otherwise.
    group_lines : tuple of str
        The lines of its suspect group.
    w_after : float
        Standardised residual once the suspect groups are set aside (NaN for
        the suspects themselves, or when not diagnosed).
    """

    line: str
    run: int
    step: int
    station_from: str
    station_to: str
    reading: float
    residual_um: float
    w: float
    where: str = ""
    group: int | None = None
    group_size: int = 1
    group_lines: tuple = ()
    w_after: float = float("nan")

    def describe(self) -> str:
        """One line naming the reading: line, run, step, stations, w and the diagnosis."""
        span = f"{self.station_from} -> {self.station_to}" if self.station_from else self.station_to
        text = (
            f"line {self.line!r}, run {self.run}, step {self.step} ({span}): reading {self.reading:g}, "
            f"residual {self.residual_um:+.3f} µm, w = {self.w:+.2f}"
        )
        if self.group is not None and self.group >= 1 and self.group_size > 1:
            lines = " and ".join(repr(n) for n in self.group_lines)
            text += (
                f"; one of {self.group_size} readings of line{'s' if len(self.group_lines) > 1 else ''} {lines} "
                "that this layout cannot tell apart"
            )
        elif self.group == 0:
            text += f"; flagged only through a suspect reading's error (w = {self.w_after:+.2f} once it is set aside)"
        return text


@dataclass(frozen=True, eq=False)
class LinearReduction:
    """The reduction as a matrix: ``heights_um = G @ value_um``.

    Attributes
    ----------
    G : ndarray, shape (n_stations, n_obs)
        Maps the observations (rises or heights in µm, in the order of
        :func:`flatcheck.survey.observations`) to station heights in µm referred
        to the least-squares plane of the stations. For angle units with an
        instrument zero this is the linearisation at the adjusted solution.
        It may be formed only when first read (a dense inverse, for larger
        networks): construct with the array or with a function returning it.
    station_names : tuple of str
        Station order of the rows.
    method : str
        ``"least-squares"`` or ``"moody"``.
    """

    _G: object  # ndarray, or a function of no arguments returning it (formed on first use)
    station_names: tuple
    method: str

    @property
    def G(self) -> np.ndarray:
        """The operator, ``(n_stations, n_obs)``; formed on first use when built lazily."""
        G = self._G
        if callable(G):
            G = np.asarray(G())
            object.__setattr__(self, "_G", G)
        return G

    def heights_um(self, value_um) -> np.ndarray:
        """Heights in µm from observations.

        Parameters
        ----------
        value_um : array_like, shape (n_obs,) or (k, n_obs)
            Observations in µm (one vector, or a batch of ``k`` trials).

        Returns
        -------
        ndarray, shape (n_stations,) or (k, n_stations)
            Heights in µm referred to the least-squares plane of the stations.
        """
        v = np.asarray(value_um, dtype=float)
        return self.G @ v if v.ndim == 1 else v @ self.G.T


@dataclass(frozen=True)
class NetworkRank:
    """How much of the surface a layout and instrument can observe.

    Attributes
    ----------
    n_unknowns : int
        Station heights plus instrument zeros.
    n_observations : int
        Readings (every run counted).
    rank : int
        Rank of the design matrix.
    deficiency : int
        ``n_unknowns - rank``: directions the readings cannot see.
    redundancy : int
        ``n_observations - rank``: degrees of freedom for checking the readings.
    datum : tuple of str
        Null-space directions the reduction handles (offset, tilts, zero/tilt trade).
    unobservable : tuple of str
        Further shapes the layout cannot see (empty when the survey reduces).
    exact : bool
        True when the rank was also confirmed by a dense eigen-decomposition.
    """

    n_unknowns: int
    n_observations: int
    rank: int
    deficiency: int
    redundancy: int
    datum: tuple
    unobservable: tuple
    exact: bool


@dataclass(frozen=True, eq=False)
class Reduction:
    """The result of reducing a survey.

    Attributes
    ----------
    heightmap : HeightMap
        Station positions (mm), names and heights (µm) referred to the
        least-squares plane through the stations.
    method : str
        ``"least-squares"`` or ``"moody"``.
    residual_um : ndarray, shape (n_obs,)
        Observed minus adjusted, in µm, aligned with ``observations(survey)``.
    sigma0_um : float
        A-posteriori standard deviation of one observation in µm, for a step of
        ``ref_base_mm`` (``sqrt(r^T W r / redundancy)``); NaN without redundancy.
    sigma0_reading : float
        The same in the instrument's reading unit.
    ref_base_mm : float
        Foot spacing of unit weight in mm (median foot spacing; 0 for indicators).
    redundancy : int
        Degrees of freedom (observations minus rank).
    closures : tuple of LineClosure
        Closure errors (per line for least squares; the two centre closures for Moody).
    instrument_zeros : tuple of InstrumentZero
        Adjusted zeros (least squares) or the zeros implied by the Moody map.
    outliers : tuple of Outlier
        Flagged readings (least squares only): the suspect groups of iterated data
        snooping first, in the order found (the first holds the largest ``|w|``),
        then the readings flagged only through them, by decreasing ``|w|``.
    warnings : tuple of str
        Things the user should know (no redundancy, zero/tilt trade...).
    operator : LinearReduction or None
        Dense linear operator; ``None`` for large surveys.
    rank : NetworkRank
        Rank and redundancy of the network.
    redundancy_numbers : ndarray, shape (n_obs,)
        Diagonal of ``I - A N^- A^T W`` (exact when ``operator`` is not None,
        otherwise the mean value ``redundancy / n_obs``).
    standardized_residual : ndarray, shape (n_obs,)
        ``w`` of every observation (NaN where it cannot be tested).
    moody : object or None
        The :class:`flatcheck.MoodyResult` for ``method="moody"``.
    standardized_residual_after : ndarray, shape (n_obs,), or None
        ``w`` of every observation once the suspect readings found by iterated
        data snooping are set aside (NaN for the suspects and where it cannot be
        tested); ``None`` when not diagnosed (Moody, large networks).
    """

    heightmap: HeightMap
    method: str
    residual_um: np.ndarray
    sigma0_um: float
    sigma0_reading: float
    ref_base_mm: float
    redundancy: int
    closures: tuple
    instrument_zeros: tuple
    outliers: tuple
    warnings: tuple
    operator: LinearReduction | None
    rank: NetworkRank
    redundancy_numbers: np.ndarray
    standardized_residual: np.ndarray
    moody: object = None
    standardized_residual_after: np.ndarray | None = None


# --------------------------------------------------------------------------- the model
@dataclass(frozen=True, eq=False)
class _Model:
    """Design matrix and bookkeeping shared by the least-squares and Moody reductions."""

    survey: Survey
    obs: object
    A: sp.csr_matrix  # (m, n + p)
    w: np.ndarray  # (m,) weights
    n: int
    p: int
    zero_of_obs: np.ndarray  # (m,) index of the zero unknown (0..p-1)
    sign: np.ndarray  # (m,) +1 / -1 (flip_sign)
    ref_base_mm: float
    angle_factor: float | None  # rad per reading unit (after halving) for angle units, else None
    slope_factor: float  # slope (or µm for indicators) per reading unit after halving
    half: float
    zero_lines: tuple  # per zero unknown: tuple of line names
    zero_base_mm: np.ndarray  # per zero unknown: median base
    zero_turned: tuple = ()  # per zero unknown: autocollimator zero of turned-round runs


def _build_model(survey: Survey) -> _Model:
    inst = survey.instrument
    for ln in survey.lines:
        if not ln.runs:
            where = f"{survey.source}, line {ln.name!r}" if survey.source else f"line {ln.name!r}"
            raise InputValueError(
                "the line has no readings",
                where=where,
                fix=f"fill in its {len(ln.stations) if inst.reads_heights else ln.steps} readings "
                "(readings = [...]) in the order taken",
            )
    obs = observations(survey)
    m = obs.value_um.size
    n = len(survey.stations)
    lines = survey.lines
    flips = {(li, ri): (-1.0 if run.flip_sign else 1.0) for li, ln in enumerate(lines) for ri, run in enumerate(ln.runs)}
    sign = np.array([flips[(int(a), int(b))] for a, b in zip(obs.line, obs.run)], dtype=float)
    half = 0.5 if (inst.kind == "autocollimator" and inst.reports == "beam-deviation") else 1.0
    rows = np.arange(m)
    zero_turned = ()
    if inst.reads_heights:
        p = 1
        zero_of_obs = np.zeros(m, dtype=np.int64)
        cols = [obs.i_to, n + zero_of_obs]
        vals = [np.ones(m), sign]
        rr = [rows, rows]
        w = np.ones(m)
        ref_base = 0.0
        angle_factor = None
        slope_factor = length_unit(inst.unit).factor_um
        zero_lines = (tuple(ln.name for ln in lines),)
        zero_base = np.zeros(1)
    else:
        if np.any(obs.base_mm <= 0) or not np.all(np.isfinite(obs.base_mm)):
            bad = int(obs.line[np.flatnonzero(~(obs.base_mm > 0))[0]])
            raise InputValueError(
                "the foot spacing must be a positive number of mm",
                where=f"line {lines[bad].name!r}",
                fix="give the base length of the instrument's feet",
            )
        if inst.gravity_referenced:
            p = 1
            zero_of_obs = np.zeros(m, dtype=np.int64)
            zero_lines = (tuple(ln.name for ln in lines),)
            zero_base = np.array([float(np.median(obs.base_mm))])
        else:
            # re-aimed for every line; runs taken with the instrument turned round
            # (set up again at the other end) get a zero of their own
            key = obs.line * 2 + (sign < 0)
            groups, zero_of_obs = np.unique(key, return_inverse=True)
            zero_of_obs = zero_of_obs.astype(np.int64)
            p = groups.size
            zero_lines = tuple((lines[g // 2].name,) for g in groups)
            zero_turned = tuple(bool(g % 2) for g in groups)
            zero_base = np.array([float(lines[g // 2].foot_spacing_mm) for g in groups])
        # rise = h[to] - h[from] + s * base_mm * zero_urad * 1e-3   (µm)
        rr = [rows, rows, rows]
        cols = [obs.i_to, obs.i_from, n + zero_of_obs]
        vals = [np.ones(m), -np.ones(m), sign * obs.base_mm * 1e-3]
        ref_base = float(np.median(obs.base_mm))
        w = (ref_base / obs.base_mm) ** 2
        unit = angle_unit(inst.unit)
        angle_factor = unit.factor * half if unit.kind == "angle" else None
        slope_factor = unit.factor * half
    A = sp.csr_matrix(
        (np.concatenate(vals), (np.concatenate(rr), np.concatenate(cols))), shape=(m, n + p)
    )
    return _Model(
        survey, obs, A, w, n, p, zero_of_obs, sign, ref_base, angle_factor, slope_factor, half, zero_lines, zero_base,
        zero_turned,
    )


# --------------------------------------------------------------------------- from the model to the records
def _linearised_values(model: _Model, zeros_urad: np.ndarray) -> np.ndarray:
    """Observations with the zero moved inside the tangent (angle units), in µm.

    For angle units the reading is ``atan(rise/base) + s*zero``; the value
    returned is ``base*tan(angle - s*zero) + s*base*zero``, which equals
    ``rise + s*base*zero`` exactly, the linear model of the design matrix.
    """
    obs = model.obs
    if model.angle_factor is None:
        return obs.value_um
    eps_rad = model.sign * zeros_urad[model.zero_of_obs] * 1e-6
    base_um = obs.base_mm * 1e3
    angle = obs.reading * model.angle_factor
    return base_um * np.tan(angle - eps_rad) + base_um * eps_rad


def _zero_records(model: _Model, zeros: np.ndarray) -> tuple:
    inst = model.survey.instrument
    out = []
    for j in range(model.p):
        if inst.reads_heights:
            value = zeros[j] / model.slope_factor
            rise = zeros[j]
            base = 0.0
        else:
            # zero in µrad (angle units) or µm/m (slope units) -> reading unit; an autocollimator
            # that reports beam deviation reads twice the mirror tilt (slope_factor includes the half)
            value = zeros[j] * 1e-6 / model.slope_factor
            base = float(model.zero_base_mm[j])
            rise = base * zeros[j] * 1e-3
        turned = bool(model.zero_turned[j]) if model.zero_turned else False
        out.append(InstrumentZero(model.zero_lines[j], float(value), inst.unit, float(rise), base, turned))
    return tuple(out)


def _heightmap(survey: Survey, h: np.ndarray, label: str) -> HeightMap:
    return HeightMap(
        survey.x_mm,
        survey.y_mm,
        h,
        names=tuple(s.name for s in survey.stations),
        length_mm=survey.surface.length_mm,
        width_mm=survey.surface.width_mm,
        label=label,
    )


def _label(survey: Survey) -> str:
    s = survey.surface
    return s.description or f"surface {s.length_mm:g} x {s.width_mm:g} mm"
