"""File formats: one private module per format, each turning files into core objects.

:func:`open_surface` is the one way in: it opens any surface file flatcheck reads
(a survey TOML or a height-map CSV), reduces it, and names the file in every error.

Opening surfaces
    open_surface
Surveys (TOML)
    read_survey, parse_survey, write_survey, format_survey, require_readings
Planned surveys filled in reading by reading (flatcheck enter)
    read_form, parse_form, fill_text, save_form, format_readings, SurveyForm, RunForm
Height maps (CSV)
    read_heightmap_csv, write_heightmap_csv, format_heightmap_csv, is_heightmap_csv
Bearings (TOML)
    read_bearing_toml, parse_bearing_toml, BearingDescription
Guideways and carriages (TOML)
    read_guideway_toml, parse_guideway_toml; read_carriage_toml, parse_carriage_toml, wrap_carriage, CarriageFile
Lapping logs (CSV)
    read_lap_log
Pictures (fringe photographs: PNG, JPEG, TIFF)
    read_picture, GreyPicture
Exchange
    read_x3p, write_x3p (ISO 25178-72 X3P); write_export_csv (spreadsheet tables); read_csv_meta
Lab uncertainty defaults (TOML)
    read_uncertainty_defaults, parse_uncertainty_defaults
Text in, files out
    read_text, write_text_atomic, write_bytes_atomic, atomic_path
"""

from .._lazy import attach as _attach

__getattr__, __dir__, __all__ = _attach(
    __name__,
    {
        "_open": ("open_surface",),
        "_survey_toml": (
            "read_survey", "parse_survey", "write_survey", "format_survey", "require_readings",
            "FORMAT_NAME", "FORMAT_VERSION", "SIGN_CONVENTIONS",
        ),
        "_survey_fill": ("read_form", "parse_form", "fill_text", "save_form", "format_readings", "SurveyForm", "RunForm"),
        "_heightmap_csv": (
            "read_heightmap_csv", "write_heightmap_csv", "format_heightmap_csv", "is_heightmap_csv",
            "HEADER",
        ),
        "_bearing_toml": ("read_bearing_toml", "parse_bearing_toml", "BearingDescription"),
        "_guideway_toml": ("read_guideway_toml", "parse_guideway_toml"),
        "_carriage_toml": ("read_carriage_toml", "parse_carriage_toml", "wrap_carriage", "CarriageFile"),
        "_image": ("read_picture", "GreyPicture"),
        "_lap_log": ("read_lap_log", "LOG_HEADER"),
        "_x3p": ("read_x3p", "write_x3p", "format_x3p", "read_x3p_contents", "X3pContents"),
        "_export_csv": ("write_export_csv", "format_export_csv"),
        "_csv_meta": ("read_csv_meta", "parse_csv_meta", "CsvMeta"),
        "_text": ("read_text",),
        "_uncertainty_defaults": ("read_uncertainty_defaults", "parse_uncertainty_defaults", "ENV_VAR"),
        "_atomic": ("write_text_atomic", "write_bytes_atomic", "atomic_path"),
    },
)
