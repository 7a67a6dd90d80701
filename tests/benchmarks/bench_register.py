"""Benchmark: history and due list of a register of thousands of surveys.

A register of 150 plates x 16 surveys = 2400 surveys is generated from one real entry (the sample
survey of KY-P3 with its full reduce document, 45 station heights and 76 readings; about 32 kB
of text a survey, as a real register holds), each survey with its own ident, date, hash and
flatness. Instruments with calibrations are linked to the surveys.

Timed (best of several runs):

- ``surface_history`` of one plate (its 16 surveys, rate fit and verdict) and
  ``due_list`` of the whole register (last survey of every plate, last calibration of every
  instrument, every survey checked against its instrument's calibrations);
- baseline in the same run: the same two calls on a copy of the same register with its
  indexes dropped, so that SQLite answers by full-table scans (the plain way);
- opening the register (header check plus SQLite's ``PRAGMA integrity_check`` of the whole file);
- adding one survey (one transaction, default durability).

Run:  python -m pytest tests/benchmarks/bench_register.py -m benchmark -s
"""

import dataclasses
import shutil
import sqlite3
import time
from pathlib import Path

import numpy as np
import pytest

SAMPLE = Path(__file__).resolve().parents[2] / "sample_readings" / "plate-KY-P3-2024-03-11.toml"
N_PLATES, N_SURVEYS = 150, 16


def _best(fn, repeat=5):
    best = np.inf
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


@pytest.mark.benchmark
def test_history_and_due_use_the_indexes(tmp_path):
    import flatcheck
    from flatcheck import open_surface as load_input
    from flatcheck.records import Calibration, Register, due_list, surface_history, survey_entry, text_sha256

    ev = flatcheck.evaluate_surface(load_input(SAMPLE), monte_carlo=dict(trials=300, seed=1))
    template = survey_entry(ev, SAMPLE.read_text(encoding="utf-8"), source_name=str(SAMPLE))
    rng = np.random.default_rng(1234)
    db = tmp_path / "big.sqlite"
    t_add = []
    with Register.open(db, create=True) as reg:
        for k in range(10):
            reg.set_instrument(f"KY-AC-{k:03d}", kind="autocollimator",
                               calibration=Calibration("2010-01-01", "2030-01-01", f"KY-CAL-{k}", "test"))
        for i in range(N_PLATES):
            for j in range(N_SURVEYS):
                date = f"{2010 + j}-{1 + (i % 12):02d}-{1 + (i % 28):02d}"
                e = dataclasses.replace(
                    template, ident=f"KY-P{i:04d}", measured_on=date,
                    content_sha256=text_sha256(f"{i} {j}"), flatness_um=float(2.0 + 0.1 * j + rng.normal(0, 0.05)),
                    instrument_ident=f"KY-AC-{(i + j) % 10:03d}")
                t0 = time.perf_counter()
                reg.add_survey(e)
                t_add.append(time.perf_counter() - t0)
                if len(t_add) == 40:  # the first 40 adds are timed with SQLite's default durability;
                    reg._con.execute("PRAGMA synchronous = OFF")  # the rest only build the test register
            if i % 10 == 0:
                reg.set_surface(f"KY-P{i:04d}", interval_months=12)
    size_mb = db.stat().st_size / 1e6
    plain = tmp_path / "plain.sqlite"
    shutil.copy(db, plain)
    con = sqlite3.connect(plain)
    for (name,) in con.execute("SELECT name FROM sqlite_master WHERE type = 'index' AND sql IS NOT NULL").fetchall():
        con.execute(f"DROP INDEX {name}")
    con.commit()
    con.close()

    def history(path, ident="KY-P0077"):
        with Register.open(path, readonly=True) as reg:
            t = _best(lambda: surface_history(reg, ident))
            h = surface_history(reg, ident)
        return t, h

    def due(path):
        with Register.open(path, readonly=True) as reg:
            t = _best(lambda: due_list(reg, on="2026-06-01", include_ok=True), repeat=3)
            d = due_list(reg, on="2026-06-01", include_ok=True)
        return t, d

    t_hist, h = history(db)
    t_hist_plain, h_plain = history(plain)
    t_due, d = due(db)
    t_due_plain, d_plain = due(plain)
    t_open = _best(lambda: Register.open(db, readonly=True).close(), repeat=3)
    assert [p.date for p in h.points] == sorted(p.date for p in h.points) and len(h.points) == N_SURVEYS
    assert h == h_plain and d == d_plain  # the same answers, with or without indexes
    assert len(d.items) == N_PLATES + 10
    print(
        f"\nregister of {N_PLATES * N_SURVEYS} surveys ({size_mb:.0f} MB):\n"
        f"  history of one plate: {t_hist * 1e3:.2f} ms indexed, {t_hist_plain * 1e3:.1f} ms by full scans "
        f"(ratio {t_hist_plain / t_hist:.0f})\n"
        f"  due list:             {t_due * 1e3:.1f} ms indexed, {t_due_plain * 1e3:.0f} ms by full scans "
        f"(ratio {t_due_plain / t_due:.0f})\n"
        f"  opening (header check + integrity_check): {t_open * 1e3:.0f} ms\n"
        f"  adding one survey (one transaction, default durability): median {np.median(t_add[:40]) * 1e3:.1f} ms"
    )
    assert t_hist < 0.05  # "at once"
    assert t_hist_plain / t_hist > 5
