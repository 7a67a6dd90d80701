"""The datum and rank analysis of a survey's observation network, and its minimal-constraint solver.

What a layout read with an instrument can observe: the null space of the design matrix of
:mod:`flatcheck.survey._network` inside the plane and the instrument zeros (the datum the reduction
fixes), the shapes beyond the plane it cannot see (twist, bows), stations cut off from the network,
and :func:`network_rank` for planning; then the sparse solver of the weighted normal equations with
one unknown held per datum direction, and the least-squares plane taken off the heights. A layout
that cannot observe the surface raises :class:`flatcheck.errors.UnobservableError` naming what to add.

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
"""

from __future__ import annotations

import numpy as np
import scipy.linalg
import scipy.sparse as sp
import scipy.sparse.linalg as spla
from scipy.sparse.csgraph import connected_components

from ..errors import GeometryError, UnobservableError
from ._model import Survey
from ._network import NetworkRank, _build_model, _Model, blas_one_thread

__all__ = ["network_rank"]

# Up to this many unknowns the rank is also checked by a dense eigen-decomposition during the
# reduction (the cost argument of _REDUNDANCY_DENSE_MAX in _network); a singular network of up to
# _NAMING_DENSE_MAX unknowns is analysed densely afterwards to name the stations it cannot see.
_DENSE_RANK_MAX = 300
_NAMING_DENSE_MAX = 3000
# Relative eigenvalue limit (after Jacobi scaling) below which a direction is null.
_NULL_RTOL = 1e-10


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


def _plane_removed(Qp: np.ndarray, h: np.ndarray) -> np.ndarray:
    return h - Qp @ (Qp.T @ h)


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
