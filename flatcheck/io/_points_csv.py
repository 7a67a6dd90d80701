"""Point files of spheres and seats: ``x_mm,y_mm,z_mm`` per line, ``#`` starts a comment line.

Example::

    # spherical seat KY-S2, CMM, 1 mm probe, points in the machine's frame
    x_mm,y_mm,z_mm
    3.1416,0.0000,-9.4860
    ...

The header is required and must name exactly these three columns in this order, so that a file
in other units is never read silently as mm. Values are plain decimal numbers; blank lines are
ignored. Great-circle traces can be given as points, provided all of them are in one frame.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..errors import InputFormatError, InputValueError
from ..limits import check_range

__all__ = ["POINTS_HEADER", "read_points_csv", "format_points_csv"]

POINTS_HEADER = ("x_mm", "y_mm", "z_mm")
#: Most points read from one file (a dense scan of a ball: 10^6 points is far beyond any CMM job).
MAX_POINTS = 1_000_000


def read_points_csv(path) -> np.ndarray:
    """Read a point file into an array of shape (n, 3), mm.

    Parameters
    ----------
    path : str or Path
        The file.

    Returns
    -------
    ndarray, shape (n, 3)
        ``x, y, z`` of each point in mm, in file order.

    Raises
    ------
    InputFormatError
        Missing, empty or binary file; missing or wrong header; a line without three fields.
    InputValueError
        A value that is not a finite number (naming the line); fewer than 5 points; too many.
    """
    from flatcheck.io import read_text

    path = Path(path)
    text = read_text(path, wanted="a point file (x_mm,y_mm,z_mm)")
    lines = text.splitlines()
    header_no = None
    for no, raw in enumerate(lines, start=1):
        s = raw.strip()
        if s and not s.startswith("#"):
            header_no = no
            break
    if header_no is None:
        raise InputFormatError("the file has no data", where=str(path), fix="add the header x_mm,y_mm,z_mm and one point per line")
    head = lines[header_no - 1].strip()
    if tuple(f.strip().lower() for f in head.split(",")) != POINTS_HEADER:
        hint = ""
        if "height_um" in head.lower():
            hint = " (this looks like a height map: use flatcheck reduce)"
        raise InputFormatError(
            f"the header is {head!r}{hint}",
            where=f"{path}, line {header_no}",
            fix="the first non-comment line must be exactly x_mm,y_mm,z_mm (convert other units first)",
        )
    rows = []
    for no, raw in enumerate(lines[header_no:], start=header_no + 1):
        s = raw.strip()
        if not s or s.startswith("#"):
            continue
        fields = [f.strip() for f in s.split(",")]
        if len(fields) != 3:
            raise InputFormatError(
                f"{len(fields)} fields where 3 are needed", where=f"{path}, line {no}", fix="write x_mm,y_mm,z_mm separated by commas"
            )
        row = []
        for name, f in zip(POINTS_HEADER, fields):
            try:
                if "_" in f:  # Python reads "1_000" as 1000; a point file holds plain decimal numbers only
                    raise ValueError(f)
                v = float(f)
            except ValueError:
                raise InputValueError(f"{name} {f!r} is not a number", where=f"{path}, line {no}", fix="write a plain decimal number") from None
            if not np.isfinite(v):
                raise InputValueError(f"{name} is {f}", where=f"{path}, line {no}", fix="remove the point or give a measured value")
            row.append(check_range(v, "position_mm", where=f"{path}, line {no}, {name}", name=name))
        rows.append(row)
        if len(rows) > MAX_POINTS:
            raise InputValueError(f"more than {MAX_POINTS} points", where=str(path), fix="thin the points out first")
    if len(rows) < 5:
        raise InputValueError(
            f"only {len(rows)} point(s)", where=str(path), fix="a sphere's form needs at least 5 points spread over it"
        )
    return np.array(rows, dtype=float)


def format_points_csv(points_mm, *, comment: str = "", digits: int = 6) -> str:
    """Points as CSV text with the standard header (``digits`` decimals of a mm)."""
    out = [f"# {ln}".rstrip() for ln in comment.splitlines()]
    out.append(",".join(POINTS_HEADER))
    for x, y, z in np.asarray(points_mm, dtype=float):
        out.append(f"{x:.{digits}f},{y:.{digits}f},{z:.{digits}f}")
    return "\n".join(out) + "\n"
