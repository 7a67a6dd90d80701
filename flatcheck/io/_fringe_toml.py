"""Fringe readings under an optical flat, as written at the bench: ``format = "flatcheck-fringes"``.

Example::

    format = "flatcheck-fringes"
    version = 1

    [part]
    ident = "KY-B4"
    description = "lapped pad face"
    shape = "rect"            # rect or circle
    length_mm = 80.0          # along x (a circle: diameter_mm)
    width_mm = 80.0           # along y

    [light]
    source = "helium"         # helium, sodium, mercury-green, hene; or wavelength_nm = 587.56

    [flat]                    # optional: the optical flat's certificate
    flatness_nm = 29.0        # peak-to-valley (or flatness_fringes)

    [[reading]]               # open fringes: the bend of a fringe across the middle
    along = "x"               # the direction the fringe runs: x, y, diagonal, antidiagonal or degrees from x
    bend_fringes = 0.25       # middle of the fringe off the line through its ends, in fringe spacings
    bows = "away"             # away from the contact edge (convex) or toward it (concave)
    fringes_across = 9        # optional: the count of fringes across the part, for the record

    [[reading]]               # closed fringes: rings around a contact point
    rings = 2                 # counted from the contact to the edge
    contact = "centre"        # centre (convex) or rim (concave)
    # along = "x"             # only when the rings are not circles: the direction counted

A bend may instead be written as ``bend_mm`` with ``spacing_mm`` (both measured on the part or a
picture of it). Optional in any reading: ``length_mm`` (the length of the line read, default the
part's chord through its centre), ``irregularity_fringes`` and ``u_fringes`` (the reading's
standard uncertainty, default a tenth of a fringe as a rectangular half-width).
"""

from __future__ import annotations

import math
import re
from pathlib import Path

from ..errors import InputFormatError, InputValueError

__all__ = ["FRINGE_FORMAT", "read_fringe_readings", "parse_fringe_readings", "is_fringe_toml"]

FRINGE_FORMAT = "flatcheck-fringes"
FRINGE_VERSION = 1

_TOP = {"format", "version", "part", "light", "flat", "reading", "notes", "date"}
_PART = {"ident", "description", "shape", "length_mm", "width_mm", "diameter_mm", "material"}
_LIGHT = {"source", "wavelength_nm"}
_FLAT = {"flatness_nm", "flatness_fringes", "ident"}
_READING = {
    "along", "bend_fringes", "bend_mm", "spacing_mm", "bows", "form", "fringes_across", "rings", "contact",
    "length_mm", "irregularity_fringes", "u_fringes", "note",
}
_DIRECTIONS = {"x": 0.0, "y": 90.0, "diagonal": 45.0, "antidiagonal": 135.0}


def is_fringe_toml(path) -> bool:
    """True when the file's text names ``format = "flatcheck-fringes"`` in its first 64 kB."""
    from ._text import open_regular

    try:  # a FIFO or a device is not looked into (it may never end): the reader refuses it with its name
        fh, _size = open_regular(path)
    except (InputFormatError, OSError):
        return False
    with fh:
        head = fh.read(1 << 16)
    return re.search(rb'^\s*format\s*=\s*["\']flatcheck-fringes["\']', head, re.M) is not None


class _Where:
    """Line numbers of tables and keys, for messages (tomllib does not keep them)."""

    def __init__(self, path, text: str):
        self.path = str(path)
        self.lines = text.splitlines()

    def _table_line(self, table: str, index: int | None):
        pat = re.compile(r"^\s*\[\[\s*" + table + r"\s*\]\]" if index is not None else r"^\s*\[\s*" + table + r"\s*\]")
        seen = -1
        for no, ln in enumerate(self.lines, start=1):
            if pat.match(ln):
                seen += 1
                if index is None or seen == index:
                    return no
        return None

    def __call__(self, table: str | None = None, key: str | None = None, index: int | None = None) -> str:
        start = 1 if table is None else self._table_line(table, index)
        if start is None:
            return self.path
        label = f"[{table}]" if index is None else f"reading {index + 1}"
        if key is None:
            return f"{self.path}, line {start}" + ("" if table is None else f" ({label})")
        pat = re.compile(r"^\s*" + re.escape(key) + r"\s*=")
        for no in range(start, len(self.lines) + 1):
            ln = self.lines[no - 1]
            if no > start and re.match(r"^\s*\[", ln):
                break
            if pat.match(ln):
                return f"{self.path}, line {no} ({label if table else ''}{' ' if table else ''}{key})".replace("( ", "(")
        return f"{self.path}, line {start} ({label})" if table else self.path


def read_fringe_readings(path):
    """Read a fringe-readings file into :class:`flatcheck.optics.FringeReadings`.

    Raises
    ------
    InputFormatError
        Missing, empty or binary file; not TOML; not this format; a missing table or key.
    InputValueError
        A value out of range or of the wrong kind, an unknown key or word (each with its line).
    """
    from flatcheck.io import read_text

    path = Path(path)
    text = read_text(path, wanted="fringe readings (.toml, format = \"flatcheck-fringes\")")
    return parse_fringe_readings(text, path=path)


#: The range (flatcheck.limits, docs/limits.md) each number of a fringe file is checked against, by key.
_KINDS = {"length_mm": "length_mm", "width_mm": "length_mm", "diameter_mm": "length_mm", "spacing_mm": "length_mm",
          "bend_mm": "position_mm", "flatness_nm": "flat_nm", "flatness_fringes": "fringes", "bend_fringes": "fringes",
          "rings": "fringes", "u_fringes": "fringes", "irregularity_fringes": "fringes", "fringes_across": "fringes",
          "along": "direction_deg"}


def _number(v, where, name, *, positive=False, allow_zero=True):
    from ..limits import LIMITS, check_range

    if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
        raise InputValueError(f"{name} = {v!r} is not a number", where=where, fix="write a plain number")
    v = float(v)
    if positive and (v < 0 or (v == 0 and not allow_zero)):
        raise InputValueError(f"{name} = {v:g} must be {'positive' if not allow_zero else 'zero or more'}", where=where)
    if _KINDS.get(name) in LIMITS:
        check_range(v, _KINDS[name], where=where, name=name)
    return v


def _unknown(table: dict, known: set, where, what: str):
    for k in table:
        if k not in known:
            raise InputValueError(
                f"unknown key {k!r} in {what}", where=where(k), fix=f"use only {', '.join(sorted(known))}"
            )


def parse_fringe_readings(text: str, *, path="<text>"):
    """Parse the text of a fringe-readings file (see the module notes for the format)."""
    import tomllib

    from flatcheck.optics import FringeReading, FringeReadings, wavelength_of

    where = _Where(path, text)
    try:
        from ._text import toml_loads

        doc = toml_loads(text, where=str(path))
    except tomllib.TOMLDecodeError as exc:
        raise InputFormatError(f"not valid TOML: {' '.join(str(exc).split())}", where=str(path),
                               fix="check the quoting and the = signs on that line") from None
    if doc.get("format") != FRINGE_FORMAT:
        raise InputFormatError(
            f"format is {doc.get('format')!r}, not {FRINGE_FORMAT!r}",
            where=where(None, "format"),
            fix=f'start the file with format = "{FRINGE_FORMAT}"',
        )
    version = doc.get("version", FRINGE_VERSION)
    if version != FRINGE_VERSION:
        raise InputFormatError(f"version {version!r} is not known", where=where(None, "version"),
                               fix=f"write version = {FRINGE_VERSION}")
    _unknown(doc, _TOP, lambda k: where(None, k), "the file")
    for name in ("part", "light"):
        if not isinstance(doc.get(name), dict):
            raise InputFormatError(f"the table [{name}] is missing", where=str(path), fix=f"add [{name}] (see docs/optics-and-spheres.md)")

    part = doc["part"]
    _unknown(part, _PART, lambda k: where("part", k), "[part]")
    shape = str(part.get("shape", "rect")).strip().lower()
    if shape in ("round", "disc", "disk"):
        shape = "circle"
    if shape not in ("rect", "circle"):
        raise InputValueError(f"shape = {part.get('shape')!r}", where=where("part", "shape"), fix="write rect or circle")
    if shape == "circle":
        key = "diameter_mm" if "diameter_mm" in part else "length_mm"
        if key not in part:
            raise InputFormatError("a round part needs diameter_mm", where=where("part"), fix="add diameter_mm = ...")
        d = _number(part[key], where("part", key), key, positive=True, allow_zero=False)
        length = width = d
    else:
        for key in ("length_mm", "width_mm"):
            if key not in part:
                raise InputFormatError(f"[part] needs {key}", where=where("part"), fix=f"add {key} = ... (mm)")
        length = _number(part["length_mm"], where("part", "length_mm"), "length_mm", positive=True, allow_zero=False)
        width = _number(part["width_mm"], where("part", "width_mm"), "width_mm", positive=True, allow_zero=False)

    light = doc["light"]
    _unknown(light, _LIGHT, lambda k: where("light", k), "[light]")
    if ("source" in light) == ("wavelength_nm" in light):
        raise InputFormatError("[light] needs either source or wavelength_nm", where=where("light"),
                               fix='write source = "helium" (or sodium, mercury-green, hene), or wavelength_nm = ...')
    if "source" in light:
        wl = wavelength_of(light["source"], where=where("light", "source"))
        light_name = str(light["source"]).strip().lower()
    else:
        wl = _number(light["wavelength_nm"], where("light", "wavelength_nm"), "wavelength_nm", positive=True, allow_zero=False)
        if not 200.0 <= wl <= 2000.0:
            raise InputValueError(f"wavelength_nm = {wl:g} is outside 200-2000 nm", where=where("light", "wavelength_nm"),
                                  fix="give the wavelength in nm (helium 587.56)")
        light_name = "stated wavelength"

    flat = doc.get("flat", {})
    if not isinstance(flat, dict):
        raise InputFormatError("flat must be a table [flat]", where=where(None, "flat"))
    _unknown(flat, _FLAT, lambda k: where("flat", k), "[flat]")
    flat_nm = 0.0
    if "flatness_nm" in flat and "flatness_fringes" in flat:
        raise InputValueError("[flat] gives both flatness_nm and flatness_fringes", where=where("flat"), fix="keep one")
    if "flatness_nm" in flat:
        flat_nm = _number(flat["flatness_nm"], where("flat", "flatness_nm"), "flatness_nm", positive=True)
    elif "flatness_fringes" in flat:
        flat_nm = _number(flat["flatness_fringes"], where("flat", "flatness_fringes"), "flatness_fringes", positive=True) * wl / 2

    raw = doc.get("reading")
    if not isinstance(raw, list) or not raw:
        raise InputFormatError("no [[reading]]", where=str(path), fix="add at least one [[reading]] (see docs/optics-and-spheres.md)")
    readings = []
    for i, r in enumerate(raw):
        readings.append(_reading(r, i, where, length, width, wl, FringeReading))
    return FringeReadings(
        wavelength_nm=wl, light=light_name, shape=shape, length_mm=length, width_mm=width,
        readings=tuple(readings), flat_flatness_nm=flat_nm,
        ident=str(part.get("ident", "")), description=str(part.get("description", "")),
    )


def _direction(v, w):
    if v is None:
        return None
    if isinstance(v, str):
        key = v.strip().lower()
        if key in _DIRECTIONS:
            return _DIRECTIONS[key]
        raise InputValueError(f"along = {v!r}", where=w, fix="write x, y, diagonal, antidiagonal, or an angle in degrees from x")
    return _number(v, w, "along")


def _reading(r, i, where, length, width, wl, FringeReading):
    def w(key=None):
        return where("reading", key, i)

    if not isinstance(r, dict):
        raise InputFormatError("a reading must be a table [[reading]]", where=w())
    _unknown(r, _READING, w, f"reading {i + 1}")
    label = f"reading {i + 1}"
    has_bend = any(k in r for k in ("bend_fringes", "bend_mm"))
    has_rings = "rings" in r
    if has_bend == has_rings:
        raise InputFormatError(
            "a reading gives either a bend (bend_fringes) or a ring count (rings)", where=w(),
            fix="write bend_fringes with bows, or rings with contact",
        )
    extra = {}  # without u_fringes, the reading keeps FringeReading's default (the eye's limit)
    if "u_fringes" in r:
        extra["u_fringes"] = _number(r["u_fringes"], w("u_fringes"), "u_fringes", positive=True, allow_zero=False)
    irr = _number(r.get("irregularity_fringes", 0.0), w("irregularity_fringes"), "irregularity_fringes", positive=True)
    line = None
    if "length_mm" in r:
        line = _number(r["length_mm"], w("length_mm"), "length_mm", positive=True, allow_zero=False)
    if "fringes_across" in r:
        _number(r["fringes_across"], w("fringes_across"), "fringes_across", positive=True)
    if has_bend:
        if "along" not in r:
            raise InputFormatError("a bend needs the direction of the fringe", where=w(), fix='add along = "x" (or y, diagonal, degrees)')
        d = _direction(r["along"], w("along"))
        if "bend_fringes" in r and "bend_mm" in r:
            raise InputValueError("both bend_fringes and bend_mm", where=w("bend_mm"), fix="keep one")
        if "bend_fringes" in r:
            b = _number(r["bend_fringes"], w("bend_fringes"), "bend_fringes", positive=True)
        else:
            bm = _number(r["bend_mm"], w("bend_mm"), "bend_mm", positive=True)
            if "spacing_mm" not in r:
                raise InputFormatError("bend_mm needs spacing_mm (the distance between fringes)", where=w("bend_mm"),
                                       fix="add spacing_mm, or write the bend in fringes (bend_fringes)")
            sp = _number(r["spacing_mm"], w("spacing_mm"), "spacing_mm", positive=True, allow_zero=False)
            b = bm / sp
        if b > 5:
            raise InputValueError(f"a bend of {b:g} fringes", where=w("bend_fringes"),
                                  fix="a bend is a fraction of the fringe spacing; for this much form count rings instead")
        if ("bows" in r) == ("form" in r) and b > 0:
            raise InputFormatError("a bend needs its sense: bows (away or toward the contact edge) or form (convex or concave)",
                                   where=w(), fix='add bows = "away" (convex) or bows = "toward" (concave)')
        sense = 1.0
        if "bows" in r:
            word = str(r["bows"]).strip().lower()
            if word not in ("away", "toward", "towards"):
                raise InputValueError(f"bows = {r['bows']!r}", where=w("bows"), fix="write away (from the contact edge) or toward")
            sense = 1.0 if word == "away" else -1.0
        elif "form" in r:
            word = str(r["form"]).strip().lower()
            if word not in ("convex", "concave"):
                raise InputValueError(f"form = {r['form']!r}", where=w("form"), fix="write convex or concave")
            sense = 1.0 if word == "convex" else -1.0
        return FringeReading(d, sense * b, "bend", line, irr, label=label, **extra)
    n = _number(r["rings"], w("rings"), "rings", positive=True)
    word = str(r.get("contact", "")).strip().lower()
    if word not in ("centre", "center", "rim", "edge"):
        raise InputValueError(f"contact = {r.get('contact')!r}", where=w("contact") if "contact" in r else w(),
                              fix="write contact = \"centre\" (the flat touches in the middle: convex) or \"rim\" (concave)")
    sense = 1.0 if word in ("centre", "center") else -1.0
    d = _direction(r.get("along"), w("along"))
    return FringeReading(d, sense * n, "rings", line, irr, label=label, **extra)
