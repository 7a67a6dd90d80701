"""The computational mesh over a pad face and the surface under it (see ``_film``)."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import scipy.sparse as sp
from scipy.sparse.linalg import splu

from ..errors import GeometryError, InputValueError
from ._feeds import _positive

__all__ = [
    "MIN_MESH_CELLS",
    "MAX_MESH_CELLS",
    "MESH_LIMIT_REASON",
    "PadMesh",
    "circular_pad_mesh",
    "rectangular_pad_mesh",
    "graded_edges",
    "PadDeviation",
    "pad_deviation",
    "surface_under_pad",
]


#: Fewest and most mesh cells along a pad side. At 512 x 512 one film equilibrium already takes seconds and
#: about 0.8 GB (measured here: 8.5 s, 0.8 GB peak for a 120 x 80 mm pad); the load has converged to 0.1 %
#: at 64 cells (docs/methods.md), so finer meshes only cost time and memory.
MIN_MESH_CELLS = 4
MAX_MESH_CELLS = 512
MESH_LIMIT_REASON = (
    f"a {MAX_MESH_CELLS} x {MAX_MESH_CELLS} mesh already takes seconds and about 1 GB of memory per pad position, "
    "and the film has converged to 0.1 % at 64 cells"
)



# --------------------------------------------------------------------------- mesh
@dataclass(frozen=True, eq=False)
class PadMesh:
    """Computational mesh over one pad face.

    Attributes
    ----------
    shape : {"circle", "rect"}
        Pad shape.
    length_mm, width_mm : float
        Size along x and y in mm (the diameter twice for a circle).
    x_mm, y_mm : ndarray, shape (n,)
        Node positions in mm, pad-local (origin at the pad centre, x along the travel).
    area_mm2 : ndarray, shape (n,)
        Quadrature weight of each node: the area of its cell inside the pad (and outside any hole), mm².
    probe_x_mm, probe_y_mm : ndarray, shape (m,)
        Points where the film thickness is evaluated: the ``n`` nodes first, then the link midpoints
        (where the conductances live), then the edge points where mesh lines cross the pad's edge (or a hole's
        edge), then the centres of the holes.
    spacing_mm : tuple of float
        Mesh pitch ``(dx, dy)`` in mm (the largest cell of a graded mesh).
    x_edges_mm, y_edges_mm : ndarray
        Cell edges along x (nx + 1) and y (ny + 1), mm; evenly spaced unless the mesh is graded.
    holes : tuple of (float, float, float)
        Circular holes ``(x_mm, y_mm, radius_mm)`` cut out of the mesh (feed pockets held at their own
        pressure); empty for a plain mesh.
    """

    shape: str
    length_mm: float
    width_mm: float
    x_mm: np.ndarray
    y_mm: np.ndarray
    area_mm2: np.ndarray
    probe_x_mm: np.ndarray
    probe_y_mm: np.ndarray
    spacing_mm: tuple
    _ops: dict = field(default=None, repr=False)
    x_edges_mm: np.ndarray = None
    y_edges_mm: np.ndarray = None
    holes: tuple = ()

    @property
    def n(self) -> int:
        """Number of unknowns (nodes)."""
        return int(self.x_mm.size)

    @property
    def pad_area_mm2(self) -> float:
        """Exact face area in mm²."""
        if self.shape == "circle":
            return math.pi * self.length_mm**2 / 4.0
        return self.length_mm * self.width_mm

    @property
    def half_size_mm(self) -> float:
        """Half the larger side (or the radius), mm: the length used to scale moments."""
        return 0.5 * max(self.length_mm, self.width_mm)

    @property
    def graded(self) -> bool:
        """True when the cells are not all of one size."""
        return bool(np.ptp(np.diff(self.x_edges_mm)) > 1e-9 * self.length_mm
                    or np.ptp(np.diff(self.y_edges_mm)) > 1e-9 * self.width_mm)

    def local_spacing_mm(self, x_mm: float, y_mm: float) -> tuple:
        """Size ``(dx, dy)`` of the cell holding the point ``(x_mm, y_mm)``, mm."""
        i = int(np.clip(np.searchsorted(self.x_edges_mm, x_mm) - 1, 0, self.x_edges_mm.size - 2))
        j = int(np.clip(np.searchsorted(self.y_edges_mm, y_mm) - 1, 0, self.y_edges_mm.size - 2))
        return float(np.diff(self.x_edges_mm)[i]), float(np.diff(self.y_edges_mm)[j])

    def with_holes(self, holes) -> "PadMesh":
        """The same cells with circular holes ``(x_mm, y_mm, radius_mm)`` cut out (cached per set of holes).

        The nodes inside a hole are dropped; a mesh line from a node outside into a hole ends at the hole's
        edge (Shortley-Weller distance), where the film solver holds the hole's own pressure.
        """
        holes = tuple((float(x), float(y), float(r)) for x, y, r in holes)
        if not holes:
            return self
        cache = self._ops.setdefault("_holed", {})
        if holes not in cache:
            cache[holes] = _build_mesh(self.shape, self.length_mm, self.width_mm, self.x_edges_mm, self.y_edges_mm,
                                       holes)
        return cache[holes]


def _circle_cell_area(x0, x1, y0, y1, radius, n_gauss=48):
    """Area (mm²) of rectangles [x0,x1]x[y0,y1] inside the disc of ``radius``; arrays of equal shape.

    The chord height is integrated exactly in y and by Gauss-Legendre in x (kinks only where the
    circle crosses y0 or y1, so the error is far below the discretisation error of the film).
    """
    t, w = np.polynomial.legendre.leggauss(n_gauss)
    xm = 0.5 * (x0 + x1)[:, None] + 0.5 * (x1 - x0)[:, None] * t[None, :]
    s = np.sqrt(np.clip(radius**2 - xm**2, 0.0, None))
    top = np.minimum(y1[:, None], s)
    bot = np.maximum(y0[:, None], -s)
    chord = np.clip(top - bot, 0.0, None)
    return 0.5 * (x1 - x0) * (chord @ w)


def _circle_cell_centroid(x0, x1, y0, y1, radius, n_gauss=48):
    """Centroids ``(cx, cy)`` (mm) of the parts of rectangles [x0,x1]x[y0,y1] inside the disc of ``radius``."""
    t, w = np.polynomial.legendre.leggauss(n_gauss)
    xm = 0.5 * (x0 + x1)[:, None] + 0.5 * (x1 - x0)[:, None] * t[None, :]
    s = np.sqrt(np.clip(radius**2 - xm**2, 0.0, None))
    top = np.minimum(y1[:, None], s)
    bot = np.maximum(y0[:, None], -s)
    chord = np.clip(top - bot, 0.0, None)
    half = 0.5 * (x1 - x0)
    area = half * (chord @ w)
    mx = half * ((chord * xm) @ w)
    my = half * ((0.5 * (top**2 - bot**2) * (chord > 0)) @ w)
    area = np.where(area > 0, area, 1.0)
    return mx / area, my / area


def graded_edges(size_mm: float, n: int, edge_cell_mm: float | None = None) -> np.ndarray:
    """Cell edges over ``[-size/2, size/2]``: ``n`` cells, smaller towards both ends.

    The edges are ``x(ξ) = (size/2) tanh(s ξ) / tanh(s)`` at ``n + 1`` evenly spaced ``ξ`` in [-1, 1] (a
    smooth stretching, so the five-point scheme keeps its second order). The stretching ``s`` makes the end
    cells ``edge_cell_mm`` wide (solved for by bisection; ``s`` at most 3, a centre-to-end cell ratio of about
    100); with ``edge_cell_mm`` None or not below ``size / n`` the cells are even.

    Parameters
    ----------
    size_mm : float
        Length of the side, mm.
    n : int
        Number of cells.
    edge_cell_mm : float, optional
        Width wanted for the two end cells, mm.

    Returns
    -------
    ndarray, shape (n + 1,)
        Cell edges in mm, increasing, symmetric about 0.

    Examples
    --------
    >>> e = graded_edges(80.0, 64, 0.2)
    >>> round(float(e[1] - e[0]), 6), round(float(e[-1]), 6)
    (0.2, 40.0)
    """
    n = int(n)
    xi = np.linspace(-1.0, 1.0, n + 1)
    even = size_mm / n
    if edge_cell_mm is None or edge_cell_mm >= even:
        return 0.5 * size_mm * xi

    def first(s):
        return 0.5 * size_mm * (1.0 - math.tanh(s * (1.0 - 2.0 / n)) / math.tanh(s))

    lo, hi = 1e-6, 3.0
    if first(hi) > edge_cell_mm:
        s = hi
    else:
        for _ in range(200):
            mid = 0.5 * (lo + hi)
            if first(mid) > edge_cell_mm:
                lo = mid
            else:
                hi = mid
        s = 0.5 * (lo + hi)
    e = 0.5 * size_mm * np.tanh(s * xi) / math.tanh(s)
    e[0], e[-1] = -0.5 * size_mm, 0.5 * size_mm
    return e


def _build_mesh(shape, length_mm, width_mm, xe, ye, holes=()):
    """The mesh of a pad on the cells with edges ``xe`` (x) and ``ye`` (y), nodes at the cell centres.

    ``holes``: circles ``(x, y, r)`` inside the pad whose nodes are dropped; the lines from the nodes outside
    end at the holes' edges (Shortley-Weller), with the hole's own value there (the solver's feed pressure).
    """
    xe = np.asarray(xe, dtype=float)
    ye = np.asarray(ye, dtype=float)
    nx, ny = xe.size - 1, ye.size - 1
    dxs, dys = np.diff(xe), np.diff(ye)
    xs = 0.5 * (xe[:-1] + xe[1:])
    ys = 0.5 * (ye[:-1] + ye[1:])
    X, Y = np.meshgrid(xs, ys)  # (ny, nx)
    radius = 0.5 * length_mm
    tiny = 1e-3 * min(float(dxs.min()), float(dys.min()))
    if shape == "circle":
        # a node closer to the circle than 1e-3 of a cell is dropped: its neighbours see the edge instead
        in_pad = np.hypot(X, Y) < radius - tiny
    else:
        in_pad = np.ones_like(X, dtype=bool)
    hole_of = np.full(X.shape, -1, dtype=np.int64)
    for k, (hx, hy, hr) in enumerate(holes):
        hole_of[in_pad & (np.hypot(X - hx, Y - hy) < hr + tiny) & (hole_of < 0)] = k
    inside = in_pad & (hole_of < 0)
    index = np.full(X.shape, -1, dtype=np.int64)
    index[inside] = np.arange(int(inside.sum()))
    n = int(inside.sum())
    jj, ii = np.nonzero(inside)  # row (y) and column (x) of each node, in node order
    x = X[inside]
    y = Y[inside]

    def boundary_distance(axis, sign, px, py, k):
        """Distance from nodes to the pad edge (k = -1) or to hole k along +-x (axis 0) or +-y (axis 1)."""
        along, across = (px, py) if axis == 0 else (py, px)
        if k >= 0:
            hx, hy, hr = holes[k]
            c_along, c_across = (hx, hy) if axis == 0 else (hy, hx)
            half = np.sqrt(np.clip(hr**2 - (across - c_across) ** 2, 0.0, None))
            return np.abs((c_along - sign * half) - along)
        if shape != "circle":
            return 0.5 * (length_mm if axis == 0 else width_mm) - sign * along
        reach = np.sqrt(np.clip(radius**2 - across**2, 0.0, None))
        return reach - sign * along

    # links: (row node, col node or -1, distance, axis, sign, boundary tag)
    link_row, link_col, link_dist, link_axis, link_sign, link_tag = [], [], [], [], [], []
    for axis in (0, 1):
        for sign in (+1, -1):
            nj = jj + (sign if axis == 1 else 0)
            ni = ii + (sign if axis == 0 else 0)
            ok = (nj >= 0) & (nj < ny) & (ni >= 0) & (ni < nx)
            nb = np.full(n, -1, dtype=np.int64)
            nb[ok] = index[nj[ok], ni[ok]]
            tag = np.full(n, -1, dtype=np.int64)
            tag[ok] = hole_of[nj[ok], ni[ok]]
            dist = np.zeros(n)
            has = nb >= 0
            if axis == 0:
                dist[has] = np.abs(xs[ni[has]] - xs[ii[has]])
            else:
                dist[has] = np.abs(ys[nj[has]] - ys[jj[has]])
            bnd = ~has
            tag[has] = -1
            for k in np.unique(tag[bnd]):
                sel = bnd & (tag == k)
                dist[sel] = boundary_distance(axis, sign, x[sel], y[sel], int(k))
            link_row.append(np.arange(n))
            link_col.append(nb)
            link_dist.append(dist)
            link_axis.append(np.full(n, axis))
            link_sign.append(np.full(n, sign))
            link_tag.append(tag)
    row = np.concatenate(link_row)
    col = np.concatenate(link_col)
    dist = np.concatenate(link_dist)
    axis = np.concatenate(link_axis)
    sgn = np.concatenate(link_sign)
    ltag = np.concatenate(link_tag)
    if np.any(dist <= 0.0):  # pragma: no cover - excluded by the 1e-3 cell margin above
        raise GeometryError("a mesh node lies on the pad edge", fix="use another mesh size")

    # Shortley-Weller row weights 2 / (d_plus + d_minus) per axis
    d = dist.reshape(4, n)  # order: x+, x-, y+, y-
    wx = 2.0 / (d[0] + d[1])
    wy = 2.0 / (d[2] + d[3])
    w_link = np.concatenate([wx, wx, wy, wy])
    g = w_link / dist  # coefficient multiplying the conductance h³ of the link

    # faces: one per interior pair (shared by its two links), one per boundary link
    interior_fwd = (col >= 0) & (sgn > 0)
    interior_bwd = (col >= 0) & (sgn < 0)
    boundary = col < 0
    n_int = int(interior_fwd.sum())
    face_of_link = np.full(row.size, -1, dtype=np.int64)
    face_of_link[interior_fwd] = np.arange(n_int)
    # the backward link Q->P is the forward link P->Q seen from Q
    fwd_idx = np.flatnonzero(interior_fwd)
    keys = row[fwd_idx] * (n + 1) + col[fwd_idx] + axis[fwd_idx] * (n + 1) ** 2
    order = np.argsort(keys)
    keys_sorted = keys[order]
    bwd_idx = np.flatnonzero(interior_bwd)
    bkeys = col[bwd_idx] * (n + 1) + row[bwd_idx] + axis[bwd_idx] * (n + 1) ** 2
    pos = np.searchsorted(keys_sorted, bkeys)
    if not np.array_equal(keys_sorted[pos], bkeys):  # pragma: no cover - mesh symmetry
        raise GeometryError("internal mesh inconsistency")
    face_of_link[bwd_idx] = face_of_link[fwd_idx[order[pos]]]
    b_idx = np.flatnonzero(boundary)
    n_bnd = b_idx.size
    face_of_link[b_idx] = n_int + np.arange(n_bnd)
    n_faces = n_int + n_bnd
    b_tag = ltag[b_idx]

    # face midpoints and edge points
    step_vec = np.where(axis == 0, 1.0, 0.0), np.where(axis == 1, 1.0, 0.0)
    mid_x = x[row] + step_vec[0] * sgn * dist / 2
    mid_y = y[row] + step_vec[1] * sgn * dist / 2
    face_x = np.empty(n_faces)
    face_y = np.empty(n_faces)
    face_x[face_of_link[interior_fwd]] = mid_x[interior_fwd]
    face_y[face_of_link[interior_fwd]] = mid_y[interior_fwd]
    face_x[face_of_link[b_idx]] = mid_x[b_idx]
    face_y[face_of_link[b_idx]] = mid_y[b_idx]
    edge_x = x[row[b_idx]] + step_vec[0][b_idx] * sgn[b_idx] * dist[b_idx]
    edge_y = y[row[b_idx]] + step_vec[1][b_idx] * sgn[b_idx] * dist[b_idx]

    # interpolation of node values to probes (nodes, faces, edge points, hole centres), linear along mesh lines
    # boundary faces/edge points extrapolate from the node and its opposite neighbour when it exists
    opp = np.full(row.size, -1, dtype=np.int64)
    lk = np.arange(row.size).reshape(4, n)
    opp_link = np.concatenate([lk[1], lk[0], lk[3], lk[2]])  # x+ <-> x-, y+ <-> y-
    opp[:] = col[opp_link]
    opp_dist = dist[opp_link]
    ri, ci, vi = [np.arange(n)], [np.arange(n)], [np.ones(n)]
    fi = face_of_link[interior_fwd]
    ri += [n + fi, n + fi]
    ci += [row[interior_fwd], col[interior_fwd]]
    vi += [np.full(n_int, 0.5), np.full(n_int, 0.5)]
    for offset, frac in ((n + n_int, 0.5), (n + n_faces, 1.0)):
        probe_rows = offset + np.arange(n_bnd)
        p_node = row[b_idx]
        o_node = opp[b_idx]
        has = o_node >= 0
        alpha = np.zeros(n_bnd)
        alpha[has] = frac * dist[b_idx][has] / opp_dist[b_idx][has]
        ri += [probe_rows, probe_rows[has]]
        ci += [p_node, o_node[has]]
        vi += [1.0 + alpha, -alpha[has]]
    n_holes = len(holes)
    hole_probe = n + n_faces + n_bnd + np.arange(n_holes)
    for k, (hx, hy, _) in enumerate(holes):
        near = int(np.argmin((x - hx) ** 2 + (y - hy) ** 2)) if n else 0
        ri.append(np.array([hole_probe[k]]))
        ci.append(np.array([near]))
        vi.append(np.array([1.0]))
    n_probe = n + n_faces + n_bnd + n_holes
    interp = sp.csr_matrix(
        (np.concatenate(vi), (np.concatenate(ri), np.concatenate(ci))), shape=(n_probe, n)
    )
    probe_x = np.concatenate([x, face_x, edge_x, np.array([h[0] for h in holes])])
    probe_y = np.concatenate([y, face_y, edge_y, np.array([h[1] for h in holes])])

    # system matrix A(c) = sum over links of g*c on the diagonal and -g*c off it, plus the feed term
    e_row = np.concatenate([row, row[col >= 0]])
    e_col = np.concatenate([row, col[col >= 0]])
    e_face = np.concatenate([face_of_link, face_of_link[col >= 0]])
    e_coef = np.concatenate([g, -g[col >= 0]])
    keys = e_col * n + e_row  # CSC order: by column, then row
    ukeys, e_pos = np.unique(keys, return_inverse=True)
    nnz = ukeys.size
    indices = (ukeys % n).astype(np.int32)
    cols = ukeys // n
    indptr = np.zeros(n + 1, dtype=np.int32)
    np.add.at(indptr, cols + 1, 1)
    indptr = np.cumsum(indptr).astype(np.int32)
    assemble = sp.csr_matrix((e_coef, (e_pos, e_face)), shape=(nnz, n_faces))
    diag_pos = np.searchsorted(ukeys, np.arange(n) * n + np.arange(n))
    # Fill-reducing ordering computed once per mesh (it depends only on the pattern): the matrix is assembled
    # directly in the permuted order and factorised without re-ordering ("NATURAL"), which saves SuperLU's
    # ordering step on every film solution.
    probe_data = assemble @ np.ones(n_faces)
    probe_data[diag_pos] += 1.0
    A0 = sp.csc_matrix((probe_data, indices, indptr), shape=(n, n))
    perm_c = splu(A0, permc_spec="MMD_AT_PLUS_A", options=dict(SymmetricMode=True)).perm_c
    inv = np.argsort(perm_c)
    tag = sp.csc_matrix((np.arange(1, nnz + 1, dtype=float), indices, indptr), shape=(n, n))
    tagp = tag[inv][:, inv].tocsc()
    tagp.sort_indices()
    order = tagp.data.astype(np.int64) - 1
    assemble = assemble[order]
    indices, indptr = tagp.indices.astype(np.int32), tagp.indptr.astype(np.int32)
    diag_pos = np.flatnonzero(np.isin(order, diag_pos))
    # flux form for derivatives: (A(dc) Pn)_row = sum_link g * dc_face * (Pn_row - Pn_col)
    jump = sp.csr_matrix(
        (
            np.concatenate([np.ones(n_int), -np.ones(n_int), np.ones(n_bnd)]),
            (
                np.concatenate([face_of_link[interior_fwd], face_of_link[interior_fwd], face_of_link[b_idx]]),
                np.concatenate([row[interior_fwd], col[interior_fwd], row[b_idx]]),
            ),
        ),
        shape=(n_faces, n),
    )
    # row P gets g_P * dc * (Pn_P - Pn_Q): +g for links leaving P in the face's forward sense, -g otherwise
    lrow = np.concatenate([row[interior_fwd], row[interior_bwd], row[b_idx]])
    lface = np.concatenate([face_of_link[interior_fwd], face_of_link[interior_bwd], face_of_link[b_idx]])
    lval = np.concatenate([g[interior_fwd], -g[interior_bwd], g[b_idx]])
    scatter = sp.csr_matrix((lval, (lrow, lface)), shape=(n, n_faces))

    # quadrature weights: each node's cell inside the pad and outside the holes
    DX, DY = np.meshgrid(dxs, dys)
    x0, x1 = X - DX / 2, X + DX / 2
    y0, y1 = Y - DY / 2, Y + DY / 2

    def cell_in_pad(sel):
        a = (DX * DY)[sel]
        if shape == "circle":
            cx0, cx1, cy0, cy1 = x0[sel], x1[sel], y0[sel], y1[sel]
            corner = np.hypot(np.maximum(abs(cx0), abs(cx1)), np.maximum(abs(cy0), abs(cy1)))
            cut = corner > radius
            a = a.copy()
            a[cut] = _circle_cell_area(cx0[cut], cx1[cut], cy0[cut], cy1[cut], radius)
        return a

    def cell_in_hole(sel, k):
        hx, hy, hr = holes[k]
        return _circle_cell_area(x0[sel] - hx, x1[sel] - hx, y0[sel] - hy, y1[sel] - hy, hr)

    area = cell_in_pad(inside)
    hole_area = np.zeros(n_holes)
    hole_mx = np.zeros(n_holes)
    hole_my = np.zeros(n_holes)
    for k, (hx, hy, hr) in enumerate(holes):
        area -= cell_in_hole(inside, k)  # kept cells reaching into the hole: only their part outside counts
        dropped = hole_of == k
        # the hole itself, and the parts outside it of the dropped nodes' cells (held at the hole's pressure)
        outside_part = cell_in_pad(dropped) - cell_in_hole(dropped, k)
        hole_area[k] = math.pi * hr**2 + float(outside_part.sum())
        hole_mx[k] = math.pi * hr**2 * hx + float(outside_part @ X[dropped])
        hole_my[k] = math.pi * hr**2 * hy + float(outside_part @ Y[dropped])
    area = np.clip(area, 0.0, None)

    # quadrature at the cells cut by a circular pad's edge: the node is not the centroid of the part of its cell
    # inside the pad, and where the film pressure falls steeply to the edge the node's value misjudges that part
    # (a first-order error). The value at the centroid is taken instead, from the node and the one-sided
    # difference towards the centroid along each mesh line (to a neighbour, or to the edge where Pn = 0):
    # Pn_c = Q Pn. Elsewhere Q is the identity.
    cent_x, cent_y = x.copy(), y.copy()
    qr, qc, qv = [np.arange(n)], [np.arange(n)], [np.ones(n)]
    if shape == "circle":
        cx0, cx1, cy0, cy1 = x0[inside], x1[inside], y0[inside], y1[inside]
        corner = np.hypot(np.maximum(abs(cx0), abs(cx1)), np.maximum(abs(cy0), abs(cy1)))
        cut = np.flatnonzero(corner > radius)
        if cut.size:
            ccx, ccy = _circle_cell_centroid(cx0[cut], cx1[cut], cy0[cut], cy1[cut], radius)
            cent_x[cut], cent_y[cut] = ccx, ccy
            dd = dist.reshape(4, n)
            cc = col.reshape(4, n)
            tg = ltag.reshape(4, n)
            for off, (plus, minus) in ((ccx - x[cut], (0, 1)), (ccy - y[cut], (2, 3))):
                side = np.where(off > 0, plus, minus)
                nb = cc[side, cut]
                dl = dd[side, cut]
                ok = (nb >= 0) | (tg[side, cut] < 0)  # a neighbour, or the pad's edge (Pn = 0); not a hole
                coef = np.where(ok, np.abs(off) / dl, 0.0)
                qr += [cut, cut[nb >= 0]]
                qc += [cut, nb[nb >= 0]]
                qv += [-coef, coef[nb >= 0]]
    quad = sp.csr_matrix((np.concatenate(qv), (np.concatenate(qr), np.concatenate(qc))), shape=(n, n))

    # edge outflow: boundary links carry flux through a cell face of length dy (x links) or dx (y links);
    # the outward gradient at the edge point comes from the quadratic through the edge (Pn = 0), the node
    # (value a, distance t from the edge) and the opposite node (value b, a further d away):
    # dPn/ds = -a (t + d) / (t d) + b t / (d (t + d)); linear (-a / t) without an opposite node
    cell_dx = dxs[ii]
    cell_dy = dys[jj]
    face_len = np.where(axis[b_idx] == 0, cell_dy[row[b_idx]], cell_dx[row[b_idx]])
    t_b = dist[b_idx]
    o_b = opp[b_idx]
    d_b = np.where(o_b >= 0, opp_dist[b_idx], np.inf)
    edge_a = np.where(o_b >= 0, (t_b + d_b) / (t_b * d_b), 1.0 / t_b)
    edge_b = np.where(o_b >= 0, -t_b / (d_b * (t_b + d_b)), 0.0)
    on_edge = b_tag < 0
    edge_grad = sp.csr_matrix(
        (np.concatenate([(edge_a * face_len)[on_edge], (edge_b * face_len)[on_edge & (o_b >= 0)]]),
         (np.concatenate([np.flatnonzero(on_edge), np.flatnonzero(on_edge & (o_b >= 0))]),
          np.concatenate([row[b_idx][on_edge], o_b[on_edge & (o_b >= 0)]]))),
        shape=(n_bnd, n),
    )
    ops = dict(
        n_faces=n_faces,
        n_int=n_int,
        n_probe=n_probe,
        indices=indices,
        indptr=indptr,
        perm=inv,
        assemble=assemble,
        diag_pos=diag_pos,
        jump=jump,
        scatter=scatter,
        interp=interp,
        edge_grad=edge_grad,
        edge_probe=n + n_faces + np.arange(n_bnd),
        b_face=n_int + np.arange(n_bnd),
        b_row=row[b_idx],
        b_g=g[b_idx],
        b_tag=b_tag,
        quad=quad,
        centroid_x=cent_x,
        centroid_y=cent_y,
        face_p=row[fwd_idx][np.argsort(face_of_link[fwd_idx])],
        face_q=col[fwd_idx][np.argsort(face_of_link[fwd_idx])],
        face_d=dist[fwd_idx][np.argsort(face_of_link[fwd_idx])],
        face_len=np.where(axis[fwd_idx] == 0, cell_dy[row[fwd_idx]], cell_dx[row[fwd_idx]])[
            np.argsort(face_of_link[fwd_idx])],
        hole_area=hole_area,
        hole_mx=hole_mx,
        hole_my=hole_my,
        hole_probe=hole_probe,
        grid_index=index,
        hole_of=hole_of,
        grid_shape=(ny, nx),
    )
    return PadMesh(
        shape=shape,
        length_mm=float(length_mm),
        width_mm=float(width_mm),
        x_mm=x,
        y_mm=y,
        area_mm2=area,
        probe_x_mm=probe_x,
        probe_y_mm=probe_y,
        spacing_mm=(float(dxs.max()), float(dys.max())),
        _ops=ops,
        x_edges_mm=xe,
        y_edges_mm=ye,
        holes=tuple(holes),
    )


def _mesh_count(value, name):
    try:
        v = int(value)
    except (TypeError, ValueError, OverflowError):
        raise InputValueError(f"{name} must be a whole number, got {value!r}", fix="give e.g. 64") from None
    if v < MIN_MESH_CELLS or v != value:
        raise InputValueError(f"{name} must be a whole number of at least 4, got {value!r}", fix="give e.g. 64")
    if v > MAX_MESH_CELLS:
        raise InputValueError(f"{name} {v} is above {MAX_MESH_CELLS}: {MESH_LIMIT_REASON}", fix="give e.g. 64")
    return v


def circular_pad_mesh(diameter_mm: float, n: int = 64, *, edge_cell_mm: float | None = None) -> PadMesh:
    """Mesh over a circular pad face.

    Parameters
    ----------
    diameter_mm : float
        Pad diameter in mm.
    n : int
        Mesh cells across the diameter (the nodes inside the disc are kept, about 0.785 n²).
    edge_cell_mm : float, optional
        Grade the cells towards the edges of the bounding square so that the outermost are this wide (mm;
        :func:`graded_edges`); even cells without it.

    Returns
    -------
    PadMesh
    """
    d = _positive(diameter_mm, "pad diameter (mm)", "give the pad diameter in mm")
    n = _mesh_count(n, "mesh size")
    e = graded_edges(d, n, edge_cell_mm)
    return _build_mesh("circle", d, d, e, e)


def rectangular_pad_mesh(length_mm: float, width_mm: float, nx: int = 64, ny: int = 64, *,
                         edge_cell_mm: float | None = None) -> PadMesh:
    """Mesh over a rectangular pad face, ``length_mm`` along x (the travel) by ``width_mm`` across.

    Parameters
    ----------
    length_mm, width_mm : float
        Pad size in mm.
    nx, ny : int
        Mesh cells along x and y.
    edge_cell_mm : float, optional
        Grade the cells towards the pad's edges so that the outermost are this wide (mm; :func:`graded_edges`);
        even cells without it.

    Returns
    -------
    PadMesh
    """
    L = _positive(length_mm, "pad length (mm)", "give the pad length in mm")
    W = _positive(width_mm, "pad width (mm)", "give the pad width in mm")
    nx, ny = _mesh_count(nx, "mesh size nx"), _mesh_count(ny, "mesh size ny")
    return _build_mesh("rect", L, W, graded_edges(L, nx, edge_cell_mm), graded_edges(W, ny, edge_cell_mm))


# --------------------------------------------------------------------------- surface under the pad
@dataclass(frozen=True, eq=False)
class PadDeviation:
    """Surface height under a pad at the mesh's probe points.

    Attributes
    ----------
    height_um : ndarray, shape (m,)
        Surface height (positive towards the pad) at ``mesh.probe_x_mm, mesh.probe_y_mm`` in µm, relative to
        any fixed zero; the film is ``pad face height - surface height``.
    """

    height_um: np.ndarray


def pad_deviation(mesh: PadMesh, deviation=None) -> PadDeviation:
    """Surface deviation under the pad from a callable or from values at the mesh nodes.

    Parameters
    ----------
    mesh : PadMesh
    deviation : None, callable or array_like
        ``None``: a flat guide (zero everywhere). A callable ``f(x_mm, y_mm) -> height_um`` in pad-local
        coordinates (mm, origin at the pad centre), evaluated at every probe point. An array of shape
        ``(mesh.n,)``: heights in µm at the nodes, interpolated linearly along mesh lines to link midpoints and
        extrapolated linearly to the edge points. An array of shape ``(m,)`` with ``m`` the number of probe
        points is taken as is.

    Returns
    -------
    PadDeviation

    Raises
    ------
    InputValueError
        Wrong length or non-finite heights.
    """
    m = mesh.probe_x_mm.size
    if deviation is None:
        z = np.zeros(m)
    elif callable(deviation):
        z = np.asarray(deviation(mesh.probe_x_mm, mesh.probe_y_mm), dtype=float)
        z = np.broadcast_to(z, (m,)).copy() if z.ndim == 0 else z.ravel()
    else:
        z = np.asarray(deviation, dtype=float).ravel()
        if z.size == mesh.n:
            z = mesh._ops["interp"] @ z
    if z.size != m:
        raise InputValueError(
            f"surface deviation has {z.size} values; the pad mesh has {mesh.n} nodes and {m} probe points",
            fix="give one height per mesh node (PadMesh.x_mm) or a callable f(x_mm, y_mm)",
        )
    if not np.isfinite(z).all():
        raise InputValueError(
            "surface deviation under the pad is not finite everywhere",
            fix="check that the pad lies inside the measured area",
        )
    return PadDeviation(z)


def surface_under_pad(mesh: PadMesh, surface, x_mm: float, y_mm: float, *, method: str = "linear") -> PadDeviation:
    """Sample a measured surface under a pad centred at ``(x_mm, y_mm)``.

    Parameters
    ----------
    mesh : PadMesh
        The pad's mesh (pad-local coordinates; the pad's x is the surface's x).
    surface : HeightMap
        Measured surface (positions mm, heights µm).
    x_mm, y_mm : float
        Pad centre on the surface, mm.
    method : {"linear", "cubic"}
        Interpolation between surface stations (see :meth:`HeightMap.sample`).

    Returns
    -------
    PadDeviation

    Raises
    ------
    InputValueError
        If part of the footprint lies outside the measured area (flatcheck never extrapolates).
    """
    z = surface.sample(x_mm + mesh.probe_x_mm, y_mm + mesh.probe_y_mm, method=method)
    if not np.isfinite(z).all():
        raise InputValueError(
            f"the pad centred at x = {x_mm:g} mm, y = {y_mm:g} mm reaches outside the measured surface",
            fix="shorten the travel or measure closer to the edges",
        )
    return PadDeviation(np.asarray(z, dtype=float))

