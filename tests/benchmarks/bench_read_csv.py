"""Benchmark: reading a 10^6-point height-map CSV, each reader in a fresh process.

Baseline: ``numpy.loadtxt`` of the same file (plain parsing, nothing else), measured over a
process that only imports numpy; flatcheck's reader (``flatcheck.read_heightmap_csv``: every
check, line numbers for errors, grid detection, repeated positions) measured over a process that
only imports flatcheck. The cost each adds (time and peak resident memory) is compared: the
reader must stay within 2x of what loadtxt adds.

Run with ``python -m pytest tests/benchmarks/bench_read_csv.py -m benchmark -s``.
"""

import pytest


@pytest.mark.benchmark
def test_bench_read_csv_against_loadtxt(tmp_path, capsys, bench_tools):
    path = bench_tools.write_map(tmp_path / "map.csv")
    p = str(path)
    reps = 5
    t_np, m_np = bench_tools.median_fresh("import numpy", reps)
    t_lt, m_lt = bench_tools.median_fresh(
        f"import numpy as np; a = np.loadtxt({p!r}, delimiter=',', skiprows=1); assert a.shape == (10**6, 3)", reps)
    t_fc, m_fc = bench_tools.median_fresh("import flatcheck", reps)
    t_rd, m_rd = bench_tools.median_fresh(
        f"import flatcheck; hm = flatcheck.read_heightmap_csv({p!r}); assert hm.n == 10**6 and hm.grid is not None", reps)
    dt_lt, dm_lt = t_lt - t_np, m_lt - m_np
    dt_rd, dm_rd = t_rd - t_fc, m_rd - m_fc
    with capsys.disabled():
        print(f"\nread 10^6 points ({path.stat().st_size / 1e6:.0f} MB), fresh processes, medians of {reps}:")
        print(f"  numpy.loadtxt (baseline): {t_lt:.2f} s, {m_lt:.0f} MB peak; adds {dt_lt:.2f} s, {dm_lt:.0f} MB over import numpy "
              f"({t_np:.2f} s, {m_np:.0f} MB)")
        print(f"  flatcheck.read_heightmap_csv: {t_rd:.2f} s, {m_rd:.0f} MB peak; adds {dt_rd:.2f} s, {dm_rd:.0f} MB over "
              f"import flatcheck ({t_fc:.2f} s, {m_fc:.0f} MB)")
        print(f"  ratios (added cost): time {dt_rd / dt_lt:.2f}, memory {dm_rd / dm_lt:.2f}")
    assert dt_rd <= 2 * dt_lt
    assert dm_rd <= 2 * dm_lt


@pytest.mark.benchmark
def test_bench_read_csv_growth(tmp_path, capsys, bench_tools):
    # cost against size: 10^4 ... 10^6 points (fresh processes), growth exponents of time and memory
    sizes, times, mems = [], [], []
    _, m0 = bench_tools.median_fresh("import flatcheck, numpy", 3)
    t0, _ = bench_tools.median_fresh("import flatcheck, numpy", 3)
    for n in (100, 300, 1000):
        path = bench_tools.write_map(tmp_path / f"m{n}.csv", n=n)
        t, m = bench_tools.median_fresh(f"import flatcheck; flatcheck.read_heightmap_csv({str(path)!r})", 3)
        sizes.append(n * n)
        times.append(max(t - t0, 1e-3))
        mems.append(max(m - m0, 0.1))
    with capsys.disabled():
        print("\nread_heightmap_csv, cost over import flatcheck + numpy:")
        for s, t, m in zip(sizes, times, mems):
            print(f"  {s:>8} points: {t:.3f} s, {m:.1f} MB")
        print(f"  growth exponents (points 10^5 -> 10^6): time {bench_tools.growth_exponent(sizes[1:], times[1:]):.2f}, "
              f"memory {bench_tools.growth_exponent(sizes[1:], mems[1:]):.2f}")
    assert times[-1] < 30 * times[1]  # 11x the points: no worse than about linear (with noise)
