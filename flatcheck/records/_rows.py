"""The register's records as frozen dataclasses (sizes in mm, flatness in µm, dates ``YYYY-MM-DD``)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["SurfaceInfo", "Calibration", "InstrumentInfo", "SurveyRow", "Verdict", "SurveyDetail", "AddResult"]


@dataclass(frozen=True)
class SurfaceInfo:
    """A surface as the register knows it (sizes in mm; interval in months or days)."""

    ident: str
    kind: str
    description: str
    length_mm: float | None
    width_mm: float | None
    material: str
    standard: str
    grade: str
    location: str
    owner: str
    interval_months: int | None
    interval_days: int | None

    @property
    def interval_text(self) -> str:
        """The calibration interval in words ("12 months", "365 days" or "")."""
        if self.interval_months:
            return f"{self.interval_months} month{'s' if self.interval_months != 1 else ''}"
        if self.interval_days:
            return f"{self.interval_days} day{'s' if self.interval_days != 1 else ''}"
        return ""


@dataclass(frozen=True)
class Calibration:
    """One calibration of an instrument (dates ``YYYY-MM-DD``)."""

    calibrated_on: str
    due_on: str
    certificate_ref: str
    traceability: str


@dataclass(frozen=True)
class InstrumentInfo:
    """An instrument and its calibrations, oldest first."""

    ident: str
    kind: str
    model: str
    serial: str
    interval_months: int | None
    calibrations: tuple

    @property
    def latest(self) -> Calibration | None:
        """The most recent calibration, or None."""
        return self.calibrations[-1] if self.calibrations else None

    def covering(self, date: str) -> Calibration | None:
        """The calibration in force on ``date`` (calibrated on or before it, due on or after it), or None."""
        for c in reversed(self.calibrations):
            if c.calibrated_on <= date:
                return c if date <= c.due_on else None
        return None


@dataclass(frozen=True)
class SurveyRow:
    """One survey of the register with its main result (µm).

    ``in_calibration``: whether a calibration of its registered instrument was in force on the
    survey's day (None when the survey names no registered instrument).
    """

    survey_id: int
    ident: str
    measured_on: str
    state: str
    kind: str
    method: str
    source_name: str
    flatness_um: float
    least_squares_um: float
    expanded_uncertainty_um: float | None
    standard_uncertainty_um: float | None
    instrument_ident: str | None
    operator: str
    in_calibration: bool | None = None


@dataclass(frozen=True)
class Verdict:
    """A grade's limit (µm) and the decision for one survey."""

    standard: str
    grade: str
    limit_um: float
    verdict: str
    rule: str
    statement: str
    how: str
    source: str
    sought: bool


@dataclass(frozen=True, eq=False)
class SurveyDetail:
    """Everything the register holds about one survey."""

    row: SurveyRow
    raw_text: str
    report_json: str
    reading_unit: str
    instrument_text: str
    temperature_c: float | None
    interval_um: tuple | None
    trials: int | None
    seed: int | None
    uncertainty_note: str
    local_flatness_um: float | None
    local_window: str
    height_reference: str
    names: tuple | None
    x_mm: np.ndarray
    y_mm: np.ndarray
    height_um: np.ndarray
    budget: tuple
    verdicts: tuple
    content_sha256: str


@dataclass(frozen=True)
class AddResult:
    """What adding one survey did."""

    survey_id: int
    ident: str
    measured_on: str
    state: str
    flatness_um: float
    expanded_uncertainty_um: float | None
    new_surface: bool
    instrument_ident: str | None
    verdicts: tuple
    notes: tuple
