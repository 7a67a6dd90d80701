"""Benchmark: local flatness as the window shrinks.

1. The P3 sample (a Union Jack, stations about 100 mm apart): ``flatcheck reduce --window 10x10``
   against ``--window 250x250`` in the same run (baseline). A window below the station spacing
   is refused at once with the smallest window that means anything, so it must take less than
   2x the baseline; the smallest meaningful window (100 x 100 mm) is timed too.
2. A 500 x 500 point grid (2 mm pitch): the scan at windows of 250 down to 20 mm, against the
   per-window method (one ``solve_minimum_zone`` call per window, the earlier implementation's
   way) timed on a sample of windows and scaled (baseline). Prints the growth exponent of the
   scan time against the number of positions and against the points evaluated.

Run with ``python -m pytest tests/benchmarks/bench_local_flatness.py -m benchmark -s``.
"""

from pathlib import Path

import numpy as np
import pytest

from flatcheck.cli.main import run
from flatcheck.form import HeightMap, local_flatness, solve_minimum_zone
from flatcheck.form._local import _rect_edge_points

P3 = Path(__file__).resolve().parents[2] / "sample_readings" / "plate-KY-P3-2024-03-11.toml"


@pytest.mark.benchmark
def test_bench_small_window_on_the_sample(capsys, bench_tools):
    def cmd(window, code):
        def go():
            assert run(["reduce", str(P3), "--window", window]) == code
            capsys.readouterr()
        return go

    cmd("250x250", 0)()  # warm the imports (scipy's spatial and interpolate)
    t250 = bench_tools.median_time(cmd("250x250", 0), 5)
    t100 = bench_tools.median_time(cmd("100x100", 0), 5)
    t10 = bench_tools.median_time(cmd("10x10", 2), 5)
    t1 = bench_tools.median_time(cmd("1x1", 2), 5)
    with capsys.disabled():
        print(f"\nP3 reduce --window: 250x250 {t250:.3f} s (baseline); 100x100 {t100:.3f} s = {t100 / t250:.2f} x; "
              f"10x10 (refused) {t10:.3f} s = {t10 / t250:.2f} x; 1x1 (refused) {t1:.3f} s = {t1 / t250:.2f} x")
    assert t10 < 2 * t250 and t1 < 2 * t250


@pytest.mark.benchmark
def test_bench_scan_growth_on_a_grid(capsys, bench_tools):
    rng = np.random.default_rng(1234)
    n, pitch = 500, 2.0
    X, Y = np.meshgrid(np.arange(n) * pitch, np.arange(n) * pitch)
    Z = 0.4 * np.sin(X / 97.0) * np.cos(Y / 61.0) + 1e-6 * (X - 500) ** 2 + rng.normal(0, 0.03, X.shape)
    hm = HeightMap(X.ravel(), Y.ravel(), Z.ravel())
    local_flatness(hm, size_mm=250)  # warm up
    rows = []
    for w in (250.0, 100.0, 50.0, 20.0):
        lf = None

        def scan():
            nonlocal lf
            lf = local_flatness(hm, size_mm=w)

        t = bench_tools.median_time(scan, 3 if w >= 50 else 1)
        k = lf.flatness_um.size
        pts = (w / pitch + 1) ** 2 + 4 * (w / pitch) + 4  # nodes inside + edge crossings + corners (approx.)
        # baseline: one single-set solve per window (the earlier way), on up to 60 sampled windows
        sample = np.linspace(0, k - 1, min(k, 60)).astype(int)

        def per_window():
            for j in sample:
                cx, cy = lf.centre_x_mm[j], lf.centre_y_mm[j]
                x0, x1, y0, y1 = cx - w / 2, cx + w / 2, cy - w / 2, cy + w / 2
                inside = (hm.x_mm >= x0) & (hm.x_mm <= x1) & (hm.y_mm >= y0) & (hm.y_mm <= y1)
                bx, by = _rect_edge_points(hm, None, x0, x1, y0, y1)
                bz = hm.sample(bx, by)
                solve_minimum_zone(np.concatenate([hm.x_mm[inside], bx]), np.concatenate([hm.y_mm[inside], by]),
                                   np.concatenate([hm.height_um[inside], bz]))

        t_base = bench_tools.median_time(per_window, 1) * k / sample.size
        rows.append((w, k, pts, t, t_base))
    sizes = np.array([r[1] for r in rows], float)
    work = np.array([r[1] * r[2] for r in rows], float)
    times = np.array([r[3] for r in rows])
    with capsys.disabled():
        print(f"\nlocal flatness on a {n} x {n} grid ({pitch:g} mm pitch):")
        for w, k, pts, t, tb in rows:
            print(f"  window {w:g} mm: {k} positions, ~{pts:.0f} points each: {t:.2f} s; per-window solver "
                  f"(baseline, scaled from {min(k, 60)} windows) {tb:.2f} s = {tb / t:.1f} x slower")
        print(f"  growth exponent of the scan time: {bench_tools.growth_exponent(sizes, times):.2f} against positions, "
              f"{bench_tools.growth_exponent(work, times):.2f} against points evaluated; "
              f"time(20 mm) / time(250 mm) = {times[-1] / times[0]:.1f}")
    assert all(t <= 1.5 * tb for _, _, _, t, tb in rows[1:])  # never slower than one solver call per window
