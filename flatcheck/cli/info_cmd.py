"""``flatcheck units``: the reading units flatcheck accepts and their exact conversions."""

from __future__ import annotations


from ._app import app
from .common import stdout_console


@app.command("units")
def units_cmd() -> None:
    """List the reading units (with aliases) and how each becomes a height rise."""
    from ..units import ANGLE_UNITS
    from ..units import LENGTH_UNITS
    from rich.table import Table

    table = Table(title="Reading units", title_justify="left")
    table.add_column("unit")
    table.add_column("aliases")
    table.add_column("kind")
    table.add_column("meaning")
    seen = {}
    for alias, unit in ANGLE_UNITS.items():
        seen.setdefault(unit.name, (unit, []))[1].append(alias)
    for name, (unit, aliases) in seen.items():
        kind = "angle: rise = base x tan(reading)" if unit.kind == "angle" else "slope: rise = base x reading"
        table.add_row(name, ", ".join(a for a in aliases if a != name), kind, unit.description)
    seen = {}
    for alias, unit in LENGTH_UNITS.items():
        seen.setdefault(unit.name, (unit, []))[1].append(alias)
    for name, (unit, aliases) in seen.items():
        table.add_row(name, ", ".join(a for a in aliases if a != name), "height (indicator)", unit.description)
    stdout_console().print(table)
