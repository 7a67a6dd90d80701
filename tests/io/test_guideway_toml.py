"""Guideway body files and carriage files: good files read, bad files give one-line errors naming the file, the
line or field, and the fix (docs/guideway.md)."""

import textwrap

import numpy as np
import pytest

from flatcheck.errors import FlatcheckError, InputFormatError, InputValueError
from flatcheck.form import HeightMap
from flatcheck.io import write_heightmap_csv
from flatcheck.io._carriage_toml import parse_carriage_toml, read_carriage_toml, wrap_carriage
from flatcheck.io._guideway_toml import read_guideway_toml


def _face_csv(path, width=100.0):
    xs = np.linspace(0.0, 800.0, 9)
    ys = np.linspace(0.0, width, 5)
    X, Y = np.meshgrid(xs, ys)
    write_heightmap_csv(path, HeightMap(X.ravel(), Y.ravel(), 0.001 * X.ravel()))


GOOD = """\
format = "flatcheck-guideway"
version = 1

[guideway]
ident = "T-1"
length_mm = 800

[[face]]
name = "top"
survey = "top.csv"
normal = "+z"

[[face]]
name = "underside"
survey = "under.csv"
normal = "-z"

[[face]]
name = "side"
survey = "side.csv"
normal = "+y"

[[thickness]]
faces = ["underside", "top"]
x_mm = [100, 400, 700]
across_mm = 0
value_um = [0.1, 0.2, 0.3]

[[squareness]]
faces = ["side", "top"]
x_mm = 400
value_arcsec = 1.0

[[twist]]
faces = ["top"]
x_mm = [100, 400, 700]
value_um_per_m = [1.0, 2.0, 3.0]
"""


@pytest.fixture
def folder(tmp_path):
    for name in ("top.csv", "under.csv", "side.csv"):
        _face_csv(tmp_path / name)
    return tmp_path


def _write(folder, text, name="body.toml"):
    p = folder / name
    p.write_text(textwrap.dedent(text), encoding="utf-8")
    return p


def test_good_file_reads(folder):
    body = read_guideway_toml(_write(folder, GOOD))
    assert body.face_names == ("top", "underside", "side")
    assert len(body.thickness) == 3 and body.thickness[1].x_mm == 400.0 and body.thickness[2].value_um == 0.3
    # 1 arcsec = pi/648000 rad = 4.848137 µrad (REFERENCE.md section 10, item 1)
    assert body.squareness[0].value_urad == pytest.approx(4.848137, abs=1e-6)
    assert body.twist[0].slope_urad.tolist() == [1.0, 2.0, 3.0]


BAD = [
    # (replace this, with this, the error class, words the one-line message must contain)
    ('format = "flatcheck-guideway"', 'format = "flatcheck-survey"', InputFormatError, ["line 1", "format", "flatcheck-guideway"]),
    ("version = 1", "version = 2", InputFormatError, ["line 2", "version = 1"]),
    ('ident = "T-1"\n', "", InputFormatError, ["[guideway]", "no ident", "add ident"]),
    ("length_mm = 800", "length_mm = -800", InputValueError, ["line 6", "length_mm", "positive"]),
    ('normal = "+y"', 'normal = "up"', InputValueError, ["line 21", "[[face]] #3", "'normal'", '"+z"']),
    ('survey = "side.csv"', 'survey = "nowhere.csv"', InputFormatError, ["line 20", "'survey'", "no such survey file"]),
    ('name = "side"', 'name = "side"\ncolour = "grey"', InputFormatError, ["line 20", "[[face]] #3", "'colour'", "use only"]),
    ('faces = ["underside", "top"]', 'faces = ["underside", "roof"]', InputValueError,
     ["line 24", "[[thickness]] #1", "'faces'", "no face called 'roof'"]),
    ('faces = ["underside", "top"]', 'faces = ["side", "top"]', InputValueError,
     ["[[thickness]] #1", "opposed", "[[squareness]]"]),
    ("value_um = [0.1, 0.2, 0.3]", "value_um = [0.1, 0.2]", InputValueError,
     ["line 27", "'value_um'", "2 values", "one value per reading"]),
    ("value_arcsec = 1.0", "value_arcsec = 1.0\nvalue_urad = 4.8", InputValueError, ["[[squareness]] #1", "two units"]),
    ('faces = ["side", "top"]', 'faces = ["underside", "top"]', InputValueError, ["squareness", "perpendicular"]),
    ("x_mm = [100, 400, 700]\nvalue_um_per_m", "x_mm = [100]\nvalue_um_per_m", InputValueError, []),
    ("length_mm = 800", 'length_mm = 800\ndatum = "floor"', InputValueError, ["'datum'", "'floor'", "[[face]]"]),
    ("[[twist]]", "[[twists]]", InputFormatError, ["twists", "use only"]),
    ("across_mm = 0", "across_mm = 0\n", None, []),  # harmless: still reads
    ("value_um = [0.1, 0.2, 0.3]", 'value_um = [0.1, "0.2", 0.3]', InputValueError, ["entry 2 of value_um", "number"]),
    ("[guideway]", "[guideway", InputFormatError, ["not a valid TOML file"]),
]


@pytest.mark.parametrize("old,new,error,words", BAD)
def test_bad_body_files_give_one_line_errors(folder, old, new, error, words):
    text = GOOD.replace(old, new, 1)
    assert text != GOOD or old == new
    path = _write(folder, text)
    if error is None:
        read_guideway_toml(path)
        return
    if old.startswith("x_mm = [100, 400, 700]\nvalue_um_per_m"):
        text = GOOD.replace("x_mm = [100, 400, 700]\nvalue_um_per_m = [1.0, 2.0, 3.0]", "x_mm = [100]\nvalue_um_per_m = [1.0]")
        path = _write(folder, text)
        words = ["[[twist]] #1", "two or more stations"]
    with pytest.raises(error) as ei:
        read_guideway_toml(path)
    msg = ei.value.one_line()
    assert "\n" not in msg
    assert str(path) in msg
    for w in words:
        assert w in msg, msg
    assert ei.value.fix  # every message says how to fix it


def test_missing_and_empty_body_files(tmp_path):
    with pytest.raises(InputFormatError, match="no such file"):
        read_guideway_toml(tmp_path / "none.toml")
    (tmp_path / "empty.toml").write_text("")
    with pytest.raises(InputFormatError, match="empty"):
        read_guideway_toml(tmp_path / "empty.toml")


CARRIAGE = """\
[bearing]
pad = "80x60"
gap_um = 6
kind = "porous"

[carriage]
load_n = 1200
pivot = true

[[carriage.pad]]
name = "up"
face = "top"

[[carriage.pad]]
name = "down"
face = "underside"

[film]
supply_kpa = 500
permeability_m2 = 5e-16
layer_mm = 5

[budget]
straightness_um = 1.0
yaw_arcsec = 2.0
"""


def test_carriage_file_reads_and_builds(tmp_path):
    p = tmp_path / "c.toml"
    p.write_text(CARRIAGE)
    desc = read_carriage_toml(p)
    c = wrap_carriage(desc)
    assert [pp.face for pp in c.pads] == ["top", "underside"]
    assert c.load_n == 1200.0 and c.pivot is True
    assert c.budget.vertical_straightness_um == 1.0 and c.budget.yaw_arcsec == 2.0
    assert c.feed.permeability_m2 == 5e-16
    # options override the file
    c2 = wrap_carriage(desc, gap_um=8.0, film={"supply_kpa": 400.0})
    assert all(pp.pad.gap_um == 8.0 for pp in c2.pads) and c2.feed.supply_gauge_kpa == 400.0


CARRIAGE_BAD = [
    ("load_n = 1200", 'load_n = "heavy"', ["line 7", "[carriage]", "'load_n'", "number"]),
    ("pivot = true", "pivot = 1", ["'pivot'", "true or false"]),
    ('name = "up"', 'name = "up"\nwidth = 3', ["[[carriage.pad]] #1", "'width'", "use only"]),
    ("layer_mm = 5", "layer_mm = 5\norifice_mm = 0.2", ["orifice_mm", "porous"]),
    ("permeability_m2 = 5e-16\n", "", ["[film]", "permeability_m2"]),
    ('name = "down"', 'name = "up"', ["[[carriage.pad]] #2", "used twice"]),
    ('pad = "80x60"', 'pad = "80 by 60"', ["'pad'", "LxW"]),
    ("yaw_arcsec = 2.0", "yaw_arcsec = 2.0\nstraightness = 3", ["[budget]", "'straightness'"]),
]


@pytest.mark.parametrize("old,new,words", CARRIAGE_BAD)
def test_bad_carriage_files_give_one_line_errors(tmp_path, old, new, words):
    p = tmp_path / "c.toml"
    text = CARRIAGE.replace(old, new, 1)
    assert text != CARRIAGE
    p.write_text(text)
    with pytest.raises(FlatcheckError) as ei:
        wrap_carriage(read_carriage_toml(p))
    msg = ei.value.one_line()
    assert "\n" not in msg and str(p) in msg
    for w in words:
        assert w in msg, msg


def test_carriage_file_may_be_a_plain_bearing_file():
    # the bearing file format read today (no [film], no faces by name) parses; the film data then must come
    # from the command line
    desc = parse_carriage_toml('[bearing]\npad = "120x80"\ngap_um = 8.0\n', source="b.toml")
    assert desc.pads[0].face == "top"
    with pytest.raises(InputValueError, match="supply_kpa"):
        wrap_carriage(desc)
    c = wrap_carriage(desc, film={"supply_kpa": 500.0, "permeability_m2": 1e-15, "layer_mm": 5.0})
    assert c.pads[0].pad.gap_um == 8.0
