"""Benchmark: start-up of the command line against ``python -c "import numpy"``.

``flatcheck --help``, ``flatcheck units`` and ``python -c "import flatcheck"`` are each timed as a
whole fresh process, alternating with the baseline (a fresh ``python -c "import numpy"``) so
that a drift of the machine's speed hits both; the ratio is the median of the paired ratios.
The layout issue asks for 2x or less (2.5x at the outside).

Run:  python -m pytest tests/benchmarks/bench_startup.py -m benchmark -s
"""

from __future__ import annotations

import statistics
import subprocess
import sys
import time

import pytest

BASELINE = [sys.executable, "-c", "import numpy"]
CASES = {
    "flatcheck --help": [sys.executable, "-m", "flatcheck.cli.main", "--help"],
    "flatcheck units": [sys.executable, "-m", "flatcheck.cli.main", "units"],
    "import flatcheck": [sys.executable, "-c", "import flatcheck"],
}


def _wall(cmd) -> float:
    t0 = time.perf_counter()
    subprocess.run(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, check=True)
    return time.perf_counter() - t0


@pytest.mark.benchmark
@pytest.mark.parametrize("case", sorted(CASES))
def test_start_up_within_twice_importing_numpy(case):
    cmd = CASES[case]
    _wall(cmd), _wall(BASELINE)  # warm the file cache
    pairs = [(_wall(cmd), _wall(BASELINE)) for _ in range(9)]
    ratio = statistics.median(a / b for a, b in pairs)
    own = statistics.median(a for a, _ in pairs)
    base = statistics.median(b for _, b in pairs)
    print(f"\n{case}: {own * 1e3:.0f} ms; python -c 'import numpy': {base * 1e3:.0f} ms; ratio {ratio:.2f}")
    assert ratio <= 2.0
