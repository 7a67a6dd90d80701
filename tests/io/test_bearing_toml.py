"""Tests of the bearing description file reader and the pad-size syntax."""

import pytest

from flatcheck.errors import InputFormatError, InputValueError
from flatcheck.bearing import parse_pad_size
from flatcheck.io import parse_bearing_toml, read_bearing_toml

TANDEM = """
[bearing]
label = "test slide"
pad = "120x80"
gap_um = 8.0
kind = "porous"
gap_fraction = 0.2

[carriage]
face = "top"
y_mm = 300
step_mm = 10

[[carriage.pad]]
name = "front"
along_mm = 150

[[carriage.pad]]
name = "rear"
along_mm = -150
pad = "d60"
gap_um = 6
stiffness = 2

[[carriage.pad]]
name = "side"
face = "side"

[budget]
pitch_arcsec = 2.0
"""


@pytest.mark.parametrize(
    "text, expected",
    [
        ("120x80", ("rect", 120.0, 80.0)),
        ("120 x 80 mm", ("rect", 120.0, 80.0)),
        ("50.5X20", ("rect", 50.5, 20.0)),
        ("d80", ("circle", 80.0, 80.0)),
        ("D 25.4", ("circle", 25.4, 25.4)),
    ],
)
def test_pad_sizes(text, expected):
    assert parse_pad_size(text) == expected


@pytest.mark.parametrize("text", ["120", "120x", "x80", "d", "120x80x5", "abc", "-120x80", "0x80", "d-5", "120,80"])
def test_bad_pad_sizes(text):
    with pytest.raises(InputValueError, match="pad size"):
        parse_pad_size(text, where="--pad")


def test_tandem_file():
    desc = parse_bearing_toml(TANDEM, source="t.toml")
    car = desc.carriage
    assert [p.name for p in car.pads] == ["front", "rear", "side"]
    assert [p.name for p in car.active_pads] == ["front", "rear"]
    front, rear, _ = car.pads
    assert (front.pad.shape, front.pad.length_mm, front.pad.width_mm, front.pad.gap_um) == ("rect", 120, 80, 8)
    assert (rear.pad.shape, rear.pad.length_mm, rear.pad.gap_um, rear.stiffness) == ("circle", 60, 6, 2)
    assert front.along_mm == 150 and rear.along_mm == -150
    assert car.y_mm == 300 and car.step_mm == 10 and car.travel_start_mm is None
    assert desc.gap_fraction == 0.2 and desc.marginal_from is None
    assert desc.budget.pitch_arcsec == 2.0 and desc.budget.straightness_um is None


def test_single_pad_file(tmp_path):
    p = tmp_path / "b.toml"
    p.write_text('[bearing]\npad = "d80"\ngap_um = 5\nkind = "orifice"\n', encoding="utf-8")
    desc = read_bearing_toml(p)
    (only,) = desc.carriage.pads
    assert only.pad.shape == "circle" and only.pad.kind == "orifice" and only.along_mm == 0


@pytest.mark.parametrize(
    "text, error, match",
    [
        ('[bearing]\npad = "120x80"\n', InputFormatError, "no air gap"),
        ("[bearing]\ngap_um = 8\n", InputFormatError, "no pad size"),
        ('[bearing]\npad = "120x80"\ngap_um = 8\ngap_mm = 1\n', InputFormatError, "unknown key 'gap_mm'"),
        ('[bearing]\npad = "120x80"\ngap_um = -8\n', InputValueError, "air gap"),
        ('[bearing]\npad = "120x80"\ngap_um = "eight"\n', InputValueError, "must be a number"),
        ('[bearing]\npad = "120x80"\ngap_um = 8\nkind = "magnetic"\n', InputValueError, "kind"),
        ('[bearing]\npad = "12O"\ngap_um = 8\n', InputValueError, "pad size"),
        ("[carriage]\nface = 'top'\n", InputFormatError, r"no \[bearing\]"),
        ("[bearing\n", InputFormatError, "TOML"),
        ('[bearing]\npad = "120x80"\ngap_um = 8\n[[carriage.pad]]\nalong = 3\n', InputFormatError, "unknown key"),
        ('[bearing]\npad = "120x80"\ngap_um = 8\n[budget]\npitch_arcsec = 0\n', InputValueError, "budget"),
    ],
)
def test_bad_files(text, error, match):
    with pytest.raises(error, match=match) as info:
        parse_bearing_toml(text, source="bad.toml")
    assert "bad.toml" in str(info.value)  # the message says where


def test_empty_and_missing_files(tmp_path):
    empty = tmp_path / "e.toml"
    empty.write_text("", encoding="utf-8")
    with pytest.raises(InputFormatError, match="empty"):
        read_bearing_toml(empty)
    with pytest.raises(InputFormatError, match="no such file"):
        read_bearing_toml(tmp_path / "missing.toml")


# ---------------------------------------------------------------- regressions found by trying the commands as a new user


@pytest.mark.parametrize(
    "old, new, where",
    [
        # a bad gap is in [bearing], not in the first pad table the old message named
        ("gap_um = 8.0", "gap_um = -8.0", "[bearing], field 'gap_um'"),
        ("gap_fraction = 0.2", "gap_fraction = 0", "[bearing], field 'gap_fraction'"),
        ("gap_fraction = 0.2", "gap_fraction = 2", "[bearing], field 'gap_fraction'"),
        ("pitch_arcsec = 2.0", "pitch_arcsec = -2.0", "[budget], field 'pitch_arcsec'"),
        ("along_mm = 150", "along_mm = nan", "[[carriage.pad]] #1, field 'along_mm'"),
        ("along_mm = -150", "along_mm = inf", "[[carriage.pad]] #2, field 'along_mm'"),
        ("stiffness = 2", "stiffness = 0", "[[carriage.pad]] #2, field 'stiffness'"),
        ("step_mm = 10", "step_mm = 0", "[carriage], field 'step_mm'"),
        ('name = "rear"', 'name = "front"', "[[carriage.pad]] #2, field 'name'"),
    ],
)
def test_errors_name_table_and_field(old, new, where):
    assert old in TANDEM
    with pytest.raises(InputValueError) as exc:
        parse_bearing_toml(TANDEM.replace(old, new, 1), source="slide.toml")
    assert exc.value.where == f"slide.toml, {where}"
    assert exc.value.fix


def test_duplicate_pad_name_is_named():
    with pytest.raises(InputValueError) as exc:
        parse_bearing_toml(TANDEM.replace('name = "rear"', 'name = "front"'), source="slide.toml")
    assert "'front'" in exc.value.message and "#1" in exc.value.message


def test_empty_file_fix_asks_for_a_bearing_file(tmp_path):
    for data in (b"", b"\x00\x01binary"):
        p = tmp_path / "b.toml"
        p.write_bytes(data)
        with pytest.raises(InputFormatError) as exc:
            read_bearing_toml(p)
        assert "[bearing]" in exc.value.fix and "survey" not in exc.value.fix


_BASE = '[bearing]\npad = "120x80"\ngap_um = 8\n'


@pytest.mark.parametrize(
    "extra, where, match",
    [
        # a list of numbers or strings where [[carriage.pad]] tables belong: was a TypeError / "unknown key 'a'"
        ("[carriage]\npad = [1, 2]\n", "[carriage], field 'pad' entry #1", "each pad must be a table, got 1"),
        ('[carriage]\npad = ["a"]\n', "[carriage], field 'pad' entry #1", "each pad must be a table, got 'a'"),
        ('[carriage]\npad = [{name = "a"}, 3]\n', "[carriage], field 'pad' entry #2", "got 3"),
        # [carriage.pad] (one table) instead of [[carriage.pad]]
        ('[carriage.pad]\nname = "a"\n', "[carriage], field 'pad'", "got a table"),
        ('[carriage]\nface = ["top"]\n', "[carriage], field 'face'", "must be text"),
    ],
)
def test_wrong_types_in_carriage_are_named(extra, where, match):
    with pytest.raises((InputFormatError, InputValueError), match=match) as exc:
        parse_bearing_toml(_BASE + extra, source="b.toml")
    assert exc.value.where == f"b.toml, {where}"


@pytest.mark.parametrize(
    "text, where, match",
    [
        ('bearing = "120x80"\n', "field 'bearing'", "bearing must be one table, got '120x80'"),
        ('[[bearing]]\npad = "120x80"\ngap_um = 8\n', "field 'bearing'", "a list of tables"),
        ("carriage = 3\n" + _BASE, "field 'carriage'", "carriage must be one table"),
        ("budget = [1]\n" + _BASE, "field 'budget'", "budget must be one table"),
    ],
)
def test_wrong_types_of_sections_are_named(text, where, match):
    with pytest.raises(InputFormatError, match=match) as exc:
        parse_bearing_toml(text, source="b.toml")
    assert exc.value.where == f"b.toml, {where}"


def test_a_table_where_text_belongs_is_not_told_to_quote():
    with pytest.raises(InputValueError, match="pad must be text, got a table") as exc:
        parse_bearing_toml('[bearing]\npad = {l = 120}\ngap_um = 8\n', source="b.toml")
    assert exc.value.fix != "quote the value"


def test_reversed_travel_and_no_pad_on_the_face_are_found_in_the_file():
    with pytest.raises(InputValueError, match="ends") as exc:
        parse_bearing_toml(_BASE + "[carriage]\ntravel_start_mm = 800\ntravel_end_mm = 100\n", source="b.toml")
    assert exc.value.where == "b.toml, [carriage], fields 'travel_start_mm' and 'travel_end_mm'"
    with pytest.raises(InputValueError, match="no pad rides on the face 'top'") as exc:
        parse_bearing_toml(_BASE + '[[carriage.pad]]\nface = "side"\n', source="b.toml")
    assert exc.value.where == "b.toml, [carriage], field 'face'"


def test_infinite_pad_size_says_so():
    with pytest.raises(InputValueError, match="not a finite number"):
        parse_pad_size("1e400x80", where="--pad")
