"""History: the wear rate fit, the forecast, and the wear map between two surveys."""

import dataclasses
import datetime as dt

import numpy as np
import pytest

import flatcheck
from flatcheck.errors import InputValueError
from flatcheck.records import (
    Register,
    fit_wear_rate,
    forecast_limit,
    parse_limits,
    round_to_uncertainty,
    surface_history,
    survey_wear,
    wear_map,
)


def _years(dates):
    d0 = dt.date.fromisoformat(min(dates))
    return np.array([(dt.date.fromisoformat(d) - d0).days / 365.25 for d in dates])


def test_exact_line_by_hand():
    # 2.0, 2.5, 3.0 µm one Julian year apart: the slope is 0.5 µm/year exactly (hand calculation)
    dates = ["2020-01-01", "2020-12-31", "2021-12-31"]  # 365 + 365 days; t = 0, 365/365.25, 730/365.25
    t = _years(dates)
    r = fit_wear_rate(dates, 2.0 + 0.5 * t)
    assert r.rate_um_per_year == pytest.approx(0.5, rel=1e-12)
    assert r.intercept_um == pytest.approx(2.0, rel=1e-12)
    assert r.u_rate_um_per_year == pytest.approx(0.0, abs=1e-12) and not r.weighted


def test_weighted_fit_by_hand_and_against_numpy():
    # t = 0, 1, 2 years (dates 365.25 days apart cannot be whole days; use the fit's own t)
    dates = ["2020-01-01", "2021-01-01", "2022-01-01"]
    t = _years(dates)
    y = np.array([1.0, 2.0, 2.0])
    u = np.array([1.0, 1.0, 2.0])
    r = fit_wear_rate(dates, y, u)
    # reference implementation: numpy.polyfit with weights 1/sigma and the unscaled covariance
    p, cov = np.polyfit(t, y, 1, w=1 / u, cov="unscaled")
    assert r.rate_um_per_year == pytest.approx(p[0], rel=1e-10)
    assert r.intercept_um == pytest.approx(p[1], rel=1e-10)
    chi2 = float(np.sum(((y - np.polyval(p, t)) / u) ** 2))
    assert r.birge_ratio == pytest.approx(np.sqrt(chi2), rel=1e-10)  # n - 2 = 1
    assert r.birge_ratio < 1  # scatter within the stated u: u(b) is the fit's own
    assert r.u_rate_um_per_year == pytest.approx(np.sqrt(cov[0, 0]), rel=1e-10)
    # hand calculation with t = 0, 1, 2 exactly: S = 2.25, Sx = 1.5, Sy = 3.5, Sxx = 2, Sxy = 3,
    # delta = 2.25; b = (2.25*3 - 1.5*3.5)/2.25 = 2/3; u(b) = sqrt(S/delta) = 1 (the dates are 366 and 365 days apart)
    assert r.rate_um_per_year == pytest.approx(2 / 3, rel=2e-3)
    assert r.u_rate_um_per_year == pytest.approx(1.0, rel=2e-3)
    assert not r.established  # 0.67 is within twice its uncertainty of zero


def test_scatter_beyond_the_stated_u_widens_the_rate_uncertainty():
    dates = ["2020-01-01", "2021-01-01", "2022-01-01", "2023-01-01"]
    y = [1.0, 3.0, 1.5, 3.5]
    u = [0.05] * 4
    r = fit_wear_rate(dates, y, u)
    p, cov = np.polyfit(_years(dates), y, 1, w=1 / np.array(u), cov="unscaled")
    assert r.birge_ratio > 1
    assert r.u_rate_um_per_year == pytest.approx(np.sqrt(cov[0, 0]) * r.birge_ratio, rel=1e-10)


def test_rate_needs_two_days():
    with pytest.raises(InputValueError, match="at least two"):
        fit_wear_rate(["2020-01-01"], [1.0])
    with pytest.raises(InputValueError, match="one day"):
        fit_wear_rate(["2020-01-01", "2020-01-01"], [1.0, 2.0])


@dataclasses.dataclass
class _Limit:
    standard: str = "DIN 876"
    grade: str = "0"
    limit_um: float = 3.5


def test_forecast_by_hand():
    dates = ["2020-01-01", "2021-01-01", "2022-01-01"]
    r = fit_wear_rate(dates, 2.0 + 0.5 * _years(dates), [0.01] * 3)  # exactly 0.5 µm per Julian year
    assert r.rate_um_per_year == pytest.approx(0.5, rel=1e-12) and r.established
    # last survey 3.0 µm on 2022-01-01, limit 3.5 µm: 1 year later = 365.25 days -> 365 days -> 2023-01-01
    # (hand calculation)
    f = forecast_limit(r, "2022-01-01", 3.0, 0.2, _Limit())
    assert f.reaches_limit_on == "2023-01-01"
    # conformity unproven when F + U = T: (3.5 - 0.2 - 3.0) / 0.5 = 0.6 year = 219 days -> 2022-08-08
    assert f.unproven_from == "2022-08-08"
    # not growing: no forecast
    r2 = fit_wear_rate(dates, [3.0, 2.5, 2.0], [0.01] * 3)
    assert forecast_limit(r2, "2022-01-01", 2.0, 0.2, _Limit()).reaches_limit_on is None
    # already above
    assert forecast_limit(r, "2022-01-01", 3.6, 0.2, _Limit()).reaches_limit_on == "2022-01-01"


def test_round_to_uncertainty_by_hand():
    # JCGM 100:2008 7.2.6 (from memory): U to two significant digits, the value to the same place
    assert round_to_uncertainty(3.14159, 0.2345) == ("3.14", "0.23")
    assert round_to_uncertainty(12.3456, 1.26) == ("12.3", "1.3")
    assert round_to_uncertainty(1.23456, 0.0996) == ("1.23", "0.10")
    assert round_to_uncertainty(1234.5, 123.4) == ("1230", "120")
    assert round_to_uncertainty(2.5, None) == ("2.500", "")


# ----------------------------------------------------------------------------- wear maps
def _plate(height_fn, date, *, rng=None):
    """A noise-free Union Jack survey of a 1000 x 630 mm plate (invented: KY-P5) from a surface."""
    inst = flatcheck.Instrument("autocollimator", "arcsec", reading_uncertainty=0.1)
    surface = flatcheck.Surface("granite plate (test)", 1000.0, 630.0, ident="KY-P5")
    plan = flatcheck.plan_union_jack(1000.0, 630.0, 100.0, margin_mm=30.0, instrument=inst, surface=surface)
    sim = flatcheck.simulate_survey(plan, height_fn, rng=rng)
    return dataclasses.replace(sim, date=date)


def _crown(x, y):
    return 1.5 * (1 - ((x - 500) / 500) ** 2) + 0.8 * (1 - ((y - 315) / 315) ** 2) + 0.002 * x


def _worn(x, y):  # worn 1 µm deep where a height gauge stands, near (300, 215) mm
    return _crown(x, y) - 1.0 * np.exp(-((x - 300) ** 2 + (y - 215) ** 2) / (2 * 80.0**2))


def test_wear_map_finds_the_worn_spot_exactly(tmp_path):
    a = tmp_path / "a.toml"
    b = tmp_path / "b.toml"
    flatcheck.write_survey(a, _plate(_crown, "2023-05-02"))
    flatcheck.write_survey(b, _plate(_worn, "2025-05-02"))
    ha = flatcheck.reduce_survey(flatcheck.read_survey(a)).heightmap
    hb = flatcheck.reduce_survey(flatcheck.read_survey(b)).heightmap
    w = wear_map(ha, hb, before_date="2023-05-02", after_date="2025-05-02")
    assert w.matched_by == "station names"
    assert w.years == pytest.approx(731 / 365.25)
    # reference: the true change at the stations minus its least-squares plane (numpy.linalg.lstsq)
    true = _worn(w.x_mm, w.y_mm) - _crown(w.x_mm, w.y_mm)
    A = np.column_stack([np.ones_like(w.x_mm), w.x_mm, w.y_mm])
    true -= A @ np.linalg.lstsq(A, true, rcond=None)[0]
    assert np.max(np.abs(w.change_um - true)) < 1e-6  # readings are written to ~1e-9 arcsec
    # the station nearest the worn spot went down most
    d = np.hypot(w.x_mm - 300, w.y_mm - 215)
    assert w.worst == int(np.argmin(d))


def test_wear_map_by_position_and_by_interpolation():
    x, y = np.meshgrid(np.arange(0.0, 101, 10), np.arange(0.0, 61, 10))
    x, y = x.ravel(), y.ravel()
    before = flatcheck.HeightMap(x, y, np.zeros_like(x))
    dip = -np.exp(-((x - 50) ** 2 + (y - 30) ** 2) / 200)
    after = flatcheck.HeightMap(x[::-1].copy(), y[::-1].copy(), dip[::-1].copy())  # same points, other order
    w = wear_map(before, after)
    assert w.matched_by == "positions" and w.worst == int(np.argmin(dip))
    # a finer later map: interpolated at the earlier stations (exact for a plane: bilinear reproduces it)
    xf, yf = np.meshgrid(np.arange(0.0, 101, 5), np.arange(0.0, 61, 5))
    plane = flatcheck.HeightMap(xf.ravel(), yf.ravel(), 0.01 * xf.ravel() - 0.02 * yf.ravel())
    w2 = wear_map(before, plane)
    assert w2.matched_by == "interpolation"
    assert np.max(np.abs(w2.change_um)) < 1e-9  # a plane is no wear


def test_history_from_the_register(tmp_path, entry_of):
    """Surveys of a plate wearing steadily: the rate since the last lapping and a forecast."""
    lim = parse_limits('''
format = "flatcheck-limits"
version = 1
[[table]]
standard = "DIN 876"
source = "test table for flatcheck's tests"
unit = "um"
length_unit = "mm"
grades = ["0"]
[table.formula]
"0" = { constant = 4.0, linear = 0.004 }
''')
    db = tmp_path / "r.sqlite"
    files = []
    for k, (date, depth) in enumerate([("2021-03-01", 3.0), ("2022-03-01", 0.0), ("2023-03-01", 1.5),
                                       ("2024-03-01", 3.0), ("2025-03-01", 4.5)]):
        def fn(x, y, depth=depth):
            return _crown(x, y) - depth * np.exp(-((x - 300) ** 2 + (y - 215) ** 2) / (2 * 80.0**2))

        p = tmp_path / f"s{k}.toml"
        flatcheck.write_survey(p, _plate(fn, date))
        files.append(p)
    with Register.open(db, create=True) as reg:
        reg.add_limits(lim)
        reg.set_surface("KY-P5", length_mm=1000.0, width_mm=630.0, standard="DIN 876", grade="0")
        for k, p in enumerate(files):
            reg.add_survey(entry_of(p, state="as-left" if k == 1 else "as-found"))
    with Register.open(db, readonly=True) as reg:
        h = surface_history(reg, "KY-P5")
        w = survey_wear(reg, "KY-P5", "2022-03-01", "2025-03-01")
        last_two = survey_wear(reg, "KY-P5")
    assert [p.date for p in h.points] == ["2021-03-01", "2022-03-01", "2023-03-01", "2024-03-01", "2025-03-01"]
    assert h.rate.n == 4 and h.rate.since == "2022-03-01"  # since the as-left survey after lapping
    assert h.rate.rate_um_per_year > 0 and h.rate.established
    assert h.limit.limit_um == pytest.approx(8.0)
    assert h.forecast is not None and h.forecast.reaches_limit_on > "2025-03-01"
    assert w.before_date == "2022-03-01" and last_two.before_date == "2024-03-01"
    assert np.hypot(w.x_mm[w.worst] - 300, w.y_mm[w.worst] - 215) < 120
