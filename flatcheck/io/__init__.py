"""File formats: one private module per format, each turning files into core objects.

:func:`open_surface` is the one way in: it opens any surface file flatcheck reads
(a survey TOML or a height-map CSV), reduces it, and names the file in every error.

Opening surfaces
    open_surface
Surveys (TOML)
    read_survey, parse_survey, write_survey, format_survey, require_readings
Height maps (CSV)
    read_heightmap_csv, write_heightmap_csv, format_heightmap_csv, is_heightmap_csv
Bearings (TOML)
    read_bearing_toml, parse_bearing_toml, BearingDescription
Lapping logs (CSV)
    read_lap_log
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
        "_heightmap_csv": (
            "read_heightmap_csv", "write_heightmap_csv", "format_heightmap_csv", "is_heightmap_csv",
            "HEADER",
        ),
        "_bearing_toml": ("read_bearing_toml", "parse_bearing_toml", "BearingDescription"),
        "_lap_log": ("read_lap_log", "LOG_HEADER"),
        "_text": ("read_text",),
        "_atomic": ("write_text_atomic", "write_bytes_atomic", "atomic_path"),
    },
)
