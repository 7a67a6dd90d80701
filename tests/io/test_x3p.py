"""X3P (ISO 25178-72) height maps: round trips, and files read back by readers other than flatcheck's."""

import hashlib
import xml.etree.ElementTree as ET
import zipfile
from pathlib import Path

import numpy as np
import pytest

import flatcheck
from flatcheck.errors import InputFormatError, InputValueError
from flatcheck.io._x3p import format_x3p, read_x3p, read_x3p_contents, write_x3p

SAMPLES = Path(__file__).resolve().parents[2] / "sample_readings"


def _p3():
    sv = flatcheck.read_survey(SAMPLES / "plate-KY-P3-2024-03-11.toml")
    return flatcheck.reduce_survey(sv).heightmap


def _by_position(hm):
    o = np.lexsort((hm.x_mm, hm.y_mm))
    return hm.x_mm[o], hm.y_mm[o], hm.height_um[o]


def test_union_jack_round_trip(tmp_path):
    hm = _p3()
    p = tmp_path / "p3.x3p"
    write_x3p(p, hm, meta={"ident": "KY-P3", "date": "2024-03-11"})
    c = read_x3p_contents(p)
    # the Union Jack's 45 stations lie on a 9 x 9 grid (100 mm x 50 mm); the other 36 nodes are "not measured"
    assert c.feature == "surface" and c.grid_shape == (9, 9) and c.missing == 81 - 45
    x0, y0, z0 = _by_position(hm)
    x1, y1, z1 = _by_position(c.heightmap)
    assert np.max(np.abs(x1 - x0)) < 1e-9 and np.max(np.abs(y1 - y0)) < 1e-9  # mm
    assert np.max(np.abs(z1 - z0)) < 1e-12  # µm: float64 in metres
    assert c.meta.ident == "KY-P3" and c.meta.date == "2024-03-11"
    assert c.meta.length_mm == 1000.0 and c.meta.width_mm == 630.0  # from the height map's size
    assert c.heightmap.length_mm == 1000.0 and c.heightmap.label == "granite surface plate, inspection bench 2"
    # the flatness of the map read back is the flatness of the survey
    f0 = flatcheck.evaluate_flatness(hm.x_mm, hm.y_mm, hm.height_um).mzpl.fltt_um
    f1 = flatcheck.evaluate_flatness(x1, y1, z1).mzpl.fltt_um
    assert f1 == pytest.approx(f0, abs=1e-12)


def test_x3pio_reads_our_file_with_the_same_heights(tmp_path):
    """Independent reader: the x3pio package's own reading of the file, in metres."""
    import x3pio

    hm = _p3()
    p = tmp_path / "p3.x3p"
    write_x3p(p, hm)
    f = x3pio.read(p)
    assert isinstance(f, x3pio.Surface) and f.is_regular_grid
    layer = f.layers[0]
    pts = layer.points()[layer.valid]  # x, y, z in metres, global system (offset applied)
    assert pts.shape == (45, 3)
    o = np.lexsort((pts[:, 0], pts[:, 1]))
    x0, y0, z0 = _by_position(hm)
    assert np.allclose(pts[o, 0], x0 * 1e-3, rtol=0, atol=1e-12)  # 1 mm = 1e-3 m exactly
    assert np.allclose(pts[o, 1], y0 * 1e-3, rtol=0, atol=1e-12)
    assert np.allclose(pts[o, 2], z0 * 1e-6, rtol=1e-12, atol=0)  # 1 µm = 1e-6 m exactly
    assert layer.spacing == pytest.approx((0.1, 0.05))  # 100 mm x 50 mm grid
    assert f.metadata.probing_system.type == x3pio.ProbingType.SOFTWARE


def test_file_decoded_by_hand_has_the_same_heights(tmp_path):
    """Second independent reader: the zip, main.xml and the binary data decoded here with the standard library.

    Layout as ISO 25178-72 stores it (as described in x3pio's documentation): main.xml names the axes
    (incremental x and y with their increments and offsets, absolute z of data type D = float64), the
    matrix size and the point data file with its MD5 checksum; the binary file holds little-endian values
    with x varying fastest, then y; NaN marks a point not measured.
    """
    hm = flatcheck.read_heightmap_csv(SAMPLES / "pad-KY-B4-heights.csv")
    p = tmp_path / "pad.x3p"
    write_x3p(p, hm)
    with zipfile.ZipFile(p) as z:
        root = ET.fromstring(z.read("main.xml"))
        link = root.find(".//PointDataLink").text
        data = z.read(link)
        md5 = root.find(".//MD5ChecksumPointData").text
    assert hashlib.md5(data).hexdigest() == md5.lower()
    cx = root.find(".//CX")
    cy = root.find(".//CY")
    cz = root.find(".//CZ")
    assert cx.find("AxisType").text == "I" and cz.find("AxisType").text == "A" and cz.find("DataType").text == "D"
    nx = int(root.find(".//SizeX").text)
    ny = int(root.find(".//SizeY").text)
    dx, ox = float(cx.find("Increment").text), float(cx.find("Offset").text)
    dy, oy = float(cy.find("Increment").text), float(cy.find("Offset").text)
    z_m = np.frombuffer(data, dtype="<f8").reshape(ny, nx) * float(cz.find("Increment").text)
    X, Y = np.meshgrid(ox + dx * np.arange(nx), oy + dy * np.arange(ny))
    assert (nx, ny) == (15, 15)  # the pad: 5 mm grid of 15 x 15 points
    # every CSV point is found at its grid node with its height
    for x, y, h in zip(hm.x_mm, hm.y_mm, hm.height_um):
        j, i = int(round((y * 1e-3 - oy) / dy)), int(round((x * 1e-3 - ox) / dx))
        assert X[j, i] == pytest.approx(x * 1e-3, abs=1e-12) and Y[j, i] == pytest.approx(y * 1e-3, abs=1e-12)
        assert z_m[j, i] == pytest.approx(h * 1e-6, rel=1e-12, abs=1e-18)


def test_scattered_points_become_a_point_cloud(tmp_path):
    rng = np.random.default_rng(1234)
    hm = flatcheck.HeightMap(rng.uniform(0, 80, 40), rng.uniform(0, 60, 40), rng.normal(0, 0.3, 40))
    data = format_x3p(hm)
    p = tmp_path / "cloud.x3p"
    p.write_bytes(data)
    c = read_x3p_contents(p)
    assert c.feature == "point cloud" and c.grid_shape is None
    a, b = _by_position(hm), _by_position(c.heightmap)
    for u, v in zip(a, b):
        assert np.allclose(u, v, rtol=1e-12, atol=1e-12)


def test_write_is_atomic_and_refuses_a_missing_folder(tmp_path):
    hm = _p3()
    p = tmp_path / "map.x3p"
    p.write_bytes(b"earlier file")
    with pytest.raises(flatcheck.OutputError):
        write_x3p(tmp_path / "nowhere" / "map.x3p", hm)
    write_x3p(p, hm)
    assert read_x3p(p).n == 45
    assert [f.name for f in tmp_path.iterdir()] == ["map.x3p"]  # no temporary file left behind


def test_unreadable_files_are_refused_with_their_name(tmp_path):
    import x3pio

    txt = tmp_path / "notes.x3p"
    txt.write_text("not a zip")
    with pytest.raises(InputFormatError, match="notes.x3p.*not a readable X3P file"):
        read_x3p(txt)
    with pytest.raises(InputFormatError, match="no such file"):
        read_x3p(tmp_path / "missing.x3p")
    # a profile (one line) is not a surface
    prof = tmp_path / "profile.x3p"
    x3pio.write(prof, np.zeros(10), x_scale=1e-3)
    with pytest.raises(InputFormatError, match="profile"):
        read_x3p(prof)
    # a file changed after it was written: its checksum no longer matches
    good = tmp_path / "good.x3p"
    write_x3p(good, _p3())
    with zipfile.ZipFile(good) as z:
        items = {n: z.read(n) for n in z.namelist()}
    bin_name = next(n for n in items if n.endswith(".bin"))
    raw = bytearray(items[bin_name])
    raw[:8] = np.float64(1e-3).tobytes()
    items[bin_name] = bytes(raw)
    bad = tmp_path / "changed.x3p"
    with zipfile.ZipFile(bad, "w") as z:
        for n, v in items.items():
            z.writestr(n, v)
    with pytest.raises(InputFormatError, match="checksum"):
        read_x3p(bad)
    # fewer than three measured points
    few = tmp_path / "few.x3p"
    x3pio.write(few, np.array([[0.0, np.nan], [np.nan, 1e-6]]), x_scale=1e-3, y_scale=1e-3)
    with pytest.raises(InputValueError, match="only 2 measured"):
        read_x3p(few)
