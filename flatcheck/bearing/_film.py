"""Air film of a porous or orifice-fed aerostatic pad over a measured surface (Reynolds equation).

A porous pad is fed through a thin porous layer (permeability ``k`` in m², thickness ``H``) whose back is
held at the supply pressure ``ps``. The air crosses the layer (Darcy's law), spreads through the film of
thickness ``h(x, y)`` between the pad face and the guide (compressible, isothermal Reynolds equation) and
leaves at the pad's edge at ambient pressure ``pa``.

Model
-----
Mass balance of a film element, with ``P = p²`` (derivation in docs/methods.md):

* Darcy inflow through the layer per unit area, isothermal ideal gas, no in-plane flow in the layer:
  ``m = k (ps² - p²) / (2 mu R T H)``;
* film mass flow per unit width (Poiseuille flow, no slip): ``q = -(h³ / (24 mu R T)) grad p²``;
* ``div q = m`` gives ``div(h³ grad P) + (12 k / H)(ps² - P) = 0`` with ``P = pa²`` on the edge.

For a fixed film the equation is *linear* in ``P``. Written for ``Pn = (P - pa²) / (ps² - pa²)`` it reads
``div(h³ grad Pn) + (12 k / H)(1 - Pn) = 0``, ``Pn = 0`` on the edge: the normalised field depends only on the
film shape and ``12 k / H``, not on the pressures.

Discretisation
--------------
Cell-centred nodes on a Cartesian mesh over the pad's bounding box. A rectangular pad uses every node; a
circular pad uses the nodes inside the disc and imposes the edge condition at the *true* radius: where a
neighbour lies outside the disc, the Shortley-Weller five-point difference uses the distance to the circle
along the mesh line. The conductance ``h³`` of each link is taken at its midpoint. The scheme is second
order (measured in tests/test_film.py). Loads and flows are integrated with the node areas (the part of
each cell inside the pad). One LU factorisation (scipy.sparse.linalg.splu) per film shape gives the
pressure and, by reusing the factors, its exact derivatives with respect to fly height and tilts
(stiffness and the Newton steps of the equilibrium).

Orifice-fed pads
----------------
An :class:`OrificeFeed` replaces the porous layer by N orifices (bore ``d``, discharge coefficient ``Cd``,
optional pocket of uniform pressure). The land obeys ``div(h³ grad P) = 0``, ``P = pa²`` on the edge and
``P = pr_k²`` over feed region k. For fixed film and feed pressures the field is ``P = pa² + sum X_k U_k``
(``X_k = pr_k² - pa²``, ``U_k`` the field of a unit ``X`` at feed k, one LU factorisation and N solves), so
the film's outflow from each feed is linear in ``X``: ``G X``. The feed pressures solve
``mdot_k(pr_k) = (G X)_k`` (isentropic nozzle, :func:`orifice_mass_flow`): a 1-D root find (brentq) for
one orifice, Newton for several. A feed narrower than about a fifth of a cell is joined to its nearest node
by Peaceman's well-block relation ``Q = 2 pi h³ (pr² - P_node) / ln(r_eq / r0)``, ``r_eq = 0.1985 dx``
[5]_; a wider one holds its nodes at ``pr²`` (staircase, first order in the pocket's radius). Derivatives for
stiffness and Newton come from the same factors plus the implicit derivative of the feed balance.

Units: positions in mm (pad-local, origin at the pad centre, ``x`` along the travel), films in µm,
pressures in Pa, loads in N, moments in N·mm, stiffness in N/µm, mass flow in kg/s, volumetric flow in
l/min of free air at the ambient pressure and the film temperature.

References
----------
.. [1] Y. B. P. Kwan, J. Corbett, "A simplified method for the correction of velocity slip and inertia
   effects in porous aerostatic thrust bearings", Tribology International 31(12):779-786 (1998): the
   simple one-dimensional porous-bearing model (Darcy layer feeding a Reynolds film) that this 2-D model
   generalises.
.. [2] N. Plante et al., "Design of porous air bearings by a one-dimensional generalised flow method",
   Precision Engineering 29:336-346 (2005) (from memory, not re-read).
.. [3] G. H. Shortley, R. Weller, "The numerical solution of Laplace's equation", J. Appl. Phys. 9:334
   (1938) (boundary-adapted five-point differences; from memory).
.. [4] R. B. Bird, W. E. Stewart, E. N. Lightfoot, Transport Phenomena, Table 1.1-2: air at 20 °C and
   1 atm, 0.01813 mPa·s.
.. [5] D. W. Peaceman, "Interpretation of well-block pressures in numerical reservoir simulation", SPE
   Journal 18(3):183-194 (1978) (from memory; the constant e^-gamma / (2 sqrt 2) = 0.1985 is the far field of
   the five-point Green's function, and the tests confirm it against the exact radial solution).
"""

from __future__ import annotations

import math
import os
import threading
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field

import numpy as np
import scipy.sparse as sp
from scipy.sparse.linalg import splu

from ..errors import GeometryError, InputValueError

__all__ = [
    "AIR_VISCOSITY_20C_PA_S",
    "AIR_GAS_CONSTANT_J_PER_KG_K",
    "ROOM_TEMPERATURE_K",
    "STANDARD_AMBIENT_KPA",
    "FILM_ASSUMPTIONS",
    "CARRIAGE_FILM_ASSUMPTION",
    "MAX_MESH_CELLS",
    "CAPACITY_FRACTION",
    "KG_S_TO_MG_S",
    "curve_table_rows",
    "PorousFeed",
    "OrificeFeed",
    "ORIFICE_ASSUMPTIONS",
    "AIR_HEAT_CAPACITY_RATIO",
    "critical_pressure_ratio",
    "orifice_mass_flow",
    "orifice_ring",
    "PadMesh",
    "PadDeviation",
    "FilmState",
    "FilmCurve",
    "FilmEquilibrium",
    "FilmTravel",
    "circular_pad_mesh",
    "rectangular_pad_mesh",
    "pad_deviation",
    "surface_under_pad",
    "solve_film",
    "flat_guide_curve",
    "default_curve_gaps_um",
    "film_equilibrium",
    "film_along_travel",
    "DEFAULT_STIFFNESS_CHANGE_LIMIT",
    "PadFilmTravel",
    "BearingFilm",
    "bearing_film",
    "with_film_checks",
    "check_carriage_load",
    "orifice_notes",
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

#: Fewest and most mesh cells along a pad side. At 512 x 512 one film equilibrium already takes seconds and
#: about 0.8 GB (measured here: 8.5 s, 0.8 GB peak for a 120 x 80 mm pad); the load has converged to 0.1 %
#: at 64 cells (docs/methods.md), so finer meshes only cost time and memory.
MIN_MESH_CELLS = 4
MAX_MESH_CELLS = 512
MESH_LIMIT_REASON = (
    f"a {MAX_MESH_CELLS} x {MAX_MESH_CELLS} mesh already takes seconds and about 1 GB of memory per pad position, "
    "and the film has converged to 0.1 % at 64 cells"
)

#: kg/s to mg/s (exact).
KG_S_TO_MG_S = 1e6

_MAX_ITER = 40
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


# --------------------------------------------------------------------------- mesh
@dataclass(frozen=True, eq=False)
class PadMesh:
    """Computational mesh over one pad face.

    Attributes
    ----------
    shape : {"circle", "rect"}
        Pad shape.
    length_mm, width_mm : float
        Size along x and y in mm (the diameter twice for a circle).
    x_mm, y_mm : ndarray, shape (n,)
        Node positions in mm, pad-local (origin at the pad centre, x along the travel).
    area_mm2 : ndarray, shape (n,)
        Quadrature weight of each node: the area of its cell inside the pad, mm².
    probe_x_mm, probe_y_mm : ndarray, shape (m,)
        Points where the film thickness is evaluated: the ``n`` nodes first, then the link midpoints
        (where the conductances live), then the edge points where mesh lines cross the pad's edge.
    spacing_mm : tuple of float
        Mesh pitch ``(dx, dy)`` in mm.
    """

    shape: str
    length_mm: float
    width_mm: float
    x_mm: np.ndarray
    y_mm: np.ndarray
    area_mm2: np.ndarray
    probe_x_mm: np.ndarray
    probe_y_mm: np.ndarray
    spacing_mm: tuple
    _ops: dict = field(default=None, repr=False)

    @property
    def n(self) -> int:
        """Number of unknowns (nodes)."""
        return int(self.x_mm.size)

    @property
    def pad_area_mm2(self) -> float:
        """Exact face area in mm²."""
        if self.shape == "circle":
            return math.pi * self.length_mm**2 / 4.0
        return self.length_mm * self.width_mm

    @property
    def half_size_mm(self) -> float:
        """Half the larger side (or the radius), mm: the length used to scale moments."""
        return 0.5 * max(self.length_mm, self.width_mm)


def _circle_cell_area(x0, x1, y0, y1, radius, n_gauss=48):
    """Area (mm²) of rectangles [x0,x1]x[y0,y1] inside the disc of ``radius``; arrays of equal shape.

    The chord height is integrated exactly in y and by Gauss-Legendre in x (kinks only where the
    circle crosses y0 or y1, so the error is far below the discretisation error of the film).
    """
    t, w = np.polynomial.legendre.leggauss(n_gauss)
    xm = 0.5 * (x0 + x1)[:, None] + 0.5 * (x1 - x0)[:, None] * t[None, :]
    s = np.sqrt(np.clip(radius**2 - xm**2, 0.0, None))
    top = np.minimum(y1[:, None], s)
    bot = np.maximum(y0[:, None], -s)
    chord = np.clip(top - bot, 0.0, None)
    return 0.5 * (x1 - x0) * (chord @ w)


def _build_mesh(shape, length_mm, width_mm, nx, ny):
    dx = length_mm / nx
    dy = width_mm / ny
    xs = -0.5 * length_mm + (np.arange(nx) + 0.5) * dx
    ys = -0.5 * width_mm + (np.arange(ny) + 0.5) * dy
    X, Y = np.meshgrid(xs, ys)  # (ny, nx)
    radius = 0.5 * length_mm
    if shape == "circle":
        # a node closer to the circle than 1e-3 of a cell is dropped: its neighbours see the edge instead
        inside = np.hypot(X, Y) < radius - 1e-3 * min(dx, dy)
    else:
        inside = np.ones_like(X, dtype=bool)
    index = np.full(X.shape, -1, dtype=np.int64)
    index[inside] = np.arange(int(inside.sum()))
    n = int(inside.sum())
    jj, ii = np.nonzero(inside)  # row (y) and column (x) of each node, in node order
    x = X[inside]
    y = Y[inside]

    def boundary_distance(axis, sign, px, py):
        """Distance from nodes to the pad edge along +-x (axis 0) or +-y (axis 1)."""
        if shape != "circle":
            return np.full(px.shape, 0.5 * (dx if axis == 0 else dy))
        along, across = (px, py) if axis == 0 else (py, px)
        reach = np.sqrt(np.clip(radius**2 - across**2, 0.0, None))
        return reach - sign * along

    # links: (row node, col node or -1, distance, axis, sign)
    link_row, link_col, link_dist, link_axis, link_sign = [], [], [], [], []
    for axis, step in ((0, dx), (1, dy)):
        for sign in (+1, -1):
            nj = jj + (sign if axis == 1 else 0)
            ni = ii + (sign if axis == 0 else 0)
            ok = (nj >= 0) & (nj < ny) & (ni >= 0) & (ni < nx)
            nb = np.full(n, -1, dtype=np.int64)
            nb[ok] = index[nj[ok], ni[ok]]
            dist = np.where(nb >= 0, step, 0.0)
            bnd = nb < 0
            dist[bnd] = boundary_distance(axis, sign, x[bnd], y[bnd])
            link_row.append(np.arange(n))
            link_col.append(nb)
            link_dist.append(dist)
            link_axis.append(np.full(n, axis))
            link_sign.append(np.full(n, sign))
    row = np.concatenate(link_row)
    col = np.concatenate(link_col)
    dist = np.concatenate(link_dist)
    axis = np.concatenate(link_axis)
    sgn = np.concatenate(link_sign)
    if np.any(dist <= 0.0):  # pragma: no cover - excluded by the 1e-3 cell margin above
        raise GeometryError("a mesh node lies on the pad edge", fix="use another mesh size")

    # Shortley-Weller row weights 2 / (d_plus + d_minus) per axis
    d = dist.reshape(4, n)  # order: x+, x-, y+, y-
    wx = 2.0 / (d[0] + d[1])
    wy = 2.0 / (d[2] + d[3])
    w_link = np.concatenate([wx, wx, wy, wy])
    g = w_link / dist  # coefficient multiplying the conductance h³ of the link

    # faces: one per interior pair (shared by its two links), one per boundary link
    interior_fwd = (col >= 0) & (sgn > 0)
    interior_bwd = (col >= 0) & (sgn < 0)
    boundary = col < 0
    n_int = int(interior_fwd.sum())
    face_of_link = np.full(row.size, -1, dtype=np.int64)
    face_of_link[interior_fwd] = np.arange(n_int)
    # the backward link Q->P is the forward link P->Q seen from Q
    fwd_idx = np.flatnonzero(interior_fwd)
    keys = row[fwd_idx] * (n + 1) + col[fwd_idx] + axis[fwd_idx] * (n + 1) ** 2
    order = np.argsort(keys)
    keys_sorted = keys[order]
    bwd_idx = np.flatnonzero(interior_bwd)
    bkeys = col[bwd_idx] * (n + 1) + row[bwd_idx] + axis[bwd_idx] * (n + 1) ** 2
    pos = np.searchsorted(keys_sorted, bkeys)
    if not np.array_equal(keys_sorted[pos], bkeys):  # pragma: no cover - mesh symmetry
        raise GeometryError("internal mesh inconsistency")
    face_of_link[bwd_idx] = face_of_link[fwd_idx[order[pos]]]
    b_idx = np.flatnonzero(boundary)
    n_bnd = b_idx.size
    face_of_link[b_idx] = n_int + np.arange(n_bnd)
    n_faces = n_int + n_bnd

    # face midpoints and edge points
    step_vec = np.where(axis == 0, 1.0, 0.0), np.where(axis == 1, 1.0, 0.0)
    mid_x = x[row] + step_vec[0] * sgn * dist / 2
    mid_y = y[row] + step_vec[1] * sgn * dist / 2
    face_x = np.empty(n_faces)
    face_y = np.empty(n_faces)
    face_x[face_of_link[interior_fwd]] = mid_x[interior_fwd]
    face_y[face_of_link[interior_fwd]] = mid_y[interior_fwd]
    face_x[face_of_link[b_idx]] = mid_x[b_idx]
    face_y[face_of_link[b_idx]] = mid_y[b_idx]
    edge_x = x[row[b_idx]] + step_vec[0][b_idx] * sgn[b_idx] * dist[b_idx]
    edge_y = y[row[b_idx]] + step_vec[1][b_idx] * sgn[b_idx] * dist[b_idx]

    # interpolation of node values to probes (nodes, faces, edge points), linear along mesh lines
    # boundary faces/edge points extrapolate from the node and its opposite neighbour when it exists
    opp = np.full(row.size, -1, dtype=np.int64)
    lk = np.arange(row.size).reshape(4, n)
    opp_link = np.concatenate([lk[1], lk[0], lk[3], lk[2]])  # x+ <-> x-, y+ <-> y-
    opp[:] = col[opp_link]
    opp_dist = dist[opp_link]
    ri, ci, vi = [np.arange(n)], [np.arange(n)], [np.ones(n)]
    fi = face_of_link[interior_fwd]
    ri += [n + fi, n + fi]
    ci += [row[interior_fwd], col[interior_fwd]]
    vi += [np.full(n_int, 0.5), np.full(n_int, 0.5)]
    for offset, frac in ((n + n_int, 0.5), (n + n_faces, 1.0)):
        probe_rows = offset + np.arange(n_bnd)
        p_node = row[b_idx]
        o_node = opp[b_idx]
        has = o_node >= 0
        alpha = np.zeros(n_bnd)
        alpha[has] = frac * dist[b_idx][has] / opp_dist[b_idx][has]
        ri += [probe_rows, probe_rows[has]]
        ci += [p_node, o_node[has]]
        vi += [1.0 + alpha, -alpha[has]]
    n_probe = n + n_faces + n_bnd
    interp = sp.csr_matrix(
        (np.concatenate(vi), (np.concatenate(ri), np.concatenate(ci))), shape=(n_probe, n)
    )
    probe_x = np.concatenate([x, face_x, edge_x])
    probe_y = np.concatenate([y, face_y, edge_y])

    # system matrix A(c) = sum over links of g*c on the diagonal and -g*c off it, plus the feed term
    e_row = np.concatenate([row, row[col >= 0]])
    e_col = np.concatenate([row, col[col >= 0]])
    e_face = np.concatenate([face_of_link, face_of_link[col >= 0]])
    e_coef = np.concatenate([g, -g[col >= 0]])
    keys = e_col * n + e_row  # CSC order: by column, then row
    ukeys, e_pos = np.unique(keys, return_inverse=True)
    nnz = ukeys.size
    indices = (ukeys % n).astype(np.int32)
    cols = ukeys // n
    indptr = np.zeros(n + 1, dtype=np.int32)
    np.add.at(indptr, cols + 1, 1)
    indptr = np.cumsum(indptr).astype(np.int32)
    assemble = sp.csr_matrix((e_coef, (e_pos, e_face)), shape=(nnz, n_faces))
    diag_pos = np.searchsorted(ukeys, np.arange(n) * n + np.arange(n))
    # Fill-reducing ordering computed once per mesh (it depends only on the pattern): the matrix is assembled
    # directly in the permuted order and factorised without re-ordering ("NATURAL"), which saves SuperLU's
    # ordering step on every film solution.
    probe_data = assemble @ np.ones(n_faces)
    probe_data[diag_pos] += 1.0
    A0 = sp.csc_matrix((probe_data, indices, indptr), shape=(n, n))
    perm_c = splu(A0, permc_spec="MMD_AT_PLUS_A", options=dict(SymmetricMode=True)).perm_c
    inv = np.argsort(perm_c)
    tag = sp.csc_matrix((np.arange(1, nnz + 1, dtype=float), indices, indptr), shape=(n, n))
    tagp = tag[inv][:, inv].tocsc()
    tagp.sort_indices()
    order = tagp.data.astype(np.int64) - 1
    assemble = assemble[order]
    indices, indptr = tagp.indices.astype(np.int32), tagp.indptr.astype(np.int32)
    diag_pos = np.flatnonzero(np.isin(order, diag_pos))
    # flux form for derivatives: (A(dc) Pn)_row = sum_link g * dc_face * (Pn_row - Pn_col)
    jump = sp.csr_matrix(
        (
            np.concatenate([np.ones(n_int), -np.ones(n_int), np.ones(n_bnd)]),
            (
                np.concatenate([face_of_link[interior_fwd], face_of_link[interior_fwd], face_of_link[b_idx]]),
                np.concatenate([row[interior_fwd], col[interior_fwd], row[b_idx]]),
            ),
        ),
        shape=(n_faces, n),
    )
    # row P gets g_P * dc * (Pn_P - Pn_Q): +g for links leaving P in the face's forward sense, -g otherwise
    lrow = np.concatenate([row[interior_fwd], row[interior_bwd], row[b_idx]])
    lface = np.concatenate([face_of_link[interior_fwd], face_of_link[interior_bwd], face_of_link[b_idx]])
    lval = np.concatenate([g[interior_fwd], -g[interior_bwd], g[b_idx]])
    scatter = sp.csr_matrix((lval, (lrow, lface)), shape=(n, n_faces))

    # quadrature weights
    if shape == "circle":
        x0, x1, y0, y1 = x - dx / 2, x + dx / 2, y - dy / 2, y + dy / 2
        corner = np.maximum(np.hypot(np.maximum(abs(x0), abs(x1)), np.maximum(abs(y0), abs(y1))), 0.0)
        area = np.full(n, dx * dy)
        cut = corner > radius
        area[cut] = _circle_cell_area(x0[cut], x1[cut], y0[cut], y1[cut], radius)
    else:
        area = np.full(n, dx * dy)

    # edge outflow: boundary links carry flux through a cell face of length dy (x links) or dx (y links);
    # the outward gradient at the edge point comes from the quadratic through the edge (Pn = 0), the node
    # (value a, distance t from the edge) and the opposite node (value b, a further d away):
    # dPn/ds = -a (t + d) / (t d) + b t / (d (t + d)); linear (-a / t) without an opposite node
    face_len = np.where(axis[b_idx] == 0, dy, dx)
    t_b = dist[b_idx]
    o_b = opp[b_idx]
    d_b = np.where(o_b >= 0, opp_dist[b_idx], np.inf)
    edge_a = np.where(o_b >= 0, (t_b + d_b) / (t_b * d_b), 1.0 / t_b)
    edge_b = np.where(o_b >= 0, -t_b / (d_b * (t_b + d_b)), 0.0)
    edge_grad = sp.csr_matrix(
        (np.concatenate([edge_a * face_len, (edge_b * face_len)[o_b >= 0]]),
         (np.concatenate([np.arange(n_bnd), np.flatnonzero(o_b >= 0)]),
          np.concatenate([row[b_idx], o_b[o_b >= 0]]))),
        shape=(n_bnd, n),
    )
    ops = dict(
        n_faces=n_faces,
        n_int=n_int,
        n_probe=n_probe,
        indices=indices,
        indptr=indptr,
        perm=inv,
        assemble=assemble,
        diag_pos=diag_pos,
        jump=jump,
        scatter=scatter,
        interp=interp,
        edge_grad=edge_grad,
        edge_probe=n + n_faces + np.arange(n_bnd),
    )
    return PadMesh(
        shape=shape,
        length_mm=float(length_mm),
        width_mm=float(width_mm),
        x_mm=x,
        y_mm=y,
        area_mm2=area,
        probe_x_mm=probe_x,
        probe_y_mm=probe_y,
        spacing_mm=(float(dx), float(dy)),
        _ops=ops,
    )


def _mesh_count(value, name):
    try:
        v = int(value)
    except (TypeError, ValueError, OverflowError):
        raise InputValueError(f"{name} must be a whole number, got {value!r}", fix="give e.g. 64") from None
    if v < MIN_MESH_CELLS or v != value:
        raise InputValueError(f"{name} must be a whole number of at least 4, got {value!r}", fix="give e.g. 64")
    if v > MAX_MESH_CELLS:
        raise InputValueError(f"{name} {v} is above {MAX_MESH_CELLS}: {MESH_LIMIT_REASON}", fix="give e.g. 64")
    return v


def circular_pad_mesh(diameter_mm: float, n: int = 64) -> PadMesh:
    """Mesh over a circular pad face.

    Parameters
    ----------
    diameter_mm : float
        Pad diameter in mm.
    n : int
        Mesh cells across the diameter (the nodes inside the disc are kept, about 0.785 n²).

    Returns
    -------
    PadMesh
    """
    d = _positive(diameter_mm, "pad diameter (mm)", "give the pad diameter in mm")
    n = _mesh_count(n, "mesh size")
    return _build_mesh("circle", d, d, n, n)


def rectangular_pad_mesh(length_mm: float, width_mm: float, nx: int = 64, ny: int = 64) -> PadMesh:
    """Mesh over a rectangular pad face, ``length_mm`` along x (the travel) by ``width_mm`` across.

    Parameters
    ----------
    length_mm, width_mm : float
        Pad size in mm.
    nx, ny : int
        Mesh cells along x and y.

    Returns
    -------
    PadMesh
    """
    L = _positive(length_mm, "pad length (mm)", "give the pad length in mm")
    W = _positive(width_mm, "pad width (mm)", "give the pad width in mm")
    return _build_mesh("rect", L, W, _mesh_count(nx, "mesh size nx"), _mesh_count(ny, "mesh size ny"))


# --------------------------------------------------------------------------- surface under the pad
@dataclass(frozen=True, eq=False)
class PadDeviation:
    """Surface height under a pad at the mesh's probe points.

    Attributes
    ----------
    height_um : ndarray, shape (m,)
        Surface height (positive towards the pad) at ``mesh.probe_x_mm, mesh.probe_y_mm`` in µm, relative to
        any fixed zero; the film is ``pad face height - surface height``.
    """

    height_um: np.ndarray


def pad_deviation(mesh: PadMesh, deviation=None) -> PadDeviation:
    """Surface deviation under the pad from a callable or from values at the mesh nodes.

    Parameters
    ----------
    mesh : PadMesh
    deviation : None, callable or array_like
        ``None``: a flat guide (zero everywhere). A callable ``f(x_mm, y_mm) -> height_um`` in pad-local
        coordinates (mm, origin at the pad centre), evaluated at every probe point. An array of shape
        ``(mesh.n,)``: heights in µm at the nodes, interpolated linearly along mesh lines to link midpoints and
        extrapolated linearly to the edge points. An array of shape ``(m,)`` with ``m`` the number of probe
        points is taken as is.

    Returns
    -------
    PadDeviation

    Raises
    ------
    InputValueError
        Wrong length or non-finite heights.
    """
    m = mesh.probe_x_mm.size
    if deviation is None:
        z = np.zeros(m)
    elif callable(deviation):
        z = np.asarray(deviation(mesh.probe_x_mm, mesh.probe_y_mm), dtype=float)
        z = np.broadcast_to(z, (m,)).copy() if z.ndim == 0 else z.ravel()
    else:
        z = np.asarray(deviation, dtype=float).ravel()
        if z.size == mesh.n:
            z = mesh._ops["interp"] @ z
    if z.size != m:
        raise InputValueError(
            f"surface deviation has {z.size} values; the pad mesh has {mesh.n} nodes and {m} probe points",
            fix="give one height per mesh node (PadMesh.x_mm) or a callable f(x_mm, y_mm)",
        )
    if not np.isfinite(z).all():
        raise InputValueError(
            "surface deviation under the pad is not finite everywhere",
            fix="check that the pad lies inside the measured area",
        )
    return PadDeviation(z)


def surface_under_pad(mesh: PadMesh, surface, x_mm: float, y_mm: float, *, method: str = "linear") -> PadDeviation:
    """Sample a measured surface under a pad centred at ``(x_mm, y_mm)``.

    Parameters
    ----------
    mesh : PadMesh
        The pad's mesh (pad-local coordinates; the pad's x is the surface's x).
    surface : HeightMap
        Measured surface (positions mm, heights µm).
    x_mm, y_mm : float
        Pad centre on the surface, mm.
    method : {"linear", "cubic"}
        Interpolation between surface stations (see :meth:`HeightMap.sample`).

    Returns
    -------
    PadDeviation

    Raises
    ------
    InputValueError
        If part of the footprint lies outside the measured area (flatcheck never extrapolates).
    """
    z = surface.sample(x_mm + mesh.probe_x_mm, y_mm + mesh.probe_y_mm, method=method)
    if not np.isfinite(z).all():
        raise InputValueError(
            f"the pad centred at x = {x_mm:g} mm, y = {y_mm:g} mm reaches outside the measured surface",
            fix="shorten the travel or measure closer to the edges",
        )
    return PadDeviation(np.asarray(z, dtype=float))


# --------------------------------------------------------------------------- results
@dataclass(frozen=True, eq=False)
class FilmState:
    """The air film of a pad held at a given fly height and tilt.

    Attributes
    ----------
    gap_um : ndarray, shape (n,)
        Film thickness at the mesh nodes, µm.
    pressure_pa : ndarray, shape (n,)
        Absolute film pressure at the mesh nodes, Pa.
    fly_height_um : float
        Mean film thickness over the footprint (area-weighted), µm.
    min_film_um : float
        Least film thickness over the nodes, link midpoints and edge points, µm.
    load_n : float
        Load capacity, the integral of ``p - pa`` over the face, N.
    moment_x_nmm, moment_y_nmm : float
        First moments ``∫(p - pa) x dA`` and ``∫(p - pa) y dA`` about the pad centre, N·mm
        (the centre of pressure is at ``moment / load``).
    stiffness_n_per_um : float
        ``-dW/dh`` for a uniform change of the film at fixed tilt, N/µm.
    mass_flow_kg_s : float
        Air mass flow through the pad (Darcy inflow integrated over the face), kg/s.
    edge_outflow_kg_s : float
        Mass flow leaving the pad's edge computed from the film gradients there, kg/s (equal to the
        inflow in the continuous model; the difference measures the discretisation error).
    flow_l_per_min : float
        Volumetric flow of free air at the ambient pressure and film temperature, l/min.
    assumptions : tuple of str
    feed_pressure_ratios : ndarray, shape (N,)
        Orifice-fed pads: absolute feed (pocket) pressure over absolute supply pressure at each of the N
        orifices (dimensionless); empty for a porous pad.
    """

    gap_um: np.ndarray
    pressure_pa: np.ndarray
    fly_height_um: float
    min_film_um: float
    load_n: float
    moment_x_nmm: float
    moment_y_nmm: float
    stiffness_n_per_um: float
    mass_flow_kg_s: float
    edge_outflow_kg_s: float
    flow_l_per_min: float
    assumptions: tuple = FILM_ASSUMPTIONS
    feed_pressure_ratios: np.ndarray = field(default_factory=lambda: np.array([]))

    @property
    def feed_pressure_ratio(self) -> float:
        """Mean feed pressure ratio ``pr / ps`` over the orifices (NaN for a porous pad)."""
        r = np.asarray(self.feed_pressure_ratios, dtype=float)
        return float(r.mean()) if r.size else float("nan")


@dataclass(frozen=True, eq=False)
class FilmCurve:
    """Performance of a pad over a perfectly flat guide as a function of the (uniform) gap.

    Attributes
    ----------
    gap_um : ndarray, shape (k,)
        Uniform film thickness, µm, increasing.
    load_n : ndarray, shape (k,)
        Load capacity, N.
    stiffness_n_per_um : ndarray, shape (k,)
        ``-dW/dh``, N/µm.
    mass_flow_kg_s : ndarray, shape (k,)
        Mass flow, kg/s.
    flow_l_per_min : ndarray, shape (k,)
        Free-air flow at ambient, l/min.
    peak_stiffness_gap_um : float
        Gap of greatest stiffness, µm (refined between the samples).
    peak_stiffness_n_per_um : float
        The greatest stiffness, N/µm.
    peak_inside : bool
        False when the greatest stiffness is at an end of the sampled range (then widen the range).
    assumptions : tuple of str
    feed_pressure_ratio : ndarray, shape (k,)
        Orifice-fed pads: mean ``pr / ps`` over the orifices at each gap; NaN for a porous pad.
    """

    gap_um: np.ndarray
    load_n: np.ndarray
    stiffness_n_per_um: np.ndarray
    mass_flow_kg_s: np.ndarray
    flow_l_per_min: np.ndarray
    peak_stiffness_gap_um: float
    peak_stiffness_n_per_um: float
    peak_inside: bool
    assumptions: tuple = FILM_ASSUMPTIONS
    feed_pressure_ratio: np.ndarray = None


@dataclass(frozen=True, eq=False)
class FilmEquilibrium:
    """A pad in equilibrium over the surface under it.

    Attributes
    ----------
    fly_height_um : float
        Mean film thickness over the footprint, µm.
    min_film_um : float
        Least film thickness, µm.
    pad_height_um : float
        Height of the pad face's centre above the zero of the surface heights, µm.
    tilt_x_urad, tilt_y_urad : float
        Slopes of the pad face along x and y, µrad (in the surface's frame; positive when the face rises
        towards +x / +y).
    load_n : float
        Load carried (equals the applied load at convergence), N.
    stiffness_n_per_um : float
        ``-dW/dh`` of the pad; for a pad on a ball pivot the tilts follow (zero moment kept), N/µm.
    mass_flow_kg_s, flow_l_per_min : float
        Air consumption.
    iterations : int
        Newton iterations (film solutions) used.
    state : FilmState
        The film at equilibrium (pressure field, moments...).
    assumptions : tuple of str
    """

    fly_height_um: float
    min_film_um: float
    pad_height_um: float
    tilt_x_urad: float
    tilt_y_urad: float
    load_n: float
    stiffness_n_per_um: float
    mass_flow_kg_s: float
    flow_l_per_min: float
    iterations: int
    state: FilmState
    assumptions: tuple = FILM_ASSUMPTIONS


@dataclass(frozen=True, eq=False)
class FilmTravel:
    """Equilibrium of a pad at each carriage position (arrays of shape (k,), one entry per position).

    ``converged[i]`` is False where no film equilibrium exists (the pad would touch the surface); the other
    fields are NaN there and ``failure`` names the reason. ``feed_pressure_ratio`` is the mean ``pr / ps`` over
    the orifices of an orifice-fed pad (NaN for a porous pad).
    """

    fly_height_um: np.ndarray
    min_film_um: np.ndarray
    pad_height_um: np.ndarray
    tilt_x_urad: np.ndarray
    tilt_y_urad: np.ndarray
    load_n: np.ndarray
    stiffness_n_per_um: np.ndarray
    mass_flow_kg_s: np.ndarray
    flow_l_per_min: np.ndarray
    iterations: np.ndarray
    converged: np.ndarray
    failure: tuple
    assumptions: tuple = FILM_ASSUMPTIONS
    feed_pressure_ratio: np.ndarray = None


# --------------------------------------------------------------------------- solver core
class _Contact(Exception):
    """Internal: the film closes (no equilibrium with a positive film)."""


class _Solver:
    """Film solutions on one mesh with one feed; methods are thread-safe (no shared mutable state)."""

    def __init__(self, mesh: PadMesh, feed):
        if not isinstance(feed, (PorousFeed, OrificeFeed)):
            raise InputValueError(
                f"unknown feed {type(feed).__name__}", fix="give a PorousFeed or an OrificeFeed"
            )
        self.mesh = mesh
        self.feed = feed
        ops = mesh._ops
        self.ops = ops
        pa, ps = feed.ambient_pa, feed.supply_pa
        self.pa = pa
        self.dP = ps * ps - pa * pa
        mu, R, T = feed.viscosity_pa_s, feed.gas_constant_j_per_kg_k, feed.temperature_k
        self.rt = R * T
        # film flux h³ grad(p²) / (24 mu R T), h in µm, grad in 1/mm, length in mm: 1e-18 * 1e3 * 1e-3
        self.flux_coef = 1e-18 / (24 * mu * R * T)
        self.outflow_coef = self.dP * self.flux_coef
        self.orifice = isinstance(feed, OrificeFeed)
        if self.orifice:
            self._setup_orifices()
        else:
            self.beta = feed.feed_coefficient
            # Darcy inflow k (ps² - p²) / (2 mu R T H) per m²; Pn form: k dP (1 - Pn) / (2 mu R T H)
            self.inflow_coef = feed.permeability_m2 * self.dP / (2 * mu * R * T * feed.layer_mm * 1e-3)
        self.w = mesh.area_mm2 * _MM2_TO_M2
        self.x = mesh.x_mm
        self.y = mesh.y_mm
        n, nf = mesh.n, ops["n_faces"]
        self.nf = nf
        self.face_sl = slice(n, n + nf)
        px, py = mesh.probe_x_mm, mesh.probe_y_mm
        self.fx, self.fy = px[self.face_sl], py[self.face_sl]
        self.px, self.py = px, py

    # ---- orifice feeds
    def _setup_orifices(self):
        """Feed regions on the mesh: node sets, coupling kind and the Peaceman well geometry."""
        feed, mesh = self.feed, self.mesh
        dx, dy = mesh.spacing_mm
        # Peaceman's equivalent well-block radius for the five-point scheme on square cells, e^-gamma / (2 sqrt 2)
        # times the spacing = 0.1985 dx; 0.14 sqrt(dx² + dy²) for rectangular cells (Peaceman 1978/1983)
        r_eq = 0.14 * math.hypot(dx, dy) if abs(dx - dy) > 1e-9 * dx else 0.19850 * dx
        r0 = feed.feed_radius_mm
        half = 0.5 * mesh.length_mm, 0.5 * mesh.width_mm
        nodes, region, well_geom, hub = [], [], [], []
        for k, (xo, yo) in enumerate(feed.positions_mm):
            if mesh.shape == "circle":
                room = half[0] - math.hypot(xo, yo)
            else:
                room = min(half[0] - abs(xo), half[1] - abs(yo))
            if room <= r0 + 1.5 * max(dx, dy):
                raise GeometryError(
                    f"orifice {k + 1} at ({xo:g}, {yo:g}) mm is too close to the pad's edge for its feed radius "
                    f"{r0:g} mm on this mesh",
                    fix="move the orifice inwards, use a smaller pocket or a finer mesh",
                )
            d2 = (mesh.x_mm - xo) ** 2 + (mesh.y_mm - yo) ** 2
            j = int(np.argmin(d2))
            hub.append(j)
            if r0 < r_eq:
                nodes.append(j)
                region.append(k)
                # radial flow from the feed radius r0 to the well-block radius: Q = 2 pi h³ dP / ln(r_eq / r0),
                # per unit cell area in the node's equation
                well_geom.append(2.0 * math.pi / (math.log(r_eq / r0) * mesh.area_mm2[j]))
            else:
                inside = np.flatnonzero(d2 < r0 * r0)
                inside = np.union1d(inside, [j])
                nodes.extend(inside.tolist())
                region.extend([k] * inside.size)
                well_geom.extend([0.0] * inside.size)  # 0 marks a node held at the feed pressure
        nodes = np.array(nodes, dtype=np.int64)
        if np.unique(nodes).size != nodes.size:
            raise GeometryError("two orifices' feed regions overlap on this mesh",
                                fix="space the orifices further apart or use a finer mesh")
        self.feed_nodes = nodes
        self.feed_region = np.array(region, dtype=np.int64)
        self.well_geom = np.array(well_geom)
        self.is_well = self.well_geom > 0.0
        self.hub = np.array(hub, dtype=np.int64)  # node of each orifice (film at the orifice)
        self.n_orifice = len(feed.positions_mm)
        self.feed_area = mesh.area_mm2[nodes]
        self.well_radius_mm = r_eq
        inv = np.argsort(self.ops["perm"])
        self.feed_diag = self.ops["diag_pos"][inv[nodes]]  # data index of each feed node's diagonal
        self.X_max = self.dP
        # region-sum matrix: (N, len(nodes)), 1 where a node belongs to orifice k
        self.region_sum = np.zeros((self.n_orifice, nodes.size))
        self.region_sum[self.feed_region, np.arange(nodes.size)] = 1.0

    def _feed_flows(self, X, gaps_hub):
        """Orifice mass flows (kg/s) and d(mdot)/dX (X = pr² - pa²) at feed pressures given by X."""
        f = self.feed
        pr = np.sqrt(self.pa * self.pa + np.clip(X, 0.0, self.X_max))
        area = f.restriction_area_m2(gaps_hub)
        m = np.array([f.mass_flow(pr[k], gaps_hub[k]) for k in range(X.size)])
        dm = np.array([
            _orifice_dflow_dp(pr[k], f.supply_pa, float(area[k]), f.cd, f.gamma, self.rt) / (2.0 * pr[k])
            for k in range(X.size)
        ])
        return m, dm, pr, area

    def _balance(self, G, gaps_hub):
        """Feed states X_k = pr_k² - pa² at which each orifice's flow equals the film's outflow ``G X``."""
        from scipy.optimize import brentq

        N = self.n_orifice
        if N == 1:
            g = float(G[0, 0])

            def f(x):
                return self._feed_flows(np.array([x]), gaps_hub)[0][0] - g * x

            X = np.array([brentq(f, 0.0, self.X_max, xtol=1e-14 * self.X_max, rtol=1e-14, maxiter=200)])
            return X
        # several orifices: Newton on m(X) - G X = 0 (monotone: m falls, G X rises with each X_k)
        X = np.full(N, 0.5 * self.X_max)
        scale = max(float(np.abs(G).max()) * self.X_max, 1e-300)
        for _ in range(100):
            m, dm, _, _ = self._feed_flows(X, gaps_hub)
            F = m - G @ X
            if np.max(np.abs(F)) < 1e-13 * scale:
                break
            step = np.linalg.solve(np.diag(dm) - G, -F)
            alpha = 1.0
            while True:
                Xn = np.clip(X + alpha * step, 0.0, self.X_max)
                Fn = self._feed_flows(Xn, gaps_hub)[0] - G @ Xn
                if np.max(np.abs(Fn)) < np.max(np.abs(F)) or alpha < 1e-4:
                    break
                alpha *= 0.5
            X = Xn
        return X

    def _solve_orifice(self, probe_gap_um, deriv_xy: bool):
        ops = self.ops
        n = self.mesh.n
        perm = ops["perm"]
        hf = probe_gap_um[self.face_sl]
        c = hf * hf * hf
        data = ops["assemble"] @ c
        h_nodes = probe_gap_um[self.feed_nodes]
        w = self.well_geom * h_nodes**3
        # nodes held at the feed pressure: a penalty a million times the largest diagonal (error ~1e-6)
        w_pen = 1e6 * float(data[ops["diag_pos"]].max())
        w = np.where(self.is_well, w, w_pen)
        data[self.feed_diag] += w
        Ap = sp.csc_matrix((data, ops["indices"], ops["indptr"]), shape=(n, n))
        lu = splu(Ap, permc_spec="NATURAL", options=dict(SymmetricMode=True, DiagPivotThresh=0.0))
        N = self.n_orifice
        B = np.zeros((n, N))
        B[self.feed_nodes, self.feed_region] = w
        U = np.empty((n, N))
        U[perm] = lu.solve(B[perm])  # field of unit X at each orifice, others at 0
        aw = self.feed_area * w
        # film outflow from feed k per unit X_j: G_kj = C (delta_kj sum_k a w - sum_k a w U_j)
        G = self.flux_coef * (np.diag(self.region_sum @ aw) - self.region_sum @ (aw[:, None] * U[self.feed_nodes]))
        gaps_hub = probe_gap_um[self.hub]
        X = self._balance(G, gaps_hub)
        phi = U @ X
        # derivatives at fixed X: (K + W) dPhi = -(dK) Phi - dW (Phi - X)
        dc = 3.0 * hf * hf
        fj = (ops["jump"] @ phi) * dc
        if deriv_xy:
            D = np.column_stack([fj, fj * (self.fx * 1e-3), fj * (self.fy * 1e-3)])
            dh_nodes = np.column_stack([np.ones(n), self.x * 1e-3, self.y * 1e-3])
        else:
            D = fj[:, None]
            dh_nodes = np.ones((n, 1))
        rhs = -(ops["scatter"] @ D)
        Xn = X[self.feed_region]
        dw = np.where(self.is_well, 3.0 * w / h_nodes, 0.0)[:, None] * dh_nodes[self.feed_nodes]
        np.add.at(rhs, self.feed_nodes, -dw * (phi[self.feed_nodes] - Xn)[:, None])
        dphi = np.empty_like(rhs)
        dphi[perm] = lu.solve(rhs[perm])
        # outflow from each feed at fixed X, and the orifice flows, as functions of u
        d_out = self.flux_coef * (
            self.region_sum @ (self.feed_area[:, None] * (dw * (Xn - phi[self.feed_nodes])[:, None]
                                                          - w[:, None] * dphi[self.feed_nodes]))
        )
        m, dm_dX, pr, area = self._feed_flows(X, gaps_hub)
        f = self.feed
        bore = math.pi * (f.orifice_mm * 1e-3) ** 2 / 4.0
        curtain = area < bore
        dA_dh = np.where(curtain, math.pi * f.orifice_mm * 1e-3 * 1e-6, 0.0)  # m² per µm
        dm_dA = np.where(area > 0, m / np.where(area > 0, area, 1.0), 0.0)
        dm_du = (dm_dA * dA_dh)[:, None] * dh_nodes[self.hub]
        JX = np.diag(dm_dX) - G
        dX = -np.linalg.solve(JX, dm_du - d_out)
        dphi = dphi + U @ dX
        phi_c = np.clip(phi, 0.0, self.X_max)
        p = np.sqrt(self.pa * self.pa + phi_c)
        dp = dphi / (2.0 * p)[:, None]
        q = self.w * (p - self.pa)
        wd = self.w[:, None] * dp
        J = np.vstack([wd.sum(axis=0), self.x @ wd, self.y @ wd])
        return dict(pn=phi / self.dP, p=p, load=float(q.sum()), mx=float(q @ self.x), my=float(q @ self.y), J=J,
                    hmin=float(probe_gap_um.min()), mass=float(m.sum()), ratio=pr / f.supply_pa)

    # ---- one film solution
    def solve(self, probe_gap_um, deriv_xy: bool):
        """Solve for a film given at the probe points; derivatives wrt h0 (and tilts if deriv_xy)."""
        if self.orifice:
            if not float(probe_gap_um.min()) > 0.0:
                raise _Contact()
            return self._solve_orifice(probe_gap_um, deriv_xy)
        ops = self.ops
        n = self.mesh.n
        hmin = float(probe_gap_um.min())
        if not hmin > 0.0:
            raise _Contact()
        hf = probe_gap_um[self.face_sl]
        c = hf * hf * hf
        data = ops["assemble"] @ c
        data[ops["diag_pos"]] += self.beta
        # the matrix is held in the mesh's fill-reducing order: Ap[i, j] = A[perm[i], perm[j]]
        perm = ops["perm"]
        Ap = sp.csc_matrix((data, ops["indices"], ops["indptr"]), shape=(n, n))
        lu = splu(Ap, permc_spec="NATURAL", options=dict(SymmetricMode=True, DiagPivotThresh=0.0))
        pn = np.empty(n)
        pn[perm] = lu.solve(np.full(n, self.beta))
        # derivatives: A dPn/du = -A(dc/du) Pn, dc/du = 3 h² dh/du at each face
        dc = 3.0 * hf * hf
        fj = (ops["jump"] @ pn) * dc
        if deriv_xy:
            D = np.column_stack([fj, fj * (self.fx * 1e-3), fj * (self.fy * 1e-3)])
        else:
            D = fj[:, None]
        dpn = np.empty((n, D.shape[1]))
        dpn[perm] = lu.solve(-(ops["scatter"] @ D)[perm])
        pn = np.clip(pn, 0.0, 1.0)
        p = np.sqrt(self.pa * self.pa + self.dP * pn)
        dp = (self.dP / (2.0 * p))[:, None] * dpn
        q = self.w * (p - self.pa)
        load = float(q.sum())
        mx = float(q @ self.x)
        my = float(q @ self.y)
        # Jacobian of (W, Mx, My) wrt (h0, tx, ty): W in N, M in N mm, h0 in µm, tilts in µrad
        wd = self.w[:, None] * dp
        J = np.vstack([wd.sum(axis=0), self.x @ wd, self.y @ wd])
        return dict(pn=pn, p=p, load=load, mx=mx, my=my, J=J, hmin=hmin)

    def state(self, probe_gap_um, sol, stiffness) -> FilmState:
        ops = self.ops
        n = self.mesh.n
        gap = probe_gap_um[:n]
        area = self.mesh.area_mm2
        # inflow = coef * ∫(1 - Pn) dA = coef * (face area - ∫Pn dA); Pn vanishes at the edge, so the node
        # quadrature of ∫Pn dA keeps second order where ∫(1 - Pn) dA would lose the cut cells' area
        if self.orifice:
            mass = sol["mass"]
            ratios = np.asarray(sol["ratio"], dtype=float)
        else:
            mass = self.inflow_coef * (self.mesh.pad_area_mm2 * _MM2_TO_M2 - float(self.w @ sol["pn"]))
            ratios = np.array([])
        he = probe_gap_um[ops["edge_probe"]]
        edge = self.outflow_coef * float(np.sum(he**3 * (ops["edge_grad"] @ sol["pn"])))
        return FilmState(
            gap_um=gap,
            pressure_pa=sol["p"],
            fly_height_um=float(area @ gap / area.sum()),
            min_film_um=sol["hmin"],
            load_n=sol["load"],
            moment_x_nmm=sol["mx"],
            moment_y_nmm=sol["my"],
            stiffness_n_per_um=float(stiffness),
            mass_flow_kg_s=mass,
            edge_outflow_kg_s=edge,
            flow_l_per_min=self.litres_per_min(mass),
            assumptions=self.feed_assumptions,
            feed_pressure_ratios=ratios,
        )

    @property
    def feed_assumptions(self):
        return self.feed.assumptions if self.orifice else FILM_ASSUMPTIONS

    def litres_per_min(self, mass_kg_s):
        return mass_kg_s / self.feed.ambient_density_kg_m3 * 1e3 * 60.0

    def gap(self, dev, h0, tx, ty):
        return h0 + tx * 1e-3 * self.px + ty * 1e-3 * self.py - dev

    # ---- equilibrium at one position
    def equilibrium(self, dev_probe, load_n, pivot, tilt, guess, rtol):
        """Newton iteration on (h0[, tx, ty]); returns (u, sol, gap, iterations)."""
        w_node = self.mesh.area_mm2
        z = dev_probe[: self.mesh.n]
        if pivot:
            A = np.column_stack([np.ones_like(z), self.x, self.y]) * np.sqrt(w_node)[:, None]
            coef, *_ = np.linalg.lstsq(A, z * np.sqrt(w_node), rcond=None)
            base = coef[0] + coef[1] * self.px + coef[2] * self.py
            frame = (coef[0], coef[1] * 1e3, coef[2] * 1e3)  # offset µm, slopes µrad
        else:
            mean = float(w_node @ z / w_node.sum())
            base = np.full_like(dev_probe, mean)
            frame = (mean, 0.0, 0.0)
        r = dev_probe - base
        nu = 3 if pivot else 1
        u = np.array(guess[:nu], dtype=float)
        if not pivot:
            tx, ty = tilt
        Lc = self.mesh.half_size_mm
        scale = np.array([load_n, load_n * Lc, load_n * Lc])[:nu]

        def full(u):
            return (u[0], u[1], u[2]) if pivot else (u[0], tx, ty)

        def resid(sol):
            F = np.array([sol["load"] - load_n, sol["mx"], sol["my"]])[:nu]
            return F / scale

        gap = self.gap(r, *full(u))
        if gap.min() <= 0.0:  # lift the pad until the film is open
            u[0] += 0.5 - gap.min() + abs(u[0])
            gap = self.gap(r, *full(u))
        sol = self.solve(gap, pivot)
        F = resid(sol)
        it = 1
        while np.max(np.abs(F)) > rtol:
            if it >= _MAX_ITER:
                raise _Contact()
            J = sol["J"][:nu, :nu] / scale[:, None]
            try:
                step = np.linalg.solve(J, -F)
            except np.linalg.LinAlgError:
                raise _Contact() from None
            # keep the film open: no probe may lose more than 70 % of its film in one step
            dgap = self.gap(np.zeros_like(r), *(step if pivot else (step[0], 0.0, 0.0)))
            shrink = dgap < 0
            alpha = 1.0
            if shrink.any():
                alpha = min(1.0, float(np.min(0.7 * gap[shrink] / -dgap[shrink])))
            normF = np.max(np.abs(F))
            while True:
                u_new = u + alpha * step
                gap_new = self.gap(r, *full(u_new))
                sol_new = self.solve(gap_new, pivot)
                it += 1
                F_new = resid(sol_new)
                if np.max(np.abs(F_new)) < normF or alpha < 1e-3 or it >= _MAX_ITER:
                    break
                alpha *= 0.5
            u, gap, sol, F = u_new, gap_new, sol_new, F_new
            if sol["hmin"] < 1e-4:  # film below 0.1 nm: the pad has landed
                raise _Contact()
        J = sol["J"]
        if pivot:
            # stiffness with the tilts free (moments stay zero): Schur complement of the tilt block
            k = J[0, 0] - J[0, 1:] @ np.linalg.solve(J[1:, 1:], J[1:, 0])
        else:
            k = J[0, 0]
        h0, tx_, ty_ = full(u)
        pad = (h0 + frame[0], tx_ + frame[1], ty_ + frame[2])
        return u, sol, gap, -k, pad, it

    def flat_fly_height(self, load_n, rtol):
        """Uniform gap that carries ``load_n`` over a flat guide."""
        zero = np.zeros(self.px.size)
        u, sol, gap, k, pad, it = self.equilibrium(zero, load_n, False, (0.0, 0.0), [10.0], rtol)
        return float(u[0])


def _check_load(mesh, feed, load_n):
    return _check_load_area(mesh.pad_area_mm2, feed, load_n)


#: Largest load solved, as a fraction of the closed-film load (gauge supply pressure times pad area). Near
#: that load the film hardly throttles the air, the stiffness falls towards zero and the fly height becomes
#: ill-conditioned; 98 % is a convention of this tool.
CAPACITY_FRACTION = 0.98


def _capacity_n(area_mm2, feed):
    """Closed-film load (gauge supply pressure times area, N) and the largest load solved (N)."""
    cap = (feed.supply_pa - feed.ambient_pa) * area_mm2 * _MM2_TO_M2
    return cap, CAPACITY_FRACTION * cap


def _check_load_area(area_mm2, feed, load_n):
    load = _positive(load_n, "pad load (N)", "give the load carried by the pad in newtons")
    cap, limit = _capacity_n(area_mm2, feed)
    if load >= limit:
        raise InputValueError(
            f"a load of {load:.4g} N is beyond this pad's capacity: at most {limit:.4g} N "
            f"({100 * CAPACITY_FRACTION:.0f} % of supply pressure times area, {cap:.4g} N, where the film closes)",
            fix="raise the supply pressure, use a larger pad or share the load over more pads",
        )
    return load


def _check_design_load(mesh, feed, pad, design_load_n, name):
    """Refuse a pad whose film at its nominal gap carries nearly the closed-film load (no load was given)."""
    cap, limit = _capacity_n(mesh.pad_area_mm2, feed)
    if design_load_n < limit:
        return
    if isinstance(feed, OrificeFeed):
        why = "the orifices restrict the air too little for this gap and supply"
        change = "use smaller or fewer orifices (--orifice-mm, --orifices), a larger gap (--gap-um)"
    else:
        why = "the porous layer is too permeable (or too thin) for this gap and supply"
        change = "use a less permeable or thicker layer (--permeability-m2, --layer-mm), a larger gap (--gap-um)"
    raise InputValueError(
        f"at its nominal gap of {pad.gap_um:g} µm, pad {name!r} would carry {design_load_n:.4g} N, "
        f"{100 * design_load_n / cap:.1f} % of supply pressure times area ({cap:.4g} N): {why}, so the film "
        f"hardly throttles the air and the pad would have almost no stiffness (loads above {limit:.4g} N, "
        f"{100 * CAPACITY_FRACTION:.0f} %, are not solved)",
        where="film options",
        fix=f"{change}, or give the load per pad below {limit:.4g} N (--load-n)",
    )


# --------------------------------------------------------------------------- public API
def solve_film(
    mesh: PadMesh,
    feed: PorousFeed,
    *,
    fly_height_um: float,
    tilt_x_urad: float = 0.0,
    tilt_y_urad: float = 0.0,
    deviation=None,
) -> FilmState:
    """Air film of a pad held at a given height and tilt over a surface.

    The film is ``h = fly_height_um + tilt_x_urad * x / 1000 + tilt_y_urad * y / 1000 - s(x, y)`` (µm, x and
    y in mm from the pad centre), with ``s`` the surface deviation under the pad.

    Parameters
    ----------
    mesh : PadMesh
    feed : PorousFeed or OrificeFeed
    fly_height_um : float
        Height of the pad face's centre above the zero of ``s``, µm.
    tilt_x_urad, tilt_y_urad : float
        Slopes of the pad face along x and y, µrad.
    deviation : None, callable, array or PadDeviation
        Surface deviation ``s`` under the pad (see :func:`pad_deviation`); ``None`` for a flat guide.

    Returns
    -------
    FilmState

    Raises
    ------
    GeometryError
        If the film is not open everywhere (the pad touches the surface).

    Examples
    --------
    >>> mesh = circular_pad_mesh(50.0, n=32)
    >>> feed = PorousFeed(1e-15, 5.0, 600.0 - 101.325)
    >>> st = solve_film(mesh, feed, fly_height_um=5.0)
    >>> 600 < st.load_n < 660   # analytic value 628.0 N (docs/methods.md)
    True
    """
    dev = deviation if isinstance(deviation, PadDeviation) else pad_deviation(mesh, deviation)
    solver = _Solver(mesh, feed)
    h0 = float(fly_height_um)
    gap = solver.gap(dev.height_um, h0, float(tilt_x_urad), float(tilt_y_urad))
    try:
        sol = solver.solve(gap, False)
    except _Contact:
        raise GeometryError(
            f"the pad touches the surface (least film {gap.min():.3g} µm)",
            fix="raise the fly height or reduce the tilt",
        ) from None
    return solver.state(gap, sol, -sol["J"][0, 0])


def default_curve_gaps_um(gap_um: float, n: int = 33) -> np.ndarray:
    """Gaps for a performance curve around a nominal gap: ``n`` values from gap/4 to 4 gap, geometric."""
    g = _positive(gap_um, "gap (µm)", "give the nominal gap in µm")
    return np.geomspace(g / 4.0, 4.0 * g, int(n))


def flat_guide_curve(mesh: PadMesh, feed: PorousFeed, gaps_um) -> FilmCurve:
    """Load, stiffness and flow of a pad over a perfectly flat guide versus the uniform gap.

    Parameters
    ----------
    mesh : PadMesh
    feed : PorousFeed or OrificeFeed
    gaps_um : array_like, shape (k,)
        Uniform gaps in µm (k >= 3), sorted into increasing order.

    Returns
    -------
    FilmCurve
        With the gap of greatest stiffness refined by a bounded scalar search between the samples that
        surround the sampled maximum.
    """
    from scipy.optimize import minimize_scalar

    gaps = np.unique(np.asarray(gaps_um, dtype=float).ravel())
    if gaps.size < 3 or not np.isfinite(gaps).all() or gaps[0] <= 0:
        raise InputValueError("a film curve needs at least three positive gaps", fix="give gaps in µm above 0")
    solver = _Solver(mesh, feed)
    zero = np.zeros(mesh.probe_x_mm.size)
    loads, stiff, mass, ratio = [], [], [], []
    for g in gaps:
        gap = zero + g
        sol = solver.solve(gap, False)
        st = solver.state(gap, sol, -sol["J"][0, 0])
        loads.append(st.load_n)
        stiff.append(st.stiffness_n_per_um)
        mass.append(st.mass_flow_kg_s)
        ratio.append(st.feed_pressure_ratio)
    stiff = np.array(stiff)
    i = int(np.argmax(stiff))
    inside = 0 < i < gaps.size - 1
    if inside:
        def neg_k(g):
            sol = solver.solve(zero + g, False)
            return sol["J"][0, 0]

        res = minimize_scalar(neg_k, bounds=(gaps[i - 1], gaps[i + 1]), method="bounded",
                              options=dict(xatol=1e-4 * gaps[i]))
        g_peak, k_peak = float(res.x), float(-res.fun)
        if k_peak < stiff[i]:
            g_peak, k_peak = float(gaps[i]), float(stiff[i])
    else:
        g_peak, k_peak = float(gaps[i]), float(stiff[i])
    mass = np.array(mass)
    return FilmCurve(
        gap_um=gaps,
        load_n=np.array(loads),
        stiffness_n_per_um=stiff,
        mass_flow_kg_s=mass,
        flow_l_per_min=solver.litres_per_min(mass),
        peak_stiffness_gap_um=g_peak,
        peak_stiffness_n_per_um=k_peak,
        peak_inside=bool(inside),
        assumptions=solver.feed_assumptions,
        feed_pressure_ratio=np.array(ratio),
    )


#: Gaps shown in a short table of a flat-guide curve, as multiples of the nominal gap (gap/4 to 4 gap).
CURVE_TABLE_GAP_RATIOS = (0.25, 0.5, 2**-0.5, 1.0, 2**0.5, 2.0, 4.0)


def curve_table_rows(curve: FilmCurve, gap_um: float) -> tuple:
    """Which samples of a flat-guide curve to show in a short table.

    Parameters
    ----------
    curve : FilmCurve
        The curve (gaps increasing).
    gap_um : float
        The nominal gap, µm.

    Returns
    -------
    (rows, nominal, peak) : tuple
        ``rows``: sorted indices into the curve's arrays, the samples nearest (on a log scale) to
        ``CURVE_TABLE_GAP_RATIOS`` times ``gap_um`` plus the sample of greatest stiffness; ``nominal``: the
        index nearest ``gap_um``; ``peak``: the index of greatest stiffness.
    """
    lg = np.log(np.asarray(curve.gap_um, dtype=float))
    nearest = [int(np.argmin(np.abs(lg - math.log(r * gap_um)))) for r in CURVE_TABLE_GAP_RATIOS]
    peak = int(np.argmax(curve.stiffness_n_per_um))
    nominal = int(np.argmin(np.abs(lg - math.log(gap_um))))
    return tuple(sorted(set(nearest) | {peak})), nominal, peak


def film_equilibrium(
    mesh: PadMesh,
    feed: PorousFeed,
    load_n: float,
    *,
    deviation=None,
    pivot: bool = True,
    tilt_x_urad: float = 0.0,
    tilt_y_urad: float = 0.0,
    rtol: float = 1e-6,
) -> FilmEquilibrium:
    """Fly height (and, on a ball pivot, tilts) at which a pad carries ``load_n`` over a surface.

    Newton's method on ``W(h0) = load`` (and zero moments about the pivot at the pad centre for
    ``pivot=True``), with the exact derivatives of the discrete film from the reused LU factors.

    Parameters
    ----------
    mesh : PadMesh
    feed : PorousFeed or OrificeFeed
    load_n : float
        Load on the pad, N (below the closed-film capacity ``(ps - pa) * area``).
    deviation : None, callable, array or PadDeviation
        Surface under the pad (see :func:`pad_deviation`).
    pivot : bool
        True: the pad sits on a ball pivot at its centre and tilts freely (zero moment). False: the pad is
        held at ``tilt_x_urad, tilt_y_urad`` (µrad, in the surface's frame) and only its height floats.
    rtol : float
        Convergence: load within ``rtol * load`` and moments within ``rtol * load * half pad size``.

    Returns
    -------
    FilmEquilibrium

    Raises
    ------
    InputValueError
        Load beyond the pad's capacity.
    GeometryError
        No equilibrium with an open film (the pad would touch the surface).
    """
    load = _check_load(mesh, feed, load_n)
    dev = deviation if isinstance(deviation, PadDeviation) else pad_deviation(mesh, deviation)
    solver = _Solver(mesh, feed)
    try:
        h_flat = solver.flat_fly_height(load, rtol)
        out = solver.equilibrium(dev.height_um, load, pivot, (tilt_x_urad, tilt_y_urad), [h_flat, 0.0, 0.0], rtol)
    except _Contact:
        raise GeometryError(
            f"no film equilibrium for {load:g} N: the pad would touch the surface",
            fix="reduce the load, raise the supply pressure or flatten the surface under the pad",
        ) from None
    return _make_equilibrium(solver, out)


def _make_equilibrium(solver, out) -> FilmEquilibrium:
    u, sol, gap, k, pad, it = out
    st = solver.state(gap, sol, k)
    return FilmEquilibrium(
        fly_height_um=st.fly_height_um,
        min_film_um=st.min_film_um,
        pad_height_um=float(pad[0]),
        tilt_x_urad=float(pad[1]),
        tilt_y_urad=float(pad[2]),
        load_n=st.load_n,
        stiffness_n_per_um=float(k),
        mass_flow_kg_s=st.mass_flow_kg_s,
        flow_l_per_min=st.flow_l_per_min,
        iterations=int(it),
        state=st,
        assumptions=st.assumptions,
    )


def film_along_travel(
    mesh: PadMesh,
    feed: PorousFeed,
    load_n: float,
    deviations,
    *,
    pivot: bool = True,
    tilt_x_urad: float = 0.0,
    tilt_y_urad: float = 0.0,
    rtol: float = 1e-6,
    workers: int | None = None,
    progress=None,
) -> FilmTravel:
    """Film equilibrium of a pad at each carriage position.

    Parameters
    ----------
    mesh : PadMesh
    feed : PorousFeed or OrificeFeed
    load_n : float
        Load on the pad, N, the same at every position.
    deviations : sequence of (None, callable, array or PadDeviation), length k
        Surface under the pad at each position (see :func:`pad_deviation` and :func:`surface_under_pad`).
    pivot, tilt_x_urad, tilt_y_urad, rtol
        As in :func:`film_equilibrium`.
    workers : int, optional
        Threads sharing the positions (contiguous blocks; each block warm-starts Newton from its previous
        position). Default: ``min(2, os.cpu_count())``.
    progress : callable, optional
        Called as ``progress(1)`` after each position (from worker threads).

    Returns
    -------
    FilmTravel
    """
    load = _check_load(mesh, feed, load_n)
    devs = [d if isinstance(d, PadDeviation) else pad_deviation(mesh, d) for d in deviations]
    k = len(devs)
    if k == 0:
        raise InputValueError("no carriage positions", fix="give at least one position")
    solver = _Solver(mesh, feed)
    try:
        h_flat = solver.flat_fly_height(load, rtol)
    except _Contact:  # pragma: no cover - excluded by the capacity check
        raise GeometryError("no film equilibrium on a flat guide", fix="reduce the load") from None
    nw = max(1, min(int(workers or min(2, os.cpu_count() or 1)), k))
    names = ("fly", "minf", "padh", "tx", "ty", "load", "stiff", "mass", "flow", "it", "ratio")
    out = {nm: np.full(k, np.nan) for nm in names}
    conv = np.zeros(k, dtype=bool)
    failure = [""] * k
    lock = threading.Lock()

    def block(idx):
        guess = [h_flat, 0.0, 0.0]
        prev = None  # solution at the position before the last one, for a linear prediction
        for i in idx:
            try:
                res = solver.equilibrium(devs[i].height_um, load, pivot, (tilt_x_urad, tilt_y_urad), guess, rtol)
            except _Contact:
                failure[i] = "no equilibrium with an open film: the pad would touch the surface"
                guess, prev = [h_flat, 0.0, 0.0], None
            else:
                eq = _make_equilibrium(solver, res)
                vals = (eq.fly_height_um, eq.min_film_um, eq.pad_height_um, eq.tilt_x_urad, eq.tilt_y_urad,
                        eq.load_n, eq.stiffness_n_per_um, eq.mass_flow_kg_s, eq.flow_l_per_min, eq.iterations,
                        eq.state.feed_pressure_ratio)
                for nm, v in zip(names, vals):
                    out[nm][i] = v
                conv[i] = True
                last = np.array(list(res[0]) + [0.0] * (3 - len(res[0])))
                # predict the next position linearly from the last two (positions are evenly spaced in
                # practice; a poor prediction only costs a Newton step)
                guess = list(last if prev is None else 2.0 * last - prev)
                if guess[0] <= 0.5 * last[0]:
                    guess = list(last)
                prev = last
            if progress is not None:
                with lock:
                    progress(1)

    blocks = [b for b in np.array_split(np.arange(k), nw) if b.size]
    if len(blocks) == 1:
        block(blocks[0])
    else:
        with ThreadPoolExecutor(max_workers=len(blocks)) as ex:
            for f in [ex.submit(block, b) for b in blocks]:
                f.result()
    return FilmTravel(
        fly_height_um=out["fly"],
        min_film_um=out["minf"],
        pad_height_um=out["padh"],
        tilt_x_urad=out["tx"],
        tilt_y_urad=out["ty"],
        load_n=out["load"],
        stiffness_n_per_um=out["stiff"],
        mass_flow_kg_s=out["mass"],
        flow_l_per_min=out["flow"],
        iterations=out["it"].astype(float),
        converged=conv,
        failure=tuple(failure),
        assumptions=solver.feed_assumptions,
        feed_pressure_ratio=out["ratio"],
    )


# --------------------------------------------------------------------------- film under a bearing carriage
#: Largest change of pad stiffness over the travel, as a fraction of the flat-guide stiffness, before the
#: film check calls it unfit. No published limit exists; 10 % is a convention of this tool, stated in reports.
DEFAULT_STIFFNESS_CHANGE_LIMIT = 0.10


@dataclass(frozen=True, eq=False)
class PadFilmTravel:
    """Film of one pad of a carriage over the travel.

    Attributes
    ----------
    name : str
        Pad name.
    load_n : float
        Load on the pad, N (default: what the pad carries at its nominal gap over a flat guide).
    design_fly_height_um : float
        Fly height for that load over a perfectly flat guide, µm.
    design_stiffness_n_per_um : float
        Stiffness there, N/µm.
    travel : FilmTravel
        Per-position results (one per evaluated carriage station).
    """

    name: str
    load_n: float
    design_fly_height_um: float
    design_stiffness_n_per_um: float
    travel: FilmTravel


@dataclass(frozen=True, eq=False)
class BearingFilm:
    """Film of every active pad of a carriage at each station, plus the first pad's curve.

    Attributes
    ----------
    feed : PorousFeed or OrificeFeed
    pivot : bool
        Pads on ball pivots (tilt free) or held parallel to the carriage reference (tilt 0).
    x_mm : ndarray, shape (k,)
        Carriage positions evaluated, mm.
    pads : tuple of PadFilmTravel
    curve : FilmCurve
        Flat-guide curve of the first active pad around its nominal gap.
    curve_pad : str
        Name of that pad.
    mesh_cells : int
        Mesh cells along each side of a pad.
    assumptions : tuple of str
    meshes : tuple of PadMesh
        The pad meshes used (one per pad size).
    curve_gap_um : float or None
        Nominal gap of the curve's pad, µm (the curve runs from a quarter of it to four times it).
    """

    feed: PorousFeed
    pivot: bool
    x_mm: np.ndarray
    pads: tuple
    curve: FilmCurve
    curve_pad: str
    mesh_cells: int
    assumptions: tuple = FILM_ASSUMPTIONS
    meshes: tuple = ()
    curve_gap_um: float | None = None

    def __post_init__(self):
        if isinstance(self.feed, OrificeFeed) and self.assumptions is FILM_ASSUMPTIONS:
            object.__setattr__(self, "assumptions", ORIFICE_ASSUMPTIONS)

    def station(self, i: int) -> dict:
        """Film at station ``i`` for the pad with the least film there (JSON-ready dict, µm, N, l/min, mg/s)."""
        best = None
        for p in self.pads:
            t = p.travel
            mf = t.min_film_um[i] if t.converged[i] else -np.inf
            if best is None or mf < best[0]:
                best = (mf, p)
        return self._pad_at(best[1], i)

    def station_pads(self, i: int) -> list:
        """Film at station ``i`` for every active pad, in the carriage's order (dicts as :meth:`station`)."""
        return [self._pad_at(p, i) for p in self.pads]

    def _pad_at(self, p, i: int) -> dict:
        t = p.travel
        return {
            "pad": p.name,
            "converged": bool(t.converged[i]),
            "fly_height_um": float(t.fly_height_um[i]),
            "min_film_um": float(t.min_film_um[i]),
            "load_n": float(t.load_n[i]),
            "stiffness_n_per_um": float(t.stiffness_n_per_um[i]),
            "flow_l_per_min": float(t.flow_l_per_min[i]),
            "mass_flow_mg_per_s": float(t.mass_flow_kg_s[i]) * KG_S_TO_MG_S,
            "tilt_x_urad": float(t.tilt_x_urad[i]),
            "tilt_y_urad": float(t.tilt_y_urad[i]),
            **({"feed_pressure_ratio": float(t.feed_pressure_ratio[i])} if isinstance(self.feed, OrificeFeed) else {}),
        }


def _pad_mesh_for(pad, n, feed=None):
    if isinstance(feed, OrificeFeed) and n % 2 == 0:
        n += 1 if n < MAX_MESH_CELLS else -1  # odd: a node at the pad centre, where a central orifice sits
    if pad.shape == "circle":
        return circular_pad_mesh(pad.length_mm, n)
    return rectangular_pad_mesh(pad.length_mm, pad.width_mm, n, n)


def bearing_film(
    surface,
    carriage,
    stations,
    feed: PorousFeed,
    *,
    load_n: float | None = None,
    pivot: bool = True,
    n: int = 64,
    method: str = "linear",
    progress=None,
) -> BearingFilm:
    """Film equilibrium of each active pad of a carriage at each evaluated station.

    Parameters
    ----------
    surface : HeightMap
        The guide surface (mm, µm).
    carriage : flatcheck.bearing.Carriage
        Pads and their places (pad centre = station position + ``along_mm``/``across_mm``).
    stations : sequence of objects with ``x_mm`` and ``y_mm``
        Carriage stations (e.g. ``BearingResult.stations``).
    feed : PorousFeed or OrificeFeed
        How the pads are fed (orifice positions pad-local; an even ``n`` is raised by one for orifice feeds so
        that a node sits at the pad centre).
    load_n : float, optional
        Load per pad, N. Default: for each pad, the load it carries at its nominal gap over a flat guide, so
        the flat-guide fly height equals the nominal gap.
    pivot : bool
        Pads on ball pivots (True) or held at zero tilt.
    n : int
        Mesh cells along each side of a pad (64 by default).
    method : {"linear", "cubic"}
        Interpolation of the surface.
    progress : callable, optional
        ``progress(1)`` after each pad position.

    Returns
    -------
    BearingFilm
    """
    pads = carriage.active_pads
    xs = np.array([s.x_mm for s in stations], dtype=float)
    meshes = {}
    out = []
    curve = None
    for p in pads:
        key = (p.pad.shape, p.pad.length_mm, p.pad.width_mm)
        if key not in meshes:
            meshes[key] = _pad_mesh_for(p.pad, n, feed)
        mesh = meshes[key]
        design = solve_film(mesh, feed, fly_height_um=p.pad.gap_um)
        if load_n is None:
            _check_design_load(mesh, feed, p.pad, design.load_n, p.name)
        load = design.load_n if load_n is None else float(load_n)
        eq = film_equilibrium(mesh, feed, load, pivot=pivot)
        devs = [
            surface_under_pad(mesh, surface, s.x_mm + p.along_mm, s.y_mm + p.across_mm, method=method)
            for s in stations
        ]
        travel = film_along_travel(mesh, feed, load, devs, pivot=pivot, progress=progress)
        out.append(PadFilmTravel(p.name, load, eq.fly_height_um, eq.stiffness_n_per_um, travel))
        if curve is None:
            curve = flat_guide_curve(mesh, feed, default_curve_gaps_um(p.pad.gap_um))
            curve_pad, curve_gap = p.name, p.pad.gap_um
    base = ORIFICE_ASSUMPTIONS if isinstance(feed, OrificeFeed) else FILM_ASSUMPTIONS
    return BearingFilm(
        feed=feed, pivot=bool(pivot), x_mm=xs, pads=tuple(out), curve=curve, curve_pad=curve_pad, mesh_cells=int(n),
        assumptions=base + (CARRIAGE_FILM_ASSUMPTION,), meshes=tuple(meshes.values()), curve_gap_um=curve_gap,
    )


def orifice_notes(feed, meshes=()) -> tuple:
    """Notes to show with an orifice-fed film result (pneumatic hammer, resolution of the feed regions).

    Parameters
    ----------
    feed : OrificeFeed
    meshes : iterable of PadMesh
        Meshes the film was solved on.

    Returns
    -------
    tuple of str
    """
    notes = []
    if feed.pocket_mm > 0.0:
        notes.append(
            f"pneumatic hammer: pocketed orifices ({feed.pocket_volume_mm3:.3g} mm³ per pocket) can make the film "
            "self-excited; the risk grows with pocket volume and supply pressure and falls with damping "
            "(Lubricants 12(11):395, 2024; ASME J. Lubr. Technol. 93(4):498, 1971); this static model does not "
            "predict it: keep pockets shallow or test the bearing"
        )
    else:
        notes.append(
            "pneumatic hammer: orifice-fed films can be self-excited; inherent (pocket-free) feeds are less prone "
            "than pocketed ones, and this static model does not predict it"
        )
    r0 = feed.feed_radius_mm
    for m in meshes:
        dx = max(m.spacing_mm)
        if 0.1985 * min(m.spacing_mm) <= r0 < 3.0 * dx:
            notes.append(
                f"feed radius {r0:g} mm spans fewer than 3 mesh cells ({dx:.3g} mm): its uniform-pressure region "
                "is resolved only to whole cells; use a finer mesh for a closer estimate"
            )
            break
    return tuple(notes)


def check_carriage_load(carriage, feed: PorousFeed, load_n: float | None) -> None:
    """Raise :class:`InputValueError` when ``load_n`` (N per pad) is beyond any active pad's capacity.

    The bound is ``CAPACITY_FRACTION`` of the closed-film load ``(ps - pa) * area``; ``None`` (the design load)
    passes here and is checked by :func:`bearing_film`.
    """
    if load_n is None:
        return
    for p in carriage.active_pads:
        try:
            _check_load_area(p.pad.area_mm2, feed, load_n)
        except InputValueError as exc:
            raise InputValueError(exc.message, where=f"--load-n (pad {p.name!r})", fix=exc.fix) from None


def _film_status(ratio: float, marginal_from: float) -> str:
    if ratio > 1.0:
        return "unfit"
    if ratio >= marginal_from:
        return "marginal"
    return "fit"


def with_film_checks(result, film: BearingFilm, *, stiffness_change_limit: float = DEFAULT_STIFFNESS_CHANGE_LIMIT):
    """A bearing result whose checks and verdict also use the predicted film.

    Two checks are added, judged with the result's own marginal band:

    - *least film*: the largest loss of film of any pad against its flat-guide fly height,
      ``max(design fly height - least film)`` over the travel, limited to ``gap_fraction * gap`` (the same
      common-practice fraction as the local-form check); a position without an open-film equilibrium counts
      as the whole film lost;
    - *stiffness change*: ``(max - min) / design`` stiffness of any pad over the travel, in %, limited to
      ``stiffness_change_limit`` (10 % by default; a convention of this tool, no published limit).

    Parameters
    ----------
    result : flatcheck.bearing.BearingResult
    film : BearingFilm
    stiffness_change_limit : float
        Fraction (0.10 = 10 %).

    Returns
    -------
    BearingResult
        A copy with the two checks appended and the verdict re-evaluated (worst status).
    """
    import dataclasses

    from ._pads import Check

    order = {"fit": 0, "marginal": 1, "unfit": 2}
    kind = "orifice" if isinstance(film.feed, OrificeFeed) else "porous"
    mf = result.marginal_from
    loss_worst, loss_limit, loss_x = -np.inf, np.inf, float("nan")
    dk_worst, dk_x = -np.inf, (float("nan"), float("nan"))
    gaps = {p.name: p.pad.gap_um for p in result.carriage.active_pads}
    for p in film.pads:
        t = p.travel
        if t.fly_height_um.size == 0:
            continue
        loss = np.where(t.converged, p.design_fly_height_um - t.min_film_um, p.design_fly_height_um)
        limit = result.gap_fraction * gaps[p.name]
        i = int(np.argmax(loss / limit))
        if loss[i] / limit > loss_worst / loss_limit or not np.isfinite(loss_worst):
            loss_worst, loss_limit, loss_x = float(loss[i]), float(limit), float(film.x_mm[i])
        if t.converged.any():
            k = t.stiffness_n_per_um[t.converged]
            xk = film.x_mm[t.converged]
            dk = float((k.max() - k.min()) / p.design_stiffness_n_per_um)
            if dk > dk_worst:
                dk_worst, dk_x = dk, (float(xk[np.argmin(k)]), float(xk[np.argmax(k)]))
    checks = []
    # "where" is left empty for a fit check, as for the other bearing checks
    if np.isfinite(loss_worst):
        r = loss_worst / loss_limit
        status = _film_status(r, mf)
        checks.append(Check(
            "film: loss of least film vs flat guide", loss_worst, loss_limit, "um", r, status,
            () if status == "fit" else ((loss_x, loss_x),),
            f"{kind}-pad film model (Reynolds equation); limit gap fraction x gap, common practice",
        ))
    if np.isfinite(dk_worst):
        r = dk_worst / stiffness_change_limit
        status = _film_status(r, mf)
        checks.append(Check(
            "film: stiffness change over the travel", 100.0 * dk_worst, 100.0 * stiffness_change_limit, "%", r,
            status,
            () if status == "fit" else ((dk_x[0], dk_x[0]), (dk_x[1], dk_x[1])),  # least and most stiffness
            f"{kind}-pad film model; limit 10 % of the flat-guide stiffness, a convention of this tool",
        ))
    all_checks = tuple(result.checks) + tuple(checks)
    verdict = max((c.status for c in all_checks), key=order.get, default=result.verdict)
    verdict = max((verdict, result.verdict), key=order.get)
    return dataclasses.replace(result, checks=all_checks, verdict=verdict)
