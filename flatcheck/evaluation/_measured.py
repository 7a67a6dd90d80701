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

    def height_step_um(self, lab=None) -> float:
        """The height step this measurement resolves (µm): what printed heights are rounded to.

        For a survey, the instrument's resolution (its digit step: stated in the survey's
        ``[uncertainty]`` table, else the lab's default, else the built-in default for the kind)
        turned into a height over the shortest foot spacing, the finest rise one reading can show;
        an indicator's resolution is a height already. A height map states no instrument: its
        heights keep 1 nm. :func:`flatcheck.units.height_decimals` turns the step into decimals.

        Parameters
        ----------
        lab : LabDefaults, optional
            A lab's own defaults (``--uncertainty-defaults``).

        Examples
        --------
        An autocollimator read to 0.05 arcsec over a 100 mm foot spacing resolves
        100 mm x tan(0.05") = 0.024 µm, so heights print to 0.01 µm (autocollimator display
        steps: common practice, no single source).
        """
        import math

        from ..units import angle_unit, length_unit
        from ._budget_sources import resolve

        if self.survey is None:
            return HEIGHT_MAP_STEP_UM
        inst = self.survey.instrument
        stated = (self.survey.meta.get("uncertainty") or {}).get("resolution")
        r = resolve("resolution", stated, kind=inst.kind, unit=inst.unit, lab=lab).value
        if r is None or not math.isfinite(r) or r <= 0.0:
            return HEIGHT_MAP_STEP_UM
        if inst.reads_heights:
            return float(r) * length_unit(inst.unit).factor_um
        u = angle_unit(inst.unit)
        slope = math.tan(r * u.factor) if u.kind == "angle" else r * u.factor
        if inst.kind == "autocollimator" and inst.reports == "beam-deviation":
            slope /= 2.0  # the scale shows twice the mirror's tilt
        bases = [float(ln.foot_spacing_mm) for ln in self.survey.lines if float(ln.foot_spacing_mm) > 0.0]
        if not bases:
            return HEIGHT_MAP_STEP_UM
        return max(slope * min(bases) * 1e3, HEIGHT_MAP_STEP_UM)


#: Height step of a height map, which states no instrument: 1 nm.
HEIGHT_MAP_STEP_UM = 0.001
