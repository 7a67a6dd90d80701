"""Self-weight deflection of a uniform beam on two symmetric supports (Euler-Bernoulli).

A beam of length ``L`` on two supports at ``a`` from each end carries ``q = rho g b t`` per
unit length, ``EI = E b t^3 / 12``, so ``q / EI = 12 rho g / (E t^2)`` whatever its width.
Integrating ``EI y'' = M`` from the free end with the slope zero at the middle and ``y = 0``
at the supports gives, for ``0 <= x <= L/2`` (mirror image beyond)::

    y(x) = k [ -x^4/24 + (L/12) <x - a>^3 ] + C x + D,   k = 12 rho g / (E t^2)
    C = -k [ -L^3/48 + (L/4) (L/2 - a)^2 ],             D = k a^4/24 - C a

with ``<u> = max(u, 0)``; ``y`` is positive up. Supports at the ends (``a = 0``) give the
textbook mid-span sag ``5 q L^4 / (384 EI) = 5 rho g L^4 / (32 E t^2)`` (
section 10, check value 21).
"""

from __future__ import annotations

import math

import numpy as np

from ..errors import InputValueError

__all__ = ["GRAVITY_M_S2", "GRANITE_DENSITY_KG_M3", "GRANITE_E_GPA", "beam_self_weight_deflection_um"]

#: Standard acceleration of gravity, m/s^2: exact by definition (3rd CGPM, 1901).
GRAVITY_M_S2 = 9.80665
#: Granite density, kg/m^3: the middle of 2600-2800 (trade data of stone suppliers).
GRANITE_DENSITY_KG_M3 = 2700.0
#: Young's modulus of granite, GPa: inside the 39.2-64.7 GPa DIN 876 states (DIN 876-1,
#: secondary source); an estimate only, a given stone may lie anywhere in that range.
GRANITE_E_GPA = 50.0


def _check_positive(name: str, value) -> float:
    v = float(value)
    if not (math.isfinite(v) and v > 0):
        raise InputValueError(f"{name} is {value!r}, not a positive number", where=name, fix=f"give a positive {name}")
    return v


def beam_self_weight_deflection_um(x_mm, length_mm: float, thickness_mm: float, support_from_end_mm: float, *,
                                   density_kg_m3: float = GRANITE_DENSITY_KG_M3,
                                   youngs_modulus_gpa: float = GRANITE_E_GPA) -> np.ndarray:
    """Deflection of a uniform beam under its own weight on two symmetric supports.

    Parameters
    ----------
    x_mm : array_like, shape (n,)
        Positions along the beam from one end, mm (0 to ``length_mm``).
    length_mm : float
        Length of the beam, mm.
    thickness_mm : float
        Depth of the beam in the direction of the load (its height), mm.
    support_from_end_mm : float
        Distance of each support from its end, mm (0 to half the length).
    density_kg_m3 : float
        Density, kg/m^3.
    youngs_modulus_gpa : float
        Young's modulus, GPa.

    Returns
    -------
    ndarray, shape (n,)
        Deflection in µm, positive up, zero at the supports.

    Raises
    ------
    InputValueError
        Non-positive sizes or material data, a support outside the beam's half length.

    Examples
    --------
    Supports at the ends: the middle sags 5 rho g L^4 / (32 E t^2) (uniform beam, end supports):

    >>> y = beam_self_weight_deflection_um([500.0], 1000.0, 150.0, 0.0)
    >>> round(float(-y[0]), 3)
    3.677
    """
    L = _check_positive("length_mm", length_mm) * 1e-3
    t = _check_positive("thickness_mm", thickness_mm) * 1e-3
    rho = _check_positive("density_kg_m3", density_kg_m3)
    E = _check_positive("youngs_modulus_gpa", youngs_modulus_gpa) * 1e9
    a = float(support_from_end_mm) * 1e-3
    if not (math.isfinite(a) and 0.0 <= a <= L / 2.0):
        raise InputValueError(
            f"the supports {support_from_end_mm!r} mm from the ends are not on the beam's half length",
            where="support_from_end_mm", fix=f"give 0 to {L * 500.0:g} mm",
        )
    x = np.asarray(x_mm, dtype=float) * 1e-3
    u = np.where(x > L / 2.0, L - x, x)  # symmetric about the middle
    k = 12.0 * rho * GRAVITY_M_S2 / (E * t * t)
    C = -k * (-(L**3) / 48.0 + (L / 4.0) * (L / 2.0 - a) ** 2)
    D = k * a**4 / 24.0 - C * a
    y = k * (-(u**4) / 24.0 + (L / 12.0) * np.maximum(u - a, 0.0) ** 3) + C * u + D
    return y * 1e6
