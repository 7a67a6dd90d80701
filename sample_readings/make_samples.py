"""Make the sample readings of the fictional Kestrel Yard tool room (seeded, reproducible).

Run from the repository root::

    python sample_readings/make_samples.py

Every file is computed from an invented surface (tilt, bow, twist, waves and a
local low spot of a few µm) with flatcheck.simulate, plus Gaussian reading
noise, and rounded to the instrument's resolution. The true surfaces are
written in each file's notes so that a reduction can be compared with them.
"""

from __future__ import annotations

import dataclasses
import sys
from pathlib import Path

import numpy as np

from flatcheck.form import HeightMap
from flatcheck.io import write_text_atomic
from flatcheck.io import format_heightmap_csv
from flatcheck.io import format_survey
from flatcheck.survey import plan_grid, plan_lines, plan_union_jack
from flatcheck.survey import simulate_survey
from flatcheck.survey import Instrument, Surface

SEED = 20240311
HERE = Path(__file__).resolve().parent


def _rounded(survey, resolution):
    """Readings rounded to the instrument's display resolution (in reading units)."""
    lines = []
    for ln in survey.lines:
        runs = tuple(
            dataclasses.replace(r, readings=tuple(float(round(round(v / resolution) * resolution, 6)) for v in r.readings))
            for r in ln.runs
        )
        lines.append(dataclasses.replace(ln, runs=runs))
    return dataclasses.replace(survey, lines=tuple(lines))


# ---- plate P-3: 1000 x 630 mm granite, grade-0 class, before and after lapping


def _p3_shape(x, y):
    """Shape of plate P-3 in µm (no tilt): bow, twist, a long wave and a worn low spot."""
    u = (x - 500.0) / 500.0
    v = (y - 315.0) / 315.0
    bow = 2.2 * (1.0 - u**2) + 0.9 * (1.0 - v**2)  # crowned: centre high by ~3 µm
    twist = 0.8 * u * v
    wave = 0.35 * np.sin(2 * np.pi * x / 420.0)
    low = -1.6 * np.exp(-((x - 720.0) ** 2 + (y - 210.0) ** 2) / (2 * 70.0**2))  # worn where a gauge stand sits
    return bow + twist + wave + low


def _p3_tilt(x, y):
    return 4.0 + 0.0030 * x - 0.0045 * y  # the plate is not level on its stand: µm


def _p3_after(k):
    """Shape after k lapping sessions: high spots above the threshold lowered by 45 % each time."""

    def fn(x, y):
        s = _p3_shape(x, y)
        for _ in range(k):
            s = s - 0.45 * np.maximum(s - 1.2, 0.0)
        return _p3_tilt(x, y) + s

    return fn


def plate_p3(rng, sessions: int):
    inst = Instrument("autocollimator", "arcsec", reports="mirror-tilt", reading_uncertainty=0.15, model="tool-room asset 114")
    surface = Surface("granite surface plate, inspection bench 2", 1000.0, 630.0, ident="KY-P3", material="black granite")
    plan = plan_union_jack(1000.0, 630.0, 100.0, margin_mm=30.0, instrument=inst, surface=surface)
    runs = {name: ("forward", "reverse") for name in ("SW-SE", "NW-NE", "W-E")}
    sim = simulate_survey(plan, _p3_after(sessions), instrument_zero="random", noise_sd=0.15, runs=runs, rng=rng)
    sim = _rounded(sim, 0.01)
    dates = ["2024-03-11", "2024-04-02", "2024-04-23"]
    temps = [20.4, 20.1, 20.3]
    note = (
        "Kestrel Yard tool room (fictional). Plate on its three marked supports, soaked 24 h. "
        "Sides and centre line W-E read forward and back. "
        + ("Survey before lapping." if sessions == 0 else f"Survey after lapping session {sessions} (high spots only).")
        + " Simulated: true shape = crown + twist + wave + low spot near (720, 210) mm, reading noise 0.15 arcsec."
    )
    return dataclasses.replace(sim, date=dates[sessions], temperature_c=temps[sessions], operator="R.T. (inspector)", notes=note)


# ---- guideway G-1: 2000 x 200 mm granite air-bearing way, electronic level


def _g1(x, y):
    u = (x - 1000.0) / 1000.0
    sag = -2.6 * (1.0 - u**2)  # middle low by 2.6 µm: sagging between supports
    twist = 0.6 * u * (y - 100.0) / 100.0
    wave = 0.25 * np.sin(2 * np.pi * x / 650.0 + 0.4)
    return sag + twist + wave + 0.001 * x  # plus a small slope along the way


def guideway_g1(rng):
    inst = Instrument("level", "um/m", reading_uncertainty=0.3, model="tool-room asset 207")
    surface = Surface("granite guideway, top bearing face of the X axis", 2000.0, 200.0, ident="KY-G1", material="granite")
    long_lines = [(f"long-{k + 1}", (50.0, y), (1950.0, y), 19) for k, y in enumerate((40.0, 100.0, 160.0))]
    cross = [(f"cross-{k + 1}", (x, 40.0), (x, 160.0), 2) for k, x in enumerate((50.0, 550.0, 1050.0, 1550.0, 1950.0))]
    plan = plan_lines(long_lines + cross, length_mm=2000.0, width_mm=200.0, instrument=inst, surface=surface)
    runs = {"long-2": ("forward", "reverse")}
    sim = simulate_survey(plan, _g1, instrument_zero="random", noise_sd=0.3, runs=runs, rng=rng)
    sim = _rounded(sim, 0.1)
    note = (
        "Kestrel Yard tool room (fictional). Three lines along the way at 100 mm steps (long-2 forward and back) "
        "and five cross lines at 60 mm steps, one level zero for all lines. Simulated: sag 2.6 µm, twist, wave; "
        "reading noise 0.3 µm/m."
    )
    return dataclasses.replace(sim, date="2024-03-14", temperature_c=20.6, operator="M.O. (machine fitter)", notes=note)


# ---- graphite pad face: 80 x 80 mm, indicator grid -> height map CSV


def _pad(x, y):
    r2 = (x - 40.0) ** 2 + (y - 40.0) ** 2
    crown = 0.25 * (1.0 - r2 / 40.0**2)  # slightly convex from lapping
    edge = -0.15 * np.clip((np.sqrt(r2) - 34.0) / 10.0, 0.0, None) ** 2  # edge roll-off at the corners
    return crown + edge + 0.05 * (x - 40.0) / 40.0


def pad_face(rng):
    inst = Instrument("indicator", "um")
    plan = plan_grid(80.0, 80.0, 5.0, margin_mm=4.0, instrument=inst)
    sim = simulate_survey(plan, _pad, instrument_zero=12.0, noise_sd=0.02, rng=rng)
    sim = _rounded(sim, 0.01)
    # one run per row, one reading per station: the heights are the readings less the datum setting
    idx = sim.station_index
    z = np.zeros(len(sim.stations))
    for ln in sim.lines:
        for name, r in zip(ln.stations, ln.runs[0].readings):
            z[idx[name]] = round(r - 12.0, 2)  # to the indicator's 0.01 µm: no float residue in the file
    hm = HeightMap(sim.x_mm, sim.y_mm, z, length_mm=80.0, width_mm=80.0, label="graphite air-bearing pad face KY-B4")
    comment = (
        "Kestrel Yard tool room (fictional): lapped graphite air-bearing pad face KY-B4, 80 x 80 mm\n"
        "indicator on a height stand over a reference flat, 5 mm grid, heights in µm (datum removed)\n"
        "simulated: crown 0.25 µm, corner roll-off, noise 0.02 µm"
    )
    return format_heightmap_csv(hm, comment=comment)


# ---- plate P-7: 630 x 400 mm, grid by differential levels


def _p7(x, y):
    u = (x - 315.0) / 315.0
    v = (y - 200.0) / 200.0
    return -1.1 * (u**2 + v**2) + 0.9 * u * v + 0.5 * np.exp(-((x - 150.0) ** 2 + (y - 300.0) ** 2) / (2 * 50.0**2))


def plate_p7(rng):
    inst = Instrument("differential-level", "um/m", reading_uncertainty=0.2, model="tool-room asset 208 (matched pair)")
    surface = Surface("granite surface plate, gauge room", 630.0, 400.0, ident="KY-P7", material="granite")
    plan = plan_grid(630.0, 400.0, 75.0, margin_mm=30.0, instrument=inst, surface=surface)
    sim = simulate_survey(plan, _p7, instrument_zero="random", noise_sd=0.2, rng=rng)
    sim = _rounded(sim, 0.1)
    note = (
        "Kestrel Yard tool room (fictional). Rows and columns at 75 mm; the differential pair references gravity, "
        "so twist is seen without diagonals. Simulated: crowned (centre high) by 1.1 µm, twist, a high spot near "
        "(150, 300) mm; reading noise 0.2 µm/m."
    )
    return dataclasses.replace(sim, date="2024-03-18", temperature_c=20.2, operator="R.T. (inspector)", notes=note)


def build_samples() -> dict:
    """File name -> text of every sample file (deterministic)."""
    rng = np.random.default_rng(SEED)
    files = {}
    files["plate-KY-P3-2024-03-11.toml"] = format_survey(plate_p3(rng, 0))
    files["plate-KY-P3-after-lap-1.toml"] = format_survey(plate_p3(rng, 1))
    files["plate-KY-P3-after-lap-2.toml"] = format_survey(plate_p3(rng, 2))
    files["guideway-KY-G1.toml"] = format_survey(guideway_g1(rng))
    files["pad-KY-B4-heights.csv"] = pad_face(rng)
    files["plate-KY-P7-grid.toml"] = format_survey(plate_p7(rng))
    return files


def main(outdir=HERE) -> int:
    for name, text in build_samples().items():
        write_text_atomic(Path(outdir) / name, text)
    return 0


if __name__ == "__main__":
    sys.exit(main(Path(sys.argv[1]) if len(sys.argv) > 1 else HERE))
