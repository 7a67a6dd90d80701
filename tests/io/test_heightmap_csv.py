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
        # repeated positions are averaged (issue 15 item 4): three readings at two positions are two points
        ("x_mm,y_mm,height_um\n0,0,0\n1,0,1\n1,0,2\n", InputValueError, "only 2 point"),
        ("x_mm,y_mm,height_um\n0,0,0\n1,0,1\n0,1,1_000\n", InputValueError, "line 4: height_um '1_000' is not a number"),
        ("x_mm,y_mm,height_um\n0,0,0\n   \n1,0,1\n0,1,x\n", InputValueError, "line 5: height_um 'x' is not a number"),
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


# ---------------------------------------------------------------- repeat readings, content, special files (issues 15, 18)


def test_repeated_positions_are_averaged_with_their_scatter(tmp_path):
    # a 3 x 3 grid; two nodes read three and two times. Reference: numpy mean per position and the
    # pooled variance sum((z - mean)^2) / sum(n_i - 1) (textbook pooled estimate of a common variance)
    rng = np.random.default_rng(1234)
    rows = [(x, y, float(rng.normal())) for y in (0.0, 5.0, 10.0) for x in (0.0, 10.0, 20.0)]
    extra = [(10.0, 5.0, 0.3), (10.0, 5.0, -0.2), (0.0, 10.0, 1.5)]
    text = "x_mm,y_mm,height_um\n" + "".join(f"{x},{y},{z!r}\n" for x, y, z in rows + extra)
    hm = read_heightmap_csv(_write(tmp_path, text))
    assert hm.n == 9 and hm.grid is not None
    groups = {}
    for x, y, z in rows + extra:
        groups.setdefault((x, y), []).append(z)
    for (x, y), zs in groups.items():
        k = int(np.flatnonzero((hm.x_mm == x) & (hm.y_mm == y))[0])
        assert hm.height_um[k] == pytest.approx(np.mean(zs), abs=1e-12)
    ss = sum(float(np.sum((np.array(zs) - np.mean(zs)) ** 2)) for zs in groups.values())
    dof = sum(len(zs) - 1 for zs in groups.values())
    assert hm.repeat_dof == dof == 3
    assert hm.repeat_sd_um == pytest.approx(np.sqrt(ss / dof), rel=1e-12)
    assert any("read more than once" in n and "averaged" in n for n in hm.notes)


def test_no_repeats_no_repeatability(tmp_path):
    hm = read_heightmap_csv(_write(tmp_path, "x_mm,y_mm,height_um\n0,0,1\n1,0,2\n0,1,3\n"))
    assert hm.repeat_sd_um is None and hm.repeat_dof == 0 and hm.notes == ()


def test_a_csv_holding_a_toml_survey_is_named_as_such(tmp_path):
    # issue 15 item 19: the content decides, and the message says what was found
    import shutil
    from pathlib import Path

    sample = Path(__file__).resolve().parents[2] / "sample_readings" / "plate-KY-P3-2024-03-11.toml"
    p = tmp_path / "plate.csv"
    shutil.copy(sample, p)
    with pytest.raises(InputFormatError) as exc:
        read_heightmap_csv(p)
    assert "TOML survey" in exc.value.message and "flatcheck-survey" in exc.value.message
    from flatcheck.io import open_surface

    opened = open_surface(p)  # the one way in reads it as the survey it is
    assert opened.kind == "survey" and opened.heightmap.n == open_surface(sample).heightmap.n


@pytest.mark.parametrize("special", ["fifo", "device"])
def test_special_files_are_refused_without_hanging(tmp_path, special):
    import os

    if special == "fifo":
        p = tmp_path / "pipe.csv"
        os.mkfifo(p)
    else:
        p = "/dev/zero"
    from flatcheck.io import is_heightmap_csv

    assert is_heightmap_csv(p) is False  # returns at once, never blocks on the pipe
    with pytest.raises(InputFormatError, match="not a regular file"):
        read_heightmap_csv(p)


def test_bad_line_deep_in_a_large_file_is_named(tmp_path):
    # the fast parse works in blocks of about 1 MB; a bad value far beyond the first block must still be
    # reported on its own line (line = 1 header + row number)
    n = 120_000
    x = np.arange(n) % 400
    y = np.arange(n) // 400
    body = "".join(f"{a},{b},0.125\n" for a, b in zip(x.tolist(), y.tolist()))
    lines = body.splitlines(keepends=True)
    lines[100_000] = "1,2,oops\n"
    p = _write(tmp_path, "x_mm,y_mm,height_um\n" + "".join(lines))
    with pytest.raises(InputValueError) as exc:
        read_heightmap_csv(p)
    assert exc.value.where.endswith("line 100002")


def test_large_row_by_row_grid_matches_general_detection(tmp_path):
    # the reader's cheap row-by-row grid must equal regular_grid's (the general detection)
    from flatcheck.form import regular_grid

    X, Y = np.meshgrid(np.arange(300) * 0.5, np.arange(200) * 0.25)
    Z = np.sin(X / 7) * np.cos(Y / 3)
    p = tmp_path / "g.csv"
    with open(p, "w") as f:
        f.write("# a comment line\r\nx_mm,y_mm,height_um\r\n")
        np.savetxt(f, np.column_stack([X.ravel(), Y.ravel(), Z.ravel()]), fmt="%.17g", delimiter=",", newline="\r\n")
    hm = read_heightmap_csv(p)
    ref = regular_grid(hm.x_mm, hm.y_mm)
    for a, b in zip(hm.grid, ref):
        np.testing.assert_array_equal(a, b)
    np.testing.assert_array_equal(hm.height_um, Z.ravel())  # numpy's own float formatting, read back exactly


def test_implausible_extent_is_noted(tmp_path):
    # issue 15 item 25: a 40 mm pad measured in µm and written as mm spans 40 x 40 m with 25 points
    rows = "".join(f"{x},{y},0.{(x + y) % 7}\n" for y in range(0, 40001, 10000) for x in range(0, 40001, 10000))
    hm = read_heightmap_csv(_write(tmp_path, "x_mm,y_mm,height_um\n" + rows))
    assert any("implausible" in n and "µm" in n for n in hm.notes)
    ok = read_heightmap_csv(_write(tmp_path, "x_mm,y_mm,height_um\n0,0,1\n40,0,2\n0,40,3\n40,40,1\n", name="ok.csv"))
    assert ok.notes == ()
