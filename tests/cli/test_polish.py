"""What a new user and a technician tripped on (issue 15): one regression test per item, at the command line."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from flatcheck.form import HeightMap
from flatcheck.io import read_heightmap_csv, write_heightmap_csv

ROOT = Path(__file__).resolve().parents[2]
SAMPLES = ROOT / "sample_readings"
P3 = SAMPLES / "plate-KY-P3-2024-03-11.toml"
G1 = SAMPLES / "guideway-KY-G1.toml"


@pytest.fixture
def tilted_csv(tmp_path):
    """A 5 x 4 height map: a tilt of 2 µm/m along x and -1 µm/m along y with a 0.5 µm bump (invented)."""
    x, y = np.meshgrid(np.linspace(0, 400, 5), np.linspace(0, 300, 4))
    z = 0.002 * x - 0.001 * y + 0.5 * np.exp(-((x - 200) ** 2 + (y - 100) ** 2) / 5000.0) + 7.0
    path = tmp_path / "tilted.csv"
    write_heightmap_csv(path, HeightMap(x.ravel(), y.ravel(), z.ravel()))
    return path, x.ravel(), y.ravel(), z.ravel()


def test_item2_map_out_of_a_height_map_is_about_the_least_squares_plane_at_full_precision(cli, tilted_csv, tmp_path):
    path, x, y, z = tilted_csv
    out_csv = tmp_path / "map.csv"
    code, out, err = cli("reduce", path, "--map-out", out_csv, "--window", "none")
    assert code == 0, err
    written = read_heightmap_csv(out_csv)
    # reference: numpy least squares of z on (1, x, y); the written heights are the residuals, to the last bit
    A = np.column_stack([np.ones(x.size), x, y])
    r = z - A @ np.linalg.lstsq(A, z, rcond=None)[0]
    order = np.lexsort((written.x_mm, written.y_mm))
    ref = np.lexsort((x, y))
    assert np.allclose(written.height_um[order], r[ref], rtol=0, atol=1e-12)
    assert "about the least-squares plane" in out_csv.read_text(encoding="utf-8").splitlines()[0]
    # the printed map says the same plane and shows the same heights (3 decimals on screen)
    assert "about the least-squares plane" in out
    assert f"{r.max():.3f}" in out and f"{r[0]:.3f}" in out
    # JSON keeps its documented meaning: a height map's nodes are the heights as given
    code, out, err = cli("reduce", path, "--json", "--window", "none")
    nodes = json.loads(out)["nodes"]
    heights = nodes["height_um"] if isinstance(nodes, dict) else [n["height_um"] for n in nodes]
    assert sorted(heights) == pytest.approx(sorted(z), abs=1e-9)


def test_item5_two_pads_on_the_centre_line_say_roll_is_not_determined(cli):
    code, out, err = cli("bearing", G1, "--bearing", SAMPLES / "bearing_tandem_slide.toml")
    assert code == 0, err
    assert "roll not determined by this carriage" in out and "Roll is not determined" in out
    code, out, err = cli("bearing", G1, "--bearing", SAMPLES / "bearing_tandem_slide.toml", "--json")
    motion = json.loads(out)["motion"]
    assert motion["roll_arcsec"] is None and motion["roll_determined"] is False
    assert motion["pitch_arcsec"] is not None


def test_item6_the_p7_notes_call_its_crown_a_crown():
    notes = (SAMPLES / "README.md").read_text(encoding="utf-8") + (SAMPLES / "plate-KY-P7-grid.toml").read_text(
        encoding="utf-8")
    assert "dished" not in notes and "crowned" in notes
    # the invented shape itself: -1.1 (u^2 + v^2) is highest in the middle (a crown), so the map agrees
    from flatcheck import open_surface

    hm = open_surface(SAMPLES / "plate-KY-P7-grid.toml").heightmap
    x, y, z = hm.x_mm, hm.y_mm, hm.height_um
    A = np.column_stack([np.ones(x.size), x, y])
    r = z - A @ np.linalg.lstsq(A, z, rcond=None)[0]
    middle = np.hypot(x - 315, y - 200) < 120
    assert r[middle].mean() > r[~middle].mean()


def test_item7_air_flow_is_in_normal_litres_at_stated_conditions(cli):
    from flatcheck.units import NORMAL_AIR_DENSITY_KG_M3, normal_litres_per_min

    # Source: DIN 1343 normal conditions 0 °C, 101.325 kPa; dry air M = 28.9647 g/mol (ISO 2533), R exact (SI 2019)
    assert NORMAL_AIR_DENSITY_KG_M3 == pytest.approx(1.2923, abs=2e-4)  # 1.293 kg/m^3, from memory
    assert float(normal_litres_per_min(NORMAL_AIR_DENSITY_KG_M3 / 1000.0 / 60.0)) == pytest.approx(1.0)
    args = ("bearing", G1, "--pad", "d80", "--gap-um", "6", "--supply-kpa", "500", "--permeability-m2", "1e-15",
            "--layer-mm", "5", "--film-mesh", "24")
    code, out, err = cli(*args)
    assert code == 0, err
    assert "flow (NL/min)" in out and "l/min)" not in out.replace("NL/min)", "")
    code, out, err = cli(*args, "--json")
    for row in json.loads(out)["film"]["curve"]:
        assert row["flow_nl_per_min"] == pytest.approx(row["mass_flow_mg_per_s"] * 1e-6 / NORMAL_AIR_DENSITY_KG_M3
                                                       * 1000 * 60, rel=1e-9)


def test_item9_piped_output_is_not_wrapped_and_wide_tables_are_not_refused(cli):
    code, out, err = cli("reduce", P3)
    assert code == 0, err
    # the output goes to a pipe (captured): no line is cut at 80 columns mid-sentence
    assert any(len(line) > 100 for line in out.splitlines())
    assert "the terminal has" not in out
    code, out, err = cli("reduce", SAMPLES / "pad-KY-B4-heights.csv", "--window", "none")
    assert code == 0 and "needs" not in out  # a 15 x 15 map is printed whole, not refused for an 80-column width
    for command in ("reduce", "grade", "bearing", "lap", "compare", "report", "demo", "plan"):
        code, out, err = cli(command, "--help")
        assert code == 0 and "<bool>" not in out, command


def test_item10_grade_prints_no_provenance_beside_a_limit(cli):
    code, out, err = cli("grade", P3, "--standard", "din-876", "--no-uncertainty")
    assert code == 0, err
    table = out.split("Limits not checked")[0]
    assert "from memory" not in table and "inferred" not in table and "secondary" not in table
    assert out.count("not checked against the standard's own text") == 1 and "--tolerance-um" in out


def test_item11_report_takes_the_gap_target_and_makes_the_picture_folder(cli, tmp_path, one_line_error):
    pics = tmp_path / "new" / "pictures"
    code, out, err = cli("report", P3, "-o", tmp_path / "r.pdf", "--no-uncertainty", "--window", "none",
                         "--target-gap-um", "8", "--lap-diameter-mm", "150", "--png", pics, "--json")
    assert code == 0, err
    doc = json.loads(out)
    # the gap target as lap takes it: 0.25 x 8 µm (common practice, no single source)
    assert doc["lapping"]["target_um"] == pytest.approx(2.0)
    assert pics.is_dir() and doc["png"] and all(Path(p).parent == pics for p in doc["png"])
    code, out, err = cli("lap", P3, "--target-gap-um", "8", "--lap-diameter-mm", "150", "--json")
    assert "0.25 x 8 µm gap" in json.loads(out)["target_source"]  # the same target words as report's
    blocker = tmp_path / "blocker"
    blocker.write_text("mine", encoding="utf-8")
    code, out, err = cli("report", P3, "-o", tmp_path / "r2.pdf", "--no-uncertainty", "--png", blocker)
    one_line_error(code, err)
    assert blocker.read_text(encoding="utf-8") == "mine"


def test_item12_compare_on_a_union_jack_prints_the_change_at_each_station(cli):
    code, out, err = cli("compare", P3, SAMPLES / "plate-KY-P3-after-lap-1.toml")
    assert code == 0, err
    assert "not a regular grid" not in out and "Change at each station" in out
    code, js, err = cli("compare", P3, SAMPLES / "plate-KY-P3-after-lap-1.toml", "--json")
    doc = json.loads(js)
    changes = doc["change"]
    # every station is a row, named as the survey names it, with the JSON's change (referred to the plane of the
    # least removal) to the printed decimals: 2, as both surveys resolve 100 mm x tan(0.05") = 0.024 µm (hand
    # calculation; the autocollimator's default display step), nearest to the decade 0.01 µm
    rows = {}
    for ln in out.splitlines():
        cells = [c.strip() for c in ln.split("│") if c.strip()]
        if len(cells) == 5 and not cells[0].startswith("station"):
            rows[cells[0]] = cells
    assert len(rows) == doc["nodes"] == 45 and {"C", "SW", "NE", "W-E.3"} <= set(rows)
    printed = sorted(0.0 if r[3] == "0" else float(r[3]) for r in rows.values())
    expected = sorted(round(c["change_referred_um"], 2) + 0.0 for c in changes)
    assert printed == pytest.approx(expected, abs=1.5e-2)
    assert any(len(r[3].split(".")[-1]) == 2 for r in rows.values() if "." in r[3])


def test_item13_target_met_is_one_sentence(cli, tmp_path):
    plan = tmp_path / "plan.txt"
    code, out, err = cli("lap", P3, "--target-um", "5", "--lap-diameter-mm", "150", "--plan-out", plan)
    assert code == 0, err
    assert out.strip().endswith("so no lapping is needed.") and out.count("\n") == 1
    assert plan.read_text(encoding="utf-8").count("\n") == 1


def test_item13_remaining_gain_inside_u_is_met_within_the_uncertainty(cli):
    code, out, err = cli("compare", P3, SAMPLES / "plate-KY-P3-after-lap-1.toml", "--target-um", "1.5", "--json")
    doc = json.loads(out)
    if doc["flatness_after_um"] - 1.5 <= doc["u_after_um"]:
        assert doc["target_met_within_uncertainty"] is True
        code, out, err = cli("compare", P3, SAMPLES / "plate-KY-P3-after-lap-1.toml", "--target-um", "1.5")
        assert "the target is met within the uncertainty" in out
    else:  # the sample's U is smaller than the gain: then it must not be said
        assert doc["target_met_within_uncertainty"] is False


def test_item14_compare_plot_labels_one_spot_with_one_depth_and_carries_its_caption(cli, tmp_path):
    png = tmp_path / "change.png"
    code, out, err = cli("compare", P3, SAMPLES / "plate-KY-P3-after-lap-1.toml", "--plot", png)
    assert code == 0 and png.is_file()
    from matplotlib.image import imread

    img = imread(png)[..., :3].mean(axis=2)
    assert (img[: img.shape[0] // 12] < 0.5).mean() > 0.002  # the caption's text above the views


def test_item17_no_command_prints_an_error_line(cli, one_line_error):
    code, out, err = cli()
    one_line_error(code, err)
    assert "Usage:" in out


def test_item18_asme_diagonal_is_said_to_change_nothing(cli):
    code, out, err = cli("grade", P3, "--standard", "asme-b89.3.7", "--length-basis", "diagonal", "--no-uncertainty")
    assert code == 0, err
    assert "defined on the plate's diagonal anyway" in out


def test_item26_demo_refuses_to_replace_a_persons_file_without_force(cli, tmp_path, one_line_error):
    folder = tmp_path / "demo"
    folder.mkdir()
    mine = folder / "flatcheck-demo-survey.toml"
    mine.write_text("my own survey", encoding="utf-8")
    code, out, err = cli("demo", "--out", folder)
    one_line_error(code, err)
    assert "--force" in err and mine.read_text(encoding="utf-8") == "my own survey"
    assert not (folder / "flatcheck-demo-report.pdf").exists()


def test_item8_limits_and_closures_at_the_precision_of_their_source(cli):
    code, out, err = cli("grade", P3, "--standard", "din-876", "--uncertainty-um", "0.48")
    assert code == 0, err
    # Source: DIN 876 form t = c (1 + L/1000), L = 1000 mm: grade 00 4 µm, grade 0 8 µm (c = 2 from memory, 4)
    rows = {cells[0]: cells for cells in ([c.strip() for c in ln.split("│") if c.strip()] for ln in out.splitlines())
            if cells and cells[0] in ("00", "0")}
    assert rows["00"][1] == "4.0" and rows["0"][1] == "8.0"
    # T - U and T + U at the decimals of U (two significant digits: 0.48)
    assert rows["00"][2] == "3.52" and rows["00"][3] == "4.48"
    code, js, err = cli("reduce", P3, "--json")
    code, out, err = cli("reduce", P3)
    for ln in json.loads(js)["lines"]:
        row = next(r for r in out.splitlines() if r.startswith("│ " + ln["name"] + " "))
        closure = [c.strip() for c in row.split("│") if c.strip()][1]
        assert closure == f"{ln['closure_um']:.2f}".replace("-0.00", "0.00")


def test_item8_heights_print_to_the_step_the_instrument_resolves(cli):
    # The P3 autocollimator reads to 0.05 arcsec (default display step) over 100 mm: 100 mm x tan(0.05") =
    # 0.024 µm (hand calculation). Heights without a U print to 0.01 µm, not to the nm.
    code, out, err = cli("reduce", P3)
    assert code == 0, err
    code, js, _ = cli("reduce", P3, "--json")
    doc = json.loads(js)
    assert "heights to 0.01 µm: one reading resolves 0.024 µm" in out
    tables = {}
    for ln in out.splitlines():
        cells = [c.strip() for c in ln.split("│") if c.strip()]
        if cells:
            tables.setdefault(cells[0], cells)
    # the flatness table: every reference plane's FLTt, FLTp, FLTv and FLTq to two decimals, equal to the JSON
    for ref in doc["flatness"]["references"]:
        row = tables[ref["reference"]]
        assert row[1:5] == [f"{ref[k]:.2f}" for k in ("fltt_um", "fltp_um", "fltv_um", "fltq_um")]
    # station heights: the node SW, about the least-squares plane, to two decimals
    sw = next(n for n in doc["nodes"] if n["name"] == "SW")
    assert tables["SW"][3] == f"{sw['height_um']:.2f}"
    # a target limit is stated as published (DIN 876 grade 00 at 1000 mm: 2 (1 + 1000/1000) = 4 µm, from memory),
    # the guard band U to two significant digits, the flatness to the step
    code, out, err = cli("lap", P3, "--target-grade", "din-876:00", "--trials", "2000", "--seed", "1")
    assert code == 0, err
    assert "limit 4 µm" in out and f"its flatness is {doc['flatness']['minimum_zone_um']:.2f} µm" in out
