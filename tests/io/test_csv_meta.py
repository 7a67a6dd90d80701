"""Identity, size and date of a height-map CSV from its header comment lines."""

import pytest

from flatcheck.errors import InputValueError
from flatcheck.io._csv_meta import parse_csv_meta, read_csv_meta


def test_keys_before_the_header_are_read(tmp_path):
    p = tmp_path / "pad.csv"
    p.write_text(
        "# lapped graphite pad face (free text is left alone)\n"
        "# ident = KY-B4\n"
        '# description = "air-bearing pad, 80 x 80 mm"\n'
        "# length_in = 3.15\n"
        "# width_mm = 80\n"
        "# date = 2024-03-15\n"
        "# operator = M.O.\n"
        "x_mm,y_mm,height_um\n"
        "# ident = ignored: comments below the header are about the points\n"
        "0,0,0.1\n",
        encoding="utf-8",
    )
    m = read_csv_meta(p)
    assert m.ident == "KY-B4" and m.description == "air-bearing pad, 80 x 80 mm"
    assert m.length_mm == pytest.approx(3.15 * 25.4, rel=1e-15)  # 1 in = 25.4 mm exactly
    assert m.width_mm == 80.0 and m.date == "2024-03-15"
    assert m.extra == (("operator", "M.O."),) and m.stated


def test_a_file_without_keys_states_nothing(tmp_path):
    p = tmp_path / "plain.csv"
    p.write_text("# just a note\nx_mm,y_mm,height_um\n0,0,1\n")
    assert not read_csv_meta(p).stated
    assert not read_csv_meta(tmp_path / "missing.csv").stated


@pytest.mark.parametrize("lines, message", [
    (["# length_mm = 80", "# length_in = 3"], "stated twice \\(first on line 3\\)"),
    (["# date = 15.03.2024"], "not written YYYY-MM-DD"),
    (["# date = 2023-02-29"], "not a day of the calendar"),
    (["# width_mm = -5"], "not a positive size"),
    (["# width_mm = wide"], "not a number"),
])
def test_bad_values_name_the_line(lines, message):
    with pytest.raises(InputValueError, match=message) as exc:
        parse_csv_meta(lines, source="pad.csv", first_line=3)
    assert "pad.csv, line" in str(exc.value)


def test_the_height_map_reader_takes_size_and_description_from_the_comments(tmp_path):
    """read_heightmap_csv gives the map the size the comments state, so reports do not say 'size not stated'."""
    from flatcheck.io import read_heightmap_csv

    p = tmp_path / "pad.csv"
    p.write_text("# ident = KY-B4\n# description = lapped pad face\n# length_in = 3.15\n# width_mm = 80\n"
                 "x_mm,y_mm,height_um\n5,5,0.1\n75,5,0.2\n5,75,0.3\n75,75,0.1\n", encoding="utf-8")
    hm = read_heightmap_csv(p)
    assert hm.length_mm == pytest.approx(3.15 * 25.4, rel=1e-15)  # 1 in = 25.4 mm exactly (by definition)
    assert hm.width_mm == 80.0 and hm.label == "lapped pad face"
    plain = tmp_path / "plain.csv"
    plain.write_text("# a note\nx_mm,y_mm,height_um\n5,5,0.1\n75,5,0.2\n5,75,0.3\n", encoding="utf-8")
    hm = read_heightmap_csv(plain)
    assert (hm.length_mm, hm.width_mm, hm.label) == (None, None, "plain")  # nothing stated: as before
    bad = tmp_path / "bad.csv"
    bad.write_text("# date = 15.03.2024\nx_mm,y_mm,height_um\n5,5,0.1\n75,5,0.2\n5,75,0.3\n", encoding="utf-8")
    with pytest.raises(InputValueError, match="line 1"):
        read_heightmap_csv(bad)
