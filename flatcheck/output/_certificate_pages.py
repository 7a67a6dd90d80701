"""The calibration-certificate pages of the PDF report (``flatcheck report SURVEY --db REGISTER``).

The content comes from the register (:func:`flatcheck.records.certificate_data`, a frozen
:class:`~flatcheck.records.CertificateData`); this module only lays it out. The certificate comes
first in the PDF and its raw readings last, around the report's own pages:

1. **Calibration certificate**: number, date of issue, laboratory; customer and location; the
   item and its identity; date, conditions, operator and method; each instrument with its
   calibration and traceability; the results as found and as left with U and the verdict for the
   grade sought, the source line of the lab's limits table, the next due date, the statement of
   scope and a signature block (measured by, approved by).
2. **Certificate: grades, method and uncertainty budget**: every grade of the standard with its
   limit, how the limit was found and the verdict; the method; the budget table.
3. **Certificate: station heights**: a table of numbers about the plane the page names (the
   register's station heights, which are ``flatcheck reduce --json``'s ``nodes``).
4. **Appendix: raw readings** (after the report's pages): the survey file's name and content
   hash, every reading as written with its residual, and the end-of-certificate line.

What a calibration certificate carries follows the list of ISO/IEC 17025:2017 clause 7.8 (title,
laboratory, unique identification on every page with page k of n, customer, method, item,
dates of measurement and issue, results with units, uncertainty, traceability, conditions,
decision rule of a statement of conformity, the person authorising; from memory of the clause).

Tables that do not fit on a page continue on the next (the page plan is worked out in inches
before anything is drawn, with the same steps as the drawing helpers of :mod:`._plots._pages`).
matplotlib is imported only inside the drawing functions.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

__all__ = ["certificate_plan", "CERTIFICATE_TITLE", "MAX_TABLE_ROWS"]

#: Title of the certificate's first page (and the running head's first words on every page).
CERTIFICATE_TITLE = "Calibration certificate"

#: Most rows printed in the station-height and readings tables (a height map of thousands of points
#: would make a book): above this the certificate names the register export that holds the table.
MAX_TABLE_ROWS = 2400

# Page geometry (figure fractions of A4 portrait), as the report's pages: the frame's header ends above
# _TOP and its footer starts below _BOTTOM.
_TOP = 0.915
_BOTTOM = 0.065
_LEFT = 0.06
_WIDTH = 0.88
_PAGE_IN = (8.27, 11.69)  # ISO 216 A4 in inches
_SIGN_IN = 1.25  # the signature block at the foot of the first page (inches)
_FS = 8.0  # body text and tables
_FS_SMALL = 7.0  # budget, readings
_CHAR_EM = 0.52  # mean width of a character of the body font, in ems (DejaVu Sans, text with digits)


# =============================================================================== blocks and pages
@dataclass(frozen=True)
class _Table:
    """A ruled table drawn by :func:`flatcheck.output._plots.flow_table` (widths: fractions of the text width)."""

    rows: tuple
    widths: tuple
    labels: tuple | None = None
    title: str | None = None
    fs: float = _FS
    bold_cols: tuple = ()

    @property
    def col_x(self) -> tuple:
        x, out = 0.0, []
        for w in self.widths:
            out.append(x)
            x += w
        return tuple(out)

    @property
    def wrap(self) -> tuple:
        """Characters per line of each column (the column's width, less a small gap, in characters)."""
        width_in = _WIDTH * _PAGE_IN[0]
        char_in = _CHAR_EM * self.fs / 72.0
        return tuple(max(4, int((w * width_in - 0.08) / char_in)) for w in self.widths)

    def height_in(self, rows=None, title=None) -> float:
        from ._plots import flow_table_height_in

        return flow_table_height_in(self.rows if rows is None else rows, col_labels=self.labels, fontsize=self.fs,
                                    title=self.title if title is None else title, wrap_chars=self.wrap)

    def draw(self, ax, y: float) -> float:
        from ._plots import flow_table

        return flow_table(ax, y, self.rows, col_x=self.col_x, col_labels=self.labels, fontsize=self.fs,
                          title=self.title, bold_cols=self.bold_cols, wrap_chars=self.wrap)


@dataclass(frozen=True)
class _Text:
    """Paragraphs drawn by :func:`flatcheck.output._plots.text_block` (items: text or (text, style))."""

    lines: tuple
    fs: float = _FS

    @property
    def wrap(self) -> int:
        return int(_WIDTH * _PAGE_IN[0] / (_CHAR_EM * self.fs / 72.0)) - 2

    def height_in(self, lines=None) -> float:
        from ._plots import text_block_height_in

        return text_block_height_in(self.lines if lines is None else lines, fontsize=self.fs, wrap_chars=self.wrap)

    def draw(self, ax, y: float) -> float:
        from ._plots import text_block

        return text_block(ax, list(self.lines), y0=y, fontsize=self.fs, wrap_chars=self.wrap)


def _paginate(blocks, first_in: float, rest_in: float) -> list:
    """Share ``blocks`` out over pages (``first_in`` inches free on the first, ``rest_in`` on the others).

    A table that does not fit is cut between rows (its header repeated, its title marked
    "continued"); paragraphs are cut between items. Returns a list of pages, each a list of
    ``(block index, first item, end item, title)``: the cuts, so that the same cuts can be applied
    to the blocks made again in other display units (:func:`_cut`).
    """
    pages, free = [[]], first_in

    def new_page():
        nonlocal free
        pages.append([])
        free = rest_in

    for i, b in enumerate(blocks):
        items = list(b.rows if isinstance(b, _Table) else b.lines)
        title = b.title if isinstance(b, _Table) else None
        h = b.height_in()
        if h <= free:
            pages[-1].append((i, 0, len(items), title))
            free -= h
            continue
        start = 0
        while start < len(items):
            n = 0
            while start + n < len(items) and _part_height(b, items[start: start + n + 1], title) <= free:
                n += 1
            if n == 0:
                if pages[-1]:
                    new_page()
                    continue
                n = 1  # one row taller than a page: draw it anyway rather than loop
            pages[-1].append((i, start, start + n, title))
            free -= _part_height(b, items[start: start + n], title)
            start += n
            if start < len(items):
                new_page()
                if isinstance(b, _Table) and b.title:
                    title = f"{b.title} (continued)"
    return pages


def _cut(blocks, page) -> list:
    """The blocks of one page of :func:`_paginate`'s plan."""
    out = []
    for i, start, stop, title in page:
        b = blocks[i]
        if isinstance(b, _Table):
            out.append(replace(b, rows=tuple(b.rows[start:stop]), title=title))
        else:
            out.append(replace(b, lines=tuple(b.lines[start:stop])))
    return out


def _part_height(b, items, title) -> float:
    return b.height_in(items, title) if isinstance(b, _Table) else b.height_in(items)


def _text_axes(fig, bottom_in: float = 0.0):
    """The axes of the text area of a page, ``bottom_in`` inches left free above the footer."""
    fh = fig.get_figheight()
    bottom = _BOTTOM + bottom_in / fh
    return fig.add_axes([_LEFT, bottom, _WIDTH, _TOP - bottom])


def _area_in(bottom_in: float = 0.0) -> float:
    """Height of the text area of a page (inches)."""
    return (_TOP - _BOTTOM) * _PAGE_IN[1] - bottom_in


def _draw_blocks(fig, blocks, bottom_in: float = 0.0):
    ax = _text_axes(fig, bottom_in)
    ax.set_axis_off()
    y = 1.0
    for b in blocks:
        y = b.draw(ax, y)
    return ax, y


# =============================================================================== formatting
def _height(v_um, units: str, step_um: float | None = None) -> str:
    """A height with its unit, to the step the survey resolves (:func:`flatcheck.units.height_decimals`)."""
    from ..units import format_height

    return format_height(v_um, units, step_um=step_um)


def _height_number(v_um, units: str, step_um: float | None = None) -> str:
    """A station height without its unit, as printed in the table, to the step the survey resolves; never "-0.00"."""
    from ..units import format_height

    return format_height(v_um, units, unit=False, step_um=step_um)


def _position(v_mm, units: str) -> str:
    """A position without its unit: mm to 0.1 mm, or inches to 0.01 in (1 in = 25.4 mm exactly)."""
    from ..units import MM_PER_INCH

    return f"{v_mm / MM_PER_INCH:.2f}" if units == "in" else f"{v_mm:.1f}"


def _height_unit(units: str) -> str:
    return "µin" if units == "in" else "µm"


def _length_unit(units: str) -> str:
    return "in" if units == "in" else "mm"


def _limit(v_um, units: str) -> str:
    """A limit as the limits table gives it: no trailing zeros (8 µm, 2.5 µm)."""
    from ..units import format_limit

    return format_limit(v_um, units)


def _stated(res, units: str, step_um: float | None = None) -> tuple[str, str]:
    """Flatness and U of a result as certificates state them (U to two significant digits, the value to its place)."""
    if units == "um":
        return f"{res.flatness_text} µm", (f"{res.uncertainty_text} µm" if res.uncertainty_text else "not evaluated")
    from ..units import format_with_uncertainty

    if res.expanded_uncertainty_um is None:
        return _height(res.flatness_um, units, step_um), "not evaluated"
    return format_with_uncertainty(res.flatness_um, res.expanded_uncertainty_um, units)


def _size(c, units: str) -> str:
    if not c.length_mm or not c.width_mm:
        return "not stated"
    if units == "in":
        from ..units import format_length

        return f"{format_length(c.length_mm, 'in', unit=False)} x {format_length(c.width_mm, 'in', unit=False)} in"
    return f"{c.length_mm:g} x {c.width_mm:g} mm"


def _or(text, default: str = "not stated") -> str:
    text = "" if text is None else str(text).strip()
    return text or default


def _grade_name(standard: str, grade: str) -> str:
    """A grade as the limits table (and so the standard) names it: "DIN 876 grade 0"."""
    return f"{standard} grade {grade}" if standard and grade else ""


def _certified_state(c) -> str:
    """"as left" when the survey certified is the as-left one, else "as found"."""
    return "as left" if c.as_left is not None and c.as_left.survey_id == c.survey_id else "as found"


def _reading(v: float) -> str:
    """A raw reading: the shortest text that gives back the same number (``20.8``, ``-30.0``)."""
    return repr(float(v))


# =============================================================================== the first page
def _front_blocks(c, units: str, statement: str) -> list:
    blocks = [_Table((("Certificate number", c.number), ("Date of issue", c.issued_on),
                      ("Issued by", _or(c.lab, "the laboratory's name is not in the register"))),
                     widths=(0.3, 0.7), bold_cols=(1,), fs=9.0)]
    item = c.surface_description or c.surface_kind
    if c.surface_kind and c.surface_description and c.surface_kind.lower() not in c.surface_description.lower():
        item = f"{c.surface_kind}: {c.surface_description}"
    blocks.append(_Table((
        ("Customer", _or(c.customer)),
        ("Location of the item", _or(c.location)),
        ("Item calibrated", _or(item)),
        ("Identification", _or(c.surface_ident)),
        ("Size (length x width)", _size(c, units)),
        ("Material", _or(c.material)),
        ("Grade sought", _or(_grade_name(c.standard, c.grade_sought), "none stated")),
    ), widths=(0.3, 0.7), title="Customer and item calibrated"))
    temp = "not stated" if c.temperature_c is None else f"{c.temperature_c:g} °C"
    blocks.append(_Table((
        ("Date of measurement", c.measured_on),
        ("Survey certified",
         f"register survey {c.survey_id} ({_certified_state(c)}), file {_file_name(c.source_name)}"),
        ("Temperature", temp),
        ("Measured by", _or(c.measured_by)),
        ("Method", c.method),
        ("Heights referred to", c.height_reference),
    ), widths=(0.3, 0.7), title="Measurement"))
    blocks.append(_instrument_block(c))
    blocks += _results_blocks(c, units)
    due = (f"{c.next_due_on} ({c.interval} after the date of measurement)" if c.next_due_on else
           "no calibration interval is set for this surface")
    blocks.append(_Table((("Next calibration due", due),), widths=(0.3, 0.7), bold_cols=(1,)))
    lines = [("Note: " + n, "s") for n in c.notes]
    lines += [("Statement", "h"),
              (statement, "s"),
              ("This certificate is valid only as a whole: every page carries its number and 'page k of n'. The pages "
               "after the certificate's own give the full evaluation (map, line profiles, layout and closures); the "
               "raw readings are the appendix at the end.", "s")]
    blocks.append(_Text(tuple(lines)))
    return blocks


def _file_name(name: str) -> str:
    from pathlib import PurePath

    return PurePath(name).name or name


def _instrument_block(c):
    if not c.instruments:
        return _Text((("Instruments and calibration traceability", "h"),
                      "No instrument is on record for this survey (the heights were given as a height map)."))
    rows = []
    for i in c.instruments:
        if i.in_calibration:
            rows.append((i.description, _or(i.ident, "-"), i.calibrated_on, i.due_on, _or(i.certificate_ref, "-"),
                         _or(i.traceability, "not on record")))
        else:
            why = f"NO CALIBRATION IN FORCE: {i.note}" if i.in_calibration is False else i.note
            rows.append((i.description, _or(i.ident, "-"), "-", "-", "-", why))
    return _Table(tuple(rows), widths=(0.25, 0.12, 0.11, 0.11, 0.13, 0.28),
                  labels=("instrument", "identification", "calibrated", "due", "certificate", "traceability"),
                  title="Instruments and calibration traceability", fs=7.5)


def _results_blocks(c, units: str) -> list:
    sought = _grade_name(c.standard, c.grade_sought)
    rows = []
    for label, res in (("as found", c.as_found), ("as left", c.as_left)):
        if res is None:
            text = ("no as-found survey in the register" if label == "as found" else
                    "no adjustment recorded: the surface was left as found")
            rows.append((label, "-", "-", "-", "-", text))
            continue
        f_txt, u_txt = _stated(res, units, c.height_step_um)
        v = res.verdict
        verdict = "no grade sought" if v is None else f"{v.verdict} (limit {_limit(v.limit_um, units)})"
        rows.append((label, res.date, str(res.survey_id), f_txt, u_txt, verdict))
    blocks = [_Table(tuple(rows), widths=(0.11, 0.13, 0.08, 0.18, 0.16, 0.34),
                     labels=("state", "date", "survey", "flatness F", "U", sought or "grade sought"),
                     title="Results: flatness (minimum zone, ISO 12781-1) with its expanded uncertainty U",
                     bold_cols=(3, 4))]
    notes = ["F: the distance between the two closest parallel planes that contain every station (minimum zone). "
             "U: expanded uncertainty for a coverage probability of about 95 %, by Monte Carlo propagation of the "
             "uncertainty budget through the reduction (JCGM 101:2008); U to two significant digits, F to the same "
             "decimal place."]
    rule = next((v.statement for v in c.verdicts if v.statement), "")
    if rule:
        notes.append(f"Decision rule: {rule}.".replace("..", "."))
    for s in c.limits_sources:
        notes.append(f"Limits from the laboratory's limits table: {s}")
    blocks.append(_Text(tuple((n, "s") for n in notes)))
    return blocks


def _signature_block(fig, c) -> None:
    """Two columns at the foot of the first page: who measured and who approved, each with name, signature, date."""
    from matplotlib.lines import Line2D

    fh, fw = fig.get_figheight(), fig.get_figwidth()
    top = _BOTTOM + (_SIGN_IN - 0.05) / fh
    fig.add_artist(Line2D([_LEFT, _LEFT + _WIDTH], [top, top], transform=fig.transFigure, color="0.3", lw=0.6))
    columns = (("Measured by", c.measured_by), ("Approved by", c.approved_by))
    for k, (head, name) in enumerate(columns):
        x0 = _LEFT + k * _WIDTH / 2
        x1 = x0 + _WIDTH / 2 - 0.3 / fw
        y = top - 0.08 / fh
        fig.text(x0, y, head, fontsize=9, fontweight="bold", va="top", color="#1a1a1a")
        for label, value in (("name", name), ("signature", ""), ("date", "")):
            y -= 0.3 / fh
            fig.text(x0, y, label, fontsize=7.5, va="bottom", color="0.3")
            if value:
                fig.text(x0 + 0.75 / fw, y + 0.02 / fh, value, fontsize=8.5, va="bottom", color="#1a1a1a")
            fig.add_artist(Line2D([x0 + 0.72 / fw, x1], [y - 0.02 / fh, y - 0.02 / fh], transform=fig.transFigure,
                                  color="0.45", lw=0.5))


# =============================================================================== grades, method, budget
def _budget_blocks(c, units: str) -> list:
    blocks = []
    if c.verdicts:
        std = c.verdicts[0].standard
        rows = [(v.grade + (" (sought)" if v.sought else ""), _limit(v.limit_um, units), v.how, v.verdict)
                for v in c.verdicts]
        blocks.append(_Table(tuple(rows), widths=(0.13, 0.12, 0.55, 0.2), labels=("grade", "limit", "how the limit "
                             "was found", "verdict"), title=f"Grades of {std}: survey {c.survey_id} as measured",
                             bold_cols=(3,)))
        lines = [(f"Limits from the laboratory's limits table: {s}", "s") for s in c.limits_sources]
        blocks.append(_Text(tuple(lines)))
    else:
        blocks.append(_Text((("Grades", "h"), "No grade sought is recorded for this surface, so no statement of "
                             "conformity is made.")))
    blocks.append(_Text((("Method", "h"), c.method)))
    if not c.budget:
        blocks.append(_Text((("Uncertainty budget", "h"), "No uncertainty was evaluated for this survey: "
                             + _or(c.uncertainty_note, "no reason recorded"))))
        return blocks
    hu = _height_unit(units)
    rows = []
    for b in c.budget:
        if b.source == "combined":
            continue
        contrib = "-" if b.contribution_um is None else _u_text(b.contribution_um, units)
        rows.append((b.source + (" (default)" if b.default else ""), b.quantity, _input_value(b, units),
                     b.distribution, b.basis, contrib))
    combined = next((b for b in c.budget if b.source == "combined"), None)
    if combined is not None:
        rows.append(("combined u", "flatness (minimum zone)", "", combined.distribution, combined.basis,
                     _u_text(combined.value, units)))
    blocks.append(_Text((("Uncertainty budget of the minimum-zone flatness", "h"),
                         ("Each contribution is the standard deviation of the minimum-zone flatness with that source "
                          "alone propagated through the reduction (JCGM 101:2008); the combined u comes from all "
                          "sources together, so it need not be the root sum of squares of the rows. Sources marked "
                          "(default) rest on values the survey file does not state.", "s"))))
    blocks.append(_Table(tuple(rows), widths=(0.12, 0.14, 0.09, 0.17, 0.40, 0.08),
                         labels=("source", "quantity", "input", "distribution", "basis", f"u ({hu})"),
                         fs=_FS_SMALL, bold_cols=(5,)))
    if c.uncertainty_note:
        blocks.append(_Text(((c.uncertainty_note, "s"),)))
    return blocks


def _u_text(v_um: float, units: str) -> str:
    """A standard uncertainty to two significant digits, without the unit (the column names it)."""
    from ..units import um_to

    return f"{um_to(v_um, units):.2g}"


def _input_value(b, units: str) -> str:
    if b.unit == "relative":
        return f"{b.value * 100:.3g} %"
    if b.unit in ("um", "µm"):
        from ..units import um_to

        return f"{um_to(b.value, units):.3g} {_height_unit(units)}"
    return f"{b.value:.3g} {b.unit}"


# =============================================================================== station heights
def _station_pages(c, units: str) -> list:
    """Pages of the station table: ``(rows_left, rows_right, first)`` per page (two tables side by side).

    When the table fits on one page its rows are shared evenly between the two columns.
    """
    rows = [(s.name or str(k), _position(s.x_mm, units), _position(s.y_mm, units), _height_number(s.height_um, units, c.height_step_um))
            for k, s in enumerate(c.stations, start=1)]
    per_col = _rows_per_column(_station_intro(c, units))
    per_col_rest = _rows_per_column(_station_intro(c, units, short=True))
    if len(rows) <= 2 * per_col:
        half = (len(rows) + 1) // 2
        return [(tuple(rows[:half]), tuple(rows[half:]), True)]
    pages, k, first = [], 0, True
    while k < len(rows):
        n = per_col if first else per_col_rest
        pages.append((tuple(rows[k: k + n]), tuple(rows[k + n: k + 2 * n]), first))
        k += 2 * n
        first = False
    return pages


#: The station table's columns: left edge of the name, right edges of the numbers (axes fractions).
_STATION_X = (0.0, 0.46, 0.68, 0.95)


def _station_labels(units: str, c=None) -> tuple:
    lu, hu = _length_unit(units), _height_unit(units)
    return ("point" if c is not None and _is_height_map(c) else "station", f"x ({lu})", f"y ({lu})", f"height ({hu})")


def _is_height_map(c) -> bool:
    """A certificate of a height map (heights as given, no readings) rather than of a survey."""
    return not c.readings


def _station_intro(c, units: str, short: bool = False) -> tuple:
    """What the table holds and about which plane: in full on its first page, in one line on the next ones."""
    hu, lu = _height_unit(units), _length_unit(units)
    if short:
        text = (f"Heights of survey {c.survey_id} in {hu}, as given in the height map (continued)" if _is_height_map(c)
                else f"Station heights of survey {c.survey_id} in {hu} about the {c.height_reference} (continued)")
        return ((text, "b"),)
    where = (f"positions x along the length and y along the width, in {lu}, in the survey's coordinates (origin at "
             "the surface's south-west corner)")
    if _is_height_map(c):
        return (
            (f"Heights of the {len(c.stations)} points of survey {c.survey_id} ({_certified_state(c)}, "
             f"{c.measured_on}), in {hu}, as given in the height map (its own datum)", "b"),
            (f"The file gives the heights; this table refers them to no plane (not to the least-squares plane "
             f"that the other pages' maps use). Positions x and y in {lu} as the "
             "file gives them. These are the heights of the register, as 'flatcheck reduce --json' states them "
             "(nodes), rounded to the last digit printed. The minimum-zone flatness is stated about its own planes "
             "(first page).", "s"),
        )
    return (
        (f"Station heights of survey {c.survey_id} ({_certified_state(c)}, {c.measured_on}), in {hu} about the "
         f"{c.height_reference}", "b"),
        (f"Heights are perpendicular to that plane, positive up (away from the material); {where}. These are the "
         "station heights of the register, as 'flatcheck reduce --json' states them (nodes), rounded to the last "
         "digit printed. The minimum-zone flatness is stated about its own planes (first page), not about this "
         "plane.", "s"),
    )


def _rows_per_column(intro) -> int:
    """Rows of the station table that fit in one column under ``intro`` (single-line rows)."""
    from ._plots import flow_table_height_in, text_block_height_in

    free = _area_in() - (text_block_height_in(list(intro), fontsize=_FS, wrap_chars=_Text(()).wrap) if intro else 0.0)
    labels = ("station", "x", "y", "height")
    n = 1
    while flow_table_height_in([("S",) * 4] * (n + 1), col_labels=labels, fontsize=_FS) <= free:
        n += 1
    return n


def _number_table(ax, y: float, rows, labels, *, fs: float = _FS) -> float:
    """The station table from height ``y`` down: the name left-aligned, the numbers right-aligned.

    The same steps as :func:`flatcheck.output._plots.flow_table` (so its height is
    :func:`~flatcheck.output._plots.flow_table_height_in`'s), with the numbers aligned on their
    decimal point, as a column of readings is read.
    """
    from ._plots._pages import _line_step

    lh = _line_step(ax, fs)

    def rule(yy, lw):
        ax.plot([0, 1], [yy, yy], transform=ax.transAxes, color="0.55", lw=lw)

    def cells(yy, texts, **kw):
        for k, (x, text) in enumerate(zip(_STATION_X, texts)):
            ax.text(x, yy, text, transform=ax.transAxes, va="top", ha="left" if k == 0 else "right",
                    color="#1a1a1a", gid="text", **kw)

    rule(y + 0.2 * lh, 0.8)
    cells(y, labels, fontsize=fs * 0.9, fontweight="bold")
    y -= lh
    rule(y + 0.2 * lh, 0.8)
    for row in rows:
        cells(y, row, fontsize=fs)
        y -= 1.2 * lh
        rule(y + 0.25 * lh, 0.3)
    return y - 0.3 * lh


def _draw_station_page(fig, c, units, left, right, first, too_many: str = ""):
    ax = _text_axes(fig)
    ax.set_axis_off()
    y = _Text(_station_intro(c, units, short=not first)).draw(ax, 1.0)
    if too_many:
        _Text(((too_many, ""),)).draw(ax, y)
        return []
    height = (_TOP - _BOTTOM) * y  # the part of the text area left below the introduction
    gap = 0.06
    for k, rows in enumerate((left, right)):
        if not rows:
            continue
        sub = fig.add_axes([_LEFT + k * (_WIDTH / 2 + gap / 2), _BOTTOM, _WIDTH / 2 - gap / 2, height])
        sub.set_axis_off()
        _number_table(sub, 1.0, rows, _station_labels(units, c))
    return []


# =============================================================================== appendix: raw readings
def _appendix_blocks(c, units: str, n_pages_hint: str = "") -> list:
    from ..records import text_sha256

    head = [(f"Raw data of survey {c.survey_id}: the file {_file_name(c.source_name)}", "b"),
            (f"SHA-256 of its text (line ends, byte-order mark and trailing blanks normalised): "
             f"{text_sha256(c.raw_text)}. The register holds the file's whole text"
             + ("." if _is_height_map(c) else "; the readings below are the file's numbers."), "s")]
    blocks = [_Text(tuple(head))]
    if c.readings:
        if len(c.readings) > MAX_TABLE_ROWS:
            blocks.append(_Text(((f"The survey has {len(c.readings)} readings, too many to print here: the register "
                                  f"exports them with 'flatcheck register export OUT.csv --table readings --ident "
                                  f"{c.surface_ident}'.", ""),)))
        else:
            hu = _height_unit(units)
            rows = []
            for r in c.readings:
                res = "" if r.residual_um is None else _height_number(r.residual_um, units, c.height_step_um)
                rows.append((r.line, str(r.run), str(r.step), r.from_station, r.to_station, _reading(r.reading), res))
            blocks.append(_Table(tuple(rows), widths=(0.16, 0.07, 0.07, 0.18, 0.18, 0.16, 0.18),
                                 labels=("line", "run", "step", "from", "to", f"reading ({_or(c.reading_unit, '-')})",
                                         f"residual ({hu})"),
                                 title="Readings, in the order of the file", fs=_FS_SMALL))
            blocks.append(_Text((("residual: the reading minus what the adjusted station heights give for it, as "
                                  "a height over the step.", "s"),)))
    else:
        blocks.append(_Text((("The surface was given as a height map: its heights as given (the table of heights "
                              "of the certificate) are the raw data.", ""),)))
    blocks.append(_Text(((f"End of certificate {c.number}.", "b"),)))
    return blocks


# =============================================================================== the plan
def certificate_plan(content, plan: list, *, statement: str) -> list:
    """The report's page plan with the certificate's pages added (``plan`` unchanged without a certificate).

    Parameters
    ----------
    content : ReportContent
        With ``content.certificate`` a :class:`flatcheck.records.CertificateData`, or None.
    plan : list of (title, draw)
        The report's own pages; ``draw(fig, content, units)`` returns the page's pictures.
    statement : str
        The statement of the scope of the results (printed on the first page).

    Returns
    -------
    list of (title, draw)
        The certificate's pages, then ``plan``, then the appendix of raw readings.
    """
    c = getattr(content, "certificate", None)
    if c is None:
        return plan
    units_free = "um"  # the cuts between pages are made in µm and mm; _draw_flow applies them in the display units

    front = _paginate(_front_blocks(c, units_free, statement), _area_in(_SIGN_IN), _area_in())
    budget = _paginate(_budget_blocks(c, units_free), _area_in(), _area_in())
    appendix = _paginate(_appendix_blocks(c, units_free), _area_in(), _area_in())
    out = []
    for k in range(len(front)):
        title = CERTIFICATE_TITLE if k == 0 else f"{CERTIFICATE_TITLE} (continued)"
        out.append((title, _draw_flow(_front_blocks, statement, k, first_sign=(k == 0))))
    for k in range(len(budget)):
        title = "Certificate: grades, method and uncertainty budget" + (" (continued)" if k else "")
        out.append((title, _draw_flow(_budget_blocks, None, k)))
    too_many = ""
    if len(c.stations) > MAX_TABLE_ROWS:
        too_many = (f"The surface has {len(c.stations)} points, too many to print here: the register exports the "
                    f"table with 'flatcheck register export OUT.csv --table stations --ident {c.surface_ident}'.")
        pages = [((), (), True)]
    else:
        pages = _station_pages(c, units_free)
    for k, (left, right, first) in enumerate(pages):
        title = "Certificate: heights" if _is_height_map(c) else "Certificate: station heights"
        title += f" ({k + 1} of {len(pages)})" if len(pages) > 1 else ""
        out.append((title, lambda fig, cc, u, k=k, too_many=too_many: _draw_stations(fig, cc, u, k, too_many)))
    out += plan
    for k in range(len(appendix)):
        title = "Appendix: raw data" if _is_height_map(c) else "Appendix: raw readings"
        title += " (continued)" if k else ""
        out.append((title, _draw_flow(_appendix_blocks, None, k)))
    return out


def _draw_flow(make_blocks, statement, page: int, first_sign: bool = False):
    """A drawing function for page ``page`` of a flowing group.

    The cuts between pages are those of the plan (made in µm and mm), applied to the blocks made
    in the display units, so that the pages drawn are the pages counted.
    """

    def blocks_of(c, units):
        return make_blocks(c, units, statement) if statement is not None else make_blocks(c, units)

    def draw(fig, content, units):
        c = content.certificate
        first = _area_in(_SIGN_IN) if make_blocks is _front_blocks else _area_in()
        pages = _paginate(blocks_of(c, "um"), first, _area_in())
        if page < len(pages):
            _draw_blocks(fig, _cut(blocks_of(c, units), pages[page]), bottom_in=_SIGN_IN if first_sign else 0.0)
        if first_sign:
            _signature_block(fig, c)
        return []

    return draw


def _draw_stations(fig, content, units, page: int, too_many: str):
    c = content.certificate
    if too_many:
        return _draw_station_page(fig, c, units, (), (), True, too_many)
    pages = _station_pages(c, units)
    left, right, first = pages[min(page, len(pages) - 1)]
    return _draw_station_page(fig, c, units, left, right, first)
