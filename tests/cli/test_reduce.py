"""``flatcheck reduce``: pinned JSON contract, outputs and bad input."""

import json
import re
from pathlib import Path

import numpy as np
import pytest

from flatcheck.form import minimum_zone

SAMPLES = Path(__file__).resolve().parents[2] / "sample_readings"
PLATE = SAMPLES / "plate-KY-P3-2024-03-11.toml"
PAD = SAMPLES / "pad-KY-B4-heights.csv"


def _lp_zone(x, y, z):
    """Minimum zone by one direct linear program (scipy HiGHS), as an outside reference."""
    from scipy.optimize import linprog

    n = x.size
    A = np.column_stack([np.ones(n), x - x.mean(), y - y.mean()])
    res = linprog(
        [0, 0, 0, 1],
        A_ub=np.vstack([np.column_stack([A, np.zeros(n)]), np.column_stack([-A, -np.ones(n)])]),
        b_ub=np.concatenate([z, -z]),
        bounds=[(None, None)] * 4,
        method="highs",
    )
    return res.x[3]


@pytest.mark.parametrize("path", [PLATE, PAD, SAMPLES / "guideway-KY-G1.toml", SAMPLES / "plate-KY-P7-grid.toml"])
def test_pinned_json(cli, path):
    code, out, err = cli("reduce", path, "--json")
    assert code == 0, err
    doc = json.loads(out)  # exactly one JSON object on stdout
    assert isinstance(doc["nodes"], list) and doc["nodes"]
    for node in doc["nodes"]:
        assert set(node) >= {"x_mm", "y_mm", "height_um"}
    f = doc["flatness"]
    x = np.array([n["x_mm"] for n in doc["nodes"]])
    y = np.array([n["y_mm"] for n in doc["nodes"]])
    z = np.array([n["height_um"] for n in doc["nodes"]])
    # Reference: scipy HiGHS LP over the printed nodes gives the same minimum zone.
    assert f["minimum_zone_um"] == pytest.approx(_lp_zone(x, y, z), abs=1e-6)
    # Reference: numpy least squares; peak-to-valley of the residuals.
    A = np.column_stack([np.ones_like(x), x, y])
    r = z - A @ np.linalg.lstsq(A, z, rcond=None)[0]
    assert f["least_squares_um"] == pytest.approx(np.ptp(r), abs=1e-6)
    assert f["peak_um"] + f["valley_um"] == pytest.approx(f["least_squares_um"], abs=1e-9)
    assert f["rms_um"] == pytest.approx(np.sqrt(np.mean(r**2)), abs=1e-6)
    assert f["minimum_zone_um"] <= f["least_squares_um"] + 1e-12


def test_survey_heights_are_about_the_ls_plane(cli):
    code, out, _ = cli("reduce", PLATE, "--json")
    doc = json.loads(out)
    z = np.array([n["height_um"] for n in doc["nodes"]])
    x = np.array([n["x_mm"] for n in doc["nodes"]])
    y = np.array([n["y_mm"] for n in doc["nodes"]])
    # the least-squares plane of the printed heights is zero (numpy reference)
    coef = np.linalg.lstsq(np.column_stack([np.ones_like(x), x, y]), z, rcond=None)[0]
    assert np.allclose(coef, 0, atol=1e-9)
    assert {ln["name"] for ln in doc["lines"]} == {"SW-NE", "SE-NW", "SW-SE", "NW-NE", "SW-NW", "SE-NE", "W-E", "S-N"}
    for ln in doc["lines"]:
        assert ln["straightness_um"] <= doc["flatness"]["minimum_zone_um"] + 1e-9


def test_moody_method_and_map_out(cli, tmp_path):
    out_csv = tmp_path / "map.csv"
    code, out, err = cli("reduce", PLATE, "--method", "moody", "--json", "--map-out", out_csv)
    assert code == 0, err
    doc = json.loads(out)
    assert doc["method"] == "moody"
    from flatcheck.io import read_heightmap_csv

    hm = read_heightmap_csv(out_csv)
    assert hm.n == len(doc["nodes"])
    assert minimum_zone(hm.x_mm, hm.y_mm, hm.height_um).flatness_um == pytest.approx(
        doc["flatness"]["minimum_zone_um"], abs=1e-3
    )


def test_uncertainty_is_reproducible_with_seed(cli):
    args = ("reduce", PLATE, "--json", "--uncertainty", "--trials", "2000", "--seed", "7")
    code, out1, _ = cli(*args)
    code2, out2, _ = cli(*args)
    assert code == code2 == 0
    f1, f2 = json.loads(out1)["flatness"], json.loads(out2)["flatness"]
    assert f1["expanded_uncertainty_um"] == f2["expanded_uncertainty_um"] > 0
    lo, hi = f1["coverage_interval_um"]
    assert lo < f1["minimum_zone_um"] < hi


def test_csv_uncertainty_needs_a_stated_value(cli):
    code, out, err = cli("reduce", PAD, "--uncertainty", "--trials", "500")
    assert code == 2 and "--u-height-um" in err and err.count("\n") == 1
    code, out, err = cli("reduce", PAD, "--uncertainty", "--trials", "500", "--u-height-um", "0.02", "--json")
    assert code == 0 and json.loads(out)["flatness"]["expanded_uncertainty_um"] > 0


def test_summary_in_inches(cli):
    code, out, err = cli("reduce", PLATE, "--units", "in")
    assert code == 0 and "µin" in out
    code, out, err = cli("reduce", PLATE, "--units", "in", "--json")
    doc = json.loads(out)
    # 1 µin = 0.0254 µm exactly (1959 inch)
    assert doc["flatness_uin"]["minimum_zone_um"] == pytest.approx(doc["flatness"]["minimum_zone_um"] / 0.0254)


def _edit(tmp_path, old, new, count=1, name="bad.toml"):
    text = PLATE.read_text()
    assert old in text, old
    p = tmp_path / name
    p.write_text(text.replace(old, new, count))
    return p


BAD_SURVEYS = [
    # (old text, new text, what the message must say, the fix it must give)
    ("readings = [16.98, 16.38, 17.24, 17.17, 15.57, 15.26, 16.01, 16.03]",
     "readings = [16.98, 16.38, 17.24, 17.17, 15.57, 15.26, 16.01]", r"SW-NE.*7.*8", r"give exactly 8 readings"),
    ("readings = [16.98, 16.38", "readings = [\"a\", 16.38", r"SW-NE", r"write plain numbers"),
    ('unit = "arcsec"', 'unit = "furlongs"', r"unit.*furlongs", r"use one of: arcsec"),
    ("foot_spacing_mm = 100.0", "foot_spacing_mm = 0.0", r"foot_spacing", r"give a positive"),
    ("foot_spacing_mm = 100.0", "foot_spacing_mm = -100.0", r"foot_spacing", r"give a positive"),
    ('name = "SE-NW"', 'name = "SW-NE"', r"SW-NE", r"merge the two tables|rename one"),
    ("readings = [16.98, 16.38", "readings = [nan, 16.38", r"SW-NE|nan|finite", r"replace it with the value read"),
    ("readings = [16.98, 16.38", "readings = [400000.0, 16.38", r"SW-NE.*20 mm/m", r"check the reading"),
]


@pytest.mark.parametrize("old, new, pattern, fix", BAD_SURVEYS)
def test_bad_survey_files(cli, tmp_path, old, new, pattern, fix):
    p = _edit(tmp_path, old, new)
    code, out, err = cli("reduce", p, "--json")
    assert code == 2, err
    assert out == ""
    assert err.startswith("flatcheck: error: ") and err.count("\n") == 1 and "Traceback" not in err
    assert str(p) in err and re.search(rf"{re.escape(str(p))}, line \d+ ", err), err  # file and TOML line
    assert re.search(pattern, err), err
    assert re.search(fix, err), err


def _one_line_naming(err, path, *needles):
    assert err.startswith("flatcheck: error: ") and err.count("\n") == 1 and "Traceback" not in err
    assert str(path) in err, err
    for n in needles:
        assert n in err, (n, err)


def test_missing_line(cli, tmp_path):
    text = PLATE.read_text()
    start = text.index('[[line]]\nname = "S-N"')
    p = tmp_path / "missing.toml"
    p.write_text(text[:start])
    code, out, err = cli("reduce", p)
    assert code == 2
    # the [layout] pattern line is where the missing line is asked for
    no = next(i for i, ln in enumerate(text.splitlines(), 1) if ln.startswith("pattern ="))
    _one_line_naming(err, p, "'S-N'", f"line {no} ", 'add a [[line]] table with name = "S-N"')


def test_line_without_readings_names_its_toml_line(cli, tmp_path):
    text = PLATE.read_text()
    old = "readings = [10.3, 9.94, 9.63, 9.31]"
    p = tmp_path / "unread.toml"
    p.write_text(text.replace(old, "readings = []"))
    code, out, err = cli("reduce", p)
    no = next(i for i, ln in enumerate(text.splitlines(), 1) if ln == old)
    assert code == 2
    _one_line_naming(err, p, "'S-N'", "no readings", f"line {no} ", "fill in its 4 readings")


def _filled(tmp_path, name, plan, fn=lambda x, y: 1e-5 * x * y):
    from flatcheck.io import write_survey
    from flatcheck.survey import simulate_survey

    p = tmp_path / name
    write_survey(p, simulate_survey(plan, fn))
    return p


def test_twist_refusal_names_the_file_and_the_fix(cli, tmp_path):
    from flatcheck.survey import plan_grid

    p = _filled(tmp_path, "grid.toml", plan_grid(460, 360, 100))
    code, out, err = cli("reduce", p)
    assert code == 2
    _one_line_naming(err, p, "twist", "add a diagonal line", "level")


def test_moody_on_a_grid_names_the_file_and_the_option(cli, tmp_path):
    from flatcheck.survey import plan_grid
    from flatcheck.survey import Instrument

    p = _filled(tmp_path, "grid.toml", plan_grid(460, 360, 100, instrument=Instrument("level", "um/m")))
    code, out, err = cli("reduce", p, "--method", "moody")
    assert code == 2
    _one_line_naming(err, p, "Union Jack", "--method least-squares")


def test_disconnected_stations_name_the_file(cli, tmp_path):
    from flatcheck.survey import plan_lines
    from flatcheck.survey import Instrument

    plan = plan_lines([("a", (50, 50), (750, 50), 7), ("b", (50, 150), (750, 150), 7)], length_mm=800, width_mm=200,
                      instrument=Instrument("level", "um/m"))
    p = _filled(tmp_path, "lines.toml", plan, lambda x, y: 0 * x)
    code, out, err = cli("reduce", p)
    assert code == 2
    _one_line_naming(err, p, "not connected", "add a line that joins them")


@pytest.mark.parametrize(
    "content, pattern",
    [(b"", "empty"), (b"\x00\x01\x02binary", "binary"), (b"this is = = not toml [", "TOML|toml")],
)
def test_unreadable_files(cli, tmp_path, content, pattern):
    p = tmp_path / "s.toml"
    p.write_bytes(content)
    code, out, err = cli("reduce", p)
    assert code == 2 and re.search(pattern, err) and err.count("\n") == 1 and "Traceback" not in err


def test_failed_run_keeps_previous_map(cli, tmp_path):
    out_csv = tmp_path / "map.csv"
    out_csv.write_text("previous\n")
    p = _edit(tmp_path, 'unit = "arcsec"', 'unit = "furlongs"')
    code, _, _ = cli("reduce", p, "--map-out", out_csv)
    assert code == 2 and out_csv.read_text() == "previous\n"


GRID = SAMPLES / "plate-KY-P7-grid.toml"


@pytest.mark.parametrize("columns", ["80", "120"])
def test_grid_height_map_is_printed_whole_and_matches_the_nodes(cli, monkeypatch, columns):
    # The table of the 8 x 5 grid was cut to '-0.2…' at 80 columns; every cell must be whole.
    monkeypatch.setenv("COLUMNS", columns)
    code, out, err = cli("reduce", GRID)
    assert code == 0, err
    assert "…" not in out
    code, js, _ = cli("reduce", GRID, "--json")
    doc = json.loads(js)
    # the differential levels read to 0.1 µm/m (the default display step) over 75 mm steps: 0.0075 µm
    # (hand calculation), nearest to the decade 0.01 µm, so heights print to 2 decimals
    assert doc["height_step_um"] == pytest.approx(0.1e-6 * 75e3, rel=1e-12)
    assert "heights to 0.01 µm" in out
    x = np.array([n["x_mm"] for n in doc["nodes"]])
    y = np.array([n["y_mm"] for n in doc["nodes"]])
    z = np.array([n["height_um"] for n in doc["nodes"]])
    # Reference: numpy least squares; the map shows heights about the LS plane.
    A = np.column_stack([np.ones_like(x), x, y])
    r = z - A @ np.linalg.lstsq(A, z, rcond=None)[0]
    rows = {}
    for line in out.splitlines():
        cells = [c.strip() for c in line.strip("│ ").split("│")]
        if len(cells) == 1 + np.unique(x).size and re.fullmatch(r"-?\d+(\.\d+)?", cells[0]):
            rows[float(cells[0])] = [float(c) for c in cells[1:]]
    assert set(rows) == set(np.unique(y))
    for yy, vals in rows.items():
        on_row = np.isclose(y, yy)
        order = np.argsort(x[on_row])
        assert vals == pytest.approx(r[on_row][order], abs=0.0051)  # printed to 2 decimals


def test_map_too_wide_for_the_terminal_is_said_not_truncated(cli, monkeypatch):
    # an 80-column terminal (written to a pipe nothing is wrapped or refused: issue 15, item 9)
    from flatcheck.cli import common

    monkeypatch.setattr(common, "_is_terminal", lambda stream: True)
    monkeypatch.setenv("COLUMNS", "80")
    code, out, err = cli("reduce", PAD)
    assert code == 0, err
    assert "…" not in out
    assert "height map (15 x 15 points) needs" in out and "--map-out" in out


def test_reading_scatter_in_microinches_with_units_in(cli):
    code, js, _ = cli("reduce", PLATE, "--json")
    s0_um = json.loads(js)["residuals"]["sigma0_um"]
    code, out, err = cli("reduce", PLATE, "--units", "in")
    assert code == 0, err
    # 1 µin = 0.0254 µm exactly (international inch, 1959)
    assert f"from the residuals: {s0_um / 0.0254:.1f} µin" in out


def test_window_larger_than_the_surface_is_said_in_the_summary(cli):
    code, out, err = cli("reduce", PLATE, "--window", "5000x5000")
    assert code == 0, err
    assert "5000 x 5000 mm does not fit inside the surveyed area" in " ".join(out.split())


def test_negative_seed_is_refused_naming_the_option(cli):
    # numpy's SeedSequence refuses negative seeds; this was an internal error (exit 3)
    code, out, err = cli("reduce", PLATE, "--uncertainty", "--trials", "100", "--seed", "-1")
    assert code == 2
    assert err.startswith("flatcheck: error: --seed:") and len(err.strip().splitlines()) == 1


@pytest.mark.parametrize("how", ["same", "dotted", "hardlink", "symlink"])
def test_map_out_never_overwrites_the_input(cli, tmp_path, monkeypatch, how):
    # `reduce p3.toml --map-out p3.toml` replaced the survey with the CSV and exited 0
    survey = tmp_path / "p3.toml"
    survey.write_bytes(PLATE.read_bytes())
    before = survey.read_bytes()
    monkeypatch.chdir(tmp_path)
    target = {
        "same": Path("p3.toml"),
        "dotted": Path("sub/../p3.toml"),
        "hardlink": tmp_path / "link.toml",
        "symlink": tmp_path / "sym.csv",
    }[how]
    (tmp_path / "sub").mkdir()
    if how == "hardlink":
        import os

        os.link(survey, target)
    elif how == "symlink":
        target.symlink_to(survey)
    code, out, err = cli("reduce", "p3.toml", "--map-out", target)
    assert code == 2 and out == "" and err.count("\n") == 1 and "Traceback" not in err
    assert "--map-out" in err and "input" in err and "choose another path" in err
    assert survey.read_bytes() == before


def test_refuse_overwriting_inputs_helper(tmp_path):
    from flatcheck.cli.common import refuse_overwriting_inputs
    from flatcheck.errors import OutputError

    a, b = tmp_path / "a.toml", tmp_path / "b.csv"
    a.write_text("x")
    refuse_overwriting_inputs({"--map-out": b, "-o": None}, [a, None])  # different paths pass
    with pytest.raises(OutputError, match="-o"):
        refuse_overwriting_inputs({"--map-out": b, "-o": tmp_path / "." / "b.csv"}, [a])  # two outputs, one file
    with pytest.raises(OutputError, match="--map-out"):
        refuse_overwriting_inputs({"--map-out": a}, [a])


def test_no_redundancy_says_so_instead_of_nan(cli, tmp_path):
    # an indicator grid read once: as many readings as unknowns, so no scatter can be estimated
    # (the summary printed "- µm (nan um)")
    from flatcheck.survey import plan_grid
    from flatcheck.survey import Instrument

    p = _filled(tmp_path, "ind.toml", plan_grid(90, 90, 40, margin_mm=5, instrument=Instrument("indicator", "um")),
                lambda x, y: 1e-3 * x * y)
    code, out, err = cli("reduce", p)
    assert code == 0, err
    assert "no redundancy: no scatter estimate" in out
    assert "nan" not in out.lower()


@pytest.mark.parametrize("sigma", [float("nan"), None, "missing"])
def test_scatter_text_without_a_value(sigma):
    from flatcheck.cli._reduce_view import _scatter_text

    res = {"redundancy": 0} if sigma == "missing" else {"redundancy": 0, "sigma0_um": sigma, "sigma0_reading": sigma}
    assert _scatter_text(res, "um", "um") == "no redundancy: no scatter estimate"
    assert _scatter_text({"redundancy": 3, "sigma0_um": 0.5, "sigma0_reading": 1.0}, "um", "arcsec") == "0.50 µm (1 arcsec)"  # a standard deviation: two significant digits


def test_a_zero_never_prints_with_a_minus_sign(cli, tmp_path, monkeypatch):
    # noise-free readings close to rounding error (about -1e-15 µm), which printed as "-0.000"
    from flatcheck.cli._reduce_view import _fmt
    from flatcheck.survey import plan_union_jack

    assert _fmt(-1e-9, "um") == "0.000" and _fmt(-1e-9, "in") == "0.0" and _fmt(-0.0006, "um") == "-0.001"
    monkeypatch.setenv("COLUMNS", "100")
    p = _filled(tmp_path, "uj.toml", plan_union_jack(1000, 630, 100), lambda x, y: 2e-6 * (x - 500) ** 2 + 1e-3 * y)
    for units in ("um", "in"):
        code, out, err = cli("reduce", p, "--units", units)
        assert code == 0, err
        assert not re.search(r"(?<![\d.])-0\.0+(?!\d*[1-9])\b", out), out


def test_units_in_keeps_json_values_in_um_and_says_so(cli):
    # the JSON said "units": "in" while its values were µm
    code, js_um, _ = cli("reduce", PLATE, "--json")
    code, js_in, err = cli("reduce", PLATE, "--json", "--units", "in")
    assert code == 0, err
    a, b = json.loads(js_um), json.loads(js_in)
    assert b["units"] == "um" and b["display_units"] == "in" and a["display_units"] == "um"
    assert "µm" in b["units_note"] and "mm" in b["units_note"]
    assert b["nodes"] == a["nodes"] and b["flatness"] == a["flatness"] and b["local_flatness"] == a["local_flatness"]
    # µin figures under names that say µin (1 µin = 0.0254 µm exactly); the old *_um names are kept
    fu = b["flatness_uin"]
    assert fu["minimum_zone_uin"] == fu["minimum_zone_um"] == pytest.approx(a["flatness"]["minimum_zone_um"] / 0.0254)
    assert fu["peak_uin"] == pytest.approx(a["flatness"]["peak_um"] / 0.0254)


def test_units_in_shows_positions_in_inches(cli, monkeypatch):
    monkeypatch.setenv("COLUMNS", "100")
    code, js, _ = cli("reduce", PLATE, "--json")
    doc = json.loads(js)
    code, out, err = cli("reduce", PLATE, "--units", "in")
    assert code == 0, err
    lf = doc["local_flatness"]
    # 1 in = 25.4 mm exactly (international inch, 1959)
    assert f"x = {lf['x_mm'] / 25.4:.2f} in, y = {lf['y_mm'] / 25.4:.2f} in" in out
    assert f"{lf['length_mm'] / 25.4:.2f} x {lf['width_mm'] / 25.4:.2f} in" in out
    assert "x in" in out and "x mm" not in out
    ne = next(n for n in doc["nodes"] if n["name"] == "NE")
    assert re.search(rf"│ NE\s+│\s+{ne['x_mm'] / 25.4:.2f} │\s+{ne['y_mm'] / 25.4:.2f} │", out), out
    code, out, err = cli("reduce", GRID, "--units", "in")
    xs = sorted({n["x_mm"] for n in json.loads(cli("reduce", GRID, "--json")[1])["nodes"]})
    assert "rows y in, columns x in" in out and all(f"{x / 25.4:.2f}" in out for x in xs)


def test_auto_window_that_does_not_fit_says_why_and_what_fits(cli):
    # the guideway (1900 x 120 mm surveyed) silently had local_flatness null with --window auto
    code, out, err = cli("reduce", SAMPLES / "guideway-KY-G1.toml", "--json")
    assert code == 0, err
    doc = json.loads(out)
    assert doc["local_flatness"] is None
    note = next(n for n in doc["notes"] if "local flatness" in n)
    assert "larger than the surveyed area" in note and "along y" in note and "--window 250x120" in note
    # the suggested window does fit: local flatness is then given
    code, out, err = cli("reduce", SAMPLES / "guideway-KY-G1.toml", "--json", "--window", "250x120")
    assert json.loads(out)["local_flatness"]["max_um"] > 0
    # a surface smaller than the window both ways: its flatness is the local flatness
    code, out, _ = cli("reduce", PAD, "--json")
    note = next(n for n in json.loads(out)["notes"] if "local flatness" in n)
    assert "smaller than the default 250 x 250 mm window" in note and "--window" in note
    # a surface the default fits gets no such note
    code, out, _ = cli("reduce", PLATE, "--json")
    assert not any("local flatness" in n for n in json.loads(out)["notes"])


def test_input_kind_is_found_from_the_content_not_the_name(cli, tmp_path):
    # pad.dat (a height map) was read as TOML and refused as "not valid TOML"
    dat = tmp_path / "pad.dat"
    dat.write_bytes(PAD.read_bytes())
    code, out, err = cli("reduce", dat, "--json")
    assert code == 0, err
    a = json.loads(out)
    b = json.loads(cli("reduce", PAD, "--json")[1])
    assert a["kind"] == "height-map" and a["nodes"] == b["nodes"] and a["flatness"] == b["flatness"]
    # a survey under another name is still a survey
    s = tmp_path / "p3.survey"
    s.write_bytes(PLATE.read_bytes())
    code, out, err = cli("reduce", s, "--json")
    assert code == 0 and json.loads(out)["kind"] == "survey"
    # a table with another header is told what header a height map needs
    bad = tmp_path / "bad.dat"
    bad.write_text("x,y,z\n0,0,1\n")
    code, out, err = cli("reduce", bad)
    assert code == 2 and str(bad) in err and "x_mm,y_mm,height_um" in err


def test_summary_names_a_suspect_group_once(cli, tmp_path, monkeypatch):
    # A mis-keyed diagonal reading (17.24 keyed as 71.24) on the single-run Union Jack: the layout cannot tell
    # which diagonal reading is wrong, so the summary names the group once instead of listing 73 readings.
    monkeypatch.setenv("COLUMNS", "200")
    text = PLATE.read_text(encoding="utf-8")
    assert text.count("17.24") == 1
    bad = tmp_path / "mis.toml"
    bad.write_text(text.replace("17.24", "71.24"), encoding="utf-8")
    code, out, err = cli("reduce", bad)
    assert code == 0, err
    suspects = [ln for ln in out.splitlines() if "suspect reading:" in ln]
    assert len(suspects) == 1
    assert "'SW-NE'" in suspects[0] and "'SE-NW'" in suspects[0] and "cannot tell" in suspects[0]


def test_summary_prints_brackets_in_notes_literally(cli, tmp_path, monkeypatch):
    # rich markup must not swallow user text: a free line named "[south]" is named in the warnings
    # (weakly checked lines) exactly as written. The survey is the free-lines example of
    # docs/survey-format.md with one line renamed.
    monkeypatch.setenv("COLUMNS", "200")
    doc = (Path(__file__).resolve().parents[2] / "docs" / "survey-format.md").read_text(encoding="utf-8")
    start = doc.index("```toml", doc.index("Free lines along a guideway")) + len("```toml")
    example = doc[start : doc.index("```", start)]
    assert 'name = "south"' in example
    survey = tmp_path / "free.toml"
    survey.write_text(example.replace('name = "south"', 'name = "[south]"'), encoding="utf-8")
    code, out, err = cli("reduce", survey)
    assert code == 0, err
    notes = " ".join(ln for ln in out.splitlines() if "note:" in ln)
    assert "'[south]'" in notes


TWO_RAILS = """
format = "flatcheck-survey"
version = 1
positive = "rises-toward-line-end"
[surface]
description = "two rails"
length_mm = 820.0
width_mm = 130.0
[instrument]
kind = "level"
unit = "mm/m"
[layout]
pattern = "lines"
[[line]]
name = "south"
start_mm = [50.8, 25.4]
end_mm = [762.0, 25.4]
steps = 7
readings = [0.0142, 0.0084, 0.0086, 0.0108, 0.0175, 0.0179, 0.0132]
[[line]]
name = "north"
start_mm = [50.8, 101.6]
end_mm = [762.0, 101.6]
steps = 7
readings = [0.0129, 0.0079, 0.0076, 0.0112, 0.017, 0.0181, 0.0121]
"""


def test_two_rails_at_two_y_levels_reduce(cli, tmp_path):
    # A bow along y sampled at only two y levels is a plane (analytic: v^2 takes one value), so it is not an
    # unobservable shape; with a level's shared zero and one cross step the network is complete.
    survey = tmp_path / "two.toml"
    cross = '[[line]]\nname = "west"\nstart_mm = [50.8, 25.4]\nend_mm = [50.8, 101.6]\nsteps = 1\nreadings = [0.0119]\n'
    survey.write_text(TWO_RAILS + cross, encoding="utf-8")
    code, out, err = cli("reduce", survey, "--json")
    assert code == 0, err
    assert len(json.loads(out)["nodes"]) == 16
    # without the cross step the rails are not tied together: refused, in plain English ("a level")
    survey.write_text(TWO_RAILS, encoding="utf-8")
    code, out, err = cli("reduce", survey)
    assert code == 2 and "an level" not in err and err.count("\n") == 1


def test_run_spread_is_not_stated_for_a_turned_run_with_its_own_zero(cli, tmp_path):
    # A run walked with the autocollimator turned round gets a zero of its own, which absorbs its end-to-end
    # rise: a spread would be zero by construction, so none is stated. A plain back run keeps its spread.
    doc = (Path(__file__).resolve().parents[2] / "docs" / "survey-format.md").read_text(encoding="utf-8")
    start = doc.index("```toml") + len("```toml")
    example = tmp_path / "full.toml"
    example.write_text(doc[start : doc.index("```", start)], encoding="utf-8")
    spreads = {}
    for path in (example, PLATE):
        code, out, err = cli("reduce", path, "--json")
        assert code == 0, err
        spreads[path] = {ln["name"]: ln["run_spread_um"] for ln in json.loads(out)["lines"]}
    assert "flip_sign = true" in example.read_text(encoding="utf-8")
    assert spreads[example]["W-E"] is None
    assert spreads[PLATE]["W-E"] is not None and spreads[PLATE]["W-E"] > 0.01


def test_map_out_x3p_reads_back_with_the_same_flatness(cli, tmp_path):
    # ISO 25178-72 X3P out and in again: the same 45 station heights, so the same minimum zone
    # (an exact LP on the same points; the file stores heights in metres, double precision)
    import json

    survey = Path(__file__).resolve().parents[2] / "sample_readings" / "plate-KY-P3-2024-03-11.toml"
    x3p = tmp_path / "plate.x3p"
    code, out, err = cli("reduce", survey, "--map-out", x3p, "--json", "--window", "none")
    assert code == 0, err
    first = json.loads(out)
    code, out, err = cli("reduce", x3p, "--json", "--window", "none")
    assert code == 0, err
    again = json.loads(out)
    assert again["kind"] == "height-map" and len(again["nodes"]) == len(first["nodes"]) == 45
    assert again["flatness"]["minimum_zone_um"] == pytest.approx(first["flatness"]["minimum_zone_um"], abs=1e-9)
