"""The bench chart: the surface divided into named cells, with the lap's working time in each.

Columns are lettered A.. from the west (small x), rows numbered 1.. from the south (small y); cells are
``cell_mm`` square from the surface's south-west corner, so they can be marked on the surface with a rule.
Here live the cell names (:func:`cell_column_name`), the chart's edges and its default cell
(:func:`chart_edges`, :func:`default_cell_mm`, :data:`MAX_CHART_CELLS`), the chart itself (:class:`CellChart`)
and its filling from a plan's dwell map, used by the pass plan (:mod:`flatcheck.lapping._plan`,
:mod:`flatcheck.lapping._passes`) and by the checks of a lap against a surface
(:mod:`flatcheck.lapping._targets`).
"""

from __future__ import annotations

import math
import string
from dataclasses import dataclass

import numpy as np

from ..errors import InputValueError
from ..form import HeightMap
from ._dwell import LapModel

__all__ = [
    "CellChart",
    "cell_column_name",
    "chart_edges",
    "default_cell_mm",
    "MAX_CHART_CELLS",
]


def cell_column_name(i: int) -> str:
    """Spreadsheet-style column name: 0 -> A, 25 -> Z, 26 -> AA."""
    name = ""
    i += 1
    while i > 0:
        i, rem = divmod(i - 1, 26)
        name = string.ascii_uppercase[rem] + name
    return name


@dataclass(frozen=True, eq=False)
class CellChart:
    """The surface divided into named cells with the working time in each.

    Columns are lettered A.. from the west (small x), rows numbered 1.. from the south (small y).

    Attributes
    ----------
    columns : tuple of str
    rows : tuple of str
    x_edges_mm : ndarray, shape (ncol + 1,)
    y_edges_mm : ndarray, shape (nrow + 1,)
    time : ndarray, shape (nrow, ncol)
        Time per cell in ``time_unit``; row 0 is row "1" (south).
    time_unit : str
    """

    columns: tuple
    rows: tuple
    x_edges_mm: np.ndarray
    y_edges_mm: np.ndarray
    time: np.ndarray
    time_unit: str

    def cell_of(self, x_mm, y_mm) -> list[str]:
        """Names of the cells containing the given points (mm)."""
        i = np.clip(np.searchsorted(self.x_edges_mm, np.asarray(x_mm, float), side="right") - 1, 0, len(self.columns) - 1)
        j = np.clip(np.searchsorted(self.y_edges_mm, np.asarray(y_mm, float), side="right") - 1, 0, len(self.rows) - 1)
        return [f"{self.columns[a]}{self.rows[b]}" for a, b in zip(np.atleast_1d(i), np.atleast_1d(j))]


#: Most cells a printed chart holds (26 lettered columns x 99 numbered rows' worth).
MAX_CHART_CELLS = 26 * 99


def default_cell_mm(lap: LapModel) -> float:
    """The chart's default cell side (mm): the lap's diameter, or its longer side."""
    return lap.diameter_mm if lap.shape == "round" else max(lap.length_mm, lap.width_mm)


def chart_edges(hm: HeightMap, lap: LapModel, cell_mm: float | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Cell edges of the chart along x and y (mm), without the check on their number.

    The chart covers the whole surface when its size is known (origin at the south-west corner), else the
    extent of the measured points. Cells are exactly ``cell_mm`` square, measured from that corner, so they
    can be marked on the surface with a rule; what is left at the east and north edges is one more, narrower
    cell when it is more than half a cell wide, else it joins the last cell (at most 1.5 cells wide).

    Parameters
    ----------
    hm : HeightMap
    lap : LapModel
    cell_mm : float, optional
        Cell side (mm); default :func:`default_cell_mm`.

    Returns
    -------
    x_edges_mm, y_edges_mm : ndarray
        Increasing edges, shapes (ncol + 1,) and (nrow + 1,).
    """
    if cell_mm is None:
        cell_mm = default_cell_mm(lap)
    if not (np.isfinite(cell_mm) and cell_mm > 0):
        raise InputValueError(f"chart cell size {cell_mm} mm must be > 0")
    xmin, xmax, ymin, ymax = hm.extent_mm
    x0, x1 = (0.0, hm.length_mm) if hm.length_mm else (xmin, xmax)
    y0, y1 = (0.0, hm.width_mm) if hm.width_mm else (ymin, ymax)
    x0, x1 = min(x0, xmin), max(x1, xmax)
    y0, y1 = min(y0, ymin), max(y1, ymax)
    return _edges(x0, x1, cell_mm), _edges(y0, y1, cell_mm)


def _edges(a: float, b: float, cell: float) -> np.ndarray:
    """Edges every ``cell`` from ``a``; a remainder up to half a cell joins the last cell."""
    full = int(math.floor((b - a) / cell + 1e-9))
    rest = (b - a) - full * cell
    if full == 0:
        return np.array([a, b])
    inner = a + cell * np.arange(full + 1)
    if rest > 0.5 * cell + 1e-9 * cell:
        return np.append(inner, b)
    inner[-1] = b  # nothing left, or a sliver that joins the last cell
    return inner


def _chart(hm, lap, xs, ys, plan_dwell, cell_mm) -> CellChart:
    xe, ye = chart_edges(hm, lap, cell_mm)
    ncol, nrow = xe.size - 1, ye.size - 1
    if ncol * nrow > MAX_CHART_CELLS:
        raise InputValueError(
            f"{ncol} x {nrow} chart cells of {xe[1] - xe[0]:.3g} mm are too many to print",
            fix="give a larger cell size",
        )
    X, Y = np.meshgrid(xs, ys)
    ci = np.clip(np.searchsorted(xe, X.ravel(), side="right") - 1, 0, ncol - 1)
    cj = np.clip(np.searchsorted(ye, Y.ravel(), side="right") - 1, 0, nrow - 1)
    t = np.zeros((nrow, ncol))
    np.add.at(t, (cj, ci), plan_dwell.ravel())
    t.setflags(write=False)
    return CellChart(
        columns=tuple(cell_column_name(i) for i in range(ncol)),
        rows=tuple(str(j + 1) for j in range(nrow)),
        x_edges_mm=xe,
        y_edges_mm=ye,
        time=t,
        time_unit=lap.time_unit,
    )


def _split_cell(name: str) -> tuple[str, int]:
    i = 0
    while i < len(name) and name[i].isalpha():
        i += 1
    return name[:i], int(name[i:])
