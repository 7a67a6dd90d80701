"""The uncertainty budget as a picture: each source's contribution to the standard uncertainty, at a glance."""

from __future__ import annotations

import numpy as np

from ._common import _ACCENT, _INK, _height_scale

__all__ = ["budget_bars"]


def budget_bars(ax, names, contributions_um, defaults, *, combined_um: float, units: str = "um"):
    """Horizontal bars of the contributions to the standard uncertainty of the flatness.

    Sources filled from defaults are hatched and marked "(default)" so that a reader sees at a glance
    which part of U rests on assumed values. A vertical line marks the combined standard uncertainty.

    Parameters
    ----------
    ax : matplotlib.axes.Axes
    names : sequence of str, length k
        Source names, in table order (drawn top to bottom).
    contributions_um : array_like, shape (k,)
        Contribution of each source to the standard uncertainty, µm.
    defaults : sequence of bool, length k
        Whether each source's value is a default.
    combined_um : float
        The combined standard uncertainty, µm.
    units : {"um", "in"}
        Display units (µm or µin).

    Returns
    -------
    ax
    """
    f, sym = _height_scale(units)
    v = np.asarray(contributions_um, dtype=float) * f
    k = len(names)
    y = np.arange(k)[::-1]
    for yi, vi, d in zip(y, v, defaults):
        ax.barh(yi, vi, height=0.62, color="0.82" if d else "0.45", edgecolor=_INK, linewidth=0.6,
                hatch="///" if d else None)
    ax.set_yticks(y)
    ax.set_yticklabels([f"{n} (default)" if d else n for n, d in zip(names, defaults)], fontsize=7)
    uc = float(combined_um) * f
    ax.axvline(uc, color=_ACCENT, lw=1.2)
    top = max(float(v.max()) if v.size else 0.0, uc) * 1.18 or 1.0
    ax.text(uc, -0.6, f" combined u = {uc:.2g} {sym} ", color=_ACCENT, fontsize=7.5, va="bottom",
            ha="left" if uc < 0.7 * top else "right")
    for yi, vi in zip(y, v):
        ax.text(vi, yi, f" {vi:.2g}", va="center", ha="left", fontsize=6.5, color=_INK)
    ax.set_xlim(0, top)
    ax.set_ylim(-0.7, k + 0.2)
    ax.set_xlabel(f"contribution to the standard uncertainty of the minimum-zone flatness ({sym})", fontsize=7.5)
    ax.tick_params(axis="x", labelsize=8)
    ax.set_title("Contributions (each source propagated alone; hatched: default values)", fontsize=8, loc="left")
    return ax
