"""Pictures of an air-bearing carriage: its path over the travel beside the surface, pitch and local flatness."""

from __future__ import annotations

import numpy as np

from ._common import _ACCENT, _INK, _height_scale, _pos_scale


# ---------------------------------------------------------------------------- carriage
def carriage_path(
    fig,
    travel_mm,
    rail_um,
    carriage_um,
    *,
    pitch=None,
    pitch_unit: str = "arcsec",
    local_um=None,
    local_limit_um=None,
    local_window_mm=None,
    units: str = "um",
    title: str | None = None,
    rect=(0.1, 0.1, 0.9, 0.92),
):
    """The rail profile beside the carriage's path over the travel, and local flatness along it.

    Parameters
    ----------
    fig : matplotlib Figure
        The figure to draw in.
    rect : (left, bottom, right, top)
        Part of the figure the panels fill (figure fractions).
    travel_mm : ndarray, shape (m,)
        Carriage position along the travel, mm.
    rail_um : ndarray, shape (m,)
        Raw profile of the guideway under the carriage's centre, µm.
    carriage_um : ndarray, shape (m,)
        Height of the carriage's reference point over the travel, µm.
    pitch : ndarray, shape (m,), optional
        Carriage pitch in ``pitch_unit`` (drawn on a second axis).
    pitch_unit : str
        Unit of ``pitch`` for the axis label ("arcsec", "µrad").
    local_um : ndarray, shape (m,), optional
        Local flatness along the travel (µm), e.g. under the pad footprint.
    local_limit_um : float, optional
        Its limit, drawn as an accent line.

    Returns
    -------
    list of Axes
    """
    hs, hu = _height_scale(units)
    ps, pu = _pos_scale(units)
    t = np.asarray(travel_mm, float) * ps
    n = 2 if local_um is not None else 1
    left, bottom, right, top = rect
    gs = fig.add_gridspec(n, 1, hspace=0.12, left=left, right=right, top=top, bottom=bottom,
                          height_ratios=[2, 1][:n])
    axes = [fig.add_subplot(gs[0, 0])]
    if n == 2:
        axes.append(fig.add_subplot(gs[1, 0], sharex=axes[0]))
        axes[0].tick_params(labelbottom=False)
    ax = axes[0]
    ax.plot(t, np.asarray(rail_um, float) * hs, color="0.55", lw=1.0, label="surface under the carriage centre (raw)")
    ax.plot(t, np.asarray(carriage_um, float) * hs, color=_INK, lw=1.8, label="carriage path (pads average)")
    ax.set_ylabel(f"height ({hu})")
    ax.grid(True, lw=0.3, color="0.8")
    handles, labels = ax.get_legend_handles_labels()
    # headroom above the curves for the legend, so it never hides them
    lo, hi = ax.get_ylim()
    ax.set_ylim(lo, hi + 0.3 * (hi - lo))
    if pitch is not None:
        ax2 = ax.twinx()
        ax2.plot(t, np.asarray(pitch, float), color=_ACCENT, lw=0.9, ls="--", label="carriage pitch")
        ax2.set_ylabel(f"pitch ({pitch_unit})", color=_ACCENT)
        lo2, hi2 = ax2.get_ylim()
        ax2.set_ylim(lo2, hi2 + 0.3 * (hi2 - lo2))
        h2, l2 = ax2.get_legend_handles_labels()
        handles += h2
        labels += l2
    ax.legend(handles, labels, fontsize=7, loc="upper center", ncol=len(labels), framealpha=0.9)
    if local_um is not None:
        a = axes[1]
        a.plot(t, np.asarray(local_um, float) * hs, color=_INK, lw=1.2)
        if local_limit_um is not None:
            a.axhline(local_limit_um * hs, color=_ACCENT, lw=1.4, ls="--", label="limit")
            a.legend(fontsize=7, loc="best")
        w = "" if local_window_mm is None else f" over {local_window_mm * ps:g} {pu}"
        a.set_ylabel(f"local flatness{w} ({hu})", fontsize=8)
        a.grid(True, lw=0.3, color="0.8")
    axes[-1].set_xlabel(f"carriage position along the travel ({pu})")
    if title:
        axes[0].set_title(title, fontsize=10, loc="left")
    return list(axes)


def bearing_motion(fig, result, *, units: str = "um", rect=(0.1, 0.1, 0.9, 0.92), step_um: float | None = None):
    """The carriage path, rail profile, pitch and local flatness of an air-bearing result.

    Parameters
    ----------
    fig : matplotlib Figure
    result : flatcheck.bearing.BearingResult
        Heights in µm, positions in mm, pitch in arcsec.
    units : {"um", "in"}
        Display units (µm or µin).
    rect : (left, bottom, right, top)
        Part of the figure the panels fill (figure fractions).
    step_um : float, optional
        The height step the survey resolves: the title's straightness figures are printed to it
        (:func:`flatcheck.units.height_decimals`; None: 1 nm).
    """
    from ...units import height_decimals

    m = result.motion
    st = list(result.stations)
    local = np.array([s.local_flatness_um for s in st]) if len(st) == len(m.x_mm) else None
    hs, u = _height_scale(units)
    dec = height_decimals(step_um, units)
    axes = carriage_path(
        fig, m.x_mm, _about_straightness_line(m.x_mm, m.raw_profile_um), _about_straightness_line(m.x_mm, m.path_um),
        pitch=m.pitch_path_arcsec if getattr(m, "pitch_determined", True) else None, pitch_unit="arcsec", local_um=local, local_limit_um=result.limit_um, units=units,
        title=(f"carriage over its travel: path straightness {m.straightness_um * hs:.{dec}f} {u} "
               f"(surface alone {m.raw_straightness_um * hs:.{dec}f} {u})"),
        rect=rect,
    )
    # both curves are drawn about their own straightness line, so their shapes and spreads compare directly
    axes[0].set_ylabel(f"deviation from straight ({u})")
    return axes


def _about_straightness_line(x_mm, h_um):
    """Heights about their own minimum-zone straightness line, centred in the zone (µm; NaN kept).

    The guideway's raw profile and the carriage path are heights of different things (the surface on
    the centre line, the pad-averaged carriage), so each is drawn about its own straight line: the
    curves then share one datum and span exactly their stated straightness.
    """
    from ...form import evaluate_straightness

    x = np.asarray(x_mm, float)
    h = np.asarray(h_um, float)
    ok = np.isfinite(h)
    if ok.sum() < 3:
        return h
    s = x - x[ok][0]
    mz = evaluate_straightness(s[ok], h[ok]).mzli
    d = h - (mz.a_um + mz.b_um_per_mm * s)
    return d - (np.nanmax(d) + np.nanmin(d)) / 2
