"""A surface's history: flatness with U over time, where it wears, how fast, and when it leaves its grade.

Wear rate
    A straight line fitted to the flatness of the surveys made since the surface was last
    adjusted (the last ``as-left`` survey, or all surveys), weighted by ``1/u^2`` with ``u``
    the standard uncertainty of each flatness; its slope is the rate in µm per year
    (365.25 days). The slope's standard uncertainty comes from the weighted fit
    (``u(b)^2 = S / (S Sxx - Sx^2)``), multiplied by the Birge ratio ``sqrt(chi2 / (n - 2))``
    when the points scatter more than their uncertainties allow (Numerical Recipes, 2nd ed.,
    section 15.2, for the fit; R. T. Birge, Phys. Rev. 40, 207 (1932), for the ratio; both from
    memory). Without uncertainties the fit is unweighted and ``u(b)`` comes from the residuals.
    A rate counts as established when it exceeds twice its standard uncertainty.

Forecast
    With an established positive rate ``b`` and the grade's limit ``T``, the surface is
    expected to reach ``T`` at ``t_last + (T - F_last) / b`` and to stop proving conformity
    (ISO 14253-1: ``F + U > T``) at ``t_last + (T - U_last - F_last) / b``. Flatness of a
    plate in service grows roughly steadily with use (common practice, no single source);
    the forecast is an extrapolation of that line and says so.

Wear map
    The change of each station's height between two surveys, ``after - before``, with its
    least-squares plane removed (a plate's tilt between two surveys is not wear). Stations
    are paired by name when both surveys have the same stations, else by position (within
    :data:`flatcheck.match_nodes`' default tolerance), else the later survey is interpolated
    at the earlier one's stations (stations outside the later survey's area are left out).
"""

from __future__ import annotations

import datetime as _dt
import math
from dataclasses import dataclass

import numpy as np

from ..errors import InputValueError

__all__ = [
    "DAYS_PER_YEAR",
    "HistoryPoint",
    "WearRate",
    "Forecast",
    "SurfaceHistory",
    "WearMap",
    "years_between",
    "fit_wear_rate",
    "forecast_limit",
    "wear_map",
    "surface_history",
    "survey_wear",
]

#: Days of a year for rates: the Julian year (365.25 days, exact by definition).
DAYS_PER_YEAR = 365.25


@dataclass(frozen=True)
class HistoryPoint:
    """One survey in a surface's history (µm); ``in_calibration`` as :class:`flatcheck.records.SurveyRow`."""

    survey_id: int
    date: str
    state: str
    flatness_um: float
    expanded_uncertainty_um: float | None
    standard_uncertainty_um: float | None
    instrument_ident: str | None
    source_name: str
    in_calibration: bool | None = None


@dataclass(frozen=True)
class WearRate:
    """The fitted rate of change of flatness.

    Attributes
    ----------
    rate_um_per_year : float
        Slope of flatness over time, µm per year (positive: getting worse).
    u_rate_um_per_year : float or None
        Its standard uncertainty (None with two unweighted points).
    intercept_um : float
        Fitted flatness at ``since`` (µm).
    n : int
        Surveys in the fit.
    since, until : str
        First and last dates in the fit.
    weighted : bool
        Whether each point was weighted by ``1/u^2``.
    birge_ratio : float or None
        ``sqrt(chi2 / (n - 2))`` of a weighted fit with n > 2.
    established : bool
        ``|rate| > 2 u(rate)``.
    """

    rate_um_per_year: float
    u_rate_um_per_year: float | None
    intercept_um: float
    n: int
    since: str
    until: str
    weighted: bool
    birge_ratio: float | None
    established: bool


@dataclass(frozen=True)
class Forecast:
    """When the surface is expected to leave its grade at the fitted rate.

    Attributes
    ----------
    standard, grade : str
    limit_um : float
    reaches_limit_on : str or None
        Date when the flatness reaches the limit (``YYYY-MM-DD``), None when it does not grow.
    unproven_from : str or None
        Date from which conformity can no longer be proven (F + U reaches the limit).
    text : str
        The forecast in words, with its basis.
    """

    standard: str
    grade: str
    limit_um: float
    reaches_limit_on: str | None
    unproven_from: str | None
    text: str


@dataclass(frozen=True)
class SurfaceHistory:
    """A surface's surveys in date order, with the wear rate, the grade's limit and the forecast.

    ``limit`` is the verdict of the last survey for the grade sought (its ``limit_um``, ``standard``,
    ``grade``), None when the surface has no grade sought or the register no limits for it.
    """

    surface: object
    points: tuple
    rate: WearRate | None
    forecast: Forecast | None
    notes: tuple
    limit: object = None


@dataclass(frozen=True, eq=False)
class WearMap:
    """Change of each station's height between two surveys.

    Attributes
    ----------
    before_id, after_id : int
        Survey numbers (0 when not from a register).
    before_date, after_date : str
    years : float
        Time between the surveys (Julian years).
    matched_by : {"station names", "positions", "interpolation"}
    names : tuple of str or None
    x_mm, y_mm : ndarray, shape (n,)
        Positions (of the earlier survey's stations), mm.
    change_um : ndarray, shape (n,)
        ``after - before`` about their least-squares plane, µm (negative: worn down).
    """

    before_id: int
    after_id: int
    before_date: str
    after_date: str
    years: float
    matched_by: str
    names: tuple | None
    x_mm: np.ndarray
    y_mm: np.ndarray
    change_um: np.ndarray

    @property
    def worst(self) -> int:
        """Index of the station that went down most."""
        return int(np.argmin(self.change_um))

    @property
    def range_um(self) -> float:
        """Peak-to-valley of the change (µm)."""
        return float(np.ptp(self.change_um))

    @property
    def rms_um(self) -> float:
        """RMS of the change (µm)."""
        return float(np.sqrt(np.mean(self.change_um**2)))

    def label(self, i: int) -> str:
        """Station ``i`` by name, or by position."""
        if self.names is not None and self.names[i] is not None:
            return f"{self.names[i]} (x = {self.x_mm[i]:g} mm, y = {self.y_mm[i]:g} mm)"
        return f"x = {self.x_mm[i]:g} mm, y = {self.y_mm[i]:g} mm"


def _date(s: str) -> _dt.date:
    return _dt.date.fromisoformat(s)


def years_between(d0: str, d1: str) -> float:
    """Julian years from date ``d0`` to ``d1`` (``YYYY-MM-DD``)."""
    return (_date(d1) - _date(d0)).days / DAYS_PER_YEAR


def _date_after(d: str, years: float) -> str:
    return (_date(d) + _dt.timedelta(days=round(years * DAYS_PER_YEAR))).isoformat()


def fit_wear_rate(dates, flatness_um, u_um=None) -> WearRate:
    """Fit a straight line to flatness over time (see the module notes).

    Parameters
    ----------
    dates : sequence of str, length n
        ``YYYY-MM-DD``, in any order.
    flatness_um : array_like, shape (n,)
        Flatness in µm.
    u_um : array_like, shape (n,), optional
        Standard uncertainty of each flatness in µm; when any is missing (None or not
        positive) the fit is unweighted.

    Returns
    -------
    WearRate

    Raises
    ------
    InputValueError
        Fewer than two surveys, or all on one day.

    Examples
    --------
    Flatness growing by exactly 0.5 µm a year:

    >>> r = fit_wear_rate(["2020-01-01", "2021-01-01", "2022-01-01"], [2.0, 2.5, 3.0])
    >>> round(r.rate_um_per_year, 2)
    0.5
    """
    d = [str(x) for x in dates]
    y = np.asarray(flatness_um, dtype=float)
    n = y.size
    if n < 2:
        raise InputValueError("a wear rate needs at least two surveys", fix="add another survey of the surface")
    t0 = min(d)
    t = np.array([years_between(t0, x) for x in d])
    if np.ptp(t) == 0:
        raise InputValueError("all the surveys are of one day", fix="a rate needs surveys on different days")
    u = None
    if u_um is not None:
        uu = np.array([np.nan if v is None else float(v) for v in u_um])
        if np.all(np.isfinite(uu) & (uu > 0)):
            u = uu
    if u is not None:
        w = 1.0 / u**2
        S, Sx, Sy = w.sum(), (w * t).sum(), (w * y).sum()
        Sxx, Sxy = (w * t * t).sum(), (w * t * y).sum()
        delta = S * Sxx - Sx * Sx
        b = (S * Sxy - Sx * Sy) / delta
        a = (Sxx * Sy - Sx * Sxy) / delta
        ub = math.sqrt(S / delta)
        birge = None
        if n > 2:
            chi2 = float((w * (y - a - b * t) ** 2).sum())
            birge = math.sqrt(chi2 / (n - 2))
            ub *= max(1.0, birge)
        weighted = True
    else:
        tm, ym = t.mean(), y.mean()
        sxx = float(((t - tm) ** 2).sum())
        b = float(((t - tm) * (y - ym)).sum() / sxx)
        a = float(ym - b * tm)
        ub = None
        if n > 2:
            s2 = float(((y - a - b * t) ** 2).sum() / (n - 2))
            ub = math.sqrt(s2 / sxx)
        birge, weighted = None, False
    established = ub is not None and abs(b) > 2.0 * ub
    return WearRate(float(b), None if ub is None else float(ub), float(a), int(n), t0, max(d), weighted,
                    None if birge is None else float(birge), bool(established))


def forecast_limit(rate: WearRate, last_date: str, last_flatness_um: float, last_U_um: float | None, limit) -> Forecast:
    """When the surface leaves its grade at the fitted rate (see the module notes).

    Parameters
    ----------
    rate : WearRate
    last_date : str
        Date of the last survey.
    last_flatness_um, last_U_um : float
        Its flatness and expanded uncertainty (µm; U may be None).
    limit : flatcheck.records.GradeLimit or Verdict
        The grade sought: ``standard``, ``grade``, ``limit_um``.
    """
    T = float(limit.limit_um)
    F = float(last_flatness_um)
    U = None if last_U_um is None else float(last_U_um)
    name = f"{limit.standard} grade {limit.grade} ({T:.3g} µm)"
    b = rate.rate_um_per_year
    if F > T:
        return Forecast(limit.standard, limit.grade, T, last_date, last_date,
                        f"the last survey ({last_date}) is already above the limit of {name}")
    if not rate.established or b <= 0:
        why = ("no established growth of flatness" if not rate.established
               else "flatness is not growing")
        return Forecast(limit.standard, limit.grade, T, None, None,
                        f"no forecast for {name}: {why} since {rate.since}")
    reach = _date_after(last_date, (T - F) / b)
    unproven = None if U is None else (last_date if F + U > T else _date_after(last_date, (T - U - F) / b))
    text = (f"at {b:.2g} µm/year (fitted to {rate.n} surveys since {rate.since}) the flatness reaches the limit of "
            f"{name} about {reach}")
    if unproven is not None:
        text += f"; conformity can no longer be proven (F + U above the limit) from about {unproven}"
    return Forecast(limit.standard, limit.grade, T, reach, unproven, text + "; an extrapolation of a straight line")


def wear_map(before, after, *, before_date: str = "", after_date: str = "", before_id: int = 0,
             after_id: int = 0) -> WearMap:
    """Change of height between two surveys of one surface (see the module notes).

    Parameters
    ----------
    before, after : HeightMap
        The earlier and the later survey (µm at mm).
    before_date, after_date : str
        Their dates, ``YYYY-MM-DD`` (for the time between them).
    before_id, after_id : int
        Their register numbers.

    Returns
    -------
    WearMap

    Raises
    ------
    InputValueError
        Fewer than three of the earlier survey's stations lie within the later survey's area.
    """
    from .. import least_squares_plane, match_nodes

    x, y = before.x_mm, before.y_mm
    za = None
    matched = ""
    if (before.names is not None and after.names is not None and sorted(before.names) == sorted(after.names)):
        pos = {n: i for i, n in enumerate(after.names)}
        idx = np.array([pos[n] for n in before.names])
        if np.allclose(after.x_mm[idx], x, atol=0.5) and np.allclose(after.y_mm[idx], y, atol=0.5):
            za, matched = after.height_um[idx], "station names"
    if za is None:
        try:
            idx = match_nodes(before, after)
            za, matched = after.height_um[idx], "positions"
        except InputValueError:
            za, matched = after.sample(x, y), "interpolation"
    keep = np.isfinite(za)
    if keep.sum() < 3:
        raise InputValueError("the two surveys share fewer than three stations", where="wear",
                              fix="compare two surveys of the same area of the surface")
    x, y = x[keep], y[keep]
    d = za[keep] - before.height_um[keep]
    fit = least_squares_plane(x, y, d)
    change = d - (fit.a_um + fit.b_um_per_mm * x + fit.c_um_per_mm * y)
    names = None if before.names is None else tuple(n for n, k in zip(before.names, keep) if k)
    years = years_between(before_date, after_date) if before_date and after_date else float("nan")
    return WearMap(before_id, after_id, before_date, after_date, years, matched, names, x, y, change)


# ----------------------------------------------------------------------------- from the register
def _points(register, ident: str) -> tuple:
    return tuple(
        HistoryPoint(r.survey_id, r.measured_on, r.state, r.flatness_um, r.expanded_uncertainty_um,
                     r.standard_uncertainty_um, r.instrument_ident, r.source_name, r.in_calibration)
        for r in register.surveys_of(ident)
    )


def surface_history(register, ident: str) -> SurfaceHistory:
    """The history of surface ``ident``: its surveys in date order, wear rate and forecast.

    Raises
    ------
    InputValueError
        The register has no such surface.
    """
    s = register.require_surface(ident)
    pts = _points(register, ident)
    notes = []
    rate = forecast = None
    # the rate since the last adjustment: from the last as-left survey on
    start = 0
    for k, p in enumerate(pts):
        if p.state == "as-left":
            start = k
    span = pts[start:]
    if len(span) >= 2 and span[0].date != span[-1].date:
        rate = fit_wear_rate([p.date for p in span], [p.flatness_um for p in span],
                             [p.standard_uncertainty_um for p in span])
        if start > 0:
            notes.append(f"rate fitted since the last as-left survey ({span[0].date})")
    elif pts:
        notes.append("no wear rate: it needs two surveys on different days since the last adjustment")
    limit = None
    if pts:
        last = pts[-1]
        verdicts, vnotes = register.judge(ident, last.flatness_um, last.expanded_uncertainty_um)
        limit = next((v for v in verdicts if v.sought), None)
        if limit is None and s.standard and s.grade:
            notes.extend(vnotes)
        if rate is not None:
            if limit is not None:
                forecast = forecast_limit(rate, last.date, last.flatness_um, last.expanded_uncertainty_um, limit)
            elif not (s.standard and s.grade):
                notes.append(f"no forecast: no grade sought for {ident} (set --standard and --grade with "
                             "'flatcheck register surface')")
    return SurfaceHistory(s, pts, rate, forecast, tuple(notes), limit)


def survey_wear(register, ident: str, before_ref: str | None = None, after_ref: str | None = None) -> WearMap:
    """The wear map of surface ``ident`` between two of its surveys (default: the last two).

    Parameters
    ----------
    register : Register
    ident : str
    before_ref, after_ref : str, optional
        Survey numbers or dates (see :meth:`Register.find_survey`).

    Raises
    ------
    InputValueError
        Fewer than two surveys, an unknown survey, the later survey dated before the earlier.
    """
    register.require_surface(ident)
    rows = register.surveys_of(ident)
    if before_ref is None and after_ref is None:
        if len(rows) < 2:
            raise InputValueError(f"surface {ident} has {len(rows)} survey(s); a wear map needs two",
                                  where=str(register.path), fix="add another survey of the surface")
        b, a = rows[-2], rows[-1]
    else:
        if before_ref is None or after_ref is None:
            raise InputValueError("give both surveys or neither", where="--from/--to",
                                  fix="give --from and --to, or neither for the last two surveys")
        b, a = register.find_survey(ident, before_ref), register.find_survey(ident, after_ref)
    if a.measured_on < b.measured_on:
        raise InputValueError(f"survey {a.survey_id} ({a.measured_on}) is older than survey {b.survey_id} "
                              f"({b.measured_on})", where="--from/--to", fix="give the earlier survey with --from")
    if a.survey_id == b.survey_id:
        raise InputValueError("the two surveys are the same", where="--from/--to", fix="give two different surveys")
    return wear_map(register.heights(b.survey_id), register.heights(a.survey_id), before_date=b.measured_on,
                    after_date=a.measured_on, before_id=b.survey_id, after_id=a.survey_id)
