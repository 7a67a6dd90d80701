"""How well a newly read line closes with the lines already read.

A line read during entry meets lines read before it at its *tie stations* (SW, C, NE...).
The line's own profile fixes the heights of its stations only up to what its instrument
cannot see along it: an offset for every instrument, and a tilt along the line for an
autocollimator (re-aimed for every line, so its zero is a slope of its own). The lines
already read fix the tie stations' heights up to the plane of the surface. What is left
once both freedoms are taken out is the *closure*: for the centre line W-E of a Union Jack,
the height it gives at C minus the height the diagonals give there, after hanging W-E
between W and E (the classic closure at the centre).

Method. One weighted least-squares adjustment of the runs already read and the new run,
in which the new line gets its own copy of every station (so it floats freely and fits
the others exactly): unknowns are the station heights (µm), the copies, and the
instrument zeros (µrad for slope instruments, one per line and turned state for an
autocollimator, one for all lines for levels; one datum offset in µm for an indicator),
as in the survey reduction's model. The differences ``d`` (copy minus original) at the
tie stations are projected off what the null space of the adjustment can change (the
free offset and tilt), ``c = P d``; each closure is the deleted residual ``c_t / P_tt``
(the height at ``t`` minus what the other tie stations predict), with standard deviation
``sqrt((P D Q D^T P)_tt) / P_tt`` from the adjustment's cofactor matrix ``Q``. A closure
is out of bounds when it exceeds ``z`` standard deviations (``z = 3.29``, the reduction's
two-sided 0.1 % limit).

References
----------
W. Baarda, "A testing procedure for use in geodetic networks", Netherlands Geodetic
Commission, Publications on Geodesy 2(5), 1968 (testing misclosures of a network).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..units import angle_unit, length_unit, rise_um

__all__ = ["ClosureCheck", "line_closure"]


@dataclass(frozen=True)
class ClosureCheck:
    """The closure of one line against the lines read before it.

    Attributes
    ----------
    line : str
        The new line.
    n_closures : int
        Independent closures the line adds (0: nothing to check yet).
    station : str
        The tie station whose closure is largest compared with its limit ("" when none).
    closure_um : float
        That closure in µm: the height the new line gives at ``station`` minus the height the
        lines already read give there, after the line's own offset (and tilt) are fitted to the
        other tie stations.
    limit_um : float
        ``z`` standard deviations of that closure, in µm.
    flagged : bool
        ``abs(closure_um) > limit_um``.
    closures : tuple of (str, float, float)
        ``(station, closure_um, limit_um)`` for every checked tie station.
    """

    line: str
    n_closures: int
    station: str
    closure_um: float
    limit_um: float
    flagged: bool
    closures: tuple


def _observations(survey, runs, copies: dict | None, index: dict, zeros: dict, rows: list):
    """Append (coefficients, value_um, weight-sd) rows for ``runs`` to ``rows``."""
    inst = survey.instrument
    heights = inst.reads_heights
    half = 0.5 if (inst.kind == "autocollimator" and inst.reports == "beam-deviation") else 1.0
    for line_index, fwd, sign, sd in runs:
        ln = survey.lines[line_index]
        st = ln.stations
        where = copies if copies is not None else index
        fwd = np.asarray(fwd, dtype=float)
        if inst.kind == "autocollimator":
            zkey = ("line", line_index, sign < 0)
        elif heights:
            zkey = ("datum",)
        else:
            zkey = ("gravity",)
        z = zeros.setdefault(zkey, len(zeros))
        if heights:
            unit = length_unit(inst.unit)
            for k, v in enumerate(fwd):
                rows.append(({("h", where[st[k]]): 1.0, ("z", z): float(sign)}, float(v) * unit.factor_um, sd))
        else:
            unit = angle_unit(inst.unit)
            base = float(ln.foot_spacing_mm)
            rises = rise_um(fwd * half, base, unit)
            for k, r in enumerate(rises):
                coef = {("h", where[st[k + 1]]): 1.0, ("h", where[st[k]]): -1.0, ("z", z): float(sign) * base * 1e-3}
                rows.append((coef, float(r), sd * base * 1e-3))


def line_closure(survey, done, new, *, reading_sd_rad: float | None = None, reading_sd_um: float | None = None,
                 z: float = 3.29) -> ClosureCheck:
    """Closure of a newly read line against the runs of the lines read before it.

    Parameters
    ----------
    survey : flatcheck.Survey
        The survey's stations, lines and instrument (runs are not used).
    done : sequence of (int, array_like, int)
        The complete runs of the lines already read: ``(line_index, readings, sign)``, the
        readings in the instrument's unit in *forward* order (from the line's first station),
        multiplied by ``sign`` (-1 when the run was taken with the instrument turned round or
        the file's convention negates readings) so that positive = rising toward the line's end.
    new : (int, array_like, int)
        The new line's complete run, in the same form.
    reading_sd_rad : float, optional
        Standard deviation of one reading of a slope instrument, as a mirror-tilt or slope
        angle in rad (slope instruments).
    reading_sd_um : float, optional
        Standard deviation of one indicator reading in µm (indicators).
    z : float
        Limit in standard deviations (3.29: two-sided 0.1 %).

    Returns
    -------
    ClosureCheck
        ``n_closures == 0`` when the new line does not close any loop yet.

    Examples
    --------
    Exact readings of any surface close to rounding; see ``tests/bench/test_entry.py``.
    """
    heights = survey.instrument.reads_heights
    sd = float(reading_sd_um) if heights else float(reading_sd_rad) * 1e6  # µm, or µrad (x base mm x 1e-3 -> µm)
    new_line = survey.lines[new[0]]
    index: dict = {}
    for li, _, _ in done:
        for s in survey.lines[li].stations:
            index.setdefault(s, len(index))
    ties = [s for s in dict.fromkeys(new_line.stations) if s in index]
    empty = ClosureCheck(new_line.name, 0, "", 0.0, 0.0, False, ())
    if len(ties) < 2 or not done:
        return empty
    copies = {s: len(index) + k for k, s in enumerate(dict.fromkeys(new_line.stations))}
    n_h = len(index) + len(copies)
    zeros: dict = {}
    rows: list = []
    _observations(survey, [(li, v, s, sd) for li, v, s in done], None, index, zeros, rows)
    _observations(survey, [(new[0], new[1], new[2], sd)], copies, index, zeros, rows)
    p = n_h + len(zeros)
    # the normal matrix N = A^T W A and b = A^T W y, built row by row (each reading touches at most three
    # unknowns), so the work grows with the readings, not with readings x unknowns^2
    N = np.zeros((p, p))
    b = np.zeros(p)
    for coef, value, s in rows:
        cols = np.array([j if kind == "h" else n_h + j for kind, j in coef])
        c = np.array(list(coef.values())) / s
        N[np.ix_(cols, cols)] += np.outer(c, c)
        b[cols] += c * (value / s)
    # eigen-decomposition of N: its zero eigenvalues span the null space (the datum and the new line's free
    # offset and tilt); the rest give the minimum-norm solution and the cofactor matrix Q = N^+
    lam, V = np.linalg.eigh(N)
    tol = lam.max() * p * 1e-13 if lam.size else 0.0
    keep = lam > tol
    Vk = V[:, keep]
    inv = 1.0 / lam[keep]
    x = Vk @ (inv * (Vk.T @ b))
    N0 = V[:, ~keep]
    D = np.zeros((len(ties), p))
    for t, s in enumerate(ties):
        D[t, copies[s]] = 1.0
        D[t, index[s]] = -1.0
    DV = D @ Vk
    DQD = (DV * inv) @ DV.T  # D Q D^T without forming Q
    d = D @ x
    M = D @ N0
    if M.size:
        Um, Sm, _ = np.linalg.svd(M, full_matrices=False)
        rank_m = int(np.sum(Sm > (Sm.max() * 1e-9 if Sm.size else 0.0)))
        B = Um[:, :rank_m]
        P = np.eye(len(ties)) - B @ B.T
    else:
        rank_m = 0
        P = np.eye(len(ties))
    n_closures = len(ties) - rank_m
    if n_closures <= 0:
        return empty
    c = P @ d
    C = P @ DQD @ P
    results = []
    best = None
    for t, s in enumerate(ties):
        ptt = P[t, t]
        if ptt < 1e-9 or C[t, t] <= 0:
            continue
        closure = c[t] / ptt
        limit = z * np.sqrt(C[t, t]) / ptt
        results.append((s, float(closure), float(limit)))
        # one closure shows at every tie station with the same ratio: name the station where its
        # limit is tightest (C for a Union Jack's centre line, the classic closure)
        ratio = round(float(abs(c[t]) / np.sqrt(C[t, t])), 9)
        key = (ratio, -float(limit))
        if best is None or key > best[0]:
            best = (key, s, float(closure), float(limit))
    if best is None:
        return empty
    _, station, closure, limit = best
    return ClosureCheck(new_line.name, n_closures, station, closure, limit, abs(closure) > limit, tuple(results))
