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
Cell-centred nodes on a Cartesian mesh over the pad's bounding box, even or graded (``graded_edges``: a smooth
tanh stretching that makes the end cells small where a porous pad's pressure falls to ambient in a boundary
layer ``sqrt(h³ H / (12 k))`` thick; ``pad_film_mesh`` grades a porous rectangle's end cells to a fifth of that
layer at a 1 µm film). A rectangular pad uses every node; a circular pad uses the nodes inside the disc and
imposes the edge condition at the *true* radius: where a neighbour lies outside the disc, the Shortley-Weller
five-point difference uses the distance to the circle along the mesh line. The conductance ``h³`` of each link
is taken at its midpoint. The scheme is second order (measured in tests/test_film.py). Loads and flows are
integrated with the node areas (the part of each cell inside the pad); where the edge of a circular pad cuts a
cell, the value at the centroid of the part inside is used (from the node and the one-sided difference towards
the centroid), which removes a first-order error where the pressure falls steeply to the edge (the flow of a
Ø50 mm porous pad at 1 µm: 3.8 % high before, 0.3 % after, 64 cells). One LU factorisation
(scipy.sparse.linalg.splu) per film shape gives the pressure and, by reusing the factors, its exact derivatives
with respect to fly height and tilts (stiffness and the Newton steps of the equilibrium).

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
[5]_. A wider one (a pocket, or a wide bore) is cut out of the mesh as a circular hole round its nearest node:
the lines from the nodes outside end at the hole's true radius (Shortley-Weller, as at a disc's edge), held
at ``pr²``, and the feed's outflow ``G`` is the flux through a closed contour of faces a few cells round the
hole, where the scheme is conservative (a pocketed Ø60 mm pad: stiffness 17 % low with the pocket's nodes held
as a staircase, within 0.1 % now). The pocket carries ``pr - pa`` over its area. Derivatives for stiffness and
Newton come from the same factors plus the implicit derivative of the feed balance.

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

# The film code lives in modules along its seams: _feeds (air supplies, the orifice nozzle), _mesh (the pad mesh
# and the surface under it), _solver (one film solution, porous and orifice), _equilibrium (solutions, curves,
# equilibria of one pad) and _bearing_film (the film under a bearing carriage and its checks). This module keeps
# every name it always had.
from __future__ import annotations

from ._bearing_film import (  # noqa: F401
    DEFAULT_STIFFNESS_CHANGE_LIMIT,
    BearingFilm,
    PadFilmTravel,
    _film_status,
    _pad_mesh_for,
    bearing_film,
    check_carriage_load,
    orifice_notes,
    with_film_checks,
)
from ._equilibrium import (  # noqa: F401
    CAPACITY_FRACTION,
    CURVE_TABLE_GAP_RATIOS,
    _capacity_n,
    _check_design_load,
    _check_load,
    _check_load_area,
    _make_equilibrium,
    curve_table_rows,
    default_curve_gaps_um,
    film_along_travel,
    film_equilibrium,
    flat_guide_curve,
    solve_film,
)
from ._feeds import (  # noqa: F401
    AIR_GAS_CONSTANT_J_PER_KG_K,
    AIR_HEAT_CAPACITY_RATIO,
    AIR_VISCOSITY_20C_PA_S,
    CARRIAGE_FILM_ASSUMPTION,
    FILM_ASSUMPTIONS,
    KG_S_TO_MG_S,
    ORIFICE_ASSUMPTIONS,
    ROOM_TEMPERATURE_K,
    STANDARD_AMBIENT_KPA,
    OrificeFeed,
    PorousFeed,
    _orifice_dflow_dp,
    _positive,
    critical_pressure_ratio,
    orifice_mass_flow,
    orifice_ring,
)
from ._mesh import (  # noqa: F401
    MAX_MESH_CELLS,
    MESH_LIMIT_REASON,
    MIN_MESH_CELLS,
    PadDeviation,
    PadMesh,
    _build_mesh,
    _circle_cell_area,
    _mesh_count,
    circular_pad_mesh,
    pad_deviation,
    rectangular_pad_mesh,
    surface_under_pad,
)
from ._solver import FilmCurve, FilmEquilibrium, FilmState, FilmTravel, _Contact, _Solver  # noqa: F401

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
