"""The guideway body: its measured faces and the measurements that tie the faces together.

Frame of the body (used by every guideway module)
-------------------------------------------------
- ``x`` runs along the travel, in mm, from one origin shared by every face's file.
- ``y`` is horizontal across the beam and ``z`` vertical, both in mm, from the body's centre line.
- A face is named by its outward normal: ``"+z"`` (a top), ``"-z"`` (an underside), ``"+y"`` and ``"-y"``
  (the sides). Its *axis* is the normal's axis; its *sign* ``+1`` or ``-1``.
- Heights of a face are **outward** (away from the material), in µm: a top's heights are up, an
  underside's down, a ``+y`` side's towards ``+y``.
- The *across* coordinate ``s`` of a face is body ``y`` for ``±z`` faces and body ``z`` (up) for ``±y``
  faces, in mm. The file's own second coordinate (its ``y_mm``) runs the same way; the face's centre line
  (the middle of its surveyed extent across) sits at ``s = centre_mm`` (0 unless the body file says
  otherwise), so ``s = y_file - file_centre + centre_mm``.

Ties (what the body file records besides the faces' own surveys)
----------------------------------------------------------------
- thickness between opposed faces A and B: ``value = wA(x, s) + wB(x, s)``, the distance between the
  faces minus its nominal value (µm);
- height between faces facing the same way (two rails): ``value = wB(x, sB) - wA(x, sA)`` (µm);
- squareness of two perpendicular faces: ``value = 90° - (angle between their outward normals)`` (µrad),
  which for faces meeting at an outside corner is the corner's angle minus 90° (positive when open);
- twist runs: readings of a level across one face (the face's across slope, rising towards ``+s``), or on a
  bridge across two faces (``(wB - wA) / (sB - sA)``), in µrad, each run with its own unknown zero
  (differential levels).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import InputValueError

__all__ = [
    "NORMALS",
    "Face",
    "ThicknessTie",
    "HeightTie",
    "SquarenessTie",
    "TwistRun",
    "GuidewayBody",
    "DEFAULT_U_LENGTH_UM",
    "DEFAULT_U_SQUARENESS_URAD",
    "DEFAULT_U_TWIST_URAD",
]

#: Outward normal name -> (axis, sign).
NORMALS = {"+z": ("z", 1), "-z": ("z", -1), "+y": ("y", 1), "-y": ("y", -1)}

#: Standard uncertainty given to a thickness or height tie when the file states none, µm: a micrometer or
#: indicator reading across a granite beam (common practice, no single source).
DEFAULT_U_LENGTH_UM = 0.5
#: Standard uncertainty of a squareness tie when the file states none, µrad: about 0.5 arcsec, the size of a
#: published autocollimator-and-optical-square figure (an autocollimator maker's user guide).
DEFAULT_U_SQUARENESS_URAD = 2.5
#: Standard uncertainty of one twist reading when the file states none, µrad: the sensitivity of about
#: 1 µm/m of electronic levels in differential mode (an electronic-level maker's manual).
DEFAULT_U_TWIST_URAD = 1.0


@dataclass(frozen=True, eq=False)
class Face:
    """One measured face of the body.

    Attributes
    ----------
    name : str
        Name used by ties and pads (``"top"``, ``"underside"``...).
    normal : {"+z", "-z", "+y", "-y"}
        Outward normal.
    surface : HeightMap
        The face as measured: x along the travel (mm, common origin), y across in the file's own
        coordinate (mm), heights outward (µm).
    survey : str
        The file the surface came from (as written in the body file).
    centre_mm : float
        Body across coordinate of the face's centre line, mm (body y for ±z faces, body z for ±y faces).
    line : int or None
        Line of the face's ``[[face]]`` table in the body file (for messages).
    height_step_um : float
        The height step the face's measurement resolves
        (:meth:`flatcheck.MeasuredSurface.height_step_um`; 1 nm for a height map).
    """

    name: str
    normal: str
    surface: object
    survey: str = ""
    centre_mm: float = 0.0
    line: int | None = None
    height_step_um: float = 0.001

    def __post_init__(self):
        if self.normal not in NORMALS:
            raise InputValueError(
                f"face {self.name!r}: unknown normal {self.normal!r}", fix='use "+z", "-z", "+y" or "-y"'
            )

    @property
    def axis(self) -> str:
        """``"z"`` or ``"y"``: the body axis of the outward normal."""
        return NORMALS[self.normal][0]

    @property
    def sign(self) -> int:
        """``+1`` or ``-1``: the direction of the outward normal along its axis."""
        return NORMALS[self.normal][1]

    @property
    def across_axis(self) -> str:
        """Body axis of the face's across coordinate: ``"y"`` for ±z faces, ``"z"`` for ±y faces."""
        return "y" if self.axis == "z" else "z"

    @property
    def file_centre_mm(self) -> float:
        """Middle of the surveyed extent across, in the file's y coordinate, mm."""
        _, _, ymin, ymax = self.surface.extent_mm
        return 0.5 * (ymin + ymax)

    @property
    def x_range_mm(self) -> tuple:
        """First and last surveyed x, mm."""
        xmin, xmax, _, _ = self.surface.extent_mm
        return xmin, xmax

    @property
    def s_range_mm(self) -> tuple:
        """Surveyed extent across in body coordinates ``(s_min, s_max)``, mm."""
        _, _, ymin, ymax = self.surface.extent_mm
        return self.body_s(ymin), self.body_s(ymax)

    def file_y(self, s_mm):
        """File y (mm) of body across coordinate ``s_mm``."""
        return np.asarray(s_mm, dtype=float) - self.centre_mm + self.file_centre_mm

    def body_s(self, y_file_mm):
        """Body across coordinate (mm) of file y ``y_file_mm``."""
        return np.asarray(y_file_mm, dtype=float) - self.file_centre_mm + self.centre_mm

    @property
    def is_two_dimensional(self) -> bool:
        """True when the stations span the face across as well as along (not all on one line)."""
        s = self.surface
        if s.n < 3:
            return False
        A = np.column_stack([np.ones(s.n), s.x_mm - s.x_mm.mean(), s.y_mm - s.y_mm.mean()])
        return bool(np.linalg.matrix_rank(A, tol=1e-9 * max(1.0, float(np.abs(A).max()))) == 3)


@dataclass(frozen=True)
class ThicknessTie:
    """Distance between two opposed faces at one place, minus its nominal value.

    Attributes
    ----------
    faces : (str, str)
        Faces ``(A, B)``; B is A's datum unless the body names another.
    x_mm, across_mm : float
        Place of the reading: along the travel and across (body coordinate of the faces' across axis), mm.
    value_um : float
        Distance between the faces minus nominal, µm (``wA + wB`` in outward heights).
    u_um : float
        Standard uncertainty of the reading, µm.
    label : str
        Where it came from (``"[[thickness]] #2, reading 3 (line 40)"``).
    """

    faces: tuple
    x_mm: float
    across_mm: float
    value_um: float
    u_um: float = DEFAULT_U_LENGTH_UM
    label: str = ""


@dataclass(frozen=True)
class HeightTie:
    """Height of face B above face A (both facing the same way), minus its nominal value.

    Attributes
    ----------
    faces : (str, str)
        Faces ``(A, B)``.
    x_mm : float
        Place along the travel, mm.
    across_mm : (float, float)
        Across positions on A and on B (body coordinates), mm.
    value_um : float
        ``wB(x, sB) - wA(x, sA)``, µm.
    u_um : float
        Standard uncertainty, µm.
    label : str
    """

    faces: tuple
    x_mm: float
    across_mm: tuple
    value_um: float
    u_um: float = DEFAULT_U_LENGTH_UM
    label: str = ""


@dataclass(frozen=True)
class SquarenessTie:
    """Squareness of two perpendicular faces at one place along the travel.

    Attributes
    ----------
    faces : (str, str)
        Faces ``(A, B)``; B is A's datum unless the body names another.
    x_mm : float
        Place along the travel, mm.
    value_urad : float
        ``90° - angle between the outward normals``, µrad (for an outside corner: the corner's angle minus
        90°, positive when the corner is open).
    u_urad : float
        Standard uncertainty, µrad.
    label : str
    """

    faces: tuple
    x_mm: float
    value_urad: float
    u_urad: float = DEFAULT_U_SQUARENESS_URAD
    label: str = ""


@dataclass(frozen=True, eq=False)
class TwistRun:
    """Level readings across one face, or across two faces on a bridge, at stations along the travel.

    Attributes
    ----------
    faces : tuple of str
        One face (the level reads its across slope) or two ``(A, B)`` (a bridge: ``(wB - wA)/(sB - sA)``).
    x_mm : ndarray, shape (k,)
        Stations along the travel, mm.
    slope_urad : ndarray, shape (k,)
        Readings, µrad (µm/m), rising towards +s (one face) or towards B (two faces); each run has its own
        unknown zero.
    across_mm : tuple of float
        Across positions (body coordinates) of the level's feet on the two faces (two-face runs), mm.
    u_urad : float
        Standard uncertainty of one reading, µrad.
    label : str
    """

    faces: tuple
    x_mm: np.ndarray
    slope_urad: np.ndarray
    across_mm: tuple = ()
    u_urad: float = DEFAULT_U_TWIST_URAD
    label: str = ""


@dataclass(frozen=True, eq=False)
class GuidewayBody:
    """A guideway body: its faces and the ties between them.

    Attributes
    ----------
    ident : str
        Identification of the body.
    length_mm : float
        Length of the body along the travel, mm.
    faces : tuple of Face
        The measured faces (at least one).
    thickness : tuple of ThicknessTie
    heights : tuple of HeightTie
    squareness : tuple of SquarenessTie
    twist : tuple of TwistRun
    datum : str or None
        The face named as datum for every tie that involves it (ISO 5459 datum feature); ``None``: the
        second face of each tie.
    description : str
    material : str
    source : str
        The body file (for messages and reports).
    """

    ident: str
    length_mm: float
    faces: tuple
    thickness: tuple = ()
    heights: tuple = ()
    squareness: tuple = ()
    twist: tuple = ()
    datum: str | None = None
    description: str = ""
    material: str = ""
    source: str = ""
    notes: tuple = field(default=())

    def __post_init__(self):
        names = [f.name for f in self.faces]
        if not names:
            raise InputValueError("the guideway has no faces", where=self.source or None, fix="add a [[face]] table")
        if len(set(names)) != len(names):
            raise InputValueError("two faces have the same name", where=self.source or None,
                                  fix="give each face its own name")
        if self.datum is not None and self.datum not in names:
            raise InputValueError(
                f"the datum {self.datum!r} is not a face of this body (faces: {', '.join(names)})",
                where=self.source or None, fix="name one of the faces as datum",
            )

    def face(self, name: str) -> Face:
        """The face called ``name`` (``KeyError`` if there is none)."""
        for f in self.faces:
            if f.name == name:
                return f
        raise KeyError(name)

    @property
    def height_step_um(self) -> float:
        """The height step of the body's figures: the coarsest of its faces' (a figure that combines faces
        is known no finer than its coarsest face)."""
        return max((f.height_step_um for f in self.faces), default=0.001)

    @property
    def face_names(self) -> tuple:
        return tuple(f.name for f in self.faces)

    @property
    def primary_datum(self) -> Face:
        """The face that fixes the body frame: the named datum, else the first face listed."""
        return self.face(self.datum) if self.datum is not None else self.faces[0]
