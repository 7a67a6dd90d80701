"""A sweep of malformed and hostile input FILES (beside tests/cli/test_hostile_inputs.py, which sweeps the survey
TOML, the height-map CSV and the command-line options).

The files attacked here are the other kinds flatcheck reads: the bearing description, the guideway body and its
carriage, fringe readings and fringe photographs, sphere and seat point files, X3P files, a lab's uncertainty
defaults, the register's limits table and the register database itself, survey files in other encodings, and
special files (empty files, folders, devices, FIFOs, symlink loops, names with spaces and brackets).

Every bad file must end the same way: exit status 2, exactly one line on standard error that starts
``flatcheck: error:`` and contains the words listed for it (the file and the field as the person wrote them),
no traceback, no warning, no input file changed, no earlier output destroyed, and no hang. The cases are
generated from families (a field of a file times a list of bad values) and run in-process (the ``cli`` fixture)
under a time limit, so a hang fails the test instead of stopping the run.
"""

from __future__ import annotations

import hashlib
import io
import os
import re
import shutil
import sqlite3
import struct
import time
import zipfile
import zlib
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
SAMPLES = ROOT / "sample_readings"
P3 = SAMPLES / "plate-KY-P3-2024-03-11.toml"
PAD = SAMPLES / "pad-KY-B4-heights.csv"
G1 = SAMPLES / "guideway-KY-G1.toml"
G2 = SAMPLES / "guideway-KY-G2"
TANDEM = SAMPLES / "bearing_tandem_slide.toml"
FRINGES = SAMPLES / "padface-KY-B4-fringes.toml"
PHOTO = SAMPLES / "padface-KY-B4-fringes.png"
BALL = SAMPLES / "ball-KY-S2-points.csv"
SEAT = SAMPLES / "seat-KY-S2-points.csv"
PHOTO_ARGS = ("--wavelength-nm", "587.56", "--pixel-mm", "0.25", "--contact-edge", "left")
BIG_INT = "9" * 401  # too large for any float (about 1.8e308)

#: Longest a single refusal may take (seconds): every one is found before any real work is done.
TIME_LIMIT_S = 20.0
ROOT_USER = hasattr(os, "geteuid") and os.geteuid() == 0  # permissions do not stop root from reading

UNCERTAINTY_DEFAULTS = """format = "flatcheck-uncertainty-defaults"
version = 1

[all]
temperature_difference_u_k = 0.05
expansion_coefficient_per_k = 6.5e-6

[autocollimator]
unit = "arcsec"
reading_uncertainty = 0.08
resolution = 0.05
scale_uncertainty_rel = 0.003
foot_spacing_uncertainty_mm = 0.02
"""

LIMITS = """format = "flatcheck-limits"
version = 1
lab = "KY tool room"

[[table]]
standard = "DIN 876"
source = "DIN 876-1 lab copy 2"
unit = "um"
length_unit = "mm"
length = "longer-side"
grades = ["00", "0", "1", "2"]
round_to = 0.5

[table.formula]
"00" = { constant = 2.0, linear = 0.002 }
"0" = { constant = 4.0, linear = 0.004 }

[[table.size]]
size = [1000, 630]
limits = { "00" = 4.0, "0" = 8.0 }
"""


# ------------------------------------------------------------------------------------------- editing TOML
def _set(text: str, section: str | None, key: str, value: str | None, index: int = 0) -> str:
    """``text`` with ``key = value`` in the ``index``-th ``section`` (a header line such as ``[bearing]`` or
    ``[[carriage.pad]]``; None: the top of the file): the key's line replaced, or added after the header.
    ``value`` None removes the key."""
    lines = text.split("\n")
    if section is None:
        start = 0
    else:
        heads = [i for i, ln in enumerate(lines) if ln.strip().split("#")[0].strip() == section]
        assert len(heads) > index, (section, index)
        start = heads[index] + 1
    end = next((i for i in range(start, len(lines)) if lines[i].lstrip().startswith("[")), len(lines))
    pat = re.compile(r"^\s*" + re.escape(key) + r"\s*=")
    for i in range(start, end):
        if pat.match(lines[i]):
            if value is None:
                del lines[i]
            else:
                lines[i] = f"{key} = {value}"
            return "\n".join(lines)
    assert value is not None, (section, key)
    lines.insert(start, f"{key} = {value}")
    return "\n".join(lines)


#: Bad values of a number: (name, TOML text). Positive-only numbers also get "zero" and "negative".
NUMBER_VALUES = {
    "huge integer": BIG_INT,
    "1e300": "1e300",
    "-1e300": "-1e300",
    "nan": "nan",
    "inf": "inf",
    "text": '"ten"',
    "true": "true",
    "array": "[1, 2]",
    "table": "{ a = 1 }",
}
POSITIVE_VALUES = {**NUMBER_VALUES, "zero": "0", "negative": "-1"}
TEXT_VALUES = {"number": "5", "true": "true", "array": '["a", "b"]', "table": "{ a = 1 }"}


def _value_cases(family, base, fields, make_argv, tmp, suffix=".toml"):
    """One case per field and bad value: (id, argv, words)."""
    out = []
    for section, key, values, words, index in fields:
        for vname, value in values.items():
            slug = re.sub(r"[^A-Za-z0-9]+", "-", f"{family}-{section or 'top'}-{index}-{key}-{vname}")
            path = tmp / f"{slug}{suffix}"
            path.write_text(_set(base, section, key, value, index), encoding="utf-8")
            out.append((f"{family} {section or ''}{'#' + str(index) if index else ''} {key}={vname}",
                        make_argv(path), words or (key,)))
    return out


def _structure_cases(family, variants, make_argv, tmp, suffix=".toml"):
    """One case per whole-file variant: {name: (text, words)}."""
    out = []
    for name, (text, words) in variants.items():
        path = tmp / (re.sub(r"[^A-Za-z0-9]+", "-", f"{family}-{name}") + suffix)
        path.write_text(text, encoding="utf-8")
        out.append((f"{family}: {name}", make_argv(path), words))
    return out


# ------------------------------------------------------------------------------------------- the families
def _bearing_cases(tmp):
    base = TANDEM.read_text(encoding="utf-8")
    argv = lambda p: ("bearing", G1, "--bearing", p)  # noqa: E731
    P = "[[carriage.pad]]"
    fields = [
        ("[bearing]", "gap_um", POSITIVE_VALUES, (), 0),
        ("[bearing]", "gap_fraction", {**POSITIVE_VALUES, "two": "2"}, (), 0),
        ("[bearing]", "marginal_from", {**POSITIVE_VALUES, "two": "2"}, (), 0),
        ("[bearing]", "pad", {**TEXT_VALUES, "0x0": '"0x0"', "-1x5": '"-1x5"', "nanx5": '"nanx5"',
                              "1e300x1": '"1e300x1"', "abc": '"abc"', "d0": '"d0"', "huge": f'"{BIG_INT}x5"'}, (), 0),
        ("[bearing]", "kind", {**TEXT_VALUES, "magnetic": '"magnetic"'}, (), 0),
        ("[bearing]", "label", TEXT_VALUES, (), 0),
        ("[carriage]", "face", TEXT_VALUES, (), 0),
        ("[carriage]", "y_mm", NUMBER_VALUES, (), 0),
        ("[carriage]", "travel_start_mm", NUMBER_VALUES, (), 0),
        ("[carriage]", "travel_end_mm", NUMBER_VALUES, (), 0),
        ("[carriage]", "step_mm", POSITIVE_VALUES, (), 0),
        (P, "along_mm", NUMBER_VALUES, (), 0),
        (P, "across_mm", NUMBER_VALUES, (), 1),
        (P, "stiffness", POSITIVE_VALUES, (), 0),
        (P, "name", TEXT_VALUES, (), 0),
        (P, "gap_um", POSITIVE_VALUES, (), 1),
        (P, "pad", {"0x0": '"0x0"', "number": "80"}, (), 2),
        ("[budget]", "straightness_um", POSITIVE_VALUES, (), 0),
        ("[budget]", "pitch_arcsec", POSITIVE_VALUES, (), 0),
        ("[budget]", "roll_arcsec", POSITIVE_VALUES, (), 0),
    ]
    cases = _value_cases("bearing", base, fields, argv, tmp)
    variants = {
        "no [bearing]": (base.replace("[bearing]", "[bearings]"), ("bearings",)),
        "bearing a number": ("bearing = 5\n", ("bearing",)),
        "carriage a number": ('carriage = 5\n[bearing]\npad = "80x60"\ngap_um = 8\n', ("carriage",)),
        "pads a number": ('[bearing]\npad = "80x60"\ngap_um = 8\n[carriage]\npad = 5\n', ("pad",)),
        "a pad a number": ('[bearing]\npad = "80x60"\ngap_um = 8\n[carriage]\npad = [1, 2]\n', ("pad",)),
        "budget a list": ('budget = [1]\n[bearing]\npad = "80x60"\ngap_um = 8\n', ("budget",)),
        "no gap": (_set(base, "[bearing]", "gap_um", None), ("gap",)),
        "no pad size": (_set(base, "[bearing]", "pad", None), ("pad",)),
        "unknown key": (_set(base, "[bearing]", "gap_mm", "8"), ("gap_mm",)),
        "unknown pad key": (_set(base, P, "along_in", "8"), ("along_in",)),
        "duplicated key": (_set(base, "[bearing]", "label", '"x"\nlabel = "y"'), ("TOML",)),
        "twice the same pad name": (_set(base, P, "name", '"front"', 1), ("front",)),
        "travel backwards": (_set(_set(base, "[carriage]", "travel_start_mm", "800"), "[carriage]",
                                  "travel_end_mm", "100"), ("travel",)),
        "deep nesting": ("x = " + "[" * 5000 + "]" * 5000 + "\n", ("nested",)),
    }
    return cases + _structure_cases("bearing", variants, argv, tmp)


def _guideway_cases(tmp):
    folder = tmp / "G2 copy [beam]"
    shutil.copytree(G2, folder)
    body = (folder / "body.toml").read_text(encoding="utf-8")
    carriage = (folder / "carriage.toml").read_text(encoding="utf-8")
    body_argv = lambda p: ("guideway", p)  # noqa: E731
    car_argv = lambda p: ("guideway", folder / "body.toml", "--carriage", p)  # noqa: E731
    P = "[[carriage.pad]]"
    cfields = [
        ("[bearing]", "gap_um", POSITIVE_VALUES, (), 0),
        ("[bearing]", "pad", {"0x0": '"0x0"', "abc": '"abc"', "number": "80"}, (), 0),
        ("[carriage]", "load_n", NUMBER_VALUES, (), 0),
        ("[carriage]", "pivot", {"number": "1", "text": '"yes"', "array": "[true]"}, (), 0),
        (P, "along_mm", NUMBER_VALUES, (), 0),
        (P, "across_mm", NUMBER_VALUES, (), 0),
        (P, "face", {**TEXT_VALUES, "no such face": '"bottom"'}, (), 4),
        ("[film]", "supply_kpa", POSITIVE_VALUES, (), 0),
        ("[film]", "permeability_m2", POSITIVE_VALUES, (), 0),
        ("[film]", "layer_mm", POSITIVE_VALUES, (), 0),
        ("[budget]", "yaw_arcsec", POSITIVE_VALUES, (), 0),
        ("[budget]", "horizontal_straightness_um", POSITIVE_VALUES, (), 0),
    ]
    cases = []
    for c in _value_cases("carriage", carriage, cfields, car_argv, folder):
        cases.append(c)
    bfields = [
        ("[guideway]", "length_mm", POSITIVE_VALUES, (), 0),
        ("[guideway]", "datum", {**TEXT_VALUES, "no such face": '"bottom"'}, (), 0),
        ("[guideway]", "ident", TEXT_VALUES, (), 0),
        ("[[face]]", "survey", {**TEXT_VALUES, "missing file": '"nowhere.csv"', "a folder": '"."',
                                "the body itself": '"body.toml"', "/dev/zero": '"/dev/zero"'}, (), 1),
        ("[[face]]", "normal", {**TEXT_VALUES, "+w": '"+w"'}, (), 2),
        ("[[face]]", "name", TEXT_VALUES, (), 3),
        ("[[thickness]]", "x_mm", {**NUMBER_VALUES, "short": "[100, 350]", "nan in a list": "[nan, 1, 2, 3, 4, 5, 6, 7, 8, 9]",
                                   "1e300 in a list": "[1e300, 1, 2, 3, 4, 5, 6, 7, 8, 9]"}, (), 0),
        ("[[thickness]]", "value_um", {**NUMBER_VALUES, "1e300 in a list": "[1e300, 1, 1, 1, 1, 1]"},
         (), 1),
        ("[[thickness]]", "faces", {**TEXT_VALUES, "one face": '["top"]', "unknown face": '["top", "bottom"]'}, (), 0),
        ("[[squareness]]", "value_arcsec", {**{k: v for k, v in NUMBER_VALUES.items() if k != "array"},
                                            "1e300 in a list": "[1e300, 1]", "three for two places": "[1, 2, 3]"},
         (), 0),
        ("[[twist]]", "value_um_per_m", {"huge integer": BIG_INT, "nan": "nan", "text": '"ten"',
                                         "short": "[1.0, 2.0]"}, (), 0),
    ]
    cases += _value_cases("body", body, bfields, body_argv, folder)
    variants = {
        "format": (_set(body, None, "format", '"flatcheck-survey"'), ("format",)),
        "version": (_set(body, None, "version", "7"), ("version",)),
        "version huge": (_set(body, None, "version", BIG_INT), ("version",)),
        "no faces": (re.sub(r"\[\[face\]\][^\[]*", "", body), ("face",)),
        "face a number": (_set(body, None, "face", "5").replace("[[face]]", "[[other]]"), ("face",)),
        "unknown key": (_set(body, "[guideway]", "lenght_mm", "5"), ("lenght_mm",)),
        "duplicated key": (_set(body, "[guideway]", "ident", '"a"\nident = "b"'), ("TOML",)),
        "deep nesting": ("x = " + "[" * 5000 + "]" * 5000 + "\n", ("nested",)),
    }
    cases += _structure_cases("body", variants, body_argv, folder)
    cvariants = {
        "unknown key": (_set(carriage, "[film]", "supply_psi", "5"), ("supply_psi",)),
        "no bearing": (carriage.replace("[bearing]", "[bearin]"), ("bearin",)),
        "film a number": (_set(carriage.replace("[film]", "[film_old]"), None, "film", "5"), ("film",)),
        "duplicated key": (_set(carriage, "[film]", "layer_mm", "5\nlayer_mm = 6"), ("TOML",)),
    }
    cases += _structure_cases("carriage", cvariants, car_argv, folder)
    # a face survey that is itself broken: the body names the file
    for name, data, words in (("empty", b"", ("empty",)), ("binary", b"\x00\xff" * 40, ("binary",)),
                              ("header only", b"x_mm,y_mm,height_um\n", ("points",))):
        (folder / f"broken-{name.replace(' ', '-')}.csv").write_bytes(data)
        text = body.replace('survey = "underside.csv"', f'survey = "broken-{name.replace(" ", "-")}.csv"')
        p = folder / f"body-broken-survey-{name.replace(' ', '-')}.toml"
        p.write_text(text, encoding="utf-8")
        cases.append((f"body: face survey {name}", body_argv(p), ("broken-", *words)))
    return cases


def _fringe_cases(tmp):
    base = FRINGES.read_text(encoding="utf-8")
    argv = lambda p: ("fringes", p)  # noqa: E731
    R = "[[reading]]"
    fields = [
        ("[part]", "length_mm", POSITIVE_VALUES, (), 0),
        ("[part]", "width_mm", POSITIVE_VALUES, (), 0),
        ("[part]", "shape", {**TEXT_VALUES, "hexagon": '"hexagon"'}, (), 0),
        ("[light]", "source", {**TEXT_VALUES, "candle": '"candle"'}, (), 0),
        ("[flat]", "flatness_nm", {**NUMBER_VALUES, "negative": "-1"}, (), 0),
        (R, "bend_fringes", {**NUMBER_VALUES, "negative": "-1", "six": "6"}, (), 0),
        (R, "along", {"nan": "nan", "inf": "inf", "1e300": "1e300", "huge integer": BIG_INT, "word": '"north"',
                      "array": "[1]", "true": "true"}, (), 1),
        (R, "bows", {"number": "5", "word": '"up"', "array": '["away"]'}, (), 0),
        (R, "fringes_across", {"1e300": "1e300", "nan": "nan", "negative": "-1", "text": '"ten"'}, (), 0),
        (R, "irregularity_fringes", {"1e300": "1e300", "nan": "nan", "negative": "-1", "text": '"x"'}, (), 2),
        (R, "u_fringes", {"1e300": "1e300", "nan": "nan", "zero": "0", "negative": "-1", "text": '"x"'}, (), 0),
        (R, "length_mm", POSITIVE_VALUES, (), 1),
    ]
    cases = _value_cases("fringes", base, fields, argv, tmp)
    light = lambda v: base.replace('source = "helium"', f"wavelength_nm = {v}")  # noqa: E731
    ring = "\n[[reading]]\nrings = {r}\ncontact = {c}\n"
    variants = {
        "wavelength 1e300": (light("1e300"), ("wavelength_nm",)),
        "wavelength nan": (light("nan"), ("wavelength_nm",)),
        "wavelength huge integer": (light(BIG_INT), ("wavelength_nm",)),
        "wavelength text": (light('"red"'), ("wavelength_nm",)),
        "wavelength in metres": (light("5.8756e-7"), ("wavelength_nm",)),
        "rings 1e300": (base + ring.format(r="1e300", c='"centre"'), ("rings",)),
        "rings nan": (base + ring.format(r="nan", c='"centre"'), ("rings",)),
        "rings text": (base + ring.format(r='"two"', c='"centre"'), ("rings",)),
        "rings negative": (base + ring.format(r="-2", c='"centre"'), ("rings",)),
        "contact a number": (base + ring.format(r="2", c="1"), ("contact",)),
        "contact a word": (base + ring.format(r="2", c='"side"'), ("contact",)),
        "circle diameter 1e300": (_set(_set(base, "[part]", "shape", '"circle"'), "[part]", "diameter_mm", "1e300"),
                                  ("diameter_mm",)),
        "circle diameter zero": (_set(_set(base, "[part]", "shape", '"circle"'), "[part]", "diameter_mm", "0"),
                                 ("diameter_mm",)),
        "bend_mm without spacing": (_set(_set(base, R, "bend_fringes", None), R, "bend_mm", "1.0"), ("spacing_mm",)),
        "spacing 1e-300": (_set(_set(_set(base, R, "bend_fringes", None), R, "bend_mm", "1.0"), R, "spacing_mm",
                                "1e-300"), ("spacing_mm", "at least 0.1")),
        "format": (_set(base, None, "format", '"flatcheck-survey"'), ("format",)),
        "version": (_set(base, None, "version", "2"), ("version",)),
        "version huge": (_set(base, None, "version", BIG_INT), ("version",)),
        "no readings": (base.split("[[reading]]")[0], ("reading",)),
        "reading a number": (base.split("[[reading]]")[0].replace("[part]", "reading = 5\n[part]"), ("reading",)),
        "no part": (base.replace("[part]", "[parts]"), ("part",)),
        "part a number": (base.replace("[part]", "[old]").replace('version = 1', "version = 1\npart = 5"), ("part",)),
        "light a list": (base.replace("[light]", "[old]").replace('version = 1', "version = 1\nlight = [1]"),
                         ("light",)),
        "flat a number": (base.replace("[flat]", "[old]").replace('version = 1', "version = 1\nflat = 5"),
                          ("flat",)),
        "unknown key": (_set(base, "[part]", "length_in", "3"), ("length_in",)),
        "duplicated key": (_set(base, "[part]", "ident", '"a"\nident = "b"'), ("TOML",)),
        "deep nesting": ('format = "flatcheck-fringes"\nx = ' + "[" * 5000 + "]" * 5000 + "\n", ("nested",)),
        "both bend and rings": (_set(base, R, "rings", "2"), ("reading 1",)),
    }
    return cases + _structure_cases("fringes", variants, argv, tmp)


def _png(width: int, height: int, bit_depth: int = 8, colour: int = 0, data: bytes | None = None) -> bytes:
    """A PNG built by hand (any declared size; ``data`` the raw IDAT payload, default a valid grey image)."""
    def chunk(kind: bytes, body: bytes) -> bytes:
        return struct.pack(">I", len(body)) + kind + body + struct.pack(">I", zlib.crc32(kind + body) & 0xFFFFFFFF)

    ihdr = struct.pack(">IIBBBBB", width, height, bit_depth, colour, 0, 0, 0)
    if data is None:
        row = b"\x00" + bytes((x * 37) % 256 for x in range(width * max(1, bit_depth // 8)))
        data = zlib.compress(row * height)
    return b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", ihdr) + chunk(b"IDAT", data) + chunk(b"IEND", b"")


def _photo_cases(tmp):
    from PIL import Image

    photo = PHOTO.read_bytes()
    argv = lambda p: ("fringes", p, *PHOTO_ARGS)  # noqa: E731
    out = []

    def add(name, data, words, suffix=".png", args=None):
        p = tmp / (re.sub(r"[^A-Za-z0-9]+", "-", f"photo-{name}") + suffix)
        p.write_bytes(data)
        out.append((f"photo: {name}", args(p) if args else argv(p), words))

    add("text named .png", b"x_mm,y_mm,height_um\n0,0,1\n", ("PNG",))
    add("cut short", photo[:3000], ("damaged",))
    add("only the signature", photo[:8], ("PNG",))
    add("declared 100000 x 100000", _png(100_000, 100_000, data=zlib.compress(b"\x00" * 100)), ("too large",))
    add("declared 1 x 2^31", _png(1, 2**31 - 1, data=zlib.compress(b"\x00" * 10)), ("too large",))
    add("a zip bomb of an IDAT", _png(7000, 7000, data=zlib.compress(b"\x00" * 1_000_000)), ("damaged",))
    add("bad CRC", photo[:30] + bytes([photo[30] ^ 0xFF]) + photo[31:], ("PNG",))
    add("1 x 1 pixel", _png(1, 1), ("pixel",))
    buf = io.BytesIO()
    Image.new("RGB", (64, 64), (10, 200, 30)).save(buf, "GIF")
    add("a GIF named .png", buf.getvalue(), ("GIF",))
    buf = io.BytesIO()
    Image.new("F", (64, 64), 0.5).save(buf, "TIFF")
    add("a floating-point TIFF", buf.getvalue(), ("floating-point",), suffix=".tif")
    buf = io.BytesIO()
    Image.new("L", (64, 64), 0).save(buf, "PNG")
    add("all black", buf.getvalue(), ("flat tone",))
    buf = io.BytesIO()
    Image.new("L", (64, 64), 255).save(buf, "PNG")
    add("all white", buf.getvalue(), ("flat tone",))
    # a mask that does not fit the photograph
    buf = io.BytesIO()
    Image.new("L", (10, 10), 255).save(buf, "PNG")
    add("mask of another size", buf.getvalue(), ("--mask",), args=lambda p: (*argv(PHOTO), "--mask", p))
    add("mask not a picture", b"hello", ("--mask",), args=lambda p: (*argv(PHOTO), "--mask", p))
    return out


def _sphere_cases(tmp):
    argv = lambda p: ("sphere", p, "--kind", "ball")  # noqa: E731
    ball = BALL.read_text(encoding="utf-8").splitlines()
    head, first, rest = ball[:3], ball[3], ball[4:]
    out = []

    def add(name, text, words, args=None):
        p = tmp / (re.sub(r"[^A-Za-z0-9]+", "-", f"points-{name}") + ".csv")
        p.write_text(text, encoding="utf-8")
        out.append((f"sphere: {name}", args(p) if args else argv(p), words))

    for col, i in (("x_mm", 0), ("y_mm", 1), ("z_mm", 2)):
        for vname, v in (("1e300", "1e300"), ("-1e300", "-1e300"), ("nan", "nan"), ("inf", "inf"), ("text", "ten"),
                         ("huge integer", BIG_INT), ("1e15", "1e15"), ("empty", ""), ("digit separator", "1_000")):
            fields = first.split(",")
            fields[i] = v
            add(f"{col} {vname}", "\n".join([*head, ",".join(fields), *rest]) + "\n", (col,))
    pts = "\n".join(head) + "\n"
    add("no header", "\n".join([first, *rest]) + "\n", ("header",))
    add("header in other units", "x_in,y_in,z_in\n" + "\n".join(rest) + "\n", ("header",))
    add("two fields", "\n".join([*head, "1,2", *rest]) + "\n", ("line 4",))
    add("semicolons", "\n".join([*head, first.replace(",", ";"), *rest]) + "\n", ("line 4",))
    add("four points", pts + "\n".join(rest[:4]) + "\n", ("point",))
    add("one point five times", pts + (first + "\n") * 5, ("point",))
    add("points on a line", pts + "".join(f"{k},0,0\n" for k in range(20)), ("point",))
    add("points on a plane", pts + "".join(f"{k % 5},{k // 5},0\n" for k in range(25)), ("point",))
    add("points on a circle", pts + "".join(f"{__import__('math').cos(k / 3)},{__import__('math').sin(k / 3)},0\n"
                                            for k in range(20)), ("point",))
    add("a point 1e15 away", "\n".join([*head, *rest, "1e15,0,0"]) + "\n", ("x_mm",))
    add("mate broken", "x_mm,y_mm,z_mm\n1,2\n", ("line 2",), args=lambda p: ("sphere", BALL, "--kind", "ball",
                                                                            "--mate", p))
    add("mate a height map", PAD.read_text(encoding="utf-8"), ("header",),
        args=lambda p: ("sphere", BALL, "--kind", "ball", "--mate", p))
    return out


def _x3p_bytes(main_xml: bytes, files: dict | None = None) -> bytes:
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w", zipfile.ZIP_DEFLATED) as z:
        z.writestr("main.xml", main_xml)
        for name, data in (files or {}).items():
            z.writestr(name, data)
    return buf.getvalue()


def _x3p_cases(tmp, good_x3p: Path):
    out = []
    good = good_x3p.read_bytes()
    with zipfile.ZipFile(good_x3p) as z:
        names = z.namelist()
        main = re.sub(r"<MD5ChecksumPointData>[^<]*</MD5ChecksumPointData>", "",
                      z.read("main.xml").decode("utf-8"))  # without checksums: the damage itself is read
        others = {n: z.read(n) for n in names if n != "main.xml" and not n.endswith("/")}

    def add(name, data, words, command=("reduce",)):
        p = tmp / (re.sub(r"[^A-Za-z0-9]+", "-", f"x3p-{name}") + ".x3p")
        p.write_bytes(data)
        out.append((f"x3p {command[0]}: {name}", (command[0], p, *command[1:]), words))

    def edit(tag, value, count=1):
        new, n = re.subn(rf"<{tag}>[^<]*</{tag}>", f"<{tag}>{value}</{tag}>", main, count=count)
        assert n, tag
        return new.encode()

    no_md5 = {k: v for k, v in others.items() if not k.endswith("md5") and "checksum" not in k.lower()}
    add("not a zip", b"hello, this is not an X3P file\n" * 10, ("X3P",))
    add("empty zip", _x3p_bytes_empty(), ("X3P",))
    add("zip without main.xml", _zip({"other.xml": b"<a/>"}), ("X3P",))
    add("main.xml not XML", _zip({"main.xml": b"<ISO5436_2><Record1>", **no_md5}), ("X3P",))
    add("main.xml empty", _zip({"main.xml": b"", **no_md5}), ("X3P",))
    add("main.xml binary", _zip({"main.xml": b"\x00\xff" * 100, **no_md5}), ("X3P",))
    add("entity expansion", _zip({"main.xml": b'<?xml version="1.0"?><!DOCTYPE a [<!ENTITY b "' + b"x" * 100
                                  + b'"><!ENTITY c "&b;&b;&b;&b;&b;&b;&b;&b;&b;&b;">]><a>&c;</a>', **no_md5}),
        ("X3P",))
    add("main.xml a zip bomb", _zip({"main.xml": b"<a>" + b" " * (100 << 20) + b"</a>", **no_md5}), ("MiB",))
    add("cut short", good[: len(good) // 2], ("X3P",))
    add("last byte only", good[-22:], ("X3P",))
    for tag, value in (("SizeX", "1000000000"), ("SizeY", "1000000000"), ("SizeX", "0"), ("SizeX", "-5"),
                       ("SizeX", "abc"), ("SizeX", BIG_INT), ("SizeZ", "7")):
        if f"<{tag}>" in main:
            add(f"{tag} {value[:12]}", _zip({"main.xml": edit(tag, value), **no_md5}), ("X3P",))
    for tag, value in (("Increment", "0"), ("Increment", "nan"), ("Increment", "1e300"), ("Increment", "-1e300"),
                       ("Offset", "1e300"), ("Offset", "nan")):
        if f"<{tag}>" in main:
            add(f"{tag} {value}", _zip({"main.xml": edit(tag, value), **no_md5}), ("X3P",))
    data_names = [n for n in no_md5 if n.startswith("bindata")]
    for n in data_names[:1]:
        add("binary data cut short", _zip({"main.xml": main.encode(), **{**no_md5, n: no_md5[n][: len(no_md5[n]) // 3]}}),
            ("X3P",))
        add("binary data missing", _zip({"main.xml": main.encode(), **{k: v for k, v in no_md5.items() if k != n}}),
            ("X3P",))
        add("binary data all NaN", _zip({"main.xml": main.encode(),
                                         **{**no_md5, n: b"\x00\x00\x00\x00\x00\x00\xf8\x7f" * (len(no_md5[n]) // 8)}}),
            ("point",))
        add("binary data 1e300", _zip({"main.xml": main.encode(),
                                       **{**no_md5, n: struct.pack("<d", 1e300) * (len(no_md5[n]) // 8)}}),
            ("height_um",))
    for value in ("1e300", "nan", "-5", "ten"):
        add(f"comment length_mm = {value}", _zip({"main.xml": re.sub(r"<Comment>[^<]*</Comment>",
                                                                     f"<Comment>length_mm = {value}</Comment>",
                                                                     main).encode(), **no_md5}), ("length_mm",))
    add("checksum does not match", _tamper(good_x3p), ("checksum",))
    add("a survey TOML named .x3p", P3.read_bytes(), ("X3P",))
    add("not a zip, for grade", b"PK\x03\x04" + b"\x00" * 200, ("X3P",),
        command=("grade", "--standard", "din-876", "--no-uncertainty"))
    return out


def _zip(files: dict) -> bytes:
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w", zipfile.ZIP_DEFLATED) as z:
        for name, data in files.items():
            z.writestr(name, data)
    return buf.getvalue()


def _x3p_bytes_empty() -> bytes:
    return _zip({})


def _tamper(good_x3p: Path) -> bytes:
    """The X3P file with one height changed and its checksum left as it was."""
    with zipfile.ZipFile(good_x3p) as z:
        files = {n: z.read(n) for n in z.namelist()}
    for n in files:
        if n.startswith("bindata") and len(files[n]) >= 16:
            b = bytearray(files[n])
            b[8:16] = struct.pack("<d", 1.0e-6)
            files[n] = bytes(b)
            break
    return _zip(files)


def _defaults_cases(tmp):
    base = UNCERTAINTY_DEFAULTS
    argv = lambda p: ("reduce", P3, "--uncertainty-defaults", p)  # noqa: E731
    fields = [
        ("[all]", "temperature_difference_u_k", {**NUMBER_VALUES, "negative": "-1"}, (), 0),
        ("[all]", "expansion_coefficient_per_k", NUMBER_VALUES, (), 0),
        ("[autocollimator]", "reading_uncertainty", {**NUMBER_VALUES, "negative": "-1"}, (), 0),
        ("[autocollimator]", "scale_uncertainty_rel", NUMBER_VALUES, (), 0),
        ("[autocollimator]", "unit", {**TEXT_VALUES, "furlongs": '"furlongs"'}, (), 0),
    ]
    cases = _value_cases("defaults", base, fields, argv, tmp)
    variants = {
        "format": (_set(base, None, "format", '"flatcheck-survey"'), ("format",)),
        "version": (_set(base, None, "version", "2"), ("version",)),
        "version huge": (_set(base, None, "version", BIG_INT), ("version",)),
        "unknown table": (base + "\n[laser]\nresolution = 1\n", ("laser",)),
        "table a number": (base.replace("[all]", "[old]").replace("version = 1", "version = 1\nall = 5"), ("all",)),
        "unknown key": (_set(base, "[all]", "sampling_mm", "1"), ("sampling_mm",)),
        "values without a unit": (_set(base, "[autocollimator]", "unit", None), ("unit",)),
        "duplicated key": (_set(base, "[all]", "sampling_um", "1\nsampling_um = 2"), ("TOML",)),
        "deep nesting": ('format = "flatcheck-uncertainty-defaults"\nx = ' + "[" * 5000 + "]" * 5000 + "\n",
                         ("nested",)),
        "binary": ("\x00\x01" * 50, ("binary",)),
    }
    return cases + _structure_cases("defaults", variants, argv, tmp)


def _limits_cases(tmp, db):
    base = LIMITS
    argv = lambda p: ("register", "limits", p, "--db", db)  # noqa: E731
    T = "[[table]]"
    fields = [
        (T, "round_to", POSITIVE_VALUES, (), 0),
        (T, "standard", {**TEXT_VALUES, "empty": '""'}, (), 0),
        (T, "source", TEXT_VALUES, (), 0),
        (T, "unit", {**TEXT_VALUES, "mm": '"mm"'}, (), 0),
        (T, "length_unit", {**TEXT_VALUES, "furlong": '"furlong"'}, (), 0),
        (T, "length", {**TEXT_VALUES, "width": '"width"'}, (), 0),
        (T, "grades", {"empty": "[]", "numbers": "[1, 2]", "text": '"00"', "twice": '["0", "0"]'}, (), 0),
        ("[table.formula]", '"00"', {"number": "5", "text": '"x"', "huge constant": f"{{ constant = {BIG_INT} }}",
                                     "nan": "{ constant = nan }", "1e300": "{ constant = 1e300, linear = 1e300 }",
                                     "no constant": "{ linear = 1 }", "unknown": "{ constnat = 1 }"}, ("00",), 0),
        ("[[table.size]]", "size", {"one side": "[1000]", "1e300": "[1e300, 1]", "nan": "[nan, 1]", "zero": "[0, 630]",
                                    "text": '"1000x630"', "huge integer": f"[{BIG_INT}, 1]"}, (), 0),
        ("[[table.size]]", "limits", {"empty": "{}", "negative": '{ "00" = -1 }', "huge": f'{{ "00" = {BIG_INT} }}',
                                      "unknown grade": '{ "000" = 1 }', "number": "4"}, (), 0),
    ]
    cases = _value_cases("limits", base, fields, argv, tmp)
    variants = {
        "format": (_set(base, None, "format", '"flatcheck-survey"'), ("format",)),
        "version": (_set(base, None, "version", "2"), ("version",)),
        "version huge": (_set(base, None, "version", BIG_INT), ("version",)),
        "no tables": (base.split("[[table]]")[0], ("table",)),
        "table a number": (base.split("[[table]]")[0] + "table = 5\n", ("table",)),
        "unknown key": (_set(base, T, "standrad", '"x"'), ("standrad",)),
        "missing source": (_set(base, T, "source", None), ("source",)),
        "duplicated key": (_set(base, T, "unit", '"um"\nunit = "uin"'), ("TOML",)),
        "deep nesting": ('format = "flatcheck-limits"\nx = ' + "[" * 5000 + "]" * 5000 + "\n", ("nested",)),
        "two tables for one standard": (base + base.split("lab = \"KY tool room\"")[1], ("DIN 876",)),
        "lab a number": (_set(base, None, "lab", "5"), ("lab",)),
        "binary": ("\x00\x01" * 50, ("binary",)),
        "latin-1 written as text": (None, ("UTF-8",)),
    }
    out = _structure_cases("limits", {k: v for k, v in variants.items() if v[0] is not None}, argv, tmp)
    p = tmp / "limits-latin1.toml"
    p.write_bytes(base.replace("KY tool room", "Kälte-Labor µm").encode("latin-1"))
    out.append(("limits: latin-1", argv(p), ("UTF-8", "line 3")))
    return cases + out


def _register_cases(tmp, good_db: Path):
    out = []
    raw = good_db.read_bytes()

    def add(name, data, words, mode=None):
        p = tmp / (re.sub(r"[^A-Za-z0-9]+", "-", f"db-{name}") + ".sqlite")
        if data is not None:
            p.write_bytes(data)
        if mode is not None:
            os.chmod(p, mode)
        for cmd in (("register", "history", "KY-P3"), ("register", "due"), ("register", "limits"),
                    ("register", "add", P3), ("register", "surface", "KY-P3", "--interval-months", "12"),
                    ("register", "export", tmp / "export.csv")):
            out.append((f"db {name}: {' '.join(map(str, cmd[1:2]))}", (*cmd, "--db", p), words))

    add("truncated to 100 bytes", raw[:100], ("register",))
    add("truncated to half", raw[: len(raw) // 2], ("register",))
    add("random bytes", bytes((i * 7919) % 251 for i in range(8192)), ("register",))
    add("a text file", b"surface,flatness\nKY-P3,3.1\n", ("register",))
    add("empty", b"", ("empty",))
    add("header then zeros", raw[:100] + b"\x00" * (len(raw) - 100), ("register",))
    add("pages scrambled", raw[:4096] + bytes(b ^ 0x5A for b in raw[4096:]), ("register",))
    other = tmp / "other-program.sqlite"
    con = sqlite3.connect(other)
    con.execute("CREATE TABLE songs (title TEXT)")
    con.commit()
    con.close()
    add("another program's database", other.read_bytes(), ("another",))
    if not ROOT_USER:
        add("no read permission", raw, ("permission",), mode=0)
    return out


def _encoding_cases(tmp):
    text = P3.read_text(encoding="utf-8")
    pad = PAD.read_text(encoding="utf-8")
    out = []

    def add(name, data, words, suffix=".toml", command=("reduce",)):
        p = tmp / (re.sub(r"[^A-Za-z0-9]+", "-", f"enc-{name}") + suffix)
        p.write_bytes(data)
        out.append((f"encoding {command[0]}: {name}", (command[0], p, *command[1:]), words))

    for suffix, t in ((".toml", text), (".csv", pad)):
        add("UTF-16 with a BOM" + suffix, t.encode("utf-16"), ("UTF-16", "UTF-8"), suffix)
        add("UTF-16-LE without a BOM" + suffix, t.encode("utf-16-le"), ("UTF-8",), suffix)
        add("UTF-32" + suffix, t.encode("utf-32"), ("UTF-8",), suffix)
        add("latin-1" + suffix, ("# Kälte µm\n" + t).encode("latin-1"), ("UTF-8", "line 1"), suffix)
        add("NUL in the middle" + suffix, (t[:200] + "\x00" + t[200:]).encode(), ("binary",), suffix)
        add("a 50 MB line" + suffix, ("#" + "x" * 50_000_000 + "\n").encode(), (), suffix)
    add("a 50 MB value", (text.replace('ident = "KY-P3"', 'ident = "' + "x" * 50_000_000 + '"')).encode(),
        ("line 10", "characters"))
    for name, body in (("bearing", TANDEM), ("fringes", FRINGES), ("points", BALL)):
        t = body.read_text(encoding="utf-8")
        cmd = {"bearing": lambda p: ("bearing", G1, "--bearing", p), "fringes": lambda p: ("fringes", p),
               "points": lambda p: ("sphere", p, "--kind", "ball")}[name]
        for enc_name, data in (("UTF-16", t.encode("utf-16")), ("latin-1", ("# µ\n" + t).encode("latin-1"))):
            p = tmp / f"enc-{name}-{enc_name}{body.suffix}"
            p.write_bytes(data)
            out.append((f"encoding {name}: {enc_name}", cmd(p), ("UTF-8",)))
    return out


def _special_cases(tmp, db):
    """Empty files, folders, devices, FIFOs, symlink loops and unreadable files, for every file option."""
    out = []
    empty_dir = tmp / "an empty folder"
    empty_dir.mkdir()
    loop = tmp / "loop.toml"
    os.symlink(loop, loop)
    specials = {"an empty file": (tmp / "empty file.toml", ("empty",)),
                "a folder": (empty_dir, ("folder",)),
                "a symlink loop": (loop, ("link",)),
                "a missing file": (tmp / "no such [file].toml", ("no such file",))}
    (tmp / "empty file.toml").write_bytes(b"")
    for dev in ("/dev/null", "/dev/zero"):
        if os.path.exists(dev):
            specials[dev] = (Path(dev), (dev,))
    if hasattr(os, "mkfifo"):
        fifo = tmp / "a fifo"
        os.mkfifo(fifo)
        specials["a FIFO"] = (fifo, ("named pipe",))
    if not ROOT_USER:
        locked = tmp / "locked.toml"
        locked.write_bytes(P3.read_bytes())
        os.chmod(locked, 0)
        specials["no read permission"] = (locked, ("permission",))
    out_dir = tmp / "outs"
    out_dir.mkdir()
    options = {
        "bearing --bearing": lambda p: ("bearing", G1, "--bearing", p),
        "bearing --pad-face": lambda p: ("bearing", G1, "--pad", "80x60", "--gap-um", "8", "--pad-face", p),
        "guideway body": lambda p: ("guideway", p),
        "guideway --carriage": lambda p: ("guideway", G2 / "body.toml", "--carriage", p),
        # a photograph's options with any name that is not .toml: the picture reader refuses the file itself
        "fringes input": lambda p: ("fringes", p, *(() if str(p).endswith(".toml") else PHOTO_ARGS)),
        "fringes --mask": lambda p: ("fringes", PHOTO, *PHOTO_ARGS, "--mask", p),
        "sphere input": lambda p: ("sphere", p, "--kind", "ball"),
        "sphere --mate": lambda p: ("sphere", BALL, "--kind", "ball", "--mate", p),
        "reduce --uncertainty-defaults": lambda p: ("reduce", P3, "--uncertainty-defaults", p),
        "register limits": lambda p: ("register", "limits", p, "--db", db),
        "register add": lambda p: ("register", "add", p, "--db", db),
        "register --db": lambda p: ("register", "history", "KY-P3", "--db", p),
        "compare after": lambda p: ("compare", P3, p),
    }
    for oname, make in options.items():
        for sname, (path, words) in specials.items():
            if oname == "register add" and sname in ("a folder", "an empty file"):
                continue  # a folder of surveys is a valid argument; an empty file is a refused file, listed
            if oname == "register --db" and sname in ("a missing file",):
                words = ("no register",)
            if oname == "register --db" and sname in ("an empty file",):
                words = ("empty",)
            if oname.startswith(("fringes", "sphere", "bearing --pad-face")) and sname == "a symlink loop":
                pass
            out.append((f"{oname}: {sname}", make(path), words))
    # a special file behind an X3P name
    if hasattr(os, "mkfifo"):
        fifo = tmp / "a fifo.x3p"
        os.mkfifo(fifo)
        out.append(("reduce: a FIFO named .x3p", ("reduce", fifo), ("named pipe",)))
        fifo = tmp / "a fifo.png"
        os.mkfifo(fifo)
        out.append(("fringes: a FIFO named .png", ("fringes", fifo, *PHOTO_ARGS), ("named pipe",)))
    x3p_dir = tmp / "a folder.x3p"
    x3p_dir.mkdir()
    out.append(("reduce: a folder named .x3p", ("reduce", x3p_dir), ("folder",)))
    out.append(("reduce: /dev/zero as --map-out's input", ("reduce", "/dev/zero", "--map-out", out_dir / "m.csv"),
                ("/dev/zero",)))
    return out


def _cases(tmp: Path, good_x3p: Path, good_db: Path) -> list:
    """Every bad file: (id, argv, words), made in ``tmp``."""
    db = tmp / "limits-register.sqlite"
    shutil.copy(good_db, db)
    cases = []
    families = [(f.__name__.strip("_"), f, ()) for f in (_bearing_cases, _guideway_cases, _fringe_cases, _photo_cases,
                                                          _sphere_cases, _encoding_cases)]
    families += [("x3p", _x3p_cases, (good_x3p,)), ("defaults", _defaults_cases, ()), ("limits", _limits_cases, (db,)),
                 ("register", _register_cases, (good_db,)), ("special", _special_cases, (db,))]
    for name, family, extra in families:  # each family in a folder of its own
        sub = tmp / name
        sub.mkdir()
        cases += family(sub, *extra)
    return [(i, tuple(str(a) for a in argv), words) for i, argv, words in cases]


# ------------------------------------------------------------------------------------------- the run
def _digest(root: Path) -> dict:
    out = {}
    for dirpath, _dirs, files in os.walk(root):
        for f in files:
            p = Path(dirpath) / f
            if p.is_file() and not p.is_symlink() and os.access(p, os.R_OK):
                out[str(p)] = hashlib.sha256(p.read_bytes()).hexdigest()
    return out


@pytest.fixture(scope="module")
def made(tmp_path_factory):
    """A good X3P file and a good register (one survey of KY-P3), made once by the command line itself."""
    from flatcheck.cli.main import run

    folder = tmp_path_factory.mktemp("hostile-files-made")
    x3p, db = folder / "good.x3p", folder / "good.sqlite"
    import contextlib

    with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()):
        assert run(["reduce", str(PAD), "--map-out", str(x3p), "--window", "none"]) == 0
        assert run(["register", "add", str(P3), "--db", str(db), "--trials", "100", "--jobs", "1"]) == 0
    return x3p, db


def test_the_sweep_is_several_hundred_files(tmp_path, made):
    cases = _cases(tmp_path, *made)
    assert len(cases) >= 400
    assert len({c[0] for c in cases}) == len(cases)  # every case has its own name


def test_every_bad_file_is_one_line_exit_2_and_changes_nothing(cli, cli_limited, refusal_problems, tmp_path, made, monkeypatch):
    monkeypatch.chdir(tmp_path)
    monkeypatch.delenv("FLATCHECK_DB", raising=False)
    monkeypatch.delenv("FLATCHECK_UNCERTAINTY_DEFAULTS", raising=False)
    cases = _cases(tmp_path, *made)
    earlier = tmp_path / "special" / "outs" / "m.csv"
    earlier.write_text("an earlier map\n", encoding="utf-8")
    before = {**_digest(SAMPLES), **_digest(tmp_path)}
    failures, slow, timings = [], [], []
    for case_id, argv, words in cases:
        t0 = time.perf_counter()
        result = cli_limited(*argv)
        dt = time.perf_counter() - t0
        timings.append((dt, case_id))
        if result is None:
            failures.append(f"{case_id}: no answer within {TIME_LIMIT_S} s (a hang)")
            continue
        code, out, err = result
        if dt > 5:
            slow.append(f"{case_id}: {dt:.1f} s")
        problems = refusal_problems(code, out, err, words)
        if problems:
            failures.append(f"{case_id}: {'; '.join(problems)}")
    after = {**_digest(SAMPLES), **_digest(tmp_path)}
    changed = [p for p in before if before[p] != after.get(p)]
    assert not failures, f"{len(failures)} of {len(cases)} failed:\n" + "\n".join(failures) + "\nslowest:\n" + "\n".join(
        f"{c}: {t:.2f} s" for t, c in sorted(timings, reverse=True)[:25])
    assert not changed, f"inputs or earlier outputs changed: {changed}"
    assert not slow, "slow refusals:\n" + "\n".join(slow)


# ------------------------------------------------------------------------------------------- good files
MARKUP = ["a [/] b", "[red]x", "[/b]"]


@pytest.mark.parametrize("text", MARKUP)
def test_user_text_in_these_files_is_printed_literally(cli, tmp_path, text):
    """Names and descriptions that look like terminal markup are the person's own words: printed as written."""
    fr = tmp_path / "fringes.toml"
    fr.write_text(FRINGES.read_text(encoding="utf-8").replace('description = "pad face"', f'description = "{text}"')
                  .replace('ident = "KY-B4"', f'ident = "{text} B4"'), encoding="utf-8")
    code, out, err = cli("fringes", fr)
    assert code == 0, err
    assert f"{text} B4" in out or text in out
    lim = tmp_path / "limits.toml"
    lim.write_text(LIMITS.replace('standard = "DIN 876"', f'standard = "{text} DIN"')
                   .replace('source = "DIN 876-1 lab copy 2"', f'source = "{text} copy"'), encoding="utf-8")
    code, out, err = cli("register", "limits", lim, "--db", tmp_path / "r.sqlite")
    assert code == 0, err
    assert f"{text} DIN" in out and f"{text} copy" in out
    folder = tmp_path / "g2"
    shutil.copytree(G2, folder)
    body = folder / "body.toml"
    body.write_text(body.read_text(encoding="utf-8").replace('ident = "KY-G2"', f'ident = "{text} G2"'),
                    encoding="utf-8")
    code, out, err = cli("guideway", body)
    assert code == 0, err
    assert f"{text} G2" in out


@pytest.mark.parametrize("name", ["plate with spaces.toml", "plåt µm ünïcode.toml", "[bold]plate [1].toml"])
def test_names_with_spaces_unicode_and_brackets_are_read(cli, tmp_path, name):
    path = tmp_path / name
    shutil.copy(P3, path)
    code, out, err = cli("reduce", path, "--window", "none")
    assert code == 0, err
    assert str(path) in out
    folder = tmp_path / name.replace(".toml", "")
    shutil.copytree(G2, folder)
    shutil.copy(TANDEM, folder / name)
    code, out, err = cli("fringes", shutil.copy(FRINGES, folder / ("f " + name)))
    assert code == 0, err
    code, out, err = cli("guideway", folder / "body.toml")
    assert code == 0, err


@pytest.mark.parametrize("variant", ["BOM", "CRLF", "BOM and CRLF"])
def test_utf8_with_a_bom_or_crlf_line_ends_is_read(cli, tmp_path, variant):
    def encode(text):
        if "CRLF" in variant:
            text = text.replace("\n", "\r\n")
        return ("\ufeff" if "BOM" in variant else "").encode() + text.encode("utf-8")

    files = {"survey.toml": P3, "map.csv": PAD, "bearing.toml": TANDEM, "fringes.toml": FRINGES, "ball.csv": BALL}
    for name, src in files.items():
        (tmp_path / name).write_bytes(encode(src.read_text(encoding="utf-8")))
    (tmp_path / "defaults.toml").write_bytes(encode(UNCERTAINTY_DEFAULTS))
    (tmp_path / "limits.toml").write_bytes(encode(LIMITS))
    for argv in (("reduce", tmp_path / "survey.toml", "--window", "none", "--uncertainty-defaults",
                  tmp_path / "defaults.toml"),
                 ("reduce", tmp_path / "map.csv", "--window", "none"),
                 ("bearing", tmp_path / "survey.toml", "--bearing", tmp_path / "bearing.toml", "--no-uncertainty"),
                 ("fringes", tmp_path / "fringes.toml"),
                 ("sphere", tmp_path / "ball.csv", "--kind", "ball"),
                 ("register", "limits", tmp_path / "limits.toml", "--db", tmp_path / "r.sqlite")):
        code, out, err = cli(*argv)
        assert code == 0, (argv[0], err)
