"""``flatcheck sphere``: form of a ball or a spherical seat, its ISO 3290-1 grade and a ball's clearance in its seat."""

from __future__ import annotations

from enum import Enum
from pathlib import Path

import typer
from rich.markup import escape

from ..errors import FlatcheckError, InputValueError
from ._app import app
from .common import Units, check_option_ranges, emit_json, refuse_overwriting_inputs, stdout_console, units_option


class Kind(str, Enum):
    ball = "ball"
    seat = "seat"


@app.command("sphere")
def sphere_cmd(
    input: Path = typer.Argument(..., help="Points on the sphere: CSV with the header x_mm,y_mm,z_mm."),
    kind: Kind = typer.Option(
        None, "--kind", help="ball (convex: graded by ISO 3290-1) or seat (concave). Needed for a grade or --mate."
    ),
    mate: Path = typer.Option(
        None, "--mate", help="Points of the matching part (the seat of a ball, or the ball of a seat): radial clearance."
    ),
    u_um: float = typer.Option(
        None, "--u-um", min=0.0, help="Expanded uncertainty (k = 2) of the form figure in µm, for the grade it proves."
    ),
    json_out: bool = typer.Option(False, "--json", help="Print one JSON object instead of the summary."),
    units: Units = units_option(),
) -> None:
    """Least-squares and minimum-zone sphere of measured points; grade of a ball; film of a ball in its seat."""
    from ..io._points_csv import read_points_csv
    from ..spheres import (
        ball_grade,
        ball_seat_clearance,
        coverage_deg,
        least_squares_sphere,
        minimum_circumscribed_sphere,
        minimum_zone_sphere,
        surrounds_center,
    )

    check_option_ranges([("--u-um", u_um, "uncertainty_um", "the uncertainty")])  # docs/limits.md
    if u_um is not None and kind != Kind.ball:  # only a ball is graded: a U would be silently unused
        raise InputValueError("--u-um has no effect without --kind ball (only a ball is graded)", where="--u-um",
                              fix="add --kind ball, or drop --u-um")
    refuse_overwriting_inputs({}, [input, mate])
    if mate is not None and kind is None:
        raise InputValueError("--mate needs --kind", where="--mate",
                              fix="say whether the first file is the ball or the seat: --kind ball or --kind seat")
    if mate is not None and input.exists() and mate.exists() and input.resolve() == mate.resolve():
        raise InputValueError("--mate names the input file itself", where="--mate",
                              fix="give the other part's points (the ball of a seat, or the seat of a ball)")
    pts = read_points_csv(input)
    try:
        ls = least_squares_sphere(pts)
        mz = minimum_zone_sphere(pts, start_mm=ls.center_mm)
    except FlatcheckError as exc:  # the core knows the points, not the file: name it
        raise type(exc)(exc.message, where=exc.where or str(input), fix=exc.fix) from None
    cover = coverage_deg(pts, ls.center_mm)
    all_round = surrounds_center(pts, ls.center_mm)
    notes = []
    mc = None
    if all_round:
        mc = minimum_circumscribed_sphere(pts, start_mm=mz.center_mm)
    if not mz.converged:
        notes.append("the minimum-zone iteration stopped before its exact check was met; the zone stated is an upper bound")
    if cover < 30.0:
        notes.append(f"the points cover a cap of only {cover:.0f} degrees: radius and centre are weakly fixed along its "
                     "axis (the form is still well fixed)")
    grade = None
    if kind == Kind.ball:
        if mc is not None:
            dev, basis = mc.sphericity_um, "minimum circumscribed sphere (ISO 3290-1 wording)"
        else:
            dev, basis = mz.sphericity_um, "minimum zone (the points do not surround the centre)"
            notes.append("the ball was not measured all round: its grade rests on the minimum zone of the part measured")
        g = ball_grade(dev, expanded_uncertainty_um=u_um)
        grade = {
            "standard": "ISO 3290-1:2014", "source": g.source, "deviation_um": g.deviation_um, "basis": basis,
            "grade": g.grade, "limit_um": g.limit_um, "expanded_uncertainty_um": g.expanded_uncertainty_um,
            "proven_grade": g.proven_grade,
            "grades": [{"grade": n, "limit_um": lim, "form_within": ok} for n, lim, ok in g.rows],
        }
        notes.append("a grade also limits the diameter variation, roughness and lot; the form alone allows it, it does not "
                     "make the ball that grade")
    clearance = None
    if mate is not None:
        try:
            other = least_squares_sphere(read_points_csv(mate))
        except FlatcheckError as exc:
            raise type(exc)(exc.message, where=exc.where or str(mate), fix=exc.fix) from None
        ball, seat = (ls, other) if kind == Kind.ball else (other, ls)
        c = ball_seat_clearance(ball, seat)
        clearance = {
            "ball": str(input if kind == Kind.ball else mate), "seat": str(mate if kind == Kind.ball else input),
            "ball_radius_mm": ball.radius_mm, "seat_radius_mm": seat.radius_mm,
            "radial_clearance_um": c.radial_clearance_um, "diametral_clearance_um": 2.0 * c.radial_clearance_um,
            "film_min_um": c.film_min_um, "film_max_um": c.film_max_um, "film_std_um": c.film_std_um,
            "least_film_um": c.least_film_um, "largest_film_um": c.largest_film_um, "variation_um": c.variation_um,
            "ball_form_um": c.ball_form_um, "interference": c.interference,
        }
        if c.interference:
            notes.append("the least film is not positive: the ball touches its seat somewhere and cannot float")
    doc = {
        "input": str(input),
        "kind": None if kind is None else kind.value,
        "points": int(len(pts)),
        "coverage_deg": cover,
        "all_round": all_round,
        "least_squares": {
            "center_mm": ls.center_mm.tolist(), "radius_mm": ls.radius_mm, "diameter_mm": 2.0 * ls.radius_mm,
            "sphericity_um": ls.sphericity_um, "rms_um": ls.rms_um, "residuals_um": ls.residuals_um.tolist(),
        },
        "minimum_zone": {
            "center_mm": mz.center_mm.tolist(), "radius_mm": mz.radius_mm, "sphericity_um": mz.sphericity_um,
            "outer_radius_mm": mz.outer_radius_mm, "inner_radius_mm": mz.inner_radius_mm,
            "outer_points": [i + 1 for i in mz.outer_points], "inner_points": [i + 1 for i in mz.inner_points],
            "iterations": mz.iterations, "converged": mz.converged,
        },
        "circumscribed": None if mc is None else {
            "center_mm": mc.center_mm.tolist(), "radius_mm": mc.radius_mm, "deviation_um": mc.sphericity_um,
        },
        "grade": grade,
        "clearance": clearance,
        "units": "um",
        "display_units": units.value,
        "notes": notes,
    }
    if json_out:
        emit_json(doc)
        return
    _render(doc, units.value)


def _h(v_um, units: str) -> str:
    from ..units import format_height

    return format_height(v_um, units)


def _render(doc: dict, units: str) -> None:
    con = stdout_console()
    what = {"ball": "Ball", "seat": "Spherical seat", None: "Sphere"}[doc["kind"]]
    ls, mz = doc["least_squares"], doc["minimum_zone"]
    con.print(f"[bold]{what}[/bold] {escape(doc['input'])}: {doc['points']} points over a cap of "
              f"{doc['coverage_deg']:.0f} degrees" + (" (all round)" if doc["all_round"] else ""))
    c = ", ".join(f"{v:.4f}" for v in ls["center_mm"])
    con.print(f"  least squares: radius {ls['radius_mm']:.5f} mm (diameter {ls['diameter_mm']:.5f} mm), centre ({c}) mm")
    con.print(f"    sphericity about it {_h(ls['sphericity_um'], units)}, RMS {_h(ls['rms_um'], units)}")
    con.print(f"  minimum zone: sphericity [bold]{_h(mz['sphericity_um'], units)}[/bold] "
              f"(radii {mz['inner_radius_mm']:.5f} to {mz['outer_radius_mm']:.5f} mm; "
              f"touching points {', '.join(map(str, mz['outer_points']))} outside, "
              f"{', '.join(map(str, mz['inner_points']))} inside)")
    if doc["kind"] == "seat":
        con.print("  [dim]radial deviations are + away from the centre: on a seat, + is a hollow in the face[/dim]")
    g = doc.get("grade")
    if g:
        line = f"  ISO 3290-1: deviation from spherical form {_h(g['deviation_um'], units)} ({escape(g['basis'])}): "
        line += f"[bold]{g['grade']}[/bold] allowed ({g['limit_um']:g} µm)" if g["grade"] else "coarser than G200"
        con.print(line)
        if g["expanded_uncertainty_um"] is not None:
            con.print(f"    with U = {g['expanded_uncertainty_um']:g} µm (ISO 14253-1): proven "
                      f"{g['proven_grade'] or 'no grade'}")
    cl = doc.get("clearance")
    if cl:
        con.print(f"  ball {cl['ball_radius_mm']:.5f} mm in seat {cl['seat_radius_mm']:.5f} mm: radial clearance "
                  f"[bold]{_h(cl['radial_clearance_um'], units)}[/bold]")
        con.print(f"    film over the seat (ball centred): {_h(cl['film_min_um'], units)} to {_h(cl['film_max_um'], units)}; "
                  f"with the ball's own form {_h(cl['least_film_um'], units)} to {_h(cl['largest_film_um'], units)}")
    for t in doc.get("notes") or []:
        con.print(f"  [yellow]note:[/yellow] {escape(t)}")
