"""Cautions that flatcheck shows where the work involves heavy stone, abrasive dust or compressed air.

They defer to local codes and licensed practice; they are reminders, not a safety procedure.
Facts behind them: respirable crystalline silica rules (e.g. US OSHA 29 CFR 1910.1053, PEL 50 µg/m3
8-h TWA) and compressed-air cleaning limits (29 CFR 1910.242(b)) are examples of such local rules.
"""

__all__ = ["SAFETY_LINES"]

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
