"""The typer application object shared by the command modules."""

import typer

app = typer.Typer(
    name="flatcheck",
    help=(
        "Flatness of surface plates, guideways and air-bearing pads: reduce a survey to a height map, "
        "state flatness with its uncertainty, grade it, judge it for air bearings and plan the lapping."
    ),
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
    rich_markup_mode=None,  # plain help: quick to start, flags read as flags, no boxes in pipes
)


@app.callback()
def _root() -> None:
    """Flatness of surface plates, guideways and air-bearing pads.

    Add --traceback to any command to see the traceback of an internal error.
    """
