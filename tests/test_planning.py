"""Tests of survey planning (flatcheck.survey: plan_union_jack, plan_grid, plan_lines, reading_sequence)."""

import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from flatcheck.errors import FlatcheckError, LayoutError
from flatcheck.survey import (
    grid_column_name,
    plan_grid,
    plan_lines,
    plan_union_jack,
    reading_sequence,
    summarize_layout,
)
from flatcheck.survey import Instrument, observations
from flatcheck.survey import simulate_survey


def _pos(survey, name):
    s = survey.stations[survey.station_index[name]]
    return np.array([s.x_mm, s.y_mm])


def _design_rank(survey):
    """Rank of the linear model 'station heights + line zeros' from the survey's observations.

    Unknowns: one height per station plus one zero per line (autocollimator) or one
    zero for all lines (levels). This is the model of REFERENCE.md section 2.
    """
    sim = simulate_survey(survey, lambda x, y: 0.0 * x)
    obs = observations(sim)
    n = len(survey.stations)
    if survey.instrument.gravity_referenced:
        nz = 1
        zcol = np.zeros(obs.value_um.size, dtype=int)
    else:
        nz = len(survey.lines)
        zcol = obs.line
    a = np.zeros((obs.value_um.size, n + nz))
    r = np.arange(obs.value_um.size)
    a[r, obs.i_to] += 1.0
    a[r, obs.i_from] -= 1.0
    a[r, n + zcol] = obs.base_mm  # a zero angle rises proportionally to the base
    return a.shape, np.linalg.matrix_rank(a)


def test_union_jack_steps_even_and_centred():
    s = plan_union_jack(1000, 630, 100, margin_mm=30)
    lay = s.meta["layout"]
    # 940 mm available -> 9 steps fit -> 8 (even); 570 mm -> 5 -> 4 (even)
    assert (lay["steps_x"], lay["steps_y"]) == (8, 4)
    # diagonal of the 800 x 400 rectangle: sqrt(800^2 + 400^2) = 894.43 mm (Pythagoras)
    # -> D/B = 8.94, the nearest even number is 8, so B_d = 894.43/8 = 111.80 mm
    assert lay["steps_diagonal"] == 8
    assert lay["diagonal_foot_spacing_mm"] == pytest.approx(math.hypot(800, 400) / 8, rel=1e-12)
    # centred: equal insets on opposite edges
    sw, ne = _pos(s, "SW"), _pos(s, "NE")
    assert sw[0] == pytest.approx(1000 - ne[0]) and sw[1] == pytest.approx(630 - ne[1])
    assert sw[0] >= 30 and sw[1] >= 30
    assert ne - sw == pytest.approx([800, 400])


def test_union_jack_names_and_midpoints():
    s = plan_union_jack(1200, 800, 100, margin_mm=30)
    names = [ln.name for ln in s.lines]
    assert names == ["SW-NE", "SE-NW", "SW-SE", "NW-NE", "SW-NW", "SE-NE", "W-E", "S-N"]
    for ln in s.lines:
        first, last = ln.name.split("-")
        assert ln.stations[0] == first and ln.stations[-1] == last
        assert ln.steps % 2 == 0
        # the midpoint of every line is a named station
        mid = ln.stations[ln.steps // 2]
        assert mid in {"C", "S", "N", "E", "W"}
        # equal steps: distance between successive stations equals the foot spacing
        p = np.array([_pos(s, n) for n in ln.stations])
        d = np.hypot(*np.diff(p, axis=0).T)
        assert d == pytest.approx(np.full(ln.steps, ln.foot_spacing_mm), rel=1e-12)
    # C is the intersection of the diagonals: midpoint of SW and NE
    assert _pos(s, "C") == pytest.approx((_pos(s, "SW") + _pos(s, "NE")) / 2)
    assert s.line("SW-NE").stations[3] == "SW-NE.3"
    assert len(set(st.name for st in s.stations)) == len(s.stations)


def test_union_jack_8x6_counts_and_redundancy():
    # 800 x 600 rectangle, B = 100: diagonal 1000 mm -> 10 steps of 100 mm (3-4-5 triangle).
    s = plan_union_jack(860, 660, 100, margin_mm=30)
    lay = s.meta["layout"]
    assert (lay["steps_x"], lay["steps_y"], lay["steps_diagonal"]) == (8, 6, 10)
    # stations: perimeter 2*(8+6) = 28; centre lines 7 + 5 interior sharing C = 11;
    # diagonals 9 interior each, C already counted: 8 + 8  -> 55 (hand count)
    assert len(s.stations) == 55
    summ = summarize_layout(s)
    assert summ.readings_per_pass == 2 * 10 + 2 * 8 + 2 * 6 + 8 + 6 == 62
    # Source: REFERENCE.md section 10 item 11 [D]: Union Jack 8x6 (diagonals 10 steps):
    # redundancy 2 with an autocollimator (rank deficiency 3), 7 with levels (deficiency 1).
    (m, n), rank = _design_rank(s)
    assert n - rank == 3 and m - rank == 2
    lev = plan_union_jack(860, 660, 100, margin_mm=30, instrument=Instrument("level", "um/m"))
    (m, n), rank = _design_rank(lev)
    assert n - rank == 1 and m - rank == 7


def test_grid_twist_deficiency():
    # Source: REFERENCE.md section 10 item 11 [D]: a 5x4-station grid of rows + columns has rank
    # deficiency 4 (a + bx + cy + dxy, twist included) with an autocollimator and 2 with levels.
    g = plan_grid(460, 360, 100, margin_mm=30)
    assert (g.meta["layout"]["steps_x"], g.meta["layout"]["steps_y"]) == (4, 3)
    assert len(g.stations) == 20
    (m, n), rank = _design_rank(g)
    assert n - rank == 4
    g2 = plan_grid(460, 360, 100, margin_mm=30, instrument=Instrument("level", "um/m"))
    (m, n), rank = _design_rank(g2)
    assert n - rank == 2


def test_grid_diagonals_make_twist_visible():
    g = plan_grid(460, 460, 100, margin_mm=30, diagonals=True)
    names = [ln.name for ln in g.lines]
    assert names[-2:] == ["A1-E5", "E1-A5"]
    assert g.line("A1-E5").foot_spacing_mm == pytest.approx(100 * math.sqrt(2))
    # rows + columns alone: deficiency 4; diagonals remove the twist mode -> 3 (a plane)
    (m, n), rank = _design_rank(g)
    assert n - rank == 3
    with pytest.raises(LayoutError, match="square"):
        plan_grid(460, 360, 100, margin_mm=30, diagonals=True)


def test_grid_names_and_indicator_rows_only():
    g = plan_grid(1000, 630, 100, margin_mm=30)
    assert g.stations[0].name == "A1"
    assert g.line("row-1").stations[:3] == ("A1", "B1", "C1")
    assert g.line("col-B").stations[:2] == ("B1", "B2")
    ind = plan_grid(80, 80, 10, margin_mm=5, instrument=Instrument("indicator", "um"))
    assert all(ln.name.startswith("row-") for ln in ind.lines)
    seq = reading_sequence(ind)
    # 80 mm less 2 x 5 mm margin = 70 mm -> 7 steps of 10 mm -> 8 x 8 stations, each read once
    assert len(seq) == len(ind.stations) == 64
    assert seq[0].from_station == "" and seq[0].to_station == "A1"


def test_column_names():
    assert [grid_column_name(i) for i in (0, 25, 26, 27, 51, 52)] == ["A", "Z", "AA", "AB", "AZ", "BA"]


def test_plan_lines_shares_stations():
    lines = [
        ("long-1", (50, 50), (1950, 50), 19),
        ("long-2", (50, 150), (1950, 150), 19),
        ("cross-1", (50, 50), (50, 150), 1),
        ("cross-2", (1950, 50), (1950, 150), 1),
    ]
    s = plan_lines(lines, length_mm=2000, width_mm=200)
    assert s.line("cross-1").stations == ("long-1.0", "long-2.0")
    assert s.line("cross-2").stations == ("long-1.19", "long-2.19")
    assert len(s.stations) == 40
    assert s.line("long-1").foot_spacing_mm == pytest.approx(100.0)


@pytest.mark.parametrize(
    "args, kwargs, fix",
    [
        ((100, 100, 100), {}, "foot spacing of at most"),
        ((1000, 630, 0), {}, "positive"),
        ((1000, 630, -5), {}, "positive"),
        ((1000, 630, 100), {"margin_mm": -1}, "margin"),
        ((1000, 630, 100), {"steps": (7, 4, 8)}, "odd"),
        ((1000, 630, 100), {"steps": (10, 4, 8)}, "do not fit"),
    ],
)
def test_union_jack_impossible(args, kwargs, fix):
    with pytest.raises(LayoutError) as exc:
        plan_union_jack(*args, **kwargs)
    assert fix in str(exc.value)
    assert exc.value.fix


def test_plan_lines_errors():
    with pytest.raises(LayoutError, match="off the"):
        plan_lines([("a", (0, 0), (3000, 0), 3)], length_mm=2000, width_mm=200)
    with pytest.raises(LayoutError, match="twice"):
        plan_lines([("a", (0, 0), (100, 0), 1), ("a", (0, 10), (100, 10), 1)], length_mm=200, width_mm=200)
    with pytest.raises(LayoutError):
        plan_lines([], length_mm=200, width_mm=200)


def test_reading_sequence_walks_each_line():
    s = plan_union_jack(1000, 630, 100)
    seq = reading_sequence(s)
    assert len(seq) == summarize_layout(s).readings_per_pass
    assert [r.number for r in seq] == list(range(1, len(seq) + 1))
    for a, b in zip(seq, seq[1:]):
        if a.line == b.line:
            assert a.to_station == b.from_station


@given(
    length=st.floats(300, 3000),
    width=st.floats(200, 2000),
    base=st.floats(20, 150),
    margin=st.floats(0, 50),
)
def test_union_jack_property(length, width, base, margin):
    try:
        s = plan_union_jack(length, width, base, margin_mm=margin)
    except FlatcheckError:
        # impossible only when 2 steps do not fit one way
        assert min(length, width) - 2 * margin < 2 * base + 1e-6
        return
    lay = s.meta["layout"]
    nx, ny, nd = lay["steps_x"], lay["steps_y"], lay["steps_diagonal"]
    assert nx % 2 == ny % 2 == nd % 2 == 0
    # largest even number: adding 2 more steps would not fit
    assert nx * base <= length - 2 * margin + 1e-6 < (nx + 2) * base
    assert ny * base <= width - 2 * margin + 1e-6 < (ny + 2) * base
    d = math.hypot(nx * base, ny * base)
    assert abs(nd - d / base) <= 1.0 + 1e-9  # nearest even number
    for stn in s.stations:
        assert margin - 1e-6 <= stn.x_mm <= length - margin + 1e-6
        assert margin - 1e-6 <= stn.y_mm <= width - margin + 1e-6


def test_margin_leaving_no_room_is_named():
    # 2 x 400 mm of margin on a 630 mm width leaves nothing: the margin is the culprit, not the spacing
    for plan in (plan_union_jack, plan_grid):
        with pytest.raises(LayoutError) as exc:
            plan(1000, 630, 100, margin_mm=400)
        assert exc.value.where == "margin_mm" and "315" in exc.value.fix


def test_reading_cap_counts_what_is_read():
    from flatcheck.survey import MAX_READINGS_PER_PASS

    # Union Jack readings = 3 n_x + 3 n_y + 2 n_d (two diagonals, three lines each way); 1000 x 630 at 100 mm:
    # 3*8 + 3*4 + 2*8 = 52 (the count the plan command prints, checked by hand in tests/cli/test_plan.py)
    s = plan_union_jack(1000, 630, 100)
    assert summarize_layout(s).readings_per_pass == 52
    # a grid of (n_x+1) rows of n_x steps and (n_x+1) columns: 2 n (n+1) readings; a 200 x 200 station grid
    # (n = 199) -> 79 600 is planned; n = 354 -> 251 340 is over the cap of 250 000
    ok = plan_grid(199 * 10 + 60, 199 * 10 + 60, 10)
    assert summarize_layout(ok).readings_per_pass == 2 * 199 * 200 <= MAX_READINGS_PER_PASS
    with pytest.raises(LayoutError) as exc:
        plan_grid(354 * 10 + 60, 354 * 10 + 60, 10)
    assert exc.value.where == "foot_spacing_mm" and "251340" in exc.value.message
