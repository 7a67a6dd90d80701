"""``flatcheck fringes``: pinned JSON, the map file, the docs' key table, and bad input."""

import json
import re
from pathlib import Path

import numpy as np
import pytest

ROOT = Path(__file__).resolve().parents[2]
SAMPLES = ROOT / "sample_readings"
PHOTO = SAMPLES / "padface-KY-B4-fringes.png"
READINGS = SAMPLES / "padface-KY-B4-fringes.toml"
PHOTO_ARGS = ("--wavelength-nm", "587.56", "--pixel-mm", "0.25", "--contact-edge", "left")


def _lp_zone(x, y, z):
    """Minimum zone by one direct linear program (scipy HiGHS), the outside reference."""
    from scipy.optimize import linprog

    n = x.size
    A = np.column_stack([np.ones(n), x - x.mean(), y - y.mean()])
    res = linprog([0, 0, 0, 1], A_ub=np.vstack([np.column_stack([A, np.zeros(n)]), np.column_stack([-A, -np.ones(n)])]),
                  b_ub=np.concatenate([z, -z]), bounds=[(None, None)] * 4, method="highs")
    return res.x[3]


def _keys(obj, out=None):
    out = set() if out is None else out
    if isinstance(obj, dict):
        for k, v in obj.items():
            out.add(k)
            _keys(v, out)
    elif isinstance(obj, list):
        for v in obj:
            _keys(v, out)
    return out


def _section(title):
    text = (ROOT / "docs" / "optics-and-spheres.md").read_text(encoding="utf-8")
    start = text.index(f"## `flatcheck {title}")
    end = text.find("\n## ", start + 1)
    return text[start : end if end > 0 else None]


@pytest.fixture(scope="module")
def photo_run(tmp_path_factory):
    from flatcheck.cli.main import run

    import contextlib
    import io

    out_dir = tmp_path_factory.mktemp("fringes")
    map_csv = out_dir / "map.csv"
    buf = io.StringIO()
    with contextlib.redirect_stdout(buf):
        code = run(["fringes", str(PHOTO), *PHOTO_ARGS, "--json", "--map-out", str(map_csv), "--window", "20x20", "--gap-um", "5",
                    "--flat-nm", "29"])
    return code, json.loads(buf.getvalue()), map_csv


def test_photo_pinned_json_and_map(photo_run):
    code, doc, map_csv = photo_run
    assert code == 0
    f = doc["flatness"]
    assert doc["kind"] == "fringe-photo"
    # the map file is the height-map CSV format, heights in µm
    from flatcheck import read_heightmap_csv

    hm = read_heightmap_csv(map_csv)
    assert map_csv.read_text().splitlines()[1] == "x_mm,y_mm,height_um"
    assert hm.n == doc["map"]["points"]
    # reference: scipy HiGHS LP and numpy least squares over the written map give the pinned values
    assert f["minimum_zone_nm"] == pytest.approx(1000 * _lp_zone(hm.x_mm, hm.y_mm, hm.height_um), abs=1e-3)
    A = np.column_stack([np.ones(hm.n), hm.x_mm, hm.y_mm])
    r = hm.height_um - A @ np.linalg.lstsq(A, hm.height_um, rcond=None)[0]
    assert f["least_squares_nm"] == pytest.approx(1000 * np.ptp(r), abs=1e-3)
    assert f["minimum_zone_nm"] <= f["least_squares_nm"] + 1e-9
    # one fringe = half the helium wavelength (Williamson 2004)
    assert f["minimum_zone_fringes"] == pytest.approx(f["minimum_zone_nm"] / 293.78)
    # the sample is convex (a crown): it must come out so, and near its simulated flatness (about 0.3 µm)
    assert 150 < f["minimum_zone_nm"] < 400
    # the flat's certificate gives U = 2 x 29 / sqrt(3) (rectangular, JCGM 100 4.3.7)
    assert f["expanded_uncertainty_nm"] == pytest.approx(2 * 29 / np.sqrt(3))
    assert doc["pad_face"]["limit_um"] == pytest.approx(0.25 * 5) and doc["pad_face"]["verdict"] == "fit"
    assert doc["local_flatness"]["max_nm"] <= f["minimum_zone_nm"] + 1e-6


def test_photo_sign(photo_run):
    # the sample is a crown: the middle of the map stands above its ends along x (sign from the contact edge)
    _, doc, map_csv = photo_run
    from flatcheck import read_heightmap_csv

    hm = read_heightmap_csv(map_csv)
    mid = np.hypot(hm.x_mm - 40, hm.y_mm - 40) < 5
    rim = np.maximum(abs(hm.x_mm - 40), abs(hm.y_mm - 40)) > 30
    assert hm.height_um[mid].mean() > hm.height_um[rim].mean() + 0.1


def test_readings_json(cli):
    code, out, err = cli("fringes", READINGS, "--json")
    assert code == 0, err
    doc = json.loads(out)
    f = doc["flatness"]
    # 0.4 fringe along x and y and 0.8 along the diagonal of an 80 mm square: a sphere (the diagonal is
    # sqrt(2) longer, so its sag is twice), whose zone over a square is twice the axis sag (analytic)
    assert doc["model"] == "full quadratic"
    assert f["minimum_zone_nm"] == pytest.approx(2 * 0.4 * 293.78, rel=1e-6)
    assert f["least_squares_nm"] == pytest.approx(2 * 0.4 * 293.78, rel=1e-6)
    assert f["expanded_uncertainty_nm"] > 0 and doc["cannot_tell"]


def test_summary_prints_u_to_two_digits(cli):
    code, out, err = cli("fringes", READINGS)
    assert code == 0 and err == ""
    # U to two significant digits, the value to the same place (JCGM 100:2008, 7.2.6)
    m = re.search(r"flatness \(minimum zone\): (\d+) nm = [\d.]+ fringe, U = (\d+) nm", out)
    assert m, out
    value, u = m.group(1), m.group(2)
    assert len(u.rstrip("0")) <= 2 and value.endswith("0" * (len(u) - len(u.rstrip("0"))))


def test_every_json_key_is_documented(cli, photo_run, tmp_path):
    section = _section("fringes")
    keys = _keys(photo_run[1])
    code, out, err = cli("fringes", READINGS, "--json", "--window", "d30", "--gap-um", "4")
    assert code == 0, err
    keys |= _keys(json.loads(out))
    one = tmp_path / "one.toml"  # a single direction: the estimate states the other shapes it allows
    one.write_text(BAD_READINGS + 'bows = "toward"\n')
    code, out, err = cli("fringes", one, "--json")
    assert code == 0, err
    doc = json.loads(out)
    assert [a["shape"] for a in doc["alternatives"]] == ["cylinder", "saddle"]
    keys |= _keys(doc)
    missing = sorted(k for k in keys if f"`{k}`" not in section and f"`{k}`" not in section.replace(", `", "`, `"))
    assert not missing, f"keys of fringes --json missing from docs/optics-and-spheres.md: {missing}"
    for k in ("minimum_zone_nm", "least_squares_nm"):
        assert re.search(rf"`{k}`[^\n]*\*\*pinned\*\*", section), k


BAD_READINGS = """format = "flatcheck-fringes"
[part]
length_mm = 50
width_mm = 50
[light]
source = "helium"
[[reading]]
along = "x"
bend_fringes = 0.3
"""


@pytest.mark.parametrize(
    "args, needle",
    [
        ((PHOTO, "--pixel-mm", "0.25", "--contact-edge", "left"), "--wavelength-nm"),
        ((PHOTO, "--wavelength-nm", "587.56", "--pixel-mm", "0.25"), "--contact-edge"),
        ((PHOTO, "--wavelength-nm", "587.56", "--contact-edge", "left"), "--pixel-mm"),
        ((PHOTO, *PHOTO_ARGS, "--contact-edge", "top"), "contact edge cannot fix the sign"),
        ((PHOTO, *PHOTO_ARGS, "--map-out", PHOTO), "input file"),
        ((PHOTO, *PHOTO_ARGS, "--window", "abc"), "--window"),
        ((READINGS, "--contact-edge", "left"), "applies to photographs"),
        ((READINGS, "--light", "sodium"), "587.56 nm"),
        ((SAMPLES / "seat-KY-S2-points.csv", *PHOTO_ARGS), "PNG, JPEG or TIFF"),
        ((SAMPLES / "no-such-photo.png", *PHOTO_ARGS), "no such file"),
    ],
)
def test_bad_input_one_line(cli, args, needle):
    code, out, err = cli("fringes", *args)
    assert code == 2
    assert err.count("\n") == 1 and err.startswith("flatcheck: error: ")
    assert "Traceback" not in err and needle in err


def test_bad_files_one_line(cli, tmp_path):
    cut = tmp_path / "cut.png"
    cut.write_bytes(PHOTO.read_bytes()[:2000])
    bad = tmp_path / "r.toml"
    bad.write_text(BAD_READINGS)  # a bend without its sense
    flat = tmp_path / "flat.png"
    from PIL import Image

    Image.fromarray(np.full((64, 64), 128, np.uint8)).save(flat)
    for path, needle in ((cut, "damaged"), (bad, "reading 1"), (flat, "flat tone")):
        code, out, err = cli("fringes", path, *(() if path.suffix == ".toml" else PHOTO_ARGS))
        assert code == 2, (path, err)
        assert err.count("\n") == 1 and "Traceback" not in err and needle in err, err


def test_too_few_fringes_photo_exit_2(cli, tmp_path):
    from PIL import Image

    from flatcheck.optics import simulate_fringe_photo

    mask = np.zeros((160, 160), bool)
    mask[10:150, 10:150] = True
    sim = simulate_fringe_photo(np.zeros((160, 160)), mask, wavelength_nm=587.56, pixel_mm=0.1, fringes_across=3, rng=1)
    p = tmp_path / "few.png"
    Image.fromarray(sim.codes).save(p)
    code, out, err = cli("fringes", p, *PHOTO_ARGS)
    assert code == 2 and "tilt the flat a little more" in err and err.count("\n") == 1


def test_other_picture_kinds_and_a_mask(cli, tmp_path, photo_run):
    from PIL import Image

    codes = np.asarray(Image.open(PHOTO))
    rgb, deep, mask, pieces = (tmp_path / n for n in ("p.jpg", "p16.png", "mask.png", "pieces.png"))
    Image.fromarray(codes).convert("RGB").save(rgb, quality=95)
    Image.fromarray(codes.astype(np.uint16) * 257).save(deep)  # 16 bits, same picture
    m = np.zeros_like(codes)
    m[20:340, 20:340] = 255  # the sample's part: 320 x 320 pixels from (20, 20)
    Image.fromarray(m).save(mask)
    base = photo_run[1]["flatness"]["minimum_zone_nm"]  # the 8-bit sample itself
    code, out, err = cli("fringes", deep, *PHOTO_ARGS, "--json")
    assert code == 0, err
    doc = json.loads(out)
    assert doc["photo"]["bits"] == 16 and doc["flatness"]["minimum_zone_nm"] == pytest.approx(base, abs=0.5)
    from flatcheck.io._image import read_picture

    jpeg = read_picture(rgb)  # colour JPEG: grey by the BT.601 luma weights, close to the grey original
    assert jpeg.format == "JPEG" and np.abs(jpeg.intensity - codes / 255.0).mean() < 0.01
    code, out, err = cli("fringes", PHOTO, *PHOTO_ARGS, "--json", "--mask", mask)
    doc = json.loads(out)
    # the stated mask is the whole 80 mm part
    assert code == 0 and doc["part"]["mask"] == "stated" and doc["part"]["length_mm"] == pytest.approx(80.0)
    Image.fromarray(np.where(codes > 128, 255, 0).astype(np.uint8)).save(pieces)  # the fringes, not the part
    code, out, err = cli("fringes", PHOTO, *PHOTO_ARGS, "--mask", pieces)
    assert code == 2 and str(pieces) in err and "in pieces" in err and err.count("\n") == 1
