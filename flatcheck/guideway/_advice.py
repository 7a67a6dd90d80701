"""Lapping advice for the body: which face to lap to bring it parallel to its datum, or to take out a twist.

Parallelism: the toleranced face is lapped, never its datum (the datum is the reference the tolerance is
stated against; ISO 1101). Its distance from the datum plane is fitted by a least-squares plane over its
stations; the wedge that plane describes is what lapping removes, from the thick end (where the face stands
furthest from its datum). The depth stated is the height of that wedge over the face, the least removal that
makes the face's trend parallel to the datum (its form within the zone stays for the face's own lapping
plan: ``flatcheck lap``).

Twist: a face whose across slope changes along the travel by ``T`` µrad stands high on its +s edge where the
slope is greatest and on its -s edge where it is least; taking out the twist means lowering those edges by
about ``T/2`` times half the face's width (µrad x mm / 1000 = µm) each, relative to the face's mean slope.
Between two rails the twist is corrected on the rail that is not the datum: their height difference varies by
``T`` times the rails' spacing, and the rail is lowered where it stands highest.

These are statements about where material stands high; how to lap it (lap size, pressure, strokes) is
common practice, no single source, and is left to the lapping plan.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["LappingAdvice", "lapping_advice", "ADVICE_THRESHOLD_UM"]

#: Wedges and twist depths below this are not worth a lapping session (a convention of this tool: about a
#: tenth of a micrometre, the resolution of a good survey).
ADVICE_THRESHOLD_UM = 0.1


@dataclass(frozen=True)
class LappingAdvice:
    """One piece of lapping advice.

    Attributes
    ----------
    face : str
        The face to lap.
    reason : {"parallelism", "twist"}
    against : str
        The datum face (parallelism) or the other rail (twist between rails); empty for a face's own twist.
    remove_um : float
        About how much stands high, µm.
    where : str
        Where it stands high (in words, with positions in mm).
    text : str
        The advice in one sentence.
    """

    face: str
    reason: str
    against: str
    remove_um: float
    where: str
    text: str


def _side(face, positive: bool) -> str:
    if face.across_axis == "y":
        return "+y side" if positive else "-y side"
    return "upper edge" if positive else "lower edge"


def lapping_advice(geometry, *, threshold_um: float = ADVICE_THRESHOLD_UM) -> tuple:
    """Which face to lap for parallelism and for twist, largest first.

    Parameters
    ----------
    geometry : BodyGeometry
    threshold_um : float
        Smallest amount worth advising, µm.

    Returns
    -------
    tuple of LappingAdvice
    """
    body = geometry.body
    out = []
    for p in geometry.parallelism:
        if p.reverse or p.zone == "free" or not np.isfinite(p.value_um):
            continue
        tol, dat = p.faces
        fa = body.face(tol)
        form = geometry._forms[tol]
        plane = geometry.face(tol).plane
        fd = body.face(dat)
        sgn = 1.0 if fa.sign != fd.sign else -1.0
        dplane = geometry.face(dat).plane
        # distance trend of the toleranced face from the datum: (bA + sgn bD) x + (cA + sgn cD) s
        b = 1e-3 * (plane.tilt_x_urad + sgn * dplane.tilt_x_urad)
        c = 1e-3 * (plane.tilt_across_urad + sgn * dplane.tilt_across_urad) if p.zone == "plane" else 0.0
        xs, ss = form.x, form.s
        trend = b * xs + c * ss
        wedge = float(np.ptp(trend))
        if wedge < threshold_um:
            continue
        i = int(np.argmax(trend))
        where = f"thick end towards x = {xs[i]:g} mm"
        if p.zone == "plane" and abs(c) * np.ptp(ss) > 0.25 * wedge:
            where += f", {_side(fa, c > 0)}"
        text = (f"lap {tol!r} (not its datum {dat!r}): its trend stands {wedge:.2f} µm out of parallel, highest at "
                f"x = {xs[i]:g} mm; lower it from there (the {where.split(', ')[0]})")
        out.append(LappingAdvice(tol, "parallelism", dat, wedge, where, text))
    seen = set()
    for t in geometry.twist:
        if not np.isfinite(t.twist_urad) or t.x_mm.size < 2:
            continue
        if len(t.faces) == 1:
            name = t.faces[0]
            if name in seen:
                continue
            f = body.face(name)
            smin, smax = f.s_range_mm
            half_w = 0.5 * abs(smax - smin)
            against = ""
        else:
            a, b_ = t.faces
            name = a if body.datum == b_ else b_
            against = b_ if name == a else a
            f = body.face(name)
            half_w = 0.5 * abs(f.centre_mm - body.face(against).centre_mm)
        if len(t.faces) == 1:
            depth = 0.5 * t.twist_urad * half_w * 1e-3  # µrad x mm -> µm, at each high edge
        else:
            depth = t.twist_urad * 2.0 * half_w * 1e-3  # range of the height difference over the rail spacing
        if depth < threshold_um:
            continue
        seen.add(name)
        hi, lo = float(t.x_mm[int(np.argmax(t.slope_urad))]), float(t.x_mm[int(np.argmin(t.slope_urad))])
        if len(t.faces) == 1:
            where = f"{_side(f, True)} high near x = {hi:g} mm, {_side(f, False)} high near x = {lo:g} mm"
            text = (f"lap {name!r} to take out its twist of {t.twist_urad:.3g} µrad ({t.source}): lower the {where}, "
                    f"about {depth:.2f} µm at each")
        else:
            # the slope (wB - wA)/(sB - sA) is greatest where B stands highest relative to A
            x_high = hi if name == t.faces[1] else lo
            where = f"relative to {against!r}: highest near x = {x_high:g} mm"
            text = (f"lap rail {name!r} to take out the twist of {t.twist_urad:.3g} µrad between the rails: it stands "
                    f"{where}, about {depth:.2f} µm above its lowest place")
        out.append(LappingAdvice(name, "twist", against, depth, where, text))
    out.sort(key=lambda a: -a.remove_um)
    return tuple(out)
