"""The PDF report: a calibration-style record of one surface as measured.

Two steps, so that the numbers can be checked without drawing anything:

1. :func:`analyse` (in :mod:`._report_content`) takes the shared evaluation of a surface
   (:func:`flatcheck.evaluation.evaluate_surface`, the one ``flatcheck reduce``
   states) and adds what only the report needs (grades, air bearing, lapping
   plan); it returns a frozen :class:`ReportContent` with every number the
   report states.
2. :func:`write_report` draws the pages from that content (through
   :mod:`flatcheck.output`, the only module that imports matplotlib) and writes
   the PDF atomically, optionally with each picture as a PNG file.

This module holds the page plan (which pages a report has, in order: :func:`page_titles`), the
header and footer drawn on every page, and :func:`write_report`; the pages themselves are drawn by
:mod:`._report_pages` (summary, maps, local flatness, profiles, grades, air bearing, sources),
:mod:`._report_survey_pages` (layout and closure, set-up sheet, uncertainty budget) and
:mod:`._report_lapping_pages` (maps, bench chart, passes).

Neither step prints or reads files; :func:`write_report` writes only the files
it is asked to write.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import InputValueError, OutputError
from ._report_content import HEIGHT_REFERENCE, SCOPE_STATEMENT, ReportContent
from ._report_lapping_pages import (
    _chart_fits_on_lapping_page,
    _page_chart,
    _page_lapping,
    _page_passes,
    _pass_pages,
)
from ._report_pages import (
    _page_bearing,
    _page_grades,
    _page_local,
    _page_map,
    _page_profiles,
    _page_sources,
    _page_summary,
)
from ._report_survey_pages import (
    _histogram_fits_on_layout_page,
    _page_layout,
    _page_residuals,
    _page_setup,
    _page_uncertainty,
)

__all__ = [
    "ReportFiles",
    "write_report",
    "page_titles",
]


@dataclass(frozen=True)
class ReportFiles:
    """What :func:`write_report` wrote: the PDF, its page count and the PNG pictures."""

    pdf: Path
    pages: int
    pngs: tuple = ()


# =============================================================================== the page plan
def page_titles(content: ReportContent) -> list:
    """Titles of the pages :func:`write_report` makes for ``content``, in order."""
    return [title for title, _ in _page_plan(content)]


def _page_plan(content):
    """The pages as ``(title, draw)``; ``draw(fig, content, units)`` returns the page's pictures.

    A picture is ``(name, [axes...])``: what ``--png`` writes on its own. Everything that does not fit
    on a page continues on the next one (line profiles, the residual histogram, the pass table).
    """
    plan = [("Summary", _page_summary), ("Surface map", _page_map)]
    if content.local is not None:
        plan.append(("Local flatness", _page_local))
    per_page = 8
    for k in range(0, len(content.lines), per_page):
        chunk = content.lines[k : k + per_page]
        plan.append((f"Line profiles ({k + 1}-{k + len(chunk)} of {len(content.lines)})",
                     lambda fig, c, u, chunk=chunk: _page_profiles(fig, c, u, chunk)))
    if content.survey is not None:
        together = _histogram_fits_on_layout_page(content)
        plan.append(("Survey layout and closure",
                     lambda fig, c, u, together=together: _page_layout(fig, c, u, histogram=together)))
        if not together and content.residual_um is not None and np.size(content.residual_um):
            plan.append(("Survey layout and closure (continued)", _page_residuals))
    if content.setup is not None:
        plan.append(("Set-up sheet", _page_setup))
    if getattr(content.uncertainty, "budget", None) is not None:
        plan.append(("Uncertainty budget", _page_uncertainty))
    if content.grades:
        plan.append(("Grades and decision rule", _page_grades))
    if content.bearing is not None:
        plan.append(("Air bearing: fitness and carriage motion", _page_bearing))
    if content.lapping is not None and content.lapping.passes:  # target met: one sentence on the summary
        together = _chart_fits_on_lapping_page(content)
        plan.append(("Lapping plan", lambda fig, c, u, together=together: _page_lapping(fig, c, u, chart=together)))
        if not together:
            plan.append(("Lapping plan: bench chart", _page_chart))
        chunks = _pass_pages(content)
        for k, (start, stop, last) in enumerate(chunks):
            title = "Lapping plan: passes" + (f" ({k + 1} of {len(chunks)})" if len(chunks) > 1 else "")
            plan.append((title, lambda fig, c, u, start=start, stop=stop, last=last:
                         _page_passes(fig, c, u, start, stop, last)))
    plan.append(("Methods, sources and cautions", _page_sources))
    from ._certificate_pages import certificate_plan  # with a certificate: its pages first, raw readings last

    return certificate_plan(content, plan, statement=SCOPE_STATEMENT)


def _frame(fig, content, title, page, pages):
    """Header and footer drawn on every page."""
    from . import _plots as plot

    hm = content.heightmap
    ident = dict(content.identity).get("identity", "")
    head = hm.label if not ident or ident == "not stated" else f"{hm.label} · {ident}"
    plot.page_frame(
        fig,
        left_head="FLATNESS REPORT" if content.certificate is None else
        f"CALIBRATION CERTIFICATE {content.certificate.number}",
        right_head=head,
        title=title,
        footer=(
            f"Heights are referred to the {HEIGHT_REFERENCE}. Results apply to the surface as measured; see the "
            "statement on page 1.",
            f"measurement date: {content.date} · report issued {content.issued} · flatcheck",
        ),
        page_text=f"page {page} of {pages}",
    )


def picture_caption(content, what: str) -> tuple:
    """The lines a picture written on its own carries: the surface, its identity, the dates and what it shows."""
    ident = dict(content.identity).get("identity", "")
    surface = content.heightmap.label or dict(content.identity).get("surface", "") or "surface"
    who = surface if not ident or ident == "not stated" else f"{surface} · {ident}"
    return (who, f"measured {content.date} · pictured {content.issued} by flatcheck · {what}")


def _picture_what(name: str, axes, page_title: str) -> str:
    """What a picture shows, in words: its first axes' title, else the page's title."""
    for ax in axes:
        title = ax.get_title(loc="left") or ax.get_title()
        if title:
            return title
    return page_title.lower() if page_title else name.replace("-", " ")


def _slug(text: str) -> str:
    slug = "".join(ch if ch.isalnum() else "-" for ch in text.lower()).strip("-")
    while "--" in slug:
        slug = slug.replace("--", "-")
    return slug


def write_report(path, content: ReportContent, *, units: str = "um", png_dir=None, on_page=None,
                 png_dpi: float = 150) -> ReportFiles:
    """Draw the report's pages and write the PDF (and optionally each picture on its own as PNG).

    Parameters
    ----------
    path : str or Path
        The PDF to write; replaced atomically.
    content : ReportContent
        From :func:`analyse`.
    units : {"um", "in"}
        Display units (µm and mm, or µin and inches).
    png_dir : str or Path, optional
        A folder for the pictures as PNG files (created, with its parents, when missing), each figure alone without the page's header,
        footer, tables or text (``NN-<picture>.png``, NN the page); text-only pages give none.
    on_page : callable, optional
        Called with no argument after each page is drawn (progress).

    Returns
    -------
    ReportFiles

    Raises
    ------
    OutputError
        If a file cannot be written (missing folder, no permission).
    """
    from . import _plots as plot

    if units not in ("um", "in"):
        raise InputValueError(f"unknown display units {units!r}", fix="use 'um' or 'in'")
    path = Path(path)
    if png_dir is not None:  # created as needed, as demo --out does (issue 15, item 11)
        png_dir = Path(png_dir)
        if png_dir.exists() and not png_dir.is_dir():
            raise OutputError(f"cannot write pictures in {png_dir}: it is a file, not a folder",
                              fix="choose a folder for the pictures")
        try:
            png_dir.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise OutputError(f"cannot create the folder {png_dir}: {exc.strerror or exc}",
                              fix="choose a folder you can write to") from None
    plan = _page_plan(content)
    pngs = []
    title = f"Flatness report: {content.heightmap.label}"
    with plot.PdfBook(path, title=title, subject="flatness of a surface as measured") as book:
        for k, (page_title, draw) in enumerate(plan, start=1):
            fig = plot.new_figure()
            pictures = draw(fig, content, units) or []
            if png_dir is not None:  # before the page's head and foot are drawn: the caption sits above the picture
                for name, axes in pictures:
                    caption = picture_caption(content, _picture_what(name, axes, page_title))
                    pngs.append(plot.save_png(fig, png_dir / f"{k:02d}-{_slug(name)}.png", dpi=png_dpi, axes=axes,
                                              caption=caption))
            _frame(fig, content, page_title, k, len(plan))
            book.add(fig)
            if on_page is not None:
                on_page()
    return ReportFiles(path, len(plan), tuple(pngs))
