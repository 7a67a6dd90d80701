"""A sweep of hostile command-line OPTIONS across every command, and of user text printed as markup.

Every bad option below must end as tests/cli/test_hostile_inputs.py asks of a bad input: exit status 2, exactly
one line on standard error that starts ``flatcheck: error:`` and names the option as it was typed (plus any other
words listed for the case), no traceback, no warning leaked, no input or earlier output changed, and no hang.
The cases are generated from a table (a command with good arguments, an option, the values that are bad for it)
times the hostile values (nan, inf, -inf, 0, negative, 1e300, -1e300, 1e-300, a 401-digit integer, text, empty),
plus output and input paths (a folder, a missing folder, /dev/null, /dev/zero, a named pipe, the input itself
in several spellings, a read-only file), choices in the wrong case or unknown, and options that contradict each
other or have no effect alone. They run in-process under a time limit.

User text holding rich markup (``[/]``, ``[red]``, ``[link=x]``) must be printed literally with exit status 0.
"""

from __future__ import annotations

import hashlib
import os
import shutil
import time
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
SAMPLES = ROOT / "sample_readings"
BIG_INT = "9" * 401
TIME_LIMIT_S = 20.0

#: The hostile values; a family lists which of the "maybe" ones are bad for its option.
ALWAYS = {"nan": "nan", "inf": "inf", "-inf": "-inf", "1e300": "1e300", "-1e300": "-1e300", "401 digits": BIG_INT,
          "text": "ten", "empty": ""}
MAYBE = {"Z": ("0", "0"), "N": ("negative", "-1"), "T": ("1e-300", "1e-300")}
INT_ALWAYS = {"401 digits": BIG_INT, "-401 digits": "-" + BIG_INT, "text": "ten", "empty": "", "a fraction": "2.5"}

P3, A1, PAD = "p3.toml", "after.toml", "pad.csv"
G1, BODY, CAR = "g1.toml", "g2/body.toml", "g2/carriage.toml"
BEAR = ("bearing", G1, "--pad", "120x80", "--gap-um", "8", "--no-uncertainty")
FILM = (*BEAR, "--supply-kpa", "400", "--permeability-m2", "1e-14", "--layer-mm", "5")
ORIFICE = (*BEAR, "--kind", "orifice", "--supply-kpa", "400", "--orifice-mm", "0.2")
LAP = ("lap", P3, "--target-um", "1.5", "--lap-diameter-mm", "150")
GRADE = ("grade", P3, "--standard", "din-876", "--no-uncertainty")
PLAN = ("plan", "--length-mm", "1000", "--width-mm", "630", "--foot-spacing-mm", "100")
FR_TOML = ("fringes", "fringes.toml")
FR_PNG = ("fringes", "fringes.png", "--light", "helium", "--contact-edge", "left")
CMP = ("compare", P3, A1)

# (command with good arguments, option, the "maybe" values that are bad, int option?)
NUMERIC = [
    (("plan", "--width-mm", "630", "--foot-spacing-mm", "100"), "--length-mm", "ZN", False),
    (("plan", "--length-mm", "1000", "--foot-spacing-mm", "100"), "--width-mm", "ZN", False),
    (("plan", "--length-mm", "1000", "--width-mm", "630"), "--foot-spacing-mm", "ZNT", False),
    (PLAN, "--margin-mm", "", False),
    (("plan", "--width-in", "25", "--foot-spacing-in", "4"), "--length-in", "ZN", False),
    (("plan", "--length-in", "40", "--width-in", "25"), "--foot-spacing-in", "ZNT", False),
    (("reduce", P3, "--uncertainty"), "--trials", "ZN", True),
    (("reduce", P3, "--uncertainty", "--trials", "100"), "--seed", "N", True),
    (("reduce", PAD, "--uncertainty", "--trials", "100"), "--u-height-um", "N", False),
    (GRADE, "--tolerance-um", "ZNT", False),
    (GRADE, "--tolerance-uin", "ZNT", False),
    (GRADE, "--uncertainty-um", "N", False),
    (GRADE, "--uncertainty-uin", "N", False),
    ((*GRADE, "--width-mm", "630"), "--length-mm", "ZN", False),
    (GRADE, "--repeat-radius-mm", "ZN", False),
    ((*GRADE, "--repeat-radius-mm", "50"), "--repeat-tolerance-um", "ZNT", False),
    (("grade", P3, "--standard", "din-876"), "--trials", "ZN", True),
    (("grade", P3, "--standard", "din-876"), "--seed", "N", True),
    (BEAR, "--gap-fraction", "ZN", False),
    (BEAR, "--marginal-from", "ZN", False),
    (BEAR, "--y-mm", "", False),
    (BEAR, "--travel-start-mm", "", False),
    (BEAR, "--travel-end-mm", "", False),
    (BEAR, "--step-mm", "ZNT", False),
    (BEAR, "--sample-pitch-mm", "ZN", False),
    (BEAR, "--budget-straightness-um", "ZNT", False),
    (BEAR, "--budget-pitch-arcsec", "ZNT", False),
    (BEAR, "--budget-roll-arcsec", "ZNT", False),
    (("bearing", G1, "--pad", "120x80", "--no-uncertainty"), "--gap-um", "ZNT", False),
    (FILM, "--supply-kpa", "ZNT", False),
    (FILM, "--ambient-kpa", "ZNT", False),
    (FILM, "--permeability-m2", "ZNT", False),
    (FILM, "--layer-mm", "ZNT", False),
    (FILM, "--load-n", "", False),
    (FILM, "--film-mesh", "ZN", True),
    (ORIFICE, "--orifice-mm", "ZNT", False),
    (ORIFICE, "--cd", "ZNT", False),
    (ORIFICE, "--orifices", "ZN", True),
    (ORIFICE, "--pocket-mm", "N", False),
    (ORIFICE, "--pocket-depth-um", "N", False),
    (("bearing", G1, "--pad", "120x80", "--gap-um", "8"), "--trials", "ZN", True),
    (("bearing", G1, "--pad", "120x80", "--gap-um", "8"), "--seed", "N", True),
    (("guideway", BODY, "--carriage", CAR), "--gap-um", "ZNT", False),
    (("guideway", BODY, "--carriage", CAR), "--load-n", "", False),
    (("guideway", BODY, "--carriage", CAR), "--supply-kpa", "ZNT", False),
    (("guideway", BODY, "--carriage", CAR), "--permeability-m2", "ZNT", False),
    (("guideway", BODY, "--carriage", CAR), "--layer-mm", "ZNT", False),
    (("guideway", BODY, "--carriage", CAR), "--orifice-mm", "ZNT", False),
    (("guideway", BODY, "--carriage", CAR), "--film-mesh", "ZN", True),
    (("guideway", BODY, "--carriage", CAR), "--travel-start-mm", "", False),
    (("guideway", BODY, "--carriage", CAR), "--step-mm", "ZNT", False),
    (("lap", P3, "--lap-diameter-mm", "150"), "--target-um", "ZN", False),
    (("lap", P3, "--lap-diameter-mm", "150"), "--target-gap-um", "ZNT", False),
    (("lap", P3, "--target-um", "1.5"), "--lap-diameter-mm", "ZNT", False),
    (LAP, "--rate-um-per-min", "ZNT", False),
    (LAP, "--rate-um-per-pass", "ZNT", False),
    ((*LAP, "--rate-um-per-pass", "0.1"), "--strokes-per-pass", "ZN", True),
    (LAP, "--stroke-mm", "N", False),
    (LAP, "--step-mm", "ZNT", False),
    (LAP, "--cell-mm", "ZNT", False),
    (LAP, "--levels", "ZN", True),
    (LAP, "--smoothing", "N", False),
    (LAP, "--smoothness", "N", False),
    (LAP, "--min-pass-fraction", "N", False),
    (LAP, "--guard-band", "N", False),
    (LAP, "--trials", "ZN", True),
    (LAP, "--seed", "N", True),
    ((*CMP, "--lap-diameter-mm", "150"), "--dwell-min", "ZNT", False),
    (CMP, "--match-tol-mm", "ZN", False),
    ((*CMP, "--dwell-min", "60"), "--lap-diameter-mm", "ZNT", False),
    (CMP, "--target-um", "ZN", False),
    (CMP, "--target-gap-um", "ZNT", False),
    (FR_TOML, "--wavelength-nm", "ZNT", False),
    (FR_TOML, "--flat-nm", "N", False),
    (FR_TOML, "--gap-um", "ZNT", False),
    ((*FR_PNG, "--part-width-mm", "80"), "--flat-nm", "N", False),
    ((*FR_PNG, "--part-width-mm", "80"), "--step-px", "ZN", True),
    (FR_PNG, "--pixel-mm", "ZNT", False),
    (FR_PNG, "--part-width-mm", "ZNT", False),
    (("sphere", "ball.csv", "--kind", "ball"), "--u-um", "N", False),
    (("register", "add", P3, "--db", "new.sqlite", "--jobs", "1"), "--trials", "ZN", True),
    (("register", "add", P3, "--db", "new.sqlite", "--jobs", "1"), "--seed", "N", True),
    (("register", "add", P3, "--db", "new.sqlite"), "--jobs", "ZN", True),
    (("register", "surface", "S1", "--db", "reg.sqlite", "--width-mm", "100"), "--length-mm", "ZN", False),
    (("register", "surface", "S1", "--db", "reg.sqlite"), "--interval-months", "ZN", True),
    (("register", "surface", "S1", "--db", "reg.sqlite"), "--interval-days", "ZN", True),
    (("register", "instrument", "I1", "--db", "reg.sqlite"), "--interval-months", "ZN", True),
    (("register", "due", "--db", "reg.sqlite"), "--within-days", "N", True),
]

# outputs: (command with good arguments, option, also refused: the input itself in four spellings)
OUTPUTS = [
    ((*PLAN, "--force"), "--output", False),
    (("reduce", P3), "--map-out", True),
    (LAP, "--removal-csv", True),
    (LAP, "--plan-out", True),
    (CMP, "--plot", True),
    (BEAR, "--plot", False),
    (FR_TOML, "--map-out", True),
    (("guideway", BODY), "--report", False),
    (("register", "history", "S1", "--db", "reg.sqlite"), "--plot", False),
    (("register", "wear", "S1", "--db", "reg.sqlite"), "--plot", False),
]
BAD_OUT = {"a folder": ("adir", "folder"), "a missing folder": ("nofolder/x.out", "does not exist"),
           "/dev/null": ("/dev/null", "regular file"), "/dev/zero": ("/dev/zero", "regular file"),
           "a FIFO": ("fifo", "regular file"), "a read-only file": ("readonly.out", "read-only")}
SELF = {"itself": "{}", "./itself": "./{}", "adir/../itself": "adir/../{}", "a symlink to it": "link-{}"}

# input options: (command with good arguments, option)
INPUTS = [
    ((*CMP, "--lap-diameter-mm", "150"), "--log"),
    (("bearing", G1, "--no-uncertainty"), "--bearing"),
    (BEAR, "--pad-face"),
    ((*FR_PNG, "--part-width-mm", "80"), "--mask"),
    (("sphere", "ball.csv", "--kind", "ball"), "--mate"),
    (("guideway", BODY), "--carriage"),
    (("reduce", P3, "--uncertainty", "--trials", "100"), "--uncertainty-defaults"),
    (("enter", "planned.toml"), "--from"),
    (("register", "due"), "--db"),
]
BAD_IN = {"a folder": "adir", "a missing folder": "nofolder/x.toml", "/dev/null": "/dev/null",
          "/dev/zero": "/dev/zero", "a FIFO": "fifo"}

# choices: (command with good arguments, option, bad values)
CHOICES = [
    (("reduce", P3), "--method", ["LEAST-SQUARES", "Moody", "lsq"]),
    (("reduce", P3), "--units", ["UM", "In", "mm"]),
    (GRADE, "--rule", ["ISO14253", "strict"]),
    (GRADE, "--length-basis", ["Side", "corner"]),
    (GRADE, "--basis", ["TABLE", "guess"]),
    (GRADE, "--asme-form", ["Inch", "imperial"]),
    (BEAR, "--kind", ["Porous", "magnetic"]),
    (BEAR, "--interp", ["Cubic", "spline"]),
    (PLAN, "--pattern", ["Grid", "spiral"]),
    (PLAN, "--instrument", ["Level", "laser"]),
    (PLAN, "--reports", ["Mirror-Tilt", "both"]),
    (FR_PNG, "--contact-edge", ["Left", "middle"]),
    (("sphere", "ball.csv"), "--kind", ["Ball", "cube"]),
    (("register", "add", P3, "--db", "new.sqlite"), "--state", ["As-Found", "new"]),
    (("register", "export", "out.csv", "--db", "reg.sqlite"), "--table", ["Results", "all"]),
]

# combinations: (argv, words)
COMBINATIONS = [
    (("reduce", P3, "--seed", "1"), ("--seed", "--uncertainty")),
    (("reduce", P3, "--trials", "1000"), ("--trials", "--uncertainty")),
    (("reduce", PAD, "--u-height-um", "0.1"), ("--u-height-um", "--uncertainty")),
    ((*GRADE, "--seed", "1"), ("--seed", "--no-uncertainty")),
    ((*GRADE, "--trials", "1000"), ("--trials", "--no-uncertainty")),
    (("grade", P3, "--standard", "din-876", "--uncertainty-um", "0.5", "--seed", "1"), ("--seed", "--uncertainty-um")),
    (("grade", P3, "--standard", "din-876", "--uncertainty", "--no-uncertainty"), ("--no-uncertainty",)),
    (("grade", P3, "--standard", "din-876", "--uncertainty", "--uncertainty-um", "1"), ("--uncertainty",)),
    (("grade", P3, "--standard", "din-876", "--tolerance-um", "5", "--tolerance-uin", "5"), ("--tolerance-um",)),
    ((*GRADE, "--length-mm", "1000"), ("--length-mm", "--width-mm")),
    ((*GRADE, "--repeat-tolerance-um", "1"), ("--repeat-tolerance-um", "--repeat-radius-mm")),
    ((*BEAR, "--seed", "1"), ("--seed", "--no-uncertainty")),
    ((*BEAR, "--travel-start-mm", "500", "--travel-end-mm", "100"), ("--travel-start-mm",)),
    ((*CMP, "--log", "log.csv"), ("--log", "lap")),
    ((*CMP, "--lap-size-mm", "100x50", "--lap-diameter-mm", "100"), ("--lap-diameter-mm",)),
    ((*CMP, "--dwell-min", "60", "--log", "log.csv"), ("--dwell-min",)),
    ((*LAP, "--lap-size-mm", "100x50"), ("--lap-diameter-mm",)),
    ((*LAP, "--rate-um-per-min", "1", "--rate-um-per-pass", "1"), ("--rate-um-per-min",)),
    ((*LAP, "--strokes-per-pass", "10"), ("--strokes-per-pass", "--rate-um-per-pass")),
    (("lap", P3, "--target-um", "1.5", "--lap-diameter-mm", "150", "--gap-fraction", "0.2"), ("--gap-fraction",)),
    (("sphere", "ball.csv", "--u-um", "0.1"), ("--u-um", "--kind")),
    (("sphere", "ball.csv", "--mate", "ball.csv"), ("--mate",)),
    ((*PLAN, "--length-in", "40"), ("--length-in",)),
    ((*PLAN, "--pattern", "union-jack", "--diagonals"), ("--diagonals",)),
    ((*PLAN, "--instrument", "level", "--reports", "beam-deviation"), ("--reports",)),
    (("fringes", "fringes.toml", "--pixel-mm", "0.1"), ("--pixel-mm",)),
    (("fringes", "fringes.toml", "--light", "helium", "--wavelength-nm", "589"), ("--light",)),
    (("guideway", BODY, "--gap-um", "6"), ("--gap-um", "--carriage")),
    (("guideway", BODY, "--plot", "x", "--png", "adir"), ("--plot",)),
    (("report", P3, "-o", "r.pdf", "--no-uncertainty", "--seed", "1"), ("--seed", "--no-uncertainty")),
    (("report", P3, "-o", "r.pdf", "--lap-diameter-mm", "150"), ("target",)),
    (("report", P3, "-o", P3 + ".pdf", "--gap-um", "nan", "--pad", "80x40"), ("--gap-um",)),
    (("report", P3, "-o", "report.txt"), ("-o", ".pdf")),
    ((*FILM, "--load-n", "1e-300"), ("--load-n", "too small")),
    (("guideway", BODY, "--carriage", CAR, "--permeability-m2", "1e-9"), ("[film] with --permeability-m2",)),
    (("report", P3, "-o", "r.pdf", "--no-uncertainty", "--png", "r.pdf"), ("--png", "report itself")),
    (("report", P3, "-o", "adir", "--no-uncertainty"), ("-o", ".pdf")),
    (("enter", "planned.toml", "--unit", "um"), ("--unit",)),
    (("enter", "planned.toml", "--idle-timeout", "5"), ("--idle-timeout",)),
    (("demo", "--out", "demo-folder"), ("--out", "--force")),
    # Monte Carlo options where no budget is evaluated: a given target takes no guard band, compare has no target
    ((*LAP, "--trials", "1000"), ("--trials", "budget")),
    ((*LAP, "--seed", "1"), ("--seed", "budget")),
    ((*CMP, "--seed", "1"), ("--seed", "budget")),
    (("enter", "planned.toml", "--port", "/dev/ttyS99", "--baud", "0"), ("--baud", "at least 50")),
    (("enter", "planned.toml", "--port", "/dev/ttyS99", "--baud", "9999999"), ("--baud", "4e+06")),
]


def _setup(work: Path) -> None:
    """The inputs, copied into ``work`` (so the samples can never be touched), and the hostile paths."""
    for src, dst in (("plate-KY-P3-2024-03-11.toml", P3), ("plate-KY-P3-after-lap-1.toml", A1),
                     ("pad-KY-B4-heights.csv", PAD), ("guideway-KY-G1.toml", G1),
                     ("padface-KY-B4-fringes.toml", "fringes.toml"), ("padface-KY-B4-fringes.png", "fringes.png"),
                     ("ball-KY-S2-points.csv", "ball.csv"), ("bearing_tandem_slide.toml", "slide.toml")):
        shutil.copy(SAMPLES / src, work / dst)
    shutil.copytree(SAMPLES / "guideway-KY-G2", work / "g2")
    (work / "adir").mkdir()
    os.mkfifo(work / "fifo")
    for name in (P3, "fringes.toml"):
        os.symlink(name, work / f"link-{name}")
    (work / "log.csv").write_text("x_mm,y_mm,minutes\n200,250,5\n", encoding="utf-8")
    (work / "demo-folder").mkdir()
    (work / "demo-folder" / "flatcheck-demo-report.pdf").write_text("my own notes", encoding="utf-8")


def _readonly(work: Path) -> None:
    ro = work / "readonly.out"
    if not ro.exists():
        ro.write_text("a kept result\n", encoding="utf-8")
    os.chmod(ro, 0o444)


def _cases() -> list:
    """Every bad option: (id, argv, words)."""
    cases = []
    for family, (base, option, extra, is_int) in enumerate(NUMERIC):
        values = dict(INT_ALWAYS if is_int else ALWAYS)
        for key in extra:
            name, value = MAYBE[key]
            values[name] = value
        for name, value in values.items():
            cases.append((f"{family}: {' '.join(base[:2])} {option} {name}", (*base, option, value), (option,)))
    for base, option, with_self in OUTPUTS:
        typed = "-o" if option == "--output" else option
        for name, (path, word) in BAD_OUT.items():
            cases.append((f"{' '.join(base[:2])} {option} {name}", (*base, typed, path), (option, word)))
        if with_self:
            for name, spelling in SELF.items():
                path = spelling.format(base[1])  # the command's own input file
                cases.append((f"{base[0]} {option} the input {name}", (*base, typed, path), (option, "input")))
    for name, (path, word) in BAD_OUT.items():
        if name != "a missing folder":
            cases.append((f"register export to {name}", ("register", "export", path, "--db", "reg.sqlite"), (word,)))
    for base, option in INPUTS:
        for name, path in BAD_IN.items():
            cases.append((f"{base[0]} {option} {name}", (*base, option, path), (path,)))
    for command in (("reduce",), ("grade", "--standard", "din-876"), ("lap", "--target-um", "1"), ("sphere",),
                    ("fringes",), ("guideway",), ("enter",), ("bearing", "--pad", "80x40", "--gap-um", "8")):
        for name, path in BAD_IN.items():
            cases.append((f"{command[0]} input {name}", (command[0], path, *command[1:]), (path,)))
    for base, option, values in CHOICES:
        for v in values:
            cases.append((f"{' '.join(base[:2])} {option} {v}", (*base, option, v), (option,)))
    for argv, words in COMBINATIONS:
        cases.append((f"combination {' '.join(argv)}", argv, words))
    return cases


def _digest(folder: Path) -> dict:
    out = {}
    for p in sorted(folder.rglob("*")):
        if p.is_file() and not p.is_symlink() and p.suffix != ".sqlite":
            out[str(p)] = hashlib.sha256(p.read_bytes()).hexdigest()
    return out


def test_the_sweep_is_several_hundred_options():
    cases = _cases()
    assert len(cases) >= 600
    assert len({c[0] for c in cases}) == len(cases)  # every case has its own name


def test_every_bad_option_is_one_line_exit_2_and_changes_nothing(cli, cli_limited, refusal_problems, tmp_path, monkeypatch):
    work = tmp_path / "work"
    work.mkdir()
    monkeypatch.chdir(work)
    monkeypatch.delenv("FLATCHECK_DB", raising=False)
    monkeypatch.delenv("FLATCHECK_UNCERTAINTY_DEFAULTS", raising=False)
    _setup(work)
    # a register with two surveys of S1, and a planned survey to enter readings into
    assert cli("register", "add", P3, A1, "--db", "reg.sqlite", "--ident", "S1", "--trials", "100", "--jobs", "1",
               "--seed", "1")[0] == 0
    assert cli("register", "instrument", "I1", "--db", "reg.sqlite", "--kind", "level")[0] == 0
    assert cli(*PLAN, "-o", "planned.toml")[0] == 0
    _readonly(work)
    samples_before = _digest(SAMPLES)
    before = _digest(work)
    p3_text = (work / P3).read_bytes()
    failures = []
    slowest = (0.0, None)
    for case_id, argv, words in _cases():
        _readonly(work)
        start = time.perf_counter()
        result = cli_limited(*argv)
        assert result is not None, f"{argv}: no answer within {TIME_LIMIT_S} s (a hang)"
        code, out, err = result
        slowest = max(slowest, (time.perf_counter() - start, case_id), key=lambda s: s[0])
        problems = refusal_problems(code, out, err, words)
        if (work / P3).read_bytes() != p3_text:  # the input most cases name: said at the case that changed it
            problems.append(f"{P3} changed")
            (work / P3).write_bytes(p3_text)
        if problems:
            failures.append(f"{case_id}: {'; '.join(problems)}")
    assert not failures, f"{len(failures)} failed:\n" + "\n".join(failures)
    after = _digest(work)
    changed = [p for p in before if before[p] != after.get(p)]
    assert not changed, f"inputs or earlier outputs changed: {changed}"
    assert _digest(SAMPLES) == samples_before
    assert (work / "fifo").exists() and not (work / "fifo").is_file()
    assert slowest[0] < TIME_LIMIT_S, slowest


def test_a_plate_size_far_from_the_file_is_warned_about(cli):
    p3 = SAMPLES / "plate-KY-P3-2024-03-11.toml"
    code, out, err = cli("grade", p3, "--standard", "din-876", "--no-uncertainty", "--length-mm", "100",
                         "--width-mm", "63")
    assert code == 0
    assert err.startswith("flatcheck: warning: --length-mm/--width-mm") and len(err.splitlines()) == 1
    assert "1000 x 630" in err
    code, out, err = cli("grade", p3, "--standard", "din-876", "--no-uncertainty", "--length-mm", "1010",
                         "--width-mm", "630")
    assert code == 0 and err == ""  # within 10 %: the same plate
    code, out, err = cli("grade", SAMPLES / "pad-KY-B4-heights.csv", "--standard", "din-876", "--length-mm", "10",
                         "--width-mm", "10", "--json")
    assert code == 0 and "smaller than the measured points" in err
    import json

    assert json.loads(out)["warnings"]


# ------------------------------------------------------------------------------------------- user text
MARKUP = ["[/]", "[red]x", "[/b]", "[bold]x[/bold]", "[link=x]y"]


@pytest.mark.parametrize("text", MARKUP)
def test_user_text_is_printed_literally_by_every_command(cli, tmp_path, monkeypatch, text):
    monkeypatch.chdir(tmp_path)
    monkeypatch.delenv("FLATCHECK_DB", raising=False)
    q = text.replace("\\", "\\\\")
    safe = text.replace("/", "_")  # a file name may hold brackets, not a slash

    def ok(*argv, expect=text):
        code, out, err = cli(*argv)
        assert code == 0, (argv, err)
        assert expect in out, (argv[:2], expect, out[:600])
        return out

    # plan: the description, ident and material as typed
    ok("plan", "--pattern", "grid", "--length-mm", "300", "--width-mm", "200", "--foot-spacing-mm", "50",
       "--instrument", "indicator", "--single-run", "--description", text, "--ident", text, "--material", text,
       "-o", f"{safe}plan.toml")
    # enter, through its documented standard-input mode (one reading a line)
    monkeypatch.setattr("sys.stdin", __import__("io").StringIO("\n".join(["0.1"] * 15) + "\n"))
    ok("enter", f"{safe}plan.toml", expect=f"{safe}plan.toml")
    # reduce, grade, lap, compare and report of surveys whose names and descriptions hold the text
    p3 = SAMPLES / "plate-KY-P3-2024-03-11.toml"
    src = p3.read_text(encoding="utf-8")
    survey = tmp_path / f"{safe}plate.toml"
    survey.write_text(src.replace('description = "', f'description = "{q} ', 1), encoding="utf-8")
    after = tmp_path / f"{safe}after.toml"
    shutil.copy(SAMPLES / "plate-KY-P3-after-lap-1.toml", after)
    ok("reduce", survey)
    ok("grade", survey, "--standard", "din-876", "--no-uncertainty", expect=str(survey))
    ok("lap", survey, "--target-um", "1.5", "--lap-diameter-mm", "150")
    ok("compare", survey, after, "--plot", f"{safe}change.png", expect=f"{safe}change.png")
    # sphere: the file name
    ball = tmp_path / f"{safe}ball.csv"
    shutil.copy(SAMPLES / "ball-KY-S2-points.csv", ball)
    ok("sphere", ball, "--kind", "ball", expect=str(ball))
    # fringes: the part's ident and description
    fr = tmp_path / f"{safe}fringes.toml"
    fr.write_text((SAMPLES / "padface-KY-B4-fringes.toml").read_text(encoding="utf-8")
                  .replace('ident = "KY-B4"', f'ident = "{q}"'), encoding="utf-8")
    ok("fringes", fr)
    # guideway: its ident and a face's name
    shutil.copytree(SAMPLES / "guideway-KY-G2", tmp_path / "g2")
    body = tmp_path / "g2" / "body.toml"
    body.write_text(body.read_text(encoding="utf-8").replace('ident = "KY-G2"', f'ident = "{q}"')
                    .replace('"side-left"', f'"{q}L"'), encoding="utf-8")
    ok("guideway", body)
    # bearing: a pad's name
    slide = tmp_path / "slide.toml"
    slide.write_text((SAMPLES / "bearing_tandem_slide.toml").read_text(encoding="utf-8")
                     .replace('name = "front"', f'name = "{q}"'), encoding="utf-8")
    ok("bearing", SAMPLES / "guideway-KY-G1.toml", "--bearing", slide, "--no-uncertainty")
    # the register: every text a person types, shown back by each subcommand
    db = ("--db", "reg.sqlite")
    ok("register", "surface", text, *db, "--description", text, "--owner", text, "--location", text,
       "--kind", text, "--material", text, "--interval-months", "12")
    ok("register", "instrument", f"{text}I", *db, "--model", text, "--serial", text, "--calibrated", "2024-01-01",
       "--interval-months", "12", "--certificate", text, "--traceability", text)
    ok("register", "add", survey, after, *db, "--ident", text, "--instrument", f"{text}I", "--trials", "100",
       "--jobs", "1", "--seed", "1", expect=str(survey))
    ok("register", "history", text, *db)
    ok("register", "wear", text, *db)
    ok("register", "due", *db, "--all", "--on", "2030-01-01")
    ok("register", "certificate", text, *db, "--lab", text, "--prefix", "KY", "--issued", "2024-07-01")
    if text == MARKUP[1]:  # a report takes seconds: one text suffices
        ok("report", survey, "-o", f"{safe}report.pdf", "--no-uncertainty", "--window", "none",
           expect=f"{safe}report.pdf")
