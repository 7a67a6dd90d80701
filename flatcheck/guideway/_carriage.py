"""A rigid carriage wrapped round the guideway, in static equilibrium on its air films at every station.

Model
-----
The carriage is rigid. Its reference point runs along the body's centre line at ``(x_c, y_mm, z_mm)``;
the travel ``x_c`` is imposed and the other five motions are free: ``q = (δy, δz, θx, θy, θz)``, the
horizontal and vertical displacement of the reference point (µm) and the rotations about x, y and z
(µrad). The carriage's error motions follow ISO 230-1 (from memory): horizontal and vertical straightness
(``δy``, ``δz``), roll ``θx`` (positive when the +y side rises), pitch ``-θy`` (positive when the front,
+x, rises, as ``flatcheck bearing`` states it) and yaw ``θz`` (positive when the front moves to +y).

Pad ``i`` rides on face ``f`` (outward normal ``σ e``, ``e`` = y or z) at ``along_mm`` from the reference
point and ``across_mm`` from the face's centre line. A small rotation moves a point at ``(X, Y, Z)`` (mm from
the reference point) by ``δz + (θx Y - θy X)/1000`` µm vertically and ``δy + (θz X - θx Z)/1000``
horizontally. The pad's attitude over its face - the outward height ``H`` of its centre (nominal gap
included) and its slopes ``Tu`` along the travel and ``Tv`` across (µrad) - is linear in ``q``:
``a_i = (g_i, 0, 0) + P_i q``. The film is ``h = H + (Tu u + Tv v)/1000 - w(x, s)`` over the face's outward
height ``w`` (form plus fitted plane), and the film model (Reynolds equation; :mod:`flatcheck.bearing`)
gives the pad's load ``W`` and moments ``(mx, my)`` and their exact derivatives ``J``. By virtual work the
pad's generalized force on the carriage is ``P_iᵀ diag(1, 10⁻³, 10⁻³) (W, mx, my)`` (N for the
displacements, N·m for the rotations). A pad on a ball pivot (``pivot = true``, the default as in
``flatcheck bearing``) transmits no moment: its two tilts are extra unknowns with ``mx = my = 0``.

Equilibrium: the pads' forces plus the external load (``load_n`` downward at ``(load_along_mm,
load_across_mm)``; by default the *design load*, the net vertical force of the pads at their nominal gaps on
a perfect body, so that such a body carries the carriage at its nominal gaps) sum to zero. Newton's method
with the exact Jacobian solves it at each station; no film may lose more than 70 % in one step and a step
that does not lower the residual is halved. Directions no pad holds (e.g. pitch of two pivoted pads in one
line) are found from the pads' layout and held at 0; they are reported as free.

Warm start: each station starts from the previous one's solution, moved by the change that the quick
estimate (below) predicts between the two stations; every film solution is counted.

Quick estimate (pad averaging)
------------------------------
Each pad is replaced by its film's stiffness at the design point (the 3 x 3 Jacobian over a flat face at the
nominal gap) acting on the footprint-averaged surface: the mean outward height under the pad and the
least-squares tilt of the footprint (the averaging of ``flatcheck bearing``, here with the film's own
stiffness and on every face). One linear solve per station; its motions and films are reported beside the
film model's and the largest differences are stated.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..errors import GeometryError, InputValueError
from ..units import URAD_TO_ARCSEC
from ._film_table import DEFAULT_FILM_MESH, FilmCounter, PadFilm, check_design_load, sample_surface

__all__ = [
    "MOTION_NAMES",
    "GuidewayBudget",
    "WrapCarriage",
    "PadTravel",
    "WrapMotion",
    "WrapResult",
    "solve_carriage",
    "carriage_stations",
    "NEWTON_RTOL",
]

#: Order of the carriage's free motions in ``q``.
MOTION_NAMES = ("horizontal", "vertical", "roll", "pitch", "yaw")
#: Equilibrium: forces within this fraction of the mean pad load, pivot moments within it times load x half size.
NEWTON_RTOL = 1e-6
#: Most film evaluations (per pad) at one station before it is declared without equilibrium.
_MAX_EVALS = 40
#: A step may take away at most this fraction of any film (as in flatcheck.bearing's film equilibrium).
_STEP_FILM_FRACTION = 0.7
#: A film below this (µm) counts as touching.
_TOUCH_UM = 1e-4
#: Travel step: at most this fraction of the shortest pad length (as ``flatcheck bearing``).
_MAX_STEP_FRACTION = 0.1
_M = 1e-3  # µrad x mm -> µm


@dataclass(frozen=True)
class GuidewayBudget:
    """Limits on the carriage's error motions over the travel (``None``: not checked).

    Attributes
    ----------
    vertical_straightness_um, horizontal_straightness_um : float or None
        Minimum-zone straightness of the reference point's path, µm.
    pitch_arcsec, yaw_arcsec, roll_arcsec : float or None
        Peak-to-valley over the travel, arcsec.
    """

    vertical_straightness_um: float | None = None
    horizontal_straightness_um: float | None = None
    pitch_arcsec: float | None = None
    yaw_arcsec: float | None = None
    roll_arcsec: float | None = None

    def items(self):
        """``(motion key, limit, unit)`` for each limit given."""
        out = []
        for key, unit in (("vertical_straightness_um", "um"), ("horizontal_straightness_um", "um"),
                          ("pitch_arcsec", "arcsec"), ("yaw_arcsec", "arcsec"), ("roll_arcsec", "arcsec")):
            v = getattr(self, key)
            if v is not None:
                out.append((key, float(v), unit))
        return out


@dataclass(frozen=True, eq=False)
class WrapCarriage:
    """A carriage wrapped round a guideway body.

    Attributes
    ----------
    pads : tuple of flatcheck.bearing.PlacedPad
        The pads; each ``face`` names a face of the body, ``along_mm`` is measured from the carriage's
        reference point along the travel and ``across_mm`` from the face's centre line.
    feed : PorousFeed or OrificeFeed
        How every pad is fed (one feed for the carriage).
    load_n : float or None
        External load, N, downward (weight included); ``None``: the design load.
    load_along_mm, load_across_mm : float
        Where the load acts, from the reference point (along the travel; across in body y), mm.
    y_mm, z_mm : float
        Offset of the reference point from the body's centre line across (body y, used by pads on ±z faces)
        and up (body z, used by pads on ±y faces), mm.
    pivot : bool
        Pads on ball pivots (tilt free) when True, rigidly fixed to the carriage otherwise.
    travel_start_mm, travel_end_mm, step_mm : float or None
        Travel of the reference point; ``None``: everything that keeps every pad over its face's survey, in
        steps of at most a tenth of the shortest pad.
    gap_fraction : float
        Fraction of a pad's gap that it may lose (and the limit of local form under a pad), default 1/4
        (common practice, no single source).
    marginal_from : float
        A check within this fraction of its limit and the limit is marginal (default 0.8).
    min_film_um : float or None
        Least film any pad may have (the margin of the warnings), µm; ``None``: ``(1 - gap_fraction) x gap``.
    budget : GuidewayBudget
    mesh_cells : int
        Film mesh cells along each side of a pad.
    label, source : str
    """

    pads: tuple
    feed: object
    load_n: float | None = None
    load_along_mm: float = 0.0
    load_across_mm: float = 0.0
    y_mm: float = 0.0
    z_mm: float = 0.0
    pivot: bool = True
    travel_start_mm: float | None = None
    travel_end_mm: float | None = None
    step_mm: float | None = None
    gap_fraction: float = 0.25
    marginal_from: float = 0.8
    min_film_um: float | None = None
    budget: GuidewayBudget = field(default_factory=GuidewayBudget)
    mesh_cells: int = DEFAULT_FILM_MESH
    label: str = ""
    source: str = ""

    def margin_um(self, pad) -> float:
        """Least film allowed for a pad, µm."""
        if self.min_film_um is not None:
            return float(self.min_film_um)
        return (1.0 - self.gap_fraction) * pad.pad.gap_um


@dataclass(frozen=True, eq=False)
class PadTravel:
    """One pad over the travel (arrays of shape (k,), one per station; NaN where no equilibrium).

    Attributes
    ----------
    name, face : str
    gap_um : float
        Nominal gap, µm.
    design_load_n, design_stiffness_n_per_um : float
        Load and stiffness at the nominal gap over a flat face.
    margin_um : float
        Least film allowed, µm.
    min_film_um, mean_film_um, load_n : ndarray
        Film model: least and mean film (µm) and load (N).
    quick_min_film_um, quick_mean_film_um : ndarray
        Quick estimate (pad averaging), µm.
    local_flatness_um : ndarray
        Minimum-zone flatness of the face under the pad's footprint, µm.
    """

    name: str
    face: str
    gap_um: float
    design_load_n: float
    design_stiffness_n_per_um: float
    margin_um: float
    min_film_um: np.ndarray
    mean_film_um: np.ndarray
    load_n: np.ndarray
    quick_min_film_um: np.ndarray
    quick_mean_film_um: np.ndarray
    local_flatness_um: np.ndarray

    @property
    def least_film_um(self) -> float:
        """Least film over the travel (NaN where no station has an equilibrium)."""
        ok = np.isfinite(self.min_film_um)
        return float(self.min_film_um[ok].min()) if ok.any() else float("nan")


@dataclass(frozen=True, eq=False)
class WrapMotion:
    """The carriage's motion over the travel (paths of shape (k,)).

    Attributes
    ----------
    x_mm : ndarray
        Stations, mm.
    horizontal_um, vertical_um : ndarray
        Displacement of the reference point, µm.
    roll_arcsec, pitch_arcsec, yaw_arcsec : ndarray
        Angular motions, arcsec (signs in the module docstring).
    held : tuple of str
        Motions the pads hold (the others are free and held at 0 here).
    vertical_straightness_um, horizontal_straightness_um : float
        Minimum-zone straightness of the paths (ISO 12780-1 MZLI), µm; NaN for a free motion.
    pitch_range_arcsec, yaw_range_arcsec, roll_range_arcsec : float
        Peak-to-valley over the travel, arcsec; NaN for a free motion.
    """

    x_mm: np.ndarray
    horizontal_um: np.ndarray
    vertical_um: np.ndarray
    roll_arcsec: np.ndarray
    pitch_arcsec: np.ndarray
    yaw_arcsec: np.ndarray
    held: tuple
    vertical_straightness_um: float
    horizontal_straightness_um: float
    pitch_range_arcsec: float
    yaw_range_arcsec: float
    roll_range_arcsec: float

    def summary(self) -> dict:
        """The five summary figures under their JSON names."""
        return {
            "pitch_arcsec": self.pitch_range_arcsec,
            "yaw_arcsec": self.yaw_range_arcsec,
            "roll_arcsec": self.roll_range_arcsec,
            "vertical_straightness_um": self.vertical_straightness_um,
            "horizontal_straightness_um": self.horizontal_straightness_um,
        }


@dataclass(frozen=True, eq=False)
class WrapResult:
    """The carriage over the travel.

    Attributes
    ----------
    carriage : WrapCarriage
    x_mm : ndarray, shape (k,)
        Stations, mm.
    converged : ndarray of bool, shape (k,)
        Where an equilibrium with open films was found.
    failures : tuple of (float, str, str)
        ``(x_mm, pad, reason)`` where none was found (the pad with the least film).
    pads : tuple of PadTravel
    motion : WrapMotion
        Film model.
    quick_motion : WrapMotion
        Quick estimate (pad averaging).
    difference : dict
        Largest differences film model - quick estimate: ``vertical_um``, ``horizontal_um``, ``pitch_arcsec``,
        ``yaw_arcsec``, ``roll_arcsec`` (paths), ``min_film_um`` (any pad), and the summary figures.
    stiffness : ndarray, shape (k, 5)
        Stiffness of the carriage in each direction at each station, with the other motions free to follow:
        N/µm for horizontal and vertical, N·m/µrad for roll, pitch, yaw (NaN for free motions).
    load_n, design_load_n : float
        External load used and the design load, N (downward).
    film_solutions : int
        Film solutions made (Newton and the design point).
    solutions_per_pad_station : float
        ``film_solutions / (pads x stations)``.
    free_motions : tuple of str
    mesh_cells : int
    warnings, notes : tuple of str
    """

    carriage: WrapCarriage
    x_mm: np.ndarray
    converged: np.ndarray
    failures: tuple
    pads: tuple
    motion: WrapMotion
    quick_motion: WrapMotion
    difference: dict
    stiffness: np.ndarray
    load_n: float
    design_load_n: float
    film_solutions: int
    solutions_per_pad_station: float
    free_motions: tuple
    mesh_cells: int
    warnings: tuple = ()
    notes: tuple = ()


# --------------------------------------------------------------------------- layout of the pads
@dataclass(frozen=True, eq=False)
class _PadPlace:
    placed: object  # PlacedPad
    face: object  # Face
    X: float  # along the travel from the reference point, mm
    lever: float  # across lever arm from the reference point (body y for ±z, body z for ±y), mm
    s: float  # body across coordinate of the pad centre on its face, mm
    P: np.ndarray  # (3, 5): d(H, Tu, Tv)/dq


def _place_pads(geometry, carriage: WrapCarriage) -> list:
    body = geometry.body
    out = []
    names = body.face_names
    for p in carriage.pads:
        if p.face not in names:
            raise InputValueError(
                f"pad {p.name!r} rides on face {p.face!r}, which the body does not have (faces: "
                f"{', '.join(repr(n) for n in names)})",
                where=carriage.source or None, fix="set the pad's face to one of the body's [[face]] names",
            )
        f = body.face(p.face)
        sg = float(f.sign)
        offset = carriage.y_mm if f.axis == "z" else carriage.z_mm
        lever = f.centre_mm + p.across_mm
        s = f.centre_mm + offset + p.across_mm
        X = p.along_mm
        P = np.zeros((3, 5))
        if f.axis == "z":
            P[0] = [0.0, sg, sg * _M * lever, -sg * _M * X, 0.0]
            P[1, 3] = -sg
            P[2, 2] = sg
        else:
            P[0] = [sg, 0.0, -sg * _M * lever, 0.0, sg * _M * X]
            P[1, 4] = sg
            P[2, 2] = -sg
        out.append(_PadPlace(p, f, X, lever, s, P))
    return out


def carriage_stations(geometry, carriage: WrapCarriage):
    """Stations of the carriage's reference point along the travel.

    Parameters
    ----------
    geometry : BodyGeometry
    carriage : WrapCarriage

    Returns
    -------
    x_mm : ndarray, shape (k,)
        Stations, mm (evenly spaced, both ends included).
    step_mm : float

    Raises
    ------
    InputValueError
        A step above a tenth of the shortest pad, a travel outside what the faces' surveys cover.
    GeometryError
        A pad outside its face's survey across, or a carriage longer than the surveyed faces.
    """
    places = _place_pads(geometry, carriage)
    lo, hi = -math.inf, math.inf
    for pl in places:
        pad = pl.placed.pad
        xmin, xmax = pl.face.x_range_mm
        lo = max(lo, xmin - (pl.X - pad.length_mm / 2))
        hi = min(hi, xmax - (pl.X + pad.length_mm / 2))
        smin, smax = sorted(pl.face.s_range_mm)
        half = pad.width_mm / 2
        tol = 1e-6 * max(1.0, abs(smax) + abs(smin))
        if pl.s - half < smin - tol or pl.s + half > smax + tol:
            raise GeometryError(
                f"pad {pl.placed.name!r} spans {pl.s - half:g} to {pl.s + half:g} mm across face {pl.face.name!r}, "
                f"whose survey covers {smin:g} to {smax:g} mm across",
                where=carriage.source or None,
                fix="check the pad's across_mm (from the face's centre line), the face's centre_mm and the "
                "carriage's y_mm/z_mm, or survey the face wider",
            )
    start = lo if carriage.travel_start_mm is None else float(carriage.travel_start_mm)
    end = hi if carriage.travel_end_mm is None else float(carriage.travel_end_mm)
    if carriage.travel_start_mm is None and carriage.travel_end_mm is None and hi < lo:
        raise GeometryError(
            "no position of the carriage keeps every pad over its face's survey",
            where=carriage.source or None, fix="check the pads' along_mm against the faces' surveyed lengths",
        )
    tol = 1e-6 * max(1.0, abs(lo), abs(hi))
    if start < lo - tol or end > hi + tol or end < start:
        raise InputValueError(
            f"the travel {start:g} to {end:g} mm leaves the surveyed faces (every pad stays on its face's survey "
            f"from {lo:g} to {hi:g} mm)",
            where=f"{carriage.source}, [carriage]" if carriage.source else "travel",
            fix=f"keep travel_start_mm and travel_end_mm within {lo:g} to {hi:g} mm",
        )
    shortest = min(pl.placed.pad.length_mm for pl in places)
    max_step = _MAX_STEP_FRACTION * shortest
    if carriage.step_mm is not None and carriage.step_mm > max_step * (1 + 1e-9):
        raise InputValueError(
            f"a step of {carriage.step_mm:g} mm is more than a tenth of the shortest pad ({max_step:g} mm)",
            where=f"{carriage.source}, [carriage], field 'step_mm'" if carriage.source else "step_mm",
            fix=f"give step_mm of at most {max_step:g}",
        )
    step = max_step if carriage.step_mm is None else float(carriage.step_mm)
    span = end - start
    if span <= 0:
        return np.array([start]), step
    n = max(1, math.ceil(span / step - 1e-9))
    return np.linspace(start, end, n + 1), span / n


# --------------------------------------------------------------------------- the solve
def _held_basis(places, pivot: bool, D: np.ndarray):
    """Orthonormal basis (in scaled coordinates) of the motions the pads hold, and of the free ones."""
    rows = []
    for pl in places:
        if pivot:
            rows.append(pl.P[0] @ D)
        else:
            rows.extend(list(pl.P @ D))
    G = np.array(rows)
    U, S, Vt = np.linalg.svd(G, full_matrices=True)
    rank = int(np.sum(S > 1e-9 * S[0])) if S.size else 0
    return Vt[:rank].T, Vt[rank:].T


def _straightness(x, v):
    from ..form import evaluate_straightness

    ok = np.isfinite(v)
    if ok.sum() < 2 or np.ptp(x[ok]) == 0:
        return float("nan")
    return float(evaluate_straightness(x[ok], v[ok]).straightness_um)


def _motion(x, Q, held_mask) -> WrapMotion:
    """WrapMotion from q at each station (shape (k, 5)); free motions reported as NaN summaries."""
    dy, dz, tx, ty, tz = (Q[:, j] for j in range(5))
    roll = tx * URAD_TO_ARCSEC
    pitch = -ty * URAD_TO_ARCSEC
    yaw = tz * URAD_TO_ARCSEC

    def rng(v, j):
        ok = np.isfinite(v)
        return float(np.ptp(v[ok])) if held_mask[j] and ok.any() else float("nan")

    held = tuple(n for n, h in zip(MOTION_NAMES, held_mask) if h)
    return WrapMotion(
        x_mm=x, horizontal_um=dy, vertical_um=dz, roll_arcsec=roll, pitch_arcsec=pitch, yaw_arcsec=yaw, held=held,
        vertical_straightness_um=_straightness(x, dz) if held_mask[1] else float("nan"),
        horizontal_straightness_um=_straightness(x, dy) if held_mask[0] else float("nan"),
        pitch_range_arcsec=rng(pitch, 3), yaw_range_arcsec=rng(yaw, 4), roll_range_arcsec=rng(roll, 2),
    )


def _footprint_data(geometry, pl, x, method):
    """Footprint mean, LS tilts (µrad), residual peak structure and local flatness of a pad at every station."""
    from ..bearing import footprint
    from ..form import minimum_zone_batch

    pad = pl.placed.pad
    fp = footprint(pad)
    Z = sample_surface(geometry, pl.face.name, x + pl.X, pl.s, fp.u_mm, fp.v_mm, method=method)
    keep = fp.weight > 0
    sw = np.sqrt(fp.weight[keep])
    A = np.column_stack([np.ones(keep.sum()), fp.u_mm[keep], fp.v_mm[keep]]) * sw[:, None]
    pinv = np.linalg.pinv(A)  # (3, m_keep)
    coef = (Z[:, keep] * sw[None, :]) @ pinv.T  # (k, 3): mean at centre, slopes µm/mm
    plane = coef[:, :1] + coef[:, 1:2] * fp.u_mm[None, :] + coef[:, 2:3] * fp.v_mm[None, :]
    resid = Z - plane
    mean = Z @ fp.weight
    try:
        flat, _ = minimum_zone_batch(fp.u_mm, fp.v_mm, Z)
    except Exception:  # pragma: no cover - the batch solver certifies each zone; fall back one by one
        from ..form import minimum_zone

        flat = np.array([minimum_zone(fp.u_mm, fp.v_mm, z).flatness_um for z in Z])
    return dict(mean=mean, bx=1e3 * coef[:, 1], by=1e3 * coef[:, 2], resid=resid, u=fp.u_mm, v=fp.v_mm,
                flat=np.asarray(flat, float), centre=coef[:, 0])


def solve_carriage(geometry, carriage: WrapCarriage, *, method: str = "linear", progress=None) -> WrapResult:
    """Equilibrium of a wrap-around carriage at every station of the travel.

    Parameters
    ----------
    geometry : BodyGeometry
        The fitted body (:func:`evaluate_body`); the pads' films are taken over each face's form plus its
        fitted plane. Free plane parameters are held at nominal (and named in the result's warnings).
    carriage : WrapCarriage
        Pads, feed, load, travel, limits.
    method : {"linear", "cubic"}
        Interpolation of the faces between their stations.
    progress : callable, optional
        ``progress(1)`` after each station.

    Returns
    -------
    WrapResult

    Raises
    ------
    InputValueError
        A pad on a face the body does not have, a pad that carries nearly the closed-film load at its gap, a
        travel outside the surveys.
    GeometryError
        No pad holds the carriage at all, a pad outside its face's survey.
    """
    places = _place_pads(geometry, carriage)
    x, step = carriage_stations(geometry, carriage)
    k = x.size
    n = len(places)
    pivot = bool(carriage.pivot)
    counter = FilmCounter(carriage.feed, carriage.mesh_cells)
    warnings, notes = [], []

    # ---- scaling: rotations measured as the displacement (µm) they cause at the largest lever arm
    Lc = max([1.0] + [abs(pl.X) for pl in places] + [abs(pl.lever) for pl in places])
    D = np.diag([1.0, 1.0, 1e3 / Lc, 1e3 / Lc, 1e3 / Lc])
    Bh, Nh = _held_basis(places, pivot, D)
    r = Bh.shape[1]
    if r == 0:
        raise GeometryError("no pad holds the carriage", where=carriage.source or None, fix="add pads")
    held_mask = np.array([np.linalg.norm(Nh[j]) < 1e-9 if Nh.size else True for j in range(5)])
    free = tuple(nm for nm, h in zip(MOTION_NAMES, held_mask) if not h)
    if free:
        notes.append(
            f"no pad holds the carriage's {', '.join(free)}: {'that motion is' if len(free) == 1 else 'those motions are'}"
            " free in this model (held at 0) and not stated"
        )
    QB = D @ Bh  # q = QB z

    # ---- design point: each pad flat at its nominal gap
    design = {}
    pads = []
    for pl in places:
        model = counter.model(pl.placed.pad)
        key = (id(model), pl.placed.pad.gap_um)
        if key not in design:
            rr = model.respond(np.full(model.probe_x_mm.size, pl.placed.pad.gap_um))
            design[key] = rr
        rr = design[key]
        check_design_load(pl.placed.pad, pl.placed.name, rr.load_n, carriage.feed, carriage.source)
        surf = sample_surface(geometry, pl.face.name, x + pl.X, pl.s, model.probe_x_mm, model.probe_y_mm,
                              method=method)
        pads.append(PadFilm(model, surf))
    r0 = [design[(id(pf.model), pl.placed.pad.gap_um)] for pf, pl in zip(pads, places)]
    W0 = np.array([d.load_n for d in r0])
    J0 = [d.jacobian for d in r0]
    g0 = np.array([pl.placed.pad.gap_um for pl in places])
    design_load = float(sum(pl.face.sign * w for pl, w in zip(places, W0) if pl.face.axis == "z"))
    load = design_load if carriage.load_n is None else float(carriage.load_n)
    f_ext = -load * np.array([0.0, 1.0, _M * carriage.load_across_mm, -_M * carriage.load_along_mm, 0.0])
    F0 = max(float(np.mean(np.abs(W0))), abs(load) / max(n, 1), 1e-6)
    half = np.array([0.5 * max(pl.placed.pad.length_mm, pl.placed.pad.width_mm) for pl in places])

    def k_eff(J):
        return J[0, 0] - J[0, 1:] @ np.linalg.solve(J[1:, 1:], J[1:, 0])

    # ---- quick estimate (pad averaging) at every station
    fpd = [_footprint_data(geometry, pl, x, method) for pl in places]
    Kq = np.zeros((5, 5))
    for pl, J in zip(places, J0):
        if pivot:
            Kq += k_eff(J) * np.outer(pl.P[0], pl.P[0])
        else:
            Kq += pl.P.T @ np.diag([1.0, _M, _M]) @ J @ pl.P
    Kr = QB.T @ Kq @ QB
    Qfp = np.zeros((k, 5))
    Tfp = np.zeros((k, n, 2))  # pad tilts (pivot) in the quick model
    base = np.zeros(5)
    for pl, rr in zip(places, r0):
        if pivot:
            base += pl.P[0] * rr.load_n
        else:
            base += pl.P.T @ (np.array([1.0, _M, _M]) * np.array([rr.load_n, rr.moment_x_nmm, rr.moment_y_nmm]))
    for kk in range(k):
        rhs = -(base + f_ext)
        for pl, J, d in zip(places, J0, fpd):
            dd = np.array([d["mean"][kk], d["bx"][kk], d["by"][kk]])
            if pivot:
                rhs += k_eff(J) * pl.P[0] * dd[0]
            else:
                rhs += pl.P.T @ (np.array([1.0, _M, _M]) * (J @ dd))
        z = np.linalg.solve(Kr, QB.T @ rhs)
        Qfp[kk] = QB @ z
        for i, (pl, J, d) in enumerate(zip(places, J0, fpd)):
            if pivot:
                e = pl.P[0] @ Qfp[kk] - d["mean"][kk]
                Tfp[kk, i] = np.array([d["bx"][kk], d["by"][kk]]) - np.linalg.solve(J[1:, 1:], J[1:, 0] * e)
    quick_mean = np.zeros((n, k))
    quick_min = np.zeros((n, k))
    for i, (pl, d) in enumerate(zip(places, fpd)):
        a = g0[i] + Qfp @ pl.P[0]
        if pivot:
            tu, tv = Tfp[:, i, 0], Tfp[:, i, 1]
        else:
            tu, tv = Qfp @ pl.P[1], Qfp @ pl.P[2]
        film_mean = a - d["mean"]
        rel = film_mean[:, None] + _M * ((tu - d["bx"])[:, None] * d["u"][None, :]
                                         + (tv - d["by"])[:, None] * d["v"][None, :]) - d["resid"]
        quick_mean[i] = film_mean
        quick_min[i] = rel.min(axis=1)

    # ---- Newton at each station
    nz = r + (2 * n if pivot else 0)

    def attitudes(X):
        q = QB @ X[:r]
        att = []
        for i, pl in enumerate(places):
            a = pl.P @ q
            a[0] += g0[i]
            if pivot:
                a[1:] = X[r + 2 * i : r + 2 * i + 2]
            att.append(a)
        return q, att

    def evaluate(kk, X):
        q, att = attitudes(X)
        states = [pf.state(kk, *a) for pf, a in zip(pads, att)]
        G = f_ext.copy()
        for pl, st in zip(places, states):
            if pivot:
                G += pl.P[0] * st.load_n
            else:
                G += pl.P.T @ (np.array([1.0, _M, _M]) * np.array([st.load_n, st.moment_x_nmm, st.moment_y_nmm]))
        R = np.zeros(nz)
        R[:r] = QB.T @ G
        scale = np.full(nz, F0)
        if pivot:
            for i, st in enumerate(states):
                R[r + 2 * i : r + 2 * i + 2] = (st.moment_x_nmm, st.moment_y_nmm)
                scale[r + 2 * i : r + 2 * i + 2] = F0 * half[i]
        return states, R, scale, att

    def jacobian(states):
        Jm = np.zeros((nz, nz))
        Kfull = np.zeros((5, 5))
        for i, (pl, st) in enumerate(zip(places, states)):
            J = st.jacobian
            if pivot:
                p = pl.P[0]
                Kfull += J[0, 0] * np.outer(p, p)
                c = slice(r + 2 * i, r + 2 * i + 2)
                Jm[:r, c] = np.outer(QB.T @ p, J[0, 1:])
                Jm[c, :r] = np.outer(J[1:, 0], p @ QB)
                Jm[c, c] = J[1:, 1:]
            else:
                Kfull += pl.P.T @ np.diag([1.0, _M, _M]) @ J @ pl.P
        Jm[:r, :r] = QB.T @ Kfull @ QB
        return Jm

    def stiffness(states):
        """Direct stiffness in each direction with the other motions (and the pivots) free to follow."""
        K = np.zeros((5, 5))
        for pl, st in zip(places, states):
            J = st.jacobian
            if pivot:
                K += -k_eff(J) * np.outer(pl.P[0], pl.P[0])
            else:
                K += -(pl.P.T @ np.diag([1.0, _M, _M]) @ J @ pl.P)
        Kr_ = QB.T @ K @ QB
        C = QB @ np.linalg.solve(Kr_, QB.T)
        out = np.full(5, np.nan)
        for j in range(5):
            if held_mask[j] and C[j, j] > 0:
                out[j] = 1.0 / C[j, j]
        return out

    def solve_station(kk, X):
        evals = 0
        try:
            states, R, scale, att = evaluate(kk, X)
        except GeometryError:
            return None, "the film closes at the start of the iteration", None
        evals += 1
        while True:
            if np.all(np.abs(R) <= NEWTON_RTOL * scale):
                return X, states, None
            if evals >= _MAX_EVALS:
                return None, "Newton's method did not converge", states
            Jm = jacobian(states)
            try:
                step_ = np.linalg.solve(Jm, -R)
            except np.linalg.LinAlgError:
                return None, "singular stiffness", states
            # no film may lose more than 70 % in one step
            q_step = QB @ step_[:r]
            alpha = 1.0
            for i, (pl, pf, a) in enumerate(zip(places, pads, att)):
                da = pl.P @ q_step
                if pivot:
                    da[1:] = step_[r + 2 * i : r + 2 * i + 2]
                dh = pf.film_change(*da)
                h = pf.gap_um(kk, *a)
                shrink = dh < 0
                if shrink.any():
                    alpha = min(alpha, float(np.min(_STEP_FILM_FRACTION * h[shrink] / -dh[shrink])))
            normR = float(np.max(np.abs(R) / scale))
            while True:
                Xn = X + alpha * step_
                try:
                    sn, Rn, scn, attn = evaluate(kk, Xn)
                except GeometryError:
                    sn = None
                evals += 1
                if sn is not None and (float(np.max(np.abs(Rn) / scn)) < normR or alpha < 1e-3):
                    break
                if evals >= _MAX_EVALS:
                    return None, "Newton's method did not converge", states
                alpha *= 0.5
            X, states, R, att = Xn, sn, Rn, attn
            if min(s.min_film_um for s in states) < _TOUCH_UM:
                return None, "the film closes", states

    names = ("min", "mean", "load")
    res = {nm: np.full((n, k), np.nan) for nm in names}
    Q = np.full((k, 5), np.nan)
    stiff = np.full((k, 5), np.nan)
    conv = np.zeros(k, dtype=bool)
    failures = []

    def X_from_quick(kk):
        X = np.zeros(nz)
        X[:r] = np.linalg.lstsq(QB, Qfp[kk], rcond=None)[0]
        if pivot:
            X[r:] = Tfp[kk].ravel()
        return X

    X_prev = None
    k_prev = None
    for kk in range(k):
        tries = []
        if X_prev is not None:
            tries.append(X_prev + (X_from_quick(kk) - X_from_quick(k_prev)))
            tries.append(X_prev)
        tries.append(X_from_quick(kk))
        sol, why, last = None, "", None
        for X0 in tries:
            sol, st_or_why, last = solve_station(kk, X0)
            if sol is not None:
                states = st_or_why
                break
            why = st_or_why
        if sol is None:
            worst = ""
            if last is not None:
                worst = places[int(np.argmin([s.min_film_um for s in last]))].placed.name
            else:
                # the pad whose film is least at the quick estimate
                worst = places[int(np.argmin(quick_min[:, kk]))].placed.name
            failures.append((float(x[kk]), worst, why))
        else:
            conv[kk] = True
            q, _ = attitudes(sol)
            Q[kk] = q
            for i, s in enumerate(states):
                res["min"][i, kk] = s.min_film_um
                res["mean"][i, kk] = s.mean_film_um
                res["load"][i, kk] = s.load_n
            stiff[kk] = stiffness(states)
            X_prev, k_prev = sol, kk
        if progress is not None:
            progress(1)

    solutions = counter.solutions
    pad_results = []
    for i, (pl, pf) in enumerate(zip(places, pads)):
        pad_results.append(PadTravel(
            name=pl.placed.name, face=pl.face.name, gap_um=float(g0[i]), design_load_n=float(W0[i]),
            design_stiffness_n_per_um=float(-k_eff(J0[i]) if pivot else -J0[i][0, 0]),
            margin_um=carriage.margin_um(pl.placed),
            min_film_um=res["min"][i], mean_film_um=res["mean"][i], load_n=res["load"][i],
            quick_min_film_um=quick_min[i], quick_mean_film_um=quick_mean[i], local_flatness_um=fpd[i]["flat"],
        ))
    motion = _motion(x, Q, held_mask)
    quick = _motion(x, np.where(conv[:, None], Qfp, Qfp), held_mask)
    diff = _differences(motion, quick, pad_results, conv)
    if failures:
        for xf, pad, why in failures[:5]:
            warnings.append(f"pad {pad!r} would touch at x = {xf:.0f} mm: no equilibrium with open films ({why})")
        if len(failures) > 5:
            warnings.append(f"... and {len(failures) - 5} more stations without an equilibrium")
    for p in pad_results:
        low = np.isfinite(p.min_film_um) & (p.min_film_um < p.margin_um)
        if low.any():
            i = int(np.nanargmin(np.where(low, p.min_film_um, np.nan)))
            warnings.append(
                f"pad {p.name!r} ({p.face}): least film below the margin of {p.margin_um:.3g} µm at "
                f"{_ranges_text(x, low)}; least {p.min_film_um[i]:.2f} µm at x = {x[i]:.0f} mm"
            )
    if carriage.load_n is None:
        notes.append(
            f"load: the design load, {design_load:.4g} N downward (the pads' net vertical force at their nominal gaps "
            "on a perfect body)"
        )
    notes.append(
        f"film model: every pad solved over its own local film ({'ball pivots, tilt free' if pivot else 'pads fixed to the carriage'}); "
        f"{solutions} film solutions for {n} pads x {k} stations = {solutions / max(n * k, 1):.2f} per pad per station"
    )
    for f in geometry.free_faces:
        used = [p.name for p in pad_results if p.face == f]
        if used:
            warnings.append(
                f"face {f!r} carries pads ({', '.join(used)}) but its place in the body is partly free: the carriage "
                "takes its free parameters at nominal; tie the face to the others for a full answer"
            )
    return WrapResult(
        carriage=carriage, x_mm=x, converged=conv, failures=tuple(failures), pads=tuple(pad_results), motion=motion,
        quick_motion=quick, difference=diff, stiffness=stiff, load_n=load, design_load_n=design_load,
        film_solutions=solutions, solutions_per_pad_station=solutions / max(n * k, 1), free_motions=free,
        mesh_cells=_cells_used(carriage, counter), warnings=tuple(warnings), notes=tuple(notes),
    )


def _cells_used(carriage, counter) -> int:
    """Cells a side of the finest pad mesh: those asked for, or more where a porous disc's resolution rule asked."""
    from ..bearing import PorousFeed

    if not isinstance(carriage.feed, PorousFeed):
        return int(carriage.mesh_cells)
    return max([int(carriage.mesh_cells)] + [int(m.x_edges_mm.size) - 1 for m in counter.meshes])


def _differences(motion: WrapMotion, quick: WrapMotion, pads, conv) -> dict:
    def dmax(a, b):
        d = np.abs(a - b)[conv]
        d = d[np.isfinite(d)]
        return float(d.max()) if d.size else float("nan")

    out = {
        "vertical_um": dmax(motion.vertical_um, quick.vertical_um),
        "horizontal_um": dmax(motion.horizontal_um, quick.horizontal_um),
        "pitch_arcsec": dmax(motion.pitch_arcsec, quick.pitch_arcsec),
        "yaw_arcsec": dmax(motion.yaw_arcsec, quick.yaw_arcsec),
        "roll_arcsec": dmax(motion.roll_arcsec, quick.roll_arcsec),
        "min_film_um": max((dmax(p.min_film_um, p.quick_min_film_um) for p in pads), default=float("nan")),
    }
    for key, v in motion.summary().items():
        out[f"{key}_change"] = float(v - quick.summary()[key]) if np.isfinite(v) else float("nan")
    return out


def _ranges_text(x, flags) -> str:
    parts = []
    start = None
    for i, f in enumerate(flags):
        if f and start is None:
            start = i
        if (not f or i == len(flags) - 1) and start is not None:
            end = i if f else i - 1
            parts.append(f"x = {x[start]:.0f} mm" if start == end else f"x = {x[start]:.0f}–{x[end]:.0f} mm")
            start = None
    return ", ".join(parts[:4]) + (f" (+{len(parts) - 4} more)" if len(parts) > 4 else "")
