"""The one way in: open any surface file flatcheck reads, reduced and ready to evaluate."""

from __future__ import annotations

from pathlib import Path

from ..errors import FlatcheckError
from ..evaluation import MeasuredSurface

__all__ = ["open_surface"]


def open_surface(path, *, method: str = "least-squares") -> MeasuredSurface:
    """Open a surface file: read it, reduce a survey, and return the measured surface.

    A file whose first line (after comments) is the header ``x_mm,y_mm,height_um``, or
    whose name ends in ``.csv`` and whose content is not a TOML survey, is read as a
    height map; anything else is read as a TOML survey (``format = "flatcheck-survey"``)
    and reduced.

    Parameters
    ----------
    path : str or os.PathLike
        The file.
    method : {"least-squares", "moody"}
        How a survey is reduced: least squares over the whole network, or the classic
        Union Jack worksheet.

    Returns
    -------
    MeasuredSurface
        The height map (µm at positions in mm) and, for a survey, the survey and its
        reduction.

    Raises
    ------
    FlatcheckError
        Any error of reading or reducing, naming the file (and the TOML line or field
        where there is one).
    """
    from ._heightmap_csv import is_heightmap_csv, looks_like_survey_toml, read_heightmap_csv
    from ._survey_toml import read_survey, require_readings

    path = Path(path)
    if path.suffix.lower() == ".x3p":  # ISO 25178-72 (a zip: no text content to look at)
        from ._x3p import read_x3p

        hm = read_x3p(path)
        _check_ranges(hm, path)
        return MeasuredSurface(str(path), hm)
    # the content decides: a TOML survey saved as .csv is read as the survey it is
    if is_heightmap_csv(path) or (path.suffix.lower() == ".csv" and looks_like_survey_toml(path) is None):
        hm = read_heightmap_csv(path)
        _check_ranges(hm, path)
        return MeasuredSurface(str(path), hm)
    survey = read_survey(path)
    require_readings(survey)  # an unread line, with its TOML line number
    from ..survey import reduce_survey

    try:
        red = reduce_survey(survey, method=method)
    except FlatcheckError as exc:  # the reduction knows the survey, not its file: name it
        where = exc.where or ""
        name = str(path)
        if name not in where:
            where = f"{name}, {where}" if where else name
        raise type(exc)(exc.message, where=where, fix=exc.fix) from None
    return MeasuredSurface(str(path), red.heightmap, survey, red)


def _check_ranges(hm, path) -> None:
    """Refuse positions and heights outside the ranges of docs/limits.md before any evaluation (a position of
    1e15 mm or a height of 1e300 µm would overflow the arithmetic or ask for terabytes)."""
    from ..limits import check_points_in_range

    check_points_in_range(hm.x_mm, hm.y_mm, hm.height_um, where=str(path))
