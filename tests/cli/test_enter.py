"""Tests of ``flatcheck enter``: piped, from a log, and the interactive flow in a real pseudo-terminal."""

import io
import json
import os
import pty
import select
import sys
import time

import pytest

import flatcheck

OLD = 'readings = []   # fill in, in the order taken\norder = "forward"'


def _bowl(x, y):
    """An invented surface: a shallow bowl with a twist, a few µm on a 1000 x 630 mm plate."""
    return 3e-6 * (x - 500.0) ** 2 + 2e-6 * (y - 315.0) ** 2 + 4e-7 * (x - 500.0) * (y - 315.0)


@pytest.fixture
def planned(cli, tmp_path):
    """A blank Union Jack written by `flatcheck plan --single-run` (1000 x 630 mm, 100 mm base, autocollimator)."""
    path = tmp_path / "plate.toml"
    code, out, err = cli("plan", "--length-mm", 1000, "--width-mm", 630, "--foot-spacing-mm", 100, "--single-run",
                         "-o", path)
    assert code == 0, err
    assert path.read_text().count(OLD) == 8  # one run per line, in its [[line]] table
    return path


@pytest.fixture
def planned_both(cli, tmp_path):
    """The same plate planned as `flatcheck plan` does by default: a forward and a back run of every line."""
    path = tmp_path / "plate.toml"
    code, out, err = cli("plan", "--length-mm", 1000, "--width-mm", 630, "--foot-spacing-mm", 100, "-o", path)
    assert code == 0, err
    text = path.read_text()
    assert text.count("[[line.run]]") == 16 and text.count('order = "reverse"') == 8
    return path


def _readings(path, runs=("forward",), seed=11, decimals=2):
    """Readings of the invented surface in entry order, rounded as an instrument shows them."""
    sim = flatcheck.simulate_survey(flatcheck.read_survey(path), _bowl, instrument_zero="random", noise_sd=0.03,
                                    rng=seed, runs=runs)
    return [[round(v, decimals) for v in r.readings] for ln in sim.lines for r in ln.runs]


def _typed_in(path, runs, dest):
    """The same readings typed into the file by hand: each empty array replaced, in file order."""
    text = path.read_text()
    for r in runs:
        text = text.replace("readings = []", "readings = [" + ", ".join(repr(float(v)) for v in r) + "]", 1)
    assert "readings = []" not in text
    dest.write_text(text)
    return dest


def _heights(cli, path):
    code, out, err = cli("reduce", path, "--json", "--window", "none")
    assert code == 0, err
    return {n["name"]: n["height_um"] for n in json.loads(out)["nodes"]}


def _pipe(cli, monkeypatch, path, values):
    monkeypatch.setattr(sys, "stdin", io.StringIO("".join(f"{v}\n" for v in values)))
    return cli("enter", path)


# ---------------------------------------------------------------------------
# the checks


def test_piped_stopped_halfway_and_resumed_reduces_like_the_typed_file(cli, monkeypatch, planned, tmp_path):
    runs = _readings(planned)
    flat = [v for r in runs for v in r]
    assert len(flat) == 52
    code, out, err = _pipe(cli, monkeypatch, planned, flat[:23])  # stopped halfway, inside line SW-SE
    assert code == 0 and err == ""
    assert "23 of 52" in out and "resume at reading 24" in out and "flatcheck enter" in out
    with pytest.raises(flatcheck.InputValueError):
        flatcheck.read_survey(planned)  # half a run is not yet a survey
    code, out, err = _pipe(cli, monkeypatch, planned, flat[23:])
    assert code == 0, err
    assert "All 52 readings are in" in out and "flatness (minimum zone)" in out
    blank = tmp_path / "blank.toml"
    code, _, err = cli("plan", "--length-mm", 1000, "--width-mm", 630, "--foot-spacing-mm", 100, "--single-run",
                       "-o", blank)
    assert code == 0, err
    typed = _typed_in(blank, runs, tmp_path / "typed.toml")
    a, b = _heights(cli, planned), _heights(cli, typed)
    assert a.keys() == b.keys() and all(a[k] == pytest.approx(b[k], abs=1e-9) for k in a)
    # the person's file keeps its comments
    assert "# flatcheck survey file" in planned.read_text()


def test_a_log_with_the_same_readings_gives_the_same_heights(cli, planned, tmp_path):
    runs = _readings(planned)
    flat = [v for r in runs for v in r]
    log = tmp_path / "level.csv"
    rows = ["date_time;tilt_arcsec;temperature"]
    t = 0
    for k, v in enumerate(flat):
        t += 20
        rows.append(f"2024-03-11 09:{t // 60:02d}:{t % 60:02d};{str(v).replace('.', ',')};20,1")
    log.write_text("\n".join(rows) + "\n")
    code, out, err = cli("enter", planned, "--from", log, "--column", "tilt_arcsec", "--decimal", ",")
    assert code == 0, err
    assert "52 readings taken from column 'tilt_arcsec'" in out and "All 52 readings are in" in out
    blank = tmp_path / "blank.toml"
    cli("plan", "--length-mm", 1000, "--width-mm", 630, "--foot-spacing-mm", 100, "--single-run", "-o", blank)
    typed = _typed_in(blank, runs, tmp_path / "typed.toml")
    a, b = _heights(cli, planned), _heights(cli, typed)
    assert all(a[k] == pytest.approx(b[k], abs=1e-9) for k in a)


def test_a_log_with_a_missing_reading_is_refused_with_the_gap(cli, planned, tmp_path, one_line_error):
    flat = [v for r in _readings(planned) for v in r]
    rows = ["time,tilt"]
    t = 0
    for k, v in enumerate(flat):
        t += 20
        if k == 30:
            continue  # the 31st reading never reached the log
        rows.append(f"{t},{v}")
    log = tmp_path / "log.csv"
    log.write_text("\n".join(rows) + "\n")
    before = planned.read_text()
    code, out, err = cli("enter", planned, "--from", log)
    one_line_error(code, err, out=out)
    assert "51 readings but the survey needs 52" in err and "readings 30 and 31 (lines 31 and 32)" in err
    assert planned.read_text() == before  # nothing written


def test_a_planted_slip_is_named_during_piped_entry(cli, monkeypatch, planned_both):
    planned = planned_both
    runs = _readings(planned, runs=("forward", "reverse"), decimals=1)
    # the back run of SW-SE (runs[5]) read 1.4 arcsec at its 4th reading, keyed as 4.1 (a constant
    # offset of the line's readings is the instrument's zero: it changes no height)
    shift = 1.4 - runs[5][3]
    runs[4] = [round(v + shift, 1) for v in runs[4]]
    runs[5] = [round(v + shift, 1) for v in runs[5]]
    assert runs[5][3] == 1.4
    runs[5][3] = 4.1
    flat = [v for r in runs for v in r]
    number = sum(len(r) for r in runs[:5]) + 4
    code, out, err = _pipe(cli, monkeypatch, planned, flat)
    assert code == 0
    warnings = [ln for ln in err.splitlines() if ln.startswith("flatcheck: warning:")]
    assert len(warnings) == 1 and f"reading {number} (line 'SW-SE', run 2 of 2 (reverse)" in warnings[0]
    assert "4.1 arcsec differs" in warnings[0] and "kept" in warnings[0]
    assert "4.1" in planned.read_text()  # kept, never prompted for
    assert "suspect reading" in out  # and the reduction names it too


# ---------------------------------------------------------------------------
# bad input, tried as a new user would


def test_not_a_planned_survey(cli, monkeypatch, tmp_path, one_line_error):
    csv = tmp_path / "map.csv"
    csv.write_text("x_mm,y_mm,height_um\n0,0,1\n")
    monkeypatch.setattr(sys, "stdin", io.StringIO("1.0\n"))
    code, out, err = cli("enter", csv)
    one_line_error(code, err, out=out)
    assert "map.csv" in err
    other = tmp_path / "bearing.toml"
    other.write_text('[pad]\nsize = "100x100"\n')
    code, out, err = cli("enter", other)
    one_line_error(code, err, out=out)
    assert "not a flatcheck survey file" in err
    code, out, err = cli("enter", tmp_path / "missing.toml")
    one_line_error(code, err, out=out)
    assert "no such file" in err


def test_bad_piped_lines(cli, monkeypatch, planned, one_line_error):
    flat = [v for r in _readings(planned) for v in r]
    code, out, err = _pipe(cli, monkeypatch, planned, ["1.5", "2,5", "abc"])
    one_line_error(code, err, out=out)
    assert "standard input, line 3" in err and "'abc' is not a reading" in err and "2 readings in are saved" in err
    assert "readings = [1.5, 2.5]" in planned.read_text()  # a decimal comma typed is read as one
    code, out, err = _pipe(cli, monkeypatch, planned, ["99999"])
    one_line_error(code, err, out=out)
    assert "mm/m" in err and "standard input, line 1" in err
    code, out, err = _pipe(cli, monkeypatch, planned, flat[2:] + [1.0])
    one_line_error(code, err, out=out)
    assert "the input has more" in err
    assert flatcheck.read_survey(planned).has_readings  # complete and saved all the same


@pytest.mark.parametrize(
    "extra, needle",
    [
        (("--column", "tilt"), "--column applies to a log"),
        (("--regex", "X"), "--regex applies to a serial port"),
        (("--unit", "urad"), "--unit applies to a log or a serial port"),
        (("--decimal", ";"), "decimal separator"),
        (("--port", "/dev/flatcheck-no-such-port"), "cannot open the serial port"),
        (("--reading-sd", "-1"), "not a positive number"),
    ],
)
def test_option_errors(cli, monkeypatch, planned, extra, needle, one_line_error):
    monkeypatch.setattr(sys, "stdin", io.StringIO(""))
    code, out, err = cli("enter", planned, *extra)
    one_line_error(code, err, out=out)
    assert needle in err


def test_the_survey_cannot_be_its_own_log(cli, planned, one_line_error):
    code, out, err = cli("enter", planned, "--from", planned)
    one_line_error(code, err, out=out)
    assert "input file" in err


# ---------------------------------------------------------------------------
# the interactive flow, in a real pseudo-terminal


class _Terminal:
    """``flatcheck enter`` running under a pseudo-terminal, driven by keystrokes."""

    def __init__(self, path):
        self.pid, self.fd = pty.fork()
        if self.pid == 0:  # the child: the command, with the terminal as its standard streams
            os.execv(sys.executable, [sys.executable, "-c", "from flatcheck.cli.main import main; main()",
                                      "enter", str(path)])
        self.out = ""

    def read_until(self, needle, timeout=60.0):
        end = time.monotonic() + timeout
        start = len(self.out)
        while time.monotonic() < end:
            if needle in self.out[start:]:
                return self.out[start:]
            r, _, _ = select.select([self.fd], [], [], 0.2)
            if r:
                try:
                    chunk = os.read(self.fd, 65536)
                except OSError:
                    break
                if not chunk:
                    break
                self.out += chunk.decode(errors="replace").replace("\r\n", "\n")
        raise AssertionError(f"{needle!r} did not appear; screen so far: {self.out[start:][-2000:]!r}")

    def type(self, text):
        os.write(self.fd, (text + "\n").encode())

    def wait(self, timeout=60.0):
        end = time.monotonic() + timeout
        while time.monotonic() < end:
            pid, status = os.waitpid(self.pid, os.WNOHANG)
            if pid:
                try:
                    while select.select([self.fd], [], [], 0.1)[0]:
                        chunk = os.read(self.fd, 65536)
                        if not chunk:
                            break
                        self.out += chunk.decode(errors="replace").replace("\r\n", "\n")
                except OSError:
                    pass
                os.close(self.fd)
                return os.waitstatus_to_exitcode(status)
            time.sleep(0.05)
        os.kill(self.pid, 9)
        raise AssertionError("the command did not end")


def test_interactive_flow_in_a_pseudo_terminal(planned_both):
    planned = planned_both
    runs = _readings(planned, runs=("forward", "reverse"), decimals=1)
    flat = [v for r in runs for v in r]

    term = _Terminal(planned)
    screen = term.read_until("reading 1/104 [arcsec]> ")
    assert "Line SW-NE (1 of 8), run 1 of 2 (forward): walk SW -> NE" in screen
    assert "feet on SW and SW-NE.1, 0 mm and 112 mm from SW" in screen  # distance from the line's start
    assert "@" in screen and "+-----" in screen  # the map, the instrument marked
    term.type(str(flat[0]))
    term.read_until("reading 2/104")
    term.type("nonsense")
    term.read_until("neither a reading nor a key")
    term.type(str(flat[1]))
    term.read_until("reading 3/104")
    term.type("u")  # undo reading 2
    screen = term.read_until("reading 2/104")
    assert "reading 2 taken back" in screen
    for v in flat[1:9]:  # the rest of the forward run and the first reading of the back run
        term.type(str(v))
    term.read_until("reading 10/104")
    # the back run's second reading keyed wrong: named at once, re-read on Enter
    term.type(str(round(flat[9] + 5.0, 1)))
    screen = term.read_until("k keep it, or Enter to re-read:")
    assert "suspect:" in screen and "differs by" in screen
    term.type("")
    term.read_until("reading 10/104")
    term.type(str(flat[9]))
    term.read_until("reading 11/104")
    term.type("r")  # re-read the last reading with the same value
    term.read_until("new value for reading 10")
    term.type(str(flat[9]))
    term.read_until("reading 11/104")
    term.type("q")
    screen = term.read_until("to resume at reading 11")
    assert term.wait() == 0
    text = planned.read_text()
    assert "readings = [" + ", ".join(repr(float(v)) for v in runs[0]) + "]" in text
    assert "readings = [" + ", ".join(repr(float(v)) for v in runs[1][:2]) + "]" in text

    # a second session resumes at reading 11 and finishes the survey; the summary ends it
    term = _Terminal(planned)
    screen = term.read_until("reading 11/104 [arcsec]> ")
    assert "104 planned, 10 in" in screen and "run 2 of 2 (reverse)" in screen
    for k, v in enumerate(flat[10:], start=11):
        term.type(str(v))
        if k < 104:
            term.read_until(f"reading {k + 1}/104")
    screen = term.read_until("Full results: flatcheck reduce")
    assert "All 104 readings are in" in screen and "flatness (minimum zone)" in screen
    assert term.wait() == 0
    assert flatcheck.read_survey(planned).has_readings
