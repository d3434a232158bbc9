"""Time to expiry in years, on a trading-time or calendar basis, and vol conversion between bases.

Bases (``BASES``):

- ``"252"`` and ``"250"``: exchange trading time. One trading day (one
  session, whatever its length) is one unit; a year is 252 (or 250) units.
  The time from ``as_of`` to settlement is: the fraction of today's session
  still to run (1 before the open, 0 after the close, the remaining share of
  the session's length in between; an early-close session is 3.5 h long),
  plus one unit per trading day strictly between today and the expiry date,
  plus on the expiry date one unit for PM settlement (at the close) and none
  for AM settlement (at the open). Expiry today: PM gives the fraction of
  today's session left, AM gives 0.
- ``"365"``: calendar time ACT/365, (settlement - as_of) in days / 365. The
  settlement time is the expiry date's close (16:00, or 13:00 on an
  early-close day) for PM, its open (09:30) for AM, both New York time. The
  difference is taken on the New York wall clock, so a daylight-saving change
  adds or removes no hour (30 calendar days is exactly 30/365).

``as_of`` is one instant: a tz-aware Timestamp (or anything ``pd.Timestamp``
reads), converted to New York time. A naive ``as_of`` is taken to be New York
wall-clock time (an ambiguous or missing hour on a daylight-saving change is
resolved to the daylight-time reading / shifted forward). ``expiries`` is a
date or an array of dates; ``settle`` is ``"pm"``/``"am"`` (case-insensitive),
scalar or one per expiry.

An expiry date on which the exchange is closed has no session of its own: on
the trading bases the count stops at the last close before it (PM and AM
alike); on ``"365"`` the nominal 16:00 / 09:30 of that date is used. Callers
can spot such dates with ``ExchangeCalendar.is_trading_day``.

Zero or negative time (expired, or settling now) gives 0.0; the caller adds a
finding. A missing expiry (NaT) gives NaN.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from .exchange_calendar import (
    _CLOSE_MIN,
    _EARLY_MIN,
    _OPEN_MIN,
    TZ,
    ExchangeCalendar,
    _as_dates,
    default_calendar,
)
from .findings import ChainTriageError

#: Supported time bases: trading days per year "252", "250"; calendar ACT/365 "365".
BASES = ("252", "250", "365")
_DAYS_PER_YEAR = {"252": 252.0, "250": 250.0, "365": 365.0}


def _basis(basis) -> str:
    b = str(basis).strip()
    if b not in BASES:
        raise ChainTriageError(f"unknown time basis {basis!r}; use one of {', '.join(BASES)}")
    return b


def _as_of_ny(as_of) -> pd.Timestamp:
    """``as_of`` as a New York tz-aware Timestamp (naive input is New York wall-clock time)."""
    try:
        ts = pd.Timestamp(as_of)
    except (ValueError, TypeError, OverflowError) as exc:
        raise ChainTriageError(f"as_of is not a valid time: {exc}") from None
    if pd.isna(ts):
        raise ChainTriageError("as_of is missing")
    if ts.tzinfo is None:
        return ts.tz_localize(TZ, ambiguous=True, nonexistent="shift_forward")
    return ts.tz_convert(TZ)


def _pm_mask(settle, n: int) -> np.ndarray:
    """Bool array (True = PM) of length ``n`` from 'pm'/'am' text, scalar or per expiry."""
    arr = np.asarray(settle, dtype=object)
    if arr.ndim == 0:
        arr = np.full(n, arr.item(), dtype=object)
    arr = arr.ravel()
    if arr.size != n:
        raise ChainTriageError(f"settle has {arr.size} values for {n} expiries")
    codes, uniques = pd.factorize(arr, use_na_sentinel=False)
    is_pm = np.empty(len(uniques), dtype=bool)
    for i, u in enumerate(uniques):  # a handful of distinct labels, not one per contract
        word = u.strip().lower() if isinstance(u, str) else None
        if word not in ("pm", "am"):
            raise ChainTriageError(f"settle must be 'pm' or 'am', not {u!r}")
        is_pm[i] = word == "pm"
    return is_pm[codes]


def _wall_minutes(ts: pd.Timestamp) -> float:
    """Minutes since New York midnight on the wall clock (fractional)."""
    return ts.hour * 60 + ts.minute + (ts.second + ts.microsecond / 1e6 + ts.nanosecond / 1e9) / 60.0


def _prepare(as_of, expiries, calendar):
    cal = calendar if calendar is not None else default_calendar()
    if not isinstance(cal, ExchangeCalendar):
        raise ChainTriageError("calendar must be an ExchangeCalendar")
    t0 = _as_of_ny(as_of)
    d0 = np.datetime64(t0.date(), "D")
    exp = _as_dates(expiries, "expiry date")
    cal._cover(np.concatenate([exp, [d0]]))
    return cal, t0, d0, exp


def _trading_days(cal, t0, d0, exp, is_pm) -> np.ndarray:
    """Trading time from ``t0`` to settlement, in trading days (float; may be <= 0)."""
    (today_trading,), (today_early,) = cal._day_tables(np.array([d0]))
    if today_trading:
        close = _EARLY_MIN if today_early else _CLOSE_MIN
        now = _wall_minutes(t0)
        left_today = min(max((close - max(now, _OPEN_MIN)) / (close - _OPEN_MIN), 0.0), 1.0)
    else:
        left_today = 0.0
    valid = ~np.isnat(exp)
    out = np.full(exp.shape, np.nan)
    e = exp[valid]
    pm = is_pm[valid]
    later = e > d0
    exp_trading, _ = cal._day_tables(e)
    between = np.zeros(e.shape, dtype=np.int64)
    if later.any():
        between[later] = np.busday_count(d0 + 1, e[later], busdaycal=cal._busdaycal)
    # AM settlement today is at the open: no trading time before it, whatever the clock says.
    days = np.where(
        later,
        left_today + between + (pm & exp_trading),
        np.where((e == d0) & pm, left_today, 0.0),
    )
    out[valid] = days
    return out


def _calendar_days(cal, t0, d0, exp, is_pm) -> np.ndarray:
    """Calendar time from ``t0`` to settlement in days on the New York wall clock (may be <= 0)."""
    valid = ~np.isnat(exp)
    out = np.full(exp.shape, np.nan)
    e = exp[valid]
    _, early = cal._day_tables(e)
    settle_min = np.where(is_pm[valid], np.where(early, _EARLY_MIN, _CLOSE_MIN), _OPEN_MIN)
    day_diff = (e - d0).astype(np.int64).astype(float)
    out[valid] = day_diff + (settle_min - _wall_minutes(t0)) / 1440.0
    return out


def year_fraction(as_of, expiries, settle="pm", *, basis="252", calendar: ExchangeCalendar | None = None) -> np.ndarray:
    """Time from ``as_of`` to each expiry's settlement, in years on ``basis`` (float64 array).

    See the module docstring for the rules. Returns a 1-d array, one value per
    expiry: >= 0, with 0.0 for an expiry at or before ``as_of`` and NaN for a
    missing expiry. ``calendar`` defaults to the shared US equity calendar.
    Raises ChainTriageError on an unknown basis, bad settle text or a date
    that cannot be read.
    """
    b = _basis(basis)
    cal, t0, d0, exp = _prepare(as_of, expiries, calendar)
    is_pm = _pm_mask(settle, exp.size)
    if b == "365":
        days = _calendar_days(cal, t0, d0, exp, is_pm)
    else:
        days = _trading_days(cal, t0, d0, exp, is_pm)
    with np.errstate(invalid="ignore"):
        return np.where(days > 0, days / _DAYS_PER_YEAR[b], np.where(np.isnan(days), np.nan, 0.0))


def trading_days_to_expiry(as_of, expiries, *, calendar: ExchangeCalendar | None = None) -> np.ndarray:
    """Int64 array, for display: trading days after ``as_of``'s New York date up to and including the expiry date.

    Today's session is not counted (an expiry today gives 0; tomorrow, if a
    trading day, gives 1). Negative for an expiry in the past. Raises
    ChainTriageError on a missing expiry.
    """
    cal, _, d0, exp = _prepare(as_of, expiries, calendar)
    if np.isnat(exp).any():
        raise ChainTriageError("an expiry date is missing")
    return np.busday_count(d0 + 1, exp + 1, busdaycal=cal._busdaycal).astype(np.int64)


def calendar_days_to_expiry(as_of, expiries) -> np.ndarray:
    """Int64 array, for display: calendar days from ``as_of``'s New York date to the expiry date.

    0 for an expiry today, negative for one in the past. Raises
    ChainTriageError on a missing expiry.
    """
    d0 = np.datetime64(_as_of_ny(as_of).date(), "D")
    exp = _as_dates(expiries, "expiry date")
    if np.isnat(exp).any():
        raise ChainTriageError("an expiry date is missing")
    return (exp - d0).astype(np.int64)


def convert_vol(sigma, t_from, t_to) -> np.ndarray:
    """Re-express an annualised vol for another time measure: sigma * sqrt(t_from / t_to).

    Total variance sigma**2 * T is the invariant: a vol quoted with time
    ``t_from`` (years on its basis) describes the same distribution as the
    returned vol with ``t_to`` (years on the other basis), because
    sigma_from**2 * t_from == sigma_to**2 * t_to. Units: sigma as a decimal
    per sqrt(year); t_from and t_to in years, each on its own basis.
    Broadcasts; NaN where t_to <= 0 or t_from < 0 (no time to spread over).
    """
    sigma, t_from, t_to = np.broadcast_arrays(*(np.asarray(a, dtype=float) for a in (sigma, t_from, t_to)))
    ok = (t_to > 0) & (t_from >= 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        out = sigma * np.sqrt(t_from / t_to)
    return np.where(ok, out, np.nan)


def convert_vol_basis(
    sigma,
    as_of,
    expiries,
    settle="pm",
    from_basis="365",
    to_basis="252",
    calendar: ExchangeCalendar | None = None,
) -> np.ndarray:
    """Convert vols quoted on ``from_basis`` to ``to_basis`` for the given expiries (float64 array).

    Uses ``year_fraction`` on both bases and ``convert_vol``, so sigma**2 * T
    is unchanged. NaN where the time to expiry is zero (nothing to convert).
    """
    t_from = year_fraction(as_of, expiries, settle, basis=from_basis, calendar=calendar)
    t_to = year_fraction(as_of, expiries, settle, basis=to_basis, calendar=calendar)
    out = convert_vol(sigma, t_from, t_to)
    return np.where(t_from > 0, out, np.nan)
