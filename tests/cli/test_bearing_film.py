"""Tests of the porous-pad film options of ``flatcheck bearing``.

Reference values: the closed-form circular porous pad over a uniform gap (REFERENCE.md section 10 item 15,
the I0 solution re-evaluated here with scipy.special.i0 and scipy.integrate.quad).
"""

import json
import math
import re

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.special import i0
from flatcheck.io import write_heightmap_csv
from flatcheck.survey import surface_grid

PA, PS = 101325.0, 600000.0
FILM = ["--supply-kpa", f"{(PS - PA) / 1e3:.6f}", "--permeability-m2", "1e-15", "--layer-mm", "5"]


def write_surface(path, func, length=200.0, width=100.0, pitch=5.0):
    """A known surface on a regular grid, written as a height-map CSV."""
    write_heightmap_csv(path, surface_grid(func, length, width, pitch))
    return path


def _load_circle(h_um, R=0.025):
    """Closed-form load of the circular porous pad (k 1e-15 m², H 5 mm) over a uniform gap."""
    lam = math.sqrt(12 * 1e-15 / (5e-3 * (h_um * 1e-6) ** 3))
    p = lambda r: math.sqrt(PS**2 - (PS**2 - PA**2) * i0(lam * r) / i0(lam * R))  # noqa: E731
    return quad(lambda r: (p(r) - PA) * 2 * math.pi * r, 0, R)[0]


@pytest.fixture
def flat_csv(tmp_path):
    return write_surface(tmp_path / "flat.csv", lambda X, Y: 0.0 * X + 0.001 * X)  # a tilted plane is flat


@pytest.fixture
def wavy_csv(tmp_path):
    # invented guide: 1.2 µm waves of 60 mm along x
    return write_surface(tmp_path / "wavy.csv", lambda X, Y: 1.2 * np.sin(2 * np.pi * X / 60.0))


def test_film_json_contract_on_flat_guide(cli, flat_csv):
    code, out, err = cli("bearing", flat_csv, "--pad", "d50", "--gap-um", "5", *FILM, "--film-mesh", "48", "--json")
    assert code == 0, err
    doc = json.loads(out)
    film = doc["film"]
    curve = film["curve"]
    assert len(curve) >= 10
    for row in curve:
        assert set(row) == {"gap_um", "load_n", "stiffness_n_per_um", "flow_l_per_min", "mass_flow_mg_per_s",
                            "flow_nl_per_min"}  # normal litres per minute, added by issue 15 (item 7)
    gaps = [r["gap_um"] for r in curve]
    assert gaps[0] < 0.5 * 5 and gaps[-1] > 2 * 5  # from well below to well above G
    assert all(np.diff([r["load_n"] for r in curve]) < 0)
    at5 = min(curve, key=lambda r: abs(r["gap_um"] - 5.0))
    assert at5["gap_um"] == pytest.approx(5.0, rel=1e-9)
    # Source: REFERENCE.md §10 item 15 (628.0 N), closed form re-evaluated with scipy
    assert _load_circle(5.0) == pytest.approx(628.0, abs=0.05)
    assert at5["load_n"] == pytest.approx(_load_circle(5.0), rel=0.005)
    assert gaps[0] < film["peak_stiffness_gap_um"] < gaps[-1]
    # default load = what the pad carries at --gap-um on a flat guide, so on a flat (tilted) guide every
    # station flies at G with the flat-guide stiffness (closed-form slope ~89 N/µm, §10 item 15)
    k_exact = -(_load_circle(5.001) - _load_circle(4.999)) / 0.002
    for st in doc["stations"]:
        f = st["film"]
        assert set(f) >= {"fly_height_um", "min_film_um", "load_n", "stiffness_n_per_um", "flow_l_per_min"}
        assert f["fly_height_um"] == pytest.approx(5.0, abs=1e-3)
        assert f["min_film_um"] == pytest.approx(5.0, abs=1e-3)
        assert f["load_n"] == pytest.approx(_load_circle(5.0), rel=0.005)
        assert f["stiffness_n_per_um"] == pytest.approx(k_exact, rel=0.01)
        assert f["flow_l_per_min"] > 0
    names = [c["name"] for c in doc["checks"]]
    assert "film: loss of least film vs flat guide" in names
    assert "film: stiffness change over the travel" in names
    for c in doc["checks"]:
        if c["name"].startswith("film"):
            assert c["status"] == "fit"
    assert any("isothermal" in a for a in film["assumptions"])


def test_film_on_wavy_guide_changes_verdict_and_stiffness(cli, wavy_csv):
    code, out, err = cli("bearing", wavy_csv, "--pad", "40x20", "--gap-um", "6", *FILM, "--film-mesh", "24", "--json")
    assert code == 0, err
    doc = json.loads(out)
    fl = [s["film"]["min_film_um"] for s in doc["stations"]]
    ks = [s["film"]["stiffness_n_per_um"] for s in doc["stations"]]
    assert min(fl) < 6.0 - 0.1  # waves under a 40 mm pad close part of the film
    assert max(ks) > min(ks)
    film_checks = {c["name"]: c for c in doc["checks"] if c["name"].startswith("film")}
    loss = film_checks["film: loss of least film vs flat guide"]
    design = doc["film"]["pads"][0]["design_fly_height_um"]
    assert loss["value"] == pytest.approx(design - min(fl), abs=1e-6)
    assert loss["limit"] == pytest.approx(0.25 * 6.0)
    order = {"fit": 0, "marginal": 1, "unfit": 2}
    assert order[doc["verdict"]] == max(order[c["status"]] for c in doc["checks"])


def test_film_summary_and_units(cli, flat_csv):
    code, out, err = cli("bearing", flat_csv, "--pad", "d50", "--gap-um", "5", *FILM, "--film-mesh", "24",
                         "--units", "in")
    assert code == 0, err
    assert "Porous-pad film" in out
    assert "µin" in out
    assert "assumptions" in out


def test_film_options_errors_are_one_line(cli, flat_csv):
    for args in (["--supply-kpa", "500"], [*FILM[:4], "--layer-mm", "-1"], [*FILM, "--load-n", "1e6"]):
        code, out, err = cli("bearing", flat_csv, "--pad", "d50", "--gap-um", "5", *args, "--film-mesh", "16", "--json")
        assert code == 2, (args, err)
        assert out == ""
        assert err.count("\n") == 1 and err.startswith("flatcheck: error:")
        assert "Traceback" not in err


# --------------------------------------------------------------------------- orifice-fed pads
ORIFICE = ["--kind", "orifice", "--supply-kpa", f"{(PS - PA) / 1e3:.6f}", "--orifice-mm", "0.2"]


def _radial_orifice(h_um, d_mm=0.2, R=0.025, mu=1.81e-5, rg=287.05, t=293.15):
    """Central orifice on a circular pad, uniform gap: exact log solution + brentq + quad (see test_film_orifice)."""
    from scipy.optimize import brentq

    from flatcheck.bearing import orifice_mass_flow

    r0 = d_mm / 2 * 1e-3
    area = min(math.pi * (d_mm * 1e-3) ** 2 / 4, math.pi * d_mm * 1e-3 * h_um * 1e-6)
    cond = 2 * math.pi * (h_um * 1e-6) ** 3 / (math.log(R / r0) * 24 * mu * rg * t)
    pr = brentq(lambda p: orifice_mass_flow(p, PS, area) - cond * (p * p - PA * PA), PA, PS, xtol=1e-9)
    prof = lambda r: math.sqrt(pr**2 + (PA**2 - pr**2) * math.log(r / r0) / math.log(R / r0))  # noqa: E731
    load = (pr - PA) * math.pi * r0**2 + quad(lambda r: (prof(r) - PA) * 2 * math.pi * r, r0, R, limit=200)[0]
    return pr / PS, load


def test_orifice_film_json_on_flat_guide(cli, flat_csv):
    code, out, err = cli("bearing", flat_csv, "--pad", "d50", "--gap-um", "10", *ORIFICE, "--film-mesh", "30", "--json")
    assert code == 0, err
    doc = json.loads(out)
    film = doc["film"]
    assert film["kind"] == "orifice" and film["orifice_mm"] == 0.2 and film["cd"] == 0.8
    for row in film["curve"]:
        assert set(row) == {
            "gap_um", "load_n", "stiffness_n_per_um", "flow_l_per_min", "mass_flow_mg_per_s", "feed_pressure_ratio",
            "flow_nl_per_min",
        }
    at = min(film["curve"], key=lambda r: abs(r["gap_um"] - 10.0))
    # Source: exact radial solution P = pr² + (pa² - pr²) ln(r/r0)/ln(R/r0) with the orifice formula of
    # REFERENCE.md §6, solved with scipy brentq/quad
    ratio, load = _radial_orifice(10.0)
    assert at["feed_pressure_ratio"] == pytest.approx(ratio, rel=1e-3)
    assert at["load_n"] == pytest.approx(load, rel=2e-3)
    assert film["peak_inside_curve"]
    for st in doc["stations"]:
        f = st["film"]
        assert f["fly_height_um"] == pytest.approx(10.0, abs=1e-3)
        assert f["feed_pressure_ratio"] == pytest.approx(ratio, rel=1e-3)
    assert any("pneumatic hammer" in n for n in film["notes"])
    assert any("Peaceman" in a for a in film["assumptions"])
    assert doc["safety"]


def test_orifice_film_summary_mentions_hammer_and_caution(cli, wavy_csv):
    code, out, err = cli("bearing", wavy_csv, "--pad", "40x20", "--gap-um", "8", *ORIFICE, "--orifices", "2",
                         "--pocket-mm", "1.5", "--pocket-depth-um", "20", "--film-mesh", "20")
    assert code == 0, err
    assert "Orifice-pad film" in out
    assert "pneumatic hammer" in out
    assert out.count("Caution:") >= 2
    assert "feed pressure / supply" in out


def test_film_options_of_the_wrong_kind_are_refused(cli, flat_csv):
    cases = (
        ["--supply-kpa", "500", "--orifice-mm", "0.2"],  # porous pad (default kind) with an orifice option
        [*ORIFICE, "--layer-mm", "5"],  # orifice pad with a porous option
        ["--kind", "orifice", "--supply-kpa", "500"],  # orifice pad without a bore
        [*ORIFICE, "--pocket-mm", "2"],  # pocket without depth
    )
    for args in cases:
        code, out, err = cli("bearing", flat_csv, "--pad", "d50", "--gap-um", "5", *args, "--film-mesh", "16", "--json")
        assert code == 2, (args, err)
        assert out == ""
        assert err.count("\n") == 1 and err.startswith("flatcheck: error:")
        assert "Traceback" not in err


@pytest.mark.parametrize("cells, match", [("2", "too few"), ("100000", "at most 512"), ("513", "at most 512")])
def test_film_mesh_out_of_range_names_the_option(cli, flat_csv, cells, match):
    # --film-mesh 100000 used to end in a MemoryError (exit 3); 2 gave a message naming "mesh size nx"
    code, out, err = cli("bearing", flat_csv, "--pad", "d50", "--gap-um", "5", *FILM, "--film-mesh", cells)
    assert code == 2 and out == "" and "Traceback" not in err
    assert err.count("\n") == 1 and err.startswith("flatcheck: error: --film-mesh:")
    assert match in err


def test_mesh_count_is_bounded_in_the_library():
    from flatcheck.errors import InputValueError
    from flatcheck.bearing import MAX_MESH_CELLS, circular_pad_mesh

    with pytest.raises(InputValueError, match="above 512"):
        circular_pad_mesh(50.0, MAX_MESH_CELLS + 1)


def _mass_flow_circle_mg_s(h_um, R=0.025):
    """Closed-form mass flow of the circular porous pad (k 1e-15 m², H 5 mm) over a uniform gap, mg/s.

    Darcy inflow k (ps² - p²) / (2 mu R_air T H) over the face, with ps² - p² = (ps² - pa²) I0(lam r)/I0(lam R):
    the integral of I0(lam r) 2 pi r dr over the disc is 2 pi R I1(lam R)/lam (scipy.special.i0, i1).
    """
    from scipy.special import i1

    mu, r_air, t = 1.81e-5, 287.05, 293.15
    lam = math.sqrt(12 * 1e-15 / (5e-3 * (h_um * 1e-6) ** 3))
    area_int = 2 * math.pi * R * i1(lam * R) / (lam * i0(lam * R))
    return 1e-15 * (PS**2 - PA**2) / (2 * mu * r_air * t * 5e-3) * area_int * 1e6


def test_mass_flow_in_curve_and_stations(cli, flat_csv):
    code, out, err = cli("bearing", flat_csv, "--pad", "d50", "--gap-um", "5", *FILM, "--film-mesh", "48", "--json")
    assert code == 0, err
    doc = json.loads(out)
    rho_ambient = PA / (287.05 * 293.15)  # ideal gas at ambient, kg/m³
    for row in doc["film"]["curve"]:
        # mg/s = l/min / 60 * 1e-3 m³/l * rho * 1e6 mg/kg
        assert row["mass_flow_mg_per_s"] == pytest.approx(row["flow_l_per_min"] / 60 * rho_ambient * 1e3, rel=1e-9)
    at5 = min(doc["film"]["curve"], key=lambda r: abs(r["gap_um"] - 5.0))
    assert at5["mass_flow_mg_per_s"] == pytest.approx(_mass_flow_circle_mg_s(5.0), rel=0.005)
    for st in doc["stations"]:
        assert st["film"]["mass_flow_mg_per_s"] == pytest.approx(_mass_flow_circle_mg_s(5.0), rel=0.005)


def test_summary_prints_a_short_flat_guide_table(cli, flat_csv):
    code, out, err = cli("bearing", flat_csv, "--pad", "d50", "--gap-um", "5", *FILM, "--film-mesh", "32")
    assert code == 0, err
    lines = out.splitlines()
    top = next(i for i, line in enumerate(lines) if line.startswith("Flat guide, uniform gap"))
    rows = [line for line in lines[top:top + 24] if line.startswith("│") and line.split("│")[1].strip()]
    assert 7 <= len(rows) <= 8
    gaps = [float(r.split("│")[1]) for r in rows]
    assert gaps[0] == pytest.approx(5.0 / 4) and gaps[-1] == pytest.approx(20.0) and gaps == sorted(gaps)
    assert sum("nominal" in r for r in rows) == 1 and "5.000" in next(r for r in rows if "nominal" in r)
    peak = next(r for r in rows if "peak" in r)
    stiff = [float(r.split("│")[3]) for r in rows]
    assert float(peak.split("│")[3]) == max(stiff)
    assert "mass (mg/s)" in out


def test_every_pad_of_a_carriage_gets_its_film_per_station(cli, wavy_csv, tmp_path):
    # two identical pads 60 mm apart in tandem: the rear pad at carriage position x sees the surface the front
    # pad saw at x - 60, so its film there must equal the front pad's (translation of the same surface)
    toml = tmp_path / "tandem.toml"
    toml.write_text(
        '[bearing]\npad = "40x20"\ngap_um = 8\n[carriage]\ntravel_start_mm = 60\ntravel_end_mm = 140\nstep_mm = 4\n'
        '[[carriage.pad]]\nname = "front"\nalong_mm = 30\n[[carriage.pad]]\nname = "rear"\nalong_mm = -30\n',
        encoding="utf-8",
    )
    code, out, err = cli("bearing", wavy_csv, "--bearing", toml, *FILM, "--film-mesh", "16", "--json")
    assert code == 0, err
    doc = json.loads(out)
    stations = {round(s["x_mm"], 6): s for s in doc["stations"]}
    for x, st in stations.items():
        pads = st["film_pads"]
        assert [p["pad"] for p in pads] == ["front", "rear"]
        least = min(pads, key=lambda p: p["min_film_um"])
        assert st["film"] == least  # the pinned entry keeps its meaning: the pad with the least film
        if round(x + 60, 6) in stations:
            later = stations[round(x + 60, 6)]["film_pads"][1]
            assert later["min_film_um"] == pytest.approx(pads[0]["min_film_um"], abs=1e-4)  # Newton tolerance
            assert later["fly_height_um"] == pytest.approx(pads[0]["fly_height_um"], abs=1e-4)
    assert len({round(s["film_pads"][0]["min_film_um"], 4) for s in doc["stations"]}) > 3  # the waves are seen
    assert any("no load is shared" in a for a in doc["film"]["assumptions"])
    code, out, err = cli("bearing", wavy_csv, "--bearing", toml, *FILM, "--film-mesh", "16")
    assert "no load is shared between the pads" in " ".join(out.split())


@pytest.mark.parametrize("file_kind, option_kind", [("porous", "orifice"), ("orifice", "porous")])
def test_kind_option_overrides_the_bearing_file(cli, flat_csv, tmp_path, file_kind, option_kind):
    # --kind was silently ignored with --bearing, and the error then said "add --kind orifice" to a user who had
    toml = tmp_path / "b.toml"
    toml.write_text(f'[bearing]\npad = "d50"\ngap_um = 10\nkind = "{file_kind}"\n', encoding="utf-8")
    feed = ORIFICE[4:] if option_kind == "orifice" else FILM[2:]
    code, out, err = cli("bearing", flat_csv, "--bearing", toml, "--kind", option_kind, "--supply-kpa", "500", *feed,
                         "--film-mesh", "16", "--json")
    assert code == 0, err
    doc = json.loads(out)
    assert doc["film"]["kind"] == option_kind
    assert all(p["pad"]["kind"] == option_kind for p in doc["carriage"]["pads"])
    # without --kind the file's kind stands, and the message says where the kind came from
    code, out, err = cli("bearing", flat_csv, "--bearing", toml, "--supply-kpa", "500", *feed, "--film-mesh", "16")
    assert code == 2 and "bearing file's kind" in err and f"--kind {option_kind}" in err


def test_too_permeable_layer_says_what_to_change(cli, flat_csv):
    # k = 1e-9 m² over a 5 µm gap: the film barely throttles the air and the design load is 99 % of the closed
    # film's; the old message quoted 100 % as the limit while refusing at 98 %, and did not say what to change
    code, out, err = cli("bearing", flat_csv, "--pad", "d50", "--gap-um", "5", "--supply-kpa", "500",
                         "--permeability-m2", "1e-9", "--layer-mm", "5", "--film-mesh", "16")
    assert code == 2 and out == "" and err.count("\n") == 1 and "Traceback" not in err
    assert "too permeable" in err and "--load-n" in err and "--permeability-m2" in err
    limit = 0.98 * 500e3 * math.pi * 0.025**2  # 98 % of gauge pressure times the disc's area, N
    quoted = [float(m) for m in re.findall(r"(?:above|below) ([0-9.]+) N", err)]
    assert len(quoted) == 2 and quoted[0] == quoted[1]  # the threshold stated is the one offered in the fix
    assert quoted[0] == pytest.approx(limit, rel=1e-3)  # the mesh's disc area is the exact area to 1e-3


def test_where_is_empty_for_fit_checks_only(cli, flat_csv, wavy_csv):
    # the film checks filled "where" even when fit; the other checks leave it empty then
    code, out, err = cli("bearing", flat_csv, "--pad", "d50", "--gap-um", "5", *FILM, "--film-mesh", "16", "--json")
    assert code == 0, err
    checks = json.loads(out)["checks"]
    assert any(c["name"].startswith("film") for c in checks)
    for c in checks:
        assert c["status"] == "fit" and c["where"] == []
    code, out, err = cli("bearing", wavy_csv, "--pad", "40x20", "--gap-um", "5", *FILM, "--film-mesh", "16", "--json")
    checks = json.loads(out)["checks"]
    assert any(c["status"] != "fit" for c in checks if c["name"].startswith("film"))
    for c in checks:
        assert (c["where"] == []) == (c["status"] == "fit")
