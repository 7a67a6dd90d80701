"""Tests of ``flatcheck bearing``: the pinned JSON contract, options, bearing files and one-line errors."""

import json
import math
from pathlib import Path

import numpy as np
import pytest
from flatcheck.io import write_heightmap_csv
from flatcheck.survey import surface_grid

SAMPLE = Path(__file__).resolve().parents[2] / "sample_readings" / "bearing_tandem_slide.toml"
ARCSEC_PER_UM_PER_MM = 1e-3 * 648000 / math.pi  # exact: 1 µm/mm = 1e-3 rad


def write_surface(path, func, length=600.0, width=300.0, pitch=10.0):
    """A known surface on a regular grid, written as a height-map CSV."""
    write_heightmap_csv(path, surface_grid(func, length, width, pitch))
    return path


@pytest.fixture
def sine_csv(tmp_path):
    # 1 µm amplitude, 200 mm wavelength along x, constant across
    return write_surface(tmp_path / "sine.csv", lambda X, Y: np.sin(2 * np.pi * X / 200.0))


def test_pinned_json_keys(cli, sine_csv):
    code, out, err = cli("bearing", sine_csv, "--pad", "100x60", "--gap-um", "8", "--json")
    assert code == 0
    doc = json.loads(out)
    for key in ("limit_um", "local_flatness_max_um", "verdict", "motion", "stations"):
        assert key in doc
    assert doc["limit_um"] == pytest.approx(2.0)  # 1/4 of 8 µm, the stated common-practice default
    assert doc["verdict"] in ("fit", "marginal", "unfit")
    assert {"straightness_um", "pitch_arcsec"} <= set(doc["motion"])
    st = doc["stations"]
    assert len(st) > 10
    for s in st:
        assert {"x_mm", "mean_height_um", "local_flatness_um", "clearance_um"} <= set(s)
    # single pad along x, centred across: travel from L/2 to length - L/2, step <= L/10
    xs = [s["x_mm"] for s in st]
    assert xs[0] == pytest.approx(50.0) and xs[-1] == pytest.approx(550.0)
    assert max(np.diff(xs)) <= 10.0 + 1e-9
    assert all(s["y_mm"] == pytest.approx(150.0) for s in st)
    # station height is the mean under the pad: A sin(kx) sinc(L/lam) (exact integral), bilinear data at 10 mm
    for s in st:
        expected = np.sin(2 * np.pi * s["x_mm"] / 200.0) * np.sinc(100.0 / 200.0)
        assert s["mean_height_um"] == pytest.approx(expected, abs=0.01)
    assert doc["local_flatness_max_um"] == pytest.approx(max(s["local_flatness_um"] for s in st))


def test_circular_pad_and_tilt(cli, tmp_path):
    # a tilted plane: the pitch is constant, so its peak-to-valley is 0 and there is no straightness error
    csv = write_surface(tmp_path / "tilt.csv", lambda X, Y: 0.005 * X)
    code, out, _ = cli("bearing", csv, "--pad", "d80", "--gap-um", "6", "--json")
    assert code == 0
    doc = json.loads(out)
    assert doc["motion"]["straightness_um"] < 1e-9
    assert doc["motion"]["pitch_arcsec"] < 1e-9
    assert doc["stations"][0]["pitch_arcsec"] == pytest.approx(0.005 * ARCSEC_PER_UM_PER_MM)
    assert doc["verdict"] == "fit"
    assert doc["carriage"]["pads"][0]["pad"]["shape"] == "circle"


def test_unfit_verdict_still_exits_zero(cli, sine_csv):
    code, out, _ = cli("bearing", sine_csv, "--pad", "100x60", "--gap-um", "2", "--json")
    assert code == 0
    doc = json.loads(out)
    assert doc["verdict"] == "unfit"
    assert doc["checks"][0]["where"]


def test_summary_shows_verdict_and_air_caution(cli, sine_csv):
    from flatcheck.cli.common import SAFETY_LINES

    code, out, _ = cli("bearing", sine_csv, "--pad", "100x60", "--gap-um", "8", "--units", "in")
    assert code == 0
    assert "Verdict" in out and "µin" in out
    assert "common practice" in out
    assert " ".join(SAFETY_LINES["air"].split()[:4]) in " ".join(out.split())


def test_bearing_file_sample(cli, tmp_path):
    # the sample bearing file: two tandem pads on top, one side pad skipped
    csv = write_surface(tmp_path / "g.csv", lambda X, Y: 2e-6 * (X - 500) ** 2, length=1000, width=300, pitch=10)
    code, out, err = cli("bearing", csv, "--bearing", SAMPLE, "--json")
    assert code == 0, err
    doc = json.loads(out)
    assert doc["skipped_pads"] == ["side guide"]
    assert [p["name"] for p in doc["stations"][0]["pads"]] == ["front", "rear"]
    # parabola q(x-500)^2: tandem pitch = 2 q (x - 500) (exact mean of a parabola, see tests/test_bearing.py)
    for s in doc["stations"]:
        assert s["pitch_arcsec"] == pytest.approx(2 * 2e-6 * (s["x_mm"] - 500) * ARCSEC_PER_UM_PER_MM, abs=1e-3)
    names = [c["name"] for c in doc["checks"]]
    assert "carriage pitch" in names and "carriage straightness" in names


def test_options_override_the_bearing_file(cli, tmp_path):
    csv = write_surface(tmp_path / "g.csv", lambda X, Y: 0.0 * X, length=1000)
    code, out, _ = cli("bearing", csv, "--bearing", SAMPLE, "--gap-um", "4", "--gap-fraction", "0.5", "--json")
    assert code == 0
    doc = json.loads(out)
    assert doc["limit_um"] == pytest.approx(2.0)
    assert doc["carriage"]["pads"][0]["pad"]["gap_um"] == 4


def test_pad_face_option(cli, tmp_path, sine_csv):
    face = write_surface(tmp_path / "face.csv", lambda X, Y: 0.5 * ((abs(X - 40) < 12) & (abs(Y - 30) < 12)), length=80, width=60, pitch=5)
    code, out, _ = cli("bearing", sine_csv, "--pad", "80x60", "--gap-um", "8", "--pad-face", face, "--json")
    assert code == 0
    doc = json.loads(out)
    # a central 0.5 µm plateau on a flat face: by symmetry no tilt narrows the zone, so MZ = 0.5 µm
    assert doc["pad_face"]["flatness_um"] == pytest.approx(0.5, abs=1e-9)
    assert "pad face flatness" in [c["name"] for c in doc["checks"]]


@pytest.mark.parametrize(
    "args, match",
    [
        (["--pad", "120by80", "--gap-um", "8"], "pad size"),
        (["--pad", "120x", "--gap-um", "8"], "pad size"),
        (["--pad", "120x80", "--gap-um", "-8"], "air gap"),
        (["--pad", "120x80", "--gap-um", "0"], "air gap"),
        (["--pad", "120x80"], "no pad described"),
        (["--gap-um", "8"], "no pad described"),
        (["--pad", "100x60", "--gap-um", "8", "--step-mm", "20"], "tenth"),
        (["--pad", "100x60", "--gap-um", "8", "--gap-fraction", "2"], "fraction"),
        (["--pad", "900x60", "--gap-um", "8"], "longer|long"),
        (["--pad", "100x60", "--gap-um", "8", "--kind", "magnetic"], "kind"),
        (["--pad", "100x60", "--gap-um", "8", "--bearing", "missing.toml"], "no such file"),
    ],
)
def test_bad_options_one_line(cli, sine_csv, args, match, one_line_error):
    code, out, err = cli("bearing", sine_csv, *args)
    one_line_error(code, err, out=out, quiet=True)
    assert __import__("re").search(match, err)


def test_missing_input(cli, tmp_path, one_line_error):
    code, out, err = cli("bearing", tmp_path / "nothing.csv", "--pad", "100x60", "--gap-um", "8")
    one_line_error(code, err, out=out, quiet=True)


def test_plot_of_the_carriage_path(cli, sine_csv, tmp_path):
    png = tmp_path / "carriage.png"
    code, out, err = cli("bearing", sine_csv, "--pad", "60x40", "--gap-um", "10", "--plot", png)
    assert code == 0, err
    import matplotlib.image as mpimg
    import numpy as np

    img = mpimg.imread(png)
    assert img.shape[0] > 500 and img.shape[1] > 800
    grey = img[..., :3].mean(axis=2)
    assert (grey < 0.5).mean() > 0.005  # lines and text drawn, not a blank page
    code, out, err = cli("bearing", sine_csv, "--pad", "60x40", "--gap-um", "10", "--plot", tmp_path / "no" / "x.png")
    assert code == 2 and "does not exist" in err and err.count("\n") == 1


@pytest.mark.parametrize(
    "args, where",
    [
        (["--step-mm", "0"], "--step-mm"),
        (["--step-mm", "-1"], "--step-mm"),
        (["--gap-fraction", "nan"], "--gap-fraction"),
        (["--gap-fraction", "1.5"], "--gap-fraction"),
        (["--marginal-from", "1.5"], "--marginal-from"),
        (["--sample-pitch-mm", "0"], "--sample-pitch-mm"),
        (["--budget-roll-arcsec", "0"], "--budget-roll-arcsec"),
        (["--travel-start-mm", "400", "--travel-end-mm", "100"], "--travel-start-mm/--travel-end-mm"),
    ],
)
def test_bad_numbers_name_their_option(cli, sine_csv, args, where, one_line_error):
    code, out, err = cli("bearing", sine_csv, "--pad", "100x60", "--gap-um", "8", *args)
    one_line_error(code, err, out=out, quiet=True)
    assert err.startswith(f"flatcheck: error: {where}: ")


@pytest.mark.parametrize(
    "args, match",
    [
        (["--pad", "1e-9x1e-9", "--gap-um", "8"], "check the pad size"),  # was MemoryError, exit 3
        (["--pad", "100x60", "--gap-um", "8", "--step-mm", "0.001"], "at least"),
        (["--pad", "100x60", "--gap-um", "8", "--sample-pitch-mm", "1e-4"], "sampling pitch"),
    ],
)
def test_absurdly_fine_sampling_is_refused_not_a_crash(cli, sine_csv, args, match, one_line_error):
    code, out, err = cli("bearing", sine_csv, *args)
    one_line_error(code, err, out=out, quiet=True)
    assert match in err


def test_microinch_summary_to_a_tenth(cli, sine_csv):
    code, js, _ = cli("bearing", sine_csv, "--pad", "100x60", "--gap-um", "8", "--json")
    lf_um = json.loads(js)["local_flatness_max_um"]
    code, out, err = cli("bearing", sine_csv, "--pad", "100x60", "--gap-um", "8", "--units", "in")
    assert code == 0, err
    # 1 µin = 0.0254 µm exactly (international inch, 1959)
    assert f"Local flatness under the pads: max {lf_um / 0.0254:.1f} µin" in out


def test_warnings_in_json_and_summary(cli, tmp_path):
    # a map longer in y than in x, surveyed at 50 mm: the 60 x 40 mm pad still rides along x (pinned contract)
    csv = write_surface(tmp_path / "across.csv", lambda X, Y: 0.001 * X, length=300.0, width=600.0, pitch=50.0)
    code, out, err = cli("bearing", csv, "--pad", "60x40", "--gap-um", "8", "--json")
    assert code == 0, err
    warnings = json.loads(out)["warnings"]
    assert any("longer across" in w for w in warnings)
    assert any("interpolation between stations" in w for w in warnings)
    code, out, err = cli("bearing", csv, "--pad", "60x40", "--gap-um", "8")
    assert code == 0 and out.count("Warning:") == 2
    fine = write_surface(tmp_path / "fine.csv", lambda X, Y: 0.001 * X, length=600.0, width=300.0, pitch=10.0)
    code, out, err = cli("bearing", fine, "--pad", "60x40", "--gap-um", "8", "--json")
    assert json.loads(out)["warnings"] == []


def _bearing_file(tmp_path, carriage):
    p = tmp_path / "slide.toml"
    p.write_text('[bearing]\npad = "100x60"\ngap_um = 8\n[carriage]\n' + carriage, encoding="utf-8")
    return p


@pytest.mark.parametrize(
    "carriage, options, where",
    [
        ("step_mm = 50\n", [], "slide.toml, [carriage], field 'step_mm'"),
        ("", ["--step-mm", "50"], "--step-mm"),
        ("step_mm = 5\n", ["--step-mm", "50"], "--step-mm"),
        ("travel_start_mm = 400\ntravel_end_mm = 100\n", [],
         "slide.toml, [carriage], fields 'travel_start_mm' and 'travel_end_mm'"),
        ("travel_start_mm = 5000\n", [], "slide.toml, [carriage], field 'travel_start_mm'"),
        ("travel_start_mm = 400\n", ["--travel-end-mm", "100"], "slide.toml, [carriage], field 'travel_start_mm' and --travel-end-mm"),
        ('face = "top"\n[[carriage.pad]]\nface = "side"\n', [], "slide.toml, [carriage], field 'face'"),
    ],
)
def test_carriage_errors_name_the_file_field_or_option(cli, sine_csv, tmp_path, carriage, options, where, one_line_error):
    # these errors used to come without any "where" (a step too large, a reversed travel, no pad on the face)
    toml = _bearing_file(tmp_path, carriage)
    code, out, err = cli("bearing", sine_csv, "--bearing", toml, *options)
    one_line_error(code, err, out=out, quiet=True)
    assert err.startswith(f"flatcheck: error: {where.replace('slide.toml', str(toml))}:")


def test_step_option_without_file_is_named(cli, sine_csv, one_line_error):
    code, out, err = cli("bearing", sine_csv, "--pad", "100x60", "--gap-um", "8", "--step-mm", "50")
    one_line_error(code, err, out=out, quiet=True)
    assert err.startswith("flatcheck: error: --step-mm: a travel step of 50 mm")


def test_pad_size_too_large_to_be_a_number(cli, sine_csv, one_line_error):
    code, out, err = cli("bearing", sine_csv, "--pad", "1e400x80", "--gap-um", "8")
    one_line_error(code, err, out=out, quiet=True)
    assert "--pad" in err and "not a finite number" in err


def test_plot_may_not_overwrite_an_input(cli, sine_csv, one_line_error):
    before = sine_csv.read_bytes()
    code, out, err = cli("bearing", sine_csv, "--pad", "60x40", "--gap-um", "8", "--plot", sine_csv)
    one_line_error(code, err, out=out, quiet=True)
    assert "--plot" in err and "input" in err
    assert sine_csv.read_bytes() == before
