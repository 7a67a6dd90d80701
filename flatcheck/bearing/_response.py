"""A pad's film as a force law: load and moments, with their exact derivatives, for a given film shape.

A carriage that shares its load over several pads needs, for each pad, the film force as a function of the
pad's own local film (its height and tilts over the measured surface under it), and the derivatives of that
force for Newton's method. :class:`PadFilmModel` wraps one pad's mesh and feed: :meth:`PadFilmModel.respond`
solves the Reynolds equation once for a film given at the mesh's probe points and returns the load, the two
first moments and the 3 x 3 Jacobian with respect to the pad's fly height and tilts (from the same LU
factors, so exact for the discrete model). It counts the film solutions it makes, so that callers can state
their cost.
"""

from __future__ import annotations

import threading
from dataclasses import dataclass

import numpy as np

from ..errors import GeometryError
from ._mesh import PadMesh
from ._solver import _Contact, _Solver

__all__ = ["FilmResponse", "PadFilmModel"]


@dataclass(frozen=True, eq=False)
class FilmResponse:
    """Film force of a pad for one film shape.

    Attributes
    ----------
    load_n : float
        Integral of ``p - pa`` over the pad face, N (pushes the pad away from the guide).
    moment_x_nmm, moment_y_nmm : float
        First moments ``∫(p - pa) x dA`` and ``∫(p - pa) y dA`` about the pad centre, N·mm (pad-local x along
        the travel, y across).
    jacobian : ndarray, shape (3, 3)
        ``d(load, moment_x, moment_y) / d(h0, tilt_x, tilt_y)``: rows N, N·mm, N·mm; columns per µm of uniform
        film change and per µrad of tilt (the film grows by ``tilt * x / 1000`` µm at x mm).
    min_film_um : float
        Least film over the mesh's probe points, µm.
    """

    load_n: float
    moment_x_nmm: float
    moment_y_nmm: float
    jacobian: np.ndarray
    min_film_um: float


class PadFilmModel:
    """The film of one pad (mesh and feed), solved for films given at the mesh's probe points.

    Parameters
    ----------
    mesh : PadMesh
        The pad's mesh (pad-local mm, x along the travel).
    feed : PorousFeed or OrificeFeed
        How the pad is fed.

    Attributes
    ----------
    solutions : int
        Film solutions made so far (each :meth:`respond` call that reaches the solver counts one).

    Notes
    -----
    The film at the probes is ``h = h0 + tilt_x * x / 1000 + tilt_y * y / 1000 - s(x, y)`` (µm; x, y in mm)
    for a pad face at height ``h0`` and tilts in µrad over a surface ``s``; :attr:`probe_x_mm` and
    :attr:`probe_y_mm` are where it must be given (mesh nodes, link midpoints, edge points).
    """

    def __init__(self, mesh: PadMesh, feed):
        self._solver = _Solver(mesh, feed)
        self.mesh = mesh
        self.feed = feed
        self.solutions = 0
        self._lock = threading.Lock()

    @property
    def probe_x_mm(self) -> np.ndarray:
        """Pad-local x of the probe points, mm, shape (m,)."""
        return self.mesh.probe_x_mm

    @property
    def probe_y_mm(self) -> np.ndarray:
        """Pad-local y of the probe points, mm, shape (m,)."""
        return self.mesh.probe_y_mm

    def respond(self, gap_um) -> FilmResponse:
        """Solve the film for ``gap_um`` at the probe points.

        Parameters
        ----------
        gap_um : ndarray, shape (m,)
            Film thickness at :attr:`probe_x_mm`, :attr:`probe_y_mm`, µm.

        Returns
        -------
        FilmResponse

        Raises
        ------
        GeometryError
            When the film is not open everywhere (the pad touches).
        """
        gap = np.asarray(gap_um, dtype=float)
        if gap.shape != self.mesh.probe_x_mm.shape:
            raise GeometryError(
                f"the film has {gap.size} values but the pad mesh has {self.mesh.probe_x_mm.size} probe points",
                fix="give the film at the mesh's probe points",
            )
        with self._lock:
            self.solutions += 1
        try:
            sol = self._solver.solve(gap, True)
        except _Contact:
            raise GeometryError(
                f"the pad touches the surface (least film {float(gap.min()):.3g} µm)", fix="open the film"
            ) from None
        return FilmResponse(sol["load"], sol["mx"], sol["my"], np.array(sol["J"], dtype=float), sol["hmin"])
