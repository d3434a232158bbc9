"""US equity exchange calendar checked against published calendars and outside libraries.

Source tags as in REFERENCE.md: [V] read in a copy of the source, [L] a library
used as oracle, [M] from memory, [D] derived (consistency only).
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd
import pytest
from dateutil.easter import easter

from chaintriage.core.exchange_calendar import (
    EARLY_SESSION_HOURS,
    REGULAR_SESSION_HOURS,
    ExchangeCalendar,
    default_calendar,
)
from chaintriage.core.findings import ChainTriageError

NY = "America/New_York"

# NYSE Group press releases "2025, 2026 and 2027 Holiday and Early Closings Calendar"
# (8 Nov 2024) and "2026, 2027 and 2028 ..." (23 Dec 2025), via REFERENCE.md §8 [V].
HOLIDAYS_2026 = [
    "2026-01-01",  # New Year's Day, Thu
    "2026-01-19",  # MLK Jr. Day
    "2026-02-16",  # Washington's Birthday
    "2026-04-03",  # Good Friday (Easter 5 Apr)
    "2026-05-25",  # Memorial Day
    "2026-06-19",  # Juneteenth, Fri
    "2026-07-03",  # Independence Day observed (4 Jul is a Saturday)
    "2026-09-07",  # Labor Day
    "2026-11-26",  # Thanksgiving
    "2026-12-25",  # Christmas, Fri
]
HOLIDAYS_2027 = [
    "2027-01-01",  # New Year's Day, Fri
    "2027-01-18",  # MLK Jr. Day
    "2027-02-15",  # Washington's Birthday
    "2027-03-26",  # Good Friday (Easter 28 Mar)
    "2027-05-31",  # Memorial Day
    "2027-06-18",  # Juneteenth observed (19 Jun is a Saturday)
    "2027-07-05",  # Independence Day observed (4 Jul is a Sunday)
    "2027-09-06",  # Labor Day
    "2027-11-25",  # Thanksgiving
    "2027-12-24",  # Christmas observed (25 Dec is a Saturday)
]

# Unscheduled closures that QuantLib's NYSE calendar lists and no rule produces.
UNSCHEDULED = [
    "2001-09-11", "2001-09-12", "2001-09-13", "2001-09-14",  # September 11 attacks [M]
    "2004-06-11",  # President Reagan's funeral [M]
    "2007-01-02",  # President Ford's funeral [M]
    "2012-10-29", "2012-10-30",  # Hurricane Sandy [M]
    "2018-12-05",  # President G. H. W. Bush's funeral [V, REFERENCE.md §8]
    "2025-01-09",  # President Carter's funeral [V, REFERENCE.md §8]
]


def _days(index) -> list[str]:
    return [d.strftime("%Y-%m-%d") for d in index]


@pytest.fixture(scope="module")
def cal() -> ExchangeCalendar:
    return ExchangeCalendar()


# ---- published 2026 / 2027 calendars -------------------------------------------


@pytest.mark.parametrize("year, expected", [(2026, HOLIDAYS_2026), (2027, HOLIDAYS_2027)])
def test_full_year_holidays_match_nyse_press_release(cal, year, expected):
    # [V] NYSE press releases, REFERENCE.md §8 table.
    assert _days(cal.holidays(f"{year}-01-01", f"{year}-12-31")) == expected


def test_early_closes_2026_2027(cal):
    # [V] Fri 27 Nov 2026 and Fri 26 Nov 2027; Thu 24 Dec 2026 (REFERENCE.md §8: footnote
    # cut off in the copy, inferred from the rule). No July early close in either year
    # (3 Jul 2026 is the observed holiday, 3 Jul 2027 is a Saturday).
    assert _days(cal.early_closes("2026-01-01", "2027-12-31")) == ["2026-11-27", "2026-12-24", "2027-11-26"]


def test_dec_31_2027_is_open_because_jan_1_2028_is_a_saturday(cal):
    # [V] NYSE 2028 calendar footnote, "pursuant to NYSE Rule 7.2" (REFERENCE.md §8).
    assert dt.date(2028, 1, 1).weekday() == 5
    assert cal.is_trading_day(["2027-12-31"]).tolist() == [True]
    assert cal.session_close("2027-12-31") == pd.Timestamp("2027-12-31 16:00", tz=NY)
    assert _days(cal.holidays("2027-12-25", "2028-01-10")) == []
    # The same rule in 2022 [V]: 1 Jan 2022 a Saturday, Fri 31 Dec 2021 open.
    assert cal.is_trading_day(["2021-12-31"]).tolist() == [True]


@pytest.mark.parametrize("year", [2026, 2027])
def test_251_trading_days(cal, year):
    # [D] REFERENCE.md §8: 261 weekdays - 10 holidays.
    n = cal.trading_days_between([f"{year}-01-01"], [f"{year + 1}-01-01"])
    assert n.tolist() == [251]
    days = pd.date_range(f"{year}-01-01", f"{year}-12-31", freq="D")
    assert int(cal.is_trading_day(days).sum()) == 251


def test_juneteenth_from_2022(cal):
    # [V] Rule 7.2 amendment of 2021, applying from 2022 (REFERENCE.md §8).
    assert cal.is_trading_day(["2021-06-18", "2021-06-21"]).tolist() == [True, True]  # 19 Jun 2021 a Saturday
    assert cal.is_trading_day(["2022-06-20"]).tolist() == [False]  # 19 Jun 2022 a Sunday -> Mon 20 Jun
    assert cal.is_trading_day(["2023-06-19", "2024-06-19", "2025-06-19"]).tolist() == [False, False, False]


def test_2025_calendar_recent_year(cal):
    # 2025 NYSE calendar [M] (press release of 8 Nov 2024, not tabled in REFERENCE.md),
    # plus the unscheduled closure of 9 Jan 2025 [V, REFERENCE.md §8] as a user-added date.
    expected = [
        "2025-01-01", "2025-01-20", "2025-02-17", "2025-04-18", "2025-05-26",
        "2025-06-19", "2025-07-04", "2025-09-01", "2025-11-27", "2025-12-25",
    ]
    assert _days(cal.holidays("2025-01-01", "2025-12-31")) == expected
    assert _days(cal.early_closes("2025-01-01", "2025-12-31")) == ["2025-07-03", "2025-11-28", "2025-12-24"]
    with_closure = ExchangeCalendar(extra_closed=["2025-01-09"])
    assert "2025-01-09" in _days(with_closure.holidays("2025-01-01", "2025-12-31"))


# ---- rules against outside oracles ----------------------------------------------


def test_good_friday_is_two_days_before_easter_1990_2100(cal):
    # [L] dateutil.easter (Gregorian computus) as oracle.
    hol = set(_days(cal.holidays("1990-01-01", "2100-12-31")))
    for year in range(1990, 2101):
        gf = easter(year) - dt.timedelta(days=2)
        assert gf.weekday() == 4
        assert gf.isoformat() in hol, year
    # Spot values printed in REFERENCE.md §8 [V]: Easter 5 Apr 2026 and 28 Mar 2027.
    assert easter(2026) == dt.date(2026, 4, 5) and easter(2027) == dt.date(2027, 3, 28)


def test_easter_computus_matches_dateutil_1583_2999():
    # [L] dateutil.easter (Gregorian, its default method) for every year of the Gregorian calendar here.
    from chaintriage.core.exchange_calendar import _easter_sunday

    years = np.arange(1583, 3000)
    ours = _easter_sunday(years)
    assert [d.isoformat() for d in ours.astype(object)] == [easter(int(y)).isoformat() for y in years]


def test_rules_match_pandas_holiday_rules_over_pandas_whole_range():
    # [L] pandas.tseries.holiday: the same NYSE rules written with pandas' own Holiday rules and
    # observances (used here as an oracle only), over every year a pandas Timestamp reaches.
    from pandas.tseries.holiday import (
        AbstractHolidayCalendar, DateOffset, Day, GoodFriday, Holiday, MO, TH, USLaborDay,
        USMemorialDay, USPresidentsDay, USThanksgivingDay, nearest_workday, sunday_to_monday,
    )

    from chaintriage.core.exchange_calendar import _rule_dates

    class Closed(AbstractHolidayCalendar):
        rules = [
            Holiday("new year", month=1, day=1, observance=sunday_to_monday),
            Holiday("mlk", month=1, day=1, offset=DateOffset(weekday=MO(3)), start_date=dt.datetime(1998, 1, 1)),
            USPresidentsDay, GoodFriday, USMemorialDay,
            Holiday("juneteenth", month=6, day=19, start_date=dt.datetime(2022, 1, 1), observance=nearest_workday),
            Holiday("independence", month=7, day=4, observance=nearest_workday),
            USLaborDay, USThanksgivingDay,
            Holiday("christmas", month=12, day=25, observance=nearest_workday),
        ]

    class Early(AbstractHolidayCalendar):
        rules = [
            Holiday("after thanksgiving", month=11, day=1, offset=[DateOffset(weekday=TH(4)), Day(1)]),
            Holiday("christmas eve", month=12, day=24),
            Holiday("eve of independence", month=7, day=3),
        ]

    for lo, hi in ((1678, 2261), (2024, 2038)):
        start, end = pd.Timestamp(lo, 1, 1), pd.Timestamp(hi, 12, 31)
        closed, early = _rule_dates(lo, hi)
        np.testing.assert_array_equal(closed, np.unique(Closed().holidays(start, end).values.astype("datetime64[D]")))
        np.testing.assert_array_equal(early, np.unique(Early().holidays(start, end).values.astype("datetime64[D]")))


def test_whole_holiday_set_matches_quantlib_nyse_1998_2100():
    # [L] QuantLib UnitedStates(NYSE). QuantLib also lists unscheduled closures, which
    # no rule gives; with them added as extra closed dates the sets are identical.
    ql = pytest.importorskip("QuantLib")
    qcal = ql.UnitedStates(ql.UnitedStates.NYSE)
    qdays = {
        dt.date(d.year(), d.month(), d.dayOfMonth()).isoformat()
        for d in ql.Calendar.holidayList(qcal, ql.Date(1, 1, 1998), ql.Date(31, 12, 2100), False)
    }
    plain = set(_days(ExchangeCalendar().holidays("1998-01-01", "2100-12-31")))
    assert qdays - plain == set(UNSCHEDULED)
    assert plain - qdays == set()
    with_extra = set(_days(ExchangeCalendar(extra_closed=UNSCHEDULED).holidays("1998-01-01", "2100-12-31")))
    assert with_extra == qdays


def test_trading_day_counts_match_quantlib():
    # [L] QuantLib businessDaysBetween (includeFirst=True, includeLast=False) = [start, end),
    # with QuantLib's unscheduled closures (2025-01-09 falls in the range) added.
    ql = pytest.importorskip("QuantLib")
    cal = ExchangeCalendar(extra_closed=UNSCHEDULED)
    qcal = ql.UnitedStates(ql.UnitedStates.NYSE)
    rng = np.random.default_rng(7)
    starts = np.datetime64("2022-01-01") + rng.integers(0, 3000, 200).astype("timedelta64[D]")
    ends = starts + rng.integers(0, 800, 200).astype("timedelta64[D]")
    got = cal.trading_days_between(starts, ends)
    for s, e, g in zip(starts.tolist(), ends.tolist(), got.tolist(), strict=True):
        q = qcal.businessDaysBetween(ql.Date(s.day, s.month, s.year), ql.Date(e.day, e.month, e.year), True, False)
        assert g == q, (s, e)


# ---- rules in other years ([M]: the rule text of REFERENCE.md §8 applied) -------


def test_fixed_date_observance(cal):
    # Saturday -> Friday, Sunday -> Monday; New Year's Day on Sunday -> Monday.
    assert not cal.is_trading_day(["2023-01-02"])[0]  # 1 Jan 2023 a Sunday
    assert not cal.is_trading_day(["2022-12-26"])[0]  # 25 Dec 2022 a Sunday
    assert not cal.is_trading_day(["2021-12-24"])[0]  # 25 Dec 2021 a Saturday
    assert not cal.is_trading_day(["2021-07-05"])[0]  # 4 Jul 2021 a Sunday
    assert not cal.is_trading_day(["2020-07-03"])[0]  # 4 Jul 2020 a Saturday


def test_early_close_only_on_trading_days(cal):
    # July 3 closes early only when it is a trading day and not the observed holiday.
    early = set(_days(cal.early_closes("2018-01-01", "2030-12-31")))
    assert {"2018-07-03", "2019-07-03", "2023-07-03", "2024-07-03", "2025-07-03"} <= early
    assert "2020-07-03" not in early  # the observed Independence Day
    assert "2022-07-01" not in early  # 4 Jul 2022 a Monday: no rule early close
    assert "2021-12-24" not in early  # observed Christmas
    # Every listed early close is a trading day [D].
    assert cal.is_trading_day(sorted(early)).all()
    assert cal.is_early_close(sorted(early)).all()


# ---- session times ----------------------------------------------------------------


def test_session_times(cal):
    # Regular session 09:30-16:00 New York; 13:00 close on early-close days [V, NYSE calendar].
    assert cal.session_open("2026-12-01") == pd.Timestamp("2026-12-01 09:30", tz=NY)
    assert cal.session_close("2026-12-01") == pd.Timestamp("2026-12-01 16:00", tz=NY)
    assert cal.session_close("2026-11-27") == pd.Timestamp("2026-11-27 13:00", tz=NY)
    # UTC offsets follow daylight saving: 09:30 EDT = 13:30 UTC, 09:30 EST = 14:30 UTC.
    assert cal.session_open("2026-07-01").tz_convert("UTC") == pd.Timestamp("2026-07-01 13:30", tz="UTC")
    assert cal.session_open("2026-12-01").tz_convert("UTC") == pd.Timestamp("2026-12-01 14:30", tz="UTC")
    hours = cal.session_hours(["2026-12-01", "2026-11-27", "2026-11-26", "2026-11-28"])
    assert hours.tolist() == [6.5, 3.5, 0.0, 0.0]
    assert (REGULAR_SESSION_HOURS, EARLY_SESSION_HOURS) == (6.5, 3.5)
    opens = cal.session_opens(["2026-11-26", "2026-11-27"])
    assert pd.isna(opens[0]) and opens[1] == pd.Timestamp("2026-11-27 09:30", tz=NY)
    closes = cal.session_closes(np.array(["2026-12-24", "2026-12-25"], dtype="datetime64[D]"))
    assert closes[0] == pd.Timestamp("2026-12-24 13:00", tz=NY) and pd.isna(closes[1])


def test_session_on_closed_day_is_our_error(cal):
    with pytest.raises(ChainTriageError, match="closed"):
        cal.session_open("2026-12-25")
    with pytest.raises(ChainTriageError, match="closed"):
        cal.session_close("2026-12-26")


# ---- user-added dates ---------------------------------------------------------------


def test_extra_closed_shifts_counts_by_one(cal):
    # [D] one more closed weekday is one trading day fewer.
    extra = ExchangeCalendar(extra_closed=["2026-03-11"])
    base = cal.trading_days_between(["2026-03-01"], ["2026-04-01"])
    assert (extra.trading_days_between(["2026-03-01"], ["2026-04-01"]) == base - 1).all()
    assert extra.is_trading_day(["2026-03-11"]).tolist() == [False]
    # A closed date on a weekend changes nothing.
    sat = ExchangeCalendar(extra_closed=["2026-03-14"])
    assert (sat.trading_days_between(["2026-03-01"], ["2026-04-01"]) == base).all()


def test_extra_early_close(cal):
    extra = ExchangeCalendar(extra_early_closes=["2026-03-11", "2026-12-25"], extra_closed=["2026-03-12"])
    assert extra.session_close("2026-03-11") == pd.Timestamp("2026-03-11 13:00", tz=NY)
    assert not extra.is_early_close(["2026-12-25"])[0]  # a holiday stays closed
    both = ExchangeCalendar(extra_closed=["2026-11-27"])  # closed wins over a rule early close
    assert not both.is_trading_day(["2026-11-27"])[0]
    assert _days(both.early_closes("2026-01-01", "2026-12-31")) == ["2026-12-24"]


def test_bad_input_raises_our_error():
    with pytest.raises(ChainTriageError):
        ExchangeCalendar(extra_closed=["not a date"])
    with pytest.raises(ChainTriageError):
        default_calendar().is_trading_day(["2026-13-45"])
    with pytest.raises(ChainTriageError):
        default_calendar().trading_days_between([None], ["2026-01-05"])


def test_cache_extends_across_year_ranges():
    # [D] asking for a far range after a near one gives the same answers as a fresh calendar.
    c = ExchangeCalendar()
    near = _days(c.holidays("2026-01-01", "2026-12-31"))
    far = _days(c.holidays("2090-01-01", "2090-12-31"))
    assert near == HOLIDAYS_2026
    assert far == _days(ExchangeCalendar().holidays("2090-01-01", "2090-12-31"))
    assert _days(c.holidays("2026-01-01", "2026-12-31")) == HOLIDAYS_2026
    # Counting across the whole span uses holidays of every year in it.
    n = c.trading_days_between(["2000-01-01"], ["2091-01-01"])[0]
    assert n == int(c.is_trading_day(pd.date_range("2000-01-01", "2090-12-31")).sum())


def test_vectorised_queries_match_scalar_ones(cal):
    # [D] array answers equal element-by-element answers.
    days = pd.date_range("2026-11-20", "2027-01-10", freq="D")
    arr = cal.is_trading_day(days)
    one = [bool(cal.is_trading_day([d])[0]) for d in days]
    assert arr.tolist() == one
    assert arr.dtype == bool
    assert not cal.is_trading_day(np.array(["NaT"], dtype="datetime64[D]"))[0]
