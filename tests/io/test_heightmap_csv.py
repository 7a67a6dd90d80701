"""Height-map CSV reader and writer."""

import numpy as np
import pytest

from flatcheck.errors import InputFormatError, InputValueError
from flatcheck.form import HeightMap
from flatcheck.io import read_heightmap_csv, write_heightmap_csv


def _write(tmp_path, text, name="map.csv", mode="w"):
    p = tmp_path / name
    if mode == "wb":
        p.write_bytes(text)
    else:
        p.write_text(text, encoding="utf-8")
    return p


def test_round_trip(tmp_path):
    hm = HeightMap([0, 10, 0, 10], [0, 0, 5, 5], [0.1234, -1.5, 2.0, 0.0])
    p = tmp_path / "out.csv"
    write_heightmap_csv(p, hm, comment="test map\nsecond line")
    back = read_heightmap_csv(p)
    assert np.allclose(back.height_um, hm.height_um, atol=5e-5)
    assert p.read_text().startswith("# test map\n# second line\nx_mm,y_mm,height_um\n")


def test_comments_and_blank_lines(tmp_path):
    p = _write(tmp_path, "# pad face\n\nx_mm,y_mm,height_um\n0,0,1\n# mid comment\n1,0,2\n\n0,1,3\n")
    hm = read_heightmap_csv(p)
    assert hm.n == 3 and hm.height_um.tolist() == [1, 2, 3]


@pytest.mark.parametrize(
    "text, exc, pattern",
    [
        ("", InputFormatError, "empty"),
        ("# only a comment\n", InputFormatError, "no data"),
        ("x,y,z\n0,0,0\n", InputFormatError, "line 1: the header is 'x,y,z'.*exactly x_mm,y_mm,height_um"),
        ("x_mm,y_mm,height_um\n", InputFormatError, "no points"),
        ("x_mm,y_mm,height_um\n0,0,0\n1,0\n0,1,0\n", InputFormatError, "line 3: 2 fields where 3"),
        ("x_mm,y_mm,height_um\n0,0,0\n1,0,abc\n0,1,0\n", InputValueError, "line 3: height_um 'abc' is not a number"),
        ("x_mm,y_mm,height_um\n0,0,0\n1,0,nan\n0,1,0\n", InputValueError, "line 3: height_um is nan"),
        ("x_mm,y_mm,height_um\n0,0,0\n1,0,1\n", InputValueError, "only 2 point"),
        ("x_mm,y_mm,height_um\n0,0,0\n1,0,1\n1,0,2\n", InputValueError, r"line 4: position \(1, 0\) mm appears more"),
    ],
)
def test_bad_files(tmp_path, text, exc, pattern):
    p = _write(tmp_path, text)
    with pytest.raises(exc, match=pattern):
        read_heightmap_csv(p)


def test_binary_file(tmp_path):
    p = _write(tmp_path, b"\x89PNG\r\n\x1a\n\x00\x00\x00", mode="wb")
    with pytest.raises(InputFormatError, match="binary"):
        read_heightmap_csv(p)


def test_missing_file(tmp_path):
    with pytest.raises(InputFormatError, match="no such file"):
        read_heightmap_csv(tmp_path / "nope.csv")


# ---------------------------------------------------------------- regressions found by trying the commands as a new user


def test_points_on_one_line_named_with_the_file(tmp_path):
    # three points on y = 0 (and a diagonal line y = 2x + 1): no area, so no flatness; the file is named
    for body in ("0,0,1\n1,0,2\n2,0,3\n", "0,1,0\n1,3,0\n2,5,0\n3,7,1\n"):
        p = _write(tmp_path, "x_mm,y_mm,height_um\n" + body)
        with pytest.raises(InputValueError) as exc:
            read_heightmap_csv(p)
        assert exc.value.where == str(p) and "one line" in exc.value.message
    # a right triangle is a surface
    p = _write(tmp_path, "x_mm,y_mm,height_um\n0,0,1\n1,0,2\n0,1,3\n")
    assert read_heightmap_csv(p).height_um.size == 3


@pytest.mark.parametrize("sep, word", [(";", "semicolons"), ("\t", "tabs")])
def test_wrong_separator_hinted(tmp_path, sep, word):
    p = _write(tmp_path, sep.join(["x_mm", "y_mm", "height_um"]) + "\n" + sep.join(["0", "0", "1"]) + "\n")
    with pytest.raises(InputFormatError) as exc:
        read_heightmap_csv(p)
    assert word in exc.value.fix and exc.value.where.endswith("line 1")


@pytest.mark.parametrize(
    "text, expected",
    [
        ("x_mm,y_mm,height_um\n0,0,1\n", True),
        ("\ufeff# pad face\n\n  X_mm, Y_mm , height_UM \n0,0,1\n", True),
        ('# survey\nformat = "flatcheck-survey"\n', False),
        ("x,y,z\n0,0,1\n", False),
        ("# only comments\n", False),
    ],
)
def test_is_heightmap_csv_reads_the_header_not_the_name(tmp_path, text, expected):
    from flatcheck.io import is_heightmap_csv

    p = tmp_path / "pad.dat"
    p.write_text(text, encoding="utf-8")
    assert is_heightmap_csv(p) is expected
    assert is_heightmap_csv(tmp_path / "missing.dat") is False
    b = tmp_path / "bin.dat"
    b.write_bytes(b"x_mm,y_mm,height_um\x00")
    assert is_heightmap_csv(b) is False
