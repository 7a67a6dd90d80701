"""Carriage files (TOML) for a guideway: the bearing file format, with pads on any face and the film data.

A carriage file is a bearing file (``flatcheck bearing --bearing``, format in ``_bearing_toml.py``) with
these additions:

- each pad's ``face`` names a face of the guideway body (``face = "underside"``); ``[carriage] face`` is the
  default for pads that name none;
- ``[carriage]`` takes ``load_n`` (external load in newtons, downward, weight included; default: the
  design load, the pads' net vertical force at their nominal gaps on a perfect body), ``load_along_mm`` and
  ``load_across_mm`` (where it acts, from the carriage's centre; default 0), ``y_mm`` (the carriage's centre
  across the top and underside, from their centre lines; default 0), ``z_mm`` (the same up the sides),
  ``pivot`` (pads on ball pivots, default true; false: pads fixed to the carriage) and ``min_film_um`` (the
  least film any pad may keep; default ``(1 - gap_fraction) x gap``);
- ``[film]`` holds what ``flatcheck bearing`` takes as film options: ``supply_kpa`` (gauge), for porous pads
  ``permeability_m2`` and ``layer_mm``, for orifice pads ``orifice_mm`` and optionally ``cd`` (0.8),
  ``orifices`` (1), ``pocket_mm`` and ``pocket_depth_um``; ``ambient_kpa`` (101.325) and ``mesh`` (cells
  along each side of a pad, default 32);
- ``[budget]`` takes ``straightness_um`` (vertical, as in bearing files; or ``vertical_straightness_um``),
  ``horizontal_straightness_um``, ``pitch_arcsec``, ``yaw_arcsec`` and ``roll_arcsec``.

Pads' ``along_mm`` is measured from the carriage's centre along the travel and ``across_mm`` from the face's
centre line (body y on the top and underside, body z up the sides). Unknown keys are refused.
"""

from __future__ import annotations

import tomllib
from dataclasses import dataclass, field
from pathlib import Path

from ..errors import FlatcheckError, InputFormatError, InputValueError
from ._guideway_toml import _Lines, _shown, _Table, _where
from ._text import read_text, toml_loads

__all__ = ["CarriageFile", "read_carriage_toml", "parse_carriage_toml", "wrap_carriage"]

_TOP = {"bearing", "carriage", "budget", "film"}
_BEARING_KEYS = {"label", "pad", "gap_um", "kind", "gap_fraction", "marginal_from"}
_CARRIAGE_KEYS = {"face", "y_mm", "z_mm", "travel_start_mm", "travel_end_mm", "step_mm", "pad", "load_n",
                  "load_along_mm", "load_across_mm", "pivot", "min_film_um"}
_PAD_KEYS = {"name", "along_mm", "across_mm", "face", "pad", "gap_um", "kind", "stiffness"}
_BUDGET_KEYS = {"straightness_um", "vertical_straightness_um", "horizontal_straightness_um", "pitch_arcsec",
                "yaw_arcsec", "roll_arcsec"}
_FILM_KEYS = {"supply_kpa", "permeability_m2", "layer_mm", "ambient_kpa", "mesh", "orifice_mm", "cd", "orifices",
              "pocket_mm", "pocket_depth_um"}
_ORIFICE_ONLY = ("orifice_mm", "cd", "orifices", "pocket_mm", "pocket_depth_um")
_POROUS_ONLY = ("permeability_m2", "layer_mm")


@dataclass(frozen=True, eq=False)
class CarriageFile:
    """What a carriage file says, before the film feed is built.

    Attributes
    ----------
    pads : tuple of flatcheck.bearing.PlacedPad
        The pads, each on a face named in the file.
    settings : dict
        ``[carriage]`` values (``load_n``, ``y_mm``... ; absent keys absent).
    film : dict
        ``[film]`` values.
    film_where : dict
        For each ``[film]`` key, where it is in the file (for messages).
    budget : dict
        ``[budget]`` values under the guideway's names.
    gap_fraction, marginal_from : float or None
    label, source : str
    pad_where : dict
        For each pad name, where its table is (for messages).
    """

    pads: tuple
    settings: dict
    film: dict
    film_where: dict
    budget: dict
    gap_fraction: float | None
    marginal_from: float | None
    label: str
    source: str
    pad_where: dict = field(default_factory=dict)


def parse_carriage_toml(text: str, *, source: str = "<carriage>") -> CarriageFile:
    """Parse the text of a carriage file (see the module docstring).

    Raises
    ------
    InputFormatError
        Not TOML, a missing ``[bearing]`` section or pad size, an unknown key.
    InputValueError
        A value of the wrong type or out of range, a pad name used twice.
    """
    from ..bearing import Pad, PlacedPad, parse_pad_size

    try:
        doc = toml_loads(text, where=str(source))  # no deep nesting, no integer too large for a float
    except tomllib.TOMLDecodeError as exc:
        raise InputFormatError(f"not a valid TOML file ({exc})", where=str(source), fix="check the TOML syntax") from None
    lines = _Lines(text)
    unknown = sorted(set(doc) - _TOP)
    if unknown:
        raise InputFormatError(f"unknown key or table {unknown[0]!r}",
                               where=_where(source, lines.key(None, unknown[0]), None),
                               fix=f"use only: {', '.join(sorted(_TOP))}")
    if "bearing" not in doc:
        raise InputFormatError("no [bearing] section", where=str(source),
                               fix="add [bearing] with pad (size), gap_um and kind")
    b = _Table(doc["bearing"], source, lines, "bearing")
    b.check_keys(_BEARING_KEYS)
    size = b.text("pad", None)
    gap = b.number("gap_um", None, positive=True)
    kind = b.text("kind", "porous")
    label = b.text("label", "")
    gap_fraction = b.number("gap_fraction", None, positive=True)
    marginal_from = b.number("marginal_from", None, positive=True)
    for key, v in (("gap_fraction", gap_fraction), ("marginal_from", marginal_from)):
        if v is not None and v > 1:
            raise InputValueError(f"{key} must be a fraction (at most 1), got {v:g}", where=b.where(key),
                                  fix="give a fraction such as 0.25" if key == "gap_fraction" else "give e.g. 0.8")

    c = _Table(doc.get("carriage", {}), source, lines, "carriage")
    c.check_keys(_CARRIAGE_KEYS)
    face = c.text("face", "top")
    settings = {}
    for key in ("y_mm", "z_mm", "travel_start_mm", "travel_end_mm", "load_along_mm", "load_across_mm"):
        v = c.number(key, None)
        if v is not None:
            settings[key] = v
    for key in ("step_mm", "min_film_um"):
        v = c.number(key, None, positive=True)
        if v is not None:
            settings[key] = v
    if "load_n" in c.data:
        settings["load_n"] = c.number("load_n")
    if "pivot" in c.data:
        if not isinstance(c.data["pivot"], bool):
            raise InputValueError(f"pivot must be true or false, got {_shown(c.data['pivot'])}", where=c.where("pivot"),
                                  fix="write pivot = true (ball pivots) or pivot = false (pads fixed)")
        settings["pivot"] = c.data["pivot"]
    s0, s1 = settings.get("travel_start_mm"), settings.get("travel_end_mm")
    if s0 is not None and s1 is not None and s1 < s0:
        raise InputValueError(f"the travel ends ({s1:g} mm) before it starts ({s0:g} mm)",
                              where=c.where("travel_end_mm"), fix="swap or correct the travel limits")

    def make_pad(size_text, gap_um, kind_text, t: _Table):
        if size_text is None:
            raise InputFormatError("no pad size", where=t.where(), fix='add pad = "LxW" (mm) or pad = "dD" here or in [bearing]')
        if gap_um is None:
            raise InputFormatError("no air gap", where=t.where(), fix="add gap_um = <nominal gap in µm> here or in [bearing]")
        shape, length, width = parse_pad_size(size_text, where=t.where("pad") if "pad" in t.data else b.where("pad"))
        try:
            return Pad(shape, length, width, gap_um, kind_text)
        except InputValueError as exc:
            raise InputValueError(exc.message, where=t.where("kind") if "kind" in t.data else t.where(),
                                  fix=exc.fix) from None

    raw = c.data.get("pad", [])
    if not isinstance(raw, list):
        raise InputFormatError("pads must be [[carriage.pad]] tables", where=c.where("pad"),
                               fix="write one [[carriage.pad]] section per pad")
    pads, where = [], {}
    if not raw:
        pads.append(PlacedPad(make_pad(size, gap, kind, b), name="pad", face=face))
        where["pad"] = b.where()
    for k, data in enumerate(raw):
        t = _Table(data, source, lines, "carriage.pad", k)
        t.check_keys(_PAD_KEYS)
        name = t.text("name", f"pad {k + 1}")
        if name in where:
            raise InputValueError(f"pad name {name!r} is used twice", where=t.where("name"),
                                  fix="give each pad its own name")
        if "stiffness" in t.data:
            # the footprint model of flatcheck bearing weights pads by it; here every pad's stiffness comes from
            # its own film at its own local gap, so a weight would be silently ignored: refuse it instead
            raise InputValueError(
                f"pad {name!r}: a stiffness weight is not used by the guideway's carriage (each pad's stiffness "
                "comes from its own film)", where=t.where("stiffness"),
                fix="remove stiffness from this pad (it is for flatcheck bearing's footprint estimate only)")
        pad = make_pad(t.text("pad", size), t.number("gap_um", gap, positive=True), t.text("kind", kind), t)
        pads.append(PlacedPad(pad, along_mm=t.number("along_mm", 0.0), across_mm=t.number("across_mm", 0.0),
                              name=name, face=t.text("face", face)))
        where[name] = t.where()

    bt = _Table(doc.get("budget", {}), source, lines, "budget")
    bt.check_keys(_BUDGET_KEYS)
    if "straightness_um" in bt.data and "vertical_straightness_um" in bt.data:
        raise InputValueError("straightness_um and vertical_straightness_um name the same budget",
                              where=bt.where("vertical_straightness_um"), fix="give one of them")
    budget = {}
    for key in _BUDGET_KEYS:
        v = bt.number(key, None, positive=True)
        if v is not None:
            budget["vertical_straightness_um" if key == "straightness_um" else key] = v

    ft = _Table(doc.get("film", {}), source, lines, "film")
    ft.check_keys(_FILM_KEYS)
    film, film_where = {}, {}
    for key in _FILM_KEYS:
        if key not in ft.data:
            continue
        if key in ("mesh", "orifices"):
            v = ft.data[key]
            if isinstance(v, bool) or not isinstance(v, int) or v < (4 if key == "mesh" else 1):
                raise InputValueError(f"{key} must be a whole number{' of at least 4' if key == 'mesh' else ''}, "
                                      f"got {_shown(v)}", where=ft.where(key),
                                      fix="give e.g. 32" if key == "mesh" else "give e.g. 1")
            film[key] = int(v)
        else:
            film[key] = ft.number(key, positive=key not in ("pocket_mm", "pocket_depth_um"))
        film_where[key] = ft.where(key)
    return CarriageFile(tuple(pads), settings, film, film_where, budget, gap_fraction, marginal_from, label,
                        str(source), where)


def read_carriage_toml(path) -> CarriageFile:
    """Read a carriage file.

    Raises
    ------
    InputFormatError, InputValueError
        As :func:`parse_carriage_toml`, plus missing, empty or binary files.
    """
    path = Path(path)
    text = read_text(path, wanted="a carriage file (a bearing TOML with [carriage] pads on the guideway's faces)")
    return parse_carriage_toml(text, source=str(path))


def wrap_carriage(desc: CarriageFile, *, gap_um=None, film=None, mesh=None, travel=None, step_mm=None):
    """The :class:`~flatcheck.guideway.WrapCarriage` a carriage file describes, with command-line overrides.

    Parameters
    ----------
    desc : CarriageFile
    gap_um : float, optional
        Replaces every pad's nominal gap (µm).
    film : dict, optional
        Film values replacing the file's (``supply_kpa``, ``permeability_m2``... as in ``[film]``); each key is
        named as the option ``--supply-kpa``... in messages.
    mesh : int, optional
        Film mesh cells per pad side.
    travel : (float or None, float or None), optional
        Travel start and end overriding the file's (mm).
    step_mm : float, optional

    Returns
    -------
    flatcheck.guideway.WrapCarriage

    Raises
    ------
    InputValueError
        Missing or contradictory film data, pads of two kinds, a value out of range.
    """
    import dataclasses

    from ..bearing import OrificeFeed, PorousFeed, orifice_ring
    from ..guideway import DEFAULT_FILM_MESH, GuidewayBudget, WrapCarriage

    pads = desc.pads
    if gap_um is not None:
        pads = tuple(dataclasses.replace(p, pad=dataclasses.replace(p.pad, gap_um=float(gap_um))) for p in pads)
    values = dict(desc.film)
    where = dict(desc.film_where)
    for k, v in (film or {}).items():
        if v is not None:
            values[k] = v
            where[k] = "--" + k.replace("_", "-")
    kinds = sorted({p.pad.kind for p in pads})
    if len(kinds) != 1:
        raise InputValueError(
            f"the film model needs pads of one kind; this carriage has {' and '.join(kinds)} pads",
            where=desc.source, fix="give every pad the same kind (porous or orifice)",
        )
    kind = kinds[0]
    wrong = _ORIFICE_ONLY if kind == "porous" else _POROUS_ONLY
    for k in wrong:
        if k in values:
            raise InputValueError(
                f"{k} describes {'orifice' if kind == 'porous' else 'porous'} pads, but the pads are {kind}",
                where=where[k], fix=f"drop {k}, or set the pads' kind to {'orifice' if kind == 'porous' else 'porous'}",
            )
    need = ("supply_kpa",) + (_POROUS_ONLY if kind == "porous" else ("orifice_mm",))
    missing = [k for k in need if k not in values]
    if missing:
        raise InputValueError(
            f"the film model of {kind} pads needs {', '.join(missing)}",
            where=f"{desc.source}, [film]",
            fix=f"add {', '.join(k + ' = ...' for k in missing)} to [film] (or give --{missing[0].replace('_', '-')})",
        )
    ambient = values.get("ambient_kpa", 101.325)
    try:
        if kind == "porous":
            feed = PorousFeed(values["permeability_m2"], values["layer_mm"], values["supply_kpa"], ambient)
        else:
            shapes = {(p.pad.shape, p.pad.length_mm, p.pad.width_mm) for p in pads}
            count = int(values.get("orifices", 1))
            if count > 1 and len(shapes) > 1:
                raise InputValueError("orifices > 1 lays orifices out on one pad size, but the pads differ in size",
                                      where=where.get("orifices"), fix="give pads of one size, or one central orifice")
            shape, length, width = next(iter(shapes))
            feed = OrificeFeed(values["orifice_mm"], values["supply_kpa"], values.get("cd", 0.8),
                               positions_mm=orifice_ring(shape, length, width, count),
                               pocket_mm=values.get("pocket_mm", 0.0), pocket_depth_um=values.get("pocket_depth_um", 0.0),
                               ambient_kpa=ambient)
    except FlatcheckError as exc:
        raise type(exc)(exc.message, where=exc.where or f"{desc.source}, [film]", fix=exc.fix) from None
    s = dict(desc.settings)
    if travel is not None:
        if travel[0] is not None:
            s["travel_start_mm"] = travel[0]
        if travel[1] is not None:
            s["travel_end_mm"] = travel[1]
    if step_mm is not None:
        s["step_mm"] = step_mm
    cells = mesh if mesh is not None else values.get("mesh", DEFAULT_FILM_MESH)
    return WrapCarriage(
        pads=pads, feed=feed, load_n=s.get("load_n"), load_along_mm=s.get("load_along_mm", 0.0),
        load_across_mm=s.get("load_across_mm", 0.0), y_mm=s.get("y_mm", 0.0), z_mm=s.get("z_mm", 0.0),
        pivot=s.get("pivot", True), travel_start_mm=s.get("travel_start_mm"), travel_end_mm=s.get("travel_end_mm"),
        step_mm=s.get("step_mm"), gap_fraction=desc.gap_fraction if desc.gap_fraction is not None else 0.25,
        marginal_from=desc.marginal_from if desc.marginal_from is not None else 0.8,
        min_film_um=s.get("min_film_um"), budget=GuidewayBudget(**desc.budget), mesh_cells=int(cells),
        label=desc.label, source=desc.source,
    )
