"""Pictures of a guideway body and of the carriage that wraps it.

``faces_figure`` draws every face's form side by side (one strip per face, x along the travel); the
``thickness_figure`` the distance between opposed faces (and the height difference of rails) along the beam,
with the tie readings; ``films_figure`` each pad's least film along the travel with its margin and the quick
estimate; ``motions_figure`` the carriage's error motions (ISO 230-1: vertical and horizontal straightness,
pitch, yaw, roll), film model and quick estimate. Each returns a matplotlib Figure on the Agg canvas (through
:func:`flatcheck.output._plots.new_figure`), or draws into given panels of a report page (``fig``, ``rects``;
``panel_counts`` says how many each needs); matplotlib is imported inside the functions only, and nothing is
written except by :func:`write_guideway_pngs`.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

__all__ = ["faces_figure", "thickness_figure", "films_figure", "motions_figure", "write_guideway_pngs",
           "guideway_png_paths", "panel_counts"]

_INK = "#1a1a1a"
_ACCENT = "#b5473a"
_LINES = ("#1f4e79", "#b5473a", "#3b7d3b", "#7a5195", "#c77c02", "#4d4d4d", "#2a9d8f", "#8c564b", "#e07a5f",
          "#264653", "#6d597a", "#9a8c98")
_STYLES = ("-", "--", "-.", ":")


def _stack(n: int, *, width_in: float, panel_in: float, gap_in: float = 0.7, top_in: float = 0.45,
           bottom_in: float = 0.55, left: float = 0.08, width: float = 0.88):
    """A figure with ``n`` panels stacked, titles clear of the panel above; returns (fig, rects)."""
    from ._plots import new_figure

    height_in = top_in + bottom_in + n * panel_in + (n - 1) * gap_in
    fig = new_figure((width_in, height_in))
    rects = []
    for k in range(n):
        y0 = height_in - top_in - (k + 1) * panel_in - k * gap_in
        rects.append((left, y0 / height_in, width, panel_in / height_in))
    return fig, rects


def faces_figure(geometry, *, carriage=None, width_in: float = 11.0, fig=None, rects=None):
    """Every face's form (heights about its own least-squares plane), one strip per face.

    Parameters
    ----------
    geometry : BodyGeometry
    carriage : WrapResult, optional
        Draws each pad's track on its face (dashed lines at the pad's edges across).
    width_in : float
        Figure width, inches.
    fig, rects : Figure and sequence of (left, bottom, width, height), optional
        Draw into these panels of an existing figure (a report page; one per face) instead of a new figure.

    Returns
    -------
    matplotlib.figure.Figure
    """
    from ..units import format_height
    from ._plots import HEIGHT_CMAP, new_figure

    faces = geometry.faces
    n = len(faces)
    if fig is None:
        panel_in, gap_in, top_in, bottom_in = 1.45, 0.75, 0.45, 0.55
        height_in = top_in + bottom_in + n * panel_in + (n - 1) * gap_in
        fig = new_figure((width_in, height_in))
        rects = [(0.07, (height_in - top_in - (k + 1) * panel_in - k * gap_in) / height_in, 0.80,
                  panel_in / height_in) for k in range(n)]
    body = geometry.body
    for k, fg in enumerate(faces):
        ax = fig.add_axes(rects[k])
        form = geometry._forms[fg.name]
        x, s, z = form.x, form.s, form.z
        if form.two_d:
            levels = np.linspace(z.min(), z.max(), 13) if np.ptp(z) > 0 else 3
            cs = ax.tricontourf(x, s, z, levels=levels, cmap=HEIGHT_CMAP)
            ax.tricontour(x, s, z, levels=levels, colors=_INK, linewidths=0.3, alpha=0.6)
            cb = fig.colorbar(cs, ax=ax, pad=0.01, fraction=0.04, format="%.2f")
            cb.set_label("µm", fontsize=8)
            cb.ax.tick_params(labelsize=7)
        else:
            ax.plot(x, z, color=_INK)
        ax.plot(x, s, ".", ms=1.5, color=_INK, alpha=0.5)
        if carriage is not None:
            tracks = {}
            f = body.face(fg.name)
            off = carriage.carriage.y_mm if f.axis == "z" else carriage.carriage.z_mm
            for p, pl in zip(carriage.pads, carriage.carriage.pads):
                if p.face != fg.name:
                    continue
                sc = round(f.centre_mm + off + pl.across_mm, 6)
                tracks.setdefault((sc, pl.pad.width_mm), []).append(p.name)
            for (sc, w), names in tracks.items():
                for e in (-0.5, 0.5):
                    ax.axhline(sc + e * w, color=_ACCENT, lw=0.8, ls="--")
                ax.text(x.min(), sc, " track of " + ", ".join(names), color=_ACCENT, fontsize=6.5, va="center",
                        bbox=dict(fc="white", ec="none", alpha=0.7, pad=0.5))
        across = "y" if body.face(fg.name).axis == "z" else "z"
        ax.set_ylabel(f"{across} (mm)", fontsize=8)
        # to the step the body's faces resolve, as the summary prints it (flatcheck.units.height_decimals)
        flat = (f"flatness {format_height(fg.flatness_um, 'um', step_um=geometry.body.height_step_um)}"
                if np.isfinite(fg.flatness_um) else "one line")
        ax.set_title(f"{fg.name} ({fg.normal}): form about its least-squares plane, {flat}; heights outward",
                     fontsize=9, loc="left")
        ax.tick_params(labelsize=7)
        if k == n - 1:
            ax.set_xlabel("x along the travel (mm)", fontsize=8)
    return fig


def thickness_figure(geometry, *, width_in: float = 11.0, fig=None, rects=None):
    """Distance between opposed faces (minus nominal) along the beam on the tie lines, with the tie readings.

    For every pair of faces tied by thickness readings: ``wA + wB`` along x at each across position of the
    readings (fitted body) and the readings themselves; for rails: the height difference.

    Returns
    -------
    matplotlib.figure.Figure
    """
    body = geometry.body
    pairs = []
    for t in body.thickness:
        key = ("thickness",) + tuple(sorted(t.faces))
        if key not in pairs:
            pairs.append(key)
    for r in geometry.rails:
        pairs.append(("rails",) + tuple(r.faces))
    n = max(1, len(pairs))
    if fig is None:
        fig, rects = _stack(n, width_in=width_in, panel_in=2.0)
    if not pairs:
        ax = fig.add_axes(rects[0])
        ax.text(0.5, 0.5, "no thickness or height ties", ha="center", va="center", transform=ax.transAxes)
        ax.set_axis_off()
        return fig
    for k, key in enumerate(pairs):
        ax = fig.add_axes(rects[k])
        if key[0] == "thickness":
            a, b = key[1], key[2]
            ties = [t for t in body.thickness if tuple(sorted(t.faces)) == (a, b)]
            acr = sorted({round(t.across_mm, 6) for t in ties})
            xa = geometry._forms[a].station_xs()
            for j, s0 in enumerate(acr):
                d = geometry.outward_height_um(a, xa, s0) + geometry.outward_height_um(b, xa, s0)
                ax.plot(xa, d, color=_LINES[j % len(_LINES)], ls=_STYLES[j % 4], lw=1.2,
                        label=f"fitted body at {s0:g} mm across")
                tx = [t.x_mm for t in ties if abs(t.across_mm - s0) < 1e-6]
                tv = [t.value_um for t in ties if abs(t.across_mm - s0) < 1e-6]
                ax.plot(tx, tv, "o", color=_LINES[j % len(_LINES)], ms=4, mfc="none", label="readings" if j == 0 else None)
            ax.set_title(f"distance between {a!r} and {b!r} minus nominal (thickness, µm)", fontsize=9, loc="left")
        else:
            r = next(rr for rr in geometry.rails if tuple(rr.faces) == key[1:])
            ax.plot(r.x_mm, r.difference_um, color=_LINES[0], lw=1.2, label="fitted body")
            ax.set_title(f"height of {r.faces[1]!r} above {r.faces[0]!r} (µm)", fontsize=9, loc="left")
        ax.set_ylabel("µm", fontsize=8)
        ax.grid(alpha=0.3)
        ax.tick_params(labelsize=7)
        ax.legend(fontsize=7, loc="best")
        if k == n - 1:
            ax.set_xlabel("x along the travel (mm)", fontsize=8)
    return fig


def films_figure(result, *, width_in: float = 11.0, fig=None, rects=None):
    """Each pad's least film along the travel, by face, with its margin and the quick estimate (dotted).

    Returns
    -------
    matplotlib.figure.Figure
    """
    faces = []
    for p in result.pads:
        if p.face not in faces:
            faces.append(p.face)
    n = len(faces)
    if fig is None:
        fig, rects = _stack(n, width_in=width_in, panel_in=1.9, width=0.70)
    x = result.x_mm
    for k, face in enumerate(faces):
        ax = fig.add_axes(rects[k])
        pads = [p for p in result.pads if p.face == face]
        for j, p in enumerate(pads):
            c = _LINES[j % len(_LINES)]
            ax.plot(x, p.min_film_um, color=c, lw=1.3, label=f"{p.name}: least film")
            ax.plot(x, p.quick_min_film_um, color=c, lw=0.8, ls=":", label=f"{p.name}: quick estimate")
        margins = sorted({round(p.margin_um, 6) for p in pads})
        for m in margins:
            ax.axhline(m, color=_ACCENT, lw=1.0, ls="--")
        ax.text(1.0, margins[0], " margin", color=_ACCENT, fontsize=7, va="center", transform=ax.get_yaxis_transform())
        for xf, pad, _ in result.failures:
            if any(p.name == pad for p in pads):
                ax.axvline(xf, color=_ACCENT, lw=0.6, alpha=0.6)
        ax.set_title(f"pads on {face!r}: least film along the travel (nominal gap "
                     f"{', '.join(sorted({f'{p.gap_um:g}' for p in pads}))} µm)", fontsize=9, loc="left")
        ax.set_ylabel("film (µm)", fontsize=8)
        ax.grid(alpha=0.3)
        ax.tick_params(labelsize=7)
        ax.legend(fontsize=6.5, loc="upper left", bbox_to_anchor=(1.07, 1.0), frameon=False)
        if k == n - 1:
            ax.set_xlabel("carriage position x (mm)", fontsize=8)
    return fig


def motions_figure(result, *, width_in: float = 11.0, fig=None, rects=None):
    """The carriage's error motions along the travel: straightness (µm) and angular motions (arcsec).

    Solid: the film model; dotted: the quick estimate (pad averaging). Free motions are left out.

    Returns
    -------
    matplotlib.figure.Figure
    """
    m, q = result.motion, result.quick_motion
    rows = [("vertical", "vertical_um", "vertical straightness (µm)", m.vertical_straightness_um, "µm"),
            ("horizontal", "horizontal_um", "horizontal straightness (µm)", m.horizontal_straightness_um, "µm"),
            ("pitch", "pitch_arcsec", "pitch (arcsec)", m.pitch_range_arcsec, "arcsec"),
            ("yaw", "yaw_arcsec", "yaw (arcsec)", m.yaw_range_arcsec, "arcsec"),
            ("roll", "roll_arcsec", "roll (arcsec)", m.roll_range_arcsec, "arcsec")]
    rows = [r for r in rows if r[0] in m.held]
    n = max(1, len(rows))
    if fig is None:
        fig, rects = _stack(n, width_in=width_in, panel_in=1.5, left=0.09, width=0.87)
    x = m.x_mm
    for k, (name, attr, label, summary, unit) in enumerate(rows):
        ax = fig.add_axes(rects[k])
        ax.plot(x, getattr(m, attr), color=_LINES[0], lw=1.3, label="film model")
        ax.plot(x, getattr(q, attr), color=_LINES[1], lw=0.9, ls=":", label="quick estimate (pad averaging)")
        what = "minimum zone" if unit == "µm" else "peak to valley"
        ax.set_title(f"{label}: {summary:.2f} {unit} ({what}, film model)", fontsize=9, loc="left")
        ax.set_ylabel(unit, fontsize=8)
        ax.grid(alpha=0.3)
        ax.tick_params(labelsize=7)
        if k == 0:
            ax.legend(fontsize=7, loc="best")
        if k == n - 1:
            ax.set_xlabel("carriage position x (mm)", fontsize=8)
    return fig


def panel_counts(geometry, result=None) -> dict:
    """How many panels each picture draws: ``{"faces": n, "thickness": n, "films": n, "motions": n}``."""
    pairs = {tuple(sorted(t.faces)) for t in geometry.body.thickness}
    out = {"faces": len(geometry.faces), "thickness": max(1, len(pairs) + len(geometry.rails))}
    if result is not None:
        out["films"] = len({p.face for p in result.pads})
        out["motions"] = max(1, sum(1 for r in ("vertical", "horizontal", "pitch", "yaw", "roll")
                                    if r in result.motion.held))
    return out


def write_guideway_pngs(geometry, result, *, prefix=None, folder=None, dpi: float = 120) -> list:
    """Write the guideway's pictures as PNG files (atomically); returns the paths written.

    Parameters
    ----------
    geometry : BodyGeometry
    result : WrapResult or None
        The carriage (films and motions are drawn only with one).
    prefix : str or Path, optional
        Files ``PREFIX-faces.png``, ``PREFIX-thickness.png``, ``PREFIX-films.png``, ``PREFIX-motions.png``.
    folder : str or Path, optional
        Files ``guideway-faces.png``... in this folder (instead of a prefix).
    dpi : float
    """
    from ._plots import save_png

    paths = guideway_png_paths(prefix=prefix, folder=folder, carriage=result is not None)
    figs = {"faces": lambda: faces_figure(geometry, carriage=result), "thickness": lambda: thickness_figure(geometry)}
    if result is not None:
        figs["films"] = lambda: films_figure(result)
        figs["motions"] = lambda: motions_figure(result)
    out = []
    for key, path in paths.items():
        save_png(figs[key](), path, dpi=dpi)
        out.append(path)
    return out


def guideway_png_paths(*, prefix=None, folder=None, carriage: bool = True) -> dict:
    """Which files :func:`write_guideway_pngs` writes, by picture."""
    kinds = ["faces", "thickness"] + (["films", "motions"] if carriage else [])
    if folder is not None:
        return {k: Path(folder) / f"guideway-{k}.png" for k in kinds}
    p = Path(prefix)
    return {k: p.with_name(f"{p.name}-{k}.png") for k in kinds}
