"""The film solver: one sparse factorisation per film shape, porous and orifice feeds (see ``_film``)."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import scipy.sparse as sp
from scipy.sparse.linalg import splu

from ..errors import GeometryError, InputValueError
from ._feeds import FILM_ASSUMPTIONS, _MM2_TO_M2, OrificeFeed, PorousFeed, _orifice_dflow_dp
from ._mesh import PadMesh

__all__ = [
    "FilmState",
    "FilmCurve",
    "FilmEquilibrium",
    "FilmTravel",
]


_MAX_ITER = 40


# --------------------------------------------------------------------------- results
@dataclass(frozen=True, eq=False)
class FilmState:
    """The air film of a pad held at a given fly height and tilt.

    Attributes
    ----------
    gap_um : ndarray, shape (n,)
        Film thickness at the mesh nodes, µm.
    pressure_pa : ndarray, shape (n,)
        Absolute film pressure at the mesh nodes, Pa.
    fly_height_um : float
        Mean film thickness over the footprint (area-weighted), µm.
    min_film_um : float
        Least film thickness over the nodes, link midpoints and edge points, µm.
    load_n : float
        Load capacity, the integral of ``p - pa`` over the face, N.
    moment_x_nmm, moment_y_nmm : float
        First moments ``∫(p - pa) x dA`` and ``∫(p - pa) y dA`` about the pad centre, N·mm
        (the centre of pressure is at ``moment / load``).
    stiffness_n_per_um : float
        ``-dW/dh`` for a uniform change of the film at fixed tilt, N/µm.
    mass_flow_kg_s : float
        Air mass flow through the pad (Darcy inflow integrated over the face), kg/s.
    edge_outflow_kg_s : float
        Mass flow leaving the pad's edge computed from the film gradients there, kg/s (equal to the
        inflow in the continuous model; the difference measures the discretisation error).
    flow_l_per_min : float
        Volumetric flow of free air at the ambient pressure and film temperature, l/min.
    assumptions : tuple of str
    feed_pressure_ratios : ndarray, shape (N,)
        Orifice-fed pads: absolute feed (pocket) pressure over absolute supply pressure at each of the N
        orifices (dimensionless); empty for a porous pad.
    """

    gap_um: np.ndarray
    pressure_pa: np.ndarray
    fly_height_um: float
    min_film_um: float
    load_n: float
    moment_x_nmm: float
    moment_y_nmm: float
    stiffness_n_per_um: float
    mass_flow_kg_s: float
    edge_outflow_kg_s: float
    flow_l_per_min: float
    assumptions: tuple = FILM_ASSUMPTIONS
    feed_pressure_ratios: np.ndarray = field(default_factory=lambda: np.array([]))

    @property
    def feed_pressure_ratio(self) -> float:
        """Mean feed pressure ratio ``pr / ps`` over the orifices (NaN for a porous pad)."""
        r = np.asarray(self.feed_pressure_ratios, dtype=float)
        return float(r.mean()) if r.size else float("nan")


@dataclass(frozen=True, eq=False)
class FilmCurve:
    """Performance of a pad over a perfectly flat guide as a function of the (uniform) gap.

    Attributes
    ----------
    gap_um : ndarray, shape (k,)
        Uniform film thickness, µm, increasing.
    load_n : ndarray, shape (k,)
        Load capacity, N.
    stiffness_n_per_um : ndarray, shape (k,)
        ``-dW/dh``, N/µm.
    mass_flow_kg_s : ndarray, shape (k,)
        Mass flow, kg/s.
    flow_l_per_min : ndarray, shape (k,)
        Free-air flow at ambient, l/min.
    peak_stiffness_gap_um : float
        Gap of greatest stiffness, µm (refined between the samples).
    peak_stiffness_n_per_um : float
        The greatest stiffness, N/µm.
    peak_inside : bool
        False when the greatest stiffness is at an end of the sampled range (then widen the range).
    assumptions : tuple of str
    feed_pressure_ratio : ndarray, shape (k,)
        Orifice-fed pads: mean ``pr / ps`` over the orifices at each gap; NaN for a porous pad.
    """

    gap_um: np.ndarray
    load_n: np.ndarray
    stiffness_n_per_um: np.ndarray
    mass_flow_kg_s: np.ndarray
    flow_l_per_min: np.ndarray
    peak_stiffness_gap_um: float
    peak_stiffness_n_per_um: float
    peak_inside: bool
    assumptions: tuple = FILM_ASSUMPTIONS
    feed_pressure_ratio: np.ndarray = None


@dataclass(frozen=True, eq=False)
class FilmEquilibrium:
    """A pad in equilibrium over the surface under it.

    Attributes
    ----------
    fly_height_um : float
        Mean film thickness over the footprint, µm.
    min_film_um : float
        Least film thickness, µm.
    pad_height_um : float
        Height of the pad face's centre above the zero of the surface heights, µm.
    tilt_x_urad, tilt_y_urad : float
        Slopes of the pad face along x and y, µrad (in the surface's frame; positive when the face rises
        towards +x / +y).
    load_n : float
        Load carried (equals the applied load at convergence), N.
    stiffness_n_per_um : float
        ``-dW/dh`` of the pad; for a pad on a ball pivot the tilts follow (zero moment kept), N/µm.
    mass_flow_kg_s, flow_l_per_min : float
        Air consumption.
    iterations : int
        Newton iterations (film solutions) used.
    state : FilmState
        The film at equilibrium (pressure field, moments...).
    assumptions : tuple of str
    """

    fly_height_um: float
    min_film_um: float
    pad_height_um: float
    tilt_x_urad: float
    tilt_y_urad: float
    load_n: float
    stiffness_n_per_um: float
    mass_flow_kg_s: float
    flow_l_per_min: float
    iterations: int
    state: FilmState
    assumptions: tuple = FILM_ASSUMPTIONS


@dataclass(frozen=True, eq=False)
class FilmTravel:
    """Equilibrium of a pad at each carriage position (arrays of shape (k,), one entry per position).

    ``converged[i]`` is False where no film equilibrium exists (the pad would touch the surface); the other
    fields are NaN there and ``failure`` names the reason. ``feed_pressure_ratio`` is the mean ``pr / ps`` over
    the orifices of an orifice-fed pad (NaN for a porous pad).
    """

    fly_height_um: np.ndarray
    min_film_um: np.ndarray
    pad_height_um: np.ndarray
    tilt_x_urad: np.ndarray
    tilt_y_urad: np.ndarray
    load_n: np.ndarray
    stiffness_n_per_um: np.ndarray
    mass_flow_kg_s: np.ndarray
    flow_l_per_min: np.ndarray
    iterations: np.ndarray
    converged: np.ndarray
    failure: tuple
    assumptions: tuple = FILM_ASSUMPTIONS
    feed_pressure_ratio: np.ndarray = None


# --------------------------------------------------------------------------- solver core
class _Contact(Exception):
    """Internal: the film closes (no equilibrium with a positive film)."""


class _Solver:
    """Film solutions on one mesh with one feed; methods are thread-safe (no shared mutable state)."""

    def __init__(self, mesh: PadMesh, feed):
        if not isinstance(feed, (PorousFeed, OrificeFeed)):
            raise InputValueError(
                f"unknown feed {type(feed).__name__}", fix="give a PorousFeed or an OrificeFeed"
            )
        self.mesh = mesh  # the caller's mesh: films come in, pressures go out at its probes and nodes
        self.m = mesh  # the computational mesh (the caller's, or it with the feed pockets cut out)
        self.to_int = None  # probes of the caller's mesh -> probes of the computational mesh (None: the same)
        self.feed = feed
        pa, ps = feed.ambient_pa, feed.supply_pa
        self.pa = pa
        self.dP = ps * ps - pa * pa
        mu, R, T = feed.viscosity_pa_s, feed.gas_constant_j_per_kg_k, feed.temperature_k
        self.rt = R * T
        # film flux h³ grad(p²) / (24 mu R T), h in µm, grad in 1/mm, length in mm: 1e-18 * 1e3 * 1e-3
        self.flux_coef = 1e-18 / (24 * mu * R * T)
        self.outflow_coef = self.dP * self.flux_coef
        self.orifice = isinstance(feed, OrificeFeed)
        self.holes = False
        if self.orifice:
            self._setup_orifices()
        else:
            self.beta = feed.feed_coefficient
            # Darcy inflow k (ps² - p²) / (2 mu R T H) per m²; Pn form: k dP (1 - Pn) / (2 mu R T H)
            self.inflow_coef = feed.permeability_m2 * self.dP / (2 * mu * R * T * feed.layer_mm * 1e-3)
        m = self.m
        ops = m._ops
        self.ops = ops
        self.w = m.area_mm2 * _MM2_TO_M2
        self.x = m.x_mm
        self.y = m.y_mm
        self.cx = ops["centroid_x"]  # where each node's quadrature weight sits (its cut cell's centroid)
        self.cy = ops["centroid_y"]
        n, nf = m.n, ops["n_faces"]
        self.nf = nf
        self.face_sl = slice(n, n + nf)
        self.fx, self.fy = m.probe_x_mm[self.face_sl], m.probe_y_mm[self.face_sl]
        self.px, self.py = mesh.probe_x_mm, mesh.probe_y_mm

    # ---- orifice feeds
    def _setup_orifices(self):
        """Feeds on the mesh: a Peaceman well at the nearest node for a feed narrower than the well-block
        radius; otherwise a hole of the feed's radius cut out of the mesh round the nearest node, its edge
        placed at its true radius (Shortley-Weller) and held at the feed pressure."""
        feed, mesh = self.feed, self.mesh
        r0 = feed.feed_radius_mm
        half = 0.5 * mesh.length_mm, 0.5 * mesh.width_mm
        hub, r_eqs, centres = [], [], []
        for k, (xo, yo) in enumerate(feed.positions_mm):
            dx, dy = mesh.local_spacing_mm(xo, yo) if mesh.x_edges_mm is not None else mesh.spacing_mm
            if mesh.shape == "circle":
                room = half[0] - math.hypot(xo, yo)
            else:
                room = min(half[0] - abs(xo), half[1] - abs(yo))
            if room <= r0 + 1.5 * max(dx, dy):
                raise GeometryError(
                    f"orifice {k + 1} at ({xo:g}, {yo:g}) mm is too close to the pad's edge for its feed radius "
                    f"{r0:g} mm on this mesh",
                    fix="move the orifice inwards, use a smaller pocket or a finer mesh",
                )
            j = int(np.argmin((mesh.x_mm - xo) ** 2 + (mesh.y_mm - yo) ** 2))
            hub.append(j)
            centres.append((float(mesh.x_mm[j]), float(mesh.y_mm[j])))
            # Peaceman's equivalent well-block radius for the five-point scheme on square cells, e^-gamma/(2 sqrt 2)
            # times the spacing = 0.1985 dx; 0.14 sqrt(dx² + dy²) for rectangular cells (Peaceman 1978/1983)
            r_eqs.append(0.14 * math.hypot(dx, dy) if abs(dx - dy) > 1e-9 * dx else 0.19850 * dx)
        self.n_orifice = len(feed.positions_mm)
        self.X_max = self.dP
        self.well_radius_mm = min(r_eqs)
        if r0 < min(r_eqs):
            nodes = np.array(hub, dtype=np.int64)
            if np.unique(nodes).size != nodes.size:
                raise GeometryError("two orifices' feed regions overlap on this mesh",
                                    fix="space the orifices further apart or use a finer mesh")
            # radial flow from the feed radius r0 to the well-block radius: Q = 2 pi h³ dP / ln(r_eq / r0), per unit
            # cell area in the node's equation
            self.well_geom = np.array([2.0 * math.pi / (math.log(r_eqs[k] / r0) * mesh.area_mm2[j])
                                       for k, j in enumerate(hub)])
            self.feed_nodes = nodes
            self.feed_region = np.arange(self.n_orifice)
            self.hub = nodes  # probe of each orifice (film at the orifice): its node
            self.feed_area = mesh.area_mm2[nodes]
            inv = np.argsort(mesh._ops["perm"])
            self.feed_diag = mesh._ops["diag_pos"][inv[nodes]]  # data index of each feed node's diagonal
            return
        for a in range(len(centres)):
            for b in range(a):
                if math.dist(centres[a], centres[b]) <= 2.0 * r0:
                    raise GeometryError("two orifices' feed regions overlap on this mesh",
                                        fix="space the orifices further apart or use a finer mesh")
        self.holes = True
        m = mesh.with_holes(tuple((cx, cy, r0) for cx, cy in centres))
        self.m = m
        if m._ops.get("_probe_map") is None:  # built once per holed mesh (the holed mesh is cached on its parent)
            m._ops["_probe_map"] = _probe_map(mesh, m)
        self.to_int = m._ops["_probe_map"]
        ops = m._ops
        hl = np.flatnonzero(ops["b_tag"] >= 0)
        self.hole_link = hl
        self.hole_row = ops["b_row"][hl]
        self.hole_face = ops["b_face"][hl]
        self.hole_g = ops["b_g"][hl]
        self.hole_tag = ops["b_tag"][hl]
        # the flux out of each hole is taken through a closed contour of interior faces round it, a few cells out,
        # where the scheme is conservative: the nodes within r0 + 2.5 cells (and every node next to the hole) are
        # inside; the faces from an inside node to an outside one form the contour
        fp, fq, fd, flen = ops["face_p"], ops["face_q"], ops["face_d"], ops["face_len"]
        cf, cs, ck = [], [], []
        for k, (cx, cy, hr) in enumerate(m.holes):
            dx, dy = mesh.local_spacing_mm(cx, cy)
            room = (half[0] - math.hypot(cx, cy)) if mesh.shape == "circle" else min(half[0] - abs(cx),
                                                                                      half[1] - abs(cy))
            rho = min(hr + 2.5 * max(dx, dy), room - 1.5 * max(dx, dy))
            for j, (ox, oy, _) in enumerate(m.holes):
                if j != k:
                    rho = min(rho, 0.5 * math.hypot(ox - cx, oy - cy))
            inside = np.hypot(m.x_mm - cx, m.y_mm - cy) < rho
            inside[self.hole_row[self.hole_tag == k]] = True
            cut = inside[fp] != inside[fq]
            faces = np.flatnonzero(cut)
            cf.append(faces)
            cs.append(np.where(inside[fp[faces]], 1.0, -1.0))
            ck.append(np.full(faces.size, k))
        self.cont_face = np.concatenate(cf)
        self.cont_sign = np.concatenate(cs)
        self.cont_p = fp[self.cont_face]
        self.cont_q = fq[self.cont_face]
        self.cont_w = flen[self.cont_face] / fd[self.cont_face]
        self.cont_sum = np.zeros((self.n_orifice, self.cont_face.size))
        self.cont_sum[np.concatenate(ck), np.arange(self.cont_face.size)] = 1.0
        self.hub = ops["hole_probe"]  # probes at the orifices (on the computational mesh)
        self.hole_area = ops["hole_area"] * _MM2_TO_M2
        self.hole_mx = ops["hole_mx"] * _MM2_TO_M2
        self.hole_my = ops["hole_my"] * _MM2_TO_M2
        self.land_probes = slice(0, int(ops["hole_probe"][0]))
        # hole k's links, as a (N, links) sum
        self.hole_sum = np.zeros((self.n_orifice, hl.size))
        self.hole_sum[self.hole_tag, np.arange(hl.size)] = 1.0

    def _feed_flows(self, X, gaps_hub):
        """Orifice mass flows (kg/s) and d(mdot)/dX (X = pr² - pa²) at feed pressures given by X."""
        f = self.feed
        pr = np.sqrt(self.pa * self.pa + np.clip(X, 0.0, self.X_max))
        area = f.restriction_area_m2(gaps_hub)
        m = np.array([f.mass_flow(pr[k], gaps_hub[k]) for k in range(X.size)])
        dm = np.array([
            _orifice_dflow_dp(pr[k], f.supply_pa, float(area[k]), f.cd, f.gamma, self.rt) / (2.0 * pr[k])
            for k in range(X.size)
        ])
        return m, dm, pr, area

    def _balance(self, G, gaps_hub):
        """Feed states X_k = pr_k² - pa² at which each orifice's flow equals the film's outflow ``G X``."""
        from scipy.optimize import brentq

        N = self.n_orifice
        if N == 1:
            g = float(G[0, 0])

            def f(x):
                return self._feed_flows(np.array([x]), gaps_hub)[0][0] - g * x

            X = np.array([brentq(f, 0.0, self.X_max, xtol=1e-14 * self.X_max, rtol=1e-14, maxiter=200)])
            return X
        # several orifices: Newton on m(X) - G X = 0 (monotone: m falls, G X rises with each X_k)
        X = np.full(N, 0.5 * self.X_max)
        scale = max(float(np.abs(G).max()) * self.X_max, 1e-300)
        for _ in range(100):
            m, dm, _, _ = self._feed_flows(X, gaps_hub)
            F = m - G @ X
            if np.max(np.abs(F)) < 1e-13 * scale:
                break
            step = np.linalg.solve(np.diag(dm) - G, -F)
            alpha = 1.0
            while True:
                Xn = np.clip(X + alpha * step, 0.0, self.X_max)
                Fn = self._feed_flows(Xn, gaps_hub)[0] - G @ Xn
                if np.max(np.abs(Fn)) < np.max(np.abs(F)) or alpha < 1e-4:
                    break
                alpha *= 0.5
            X = Xn
        return X

    def _solve_orifice(self, probe_gap_um, deriv_xy: bool):
        ops = self.ops
        n = self.mesh.n
        perm = ops["perm"]
        hf = probe_gap_um[self.face_sl]
        c = hf * hf * hf
        data = ops["assemble"] @ c
        h_nodes = probe_gap_um[self.feed_nodes]
        w = self.well_geom * h_nodes**3
        data[self.feed_diag] += w
        Ap = sp.csc_matrix((data, ops["indices"], ops["indptr"]), shape=(n, n))
        lu = splu(Ap, permc_spec="NATURAL", options=dict(SymmetricMode=True, DiagPivotThresh=0.0))
        N = self.n_orifice
        B = np.zeros((n, N))
        B[self.feed_nodes, self.feed_region] = w
        U = np.empty((n, N))
        U[perm] = lu.solve(B[perm])  # field of unit X at each orifice, others at 0
        aw = self.feed_area * w
        # film outflow from feed k per unit X_j: G_kj = C (delta_kj sum_k a w - sum_k a w U_j)
        G = self.flux_coef * (np.diag(aw) - aw[:, None] * U[self.feed_nodes])
        gaps_hub = probe_gap_um[self.hub]
        X = self._balance(G, gaps_hub)
        phi = U @ X
        # derivatives at fixed X: (K + W) dPhi = -(dK) Phi - dW (Phi - X)
        dc = 3.0 * hf * hf
        fj = (ops["jump"] @ phi) * dc
        if deriv_xy:
            D = np.column_stack([fj, fj * (self.fx * 1e-3), fj * (self.fy * 1e-3)])
            dh_nodes = np.column_stack([np.ones(n), self.x * 1e-3, self.y * 1e-3])
        else:
            D = fj[:, None]
            dh_nodes = np.ones((n, 1))
        rhs = -(ops["scatter"] @ D)
        Xn = X[self.feed_region]
        dw = (3.0 * w / h_nodes)[:, None] * dh_nodes[self.feed_nodes]
        np.add.at(rhs, self.feed_nodes, -dw * (phi[self.feed_nodes] - Xn)[:, None])
        dphi = np.empty_like(rhs)
        dphi[perm] = lu.solve(rhs[perm])
        # outflow from each feed at fixed X, and the orifice flows, as functions of u
        d_out = self.flux_coef * (self.feed_area[:, None] * (dw * (Xn - phi[self.feed_nodes])[:, None]
                                                             - w[:, None] * dphi[self.feed_nodes]))
        m, dm_dX, pr, area = self._feed_flows(X, gaps_hub)
        f = self.feed
        bore = math.pi * (f.orifice_mm * 1e-3) ** 2 / 4.0
        curtain = area < bore
        dA_dh = np.where(curtain, math.pi * f.orifice_mm * 1e-3 * 1e-6, 0.0)  # m² per µm
        dm_dA = np.where(area > 0, m / np.where(area > 0, area, 1.0), 0.0)
        dm_du = (dm_dA * dA_dh)[:, None] * dh_nodes[self.hub]
        JX = np.diag(dm_dX) - G
        dX = -np.linalg.solve(JX, dm_du - d_out)
        dphi = dphi + U @ dX
        phi_c = np.clip(phi, 0.0, self.X_max)
        p = np.sqrt(self.pa * self.pa + phi_c)
        dp = dphi / (2.0 * p)[:, None]
        q = self.w * (p - self.pa)
        wd = self.w[:, None] * dp
        J = np.vstack([wd.sum(axis=0), self.x @ wd, self.y @ wd])
        return dict(pn=phi / self.dP, p=p, load=float(q.sum()), mx=float(q @ self.x), my=float(q @ self.y), J=J,
                    hmin=float(probe_gap_um.min()), mass=float(m.sum()), ratio=pr / f.supply_pa)

    def _solve_holes(self, hg, deriv_xy: bool):
        """Orifices behind holes cut out of the mesh: the land between the holes' edges (at the feed pressures)
        and the pad's edge (ambient); ``hg`` is the film on the computational mesh's probes."""
        ops = self.ops
        n = self.m.n
        perm = ops["perm"]
        hf = hg[self.face_sl]
        c = hf * hf * hf
        data = ops["assemble"] @ c
        Ap = sp.csc_matrix((data, ops["indices"], ops["indptr"]), shape=(n, n))
        lu = splu(Ap, permc_spec="NATURAL", options=dict(SymmetricMode=True, DiagPivotThresh=0.0))
        N = self.n_orifice
        ch = c[self.hole_face]
        gl = self.hole_g * ch  # conductance of each link into a hole
        B = np.zeros((n, N))
        np.add.at(B, (self.hole_row, self.hole_tag), gl)
        U = np.empty((n, N))
        U[perm] = lu.solve(B[perm])  # field of a unit X at each hole, the others at 0
        # film outflow from hole k per unit X_j: the flux through the contour of faces round the hole
        cc = c[self.cont_face]
        wc = self.cont_sign * self.cont_w * cc
        G = self.flux_coef * (self.cont_sum @ (wc[:, None] * (U[self.cont_p] - U[self.cont_q])))
        gaps_hub = hg[self.hub]
        X = self._balance(G, gaps_hub)
        phi = U @ X
        # derivatives at fixed X: A dPhi = -(dA) Phi + (dB) X, the hole links' jump being Phi_P - X_k
        dc = 3.0 * hf * hf
        jv = ops["jump"] @ phi
        jv[self.hole_face] -= X[self.hole_tag]
        fj = jv * dc
        if deriv_xy:
            D = np.column_stack([fj, fj * (self.fx * 1e-3), fj * (self.fy * 1e-3)])
            dh_face = np.column_stack([np.ones(self.nf), self.fx * 1e-3, self.fy * 1e-3])
            dh_hub = np.column_stack([np.ones(N), self.m.probe_x_mm[self.hub] * 1e-3,
                                      self.m.probe_y_mm[self.hub] * 1e-3])
        else:
            D = fj[:, None]
            dh_face = np.ones((self.nf, 1))
            dh_hub = np.ones((N, 1))
        rhs = -(ops["scatter"] @ D)
        dphi = np.empty_like(rhs)
        dphi[perm] = lu.solve(rhs[perm])
        # outflow from each hole at fixed X as a function of u: d(c)/du on the contour and d(Phi)/du
        jc = (phi[self.cont_p] - phi[self.cont_q])
        dcc = (self.cont_sign * self.cont_w * dc[self.cont_face] * jc)[:, None] * dh_face[self.cont_face]
        d_out = self.flux_coef * (self.cont_sum @ (dcc + wc[:, None] * (dphi[self.cont_p] - dphi[self.cont_q])))
        m, dm_dX, pr, area = self._feed_flows(X, gaps_hub)
        f = self.feed
        bore = math.pi * (f.orifice_mm * 1e-3) ** 2 / 4.0
        curtain = area < bore
        dA_dh = np.where(curtain, math.pi * f.orifice_mm * 1e-3 * 1e-6, 0.0)  # m² per µm
        dm_dA = np.where(area > 0, m / np.where(area > 0, area, 1.0), 0.0)
        dm_du = (dm_dA * dA_dh)[:, None] * dh_hub
        JX = np.diag(dm_dX) - G
        dX = -np.linalg.solve(JX, dm_du - d_out)
        dphi = dphi + U @ dX
        phi_c = np.clip(phi, 0.0, self.X_max)
        p = np.sqrt(self.pa * self.pa + phi_c)
        dp = dphi / (2.0 * p)[:, None]
        dpr = dX / (2.0 * pr)[:, None]
        q = self.w * (p - self.pa)
        qh = pr - self.pa
        wd = self.w[:, None] * dp
        J = np.vstack([wd.sum(axis=0) + self.hole_area @ dpr, self.x @ wd + self.hole_mx @ dpr,
                       self.y @ wd + self.hole_my @ dpr])
        load = float(q.sum() + self.hole_area @ qh)
        mx = float(q @ self.x + self.hole_mx @ qh)
        my = float(q @ self.y + self.hole_my @ qh)
        # pressures at the caller's nodes: the land's, and the feed pressure at the nodes inside a hole
        hole_of = ops["hole_of"]
        p_user = np.empty(self.mesh.n)
        uidx = self.mesh._ops["grid_index"]
        kept = ops["grid_index"] >= 0
        p_user[uidx[kept]] = p[ops["grid_index"][kept]]
        inh = (hole_of >= 0) & (uidx >= 0)
        p_user[uidx[inh]] = pr[hole_of[inh]]
        return dict(pn=phi / self.dP, p=p, p_user=p_user, load=load, mx=mx, my=my, J=J,
                    hmin=float(hg[self.land_probes].min()), mass=float(m.sum()), ratio=pr / f.supply_pa, hg=hg)

    # ---- one film solution
    def solve(self, probe_gap_um, deriv_xy: bool):
        """Solve for a film given at the probe points; derivatives wrt h0 (and tilts if deriv_xy)."""
        if self.orifice:
            if not float(probe_gap_um.min()) > 0.0:
                raise _Contact()
            if self.holes:
                return self._solve_holes(self.to_int @ probe_gap_um, deriv_xy)
            return self._solve_orifice(probe_gap_um, deriv_xy)
        ops = self.ops
        n = self.mesh.n
        hmin = float(probe_gap_um.min())
        if not hmin > 0.0:
            raise _Contact()
        hf = probe_gap_um[self.face_sl]
        c = hf * hf * hf
        data = ops["assemble"] @ c
        data[ops["diag_pos"]] += self.beta
        # the matrix is held in the mesh's fill-reducing order: Ap[i, j] = A[perm[i], perm[j]]
        perm = ops["perm"]
        Ap = sp.csc_matrix((data, ops["indices"], ops["indptr"]), shape=(n, n))
        lu = splu(Ap, permc_spec="NATURAL", options=dict(SymmetricMode=True, DiagPivotThresh=0.0))
        pn = np.empty(n)
        pn[perm] = lu.solve(np.full(n, self.beta))
        # derivatives: A dPn/du = -A(dc/du) Pn, dc/du = 3 h² dh/du at each face
        dc = 3.0 * hf * hf
        fj = (ops["jump"] @ pn) * dc
        if deriv_xy:
            D = np.column_stack([fj, fj * (self.fx * 1e-3), fj * (self.fy * 1e-3)])
        else:
            D = fj[:, None]
        dpn = np.empty((n, D.shape[1]))
        dpn[perm] = lu.solve(-(ops["scatter"] @ D)[perm])
        Q = ops["quad"]
        pn_c = np.clip(Q @ pn, 0.0, 1.0)  # at the centroids of the nodes' cells (the nodes themselves but at cut cells)
        pn = np.clip(pn, 0.0, 1.0)
        p = np.sqrt(self.pa * self.pa + self.dP * pn)
        p_c = np.sqrt(self.pa * self.pa + self.dP * pn_c)
        dp = (self.dP / (2.0 * p_c))[:, None] * (Q @ dpn)
        q = self.w * (p_c - self.pa)
        load = float(q.sum())
        mx = float(q @ self.cx)
        my = float(q @ self.cy)
        # Jacobian of (W, Mx, My) wrt (h0, tx, ty): W in N, M in N mm, h0 in µm, tilts in µrad
        wd = self.w[:, None] * dp
        J = np.vstack([wd.sum(axis=0), self.cx @ wd, self.cy @ wd])
        return dict(pn=pn, pn_c=pn_c, p=p, load=load, mx=mx, my=my, J=J, hmin=hmin)

    def state(self, probe_gap_um, sol, stiffness) -> FilmState:
        ops = self.ops
        n = self.mesh.n
        gap = probe_gap_um[:n]
        area = self.mesh.area_mm2
        # inflow = coef * ∫(1 - Pn) dA = coef * (face area - ∫Pn dA); Pn vanishes at the edge, so the node
        # quadrature of ∫Pn dA keeps second order where ∫(1 - Pn) dA would lose the cut cells' area
        if self.orifice:
            mass = sol["mass"]
            ratios = np.asarray(sol["ratio"], dtype=float)
        else:
            mass = self.inflow_coef * (self.mesh.pad_area_mm2 * _MM2_TO_M2 - float(self.w @ sol["pn_c"]))
            ratios = np.array([])
        hg = sol.get("hg", probe_gap_um)
        he = hg[ops["edge_probe"]]
        edge = self.outflow_coef * float(np.sum(he**3 * (ops["edge_grad"] @ sol["pn"])))
        return FilmState(
            gap_um=gap,
            pressure_pa=sol.get("p_user", sol["p"]),
            fly_height_um=float(area @ gap / area.sum()),
            min_film_um=sol["hmin"],
            load_n=sol["load"],
            moment_x_nmm=sol["mx"],
            moment_y_nmm=sol["my"],
            stiffness_n_per_um=float(stiffness),
            mass_flow_kg_s=mass,
            edge_outflow_kg_s=edge,
            flow_l_per_min=self.litres_per_min(mass),
            assumptions=self.feed_assumptions,
            feed_pressure_ratios=ratios,
        )

    @property
    def feed_assumptions(self):
        return self.feed.assumptions if self.orifice else FILM_ASSUMPTIONS

    def litres_per_min(self, mass_kg_s):
        return mass_kg_s / self.feed.ambient_density_kg_m3 * 1e3 * 60.0

    def gap(self, dev, h0, tx, ty):
        return h0 + tx * 1e-3 * self.px + ty * 1e-3 * self.py - dev

    # ---- equilibrium at one position
    def equilibrium(self, dev_probe, load_n, pivot, tilt, guess, rtol):
        """Newton iteration on (h0[, tx, ty]); returns (u, sol, gap, iterations)."""
        w_node = self.mesh.area_mm2
        z = dev_probe[: self.mesh.n]
        if pivot:
            A = np.column_stack([np.ones_like(z), self.mesh.x_mm, self.mesh.y_mm]) * np.sqrt(w_node)[:, None]
            coef, *_ = np.linalg.lstsq(A, z * np.sqrt(w_node), rcond=None)
            base = coef[0] + coef[1] * self.px + coef[2] * self.py
            frame = (coef[0], coef[1] * 1e3, coef[2] * 1e3)  # offset µm, slopes µrad
        else:
            mean = float(w_node @ z / w_node.sum())
            base = np.full_like(dev_probe, mean)
            frame = (mean, 0.0, 0.0)
        r = dev_probe - base
        nu = 3 if pivot else 1
        u = np.array(guess[:nu], dtype=float)
        if not pivot:
            tx, ty = tilt
        Lc = self.mesh.half_size_mm
        scale = np.array([load_n, load_n * Lc, load_n * Lc])[:nu]

        def full(u):
            return (u[0], u[1], u[2]) if pivot else (u[0], tx, ty)

        def resid(sol):
            F = np.array([sol["load"] - load_n, sol["mx"], sol["my"]])[:nu]
            return F / scale

        gap = self.gap(r, *full(u))
        if gap.min() <= 0.0:  # lift the pad until the film is open
            u[0] += 0.5 - gap.min() + abs(u[0])
            gap = self.gap(r, *full(u))
        sol = self.solve(gap, pivot)
        F = resid(sol)
        it = 1
        while np.max(np.abs(F)) > rtol:
            if it >= _MAX_ITER:
                raise _Contact()
            J = sol["J"][:nu, :nu] / scale[:, None]
            try:
                step = np.linalg.solve(J, -F)
            except np.linalg.LinAlgError:
                raise _Contact() from None
            # keep the film open: no probe may lose more than 70 % of its film in one step
            dgap = self.gap(np.zeros_like(r), *(step if pivot else (step[0], 0.0, 0.0)))
            shrink = dgap < 0
            alpha = 1.0
            if shrink.any():
                alpha = min(1.0, float(np.min(0.7 * gap[shrink] / -dgap[shrink])))
            normF = np.max(np.abs(F))
            while True:
                u_new = u + alpha * step
                gap_new = self.gap(r, *full(u_new))
                sol_new = self.solve(gap_new, pivot)
                it += 1
                F_new = resid(sol_new)
                if np.max(np.abs(F_new)) < normF or alpha < 1e-3 or it >= _MAX_ITER:
                    break
                alpha *= 0.5
            u, gap, sol, F = u_new, gap_new, sol_new, F_new
            if sol["hmin"] < 1e-4:  # film below 0.1 nm: the pad has landed
                raise _Contact()
        J = sol["J"]
        if pivot:
            # stiffness with the tilts free (moments stay zero): Schur complement of the tilt block
            k = J[0, 0] - J[0, 1:] @ np.linalg.solve(J[1:, 1:], J[1:, 0])
        else:
            k = J[0, 0]
        h0, tx_, ty_ = full(u)
        pad = (h0 + frame[0], tx_ + frame[1], ty_ + frame[2])
        return u, sol, gap, -k, pad, it

    def flat_fly_height(self, load_n, rtol):
        """Uniform gap that carries ``load_n`` over a flat guide."""
        zero = np.zeros(self.px.size)
        u, sol, gap, k, pad, it = self.equilibrium(zero, load_n, False, (0.0, 0.0), [10.0], rtol)
        return float(u[0])



def _probe_map(mesh: PadMesh, m: PadMesh):
    """Sparse map from the film at ``mesh``'s probes to the film at the probes of ``m`` (``mesh`` with holes).

    A probe of ``m`` at the same place as one of ``mesh`` takes its value; the midpoint and the end of a line cut
    short by a hole lie between a kept node P and the node Q inside the hole: linear along the line from the
    films at P and Q; a hole's centre takes its node's film.
    """
    key = {}
    for i, (a, b) in enumerate(zip(np.round(mesh.probe_x_mm, 9), np.round(mesh.probe_y_mm, 9))):
        key.setdefault((a, b), i)
    ui = mesh._ops["grid_index"]
    mi = m._ops["grid_index"]
    node_of = np.full(m.n, -1, dtype=np.int64)  # user node of each node of m
    node_of[mi[mi >= 0]] = ui[mi >= 0]
    jj, ii = np.nonzero(mi >= 0)
    order = np.argsort(mi[mi >= 0])
    rc = np.column_stack([jj, ii])[order]  # grid (row, col) of each node of m
    rows, cols, vals = [], [], []
    px, py = m.probe_x_mm, m.probe_y_mm
    n, nf = m.n, m._ops["n_faces"]
    nb = nf - m._ops["n_int"]
    b_row = m._ops["b_row"]
    b_tag = m._ops["b_tag"]
    n_int = m._ops["n_int"]
    for p in range(px.size):
        k = key.get((round(float(px[p]), 9), round(float(py[p]), 9)))
        if k is not None:
            rows.append(p)
            cols.append(k)
            vals.append(1.0)
            continue
        # a cut face (n + n_int + l) or cut edge point (n + nf + l) of boundary link l, or a hole centre
        if n + n_int <= p < n + nf:
            link = p - n - n_int
        elif n + nf <= p < n + nf + nb:
            link = p - n - nf
        else:
            hx, hy = px[p], py[p]
            j = int(np.argmin((mesh.x_mm - hx) ** 2 + (mesh.y_mm - hy) ** 2))
            rows.append(p)
            cols.append(j)
            vals.append(1.0)
            continue
        P = int(b_row[link])
        if b_tag[link] < 0:  # pragma: no cover - edge links exist in both meshes
            raise GeometryError("internal mesh inconsistency (edge probe)")
        j, i = rc[P]
        ddx, ddy = px[p] - m.x_mm[P], py[p] - m.y_mm[P]
        if abs(ddx) >= abs(ddy):
            qj, qi = j, i + (1 if ddx > 0 else -1)
        else:
            qj, qi = j + (1 if ddy > 0 else -1), i
        Q = int(ui[qj, qi])
        a_node = int(node_of[P])
        t = math.hypot(ddx, ddy) / math.hypot(mesh.x_mm[Q] - mesh.x_mm[a_node], mesh.y_mm[Q] - mesh.y_mm[a_node])
        rows += [p, p]
        cols += [a_node, Q]
        vals += [1.0 - t, t]
    return sp.csr_matrix((vals, (rows, cols)), shape=(px.size, mesh.probe_x_mm.size))
