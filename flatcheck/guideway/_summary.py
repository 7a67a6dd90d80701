"""Plain summaries (dicts of numbers and text, full precision) of a guideway's results, for JSON and reports.

The keys carry their units (``_um``, ``_mm``, ``_arcsec``, ``_urad``, ``_n``...). Non-finite numbers stay NaN
here; the JSON writer turns them into ``null``.
"""

from __future__ import annotations

import numpy as np

from ..units import URAD_TO_ARCSEC

__all__ = ["body_summary", "carriage_summary", "verdict_summary", "advice_summary", "guideway_summary"]


def _f(v) -> float:
    return float(v)


def _min_at(values, x):
    ok = np.isfinite(values)
    if not ok.any():
        return float("nan"), float("nan")
    i = int(np.nanargmin(np.where(ok, values, np.nan)))
    return float(values[i]), float(x[i])


def body_summary(geometry) -> dict:
    """The body's geometry: faces, parallelism, squareness, twist, rails, ties."""
    body = geometry.body
    faces = []
    for fg in geometry.faces:
        f = body.face(fg.name)
        faces.append({
            "name": fg.name, "normal": fg.normal, "survey": fg.survey, "n_points": fg.n_points,
            "flatness_um": _f(fg.flatness_um), "straightness_um": _f(fg.straightness_um),
            "centre_mm": f.centre_mm, "x_from_mm": fg.x_range_mm[0], "x_to_mm": fg.x_range_mm[1],
            "offset_um": fg.plane.offset_um, "tilt_x_urad": fg.plane.tilt_x_urad,
            "tilt_across_urad": fg.plane.tilt_across_urad, "free": list(fg.plane.free), "datum": fg.plane.datum,
        })
    parallelism = [{
        "faces": list(p.faces), "value_um": _f(p.value_um), "zone": p.zone, "across_mm": p.across_mm,
        "reverse": p.reverse, "note": p.note,
    } for p in geometry.parallelism]
    squareness = [{
        "faces": list(s.faces), "angle_arcsec": _f(s.angle_arcsec), "angle_urad": _f(s.angle_urad),
        "u_urad": _f(s.u_urad), "value_um": _f(s.value_um), "determined": s.determined,
    } for s in geometry.squareness]
    twist = [{
        "faces": list(t.faces), "source": t.source, "twist_urad": _f(t.twist_urad),
        "twist_arcsec": _f(t.twist_urad * URAD_TO_ARCSEC), "twist_per_m_urad": _f(t.twist_per_m_urad),
        "window_mm": t.window_mm, "label": t.label,
    } for t in geometry.twist]
    rails = [{
        "faces": list(r.faces), "across_mm": list(r.across_mm), "height_difference_min_um": r.height_difference_min_um,
        "height_difference_max_um": r.height_difference_max_um, "twist_urad": r.twist_urad,
        "twist_per_m_urad": r.twist_per_m_urad,
    } for r in geometry.rails]
    res = geometry.residuals
    norm = np.array([t.normalized for t in res]) if res else np.array([])
    ties = {
        "count": len(res),
        "redundancy": geometry.redundancy,
        "rms_normalized": float(np.sqrt(np.mean(norm**2))) if norm.size else float("nan"),
        "max_normalized": float(np.abs(norm).max()) if norm.size else float("nan"),
        "residuals": [{
            "kind": t.kind, "faces": list(t.faces), "label": t.label, "x_mm": t.x_mm, "measured": t.measured,
            "fitted": t.fitted, "residual": t.residual, "u": t.u, "unit": t.unit,
        } for t in res],
    }
    return {"faces": faces, "parallelism": parallelism, "squareness": squareness, "twist": twist, "rails": rails,
            "ties": ties, "free_faces": list(geometry.free_faces)}


def _film_feed(feed) -> dict:
    from ..bearing import OrificeFeed

    if isinstance(feed, OrificeFeed):
        return {"kind": "orifice", "supply_kpa_gauge": feed.supply_gauge_kpa, "ambient_kpa": feed.ambient_kpa,
                "orifice_mm": feed.orifice_mm, "cd": feed.cd, "orifices": len(feed.positions_mm),
                "pocket_mm": feed.pocket_mm, "pocket_depth_um": feed.pocket_depth_um,
                "assumptions": list(feed.assumptions)}
    from ..bearing import FILM_ASSUMPTIONS

    return {"kind": "porous", "supply_kpa_gauge": feed.supply_gauge_kpa, "ambient_kpa": feed.ambient_kpa,
            "permeability_m2": feed.permeability_m2, "layer_mm": feed.layer_mm,
            "assumptions": list(FILM_ASSUMPTIONS)}


def carriage_summary(result) -> dict:
    """The carriage: pads, motions (film model and quick estimate), stiffness, cost."""
    x = result.x_mm
    c = result.carriage
    pads = []
    for p in result.pads:
        least, at = _min_at(p.min_film_um, x)
        quick, qat = _min_at(p.quick_min_film_um, x)
        ok = np.isfinite(p.load_n)
        touches = [xf for xf, name, _ in result.failures if name == p.name]
        pads.append({
            "name": p.name, "face": p.face, "gap_um": p.gap_um, "min_film_um": least, "min_film_x_mm": at,
            "mean_film_min_um": _f(np.nanmin(p.mean_film_um)) if ok.any() else float("nan"),
            "mean_film_max_um": _f(np.nanmax(p.mean_film_um)) if ok.any() else float("nan"),
            "load_min_n": _f(np.nanmin(p.load_n)) if ok.any() else float("nan"),
            "load_max_n": _f(np.nanmax(p.load_n)) if ok.any() else float("nan"),
            "design_load_n": p.design_load_n, "design_stiffness_n_per_um": p.design_stiffness_n_per_um,
            "margin_um": p.margin_um, "quick_min_film_um": quick, "quick_min_film_x_mm": qat,
            "local_flatness_max_um": _f(np.nanmax(p.local_flatness_um)), "touches_at_mm": touches,
        })
    m, q = result.motion, result.quick_motion
    names = ("horizontal_n_per_um", "vertical_n_per_um", "roll_nm_per_urad", "pitch_nm_per_urad", "yaw_nm_per_urad")
    stiffness = {}
    for j, nm in enumerate(names):
        col = result.stiffness[:, j]
        ok = np.isfinite(col)
        stiffness[nm] = {"min": _f(col[ok].min()) if ok.any() else float("nan"),
                         "max": _f(col[ok].max()) if ok.any() else float("nan")}

    def paths(mm):
        return {"vertical_um": mm.vertical_um, "horizontal_um": mm.horizontal_um, "pitch_arcsec": mm.pitch_arcsec,
                "yaw_arcsec": mm.yaw_arcsec, "roll_arcsec": mm.roll_arcsec}

    return {
        "label": c.label, "pivot": c.pivot, "load_n": result.load_n, "design_load_n": result.design_load_n,
        "load_along_mm": c.load_along_mm, "load_across_mm": c.load_across_mm, "y_mm": c.y_mm, "z_mm": c.z_mm,
        "mesh_cells": result.mesh_cells, "stations": int(x.size),
        "x_from_mm": _f(x[0]), "x_to_mm": _f(x[-1]), "step_mm": _f(x[1] - x[0]) if x.size > 1 else 0.0,
        "pads": pads,
        "motion": {**m.summary(), "held": list(m.held), "free": list(result.free_motions)},
        "paths": {"x_mm": x, **paths(m)},
        "quick_estimate": {**q.summary(), "paths": paths(q)},
        "difference": dict(result.difference),
        "stiffness": stiffness,
        "film": _film_feed(c.feed),
        "film_solutions": result.film_solutions,
        "solutions_per_pad_station": result.solutions_per_pad_station,
        "failures": [{"x_mm": xf, "pad": name, "reason": why} for xf, name, why in result.failures],
        "warnings": list(result.warnings),
        "notes": list(result.notes),
    }


def verdict_summary(verdict) -> dict:
    return {
        "verdict": verdict.verdict,
        "reason": verdict.reason,
        "checks": [{"name": c.name, "value": c.value, "limit": c.limit, "unit": c.unit, "ratio": c.ratio,
                    "status": c.status, "where": c.where, "basis": c.basis, "reason": c.reason}
                   for c in verdict.checks],
    }


def advice_summary(advice) -> list:
    return [{"face": a.face, "reason": a.reason, "against": a.against, "remove_um": a.remove_um, "where": a.where,
             "text": a.text} for a in advice]


def guideway_summary(body, geometry, result=None, verdict=None, advice=(), safety=()) -> dict:
    """Everything stated about a guideway, JSON-ready: the body, its geometry, the carriage, verdict and advice.

    The one summary that ``flatcheck guideway --json`` prints and the guideway report draws from
    (heights µm, positions mm, angles arcsec or µrad as each key says).
    """
    data = {"guideway": {"ident": body.ident, "description": body.description, "length_mm": body.length_mm,
                         "material": body.material, "datum": body.datum}}
    # the height step the coarsest face resolves: summaries print heights without an uncertainty to it
    data["height_step_um"] = body.height_step_um
    data.update(body_summary(geometry))
    data["carriage"] = None if result is None else carriage_summary(result)
    if verdict is None:
        data.update({"verdict": None, "reason": "no carriage given: the body's geometry only", "checks": []})
    else:
        data.update(verdict_summary(verdict))
    data["advice"] = advice_summary(advice)
    data["warnings"] = list(body.notes) + list(geometry.warnings)
    data["notes"] = list(geometry.notes)
    data["safety"] = list(safety)
    return data
