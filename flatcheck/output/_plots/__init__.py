"""Pictures of surfaces, surveys, bearings and lapping plans (one private module per kind of picture).

This is the only module of flatcheck that imports matplotlib. Every figure is a
plain :class:`matplotlib.figure.Figure` drawn by the Agg backend (attached
explicitly, so pyplot's global state and the user's interactive backend are
never touched). Drawing functions take an ``ax`` (or a figure for multi-panel
pictures) and the data, draw, and return what they were given; nothing is
shown and nothing is written except by :func:`save_png` and :class:`PdfBook`.

Design rules of the pictures
----------------------------
- Colour scales are perceptually uniform (``cividis`` for heights, ``viridis``
  for local flatness and dwell) so that a grey print keeps the order of values.
- Every filled map also carries labelled contour lines, so a grey print or a
  colour-blind reader can still read the values without the colour bar.
- Every axis names its quantity and unit. Heights are in µm (or µin with
  ``units="in"``), positions in mm (or inches with ``units="in"``).

Modules: ``_common`` (figures, files, units, plan views), ``_maps`` (surfaces and derived fields),
``_survey_plots`` (line profiles, survey layout, residuals), ``_setup_plots`` (supports and instrument places
of the set-up sheet), ``_lapping_plots`` (removal, dwell, bench
chart, survey-to-survey change), ``_bearing_plots`` (carriage motion), ``_pages`` (text and tables of the
report's pages). ``flatcheck.output._plots`` names every public picture function, as it did when it was
one module.
"""

from __future__ import annotations

from ._bearing_plots import bearing_motion, carriage_path
from ._budget_plot import budget_bars
from ._common import (
    A4_PORTRAIT_IN, FIELD_CMAP, HEIGHT_CMAP, PdfBook, new_figure, plan_box, plan_panels, plan_ratio, save_png,
)
from ._lapping_plots import cell_chart, cell_chart_blocks, compare_change_map, dwell_map, removal_map
from ._maps import contour_map, field_map, local_flatness_map, local_flatness_profile, mark_window, surface_view
from ._pages import flow_table, flow_table_height_in, page_frame, table, text_block, text_block_height_in
from ._setup_plots import support_plan
from ._survey_plots import LineProfile, line_profiles, residual_histogram, survey_layout

__all__ = [
    "budget_bars",
    "HEIGHT_CMAP",
    "FIELD_CMAP",
    "A4_PORTRAIT_IN",
    "LineProfile",
    "new_figure",
    "save_png",
    "PdfBook",
    "contour_map",
    "surface_view",
    "line_profiles",
    "survey_layout",
    "field_map",
    "plan_panels",
    "plan_box",
    "plan_ratio",
    "cell_chart",
    "cell_chart_blocks",
    "bearing_motion",
    "local_flatness_map",
    "local_flatness_profile",
    "mark_window",
    "removal_map",
    "dwell_map",
    "carriage_path",
    "residual_histogram",
    "text_block",
    "table",
    "page_frame",
    "flow_table",
    "flow_table_height_in",
    "text_block_height_in",
    "compare_change_map",
    "support_plan",
]
