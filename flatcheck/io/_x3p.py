"""Height maps as ISO 25178-72 X3P files (read and written with the ``x3pio`` package).

X3P (ISO 25178-72:2017 with Amd 1:2020) is a zip container of an XML description
(``main.xml``) with MD5 checksums and the point data; every coordinate in it is in
**metres**. flatcheck converts once, at this boundary: positions mm <-> m (x 1e-3), heights
µm <-> m (x 1e-6).

Writing
    Stations that lie on a regular grid (all positions on ``x0 + i dx``, ``y0 + j dy``)
    are written as a *surface* (feature type ``SUR``) with incremental x and y axes; the
    grid nodes that were not measured are ``NaN``, which the standard reads as "not
    measured". A Union Jack's stations lie on such a grid (the diagonals' stations fall
    on the sides' columns), so a plate survey is a surface with holes. Scattered stations
    are written as a *point cloud* (``PCL``) with all three coordinates stored. The grid's
    first node is placed with the file's placement offset, so positions keep their
    origin at the surface's south-west corner. Station names have no place in X3P and are
    not written.

    The metadata record names flatcheck as the software that made the data (probing
    type "Software": the heights were computed from readings, not probed) and carries the
    surface's identity in its comment, one ``key = value`` per line (``ident``,
    ``description``, ``material``, ``length_mm``, ``width_mm``, ``date``), the same keys as
    the header comments of a height-map CSV (:mod:`flatcheck.io._csv_meta`).

Reading
    A surface's measured points (its ``NaN`` nodes left out) or a point cloud's points,
    in the global coordinate system of the file (its placement applied), become a
    :class:`~flatcheck.HeightMap`; a profile (a single line) is refused, and so is a file
    of several layers. The comment's ``key = value`` lines give the map its size and label.

References
----------
.. [1] ISO 25178-72:2017 and Amd 1:2020, Geometrical product specifications (GPS) - Surface
       texture: Areal - Part 72: XML file format x3p (structure as summarised in the package
       documentation of x3pio 2.0.0; the standard's text was not consulted).
"""

from __future__ import annotations

import io
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import InputFormatError, InputValueError, OutputError
from ._atomic import write_bytes_atomic
from ._csv_meta import CsvMeta, parse_csv_meta

__all__ = ["X3pContents", "format_x3p", "write_x3p", "read_x3p", "read_x3p_contents", "M_PER_MM", "M_PER_UM"]

M_PER_MM = 1e-3  # exact by definition of the prefixes
M_PER_UM = 1e-6  # exact by definition of the prefixes

#: Largest distance (mm) of a position from its grid node for the points to count as a regular grid:
#: 1 nm, far below any station placement and far above the rounding of computed positions.
GRID_TOL_MM = 1e-6


@dataclass(frozen=True, eq=False)
class X3pContents:
    """What an X3P file holds, as flatcheck reads it.

    Attributes
    ----------
    heightmap : HeightMap
        The measured points: positions in mm, heights in µm.
    meta : CsvMeta
        Identity, size and date from the comment of the file's metadata (empty when none).
    feature : {"surface", "point cloud"}
        How the points were stored.
    grid_shape : tuple of int or None
        ``(rows, columns)`` of a surface, None for a point cloud.
    missing : int
        Grid nodes marked "not measured" (surfaces only).
    """

    heightmap: object
    meta: CsvMeta
    feature: str
    grid_shape: tuple | None
    missing: int


def _levels(v: np.ndarray, tol: float):
    """Index of each value on a regular lattice ``v0 + k d`` and the lattice, or None.

    Returns ``(v0, d, k)`` with ``k`` int of shape (n,), or None when the values are not on
    one regular lattice to within ``tol`` (mm) or take a single value.
    """
    s = np.unique(v)
    # merge values closer than tol (computed positions differ in the last bits)
    keep = np.concatenate(([True], np.diff(s) > tol))
    s = s[keep]
    if s.size < 2:
        return None
    d = float(np.min(np.diff(s)))
    v0 = float(s[0])
    k = np.rint((v - v0) / d).astype(np.int64)
    n = int(k.max()) + 1
    d = (float(s[-1]) - v0) / (n - 1)  # the spacing that puts the last level exactly
    if np.max(np.abs(v0 + k * d - v)) > tol:
        return None
    return v0, d, k


def _grid_of(x_mm: np.ndarray, y_mm: np.ndarray):
    """``(x0, dx, y0, dy, ix, iy)`` of the regular grid the points lie on, or None."""
    gx = _levels(x_mm, GRID_TOL_MM)
    gy = _levels(y_mm, GRID_TOL_MM)
    if gx is None or gy is None:
        return None
    (x0, dx, ix), (y0, dy, iy) = gx, gy
    nx, ny = int(ix.max()) + 1, int(iy.max()) + 1
    # a sparse scatter would make a huge grid of holes: store it as points instead
    if nx * ny > 16 * x_mm.size + 1024:
        return None
    flat = iy * nx + ix
    if np.unique(flat).size != flat.size:  # two points on one node
        return None
    return x0, dx, y0, dy, ix, iy


def _comment(meta: dict) -> str:
    lines = []
    for key in ("ident", "description", "material", "length_mm", "width_mm", "date"):
        v = meta.get(key)
        if v is None or v == "":
            continue
        text = repr(float(v)) if key.endswith("_mm") else " ".join(str(v).split())
        lines.append(f"{key} = {text}")
    for key, v in meta.items():
        if key not in ("ident", "description", "material", "length_mm", "width_mm", "date") and v not in (None, ""):
            lines.append(f"{key} = {' '.join(str(v).split())}")
    return "\n".join(lines)


def format_x3p(hm, *, meta: dict | None = None, creator: str | None = None) -> bytes:
    """The height map as the bytes of an X3P file.

    Parameters
    ----------
    hm : HeightMap
        Positions in mm, heights in µm.
    meta : dict, optional
        Identity written into the metadata comment: ``ident``, ``description``,
        ``material``, ``length_mm``, ``width_mm``, ``date`` (defaults: the map's own label
        as ``description`` and its size); other keys are written after them.
    creator : str, optional
        Person or institution that made the data (the metadata's ``Creator``).

    Returns
    -------
    bytes
        The file, as written by :mod:`x3pio` (ISO 25178-72 Amd 1:2020 revision).
    """
    import x3pio
    from datetime import UTC, datetime

    from .. import __version__

    m = {"description": hm.label, "length_mm": hm.length_mm, "width_mm": hm.width_mm}
    m.update(meta or {})
    metadata = x3pio.Metadata(
        date=datetime.now(UTC),
        creator=creator or None,
        instrument=x3pio.Instrument("flatcheck", "flatcheck", "", str(__version__)),
        probing_system=x3pio.ProbingSystem(
            x3pio.ProbingType.SOFTWARE, "heights computed by flatcheck from survey readings or a height map"
        ),
        comment=_comment(m) or None,
    )
    x, y, z = hm.x_mm, hm.y_mm, hm.height_um
    grid = _grid_of(x, y)
    if grid is not None:
        x0, dx, y0, dy, ix, iy = grid
        nx, ny = int(ix.max()) + 1, int(iy.max()) + 1
        Z = np.full((ny, nx), np.nan)
        Z[iy, ix] = z * M_PER_UM
        f = x3pio.Surface.from_array(
            Z,
            x_scale=dx * M_PER_MM,
            y_scale=dy * M_PER_MM,
            metadata=metadata,
            placement=x3pio.Placement.translation(x0 * M_PER_MM, y0 * M_PER_MM, 0.0),
            coordinate_system=x3pio.CoordinateSystem.VIEW,
        )
    else:
        pts = np.column_stack([x * M_PER_MM, y * M_PER_MM, z * M_PER_UM])
        f = x3pio.PointCloud.from_points(pts, metadata=metadata)
    return f.dumps()


def write_x3p(path, hm, *, meta: dict | None = None, creator: str | None = None) -> None:
    """Write the height map to ``path`` as X3P, atomically (see :func:`format_x3p`).

    Raises
    ------
    OutputError
        The folder does not exist or cannot be written, or the map cannot be stored.
    """
    import x3pio

    try:
        data = format_x3p(hm, meta=meta, creator=creator)
    except x3pio.X3pFormatError as exc:
        raise OutputError(f"the height map cannot be written as X3P: {exc}", where=str(path),
                          fix="check the heights and positions") from None
    write_bytes_atomic(path, data)


def read_x3p_contents(path) -> X3pContents:
    """Read an X3P file: its points as a height map, and what its comment says.

    Raises
    ------
    InputFormatError
        A missing file, a file that is not X3P (not a zip, no main.xml), a checksum that
        does not match (the file was changed after it was written), a profile, several layers.
    InputValueError
        Fewer than three measured points.
    """
    import x3pio

    from .. import HeightMap

    from ._text import open_regular

    path = Path(path)
    # a regular file only (a FIFO or a device would never end), of bounded size; x3pio reads the open file
    fh, _size = open_regular(path, wanted="an ISO 25178-72 .x3p file")
    with fh:
        data = fh.read()
    _refuse_bombs(data, path)
    try:
        f = x3pio.read(io.BytesIO(data))
    except x3pio.X3pChecksumError:
        raise InputFormatError(
            "a checksum stored in the X3P file does not match its content: the file was changed or damaged "
            "after it was written", where=str(path), fix="get a fresh copy of the file from where it was made"
        ) from None
    except x3pio.X3pFormatError as exc:
        raise InputFormatError(f"not a readable X3P file ({_short(str(exc))})", where=str(path),
                               fix="give an ISO 25178-72 .x3p file") from None
    except OSError as exc:
        raise InputFormatError(f"cannot read the file ({exc.strerror})", where=str(path),
                               fix="check the path and permissions") from None
    comment = f.metadata.comment if f.metadata is not None else None
    meta = parse_csv_meta(["# " + ln for ln in (comment or "").splitlines()], source=f"{path} (metadata comment)")
    if isinstance(f, x3pio.Profile):
        raise InputFormatError(
            "the X3P file holds a profile (one line of points), not a surface", where=str(path),
            fix="evaluate a profile's straightness elsewhere; flatcheck reads X3P surfaces and point clouds",
        )
    if len(f.layers) != 1:
        raise InputFormatError(
            f"the X3P file holds {len(f.layers)} layers; flatcheck reads files of one layer", where=str(path),
            fix="save the layer wanted as a file of its own",
        )
    layer = f.layers[0]
    if isinstance(f, x3pio.Surface):
        pts = layer.points()
        valid = layer.valid
        p = pts[valid]
        feature, shape, missing = "surface", tuple(layer.z.shape), int((~valid).sum())
    else:
        p = layer.points()
        feature, shape, missing = "point cloud", None, 0
    if p.shape[0] < 3:
        raise InputValueError(f"the X3P file has only {p.shape[0]} measured point(s)", where=str(path),
                              fix="a height map needs at least three points")
    x_mm, y_mm, z_um = p[:, 0] / M_PER_MM, p[:, 1] / M_PER_MM, p[:, 2] / M_PER_UM
    if not (np.isfinite(x_mm).all() and np.isfinite(y_mm).all()):
        raise InputValueError("a measured point of the X3P file has no finite position", where=str(path),
                              fix="check the file in the software that wrote it")
    label = meta.description or meta.ident or path.stem
    hm = HeightMap(x_mm, y_mm, z_um, length_mm=meta.length_mm, width_mm=meta.width_mm, label=label)
    return X3pContents(hm, meta, feature, shape, missing)


#: Largest ``main.xml`` unpacked (bytes): an X3P description is some kilobytes; a larger one is a damaged or hostile
#: file (a few megabytes of zip can unpack to gigabytes). The whole content is bounded by MAX_TEXT_BYTES.
MAX_X3P_XML_BYTES = 16 * 1024 * 1024


def _refuse_bombs(data: bytes, path) -> None:
    """Refuse a zip whose members would unpack to more than flatcheck reads (docs/limits.md), before unpacking.

    A file that is not a zip is left to x3pio, which says so. The sizes are those the zip's directory
    declares; Python's zip reader does not unpack a member beyond its declared size.
    """
    import zipfile

    from ._text import MAX_TEXT_BYTES

    try:
        with zipfile.ZipFile(io.BytesIO(data)) as z:
            members = z.infolist()
    except (zipfile.BadZipFile, OSError, ValueError, EOFError):
        return
    mib = 1024 * 1024
    total = sum(m.file_size for m in members)
    xml = sum(m.file_size for m in members if m.filename.lower().endswith(".xml"))
    if xml > MAX_X3P_XML_BYTES:
        raise InputFormatError(
            f"the X3P file's description (main.xml) would unpack to {xml / mib:.0f} MiB, more than any X3P description "
            f"({MAX_X3P_XML_BYTES // mib} MiB at most, docs/limits.md): the file is damaged or not an X3P file",
            where=str(path), fix="get a fresh copy of the file from where it was made")
    if total > MAX_TEXT_BYTES:
        raise InputFormatError(
            f"the X3P file would unpack to {total / mib:.0f} MiB, more than any surface flatcheck evaluates "
            f"({MAX_TEXT_BYTES // mib} MiB at most, docs/limits.md)", where=str(path),
            fix="give a smaller surface, or thin the data first")


def _short(text: str) -> str:
    """A message from the X3P reader on one line, numbers of many digits and very long text cut short."""
    import re

    text = re.sub(r"\d{20,}", lambda m: f"<a number of {len(m.group())} digits>", " ".join(text.split()))
    return text if len(text) <= 300 else text[:297] + "..."


def read_x3p(path):
    """Read an X3P file as a :class:`~flatcheck.HeightMap` (positions in mm, heights in µm).

    See :func:`read_x3p_contents` for what is read and the errors raised.
    """
    return read_x3p_contents(path).heightmap
