"""``flatcheck sphere``: pinned JSON against own reference fits, grades, clearance, the docs' key table, bad input."""

import json
import re
from pathlib import Path

import numpy as np
import pytest

ROOT = Path(__file__).resolve().parents[2]
SAMPLES = ROOT / "sample_readings"
SEAT = SAMPLES / "seat-KY-S2-points.csv"
BALL = SAMPLES / "ball-KY-S2-points.csv"


def _load(path):
    return np.loadtxt(path, delimiter=",", comments="#", skiprows=3)


def _reference_ls(p):
    """Own least squares: algebraic linear fit, then scipy.optimize.least_squares on geometric distances."""
    from scipy.optimize import least_squares

    A = np.column_stack([2 * p, np.ones(len(p))])
    s, *_ = np.linalg.lstsq(A, np.sum(p * p, axis=1), rcond=None)
    x0 = np.r_[s[:3], np.sqrt(s[3] + s[:3] @ s[:3])]
    res = least_squares(lambda x: np.linalg.norm(p - x[:3], axis=1) - x[3], x0, xtol=1e-15, ftol=1e-15, gtol=1e-15)
    return res.x[:3], res.x[3]


def _reference_mz_lp(p):
    """Own exact LP in squared radii (see tests/spheres/test_sphere_fit.py): the zone about its centre, µm."""
    from scipy.optimize import linprog

    m = p.mean(axis=0)
    q = p - m
    n = len(q)
    s = np.sum(q * q, axis=1)
    A_ub = np.vstack([np.column_stack([-2 * q, -np.ones(n), np.zeros(n)]), np.column_stack([2 * q, np.zeros(n), np.ones(n)])])
    res = linprog([0, 0, 0, 1, -1], A_ub=A_ub, b_ub=np.concatenate([-s, s]), bounds=[(None, None)] * 5, method="highs")
    return np.ptp(np.linalg.norm(p - (m + res.x[:3]), axis=1)) * 1000.0


@pytest.mark.parametrize("path", [SEAT, BALL])
def test_pinned_json(cli, path):
    code, out, err = cli("sphere", path, "--json")
    assert code == 0, err
    doc = json.loads(out)
    ls, mz = doc["least_squares"], doc["minimum_zone"]
    p = _load(path)
    c, r = _reference_ls(p)
    # reference: algebraic fit + scipy.optimize.least_squares
    assert len(ls["center_mm"]) == 3
    assert np.allclose(ls["center_mm"], c, atol=1e-8)
    assert ls["radius_mm"] == pytest.approx(r, abs=1e-9)
    assert ls["sphericity_um"] == pytest.approx(np.ptp(np.linalg.norm(p - c, axis=1)) * 1000, abs=1e-5)
    # reference: own exact LP (squared radii), equal to second order for these thin shells
    assert mz["sphericity_um"] == pytest.approx(_reference_mz_lp(p), abs=1e-4)
    assert mz["sphericity_um"] <= ls["sphericity_um"] + 1e-9


def test_sample_seat_and_ball(cli):
    code, out, err = cli("sphere", SEAT, "--kind", "seat", "--mate", BALL, "--json")
    assert code == 0, err
    doc = json.loads(out)
    cl = doc["clearance"]
    # the samples were made 12.7 mm and 12.695 mm: about 5 µm of radial clearance
    assert cl["radial_clearance_um"] == pytest.approx(5.0, abs=0.05)
    assert cl["least_film_um"] <= cl["film_min_um"] <= cl["film_max_um"] <= cl["largest_film_um"]
    assert not cl["interference"] and doc["coverage_deg"] == pytest.approx(50, abs=1)
    code, out, err = cli("sphere", BALL, "--kind", "ball", "--u-um", "0.05", "--json")
    g = json.loads(out)["grade"]
    # ISO 3290-1:2014 form limits (ball makers' tables): the grade is the finest limit not exceeded
    limits = {"G3": 0.08, "G5": 0.13, "G10": 0.25, "G16": 0.4}
    assert limits[g["grade"]] >= g["deviation_um"]
    finer = [k for k, v in limits.items() if v < limits[g["grade"]]]
    assert all(limits[k] < g["deviation_um"] for k in finer)
    assert g["basis"].startswith("minimum circumscribed")


def test_summary(cli):
    code, out, err = cli("sphere", SEAT, "--kind", "seat")
    assert code == 0 and err == ""
    assert "minimum zone: sphericity" in out and "hollow" in out


def test_every_json_key_is_documented(cli):
    text = (ROOT / "docs" / "optics-and-spheres.md").read_text(encoding="utf-8")
    start = text.index("## `flatcheck sphere")
    section = text[start : text.find("\n## ", start + 1)]
    keys = set()

    def walk(o):
        if isinstance(o, dict):
            for k, v in o.items():
                keys.add(k)
                walk(v)
        elif isinstance(o, list):
            for v in o:
                walk(v)

    for args in ((SEAT, "--kind", "seat", "--mate", BALL), (BALL, "--kind", "ball", "--u-um", "0.02")):
        code, out, err = cli("sphere", *args, "--json")
        assert code == 0, err
        walk(json.loads(out))
    missing = sorted(k for k in keys if f"`{k}`" not in section and f"`{k}`" not in section.replace(", `", "`, `"))
    assert not missing, f"keys of sphere --json missing from docs/optics-and-spheres.md: {missing}"
    for k in ("center_mm", "radius_mm", "sphericity_um"):
        assert re.search(rf"`{k}`[^\n]*\*\*pinned\*\*", section), k


@pytest.mark.parametrize(
    "text, needle",
    [
        ("x_mm,y_mm,height_um\n0,0,1\n", "height map"),
        ("x_mm,y_mm,z_mm\n1,2,3\n", "at least 5"),
        ("x_mm,y_mm,z_mm\n1,0,0\n0,1,0\n-1,0,0\n0,-1,0\n0.6,0.8,0\n", "one plane"),
        ("x_mm,y_mm,z_mm\n1,0,0\n0,1\n", "line 3"),
        ("", "empty"),
    ],
)
def test_bad_files_one_line(cli, tmp_path, text, needle):
    f = tmp_path / "p.csv"
    f.write_text(text)
    code, out, err = cli("sphere", f)
    assert code == 2
    assert err.count("\n") == 1 and "Traceback" not in err and needle in err and str(f) in err


def test_bad_options(cli):
    for args, needle in (((SEAT, "--mate", BALL), "--kind"), ((SEAT, "--kind", "seat", "--mate", SEAT), "itself"),
                         ((SEAT, "--kind", "cone"), "cone")):
        code, out, err = cli("sphere", *args)
        assert code == 2 and err.count("\n") == 1 and needle in err, err
