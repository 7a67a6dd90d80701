"""Benchmark: ``flatcheck reduce map.csv --json`` on a 10^6-point map, fresh processes.

Baseline: the summary run of the same command (``flatcheck reduce map.csv``) in the same run.
The JSON run must stay within 3x the summary's time and peak memory, and under 500 MB. A
third case writes the map with ``--map-out``. The JSON text of the new writer is also compared
with ``json.dumps(indent=2)`` on a 10^5-point document, in process (plain named baseline: the
standard library's encoder).

Run with ``python -m pytest tests/benchmarks/bench_json.py -m benchmark -s``.
"""

import json
import numpy as np
import pytest

from flatcheck.cli._json import dumps, node_rows
from flatcheck.cli.common import jsonable
from flatcheck.form import HeightMap


def _cli(args):
    return ("import sys; from flatcheck.cli.main import run; "
            f"sys.exit(run({list(args)!r}))")


@pytest.mark.benchmark
def test_bench_reduce_json_10e6(tmp_path, capsys, bench_tools):
    path = str(bench_tools.write_map(tmp_path / "map.csv"))
    out = str(tmp_path / "out.csv")
    t_sum, m_sum = bench_tools.median_fresh(_cli(["reduce", path]), 3)
    t_js, m_js = bench_tools.median_fresh(_cli(["reduce", path, "--json"]), 3)
    t_mo, m_mo = bench_tools.median_fresh(_cli(["reduce", path, "--map-out", out]), 1)
    with capsys.disabled():
        print("\nreduce 10^6-point map, fresh processes (medians of 3):")
        print(f"  summary (baseline): {t_sum:.2f} s, {m_sum:.0f} MB peak")
        print(f"  --json: {t_js:.2f} s = {t_js / t_sum:.2f} x, {m_js:.0f} MB = {m_js / m_sum:.2f} x")
        print(f"  --map-out (1 run): {t_mo:.2f} s = {t_mo / t_sum:.2f} x, {m_mo:.0f} MB = {m_mo / m_sum:.2f} x")
    assert t_js <= 3 * t_sum and m_js <= 3 * m_sum and m_js < 500


@pytest.mark.benchmark
def test_bench_json_writer_against_json_dumps(capsys, bench_tools):
    rng = np.random.default_rng(1234)
    n = 100_000
    hm = HeightMap(rng.uniform(0, 1000, n), rng.uniform(0, 600, n), rng.normal(0, 1, n))
    doc_dicts = {"nodes": [{"x_mm": x, "y_mm": y, "height_um": z}
                           for x, y, z in zip(hm.x_mm.tolist(), hm.y_mm.tolist(), hm.height_um.tolist())]}
    t_ref = bench_tools.median_time(lambda: json.dumps(jsonable(doc_dicts), indent=2, ensure_ascii=False, allow_nan=False), 3)
    t_new_dicts = bench_tools.median_time(lambda: dumps(doc_dicts), 3)
    t_new_rows = bench_tools.median_time(lambda: dumps({"nodes": node_rows(hm)}), 3)
    ref = json.dumps(jsonable(doc_dicts), indent=2, ensure_ascii=False, allow_nan=False)
    assert dumps(doc_dicts) == ref and dumps({"nodes": node_rows(hm)}) == ref  # the same text
    with capsys.disabled():
        print(f"\nJSON of 10^5 nodes: json.dumps(jsonable(...), indent=2) (baseline) {t_ref:.3f} s; "
              f"new writer on dicts {t_new_dicts:.3f} s = {t_ref / t_new_dicts:.1f} x faster; "
              f"on columns {t_new_rows:.3f} s = {t_ref / t_new_rows:.1f} x faster")
    assert t_new_rows < t_ref
