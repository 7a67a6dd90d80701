"""Helpers shared by the benchmarks: fresh-process timing and peak memory, medians, growth exponents.

Peak memory is the largest resident set of a child process, read with
``resource.getrusage(RUSAGE_CHILDREN)`` in a small wrapper process of its own (so that every
measurement starts from a fresh interpreter and no earlier child's peak is counted).
"""

import json
import subprocess
import sys
import time

import numpy as np
import pytest

_WRAPPER = r"""
import json, resource, subprocess, sys, time
t = time.perf_counter()
p = subprocess.run([sys.executable, "-c", sys.argv[1]], stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
dt = time.perf_counter() - t
kb = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss  # kilobytes on Linux
print(json.dumps({"rc": p.returncode, "s": dt, "kb": kb, "err": p.stderr[-3000:]}))
"""


def fresh(code: str, *, ok=(0,)) -> tuple:
    """Run ``code`` in a fresh interpreter; return (wall seconds, peak resident set in MB)."""
    out = subprocess.run([sys.executable, "-c", _WRAPPER, code], capture_output=True, text=True, check=True)
    res = json.loads(out.stdout.strip().splitlines()[-1])
    assert res["rc"] in ok, res["err"]
    return res["s"], res["kb"] / 1024.0


def median_fresh(code: str, repeat: int = 3, **kw) -> tuple:
    """Median time and median peak memory (MB) of ``repeat`` fresh runs of ``code``."""
    runs = [fresh(code, **kw) for _ in range(repeat)]
    return float(np.median([r[0] for r in runs])), float(np.median([r[1] for r in runs]))


def median_time(fn, repeat: int = 3) -> float:
    """Median wall time (s) of ``repeat`` calls of ``fn`` in this process."""
    ts = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        ts.append(time.perf_counter() - t0)
    return float(np.median(ts))


def growth_exponent(size, cost) -> float:
    """Slope of log(cost) against log(size): cost ~ size**exponent (least squares, numpy.polyfit)."""
    return float(np.polyfit(np.log(np.asarray(size, float)), np.log(np.asarray(cost, float)), 1)[0])


def write_map(path, n=1000, pitch=0.5, seed=1234):
    """A n x n point height-map CSV, row by row (seeded; the layout of bench_reduce_csv.py's map)."""
    rng = np.random.default_rng(seed)
    x, y = np.meshgrid(np.arange(float(n)) * pitch, np.arange(float(n)) * pitch)
    z = 1e-6 * (x - 250) ** 2 + 0.3 * np.sin(x / 40) * np.cos(y / 55) + rng.normal(0, 0.05, x.shape)
    with open(path, "w") as f:
        f.write("x_mm,y_mm,height_um\n")
        np.savetxt(f, np.column_stack([x.ravel(), y.ravel(), z.ravel()]), fmt="%.6g,%.6g,%.5f")
    return path


@pytest.fixture
def bench_tools():
    """The helpers above, for benchmark tests."""

    class Tools:
        pass

    t = Tools()
    t.fresh, t.median_fresh, t.median_time, t.growth_exponent = fresh, median_fresh, median_time, growth_exponent
    t.write_map = write_map
    return t
