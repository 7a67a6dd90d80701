"""``flatcheck enter``: readings into a planned survey file, one at a time, saved after each.

Four ways in, one order (the survey file's: line by line, run by run, each run's readings as
the file lists them) and the same checks:

- an interactive terminal: prompts naming the line, run, step and where the instrument stands,
  with a small map; keys for undo, re-read, correct and quit;
- piped standard input: one reading per line; a suspect reading is reported on standard error
  and kept, never prompted for;
- ``--from LOG``: the readings of an instrument's log (CSV or text);
- ``--port PORT``: live from the instrument over a serial port.

The survey file is rewritten atomically after every reading (only its ``readings`` arrays
change), so an interruption loses nothing and the next start resumes at the first missing
reading. When the last reading is in, the survey is reduced and a short summary shown.
"""

from __future__ import annotations

import shlex
import sys
from pathlib import Path

import typer
from rich.markup import escape

from ..errors import InputFormatError, InputValueError
from ._app import app
from .common import load_input, refuse_overwriting_inputs, stdout_console

_HELP_KEYS = (
    "Type a reading and press Enter; it is checked and saved at once. Keys:\n"
    "  u       undo: take back the last reading\n"
    "  r       re-read: replace the last reading with a new value\n"
    "  c N     correct reading number N\n"
    "  q       save and quit (run the same command again to resume)\n"
    "  ?       this help"
)


def _warn(text: str) -> None:
    sys.stderr.write(f"flatcheck: warning: {' '.join(str(text).split())}\n")
    sys.stderr.flush()


def _typed_number(text: str) -> float | None:
    """A reading as typed: ``1.4``, ``-0,25`` (a decimal comma), ``+3``; None if not a number."""
    t = text.strip().replace(" ", "")
    if t.count(",") == 1 and "." not in t:
        t = t.replace(",", ".")
    try:
        v = float(t)
    except ValueError:
        return None
    return v if v == v and abs(v) != float("inf") else None


class _Session:
    """The entry state, the file it is saved to, and how to say where things are."""

    def __init__(self, path: Path, reading_sd: float | None):
        from ..bench import entry_limits, plan_entry, start_entry
        from ..io import read_form

        self.path = path
        self.form = read_form(path)
        self.plan = plan_entry(self.form.survey, self.form.runs, falls=self.form.falls)
        self.state = start_entry(self.plan, [r.readings for r in self.form.runs])
        self.limits = entry_limits(self.plan, reading_sd=reading_sd)
        self.inches = bool((self.form.survey.meta.get("file") or {}).get("inches"))
        self.unit = self.plan.unit

    def kept(self, slot) -> str:
        """What to do about a suspect reading that was kept."""
        run = self.plan.runs[slot.run_index]
        place = run.where or str(self.path)
        return f"kept; if it was a slip, re-read it and correct it in {place}"

    def closure_note(self) -> str:
        """Why closures are not checked during entry, or ""."""
        if self.limits.closure_checks or self.state.complete:
            return ""
        return (f"closure checks are off during entry for a survey of {len(self.plan.survey.stations)} stations "
                "(too large to solve at every line); the runs and jumps are checked, and the reduction at the end "
                "checks every reading")

    # -- words
    def where(self, slot) -> str:
        from ..bench import describe_slot

        return describe_slot(self.plan, slot, units="in" if self.inches else "mm")

    def next_words(self) -> str:
        slot = self.state.next_slot
        if slot is None:
            return "none: every reading is in"
        return f"reading {slot.number} ({self.where(slot)})"

    def resume_words(self, command: str) -> str:
        slot = self.state.next_slot
        n = self.state.n_done
        if n == 0:
            saved = f"no reading of {self.path} is in yet"
        elif n == 1:
            saved = f"the 1 reading in is saved in {self.path}"
        else:
            saved = f"the {n} readings in are saved in {self.path}"
        if slot is None:
            return saved
        return f"{saved}; to resume at {self.next_words()}, run: {command}"

    # -- changes, each saved at once
    def save(self) -> None:
        from ..bench import run_readings
        from ..io import save_form

        self.form = save_form(self.form, run_readings(self.state))

    def enter(self, value: float) -> None:
        from ..bench import enter_reading

        self.state = enter_reading(self.state, value)
        self.save()

    def correct(self, number: int, value: float) -> None:
        from ..bench import correct_reading

        self.state = correct_reading(self.state, number, value)
        self.save()

    def undo(self):
        from ..bench import undo_reading

        self.state, slot = undo_reading(self.state)
        if slot is not None:
            self.save()
        return slot

    def check(self, value: float, number: int | None = None):
        from ..bench import check_reading

        return check_reading(self.state, value, self.limits, number=number)


def _command_line(survey: Path, extra: list[str]) -> str:
    return " ".join(["flatcheck", "enter", shlex.quote(str(survey))] + [shlex.quote(a) for a in extra])


@app.command("enter")
def enter_cmd(
    survey: Path = typer.Argument(..., help="The planned survey file (TOML, as 'flatcheck plan' writes it)."),
    from_log: Path = typer.Option(None, "--from", help="Take the readings from this instrument log (CSV or text)."),
    column: str = typer.Option(None, "--column", help="Log: the reading column, by header name or number (1 = first)."),
    time_column: str = typer.Option(
        None, "--time-column", help="Log: the timestamp column, by name or number; 'none' for no timestamps."
    ),
    unit: str = typer.Option(
        None, "--unit", help="Log or serial port: the unit the instrument sends (default: the survey's [instrument] unit)."
    ),
    decimal: str = typer.Option(".", "--decimal", help="Log or serial port: the decimal separator, '.' or ','."),
    port: str = typer.Option(None, "--port", help="Read live from the instrument on this serial port (e.g. /dev/ttyUSB0)."),
    baud: int = typer.Option(9600, "--baud", help="Serial port: speed in bit/s (8 data bits, no parity, 1 stop bit)."),
    regex: str = typer.Option(
        None, "--regex", help="Serial port: where the reading is in a line (a regular expression; default: the first number)."
    ),
    idle_timeout: float = typer.Option(
        None, "--idle-timeout", min=0.1, help="Serial port: stop after this many seconds without a reading."
    ),
    reading_sd: float = typer.Option(
        None, "--reading-sd",
        help="One reading's standard deviation for the checks, in the survey's unit (default: the file's "
        "reading_uncertainty, else 1.5 µrad or 0.3 µm).",
    ),
) -> None:
    """Enter readings into a planned survey: typed, piped (one per line), from a log or live from the instrument.

    The file is saved after every reading; stop at any time and run the same command again to resume.
    Each reading is checked as it comes (against the line's previous run, for a jump no surface of this
    size makes, and for the line's closure with the lines already read).
    """
    if decimal not in (".", ","):
        raise InputValueError(f"the decimal separator {decimal!r} is not '.' or ','", where="--decimal",
                              fix="give --decimal . or --decimal ,")
    if from_log is not None and port is not None:
        raise InputValueError("--from and --port are both given", where="--port",
                              fix="take the readings from the log or from the port, one at a time")
    if from_log is None:
        for name, v in (("--column", column), ("--time-column", time_column)):
            if v is not None:
                raise InputValueError(f"{name} applies to a log", where=name, fix="add --from LOG, or omit it")
    if port is None:
        for name, v in (("--regex", regex), ("--idle-timeout", idle_timeout)):
            if v is not None:
                raise InputValueError(f"{name} applies to a serial port", where=name, fix="add --port PORT, or omit it")
    if from_log is None and port is None and unit is not None:
        raise InputValueError("--unit applies to a log or a serial port", where="--unit",
                              fix="type readings in the survey's unit, or omit --unit")
    refuse_overwriting_inputs({"SURVEY": survey}, [from_log])
    if port is not None:  # before the survey is opened (docs/limits.md)
        from ..limits import check_count

        check_count(baud, "baud", where="--baud", name="the serial speed")
    if survey.suffix.lower() in (".csv", ".txt", ".log", ".dat") and survey.exists():
        raise InputFormatError(
            "this looks like an instrument log or a table, not a planned survey file", where=str(survey),
            fix=f"give the survey file (TOML, from flatcheck plan) first, and the log with --from: "
            f"flatcheck enter plate.toml --from {shlex.quote(str(survey))}",
        )
    try:
        session = _Session(survey, reading_sd)
    except InputValueError as exc:  # the core names its parameter; here it is the option as typed
        if exc.where != "reading_sd":
            raise
        raise InputValueError(exc.message, where="--reading-sd", fix=exc.fix) from None
    if session.closure_note():
        _warn(session.closure_note())
    same = [] if reading_sd is None else ["--reading-sd", f"{reading_sd:g}"]  # the resume command repeats it
    if from_log is not None:
        _from_log(session, from_log, column, time_column, unit, decimal)
    elif port is not None:
        extra = ["--port", port, "--baud", str(baud)] + same
        for name, v in (("--regex", regex), ("--unit", unit), ("--decimal", None if decimal == "." else decimal),
                        ("--idle-timeout", None if idle_timeout is None else f"{idle_timeout:g}")):
            if v is not None:
                extra += [name, v]
        _from_port(session, port, baud, regex, unit, decimal, idle_timeout, _command_line(survey, extra))
    elif _is_tty(sys.stdin):
        _interactive(session, _command_line(survey, same))
    else:
        _piped(session, _command_line(survey, same))


def _is_tty(stream) -> bool:
    try:
        return bool(stream.isatty())
    except (AttributeError, ValueError, OSError):
        return False


# ---------------------------------------------------------------------------
# the end: reduce and summarise


def _finish(session: _Session) -> None:
    """Every reading is in: reduce the survey and show a short summary."""
    from .. import evaluate_flatness

    con = stdout_console()
    st = session.state
    con.print(f"All {st.n_total} readings are in; saved in {session.path}.", markup=False, highlight=False)
    loaded = load_input(session.path)
    hm, red = loaded.heightmap, loaded.reduction
    fr = evaluate_flatness(hm.x_mm, hm.y_mm, hm.height_um)
    mz, ls = fr.mzpl.fltt_um, fr.lspl.fltt_um
    from ..units import format_height

    step = loaded.height_step_um()  # heights to the step the instrument resolves over the foot spacing

    def both(v):
        text = format_height(v, "um", step_um=step)
        return f"{text} ({format_height(v, 'in', step_um=step)})" if session.inches else text

    con.print(f"Reduced by least squares: {hm.n} stations, {red.rank.n_observations} readings, "
              f"redundancy {red.redundancy}.", markup=False, highlight=False)
    con.print(f"  flatness (minimum zone):          {both(mz)}", markup=False, highlight=False)
    con.print(f"  about the least-squares plane:    {both(ls)}", markup=False, highlight=False)
    shown = set()
    for o in red.outliers:
        if o.group == 0 or (o.group is not None and o.group in shown):
            continue
        shown.add(o.group)
        con.print(f"  suspect reading: {o.describe()}", markup=False, highlight=False, soft_wrap=True)
    con.print(f"Full results: flatcheck reduce {shlex.quote(str(session.path))}", markup=False, highlight=False)


def _stopped(session: _Session, command: str, why: str) -> None:
    con = stdout_console()
    con.print(f"{why}; {session.resume_words(command)}", markup=False, highlight=False, soft_wrap=True)


# ---------------------------------------------------------------------------
# piped standard input


def _piped(session: _Session, command: str) -> None:
    from ..bench import ReadingRefused

    if session.state.complete:
        extra = next(((no, ln.strip()) for no, ln in enumerate(sys.stdin, start=1)
                      if ln.strip() and not ln.strip().startswith("#")), None)
        if extra is not None:
            raise InputValueError(
                f"every reading of the survey is already in, but the input has more ({extra[1]!r})",
                where=f"standard input, line {extra[0]}", fix="give a blank copy of the plan, or no input",
            )
        _finish(session)
        return
    try:
        for no, raw in enumerate(sys.stdin, start=1):
            text = raw.strip()
            if not text or text.startswith("#"):
                continue
            where = f"standard input, line {no}"
            if session.state.complete:
                raise InputValueError(
                    f"the survey is complete after the {session.state.n_total}th reading, but the input has more "
                    f"({text!r})", where=where,
                    fix=f"check that the input lists the readings in the order of the survey file; all "
                    f"{session.state.n_total} are saved in {session.path}",
                )
            v = _typed_number(text)
            if v is None:
                raise InputFormatError(
                    f"{text!r} is not a reading", where=where,
                    fix=f"give one number per line, in {session.unit}; {session.resume_words(command)}",
                )
            slot = session.state.next_slot
            try:
                findings = session.check(v)
            except ReadingRefused as exc:
                raise ReadingRefused(exc.message, where=where,
                                     fix=f"{exc.fix}; {session.resume_words(command)}") from None
            for f in findings:
                _warn(f"reading {slot.number} ({session.where(slot)}): {f.message}; {session.kept(slot)}")
            session.enter(v)
    except KeyboardInterrupt:
        _stopped(session, command, "interrupted")
        raise typer.Exit(130) from None
    if session.state.complete:
        _finish(session)
    else:
        _stopped(session, command, f"end of input after {session.state.n_done} of {session.state.n_total} readings")


# ---------------------------------------------------------------------------
# an instrument log


def _from_log(session: _Session, log: Path, column, time_column, unit, decimal) -> None:
    import flatcheck.io as fio

    from ..bench import ReadingRefused, check_log_count, convert_readings, find_gaps, parse_log

    text = fio.read_text(log, wanted="an instrument log (CSV or text, one reading per row)")
    lg = parse_log(text, source=str(log), column=column, time_column=time_column, decimal=decimal)
    inst = session.plan.survey.instrument
    values = convert_readings(lg.values, unit or inst.unit, inst.unit, heights=inst.reads_heights)
    st = session.state
    missing = [s for s, v in zip(session.plan.slots, st.values) if v is None]
    first = f"reading {missing[0].number}: {session.where(missing[0])}" if missing else ""
    breaks = [i for i in range(len(missing) - 1) if missing[i + 1].run_index != missing[i].run_index]
    check_log_count(lg, len(missing), first_reading=first, n_in_file=st.n_done, breaks=breaks)
    if not missing:
        _finish(session)
        return
    from ..bench import check_reading, enter_reading

    state = st
    for k, (slot, v) in enumerate(zip(missing, values)):
        where = f"{log}, line {lg.rows[k]}"
        try:
            findings = check_reading(state, float(v), session.limits)
            state = enter_reading(state, float(v))
        except ReadingRefused as exc:
            raise ReadingRefused(exc.message, where=where,
                                 fix=f"{exc.fix}; nothing was written to {session.path}") from None
        for f in findings:
            _warn(f"{where}: reading {slot.number} ({session.where(slot)}): {f.message}; {session.kept(slot)}")
    if lg.times_s is not None:
        for g in find_gaps(lg.times_s, breaks):
            _warn(f"{log}: timestamps of log {g.describe(lg.rows)}; they are readings "
                  f"{missing[g.after].number} and {missing[g.after + 1].number} of the survey")
    session.state = state
    session.save()
    con = stdout_console()
    source = f"{lg.column} of {log}" + (f" (converted from {unit} to {inst.unit})" if unit and unit != inst.unit else "")
    con.print(f"{len(missing)} readings taken from {source}, in walking order from reading {missing[0].number}.",
              markup=False, highlight=False, soft_wrap=True)
    if session.state.complete:
        _finish(session)


# ---------------------------------------------------------------------------
# live from a serial port


def _from_port(session: _Session, port, baud, regex, unit, decimal, idle_timeout, command) -> None:
    from ..bench import ReadingRefused, SerialReadings, compile_reading_pattern, convert_readings, extract_reading

    pattern = compile_reading_pattern(regex)
    inst = session.plan.survey.instrument
    from_unit = unit or inst.unit
    convert_readings([0.0], from_unit, inst.unit, heights=inst.reads_heights)  # refuse a bad --unit before opening
    con = stdout_console()
    if session.state.complete:
        _finish(session)
        return
    with SerialReadings(port, baud) as src:
        con.print(f"Listening on {port} at {baud} bit/s; next: {session.next_words()}. Ctrl-C stops (every reading "
                  "is saved).", markup=False, highlight=False, soft_wrap=True)

        def resume() -> str:
            return f"reconnect the instrument; {session.resume_words(command)}"

        try:
            for line in src.lines(idle_timeout_s=idle_timeout, resume_fix=resume):
                v = extract_reading(line, pattern, decimal=decimal)
                if v is None:
                    _warn(f"{port}: no reading in the line {line!r}; ignored")
                    continue
                v = float(convert_readings([v], from_unit, inst.unit, heights=inst.reads_heights)[0])
                slot = session.state.next_slot
                try:
                    findings = session.check(v)
                except ReadingRefused as exc:
                    _warn(f"{port}: {exc.message}; not entered, take reading {slot.number} again")
                    continue
                session.enter(v)
                con.print(f"reading {slot.number}/{session.state.n_total} = {v:g} {inst.unit}: "
                          f"{session.where(slot)} (saved)", markup=False, highlight=False, soft_wrap=True)
                for f in findings:
                    _warn(f"reading {slot.number} ({session.where(slot)}): {f.message}; {session.kept(slot)}")
                if session.state.complete:
                    break
        except KeyboardInterrupt:
            _stopped(session, command, "interrupted")
            raise typer.Exit(130) from None
        if src.idle:
            _stopped(session, command, f"no reading for {idle_timeout:g} s: stopped")
            return
    if session.state.complete:
        _finish(session)


# ---------------------------------------------------------------------------
# an interactive terminal


def _print_run_header(con, session: _Session, slot) -> None:
    plan = session.plan
    run = plan.runs[slot.run_index]
    ln = plan.survey.line(run.line)
    n_lines = len(plan.survey.lines)
    li = run.line_index + 1
    walk = f"{ln.stations[-1]} -> {ln.stations[0]}" if run.order == "reverse" else f"{ln.stations[0]} -> {ln.stations[-1]}"
    if plan.survey.instrument.reads_heights:
        size = f"{len(ln.stations)} stations"
    else:
        b = ln.foot_spacing_mm
        size = f"{ln.steps} steps of {b / 25.4:.3f} in" if session.inches else f"{ln.steps} steps of {b:.1f} mm"
    con.print()
    con.print(f"Line {ln.name} ({li} of {n_lines}), {run.label}: walk {walk}, {size}",
              markup=False, highlight=False, soft_wrap=True)


def _interactive(session: _Session, command: str) -> None:
    from ..bench import ReadingRefused, plate_map

    con = stdout_console()
    st = session.state
    con.print(f"Entering readings into {escape(str(session.path))}: {st.n_total} planned, {st.n_done} in; readings in "
              f"[bold]{escape(session.unit)}[/bold].", highlight=False, soft_wrap=True)
    con.print(_HELP_KEYS, markup=False, highlight=False)
    if st.complete:
        _finish(session)
        return
    shown_run = None

    def ask(prompt: str) -> str:
        sys.stdout.flush()
        return input(prompt)

    def take_value(prompt: str):
        """A number typed at ``prompt``; None when the person gives up (empty input)."""
        while True:
            text = ask(prompt).strip()
            if not text:
                return None
            v = _typed_number(text)
            if v is not None:
                return v
            con.print(f"  {text!r} is not a number; type the reading in {session.unit}", markup=False, highlight=False)

    def confirm(findings) -> bool:
        for f in findings:
            con.print(f"  suspect: {f.message}", markup=False, highlight=False, soft_wrap=True)
        answer = ask("  k keep it, or Enter to re-read: ").strip().lower()
        return answer in ("k", "keep", "y", "yes")

    try:
        while True:
            slot = session.state.next_slot
            if slot is None:
                break
            if shown_run != slot.run_index:
                _print_run_header(con, session, slot)
                shown_run = slot.run_index
            for row in plate_map(session.plan, slot):
                con.print("  " + row, markup=False, highlight=False)
            con.print(f"  @ instrument, o stations of {slot.line}, north up", markup=False, highlight=False)
            con.print(f"Reading {slot.number} of {session.state.n_total}: {session.where(slot)}",
                      markup=False, highlight=False, soft_wrap=True)
            text = ask(f"reading {slot.number}/{session.state.n_total} [{session.unit}]> ").strip()
            key = text.lower()
            if not text:
                continue
            if key in ("q", "quit", "exit"):
                _stopped(session, command, "stopped")
                return
            if key in ("?", "h", "help"):
                con.print(_HELP_KEYS, markup=False, highlight=False)
                continue
            if key in ("u", "undo"):
                undone = session.undo()
                if undone is None:
                    con.print("  nothing to undo", markup=False, highlight=False)
                else:
                    con.print(f"  reading {undone.number} taken back ({session.where(undone)}); saved",
                              markup=False, highlight=False, soft_wrap=True)
                    shown_run = None
                continue
            if key in ("r", "re-read") or key.startswith("c"):
                if key.startswith("c") and key not in ("c",):
                    arg = key[1:].strip()
                    if not arg.isdigit():
                        con.print("  give the reading's number: c 12", markup=False, highlight=False)
                        continue
                    number = int(arg)
                elif key == "c":
                    con.print("  give the reading's number: c 12", markup=False, highlight=False)
                    continue
                else:
                    done = [n for n in session.state.history if session.state.value(n) is not None]
                    number = done[-1] if done else (slot.number - 1)
                    if number < 1:
                        con.print("  nothing to re-read yet", markup=False, highlight=False)
                        continue
                if not 1 <= number <= session.state.n_total or session.state.value(number) is None:
                    con.print(f"  reading {number} is not in yet", markup=False, highlight=False)
                    continue
                target = session.plan.slots[number - 1]
                old = session.state.value(number)
                con.print(f"  re-read reading {number} ({session.where(target)}), now {old:g} {session.unit}",
                          markup=False, highlight=False, soft_wrap=True)
                v = take_value(f"  new value for reading {number} (Enter keeps {old:g})> ")
                if v is None:
                    continue
                try:
                    findings = session.check(v, number=number)
                except ReadingRefused as exc:
                    con.print(f"  refused: {exc.message}; {exc.fix}", markup=False, highlight=False, soft_wrap=True)
                    continue
                if findings and not confirm(findings):
                    continue
                session.correct(number, v)
                con.print(f"  reading {number} is now {v:g} {session.unit}; saved", markup=False, highlight=False)
                continue
            v = _typed_number(text)
            if v is None:
                con.print(f"  {text!r} is neither a reading nor a key; type ? for help", markup=False,
                          highlight=False, soft_wrap=True)
                continue
            try:
                findings = session.check(v)
            except ReadingRefused as exc:
                con.print(f"  refused: {exc.message}; {exc.fix}", markup=False, highlight=False, soft_wrap=True)
                continue
            if findings and not confirm(findings):
                con.print("  not entered: read it again", markup=False, highlight=False)
                continue
            session.enter(v)
            con.print(f"  saved {v:g} {session.unit} as reading {slot.number}", markup=False, highlight=False)
    except EOFError:
        con.print()
        _stopped(session, command, "stopped")
        return
    except KeyboardInterrupt:
        con.print()
        _stopped(session, command, "interrupted")
        raise typer.Exit(130) from None
    _finish(session)
