"""Time to expiry on trading-time and calendar bases, and vol conversion between bases.

Source tags as in REFERENCE.md: [V] read in a copy of the source, [L] library
oracle, [M] from memory, [C] common practice, [D] derived (consistency only).
Worked cases are computed by hand in each docstring; holidays used are those of
the NYSE 2026/2027 calendar [V, REFERENCE.md §8].
"""

from __future__ import annotations

import datetime as dt
import math

import numpy as np
import pandas as pd
import pytest

from chaintriage.core.exchange_calendar import ExchangeCalendar
from chaintriage.core.findings import ChainTriageError
from chaintriage.core.time_to_expiry import (
    BASES,
    calendar_days_to_expiry,
    convert_vol,
    convert_vol_basis,
    trading_days_to_expiry,
    year_fraction,
)

NY = "America/New_York"


def ny(text: str) -> pd.Timestamp:
    return pd.Timestamp(text, tz=NY)


# ---- trading-time bases: worked cases --------------------------------------------


def test_worked_case_mid_session_to_friday_pm():
    """as_of Tue 2026-12-01 14:30 New York, PM expiry Fri 2026-12-04.

    Today: 16:00 - 14:30 = 1.5 h of a 6.5 h session = 0.230769 day.
    Full trading days strictly between: Wed 2, Thu 3 = 2.
    Expiry day, PM settlement at the close: 1.
    Total 3.230769 trading days; /252 = 0.0128205 years; /250 = 0.0129231. [D, by hand]
    """
    a = ny("2026-12-01 14:30")
    days = 1.5 / 6.5 + 2 + 1
    assert days == pytest.approx(3.230769, abs=5e-7)
    assert year_fraction(a, ["2026-12-04"], "pm")[0] == pytest.approx(days / 252, rel=1e-14)
    assert year_fraction(a, ["2026-12-04"], "pm", basis="250")[0] == pytest.approx(days / 250, rel=1e-14)
    # AM settlement at Friday's open: Friday's session does not count.
    assert year_fraction(a, ["2026-12-04"], "am")[0] == pytest.approx((days - 1) / 252, rel=1e-14)


def test_am_and_pm_differ_by_exactly_one_session():
    """[D] For any expiry after today that is a trading day, PM - AM = one session = 1/basis."""
    a = ny("2026-11-24 10:17")
    exp = pd.date_range("2026-11-25", "2027-03-31", freq="D")
    trading = ExchangeCalendar().is_trading_day(exp)
    for basis, n in (("252", 252), ("250", 250)):
        diff = year_fraction(a, exp, "pm", basis=basis) - year_fraction(a, exp, "am", basis=basis)
        np.testing.assert_allclose(diff[trading], 1 / n, rtol=1e-12)
        # An expiry date with no session: both stop at the last close before it.
        np.testing.assert_allclose(diff[~trading], 0.0, atol=1e-15)


def test_session_fraction_before_open_after_close_and_on_weekend():
    """[D] by hand, PM expiry Fri 2026-12-04.

    Before Tuesday's open: whole Tuesday + Wed + Thu + Fri = 4 days.
    After Tuesday's close: Wed + Thu + Fri = 3 days.
    Saturday 2026-11-28 with a PM expiry Fri 2026-12-04: Mon..Fri = 5 days.
    """
    e = ["2026-12-04"]
    assert year_fraction(ny("2026-12-01 08:00"), e)[0] * 252 == pytest.approx(4.0, abs=1e-12)
    assert year_fraction(ny("2026-12-01 09:30"), e)[0] * 252 == pytest.approx(4.0, abs=1e-12)
    assert year_fraction(ny("2026-12-01 16:00"), e)[0] * 252 == pytest.approx(3.0, abs=1e-12)
    assert year_fraction(ny("2026-12-01 23:59"), e)[0] * 252 == pytest.approx(3.0, abs=1e-12)
    assert year_fraction(ny("2026-11-28 12:00"), e)[0] * 252 == pytest.approx(5.0, abs=1e-12)


def test_early_close_day_fractions():
    """Fri 2026-11-27 closes at 13:00 [V, NYSE]: its session is 09:30-13:00 = 3.5 h.

    as_of 11:00: 2 h of 3.5 h left = 0.571429 day.
    - PM expiry the same day: 0.571429 / 252.
    - PM expiry Mon 2026-11-30: 0.571429 + 1 = 1.571429 days; AM: 0.571429.
    as_of 14:00 (after the early close): PM Monday = 1 day exactly.
    A short session still counts one whole unit: from Wed 2026-12-23 after the close,
    PM expiry Thu 2026-12-24 (13:00 close) = 1 day. [D, by hand]
    """
    a = ny("2026-11-27 11:00")
    f = 2.0 / 3.5
    got = year_fraction(a, ["2026-11-27", "2026-11-30", "2026-11-30"], ["pm", "pm", "am"]) * 252
    np.testing.assert_allclose(got, [f, 1 + f, f], rtol=1e-13)
    assert year_fraction(ny("2026-11-27 14:00"), ["2026-11-30"])[0] * 252 == pytest.approx(1.0, abs=1e-12)
    assert year_fraction(ny("2026-12-23 16:30"), ["2026-12-24"])[0] * 252 == pytest.approx(1.0, abs=1e-12)
    # Half-way through the short session, half a unit is left.
    assert year_fraction(ny("2026-11-27 11:15"), ["2026-11-27"])[0] * 252 == pytest.approx(0.5, abs=1e-12)


def test_thanksgiving_week():
    """as_of Mon 2026-11-23 08:00, expiry Fri 2026-11-27 (early close). [D, by hand]

    Trading: Mon (whole, before the open) + Tue + Wed + Thu (Thanksgiving, closed: 0)
    + Fri PM (1) = 4 days; AM = 3 days.
    Calendar: PM settles Fri 13:00, 4 days 5 h after Mon 08:00 = 4.208333 days;
    AM settles Fri 09:30, 4 days 1.5 h later = 4.0625 days.
    """
    a = ny("2026-11-23 08:00")
    e = ["2026-11-27", "2026-11-27"]
    s = ["pm", "am"]
    np.testing.assert_allclose(year_fraction(a, e, s) * 252, [4.0, 3.0], rtol=1e-13)
    np.testing.assert_allclose(year_fraction(a, e, s, basis="365") * 365, [4 + 5 / 24, 4 + 1.5 / 24], rtol=1e-13)


def test_expiry_today_and_expired():
    """[C] AM settlement is at the open: once it has passed (or even before it) no trading
    time is left; PM today keeps the rest of the session; past expiries give 0."""
    a = ny("2026-12-01 12:00")
    got = year_fraction(a, ["2026-12-01", "2026-12-01", "2026-11-30", "2025-01-02"], ["pm", "am", "pm", "am"])
    np.testing.assert_allclose(got * 252, [4 / 6.5, 0.0, 0.0, 0.0], atol=1e-14)
    # Before the open the AM settlement is still ahead on the calendar clock, but no session.
    early = ny("2026-12-01 08:30")
    assert year_fraction(early, ["2026-12-01"], "am")[0] == 0.0
    assert year_fraction(early, ["2026-12-01"], "am", basis="365")[0] == pytest.approx(1 / 24 / 365, rel=1e-12)
    # After the close, a PM expiry today is over on every basis.
    late = ny("2026-12-01 16:30")
    for basis in BASES:
        assert year_fraction(late, ["2026-12-01"], "pm", basis=basis)[0] == 0.0


def test_extra_closed_date_shifts_count_by_one():
    """[D] Closing Wed 2026-12-02 removes one day from the worked case: 2.230769 days."""
    a = ny("2026-12-01 14:30")
    cal = ExchangeCalendar(extra_closed=["2026-12-02"])
    base = year_fraction(a, ["2026-12-04"])[0] * 252
    assert year_fraction(a, ["2026-12-04"], calendar=cal)[0] * 252 == pytest.approx(base - 1, abs=1e-12)
    # An extra early close on today changes today's fraction: 13:00 close, 09:30-13:00 session.
    cal2 = ExchangeCalendar(extra_early_closes=["2026-12-01"])
    got = year_fraction(ny("2026-12-01 11:15"), ["2026-12-01"], calendar=cal2)[0] * 252
    assert got == pytest.approx(0.5, abs=1e-12)


def test_expiry_on_a_holiday_stops_at_the_last_close():
    """[D] Good Friday 2026-04-03 is closed: from Wed 2026-04-01 after the close, a PM
    'expiry' dated Good Friday counts only Thursday (1 day), like a Thursday PM expiry."""
    a = ny("2026-04-01 17:00")
    got = year_fraction(a, ["2026-04-03", "2026-04-02", "2026-04-03"], ["pm", "pm", "am"]) * 252
    np.testing.assert_allclose(got, [1.0, 1.0, 1.0], atol=1e-12)


# ---- calendar basis ------------------------------------------------------------------


def test_act365_thirty_calendar_days_is_exactly_30_over_365():
    """[C] ACT/365: Sat 2026-09-12 16:00 to the PM close Mon 2026-10-12 16:00 = 30 days."""
    got = year_fraction(ny("2026-09-12 16:00"), ["2026-10-12"], "pm", basis="365")[0]
    assert got == 30 / 365
    # Across the end of daylight saving (1 Nov 2026) the wall clock still gives 30 days.
    got = year_fraction(ny("2026-10-20 16:00"), ["2026-11-19"], "pm", basis="365")[0]
    assert got == 30 / 365


def test_act365_settlement_times():
    """[D] PM settles at the close (13:00 on an early-close day), AM at 09:30 New York."""
    a = ny("2026-11-20 13:00")
    got = year_fraction(a, ["2026-11-27", "2026-11-27", "2026-12-04"], ["pm", "am", "pm"], basis="365") * 365
    np.testing.assert_allclose(got, [7.0, 7 - 3.5 / 24, 14 + 3 / 24], rtol=1e-13)


# ---- time zones -------------------------------------------------------------------------


def test_as_of_time_zones():
    """[D] 19:30 UTC on 1 Dec 2026 is 14:30 EST; a naive as_of is New York wall clock."""
    e = ["2026-12-04"]
    ref = year_fraction(ny("2026-12-01 14:30"), e)
    assert year_fraction(pd.Timestamp("2026-12-01 19:30", tz="UTC"), e)[0] == ref[0]
    assert year_fraction(pd.Timestamp("2026-12-01 14:30"), e)[0] == ref[0]
    assert year_fraction("2026-12-01T14:30:00-05:00", e)[0] == ref[0]
    # Summer: 09:30 EDT is 13:30 UTC, so 14:00 UTC is half an hour into the session.
    got = year_fraction(pd.Timestamp("2026-07-01 14:00", tz="UTC"), ["2026-07-01"])[0] * 252
    assert got == pytest.approx(6.0 / 6.5, abs=1e-12)


# ---- sqrt-time scaling ---------------------------------------------------------------------


def test_daily_vol_of_20pct_annual():
    """Hull §15.4 [V] (via REFERENCE.md §9): 20% annual vol is 1.2599% per day on 252,
    1.2649% on 250 and 1.0468% on 365. One session (before Tuesday's open to its close)
    is 1/252 or 1/250 of a year; one calendar day close to close is 1/365."""
    t252 = year_fraction(ny("2026-12-01 08:00"), ["2026-12-01"], basis="252")[0]
    t250 = year_fraction(ny("2026-12-01 08:00"), ["2026-12-01"], basis="250")[0]
    t365 = year_fraction(ny("2026-11-30 16:00"), ["2026-12-01"], basis="365")[0]
    assert 0.2 * math.sqrt(t252) == pytest.approx(0.012599, abs=5e-7)
    assert 0.2 * math.sqrt(t250) == pytest.approx(0.012649, abs=5e-7)
    assert 0.2 * math.sqrt(t365) == pytest.approx(0.010468, abs=5e-7)


def test_hull_daily_to_annual_and_one_sd_moves():
    """Hull Ex.15.4 [V]: daily 1.216% is 0.01216*sqrt(252) = 0.193 annual: one day (1/252 of a
    year) carries the same variance as a 'vol per day' over 1 day.
    REFERENCE.md §9 [D]: 1-SD move for S=100, sigma=.2 is 5.7338 over 30 calendar days (/365)
    and 5.7735 over 21 trading days (/252); Sat 2026-09-12 to Mon 2026-10-12 is both."""
    assert convert_vol(0.01216, 1.0, 1 / 252) == pytest.approx(0.193, abs=5e-4)
    a = ny("2026-09-12 16:00")
    t365 = year_fraction(a, ["2026-10-12"], basis="365")[0]
    t252 = year_fraction(a, ["2026-10-12"], basis="252")[0]
    assert t252 * 252 == pytest.approx(21.0, abs=1e-12)
    assert 100 * 0.2 * math.sqrt(t365) == pytest.approx(5.7338, abs=5e-5)
    assert 100 * 0.2 * math.sqrt(t252) == pytest.approx(5.7735, abs=5e-5)


def test_convert_vol_preserves_total_variance_and_round_trips():
    """[D] sigma**2 * T is the invariant; converting there and back returns the vol."""
    a = ny("2026-11-23 11:45")
    exp = pd.date_range("2026-11-24", "2028-06-30", freq="7D")
    sigma = np.linspace(0.08, 1.2, exp.size)
    for f, t in (("365", "252"), ("252", "250"), ("250", "365")):
        s_to = convert_vol_basis(sigma, a, exp, "pm", f, t)
        t_from = year_fraction(a, exp, "pm", basis=f)
        t_to = year_fraction(a, exp, "pm", basis=t)
        np.testing.assert_allclose(s_to**2 * t_to, sigma**2 * t_from, rtol=1e-13)
        back = convert_vol_basis(s_to, a, exp, "pm", t, f)
        np.testing.assert_allclose(back, sigma, rtol=1e-13)
    np.testing.assert_allclose(convert_vol(convert_vol(0.25, 0.1, 0.13), 0.13, 0.1), 0.25, rtol=1e-15)
    # By hand: Sat 2026-09-12 16:00 to Mon 2026-10-12 PM is 30/365 calendar and 21/252
    # trading years, so 20% on ACT/365 is 0.2*sqrt((30/365)/(21/252)) = 19.863% on 252.
    s252 = convert_vol_basis(0.2, ny("2026-09-12 16:00"), ["2026-10-12"], "pm", "365", "252")[0]
    assert s252 == pytest.approx(0.2 * math.sqrt((30 / 365) / (21 / 252)), rel=1e-14)
    assert s252 == pytest.approx(0.19863, abs=5e-6)


def test_convert_vol_edges():
    out = convert_vol([0.2, 0.2, 0.2], [0.1, 0.1, -0.1], [0.0, 0.1, 0.1])
    assert np.isnan(out[0]) and out[1] == pytest.approx(0.2) and np.isnan(out[2])
    # No time left: nothing to convert.
    assert np.isnan(convert_vol_basis(0.2, ny("2026-12-01 17:00"), ["2026-12-01"], "pm", "365", "252")[0])


# ---- display counts ---------------------------------------------------------------------


def test_display_day_counts():
    """[D] from Tue 2026-12-01: Fri 4 Dec is 3 trading / 3 calendar days away; Fri 15 Jan 2027
    is 45 calendar days and 31 trading days away (Dec 2-31: 22 weekdays - Christmas = 21;
    1 Jan closed; Jan 4-15: 10)."""
    a = ny("2026-12-01 14:30")
    e = ["2026-12-01", "2026-12-04", "2027-01-15", "2026-11-30"]
    assert trading_days_to_expiry(a, e).tolist() == [0, 3, 31, -1]
    assert calendar_days_to_expiry(a, e).tolist() == [0, 3, 45, -1]
    # The New York date counts: 02:00 UTC on 2 Dec is still 1 Dec in New York.
    assert calendar_days_to_expiry(pd.Timestamp("2026-12-02 02:00", tz="UTC"), ["2026-12-04"]).tolist() == [3]


# ---- bad input ------------------------------------------------------------------------------


def test_bad_input():
    a = ny("2026-12-01 14:30")
    with pytest.raises(ChainTriageError, match="basis"):
        year_fraction(a, ["2026-12-04"], basis="360")
    with pytest.raises(ChainTriageError, match="settle"):
        year_fraction(a, ["2026-12-04"], "noon")
    with pytest.raises(ChainTriageError, match="settle"):
        year_fraction(a, ["2026-12-04", "2026-12-05"], ["pm"])
    with pytest.raises(ChainTriageError):
        year_fraction("yesterday-ish", ["2026-12-04"])
    with pytest.raises(ChainTriageError):
        year_fraction(a, ["2026-02-30"])
    with pytest.raises(ChainTriageError):
        year_fraction(pd.NaT, ["2026-12-04"])
    with pytest.raises(ChainTriageError):
        trading_days_to_expiry(a, [None])
    # A missing expiry in an array gives NaN, the others are computed.
    got = year_fraction(a, np.array(["2026-12-04", "NaT"], dtype="datetime64[D]"))
    assert got[0] > 0 and np.isnan(got[1])


# ---- vectorised result equals a per-element reference loop -----------------------------------


def _reference(as_of: pd.Timestamp, expiries, settle, basis: str, cal: ExchangeCalendar) -> list[float]:
    """Plain per-element loop: the module docstring's rules, with Python dates."""
    hol = {d.date() for d in cal.holidays("2025-01-01", "2030-12-31")}
    early = {d.date() for d in cal.early_closes("2025-01-01", "2030-12-31")}
    first, last = dt.date(2025, 1, 1), dt.date(2030, 12, 31)
    trading = set()
    d = first
    while d <= last:
        if d.weekday() < 5 and d not in hol:
            trading.add(d)
        d += dt.timedelta(days=1)
    before = {}  # trading days strictly before each date
    n, d = 0, first
    while d <= last:
        before[d] = n
        n += d in trading
        d += dt.timedelta(days=1)
    local = as_of.tz_convert(NY)
    d0 = local.date()
    now = local.hour * 60 + local.minute + local.second / 60
    close0 = 13 * 60 if d0 in early else 16 * 60
    today = min(max((close0 - max(now, 570)) / (close0 - 570), 0.0), 1.0) if d0 in trading else 0.0
    out = []
    for e, s in zip(expiries, settle, strict=True):
        pm = s.lower() == "pm"
        if basis == "365":
            settle_min = (13 * 60 if e in early else 16 * 60) if pm else 570
            days = (e - d0).days + (settle_min - now) / 1440
        elif e < d0:
            days = 0.0
        elif e == d0:
            days = today if pm else 0.0
        else:
            days = today + (before[e] - before[d0 + dt.timedelta(days=1)]) + (1 if pm and e in trading else 0)
        out.append(max(days, 0.0) / float(basis))
    return out


@pytest.mark.parametrize(
    "as_of",
    ["2026-11-27 10:40", "2026-12-01 08:00", "2026-12-01 14:30:30", "2026-12-01 18:00", "2026-12-26 12:00"],
)
def test_ten_thousand_expiries_match_reference_loop(as_of):
    """[D] The vectorised result equals the per-element loop for 10,000 mixed expiries."""
    rng = np.random.default_rng(2026)
    cal = ExchangeCalendar(extra_closed=["2027-03-10"], extra_early_closes=["2027-05-28"])
    a = ny(as_of)
    start = dt.date(2026, 11, 20)
    offsets = rng.integers(0, 800, 10_000)
    expiries = [start + dt.timedelta(days=int(k)) for k in offsets]
    settle = rng.choice(np.array(["pm", "am", "PM", "Am"], dtype=object), 10_000)
    for basis in BASES:
        got = year_fraction(a, np.array(expiries, dtype="datetime64[D]"), settle, basis=basis, calendar=cal)
        want = _reference(a, expiries, settle, basis, cal)
        assert got.dtype == np.float64 and got.shape == (10_000,)
        np.testing.assert_allclose(got, want, rtol=1e-12, atol=1e-15)


def test_input_forms_agree():
    """[D] Strings, dates, datetime64, DatetimeIndex and Series give the same answer."""
    a = ny("2026-12-01 14:30")
    forms = [
        ["2026-12-04", "2027-01-15"],
        [dt.date(2026, 12, 4), dt.date(2027, 1, 15)],
        np.array(["2026-12-04", "2027-01-15"], dtype="datetime64[D]"),
        pd.DatetimeIndex(["2026-12-04", "2027-01-15"]),
        pd.Series(pd.to_datetime(["2026-12-04", "2027-01-15"])),
    ]
    ref = year_fraction(a, forms[0])
    for f in forms[1:]:
        np.testing.assert_array_equal(year_fraction(a, f), ref)
    assert year_fraction(a, "2026-12-04").shape == (1,)
