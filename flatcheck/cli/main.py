"""Entry point of the ``flatcheck`` command.

``main()`` parses and handles errors; the command modules do the work with no
error handling of their own. Every :class:`~flatcheck.errors.FlatcheckError`
becomes one line on standard error and exit code 2; any other exception is a
bug and prints a one-line hint (the traceback only with ``--traceback``).
"""

from __future__ import annotations

import sys
import warnings

import typer

try:  # recent typer vendors its own copy of click
    from typer._click import exceptions as _cx
except ImportError:  # pragma: no cover - older typer uses click itself
    from click import exceptions as _cx

from ..errors import ExitStatus, FlatcheckError
from ._app import app

# Each command module registers its commands on `app` when imported (one line per module);
# the order here is the order of `flatcheck --help`, the order of the work at the bench.
from . import (
    plan_cmd,
    enter_cmd,
    reduce_cmd,
    grade_cmd,
    bearing_cmd,
    guideway_cmd,
    lap_cmd,
    compare_cmd,
    report_cmd,
    register_cmd,
    fringes_cmd,
    sphere_cmd,
    demo_cmd,
    info_cmd,
)

__all__ = ["app", "run", "main"]


def run(argv: list[str] | None = None) -> int:
    """Run the command line with ``argv`` (without the program name); return the exit code."""
    argv = list(sys.argv[1:] if argv is None else argv)
    show_traceback = "--traceback" in argv
    argv = [a for a in argv if a != "--traceback"]
    command = typer.main.get_command(app)
    try:
        with warnings.catch_warnings():
            # numpy's floating-point warnings (overflow, invalid value) are never shown as extra stderr lines:
            # inputs are range-checked first (docs/limits.md), and anything they would flag is an error below
            warnings.simplefilter("ignore", RuntimeWarning)
            rv = command.main(args=argv, prog_name="flatcheck", standalone_mode=False)
        return int(rv) if isinstance(rv, int) else int(ExitStatus.OK)
    except FlatcheckError as exc:
        _error(exc.one_line())
        return int(ExitStatus.BAD_INPUT)
    except typer.Exit as exc:
        return int(exc.exit_code)
    except typer.Abort:
        _error("interrupted")
        return 130  # 128 + SIGINT, the shell convention
    except _cx.UsageError as exc:
        if type(exc).__name__ == "NoArgsIsHelpError":  # help was shown for a bare command
            where = "flatcheck" if exc.ctx is None or exc.ctx.parent is None else exc.ctx.command_path
            if exc.ctx is not None:  # the commands to choose from, on standard output; the error, one line, on stderr
                sys.stdout.write(exc.ctx.get_help() + "\n")
                sys.stdout.flush()
            _error(f"no command given; choose one of the commands listed by '{where} --help'")
            return int(ExitStatus.BAD_INPUT)
        hint = ""
        if exc.ctx is not None:
            # the whole path ('flatcheck register add'), not only the last word
            where = "flatcheck" if exc.ctx.parent is None else exc.ctx.command_path
            hint = f" (see '{where} --help')"
        _error(" ".join(exc.format_message().split()) + hint)
        return int(ExitStatus.BAD_INPUT)
    except _cx.ClickException as exc:
        _error(" ".join(exc.format_message().split()))
        return int(ExitStatus.BAD_INPUT)
    except KeyboardInterrupt:
        _error("interrupted")
        return 130
    except BrokenPipeError:
        return int(ExitStatus.OK)
    except Exception as exc:  # a bug: keep operators' screens clean
        if show_traceback:
            import traceback

            traceback.print_exc()
        _error(
            f"internal error: {type(exc).__name__}: {' '.join(str(exc).split())} "
            "(this is a bug in flatcheck; run again with --traceback and report it)"
        )
        return int(ExitStatus.INTERNAL)


def _error(message: str) -> None:
    sys.stderr.write(f"flatcheck: error: {message}\n")
    sys.stderr.flush()


def main() -> None:
    """Console-script entry point."""
    sys.exit(run())


if __name__ == "__main__":  # python -m flatcheck.cli.main
    main()
