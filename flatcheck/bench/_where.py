"""Where a reading is taken: in words, and as a small text map of the surface.

Pure functions of an :class:`~flatcheck.bench._entry.EntryPlan`; the command line prints them.
"""

from __future__ import annotations

from ._entry import EntryPlan, Slot, _slot_words

__all__ = ["describe_slot", "plate_map"]


def describe_slot(plan: EntryPlan, slot: Slot, *, units: str = "mm") -> str:
    """Where reading ``slot`` is taken, in words: line, run, step and the instrument's stations.

    ``units`` is ``"mm"`` or ``"in"`` for the distances.
    """
    f, u = (25.4, "in") if units == "in" else (1.0, "mm")  # 1 in = 25.4 mm exactly
    fmt = (lambda d: f"{d / f:.2f} {u}") if units == "in" else (lambda d: f"{d:.0f} {u}")
    line = plan.survey.line(slot.line)
    start = line.stations[0]
    if len(slot.stations) == 1:
        where = f"station {slot.stations[0]}, {fmt(slot.distances_mm[0])} from {start}"
    else:
        where = (f"feet on {slot.stations[0]} and {slot.stations[1]}, {fmt(slot.distances_mm[0])} and "
                 f"{fmt(slot.distances_mm[1])} from {start}")
    return f"{_slot_words(plan, slot)}: {where}"



def plate_map(plan: EntryPlan, slot: Slot | None, *, width: int = 41) -> tuple:
    """A small text map of the surface, north up, with the current line and the instrument marked.

    Characters: ``+-|`` the surface's edge, ``.`` stations, the current line drawn with
    ``- | / \\`` and its stations ``o``, ``@`` where the instrument stands (its feet).

    Parameters
    ----------
    plan : EntryPlan
    slot : Slot or None
        The reading to mark; None draws the stations only.
    width : int
        Columns of the map (at least 11).

    Returns
    -------
    tuple of str
        The map's rows, top (north) first.
    """
    sv = plan.survey
    L, W = float(sv.surface.length_mm), float(sv.surface.width_mm)
    cols = max(11, int(width))
    rows = int(round((cols - 1) * W / L / 2.2)) + 1
    rows = max(5, min(rows, 13))
    canvas = [[" "] * cols for _ in range(rows)]
    for c in range(cols):
        canvas[0][c] = canvas[-1][c] = "-"
    for r in range(rows):
        canvas[r][0] = canvas[r][-1] = "|"
    for r in (0, rows - 1):
        canvas[r][0] = canvas[r][-1] = "+"

    def cell(x, y):
        c = 1 + int(round(x / L * (cols - 3)))
        r = rows - 2 - int(round(y / W * (rows - 3)))
        return min(max(r, 1), rows - 2), min(max(c, 1), cols - 2)

    pos = {s.name: (s.x_mm, s.y_mm) for s in sv.stations}
    for s in sv.stations:
        r, c = cell(*pos[s.name])
        canvas[r][c] = "."
    if slot is not None:
        ln = sv.line(slot.line)
        (ra, ca), (rb, cb) = cell(*pos[ln.stations[0]]), cell(*pos[ln.stations[-1]])
        if ra == rb:
            ch = "-"
        elif ca == cb:
            ch = "|"
        else:
            ch = "/" if (rb - ra) * (cb - ca) < 0 else "\\"
        n = max(abs(rb - ra), abs(cb - ca), 1)
        for k in range(n + 1):
            r = int(round(ra + (rb - ra) * k / n))
            c = int(round(ca + (cb - ca) * k / n))
            if canvas[r][c] in " .":
                canvas[r][c] = ch
        for s in ln.stations:
            r, c = cell(*pos[s])
            canvas[r][c] = "o"
        for s in slot.stations:
            r, c = cell(*pos[s])
            canvas[r][c] = "@"
    return tuple("".join(row) for row in canvas)
