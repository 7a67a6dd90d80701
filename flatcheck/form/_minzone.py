"""Exact minimum-zone (Chebyshev) plane solvers.

The vertical minimum zone of points ``(x_i, y_i, z_i)`` is the linear program

    minimise t over (a, b, c, t)  subject to  0 <= z_i - (a + b x_i + c y_i) <= t.

It has only four unknowns, so an optimal solution is a *basis*: four tight
constraints (contacts) with linearly independent rows. A basis is optimal if and
only if it is

* dual feasible: the Lagrange multipliers of its four rows are >= 0. They depend
  only on the (x, y) positions of the contacts, never on the heights. (Geometric
  reading: the (x, y) projections of the upper contacts and of the lower contacts
  have intersecting convex hulls: three-plus-one or two crossing pairs.)
* primal feasible: no point lies outside the zone the basis defines.

This module runs the *dual simplex method* on that LP (Dantzig, "Linear
Programming and Extensions", 1963; the dual simplex is due to Lemke, 1954):
start from a dual-feasible basis, bring in the most violated point, drop the
basis row chosen by the ratio test, repeat until no point is outside the zone.
The loop is vectorised over many height sets that share their positions (Monte
Carlo trials): each trial starts from the same (warm) basis, usually the optimum
of the unperturbed data, and needs only a few pivots.

Every answer carries a certificate: the final basis is re-checked for dual
feasibility and every point for primal feasibility. When a run does not finish
(degenerate ties on a regular grid can make the simplex stall), the problem goes
to scipy's HiGHS solver, whose answer is then checked the same way.

For one large point set the dual simplex first runs on a small subset (the
points farthest above and below the least-squares plane), then continues from
that basis on all points: only a few pivots over the full set are needed. A
convex-hull prefilter (only vertices of the 3-D hull can touch the zone) and one
direct HiGHS LP are kept as alternative methods for comparison and tests.

All work is done after centring and scaling: positions to about [-1, 1], heights
minus their least-squares plane and divided by the peak-to-valley of the
residuals, so huge offsets and tilts cost no precision.

References
----------
G.B. Dantzig, Linear Programming and Extensions, Princeton, 1963 (simplex, duality).
C.E. Lemke, The dual method of solving the linear programming problem, Naval
Research Logistics Quarterly 1 (1954) 36-47.
T.S.R. Murthy, S.Z. Abdin, Minimum zone evaluation of surfaces, Int. J. Mach. Tool
Des. Res. 20 (1980) (minimum zone as a Chebyshev problem).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import GeometryError, InputValueError

__all__ = ["MinZoneSolution", "check_points", "solve_minimum_zone", "minimum_zone_batch"]

# Feasibility tolerance in normalised height units (heights scaled to a
# peak-to-valley of 1 about the least-squares plane): ~1e5 x machine epsilon.
_TOL = 1e-11
_PIVOT_EPS = 1e-9  # smallest usable pivot element in the ratio test
_C = np.array([0.0, 0.0, 0.0, 1.0])  # objective: minimise t


@dataclass(frozen=True)
class MinZoneSolution:
    """Vertical minimum zone of a point set.

    Attributes
    ----------
    a_um, b_um_per_mm, c_um_per_mm : float
        Lower zone plane ``z = a + b*x + c*y`` (µm, µm/mm, µm/mm); the upper plane
        is ``t_um`` above it.
    t_um : float
        Zone width along z in µm.
    upper, lower : tuple of int
        Indices of the contact points on the upper and lower planes (those with a
        positive multiplier in the optimality certificate).
    weights : tuple of float
        Multipliers of ``upper + lower`` (each side sums to 1); ``t`` equals
        ``sum(w_u z_u) - sum(w_l z_l)`` for data near these contacts.
    certified : bool
        True when the dual-feasibility and primal-feasibility checks both passed.
    solver : str
        ``"dual-simplex"``, ``"highs"`` or ``"coplanar"``.
    basis : tuple of (int, bool)
        The four tight constraints of the optimal basis as ``(point index, on upper
        plane)``; a warm start for :func:`minimum_zone_batch`.
    """

    a_um: float
    b_um_per_mm: float
    c_um_per_mm: float
    t_um: float
    upper: tuple
    lower: tuple
    weights: tuple
    certified: bool
    solver: str
    basis: tuple = ()


# --------------------------------------------------------------------- checks
def check_points(x_mm, y_mm, height_um, *, what: str = "flatness"):
    """Validate and flatten a point set.

    Parameters
    ----------
    x_mm, y_mm : array_like, shape (n,)
        Positions in mm.
    height_um : array_like, shape (n,)
        Heights in µm.
    what : str
        Name of the evaluation, for messages.

    Returns
    -------
    x, y, z : ndarray, shape (n,)
        Float arrays (not copied when already float).

    Raises
    ------
    InputValueError
        Lengths differ, or a value is NaN or infinite (the message names the point, 1-based).
    GeometryError
        Fewer than three points, or all points on one line in (x, y).
    """
    x, y, z, _, _ = _prepare(x_mm, y_mm, height_um, what)
    return x, y, z


def _prepare(x_mm, y_mm, height_um, what="flatness"):
    """Validate; return x, y, z, the centring/scaling frame and the normalised heights."""
    x = np.asarray(x_mm, dtype=float).ravel()
    y = np.asarray(y_mm, dtype=float).ravel()
    z = np.asarray(height_um, dtype=float).ravel()
    if not (x.size == y.size == z.size):
        raise InputValueError(
            f"x, y and height arrays differ in length ({x.size}, {y.size}, {z.size})",
            fix="give one height per position",
        )
    if x.size < 3:
        raise GeometryError(
            f"{what} needs at least three points not on one line, got {x.size} point(s)",
            fix="measure more stations",
        )
    frame, Z = _frame(x, y, z, what)
    return x, y, z, frame, Z


def _not_finite(name, arr):
    bad = np.flatnonzero(~np.isfinite(arr))
    return InputValueError(
        f"{name} is not a finite number ({arr[bad[0]]})",
        where=f"point {bad[0] + 1}",
        fix="remove the point or give a number",
    )


@dataclass(frozen=True)
class _Frame:
    """Centring and scaling: X = (x - x0)/s, Z = (z - plane(X, Y))/zs."""

    x0: float
    y0: float
    s: float
    ls: tuple  # (a, b, c) of the least-squares plane in normalised positions, µm
    zs: float
    X: np.ndarray
    Y: np.ndarray

    def to_norm(self, z):
        """Normalised heights of ``z`` (any shape ending in n)."""
        a, b, c = self.ls
        Z = z - a
        Z -= b * self.X
        Z -= c * self.Y
        Z /= self.zs
        return Z

    def plane_to_um(self, v):
        """Normalised lower plane (A, B, C) -> (a_um, b_um_per_mm, c_um_per_mm) in original positions."""
        a0, b0, c0 = self.ls
        A = a0 + self.zs * v[0]
        B = (b0 + self.zs * v[1]) / self.s
        C = (c0 + self.zs * v[2]) / self.s
        return A - B * self.x0 - C * self.y0, B, C


def _dot(u, v):
    return float(np.einsum("i,i->", u, v))


def _frame(x, y, z, what="flatness"):
    """Centre positions on their mid-range and scale them to [-1, 1]; fit the least-squares
    plane; return the frame and the heights about that plane scaled to a peak-to-valley of 1.

    Each full-length pass costs time on a million points, so the finiteness checks ride on
    reductions needed anyway (min/max/mean propagate NaN and inf).
    """
    xmin, xmax, ymin, ymax = x.min(), x.max(), y.min(), y.max()
    for name, arr, lo, hi in (("x_mm", x, xmin, xmax), ("y_mm", y, ymin, ymax)):
        if not (np.isfinite(lo) and np.isfinite(hi)):
            raise _not_finite(name, arr)
    zm = z.mean()
    if not np.isfinite(zm):
        if np.isfinite(z).all():  # the mean overflowed: heights beyond 1e300 µm
            raise InputValueError("heights are too large to evaluate", fix="check the height unit")
        raise _not_finite("height_um", z)
    x0, y0 = 0.5 * (xmin + xmax), 0.5 * (ymin + ymax)
    s = 0.5 * max(xmax - xmin, ymax - ymin)
    if s == 0.0:
        raise GeometryError(f"{what}: all points are at the same (x, y) position", fix="check the coordinates")
    X = x - x0
    X /= s
    Y = y - y0
    Y /= s
    n = x.size
    sx, sy = X.sum(), Y.sum()
    sxy = _dot(X, Y)
    # normal equations of z = a + bX + cY (3 x 3, well conditioned after scaling)
    N = np.array([[n, sx, sy], [sx, _dot(X, X), sxy], [sy, sxy, _dot(Y, Y)]])
    # collinear (x, y): the centred 2 x 2 scatter matrix is singular
    C2 = N[1:, 1:] - np.outer(N[0, 1:], N[0, 1:]) / n
    ev = np.linalg.eigvalsh(C2)
    if ev[0] <= 1e-18 * max(ev[1], 1e-300) * n:
        raise GeometryError(
            f"{what} needs three points not on one line; all {n} points lie on one line",
            fix="use a straightness evaluation for a single line, or add stations off the line",
        )
    Z = z - zm
    a, b, c = np.linalg.solve(N, np.array([0.0, _dot(X, Z), _dot(Y, Z)]))
    Z -= a
    Z -= b * X
    Z -= c * Y
    zs = float(Z.max() - Z.min())
    zs = zs if zs > 0 else 1.0
    Z /= zs
    frame = _Frame(float(x0), float(y0), float(s), (float(a + zm), float(b), float(c)), zs, X, Y)
    return frame, Z


# ------------------------------------------------------------ dual simplex
def _rows(B, X, Y, n):
    """Constraint rows G_B (m, 4, 4) and signs for basis row ids B (m, 4).

    Row id k < n: lower constraint of point k, -(a + b x + c y) >= -z.
    Row id k >= n: upper constraint of point k - n, a + b x + c y + t >= z.
    """
    i = B % n
    up = B >= n
    s = np.where(up, 1.0, -1.0)
    G = np.empty(B.shape + (4,))
    G[..., 0] = s
    G[..., 1] = s * X[i]
    G[..., 2] = s * Y[i]
    G[..., 3] = up
    return G, i, s


def _multipliers(B, X, Y, n):
    """Dual multipliers (m, 4) of bases B (m, 4); NaN rows for singular bases."""
    G, _, _ = _rows(B, X, Y, n)
    lam = np.full(B.shape, np.nan)
    det = np.linalg.det(G)
    ok = np.abs(det) > 1e-12
    if ok.any():
        lam[ok] = np.linalg.solve(np.swapaxes(G[ok], 1, 2), np.broadcast_to(_C, (ok.sum(), 4))[..., None])[..., 0]
    return lam


def _dual_simplex(X, Y, Z, B, max_iter):
    """Vectorised dual simplex for many height sets at shared positions.

    Parameters
    ----------
    X, Y : ndarray, shape (n,)
        Normalised positions.
    Z : ndarray, shape (m, n)
        Normalised heights, one row per problem.
    B : ndarray of int, shape (m, 4)
        Dual-feasible starting bases (row ids as in :func:`_rows`).
    max_iter : int
        Pivot limit per problem.

    Returns
    -------
    v : ndarray, shape (m, 4)
        (A, B, C, t) of the final basis (normalised).
    B : ndarray, shape (m, 4)
        Final bases.
    done : ndarray of bool, shape (m,)
        Problems that reached a primal-feasible basis (optimal).
    """
    m, n = Z.shape
    B = B.copy()
    v = np.zeros((m, 4))
    done = np.zeros(m, dtype=bool)
    active = np.arange(m)
    for _ in range(max_iter + 1):
        if active.size == 0:
            break
        Ba = B[active]
        Za = Z[active]
        G, i, s = _rows(Ba, X, Y, n)
        h = s * np.take_along_axis(Za, i, axis=1)
        try:
            va = np.linalg.solve(G, h[..., None])[..., 0]
        except np.linalg.LinAlgError:
            # a singular basis cannot arise from valid pivots; drop to the exact fallback
            break
        v[active] = va
        r = _resid(Za, va, X, Y)  # residual about the lower plane
        lo_arg = r.argmin(axis=1)
        up_arg = r.argmax(axis=1)  # least slack below the upper plane
        ar = np.arange(active.size)
        lo_min = r[ar, lo_arg]
        up_min = va[:, 3] - r[ar, up_arg]
        worst = np.minimum(lo_min, up_min)
        fin = worst >= -_TOL
        done[active[fin]] = True
        keep = ~fin
        if not keep.any():
            active = active[:0]
            break
        active, G = active[keep], G[keep]
        lo_arg, up_arg, lo_min, up_min = lo_arg[keep], up_arg[keep], lo_min[keep], up_min[keep]
        q = np.where(lo_min <= up_min, lo_arg, up_arg + n)  # entering row id
        qi = q % n
        qs = np.where(q >= n, 1.0, -1.0)
        Gq = np.column_stack([qs, qs * X[qi], qs * Y[qi], (q >= n).astype(float)])
        rhs = np.stack([np.broadcast_to(_C, Gq.shape), Gq], axis=2)  # (k, 4, 2)
        sol = np.linalg.solve(np.swapaxes(G, 1, 2), rhs)
        lam, w = sol[..., 0], sol[..., 1]
        ratio = np.where(w > _PIVOT_EPS, np.maximum(lam, 0.0) / np.where(w > _PIVOT_EPS, w, 1.0), np.inf)
        leave = ratio.argmin(axis=1)
        stuck = ~np.isfinite(ratio[np.arange(active.size), leave])
        Bk = B[active]
        Bk[np.arange(active.size), leave] = q
        B[active] = Bk
        active = active[~stuck]
    return v, B, done


def _initial_basis(X, Y):
    """A dual-feasible basis: lower plane through a large triangle, upper contact on one vertex."""
    i1 = int(np.argmax((X - X.mean()) ** 2 + (Y - Y.mean()) ** 2))
    dx, dy = X - X[i1], Y - Y[i1]
    i2 = int(np.argmax(dx * dx + dy * dy))
    i3 = int(np.argmax(np.abs(dx * dy[i2] - dy * dx[i2])))
    n = X.size
    return np.array([i1, i2, i3, n + i1])


def _resid(Z, v, X, Y):
    """Residuals (m, n) of heights Z (m, n) about lower planes v (m, >=3).

    The planes are evaluated as one matrix product (m, 3) x (3, n), then subtracted in place:
    two passes over the (m, n) array instead of four.
    """
    r = np.matmul(v[:, :3], np.vstack([np.ones_like(X), X, Y]))
    np.subtract(Z, r, out=r)
    return r


def _certify(X, Y, Z, B, v, r=None, lohi=None):
    """Optimality certificate per problem: dual multipliers >= 0 and every point inside the zone.

    ``lohi``: the least and largest residual of each problem when already known (saves two passes).
    """
    n = X.size
    lam = _multipliers(B, X, Y, n)
    dual_ok = np.all(lam >= -1e-9, axis=1)
    if lohi is None:
        if r is None:
            r = _resid(Z, v, X, Y)
        lohi = (r.min(axis=1), r.max(axis=1))
    primal_ok = (lohi[0] >= -1e-9) & (lohi[1] <= v[:, 3] + 1e-9)
    return dual_ok & primal_ok, lam


# ---------------------------------------------------------------- HiGHS
def _highs(X, Y, Z):
    """One HiGHS LP over the given (normalised) points; returns (A, B, C, t) and a basis guess."""
    from scipy.optimize import linprog

    n = X.size
    A = np.column_stack([np.ones(n), X, Y])
    A_ub = np.vstack([np.column_stack([A, np.zeros(n)]), np.column_stack([-A, -np.ones(n)])])
    b_ub = np.concatenate([Z, -Z])
    res = linprog(
        [0, 0, 0, 1], A_ub=A_ub, b_ub=b_ub, bounds=[(None, None)] * 4, method="highs",
        options={"primal_feasibility_tolerance": 1e-10, "dual_feasibility_tolerance": 1e-10},
    )
    if res.status != 0:  # pragma: no cover - the LP is always feasible and bounded
        raise GeometryError(f"minimum-zone LP failed: {res.message}")
    # rows of A_ub: first n are "plane <= z" (our lower rows), next n are "plane + t >= z" (upper)
    marg = -res.ineqlin.marginals
    order = np.argsort(-marg)
    basis = [int(k) for k in order[:4] if marg[k] > 1e-9]
    return res.x, np.array(basis, dtype=np.int64)


def _complete_basis(X, Y, Z, v, basis):
    """Extend a support (rows with positive multiplier) to four independent tight rows."""
    n = X.size
    r = Z - (v[0] + v[1] * X + v[2] * Y)
    slack = np.concatenate([r, v[3] - r])
    rows = list(basis)
    G, _, _ = _rows(np.array(rows, dtype=np.int64), X, Y, n) if rows else (np.zeros((0, 4)), None, None)
    G = list(G)
    for k in np.argsort(slack):
        if len(rows) == 4:
            break
        if k in rows:
            continue
        g, _, _ = _rows(np.array([k]), X, Y, n)
        if np.linalg.matrix_rank(np.array(G + [g[0]]), tol=1e-9) == len(G) + 1:
            rows.append(int(k))
            G.append(g[0])
    return np.array(rows, dtype=np.int64) if len(rows) == 4 else None


# ------------------------------------------------------------- public API
def _simplex_one(X, Y, Z, B, max_iter):
    """Dual simplex for one height set; returns (v, B, optimal, residuals)."""
    n = X.size
    B = np.array(B, dtype=np.int64)
    for _ in range(max_iter + 1):
        G, i, s = _rows(B, X, Y, n)
        try:
            v = np.linalg.solve(G, s * Z[i])
        except np.linalg.LinAlgError:
            return None, B, False, None
        r = _resid(Z[None, :], v[None, :], X, Y)[0]
        lo, hi = int(r.argmin()), int(r.argmax())
        lo_slack, up_slack = r[lo], v[3] - r[hi]
        if min(lo_slack, up_slack) >= -_TOL:
            return v, B, True, r
        q = lo if lo_slack <= up_slack else hi + n
        g, _, _ = _rows(np.array([q]), X, Y, n)
        sol = np.linalg.solve(G.T, np.column_stack([_C, g[0]]))
        lam, w = sol[:, 0], sol[:, 1]
        pos = w > _PIVOT_EPS
        if not pos.any():
            return v, B, False, r
        ratio = np.where(pos, np.maximum(lam, 0.0) / np.where(pos, w, 1.0), np.inf)
        B[int(ratio.argmin())] = q
    return v, B, False, r


def _solution(frame, Z, B, v, solver, r=None):
    X, Y = frame.X, frame.Y
    n = X.size
    if r is None:
        r = _resid(Z[None, :], v[None, :], X, Y)[0]
    lo = r.min()
    t = r.max() - lo  # the zone actually achieved by this plane (never below the optimum)
    a, b, c = frame.plane_to_um(np.array([v[0] + lo, v[1], v[2]]))
    certified = False
    upper, lower, weights, basis = (), (), (), ()
    if B is not None:
        ok, lam = _certify(X, Y, None, B[None, :], v[None, :], r[None, :])
        certified = bool(ok[0])
        lam = lam[0]
        basis = tuple((int(k % n), bool(k >= n)) for k in B)
        keep = lam > 1e-12
        rows = B[keep]
        w = lam[keep]
        order = np.argsort(rows < n, kind="stable")  # upper contacts first
        rows, w = rows[order], w[order]
        upper = tuple(int(k - n) for k in rows if k >= n)
        lower = tuple(int(k) for k in rows if k < n)
        weights = tuple(float(x) for x in w)
    return MinZoneSolution(
        float(a), float(b), float(c), float(t * frame.zs), upper, lower, weights, certified, solver, basis
    )


def _auto(frame, Z):
    """Dual simplex with constraint generation; None if it did not reach a certified optimum.

    The simplex runs on a working subset (the points farthest above and below the
    least-squares plane, their threshold taken from a strided sample, which is
    cheaper than partitioning all points). Its optimum is then checked against all
    points; the worst offenders on each side join the subset and the simplex
    continues from the same basis. Only a few rounds touch every point.
    """
    X, Y = frame.X, frame.Y
    n = X.size
    if n > 2000:
        samp = np.sort(Z[:: max(1, n // 20000)])
        k = max(2, samp.size // 2000)
        sub = np.flatnonzero((Z <= samp[k]) | (Z >= samp[-k - 1]))
    else:
        sub = np.arange(n)
    B = _map_rows(_initial_basis(X[sub], Y[sub]), sub, n)
    for _ in range(50):
        v, Bs, done, r = _simplex_one(X[sub], Y[sub], Z[sub], _local_rows(B, sub, n), 500)
        if not done:
            return None
        B = _map_rows(Bs, sub, n)
        if sub.size == n:
            break
        r = _resid(Z[None, :], v[None, :], X, Y)[0]
        low = np.flatnonzero(r < -_TOL)
        high = np.flatnonzero(r > v[3] + _TOL)
        if low.size == 0 and high.size == 0:
            break
        add = []
        for idx, key in ((low, r[low]), (high, -r[high])):
            if idx.size > 200:
                idx = idx[np.argpartition(key, 200)[:200]]
            add.append(idx)
        sub = np.union1d(sub, np.concatenate(add))
    else:
        return None
    sol = _solution(frame, Z, B, v, "dual-simplex", r)
    return sol if sol.certified else None


def solve_minimum_zone(x_mm, y_mm, height_um, *, method: str = "auto") -> MinZoneSolution:
    """Exact vertical minimum zone of a point set.

    Parameters
    ----------
    x_mm, y_mm : array_like, shape (n,)
        Positions in mm.
    height_um : array_like, shape (n,)
        Heights in µm.
    method : {"auto", "hull", "lp"}
        ``"auto"``: dual simplex (subset first, then all points), HiGHS fallback.
        ``"hull"``: HiGHS on the vertices of the 3-D convex hull (Qhull).
        ``"lp"``: one HiGHS LP over all points (slow on large sets; a reference).

    Returns
    -------
    MinZoneSolution

    Raises
    ------
    InputValueError, GeometryError
        See :func:`check_points`.
    """
    if method not in ("auto", "hull", "lp"):
        raise InputValueError(f"unknown minimum-zone method {method!r}", fix="use auto, hull or lp")
    x, y, z, frame, Z = _prepare(x_mm, y_mm, height_um)
    X, Y = frame.X, frame.Y
    n = X.size
    if frame.zs == 1.0 and not np.any(Z):  # all points on the least-squares plane: flatness 0
        return _solution(frame, Z, None, np.zeros(4), "coplanar")
    if method == "lp":
        v, supp = _highs(X, Y, Z)
        return _solution(frame, Z, _complete_basis(X, Y, Z, v, supp), v, "highs")
    if method == "auto":
        sol = _auto(frame, Z)
        if sol is not None:
            return sol
    # HiGHS on the vertices of the convex hull, checked against all points
    idx = _hull_vertices(X, Y, Z)
    v, supp = _highs(X[idx], Y[idx], Z[idx])
    B = _complete_basis(X, Y, Z, v, _map_rows(supp, idx, n))
    return _solution(frame, Z, B, v, "highs")


def _local_rows(B, sub, n):
    """Global row ids -> row ids within the subset ``sub`` (sorted unique point indices)."""
    pos = np.searchsorted(sub, B % n)
    return pos + np.where(B >= n, sub.size, 0)


def _map_rows(rows, idx, n):
    """Row ids within a subset ``idx`` -> global row ids."""
    rows = np.asarray(rows, dtype=np.int64)
    k = idx.size
    return idx[rows % k] + np.where(rows >= k, n, 0)


def _hull_vertices(X, Y, Z):
    """Indices of the vertices of the 3-D convex hull (all points if Qhull cannot build it)."""
    from scipy.spatial import ConvexHull, QhullError

    if X.size <= 8:
        return np.arange(X.size)
    try:
        # "Qt": triangulated output; "QbB": scale to the unit cube (positions/heights already normalised)
        hull = ConvexHull(np.column_stack([X, Y, Z]), qhull_options="Qt QbB")
    except QhullError:
        return np.arange(X.size)  # flat or degenerate set: keep every point, the LP copes
    return np.sort(hull.vertices)


def minimum_zone_batch(x_mm, y_mm, heights_um, *, start=None, max_iter: int = 100):
    """Vertical minimum zone for many height sets measured at the same positions.

    Each set is solved by the dual simplex from a warm start (the contact basis of
    ``start``). On large point sets the simplex works on a shared *working set*: the
    points whose distance to the warm start's zone planes is within a few times the
    largest change of any height in the batch (only those can become contacts in one
    step), then every point of every set is checked; sets with a point outside their
    zone take the offending points into the working set and continue from their basis
    (constraint generation, as for one large set). The answer is exact either way: each
    zone is certified by its multipliers (dual feasibility) and by checking all points.

    Parameters
    ----------
    x_mm, y_mm : array_like, shape (n,)
        Positions in mm, shared by every set.
    heights_um : array_like, shape (m, n)
        Heights in µm, one row per set (e.g. one Monte Carlo trial).
    start : MinZoneSolution, optional
        Warm start: a solution at the same positions (usually of the unperturbed
        data). Its contact set must be a basis; otherwise a cold start is used.
    max_iter : int
        Pivot limit of the dual simplex before a set goes to the HiGHS fallback.

    Returns
    -------
    t_um : ndarray, shape (m,)
        Zone widths along z in µm; each is certified optimal.
    n_fallback : int
        How many sets needed the HiGHS fallback.
    """
    x = np.asarray(x_mm, dtype=float).ravel()
    y = np.asarray(y_mm, dtype=float).ravel()
    Z = np.atleast_2d(np.asarray(heights_um, dtype=float))
    if Z.shape[1] != x.size:
        raise InputValueError(f"heights have {Z.shape[1]} columns for {x.size} positions", fix="one column per position")
    if not np.isfinite(Z).all():
        raise InputValueError("a height is not a finite number", fix="remove NaN/inf trials")
    ref = Z.mean(axis=0)
    frame, Zref = _frame(x, y, ref)
    B0 = _warm_basis(frame, start)
    t, certified = _batch_normalised(frame, Zref, frame.to_norm(Z), B0, max_iter)
    t *= frame.zs
    bad = np.flatnonzero(~certified)
    for k in bad:
        t[k] = solve_minimum_zone(x, y, Z[k]).t_um
    return t, int(bad.size)


def _warm_basis(frame, start):
    """Row ids (4,) of the warm-start basis from ``start`` when it is dual feasible, else a cold start."""
    X, Y = frame.X, frame.Y
    n = X.size
    if start is not None and len(start.basis) == 4:
        B0 = np.array([i + n if up else i for i, up in start.basis], dtype=np.int64)
        lam = _multipliers(B0[None, :], X, Y, n)
        if np.all(lam >= -1e-9):
            return B0
    return _initial_basis(X, Y)


def _batch_normalised(frame, Zref, Zn, B0, max_iter=100):
    """Minimum zones (normalised units) of height sets ``Zn`` (m, n) already in ``frame``'s normalised heights.

    ``Zref`` (n,) are the normalised reference heights that choose the working set. Returns the zone
    widths (m,) in normalised units (multiply by ``frame.zs`` for µm) and which of them are certified;
    the caller solves the others another way. See :func:`minimum_zone_batch`.
    """
    X, Y = frame.X, frame.Y
    n = X.size
    m = Zn.shape[0]
    S = _working_set(X, Y, Zref, Zn, B0)
    B = np.broadcast_to(B0, (m, 4)).copy()
    t = np.full(m, np.nan)
    certified = np.zeros(m, dtype=bool)
    todo = np.arange(m)
    for _ in range(20):
        if todo.size == 0:
            break
        whole = todo.size == m
        Zs = (Zn if whole else Zn[todo]) if S.size == n else Zn[np.ix_(todo, S)]
        v, Bl, done = _dual_simplex(X[S], Y[S], Zs, _local_rows(B[todo], S, n), max_iter)
        B[todo] = _map_rows(Bl, S, n)
        r = _resid(Zn if whole else Zn[todo], v, X, Y)  # every point of every set
        lo, hi = r.min(axis=1), r.max(axis=1)
        inside = (lo >= -_TOL) & (hi <= v[:, 3] + _TOL)
        fin = done & inside
        if fin.any():
            ok, _ = _certify(X, Y, None, B[todo[fin]], v[fin], lohi=(lo[fin], hi[fin]))
            idx = todo[fin]
            t[idx] = hi[fin] - lo[fin]
            certified[idx] = ok
        more = done & ~inside
        if not more.any() or S.size == n:
            break
        rm = r[more]
        out = (rm < -_TOL) | (rm > v[more, 3:4] + _TOL)
        S = np.union1d(S, np.flatnonzero(out.any(axis=0)))
        todo = todo[more]
    return t, certified


def _working_set(X, Y, Zref, Zn, B0):
    """Points that may touch a zone in a batch: near the warm start's zone planes (see the caller).

    A point whose distance to both planes of the reference zone exceeds six times the RMS
    change of one height in the batch rarely becomes a contact; if it does, the full check
    after the simplex brings it in. Small sets are kept whole.
    """
    n = X.size
    if n <= 200:
        return np.arange(n)
    G, i, s = _rows(B0[None, :], X, Y, n)
    try:
        v = np.linalg.solve(G[0], s[0] * Zref[i[0]])
    except np.linalg.LinAlgError:
        return np.arange(n)
    r = Zref - (v[0] + v[1] * X + v[2] * Y)
    lo = r.min()
    slack = np.minimum(r - lo, (r.max() - lo) - (r - lo))
    dev = float(np.sqrt(np.mean((Zn[: min(Zn.shape[0], 2000)] - Zref) ** 2)))  # RMS change of one height
    S = np.flatnonzero(slack <= 6.0 * dev + 1e-12)
    S = np.union1d(S, B0 % n)
    return np.arange(n) if S.size > n // 2 else S
