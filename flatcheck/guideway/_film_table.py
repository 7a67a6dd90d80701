"""Each pad's film force over its own local film, for the carriage's Newton iteration.

One :class:`PadFilm` per pad of the carriage. It holds the pad's film model (one mesh per pad size, shared
by pads of the same size and feed), the outward height of the measured face under the pad at every station
(sampled once for the whole travel, at the mesh's probe points: nodes, link midpoints, edge points), and a
small memory of the films it has solved: a film identical to one solved before (to 1e-9 µm) is not solved
again, so a carriage standing on a perfect stretch of the body costs nothing after its first station.
Every real film solution is counted by the shared :class:`~flatcheck.bearing.PadFilmModel`.

The pad's film at a probe point (pad-local ``u`` along the travel, ``v`` across, mm) is
``h = H + Tu u / 1000 + Tv v / 1000 - w(x_c + along + u, s + v)`` with ``H`` the pad face's outward height at
its centre (µm, the nominal gap included), ``Tu``, ``Tv`` its slopes (µrad) and ``w`` the face's outward
height in the body frame (form plus fitted plane, µm).
"""

from __future__ import annotations

from collections import OrderedDict
from dataclasses import dataclass

import numpy as np

from ..errors import GeometryError, InputValueError

__all__ = ["PadFilm", "pad_mesh", "DEFAULT_FILM_MESH", "FilmCounter"]

#: Mesh cells along each side of a pad in the guideway's film model. A carriage of 8 pads over 200 stations
#: makes about 4000 film solutions; at 32 cells one takes about 5 ms here (64 cells: about 24 ms).
DEFAULT_FILM_MESH = 32
_MEMORY = 16  # films remembered per pad


def pad_mesh(pad, cells: int, feed):
    """Mesh of a pad for the film model: :func:`flatcheck.bearing.pad_film_mesh` (graded at a porous
    rectangle's edges, an odd count for orifice feeds).

    Parameters
    ----------
    pad : flatcheck.bearing.Pad
    cells : int
        Cells along each side.
    feed : PorousFeed or OrificeFeed

    Returns
    -------
    flatcheck.bearing.PadMesh
    """
    from ..bearing import RESOLVED_GAP_FRACTION, pad_film_mesh

    # a porous circular pad's cells resolve its edge down to half its gap (more cells only when needed)
    return pad_film_mesh(pad, int(cells), feed, least_film_um=RESOLVED_GAP_FRACTION * pad.gap_um)


class FilmCounter:
    """Film models shared by pads of one size, and the total count of film solutions."""

    def __init__(self, feed, cells: int):
        self.feed = feed
        self.cells = int(cells)
        self._models = {}

    def model(self, pad):
        from ..bearing import PadFilmModel

        key = (pad.shape, pad.length_mm, pad.width_mm, pad.gap_um)
        if key not in self._models:
            self._models[key] = PadFilmModel(pad_mesh(pad, self.cells, self.feed), self.feed)
        return self._models[key]

    @property
    def solutions(self) -> int:
        """Film solutions made so far by every model."""
        return sum(m.solutions for m in self._models.values())

    @property
    def meshes(self) -> tuple:
        return tuple(m.mesh for m in self._models.values())


@dataclass(frozen=True, eq=False)
class PadFilmState:
    """The film of one pad for one pad attitude.

    Attributes
    ----------
    load_n, moment_x_nmm, moment_y_nmm : float
    jacobian : ndarray, shape (3, 3)
        ``d(load, mx, my)/d(H, Tu, Tv)``.
    min_film_um, mean_film_um : float
    """

    load_n: float
    moment_x_nmm: float
    moment_y_nmm: float
    jacobian: np.ndarray
    min_film_um: float
    mean_film_um: float


class PadFilm:
    """One pad of the carriage over its face along the travel.

    Parameters
    ----------
    model : flatcheck.bearing.PadFilmModel
        The pad's film model (shared by pads of the same size).
    surface_um : ndarray, shape (k, m)
        Outward height of the face at the mesh's probe points for each of the k stations, µm.
    """

    def __init__(self, model, surface_um: np.ndarray):
        self.model = model
        self.surface = np.asarray(surface_um, dtype=float)
        mesh = model.mesh
        self.u = mesh.probe_x_mm
        self.v = mesh.probe_y_mm
        self.n_nodes = mesh.n
        self.area = mesh.area_mm2
        self._memory = OrderedDict()

    def gap_um(self, station: int, H: float, Tu: float, Tv: float) -> np.ndarray:
        """Film at the probe points (µm) for pad attitude ``H`` (µm), ``Tu``, ``Tv`` (µrad) at a station."""
        return H + 1e-3 * (Tu * self.u + Tv * self.v) - self.surface[station]

    def film_change(self, dH: float, dTu: float, dTv: float) -> np.ndarray:
        """Change of the film at the probe points (µm) for a change of attitude."""
        return dH + 1e-3 * (dTu * self.u + dTv * self.v)

    def state(self, station: int, H: float, Tu: float, Tv: float) -> PadFilmState:
        """Film force of the pad at a station and attitude (solved, or remembered when seen before).

        Raises
        ------
        GeometryError
            When the film is not open everywhere (the pad touches).
        """
        gap = self.gap_um(station, H, Tu, Tv)
        key = np.round(gap, 9).tobytes()
        hit = self._memory.get(key)
        if hit is not None:
            self._memory.move_to_end(key)
            return hit
        r = self.model.respond(gap)
        mean = float(self.area @ gap[: self.n_nodes] / self.area.sum())
        st = PadFilmState(r.load_n, r.moment_x_nmm, r.moment_y_nmm, r.jacobian, r.min_film_um, mean)
        self._memory[key] = st
        if len(self._memory) > _MEMORY:
            self._memory.popitem(last=False)
        return st


def check_design_load(pad, name: str, load_n: float, feed, source: str = "") -> None:
    """Refuse a pad whose film at its nominal gap carries nearly the closed-film load.

    Near the closed-film load (gauge supply times area) the film hardly throttles the air and the pad has
    almost no stiffness; the bearing module solves loads up to ``CAPACITY_FRACTION`` of it (98 %, a convention
    of that module).

    Raises
    ------
    InputValueError
        Naming the pad and what to change.
    """
    from ..bearing import CAPACITY_FRACTION, OrificeFeed

    cap = (feed.supply_pa - feed.ambient_pa) * pad.area_mm2 * 1e-6
    if load_n < CAPACITY_FRACTION * cap:
        return
    if isinstance(feed, OrificeFeed):
        change = "use smaller or fewer orifices, or a larger gap"
    else:
        change = "use a less permeable or thicker porous layer (permeability_m2, layer_mm), or a larger gap"
    raise InputValueError(
        f"at its nominal gap of {pad.gap_um:g} µm, pad {name!r} would carry {load_n:.4g} N, "
        f"{100 * load_n / cap:.1f} % of supply pressure times area ({cap:.4g} N): the film would hardly throttle "
        "the air and the pad would have almost no stiffness",
        where=f"{source}, [film]" if source else "[film]", fix=change,
    )


def sample_surface(geometry, face_name: str, x_mm: np.ndarray, s_mm: float, u_mm: np.ndarray, v_mm: np.ndarray,
                   *, method: str = "linear") -> np.ndarray:
    """Outward height of a face under a pad at every station, shape (k, m), µm.

    Raises
    ------
    GeometryError
        If any part of the pad leaves the surveyed area at some station (never extrapolated).
    """
    X = x_mm[:, None] + u_mm[None, :]
    S = np.broadcast_to(s_mm + v_mm[None, :], X.shape)
    w = geometry.outward_height_um(face_name, X, S, method=method)
    if not np.isfinite(w).all():
        bad = int(np.flatnonzero(~np.isfinite(w).all(axis=1))[0])
        raise GeometryError(
            f"at x = {x_mm[bad]:g} mm a pad on face {face_name!r} reaches outside its survey",
            fix="shorten the travel, or check the pad's along_mm/across_mm against the face's surveyed area",
        )
    return w
