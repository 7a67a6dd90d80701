"""What is due for recalibration: surfaces and instruments, and surveys made out of calibration.

A surface is due one calibration interval after its last survey (any survey: a
recalibration is a survey); an instrument is due on the due date of its last calibration.
An interval in months ends on the same day of the month, or on the month's last day when
that day does not exist (31 January + 1 month = 28 or 29 February; common practice, no
single source). Status on a given day:

``overdue``         the due date has passed;
``due``             due within the window (``within_days``, 30 by default);
``ok``              due later;
``no-interval``     a surface without a calibration interval;
``never-surveyed``  a surface with an interval but no survey yet (due now);
``no-calibration``  an instrument without a calibration on record (due now).

A survey made with a registered instrument on a day when none of its calibrations was in
force (from the calibration date to the due date, both included) is flagged.
"""

from __future__ import annotations

import calendar
import datetime as _dt
from dataclasses import dataclass

from ..errors import InputValueError

__all__ = ["DEFAULT_WITHIN_DAYS", "STATUSES", "DueItem", "FlaggedSurvey", "DueList", "add_interval", "due_status",
           "due_list"]

#: Days ahead that count as "due" by default.
DEFAULT_WITHIN_DAYS = 30
STATUSES = ("overdue", "due", "ok", "no-interval", "never-surveyed", "no-calibration")
_ORDER = {"overdue": 0, "never-surveyed": 1, "no-calibration": 1, "due": 2, "ok": 3, "no-interval": 4}


@dataclass(frozen=True)
class DueItem:
    """A surface or an instrument and when it is due.

    Attributes
    ----------
    kind : {"surface", "instrument"}
    ident, description, location : str
    last_date : str or None
        Last survey (surfaces) or calibration (instruments), ``YYYY-MM-DD``.
    due_date : str or None
    days_left : int or None
        Days from the day of the list to the due date (negative: overdue).
    status : str
        One of :data:`STATUSES`.
    interval : str
        The interval in words ("12 months"), or "".
    """

    kind: str
    ident: str
    description: str
    location: str
    last_date: str | None
    due_date: str | None
    days_left: int | None
    status: str
    interval: str


@dataclass(frozen=True)
class FlaggedSurvey:
    """A survey made with an instrument that was out of calibration that day."""

    survey_id: int
    ident: str
    date: str
    instrument: str
    reason: str


@dataclass(frozen=True)
class DueList:
    """Everything due, on the day ``on``."""

    on: str
    within_days: int
    items: tuple
    flagged: tuple
    unlinked_surveys: int


def add_interval(date: str, *, months: int | None = None, days: int | None = None) -> str:
    """The date one interval after ``date`` (``YYYY-MM-DD``).

    Examples
    --------
    >>> add_interval("2024-01-31", months=1)   # 2024 is a leap year
    '2024-02-29'
    >>> add_interval("2024-04-23", days=365)
    '2025-04-23'
    """
    d = _dt.date.fromisoformat(date)
    if months:
        m0 = d.month - 1 + int(months)
        y, m = d.year + m0 // 12, m0 % 12 + 1
        return _dt.date(y, m, min(d.day, calendar.monthrange(y, m)[1])).isoformat()
    if days:
        return (d + _dt.timedelta(days=int(days))).isoformat()
    raise InputValueError("no interval", fix="give an interval in months or days")


def due_status(due_date: str, on: str, within_days: int) -> tuple[str, int]:
    """``(status, days_left)`` of an item due on ``due_date``, seen on ``on``."""
    left = (_dt.date.fromisoformat(due_date) - _dt.date.fromisoformat(on)).days
    if left < 0:
        return "overdue", left
    return ("due" if left <= within_days else "ok"), left


def due_list(register, *, on: str | None = None, within_days: int = DEFAULT_WITHIN_DAYS, include_ok: bool = False) -> DueList:
    """What is due or overdue in the register on day ``on`` (today by default).

    Parameters
    ----------
    register : Register
    on : str, optional
        The day (``YYYY-MM-DD``).
    within_days : int
        Days ahead that count as due.
    include_ok : bool
        List items that are not due yet (and surfaces without an interval) too.

    Returns
    -------
    DueList
        Items most urgent first (overdue, never surveyed, due, ok, no interval), then by due date.

    Raises
    ------
    InputValueError
        A negative window.
    """
    if within_days < 0:
        raise InputValueError(f"the window of {within_days} days is negative", where="--within-days",
                              fix="give 0 or more days")
    on = on or _dt.date.today().isoformat()
    items = []
    for s, last in register.last_surveys():
        interval = s.interval_text
        if not interval:
            status, due, left = "no-interval", None, None
        elif last is None:
            status, due, left = "never-surveyed", None, None
        else:
            due = add_interval(last, months=s.interval_months, days=s.interval_days)
            status, left = due_status(due, on, within_days)
        items.append(DueItem("surface", s.ident, s.description, s.location, last, due, left, status, interval))
    for ident, kind, model, serial, cal in register.last_calibrations():
        desc = ", ".join(p for p in (kind, model, f"serial {serial}" if serial else "") if p)
        if cal is None:
            items.append(DueItem("instrument", ident, desc, "", None, None, None, "no-calibration", ""))
            continue
        status, left = due_status(cal.due_on, on, within_days)
        items.append(DueItem("instrument", ident, desc, "", cal.calibrated_on, cal.due_on, left, status, ""))
    if not include_ok:
        items = [i for i in items if i.status not in ("ok", "no-interval")]
    items.sort(key=lambda i: (_ORDER[i.status], i.due_date or "", i.kind, i.ident))
    flagged = tuple(FlaggedSurvey(*f) for f in register.uncalibrated_surveys())
    return DueList(on, int(within_days), tuple(items), flagged, register.unlinked_survey_count())
