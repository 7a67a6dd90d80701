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

Datum. The normal equations are singular: the network never fixes the plane of
the surface (an autocollimator sees neither offset nor tilt; a level sees no
offset, and on lines in only two directions its zero trades against a tilt).
These null-space directions are found inside the small candidate subspace
``{1, x, y at the stations} x {instrument zeros}`` by a dense eigen-decomposition
of the projected normal matrix; one unknown per null direction is held at zero
(minimal constraints, chosen by pivoted QR), the rest solved by a sparse LU
factorisation, and the least-squares plane of the station heights subtracted.
Anything else the layout cannot observe (a twist on an autocollimator grid,
stations cut off from the network) raises :class:`UnobservableError`.

Outliers. The standardised residual of observation ``k`` is
``w_k = r_k / (sigma_k * sqrt(r_kk))`` where ``r_kk`` is the redundancy number
(diagonal of ``I - A N^- A^T W``) and ``sigma_k`` the standard deviation of the
observation: the instrument's stated reading uncertainty when given (Baarda's
data snooping), else the a-posteriori value ``sigma0`` (Pope's tau test).
``|w_k| > 3.29`` is flagged (two-sided 0.1 % point of the standard normal).

One gross error shows in the residuals of every reading that checks it, so many
readings may be flagged for one mis-keyed number. The flagged readings are
therefore diagnosed by iterated data snooping (common practice, no single
source): the reading of largest ``|w|`` is set aside (an extra unknown, its
bias), the others are tested again, and so on. The update needs only the
columns of the projector ``R = I - W^1/2 A N^- A^T W^1/2`` of the readings set
aside: ``w_j`` becomes ``(w_j - rho_jk w_k) / sqrt(1 - rho_jk^2)`` for one
reading ``k``, with ``rho_jk`` the correlation of the two residuals. Readings
whose residuals are perfectly correlated (``|rho| = 1``: every reading of a
line walked once between two tie stations, or lines that enter the checks
only through their sum) always have equal ``|w|``: the layout cannot tell them
apart, and they are named as a group, never one of them by chance.

Reliability. A reading with a small redundancy number is barely checked: the
smallest error the test finds with 80 % probability at the 0.1 % level is
``delta0 * sigma / sqrt(r_kk)``, ``delta0 = 3.29 + 0.84 = 4.13`` (Baarda's
minimal detectable bias). Lines whose readings have ``r_kk < 0.1`` are named
as weakly checked (a limit common in geodetic network design, from memory).

References
----------
W. Baarda, "A testing procedure for use in geodetic networks", Netherlands
Geodetic Commission, Publications on Geodesy 2(5), 1968 (data snooping).
A.J. Pope, "The statistics of residuals and the detection of outliers", NOAA
Technical Report NOS 65 NGS 1, 1976 (tau test).
"""

from __future__ import annotations

import contextlib
from dataclasses import dataclass

import numpy as np
import scipy.linalg
import scipy.sparse as sp
import scipy.sparse.linalg as spla
from scipy.sparse.csgraph import connected_components

from ..errors import GeometryError, InputValueError, UnobservableError
from ..form import HeightMap
from ._model import Survey, observations
from ..units import angle_unit, length_unit

__all__ = [
    "OUTLIER_THRESHOLD",
    "WEAK_REDUNDANCY",
    "METHODS",
    "LineClosure",
    "InstrumentZero",
    "Outlier",
    "LinearReduction",
    "NetworkRank",
    "Reduction",
    "network_rank",
]

#: Flag limit for standardised residuals: two-sided 0.1 % point of the standard
#: normal distribution, 3.2905 (Baarda 1968 uses alpha = 0.1 % for data snooping).
OUTLIER_THRESHOLD = 3.29

METHODS = ("least-squares", "moody")

#: Non-centrality of Baarda's test: two-sided 0.1 % level (3.2905) plus the normal quantile
#: of 80 % power (0.8416), 4.1321; its square 17.07 is Baarda's lambda_0 (1968).
_DELTA0 = 3.2905 + 0.8416
#: Redundancy number below which a reading is "weakly checked" (common limit in geodetic
#: network design, from memory: r < 0.1 poorly controlled).
WEAK_REDUNDANCY = 0.1
# Readings whose residuals have |correlation| >= 1 - _TIE_RTOL cannot be told apart: their |w|
# agree to about this relative amount whatever the readings (structural ties agree to rounding on
# slope units; the tangent of angle units leaves ~1e-7 for a 50 arcsec error). Without the dense
# operator the test falls back to |w| equal to this relative amount.
_TIE_RTOL = 1e-6
# At most this many suspect groups are set aside one after the other.
_SNOOP_MAX_GROUPS = 5

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
# Up to this many unknowns the rank is also checked by a dense eigen-decomposition during the
# reduction (same cost argument); a singular network of up to _NAMING_DENSE_MAX unknowns is
# analysed densely afterwards to name the stations it cannot see.
_DENSE_RANK_MAX = 300
_NAMING_DENSE_MAX = 3000


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
# Relative eigenvalue limit (after Jacobi scaling) below which a direction is null.
_NULL_RTOL = 1e-10


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
        The :class:`flatcheck.moody.MoodyResult` for ``method="moody"``.
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


# --------------------------------------------------------------------------- null space
def _plane_basis(survey: Survey) -> np.ndarray:
    """Orthonormal basis (n, 3) of {1, x, y} at the stations; GeometryError if collinear."""
    x, y = survey.x_mm, survey.y_mm
    n = x.size
    scale = max(float(np.ptp(x)), float(np.ptp(y)), 1e-300)
    X = np.column_stack([np.ones(n), (x - x.mean()) / scale, (y - y.mean()) / scale])
    Q, R = np.linalg.qr(X)
    d = np.abs(np.diag(R))
    if n < 3 or d.min() <= 1e-9 * d.max():
        raise GeometryError(
            "the stations lie on one straight line, so no plane (and no flatness) can be found",
            fix="survey at least two lines that cross or run side by side, or evaluate the line's straightness",
        )
    return Q


def _shape_columns(survey: Survey) -> dict:
    """Candidate unobservable shapes beyond the plane, at the stations (centred, scaled)."""
    x, y = survey.x_mm, survey.y_mm
    sx = max(float(np.ptp(x)), 1e-300)
    sy = max(float(np.ptp(y)), 1e-300)
    u = (x - x.mean()) / sx
    v = (y - y.mean()) / sy
    return {"twist (z = k*x*y)": u * v, "bow along x (z = k*x^2)": u * u, "bow along y (z = k*y^2)": v * v}


def _scaled_eigh(M: np.ndarray, *, vectors: bool = True):
    """Eigen-decomposition of a symmetric PSD matrix after Jacobi scaling.

    Diagonal entries below 1e-24 of the largest are rounding noise of exactly
    null columns: they are treated as null (scale 1). Eigenvalues are returned
    relative to the largest (so a null direction has ~1e-16).
    """
    dgn = np.diag(M).copy()
    big = max(float(dgn.max()), 1e-300) if dgn.size else 1.0
    ok = dgn > 1e-24 * big
    scale = np.where(ok, 1.0 / np.sqrt(np.where(ok, dgn, 1.0)), 1.0 / np.sqrt(big))
    Ms = M * scale[:, None] * scale[None, :]
    if vectors:
        evals, evecs = np.linalg.eigh(Ms)
    else:
        evals, evecs = np.linalg.eigvalsh(Ms), None
    top = max(float(evals.max()), 1e-300) if evals.size else 1.0
    return evals / top, evecs, scale


def _null_in_span(model: _Model, Hcols: np.ndarray) -> np.ndarray:
    """Null vectors of A inside span{height columns Hcols (n, q)} x {zeros}.

    Returns an array (n + p, d) whose columns span the null space found there.
    """
    n, p = model.n, model.p
    # C = [[Hcols, 0], [0, I_p]] (sparse), B = A C, M = B^T W B (small, dense)
    C = sp.bmat([[sp.csr_matrix(Hcols), None], [None, sp.identity(p, format="csr")]], format="csr")
    B = (model.A @ C).tocsc()
    M = (B.T @ sp.diags(model.w) @ B).toarray()
    evals, evecs, scale = _scaled_eigh(M)
    null = evecs[:, evals <= _NULL_RTOL] * scale[:, None]
    Z = np.asarray(C @ null) if null.shape[1] else np.zeros((n + p, 0))
    if Z.shape[1]:
        Z, _ = np.linalg.qr(Z)
    return Z


def _describe_datum(model: _Model, Z: np.ndarray, Qp: np.ndarray) -> tuple:
    """Words for the null-space directions handled as datum."""
    kind = model.survey.instrument
    out = []
    d = Z.shape[1]
    if d == 0:
        return ()
    # how much of each plane component the null space contains
    Zh = Z[: model.n]
    comp = Qp.T @ Zh  # (3, d)
    rank_h = np.linalg.matrix_rank(comp, tol=1e-8)
    if kind.reads_heights:
        out.append("common offset of the indicator datum")
    elif not kind.gravity_referenced:
        out.append("offset and two tilts of the surface (each line's zero absorbs its slope)")
    else:
        out.append("offset of the surface (a level does not see height)")
        if rank_h >= 2:
            out.append(
                "one tilt of the surface traded against the level's zero (the lines run in only two directions)"
            )
    return tuple(out)


def _components(model: _Model):
    """Connected parts of the network; returns labels (n,) and count."""
    n = model.n
    obs = model.obs
    if model.survey.instrument.reads_heights:
        # every read station joins a virtual datum node n
        a, b = obs.i_to, np.full(obs.i_to.size, n)
        size = n + 1
    else:
        a, b = obs.i_from, obs.i_to
        size = n
    g = sp.coo_matrix((np.ones(a.size), (a, b)), shape=(size, size))
    ncomp, labels = connected_components(g, directed=False)
    return ncomp, labels[:n], (labels[n] if size > n else None)


def _names(survey: Survey, idx, limit: int = 8) -> str:
    idx = list(idx)
    names = [survey.stations[i].name for i in idx[:limit]]
    more = f" and {len(idx) - limit} more" if len(idx) > limit else ""
    return ", ".join(repr(s) for s in names) + more


def _check_connected(model: _Model) -> None:
    survey = model.survey
    ncomp, labels, datum_label = _components(model)
    if ncomp <= 1:
        return
    if datum_label is not None:
        main = datum_label
    else:
        counts = np.bincount(labels)
        main = int(np.argmax(counts))
    cut = np.flatnonzero(labels != main)
    touched = np.zeros(model.n, dtype=bool)
    touched[model.obs.i_to] = True
    if not survey.instrument.reads_heights:
        touched[model.obs.i_from] = True
    lonely = cut[~touched[cut]]
    if lonely.size:
        raise UnobservableError(
            f"station(s) {_names(survey, lonely)} are on no line that has readings, so their heights are unobservable",
            fix="add a line through them, or remove them from the survey",
        )
    raise UnobservableError(
        f"station(s) {_names(survey, cut)} are not connected to the rest of the network, so their heights "
        "relative to it are unobservable",
        fix="add a line that joins them to the other stations",
    )


_SHAPE_FIX = {
    "twist (z = k*x*y)": "add a diagonal line, or survey with a gravity-referenced electronic level",
    "bow along x (z = k*x^2)": "add lines along x (rows) or diagonal lines",
    "bow along y (z = k*y^2)": "add lines along y (columns) or diagonal lines",
}


def _rank_analysis(model: _Model, *, dense: bool | None = None):
    """Datum null basis Z, plane basis Qp, and a NetworkRank (does not raise for shapes)."""
    survey = model.survey
    Qp = _plane_basis(survey)
    x, y = survey.x_mm, survey.y_mm
    span = max(float(np.ptp(x)), float(np.ptp(y)))
    P3 = np.column_stack([np.ones(model.n), (x - x.mean()) / span, (y - y.mean()) / span])
    Z = _null_in_span(model, P3)
    d0 = Z.shape[1]
    unobservable = []
    Q3, _ = np.linalg.qr(P3)
    for name, col in _shape_columns(survey).items():
        # A shape that is itself a plane on these stations (a bow along y sampled at only two y
        # levels) is not a separate shape: the plane is never observed anyway.
        rest = col - Q3 @ (Q3.T @ col)
        if np.linalg.norm(rest) <= 1e-9 * max(np.linalg.norm(col), 1e-300):
            continue
        Zs = _null_in_span(model, np.column_stack([P3, rest]))
        if Zs.shape[1] > d0:
            unobservable.append(name)
    n_unk = model.n + model.p
    m = model.A.shape[0]
    if dense is None:
        dense = n_unk <= _DENSE_RANK_MAX
    extra_null = None
    if dense:
        N = (model.A.T @ sp.diags(model.w) @ model.A).toarray()
        evals, _, _ = _scaled_eigh(N, vectors=False)
        deficiency = int(np.sum(evals <= _NULL_RTOL))
        extra = deficiency - d0 - len(unobservable)
        if extra > 0:
            evals, evecs, s = _scaled_eigh(N)
            V = evecs[:, evals <= _NULL_RTOL] * s[:, None]
            V, _ = np.linalg.qr(V)
            if d0:  # remove the datum directions and keep what is left
                V = V - Z @ (Z.T @ V)
            U, _, _ = np.linalg.svd(V, full_matrices=False)
            extra_null = U[:, :extra]
            unobservable.append(f"{extra} other direction(s) (stations named in the error)")
        exact = True
    else:
        deficiency = d0 + len(unobservable)
        exact = False
    rank = n_unk - deficiency
    info = NetworkRank(
        n_unknowns=n_unk,
        n_observations=m,
        rank=rank,
        deficiency=deficiency,
        redundancy=m - rank,
        datum=_describe_datum(model, Z, Qp),
        unobservable=tuple(unobservable),
        exact=exact,
    )
    return Z, Qp, info, extra_null


def network_rank(survey: Survey) -> NetworkRank:
    """Rank, deficiency and redundancy of a survey's network (readings required).

    Parameters
    ----------
    survey : Survey
        A survey with readings (the values do not matter, only which steps exist).

    Returns
    -------
    NetworkRank
        Unknowns, observations, rank, deficiency, redundancy and the shapes the
        layout cannot observe (beyond the plane, which is never observed).

    Raises
    ------
    UnobservableError
        If stations are cut off from the network (their number of free
        directions is not a shape of the surface).
    GeometryError
        If all stations lie on one line.
    """
    model = _build_model(survey)
    _check_connected(model)
    with blas_one_thread():
        # planning asks once per layout: the exact check is affordable to 1200 unknowns here
        _, _, info, _ = _rank_analysis(model, dense=model.n + model.p <= 1200)
    return info


def _article(word: str) -> str:
    """'an' before a vowel sound, 'a' otherwise (instrument names: autocollimator, indicator, level...)."""
    return "an" if word[:1].lower() in "aeio" else "a"


def _raise_unobservable(model: _Model, info: NetworkRank, extra_null) -> None:
    survey = model.survey
    shapes = [s for s in info.unobservable if s in _SHAPE_FIX]
    if shapes:
        inst = survey.instrument.kind
        what = " and ".join(shapes)
        fix = "; ".join(dict.fromkeys(_SHAPE_FIX[s] for s in shapes))
        raise UnobservableError(
            f"this layout read with {_article(inst)} {inst} cannot observe {what}: a surface of that shape gives the same "
            f"readings as a flat one",
            fix=fix,
        )
    if extra_null is not None:
        h = np.abs(extra_null[: model.n]).max(axis=1)
        idx = np.argsort(-h)
        idx = idx[h[idx] > 1e-6 * max(h.max(), 1e-300)]
        zpart = np.abs(extra_null[model.n :]).max(axis=1)
        lines = [", ".join(model.zero_lines[j]) for j in np.flatnonzero(zpart > 1e-6 * max(zpart.max(), 1e-300))]
        extra = f" (with the zero of line(s) {', '.join(repr(s) for s in lines[:4])})" if lines else ""
        raise UnobservableError(
            f"the heights of station(s) {_names(survey, idx)} cannot be found from these readings{extra}",
            fix="add a line that crosses them, or survey with a gravity-referenced electronic level",
        )


# --------------------------------------------------------------------------- solving
class _Solver:
    """Minimal-constraint sparse solver of the weighted normal equations."""

    def __init__(self, model: _Model, Z: np.ndarray):
        self.model = model
        n_unk = model.n + model.p
        d = Z.shape[1]
        if d:
            _, _, piv = scipy.linalg.qr(Z.T, pivoting=True, mode="economic")
            fixed = np.sort(piv[:d])
        else:
            fixed = np.zeros(0, dtype=np.int64)
        keep = np.setdiff1d(np.arange(n_unk), fixed)
        self.keep = keep
        self.Ar = model.A[:, keep].tocsc()
        self.AtW = (self.Ar.T @ sp.diags(model.w)).tocsr()
        N = (self.AtW @ self.Ar).tocsc()
        self.N = N
        try:
            self.lu = spla.splu(N, permc_spec="MMD_AT_PLUS_A")
        except RuntimeError:  # SuperLU: "Factor is exactly singular"
            raise UnobservableError(
                "the readings do not determine every station height (the normal equations are singular)",
                fix="add lines that cross the poorly connected stations, or survey with a gravity-referenced level",
            ) from None
        udiag = np.abs(self.lu.U.diagonal())
        if udiag.size and udiag.min() <= 1e-11 * udiag.max():
            raise UnobservableError(
                "the readings do not determine every station height (the normal equations are singular)",
                fix="add lines that cross the poorly connected stations, or survey with a gravity-referenced level",
            )
        self.n_unk = n_unk

    def solve(self, l: np.ndarray) -> np.ndarray:
        rhs = self.AtW @ l
        ur = self.lu.solve(rhs)
        ur = ur + self.lu.solve(rhs - self.N @ ur)  # one step of iterative refinement
        u = np.zeros(self.n_unk)
        u[self.keep] = ur
        return u

    def operator(self) -> np.ndarray:
        """Dense solution operator K (n_unk, m): u = K @ l (small problems only).

        Formed as N^-1 (A^T W) with a dense Cholesky inverse: SuperLU's solve
        with thousands of right-hand sides is far slower than one dense inverse.
        """
        from scipy.linalg import lapack

        with blas_one_thread():
            # Cholesky factor and inverse from it (LAPACK potrf + potri: n^3 flops, a third of
            # solving against the identity); potri fills the upper triangle only
            c, info = lapack.dpotrf(self.N.toarray(), lower=False)
            if info == 0:
                Ninv, info = lapack.dpotri(c, lower=False)
            if info != 0:  # pragma: no cover - N is positive definite once the datum is fixed
                cf = scipy.linalg.cho_factor(self.N.toarray())
                Ninv = scipy.linalg.cho_solve(cf, np.eye(self.N.shape[0]))
            else:
                Ninv = np.triu(Ninv) + np.triu(Ninv, 1).T
            Kr = np.asarray((self.AtW.T @ Ninv).T)
        K = np.zeros((self.n_unk, Kr.shape[1]))
        K[self.keep] = Kr
        return K


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


def _plane_removed(Qp: np.ndarray, h: np.ndarray) -> np.ndarray:
    return h - Qp @ (Qp.T @ h)


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


def _clean_zero(value: float, scale: float) -> float:
    """``value`` with rounding noise (below 1e-12 of ``scale``) and negative zero shown as 0.0.

    A closure of exact readings is rounding noise (~1e-15 µm) that would print as "-0.000".
    """
    value = float(value)
    return 0.0 if abs(value) <= 1e-12 * abs(float(scale)) else value + 0.0


def _line_closures(model: _Model, l: np.ndarray, u: np.ndarray, r: np.ndarray) -> tuple:
    """Closure of each line at the stations it shares with other lines.

    For slope instruments the line's own profile (its readings integrated from its
    first station, zero removed, mean of its runs) is compared with the adjusted
    heights at every station the line shares with another line (its tie stations,
    the first excepted); the closure is the largest of these differences, signed,
    and the station where it occurs. This is the classic notion (a line's end or
    midpoint failing to meet what the other lines say) for any layout. With a
    per-line autocollimator zero the line's far end closes by construction, so its
    interior tie stations (e.g. the centre of a Union Jack) carry the information.
    """
    survey = model.survey
    obs = model.obs
    reads = survey.instrument.reads_heights
    zero_part = model.A[:, model.n :] @ u[model.n :]
    corrected = l - zero_part
    lines_at = {}
    for ln in survey.lines:
        for name in set(ln.stations):
            lines_at[name] = lines_at.get(name, 0) + 1
    scale = float(np.max(np.abs(l))) if l.size else 0.0
    out = []
    for li, ln in enumerate(survey.lines):
        sel = obs.line == li
        runs = np.unique(obs.run[sel])
        if reads:
            closure = _clean_zero(np.mean(r[sel]), scale)
            meaning = "mean residual of the line's indicator readings (observed minus adjusted height)"
            out.append(LineClosure(ln.name, closure, meaning, None))
            continue
        steps = len(ln.stations) - 1
        cum = np.zeros((runs.size, steps + 1))
        for j, k in enumerate(runs):
            m = sel & (obs.run == k)
            per_step = np.zeros(steps)
            per_step[obs.step[m]] = r[m]
            cum[j, 1:] = np.cumsum(per_step)
        mean_cum = cum.mean(axis=0)
        ties = [k for k in range(1, steps + 1) if lines_at.get(ln.stations[k], 0) > 1]
        if not ties:
            ties = [steps]
        k_worst = max(ties, key=lambda k: abs(mean_cum[k]))
        closure = _clean_zero(mean_cum[k_worst], scale)
        meaning = (
            "largest difference, at a station shared with another line, between the line's own integrated "
            "profile (zero removed, mean of its runs) and the adjusted heights; it comes from reading errors, "
            "not from flatness"
        )
        ends = np.array([corrected[sel & (obs.run == k)].sum() for k in runs])
        # Runs with zeros of their own (a run walked with the instrument turned round) have their
        # end-to-end rise fitted by that zero, so their spread is zero by construction: not stated.
        zero_sets = {
            tuple(np.unique(model.A[np.flatnonzero(sel & (obs.run == k)), model.n :].tocoo().col)) for k in runs
        }
        spread = _clean_zero(ends.max() - ends.min(), scale) if runs.size > 1 and len(zero_sets) == 1 else None
        out.append(LineClosure(ln.name, closure, meaning, spread, ln.stations[k_worst]))
    return tuple(out)


def _steps_text(steps) -> str:
    """``[1, 2, 3, 5]`` -> ``"steps 1-3, 5"`` (1-based step numbers)."""
    steps = sorted(set(int(k) for k in steps))
    parts, start, prev = [], steps[0], steps[0]
    for k in steps[1:] + [None]:
        if k is not None and k == prev + 1:
            prev = k
            continue
        parts.append(f"{start}-{prev}" if prev > start else f"{start}")
        if k is not None:
            start = prev = k
    return ("steps " if len(steps) > 1 else "step ") + ", ".join(parts)


def _group_text(model: _Model, members: np.ndarray) -> tuple[str, tuple]:
    """Words naming a group of readings by line, run and steps, and the lines' names."""
    survey, obs = model.survey, model.obs
    by_line: dict = {}
    for k in members:
        by_line.setdefault(int(obs.line[k]), {}).setdefault(int(obs.run[k]), []).append(int(obs.step[k]) + 1)
    parts, names = [], []
    for li in sorted(by_line):
        name = survey.lines[li].name
        names.append(name)
        runs = by_line[li]
        parts.append(", ".join(f"run {ri + 1}, {_steps_text(runs[ri])}" for ri in sorted(runs)))
    if len(names) == 1:
        return f"line {names[0]!r}, {parts[0]}", tuple(names)
    items = [f"{n!r} ({p})" for n, p in zip(names, parts)]
    return "lines " + ", ".join(items[:-1]) + " and " + items[-1], tuple(names)


def _snoop(model: _Model, K, r: np.ndarray, red: np.ndarray, w_std: np.ndarray, sigma_um: np.ndarray,
           apriori: bool, dof: int):
    """Iterated data snooping (module notes).

    Returns ``(groups, w_after)``: the suspect groups (index arrays, in the order found;
    each holds the readings with the same ``|w|``, which the layout cannot tell apart)
    and ``w`` of every reading once they are set aside (NaN for the suspects, for
    untestable readings, and for every reading when ``K`` is None: only the largest
    group is then named).
    """
    m = r.size
    a = np.abs(w_std)
    a[~np.isfinite(a)] = 0.0
    if m == 0 or a.max() <= OUTLIER_THRESHOLD:
        return [], np.where(np.isfinite(w_std), w_std, np.nan)
    if K is None:  # no dense operator: name the top group only
        k = int(np.argmax(a))
        return [np.flatnonzero(np.abs(a - a[k]) <= _TIE_RTOL * a[k])], np.full(m, np.nan)
    sw = np.sqrt(model.w)
    vt = sw * r  # residuals in the symmetric form W^1/2 r
    st = sigma_um * sw  # sigma in that form (constant when the weights follow sigma)
    omega = float(vt @ vt)
    w_cur = w_std.copy()
    red_now = red.copy()
    suspect = np.zeros(m, dtype=bool)
    groups, reps, cols = [], [], []

    def cols_now(k):
        if not cols:
            return 0.0
        C = np.column_stack(cols)
        return C @ np.linalg.solve(C[reps], C[k])
    for _ in range(_SNOOP_MAX_GROUPS):
        a = np.abs(w_cur)
        a[~np.isfinite(a) | suspect] = 0.0
        k = int(np.argmax(a))
        if a[k] <= OUTLIER_THRESHOLD:
            break
        c = -np.asarray(model.A @ K[:, k]).ravel() * sw / sw[k]  # column k of R (symmetric form)
        c[k] += 1.0
        # readings whose residuals are perfectly correlated with k's, once the earlier suspects are
        # set aside (column k of R - C M^-1 C^T): the layout cannot tell them from k
        c_now = c - cols_now(k)
        with np.errstate(invalid="ignore", divide="ignore"):
            rho = c_now / np.sqrt(np.clip(red_now, 1e-300, None) * max(red_now[k], 1e-300))
        members = np.flatnonzero((np.abs(rho) >= 1.0 - _TIE_RTOL) & (red_now > 1e-8))
        members = np.union1d(members, [k]).astype(np.int64)
        groups.append(members)
        suspect[members] = True
        reps.append(k)
        if not apriori and dof - len(reps) < 1:
            w_cur = np.full(m, np.nan)  # nothing left to estimate sigma from
            break
        cols.append(c)
        C = np.column_stack(cols)
        M = C[reps]
        try:
            coef = np.linalg.solve(M, vt[reps])
            CMi = np.linalg.solve(M, C.T).T
        except np.linalg.LinAlgError:  # pragma: no cover - reps are independent by construction
            break
        v2 = vt - C @ coef
        red2 = red - np.einsum("ij,ij->i", CMi, C)
        red_now = np.clip(red2, 0.0, None)
        if apriori:
            s2 = st
        else:
            s0sq = (omega - float(vt[reps] @ coef)) / (dof - len(reps))
            if not s0sq > 1e-24 * max(omega, 1e-300):
                w_cur = np.full(m, np.nan)
                break
            s2 = np.sqrt(s0sq)
        with np.errstate(invalid="ignore", divide="ignore"):
            w_cur = v2 / (s2 * np.sqrt(np.clip(red2, 0.0, None)))
        w_cur[~(red2 > np.maximum(1e-8, 1e-6 * red))] = np.nan
    w_after = w_cur.copy()
    w_after[suspect] = np.nan
    return groups, w_after


def _outliers(model: _Model, r: np.ndarray, w_std: np.ndarray, groups=(), w_after=None, diagnosed=True) -> tuple:
    """Flagged readings: the suspect groups first (in the order found, each in line, run and
    step order), then the others by decreasing ``|w|``."""
    survey = model.survey
    obs = model.obs
    m = r.size
    if w_after is None:
        w_after = np.full(m, np.nan)
    flag = np.flatnonzero(np.abs(np.nan_to_num(w_std)) > OUTLIER_THRESHOLD)
    group_of = {}
    info = []
    order = []
    for g, members in enumerate(groups, start=1):
        members = np.asarray(members)
        members = members[np.lexsort((obs.step[members], obs.run[members], obs.line[members]))]
        _, names = _group_text(model, members)
        info.append((members.size, names))
        for k in members:
            group_of[int(k)] = g
            order.append(int(k))
    rest = np.array([k for k in flag if int(k) not in group_of], dtype=np.int64)
    rest = rest[np.argsort(-np.abs(w_std[rest]), kind="stable")]
    order += [int(k) for k in rest]
    out = []
    for k in order:
        ln = survey.lines[int(obs.line[k])]
        run = ln.runs[int(obs.run[k])]
        st = int(obs.step[k])
        if survey.instrument.reads_heights:
            s_from, s_to = "", ln.stations[st]
        else:
            s_from, s_to = ln.stations[st], ln.stations[st + 1]
        g = group_of.get(k)
        if g is None and diagnosed and np.isfinite(w_after[k]) and abs(w_after[k]) <= OUTLIER_THRESHOLD:
            g = 0
        size, names = info[g - 1] if g else (1, ())
        out.append(
            Outlier(
                line=ln.name,
                run=int(obs.run[k]) + 1,
                step=st + 1,
                station_from=s_from,
                station_to=s_to,
                reading=float(obs.reading[k]),
                residual_um=float(r[k]),
                w=float(w_std[k]),
                where=run.where or f"line {ln.name!r}, run {int(obs.run[k]) + 1}",
                group=g,
                group_size=int(size),
                group_lines=tuple(names),
                w_after=float(w_after[k]),
            )
        )
    return tuple(out)


def _outlier_warnings(model: _Model, outliers: tuple, groups, w_std: np.ndarray, diagnosed: bool) -> list:
    """What the flagged readings say: each suspect group named, and how many were flagged."""
    if not outliers:
        return []
    m = w_std.size
    out = []
    a = np.abs(w_std)
    for g, members in enumerate(groups, start=1):
        text, names = _group_text(model, np.asarray(members))
        w_top = float(np.nanmax(a[members]))
        rank = f"largest |w| = {w_top:.2f}" if g == 1 else f"|w| = {w_top:.2f}, the largest once the suspects above are set aside"
        if len(members) == 1:
            o = next(o for o in outliers if o.group == g)
            out.append(
                f"suspect reading ({rank}): {o.describe()}; probably mis-keyed or misread: check "
                "it against the record, or re-read that step"
            )
        else:
            them = "the line" if len(names) == 1 else "these lines"
            it = "it" if len(names) == 1 else "them"
            out.append(
                f"suspect readings ({rank}, shared by {len(members)} readings): one of the "
                f"readings of {text} is probably wrong, and this layout cannot tell which; re-read {them}, or walk "
                f"{it} forward and back so that each reading is checked against its repeat"
            )
    n_flag = len(outliers)
    n_suspect = sum(1 for o in outliers if o.group is not None and o.group >= 1)
    n_through = sum(1 for o in outliers if o.group == 0)
    n_left = n_flag - n_suspect - n_through
    head = f"{n_flag} of {m} readings exceed |w| > {OUTLIER_THRESHOLD} (standardised residual)"
    if not diagnosed:
        head += "; the network is too large to set suspects aside and test again, so some may be flagged only " \
                "through another reading's error"
    elif n_through and not n_left:
        head += f"; {n_through} of them only through the suspect reading(s) named: with those set aside, none of these exceeds it"
    elif n_through or n_left:
        head += (
            f"; with the suspect reading(s) set aside, {n_through} fall within the limit and {n_left} still exceed it"
        )
    out.append(head)
    return out


def _weak_lines(model: _Model, red: np.ndarray, sigma_reading: float) -> list:
    """Lines whose readings are barely checked (redundancy number below WEAK_REDUNDANCY) or not at all."""
    survey, obs = model.survey, model.obs
    unit = survey.instrument.unit
    weak, unchecked = {}, {}
    for li, ln in enumerate(survey.lines):
        r_line = red[obs.line == li]
        if r_line.size == 0:
            continue
        n_zero = int(np.sum(r_line <= 1e-8))
        low = r_line[(r_line > 1e-8) & (r_line < WEAK_REDUNDANCY)]
        if n_zero:
            share = "" if n_zero == r_line.size else f"{n_zero} of {r_line.size} readings"
            unchecked.setdefault(share, []).append(ln.name)
        if low.size:
            share = "" if low.size == r_line.size else f"{low.size} of {r_line.size} readings, "
            weak.setdefault((round(float(low.min()), 3), share), []).append((ln.name, float(low.min())))
    if survey.instrument.reads_heights:
        fix = "read {them} again (a second run), so that each height is checked against its repeat"
    else:
        fix = "walk {them} forward and back, or add a run, so that each reading is checked against its repeat"
    out = []
    if weak:
        has_sigma = bool(np.isfinite(sigma_reading) and sigma_reading > 0)
        parts = []
        for (r_min, share) in sorted(weak):
            names = " and ".join(repr(n) for n, _ in weak[(r_min, share)])
            mdb = ""
            if has_sigma:  # Baarda's minimal detectable error, 0.1 % level and 80 % power
                r_low = min(r for _, r in weak[(r_min, share)])
                mdb = f", {_DELTA0 * sigma_reading / np.sqrt(r_low):.2g} {unit}"
            parts.append(f"{names} ({share}redundancy number {'down to ' if share else ''}{r_min:.3f}{mdb})")
        many = sum(len(v) for v in weak.values()) > 1
        why = (
            " (a wrong reading there is found reliably only when it is off by more than the amount given)"
            if has_sigma else " (a wrong reading there can pass unseen)"
        )
        out.append(
            f"weakly checked line{'s' if many else ''}{why}: " + "; ".join(parts) + ". "
            + fix.format(them="them" if many else "it").capitalize()
        )
    if unchecked:
        parts = []
        for share in sorted(unchecked):
            names = ", ".join(repr(n) for n in unchecked[share])
            parts.append(f"{names}" + (f" ({share})" if share else ""))
        many = sum(len(v) for v in unchecked.values()) > 1
        out.append(
            f"readings not checked at all (redundancy number 0): line{'s' if many else ''} " + "; ".join(parts)
            + ": a wrong reading there cannot be seen; " + fix.format(them="them" if many else "it")
            + ", or add a line that crosses them"
        )
    return out


def _sigma0(model: _Model, r: np.ndarray, dof: int) -> tuple[float, float]:
    if dof <= 0:
        return float("nan"), float("nan")
    s0 = float(np.sqrt(np.sum(model.w * r * r) / dof))
    if model.survey.instrument.reads_heights:
        return s0, s0 / model.slope_factor
    # µm over ref_base -> reading unit: rise = base_um * factor * reading (small angles)
    return s0, s0 / (model.ref_base_mm * 1e3 * model.slope_factor)


def _obs_sigma(model: _Model, sigma0_um: float) -> tuple[np.ndarray, bool]:
    """Standard deviation of each observation (µm) used by the test, and whether it is stated a priori."""
    inst = model.survey.instrument
    if inst.reading_uncertainty is not None and inst.reading_uncertainty > 0:
        return inst.reading_uncertainty * np.abs(model.obs.um_per_unit), True  # Baarda: a-priori sigma
    return sigma0_um / np.sqrt(model.w), False  # Pope: a-posteriori sigma


def _standardize(model: _Model, r: np.ndarray, red: np.ndarray, sigma0_um: float, sigma: np.ndarray) -> np.ndarray:
    """``w`` of every observation, ``sigma`` (µm) from :func:`_obs_sigma`; NaN where it cannot be tested."""
    inst = model.survey.instrument
    with np.errstate(invalid="ignore", divide="ignore"):
        w = r / (sigma * np.sqrt(red))
    w[~(red > 1e-8)] = np.nan
    if inst.reading_uncertainty is None:
        # no a-priori sigma: nothing to test without redundancy, or when the residuals
        # are rounding noise (exact, e.g. simulated, readings)
        scale = float(np.sqrt(np.mean(model.obs.value_um**2))) if r.size else 0.0
        if not np.isfinite(sigma0_um) or sigma0_um <= 1e-10 * max(scale, 1e-300):
            w[:] = np.nan
    return w


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


def _prepare(survey: Survey):
    """Model, datum null basis and plane basis, after every observability check."""
    model = _build_model(survey)
    _check_connected(model)
    with blas_one_thread():
        Z, Qp, info, extra_null = _rank_analysis(model)
    if info.unobservable:
        _raise_unobservable(model, info, extra_null)
    return model, Z, Qp, info


def _solver(model: _Model, Z: np.ndarray, info: NetworkRank) -> "_Solver":
    """The sparse solver; a singular network found only here (no dense rank check at this size)
    is analysed densely, when affordable, so that the error names the stations it cannot see."""
    try:
        return _Solver(model, Z)
    except UnobservableError:
        if info.exact or model.n + model.p > _NAMING_DENSE_MAX:
            raise
        with blas_one_thread():
            _, _, info2, extra_null = _rank_analysis(model, dense=True)
        _raise_unobservable(model, info2, extra_null)
        raise
