"""Text on report pages: paragraphs, ruled tables, the running head and footer, and their heights."""

from __future__ import annotations

from matplotlib.lines import Line2D

from ._common import _INK

# ---------------------------------------------------------------------------- text and tables
def text_block(ax, lines, *, fontsize: float = 8.5, y0: float = 1.0, line_height: float | None = None,
               wrap_chars: int = 100):
    """Write paragraphs top-down in an axes with no frame; returns the y where writing stopped.

    ``lines`` is a sequence of strings or ``(text, style)`` pairs with style one
    of "h" (heading), "b" (bold), "s" (small) or "" (plain). Long lines are
    wrapped at ``wrap_chars`` characters.
    """
    import textwrap

    ax.set_axis_off()
    lh = line_height if line_height is not None else _line_step(ax, fontsize)
    y = y0
    for item in lines:
        text, style = (item, "") if isinstance(item, str) else item
        size = fontsize * (1.25 if style == "h" else 0.85 if style == "s" else 1.0)
        weight = "bold" if style in ("h", "b") else "normal"
        width = int(wrap_chars * fontsize / size)
        parts = textwrap.wrap(text, width=width) or [""]
        if style == "h":
            y -= 0.4 * lh
        for part in parts:
            ax.text(0.0, y, part, transform=ax.transAxes, fontsize=size, fontweight=weight, va="top", ha="left",
                    color=_INK, gid="text")
            y -= lh * size / fontsize
    return y


def table(ax, rows, *, col_labels, col_widths=None, fontsize: float = 8, title: str | None = None,
          highlight_col: int | None = None):
    """A plain ruled table filling ``ax`` (axes frame hidden).

    ``rows`` is a sequence of equal-length sequences of strings. The table is
    drawn top-aligned in the axes; returns the matplotlib Table.
    """
    ax.set_axis_off()
    rows = [[str(c) for c in r] for r in rows]
    if not rows:
        rows = [["—"] * len(col_labels)]
    tab = ax.table(cellText=rows, colLabels=list(col_labels), colWidths=col_widths, loc="upper left",
                   cellLoc="left", colLoc="left", edges="horizontal")
    tab.auto_set_font_size(False)
    tab.set_fontsize(fontsize)
    tab.scale(1.0, 1.35)
    for (r, c), cell in tab.get_celld().items():
        cell.set_edgecolor("0.6")
        cell.set_linewidth(0.5)
        if r == 0:
            cell.set_text_props(fontweight="bold")
            cell.set_facecolor("0.92")
        elif highlight_col is not None and c == highlight_col:
            cell.set_text_props(fontweight="bold")
    if title:
        ax.set_title(title, fontsize=10, loc="left", pad=4)
    return tab


def page_frame(fig, *, left_head: str, right_head: str, title: str, footer=(), page_text: str = "",
               margin: float = 0.06):
    """Header (running head, rule, page title) and footer (rule, small print, page number) of a report page.

    Positions are fractions of the figure; the drawing area left free is
    roughly ``margin`` to ``1 - margin`` across and 0.06 to 0.93 down.
    """
    fig.text(margin, 0.975, left_head, fontsize=8, fontweight="bold", va="top", color="0.25")
    fig.text(1 - margin, 0.975, right_head, fontsize=8, va="top", ha="right", color="0.25")
    fig.add_artist(Line2D([margin, 1 - margin], [0.963, 0.963], transform=fig.transFigure, color="0.3", lw=0.6))
    fig.text(margin, 0.955, title, fontsize=14, fontweight="bold", va="top", color=_INK)
    fig.add_artist(Line2D([margin, 1 - margin], [0.047, 0.047], transform=fig.transFigure, color="0.3", lw=0.6))
    for k, ln in enumerate(footer):
        fig.text(margin, 0.040 - 0.013 * k, ln, fontsize=6.5, va="top", color="0.3")
    if page_text:
        fig.text(1 - margin, 0.040, page_text, fontsize=8, va="top", ha="right", color=_INK)
    return fig


def _line_step(ax, fontsize: float) -> float:
    """Height of one text line of ``fontsize`` points as a fraction of the axes height."""
    return fontsize * 1.45 / 72 / (ax.get_position().height * ax.figure.get_figheight())


def flow_table(ax, y: float, rows, *, col_x, col_labels=None, fontsize: float = 8.5, title: str | None = None,
               bold_cols=(), wrap_chars=None) -> float:
    """Draw a ruled table top-down from height ``y`` (axes fraction); return the y below it.

    Used to stack several tables and paragraphs on one page without gaps.
    ``col_x`` are the left edges of the columns (axes fraction); ``wrap_chars``
    optionally gives, per column, the characters after which a cell wraps.
    """
    import textwrap

    ax.set_axis_off()
    lh = _line_step(ax, fontsize)
    if title:
        y -= 0.5 * lh
        ax.text(0.0, y, title, transform=ax.transAxes, fontsize=fontsize * 1.25, fontweight="bold", va="top",
                color=_INK, gid="text")
        y -= 1.35 * lh
    def rule(yy, lw=0.5):
        ax.plot([0, 1], [yy, yy], transform=ax.transAxes, color="0.55", lw=lw)
    if col_labels:
        rule(y + 0.2 * lh, 0.8)
        for x, lab in zip(col_x, col_labels):
            ax.text(x, y, str(lab), transform=ax.transAxes, fontsize=fontsize * 0.9, fontweight="bold", va="top",
                    color="0.2", gid="text")
        y -= lh
        rule(y + 0.2 * lh, 0.8)
    for row in rows:
        n_lines = 1
        for c, (x, cell) in enumerate(zip(col_x, row)):
            text = str(cell)
            if wrap_chars and c < len(wrap_chars) and wrap_chars[c]:
                text = "\n".join(textwrap.wrap(text, wrap_chars[c])) or ""
            n_lines = max(n_lines, text.count("\n") + 1)
            ax.text(x, y, text, transform=ax.transAxes, fontsize=fontsize, va="top", color=_INK,
                    fontweight="bold" if c in bold_cols else "normal", linespacing=1.3, gid="text")
        y -= lh * (1 + 0.93 * (n_lines - 1)) + 0.2 * lh
        rule(y + 0.25 * lh, 0.3)
    return y - 0.3 * lh


def _lines_in(text: str, wrap) -> int:
    import textwrap

    return max(1, len(textwrap.wrap(text, wrap))) if wrap else str(text).count("\n") + 1


def flow_table_height_in(rows, *, col_labels=None, fontsize: float = 8.5, title: str | None = None,
                         wrap_chars=None) -> float:
    """Height in inches that :func:`flow_table` takes for these rows (same steps, nothing drawn)."""
    lh = fontsize * 1.45 / 72
    h = 1.85 * lh if title else 0.0
    if col_labels:
        h += lh
    for row in rows:
        n = 1
        for c, cell in enumerate(row):
            wrap = wrap_chars[c] if wrap_chars and c < len(wrap_chars) else None
            n = max(n, _lines_in(str(cell), wrap))
        h += lh * (1 + 0.93 * (n - 1)) + 0.2 * lh
    return h + 0.3 * lh


def text_block_height_in(lines, *, fontsize: float = 8.5, wrap_chars: int = 100) -> float:
    """Height in inches that :func:`text_block` takes for these paragraphs (same steps, nothing drawn)."""
    import textwrap

    lh = fontsize * 1.45 / 72
    h = 0.0
    for item in lines:
        text, style = (item, "") if isinstance(item, str) else item
        size = fontsize * (1.25 if style == "h" else 0.85 if style == "s" else 1.0)
        parts = textwrap.wrap(text, width=int(wrap_chars * fontsize / size)) or [""]
        if style == "h":
            h += 0.4 * lh
        h += len(parts) * lh * size / fontsize
    return h
