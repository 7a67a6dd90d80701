"""The height map: surface heights at known positions.

A :class:`HeightMap` is what every evaluation in flatcheck works on: the
reduction of a survey produces one, a height-map CSV file is read into one, and
flatness, grading, air-bearing and lapping analyses take one.

Positions are in millimetres on the surface, ``x`` along its length (east) and
``y`` along its width (north), origin at the south-west corner of the surface.
Heights are in micrometres, positive away from the material (up).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import GeometryError, InputValueError

__all__ = ["HeightMap", "regular_grid"]


def regular_grid(x_mm, y_mm, *, rtol: float = 1e-9):
    """Detect whether points form a complete regular (rectilinear) grid.

    Parameters
    ----------
    x_mm, y_mm : ndarray, shape (n,)
        Point positions in mm.
    rtol : float
        Relative tolerance (of the extent) for equal coordinates.

    Returns
    -------
    tuple (xs, ys, index) or None
        ``xs`` (nx,) and ``ys`` (ny,) sorted unique coordinates in mm and ``index``
        an int array of shape (ny, nx) giving the point at each grid node, or
        ``None`` when the points are not a complete grid (each node exactly once).
    """
    x = np.asarray(x_mm, dtype=float)
    y = np.asarray(y_mm, dtype=float)
    n = x.size
    if n < 4:
        return None
    span = max(np.ptp(x), np.ptp(y), 1e-300)
    tol = rtol * span + 1e-12

    def _levels(v):
        order = np.argsort(v, kind="stable")
        sv = v[order]
        breaks = np.concatenate(([True], np.diff(sv) > tol))
        level_of_sorted = np.cumsum(breaks) - 1
        levels = sv[breaks]
        lev = np.empty(n, dtype=np.int64)
        lev[order] = level_of_sorted
        return levels, lev

    xs, ix = _levels(x)
    ys, iy = _levels(y)
    if xs.size * ys.size != n or xs.size < 2 or ys.size < 2:
        return None
    index = np.full((ys.size, xs.size), -1, dtype=np.int64)
    index[iy, ix] = np.arange(n)
    if (index < 0).any():
        return None
    return xs, ys, index


@dataclass(frozen=True, eq=False)
class HeightMap:
    """Heights of a surface at known positions.

    Attributes
    ----------
    x_mm, y_mm : ndarray, shape (n,)
        Positions in mm (x along the length/east, y along the width/north).
    height_um : ndarray, shape (n,)
        Heights in µm, positive up (away from the material).
    names : tuple of str, optional
        Station names, one per point (for reduced surveys), else ``None``.
    length_mm, width_mm : float, optional
        Size of the whole surface in mm when known (the points may be inset).
    label : str
        Short description for reports ("granite plate 1000 x 630 mm").
    repeat_sd_um : float, optional
        Repeatability measured from repeat readings of the same positions: pooled standard
        deviation of one reading in µm (height-map CSV files with repeated positions), else None.
    repeat_dof : int
        Degrees of freedom of ``repeat_sd_um`` (readings minus positions; 0 when none).
    notes : tuple of str
        What the reader did or noticed (repeats averaged, an implausible extent), for reports.
    """

    x_mm: np.ndarray
    y_mm: np.ndarray
    height_um: np.ndarray
    names: tuple | None = None
    length_mm: float | None = None
    width_mm: float | None = None
    label: str = ""
    repeat_sd_um: float | None = None
    repeat_dof: int = 0
    notes: tuple = ()
    _grid: object = field(default=None, repr=False, compare=False)
    _interpolators: dict = field(default_factory=dict, repr=False, compare=False)

    def __post_init__(self):
        x = np.ascontiguousarray(self.x_mm, dtype=float).ravel()
        y = np.ascontiguousarray(self.y_mm, dtype=float).ravel()
        z = np.ascontiguousarray(self.height_um, dtype=float).ravel()
        if not (x.size == y.size == z.size):
            raise InputValueError(
                f"x_mm, y_mm and height_um differ in length ({x.size}, {y.size}, {z.size})",
                fix="give one height per position",
            )
        for name, arr in (("x_mm", x), ("y_mm", y), ("height_um", z)):
            bad = np.flatnonzero(~np.isfinite(arr))
            if bad.size:
                raise InputValueError(
                    f"{name} of point {bad[0] + 1} is not a finite number ({arr[bad[0]]})",
                    fix="remove the point or give a number",
                )
        for arr in (x, y, z):
            arr.setflags(write=False)
        object.__setattr__(self, "x_mm", x)
        object.__setattr__(self, "y_mm", y)
        object.__setattr__(self, "height_um", z)
        if self.names is not None:
            names = tuple(str(s) for s in self.names)
            if len(names) != x.size:
                raise InputValueError("one name per point is needed", fix="check the station names")
            object.__setattr__(self, "names", names)
        # a reader that already found the grid (row-by-row files) passes it; otherwise detect it
        object.__setattr__(self, "_grid", regular_grid(x, y) if self._grid is None else self._grid)

    # ------------------------------------------------------------------ basics
    @property
    def n(self) -> int:
        """Number of points."""
        return int(self.height_um.size)

    @property
    def xy_mm(self) -> np.ndarray:
        """Positions as an array of shape (n, 2) in mm."""
        return np.column_stack([self.x_mm, self.y_mm])

    @property
    def grid(self):
        """``(xs_mm, ys_mm, index)`` when the points are a complete regular grid, else ``None``.

        ``index[j, i]`` is the point at ``(xs_mm[i], ys_mm[j])``.
        """
        return self._grid

    def grid_heights_um(self) -> np.ndarray:
        """Heights as an array of shape (ny, nx) in µm; needs a regular grid.

        Raises
        ------
        GeometryError
            If the points are not a complete regular grid.
        """
        if self._grid is None:
            raise GeometryError("the points are not a complete regular grid")
        return self.height_um[self._grid[2]]

    def with_heights(self, height_um, label: str | None = None) -> "HeightMap":
        """A copy at the same positions with new heights in µm."""
        return HeightMap(
            self.x_mm,
            self.y_mm,
            height_um,
            names=self.names,
            length_mm=self.length_mm,
            width_mm=self.width_mm,
            label=self.label if label is None else label,
            repeat_sd_um=self.repeat_sd_um,
            repeat_dof=self.repeat_dof,
            notes=self.notes,
            _grid=self._grid,
        )

    @property
    def extent_mm(self) -> tuple[float, float, float, float]:
        """``(xmin, xmax, ymin, ymax)`` of the points in mm."""
        return (
            float(self.x_mm.min()),
            float(self.x_mm.max()),
            float(self.y_mm.min()),
            float(self.y_mm.max()),
        )

    # ----------------------------------------------------------- interpolation
    def sample(self, x_mm, y_mm, *, method: str = "linear") -> np.ndarray:
        """Interpolated heights in µm at arbitrary positions.

        On a regular grid the interpolation is bilinear (``method="linear"``) or
        cubic (``method="cubic"``, scipy's tensor-product cubic spline through the
        nodes). On scattered stations (a Union Jack) it is piecewise linear on the
        Delaunay triangulation of the stations. Positions outside the surveyed
        area give NaN: flatcheck never extrapolates a surface it has not measured.

        Parameters
        ----------
        x_mm, y_mm : array_like
            Positions in mm, broadcast together.
        method : {"linear", "cubic"}
            Interpolation between stations.

        Returns
        -------
        ndarray
            Heights in µm, the broadcast shape of ``x_mm`` and ``y_mm``.
        """
        xq, yq = np.broadcast_arrays(np.asarray(x_mm, float), np.asarray(y_mm, float))
        pts = np.column_stack([xq.ravel(), yq.ravel()])
        interp, swap = self._interpolator(method)
        out = interp(pts[:, ::-1] if swap else pts)
        return np.asarray(out, dtype=float).reshape(xq.shape)

    def _interpolator(self, method: str):
        """The interpolator for ``method``, built once per height map (Delaunay and splines cost time)."""
        from scipy.interpolate import LinearNDInterpolator, RegularGridInterpolator

        if self._grid is not None:
            xs, ys, index = self._grid
            if method == "cubic" and (xs.size < 4 or ys.size < 4):
                method = "linear"
        elif method != "linear":
            raise GeometryError(
                f"{method} interpolation needs stations on a regular grid",
                fix="use linear interpolation for scattered stations",
            )
        cached = self._interpolators.get(method)
        if cached is None:
            if self._grid is not None:
                interp = RegularGridInterpolator(
                    (ys, xs), self.height_um[index], method=method, bounds_error=False, fill_value=np.nan
                )
                cached = (interp, True)  # takes (y, x)
            else:
                cached = (LinearNDInterpolator(self.xy_mm, self.height_um, fill_value=np.nan), False)
            self._interpolators[method] = cached
        return cached

    def resampled(self, step_mm: float, *, method: str = "linear") -> "HeightMap":
        """The surface interpolated onto a regular grid of pitch ``step_mm`` (mm).

        Only nodes inside the surveyed area are kept.
        """
        xmin, xmax, ymin, ymax = self.extent_mm
        nx = max(2, int(np.floor((xmax - xmin) / step_mm + 1e-9)) + 1)
        ny = max(2, int(np.floor((ymax - ymin) / step_mm + 1e-9)) + 1)
        xs = np.linspace(xmin, xmin + (nx - 1) * step_mm, nx)
        ys = np.linspace(ymin, ymin + (ny - 1) * step_mm, ny)
        X, Y = np.meshgrid(xs, ys)
        Z = self.sample(X, Y, method=method)
        keep = np.isfinite(Z)
        return HeightMap(
            X[keep], Y[keep], Z[keep], length_mm=self.length_mm, width_mm=self.width_mm, label=self.label
        )
