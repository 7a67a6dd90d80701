"""Rebuild the invented optical-flat and sphere samples of the Kestrel Yard tool room (fictional).

    python sample_readings/make_optics_samples.py

Writes, beside this script (seeded, so the files come out the same every time):

padface-KY-B4-fringes.png
    Pad face KY-B4 (80 x 80 mm, lapped) under an optical flat in helium light, photographed from
    above: flatcheck's own simulator, a 120 nm crown with a 100 nm turned-down edge, the flat
    touching along the left edge with 16 fringes of wedge, camera noise and uneven lighting.
    Reduce it with
    ``flatcheck fringes padface-KY-B4-fringes.png --wavelength-nm 587.56 --pixel-mm 0.25 --contact-edge left``.
padface-KY-B4-fringes.toml
    The same face as an inspector writes it at the bench (bends along x, y and a diagonal).
seat-KY-S2-points.csv
    The concave spherical seat of a self-aligning pad, 12.7 mm radius, probed on a CMM over a
    50 degree cap (8 rings of 24 points), with a 0.3 µm two-lobe form and probing noise.
ball-KY-S2-points.csv
    Its ball, 12.695 mm radius, probed all round (240 points), 0.1 µm of form.
"""

from __future__ import annotations

import io
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
SEED = 20240311
HELIUM_NM = 587.56  # helium yellow line in air (the samples' light)


def padface_photo(rng) -> bytes:
    """The pad face photograph as PNG bytes."""
    from PIL import Image

    from flatcheck.optics import crown_nm, simulate_fringe_photo, turned_edge_nm

    n, part_px, pixel_mm = 360, 320, 0.25  # 320 px x 0.25 mm = 80 mm
    mask = np.zeros((n, n), dtype=bool)
    o = (n - part_px) // 2
    mask[o : o + part_px, o : o + part_px] = True
    height = crown_nm(mask, 120.0) + turned_edge_nm(mask, 100.0, start=0.75)
    sim = simulate_fringe_photo(
        height, mask, wavelength_nm=HELIUM_NM, pixel_mm=pixel_mm, contact_edge="left", fringes_across=16.0,
        carrier_turn_deg=4.0, visibility=0.75, exposure=0.5, lighting=0.3, noise=0.02, background=0.12, rng=rng,
    )
    buf = io.BytesIO()
    Image.fromarray(sim.codes).save(buf, format="PNG", optimize=True)
    return buf.getvalue()


READINGS = '''# Kestrel Yard tool room (fictional): lapped graphite air-bearing pad face KY-B4, 80 x 80 mm
# under a 100 mm optical flat in helium light; flat touching along one edge, fringes read by eye
format = "flatcheck-fringes"
version = 1

[part]
ident = "KY-B4"
description = "pad face"
shape = "rect"
length_mm = 80.0
width_mm = 80.0

[light]
source = "helium"

[flat]
flatness_nm = 29.0          # the flat's certificate: lambda/20 at 587.56 nm

[[reading]]
along = "x"                 # the fringe that runs along x through the middle
bend_fringes = 0.4
bows = "away"               # away from the contact edge: convex
fringes_across = 10

[[reading]]
along = "y"                 # the flat turned a quarter turn
bend_fringes = 0.4
bows = "away"
fringes_across = 9

[[reading]]
along = "diagonal"          # and along the south-west to north-east diagonal
bend_fringes = 0.8
bows = "away"
irregularity_fringes = 0.1  # the fringe hooks down at both corners (the turned-down edge)
'''


def sphere_points(rng, radius_mm, center_mm, cap_deg, rings, per_ring, form_um, noise_um, concave):
    """CMM points on a sphere (or a cap of it), with a two-lobe form and probing noise, mm."""
    pts = []
    if cap_deg >= 180:
        # all round: a spiral of evenly spread points
        k = np.arange(rings * per_ring) + 0.5
        polar = np.arccos(1 - 2 * k / k.size)
        az = np.pi * (1 + 5**0.5) * k
    else:
        polar = np.repeat(np.radians(np.linspace(cap_deg / rings, cap_deg, rings)), per_ring)
        az = np.tile(np.linspace(0, 2 * np.pi, per_ring, endpoint=False), rings) + 0.1 * np.repeat(np.arange(rings), per_ring)
    u = np.column_stack([np.sin(polar) * np.cos(az), np.sin(polar) * np.sin(az), np.cos(polar)])
    if concave:
        u[:, 2] = -u[:, 2]  # the seat opens upwards: its face lies below the centre
    form = 0.5 * form_um * np.cos(2 * az) * np.sin(polar) ** 2 + rng.normal(0.0, noise_um, az.size)
    pts = np.asarray(center_mm) + (radius_mm + form[:, None] / 1000.0) * u
    return pts


def main() -> None:
    from flatcheck.io import write_bytes_atomic, write_text_atomic
    from flatcheck.io._points_csv import format_points_csv

    rng = np.random.default_rng(SEED)
    write_bytes_atomic(HERE / "padface-KY-B4-fringes.png", padface_photo(rng))
    write_text_atomic(HERE / "padface-KY-B4-fringes.toml", READINGS)
    seat = sphere_points(rng, 12.7, (40.0, 25.0, 18.0), 50.0, 8, 24, 0.3, 0.02, concave=True)
    write_text_atomic(
        HERE / "seat-KY-S2-points.csv",
        format_points_csv(seat, comment="Kestrel Yard tool room (fictional): spherical seat KY-S2 of a self-aligning pad, "
                          "12.7 mm radius\nCMM, 8 rings of 24 points over a 50 degree cap, machine frame, mm"),
    )
    ball = sphere_points(rng, 12.695, (-5.0, 10.0, 30.0), 180.0, 10, 24, 0.1, 0.01, concave=False)
    write_text_atomic(
        HERE / "ball-KY-S2-points.csv",
        format_points_csv(ball, comment="Kestrel Yard tool room (fictional): ball of seat KY-S2, 25.39 mm\n"
                          "CMM, 240 points all round, machine frame, mm"),
    )


if __name__ == "__main__":
    main()
