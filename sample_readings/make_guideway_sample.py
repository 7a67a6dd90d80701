"""Make the sample guideway KY-G2 of the fictional Kestrel Yard tool room (seeded, reproducible).

Run from the repository root::

    python sample_readings/make_guideway_sample.py

Writes ``sample_readings/guideway-KY-G2/``: a granite beam 1200 mm long, 160 mm wide and 200 mm tall with a
top face (a differential-level grid survey), an underside and two sides (indicator height maps), the ties
between them (thickness by micrometer, squareness by square and indicator, twist by differential levels) in
``body.toml``, and ``carriage.toml``: a carriage wrapped round the beam on ten porous pads (four on the top,
two under the beam, two on each side), the top pairs preloaded by the weight against the underside pads and
the side pads against each other.

Every file comes from invented shapes (the functions below, in outward heights, µm) plus Gaussian noise.
"""

from __future__ import annotations

import dataclasses
import sys
from pathlib import Path

import numpy as np

from flatcheck.form import HeightMap
from flatcheck.io import format_heightmap_csv, format_survey, write_text_atomic
from flatcheck.survey import Instrument, Surface, plan_grid, simulate_survey

SEED = 20240402
HERE = Path(__file__).resolve().parent
OUT = HERE / "guideway-KY-G2"
LENGTH, WIDTH, HEIGHT = 1200.0, 160.0, 200.0


# ---- the invented beam, in body coordinates: x along, s across the face (y for top/underside, z for sides)
def _u(x):
    return (x - LENGTH / 2) / (LENGTH / 2)


def top(x, s):
    """Top (+z): sags 1.1 µm in the middle, twists 4 µrad over the length, a 400 mm wave of 0.2 µm."""
    return -1.1 * (1 - _u(x) ** 2) + 1e-3 * 2.0 * _u(x) * s + 0.2 * np.sin(2 * np.pi * x / 400.0)


def underside(x, s):
    """Underside (-z): follows the sag, a wedge of 1.5 µm/m along and -3 µm/m across, a high spot near x = 800."""
    return (0.5 + 1.5e-3 * x - 3e-3 * s + 1.1 * (1 - _u(x) ** 2)
            + 0.6 * np.exp(-((x - 800.0) ** 2) / (2 * 60.0**2)))


def side_right(x, s):
    """+y side: leans out 3 µm/m towards the top (squareness to the top -3 µrad) and waves 0.3 µm."""
    return 3e-3 * s + 0.3 * np.sin(2 * np.pi * x / 500.0 + 0.7)


def side_left(x, s):
    """-y side: the width shrinks by 1 µm/m along the beam; leans -2 µm/m."""
    return 0.2 - 1.0e-3 * x - 2e-3 * s + 0.15 * np.cos(2 * np.pi * x / 350.0)


def _across_slope_urad(fn, x, smin, smax):
    s = np.linspace(smin, smax, 31)
    return float(1e3 * np.polyfit(s, fn(np.full_like(s, x), s), 1)[0])


def _rounded(survey, resolution):
    lines = []
    for ln in survey.lines:
        runs = tuple(
            dataclasses.replace(r, readings=tuple(float(round(round(v / resolution) * resolution, 6)) for v in r.readings))
            for r in ln.runs
        )
        lines.append(dataclasses.replace(ln, runs=runs))
    return dataclasses.replace(survey, lines=tuple(lines))


def top_survey(rng) -> str:
    inst = Instrument("differential-level", "um/m", reading_uncertainty=0.2, model="tool-room asset 208 (matched pair)")
    surface = Surface("granite guideway KY-G2, top bearing face", LENGTH, WIDTH, ident="KY-G2-top", material="granite")
    plan = plan_grid(LENGTH, WIDTH, 30.0, margin_mm=5.0, instrument=inst, surface=surface)
    sim = simulate_survey(plan, lambda x, y: top(x, y - WIDTH / 2), instrument_zero="random", noise_sd=0.2, rng=rng)
    sim = _rounded(sim, 0.1)
    note = ("Kestrel Yard tool room (fictional). Top face of beam KY-G2: rows and columns at 30 mm, differential "
            "levels (gravity referenced). Simulated: sag 1.1 µm, twist 4 µrad over the length, 400 mm wave; "
            "noise 0.2 µm/m.")
    return format_survey(dataclasses.replace(sim, date="2024-04-02", temperature_c=20.3,
                                             operator="M.O. (machine fitter)", notes=note))


def height_map(rng, fn, width, label, comment, *, datum_um, tilt_um_per_mm):
    """An indicator traverse: 30 mm grid, heights outward plus the stand's datum and tilt, noise 0.05 µm."""
    xs = np.arange(15.0, LENGTH - 14.0, 30.0)
    ys = np.arange(5.0, width - 4.0, 30.0)
    X, Y = np.meshgrid(xs, ys)
    s = Y - 0.5 * (ys[0] + ys[-1])
    z = fn(X, s) + datum_um + tilt_um_per_mm * X + rng.normal(0.0, 0.05, X.shape)
    hm = HeightMap(X.ravel(), Y.ravel(), np.round(z.ravel(), 3), label=label)
    return format_heightmap_csv(hm, comment=comment)


def body_toml(rng) -> str:
    def num(v):
        return f"{v:.2f}"

    # thickness top-underside by micrometer: w_top + w_under
    xt = [100.0, 350.0, 600.0, 850.0, 1100.0]
    th_x, th_s, th_v = [], [], []
    for s in (-50.0, 50.0):
        for x in xt:
            th_x.append(x)
            th_s.append(s)
            th_v.append(top(x, s) + underside(x, s) + rng.normal(0.0, 0.1))
    # width between the sides (s is z here)
    wd_x, wd_s, wd_v = [], [], []
    for s in (-50.0, 50.0):
        for x in (100.0, 600.0, 1100.0):
            wd_x.append(x)
            wd_s.append(s)
            wd_v.append(side_right(x, s) + side_left(x, s) + rng.normal(0.0, 0.1))

    # squareness: 90° - angle between outward normals = -(σB θA + σA θB), across slopes in µrad
    def square(fn_side, sign_side, x):
        th_side = _across_slope_urad(fn_side, x, -85.0, 85.0)
        th_top = _across_slope_urad(top, x, -75.0, 75.0)
        return -(1 * th_side + sign_side * th_top) * 0.648 / np.pi + rng.normal(0.0, 0.1)  # µrad -> arcsec

    sq_r = [square(side_right, +1, x) for x in (300.0, 900.0)]
    sq_l = [square(side_left, -1, x) for x in (600.0,)]
    tw_x = list(np.arange(100.0, 1101.0, 100.0))
    zero = 12.0
    tw_v = [_across_slope_urad(top, x, -75.0, 75.0) + zero + rng.normal(0.0, 0.3) for x in tw_x]

    def arr(v, f=num):
        return "[" + ", ".join(f(x) for x in v) + "]"

    return f"""# Guideway body KY-G2 (Kestrel Yard tool room, fictional): format in docs/guideway.md
# Heights of every face are outward (away from the granite); x along the beam from its left end for every file.
format = "flatcheck-guideway"
version = 1

[guideway]
ident = "KY-G2"
description = "granite beam of the Y axis, 1200 x 160 x 200 mm, wrap-around air-bearing carriage"
length_mm = {LENGTH:g}
material = "granite"
datum = "top"

[[face]]
name = "top"
survey = "top.toml"        # differential levels, rows and columns at 30 mm
normal = "+z"

[[face]]
name = "underside"
survey = "underside.csv"   # indicator, beam turned over on the surface plate
normal = "-z"

[[face]]
name = "side-right"
survey = "side-right.csv"  # indicator, y of the file runs up the side
normal = "+y"

[[face]]
name = "side-left"
survey = "side-left.csv"
normal = "-y"

[[thickness]]              # micrometer across the beam, top to underside (minus 200 mm)
faces = ["underside", "top"]
x_mm = {arr(th_x, lambda v: f"{v:g}")}
across_mm = {arr(th_s, lambda v: f"{v:g}")}
value_um = {arr(th_v)}

[[thickness]]              # micrometer between the sides (minus 160 mm); across is up the side
faces = ["side-left", "side-right"]
x_mm = {arr(wd_x, lambda v: f"{v:g}")}
across_mm = {arr(wd_s, lambda v: f"{v:g}")}
value_um = {arr(wd_v)}

[[squareness]]             # square on the top, indicator up the side
faces = ["side-right", "top"]
x_mm = [300, 900]
value_arcsec = {arr(sq_r)}

[[squareness]]
faces = ["side-left", "top"]
x_mm = 600
value_arcsec = {num(sq_l[0])}

[[twist]]                  # differential levels across the top, reference level at x = 100 mm
faces = ["top"]
x_mm = {arr(tw_x, lambda v: f"{v:g}")}
value_um_per_m = {arr(tw_v, lambda v: f"{v:.1f}")}
"""


CARRIAGE = """# Wrap-around carriage for beam KY-G2 (Kestrel Yard tool room, fictional): format in docs/guideway.md
# Ten porous pads 80 x 60 mm at a 6 µm gap: four on the top and two under the beam (preloaded by the weight
# against each other), two on each side (preloaded against each other). Use with:
#   flatcheck guideway sample_readings/guideway-KY-G2/body.toml --carriage sample_readings/guideway-KY-G2/carriage.toml

[bearing]
label = "Y-axis carriage, wrap-around, porous pads (invented example)"
pad = "80x60"        # L x W in mm: L along the travel, W across the face
gap_um = 6.0
kind = "porous"
gap_fraction = 0.25  # a pad may lose a quarter of its gap (common practice, no published ratio)
marginal_from = 0.8

[carriage]
load_n = 2400        # carriage, payload and tooling, newtons downward
pivot = true         # pads on ball pivots

[[carriage.pad]]
name = "top-front-right"
face = "top"
along_mm = 150
across_mm = 40

[[carriage.pad]]
name = "top-front-left"
face = "top"
along_mm = 150
across_mm = -40

[[carriage.pad]]
name = "top-rear-right"
face = "top"
along_mm = -150
across_mm = 40

[[carriage.pad]]
name = "top-rear-left"
face = "top"
along_mm = -150
across_mm = -40

[[carriage.pad]]
name = "under-front"
face = "underside"
along_mm = 150

[[carriage.pad]]
name = "under-rear"
face = "underside"
along_mm = -150

[[carriage.pad]]
name = "right-front"
face = "side-right"
along_mm = 150

[[carriage.pad]]
name = "right-rear"
face = "side-right"
along_mm = -150

[[carriage.pad]]
name = "left-front"
face = "side-left"
along_mm = 150

[[carriage.pad]]
name = "left-rear"
face = "side-left"
along_mm = -150

[film]
supply_kpa = 500          # gauge
permeability_m2 = 5e-16
layer_mm = 5

[budget]
straightness_um = 1.0     # vertical
horizontal_straightness_um = 1.0
pitch_arcsec = 2.0
yaw_arcsec = 2.0
roll_arcsec = 2.0
"""


def build() -> dict:
    """File name -> text of every file of the sample (deterministic)."""
    rng = np.random.default_rng(SEED)
    files = {"top.toml": top_survey(rng)}
    files["underside.csv"] = height_map(
        rng, underside, WIDTH, "beam KY-G2, underside",
        "Kestrel Yard tool room (fictional): beam KY-G2, underside (outward heights), indicator, 30 mm grid\n"
        "simulated: sag, wedge 1.5 µm/m, high spot near x = 800 mm; noise 0.05 µm",
        datum_um=5.0, tilt_um_per_mm=0.002)
    files["side-right.csv"] = height_map(
        rng, side_right, HEIGHT, "beam KY-G2, +y side",
        "Kestrel Yard tool room (fictional): beam KY-G2, +y side (outward heights), y up the side\n"
        "simulated: leans 3 µm/m, 500 mm wave; noise 0.05 µm", datum_um=-3.0, tilt_um_per_mm=-0.001)
    files["side-left.csv"] = height_map(
        rng, side_left, HEIGHT, "beam KY-G2, -y side",
        "Kestrel Yard tool room (fictional): beam KY-G2, -y side (outward heights), y up the side\n"
        "simulated: width falls 1 µm/m, 350 mm wave; noise 0.05 µm", datum_um=1.0, tilt_um_per_mm=0.0)
    files["body.toml"] = body_toml(rng)
    files["carriage.toml"] = CARRIAGE
    return files


def main(outdir=OUT) -> int:
    outdir = Path(outdir)
    outdir.mkdir(parents=True, exist_ok=True)
    for name, text in build().items():
        write_text_atomic(outdir / name, text)
    return 0


if __name__ == "__main__":
    sys.exit(main(Path(sys.argv[1]) if len(sys.argv) > 1 else OUT))
