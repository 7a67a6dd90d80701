"""``flatcheck fringes``: a part under an optical flat, from a photograph or from written readings."""

from __future__ import annotations

import math
from enum import Enum
from pathlib import Path

import typer
from rich.markup import escape

from ..errors import FlatcheckError, InputValueError
from ._app import app
from .common import (Units, check_option_ranges, check_output, emit_json, progress_bar, refuse_overwriting_inputs,
                     stdout_console, units_option)


class Edge(str, Enum):
    left = "left"
    right = "right"
    top = "top"
    bottom = "bottom"


@app.command("fringes")
def fringes_cmd(
    input: Path = typer.Argument(
        ..., help="A photograph of the part under the flat (PNG, JPEG, TIFF), or fringe readings (.toml, "
        "format = \"flatcheck-fringes\")."
    ),
    wavelength_nm: float = typer.Option(
        None, "--wavelength-nm", help="Wavelength of the light in nm (helium 587.56, sodium 589.0, mercury green 546.07)."
    ),
    light: str = typer.Option(None, "--light", help="Or the light by name: helium, sodium, mercury-green, hene."),
    pixel_mm: float = typer.Option(None, "--pixel-mm", help="Photographs: size of one pixel on the part, mm."),
    part_width_mm: float = typer.Option(
        None, "--part-width-mm", help="Photographs: or the part's width (left to right in the picture), mm."
    ),
    contact_edge: Edge = typer.Option(
        None, "--contact-edge", help="Photographs: the edge of the picture where the flat touches the part."
    ),
    mask: Path = typer.Option(
        None, "--mask", help="Photographs: a picture of the same size, white on the part (default: the outline is "
        "found from the fringes)."
    ),
    json_out: bool = typer.Option(False, "--json", help="Print one JSON object instead of the summary."),
    map_out: Path = typer.Option(
        None, "--map-out", help="Write the height map as a height-map CSV (x_mm,y_mm,height_um; heights in µm)."
    ),
    step_px: int = typer.Option(
        None, "--step-px", min=1, help="Photographs: sample the map every N pixels (default a third of a fringe spacing)."
    ),
    flat_nm: float = typer.Option(
        None, "--flat-nm", min=0.0, help="Flatness of the optical flat from its certificate, nm (for the uncertainty)."
    ),
    window: str = typer.Option(
        "none", "--window", help="Local-flatness window in mm: LxW (e.g. 20x20) or dD for a circle (e.g. d20); 'none'."
    ),
    gap_um: float = typer.Option(
        None, "--gap-um", help="Pad faces: the nominal film gap in µm; the face's flatness is judged against it."
    ),
    units: Units = units_option(),
) -> None:
    """Flatness of a pad face or lapped flat under an optical flat, in nm and in fringes."""
    from ..io._fringe_toml import is_fringe_toml

    check_option_ranges([  # docs/limits.md, named as typed, before any file is read
        ("--wavelength-nm", wavelength_nm, "wavelength_nm", "the wavelength"),
        ("--pixel-mm", pixel_mm, "pixel_mm", "the pixel size"),
        ("--part-width-mm", part_width_mm, "length_mm", "the part's width"),
        ("--flat-nm", flat_nm, "flat_nm", "the flat's flatness"),
        ("--gap-um", gap_um, "gap_um", "the film gap"),
        ("--step-px", step_px, "count", "the sampling step"),
    ])
    refuse_overwriting_inputs({"--map-out": map_out}, [input, mask])
    check_output(map_out, "--map-out")
    win = _parse_window(window)
    if input.suffix.lower() == ".toml" or is_fringe_toml(input):
        for name, given in (("--pixel-mm", pixel_mm), ("--part-width-mm", part_width_mm),
                            ("--contact-edge", contact_edge), ("--mask", mask), ("--step-px", step_px)):
            if given is not None:
                raise InputValueError(
                    f"{name} applies to photographs, not to written readings", where=str(input),
                    fix=f"leave out {name} (the readings file states the part and how the fringes bow)",
                )
        doc, hm, label = _readings(input, wavelength_nm, light, flat_nm, win, gap_um)
    else:
        doc, hm, label = _photo(input, wavelength_nm, light, pixel_mm, part_width_mm, contact_edge, mask, step_px,
                                flat_nm, win, gap_um)
    if map_out is not None:
        from flatcheck import write_heightmap_csv

        write_heightmap_csv(
            map_out, hm,
            comment=f"flatcheck fringes {input.name} ({label}); heights in µm about the least-squares plane",
        )
    doc["display_units"] = units.value  # the JSON keeps nm and µm (named in each key) whatever --units says
    if json_out:
        emit_json(doc)
        return
    _render(doc, units.value, map_out)


# ----------------------------------------------------------------------------- options
def _parse_window(text: str | None):
    """``LxW`` (mm) or ``dD`` (circle) -> (shape, size) for flatcheck.local_flatness; 'none' -> None."""
    s = (text or "").strip().lower().replace(" ", "")
    if s in ("", "none", "off"):
        return None
    try:
        if s.startswith("d"):
            d = float(s[1:])
            win = ("circle", d)
            ok = d > 0 and math.isfinite(d)
        else:
            a, b = (float(v) for v in s.split("x"))
            win = ("rect", (a, b))
            ok = a > 0 and b > 0 and math.isfinite(a) and math.isfinite(b)
    except ValueError:
        ok = False
    if not ok:
        raise InputValueError(f"window {text!r} is not a size", where="--window",
                              fix="write LxW in mm (e.g. 20x20) or dD for a circle (e.g. d20), or none")
    from ..limits import check_range

    for side in (win[1],) if win[0] == "circle" else win[1]:  # a microscopic window takes billions of positions
        check_range(side, "window_mm", where="--window", name=f"window {text!r}: a side of")
    return win


def _wavelength(wavelength_nm, light, *, stated=None, where=""):
    """The wavelength from --wavelength-nm or --light (and, for readings, the file's)."""
    from ..optics import wavelength_of

    if wavelength_nm is not None and light is not None:
        raise InputValueError("both --wavelength-nm and --light are given", where="--light", fix="give one of them")
    wl = wavelength_of(light, where="--light") if light is not None else wavelength_nm
    if wl is not None and not (math.isfinite(wl) and 200.0 <= wl <= 2000.0):
        raise InputValueError(f"wavelength {wl:g} nm is outside 200-2000 nm", where="--wavelength-nm",
                              fix="give the wavelength in nm (helium 587.56, sodium 589.0, mercury green 546.07)")
    if stated is not None and wl is not None and abs(wl - stated) > 1e-6:
        raise InputValueError(
            f"the command line says {wl:g} nm but the file's light is {stated:g} nm", where=where,
            fix="leave out --wavelength-nm/--light, or correct the file's [light]",
        )
    return wl


# ----------------------------------------------------------------------------- photographs
def _photo(path, wavelength_nm, light, pixel_mm, part_width_mm, contact_edge, mask_path, step_px, flat_nm, win, gap_um):
    from ..io._image import read_picture
    from ..optics import analyze_fringe_photo, evaluate_optical_map

    wl = _wavelength(wavelength_nm, light)
    if wl is None:
        raise InputValueError("the wavelength of the light is needed", where=str(path),
                              fix="give --wavelength-nm (helium 587.56) or --light helium")
    if contact_edge is None:
        raise InputValueError(
            "the contact edge is needed to tell high from low", where=str(path),
            fix="give --contact-edge left, right, top or bottom: the edge of the picture where the flat touches",
        )
    if (pixel_mm is None) == (part_width_mm is None):
        raise InputValueError("the scale of the picture is needed once", where=str(path),
                              fix="give either --pixel-mm or --part-width-mm")
    pic = read_picture(path)
    part = None
    if mask_path is not None:
        m = read_picture(mask_path, option="--mask")
        if (m.width, m.height) != (pic.width, pic.height):
            raise InputValueError(
                f"the mask is {m.width} x {m.height} pixels, the photograph {pic.width} x {pic.height}",
                where=f"--mask {mask_path}", fix="draw the mask on a copy of the photograph (white on the part, black elsewhere)",
            )
        part = m.intensity > 0.5
    for name, v in (("--pixel-mm", pixel_mm), ("--part-width-mm", part_width_mm)):
        if v is not None and not (math.isfinite(v) and v > 0):
            raise InputValueError(f"{name} {v:g} is not a positive size", where=name, fix=f"give {name} in mm")
    if part_width_mm is not None:  # the pixel it makes, within docs/limits.md (tiny pixels overflow the arithmetic)
        from ..limits import check_range

        check_range(part_width_mm / pic.width, "pixel_mm", where="--part-width-mm",
                    name=f"a pixel ({part_width_mm:g} mm over {pic.width} pixels)")
    with progress_bar("Fringes", 2, enabled=pic.width * pic.height > 4_000_000) as advance:
        try:
            fm = analyze_fringe_photo(
                pic.intensity, wavelength_nm=wl, contact_edge=contact_edge.value, pixel_mm=pixel_mm,
                part_width_mm=part_width_mm, mask=part, saturated=pic.saturated,
            )
        except FlatcheckError as exc:  # the core knows the pictures, not the files: name them
            where = str(mask_path) if exc.where == "mask" else (exc.where or str(path))
            raise type(exc)(exc.message, where=where, fix=exc.fix) from None
        advance(1)
        hm = fm.heightmap(step_px, label=path.stem)
        ev = evaluate_optical_map(hm, wavelength_nm=wl, flat_flatness_nm=flat_nm, window=win, gap_um=gap_um)
        advance(1)
    rows = int(fm.mask.any(axis=1).sum())
    cols = int(fm.mask.any(axis=0).sum())
    step = fm.default_step_px if step_px is None else step_px
    notes = [
        f"detail finer than about {fm.resolution_mm:.2g} mm (two fringe spacings) is smoothed out by the carrier method",
        "the map is the air film between part and flat: the flat's own form is in it"
        + ("" if flat_nm is not None else " (give --flat-nm from its certificate for an uncertainty)"),
    ]
    if fm.mask_source == "outline":
        notes.append("the part's outline was found from the fringes and drawn in by a quarter to a half fringe spacing; "
                     "give --mask to use the part to its edge")
    if fm.binning > 1:
        notes.append(f"the photograph was averaged {fm.binning} x {fm.binning} pixels first (wide fringes)")
    doc = {
        "input": str(path),
        "kind": "fringe-photo",
        "light": {"source": light, "wavelength_nm": wl, "fringe_nm": wl / 2.0},
        "photo": {"columns": pic.width, "rows": pic.height, "bits": pic.bits, "format": pic.format},
        "contact_edge": contact_edge.value,
        "part": {
            "length_px": cols * fm.binning, "width_px": rows * fm.binning, "pixel_mm": fm.pixel_mm / fm.binning,
            "length_mm": cols * fm.pixel_mm, "width_mm": rows * fm.pixel_mm, "mask": fm.mask_source,
        },
        "fringes": {
            "across": fm.fringes_across, "spacing_px": fm.period_px * fm.binning, "spacing_mm": fm.period_px * fm.pixel_mm,
            "wedge_angle_deg": fm.carrier_angle_deg, "resolution_mm": fm.resolution_mm, "modulation": fm.modulation,
            "saturated_fraction": fm.saturated_fraction, "lost_fraction": fm.lost_fraction,
        },
        "map": {"points": hm.n, "step_px": step * fm.binning, "spacing_mm": step * fm.pixel_mm},
    }
    doc.update(_evaluation_doc(ev, flat_nm))
    doc["notes"] = notes
    return doc, hm, f"photograph, {wl:g} nm, contact {contact_edge.value}"


# ----------------------------------------------------------------------------- readings
def _readings(path, wavelength_nm, light, flat_nm, win, gap_um):
    import dataclasses

    from ..io._fringe_toml import read_fringe_readings
    from ..optics import evaluate_optical_map, reduce_fringe_readings

    rd = read_fringe_readings(path)
    _wavelength(wavelength_nm, light, stated=rd.wavelength_nm, where=str(path))
    if flat_nm is not None:
        if rd.flat_flatness_nm > 0 and abs(rd.flat_flatness_nm - flat_nm) > 1e-9:
            raise InputValueError(
                f"--flat-nm {flat_nm:g} differs from the file's [flat] {rd.flat_flatness_nm:g} nm", where=str(path),
                fix="leave out --flat-nm, or correct the file",
            )
        rd = dataclasses.replace(rd, flat_flatness_nm=flat_nm)
    est = reduce_fringe_readings(rd)
    hm = est.heightmap(label=rd.ident or path.stem)
    ev = evaluate_optical_map(hm, wavelength_nm=rd.wavelength_nm, window=win, gap_um=gap_um)
    half = rd.fringe_nm
    doc = {
        "input": str(path),
        "kind": "fringe-readings",
        "part": {"ident": rd.ident, "description": rd.description, "shape": rd.shape,
                 "length_mm": rd.length_mm, "width_mm": rd.width_mm},
        "light": {"source": rd.light, "wavelength_nm": rd.wavelength_nm, "fringe_nm": half},
        "flat": {"flatness_nm": rd.flat_flatness_nm or None},
        "readings": [
            {
                "reading": r.label, "kind": r.kind, "along_deg": r.direction_deg, "sag_fringes": r.sag_fringes,
                "sag_nm": r.sag_fringes * half, "fitted_sag_fringes": fit, "length_mm": r.length_mm,
                "irregularity_fringes": r.irregularity_fringes, "u_fringes": r.u_fringes,
            }
            for r, fit in zip(rd.readings, est.fitted_sag_fringes)
        ],
        "model": est.model,
        "coefficients_nm_per_mm2": dict(zip(("a", "b", "c"), est.coefficients_nm_per_mm2)),
    }
    doc.update(_evaluation_doc(ev, None))
    # the estimate's flatness is the map's; its uncertainty comes from the readings
    f = doc["flatness"]
    f["minimum_zone_nm"] = est.minimum_zone_nm
    f["least_squares_nm"] = est.least_squares_nm
    f["minimum_zone_fringes"] = est.minimum_zone_nm / half
    f["least_squares_fringes"] = est.least_squares_nm / half
    f["minimum_zone_um"] = est.minimum_zone_nm / 1000.0
    f["least_squares_um"] = est.least_squares_nm / 1000.0
    f["standard_uncertainty_nm"] = est.standard_uncertainty_nm
    f["expanded_uncertainty_nm"] = est.expanded_uncertainty_nm
    f["coverage_factor"] = 2.0
    f["irregularity_nm"] = est.irregularity_nm
    f["with_irregularity_nm"] = est.minimum_zone_nm + est.irregularity_nm
    doc["uncertainty_budget"] = [{"source": s, "u_nm": v} for s, v in est.uncertainty_budget]
    doc["alternatives"] = [{"shape": s, "minimum_zone_nm": v} for s, v in est.alternatives]
    doc["observed"] = list(est.observed)
    doc["cannot_tell"] = list(est.cannot_tell)
    doc["assumptions"] = list(est.assumptions)
    doc["notes"] = []
    return doc, hm, f"estimate from written readings, {rd.wavelength_nm:g} nm"


def _evaluation_doc(ev, flat_nm) -> dict:
    half = ev.fringe_nm
    flat = {
        "minimum_zone_nm": ev.minimum_zone_nm,
        "least_squares_nm": ev.least_squares_nm,
        "minimum_zone_fringes": ev.minimum_zone_nm / half,
        "least_squares_fringes": ev.least_squares_nm / half,
        "minimum_zone_um": ev.minimum_zone_nm / 1000.0,
        "least_squares_um": ev.least_squares_nm / 1000.0,
        "peak_nm": ev.peak_nm,
        "valley_nm": ev.valley_nm,
        "rms_nm": ev.rms_nm,
        "standard_uncertainty_nm": ev.standard_uncertainty_nm,
        "expanded_uncertainty_nm": ev.expanded_uncertainty_nm,
        "coverage_factor": 2.0 if ev.expanded_uncertainty_nm is not None else None,
    }
    local = None
    if ev.local is not None:
        loc = ev.local
        local = {"shape": loc.shape, "size_mm": list(loc.size_mm), "max_nm": 1000.0 * float(loc.worst_um),
                 "x_mm": float(loc.worst_x_mm), "y_mm": float(loc.worst_y_mm), "positions": int(loc.flatness_um.size)}
    pad = None
    if ev.pad_face is not None:
        p = ev.pad_face
        pad = {"gap_um": p.gap_um, "fraction": p.fraction, "limit_um": p.limit_um, "flatness_um": p.flatness_um,
               "ratio": p.ratio, "verdict": p.verdict}
    return {"flatness": flat, "local_flatness": local, "pad_face": pad}


# ----------------------------------------------------------------------------- summary
def _with_u(value: float, u: float | None) -> tuple[str, str | None]:
    """Value and U as text: U to two significant digits, the value to the same decimal place (JCGM 100, 7.2.6)."""
    if u is None or not math.isfinite(u) or u <= 0:
        return (f"{value:.0f}" if abs(value) >= 10 else f"{value:.1f}"), None
    exp = math.floor(math.log10(u)) - 1  # place of U's second significant digit
    uq = round(u / 10.0**exp) * 10.0**exp
    if uq >= 10.0 ** (exp + 2):  # 99.6 rounds to 100: three digits, keep two
        exp += 1
        uq = round(u / 10.0**exp) * 10.0**exp
    vq = round(value / 10.0**exp) * 10.0**exp
    dec = max(0, -exp)
    return f"{vq:.{dec}f}", f"{uq:.{dec}f}"


def _height(v_nm: float, units: str) -> str:
    """A height as µm (3 decimals) or µin (1 decimal), with nm beside it."""
    from ..units import format_height

    return f"{format_height(v_nm / 1000.0, units)} ({v_nm:.0f} nm)"


def _render(doc: dict, units: str, map_out) -> None:
    con = stdout_console()
    f = doc["flatness"]
    half = doc["light"]["fringe_nm"]
    if doc["kind"] == "fringe-photo":
        p, fr = doc["part"], doc["fringes"]
        con.print(f"[bold]Fringe photograph[/bold] {escape(doc['input'])}")
        con.print(f"  light: {doc['light']['wavelength_nm']:g} nm (one fringe = {half:g} nm); flat touches at the "
                  f"{doc['contact_edge']} edge")
        con.print(f"  part: {p['length_px']} x {p['width_px']} px = {p['length_mm']:.1f} x {p['width_mm']:.1f} mm "
                  f"({'outline from the fringes' if p['mask'] == 'outline' else 'stated mask'})")
        con.print(f"  fringes: {fr['across']:.1f} across the part, {fr['spacing_px']:.1f} px apart; "
                  f"{doc['map']['points']} map points every {doc['map']['spacing_mm']:.2g} mm")
    else:
        part = doc["part"]
        title = " ".join(v for v in (part["description"], part["ident"]) if v) or "Part"
        con.print(f"[bold]{escape(title)}[/bold]  fringe readings {escape(doc['input'])}")
        con.print(f"  light: {escape(doc['light']['source'])}, {doc['light']['wavelength_nm']:g} nm "
                  f"(one fringe = {half:g} nm)")
        for r in doc["readings"]:
            along = "circular" if r["along_deg"] is None else f"along {r['along_deg']:g} deg"
            con.print(f"  {escape(r['reading'])}: {r['kind']} {along}, sag {r['sag_fringes']:+g} fringe "
                      f"({r['sag_nm']:+.0f} nm); estimate {r['fitted_sag_fringes']:+.2f}")
        con.print(f"  surface estimate: {doc['model']}")
    con.print()
    v, u = _with_u(f["minimum_zone_nm"], f.get("expanded_uncertainty_nm"))
    line = f"  flatness (minimum zone): [bold]{v} nm[/bold] = {f['minimum_zone_fringes']:.2f} fringe"
    if u is not None:
        line += f", U = {u} nm (k = 2)"
    con.print(line)
    if units == "in":
        con.print(f"    = {_height(f['minimum_zone_nm'], 'in')}")
    con.print(f"  least squares (peak to valley): {f['least_squares_nm']:.0f} nm = {f['least_squares_fringes']:.2f} fringe")
    for b in doc.get("uncertainty_budget") or []:
        con.print(f"  [dim]u from {escape(b['source'])}: {b['u_nm']:.2g} nm[/dim]")
    if f.get("irregularity_nm"):
        con.print(f"  with the irregularity written ({f['irregularity_nm']:.0f} nm): up to {f['with_irregularity_nm']:.0f} nm")
    for a in doc.get("alternatives") or []:
        con.print(f"  the same reading on a {a['shape']}: {a['minimum_zone_nm']:.0f} nm")
    loc = doc.get("local_flatness")
    if loc:
        con.print(f"  local flatness ({loc['shape']} {'x'.join(f'{s:g}' for s in loc['size_mm'])} mm): "
                  f"{loc['max_nm']:.0f} nm at x = {loc['x_mm']:.1f}, y = {loc['y_mm']:.1f} mm")
    pad = doc.get("pad_face")
    if pad:
        from ..units import format_limit

        # the flatness in whole nm as the rest of this summary states it, the limit as stated
        con.print(f"  pad face against a {pad['gap_um']:g} µm film: {1000.0 * pad['flatness_um']:.0f} nm of a "
                  f"{format_limit(pad['limit_um'], 'um')} limit ({pad['fraction']:g} of the gap): "
                  f"[bold]{pad['verdict']}[/bold]")
    for key, word in (("assumptions", "assumed"), ("cannot_tell", "cannot tell")):
        for t in doc.get(key) or []:
            con.print(f"  [yellow]{word}:[/yellow] {escape(t)}")
    for t in doc.get("notes") or []:
        con.print(f"  [yellow]note:[/yellow] {escape(t)}")
    if map_out is not None:
        con.print(f"  height map written to {escape(str(map_out))}")
