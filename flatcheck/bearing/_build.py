"""Pads, carriages and film feeds from what a person states: a bearing file and command-line overrides."""

from __future__ import annotations

import dataclasses
import math
import re

from ..errors import InputValueError
from ._carriage import Carriage, MotionBudget, Pad

__all__ = ["parse_pad_size", "carriage_from_options", "film_feed"]

_PAD_RE = re.compile(
    r"^\s*(?:(?P<d>[dD]|Ø)\s*(?P<dia>[0-9.eE+-]+)|(?P<l>[0-9.eE+-]+)\s*[xX×*]\s*(?P<w>[0-9.eE+-]+))\s*(?:mm)?\s*$"
)


def parse_pad_size(text: str, *, where: str | None = None) -> tuple[str, float, float]:
    """Parse a pad size: ``"LxW"`` (rectangle, mm, L along the travel) or ``"dD"`` (circle of diameter D mm).

    Parameters
    ----------
    text : str
        For example ``"120x80"``, ``"120 x 80 mm"``, ``"d80"``.
    where : str, optional
        Location for the error message.

    Returns
    -------
    (shape, length_mm, width_mm)
        ``shape`` is ``"rect"`` or ``"circle"``; for a circle both sizes are the diameter.

    Raises
    ------
    InputValueError
        Text in neither form, or sizes that are not positive numbers.
    """
    m = _PAD_RE.match(str(text))
    fix = "write the pad as LxW in mm (e.g. 120x80) or dD for a circular pad (e.g. d80)"
    if m is None:
        raise InputValueError(f"cannot read the pad size {text!r}", where=where, fix=fix)
    try:
        if m.group("dia") is not None:
            d = float(m.group("dia"))
            shape, length, width = "circle", d, d
        else:
            shape, length, width = "rect", float(m.group("l")), float(m.group("w"))
    except ValueError:
        raise InputValueError(f"cannot read the pad size {text!r}", where=where, fix=fix) from None
    if not all(math.isfinite(v) for v in (length, width)):
        raise InputValueError(f"the pad size {text!r} is not a finite number of mm", where=where, fix=fix)
    if not (length > 0 and width > 0):
        raise InputValueError(f"the pad size {text!r} must be positive", where=where, fix=fix)
    return shape, length, width


def carriage_from_options(
    description,
    *,
    pad: str | None,
    gap_um: float | None,
    kind: str | None,
    y_mm: float | None,
    travel_start_mm: float | None,
    travel_end_mm: float | None,
    step_mm: float | None,
):
    """Carriage, gap fraction, marginal fraction and budget from a bearing description and/or options.

    Parameters
    ----------
    description : BearingDescription or None
        What a bearing file describes (:func:`flatcheck.read_bearing_toml`), or None for a single pad.
    pad, gap_um, kind : str, float, str or None
        Override every pad's size (``"LxW"`` or ``"dD"``, mm), gap (µm) and kind; without a
        description ``pad`` and ``gap_um`` are required (``kind=None``: porous).
    y_mm, travel_start_mm, travel_end_mm, step_mm : float or None
        Override the carriage's path (mm).

    Returns
    -------
    (Carriage, float or None, float or None, MotionBudget)
        The carriage, gap fraction, marginal fraction and motion budget (None: the defaults).

    Errors name the command-line options (``--pad``, ``--gap-um``), which is what a person gives.
    """
    if description is not None:
        desc = description
        carriage, fraction, marginal, budget = desc.carriage, desc.gap_fraction, desc.marginal_from, desc.budget
        if pad is not None or gap_um is not None or kind is not None:
            placed = []
            for p in carriage.pads:
                shape, length, width = (p.pad.shape, p.pad.length_mm, p.pad.width_mm)
                if pad is not None:
                    shape, length, width = parse_pad_size(pad, where="--pad")
                g = p.pad.gap_um if gap_um is None else gap_um
                k = p.pad.kind if kind is None else kind
                placed.append(dataclasses.replace(p, pad=_pad(shape, length, width, g, k)))
            carriage = dataclasses.replace(carriage, pads=tuple(placed))
    else:
        if pad is None or gap_um is None:
            raise InputValueError(
                "no pad described", where="--pad/--gap-um", fix="give --pad LxW (or dD) and --gap-um, or --bearing FILE.toml"
            )
        shape, length, width = parse_pad_size(pad, where="--pad")
        carriage = Carriage.single(_pad(shape, length, width, gap_um, kind or "porous"))
        fraction, marginal, budget = None, None, MotionBudget()
    changes = {
        k: v
        for k, v in (("y_mm", y_mm), ("travel_start_mm", travel_start_mm), ("travel_end_mm", travel_end_mm), ("step_mm", step_mm))
        if v is not None
    }
    if changes:
        carriage = dataclasses.replace(carriage, **changes)
    return carriage, fraction, marginal, budget


def _pad(shape, length, width, gap_um, kind) -> Pad:
    try:
        return Pad(shape, length, width, gap_um, kind)
    except InputValueError as exc:
        raise InputValueError(exc.message, where="--pad/--gap-um", fix=exc.fix) from None


def film_feed(carriage, supply_kpa, permeability_m2, layer_mm, ambient_kpa, orifice_opts, *, kind_given=False,
          from_file=False):
    """The film feed (porous layer or orifices) from the options; wrong-kind or missing options refused.

    ``orifice_opts`` maps the orifice options (``--orifice-mm``, ``--orifices``, ``--cd``, ``--pocket-mm``,
    ``--pocket-depth-um``) to their values or None; errors name the options.
    """
    from ._film import OrificeFeed, PorousFeed, orifice_ring

    pads = carriage.active_pads
    kinds = sorted({p.pad.kind for p in pads})
    if len(kinds) != 1:
        raise InputValueError(
            f"the film model needs pads of one kind; this carriage has {' and '.join(kinds)} pads",
            where="film options", fix="describe porous and orifice pads in separate bearing files",
        )
    kind = kinds[0]
    porous_opts = {"--permeability-m2": permeability_m2, "--layer-mm": layer_mm}
    given_orifice = [k for k, v in orifice_opts.items() if v is not None]
    given_porous = [k for k, v in porous_opts.items() if v is not None]
    said = f" (--kind {kind})" if kind_given else (" (the bearing file's kind)" if from_file else " (the default --kind)")
    if kind == "porous" and given_orifice:
        raise InputValueError(
            f"{', '.join(given_orifice)} {'describes' if len(given_orifice) == 1 else 'describe'} orifice pads, "
            f"but the pads are porous{said}", where="film options",
            fix=("use --kind orifice" if kind_given else "add --kind orifice") + ", or drop the orifice options",
        )
    if kind == "orifice" and given_porous:
        raise InputValueError(
            f"{', '.join(given_porous)} {'describes' if len(given_porous) == 1 else 'describe'} porous pads, "
            f"but the pads are orifice-fed{said}", where="film options",
            fix="use --kind porous for a porous pad, or drop the porous options",
        )
    if kind == "porous":
        missing = [n for n, v in (("--supply-kpa", supply_kpa), *porous_opts.items()) if v is None]
        fix = "give --supply-kpa, --permeability-m2 and --layer-mm together"
    else:
        missing = [n for n, v in (("--supply-kpa", supply_kpa), ("--orifice-mm", orifice_opts["--orifice-mm"]))
                   if v is None]
        fix = "give --supply-kpa and --orifice-mm together (with --kind orifice)"
    if missing:
        raise InputValueError(f"the film model needs {', '.join(missing)} as well", where="film options", fix=fix)
    try:
        if kind == "porous":
            return PorousFeed(permeability_m2, layer_mm, supply_kpa, ambient_kpa)
        shapes = {(p.pad.shape, p.pad.length_mm, p.pad.width_mm) for p in pads}
        count = orifice_opts["--orifices"]
        if count is not None and count > 1 and len(shapes) > 1:
            raise InputValueError(
                "--orifices lays orifices out on one pad size, but the pads differ in size", where="--orifices",
                fix="give pads of one size, or one central orifice",
            )
        shape, length, width = next(iter(shapes))
        layout = orifice_ring(shape, length, width, 1 if count is None else count)
        cd = orifice_opts["--cd"]
        return OrificeFeed(
            orifice_opts["--orifice-mm"], supply_kpa, 0.8 if cd is None else cd, positions_mm=layout,
            pocket_mm=orifice_opts["--pocket-mm"] or 0.0, pocket_depth_um=orifice_opts["--pocket-depth-um"] or 0.0,
            ambient_kpa=ambient_kpa,
        )
    except InputValueError as exc:
        raise InputValueError(exc.message, where=exc.where or "film options", fix=exc.fix) from None
