"""Helpers shared by the commands: consoles, JSON output, progress bars, input loading."""

from __future__ import annotations

import math
import os
import sys
from contextlib import contextmanager
from enum import Enum
from pathlib import Path


from typing import TYPE_CHECKING

from ..errors import OutputError
from ..evaluation._trials import DEFAULT_TRIALS, default_trials as default_auto_trials  # noqa: F401  (light: no numpy)
from ..safety import SAFETY_LINES as _SAFETY_LINES

__all__ = [
    "Units",
    "Interp",
    "Method",
    "Rule",
    "stdout_console",
    "stderr_console",
    "emit_json",
    "jsonable",
    "progress_bar",
    "load_input",
    "refuse_overwriting_inputs",
    "window_option",
    "check_option_ranges",
    "refuse_unused",
    "units_option",
    "trials_option",
    "seed_option",
    "u_height_option",
    "uncertainty_defaults_option",
    "load_lab_defaults",
    "DEFAULT_TRIALS",
    "auto_trials_option",
    "default_auto_trials",
    "SAFETY_LINES",
]


class Method(str, Enum):
    """How a survey is reduced (``--method``)."""

    least_squares = "least-squares"
    moody = "moody"


class Rule(str, Enum):
    """The decision rule of a grade (``--rule``)."""

    iso14253 = "iso14253"
    simple = "simple"


#: Help of the air-bearing target options, shared by the commands that take a target (lap, compare, report).
TARGET_GAP_HELP = "Target: the air-bearing limit for this gap in µm (a fraction of it, see --gap-fraction)."
GAP_FRACTION_HELP = "With --target-gap-um: the fraction of the gap (default 0.25, common practice)."


class Interp(str, Enum):
    """Interpolation between surveyed stations (``--interp``)."""

    linear = "linear"
    cubic = "cubic"


class Units(str, Enum):
    """Display units: micrometres or inches (heights then in µin)."""

    um = "um"
    inch = "in"


if TYPE_CHECKING:  # annotations only
    from rich.console import Console


#: Width given to the console when standard output is not a terminal (a pipe, a file, a test): no wrapping
#: mid-sentence at 80 columns, and tables as wide as their contents (issue 15, item 9).
NO_TERMINAL_WIDTH = 10_000


def stdout_console() -> Console:
    """Console on standard output (summaries).

    On a terminal, text wraps at the terminal's width. Written to a pipe or a file, nothing is wrapped (whatever
    ``COLUMNS`` says): long lines stay whole and tables take the width their contents need.
    """
    from rich.console import Console

    if _is_terminal(sys.stdout):
        return Console(file=sys.stdout, highlight=False, soft_wrap=False)
    return Console(file=sys.stdout, highlight=False, soft_wrap=True, width=NO_TERMINAL_WIDTH)


def _is_terminal(stream) -> bool:
    try:
        return bool(stream.isatty())
    except (AttributeError, ValueError):  # a closed or replaced stream
        return False


def stderr_console() -> Console:
    """Console on standard error (progress, warnings)."""
    from rich.console import Console

    return Console(file=sys.stderr, highlight=False)


def jsonable(obj):
    """Convert numpy scalars/arrays, dataclasses, tuples and non-finite floats for JSON.

    NaN and infinities become ``null``: JSON has no such numbers.
    """
    import numpy as np

    import dataclasses

    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        return {f.name: jsonable(getattr(obj, f.name)) for f in dataclasses.fields(obj) if not f.name.startswith("_")}
    if isinstance(obj, dict):
        return {str(k): jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)) or type(obj).__name__ == "JsonRows":  # rows held as columns (cli._json)
        return [jsonable(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return jsonable(obj.tolist())
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, (np.floating, float)):
        v = float(obj)
        return v if math.isfinite(v) else None
    if isinstance(obj, (np.bool_,)):
        return bool(obj)
    if isinstance(obj, Enum):
        return obj.value
    if isinstance(obj, Path):
        return str(obj)
    return obj


def emit_json(obj) -> None:
    """Print exactly one JSON object on standard output.

    The text is that of ``json.dumps(jsonable(obj), indent=2, ensure_ascii=False)``, made by
    :mod:`flatcheck.cli._json`: long lists of numbers and records go through the C encoder in
    blocks, with no Python step per element. It is complete before anything is written, so an
    error never leaves half a document on standard output.
    """
    from ._json import write_json

    parts = []
    write_json(obj, parts.append)
    parts.append("\n")
    sys.stdout.writelines(parts)
    sys.stdout.flush()


@contextmanager
def progress_bar(description: str, total: int, *, enabled: bool = True):
    """A rich progress bar on standard error; yields ``advance(n)``.

    Disabled (a no-op) when ``enabled`` is false, e.g. for small jobs, and when
    standard error is not a terminal.
    """
    if not enabled or not sys.stderr.isatty():
        # no terminal (a pipe, a log file, a test): a bar would only leave blank lines behind
        yield lambda n=1: None
        return
    from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn, TimeRemainingColumn

    prog = Progress(
        TextColumn("{task.description}"),
        BarColumn(),
        TextColumn("{task.percentage:>3.0f}%"),
        TimeElapsedColumn(),
        TimeRemainingColumn(),
        console=stderr_console(),
        transient=True,
    )
    task = prog.add_task(description, total=total)
    started = False

    def advance(n=1):
        # The bar appears with the first progress, so an error raised before any work
        # leaves nothing behind on the terminal but its one-line message.
        nonlocal started
        if not started:
            prog.start()
            started = True
        prog.advance(task, n)

    try:
        yield advance
    finally:
        if started:
            prog.stop()


class ScanProgress:
    """A progress bar for a scan whose size the core finds out (``start(total)``, then ``advance(k)`` calls).

    Shown only on a terminal and only for scans of at least ``least`` steps, so quick scans leave no trace;
    ``close()`` clears it (also when the scan fails).
    """

    def __init__(self, description: str, *, least: int = 5000):
        self.description, self.least = description, int(least)
        self._cm = None
        self._advance = None

    def start(self, total: int) -> None:
        if total >= self.least and sys.stderr.isatty():
            self._cm = progress_bar(self.description, int(total))
            self._advance = self._cm.__enter__()

    def __call__(self, k: int = 1) -> None:
        if self._advance is not None:
            self._advance(k)

    def close(self) -> None:
        if self._cm is not None:
            self._cm.__exit__(None, None, None)
            self._cm = self._advance = None


#: Library wording -> the command line's, in the fixes of errors raised by the core.
_CLI_WORDS = {"method 'least-squares'": "--method least-squares", "method 'moody'": "--method moody"}


def load_input(path: Path, *, method: str = "least-squares"):
    """Open a surface file with :func:`flatcheck.open_surface`, its fixes in the command line's words.

    Returns
    -------
    flatcheck.MeasuredSurface
    """
    from ..errors import FlatcheckError
    from ..io import open_surface

    try:
        return open_surface(path, method=method)
    except FlatcheckError as exc:
        fix = exc.fix
        if fix and any(lib in fix for lib in _CLI_WORDS):
            for lib, cli in _CLI_WORDS.items():
                fix = fix.replace(lib, cli)
            raise type(exc)(exc.message, where=exc.where, fix=fix) from None
        raise


def check_output(path: Path | None, option: str) -> None:
    """Refuse, before any work, an output path whose folder is missing, which is a folder, a device, a named
    pipe or a socket, or a file made read-only."""
    if path is None:
        return
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise OutputError(
            f"cannot write {path}: folder {folder} does not exist", where=option, fix="create the folder or choose another path"
        )
    if path.is_dir():
        raise OutputError(f"cannot write {path}: it is a folder", where=option, fix="give a file name")
    if path.exists() and not path.is_file():
        raise OutputError(f"cannot write {path}: it is not a regular file (a device, named pipe or socket)",
                          where=option, fix="give the path of a file")
    if path.is_file() and not os.stat(path).st_mode & 0o222:
        # the file was made read-only on purpose (a kept result): the atomic move would replace it all the same
        raise OutputError(f"cannot write {path}: the file is read-only", where=option,
                          fix="choose another path, or make the file writable first if it may be replaced")


def _same_file(a: Path, b: Path) -> bool:
    """True when ``a`` and ``b`` name one file: same resolved path, or (both existing) the same inode."""
    try:
        if a.resolve() == b.resolve():
            return True
    except (OSError, RuntimeError):  # a loop of symbolic links (Python 3.11 raises RuntimeError): compare as written
        if os.path.abspath(a) == os.path.abspath(b):
            return True
    if a.exists() and b.exists():
        try:
            return os.path.samefile(a, b)  # hard links, bind mounts, case-insensitive file systems
        except OSError:
            return False
    return False


def refuse_overwriting_inputs(outputs: dict[str, Path | None], inputs: list[Path | None]) -> None:
    """Refuse an output path that names an input file (or another output), before any work.

    Every command that reads files and writes others calls this first, so that a slip such as
    ``flatcheck reduce p3.toml --map-out p3.toml`` can never replace a survey with its result.
    Paths are compared after resolving symbolic links and ``..``, and with :func:`os.path.samefile`
    when both exist (hard links, case-insensitive file systems).

    Parameters
    ----------
    outputs : dict of str to Path or None
        Output option as typed on the command line (e.g. ``"--map-out"``) -> its path; None
        (option not given) is skipped.
    inputs : list of Path or None
        The input files of the command; None entries are skipped.

    Raises
    ------
    OutputError
        Naming the option and the file, with the fix "choose another path".
    """
    given_inputs = [Path(p) for p in inputs if p is not None]
    seen: list[tuple[str, Path]] = []
    for option, out in outputs.items():
        if out is None:
            continue
        out = Path(out)
        for inp in given_inputs:
            if _same_file(out, inp):
                raise OutputError(
                    f"{out} is an input file of this command; writing it would destroy the input",
                    where=option,
                    fix=f"choose another path for {option}",
                )
        for other_option, other in seen:
            if _same_file(out, other):
                raise OutputError(
                    f"{out} is also given to {other_option}; one output would replace the other",
                    where=option,
                    fix=f"choose another path for {option}",
                )
        seen.append((option, out))


def check_option_ranges(options) -> None:
    """Refuse, before any work, an option outside its range of docs/limits.md, named as it was typed.

    Parameters
    ----------
    options : iterable of (str, value, str, str)
        ``(option, value, kind, what)``: the option as typed (``"--supply-kpa"``), its value (None when not
        given: skipped), the key of :data:`flatcheck.limits.LIMITS`, and what the value is, in words.
    """
    from ..limits import check_range

    for option, value, kind, what in options:
        if value is not None:
            check_range(value, kind, where=option, name=what)


def refuse_unused(options: dict, *, why: str, fix: str) -> None:
    """Refuse the first option given (value not None) that would have no effect, so that nobody believes it
    was applied: ``options`` maps the option as typed to its value; ``why`` says what it lacks."""
    for option, value in options.items():
        if value is not None:
            from ..errors import InputValueError

            raise InputValueError(f"this option has no effect {why}", where=option, fix=fix)


def window_option():
    """The ``--window`` option of local flatness."""
    import typer

    return typer.Option(
        "auto",
        "--window",
        help="Local-flatness window in mm: LxW (e.g. 250x250) or dD for a circle (e.g. d80); "
        "'auto' = 250x250 where it fits; 'none' to skip.",
    )


def units_option():
    """The ``--units`` option: µm, or inches (heights in µin)."""
    import typer

    return typer.Option(Units.um, "--units", help="Display units: um, or in (heights in µin).")


def trials_option():
    """The ``--trials`` option of the Monte Carlo uncertainty."""

    import typer

    return typer.Option(DEFAULT_TRIALS, "--trials", min=100, help="Monte Carlo trials (JCGM 101).",
                        callback=_check_trials)


def _check_trials(value):
    """--trials within docs/limits.md (at most 10^6), refused with the reason before any allocation."""
    if value is not None:
        from ..limits import check_count

        check_count(value, "trials", where="--trials", name="the number of trials")
    return value


def _check_u_height(value):
    """--u-height-um within docs/limits.md, refused by its own name (never an internal one)."""
    if value is not None:
        from ..limits import check_range

        check_range(value, "uncertainty_um", where="--u-height-um", name="the uncertainty of one height")
    return value


def auto_trials_option():
    """The ``--trials`` option of commands that evaluate U without being asked (default: by survey size)."""
    import typer

    return typer.Option(
        None, "--trials", min=100, callback=_check_trials,
        help="Monte Carlo trials (JCGM 101); default 100000, fewer for large surveys (about 8 million / stations, "
        "at least 10000).",
    )


def seed_option():
    """The ``--seed`` option of the Monte Carlo uncertainty."""
    import typer

    return typer.Option(None, "--seed", help="Seed of the Monte Carlo run, for reproducible results.",
                        callback=_check_seed)


def _check_seed(value):
    """--seed a whole number from 0 to 2^64 - 1 (docs/limits.md), refused before any work; kept exact."""
    if value is not None:
        from ..limits import check_count

        check_count(value, "seed", where="--seed", name="the seed")
    return value


def u_height_option():
    """The ``--u-height-um`` option: stated uncertainty of each height of a height map."""
    import typer

    return typer.Option(
        None, "--u-height-um", min=0.0, help="Height-map inputs: standard uncertainty of each height in µm.",
        callback=_check_u_height,
    )


def uncertainty_defaults_option():
    """The ``--uncertainty-defaults`` option: a lab's own defaults for the uncertainty budget."""
    import typer

    return typer.Option(
        None, "--uncertainty-defaults",
        help="A lab's uncertainty defaults (TOML, docs/survey-format.md); default: the file named by "
        "FLATCHECK_UNCERTAINTY_DEFAULTS, if set.",
    )


def load_lab_defaults(path):
    """The lab defaults named by the option, else by ``FLATCHECK_UNCERTAINTY_DEFAULTS``, else None."""
    from ..io import ENV_VAR, read_uncertainty_defaults

    if path is None:
        env = os.environ.get(ENV_VAR, "").strip()
        if not env:
            return None
        path = env
    return read_uncertainty_defaults(path)


def guard_band_option():
    """The ``--guard-band`` option of the lapping targets (lap, compare)."""
    import typer

    return typer.Option(
        None, "--guard-band",
        help="Aim below the target by the expected U of the survey after lapping (ISO 14253-1): auto (default: U "
        "from the survey's budget for --target-grade and --target-gap-um, none for --target-um), budget (for any "
        "target), none, or U in µm.",
    )


def budget_u(loaded, *, trials=None, seed=None, u_height_um=None, uncertainty_defaults=None,
             what: str = "this survey"):
    """U of a surface's minimum-zone flatness from its uncertainty budget, and where it came from.

    Returns
    -------
    (float or None, str)
        U in µm and a sentence naming the budget (trials, seed, largest contribution); None and the reason
        when the input gives no budget (a height map without ``--u-height-um``). An error of an option
        (``--seed``...) is raised.
    """
    from ..errors import InputValueError
    from ..evaluation import survey_uncertainty

    if loaded.survey is None and u_height_um is None:
        return None, "a height map carries no reading uncertainty"
    total = default_auto_trials(loaded.heightmap.x_mm.size) if trials is None else trials
    try:
        with progress_bar("Monte Carlo", total) as advance:
            mc = survey_uncertainty(loaded, trials=total, seed=seed, u_height_um=u_height_um, progress=advance,
                                    lab_defaults=load_lab_defaults(uncertainty_defaults))
    except InputValueError as exc:
        if exc.where and str(exc.where).startswith("--"):
            raise
        return None, exc.message
    b = mc.budget
    top = max(b.entries, key=lambda e: e.standard_uncertainty_um) if b is not None and b.entries else None
    big = "" if top is None or top.standard_uncertainty_um <= 0 else (
        f"; largest contribution {top.name} {top.standard_uncertainty_um:.2g} µm" + (" (a default)" if top.default
                                                                                     else ""))
    return float(mc.minimum_zone.expanded_um), (
        f"U of {what}'s uncertainty budget as the estimate of the next survey's (Monte Carlo, JCGM 101:2008, "
        f"{mc.minimum_zone.trials} trials, seed {mc.minimum_zone.seed}{big})")


#: Cautions, kept in the core (flatcheck.safety) so that the report uses the same words.
SAFETY_LINES = _SAFETY_LINES
