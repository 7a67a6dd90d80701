"""Survey planning: where the stations go and which lines join them.

Every function here is pure and returns a *blank* :class:`~flatcheck.survey.Survey`
(lines without runs) that the user fills in with readings.

Naming scheme (compass points; x runs west -> east along the length, y south ->
north along the width, origin at the surface's south-west corner)::

    NW ------- N ------- NE        Union Jack: 8 lines
    |  \\       |       /  |         diagonals   SW-NE, SE-NW
    |    \\     |     /    |         sides       SW-SE, NW-NE, SW-NW, SE-NE
    W -------- C ------- E          centre      W-E, S-N
    |    /     |     \\    |
    |  /       |       \\  |        intermediate stations: <line>.<k>, k steps
    SW ------- S ------- SE        from the line's first station

Grid stations are named like a chess board: column letter (``A`` = west,
..., ``Z``, ``AA``...) and row number (``1`` = south); lines ``row-1``... run west
-> east and ``col-A``... south -> north. A station shared by several lines
appears once.

Each line of a Union Jack has an EVEN number of steps so that its midpoint is a
station (common practice, no single source); the
diagonals get their own foot spacing ``D / n_d`` so that they close exactly on
the corners.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import LayoutError
from ._model import Instrument, Station, Survey, SurveyLine, Surface
from ..units import MM_PER_INCH

__all__ = [
    "DEFAULT_MARGIN_MM",
    "MAX_READINGS_PER_PASS",
    "UNION_JACK_LINES",
    "ReadingStep",
    "LayoutSummary",
    "plan_union_jack",
    "plan_grid",
    "plan_lines",
    "reading_sequence",
    "summarize_layout",
    "grid_column_name",
]

#: Default inset of the surveyed rectangle from the edges, mm. Common practice
#: keeps the lines 25-38 mm (1.0-1.5 in) in from the edges: the edge band that
#: GGG-P-463c excludes from flatness (via Sandia SAND2008-2571C).
DEFAULT_MARGIN_MM = 30.0

#: Union Jack lines in walking order: (name, first station, last station, direction).
UNION_JACK_LINES = (
    ("SW-NE", "SW", "NE", "diagonal"),
    ("SE-NW", "SE", "NW", "diagonal"),
    ("SW-SE", "SW", "SE", "x"),
    ("NW-NE", "NW", "NE", "x"),
    ("SW-NW", "SW", "NW", "y"),
    ("SE-NE", "SE", "NE", "y"),
    ("W-E", "W", "E", "x"),
    ("S-N", "S", "N", "y"),
)

_TOL_MM = 1e-6  # positions closer than this are the same station


@dataclass(frozen=True)
class ReadingStep:
    """One reading in the order the user takes it.

    Attributes
    ----------
    number : int
        1-based running number over the whole survey.
    line : str
        Line name.
    step : int
        Step number along the line from its first station (0-based); for an
        indicator, the station number along the line.
    from_station : str
        Station the instrument (rear foot) stands on; empty for an indicator.
    to_station : str
        Station the step ends on (the station read, for an indicator).
    foot_spacing_mm : float
        Base length of the step in mm (0 for an indicator).
    """

    number: int
    line: str
    step: int
    from_station: str
    to_station: str
    foot_spacing_mm: float


@dataclass(frozen=True)
class LayoutSummary:
    """Counts and sizes of a planned survey, for display.

    Attributes
    ----------
    pattern : str
        ``"union-jack"``, ``"grid"`` or ``"lines"``.
    n_stations, n_lines : int
        Number of distinct stations and of lines.
    lines : tuple of (str, int, float)
        ``(name, steps, foot_spacing_mm)`` per line, in walking order.
    foot_spacings_mm : tuple of float
        The distinct foot spacings in mm (e.g. sides and diagonals), ascending.
    readings_per_pass : int
        Readings for one run of every line (steps for slope instruments,
        stations for an indicator).
    extent_mm : tuple of float
        ``(x_min, x_max, y_min, y_max)`` of the stations in mm.
    """

    pattern: str
    n_stations: int
    n_lines: int
    lines: tuple
    foot_spacings_mm: tuple
    readings_per_pass: int
    extent_mm: tuple


# ---------------------------------------------------------------------------
# helpers


class _Stations:
    """Collects stations, merging positions that coincide within ``_TOL_MM``."""

    def __init__(self):
        self.names: list[str] = []
        self.xy: list[tuple[float, float]] = []
        self._cells: dict[tuple[int, int], list[int]] = {}
        self._by_name: dict[str, int] = {}

    def _cell(self, x, y):
        return (math.floor(x / 1e-5), math.floor(y / 1e-5))

    def find(self, x: float, y: float):
        cx, cy = self._cell(x, y)
        for dx in (-1, 0, 1):
            for dy in (-1, 0, 1):
                for i in self._cells.get((cx + dx, cy + dy), ()):
                    px, py = self.xy[i]
                    if math.hypot(px - x, py - y) <= _TOL_MM:
                        return i
        return None

    def add(self, name: str, x: float, y: float) -> str:
        """Add a station (or return the existing one at this position); returns its name."""
        i = self.find(x, y)
        if i is not None:
            return self.names[i]
        if name in self._by_name:
            j = self._by_name[name]
            raise LayoutError(
                f"station name {name!r} is used at ({x:.3f}, {y:.3f}) mm and at "
                f"({self.xy[j][0]:.3f}, {self.xy[j][1]:.3f}) mm",
                fix="give the lines distinct names",
            )
        self._by_name[name] = len(self.names)
        self.names.append(name)
        self.xy.append((float(x), float(y)))
        self._cells.setdefault(self._cell(x, y), []).append(len(self.names) - 1)
        return name

    def stations(self) -> tuple:
        return tuple(Station(n, x, y) for n, (x, y) in zip(self.names, self.xy))


def _line_stations(reg: _Stations, name: str, start, end, steps: int, first: str | None = None, last: str | None = None):
    """Stations of a straight line of ``steps`` equal steps; returns (names, foot spacing mm)."""
    (x0, y0), (x1, y1) = start, end
    names = []
    for k in range(steps + 1):
        t = k / steps
        x = x0 + t * (x1 - x0)
        y = y0 + t * (y1 - y0)
        if k == 0 and first:
            default = first
        elif k == steps and last:
            default = last
        else:
            default = f"{name}.{k}"
        names.append(reg.add(default, x, y))
    return tuple(names), math.hypot(x1 - x0, y1 - y0) / steps


#: Units in which the planners word their errors: the sizes are always given to them in mm, but a
#: user who typed inches (``length_in``, ``--length-in``) reads the message in inches.
_SIZE_UNITS = ("mm", "in")


def _len(v_mm: float, units: str = "mm") -> str:
    """A length given in mm, as text in ``units`` ("100 mm", "3.93701 in"; 1 in = 25.4 mm exactly)."""
    if units == "in":
        return f"{v_mm / MM_PER_INCH:.6g} in"
    return f"{v_mm:g} mm"


def _key(name_mm: str, units: str = "mm") -> str:
    """A ``*_mm`` parameter name in ``units`` (``margin_mm`` -> ``margin_in``)."""
    return name_mm[:-3] + "_in" if units == "in" and name_mm.endswith("_mm") else name_mm


def _check_units(units: str) -> str:
    if units not in _SIZE_UNITS:
        raise LayoutError(f"length units {units!r} are not mm or in", fix="use units='mm' or units='in'")
    return units


def _positive(value, what: str, flag: str, units: str = "mm") -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise LayoutError(f"{what} is {value!r}, not a number", where=_key(flag, units), fix=f"give {what} as a number") from None
    if not math.isfinite(v) or v <= 0:
        shown = _len(v, units) if math.isfinite(v) else repr(value)
        raise LayoutError(f"{what} must be a positive number, got {shown}", where=_key(flag, units), fix=f"give a positive {what}")
    return v


def _margin(value, flag: str = "margin_mm", units: str = "mm") -> float:
    unit = "inches" if units == "in" else "mm"
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise LayoutError(f"margin is {value!r}, not a number", where=_key(flag, units), fix=f"give the margin in {unit}") from None
    if not math.isfinite(v) or v < 0:
        shown = _len(v, units) if math.isfinite(v) else repr(value)
        raise LayoutError(f"margin must be zero or positive, got {shown}", where=_key(flag, units), fix="give a margin of 0 or more")
    return v


#: Most readings one pass of a planned survey may need. A layout beyond this is almost always a typing
#: slip (a foot spacing in the wrong unit); refusing it early avoids building and printing hundreds of
#: thousands of stations. A 3000 x 1500 mm plate on a 25 mm grid needs about 14 000 readings; a 200 x 200
#: station grid from an automated survey about 80 000. The largest layout within it, about a 350 x 350
#: station grid read in rows and columns (122 000 stations, 244 000 readings), reduces in about 8 s and
#: 450 MB on two cores, extrapolated from the 300 x 300 grid measured in tests/benchmarks/
#: bench_reduction_sizes.py (5.6 s, 355 MB; time grows as stations^1.2, memory as stations^0.6; see
#: docs/performance.md). A 2000 x 2000 grid would need about 9 minutes and 4 GB.
MAX_READINGS_PER_PASS = 250_000


def _check_room(L: float, W: float, m: float, units: str = "mm") -> None:
    """Refuse a margin that leaves no surface to survey."""
    short = min(L, W)
    if 2 * m >= short:
        which = "length" if L <= W else "width"
        typical = "1-1.5 in" if units == "in" else "25-38 mm"
        raise LayoutError(
            f"a margin of {_len(m, units)} on each side leaves nothing of the {_len(short, units)} {which} to survey",
            where=_key("margin_mm", units),
            fix=f"use a margin under {_len(short / 2, units)} (typically {typical})",
        )


def _check_readings(n_readings: int, B: float, units: str = "mm") -> None:
    """Refuse a layout with more readings than anyone reads by hand (see MAX_READINGS_PER_PASS)."""
    if n_readings > MAX_READINGS_PER_PASS:
        typical = "inches (instrument bases are usually 2-12 in)" if units == "in" else "mm (instrument bases are usually 50-300 mm)"
        raise LayoutError(
            f"a foot spacing of {_len(B, units)} gives {n_readings} readings per pass, more than the "
            f"{MAX_READINGS_PER_PASS} flatcheck plans: the largest survey it handles is about a 350 x 350 station "
            "grid read in rows and columns, which reduces in about 8 s and 450 MB (docs/performance.md); "
            "beyond that time and memory grow past what a bench computer offers",
            where=_key("foot_spacing_mm", units),
            fix=f"check the foot spacing is in {typical}",
        )


def _steps_fitting(available_mm: float, base_mm: float, *, even: bool) -> int:
    n = int(math.floor(available_mm / base_mm + 1e-9))
    if even and n % 2:
        n -= 1
    return n


def _given_steps(value, what: str, *, even: bool) -> int:
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < (2 if even else 1):
        raise LayoutError(
            f"{what} must be {'an even' if even else 'a'} whole number >= 2, got {value!r}",
            where=what,
            fix="give the number of steps of the line",
        )
    if even and value % 2:
        raise LayoutError(
            f"{what} is {value}, an odd number: the line's midpoint would not be a station",
            where=what,
            fix=f"use {value - 1} or {value + 1} steps",
        )
    return int(value)


def grid_column_name(i: int) -> str:
    """Column letter(s) of 0-based column ``i``: A..Z, AA, AB, ... (like a spreadsheet)."""
    if i < 0:
        raise LayoutError(f"column index {i} is negative", fix="give a column index >= 0")
    s = ""
    n = i + 1
    while n:
        n, r = divmod(n - 1, 26)
        s = chr(ord("A") + r) + s
    return s


# ---------------------------------------------------------------------------
# patterns


def _checked_plate(length_mm, width_mm, foot_spacing_mm, margin_mm, units):
    """Checked plate size, foot spacing and margin of a planned layout.

    Returns ``(units, length, width, foot spacing, margin)``, lengths in mm (``units`` is only the
    unit the user typed, for the error messages); raises LayoutError naming the bad value.
    """
    u = _check_units(units)
    L = _positive(length_mm, "length", "length_mm", u)
    W = _positive(width_mm, "width", "width_mm", u)
    B = _positive(foot_spacing_mm, "foot spacing", "foot_spacing_mm", u)
    m = _margin(margin_mm, units=u)
    _check_room(L, W, m, u)
    return u, L, W, B, m


def plan_union_jack(
    length_mm: float,
    width_mm: float,
    foot_spacing_mm: float,
    *,
    margin_mm: float = DEFAULT_MARGIN_MM,
    instrument: Instrument = Instrument("autocollimator", "arcsec"),
    surface: Surface | None = None,
    steps: tuple | None = None,
    units: str = "mm",
) -> Survey:
    """Plan a Union Jack survey (8 lines: 2 diagonals, 4 sides, 2 centre lines).

    The surveyed rectangle is ``n_x * B`` by ``n_y * B``, with ``n_x`` (``n_y``)
    the largest EVEN number of steps that fits in the length (width) less twice
    the margin, centred on the surface. The diagonals get ``n_d`` steps, the even
    number nearest ``D / B``, and their own foot spacing ``B_d = D / n_d`` so that
    they end exactly on the corners (the user needs a second base for them).

    Parameters
    ----------
    length_mm, width_mm : float
        Size of the surface in mm along x (east) and y (north).
    foot_spacing_mm : float
        Foot spacing (base length) ``B`` of the sides and centre lines, mm.
    margin_mm : float
        Minimum inset of the lines from every edge, mm (default
        :data:`DEFAULT_MARGIN_MM`).
    instrument : Instrument
        The instrument the survey will be read with.
    surface : Surface, optional
        Description of the surface; a plain one of the given size by default.
    steps : (int, int, int), optional
        ``(n_x, n_y, n_d)`` to rebuild a given layout instead of choosing the
        steps (used when reading a survey file); must fit within the margin.
    units : {"mm", "in"}
        The unit the user gave the sizes in: errors state lengths and name
        parameters (``margin_in``...) in it. The sizes above are mm regardless.

    Returns
    -------
    Survey
        Blank survey with 9 named stations plus the intermediate ones, the 8 lines
        in walking order and ``meta["layout"]`` holding the parameters
        (``pattern, margin_mm, foot_spacing_mm, steps_x, steps_y, steps_diagonal,
        diagonal_foot_spacing_mm``).

    Raises
    ------
    LayoutError
        Non-positive sizes or spacing, a negative margin, or a surface too small
        for two steps each way within the margin.

    Examples
    --------
    >>> s = plan_union_jack(1000, 630, 100, margin_mm=30)
    >>> s.meta["layout"]["steps_x"], s.meta["layout"]["steps_y"], s.meta["layout"]["steps_diagonal"]
    (8, 4, 8)
    """
    u, L, W, B, m = _checked_plate(length_mm, width_mm, foot_spacing_mm, margin_mm, units)
    ax, ay = L - 2 * m, W - 2 * m
    if steps is None:
        nx = _steps_fitting(ax, B, even=True)
        ny = _steps_fitting(ay, B, even=True)
        if nx < 2 or ny < 2:
            short = "length" if nx < 2 else "width"
            avail = ax if nx < 2 else ay
            raise LayoutError(
                f"the {short} less twice the {_len(m, u)} margin leaves {_len(avail, u)}, less than 2 steps of {_len(B, u)}",
                where=_key("foot_spacing_mm", u),
                fix=f"use a foot spacing of at most {_len(max(avail, 0) / 2, u)} or a smaller margin",
            )
        nd = None
    else:
        nx = _given_steps(steps[0], "steps_x", even=True)
        ny = _given_steps(steps[1], "steps_y", even=True)
        nd = _given_steps(steps[2], "steps_diagonal", even=True)
        for n, avail, what in ((nx, ax, "steps_x"), (ny, ay, "steps_y")):
            if n * B > avail + 1e-9:
                raise LayoutError(
                    f"{n} steps of {_len(B, u)} ({_len(n * B, u)}) do not fit in {_len(avail, u)} (size less twice the margin)",
                    where=what,
                    fix="use fewer steps, a shorter foot spacing or a smaller margin",
                )
    lx, ly = nx * B, ny * B
    x0, y0 = (L - lx) / 2.0, (W - ly) / 2.0
    x1, y1 = x0 + lx, y0 + ly
    xm, ym = (x0 + x1) / 2.0, (y0 + y1) / 2.0
    diag = math.hypot(lx, ly)
    if nd is None:
        q = diag / B
        nd = max(2, 2 * int(round(q / 2.0)))
    bd = diag / nd
    _check_readings(3 * nx + 3 * ny + 2 * nd, B, u)
    named = {
        "SW": (x0, y0), "SE": (x1, y0), "NE": (x1, y1), "NW": (x0, y1),
        "S": (xm, y0), "E": (x1, ym), "N": (xm, y1), "W": (x0, ym), "C": (xm, ym),
    }
    reg = _Stations()
    for name in ("SW", "S", "SE", "E", "NE", "N", "NW", "W", "C"):
        reg.add(name, *named[name])
    lines = []
    for name, a, b, kind in UNION_JACK_LINES:
        n = {"diagonal": nd, "x": nx, "y": ny}[kind]
        st, _ = _line_stations(reg, name, named[a], named[b], n, a, b)
        # nominal bases exactly (the geometric spacing agrees to rounding error)
        lines.append(SurveyLine(name, st, bd if kind == "diagonal" else B))
    meta = {
        "layout": {
            "pattern": "union-jack",
            "margin_mm": m,
            "foot_spacing_mm": B,
            "steps_x": nx,
            "steps_y": ny,
            "steps_diagonal": nd,
            "diagonal_foot_spacing_mm": bd,
        }
    }
    return Survey(
        surface=surface or Surface("surface", L, W),
        instrument=instrument,
        pattern="union-jack",
        stations=reg.stations(),
        lines=tuple(lines),
        meta=meta,
    )


def plan_grid(
    length_mm: float,
    width_mm: float,
    foot_spacing_mm: float,
    *,
    margin_mm: float = DEFAULT_MARGIN_MM,
    instrument: Instrument = Instrument("autocollimator", "arcsec"),
    surface: Surface | None = None,
    diagonals: bool = False,
    steps: tuple | None = None,
    units: str = "mm",
) -> Survey:
    """Plan a grid survey: rows along x and columns along y at pitch ``B``.

    ``n_x`` (``n_y``) is the largest number of steps of ``B`` that fits in the
    length (width) less twice the margin; the grid is centred on the surface.
    Slope instruments get every row and every column; an indicator gets the rows
    only (each station is read once).

    Rows and columns alone cannot see twist (``x*y``) with an instrument re-aimed
    per line: add the diagonals (``diagonals=True``) or
    use a level. Diagonals run corner to corner through the grid stations, which
    needs a square grid (``n_x == n_y``); their foot spacing is ``B * sqrt(2)``.

    Parameters
    ----------
    length_mm, width_mm : float
        Size of the surface in mm.
    foot_spacing_mm : float
        Pitch of the grid = foot spacing of rows and columns, mm.
    margin_mm : float
        Minimum inset from every edge, mm.
    instrument : Instrument
        The instrument the survey will be read with.
    surface : Surface, optional
        Description of the surface.
    diagonals : bool
        Add the corner-to-corner diagonals (square grids only).
    steps : (int, int), optional
        ``(n_x, n_y)`` to rebuild a given grid instead of choosing the steps.
    units : {"mm", "in"}
        The unit the user gave the sizes in, for errors (see :func:`plan_union_jack`).

    Returns
    -------
    Survey
        Blank survey; ``meta["layout"]`` holds ``pattern, margin_mm,
        foot_spacing_mm, steps_x, steps_y, diagonals``.

    Raises
    ------
    LayoutError
        Bad sizes, fewer than 2 steps each way, or diagonals on a grid that is
        not square.
    """
    u, L, W, B, m = _checked_plate(length_mm, width_mm, foot_spacing_mm, margin_mm, units)
    ax, ay = L - 2 * m, W - 2 * m
    if steps is None:
        nx = _steps_fitting(ax, B, even=False)
        ny = _steps_fitting(ay, B, even=False)
        if nx < 2 or ny < 2:
            avail = ax if nx < 2 else ay
            raise LayoutError(
                f"the surface less twice the {_len(m, u)} margin leaves {_len(avail, u)}, less than 2 steps of {_len(B, u)}",
                where=_key("foot_spacing_mm", u),
                fix=f"use a pitch of at most {_len(max(avail, 0) / 2, u)} or a smaller margin",
            )
    else:
        nx = _given_steps(steps[0], "steps_x", even=False)
        ny = _given_steps(steps[1], "steps_y", even=False)
        for n, avail, what in ((nx, ax, "steps_x"), (ny, ay, "steps_y")):
            if n < 2 or n * B > avail + 1e-9:
                raise LayoutError(
                    f"{n} steps of {_len(B, u)} do not fit in {_len(avail, u)} (size less twice the margin), or are fewer than 2",
                    where=what,
                    fix="use 2 or more steps that fit, a shorter pitch or a smaller margin",
                )
    if diagonals and nx != ny:
        raise LayoutError(
            f"the grid is {nx} x {ny} steps: its corner-to-corner diagonals do not pass through the grid "
            "stations one cell at a time (that needs square cells AND a square grid)",
            where="diagonals",
            fix=f"use steps {min(nx, ny)} x {min(nx, ny)}, plan a Union Jack, or use a level (gravity sees twist)",
        )
    if instrument.reads_heights:
        _check_readings((nx + 1) * (ny + 1), B, u)
    else:
        _check_readings((ny + 1) * nx + (nx + 1) * ny + (2 * nx if diagonals else 0), B, u)
    x0 = (L - nx * B) / 2.0
    y0 = (W - ny * B) / 2.0
    xs = [x0 + i * B for i in range(nx + 1)]
    ys = [y0 + j * B for j in range(ny + 1)]
    reg = _Stations()
    cols = [grid_column_name(i) for i in range(nx + 1)]
    for j in range(ny + 1):
        for i in range(nx + 1):
            reg.add(f"{cols[i]}{j + 1}", xs[i], ys[j])
    lines = []
    for j in range(ny + 1):
        lines.append(SurveyLine(f"row-{j + 1}", tuple(f"{cols[i]}{j + 1}" for i in range(nx + 1)), B))
    if not instrument.reads_heights:
        for i in range(nx + 1):
            lines.append(SurveyLine(f"col-{cols[i]}", tuple(f"{cols[i]}{j + 1}" for j in range(ny + 1)), B))
        if diagonals:
            a, b = f"{cols[0]}1", f"{cols[nx]}{ny + 1}"
            c, d = f"{cols[nx]}1", f"{cols[0]}{ny + 1}"
            lines.append(SurveyLine(f"{a}-{b}", tuple(f"{cols[k]}{k + 1}" for k in range(nx + 1)), B * math.sqrt(2.0)))
            lines.append(
                SurveyLine(f"{c}-{d}", tuple(f"{cols[nx - k]}{k + 1}" for k in range(nx + 1)), B * math.sqrt(2.0))
            )
    meta = {
        "layout": {
            "pattern": "grid",
            "margin_mm": m,
            "foot_spacing_mm": B,
            "steps_x": nx,
            "steps_y": ny,
            "diagonals": bool(diagonals),
        }
    }
    return Survey(
        surface=surface or Surface("surface", L, W),
        instrument=instrument,
        pattern="grid",
        stations=reg.stations(),
        lines=tuple(lines),
        meta=meta,
    )


def plan_lines(
    lines,
    *,
    length_mm: float,
    width_mm: float,
    instrument: Instrument = Instrument("autocollimator", "arcsec"),
    surface: Surface | None = None,
    units: str = "mm",
) -> Survey:
    """Plan a survey of free straight lines.

    Parameters
    ----------
    lines : sequence of (str, (float, float), (float, float), int)
        ``(name, (x_start_mm, y_start_mm), (x_end_mm, y_end_mm), steps)`` per line,
        in walking order. Stations are spaced equally; a station whose position
        coincides (within 1e-6 mm) with one of an earlier line is shared, which is
        how lines tie into a network. New stations are named ``<line>.<k>``.
    length_mm, width_mm : float
        Size of the surface in mm; every station must lie on it.
    instrument : Instrument
        The instrument.
    surface : Surface, optional
        Description of the surface.
    units : {"mm", "in"}
        The unit the user gave the positions in, for errors (positions above are mm regardless).

    Returns
    -------
    Survey
        Blank survey with ``meta["layout"] = {"pattern": "lines", "lines": [...]}``.

    Raises
    ------
    LayoutError
        No lines, duplicate names, fewer than 1 step, zero-length lines or
        stations off the surface.
    """
    u = _check_units(units)
    L = _positive(length_mm, "length", "length_mm", u)
    W = _positive(width_mm, "width", "width_mm", u)
    lines = list(lines)
    if not lines:
        raise LayoutError("no lines were given", fix="give at least one line (name, start, end, steps)")
    reg = _Stations()
    out = []
    spec = []
    seen = set()
    for item in lines:
        try:
            name, start, end, steps = item
            start = (float(start[0]), float(start[1]))
            end = (float(end[0]), float(end[1]))
        except (TypeError, ValueError, IndexError):
            raise LayoutError(
                f"line {item!r} is not (name, (x, y), (x, y), steps)", fix="give each line as name, start, end, steps"
            ) from None
        name = str(name)
        if not name or name in seen:
            raise LayoutError(f"line name {name!r} is empty or used twice", where=f"line {name!r}", fix="give unique names")
        seen.add(name)
        if isinstance(steps, bool) or not isinstance(steps, (int, np.integer)) or steps < 1:
            raise LayoutError(f"steps is {steps!r}", where=f"line {name!r}", fix="give a whole number of steps >= 1")
        for (x, y), which in ((start, "start"), (end, "end")):
            if not (math.isfinite(x) and math.isfinite(y)) or x < -_TOL_MM or y < -_TOL_MM or x > L + _TOL_MM or y > W + _TOL_MM:
                f = MM_PER_INCH if u == "in" else 1.0
                unit = "inches" if u == "in" else "mm"
                raise LayoutError(
                    f"the {which} ({x / f:.6g}, {y / f:.6g}) {u} is off the {L / f:.6g} x {W / f:.6g} {u} surface",
                    where=f"line {name!r}",
                    fix=f"give positions in {unit} from the south-west corner, inside the surface",
                )
        if math.hypot(end[0] - start[0], end[1] - start[1]) <= _TOL_MM:
            raise LayoutError("the line starts and ends at the same point", where=f"line {name!r}", fix="check start and end")
        st, spacing = _line_stations(reg, name, start, end, int(steps))
        out.append(SurveyLine(name, st, spacing))
        spec.append((name, start, end, int(steps)))
    return Survey(
        surface=surface or Surface("surface", L, W),
        instrument=instrument,
        pattern="lines",
        stations=reg.stations(),
        lines=tuple(out),
        meta={"layout": {"pattern": "lines", "lines": spec}},
    )


# ---------------------------------------------------------------------------
# reading order and summary


def reading_sequence(survey: Survey) -> tuple:
    """The readings in the order the user takes them (each line walked forward).

    Parameters
    ----------
    survey : Survey
        A planned (or filled) survey.

    Returns
    -------
    tuple of ReadingStep
        Slope instruments: one entry per step ``from_station -> to_station``;
        indicators: one entry per station (``from_station`` empty).
    """
    out = []
    n = 0
    heights = survey.instrument.reads_heights
    for ln in survey.lines:
        if heights:
            for k, s in enumerate(ln.stations):
                n += 1
                out.append(ReadingStep(n, ln.name, k, "", s, 0.0))
        else:
            for k in range(ln.steps):
                n += 1
                out.append(ReadingStep(n, ln.name, k, ln.stations[k], ln.stations[k + 1], float(ln.foot_spacing_mm)))
    return tuple(out)


def summarize_layout(survey: Survey) -> LayoutSummary:
    """Counts, steps and foot spacings of a survey's layout (see :class:`LayoutSummary`)."""
    heights = survey.instrument.reads_heights
    lines = tuple((ln.name, ln.steps, float(ln.foot_spacing_mm)) for ln in survey.lines)
    spacings = sorted({round(float(ln.foot_spacing_mm), 9) for ln in survey.lines if not heights})
    per_pass = sum(len(ln.stations) if heights else ln.steps for ln in survey.lines)
    x, y = survey.x_mm, survey.y_mm
    extent = (float(x.min()), float(x.max()), float(y.min()), float(y.max())) if x.size else (0.0, 0.0, 0.0, 0.0)
    return LayoutSummary(
        pattern=survey.pattern,
        n_stations=len(survey.stations),
        n_lines=len(survey.lines),
        lines=lines,
        foot_spacings_mm=tuple(spacings),
        readings_per_pass=per_pass,
        extent_mm=extent,
    )
