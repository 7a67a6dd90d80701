"""Pictures and the PDF report: the only package that imports matplotlib.

Imports the core packages (never :mod:`flatcheck.cli`).

    write_report, analyse, ReportContent, ReportFiles, and every picture function
    (contour_map, line_profiles, survey_layout, local_flatness_map, carriage_path, ...)
"""

from .._lazy import attach as _attach

__getattr__, __dir__, __all__ = _attach(
    __name__,
    {
        '_plots': (
            'HEIGHT_CMAP',
            'FIELD_CMAP',
            'A4_PORTRAIT_IN',
            'new_figure',
            'save_png',
            'PdfBook',
            'contour_map',
            'surface_view',
            'LineProfile',
            'line_profiles',
            'survey_layout',
            'field_map',
            'local_flatness_map',
            'local_flatness_profile',
            'mark_window',
            'removal_map',
            'dwell_map',
            'cell_chart_blocks',
            'cell_chart',
            'plan_panels',
            'plan_box',
            'plan_ratio',
            'compare_change_map',
            'carriage_path',
            'residual_histogram',
            'text_block',
            'table',
            'page_frame',
            'flow_table',
            'flow_table_height_in',
            'text_block_height_in',
            'bearing_motion',
            'support_plan',
        ),
        '_guideway_plots': (
            'faces_figure',
            'thickness_figure',
            'films_figure',
            'motions_figure',
            'write_guideway_pngs',
            'guideway_png_paths',
            'panel_counts',
        ),
        '_guideway_pages': (
            'write_guideway_report',
            'guideway_report_data',
            'GuidewayReportFiles',
            'GUIDEWAY_METHODS',
        ),
        '_report_content': (
            'SCOPE_STATEMENT',
            'LineResult',
            'GradeRow',
            'ReportContent',
            'analyse',
            'uncertainty_text',
        ),
        '_report': (
            'ReportFiles',
            'page_titles',
            'write_report',
        ),
    },
)
