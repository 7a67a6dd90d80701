"""Guideway body files (TOML): the faces of a beam, each with its own survey, and the ties between them.

Example::

    format = "flatcheck-guideway"
    version = 1

    [guideway]
    ident = "KY-G2"
    length_mm = 1200.0
    description = "granite beam of the Y axis"   # optional
    material = "granite"                          # optional (for the cautions)
    datum = "top"                                 # optional: the datum face wherever a tie names it

    [[face]]
    name = "top"
    survey = "top.toml"          # any surface file flatcheck opens, relative to this file
    normal = "+z"                # "+z" top, "-z" underside, "+y" / "-y" sides
    centre_mm = 0.0              # optional: body coordinate of the face's centre line (y for ±z, z for ±y)

    [[thickness]]                # distance between opposed faces A and B, minus its nominal value
    faces = ["underside", "top"] # B ("top") is A's datum unless [guideway] datum names another
    x_mm = [100, 600, 1100]      # one number or a list (the other fields then a list of the same length or one number)
    across_mm = 0.0
    value_um = [0.0, 1.2, 2.1]
    u_um = 0.5                   # optional standard uncertainty of each reading (default 0.5 µm)

    [[height]]                   # faces facing the same way (two rails): height of B above A, minus nominal
    faces = ["rail-left", "rail-right"]
    x_mm = [100, 1100]
    value_um = [0.0, 0.8]
    across_mm = [-300, 300]      # optional: where on A and on B (default: each face's centre line)

    [[squareness]]               # 90° minus the angle between the outward normals (an outside corner: its angle - 90°)
    faces = ["side-right", "top"]
    x_mm = 600
    value_arcsec = 1.5           # or value_urad, value_um_per_m
    u_arcsec = 0.5               # optional (or u_urad); default 2.5 µrad

    [[twist]]                    # level readings across one face, or across two faces on a bridge
    faces = ["top"]              # one face: its across slope, rising towards +s; two: (wB - wA)/(sB - sA)
    x_mm = [100, 300, 500, 700, 900, 1100]
    value_um_per_m = [0.0, 0.4, 0.9, 1.1, 1.6, 2.0]   # or value_urad, value_arcsec, value_mm_per_m
    across_mm = [-300, 300]      # two-face runs: where the feet stand (default: the faces' centre lines)
    u_um_per_m = 1.0             # optional (or u_urad, u_arcsec); default 1 µm/m

Coordinates: x along the travel from one origin shared by every face's file; each face's heights are outward
(away from the material); the across coordinate is body y (across the beam) for ±z faces and body z (up) for
±y faces, and each file's own y runs the same way. A twist run has one unknown zero (differential levels):
only the changes of its readings count. Unknown keys are refused.
"""

from __future__ import annotations

import math
import re
import tomllib
from pathlib import Path

import numpy as np

from ..errors import FlatcheckError, InputFormatError, InputValueError
from ..units import ARCSEC_TO_RAD
from ._text import read_text, toml_loads

__all__ = ["FORMAT_NAME", "FORMAT_VERSION", "read_guideway_toml", "parse_guideway_toml"]

FORMAT_NAME = "flatcheck-guideway"
FORMAT_VERSION = 1

_TOP_KEYS = {"format", "version", "guideway", "face", "thickness", "height", "squareness", "twist"}
_GUIDEWAY_KEYS = {"ident", "length_mm", "description", "material", "datum"}
_FACE_KEYS = {"name", "survey", "normal", "centre_mm"}
_THICKNESS_KEYS = {"faces", "x_mm", "across_mm", "value_um", "u_um"}
_HEIGHT_KEYS = {"faces", "x_mm", "across_mm", "value_um", "u_um"}
_ANGLE_UNITS = {  # key suffix -> µrad per unit (exact)
    "urad": 1.0,
    "um_per_m": 1.0,
    "mm_per_m": 1e3,
    "arcsec": ARCSEC_TO_RAD * 1e6,
}
_SQUARE_KEYS = {"faces", "x_mm"} | {f"value_{u}" for u in _ANGLE_UNITS} | {f"u_{u}" for u in _ANGLE_UNITS}
_TWIST_KEYS = _SQUARE_KEYS | {"across_mm"}
_NORMALS = ("+z", "-z", "+y", "-y")
_AXIS = {"+z": ("z", 1), "-z": ("z", -1), "+y": ("y", 1), "-y": ("y", -1)}


# --------------------------------------------------------------------------- locating things in the text
class _Lines:
    """Line numbers of array-of-tables headers and of keys inside them (tomllib gives none)."""

    def __init__(self, text: str):
        self.lines = text.splitlines()
        self.headers = []  # (line number, header text)
        for i, ln in enumerate(self.lines, start=1):
            m = re.match(r"^\s*(\[\[?)\s*([A-Za-z0-9_.\-\"']+)\s*\]\]?", ln)
            if m:
                self.headers.append((i, m.group(2).strip("\"'")))

    def table(self, name: str, k: int):
        """Line of the k-th (0-based) ``[[name]]`` header, or None."""
        found = [ln for ln, h in self.headers if h == name]
        return found[k] if k < len(found) else None

    def key(self, start: int | None, key: str):
        """Line of ``key = ...`` in the table starting at line ``start`` (top level when None)."""
        begin = 0 if start is None else start
        ends = [ln for ln, _ in self.headers if ln > begin]
        end = ends[0] - 1 if ends else len(self.lines)
        if start is None:
            end = self.headers[0][0] - 1 if self.headers else len(self.lines)
        pat = re.compile(rf"^\s*{re.escape(key)}\s*=")
        for i in range(begin, end):
            if pat.match(self.lines[i]):
                return i + 1
        return start


def _where(source, line, table, field=None):
    parts = [str(source)]
    if line is not None:
        parts.append(f"line {line}")
    if table:
        parts.append(table)
    if field:
        parts.append(f"field {field!r}")
    return ", ".join(parts)


def _shown(v) -> str:
    if isinstance(v, dict):
        return "a table"
    text = repr(v)
    return text if len(text) <= 40 else text[:37] + "..."


#: The range (flatcheck.limits, docs/limits.md) each number of a body or carriage file is checked against, by key.
_KINDS = {
    "length_mm": "length_mm", "x_mm": "position_mm", "across_mm": "position_mm", "along_mm": "position_mm",
    "y_mm": "position_mm", "z_mm": "position_mm", "travel_start_mm": "position_mm", "travel_end_mm": "position_mm",
    "load_along_mm": "position_mm", "load_across_mm": "position_mm", "step_mm": "length_mm",
    "value_um": "height_um", "u_um": "uncertainty_um", "gap_um": "gap_um", "min_film_um": "gap_um",
    "load_n": "load_n", "supply_kpa": "pressure_kpa", "ambient_kpa": "pressure_kpa",
    "permeability_m2": "permeability_m2", "layer_mm": "layer_mm", "orifice_mm": "orifice_mm",
    "cd": "discharge_coefficient", "pocket_mm": "pocket_mm", "pocket_depth_um": "pocket_depth_um",
    "straightness_um": "tolerance_um", "vertical_straightness_um": "tolerance_um",
    "horizontal_straightness_um": "tolerance_um", "pitch_arcsec": "angle_arcsec", "yaw_arcsec": "angle_arcsec",
    "roll_arcsec": "angle_arcsec",
}


def _check_kind(key: str, values, where: str, kind: str | None = None) -> None:
    """Refuse the first of ``values`` outside the range of its key (docs/limits.md), naming the key."""
    from ..limits import LIMITS, check_range

    kind = kind or _KINDS.get(key)
    if kind not in LIMITS:
        return
    for i, v in enumerate(values):
        lim = LIMITS[kind]
        if not (lim.low <= v <= lim.high) or (lim.low_open and v == lim.low):
            check_range(v, kind, where=where, name=key if len(values) == 1 else f"entry {i + 1} of {key}")


class _Table:
    """One table of the file with what is needed to name its fields in messages."""

    def __init__(self, data, source, lines: _Lines, name: str, k: int | None = None):
        self.source = source
        self.lines = lines
        self.name = name
        if k is None:
            self.start = next((ln for ln, h in lines.headers if h == name), None)
            self.label = f"[{name}]"
        else:
            self.start = lines.table(name, k)
            self.label = f"[[{name}]] #{k + 1}"
        if not isinstance(data, dict):
            raise InputFormatError(
                f"{name} must be a table, got {_shown(data)}", where=_where(source, self.start, None, name),
                fix=f"write it as [[{name}]] sections" if k is not None else f"write it as a [{name}] section",
            )
        self.data = data

    def where(self, field=None):
        line = self.lines.key(self.start, field) if field else self.start
        return _where(self.source, line, self.label, field)

    def check_keys(self, allowed):
        unknown = sorted(set(self.data) - set(allowed))
        if unknown:
            raise InputFormatError(
                f"unknown key {unknown[0]!r}", where=self.where(unknown[0]), fix=f"use only: {', '.join(sorted(allowed))}"
            )

    def require(self, key, fix):
        if key not in self.data:
            raise InputFormatError(f"no {key}", where=self.where(), fix=fix)
        return self.data[key]

    def text(self, key, default=None, *, required_fix=None):
        if key not in self.data:
            if required_fix:
                raise InputFormatError(f"no {key}", where=self.where(), fix=required_fix)
            return default
        v = self.data[key]
        if not isinstance(v, str) or not v.strip():
            raise InputValueError(f"{key} must be text, got {_shown(v)}", where=self.where(key), fix="quote the value")
        return v

    def number(self, key, default=None, *, positive=False, required_fix=None):
        if key not in self.data:
            if required_fix:
                raise InputFormatError(f"no {key}", where=self.where(), fix=required_fix)
            return default
        v = self.data[key]
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(float(v)):
            raise InputValueError(f"{key} must be a number, got {_shown(v)}", where=self.where(key),
                                  fix="give a finite number (no quotes)")
        v = float(v)
        if positive and v <= 0:
            raise InputValueError(f"{key} must be positive, got {v:g}", where=self.where(key), fix=f"give {key} > 0")
        _check_kind(key, [v], self.where(key))
        return v

    def numbers(self, key, *, required_fix=None, default=None):
        """A number or a list of numbers, as a 1-D array."""
        if key not in self.data:
            if required_fix:
                raise InputFormatError(f"no {key}", where=self.where(), fix=required_fix)
            return default
        v = self.data[key]
        vals = v if isinstance(v, list) else [v]
        if not vals:
            raise InputValueError(f"{key} is an empty list", where=self.where(key), fix="give at least one number")
        for i, e in enumerate(vals):
            if isinstance(e, bool) or not isinstance(e, (int, float)) or not math.isfinite(float(e)):
                what = f"entry {i + 1} of {key}" if isinstance(v, list) else key
                raise InputValueError(f"{what} must be a number, got {_shown(e)}", where=self.where(key),
                                      fix="give finite numbers (no quotes)")
        _check_kind(key, [float(e) for e in vals], self.where(key))
        return np.array(vals, dtype=float)

    def face_names(self, key, count, faces: dict, *, kinds: str):
        first = max(count_set(count))
        v = self.require(key, f"add {key} = [{', '.join(chr(34) + n + chr(34) for n in list(faces)[:first])}]")
        if isinstance(v, str):
            v = [v]
        if not isinstance(v, list) or not all(isinstance(e, str) for e in v) or len(v) not in count_set(count):
            n = " or ".join(str(c) for c in count_set(count))
            raise InputValueError(f"{key} must be a list of {n} face names, got {_shown(v)}", where=self.where(key),
                                  fix=f"name {n} faces ({kinds})")
        for n in v:
            if n not in faces:
                raise InputValueError(
                    f"no face called {n!r} (the faces are {', '.join(repr(f) for f in faces)})", where=self.where(key),
                    fix="use the name of a [[face]] table",
                )
        if len(set(v)) != len(v):
            raise InputValueError(f"{key} names the same face twice", where=self.where(key), fix="name two different faces")
        return tuple(v)

    def angle(self, prefix, *, required=True, default=None):
        """One of ``prefix_urad``, ``prefix_arcsec``, ``prefix_um_per_m``, ``prefix_mm_per_m`` as µrad."""
        given = [u for u in _ANGLE_UNITS if f"{prefix}_{u}" in self.data]
        if len(given) > 1:
            raise InputValueError(
                f"{prefix} is given in two units ({', '.join(prefix + '_' + u for u in given)})",
                where=self.where(f"{prefix}_{given[1]}"), fix="give it once, in one unit",
            )
        if not given:
            if required:
                raise InputFormatError(
                    f"no {prefix}", where=self.where(),
                    fix=f"add {prefix}_arcsec, {prefix}_urad, {prefix}_um_per_m or {prefix}_mm_per_m",
                )
            return default
        key = f"{prefix}_{given[0]}"
        urad = self.numbers(key) * _ANGLE_UNITS[given[0]]
        _check_kind(f"{key} (in µrad)", [float(v) for v in urad], self.where(key), "tilt_urad")
        return urad, key


def count_set(count):
    return count if isinstance(count, tuple) else (count,)


def _broadcast(table: _Table, arrays: dict):
    """Arrays of one reading each (length 1 broadcast); refuse unequal lengths naming the fields."""
    n = max(a.size for a in arrays.values())
    out = {}
    for k, a in arrays.items():
        if a.size not in (1, n):
            longest = max(arrays, key=lambda q: arrays[q].size)
            raise InputValueError(
                f"{k} has {a.size} values but {longest} has {n}", where=table.where(k),
                fix="give one value per reading, or one value for all",
            )
        out[k] = np.broadcast_to(a, (n,)).astype(float)
    return n, out


# --------------------------------------------------------------------------- parsing
def parse_guideway_toml(text: str, *, source: str = "<guideway>", folder=None, opener=None):
    """Parse the text of a guideway body file (format in the module docstring).

    Parameters
    ----------
    text : str
        TOML text.
    source : str
        The file's name for messages.
    folder : str or Path, optional
        Folder the faces' survey paths are relative to (default: the current folder).
    opener : callable, optional
        ``opener(path) -> object with .heightmap`` opening one face's surface file (default:
        :func:`flatcheck.io.open_surface`).

    Returns
    -------
    flatcheck.guideway.GuidewayBody

    Raises
    ------
    InputFormatError
        Not TOML, wrong format or version, a missing table or field, an unknown key, a missing survey file.
    InputValueError
        A value of the wrong type, an unknown face or normal, a tie between faces that cannot have it.
    """
    from ..guideway import (
        Face,
        GuidewayBody,
        HeightTie,
        SquarenessTie,
        ThicknessTie,
        TwistRun,
    )
    from ..guideway._body import DEFAULT_U_LENGTH_UM, DEFAULT_U_SQUARENESS_URAD, DEFAULT_U_TWIST_URAD

    if opener is None:
        from ._open import open_surface as opener
    folder = Path(".") if folder is None else Path(folder)
    try:
        doc = toml_loads(text, where=str(source))
    except tomllib.TOMLDecodeError as exc:
        raise InputFormatError(f"not a valid TOML file ({exc})", where=str(source), fix="check the TOML syntax") from None
    lines = _Lines(text)
    unknown = sorted(set(doc) - _TOP_KEYS)
    if unknown:
        raise InputFormatError(f"unknown key or table {unknown[0]!r}", where=_where(source, lines.key(None, unknown[0]), None),
                               fix=f"use only: {', '.join(sorted(_TOP_KEYS))}")
    fmt = doc.get("format")
    if fmt != FORMAT_NAME:
        raise InputFormatError(
            f"format is {_shown(fmt) if fmt is not None else 'missing'}, not {FORMAT_NAME!r}",
            where=_where(source, lines.key(None, "format") if fmt is not None else None, None, "format"),
            fix=f'start the file with format = "{FORMAT_NAME}" and version = {FORMAT_VERSION}',
        )
    ver = doc.get("version")
    if ver != FORMAT_VERSION or isinstance(ver, bool):
        raise InputFormatError(
            f"version is {_shown(ver) if ver is not None else 'missing'}; this flatcheck reads version {FORMAT_VERSION}",
            where=_where(source, lines.key(None, "version") if ver is not None else None, None, "version"),
            fix=f"write version = {FORMAT_VERSION}",
        )
    if "guideway" not in doc:
        raise InputFormatError("no [guideway] table", where=str(source), fix="add [guideway] with ident and length_mm")
    g = _Table(doc["guideway"], source, lines, "guideway")
    g.check_keys(_GUIDEWAY_KEYS)
    ident = g.text("ident", required_fix='add ident = "..." (the beam\'s name)')
    length = g.number("length_mm", positive=True, required_fix="add length_mm = <length of the beam along the travel>")
    description = g.text("description", "")
    material = g.text("material", "")
    datum = g.text("datum", None)

    face_tables = doc.get("face")
    if face_tables is None:
        raise InputFormatError("no [[face]] table", where=str(source), fix="add one [[face]] table per measured face")
    if not isinstance(face_tables, list):
        raise InputFormatError("face must be [[face]] tables", where=_where(source, lines.key(None, "face"), None, "face"),
                               fix="write one [[face]] section per face")
    faces = {}
    warnings = []
    for k, data in enumerate(face_tables):
        t = _Table(data, source, lines, "face", k)
        t.check_keys(_FACE_KEYS)
        name = t.text("name", required_fix='add name = "top" (or another name for the face)')
        if name in faces:
            raise InputValueError(f"face name {name!r} is used twice", where=t.where("name"),
                                  fix="give each face its own name")
        normal = t.text("normal", required_fix='add normal = "+z" (top), "-z" (underside), "+y" or "-y" (sides)')
        if normal not in _NORMALS:
            raise InputValueError(f"unknown normal {normal!r}", where=t.where("normal"),
                                  fix='use "+z" (top), "-z" (underside), "+y" or "-y" (sides)')
        rel = t.text("survey", required_fix="add survey = \"FILE\" (a survey TOML or height-map CSV, relative to this file)")
        path = Path(rel)
        path = path if path.is_absolute() else folder / path
        if not path.exists():
            raise InputFormatError(
                f"face {name!r}: no such survey file {str(path)!r}", where=t.where("survey"),
                fix="give the path of the face's survey relative to the body file",
            )
        try:
            loaded = opener(path)
        except FlatcheckError as exc:  # the survey's own message, after where the body names it
            inner = exc.where or str(path)
            raise type(exc)(exc.message, where=f"{t.where('survey')}, face {name!r}: {inner}", fix=exc.fix) from None
        hm = loaded.heightmap
        centre = t.number("centre_mm", 0.0)
        xmin, xmax, _, _ = hm.extent_mm
        if xmin < -0.01 * length or xmax > 1.01 * length:
            warnings.append(
                f"face {name!r}: its survey reaches x = {xmin:g} to {xmax:g} mm, beyond the body's 0 to {length:g} mm: "
                "check that every face's file measures x from the same origin"
            )
        faces[name] = Face(name, normal, hm, rel, centre, t.start, loaded.height_step_um())
    if datum is not None and datum not in faces:
        raise InputValueError(
            f"the datum {datum!r} is not a face (the faces are {', '.join(repr(f) for f in faces)})",
            where=g.where("datum"), fix="name one of the [[face]] tables",
        )

    def axis(n):
        return _AXIS[faces[n].normal]

    def tables(key):
        v = doc.get(key, [])
        if not isinstance(v, list):
            raise InputFormatError(f"{key} must be [[{key}]] tables", where=_where(source, lines.key(None, key), None, key),
                                   fix=f"write one [[{key}]] section per set of readings")
        return [_Table(d, source, lines, key, k) for k, d in enumerate(v)]

    thickness = []
    for t in tables("thickness"):
        t.check_keys(_THICKNESS_KEYS)
        A, B = t.face_names("faces", 2, faces, kinds="two opposed faces")
        (ax_a, sa), (ax_b, sb) = axis(A), axis(B)
        if ax_a != ax_b or sa == sb:
            other = "[[height]]" if ax_a == ax_b else "[[squareness]]"
            raise InputValueError(
                f"a thickness needs two opposed faces; {A!r} ({faces[A].normal}) and {B!r} ({faces[B].normal}) are not",
                where=t.where("faces"), fix=f"name opposed faces (+z/-z or +y/-y); use {other} for these two",
            )
        n, arr = _broadcast(t, {
            "x_mm": t.numbers("x_mm", required_fix="add x_mm (place along the travel, mm)"),
            "across_mm": t.numbers("across_mm", required_fix="add across_mm (place across, from the centre line, mm)"),
            "value_um": t.numbers("value_um", required_fix="add value_um (distance minus nominal, µm)"),
        })
        u = t.number("u_um", DEFAULT_U_LENGTH_UM, positive=True)
        for i in range(n):
            lab = f"{t.label} (line {t.start})" + (f", reading {i + 1}" if n > 1 else "")
            thickness.append(ThicknessTie((A, B), float(arr["x_mm"][i]), float(arr["across_mm"][i]),
                                          float(arr["value_um"][i]), u, lab))

    heights = []
    for t in tables("height"):
        t.check_keys(_HEIGHT_KEYS)
        A, B = t.face_names("faces", 2, faces, kinds="two faces facing the same way")
        if faces[A].normal != faces[B].normal:
            raise InputValueError(
                f"a height tie needs two faces facing the same way; {A!r} is {faces[A].normal}, {B!r} {faces[B].normal}",
                where=t.where("faces"), fix="use [[thickness]] for opposed faces, [[squareness]] for perpendicular ones",
            )
        n, arr = _broadcast(t, {
            "x_mm": t.numbers("x_mm", required_fix="add x_mm (place along the travel, mm)"),
            "value_um": t.numbers("value_um", required_fix="add value_um (height of B above A minus nominal, µm)"),
        })
        across = t.numbers("across_mm", default=np.array([faces[A].centre_mm, faces[B].centre_mm]))
        if across.size != 2:
            raise InputValueError(f"across_mm must be two numbers (on {A!r}, on {B!r}), got {across.size}",
                                  where=t.where("across_mm"), fix="give across_mm = [on A, on B] in mm")
        u = t.number("u_um", DEFAULT_U_LENGTH_UM, positive=True)
        for i in range(n):
            lab = f"{t.label} (line {t.start})" + (f", reading {i + 1}" if n > 1 else "")
            heights.append(HeightTie((A, B), float(arr["x_mm"][i]), (float(across[0]), float(across[1])),
                                     float(arr["value_um"][i]), u, lab))

    squareness = []
    for t in tables("squareness"):
        t.check_keys(_SQUARE_KEYS)
        A, B = t.face_names("faces", 2, faces, kinds="two perpendicular faces")
        if axis(A)[0] == axis(B)[0]:
            raise InputValueError(
                f"squareness needs two perpendicular faces; {A!r} ({faces[A].normal}) and {B!r} ({faces[B].normal}) "
                "are parallel", where=t.where("faces"),
                fix="name a top or underside (±z) and a side (±y); use [[thickness]] or [[height]] for parallel faces",
            )
        vals, key = t.angle("value")
        n, arr = _broadcast(t, {"x_mm": t.numbers("x_mm", required_fix="add x_mm (place along the travel, mm)"),
                                key: vals})
        u_got = t.angle("u", required=False)
        u = DEFAULT_U_SQUARENESS_URAD if u_got is None else float(u_got[0][0])
        if u <= 0:
            raise InputValueError("the uncertainty must be positive", where=t.where(u_got[1]), fix="give a value above 0")
        for i in range(n):
            lab = f"{t.label} (line {t.start})" + (f", reading {i + 1}" if n > 1 else "")
            squareness.append(SquarenessTie((A, B), float(arr["x_mm"][i]), float(arr[key][i]), u, lab))

    twist = []
    for t in tables("twist"):
        t.check_keys(_TWIST_KEYS)
        names = t.face_names("faces", (1, 2), faces, kinds="one face, or two rails facing the same way")
        vals, key = t.angle("value")
        n, arr = _broadcast(t, {"x_mm": t.numbers("x_mm", required_fix="add x_mm (stations along the travel, mm)"),
                                key: vals})
        if n < 2:
            raise InputValueError("a twist run needs readings at two or more stations", where=t.where("x_mm"),
                                  fix="give x_mm and the readings as lists")
        u_got = t.angle("u", required=False)
        u = DEFAULT_U_TWIST_URAD if u_got is None else float(u_got[0][0])
        if u <= 0:
            raise InputValueError("the uncertainty must be positive", where=t.where(u_got[1]), fix="give a value above 0")
        across = ()
        if len(names) == 2:
            A, B = names
            if faces[A].normal != faces[B].normal:
                raise InputValueError(
                    f"a two-face twist run needs rails facing the same way; {A!r} is {faces[A].normal}, {B!r} "
                    f"{faces[B].normal}", where=t.where("faces"), fix="name two tops (or two sides) of parallel rails",
                )
            acr = t.numbers("across_mm", default=np.array([faces[A].centre_mm, faces[B].centre_mm]))
            if acr.size != 2:
                raise InputValueError(f"across_mm must be two numbers (on {A!r}, on {B!r})", where=t.where("across_mm"),
                                      fix="give across_mm = [on A, on B] in mm")
            if abs(acr[1] - acr[0]) < 1e-9:
                raise InputValueError(
                    f"the level's feet on {A!r} and {B!r} are at the same across position ({acr[0]:g} mm)",
                    where=t.where("across_mm") if "across_mm" in t.data else t.where("faces"),
                    fix="give the faces' centre lines (centre_mm) or across_mm = [on A, on B]",
                )
            across = (float(acr[0]), float(acr[1]))
        elif "across_mm" in t.data:
            raise InputValueError("across_mm is for two-face runs", where=t.where("across_mm"),
                                  fix="drop it: a one-face run reads the slope across the whole face")
        twist.append(TwistRun(names, arr["x_mm"].copy(), arr[key].copy(), across, u, f"{t.label} (line {t.start})"))

    try:
        return GuidewayBody(
            ident=ident, length_mm=length, faces=tuple(faces.values()), thickness=tuple(thickness),
            heights=tuple(heights), squareness=tuple(squareness), twist=tuple(twist), datum=datum,
            description=description, material=material, source=str(source), notes=tuple(warnings),
        )
    except FlatcheckError as exc:
        raise type(exc)(exc.message, where=exc.where or str(source), fix=exc.fix) from None


def read_guideway_toml(path, *, opener=None):
    """Read a guideway body file and open each face's survey (paths relative to the body file).

    Parameters
    ----------
    path : str or Path
        The body file.
    opener : callable, optional
        Opens one face's surface file (default :func:`flatcheck.io.open_surface`).

    Returns
    -------
    flatcheck.guideway.GuidewayBody

    Raises
    ------
    InputFormatError, InputValueError
        As :func:`parse_guideway_toml`, plus missing, empty or binary files; errors in a face's survey name
        that file.
    """
    path = Path(path)
    text = read_text(path, wanted=f'a guideway body file (TOML with format = "{FORMAT_NAME}")')
    return parse_guideway_toml(text, source=str(path), folder=path.parent, opener=opener)
