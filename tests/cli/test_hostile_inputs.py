"""A sweep of malformed and hostile inputs (issue 15, items 15-18, 21, 24, 26).

Every bad input below must end the same way: exit status 2, exactly one line on standard error that starts
``flatcheck: error:`` and contains the words listed for it (the input as the person gave it: the option, or
the file's field), no traceback, no input file changed, no earlier output destroyed, and no hang. The cases
are generated from families (a field of a file, or an option, times a list of bad values), several hundred in
all; they run in-process (the ``cli`` fixture) under a time limit, so a hang fails the test instead of
stopping the run.

Good inputs that hold text meant as markup by the terminal renderer (``[/]``, ``[red]``) must be printed
literally, with exit status 0.
"""

from __future__ import annotations

import hashlib
import os
import re
import shutil
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
SAMPLES = ROOT / "sample_readings"
P3 = SAMPLES / "plate-KY-P3-2024-03-11.toml"
PAD = SAMPLES / "pad-KY-B4-heights.csv"
G1 = SAMPLES / "guideway-KY-G1.toml"
TANDEM = SAMPLES / "bearing_tandem_slide.toml"
BIG_INT = "9" * 401  # too large for any float (about 1.8e308)

#: Longest a single refusal may take (seconds): every one is found before any real work is done.
TIME_LIMIT_S = 20.0


# ------------------------------------------------------------------------------------------- the cases
def _replace(text: str, pattern: str, value: str) -> str:
    """``text`` with the first match of ``pattern`` (a regex with one group: the value) set to ``value``."""
    m = re.search(pattern, text, flags=re.M)
    assert m, pattern
    return text[: m.start(1)] + value + text[m.end(1):]


# A survey file's numbers: (field as the message names it, regex of its value in the P3 sample)
SURVEY_FIELDS = [
    ("length_mm", r"^length_mm = (\S+)"),
    ("width_mm", r"^width_mm = (\S+)"),
    ("foot_spacing_mm", r"^foot_spacing_mm = (\S+)"),
    ("diagonal_foot_spacing_mm", r"^diagonal_foot_spacing_mm = (\S+)"),
    ("margin_mm", r"^margin_mm = (\S+)"),
    ("temperature_c", r"^temperature_c = (\S+)"),
    ("reading", r"^readings = \[(16\.98)"),
]
SURVEY_VALUES = {
    "huge integer": BIG_INT,
    "1e300": "1e300",
    "-1e300": "-1e300",
    "nan": "nan",
    "inf": "inf",
    "-inf": "-inf",
    "text": '"ten"',
    "list": "[1, 2]",
    "true": "true",
    "inline table": "{ a = 1 }",
}
# what a message about a reading says (it names the reading by its line and position, not by key)
_FIELD_WORDS = {"reading": ("SW-NE", "reading"), "diagonal_foot_spacing_mm": ("diagonal_foot_spacing_mm",)}

HEIGHTMAP_ROWS = {  # a bad third row of a 3 x 3 height map: (row, words)
    "height 1e300": ("100,0,1e300", ("height_um",)),
    "height -1e300": ("100,0,-1e300", ("height_um",)),
    "x 1e15": ("1e15,0,1", ("x_mm",)),
    "y -1e15": ("100,-1e15,1", ("y_mm",)),
    "height nan": ("100,0,nan", ("height_um",)),
    "height inf": ("100,0,inf", ("height_um",)),
    "x with a digit separator": ("1_000,0,1", ("x_mm", "1_000")),
    "x text": ("ten,0,1", ("x_mm",)),
    "two fields": ("100,0", ("line",)),
    "four fields": ("100,0,1,2", ("line",)),
    "semicolons": ("100;0;1", ("line",)),
    "a huge integer height": (f"100,0,{BIG_INT}", ("height_um",)),
}

BEARING_FIELDS = [
    ("gap_um", r"^gap_um = (\S+)"),
    ("along_mm", r"^along_mm = (150)"),
    ("across_mm", r"^across_mm = (0)"),
    ("gap_fraction", r"^gap_fraction = (\S+)"),
]
BEARING_VALUES = {"huge integer": BIG_INT, "1e300": "1e300", "-1e300": "-1e300", "nan": "nan", "text": '"8"'}

# options: (command and its good arguments, option, bad values, words)
LAP = ("lap", str(P3), "--target-um", "1.5")
OPTION_CASES = [
    (("reduce", str(PAD)), "--window", ["d1e-9", "d0", "d-5", "0x0", "1e-9x1e-9", "dnan", "big", "1e300x1"], ()),
    (("reduce", str(P3), "--uncertainty"), "--trials", ["1000000000000", "2000000", "99"], ()),
    (("reduce", str(PAD), "--uncertainty"), "--u-height-um", ["inf", "nan", "-1", "1e300"], ()),
    (LAP, "--lap-diameter-mm", ["1e-6", "0", "-5", "nan", "inf", "1e9", "10"], ()),
    (LAP, "--lap-size-mm", ["1e-6x1", "0x10", "1e9x1e9", "nanx5", "ax5"], ()),
    (("lap", str(P3), "--lap-diameter-mm", "150"), "--target-um", ["0", "-1", "nan", "inf", "1e300"], ()),
    (LAP, "--levels", ["1000000", "0", "-1", "65"], ()),
    (LAP, "--cell-mm", ["1e-9", "0", "-1", "nan"], ()),
    (LAP, "--step-mm", ["1e-9", "0", "-1", "nan"], ()),
    (LAP, "--rate-um-per-min", ["0", "-1", "nan", "inf"], ()),
    (("lap", str(P3), "--lap-diameter-mm", "150"), "--target-gap-um", ["0", "-8", "nan", "1e300"], ()),
    (("grade", str(P3), "--standard", "din-876", "--no-uncertainty", "--width-mm", "630"), "--length-mm",
     ["1e308", "0", "-1", "nan", "inf", "1e6"], ()),
    (("grade", str(P3), "--standard", "din-876", "--no-uncertainty"), "--uncertainty-um",
     ["-1", "nan", "inf", "1e300"], ()),
    (("grade", str(P3), "--standard", "din-876", "--no-uncertainty"), "--tolerance-um", ["0", "-1", "nan", "inf"], ()),
    (("bearing", str(G1), "--pad", "120x80", "--gap-um", "8"), "--y-mm", ["nan", "inf", "1e15", "-1e300"], ()),
    (("bearing", str(G1), "--pad", "120x80"), "--gap-um", ["0", "-8", "nan", "1e6"], ()),
    (("bearing", str(G1), "--gap-um", "8"), "--pad", ["0x0", "-1x5", "nanx5", "d0", "dnan", "abc"], ()),
    (("compare", str(P3), str(SAMPLES / "plate-KY-P3-after-lap-1.toml")), "--match-tol-mm", ["0", "-1", "nan"], ()),
]

FILE_CASES = {  # a whole input file's content, given to reduce: (content as bytes, words as .toml, as .csv)
    "empty": (b"", ("empty",), ("empty",)),
    "blank lines": (b"\n\n   \n", ("empty",), ("no data",)),
    "binary": (b"\x00\x01\x02\xff" * 50, ("binary",), ("binary",)),
    "not UTF-8": ("x_mm,y_mm,height_um\n0,0,1\n".encode("utf-16"), (), ()),
    "deep array": (("x = " + "[" * 100_000 + "]" * 100_000 + "\n").encode(), ("nested",), ("header",)),
    "deep table": (("[" + ".".join(["a"] * 50) + "]\nb = 1\n").encode(), ("nested",), ("header",)),
    "a huge integer": (f"format = \"flatcheck-survey\"\nversion = {BIG_INT}\n".encode(), ("version", "digits"),
                       ("version", "digits")),
    "only a header": (b"x_mm,y_mm,height_um\n", ("no points",), ("no points",)),
    "two points": (b"x_mm,y_mm,height_um\n0,0,1\n1,0,2\n", ("point",), ("point",)),
    "points on a line": (b"x_mm,y_mm,height_um\n0,0,1\n1,0,2\n2,0,3\n3,0,1\n", ("line",), ("line",)),
    "TOML syntax": (b"format = \"flatcheck-survey\"\n[surface\n", ("TOML",), ("TOML",)),
}


def _cases(tmp: Path) -> list:
    """Every bad input: (id, argv, words, extra inputs), made in ``tmp``."""
    cases = []
    p3 = P3.read_text(encoding="utf-8")
    for field, pattern in SURVEY_FIELDS:
        for vname, value in SURVEY_VALUES.items():
            path = tmp / f"survey-{field}-{vname.replace(' ', '-')}.toml"
            path.write_text(_replace(p3, pattern, value), encoding="utf-8")
            words = _FIELD_WORDS.get(field, (field,))
            for command in (("reduce",), ("grade", "--standard", "din-876", "--no-uncertainty")):
                cases.append((f"{command[0]} {field}={vname}", (command[0], str(path), *command[1:]), words))
    for name, (row, words) in HEIGHTMAP_ROWS.items():
        path = tmp / f"map-{re.sub(r'[^a-z0-9]+', '-', name)}.csv"
        path.write_text(f"x_mm,y_mm,height_um\n0,0,0\n{row}\n0,100,0\n100,100,0.5\n", encoding="utf-8")
        for command in (("reduce",), ("lap", "--target-um", "0.1", "--lap-diameter-mm", "20"),
                        ("report", "-o", str(tmp / "earlier-report.pdf"))):
            cases.append((f"{command[0]} csv {name}", (command[0], str(path), *command[1:]), words))
    tandem = TANDEM.read_text(encoding="utf-8")
    for field, pattern in BEARING_FIELDS:
        for vname, value in BEARING_VALUES.items():
            path = tmp / f"bearing-{field}-{vname.replace(' ', '-')}.toml"
            path.write_text(_replace(tandem, pattern, value), encoding="utf-8")
            cases.append((f"bearing {field}={vname}", ("bearing", str(G1), "--bearing", str(path)), (field,)))
    for base, option, values, words in OPTION_CASES:
        for v in values:
            cases.append((f"{base[0]} {option} {v}", (*base, option, v), (option, *words)))
    for name, (data, toml_words, csv_words) in FILE_CASES.items():
        for suffix, words in ((".toml", toml_words), (".csv", csv_words)):
            path = tmp / f"file-{name.replace(' ', '-')}{suffix}"
            path.write_bytes(data)
            cases.append((f"reduce file {name}{suffix}", ("reduce", str(path)), words))
    for minutes in ("1e300", "-1", "nan", "1_000", "1441", BIG_INT):
        log = tmp / f"log-{minutes[:6]}.csv"
        log.write_text(f"x_mm,y_mm,minutes\n200,250,{minutes}\n", encoding="utf-8")
        cases.append((f"compare log minutes={minutes[:8]}",
                      ("compare", str(P3), str(SAMPLES / "plate-KY-P3-after-lap-1.toml"), "--log", str(log),
                       "--lap-diameter-mm", "150"), ("minutes",)))
    for special in ("/dev/zero", "/dev/null"):
        if os.path.exists(special):
            cases.append((f"reduce {special}", ("reduce", special), (special,)))
    if hasattr(os, "mkfifo"):
        fifo = tmp / "survey-fifo.toml"
        os.mkfifo(fifo)
        cases.append(("reduce a FIFO", ("reduce", str(fifo)), ("named pipe",)))
        cases.append(("bearing file a FIFO", ("bearing", str(G1), "--bearing", str(fifo)), ("named pipe",)))
        cases.append(("compare log a FIFO", ("compare", str(P3), str(SAMPLES / "plate-KY-P3-after-lap-1.toml"),
                                             "--log", str(fifo), "--lap-diameter-mm", "150"), ("named pipe",)))
    cases.append(("reduce a folder", ("reduce", str(tmp)), ("folder",)))
    cases.append(("reduce a missing file", ("reduce", str(tmp / "no-such-file.toml")), ("no such file",)))
    cases.append(("no command at all", (), ("command",)))
    # outputs that would destroy something, and a demo folder holding a person's own file
    own = tmp / "demo-folder"
    own.mkdir()
    (own / "flatcheck-demo-report.pdf").write_text("my own notes", encoding="utf-8")
    cases.append(("demo over a person's file", ("demo", "--out", str(own)), ("--out", "--force")))
    return cases


# ------------------------------------------------------------------------------------------- the run
def _digest(paths) -> dict:
    out = {}
    for p in paths:
        p = Path(p)
        if p.is_file():
            out[str(p)] = hashlib.sha256(p.read_bytes()).hexdigest()
    return out


@pytest.fixture(scope="module")
def sweep_dir(tmp_path_factory):
    return tmp_path_factory.mktemp("hostile")


def test_the_sweep_is_several_hundred_inputs(sweep_dir):
    folder = sweep_dir / "count"
    folder.mkdir()
    cases = _cases(folder)
    assert len(cases) >= 300
    assert len({c[0] for c in cases}) == len(cases)  # every case has its own name


def test_every_bad_input_is_one_line_exit_2_and_changes_nothing(cli, cli_limited, refusal_problems, sweep_dir, monkeypatch):
    work = sweep_dir / "run"
    work.mkdir()
    monkeypatch.chdir(work)
    earlier = work / "earlier-report.pdf"
    earlier.write_bytes(b"%PDF-1.4 an earlier report\n")
    cases = _cases(work)
    watched = [*SAMPLES.iterdir(), *work.iterdir(), *(work / "demo-folder").iterdir()]
    before = _digest(watched)
    failures = []
    for case_id, argv, words in cases:
        result = cli_limited(*argv)
        assert result is not None, f"{argv}: no answer within {TIME_LIMIT_S} s (a hang)"
        code, out, err = result
        problems = refusal_problems(code, out, err, words)
        if problems:
            failures.append(f"{case_id}: {'; '.join(problems)}")
    after = _digest(watched)
    changed = [p for p in before if before[p] != after.get(p)]
    assert not changed, f"inputs or earlier outputs changed: {changed}"
    assert not failures, f"{len(failures)} of {len(cases)} failed:\n" + "\n".join(failures)


# ------------------------------------------------------------------------------------------- user text
MARKUP = ["a [/] b", "[red]x", "granite plate [bench 2]", "[/i]", "[bold]", "a \\[b]"]


@pytest.mark.parametrize("text", MARKUP)
def test_user_text_is_printed_literally(cli, tmp_path, text):
    quoted = text.replace("\\", "\\\\")
    # the guideway survey walks free lines: their names are the person's own
    survey = tmp_path / "guideway.toml"
    src = _replace(G1.read_text(encoding="utf-8"), r'^description = "([^"]*)"', quoted)
    survey.write_text(src.replace('name = "long-1"', f'name = "{quoted}"'), encoding="utf-8")
    for argv in (("reduce", survey), ("grade", survey, "--standard", "din-876", "--no-uncertainty"),
                 ("lap", survey, "--target-um", "2", "--lap-diameter-mm", "80"),
                 ("report", survey, "-o", tmp_path / "r.pdf", "--no-uncertainty", "--window", "none")):
        if argv[0] == "report" and text not in MARKUP[:2]:  # a report takes seconds: two texts suffice
            continue
        code, out, err = cli(*argv)
        assert code == 0, (argv[0], err)
        if argv[0] in ("reduce", "lap", "report"):
            assert text in out, (argv[0], text, out[:400])
    code, out, err = cli("reduce", survey)
    assert f"{text}" in out.split("Lines")[-1] or text in out  # the line's own name in the table of lines
    bearing = tmp_path / "slide.toml"
    bearing.write_text(TANDEM.read_text(encoding="utf-8").replace('name = "front"', f'name = "{quoted}"')
                       .replace('label = "inspection slide', f'label = "{quoted} slide'), encoding="utf-8")
    code, out, err = cli("bearing", G1, "--bearing", bearing)
    assert code == 0, err
    assert text in out


@pytest.mark.parametrize("name", ["a [b] c.toml", "[red]x.toml", "[i]plate.csv", "[bold]pad.csv"])
def test_file_names_with_brackets_are_printed_literally(cli, tmp_path, name):
    src = PAD if name.endswith(".csv") else P3
    path = tmp_path / name
    shutil.copy(src, path)
    code, out, err = cli("reduce", path)
    assert code == 0, err
    assert str(path) in out
    if name.startswith("[red]"):  # a report takes seconds: one name suffices
        pdf = tmp_path / name.replace(".toml", ".pdf")
        code, out, err = cli("report", path, "-o", pdf, "--no-uncertainty", "--window", "none")
        assert code == 0, err
        assert str(pdf) in out
