"""The classic Union Jack (Moody) worksheet reduction.

The eight lines of a Union Jack survey (two diagonals, four perimeter lines,
two centre lines) are reduced one after the other, as on the paper worksheet:

1. Each line is integrated (rises summed from its first station; repeat runs
   averaged step by step first).
2. Diagonal SW-NE: its end chord is removed, so SW = NE = 0.
3. Diagonal SE-NW: its chord is removed and a constant added so that its middle
   equals the first diagonal's middle (the centre); then SE = NW = that constant.
   The reference plane z = 0 contains chord SW-NE and is parallel to chord SE-NW.
4. Perimeter lines: each loses its own chord and is re-hung between the known
   heights of its corners; their middles give the mid-side stations.
5. Centre lines: each is re-hung between its two mid-side stations; each then
   predicts the centre. Closure error = centre-line value at the centre minus
   the diagonals' value there (two closures). The centre keeps the diagonals'
   value.

Closures reveal inconsistent readings (noise, drift, a shifted zero, a misplaced
station, a temperature change), not flatness; they are zero for perfect data.
The worksheet heights ("raw") are also given referred to the least-squares plane
through the stations, for comparison with the network adjustment.

Everything above is linear in the readings, so the reduction is computed as a
matrix (applied to the identity once) and reused for Monte Carlo.

References
----------
J.C. Moody, "How to calibrate surface plates in the plant", The Tool Engineer,
October 1955 (from memory, not read). The step order above follows the account
in R.N. Burton, "Data Analysis for Surface Plate Calibration", KCP-613-5986,
AlliedSignal / US DOE, 1997.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import LayoutError
from ._diagnostics import _clean_zero, _sigma0
from ._network import (
    LineClosure,
    LinearReduction,
    Reduction,
    _build_model,
    _heightmap,
    _label,
    _linearised_values,
    _zero_records,
)
from ._rank import _check_connected, _plane_basis, _plane_removed, _rank_analysis
from ._model import Survey

__all__ = ["MoodyResult", "moody_reduce", "moody_reduction"]


@dataclass(frozen=True, eq=False)
class MoodyResult:
    """The classic worksheet result.

    Attributes
    ----------
    raw_height_um : ndarray, shape (n_stations,)
        Heights in µm in the worksheet's reference plane (through SW and NE,
        parallel to chord SE-NW), in the survey's station order.
    height_um : ndarray, shape (n_stations,)
        The same heights referred to the least-squares plane of the stations (µm).
    closures : tuple of LineClosure
        The two centre closures (centre line value at the centre minus the
        diagonals' value), in µm.
    corners : dict
        Station names of the corners, mid-sides and centre: keys
        ``SW, SE, NE, NW, S, E, N, W, C`` (geometric roles).
    lines : dict
        Line names by role: ``diag1`` (SW-NE), ``diag2`` (SE-NW), ``south``,
        ``east``, ``north``, ``west``, ``centre_ns``, ``centre_we``.
    G_raw : ndarray, shape (n_stations, n_obs)
        ``raw_height_um = G_raw @ value_um`` (observations in µm).
    G : ndarray, shape (n_stations, n_obs)
        ``height_um = G @ value_um``.
    G_closure : ndarray, shape (2, n_obs)
        Closures in µm as a linear function of the observations.
    """

    raw_height_um: np.ndarray
    height_um: np.ndarray
    closures: tuple
    corners: dict
    lines: dict
    G_raw: np.ndarray
    G: np.ndarray
    G_closure: np.ndarray


_ROLES = ("SW", "SE", "NE", "NW", "S", "E", "N", "W", "C")
# line role -> (start role, end role), the direction the worksheet walks it
_LINE_ROLES = {
    "diag1": ("SW", "NE"),
    "diag2": ("SE", "NW"),
    "south": ("SW", "SE"),
    "east": ("SE", "NE"),
    "north": ("NW", "NE"),
    "west": ("SW", "NW"),
    "centre_ns": ("S", "N"),
    "centre_we": ("W", "E"),
}


def _not_union_jack(why: str) -> LayoutError:
    return LayoutError(
        f"the classic Moody reduction needs a Union Jack layout: {why}",
        fix="use the least-squares reduction (method 'least-squares'), which reduces any layout",
    )


def _roles(survey: Survey):
    """Find corners, mid-sides, centre and the eight lines by geometry."""
    x, y = survey.x_mm, survey.y_mm
    if len(survey.lines) != 8:
        raise _not_union_jack(f"it has {len(survey.lines)} lines, not 8")
    ends = {}
    for ln in survey.lines:
        ends[ln.name] = (survey.station_index[ln.stations[0]], survey.station_index[ln.stations[-1]])
    end_idx = sorted({i for pair in ends.values() for i in pair})
    ex, ey = x[end_idx], y[end_idx]
    x0, x1, y0, y1 = ex.min(), ex.max(), ey.min(), ey.max()
    tol = 1e-6 * max(x1 - x0, y1 - y0)
    targets = {
        "SW": (x0, y0), "SE": (x1, y0), "NE": (x1, y1), "NW": (x0, y1),
        "S": ((x0 + x1) / 2, y0), "E": (x1, (y0 + y1) / 2), "N": ((x0 + x1) / 2, y1),
        "W": (x0, (y0 + y1) / 2), "C": ((x0 + x1) / 2, (y0 + y1) / 2),
    }
    role_idx = {}
    for role, (tx, ty) in targets.items():
        hit = np.flatnonzero((np.abs(x - tx) <= tol) & (np.abs(y - ty) <= tol))
        if hit.size != 1:
            raise _not_union_jack(f"no single station at the {role} position ({tx:g}, {ty:g}) mm")
        role_idx[role] = int(hit[0])
    lines = {}
    by_ends = {frozenset(v): k for k, v in ends.items()}
    for role, (a, b) in _LINE_ROLES.items():
        key = frozenset((role_idx[a], role_idx[b]))
        if key not in by_ends:
            raise _not_union_jack(f"no line joins the {a} and {b} stations")
        lines[role] = by_ends[key]
    return role_idx, lines


def _profiles(survey: Survey, obs, V: np.ndarray, line_name: str, start_idx: int):
    """Integrated heights along a line, runs averaged, oriented from ``start_idx``.

    V has shape (n_obs, k) (a batch of observation vectors); returns the station
    indices along the line (oriented) and heights of shape (steps + 1, k) in µm.
    """
    li = next(i for i, ln in enumerate(survey.lines) if ln.name == line_name)
    ln = survey.lines[li]
    idx = np.array([survey.station_index[s] for s in ln.stations])
    sel = obs.line == li
    runs = np.unique(obs.run[sel])
    reads = survey.instrument.reads_heights
    npts = idx.size if reads else idx.size - 1
    acc = np.zeros((npts, V.shape[1]))
    for r in runs:
        rows = np.flatnonzero(sel & (obs.run == r))
        rows = rows[np.argsort(obs.step[rows])]
        acc += V[rows]
    acc /= runs.size
    prof = acc if reads else np.vstack([np.zeros((1, V.shape[1])), np.cumsum(acc, axis=0)])
    if idx[0] != start_idx:
        idx, prof = idx[::-1], prof[::-1]
    return idx, prof


def _chordless(prof: np.ndarray) -> np.ndarray:
    t = np.linspace(0.0, 1.0, prof.shape[0])[:, None]
    return prof - prof[:1] - t * (prof[-1:] - prof[:1])


def _hang(prof: np.ndarray, h_start: np.ndarray, h_end: np.ndarray) -> np.ndarray:
    t = np.linspace(0.0, 1.0, prof.shape[0])[:, None]
    return _chordless(prof) + h_start[None, :] + t * (h_end - h_start)[None, :]


def _mid(idx: np.ndarray, prof: np.ndarray, role_station: int, line_name: str) -> np.ndarray:
    steps = idx.size - 1
    if steps % 2 or idx[steps // 2] != role_station:
        raise _not_union_jack(f"line {line_name!r} has no station at its middle (it needs an even number of steps)")
    return prof[steps // 2]


def _worksheet(survey: Survey, obs, V: np.ndarray, roles: dict, lines: dict):
    """Raw Moody heights (n, k) and closures (2, k) for a batch V (m, k) of observation vectors."""
    n = len(survey.stations)
    k = V.shape[1]
    H = np.full((n, k), np.nan)
    done = np.zeros(n, dtype=bool)

    def put(idx, prof):
        new = ~done[idx]
        H[idx[new]] = prof[new]
        done[idx[new]] = True

    i1, d1 = _profiles(survey, obs, V, lines["diag1"], roles["SW"])
    d1 = _chordless(d1)
    o1 = _mid(i1, d1, roles["C"], lines["diag1"])
    i2, d2 = _profiles(survey, obs, V, lines["diag2"], roles["SE"])
    d2 = _chordless(d2)
    d2 = d2 + (o1 - _mid(i2, d2, roles["C"], lines["diag2"]))[None, :]
    put(i1, d1)
    put(i2, d2)
    corner = {"SW": d1[0], "NE": d1[-1], "SE": d2[0], "NW": d2[-1]}
    mids = {}
    for role, mid in (("south", "S"), ("east", "E"), ("north", "N"), ("west", "W")):
        a, b = _LINE_ROLES[role]
        idx, prof = _profiles(survey, obs, V, lines[role], roles[a])
        prof = _hang(prof, corner[a], corner[b])
        mids[mid] = _mid(idx, prof, roles[mid], lines[role])
        put(idx, prof)
    closures = []
    for role in ("centre_ns", "centre_we"):
        a, b = _LINE_ROLES[role]
        idx, prof = _profiles(survey, obs, V, lines[role], roles[a])
        prof = _hang(prof, mids[a], mids[b])
        closures.append(_mid(idx, prof, roles["C"], lines[role]) - o1)
        put(idx, prof)
    if not done.all():
        missing = [survey.stations[i].name for i in np.flatnonzero(~done)][:5]
        raise _not_union_jack(f"station(s) {', '.join(map(repr, missing))} are on none of the eight lines")
    return H, np.vstack(closures)


def moody_reduce(survey: Survey) -> MoodyResult:
    """Reduce a Union Jack survey by the classic worksheet.

    Parameters
    ----------
    survey : Survey
        A Union Jack survey with readings: corners, mid-sides and centre as
        stations; eight lines, each with an even number of steps.

    Returns
    -------
    MoodyResult
        Raw worksheet heights (µm), the same referred to the least-squares plane,
        the two centre closures (µm) and the linear operators.

    Raises
    ------
    LayoutError
        If the survey is not a Union Jack (wrong number of lines, a missing corner,
        mid-side or centre station, an odd number of steps).
    """
    model = _build_model(survey)
    obs = model.obs
    roles, lines = _roles(survey)
    m = obs.value_um.size
    G_raw, G_cl = _worksheet(survey, obs, np.eye(m), roles, lines)
    Qp = _plane_basis(survey)
    G = G_raw - Qp @ (Qp.T @ G_raw)
    l = _moody_values(model, G, Qp)
    raw = G_raw @ l
    cl = G_cl @ l
    names = [ln for ln in (lines["centre_ns"], lines["centre_we"])]
    meaning = "centre line value at the centre minus the diagonals' value there (classic closure error)"
    scale = float(np.max(np.abs(l))) if l.size else 0.0
    closures = tuple(LineClosure(nm, _clean_zero(c, scale), meaning) for nm, c in zip(names, cl))
    return MoodyResult(
        raw_height_um=raw,
        height_um=_plane_removed(Qp, raw),
        closures=closures,
        corners={r: survey.stations[i].name for r, i in roles.items()},
        lines=dict(lines),
        G_raw=G_raw,
        G=G,
        G_closure=G_cl,
    )


def _fit_zeros(model, l: np.ndarray, h: np.ndarray, Qp: np.ndarray):
    """Plane and instrument zeros that best fit a given height map to the observations.

    Returns ``(h_fit, z)``: the map plus the fitted plane (µm) and the zeros (µrad,
    or µm for an indicator). A plane is added because the worksheet's reference
    plane is arbitrary; for an autocollimator it trades against the zeros, and the
    least-squares solution of smallest norm is taken.
    """
    n = model.n
    Ah = model.A[:, :n]
    D = np.hstack([np.asarray(Ah @ Qp), model.A[:, n:].toarray()])
    sw = np.sqrt(model.w)
    coef, *_ = np.linalg.lstsq(D * sw[:, None], (l - Ah @ h) * sw, rcond=None)
    k = Qp.shape[1]
    return h + Qp @ coef[:k], coef[k:]


def _referred_zeros(model, l: np.ndarray, h_ref: np.ndarray, Qp: np.ndarray) -> np.ndarray:
    """Zeros implied by plane-referred heights: relative to that plane (autocollimator,
    indicator), or with a fitted plane against gravity (levels)."""
    if model.survey.instrument.gravity_referenced:
        return _fit_zeros(model, l, h_ref, Qp)[1]
    return _fit_zeros(model, l, h_ref, Qp[:, :0])[1]


def _moody_values(model, G: np.ndarray, Qp: np.ndarray) -> np.ndarray:
    """Observations in µm; for angle units the zeros implied by the map are moved inside the tangent."""
    l = model.obs.value_um
    if model.angle_factor is None:
        return l
    for _ in range(4):  # fixed point, as in the least-squares reduction
        z = _referred_zeros(model, l, G @ l, Qp)
        l_new = _linearised_values(model, z)
        if np.max(np.abs(l_new - l)) <= 1e-13 * max(1.0, float(np.max(np.abs(l_new)))):
            return l_new
        l = l_new
    return l


def moody_reduction(survey: Survey) -> Reduction:
    """:func:`moody_reduce` packed as a :class:`flatcheck.Reduction`.

    Residuals are the observations minus the rises of the Moody map with each
    zero fitted to it; ``sigma0`` uses the network's redundancy. Outliers are not
    screened (the worksheet has no redundancy numbers): use least squares.
    """
    model = _build_model(survey)
    _check_connected(model)
    res = moody_reduce(survey)
    _, _, info, _ = _rank_analysis(model)
    Qp = _plane_basis(survey)
    l = _moody_values(model, res.G, Qp)
    h_fit, z_fit = _fit_zeros(model, l, res.height_um, Qp)
    r = l - model.A @ np.concatenate([h_fit, z_fit])
    zeros = _referred_zeros(model, l, res.height_um, Qp)
    dof = info.redundancy
    s0, s0r = _sigma0(model, r, dof)
    warnings = ["classic Moody reduction: readings are not screened for outliers; use least squares for that"]
    return Reduction(
        heightmap=_heightmap(survey, res.height_um, _label(survey)),
        method="moody",
        residual_um=r,
        sigma0_um=s0,
        sigma0_reading=s0r,
        ref_base_mm=model.ref_base_mm,
        redundancy=dof,
        closures=res.closures,
        instrument_zeros=_zero_records(model, zeros),
        outliers=(),
        warnings=tuple(warnings),
        operator=LinearReduction(res.G, tuple(s.name for s in survey.stations), "moody"),
        rank=info,
        redundancy_numbers=np.full(r.size, dof / r.size if r.size else 0.0),
        standardized_residual=np.full(r.size, np.nan),
        moody=res,
    )
