"""The report's pages about the survey: the layout and closure of the lines walked, the residual
histogram, the set-up sheet, and the uncertainty budget.

Drawn, like every page, from a :class:`ReportContent` (:mod:`._report_content`) with the page geometry
and formatting helpers of :mod:`._report_pages`; :mod:`._report` decides which of these pages a report
has (a height-map input has none of them). matplotlib is reached only inside the drawing functions,
through :mod:`._plots`.
"""

from __future__ import annotations

import numpy as np

from ._report_content import _h, _in_units
from ._report_pages import _BOTTOM, _PLAN_RECT_LEFT, _TEXT_FS, _TOP, _num, _pos


def _layout_rows(c, units):
    rows = []
    for ln in c.lines:
        closure = "" if ln.closure_um is None else _h(ln.closure_um, units, c.height_step_um) + (
            f" at {ln.closure_station}" if ln.closure_station else "")
        rows.append((ln.name, _pos(ln.s_mm[-1], units), f"{len(ln.s_mm) - 1}",
                     "" if ln.rms_residual_um is None else _h(ln.rms_residual_um, units, c.height_step_um),
                     "" if ln.run_spread_um is None else _h(ln.run_spread_um, units, c.height_step_um),
                     closure, _h(ln.straightness_um, units, c.height_step_um)))
    return rows


def _layout_notes(c):
    notes = ["rms residual: readings minus the adjusted surface, per line. run spread: largest difference between "
             "the end-to-end rises of the runs of a line walked more than once. straightness: minimum zone of the "
             "line's station heights (ISO 12780-1)."]
    meanings = sorted({ln.closure_meaning for ln in c.lines if ln.closure_meaning})
    notes += [f"closure: {m}." for m in meanings]
    return [(t, "s") for t in notes]


_LAYOUT_COLS = dict(col_x=(0.0, 0.13, 0.25, 0.33, 0.49, 0.64, 0.84), fontsize=_TEXT_FS,
                    col_labels=("line", "length", "steps", "rms residual", "run spread", "closure", "straightness"),
                    title="Lines")
_HISTOGRAM_IN = 2.1  # height of the residual histogram with its title and labels (inches)


def _layout_plan_bottom(c, fig) -> float:
    """Figure fraction where the survey plan (with its x label) ends; draws the plan's axes on ``fig``."""
    from . import _plots as plot

    sv = c.survey
    box = (0.0, sv.surface.length_mm, 0.0, sv.surface.width_mm) if sv.surface.length_mm and sv.surface.width_mm \
        else tuple(float(v) for v in c.heightmap.extent_mm)
    (ax,), bottom = plot.plan_panels(fig, 1, 1, plot.plan_ratio(box), (_PLAN_RECT_LEFT, _BOTTOM, 0.94, _TOP),
                                     max_height_in=4.2, right_in=0.2)
    return ax, bottom


def _histogram_fits_on_layout_page(c) -> bool:
    """Whether the residual histogram fits below the plan, the table of lines and its notes."""
    from . import _plots as plot

    if c.residual_um is None or not np.size(c.residual_um):
        return True
    scratch = plot.new_figure()
    _, bottom = _layout_plan_bottom(c, scratch)
    used = plot.flow_table_height_in(_layout_rows(c, "um"), col_labels=_LAYOUT_COLS["col_labels"],
                                     fontsize=_TEXT_FS, title="Lines")
    used += plot.text_block_height_in(_layout_notes(c), fontsize=_TEXT_FS, wrap_chars=110)
    free = (bottom - 0.02 - _BOTTOM) * scratch.get_figheight() - used
    return free >= _HISTOGRAM_IN


def _page_layout(fig, c, units, histogram=None):
    """Plan of the lines walked, the table of lines, and the residual histogram when it fits (``None``: if it fits)."""
    from . import _plots as plot

    if histogram is None:
        histogram = _histogram_fits_on_layout_page(c)
    sv = c.survey
    index = {s.name: i for i, s in enumerate(sv.stations)}
    lines = [(ln.name, np.array([index[s] for s in ln.stations])) for ln in sv.lines]
    notes = {ln.name: f"closure {_h(ln.closure_um, units, c.height_step_um)}" for ln in c.lines if ln.closure_um is not None}
    ax, bottom = _layout_plan_bottom(c, fig)
    plot.survey_layout(ax, np.column_stack([sv.x_mm, sv.y_mm]), lines, step_um=c.height_step_um, length_mm=sv.surface.length_mm,
                       width_mm=sv.surface.width_mm, line_notes=notes, units=units,
                       station_names=[st.name for st in sv.stations],
                       title="lines walked (arrow: towards the line's last station)")
    fh = fig.get_figheight()
    tax = fig.add_axes([0.06, _BOTTOM, 0.88, bottom - 0.02 - _BOTTOM])
    y = plot.flow_table(tax, 1.0, _layout_rows(c, units), **_LAYOUT_COLS)
    y = plot.text_block(tax, _layout_notes(c), y0=y, fontsize=_TEXT_FS, wrap_chars=110)
    pictures = [("survey-layout", [ax])]
    if histogram and c.residual_um is not None and np.size(c.residual_um):
        top = _BOTTOM + (bottom - 0.02 - _BOTTOM) * y - 0.4 / fh  # below the notes, with room for the title
        height = (_HISTOGRAM_IN - 0.8) / fh
        hax = fig.add_axes([0.14, max(top - height, _BOTTOM + 0.45 / fh), 0.5, height])
        plot.residual_histogram(hax, c.residual_um, units=units)
        pictures.append(("reduction-residuals", [hax]))
    return pictures


def _page_residuals(fig, c, units):
    """The residual histogram when it did not fit under the table of lines."""
    from . import _plots as plot

    fh = fig.get_figheight()
    hax = fig.add_axes([0.14, _TOP - (_HISTOGRAM_IN + 0.6) / fh, 0.6, (_HISTOGRAM_IN + 0.3) / fh])
    plot.residual_histogram(hax, c.residual_um, units=units,
                            title="reduction residuals (readings minus the adjusted surface)")
    return [("reduction-residuals", [hax])]


#: Columns of the set-up table: with the autocollimator's place and distances, and without (an instrument that walks).
_SETUP_COLS = dict(col_x=(0.0, 0.04, 0.12, 0.255, 0.35, 0.47, 0.77, 0.95), fontsize=_TEXT_FS,
                   wrap_chars=(None, None, None, 12, None, 40, None, None))
_SETUP_COLS_WALKING = dict(col_x=(0.0, 0.05, 0.17, 0.32, 0.62, 0.78), fontsize=_TEXT_FS)


def _setup_rows(c, units):
    """One row per line of the set-up sheet, in the order to read them."""
    rows = []
    for ln in c.setup.lines:
        runs = " + ".join("back" if r == "reverse" else r for r in ln.runs)
        at = dist = "-"
        if ln.instrument_mm is not None:
            at = (f"{_num(ln.instrument_mm[0], units)}, {_num(ln.instrument_mm[1], units)} "
                  f"({'on the surface' if ln.on_surface else 'on a stand beside it'})")
            dist = f"{_num(ln.distance_mm[0], units)} to {_num(ln.distance_mm[1], units)}"
        row = (str(ln.order), ln.line, runs, f"{ln.start} to {ln.end}", _num(ln.length_mm, units), at, dist,
               f"{ln.minutes:.0f}")
        rows.append(row if c.setup.instrument == "autocollimator" else row[:5] + row[7:])
    return rows


def _setup_text(c, units) -> list:
    """The set-up sheet's notes: the instrument, the time, the supports, the soak and the lifting caution."""
    from ..safety import lifting_caution

    s = c.setup
    kind = s.instrument
    lines = []
    if kind == "autocollimator":
        first = s.lines[0]
        behind = first.distance_mm[0] - first.foot_spacing_mm / 2.0  # the mirror's centre is half a base on
        lines.append(f"The autocollimator stands on each line's extension, {_pos(behind, units)} behind its first "
                     "station (squares on the plan), aimed along the line; its working range must cover the distances "
                     "to the mirror.")
    elif kind == "level":
        lines.append("The level walks each line itself, its feet on successive stations.")
    elif kind == "differential-level":
        lines.append("The moving level walks each line; the reference level stays on one spot, off the lines, for the "
                     "whole survey.")
    else:
        lines.append("The indicator's stand rides the reference surface; touch each station in turn.")
    hours, minutes = divmod(int(round(s.minutes)), 60)
    lines.append(f"Time: about {hours} h {minutes:02d} min for {s.readings} readings ({s.pace.seconds_per_reading:g} s "
                 f"a reading, {s.pace.minutes_per_line:g} min to set up a line, {s.pace.minutes_per_extra_run:g} min "
                 "for each further run: illustrative figures, common practice, no single source); soak not included.")
    pts = "; ".join(f"({_num(x, units)}, {_num(y, units)})" for x, y in s.three_point_mm)
    lines.append(f"{s.notes[0]} Three points, x, y (triangles 1-3 on the plan): {pts}.")
    b = s.beam
    if b is not None:
        lines.append(
            f"Long beam on two supports: least self-weight bow with them {_pos(b.least_bow_from_end_mm, units)} from "
            f"each end; Airy points {_pos(b.airy_from_end_mm, units)} from each end ({_pos(b.airy_spacing_mm, units)} "
            f"apart, end faces vertical); Bessel points {_pos(b.bessel_from_end_mm, units)} from each end "
            f"({_pos(b.bessel_spacing_mm, units)} apart, least change of length). Sources: " + "; ".join(b.sources) + ".")
    lines += [_in_units(n, units) for n in s.notes[1:] if not n.startswith("Long beam")]
    if s.mass_kg is not None:
        lines.append(f"Mass of the surface as granite (2600-2800 kg/m³): {s.mass_kg[0]:.0f}-{s.mass_kg[1]:.0f} kg.")
    material = c.survey.surface.material if c.survey is not None else ""
    return [(t, "s") for t in lines] + [("Caution", "h"), (lifting_caution(material), "b")]


def _page_setup(fig, c, units):
    """The set-up sheet of the survey: supports and instrument places on the outline, the lines in order, the notes."""
    from . import _plots as plot

    s = c.setup
    sv = c.survey
    L, W = float(sv.surface.length_mm), float(sv.surface.width_mm)
    fh = fig.get_figheight()
    intro = [("How this survey is set up, line by line, for the next survey of this surface as for this one: where "
              "the surface stands, where the instrument stands, in what order the lines are read and how long it "
              "takes. x from the west edge, y from the south edge.", "s")]
    intro_in = plot.text_block_height_in(intro, fontsize=_TEXT_FS, wrap_chars=110)
    tax = fig.add_axes([0.06, _TOP - intro_in / fh, 0.88, intro_in / fh])
    plot.text_block(tax, intro, fontsize=_TEXT_FS, wrap_chars=110)
    instruments = [(ln.line, ln.instrument_mm[0], ln.instrument_mm[1]) for ln in s.lines
                   if ln.instrument_mm is not None]
    xs = [0.0, L] + [x for _, x, _ in instruments]
    ys = [0.0, W] + [y for _, _, y in instruments]
    box = (min(xs), max(xs), min(ys), max(ys))
    (ax,), bottom = plot.plan_panels(fig, 1, 1, plot.plan_ratio(box),
                                     (_PLAN_RECT_LEFT, _BOTTOM, 0.94, _TOP - intro_in / fh - 0.005),
                                     max_height_in=3.4, right_in=0.3, top_in=0.35)
    plot.support_plan(ax, L, W, three_point_mm=s.three_point_mm, beam=s.beam,
                      stations_xy_mm=np.column_stack([sv.x_mm, sv.y_mm]), instruments=instruments, units=units,
                      title="supports (triangles), " + ("instrument places (squares) and " if instruments else "")
                      + "stations")
    pu = "in" if units == "in" else "mm"
    yax = fig.add_axes([0.06, _BOTTOM, 0.88, bottom - 0.02 - _BOTTOM])
    if instruments:
        cols = dict(_SETUP_COLS, col_labels=("#", "line", "runs", "walk", f"length ({pu})",
                                             f"instrument at x, y ({pu})", f"to the mirror ({pu})", "min"))
    else:
        cols = dict(_SETUP_COLS_WALKING, col_labels=("#", "line", "runs", "walk", f"length ({pu})", "min"))
    y = plot.flow_table(yax, 1.0, _setup_rows(c, units), title="Lines in the order to read them", **cols)
    plot.text_block(yax, _setup_text(c, units), y0=y, fontsize=_TEXT_FS, wrap_chars=110)
    return [("setup-supports", [ax])]


def _page_uncertainty(fig, c, units):
    """The uncertainty budget: one row per source (value, distribution, basis, contribution), then u, U, and a
    bar chart of the contributions."""
    from . import _plots as plot
    from ..units import format_with_uncertainty

    b = c.uncertainty.budget
    mz = b.minimum_zone
    tax = fig.add_axes([0.06, 0.27, 0.88, 0.65])
    rows = []
    for e in b.entries:
        if not e.applies:
            value = "-"
        elif e.unit == "relative":
            value = f"{e.value * 100:.3g} %"
        elif e.unit in ("µm", "um"):
            value = _h(e.value, units, c.height_step_um)
        else:
            value = f"{e.value:.3g} {e.unit}"
        contrib = format_with_uncertainty(e.standard_uncertainty_um, b.combined_um or 1.0, units)[0]
        rows.append((e.name + (" (default)" if e.default and e.applies else ""), value,
                     e.distribution.split(";")[0], _in_units(e.basis, units), contrib))
    y = plot.flow_table(tax, 1.0, rows, col_x=(0.0, 0.2, 0.33, 0.5, 0.9),
                        col_labels=("source", "input", "distribution", "basis", "u"), title="Sources and contributions",
                        wrap_chars=(26, 18, 26, 64, None), fontsize=6.3)
    v_txt, U_txt = format_with_uncertainty(mz.estimate_um, b.expanded_um, units)
    lo, hi = b.interval_um
    lo_txt, _ = format_with_uncertainty(lo, b.expanded_um, units)
    hi_txt, _ = format_with_uncertainty(hi, b.expanded_um, units)
    _, uc_txt = format_with_uncertainty(mz.estimate_um, b.combined_um, units)
    summary = [("minimum-zone flatness F", v_txt), ("combined standard uncertainty u", uc_txt),
               ("expanded uncertainty U", f"{U_txt} (coverage factor {b.coverage_factor:.2f})"),
               ("95 % coverage interval", f"{lo_txt} to {hi_txt}, corrected for the noise bias "
                f"({format_with_uncertainty(mz.bias_um, b.combined_um or 1.0, units)[0]} estimated)"),
               ("Monte Carlo", f"{mz.trials} trials together, {b.contribution_trials} per source alone, seed {mz.seed}")]
    y = plot.flow_table(tax, y, summary, col_x=(0.0, 0.35), bold_cols=(1,), fontsize=6.8)
    notes = ["Each contribution is the standard deviation of the minimum zone with that source alone propagated "
             "through the reduction (JCGM 101:2008); u comes from all sources together. Rows marked (default) rest "
             "on values the survey file does not state: state them (docs/survey-format.md) for a firmer U."]
    notes += [_in_units(n, units) for n in b.notes]
    plot.text_block(tax, [(t, "s") for t in notes], y0=y, fontsize=6.5, wrap_chars=150)
    ax = fig.add_axes([0.30, 0.12, 0.62, 0.22])
    plot.budget_bars(ax, [e.name for e in b.entries], [e.standard_uncertainty_um for e in b.entries],
                     [e.default and e.applies for e in b.entries], combined_um=b.combined_um, units=units)
    return [("uncertainty-budget", [ax])]
