"""Air supplies of film pads: porous layers and orifices, the gas and the nozzle flow (see ``_film``)."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import InputValueError

__all__ = [
    "AIR_VISCOSITY_20C_PA_S",
    "AIR_GAS_CONSTANT_J_PER_KG_K",
    "ROOM_TEMPERATURE_K",
    "STANDARD_AMBIENT_KPA",
    "FILM_ASSUMPTIONS",
    "KG_S_TO_MG_S",
    "PorousFeed",
    "AIR_HEAT_CAPACITY_RATIO",
    "CARRIAGE_FILM_ASSUMPTION",
    "ORIFICE_ASSUMPTIONS",
    "critical_pressure_ratio",
    "orifice_mass_flow",
    "OrificeFeed",
    "orifice_ring",
]


#: Dynamic viscosity of air at 20 °C, 1 atm: 0.01813 mPa·s in Bird, Stewart & Lightfoot, Transport Phenomena,
#: Table 1.1-2; 1.81e-5 Pa·s is that value to three digits.
AIR_VISCOSITY_20C_PA_S = 1.81e-5
#: Specific gas constant of dry air: R / M = 8.314462618 / 0.0289647 kg/mol (molar mass of dry air of the
#: US Standard Atmosphere 1976, from memory) = 287.05 J/(kg K).
AIR_GAS_CONSTANT_J_PER_KG_K = 287.05
#: 20 °C in kelvin (exact).
ROOM_TEMPERATURE_K = 293.15
#: Standard atmosphere, 101.325 kPa (exact by definition).
STANDARD_AMBIENT_KPA = 101.325

#: The model's assumptions, stated in every result (the CLI prints them).
FILM_ASSUMPTIONS = (
    "steady film, no sliding (squeeze and shear terms of the Reynolds equation ignored)",
    "isothermal ideal gas (air, R = 287.05 J/(kg K)) at the stated temperature",
    "laminar film with no slip at the porous face or the guide (no slip-flow correction)",
    "Darcy flow across a thin porous layer, no in-plane flow inside the layer, uniform permeability",
    "supply pressure on the whole back of the layer; ambient pressure at the pad's edge",
    "rigid pad face and rigid guide; the gap follows the measured surface under the footprint",
    "air viscosity 1.81e-5 Pa s (20 °C) unless stated otherwise",
)

#: kg/s to mg/s (exact).
KG_S_TO_MG_S = 1e6


_MM2_TO_M2 = 1e-6
_GEOMETRY_UM3_PER_MM2 = 1e12  # h³ in µm³ and lengths in mm: (12k/H) in m times 1e12 (see _beta)


# --------------------------------------------------------------------------- inputs
def _positive(value, name: str, fix: str) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputValueError(f"{name} must be a number, got {value!r}", fix=fix) from None
    if not math.isfinite(v) or v <= 0.0:
        raise InputValueError(f"{name} must be a positive number, got {value!r}", fix=fix)
    return v



#: Checks of the gas and ambient fields shared by every feed: field -> (name in messages, how to fix).
_GAS_CHECKS = {
    "ambient_kpa": ("ambient pressure (kPa)", "give the absolute ambient pressure, e.g. 101.325"),
    "viscosity_pa_s": ("air viscosity (Pa s)", "give a viscosity such as 1.81e-5"),
    "gas_constant_j_per_kg_k": ("gas constant (J/(kg K))", "give 287.05 for air"),
    "temperature_k": ("temperature (K)", "give an absolute temperature such as 293.15"),
}


class _AirSupply:
    """Absolute pressures of a feed with ``supply_gauge_kpa`` and ``ambient_kpa`` fields (kPa)."""

    @property
    def supply_pa(self) -> float:
        """Absolute supply pressure in Pa."""
        return (self.supply_gauge_kpa + self.ambient_kpa) * 1e3

    @property
    def ambient_pa(self) -> float:
        """Absolute ambient pressure in Pa."""
        return self.ambient_kpa * 1e3


@dataclass(frozen=True)
class PorousFeed(_AirSupply):
    """Porous layer, air supply and gas properties of a porous pad.

    Attributes
    ----------
    permeability_m2 : float
        Permeability ``k`` of the porous layer in m² (Darcy's law), > 0.
    layer_mm : float
        Thickness ``H`` of the porous layer in mm, > 0.
    supply_gauge_kpa : float
        Supply pressure above ambient (gauge) in kPa, > 0.
    ambient_kpa : float
        Ambient absolute pressure in kPa (default 101.325, the standard atmosphere).
    viscosity_pa_s : float
        Dynamic viscosity of the air in Pa·s (default 1.81e-5, air at 20 °C).
    gas_constant_j_per_kg_k : float
        Specific gas constant in J/(kg K) (default 287.05, dry air).
    temperature_k : float
        Film and supply temperature in K (default 293.15).
    """

    permeability_m2: float
    layer_mm: float
    supply_gauge_kpa: float
    ambient_kpa: float = STANDARD_AMBIENT_KPA
    viscosity_pa_s: float = AIR_VISCOSITY_20C_PA_S
    gas_constant_j_per_kg_k: float = AIR_GAS_CONSTANT_J_PER_KG_K
    temperature_k: float = ROOM_TEMPERATURE_K

    def __post_init__(self):
        checks = {
            "permeability_m2": ("permeability (m²)", "give the layer's permeability, e.g. 1e-15"),
            "layer_mm": ("porous layer thickness (mm)", "give the layer thickness in mm, e.g. 5"),
            "supply_gauge_kpa": ("supply pressure (kPa gauge)", "give the supply above ambient, e.g. 500"),
            **_GAS_CHECKS,
        }
        for attr, (name, fix) in checks.items():
            object.__setattr__(self, attr, _positive(getattr(self, attr), name, fix))

    @property
    def feed_coefficient(self) -> float:
        """``12 k / H`` expressed for films in µm and lengths in mm (µm³/mm²).

        In SI units the equation is ``div(h³ grad P) + (12 k/H)(ps² - P) = 0``; with ``h`` in µm (1e-6 m)
        and ``x`` in mm (1e-3 m) the film term carries a factor 1e-18 / 1e-6 = 1e-12, so the feed term is
        ``12 k / H`` (m) times 1e12.
        """
        return 12.0 * self.permeability_m2 / (self.layer_mm * 1e-3) * _GEOMETRY_UM3_PER_MM2

    @property
    def ambient_density_kg_m3(self) -> float:
        """Density of the air at the ambient pressure and the film temperature (ideal gas), kg/m³."""
        return self.ambient_pa / (self.gas_constant_j_per_kg_k * self.temperature_k)


#: Ratio of specific heats of air (diatomic ideal gas, 7/5), used by the orifice nozzle formula.
AIR_HEAT_CAPACITY_RATIO = 1.4

#: Stated with every carriage film result (the pads are solved one by one).
CARRIAGE_FILM_ASSUMPTION = (
    "each pad is solved on its own at a fixed load (the given load per pad, or what it carries at its nominal gap "
    "over a flat guide): no load is shared between the pads through the rigid carriage"
)

#: The orifice model's assumptions, stated in every orifice-fed result (the CLI prints them).
ORIFICE_ASSUMPTIONS = (
    "steady film, no sliding (squeeze and shear terms of the Reynolds equation ignored)",
    "isothermal ideal gas (air, R = 287.05 J/(kg K)) in the film at the stated temperature",
    "laminar film with no slip at the pad face or the guide",
    "isentropic nozzle flow through each orifice (gamma 1.4) times a discharge coefficient; the restriction "
    "is the smaller of the bore pi d^2/4 and the curtain pi d (h + pocket depth)",
    "uniform pressure over each feed pocket (over the bore's radius without a pocket); a feed smaller than "
    "the mesh is joined to its nearest mesh node by Peaceman's well-block relation (radial flow near the feed)",
    "supply pressure upstream of every orifice; ambient pressure at the pad's edge",
    "rigid pad face and rigid guide; the gap follows the measured surface under the footprint",
    "air viscosity 1.81e-5 Pa s (20 °C) unless stated otherwise",
)


def critical_pressure_ratio(gamma: float = AIR_HEAT_CAPACITY_RATIO) -> float:
    """Downstream/upstream pressure ratio below which an isentropic nozzle is choked, ``(2/(g+1))^(g/(g-1))``.

    Parameters
    ----------
    gamma : float
        Ratio of specific heats (dimensionless), 1.4 for air.

    Returns
    -------
    float
        Critical pressure ratio (0.52828 for gamma = 1.4).
    """
    g = float(gamma)
    return (2.0 / (g + 1.0)) ** (g / (g - 1.0))


def orifice_mass_flow(
    recess_pa,
    supply_pa: float,
    area_m2,
    *,
    cd: float = 0.8,
    gamma: float = AIR_HEAT_CAPACITY_RATIO,
    gas_constant_j_per_kg_k: float = AIR_GAS_CONSTANT_J_PER_KG_K,
    temperature_k: float = ROOM_TEMPERATURE_K,
):
    """Mass flow of an isentropic nozzle with a discharge coefficient (standard gas dynamics).

    ``mdot = Cd A ps sqrt(2g/((g-1) R T)) sqrt(r^(2/g) - r^((g+1)/g))`` with ``r = pr/ps`` above the critical
    ratio; below it the flow is choked at ``Cd A ps sqrt(g/(R T)) (2/(g+1))^((g+1)/(2(g-1)))``.

    Parameters
    ----------
    recess_pa : float or ndarray
        Absolute pressure downstream of the orifice (feed pocket or film at the orifice), Pa.
    supply_pa : float
        Absolute supply pressure upstream, Pa.
    area_m2 : float or ndarray
        Restriction area, m².
    cd : float
        Discharge coefficient (dimensionless).
    gamma : float
        Ratio of specific heats.
    gas_constant_j_per_kg_k, temperature_k : float
        Specific gas constant (J/(kg K)) and supply temperature (K).

    Returns
    -------
    float or ndarray
        Mass flow, kg/s (0 where ``recess_pa >= supply_pa``).
    """
    g = float(gamma)
    r = np.clip(np.asarray(recess_pa, dtype=float) / float(supply_pa), 0.0, 1.0)
    rc = critical_pressure_ratio(g)
    r = np.maximum(r, rc)  # choked: the flow of the critical ratio
    psi = np.sqrt(2.0 * g / (g - 1.0) * np.clip(r ** (2.0 / g) - r ** ((g + 1.0) / g), 0.0, None))
    out = cd * np.asarray(area_m2, dtype=float) * float(supply_pa) * psi / math.sqrt(
        gas_constant_j_per_kg_k * temperature_k
    )
    return float(out) if np.ndim(out) == 0 else out


def _orifice_dflow_dp(recess_pa, supply_pa, area_m2, cd, gamma, rt):
    """d(mdot)/d(pr) of :func:`orifice_mass_flow` (kg/(s Pa)); zero when choked."""
    g = gamma
    r = min(max(recess_pa / supply_pa, 0.0), 1.0)
    if r <= critical_pressure_ratio(g) or r >= 1.0:
        return 0.0
    a, b = r ** (2.0 / g), r ** ((g + 1.0) / g)
    s = math.sqrt(2.0 * g / (g - 1.0) * (a - b))
    ds_dr = (2.0 * g / (g - 1.0)) * ((2.0 / g) * a / r - ((g + 1.0) / g) * b / r) / (2.0 * s)
    return cd * area_m2 * ds_dr / math.sqrt(rt)


@dataclass(frozen=True)
class OrificeFeed(_AirSupply):
    """Orifices, optional feed pockets, air supply and gas properties of an orifice-fed pad.

    Attributes
    ----------
    orifice_mm : float
        Orifice (bore) diameter ``d`` in mm, > 0.
    supply_gauge_kpa : float
        Supply pressure above ambient (gauge) in kPa, > 0.
    cd : float
        Discharge coefficient, in (0, 1] (default 0.8).
    positions_mm : tuple of (float, float)
        Orifice centres in pad-local mm (origin at the pad centre, x along the travel); default one central
        orifice ``((0.0, 0.0),)``.
    pocket_mm : float
        Diameter of a feed pocket (recess) around each orifice in mm; 0 for none (inherent compensation).
    pocket_depth_um : float
        Pocket depth in µm (0 without a pocket).
    ambient_kpa, viscosity_pa_s, gas_constant_j_per_kg_k, temperature_k
        As in :class:`PorousFeed`.
    gamma : float
        Ratio of specific heats (1.4 for air).
    """

    orifice_mm: float
    supply_gauge_kpa: float
    cd: float = 0.8
    positions_mm: tuple = ((0.0, 0.0),)
    pocket_mm: float = 0.0
    pocket_depth_um: float = 0.0
    ambient_kpa: float = STANDARD_AMBIENT_KPA
    viscosity_pa_s: float = AIR_VISCOSITY_20C_PA_S
    gas_constant_j_per_kg_k: float = AIR_GAS_CONSTANT_J_PER_KG_K
    temperature_k: float = ROOM_TEMPERATURE_K
    gamma: float = AIR_HEAT_CAPACITY_RATIO

    def __post_init__(self):
        checks = {
            "orifice_mm": ("orifice diameter (mm)", "give the orifice bore in mm, e.g. 0.2"),
            "supply_gauge_kpa": ("supply pressure (kPa gauge)", "give the supply above ambient, e.g. 500"),
            "cd": ("discharge coefficient", "give a discharge coefficient such as 0.8"),
            **_GAS_CHECKS,
            "gamma": ("ratio of specific heats", "give 1.4 for air"),
        }
        for attr, (name, fix) in checks.items():
            object.__setattr__(self, attr, _positive(getattr(self, attr), name, fix))
        if self.cd > 1.0:
            raise InputValueError(f"discharge coefficient must be at most 1, got {self.cd:g}", fix="give e.g. 0.8")
        if self.gamma <= 1.0:
            raise InputValueError(f"ratio of specific heats must exceed 1, got {self.gamma:g}", fix="give 1.4")
        for attr, name in (("pocket_mm", "pocket diameter (mm)"), ("pocket_depth_um", "pocket depth (µm)")):
            v = getattr(self, attr)
            try:
                v = float(v)
            except (TypeError, ValueError):
                raise InputValueError(f"{name} must be a number, got {v!r}", fix="give 0 for no pocket") from None
            if not math.isfinite(v) or v < 0.0:
                raise InputValueError(f"{name} must be 0 or positive, got {v!r}", fix="give 0 for no pocket")
            object.__setattr__(self, attr, v)
        if (self.pocket_mm > 0.0) != (self.pocket_depth_um > 0.0):
            raise InputValueError(
                "a feed pocket needs both a diameter and a depth",
                fix="give pocket diameter (mm) and depth (µm) together, or neither",
            )
        if self.pocket_mm > 0.0 and self.pocket_mm <= self.orifice_mm:
            raise InputValueError(
                f"pocket diameter {self.pocket_mm:g} mm is not larger than the orifice ({self.orifice_mm:g} mm)",
                fix="give a pocket wider than the bore, or no pocket",
            )
        try:
            pos = tuple((float(x), float(y)) for x, y in self.positions_mm)
        except (TypeError, ValueError):
            raise InputValueError(
                "orifice positions must be (x_mm, y_mm) pairs", fix="give e.g. ((0, 0),) for one central orifice"
            ) from None
        if not pos or not all(math.isfinite(v) for p in pos for v in p):
            raise InputValueError("give at least one finite orifice position", fix="e.g. ((0, 0),)")
        object.__setattr__(self, "positions_mm", pos)

    @property
    def ambient_density_kg_m3(self) -> float:
        """Density of the air at the ambient pressure and the film temperature (ideal gas), kg/m³."""
        return self.ambient_pa / (self.gas_constant_j_per_kg_k * self.temperature_k)

    @property
    def feed_radius_mm(self) -> float:
        """Radius of the uniform-pressure feed region around each orifice, mm (pocket, else bore)."""
        return 0.5 * (self.pocket_mm if self.pocket_mm > 0.0 else self.orifice_mm)

    @property
    def pocket_volume_mm3(self) -> float:
        """Volume of one feed pocket, mm³ (0 without a pocket)."""
        return math.pi * self.pocket_mm**2 / 4.0 * self.pocket_depth_um * 1e-3

    def restriction_area_m2(self, gap_um):
        """Restriction area of one orifice at a film of ``gap_um`` µm at the orifice, m².

        The smaller of the bore ``pi d²/4`` and the curtain ``pi d (h + pocket depth)`` through which the air
        leaves the bore.
        """
        d = self.orifice_mm * 1e-3
        curtain = math.pi * d * (np.asarray(gap_um, dtype=float) + self.pocket_depth_um) * 1e-6
        return np.minimum(math.pi * d * d / 4.0, curtain)

    @property
    def assumptions(self) -> tuple:
        return ORIFICE_ASSUMPTIONS

    def mass_flow(self, recess_pa, gap_um):
        """Mass flow (kg/s) of one orifice into a recess at ``recess_pa`` (Pa abs) with ``gap_um`` µm there."""
        return orifice_mass_flow(
            recess_pa, self.supply_pa, self.restriction_area_m2(gap_um), cd=self.cd, gamma=self.gamma,
            gas_constant_j_per_kg_k=self.gas_constant_j_per_kg_k, temperature_k=self.temperature_k,
        )


def orifice_ring(shape: str, length_mm: float, width_mm: float, count: int) -> tuple:
    """Default orifice layout: one at the centre, or ``count`` evenly spaced.

    A circular pad gets a ring at half its radius; a rectangular pad a row along its longer centre line, at
    the centres of ``count`` equal parts. (A layout convention of this tool.)

    Parameters
    ----------
    shape : {"circle", "rect"}
    length_mm, width_mm : float
        Pad size in mm.
    count : int
        Number of orifices, >= 1.

    Returns
    -------
    tuple of (float, float)
        Orifice centres in pad-local mm.
    """
    try:
        k = int(count)
    except (TypeError, ValueError):
        raise InputValueError(f"orifice count must be a whole number, got {count!r}", fix="give e.g. 1") from None
    if k < 1 or k != count:
        raise InputValueError(f"orifice count must be a whole number of at least 1, got {count!r}", fix="give e.g. 1")
    if k == 1:
        return ((0.0, 0.0),)
    if shape == "circle":
        r = 0.25 * length_mm
        return tuple((r * math.cos(2 * math.pi * i / k), r * math.sin(2 * math.pi * i / k)) for i in range(k))
    along = length_mm >= width_mm
    size = length_mm if along else width_mm
    pos = [-0.5 * size + (i + 0.5) * size / k for i in range(k)]
    return tuple((p, 0.0) if along else (0.0, p) for p in pos)

