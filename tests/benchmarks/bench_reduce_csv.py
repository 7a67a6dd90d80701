"""Benchmark: `flatcheck reduce map.csv` on a 1000 x 1000 point height map.

The whole command must be dominated by reading the file. Baseline in the same run:
``numpy.loadtxt`` of the same file (plain parsing, nothing else).

Run:  python -m pytest tests/benchmarks/bench_reduce_csv.py -m benchmark -s
"""

import time

import numpy as np
import pytest

from flatcheck.cli.main import run
from flatcheck.io import read_heightmap_csv


def _best(fn, repeat=3):
    best = np.inf
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


@pytest.mark.benchmark
def test_reduce_csv_is_dominated_by_reading(tmp_path, capsys):
    rng = np.random.default_rng(1234)
    x, y = np.meshgrid(np.arange(1000.0) * 0.5, np.arange(1000.0) * 0.5)
    z = 1e-6 * (x - 250) ** 2 + 0.3 * np.sin(x / 40) * np.cos(y / 55) + rng.normal(0, 0.05, x.shape)
    path = tmp_path / "map.csv"
    with open(path, "w") as f:
        f.write("x_mm,y_mm,height_um\n")
        np.savetxt(f, np.column_stack([x.ravel(), y.ravel(), z.ravel()]), fmt="%.6g,%.6g,%.5f")

    t_load = _best(lambda: np.loadtxt(path, delimiter=",", skiprows=1))
    t_read = _best(lambda: read_heightmap_csv(path))  # flatcheck's reader: parsing plus its checks

    def cmd(*extra):
        code = run(["reduce", str(path), *extra])
        capsys.readouterr()
        assert code == 0

    t_plain = _best(lambda: cmd("--window", "none"))
    t_default = _best(lambda: cmd(), repeat=2)
    with capsys.disabled():
        print(
            f"\nloadtxt {t_load:.2f} s; reduce (no local window) {t_plain:.2f} s = {t_plain / t_load:.2f} x loadtxt; "
            f"reduce (default 250x250 local window) {t_default:.2f} s = {t_default / t_load:.2f} x loadtxt; "
            f"of the plain command, reading the file {t_read:.2f} s ({t_read / t_plain:.0%}), "
            f"everything else {t_plain - t_read:.2f} s"
        )
    assert t_plain < 4 * t_load
    # dominated by reading: the evaluation and the summary together take less time than reading the file
    assert t_plain - t_read < t_read
