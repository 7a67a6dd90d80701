"""Report pages of a guideway: the body, its faces, thickness, the carriage's films and motions, the verdict.

``write_guideway_report`` draws A4 portrait pages with the house page frame (:func:`flatcheck.output._plots.page_frame`)
and the house text and table helpers (``flow_table``, ``text_block``), and the guideway's pictures
(``_guideway_plots``) into panels of the pages:

1. the guideway: identity, the verdict with its one-line reason, the checks, the lapping advice and the warnings;
2. the faces side by side (several pages when a body has more than four faces);
3. thickness along the beam (and the height difference of rails) with the tables of parallelism, squareness,
   twist and the tie readings' fit;
4. with a carriage: each pad's film along the travel, and the pads' table;
5. with a carriage: the error motions, film model and quick estimate, against the budget, and the stiffness;
6. methods with their sources, and the cautions.

Text blocks and tables flow down a page and onto the next when they do not fit, so nothing is cut off whatever
the number of faces, pads or checks. Every text the user wrote (identity, face and pad names) is drawn as given:
matplotlib's mathtext is switched off for each text drawn here (``$`` in a name stays a ``$``).
"""

from __future__ import annotations

import datetime as _dt
from dataclasses import dataclass
from pathlib import Path

from ..errors import InputValueError, OutputError

__all__ = ["write_guideway_report", "guideway_report_data", "GuidewayReportFiles", "GUIDEWAY_METHODS"]

_PAGE_IN = (8.27, 11.69)  # A4 portrait, inches (ISO 216: 210 x 297 mm)
_LEFT = 0.06  # page margins as fractions, those of page_frame
_TOP = 0.925
_BOTTOM = 0.065
_FACES_PER_PAGE = 4

#: Methods of the guideway pages with their sources ([M]: from memory, [CP]: common practice, [D]: derived in
#: docs/guideway.md), as docs/guideway.md states them.
GUIDEWAY_METHODS = (
    "Flatness of a face: minimum zone of its stations (ISO 12781-1, MZPL); straightness along the travel: minimum "
    "zone of the face's centre line (ISO 12780-1, MZLI).",
    "Where the faces sit: each face's plane (offset, tilt along, tilt across) fitted to the tie readings (thickness, "
    "height, squareness, twist) by weighted least squares, weights 1/u²; the frame fixed by a datum system, "
    "primary and secondary datum (ISO 5459 [M]); a parameter no tie fixes is named free and held at nominal.",
    "Parallelism and perpendicularity: the ISO 1101 tolerance zones [M], the datum plane being the datum face's "
    "minimum-zone plane (ISO 5459 association [M]); squareness as 90° minus the angle between the outward normals "
    "of the least-squares planes.",
    "Twist: the across slope of a face along the travel, peak to valley over the travel and within any 1000 mm, in "
    "the manner of the local tolerances of ISO 230-1 [M].",
    "Air films: the compressible Reynolds equation with a Darcy feed through a thin porous layer, or orifice feeds "
    "by the isentropic nozzle (docs/methods.md names the sources), solved by finite differences on each pad with Shortley-"
    "Weller edges; steady, isothermal film (docs/methods.md).",
    "The carriage: rigid, in static equilibrium on its films at every station (five motions free, the travel "
    "imposed), solved by Newton's method with the films' exact Jacobians; generalised forces by virtual work [D]. "
    "Error motions as ISO 230-1 names them [M]: straightness by minimum zone, angular motions peak to valley.",
    "Quick estimate: every pad replaced by its film's stiffness at the nominal gap acting on the footprint-averaged "
    "face (pad averaging); shown beside the film model with the largest differences.",
    "Verdict: every check as a ratio to its limit; unfit above 1 or a pad that would touch, marginal from 0.8 (a "
    "convention of this tool); a pad's margin (1 - gap fraction) x gap with a gap fraction of 1/4 by default "
    "[CP, no published ratio].",
    "Lapping advice: the toleranced face is lapped, never its datum; depths below 0.1 µm are not advised (a "
    "convention of this tool); how to lap is common practice [CP].",
)

_DEFER = ("flatcheck's numbers do not make lifting, lapping or air work safe: local codes, the employer's procedures "
          "and licensed practice take precedence over anything in this report.")


@dataclass(frozen=True)
class GuidewayReportFiles:
    """What :func:`write_guideway_report` wrote: the PDF, its page count and titles, and any PNG pages."""

    pdf: Path
    pages: int
    titles: tuple
    pngs: tuple = ()


def _plain(fig):
    """Switch mathtext off for every text of ``fig`` (user text such as names is drawn literally)."""
    for t in fig.findobj(lambda a: hasattr(a, "set_parse_math")):
        t.set_parse_math(False)


def _h(v, units, step_um=None):
    """A height with its unit, to the step the body's faces resolve (the summary's ``height_step_um``)."""
    from ..units import format_height

    try:
        v = float(v)
    except (TypeError, ValueError):
        return "–"
    return "–" if v != v else format_height(v, units, step_um=step_um)


def _step(data: dict):
    """The height step the body's faces resolve (None: 1 nm)."""
    return data.get("height_step_um")


def _n(v, digits=2):
    try:
        v = float(v)
    except (TypeError, ValueError):
        return "–"
    return "–" if v != v else f"{v:.{digits}f}"


class _Flow:
    """Blocks laid down a page top-down; a block that does not fit starts a new page with the same title."""

    def __init__(self, pages, title):
        self.pages = pages
        self.title = title
        self.fig = None
        self.y_in = 0.0

    def _new(self):
        from ._plots import new_figure

        self.fig = new_figure(_PAGE_IN)
        self.pages.append((self.title, self.fig))
        self.y_in = _TOP * _PAGE_IN[1]

    def space(self, height_in):
        """A rectangle (figure fractions) of ``height_in`` below what is drawn, on a new page when needed."""
        bottom = _BOTTOM * _PAGE_IN[1]
        if self.fig is None or (self.y_in - height_in < bottom and self.y_in < _TOP * _PAGE_IN[1] - 1e-9):
            self._new()
        height_in = min(height_in, self.y_in - bottom)
        rect = (_LEFT, (self.y_in - height_in) / _PAGE_IN[1], 1 - 2 * _LEFT, height_in / _PAGE_IN[1])
        self.y_in -= height_in
        return rect

    def gap(self, height_in):
        self.y_in -= height_in

    def table(self, rows, *, col_x, col_labels=None, title=None, wrap_chars=None, fontsize=8.0, bold_cols=()):
        from ._plots import flow_table, flow_table_height_in

        # one table may run over pages: split its rows so that each part fits
        rows = list(rows)
        first = True
        while True:
            avail = (self.y_in - _BOTTOM * _PAGE_IN[1]) if self.fig is not None else 0.0
            k = len(rows)
            while k > 0 and flow_table_height_in(rows[:k], col_labels=col_labels, fontsize=fontsize,
                                                 title=title if first else None, wrap_chars=wrap_chars) > avail:
                k -= 1
            if k == 0 and (self.fig is None or self.y_in < _TOP * _PAGE_IN[1] - 1e-9):
                self._new()
                continue
            k = max(k, 1)
            part = rows[:k]
            h = flow_table_height_in(part, col_labels=col_labels, fontsize=fontsize,
                                     title=title if first else None, wrap_chars=wrap_chars)
            rect = self.space(h)  # first: it may start a new page
            ax = self.fig.add_axes(rect)
            flow_table(ax, 1.0, part, col_x=col_x, col_labels=col_labels, fontsize=fontsize,
                       title=title if first else None, wrap_chars=wrap_chars, bold_cols=bold_cols)
            rows = rows[k:]
            first = False
            if not rows:
                return

    def text(self, lines, *, fontsize=8.5, wrap_chars=100):
        from ._plots import text_block, text_block_height_in

        # paragraph by paragraph, so that a long list runs onto the next page; a heading keeps its first paragraph
        blocks, lines = [], list(lines)
        while lines:
            item = lines.pop(0)
            heading = not isinstance(item, str) and item[1] == "h"
            blocks.append([item] + ([lines.pop(0)] if heading and lines else []))
        for block in blocks:
            h = text_block_height_in(block, fontsize=fontsize, wrap_chars=wrap_chars)
            rect = self.space(h)  # first: it may start a new page
            ax = self.fig.add_axes(rect)
            text_block(ax, block, fontsize=fontsize, wrap_chars=wrap_chars)


def _panels(n, total_in, *, left=0.09, width=0.84, top_pad_in=0.32, gap_in=0.55, bottom_in=0.45, y_top_in=None):
    """``n`` panel rectangles (figure fractions) stacked in ``total_in`` inches from ``y_top_in`` down."""
    H = _PAGE_IN[1]
    y = (_TOP * H if y_top_in is None else y_top_in) - top_pad_in
    panel_in = (total_in - top_pad_in - bottom_in - (n - 1) * gap_in) / n
    rects = []
    for _ in range(n):
        rects.append((left, (y - panel_in) / H, width, panel_in / H))
        y -= panel_in + gap_in
    return rects


def _page_summary(pages, data, units, body_file, carriage_file, issued):
    g = data["guideway"]
    flow = _Flow(pages, "Guideway")
    c = data["carriage"]
    ident = [
        ("guideway", g["ident"]),
        ("description", g["description"] or "not stated"),
        ("length", f"{g['length_mm']:g} mm"),
        ("material", g["material"] or "not stated"),
        ("datum face", g["datum"] or f"{data['faces'][0]['name']} (the first face)"),
        ("body file", str(body_file)),
        ("faces", "; ".join(f"{f['name']} ({f['normal']}): {f['survey']}, {f['n_points']} points"
                            for f in data["faces"])),
    ]
    if c is not None:
        film = c["film"]
        feed = (f"porous, k {film['permeability_m2']:g} m², layer {film['layer_mm']:g} mm" if film["kind"] == "porous"
                else f"orifice Ø{film['orifice_mm']:g} mm x {film['orifices']}")
        ident += [
            ("carriage file", str(carriage_file)),
            ("carriage", f"{c['label'] or 'not named'}: {len(c['pads'])} pads "
                         f"({'on ball pivots' if c['pivot'] else 'fixed'}), load {c['load_n']:.0f} N "
                         f"(design load {c['design_load_n']:.0f} N)"),
            ("film", f"{feed}, supply {film['supply_kpa_gauge']:g} kPa gauge; mesh {c['mesh_cells']} cells a side"),
            ("travel", f"{c['stations']} stations, x = {c['x_from_mm']:.0f} to {c['x_to_mm']:.0f} mm, step "
                       f"{c['step_mm']:.1f} mm"),
        ]
    ident.append(("report issued", f"{issued} by flatcheck"))
    flow.table(ident, col_x=(0.0, 0.2), wrap_chars=(None, 92), bold_cols=(0,), fontsize=8.5)
    flow.gap(0.1)
    if data["verdict"] is None:
        flow.text([("Verdict: none", "h"), data["reason"] + " (give --carriage CARRIAGE.toml for a verdict)"])
    else:
        flow.text([(f"Verdict: {data['verdict'].upper()}", "h"), (data["reason"], "b")], fontsize=10, wrap_chars=85)
        rows = []
        for ch in data["checks"]:
            if ch["unit"] == "um":
                val, lim = _h(ch["value"], units, _step(data)), _h(ch["limit"], units, _step(data))
            else:
                val, lim = f"{_n(ch['value'])} arcsec", f"{_n(ch['limit'])} arcsec"
            ratio = "–" if ch["ratio"] is None or ch["ratio"] != ch["ratio"] or ch["ratio"] == float("inf") \
                else f"{100 * ch['ratio']:.0f} %"
            rows.append((ch["name"], val, lim, ratio, ch["status"], ch["where"] or ""))
        flow.gap(0.08)
        flow.table(rows, col_x=(0.0, 0.40, 0.52, 0.64, 0.73, 0.82),
                   col_labels=("check", "result", "limit", "of limit", "status", "where"),
                   wrap_chars=(52, None, None, None, None, 22), title="Checks", fontsize=7.5)
    if data["advice"]:
        flow.text([("Lapping advice", "h")] + [f"• {a['text']}" for a in data["advice"]], wrap_chars=108)
    warnings = list(data["warnings"]) + ([] if c is None else list(c["warnings"]))
    if warnings:
        flow.text([("Warnings", "h")] + [f"• {w}" for w in warnings], wrap_chars=108)
    if data["notes"]:  # the carriage's notes (the film model's cost) are on the motions page
        flow.text([("Notes", "h")] + [(f"• {n}", "s") for n in data["notes"]], wrap_chars=108)


def _pages_faces(pages, geometry, result):
    from ._guideway_plots import faces_figure

    faces = list(geometry.faces)
    chunks = [faces[i:i + _FACES_PER_PAGE] for i in range(0, len(faces), _FACES_PER_PAGE)]
    for k, chunk in enumerate(chunks):
        flow = _Flow(pages, "Faces side by side" + (f" ({k + 1} of {len(chunks)})" if len(chunks) > 1 else ""))
        total = (_TOP - _BOTTOM) * _PAGE_IN[1]
        flow.space(total)
        rects = _panels(len(chunk), total, left=0.11, width=0.80, gap_in=0.62, bottom_in=0.55)
        faces_figure(_FacesView(geometry, chunk), carriage=result, fig=flow.fig, rects=rects)


class _FacesView:
    """A body geometry seen through some of its faces (for a page of faces)."""

    def __init__(self, geometry, faces):
        self._g = geometry
        self.faces = tuple(faces)

    def __getattr__(self, name):
        return getattr(self._g, name)


def _pages_thickness(pages, geometry, data, units):
    from ._guideway_plots import panel_counts, thickness_figure

    flow = _Flow(pages, "Thickness along the beam and the body's geometry")
    n = panel_counts(geometry)["thickness"]
    total = min(2.1 * n + 0.4, 0.55 * (_TOP - _BOTTOM) * _PAGE_IN[1])
    flow.space(total)
    rects = _panels(n, total, left=0.09, width=0.84, gap_in=0.6)
    thickness_figure(geometry, fig=flow.fig, rects=rects)
    flow.gap(0.15)
    if data["parallelism"]:
        rows = []
        for p in data["parallelism"]:
            zone = p["zone"] + (f" at {p['across_mm']:g} mm across" if p["zone"] == "line" else "")
            rows.append((p["faces"][0], p["faces"][1], _h(p["value_um"], units, _step(data)), zone))
        flow.table(rows, col_x=(0.0, 0.25, 0.5, 0.68), col_labels=("face", "datum", "zone width", "zone"),
                   title="Parallelism (ISO 1101; datum: minimum-zone plane of the datum face)")
    if data["squareness"]:
        rows = []
        for s in data["squareness"]:
            if s["determined"]:
                u = s["u_urad"] * 0.206265 if s["u_urad"] == s["u_urad"] else None  # µrad -> arcsec
                rows.append((s["faces"][0], s["faces"][1], f"{_n(s['angle_arcsec'])} arcsec", f"{_n(u)} arcsec",
                             _h(s["value_um"], units, _step(data))))
            else:
                rows.append((s["faces"][0], s["faces"][1], "free (no tie fixes it)", "", ""))
        flow.table(rows, col_x=(0.0, 0.22, 0.44, 0.64, 0.78),
                   col_labels=("face", "datum", "angle", "± u", "perpendicularity zone"),
                   title="Squareness (90° − angle between outward normals; + = open corner)")
    if data["twist"]:
        rows = [(" / ".join(t["faces"]), t["source"], f"{_n(t['twist_urad'], 1)} µrad",
                 f"{_n(t['twist_per_m_urad'], 1)} µrad") for t in data["twist"]]
        flow.table(rows, col_x=(0.0, 0.3, 0.55, 0.77), col_labels=("faces", "from", "over the travel", "within 1 m"),
                   title="Twist (change of the across slope along the travel)")
    if data["rails"]:
        rows = [(f"{r['faces'][0]} / {r['faces'][1]}", f"{_h(r['height_difference_min_um'], units, _step(data))} to "
                 f"{_h(r['height_difference_max_um'], units, _step(data))}", f"{_n(r['twist_urad'], 1)} µrad")
                for r in data["rails"]]
        flow.table(rows, col_x=(0.0, 0.4, 0.72), col_labels=("rails", "height difference", "twist between them"),
                   title="Rails")
    t = data["ties"]
    if t["count"]:
        flow.text([("Tie readings", "h"),
                   f"{t['count']} readings, redundancy {t['redundancy']}; residuals {_n(t['rms_normalized'])} (RMS) "
                   f"and {_n(t['max_normalized'])} (largest) standard uncertainties."])
    else:
        flow.text([("Tie readings", "h"), "none: every face but the datum is free."])


def _pages_films(pages, result, data, units):
    from ._guideway_plots import films_figure

    c = data["carriage"]
    flow = _Flow(pages, "Pad films along the travel")
    n = len({p.face for p in result.pads})
    total = min(1.9 * n + 0.6, 0.62 * (_TOP - _BOTTOM) * _PAGE_IN[1])
    flow.space(total)
    rects = _panels(n, total, left=0.09, width=0.58, gap_in=0.55)
    films_figure(result, fig=flow.fig, rects=rects)
    flow.gap(0.1)
    rows = []
    for p in c["pads"]:
        least = "touches" if p["touches_at_mm"] else _h(p["min_film_um"], units, _step(data))
        at = "–" if p["min_film_x_mm"] != p["min_film_x_mm"] else f"{p['min_film_x_mm']:.0f}"
        rows.append((p["name"], p["face"], _h(p["gap_um"], units, _step(data)), least, at, _h(p["margin_um"], units, _step(data)),
                     _h(p["quick_min_film_um"], units, _step(data)), f"{_n(p['load_min_n'], 0)}–{_n(p['load_max_n'], 0)}",
                     _h(p["local_flatness_max_um"], units, _step(data))))
    flow.table(rows, col_x=(0.0, 0.17, 0.31, 0.41, 0.52, 0.60, 0.70, 0.80, 0.91),
               col_labels=("pad", "face", "gap", "least film", "at x mm", "margin", "quick", "load N", "local form"),
               wrap_chars=(18, 14, None, None, None, None, None, None, None),
               title="Pads (film model; quick = pad-averaging estimate; local form: minimum zone under the pad)",
               fontsize=7.0)


def _pages_motions(pages, result, data, budget, units):
    from ._guideway_plots import motions_figure

    c = data["carriage"]
    flow = _Flow(pages, "Error motions of the carriage")
    n = max(1, sum(1 for r in ("vertical", "horizontal", "pitch", "yaw", "roll") if r in result.motion.held))
    total = min(1.45 * n + 0.6, 0.6 * (_TOP - _BOTTOM) * _PAGE_IN[1])
    flow.space(total)
    rects = _panels(n, total, left=0.10, width=0.84, gap_in=0.5)
    motions_figure(result, fig=flow.fig, rects=rects)
    flow.gap(0.1)
    m, q, d = c["motion"], c["quick_estimate"], c["difference"]
    rows = []
    spec = (("vertical straightness", "vertical_straightness_um", "vertical_um", "um"),
            ("horizontal straightness", "horizontal_straightness_um", "horizontal_um", "um"),
            ("pitch", "pitch_arcsec", "pitch_arcsec", "arcsec"),
            ("yaw", "yaw_arcsec", "yaw_arcsec", "arcsec"),
            ("roll", "roll_arcsec", "roll_arcsec", "arcsec"))
    for label, key, dkey, unit in spec:
        lim = budget.get(key) if budget else None
        if m[key] is None or m[key] != m[key]:
            rows.append((label, "free (no pad holds it)", "", "", ""))
        elif unit == "um":
            rows.append((label, _h(m[key], units, _step(data)), _h(q[key], units, _step(data)), _h(d[dkey], units, _step(data)),
                         "not given" if lim is None else _h(lim, units, _step(data))))
        else:
            rows.append((label, f"{_n(m[key])} arcsec", f"{_n(q[key])} arcsec", f"{_n(d[dkey])} arcsec",
                         "not given" if lim is None else f"{_n(lim)} arcsec"))
    flow.table(rows, col_x=(0.0, 0.28, 0.45, 0.62, 0.82),
               col_labels=("motion (ISO 230-1)", "film model", "quick estimate", "largest difference", "budget"),
               title="Error motions over the travel (straightness: minimum zone; angles: peak to valley)")
    s = c["stiffness"]
    flow.text([("Stiffness (the other motions free to follow; least to greatest over the travel)", "h"),
               f"vertical {_n(s['vertical_n_per_um']['min'], 0)}–{_n(s['vertical_n_per_um']['max'], 0)} N/µm, "
               f"horizontal {_n(s['horizontal_n_per_um']['min'], 0)}–{_n(s['horizontal_n_per_um']['max'], 0)} N/µm, "
               f"roll {_n(s['roll_nm_per_urad']['min'])}, pitch {_n(s['pitch_nm_per_urad']['min'])}, yaw "
               f"{_n(s['yaw_nm_per_urad']['min'])} N·m/µrad (least).",
               (f"{c['film_solutions']} film solutions, {c['solutions_per_pad_station']:.2f} per pad per station.",
                "s")])


def _page_methods(pages, data):
    flow = _Flow(pages, "Methods, sources and cautions")
    lines = [("Methods and their sources", "h")] + [f"• {m}" for m in GUIDEWAY_METHODS]
    lines.append(("Marks: [M] a source recalled from memory, not checked against its text; [CP] common practice, no "
                  "single source; [D] derived in docs/guideway.md.", "s"))
    if data["carriage"] is not None:
        lines.append(("Film model assumptions", "h"))
        lines += [(f"• {a}", "s") for a in data["carriage"]["film"]["assumptions"]]
    lines.append(("Cautions", "h"))
    lines += [f"• {s}" for s in data["safety"]]
    lines.append(f"• {_DEFER}")
    lines.append(("Scope", "h"))
    lines.append("Results apply to the guideway as measured, with the readings and the carriage named on page 1; "
                 "the model's cautions (rigid carriage, pads and body; static film) are in docs/guideway.md.")
    flow.text(lines, fontsize=8.5, wrap_chars=105)


def guideway_report_data(body, geometry, result=None, verdict=None, advice=(), safety=()) -> dict:
    """The plain summaries the pages draw from (those of ``flatcheck guideway --json``)."""
    from ..guideway import guideway_summary

    return guideway_summary(body, geometry, result, verdict, advice, safety)


def write_guideway_report(path, body, geometry, result=None, verdict=None, advice=(), safety=(), *,
                          units: str = "um", body_file=None, carriage_file=None, issued=None, png_dir=None,
                          png_dpi: float = 110, on_page=None) -> GuidewayReportFiles:
    """Draw a guideway's report pages and write them as one PDF (atomically), and optionally each page as PNG.

    Parameters
    ----------
    path : str or Path
        The PDF to write; replaced only when every page is drawn.
    body : GuidewayBody
    geometry : BodyGeometry
    result : WrapResult, optional
        The carriage along the travel; without it there are no film or motion pages and no verdict.
    verdict : GuidewayVerdict, optional
    advice : sequence of LappingAdvice
    safety : sequence of str
        The cautions (:func:`flatcheck.safety.cautions_for`).
    units : {"um", "in"}
        Heights in the tables in µm or µin (the pictures are in µm and mm).
    body_file, carriage_file : str or Path, optional
        The files as given, for the identity.
    issued : str, optional
        The date of issue (default: today, ISO 8601).
    png_dir : str or Path, optional
        An existing folder for each page as ``guideway-page-NN.png``.
    png_dpi : float
        Resolution of those PNG pages.
    on_page : callable, optional
        Called with no argument after each page is written (progress).

    Returns
    -------
    GuidewayReportFiles

    Raises
    ------
    InputValueError
        Unknown display units.
    OutputError
        A file cannot be written, or ``png_dir`` is not a folder.
    """
    from ._plots import PdfBook, page_frame, save_png

    if units not in ("um", "in"):
        raise InputValueError(f"unknown display units {units!r}", fix="use 'um' or 'in'")
    if png_dir is not None and not Path(png_dir).is_dir():
        raise OutputError(f"{png_dir} is not a folder", fix="create the folder or give another")
    issued = issued or _dt.date.today().isoformat()
    data = guideway_report_data(body, geometry, result, verdict, advice, safety)
    pages = []
    _page_summary(pages, data, units, body_file if body_file is not None else body.source, carriage_file, issued)
    _pages_faces(pages, geometry, result)
    _pages_thickness(pages, geometry, data, units)
    if result is not None:
        _pages_films(pages, result, data, units)
        _pages_motions(pages, result, data, _budget_dict(result), units)
    _page_methods(pages, data)
    g = data["guideway"]
    head = g["ident"] + (f" · {g['description']}" if g["description"] else "")
    verdict_text = "no verdict (no carriage)" if data["verdict"] is None else f"verdict: {data['verdict']}"
    pngs = []
    title = f"Guideway report: {g['ident']}"
    with PdfBook(path, title=title, subject="a guideway and its carriage as measured") as book:
        for k, (page_title, fig) in enumerate(pages, start=1):
            page_frame(fig, left_head="GUIDEWAY REPORT", right_head=head[:90], title=page_title,
                       footer=(f"Heights outward from the material ({'µin' if units == 'in' else 'µm'} in the "
                               "tables, µm in the pictures); x in mm along the travel from the files' common origin.",
                               f"{verdict_text} · report issued {issued} · flatcheck"),
                       page_text=f"page {k} of {len(pages)}")
            _plain(fig)
            book.add(fig)
            if png_dir is not None:
                pngs.append(save_png(fig, Path(png_dir) / f"guideway-page-{k:02d}.png", dpi=png_dpi))
            if on_page is not None:
                on_page()
    return GuidewayReportFiles(Path(path), len(pages), tuple(t for t, _ in pages), tuple(pngs))


def _budget_dict(result) -> dict:
    """The carriage's budget of error motions as ``{json key: limit}`` (µm, arcsec); empty when none is given."""
    return {key: limit for key, limit, _ in result.carriage.budget.items()}
