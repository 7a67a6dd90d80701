"""``flatcheck register``: the register of surfaces, instruments and surveys (see docs/records.md).

Sub-commands: ``add`` (many survey files at once, on a process pool), ``history``, ``wear``,
``due``, ``surface``, ``instrument``, ``limits``, ``export`` and ``certificate``. The register's
place: ``--db``, else the ``FLATCHECK_DB`` environment variable, else
``flatcheck-register.sqlite`` in the current folder; it is created on first use by the
commands that write (``add``, ``surface``, ``instrument``, ``limits``).
"""

from __future__ import annotations

import os
import sys
from enum import Enum
from pathlib import Path

import typer
from rich.table import Table
from rich.text import Text

from ..errors import FlatcheckError, InputFormatError, InputValueError
from ._app import app
from .common import (
    check_option_ranges,
    Method,
    check_output,
    default_auto_trials,
    emit_json,
    jsonable,
    load_input,
    progress_bar,
    refuse_overwriting_inputs,
    stdout_console,
)

register_app = typer.Typer(
    name="register",
    help=(
        "The register of surfaces, instruments and surveys: add surveys, see a surface's history and wear, "
        "what is due for recalibration, export to a spreadsheet, issue certificate numbers. One SQLite file: "
        "--db, else $FLATCHECK_DB, else ./flatcheck-register.sqlite (created on first use)."
    ),
    no_args_is_help=True,
    add_completion=False,
    rich_markup_mode="rich",
)
app.add_typer(register_app, name="register")

#: Suffixes of the files ``register add`` takes from a folder.
FOLDER_SUFFIXES = (".toml", ".csv")


def _db_option():
    return typer.Option(
        None, "--db", help="Register file (default: $FLATCHECK_DB, else ./flatcheck-register.sqlite).",
    )


def _open(db: Path | None, *, write: bool, create: bool | None = None):
    """Open the register: for reading, or for writing (created on first use unless ``create=False``)."""
    from ..records import Register, register_path

    path = register_path(db)
    if path.exists() and not path.is_dir() and not path.is_file():  # opening a named pipe would wait for ever
        from ..errors import InputFormatError

        raise InputFormatError(f"{path} is not a regular file (a device, named pipe or socket), so not a register",
                             where="--db", fix="give the register's file with --db (or FLATCHECK_DB)")
    return Register.open(path, create=write if create is None else create, readonly=not write)


def _date_option(name: str, help: str):
    return typer.Option(None, name, help=help)


def _check_date(text: str | None, option: str) -> str | None:
    from ..io._csv_meta import parse_iso_date

    return None if text is None else parse_iso_date(text, where=option)


def _value_text(value_um, U_um) -> str:
    """A flatness with its U as a certificate states it (U to two significant digits)."""
    from ..records import round_to_uncertainty

    v, u = round_to_uncertainty(value_um, U_um)
    return f"{v} µm" if not u else f"{v} µm, U = {u} µm"


def _plain(text) -> Text:
    """User text, printed literally (no markup, no emoji codes)."""
    return Text("" if text is None else str(text))


# ============================================================================ add
class State(str, Enum):
    as_found = "as-found"
    as_left = "as-left"


def _expand(paths: list[Path]) -> list[Path]:
    """The files named: files as given, and the survey files (.toml, .csv) of each folder, sorted."""
    out = []
    for p in paths:
        if p.is_dir():
            found = sorted(f for f in p.iterdir() if f.is_file() and f.suffix.lower() in FOLDER_SUFFIXES)
            if not found:
                raise InputFormatError(f"the folder has no survey files ({', '.join(FOLDER_SUFFIXES)})", where=str(p),
                                       fix="give survey files or a folder that holds them")
            out.extend(found)
        else:
            out.append(p)
    return out


def _limit_threads() -> None:
    """Pool workers: one BLAS thread each, so that N workers use N cores and not N x N threads."""
    try:
        from threadpoolctl import threadpool_limits
    except ImportError:  # without it the workers still run, only with more threads than cores
        return
    threadpool_limits(1)


def _read_raw(path: Path) -> str | None:
    """The file's text for its content hash, or None when it cannot be read (the worker names the error)."""
    from ..io import read_text

    try:  # bounded, regular files only: a FIFO or /dev/zero named as a survey must not hang the register
        return read_text(path)
    except FlatcheckError:
        return None


def evaluate_file(path: str, options: dict):
    """Reduce and evaluate one file for the register (runs in a worker process).

    Returns ``("ok", SurveyEntry)`` or ``("error", message)`` for a file flatcheck refuses.
    """
    from .. import evaluate_surface
    from ..records import survey_entry

    try:
        p = Path(path)
        loaded = load_input(p, method=options["method"])
        from ..io import read_text

        raw = read_text(p)
        meta = None
        if loaded.survey is None:
            from ..io._csv_meta import read_csv_meta

            meta = read_csv_meta(p)
        notes = []
        mc = None
        if loaded.survey is not None or options["u_height_um"] is not None:
            trials = options["trials"] or default_auto_trials(loaded.heightmap.n)
            seed = options["seed"]
            if seed is None:  # reproducible: the same file gives the same U
                from ..records import text_sha256

                seed = int(text_sha256(raw)[:8], 16)
            mc = dict(trials=trials, seed=seed, u_height_um=options["u_height_um"])
        try:
            ev = evaluate_surface(loaded, monte_carlo=mc)
        except InputValueError as exc:
            if mc is None:
                raise
            ev = evaluate_surface(loaded)
            notes.append(f"no uncertainty: {exc.message}")
        if loaded.survey is None and options["u_height_um"] is None:
            notes.append("no uncertainty: a height map needs --u-height-um")
        entry = survey_entry(ev, raw, source_name=str(path), ident=options["ident"], measured_on=options["date"],
                             state=options["state"], instrument_ident=options["instrument"], meta=meta,
                             u_height_um=options["u_height_um"])
        if notes:
            import dataclasses

            entry = dataclasses.replace(entry, notes=tuple(notes))
        return "ok", entry
    except FlatcheckError as exc:
        where = exc.where or ""
        if str(path) not in where:
            exc = type(exc)(exc.message, where=f"{path}, {where}" if where else str(path), fix=exc.fix)
        return "error", exc.one_line()


def _added_json(r, path: str) -> dict:
    sought = next((v for v in r.verdicts if v.sought), None)
    return {
        "file": path, "survey_id": r.survey_id, "ident": r.ident, "date": r.measured_on, "state": r.state,
        "flatness_um": r.flatness_um, "expanded_uncertainty_um": r.expanded_uncertainty_um,
        "new_surface": r.new_surface, "instrument": r.instrument_ident,
        "verdict": None if sought is None else {"standard": sought.standard, "grade": sought.grade,
                                                "limit_um": sought.limit_um, "verdict": sought.verdict,
                                                "rule": sought.rule},
        "notes": list(r.notes),
    }


@register_app.command("add")
def add_cmd(
    paths: list[Path] = typer.Argument(..., help="Survey files (.toml) or height-map CSVs, or folders of them."),
    db: Path = _db_option(),
    state: State = typer.Option(State.as_found, "--state",
                                help="as-found (before any adjustment) or as-left (after lapping)."),
    instrument: str = typer.Option(None, "--instrument", help="Register ident of the instrument used."),
    ident: str = typer.Option(None, "--ident", help="Surface ident, when the files do not name it."),
    date: str = typer.Option(None, "--date", help="Date of the survey (YYYY-MM-DD), when the files do not state it."),
    method: Method = typer.Option(Method.least_squares, "--method", help="Reduction: least-squares or moody."),
    trials: int = typer.Option(None, "--trials", min=100,
                               help="Monte Carlo trials (default by survey size, as grade does)."),
    seed: int = typer.Option(None, "--seed", min=0, help="Monte Carlo seed (default: from the file's content)."),
    u_height_um: float = typer.Option(None, "--u-height-um", min=0.0,
                                      help="Height maps: standard uncertainty of each height, µm."),
    jobs: int = typer.Option(None, "--jobs", min=1, help="Worker processes (default: all cores)."),
    json_out: bool = typer.Option(False, "--json", help="Print one JSON object instead of the summary."),
) -> None:
    """Add surveys to the register: many files at once, reduced on all cores; a refused file is named and skipped."""
    from ..records import DuplicateSurveyError, register_path, text_sha256

    check_option_ranges([("--seed", seed, "seed", "the seed"), ("--trials", trials, "trials", "the number of trials"),
                         ("--jobs", jobs, "count", "the number of worker processes")])
    db_path = register_path(db)
    files = _expand(list(paths))
    refuse_overwriting_inputs({"--db": db_path}, files)
    _check_date(date, "--date")
    # an existing register is checked before any work; a new one is made with the first survey added,
    # so that a command that adds nothing leaves no empty register behind
    if db_path.exists():
        reg = _open(db, write=True)
    else:
        check_output(db_path, "--db")
        reg = None
    options = dict(method=method.value, trials=trials, seed=seed, u_height_um=u_height_um, ident=ident, date=date,
                   state=state.value, instrument=instrument)
    added, refused = [], []
    try:
        # the same survey twice (in the register, or in this batch) is refused before any work
        todo, seen = [], {}
        for f in files:
            raw = _read_raw(f)
            if raw is not None:
                sha = text_sha256(raw)
                old = None if reg is None else reg.find_hash(sha)
                if old is not None:
                    refused.append((str(f), DuplicateSurveyError(
                        f"this survey is already in the register as survey {old.survey_id} ({old.ident}, "
                        f"{old.measured_on}, added from {old.source_name})", where=str(f),
                        fix="nothing to add; a survey measured again is a new file with its own readings").one_line()))
                    continue
                if sha in seen:
                    refused.append((str(f), DuplicateSurveyError(
                        f"the same survey as {seen[sha]} in this batch", where=str(f),
                        fix="give each survey once").one_line()))
                    continue
                seen[sha] = str(f)
            todo.append(str(f))
        n_jobs = min(jobs or os.cpu_count() or 1, len(todo)) or 1
        results: dict[int, tuple] = {}
        next_k = 0

        def store_ready():
            nonlocal next_k, reg
            while next_k in results:  # add in the order given, as soon as each file's turn comes
                status, value = results.pop(next_k)
                path = todo[next_k]
                next_k += 1
                if status == "error":
                    refused.append((path, value))
                    continue
                if reg is None:
                    reg = _open(db, write=True)
                try:
                    r = reg.add_survey(value)
                except FlatcheckError as exc:
                    refused.append((path, exc.one_line()))
                    continue
                added.append((path, r))

        with progress_bar("Adding surveys", len(todo), enabled=len(todo) > 1) as advance:
            if n_jobs > 1:
                import multiprocessing
                from concurrent.futures import ProcessPoolExecutor, as_completed

                # workers start from a clean process ("forkserver" where the system has it, else "spawn"),
                # never as forks of this one, which holds the register's connection and a progress thread
                methods = multiprocessing.get_all_start_methods()
                ctx = multiprocessing.get_context("forkserver" if "forkserver" in methods else "spawn")
                with ProcessPoolExecutor(max_workers=n_jobs, mp_context=ctx, initializer=_limit_threads) as pool:
                    futures = {pool.submit(evaluate_file, f, options): k for k, f in enumerate(todo)}
                    try:
                        for fut in as_completed(futures):
                            results[futures[fut]] = fut.result()
                            advance(1)
                            store_ready()
                    except BaseException:  # a bug, an interrupt or a register error: stop, do not wait for the rest
                        pool.shutdown(wait=False, cancel_futures=True)
                        raise
            else:
                for k, f in enumerate(todo):
                    results[k] = evaluate_file(f, options)
                    advance(1)
                    store_ready()
    finally:
        if reg is not None:
            reg.close()
    for path, message in refused:
        sys.stderr.write(f"flatcheck: error: {message}\n")
    sys.stderr.flush()
    if json_out:
        emit_json({
            "register": str(db_path),
            "added": [_added_json(r, p) for p, r in added],
            "refused": [{"file": p, "error": m} for p, m in refused],
        })
    else:
        _render_added(db_path, added, refused)
    if refused:
        raise typer.Exit(code=2)


def _render_added(db_path: Path, added, refused) -> None:
    con = stdout_console()
    con.print(_plain(f"register: {db_path}"))
    notes: dict[str, list] = {}
    for path, r in added:
        line = Text(f"added survey {r.survey_id}: ")
        line.append(f"{r.ident} {r.measured_on} {r.state}, flatness {_value_text(r.flatness_um, r.expanded_uncertainty_um)}")
        line.append(f"  ({path})")
        con.print(line)
        sought = next((v for v in r.verdicts if v.sought), None)
        if sought is not None:
            con.print(_plain(f"  {sought.standard} grade {sought.grade} (limit {sought.limit_um:.3g} µm): "
                             f"{sought.verdict}"))
        for n in r.notes:
            notes.setdefault(n, []).append(str(r.survey_id))
    new = [r.ident for _, r in added if r.new_surface]
    if new:
        con.print(_plain(f"new surface{'s' if len(new) > 1 else ''} in the register: {', '.join(new)}; set the "
                         "calibration interval and the grade sought with 'flatcheck register surface IDENT "
                         "--interval-months 12 --standard ... --grade ...'"))
    for n, ids in notes.items():
        con.print(_plain(f"note (survey{'s' if len(ids) > 1 else ''} {', '.join(ids)}): {n}"))
    con.print(_plain(f"{len(added)} added, {len(refused)} refused"))


# ============================================================================ history
def _history_json(h) -> list:
    return [
        {"survey_id": p.survey_id, "date": p.date, "state": p.state, "flatness_um": p.flatness_um,
         "expanded_uncertainty_um": p.expanded_uncertainty_um, "standard_uncertainty_um": p.standard_uncertainty_um,
         "instrument": p.instrument_ident, "instrument_in_calibration": p.in_calibration, "file": p.source_name}
        for p in h.points
    ]


@register_app.command("history")
def history_cmd(
    ident: str = typer.Argument(..., help="Surface ident."),
    db: Path = _db_option(),
    json_out: bool = typer.Option(False, "--json", help="Print the surveys as a JSON list, in date order."),
    plot: Path = typer.Option(None, "--plot", help="Write a PNG of flatness with U over time."),
) -> None:
    """A surface's flatness with U over time, its wear rate and when it leaves its grade."""
    from ..records import register_path, surface_history

    refuse_overwriting_inputs({"--plot": plot}, [register_path(db)])
    check_output(plot, "--plot")
    with _open(db, write=False) as reg:
        h = surface_history(reg, ident)
    if plot is not None:
        if not h.points:
            raise InputValueError(f"surface {ident} has no survey to plot", where="--plot", fix="add its surveys first")
        from ..output._history_plot import history_figure, save_figure_png

        save_figure_png(history_figure(h), plot)
    if json_out:
        emit_json(_history_json(h))
        return
    con = stdout_console()
    s = h.surface
    con.print(_plain(f"{s.ident}  {s.description}".rstrip()))
    if not h.points:
        con.print("  no surveys yet")
    t = Table(title="Surveys (flatness: minimum zone; U: expanded uncertainty, about 95 %)", title_justify="left")
    for col, just in (("no.", "right"), ("date", "left"), ("state", "left"), ("flatness µm", "right"),
                      ("U µm", "right"), ("instrument", "left"), ("file", "left")):
        t.add_column(col, justify=just, no_wrap=col in ("date", "state"), overflow="fold")
    from ..records import round_to_uncertainty

    for p in h.points:
        v, u = round_to_uncertainty(p.flatness_um, p.expanded_uncertainty_um)
        inst = (p.instrument_ident or "-") + (" *" if p.in_calibration is False else "")
        t.add_row(str(p.survey_id), p.date, p.state, v, u or "-", _plain(inst), _plain(Path(p.source_name).name))
    if h.points:
        con.print(t)
    for p in h.points:
        if p.in_calibration is False:
            con.print(_plain(f"  * survey {p.survey_id} was made with {p.instrument_ident} out of calibration "
                             "(see 'flatcheck register due')"))
    r = h.rate
    if r is not None:
        u = "" if r.u_rate_um_per_year is None else f" ± {r.u_rate_um_per_year:.2g} (standard uncertainty)"
        state = "established" if r.established else "not established (within twice its uncertainty of zero)"
        con.print(_plain(f"  rate of change: {r.rate_um_per_year:+.2g} µm/year{u} over {r.n} surveys "
                         f"{r.since} to {r.until}; {state}"))
    if h.forecast is not None:
        con.print(_plain(f"  forecast: {h.forecast.text}"))
    for n in h.notes:
        con.print(_plain(f"  note: {n}"))
    if plot is not None:
        con.print(_plain(f"  plot written to {plot}"))


# ============================================================================ wear
@register_app.command("wear")
def wear_cmd(
    ident: str = typer.Argument(..., help="Surface ident."),
    db: Path = _db_option(),
    before: str = typer.Option(None, "--from", help="Earlier survey: its number or date (default: the last but one)."),
    after: str = typer.Option(None, "--to", help="Later survey: its number or date (default: the last)."),
    json_out: bool = typer.Option(False, "--json", help="Print one JSON object instead of the summary."),
    plot: Path = typer.Option(None, "--plot", help="Write a PNG of the change map."),
) -> None:
    """Where a surface wears: the change of each station's height between two surveys, and the rate."""
    from ..records import register_path, surface_history, survey_height_step_um, survey_wear
    from ..units import format_height

    refuse_overwriting_inputs({"--plot": plot}, [register_path(db)])
    check_output(plot, "--plot")
    with _open(db, write=False) as reg:
        w = survey_wear(reg, ident, before, after)
        h = surface_history(reg, ident)
        # a change is known no finer than the coarser of the two surveys resolves
        steps = [survey_height_step_um(reg, i) for i in (w.before_id, w.after_id)]
    step = max((s for s in steps if s is not None), default=None)

    def hn(v):
        return format_height(v, "um", unit=False, step_um=step)

    def signed(v):
        text = hn(v)
        return text if text.startswith("-") else "+" + text
    if plot is not None:
        from ..output._history_plot import save_figure_png, wear_figure

        save_figure_png(wear_figure(w), plot)
    worst = w.worst
    per_year = (w.change_um[worst] / w.years) if w.years > 0 else None
    doc = {
        "ident": ident,
        "from": {"survey_id": w.before_id, "date": w.before_date},
        "to": {"survey_id": w.after_id, "date": w.after_date},
        "years": w.years,
        "matched_by": w.matched_by,
        "stations": [
            {"name": None if w.names is None else w.names[i], "x_mm": float(w.x_mm[i]), "y_mm": float(w.y_mm[i]),
             "change_um": float(w.change_um[i])}
            for i in range(w.x_mm.size)
        ],
        "range_um": w.range_um,
        "rms_um": w.rms_um,
        "most_worn": {"name": None if w.names is None else w.names[worst], "x_mm": float(w.x_mm[worst]),
                      "y_mm": float(w.y_mm[worst]), "change_um": float(w.change_um[worst]),
                      "change_um_per_year": per_year},
        "rate": None if h.rate is None else {
            "rate_um_per_year": h.rate.rate_um_per_year, "u_rate_um_per_year": h.rate.u_rate_um_per_year,
            "surveys": h.rate.n, "since": h.rate.since, "until": h.rate.until, "established": h.rate.established,
        },
        "forecast": None if h.forecast is None else {
            "standard": h.forecast.standard, "grade": h.forecast.grade, "limit_um": h.forecast.limit_um,
            "reaches_limit_on": h.forecast.reaches_limit_on, "unproven_from": h.forecast.unproven_from,
            "text": h.forecast.text,
        },
        "notes": list(h.notes),
    }
    if any(p.state == "as-left" and w.before_date < p.date <= w.after_date for p in h.points):
        doc["notes"].insert(0, "an as-left survey (after an adjustment) lies in this span: the change includes what "
                            "the adjustment removed, not only wear")
    if json_out:
        emit_json(doc)
        return
    con = stdout_console()
    con.print(_plain(f"{ident}: change of height from survey {w.before_id} ({w.before_date}) to survey {w.after_id} "
                     f"({w.after_date}), {w.years:.2f} years; stations paired by {w.matched_by}"))
    con.print(_plain(f"  about the plane of the change: range {hn(w.range_um)} µm, RMS {hn(w.rms_um)} µm"))
    con.print(_plain(f"  most worn: {w.label(worst)}, {signed(w.change_um[worst])} µm"
                     + (f" ({per_year:+.2g} µm/year)" if per_year is not None else "")))
    t = Table(title="Stations that went down most (µm)", title_justify="left")
    for col, just in (("station", "left"), ("x mm", "right"), ("y mm", "right"), ("change", "right")):
        t.add_column(col, justify=just)
    import numpy as np

    for i in np.argsort(w.change_um)[:10]:
        t.add_row(_plain("-" if w.names is None else w.names[i]), f"{w.x_mm[i]:g}", f"{w.y_mm[i]:g}",
                  signed(w.change_um[i]))
    con.print(t)
    if h.rate is not None:
        con.print(_plain(f"  flatness rate: {h.rate.rate_um_per_year:+.2g} µm/year over {h.rate.n} surveys"))
    if h.forecast is not None:
        con.print(_plain(f"  forecast: {h.forecast.text}"))
    for n in doc["notes"]:
        con.print(_plain(f"  note: {n}"))
    if plot is not None:
        con.print(_plain(f"  plot written to {plot}"))


# ============================================================================ due
@register_app.command("due")
def due_cmd(
    db: Path = _db_option(),
    on: str = typer.Option(None, "--on", help="The day to judge on (YYYY-MM-DD; default today)."),
    within_days: int = typer.Option(30, "--within-days", min=0, help="Days ahead that count as due."),
    show_all: bool = typer.Option(False, "--all", help="List items not due yet too."),
    json_out: bool = typer.Option(False, "--json", help="Print one JSON object instead of the summary."),
) -> None:
    """What is due or overdue for recalibration (surfaces and instruments), and surveys made out of calibration."""
    from ..records import due_list

    on = _check_date(on, "--on")
    with _open(db, write=False) as reg:
        check_option_ranges([("--within-days", within_days, "days", "the days ahead")])
        d = due_list(reg, on=on, within_days=within_days, include_ok=show_all)
    if json_out:
        emit_json({
            "on": d.on, "within_days": d.within_days,
            "items": [jsonable(i) for i in d.items],
            "out_of_calibration_surveys": [jsonable(f) for f in d.flagged],
            "unlinked_surveys": d.unlinked_surveys,
        })
        return
    con = stdout_console()
    con.print(_plain(f"Due on {d.on} (within {d.within_days} days):"))
    if not d.items:
        con.print("  nothing is due")
    else:
        t = Table()
        t.add_column("status", no_wrap=True)
        t.add_column("kind")
        t.add_column("ident", overflow="fold")
        t.add_column("due", no_wrap=True)
        t.add_column("last", no_wrap=True)
        t.add_column("interval")
        t.add_column("location", overflow="fold")
        for i in d.items:
            status = i.status if i.days_left is None else f"{i.status} ({i.days_left:+d} d)"
            t.add_row(status, i.kind, _plain(i.ident), i.due_date or "-", i.last_date or "-", i.interval or "-",
                      _plain(i.location or "-"))
        con.print(t)
    for f in d.flagged:
        con.print(_plain(f"  out of calibration: survey {f.survey_id} of {f.ident} on {f.date}: {f.reason}"))
    if d.unlinked_surveys:
        con.print(_plain(f"  {d.unlinked_surveys} survey(s) name no registered instrument, so their instrument's "
                         "calibration is not checked"))


# ============================================================================ surface, instrument
def _surface_json(s, new: bool | None = None) -> dict:
    d = jsonable(s)
    d["interval"] = s.interval_text
    if new is not None:
        d["new"] = new
    return d


def _render_record(title: str, fields: list[tuple[str, object]]) -> None:
    con = stdout_console()
    t = Table(title=Text(title), title_justify="left", show_header=False)
    t.add_column("field")
    t.add_column("value")
    for k, v in fields:
        t.add_row(k, _plain("-" if v in (None, "") else v))
    con.print(t)


@register_app.command("surface")
def surface_cmd(
    ident: str = typer.Argument(..., help="Surface ident (serial or asset number)."),
    db: Path = _db_option(),
    kind: str = typer.Option(None, "--kind", help="e.g. 'surface plate', 'guideway', 'air-bearing pad'."),
    description: str = typer.Option(None, "--description"),
    length_mm: float = typer.Option(None, "--length-mm", help="Length (x) of the surface, mm."),
    width_mm: float = typer.Option(None, "--width-mm", help="Width (y) of the surface, mm."),
    material: str = typer.Option(None, "--material"),
    standard: str = typer.Option(None, "--standard", help="Standard of the grade sought, as the limits table names it."),
    grade: str = typer.Option(None, "--grade", help="Grade sought, as the standard names it (e.g. 00, AA)."),
    location: str = typer.Option(None, "--location", help="Where the surface stands."),
    owner: str = typer.Option(None, "--owner", help="Owner (the customer on certificates)."),
    interval_months: int = typer.Option(None, "--interval-months", min=1, help="Calibration interval in months."),
    interval_days: int = typer.Option(None, "--interval-days", min=1, help="Calibration interval in days."),
    json_out: bool = typer.Option(False, "--json", help="Print one JSON object."),
) -> None:
    """Add a surface or change its record (with no options: show it)."""
    check_option_ranges([  # docs/limits.md, named as typed, before the register is opened
        ("--length-mm", length_mm, "length_mm", "the length"), ("--width-mm", width_mm, "length_mm", "the width"),
        ("--interval-months", interval_months, "interval_months", "the calibration interval"),
        ("--interval-days", interval_days, "days", "the calibration interval"),
    ])
    fields = dict(kind=kind, description=description, length_mm=length_mm, width_mm=width_mm, material=material,
                  standard=standard, grade=grade, location=location, owner=owner, interval_months=interval_months,
                  interval_days=interval_days)
    changing = any(v is not None for v in fields.values())
    notes = []
    with _open(db, write=changing) as reg:
        if changing:
            cur = reg.limits()
            if cur is not None and (standard is not None or grade is not None):
                # names as the limits table writes them, so that certificates print the standard's own spelling
                old = reg.surface(ident)
                std = standard if standard is not None else (old.standard if old is not None else "")
                try:
                    table = cur[1].table(std) if std else None
                    if table is not None:
                        fields["standard"] = table.standard if standard is not None else None
                        g = grade if grade is not None else (old.grade if old is not None else "")
                        if g:
                            fields["grade"] = table.grade_name(g) if grade is not None else None
                except InputValueError as exc:
                    notes.append(f"{exc.message}; verdicts need it")
            s, new = reg.set_surface(ident, **fields)
        else:
            s, new = reg.require_surface(ident), None
    if json_out:
        d = _surface_json(s, new)
        d["notes"] = notes
        emit_json(d)
        return
    title = f"Surface {s.ident}" + (" (new)" if new else "")
    _render_record(title, [("kind", s.kind), ("description", s.description),
                           ("size", None if s.length_mm is None else f"{s.length_mm:g} x {s.width_mm:g} mm"),
                           ("material", s.material), ("standard", s.standard), ("grade sought", s.grade),
                           ("location", s.location), ("owner", s.owner), ("interval", s.interval_text)])
    for n in notes:
        stdout_console().print(_plain(f"  note: {n}"))


@register_app.command("instrument")
def instrument_cmd(
    ident: str = typer.Argument(..., help="Instrument ident (asset number)."),
    db: Path = _db_option(),
    kind: str = typer.Option(None, "--kind", help="e.g. autocollimator, level, indicator."),
    model: str = typer.Option(None, "--model"),
    serial: str = typer.Option(None, "--serial"),
    interval_months: int = typer.Option(None, "--interval-months", min=1,
                                        help="Calibration interval in months (gives --due from --calibrated)."),
    calibrated: str = typer.Option(None, "--calibrated", help="Date of a new calibration (YYYY-MM-DD)."),
    due: str = typer.Option(None, "--due", help="Its due date (YYYY-MM-DD); default --calibrated + the interval."),
    certificate: str = typer.Option("", "--certificate", help="Reference of the calibration certificate."),
    traceability: str = typer.Option("", "--traceability",
                                     help="Traceability of the calibration (the lab and its standard)."),
    json_out: bool = typer.Option(False, "--json", help="Print one JSON object."),
) -> None:
    """Add an instrument, change its record or record a calibration (with no options: show it)."""
    from ..records import Calibration, add_interval, register_path

    calibrated = _check_date(calibrated, "--calibrated")
    due = _check_date(due, "--due")
    if due is not None and calibrated is None:
        raise InputValueError("--due needs --calibrated", where="--due", fix="give the calibration date too")
    if due is not None and due <= calibrated:
        raise InputValueError(f"the due date {due} is not after the calibration date {calibrated}", where="--due",
                              fix="give the due date from the calibration certificate (or --interval-months)")
    if (certificate or traceability) and calibrated is None:
        raise InputValueError("--certificate and --traceability belong to a calibration", where="--certificate",
                              fix="give --calibrated (and --due) with them")
    check_option_ranges([("--interval-months", interval_months, "interval_months", "the calibration interval")])
    changing = any(v is not None for v in (kind, model, serial, interval_months, calibrated))
    if calibrated is not None and due is None and interval_months is None and not register_path(db).exists():
        raise InputValueError("no due date for the calibration", where="--calibrated",
                              fix="give --due, or --interval-months")
    with _open(db, write=changing) as reg:
        if changing:
            cal = None
            if calibrated is not None:
                if due is None:
                    old = reg.instrument(ident)
                    months = interval_months or (old.interval_months if old is not None else None)
                    if not months:
                        raise InputValueError("no due date for the calibration", where="--calibrated",
                                              fix="give --due, or --interval-months")
                    due = add_interval(calibrated, months=months)
                cal = Calibration(calibrated, due, certificate, traceability)
            i, new = reg.set_instrument(ident, kind=kind, model=model, serial=serial, interval_months=interval_months,
                                        calibration=cal)
        else:
            i, new = reg.instrument(ident), None
            if i is None:
                raise InputValueError(f"the register has no instrument {ident!r}", where=str(reg.path),
                                      fix=f"add it with 'flatcheck register instrument {ident} --kind ...'")
    if json_out:
        d = jsonable(i)
        if new is not None:
            d["new"] = new
        emit_json(d)
        return
    last = i.latest
    _render_record(f"Instrument {i.ident}" + (" (new)" if new else ""), [
        ("kind", i.kind), ("model", i.model), ("serial", i.serial),
        ("interval", f"{i.interval_months} months" if i.interval_months else ""),
        ("last calibration", None if last is None else f"{last.calibrated_on}, due {last.due_on}"),
        ("certificate", None if last is None else last.certificate_ref),
        ("traceability", None if last is None else last.traceability),
    ])


# ============================================================================ limits
@register_app.command("limits")
def limits_cmd(
    file: Path = typer.Argument(None, help="The lab's limits table (TOML); without it: show the current one."),
    db: Path = _db_option(),
    json_out: bool = typer.Option(False, "--json", help="Print one JSON object."),
) -> None:
    """Give the register the lab's limits table (a new version), or show the current one."""
    from ..records import read_limits, register_path

    if file is not None:
        refuse_overwriting_inputs({"--db": register_path(db)}, [file])
        lim = read_limits(file)
        with _open(db, write=True) as reg:
            lid, new = reg.add_limits(lim)
    else:
        with _open(db, write=False) as reg:
            cur = reg.limits()
        if cur is None:
            raise InputValueError("the register has no limits table yet", where="limits",
                                  fix="give the lab's limits table: 'flatcheck register limits FILE'")
        (lid, lim), new = cur, False
    doc = {"limits_id": lid, "new": new, "sha256": lim.sha256, "lab": lim.lab,
           "tables": [{"standard": t.standard, "source": t.source, "grades": list(t.grades), "unit": t.unit}
                      for t in lim.tables]}
    if json_out:
        emit_json(doc)
        return
    con = stdout_console()
    head = "stored as limits version" if file is not None and new else "current limits version"
    con.print(_plain(f"{head} {lid} ({lim.sha256[:12]})"))
    for t in lim.tables:
        con.print(_plain(f"  {t.standard}: grades {', '.join(t.grades)}; source: {t.source}"))


# ============================================================================ export
class ExportTable(str, Enum):
    results = "results"
    stations = "stations"
    readings = "readings"


@register_app.command("export")
def export_cmd(
    out: Path = typer.Argument(..., help="CSV file to write."),
    db: Path = _db_option(),
    table: ExportTable = typer.Option(ExportTable.results, "--table",
                                      help="results (one row per survey), stations or readings."),
    ident: str = typer.Option(None, "--ident", help="Only this surface."),
) -> None:
    """Export results, station heights or readings as a spreadsheet-friendly CSV file."""
    from ..io._export_csv import write_export_csv
    from ..records import register_path

    refuse_overwriting_inputs({"OUT": out}, [register_path(db)])
    check_output(out, "OUT")
    with _open(db, write=False) as reg:
        rows = reg.export_rows(table.value, ident)
    write_export_csv(out, table.value, rows)
    stdout_console().print(_plain(f"{len(rows)} row(s) of {table.value} written to {out}"))


# ============================================================================ certificate
@register_app.command("certificate")
def certificate_cmd(
    ident: str = typer.Argument(..., help="Surface ident."),
    db: Path = _db_option(),
    survey: str = typer.Option(None, "--survey", help="The survey: its number or date (default: the last)."),
    prefix: str = typer.Option(None, "--prefix",
                               help="Certificate-number prefix, e.g. KY (remembered by the register)."),
    lab: str = typer.Option(None, "--lab", help="The lab's name (remembered by the register)."),
    issued: str = typer.Option(None, "--issued", help="Day of issue (YYYY-MM-DD; default today)."),
    json_out: bool = typer.Option(False, "--json", help="Print one JSON object."),
) -> None:
    """Issue a certificate number for a survey and show the certificate's content (PDF: 'flatcheck report --db')."""
    from ..records import certificate_data, check_prefix

    issued = _check_date(issued, "--issued")
    if prefix is not None:
        prefix = check_prefix(prefix)
    with _open(db, write=True, create=False) as reg:
        reg.require_surface(ident)
        if survey is None:
            rows = reg.surveys_of(ident)
            if not rows:
                raise InputValueError(f"surface {ident} has no survey", where=str(reg.path), fix="add its survey first")
            row = rows[-1]
        else:
            row = reg.find_survey(ident, survey)
        if prefix is not None and reg.setting("certificate_prefix") != prefix:
            reg.set_setting("certificate_prefix", prefix)
        if lab is not None and reg.setting("lab") != lab:
            reg.set_setting("lab", lab)
        c = certificate_data(reg, row.survey_id, prefix=prefix, issued_on=issued, lab=lab)
    if json_out:
        emit_json(jsonable(c))
        return
    _render_certificate(c)


def _render_certificate(c) -> None:
    con = stdout_console()
    con.print(_plain(f"Certificate {c.number}, issued {c.issued_on}" + (f" by {c.lab}" if c.lab else "")))
    size = "" if c.length_mm is None else f", {c.length_mm:g} x {c.width_mm:g} mm"
    con.print(_plain(f"  surface: {c.surface_ident} {c.surface_description}{size}".rstrip()))
    con.print(_plain(f"  customer: {c.customer or '-'}; location: {c.location or '-'}"))
    for i in c.instruments:
        cal = f"calibrated {i.calibrated_on}, due {i.due_on}, certificate {i.certificate_ref or '-'}, " \
              f"traceability: {i.traceability or '-'}" if i.in_calibration else i.note
        con.print(_plain(f"  instrument: {i.ident or '-'} ({i.description}); {cal}"))
    con.print(_plain(f"  method: {c.method}"))
    for label, r in (("as found", c.as_found), ("as left", c.as_left)):
        if r is None:
            text = "not recorded" if label == "as found" else "no adjustment recorded: left as found"
        else:
            text = f"{r.date} (survey {r.survey_id}): flatness {r.flatness_text} µm" + \
                (f", U = {r.uncertainty_text} µm" if r.uncertainty_text else "")
            if r.verdict is not None:
                text += f"; {r.verdict.standard} grade {r.verdict.grade}: {r.verdict.verdict}"
        con.print(_plain(f"  {label}: {text}"))
    for s in c.limits_sources:
        con.print(_plain(f"  limits from: {s}"))
    con.print(_plain(f"  station heights: {len(c.stations)} (about the {c.height_reference}); raw readings: "
                     f"{len(c.readings)} (in {c.reading_unit or '-'})"))
    con.print(_plain(f"  next due: {c.next_due_on or 'no calibration interval set'}"))
    con.print(_plain(f"  measured by: {c.measured_by or '-'}; approved by: ____________"))
    for n in c.notes:
        con.print(_plain(f"  note: {n}"))
