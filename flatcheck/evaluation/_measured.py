"""The measured surface: what :func:`flatcheck.open_surface` returns and every evaluation takes."""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

from ..form import HeightMap

if TYPE_CHECKING:  # pragma: no cover - for readers and type checkers only
    from ..survey import Reduction, Survey


@dataclass(frozen=True, eq=False)
class MeasuredSurface:
    """A surface file, opened: its height map and, for a survey, the survey and its reduction.

    Attributes
    ----------
    path : str
        The file it came from, as given (errors and reports name it).
    heightmap : HeightMap
        Heights in µm at positions in mm: the reduced station heights of a survey
        (about its least-squares plane), or the points of a height map.
    survey : Survey or None
        The survey as read (instrument, lines, readings); None for a height map.
    reduction : Reduction or None
        The full reduction of the survey (closures, residuals, zeros); None for a height map.
    """

    path: str
    heightmap: HeightMap
    survey: Survey | None = None
    reduction: Reduction | None = None

    @property
    def kind(self) -> str:
        """``"survey"`` or ``"height-map"``."""
        return "survey" if self.survey is not None else "height-map"
