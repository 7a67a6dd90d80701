"""Stating a result with its uncertainty: U to two significant digits, the value to the same place.

JCGM 100:2008 (GUM), 7.2.6: it usually suffices to quote an expanded uncertainty to at most
two significant digits, and the estimate is rounded to the same decimal place (from memory
of the clause; the rule is also common practice on calibration certificates).
"""

from __future__ import annotations

import math

__all__ = ["round_to_uncertainty"]


def round_to_uncertainty(value: float, uncertainty: float | None, *, decimals_without_u: int = 3) -> tuple[str, str]:
    """Text of ``value`` and ``uncertainty``: U to two significant digits, the value to the same place.

    Parameters
    ----------
    value : float
        The estimate (e.g. flatness in µm).
    uncertainty : float or None
        Its expanded uncertainty in the same unit; None, zero or not finite: no uncertainty.
    decimals_without_u : int
        Decimals of the value when there is no uncertainty (3: µm to the nm).

    Returns
    -------
    (str, str)
        The value and the uncertainty as text; the uncertainty is "" when there is none.

    Examples
    --------
    >>> round_to_uncertainty(3.14159, 0.2345)
    ('3.14', '0.23')
    >>> round_to_uncertainty(1.23456, 0.0996)   # U rounds up to 0.10: still two digits
    ('1.23', '0.10')
    >>> round_to_uncertainty(1234.5, 123.4)
    ('1230', '120')
    """
    v = float(value)
    if uncertainty is None or not math.isfinite(float(uncertainty)) or float(uncertainty) <= 0 or not math.isfinite(v):
        return (f"{v:.{decimals_without_u}f}" if math.isfinite(v) else "-"), ""
    u = float(uncertainty)
    decimals = 1 - math.floor(math.log10(u))  # two significant digits of u
    ur = round(u, decimals)
    if ur >= 10.0 ** (2 - decimals):  # 0.0996 -> 0.100: one digit too many, drop a decimal
        decimals -= 1
        ur = round(u, decimals)
    vr = round(v, decimals)
    if decimals > 0:
        return f"{vr:.{decimals}f}", f"{ur:.{decimals}f}"
    return f"{vr:.0f}", f"{ur:.0f}"
