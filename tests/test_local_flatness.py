"""Local flatness windows against dense sampling of the interpolant and analytic surfaces."""

import numpy as np
import pytest

from flatcheck.form import solve_minimum_zone
from flatcheck.errors import InputValueError
from flatcheck.form import HeightMap
from flatcheck.form import local_flatness


def _grid_map(fn, nx=11, ny=7, pitch=100.0):
    X, Y = np.meshgrid(np.arange(nx) * pitch, np.arange(ny) * pitch)
    return HeightMap(X.ravel(), Y.ravel(), fn(X, Y).ravel())


def _dense_mz(hm, x0, x1, y0, y1, n=461):
    """Reference: MZ of the interpolant sampled densely (scipy interpolators behind HeightMap.sample)."""
    X, Y = np.meshgrid(np.linspace(x0, x1, n), np.linspace(y0, y1, n))
    Z = hm.sample(X, Y)
    return solve_minimum_zone(X.ravel(), Y.ravel(), Z.ravel()).t_um


def test_single_bump_on_grid():
    # Plane plus one raised node (1 µm at x=500, y=300): the bilinear interpolant is plane + a
    # pyramid of height 1; any window containing the node has local flatness 1 exactly
    # (hand reasoning: the node is 1 above the plane through the window's other extremes).
    hm = _grid_map(lambda X, Y: 0.002 * X - 0.001 * Y + np.where((X == 500) & (Y == 300), 1.0, 0.0))
    lf = local_flatness(hm, size_mm=250, step_mm=50)
    assert lf.worst_um == pytest.approx(1.0, abs=1e-9)
    assert abs(lf.worst_x_mm - 500) <= 125 and abs(lf.worst_y_mm - 300) <= 125
    far = (np.abs(lf.centre_x_mm - 500) >= 225) | (np.abs(lf.centre_y_mm - 300) >= 225)
    assert np.all(lf.flatness_um[far] < 1e-9)  # windows not reaching the pyramid see only the plane


def test_exact_against_dense_sampling_grid(rng):
    hm = _grid_map(lambda X, Y: rng.normal(0, 1, X.shape))
    lf = local_flatness(hm, size_mm=(230, 170), step_mm=70)
    for k in range(0, lf.flatness_um.size, 5):
        cx, cy = lf.centre_x_mm[k], lf.centre_y_mm[k]
        ref = _dense_mz(hm, cx - 115, cx + 115, cy - 85, cy + 85)
        # dense sampling can only miss extremes: ref <= exact; with samples 0.5 mm apart and
        # interpolant slopes below 0.04 µm/mm it misses a kink by at most ~0.01 µm
        assert ref <= lf.flatness_um[k] + 1e-9
        assert lf.flatness_um[k] == pytest.approx(ref, abs=0.015)


def test_exact_against_dense_sampling_scattered():
    # Union-Jack-like scattered stations (diagonals, edges, centre lines) on 1000 x 600 mm
    rng = np.random.default_rng(1234)
    t = np.linspace(0, 1, 9)
    pts = [(1000 * t, 600 * t), (1000 * t, 600 * (1 - t)), (1000 * t, 0 * t), (1000 * t, 600 + 0 * t),
           (0 * t, 600 * t), (1000 + 0 * t, 600 * t), (500 + 0 * t, 600 * t), (1000 * t, 300 + 0 * t)]
    xy = np.unique(np.round(np.column_stack([np.concatenate([p[0] for p in pts]), np.concatenate([p[1] for p in pts])]), 6), axis=0)
    hm = HeightMap(xy[:, 0], xy[:, 1], rng.normal(0, 1, len(xy)))
    assert hm.grid is None
    lf = local_flatness(hm, size_mm=300, step_mm=100)
    for k in range(0, lf.flatness_um.size, 3):
        cx, cy = lf.centre_x_mm[k], lf.centre_y_mm[k]
        ref = _dense_mz(hm, cx - 150, cx + 150, cy - 150, cy + 150)
        assert ref <= lf.flatness_um[k] + 1e-9
        assert lf.flatness_um[k] == pytest.approx(ref, abs=0.015)


def test_whole_surface_window_equals_global_mz(rng):
    hm = _grid_map(lambda X, Y: rng.normal(0, 1, X.shape))
    lf = local_flatness(hm, size_mm=(1000, 600))
    assert lf.flatness_um.size == 1
    assert lf.worst_um == pytest.approx(solve_minimum_zone(hm.x_mm, hm.y_mm, hm.height_um).t_um, abs=1e-9)


def test_circle_on_paraboloid():
    # z = k((x-500)^2 + (y-300)^2): removing a plane leaves k*|p - c|^2 + const for any centre c,
    # so over a disc of radius R the minimum zone is k R^2 (analytic). Fine 10 mm grid: bilinear
    # interpolation error <= k (h^2/4 + h^2/4) = 5e-4 µm (bilinear error of x^2 and y^2 terms,
    # h^2/4 each; interpolation error of a quadratic on a 10 mm cell, hand calculation).
    k = 1e-5
    hm = _grid_map(lambda X, Y: k * ((X - 500) ** 2 + (Y - 300) ** 2), nx=101, ny=61, pitch=10.0)
    lf = local_flatness(hm, size_mm=200, shape="circle", step_mm=150)
    # a 180-gon inscribed in the circle reaches radius R cos(1 deg): relative error ~ 1.5e-4
    np.testing.assert_allclose(lf.flatness_um, k * 100**2, atol=5e-4 + 0.1 * 3e-4)


def test_window_below_station_spacing_is_refused_with_the_smallest_window(rng):
    # a 60 mm window on a 100 mm grid sees only the interpolation between stations (issue 18):
    # refused, and the message names the smallest window that sees the surface (the spacing)
    hm = _grid_map(lambda X, Y: rng.normal(0, 1, X.shape))
    with pytest.raises(InputValueError) as exc:
        local_flatness(hm, size_mm=60, step_mm=100)
    assert "smaller than the station spacing (100 mm)" in exc.value.message
    assert "at least 100 mm" in exc.value.fix and "100x100" in exc.value.fix
    with pytest.raises(InputValueError, match="d100"):
        local_flatness(hm, size_mm=99.9, shape="circle")
    assert local_flatness(hm, size_mm=100).flatness_um.size > 0  # the spacing itself is accepted


def test_windows_with_few_stations_say_what_they_see():
    # scattered stations on the edges of a 1000 x 600 mm area and one in the middle: a 300 mm
    # window in a corner of the empty inside holds fewer than 3 stations (counted by hand: 2)
    t = np.linspace(0, 1, 11)
    x = np.concatenate([1000 * t, 1000 * t, 0 * t[1:-1], 1000 + 0 * t[1:-1], [500]])
    y = np.concatenate([0 * t, 600 + 0 * t, 600 * t[1:-1], 600 * t[1:-1], [300]])
    hm = HeightMap(x, y, np.random.default_rng(1234).normal(0, 1, x.size))
    lf = local_flatness(hm, size_mm=300, step_mm=100)
    assert lf.undersampled and lf.notes and "station spacing" in lf.notes[0]
    assert lf.stations_in_window.min() < 3


def test_cubic_and_errors(rng):
    hm = _grid_map(lambda X, Y: 1e-6 * (X - 500) ** 2 + 0 * Y)
    # x-parabola: the cubic spline reproduces it exactly, so a 200 mm wide window gives 1e-6*100^2 = 0.01
    lf = local_flatness(hm, size_mm=(200, 200), step_mm=100, method="cubic")
    assert lf.worst_um == pytest.approx(0.01, rel=1e-6)
    with pytest.raises(InputValueError, match="does not fit"):
        local_flatness(hm, size_mm=2000)
    with pytest.raises(InputValueError, match="shape"):
        local_flatness(hm, size_mm=100, shape="hexagon")


# ------------------------------------------------------------ exact agreement with a brute-force scan (issue 18)


def _lp_zone(x, y, z):
    """Reference: vertical minimum zone by one HiGHS LP (scipy.optimize.linprog), independent of flatcheck."""
    from scipy.optimize import linprog

    A = np.column_stack([np.ones(x.size), x - x.mean(), y - y.mean()])
    A_ub = np.vstack([np.column_stack([A, np.zeros(x.size)]), np.column_stack([-A, -np.ones(x.size)])])
    res = linprog([0, 0, 0, 1], A_ub=A_ub, b_ub=np.concatenate([z, -z]), bounds=[(None, None)] * 4, method="highs",
                  options={"primal_feasibility_tolerance": 1e-10, "dual_feasibility_tolerance": 1e-10})
    assert res.status == 0
    return res.x[3]


def _brute_force(hm, cx, cy, w, h, shape):
    """Own brute-force scan of one window, written from the definition in docs/methods.md: the
    stations inside, the window corners and the crossings of its edges with every grid line or
    Delaunay edge (rectangle), or 180 points on the circle, heights from HeightMap.sample (scipy's
    interpolators), zone by HiGHS."""
    x, y, z = hm.x_mm, hm.y_mm, hm.height_um
    if shape == "circle":
        R = w / 2
        inside = (x - cx) ** 2 + (y - cy) ** 2 <= R * R + 1e-6
        a = np.linspace(0, 2 * np.pi, 180, endpoint=False)
        bx, by = cx + R * np.cos(a), cy + R * np.sin(a)
    else:
        x0, x1, y0, y1 = cx - w / 2, cx + w / 2, cy - h / 2, cy + h / 2
        inside = (x >= x0 - 1e-6) & (x <= x1 + 1e-6) & (y >= y0 - 1e-6) & (y <= y1 + 1e-6)
        bx, by = [x0, x1, x1, x0], [y0, y0, y1, y1]
        if hm.grid is not None:
            segs = [((gx, -1e9), (gx, 1e9)) for gx in hm.grid[0]] + [((-1e9, gy), (1e9, gy)) for gy in hm.grid[1]]
        else:
            from scipy.spatial import Delaunay

            tri = Delaunay(hm.xy_mm).simplices
            segs = {tuple(sorted((int(s[i]), int(s[j])))) for s in tri for i, j in ((0, 1), (1, 2), (0, 2))}
            segs = [(hm.xy_mm[i], hm.xy_mm[j]) for i, j in segs]
        for (px, py), (qx, qy) in segs:
            for c, lo, hi, vertical in ((x0, y0, y1, True), (x1, y0, y1, True), (y0, x0, x1, False), (y1, x0, x1, False)):
                a0, a1 = (px, qx) if vertical else (py, qy)
                if (a0 - c) * (a1 - c) < 0:
                    t = (c - a0) / (a1 - a0)
                    other = (py + t * (qy - py)) if vertical else (px + t * (qx - px))
                    if lo <= other <= hi:
                        bx.append(c if vertical else other)
                        by.append(other if vertical else c)
    bx, by = np.asarray(bx, float), np.asarray(by, float)
    bz = hm.sample(bx, by)
    return _lp_zone(np.concatenate([x[inside], bx]), np.concatenate([y[inside], by]), np.concatenate([z[inside], bz]))


@pytest.mark.parametrize(
    "kind, size, shape, step",
    [
        ("grid", (230, 170), "rect", 70),   # steps not commensurate with the 100 mm pitch
        ("grid", 100, "rect", None),        # the smallest window: the station spacing
        ("grid", 157.3, "circle", None),
        ("scattered", 250, "rect", None),
        ("scattered", 200, "circle", 90),
        ("uneven grid", (190, 130), "rect", 41),  # grid lines at irregular spacings
        ("uneven grid", 150, "circle", 60),
    ],
)
def test_every_window_agrees_with_a_brute_force_scan(kind, size, shape, step):
    rng = np.random.default_rng(1234)
    if kind == "grid":
        hm = _grid_map(lambda X, Y: rng.normal(0, 1, X.shape) + 1e-3 * X)
    elif kind == "uneven grid":
        xs = np.concatenate([[0.0], np.cumsum(rng.uniform(40, 100, 12))])
        ys = np.concatenate([[0.0], np.cumsum(rng.uniform(30, 90, 8))])
        X, Y = np.meshgrid(xs, ys)
        hm = HeightMap(X.ravel(), Y.ravel(), rng.normal(0, 1, X.size))
        assert hm.grid is not None
    else:  # Union Jack-like: diagonals, edges and centre lines of 1000 x 600 mm
        t = np.linspace(0, 1, 9)
        pts = [(1000 * t, 600 * t), (1000 * t, 600 * (1 - t)), (1000 * t, 0 * t), (1000 * t, 600 + 0 * t),
               (0 * t, 600 * t), (1000 + 0 * t, 600 * t), (500 + 0 * t, 600 * t), (1000 * t, 300 + 0 * t)]
        xy = np.unique(np.round(np.column_stack([np.concatenate([p[0] for p in pts]),
                                                 np.concatenate([p[1] for p in pts])]), 6), axis=0)
        hm = HeightMap(xy[:, 0], xy[:, 1], rng.normal(0, 1, len(xy)))
    lf = local_flatness(hm, size_mm=size, shape=shape, step_mm=step)
    w, h = lf.size_mm
    # the scan positions are the documented lattice: first and last windows touch the edges
    xmin, xmax, ymin, ymax = hm.extent_mm
    st = step if step is not None else min(w, h) / 4
    kx = int(np.ceil((xmax - xmin - w) / st - 1e-9)) + 1
    ky = int(np.ceil((ymax - ymin - h) / st - 1e-9)) + 1
    assert set(np.round(lf.centre_x_mm, 9)) <= set(np.round(np.linspace(xmin + w / 2, xmax - w / 2, kx), 9))
    assert set(np.round(lf.centre_y_mm, 9)) <= set(np.round(np.linspace(ymin + h / 2, ymax - h / 2, ky), 9))
    if kind != "scattered":
        assert lf.flatness_um.size == kx * ky
    ref = np.array([_brute_force(hm, cx, cy, w, h, shape) for cx, cy in zip(lf.centre_x_mm, lf.centre_y_mm)])
    # exact: same points, zone solved by HiGHS within its 1e-10 tolerances (heights of order 1 µm)
    np.testing.assert_allclose(lf.flatness_um, ref, atol=1e-7)
    assert lf.worst_um == pytest.approx(ref.max(), abs=1e-7)


def test_progress_adds_up_to_the_positions(rng):
    hm = _grid_map(lambda X, Y: rng.normal(0, 1, X.shape))
    seen = []
    lf = local_flatness(hm, size_mm=150, progress=seen.append)
    # every position reported once; on a grid every window lies inside, so all are kept:
    # centres per axis ceil((span - size) / step) + 1 with step = 150 / 4 (docs/methods.md)
    kx, ky = int(np.ceil((1000 - 150) / 37.5)) + 1, int(np.ceil((600 - 150) / 37.5)) + 1
    assert sum(seen) == lf.flatness_um.size == kx * ky
    assert len(seen) >= 1


def test_map_in_a_wrong_unit_is_bounded_and_named():
    # issue 15 item 25: a 40 mm pad measured on a 5 x 5 grid in µm but declared mm spans 40 x 40 m;
    # the scan must answer at once (no terabyte allocation) and say the extent is implausible
    X, Y = np.meshgrid(np.arange(5) * 10000.0, np.arange(5) * 10000.0)
    hm = HeightMap(X.ravel(), Y.ravel(), np.random.default_rng(1234).normal(0, 1, 25))
    with pytest.raises(InputValueError) as exc:
        local_flatness(hm, size_mm=250)
    assert "implausible" in exc.value.message and "µm read as mm" in exc.value.message
    # a huge extent with a fine step is refused before any allocation, with the count
    with pytest.raises(InputValueError, match="positions, more than"):
        local_flatness(hm, size_mm=10000, step_mm=1e-3)


@pytest.mark.parametrize("kind", ["noise", "quantised", "tilted-offset", "grid-ties"])
def test_batched_zones_agree_with_highs(kind):
    # the vectorised dual simplex behind the scan, on 150 sets with their own positions, against one
    # HiGHS LP per set (scipy.optimize.linprog); sizes 4..60 points, padded rows repeat a point
    from flatcheck.form._local import _zones

    rng = np.random.default_rng(1234)
    m, n = 150, 60
    X = rng.uniform(0, 100, (m, n))
    Y = rng.uniform(0, 50, (m, n))
    if kind == "grid-ties":  # nodes of a 6 x 10 grid, in a different order in each set
        gx, gy = np.repeat(np.arange(6.0), 10) * 20, np.tile(np.arange(10.0), 6) * 5
        order = np.argsort(rng.random((m, n)), axis=1)
        X, Y = gx[order], gy[order]
    Z = rng.normal(0, 1, (m, n))
    if kind == "quantised":
        Z = np.round(Z * 2) / 2  # many ties
    if kind == "tilted-offset":
        Z = Z + 1e4 + 0.5 * X - 0.3 * Y
    sizes = rng.integers(12 if kind == "grid-ties" else 4, n + 1, m)
    for k, s in enumerate(sizes):  # shorter sets: fill with repeats of their first point
        X[k, s:], Y[k, s:], Z[k, s:] = X[k, 0], Y[k, 0], Z[k, 0]
    t = _zones(X, Y, Z)
    ref = np.array([_lp_zone(X[k, :s], Y[k, :s], Z[k, :s]) for k, s in enumerate(sizes)])
    np.testing.assert_allclose(t, ref, atol=1e-7 * max(1.0, float(np.abs(ref).max())))


def test_progress_is_told_the_number_of_positions_first_and_the_steps_add_up_to_it():
    # a bar on long scans: start(total) before the first step, then steps that sum to the total
    # (the total is the number of window positions returned)
    import numpy as np

    from flatcheck.form import HeightMap, local_flatness

    x, y = np.meshgrid(np.arange(0, 401, 10.0), np.arange(0, 301, 10.0))
    hm = HeightMap(x.ravel(), y.ravel(), np.sin(x.ravel() / 100) * np.cos(y.ravel() / 70))
    seen = []

    class Bar:
        def start(self, total):
            seen.append(("start", total))

        def __call__(self, k):
            seen.append(("step", k))

    lf = local_flatness(hm, size_mm=50, progress=Bar())
    assert seen[0] == ("start", lf.flatness_um.size)
    assert sum(k for what, k in seen[1:] if what == "step") == lf.flatness_um.size
