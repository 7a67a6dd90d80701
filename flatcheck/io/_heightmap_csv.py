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
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..errors import InputFormatError, InputValueError
from ..form import HeightMap
from ._atomic import write_text_atomic
from ._text import read_text

__all__ = ["HEADER", "is_heightmap_csv", "read_heightmap_csv", "write_heightmap_csv", "format_heightmap_csv"]

HEADER = ("x_mm", "y_mm", "height_um")


#: How much of a file :func:`is_heightmap_csv` reads to find the header (comment lines may come first).
_SNIFF_BYTES = 1 << 16


def is_heightmap_csv(path) -> bool:
    """True when the file's first line that is neither blank nor a ``#`` comment is the header
    ``x_mm,y_mm,height_um`` (spaces and letter case aside), whatever the file is called.

    Only the beginning of the file is read. A missing, unreadable or binary file gives False
    (the reader the caller falls back to says what is wrong with it).
    """
    try:
        with open(path, "rb") as fh:
            head = fh.read(_SNIFF_BYTES)
    except OSError:
        return False
    if b"\x00" in head:
        return False
    text = head.decode("utf-8-sig", errors="replace")
    for raw in text.splitlines():
        s = raw.strip()
        if not s or s.startswith("#"):
            continue
        return tuple(f.strip().lower() for f in s.split(",")) == HEADER
    return False


def read_heightmap_csv(path, *, label: str | None = None) -> HeightMap:
    """Read a height-map CSV file into a :class:`~flatcheck.heightmap.HeightMap`.

    Raises
    ------
    InputFormatError
        Empty, binary or non-CSV file; missing or wrong header; wrong number of fields.
    InputValueError
        A value that is not a finite number; duplicate positions; fewer than three points.
    """
    path = Path(path)
    text = read_text(path)
    lines = text.splitlines()
    header_no = None
    for no, raw in enumerate(lines, start=1):
        s = raw.strip()
        if not s or s.startswith("#"):
            continue
        header_no = no
        break
    if header_no is None:
        raise InputFormatError(
            "the file has no data", where=str(path), fix="add the header x_mm,y_mm,height_um and one point per line"
        )
    names = tuple(f.strip().lower() for f in lines[header_no - 1].split(","))
    if names != HEADER:
        head = lines[header_no - 1].strip()
        sep = next((c for c in (";", "\t") if c in head and "," not in head), None)
        hint = f", separated by commas, not {'semicolons' if sep == ';' else 'tabs'}" if sep else ""
        raise InputFormatError(
            f"the header is {head!r}",
            where=f"{path}, line {header_no}",
            fix=f"the first non-comment line must be exactly x_mm,y_mm,height_um{hint} (convert other units first)",
        )
    # Fast path: numpy's C parser reads the body (comments and blank lines skipped); a
    # line-by-line scan runs only when it fails, to name the offending line.
    body = lines[header_no:]
    body_rows = _NumberedLines(body, header_no + 1)
    if not any(raw.strip() and not raw.lstrip().startswith("#") for raw in body):
        raise InputFormatError("the file has a header but no points", where=str(path), fix="add one point per line")
    try:
        arr = np.loadtxt(body, delimiter=",", comments="#", dtype=float, ndmin=2)
        if arr.shape[1] != 3:
            raise ValueError
    except ValueError:
        arr = None
    if arr is None or not np.isfinite(arr).all():
        _locate_bad_row(path, body_rows)
    x, y, z = arr[:, 0], arr[:, 1], arr[:, 2]
    if x.size < 3:
        raise InputValueError(
            f"only {x.size} point(s)", where=str(path), fix="a height map needs at least three points"
        )
    # repeated positions: sort by (y, x) and compare neighbours (O(n log n), fast for 10^6 points)
    kx, ky = np.round(x, 9), np.round(y, 9)
    order = np.lexsort((kx, ky))
    same = (kx[order][1:] == kx[order][:-1]) & (ky[order][1:] == ky[order][:-1])
    if same.any():
        pairs = np.flatnonzero(same)
        # the first point (in file order) that repeats an earlier one
        firsts = np.minimum(order[pairs], order[pairs + 1])
        seconds = np.maximum(order[pairs], order[pairs + 1])
        k = int(np.argmin(seconds))
        dup, first = int(seconds[k]), int(firsts[k])
        raise InputValueError(
            f"position ({x[dup]:g}, {y[dup]:g}) mm appears more than once (first on line "
            f"{_line_of_point(body_rows, first)})",
            where=f"{path}, line {_line_of_point(body_rows, dup)}",
            fix="average repeated readings into one point per position",
        )
    # points on one line (or one spot) enclose no area: say so here, where the file can be named
    dx, dy = x - x.mean(), y - y.mean()
    cxx, cyy, cxy = float(dx @ dx), float(dy @ dy), float(dx @ dy)
    if cxx * cyy - cxy * cxy <= 1e-12 * (cxx + cyy) ** 2:
        raise InputValueError(
            f"all {x.size} points lie on one line, so they do not describe a surface",
            where=str(path),
            fix="give points spread over the surface in x and y (a single line is a straightness profile)",
        )
    return HeightMap(x, y, z, label=label if label is not None else path.stem)


class _NumberedLines:
    """``(line number, text)`` pairs of the body, made only when an error needs them."""

    def __init__(self, lines, first_no):
        self.lines, self.first_no = lines, first_no

    def __iter__(self):
        return iter(enumerate(self.lines, start=self.first_no))

    def __getitem__(self, k):
        return (self.first_no + (k % len(self.lines)), self.lines[k])


def _line_of_point(body_rows, k: int) -> int:
    j = -1
    for no, raw in body_rows:
        if raw.strip() and not raw.lstrip().startswith("#"):
            j += 1
            if j == k:
                return no
    return body_rows[-1][0]


def _locate_bad_row(path, body_rows):
    for no, raw in body_rows:
        s = raw.strip()
        if not s or s.startswith("#"):
            continue
        fields = [f.strip() for f in s.split(",")]
        if len(fields) != 3:
            raise InputFormatError(
                f"{len(fields)} fields where 3 are needed",
                where=f"{path}, line {no}",
                fix="write x_mm,y_mm,height_um separated by commas",
            )
        for name, f in zip(HEADER, fields):
            try:
                v = float(f)
            except ValueError:
                raise InputValueError(
                    f"{name} {f!r} is not a number", where=f"{path}, line {no}", fix="write a plain decimal number"
                ) from None
            if not np.isfinite(v):
                raise InputValueError(
                    f"{name} is {f}", where=f"{path}, line {no}", fix="remove the point or give a measured value"
                )
    raise InputFormatError("cannot parse the file as CSV", where=str(path), fix="check the separators")


def format_heightmap_csv(hm: HeightMap, *, comment: str = "") -> str:
    """The height map as CSV text with the standard header (10 significant digits)."""
    out = []
    for ln in comment.splitlines():
        out.append(f"# {ln}".rstrip())
    out.append(",".join(HEADER))
    for x, y, z in zip(hm.x_mm, hm.y_mm, hm.height_um):
        out.append(f"{x:.10g},{y:.10g},{z:.10g}")
    return "\n".join(out) + "\n"


def write_heightmap_csv(path, hm: HeightMap, *, comment: str = "") -> None:
    """Write the height map to ``path`` atomically."""
    write_text_atomic(path, format_heightmap_csv(hm, comment=comment))
