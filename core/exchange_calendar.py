"""US equity exchange calendar: holidays, early closes and session times, by rule.

Rules (NYSE Rule 7.2, as in force since 2022):

- Full-day holidays: New Year's Day, Martin Luther King Jr. Day (3rd Monday
  of January, from 1998), Washington's Birthday (3rd Monday of February),
  Good Friday (two days before Gregorian Easter Sunday), Memorial Day (last
  Monday of May), Juneteenth (19 June, from 2022), Independence Day (4 July),
  Labor Day (1st Monday of September), Thanksgiving (4th Thursday of
  November) and Christmas (25 December).
- A fixed-date holiday on a Saturday is observed the Friday before, one on a
  Sunday the Monday after. Exception: when 1 January is a Saturday nothing is
  observed (the Friday before is the last day of the year and stays open).
- Early closes at 13:00 New York time: the day after Thanksgiving, Christmas
  Eve and 3 July, each only when it is a trading day.
- Regular session 09:30-16:00 America/New_York.

Unscheduled closures (e.g. 2025-01-09) follow no rule: pass them as
``extra_closed``; unscheduled early closes as ``extra_early_closes``. A date
that is both closed and an early close is closed.

The rules are today's: they are meant for dates from 1998 on, and ignore the
exchange's historical closures before that.

Units: dates are calendar dates (``datetime64[D]`` internally, any input that
``pandas.to_datetime`` accepts); session times are tz-aware pandas Timestamps
in America/New_York; session lengths are in hours.
"""

from __future__ import annotations

import datetime as _dt
from collections.abc import Iterable

import numpy as np
import pandas as pd

from .findings import ChainTriageError

#: The exchange's time zone.
TZ = "America/New_York"
#: Regular session open, close and early close (New York wall clock).
OPEN_TIME = _dt.time(9, 30)
CLOSE_TIME = _dt.time(16, 0)
EARLY_CLOSE_TIME = _dt.time(13, 0)

_OPEN_MIN = OPEN_TIME.hour * 60 + OPEN_TIME.minute
_CLOSE_MIN = CLOSE_TIME.hour * 60 + CLOSE_TIME.minute
_EARLY_MIN = EARLY_CLOSE_TIME.hour * 60 + EARLY_CLOSE_TIME.minute
#: Session lengths in hours: 6.5 regular, 3.5 early close.
REGULAR_SESSION_HOURS = (_CLOSE_MIN - _OPEN_MIN) / 60.0
EARLY_SESSION_HOURS = (_EARLY_MIN - _OPEN_MIN) / 60.0

_WEEKMASK = "1111100"


_MON, _THU, _SAT, _SUN = 0, 3, 5, 6


def _weekday(d: np.ndarray) -> np.ndarray:
    """Day of the week of ``datetime64[D]`` dates, Monday = 0 (1970-01-01 was a Thursday)."""
    return (d.astype(np.int64) + 3) % 7


def _day(years: np.ndarray, month: int, day: int) -> np.ndarray:
    """The date ``day`` ``month`` of each year, as ``datetime64[D]``."""
    first = (years - 1970).astype("datetime64[Y]").astype("datetime64[M]") + (month - 1)
    return first.astype("datetime64[D]") + (day - 1)


def _nth_weekday_from(d: np.ndarray, weekday: int, n: int) -> np.ndarray:
    """The n-th ``weekday`` on or after each date (n = 1: the date itself when it is one)."""
    return d + (weekday - _weekday(d)) % 7 + 7 * (n - 1)


def _last_weekday_until(d: np.ndarray, weekday: int) -> np.ndarray:
    """The last ``weekday`` on or before each date."""
    return d - (_weekday(d) - weekday) % 7


def _nearest_weekday(d: np.ndarray) -> np.ndarray:
    """A Saturday moved to the Friday before, a Sunday to the Monday after."""
    wd = _weekday(d)
    return d + np.where(wd == _SAT, -1, np.where(wd == _SUN, 1, 0))


def _sunday_to_monday(d: np.ndarray) -> np.ndarray:
    """A Sunday moved to the Monday after."""
    return d + (_weekday(d) == _SUN)


def _easter_sunday(years: np.ndarray) -> np.ndarray:
    """Gregorian Easter Sunday of each year (the anonymous Gregorian computus, as J. Meeus gives it
    in Astronomical Algorithms), as ``datetime64[D]``; tests check it against dateutil.easter."""
    y = years
    a, b, c = y % 19, y // 100, y % 100
    d, e = b // 4, b % 4
    f = (b + 8) // 25
    g = (b - f + 1) // 3
    h = (19 * a + b - d - g + 15) % 30
    i, k = c // 4, c % 4
    l_ = (32 + 2 * e + 2 * i - h - k) % 7
    m = (a + 11 * h + 22 * l_) // 451
    n = h + l_ - 7 * m + 114  # month n // 31 (March or April), day n % 31 + 1
    return _day(y, 3, 1) + (n // 31 - 3) * 31 + n % 31  # March has 31 days


def _rule_dates(lo: int, hi: int) -> tuple[np.ndarray, np.ndarray]:
    """(full-day closures by rule, early-close candidates) of the years ``lo..hi``, sorted
    ``datetime64[D]``; the closures may include a Saturday (New Year's Day), filtered later."""
    years = np.arange(lo, hi + 1)
    closed = [
        _sunday_to_monday(_day(years, 1, 1)),  # New Year's Day: a Saturday 1 January closes no weekday
        _nth_weekday_from(_day(years[years >= 1998], 1, 1), _MON, 3),  # Martin Luther King Jr. Day
        _nth_weekday_from(_day(years, 2, 1), _MON, 3),  # Washington's Birthday
        _easter_sunday(years) - 2,  # Good Friday
        _last_weekday_until(_day(years, 5, 31), _MON),  # Memorial Day
        _nearest_weekday(_day(years[years >= 2022], 6, 19)),  # Juneteenth
        _nearest_weekday(_day(years, 7, 4)),  # Independence Day
        _nth_weekday_from(_day(years, 9, 1), _MON, 1),  # Labor Day
        _nth_weekday_from(_day(years, 11, 1), _THU, 4),  # Thanksgiving
        _nearest_weekday(_day(years, 12, 25)),  # Christmas Day
    ]
    early = [
        _nth_weekday_from(_day(years, 11, 1), _THU, 4) + 1,  # the day after Thanksgiving
        _day(years, 12, 24),  # Christmas Eve
        _day(years, 7, 3),  # the eve of Independence Day
    ]
    return np.unique(np.concatenate(closed)), np.unique(np.concatenate(early))


def _as_dates(values, what: str = "date") -> np.ndarray:
    """Any date-like input (scalar or array) as a 1-d ``datetime64[D]`` array (NaT kept).

    A tz-aware input is first converted to New York time. Raises ChainTriageError
    on text that is not a date.
    """
    if isinstance(values, np.ndarray) and values.dtype.kind == "M":
        return values.astype("datetime64[D]").ravel()
    if isinstance(values, (str, _dt.date, np.datetime64, pd.Timestamp)) or np.ndim(values) == 0:
        values = [values]
    try:
        idx = pd.DatetimeIndex(pd.to_datetime(values))
    except (ValueError, TypeError, OverflowError) as exc:
        raise ChainTriageError(f"not a valid {what}: {exc}") from None
    if idx.tz is not None:
        idx = idx.tz_convert(TZ).tz_localize(None)
    return idx.values.astype("datetime64[D]")


def _extra_dates(values, what: str) -> np.ndarray:
    """User-given extra dates as a sorted unique ``datetime64[D]`` array."""
    if values is None:
        return np.array([], "datetime64[D]")
    if isinstance(values, (str, _dt.date, np.datetime64)):
        values = [values]
    values = list(values)
    if not values:
        return np.array([], "datetime64[D]")
    d = _as_dates(values, what)
    if np.isnat(d).any():
        raise ChainTriageError(f"an {what} is missing")
    return np.unique(d)


def _year_of(d: np.datetime64) -> int:
    return int(d.astype("datetime64[Y]").astype(np.int64)) + 1970


class ExchangeCalendar:
    """US equity exchange calendar with optional unscheduled closures and early closes.

    ``extra_closed`` and ``extra_early_closes`` are iterables of dates
    (anything ``pandas.to_datetime`` reads). Holiday lists are computed per
    range of years on first use and cached on the instance; an instance is
    not meant to be mutated.
    """

    def __init__(self, extra_closed: Iterable = (), extra_early_closes: Iterable = ()):
        self._extra_closed = _extra_dates(extra_closed, "extra closed date")
        self._extra_early = _extra_dates(extra_early_closes, "extra early-close date")
        self._lo: int | None = None  # first covered year
        self._hi: int | None = None  # last covered year
        self._closed = np.array([], "datetime64[D]")  # weekday full closures, sorted
        self._early = np.array([], "datetime64[D]")  # early closes (trading days), sorted
        self._busdaycal = np.busdaycalendar(weekmask=_WEEKMASK)

    def __repr__(self) -> str:
        return (
            f"ExchangeCalendar(extra_closed={[str(d) for d in self._extra_closed]}, "
            f"extra_early_closes={[str(d) for d in self._extra_early]})"
        )

    @property
    def extra_closed(self) -> np.ndarray:
        """User-added closed dates (``datetime64[D]``, sorted)."""
        return self._extra_closed.copy()

    @property
    def extra_early_closes(self) -> np.ndarray:
        """User-added early-close dates (``datetime64[D]``, sorted)."""
        return self._extra_early.copy()

    # -- cache -------------------------------------------------------------
    def _cover(self, dates: np.ndarray) -> None:
        """Make sure the cached holiday lists cover every year of ``dates`` (NaT ignored)."""
        d = dates[~np.isnat(dates)]
        if d.size == 0:
            if self._lo is not None:
                return
            y0 = y1 = _dt.date.today().year
        else:
            y0, y1 = _year_of(d.min()), _year_of(d.max())
        if self._lo is not None and self._lo <= y0 and y1 <= self._hi:
            return
        # Extend with some margin so nearby queries do not rebuild.
        lo = y0 - 2 if self._lo is None else min(self._lo, y0 - 2)
        hi = y1 + 10 if self._hi is None else max(self._hi, y1 + 10)
        lo, hi = max(lo, 1678), min(hi, 2261)  # pandas' Timestamp range
        if y0 < lo or y1 > hi:
            raise ChainTriageError(f"date outside the supported years {lo}-{hi}")
        rule, cand = _rule_dates(lo, hi)
        closed = np.union1d(rule, self._extra_closed)
        closed = closed[np.is_busday(closed, weekmask=_WEEKMASK)]
        early = np.union1d(cand, self._extra_early)
        early = early[np.is_busday(early, weekmask=_WEEKMASK) & ~np.isin(early, closed)]
        # Publish the wider tables before the wider range, so a reader never sees a range
        # its tables do not cover.
        self._closed, self._early = closed, early
        self._busdaycal = np.busdaycalendar(weekmask=_WEEKMASK, holidays=closed)
        self._lo, self._hi = lo, hi

    def _range(self, start, end) -> tuple[np.datetime64, np.datetime64]:
        s, e = _as_dates(start, "start date")[0], _as_dates(end, "end date")[0]
        if np.isnat(s) or np.isnat(e):
            raise ChainTriageError("start and end dates are required")
        self._cover(np.array([s, e]))
        return s, e

    # -- lists ---------------------------------------------------------------
    def holidays(self, start, end) -> pd.DatetimeIndex:
        """Weekdays the exchange is closed, ``start <= date <= end`` (naive dates).

        Includes the observed dates of the rule holidays and the extra closed
        dates; a holiday that falls on a weekend and is not observed (New
        Year's Day on a Saturday) is not listed.
        """
        s, e = self._range(start, end)
        c = self._closed
        return pd.DatetimeIndex(c[(c >= s) & (c <= e)].astype("datetime64[ns]"), name="closed")

    def early_closes(self, start, end) -> pd.DatetimeIndex:
        """Trading days that close at 13:00 New York time, ``start <= date <= end``."""
        s, e = self._range(start, end)
        c = self._early
        return pd.DatetimeIndex(c[(c >= s) & (c <= e)].astype("datetime64[ns]"), name="early_close")

    # -- vectorised day queries ---------------------------------------------
    def _dates(self, dates) -> np.ndarray:
        d = _as_dates(dates)
        self._cover(d)
        return d

    def is_trading_day(self, dates) -> np.ndarray:
        """Bool array: the exchange holds a session on each date (False for NaT)."""
        d = self._dates(dates)
        ok = ~np.isnat(d)
        out = np.zeros(d.shape, dtype=bool)
        out[ok] = np.is_busday(d[ok], busdaycal=self._busdaycal)
        return out

    def is_early_close(self, dates) -> np.ndarray:
        """Bool array: the date is a trading day that closes at 13:00 New York time."""
        d = self._dates(dates)
        return np.isin(d, self._early) & ~np.isnat(d)

    def trading_days_between(self, start_dates, end_dates) -> np.ndarray:
        """Int64 array: trading days ``d`` with ``start <= d < end`` (numpy.busday_count rule).

        Broadcasts ``start_dates`` against ``end_dates``. When ``end < start``
        the count is negative (minus the trading days in ``[end, start)``).
        Raises ChainTriageError on a missing date.
        """
        s = self._dates(start_dates)
        e = self._dates(end_dates)
        if np.isnat(s).any() or np.isnat(e).any():
            raise ChainTriageError("a start or end date is missing")
        s, e = np.broadcast_arrays(s, e)
        return np.busday_count(s, e, busdaycal=self._busdaycal).astype(np.int64)

    def session_hours(self, dates) -> np.ndarray:
        """Float array: session length in hours, 6.5 (regular), 3.5 (early close) or 0 (closed)."""
        d = self._dates(dates)
        trading = self.is_trading_day(d)
        early = self.is_early_close(d)
        return np.where(trading, np.where(early, EARLY_SESSION_HOURS, REGULAR_SESSION_HOURS), 0.0)

    # -- session times -------------------------------------------------------
    def session_opens(self, dates) -> pd.DatetimeIndex:
        """Session open (09:30 New York) of each date, tz-aware; NaT on non-trading days."""
        d = self._dates(dates)
        minutes = np.where(self.is_trading_day(d), _OPEN_MIN, -1)
        return _at_minutes(d, minutes)

    def session_closes(self, dates) -> pd.DatetimeIndex:
        """Session close (16:00, or 13:00 on early-close days, New York), tz-aware; NaT when closed."""
        d = self._dates(dates)
        minutes = np.where(self.is_trading_day(d), np.where(self.is_early_close(d), _EARLY_MIN, _CLOSE_MIN), -1)
        return _at_minutes(d, minutes)

    def session_open(self, date) -> pd.Timestamp:
        """Session open of one date as a tz-aware Timestamp; ChainTriageError if closed that day."""
        return self._one(self.session_opens, date)

    def session_close(self, date) -> pd.Timestamp:
        """Session close of one date as a tz-aware Timestamp; ChainTriageError if closed that day."""
        return self._one(self.session_closes, date)

    def _one(self, fn, date) -> pd.Timestamp:
        d = _as_dates(date)
        if d.size != 1 or np.isnat(d[0]):
            raise ChainTriageError(f"expected one date, got {date!r}")
        ts = fn(d)[0]
        if pd.isna(ts):
            raise ChainTriageError(f"the exchange is closed on {d[0]}")
        return ts

    # -- internals used by time_to_expiry -------------------------------------
    def _day_tables(self, dates: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(is_trading_day, is_early_close) for an already-covered ``datetime64[D]`` array."""
        ok = ~np.isnat(dates)
        trading = np.zeros(dates.shape, dtype=bool)
        trading[ok] = np.is_busday(dates[ok], busdaycal=self._busdaycal)
        early = trading & np.isin(dates, self._early)
        return trading, early


def _at_minutes(dates: np.ndarray, minutes: np.ndarray) -> pd.DatetimeIndex:
    """New York wall-clock times ``dates + minutes`` as tz-aware; minutes < 0 gives NaT."""
    naive = dates.astype("datetime64[m]") + minutes.astype("timedelta64[m]")
    naive = np.where((minutes >= 0) & ~np.isnat(dates), naive, np.datetime64("NaT"))
    return pd.DatetimeIndex(naive.astype("datetime64[ns]")).tz_localize(TZ)


_DEFAULT: ExchangeCalendar | None = None


def default_calendar() -> ExchangeCalendar:
    """The shared calendar without extra dates (one instance, so its cache is reused)."""
    global _DEFAULT
    if _DEFAULT is None:
        _DEFAULT = ExchangeCalendar()
    return _DEFAULT
