"""Cautions that flatcheck shows where the work involves heavy stone, abrasive dust or compressed air.

They defer to local codes and licensed practice; they are reminders, not a safety procedure.
Facts behind them: respirable crystalline silica rules (e.g. US OSHA 29 CFR 1910.1053, PEL 50 µg/m3
8-h TWA) and compressed-air cleaning limits (29 CFR 1910.242(b)) are examples of such local rules.
That stone (granite, diabase, quartzite) releases crystalline silica when ground, that graphite dust
is electrically conductive, and that metal and ceramic fines and the spent abrasive are hazards of
their own, is common practice, no single source.
"""

__all__ = ["SAFETY_LINES", "dust_caution", "lifting_caution", "cautions_for"]

#: One sentence per hazard: "lifting" (granite plates), "dust" (grinding and lapping), "air" (air bearings).
SAFETY_LINES = {
    "lifting": (
        "Granite plates weigh hundreds of kilograms to tonnes: lift and move them only with rated lifting gear "
        "and trained people, and support them on their marked points; follow local regulations."
    ),
    "dust": (
        "Grinding or lapping granite can release respirable crystalline silica: use wet methods or local "
        "extraction and respiratory protection as local rules require; never dry-sweep or blow dust with compressed air."
    ),
    "air": (
        "Compressed air: depressurise before working on air bearings or lines, never point air at people, and follow "
        "local codes for pressure equipment."
    ),
}

_STONE = ("granite", "diabase", "gabbro", "quartz", "stone", "marble", "basalt")
_GRAPHITE = ("graphite", "carbon")
_CERAMIC = ("ceramic", "alumina", "zirconia", "silicon carbide", "sic")
_METAL = ("iron", "steel", "bronze", "brass", "aluminium", "aluminum", "metal")

_DUST_CONTROLS = ("use wet methods or local extraction and respiratory protection as local rules require; "
                  "never dry-sweep or blow dust with compressed air.")


def _kind(material: str | None) -> str:
    m = (material or "").strip().lower()
    if not m or m == "not stated":
        return ""
    for kind, words in (("stone", _STONE), ("graphite", _GRAPHITE), ("ceramic", _CERAMIC), ("metal", _METAL)):
        if any(w in m for w in words):
            return kind
    return "other"


def dust_caution(material: str | None = None) -> str:
    """The dust caution, worded for the surface's material when it is known.

    Parameters
    ----------
    material : str, optional
        The surface's material as stated (e.g. "black granite", "graphite"); empty or None when
        not known, which gives a wording that holds for any material.

    Returns
    -------
    str
        One sentence (or two) naming the hazard of that material's dust and the controls.
    """
    kind = _kind(material)
    m = (material or "").strip()
    if kind == "stone":
        return f"Grinding or lapping {m} can release respirable crystalline silica: " + _DUST_CONTROLS
    if kind == "graphite":
        return (f"Grinding or lapping {m} releases fine, electrically conductive dust: keep it out of electrical "
                "equipment; " + _DUST_CONTROLS)
    if kind == "ceramic":
        return f"Grinding or lapping {m} releases fine ceramic dust and spent abrasive: " + _DUST_CONTROLS
    if kind == "metal":
        return f"Grinding or lapping {m} releases metal fines and spent abrasive: " + _DUST_CONTROLS
    if kind == "other":
        return f"Grinding or lapping {m} releases fine dust of the surface and the abrasive: " + _DUST_CONTROLS
    return ("Grinding or lapping releases fine dust of the surface and the abrasive (respirable crystalline silica "
            "from granite and other stone): " + _DUST_CONTROLS)


def lifting_caution(material: str | None = None) -> str:
    """The lifting caution for a large plate or guideway, naming its material when known."""
    kind = _kind(material)
    what = f"{(material or '').strip().capitalize()} plates and guideways" if kind == "stone" else (
        "Large surface plates and guideways")
    return (f"{what} weigh hundreds of kilograms to tonnes: lift and move them only with rated lifting gear and "
            "trained people, and support them on their marked points; follow local regulations.")


def cautions_for(material: str | None, *, large: bool, air: bool) -> tuple:
    """The cautions that apply to one report: dust always, lifting for a large surface, air with a bearing.

    Parameters
    ----------
    material : str or None
        The surface's material, or None / "" when not known.
    large : bool
        The surface is a plate or guideway one cannot lift by hand (e.g. 300 mm or more on its longer side).
    air : bool
        Air bearings are part of the work.

    Returns
    -------
    tuple of str
    """
    out = []
    if large:
        out.append(lifting_caution(material))
    out.append(dust_caution(material))
    if air:
        out.append(SAFETY_LINES["air"])
    return tuple(out)
