"""Height-map CSV files: ``x_mm,y_mm,height_um`` per line, ``#`` starts a comment line.

Example::

    # graphite pad face, 80 mm diameter, indicator grid
    x_mm,y_mm,height_um
    0,0,0.12
    5,0,0.08
    ...

The header is required and must name exactly these three columns in this order
(so that a file in other units is never read silently as µm). Values are plain
decimal numbers; blank lines are ignored.

Repeat readings: a position may appear more than once (the same point read again).
Its heights are averaged into one point, and the scatter of the repeats about their
means is a measured repeatability: the pooled standard deviation of one reading,
``s^2 = sum over positions of sum (z - mean)^2 / sum (n_i - 1)``, with
``sum (n_i - 1)`` degrees of freedom (the usual pooled estimate of a common variance;
JCGM 100:2008 4.2.8 pools Type A evaluations this way, clause number from memory).
The map carries it as :attr:`HeightMap.repeat_sd_um` and :attr:`HeightMap.repeat_dof`.

How a large file is read: only a regular file of bounded size is opened
(:func:`flatcheck.io._text.open_regular`); the body is parsed in blocks of about
1 MB by numpy's C parser straight into the three coordinate arrays, so memory stays
close to the 24 bytes a point that the result needs. When a block does not parse,
a second pass reads line by line and names the offending line.
"""

from __future__ import annotations

import io
import math
import re
import warnings
from pathlib import Path

import numpy as np

from ..errors import InputFormatError, InputValueError
from ..form import HeightMap
from ._atomic import write_text_atomic
from ._text import open_regular

__all__ = ["HEADER", "is_heightmap_csv", "read_heightmap_csv", "write_heightmap_csv", "format_heightmap_csv",
           "looks_like_survey_toml"]

HEADER = ("x_mm", "y_mm", "height_um")


#: How much of a file :func:`is_heightmap_csv` reads to find the header (comment lines may come first).
_SNIFF_BYTES = 1 << 16

#: Bytes of the body parsed at once (a block ends at a line end).
_BLOCK_BYTES = 1 << 20

#: A mean station spacing (mm) above which a map's extent is implausible for its point count
#: (same basis as flatcheck.form's local-flatness check: no surveyed surface has stations 2 m apart).
_IMPLAUSIBLE_SPACING_MM = 2000.0

_SURVEY_LINE = re.compile(
    r'^\s*(format\s*=\s*"flatcheck-survey"|\[\[?\s*(surface|instrument|layout|line|conditions|station)\s*\]\]?)\s*(#.*)?$'
)


def is_heightmap_csv(path) -> bool:
    """True when the file's first line that is neither blank nor a ``#`` comment is the header
    ``x_mm,y_mm,height_um`` (spaces and letter case aside), whatever the file is called.

    Only the beginning of the file is read. A missing, unreadable, special (FIFO, device) or
    binary file gives False (the reader the caller falls back to says what is wrong with it).
    """
    head = _head_bytes(path)
    if head is None or b"\x00" in head:
        return False
    text = head.decode("utf-8-sig", errors="replace")
    for raw in text.splitlines():
        s = raw.strip()
        if not s or s.startswith("#"):
            continue
        return tuple(f.strip().lower() for f in s.split(",")) == HEADER
    return False


def looks_like_survey_toml(path):
    """The line number and text of the first line that marks a flatcheck TOML survey, else None.

    A survey states ``format = "flatcheck-survey"`` and has tables such as ``[surface]`` or
    ``[[line]]``; a height-map CSV has neither. Only the beginning of the file is read, and
    only a regular file (a FIFO or device gives None).
    """
    head = _head_bytes(path)
    if head is None or b"\x00" in head:
        return None
    for no, raw in enumerate(head.decode("utf-8-sig", errors="replace").splitlines(), start=1):
        if _SURVEY_LINE.match(raw):
            return no, raw.strip()
    return None


def _head_bytes(path):
    """The first :data:`_SNIFF_BYTES` of a regular file, or None (missing, special, unreadable)."""
    try:
        fh, _ = open_regular(path)
    except (InputFormatError, OSError):
        return None
    with fh:
        try:
            return fh.read(_SNIFF_BYTES)
        except OSError:
            return None


def read_heightmap_csv(path, *, label: str | None = None) -> HeightMap:
    """Read a height-map CSV file into a :class:`~flatcheck.form.HeightMap`.

    Parameters
    ----------
    path : str or os.PathLike
        The file (a regular file of at most ``flatcheck.io._text.MAX_TEXT_BYTES``).
    label : str, optional
        Description for reports (default: the file name without its suffix).

    Returns
    -------
    HeightMap
        Positions in mm and heights in µm, one point per position. Repeated positions are
        averaged; then ``repeat_sd_um`` (µm, one reading) and ``repeat_dof`` hold their
        pooled scatter and ``notes`` says so. A map whose extent is implausible for its
        number of points (a likely unit mistake) says so in ``notes`` as well.

    Raises
    ------
    InputFormatError
        Missing, empty, special, oversized, binary or non-UTF-8 file; missing or wrong header
        (a TOML survey in a ``.csv`` file is named as such); wrong number of fields.
    InputValueError
        A value that is not a finite number (with its line); fewer than three positions;
        all points on one line.
    """
    path = Path(path)
    fh, size = open_regular(path, wanted="a CSV height map (x_mm,y_mm,height_um)")
    with fh:
        header_no, body_start = _find_header(path, fh)
        fh.seek(body_start)
        x, y, z = _parse_body(fh, size - body_start)
        if x is None:  # the fast parse failed: find the offending line (or parse exactly, line by line)
            fh.seek(body_start)
            x, y, z = _parse_lines(path, fh, header_no + 1)
    if x.size == 0:
        raise InputFormatError("the file has a header but no points", where=str(path), fix="add one point per line")
    from ..limits import check_points_in_range

    check_points_in_range(x, y, z, where=str(path))  # docs/limits.md: before any grid, average or geometry
    notes = []
    grid = _raster_grid(x, y)
    repeat_sd, repeat_dof = None, 0
    if grid is None:
        x, y, z, repeat_sd, repeat_dof, note = _average_repeats(x, y, z)
        if note:
            notes.append(note)
    if x.size < 3:
        raise InputValueError(
            f"only {x.size} point(s)", where=str(path), fix="a height map needs at least three points"
        )
    if grid is None:
        # points on one line (or one spot) enclose no area: say so here, where the file can be named
        dx, dy = x - x.mean(), y - y.mean()
        cxx, cyy, cxy = float(dx @ dx), float(dy @ dy), float(dx @ dy)
        del dx, dy
        if cxx * cyy - cxy * cxy <= 1e-12 * (cxx + cyy) ** 2:
            raise InputValueError(
                f"all {x.size} points lie on one line, so they do not describe a surface",
                where=str(path),
                fix="give points spread over the surface in x and y (a single line is a straightness profile)",
            )
    hint = _extent_note(x, y, grid)
    if hint:
        notes.append(hint)
    from ._csv_meta import read_csv_meta  # '# length_mm = ...' lines above the header: size and description

    meta = read_csv_meta(path)
    return HeightMap(
        x, y, z, label=label if label is not None else (meta.description or path.stem),
        length_mm=meta.length_mm, width_mm=meta.width_mm,
        repeat_sd_um=repeat_sd, repeat_dof=repeat_dof, notes=tuple(notes), _grid=grid,
    )


def _find_header(path, fh):
    """Line number of the header and the byte offset of the body; checks the header."""
    head = fh.read(_SNIFF_BYTES)
    from ._text import wide_encoding

    wide = wide_encoding(head)
    if wide:
        raise InputFormatError(f"the file is {wide} text, not UTF-8", where=str(path),
                               fix="save it as UTF-8 (most editors offer the encoding under 'Save as'); give a CSV "
                               "height map (x_mm,y_mm,height_um)")
    if b"\x00" in head:
        raise InputFormatError("the file is binary, not text", where=str(path),
                               fix="give a CSV height map (x_mm,y_mm,height_um)")
    fh.seek(0)
    no, offset = 0, 0
    while True:
        raw = fh.readline()
        if not raw:
            raise InputFormatError(
                "the file has no data", where=str(path), fix="add the header x_mm,y_mm,height_um and one point per line"
            )
        no += 1
        offset += len(raw)
        try:
            text = raw.decode("utf-8-sig" if no == 1 else "utf-8")
        except UnicodeDecodeError:
            raise InputFormatError("the file is not valid UTF-8 text", where=f"{path}, line {no}",
                                   fix="save it as UTF-8") from None
        s = text.strip()
        if s and not s.startswith("#"):
            break
    names = tuple(f.strip().lower() for f in s.split(","))
    if names != HEADER:
        survey = looks_like_survey_toml(path)
        if survey is not None:
            raise InputFormatError(
                f"this file holds a flatcheck TOML survey ({survey[1]!r} on line {survey[0]}), not a CSV height map",
                where=str(path),
                fix="open it with flatcheck's commands, which read a survey whatever its name, or rename it to .toml",
            )
        sep = next((c for c in (";", "\t") if c in s and "," not in s), None)
        hint = f", separated by commas, not {'semicolons' if sep == ';' else 'tabs'}" if sep else ""
        raise InputFormatError(
            f"the header is {s!r}",
            where=f"{path}, line {no}",
            fix=f"the first non-comment line must be exactly x_mm,y_mm,height_um{hint} (convert other units first)",
        )
    return no, offset


def _parse_body(fh, nbytes: int):
    """Fast parse of the body (numpy's C parser, block by block) into x, y, z; (None,)*3 on any failure."""
    # rows can be no more than the line ends (+1 for a last line without one): allocate once
    start = fh.tell()
    rows, seen = 1, 0
    while seen <= nbytes:  # bounded by the size found when the file was opened
        blk = fh.read(1 << 20)
        if not blk:
            break
        seen += len(blk)
        rows += blk.count(b"\n")
    fh.seek(start)
    out = np.empty((3, rows))
    k = 0
    rest = b""
    while True:
        blk = fh.read(_BLOCK_BYTES)
        data = rest + blk
        if not blk:
            rest = b""
        else:
            cut = data.rfind(b"\n") + 1
            if cut == 0:
                rest = data
                continue
            data, rest = data[:cut], data[cut:]
        if data.strip():
            try:
                text = data.decode("utf-8")
                with warnings.catch_warnings():  # a block of comments only: numpy warns "no data"
                    warnings.simplefilter("ignore")
                    arr = np.loadtxt(io.StringIO(text, newline=None), delimiter=",", comments="#", dtype=float,
                                     ndmin=2)
            except (ValueError, UnicodeDecodeError):
                return None, None, None
            del text
            if arr.size and (arr.shape[1] != 3 or not np.isfinite(arr).all()):
                return None, None, None
            m = arr.shape[0] if arr.size else 0
            if k + m > rows:  # cannot happen (rows counts every line end); be safe
                return None, None, None
            out[:, k:k + m] = arr.T
            k += m
        if not blk:
            break
    return out[0, :k], out[1, :k], out[2, :k]


def _parse_lines(path, fh, first_no: int):
    """Exact line-by-line parse: the first bad line raises with its number; else x, y, z."""
    vals = []
    for no, raw in enumerate(fh, start=first_no):
        try:
            s = raw.decode("utf-8").strip()
        except UnicodeDecodeError:
            raise InputFormatError("the file is not valid UTF-8 text", where=f"{path}, line {no}",
                                   fix="save it as UTF-8") from None
        if "#" in s:
            s = s[: s.index("#")].strip()
        if not s:
            continue
        fields = [f.strip() for f in s.split(",")]
        if len(fields) != 3:
            raise InputFormatError(
                f"{len(fields)} fields where 3 are needed",
                where=f"{path}, line {no}",
                fix="write x_mm,y_mm,height_um separated by commas",
            )
        row = []
        for name, f in zip(HEADER, fields):
            try:
                if "_" in f:  # Python's float() takes 1_000; a CSV number has no separators
                    raise ValueError
                v = float(f)
            except ValueError:
                raise InputValueError(
                    f"{name} {f!r} is not a number", where=f"{path}, line {no}",
                    fix="write a plain decimal number (no digit separators or units)"
                ) from None
            if not math.isfinite(v):
                raise InputValueError(
                    f"{name} is {f}", where=f"{path}, line {no}", fix="remove the point or give a measured value"
                )
            row.append(v)
        vals.append(row)
    arr = np.array(vals, dtype=float).reshape(-1, 3)
    return arr[:, 0].copy(), arr[:, 1].copy(), arr[:, 2].copy()


def _raster_grid(x, y):
    """``(xs, ys, index)`` as :func:`flatcheck.form.regular_grid` gives it, found cheaply when the file
    lists a complete grid row by row (x fastest, both increasing); None otherwise.

    Only exact equality is used (the general detection, with its tolerance, runs in HeightMap
    when this gives None). A complete grid has each node once, so it has no repeated positions.
    """
    n = x.size
    if n < 4:
        return None
    nx = int(np.argmax(y != y[0])) if (y != y[0]).any() else n
    if nx < 2 or n % nx:
        return None
    ny = n // nx
    if ny < 2:
        return None
    X, Y = x.reshape(ny, nx), y.reshape(ny, nx)
    xs, ys = X[0], Y[:, 0]
    if not (np.all(np.diff(xs) > 0) and np.all(np.diff(ys) > 0)):
        return None
    if not (np.array_equal(X, np.broadcast_to(xs, X.shape)) and np.array_equal(Y, np.broadcast_to(ys[:, None], Y.shape))):
        return None
    # regular_grid merges levels closer than 1e-9 of the extent: keep its answer where that could matter
    span = max(float(xs[-1] - xs[0]), float(ys[-1] - ys[0]), 1e-300)
    tol = 1e-9 * span + 1e-12
    if np.diff(xs).min() <= tol or np.diff(ys).min() <= tol:
        return None
    return xs.copy(), ys.copy(), np.arange(n, dtype=np.int64).reshape(ny, nx)


def _average_repeats(x, y, z):
    """Average repeated positions (exactly equal after rounding to 1e-9 mm).

    Returns ``x, y, z, repeat_sd_um, repeat_dof, note``: one point per position (in the
    order of first appearance), the pooled standard deviation of one reading and its
    degrees of freedom (None and 0 when nothing repeats), and a note for reports.
    """
    kx, ky = np.round(x, 9), np.round(y, 9)
    order = np.lexsort((kx, ky))
    sx, sy = kx[order], ky[order]
    new = np.ones(x.size, dtype=bool)
    new[1:] = (sx[1:] != sx[:-1]) | (sy[1:] != sy[:-1])
    if new.all():
        return x, y, z, None, 0, ""
    group = np.cumsum(new) - 1  # group of each sorted point
    g = group.max() + 1
    counts = np.bincount(group, minlength=g)
    zs = z[order]
    mean = np.bincount(group, weights=zs, minlength=g) / counts
    ss = float(np.sum((zs - mean[group]) ** 2))
    dof = int(x.size - g)
    # one point per position, kept where the position first appears in the file
    first = np.full(g, x.size, dtype=np.int64)
    np.minimum.at(first, group, order)
    keep = np.argsort(first, kind="stable")
    idx = first[keep]
    sd = math.sqrt(ss / dof)
    repeated = int(np.count_nonzero(counts > 1))
    note = (
        f"{repeated} position(s) were read more than once ({int(counts[counts > 1].sum())} readings); each is "
        f"averaged into one point, and their scatter gives a repeatability of {sd:.3g} µm for one reading "
        f"({dof} degrees of freedom)"
    )
    return x[idx], y[idx], mean[keep], sd, dof, note


def _extent_note(x, y, grid):
    """A note when the map's extent is implausible for its number of points (a likely unit mistake)."""
    if grid is not None:
        xs, ys, _ = grid
        spacing = float(max(np.diff(xs).max(), np.diff(ys).max()))
        ex, ey = float(xs[-1] - xs[0]), float(ys[-1] - ys[0])
    else:
        ex, ey = float(np.ptp(x)), float(np.ptp(y))
        spacing = math.sqrt(max(ex, 1e-300) * max(ey, 1e-300) / x.size)
    if spacing <= _IMPLAUSIBLE_SPACING_MM:
        return ""
    return (
        f"the {x.size} points span {ex:g} x {ey:g} mm, about {spacing:g} mm apart: implausible for a surveyed "
        "surface; if the coordinates were written in µm, convert them to mm (the header says x_mm,y_mm)"
    )


def _num(v: float) -> str:
    """The shortest decimal that reads back as ``v`` (``repr``), a whole number without its ".0"."""
    r = repr(v)
    return r[:-2] if r.endswith(".0") else r


def format_heightmap_csv(hm: HeightMap, *, comment: str = "") -> str:
    """The height map as CSV text with the standard header, every value at full precision.

    Each number is written as the shortest decimal that reads back as the same float (Python's ``repr``): a
    data file keeps every digit; rounding for people belongs to the screen and the page.
    """
    out = [f"# {ln}".rstrip() + "\n" for ln in comment.splitlines()]
    out.append(",".join(HEADER) + "\n")
    # rows in blocks: one string per block instead of one per row keeps a 10^6-point map's memory
    # near the size of its text
    step = 65536
    for k in range(0, hm.n, step):
        cols = [_column_text(a[k:k + step]) for a in (hm.x_mm, hm.y_mm, hm.height_um)]
        out.append("\n".join(map(",".join, zip(*cols))) + "\n")
    return "".join(out)


def _column_text(values) -> list:
    """:func:`_num` of every value (finite floats), by the C encoder in one call instead of one call each.

    ``json.dumps`` writes a float as its ``repr``; a token ending in ``.0`` is a whole number, whose
    ``.0`` :func:`_num` drops.
    """
    import json

    text = json.dumps(values.tolist())[1:-1] + ", "
    return text.replace(".0, ", ", ")[:-2].split(", ") if values.size else []


def write_heightmap_csv(path, hm: HeightMap, *, comment: str = "") -> None:
    """Write the height map to ``path`` atomically."""
    write_text_atomic(path, format_heightmap_csv(hm, comment=comment))
