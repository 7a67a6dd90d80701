"""Pictures of the register: a surface's flatness over time, and a wear map between two surveys.

Figures are plain :class:`matplotlib.figure.Figure` objects on an explicitly attached Agg
canvas (no pyplot, no global backend), as in the other pictures of flatcheck. The wear map
uses ``cividis`` (perceptually uniform, keeps its order in grey) and labels the station
that went down most. matplotlib is imported inside the functions, so importing this module
costs nothing.
"""

from __future__ import annotations

import datetime as _dt

import numpy as np

__all__ = ["history_figure", "wear_figure", "save_figure_png"]


def _figure(size_in=(7.0, 4.2)):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=size_in, dpi=100)
    FigureCanvasAgg(fig)
    return fig


def history_figure(history):
    """Flatness (minimum zone, µm) of each survey against its date, with U as error bars.

    Draws the fitted wear line over the surveys it was fitted to, and the limit of the grade
    sought when the register has one.

    Parameters
    ----------
    history : flatcheck.records.SurfaceHistory

    Returns
    -------
    matplotlib.figure.Figure
    """
    fig = _figure()
    ax = fig.add_subplot(1, 1, 1)
    pts = history.points
    d = [_dt.date.fromisoformat(p.date) for p in pts]
    f = np.array([p.flatness_um for p in pts])
    U = np.array([np.nan if p.expanded_uncertainty_um is None else p.expanded_uncertainty_um for p in pts])
    for state, marker in (("as-found", "o"), ("as-left", "s")):
        k = [i for i, p in enumerate(pts) if p.state == state]
        if k:
            ax.errorbar([d[i] for i in k], f[k], yerr=np.nan_to_num(U[k]), fmt=marker, color="#1f3b73", capsize=3,
                        label=f"{state} (bars: U, about 95 %)")
    r = history.rate
    if r is not None:
        t0 = _dt.date.fromisoformat(r.since)
        t1 = _dt.date.fromisoformat(r.until)
        years = np.array([0.0, (t1 - t0).days / 365.25])
        ax.plot([t0, t1], r.intercept_um + r.rate_um_per_year * years, "--", color="#7a5c00",
                label=f"fit: {r.rate_um_per_year:+.2g} µm/year")
    lim = history.limit
    if lim is not None:
        ax.axhline(lim.limit_um, color="#8b1a1a", lw=1, label=f"limit, {lim.standard} grade {lim.grade}")
    ax.set_xlabel("date of survey")
    ax.set_ylabel("flatness, minimum zone (µm)")
    ax.set_title(f"{history.surface.ident}: flatness over time")
    ax.set_ylim(bottom=0)
    ax.grid(True, lw=0.3)
    ax.legend(fontsize=8, loc="best")
    fig.autofmt_xdate()
    fig.tight_layout()
    return fig


def wear_figure(wear, *, title: str = ""):
    """Change of height of each station between two surveys (µm), as coloured, labelled points.

    Parameters
    ----------
    wear : flatcheck.records.WearMap

    Returns
    -------
    matplotlib.figure.Figure
    """
    fig = _figure((7.0, 5.0))
    ax = fig.add_subplot(1, 1, 1)
    c = wear.change_um
    lim = float(np.max(np.abs(c))) or 1.0
    sc = ax.scatter(wear.x_mm, wear.y_mm, c=c, cmap="cividis", vmin=-lim, vmax=lim, s=60, edgecolors="k",
                    linewidths=0.3)
    for x, y, v in zip(wear.x_mm, wear.y_mm, c):
        ax.annotate(f"{v:+.2f}", (x, y), textcoords="offset points", xytext=(0, 6), ha="center", fontsize=6)
    w = wear.worst
    ax.plot(wear.x_mm[w], wear.y_mm[w], marker="o", ms=14, mfc="none", mec="#8b1a1a", mew=1.5)
    fig.colorbar(sc, ax=ax, label="change of height, later - earlier (µm)")
    ax.set_aspect("equal", adjustable="datalim")
    ax.set_xlabel("x (mm)")
    ax.set_ylabel("y (mm)")
    ax.set_title(title or f"wear from survey {wear.before_id} ({wear.before_date}) to {wear.after_id} "
                 f"({wear.after_date})", fontsize=9)
    fig.tight_layout()
    return fig


def save_figure_png(fig, path, *, dpi: float = 120) -> None:
    """Write ``fig`` to ``path`` as PNG, atomically.

    Raises
    ------
    OutputError
        The folder does not exist or cannot be written.
    """
    from ..io import atomic_path as atomic_target

    with atomic_target(path, suffix=".png") as tmp:
        fig.savefig(tmp, format="png", dpi=dpi)
