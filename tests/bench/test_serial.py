"""Tests of live serial input (flatcheck.bench._serial): a pseudo-terminal pair stands in for the instrument."""

import os
import select
import subprocess
import sys
import time
import tty

import pytest

import flatcheck
from flatcheck.bench import (
    InstrumentError,
    InstrumentLost,
    SerialReadings,
    compile_reading_pattern,
    extract_reading,
)
from flatcheck.errors import InputValueError


@pytest.fixture
def instrument():
    """A pseudo-terminal pair: write to ``master`` as the instrument would; ``port`` is the device to open."""
    master, slave = os.openpty()
    tty.setraw(slave)
    fds = {"master": master, "slave": slave}
    yield fds, os.ttyname(slave)
    for fd in fds.values():
        try:
            os.close(fd)
        except OSError:
            pass


@pytest.mark.parametrize(
    "line, pattern, decimal, expected",
    [
        ("X:+0012.35 arcsec", None, ".", 12.35),
        ("  -0.004 mm/m", None, ".", -0.004),
        ("+1.234E+00", None, ".", 1.234),
        ("T 20.1 X -3,25", r"X\s*(\S+)", ",", -3.25),
        ("CH2=7.5;CH1=1.5", r"CH1=(?P<reading>[-+.\d]+)", ".", 1.5),
        ("STATUS OK", None, ".", None),
        ("X:12,35", None, ".", None),  # a decimal comma where a point was declared: not a reading
    ],
)
def test_extract_reading(line, pattern, decimal, expected):
    assert extract_reading(line, compile_reading_pattern(pattern), decimal=decimal) == expected


def test_bad_patterns_are_refused():
    with pytest.raises(InputValueError, match="not a valid regular expression"):
        compile_reading_pattern("X:(")
    with pytest.raises(InputValueError, match="2 groups"):
        compile_reading_pattern(r"(\d+)\.(\d+)")


def _lines(src, n, timeout=5.0):
    out = []
    for text in src.lines(idle_timeout_s=timeout):
        out.append(text)
        if len(out) == n:
            break
    return out


def test_lines_arrive_split_at_cr_lf_and_in_pieces(instrument):
    fds, port = instrument
    with SerialReadings(port, 9600, poll_s=0.05) as src:
        os.write(fds["master"], b"X:+1.50\r\nX:-0.25\rX:2")
        time.sleep(0.1)
        os.write(fds["master"], b".75\n\r\n   \nX:3\r\n")
        assert _lines(src, 4) == ["X:+1.50", "X:-0.25", "X:2.75", "X:3"]


def test_idle_timeout_stops_without_error(instrument):
    _, port = instrument
    with SerialReadings(port, 9600, poll_s=0.05) as src:
        t0 = time.monotonic()
        assert list(src.lines(idle_timeout_s=0.3)) == []
        assert src.idle and 0.3 <= time.monotonic() - t0 < 3.0


def test_a_vanished_port_raises_with_the_way_to_resume(instrument):
    fds, port = instrument
    with SerialReadings(port, 9600, poll_s=0.05) as src:
        os.write(fds["master"], b"X:1.0\r\n")
        it = src.lines(resume_fix=lambda: "run it again to resume at reading 2")
        assert next(it) == "X:1.0"
        os.close(fds.pop("master"))  # the cable is pulled
        with pytest.raises(InstrumentLost) as exc:
            next(it)
    assert "stopped answering" in str(exc.value) and "resume at reading 2" in str(exc.value)


def test_a_missing_port_is_named():
    with pytest.raises(InstrumentError, match="cannot open the serial port /dev/flatcheck-no-such-port") as exc:
        SerialReadings("/dev/flatcheck-no-such-port", 9600)
    assert exc.value.where == "--port"


# ---------------------------------------------------------------------------
# the command, live: readings from the instrument, the port pulled halfway, resumed


def _spawn(args):
    return subprocess.Popen(
        [sys.executable, "-c", "from flatcheck.cli.main import main; main()", *args],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
    )


def _wait_for(proc, needle, timeout=60.0):
    """Read the process's standard output until ``needle`` appears; return what was read."""
    seen = ""
    end = time.monotonic() + timeout
    fd = proc.stdout.fileno()
    while time.monotonic() < end:
        r, _, _ = select.select([fd], [], [], 0.2)
        if r:
            chunk = os.read(fd, 65536).decode()
            if not chunk:
                break
            seen += chunk
            if needle in seen:
                return seen
    raise AssertionError(f"{needle!r} did not appear; output so far: {seen!r}")


def _blank(tmp_path):
    path = tmp_path / "plate.toml"
    path.write_text(flatcheck.format_survey(flatcheck.plan_union_jack(1000.0, 630.0, 100.0)))
    return path


def test_live_entry_survives_a_pulled_cable_and_resumes(tmp_path):
    path = _blank(tmp_path)
    plan = flatcheck.read_survey(path)
    sim = flatcheck.simulate_survey(plan, lambda x, y: 2e-6 * (x - 500.0) ** 2, instrument_zero="random", rng=5)
    values = [round(v, 2) for ln in sim.lines for v in ln.runs[0].readings]
    # the same readings typed into the file, for comparison
    typed = tmp_path / "typed.toml"
    text = path.read_text()
    for k, ln in enumerate(sim.lines):
        n = len(ln.runs[0].readings)
        first = sum(len(x.runs[0].readings) for x in sim.lines[:k])
        text = text.replace("readings = []", "readings = [" + ", ".join(map(str, values[first:first + n])) + "]", 1)
    typed.write_text(text)

    # first session: 20 readings, then the port vanishes
    master, slave = os.openpty()
    tty.setraw(slave)
    proc = _spawn(["enter", str(path), "--port", os.ttyname(slave), "--regex", r"X:(\S+)"])
    _wait_for(proc, "Listening on")
    os.write(master, b"STATUS READY\r\n")
    for v in values[:20]:
        os.write(master, f"X:{v:+09.2f}\r\n".encode())
    _wait_for(proc, "reading 20/52")
    os.close(master)
    out, err = proc.communicate(timeout=60)
    os.close(slave)
    assert proc.returncode == 2
    lines = [ln for ln in err.splitlines() if ln.startswith("flatcheck: error:")]
    assert len(lines) == 1 and "Traceback" not in err
    assert "stopped answering" in lines[0] and "the 20 readings in are saved" in lines[0]
    assert "resume at reading 21" in lines[0] and "--port" in lines[0]
    assert "no reading in the line 'STATUS READY'" in err
    assert "readings = [" + ", ".join(map(str, values[:8])) + "]" in path.read_text()

    # second session on a new port: the rest, then the survey is complete and reduced
    master, slave = os.openpty()
    tty.setraw(slave)
    proc = _spawn(["enter", str(path), "--port", os.ttyname(slave), "--regex", r"X:(\S+)"])
    _wait_for(proc, "next: reading 21")
    for v in values[20:]:
        os.write(master, f"X:{v:+09.2f}\r\n".encode())
    out, err = proc.communicate(timeout=60)
    os.close(master)
    os.close(slave)
    assert proc.returncode == 0, err
    assert "All 52 readings are in" in out and "flatness (minimum zone)" in out
    a = flatcheck.read_survey(path)
    b = flatcheck.read_survey(typed)
    assert [ln.runs[0].readings for ln in a.lines] == [ln.runs[0].readings for ln in b.lines]
