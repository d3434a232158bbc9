"""Realised volatility of daily bars: close-to-close and the range estimators, over rolling windows.

Per day t (bars sorted by date; O, H, L, C prices; C_{t-1} the previous close):

- close-to-close: r_t = ln(C_t / C_{t-1}); the window's sample variance (n - 1).
- Parkinson (J. Business 1980): ln(H/L)^2 / (4 ln 2), averaged.
- Garman-Klass (J. Business 1980): 1/2 ln(H/L)^2 - (2 ln 2 - 1) ln(C/O)^2, averaged.
- Rogers-Satchell (Ann. Appl. Prob. 1991): ln(H/C) ln(H/O) + ln(L/C) ln(L/O), averaged.
- Yang-Zhang (J. Business 2000): s_o^2 + k s_c^2 + (1 - k) s_RS^2, with s_o^2 the
  sample variance of the overnight return ln(O_t / C_{t-1}), s_c^2 that of the
  open-to-close return ln(C_t / O_t), s_RS^2 the Rogers-Satchell mean, and
  k = 0.34 / (1.34 + (n + 1) / (n - 1)).

Parkinson, Garman-Klass and Rogers-Satchell see only the trading session;
close-to-close and Yang-Zhang see the whole day, overnight gap included.

A window of n days ends on a bar and holds that bar and the n - 1 before it;
each day's return needs the close before it, so the first bar of the history
gives no return. A day whose open/high/low is missing (NaN) does not count
for the range estimators (nor, for Yang-Zhang, its overnight and
open-to-close returns); the window's estimate uses the days it has.

Annualising (units: the result is a decimal per sqrt(year) on ``basis``):
the per-day variance is divided by the mean time one return spans and
multiplied by the days in a year. On "252" and "250" a return spans the
exchange's trading days between the two dates (1 on consecutive sessions,
more across a gap); on "365" it spans calendar days (3 over a weekend), and
a year is 365 of them. Without gaps, 252/250 give sigma_day * sqrt(252 or
250), and 365 gives about the same figure as 252 (a year holds ~252 sessions).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .exchange_calendar import default_calendar
from .findings import NOTE, ChainTriageError, Finding
from .realised_vol_choices import DEFAULT_WINDOWS, ESTIMATORS  # re-exported: the names live here too

__all__ = [
    "ESTIMATORS",
    "DEFAULT_WINDOWS",
    "DAYS_PER_YEAR",
    "DailyTerms",
    "daily_terms",
    "yang_zhang_k",
    "rolling_vol",
    "realised_vol",
    "RealisedVolTable",
    "realised_vol_table",
]

#: Days in a year on each time basis.
DAYS_PER_YEAR = {"252": 252.0, "250": 250.0, "365": 365.0}
_LN2 = np.log(2.0)


def _basis_days(basis) -> float:
    b = str(basis).strip()
    if b not in DAYS_PER_YEAR:
        raise ChainTriageError(f"unknown time basis {basis!r}; use one of 252, 250, 365")
    return DAYS_PER_YEAR[b]


@dataclass(frozen=True)
class DailyTerms:
    """Per-day pieces of every estimator (arrays of the history's length; NaN where not defined).

    ``close_return`` ln(C_t/C_{t-1}), ``overnight`` ln(O_t/C_{t-1}), ``open_close``
    ln(C_t/O_t) (decimals, per day); ``parkinson``, ``garman_klass``, ``rogers_satchell``
    the per-day variance terms (decimal^2 per day); ``span`` the time each return
    spans in days of the basis (NaN on the first bar).
    """

    close_return: np.ndarray
    overnight: np.ndarray
    open_close: np.ndarray
    parkinson: np.ndarray
    garman_klass: np.ndarray
    rogers_satchell: np.ndarray
    span: np.ndarray
    days_per_year: float = 252.0
    _prefix: dict = field(default_factory=dict, compare=False, repr=False)

    def prefix_sums(self, key: str, x: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Cumulative sums of x, x^2 and the finite count (leading 0), computed once per key."""
        got = self._prefix.get(key)
        if got is None:
            ok = np.isfinite(x)
            v = np.where(ok, x, 0.0)
            got = (np.concatenate(([0.0], np.cumsum(v))), np.concatenate(([0.0], np.cumsum(v * v))),
                   np.concatenate(([0], np.cumsum(ok))))
            self._prefix[key] = got
        return got


def _spans(dates, basis: str) -> np.ndarray:
    d = np.asarray(dates, dtype="datetime64[D]")
    out = np.full(d.shape, np.nan)
    if d.size > 1:
        if basis == "365":
            gap = (d[1:] - d[:-1]).astype(np.int64).astype(float)
        else:
            gap = default_calendar().trading_days_between(d[:-1], d[1:]).astype(float)
        out[1:] = np.maximum(gap, 1.0)  # a bar on a day the calendar calls closed still counts one day
    return out


def daily_terms(open_, high, low, close, dates=None, basis="252", skip=None) -> DailyTerms:
    """The per-day terms from price arrays (price units; NaN open/high/low allowed).

    ``dates`` (sorted, one per bar) give the time each return spans; without
    them every return spans one day of the basis. ``skip`` (bool per bar)
    leaves days out of every estimator, e.g. the sessions that carried an
    earnings release, for an ex-event realised vol: the estimates are then
    per ordinary day.
    """
    o, h, lo, c = (np.asarray(a, dtype=float) for a in (open_, high, low, close))
    b = str(basis).strip()
    _basis_days(b)
    n = c.size
    with np.errstate(divide="ignore", invalid="ignore"):
        lc = np.log(c)
        lo_, lh, ll = np.log(o), np.log(h), np.log(lo)
        close_return = np.full(n, np.nan)
        overnight = np.full(n, np.nan)
        if n > 1:
            close_return[1:] = lc[1:] - lc[:-1]
            overnight[1:] = lo_[1:] - lc[:-1]
        open_close = lc - lo_
        hl = lh - ll
        parkinson = hl * hl / (4.0 * _LN2)
        garman_klass = 0.5 * hl * hl - (2.0 * _LN2 - 1.0) * open_close * open_close
        rogers_satchell = (lh - lc) * (lh - lo_) + (ll - lc) * (ll - lo_)
    if skip is not None:
        out = np.asarray(skip, dtype=bool)
        for a in (close_return, overnight, open_close, parkinson, garman_klass, rogers_satchell):
            a[out] = np.nan
    if dates is None:
        span = np.ones(n)
        if n:
            span[0] = np.nan
    else:
        span = _spans(dates, b)
    return DailyTerms(close_return, overnight, open_close, parkinson, garman_klass, rogers_satchell, span,
                      _basis_days(b))


def yang_zhang_k(n) -> np.ndarray | float:
    """Yang-Zhang's weight k = 0.34 / (1.34 + (n + 1) / (n - 1)) for windows of n days (n >= 2)."""
    n = np.asarray(n, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        k = 0.34 / (1.34 + (n + 1.0) / (n - 1.0))
    return k if k.ndim else float(k)


def _trailing(x: np.ndarray, window: int, sums=None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Trailing-window sums of x, x^2 and the count of finite x, for windows ending at each index.

    ``sums``: the prefix sums of x (``DailyTerms.prefix_sums``), when already known.
    """
    if sums is None:
        ok = np.isfinite(x)
        v = np.where(ok, x, 0.0)
        sums = (np.concatenate(([0.0], np.cumsum(v))), np.concatenate(([0.0], np.cumsum(v * v))),
                np.concatenate(([0], np.cumsum(ok))))
    c1, c2, cn = sums
    idx = np.arange(1, x.size + 1)
    lo = np.maximum(idx - window, 0)
    return c1[idx] - c1[lo], c2[idx] - c2[lo], (cn[idx] - cn[lo]).astype(float)


def _sample_var(x: np.ndarray, window: int, sums=None) -> tuple[np.ndarray, np.ndarray]:
    s1, s2, n = _trailing(x, window, sums)
    with np.errstate(divide="ignore", invalid="ignore"):
        var = (s2 - s1 * s1 / n) / (n - 1.0)
    var = np.where(n >= 2, np.maximum(var, 0.0), np.nan)
    return var, n


def _mean(x: np.ndarray, window: int, sums=None) -> tuple[np.ndarray, np.ndarray]:
    s1, _, n = _trailing(x, window, sums)
    with np.errstate(divide="ignore", invalid="ignore"):
        m = s1 / n
    return np.where(n >= 1, m, np.nan), n


def rolling_vol(terms: DailyTerms, window: int, estimator: str = "close_to_close",
                min_days: int | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Annualised realised vol over the ``window`` days ending at each bar, and the days used.

    Returns (vol, days): vol a decimal per sqrt(year) on the terms' basis; days the
    count of days the estimate rests on (float). vol is NaN until the window
    is full (``window`` bars, i.e. ``window`` returns for close-to-close and
    Yang-Zhang) and wherever fewer than ``min_days`` (default: 2/3 of the
    window, at least 2) usable days remain in it.
    """
    if estimator not in ESTIMATORS:
        raise ChainTriageError(f"unknown estimator {estimator!r}; use one of {', '.join(ESTIMATORS)}")
    window = int(window)
    if window < 2:
        raise ChainTriageError(f"a window needs at least 2 days, not {window}")
    year = terms.days_per_year
    need = max(2, int(np.ceil(2 * window / 3))) if min_days is None else max(2, int(min_days))
    t = terms
    if estimator == "close_to_close":
        var, days = _sample_var(t.close_return, window, t.prefix_sums("cc", t.close_return))
    elif estimator in ("parkinson", "garman_klass", "rogers_satchell"):
        x = getattr(t, estimator)
        var, days = _mean(x, window, t.prefix_sums(estimator, x))
    else:
        # Yang-Zhang: the days that have open, high, low, close and the previous close
        full = np.isfinite(t.overnight) & np.isfinite(t.open_close) & np.isfinite(t.rogers_satchell)
        ov = np.where(full, t.overnight, np.nan)
        oc = np.where(full, t.open_close, np.nan)
        rs = np.where(full, t.rogers_satchell, np.nan)
        so, _ = _sample_var(ov, window, t.prefix_sums("yz_o", ov))
        sc, _ = _sample_var(oc, window, t.prefix_sums("yz_c", oc))
        srs, days = _mean(rs, window, t.prefix_sums("yz_rs", rs))
        k = yang_zhang_k(np.maximum(days, 2.0))
        var = so + k * sc + (1.0 - k) * srs
    span_sum, _, span_n = _trailing(t.span, window, t.prefix_sums("span", t.span))
    with np.errstate(divide="ignore", invalid="ignore"):
        mean_span = np.where(span_n > 0, span_sum / span_n, 1.0)
        vol = np.sqrt(np.maximum(var, 0.0) * year / mean_span)
    n = terms.close_return.size
    full_window = np.arange(n) >= window - (0 if estimator in ("close_to_close", "yang_zhang") else 1)
    vol = np.where(full_window & (days >= need) & np.isfinite(var), vol, np.nan)
    return vol, days


def realised_vol(open_, high, low, close, window: int, estimator: str = "close_to_close", basis="252",
                 dates=None) -> float:
    """One figure: the annualised realised vol (decimal) over the last ``window`` days of the bars.

    NaN when the history is shorter than the window or the estimator lacks data.
    """
    terms = _terms(open_, high, low, close, dates, basis)
    vol, _ = rolling_vol(terms, window, estimator)
    return float(vol[-1]) if vol.size else float("nan")


def _terms(open_, high, low, close, dates, basis, skip=None) -> DailyTerms:
    return daily_terms(open_, high, low, close, dates, basis, skip)


@dataclass
class RealisedVolTable:
    """Realised vol by window (rows) and estimator (columns), the days used, and notes.

    ``vol``: DataFrame indexed by window length (trading days), one column per
    estimator, decimals per sqrt(year) on ``basis`` (NaN where not available).
    ``days``: same shape, days each estimate rests on. ``terms``: the per-day
    pieces (for cones and simulations). ``as_of``: date of the last bar.
    """

    vol: pd.DataFrame
    days: pd.DataFrame
    basis: str
    as_of: pd.Timestamp
    terms: DailyTerms
    findings: list[Finding]


def realised_vol_table(bars: pd.DataFrame, windows=DEFAULT_WINDOWS, basis="252",
                       underlying: str | None = None, skip_dates=()) -> RealisedVolTable:
    """Every estimator over every window, ending at the last bar of ``bars`` (see BAR_COLUMNS).

    A window longer than the history, or with too few usable days for an
    estimator, gives NaN and a note. Bars dated in ``skip_dates`` are left
    out of every estimator (ex-event realised vol), with a note.
    """
    b = str(basis).strip()
    _basis_days(b)
    windows = _check_windows(windows)
    dates = bars["date"].to_numpy().astype("datetime64[D]")
    skip = np.isin(dates, np.asarray(list(skip_dates), dtype="datetime64[D]")) if len(skip_dates) else None
    terms = _terms(bars["open"].to_numpy(float), bars["high"].to_numpy(float), bars["low"].to_numpy(float),
                   bars["close"].to_numpy(float), bars["date"].to_numpy(), b, skip)
    vol_a = np.full((len(windows), len(ESTIMATORS)), np.nan)
    days_a = np.zeros_like(vol_a)
    findings: list[Finding] = []
    if skip is not None and skip.any():
        shown = ", ".join(str(d) for d in dates[skip][:8]) + (" ..." if skip.sum() > 8 else "")
        findings.append(Finding(NOTE, f"{int(skip.sum())} event day(s) left out of the realised vol ({shown})",
                                underlying=underlying))
    n_ret = max(len(bars) - 1, 0)
    for i, w in enumerate(windows):  # a handful of windows and estimators
        if n_ret < w:
            findings.append(Finding(NOTE, f"{w}-day window: the history has only {n_ret} daily returns",
                                    underlying=underlying))
        for j, est in enumerate(ESTIMATORS):
            v, d = rolling_vol(terms, w, est)
            if v.size:
                vol_a[i, j], days_a[i, j] = v[-1], d[-1]
        if n_ret >= w:
            short = [e for j, e in enumerate(ESTIMATORS) if not np.isfinite(vol_a[i, j])]
            if short:
                findings.append(Finding(NOTE, f"{w}-day window: too few days with open, high and low for "
                                              f"{', '.join(short)}", underlying=underlying))
    index = pd.Index(windows, name="window")
    vol = pd.DataFrame(vol_a, index=index, columns=list(ESTIMATORS))
    days = pd.DataFrame(days_a, index=index, columns=list(ESTIMATORS))
    as_of = pd.Timestamp(bars["date"].iat[-1]) if len(bars) else pd.NaT
    return RealisedVolTable(vol=vol, days=days, basis=b, as_of=as_of, terms=terms, findings=findings)


def _check_windows(windows) -> tuple[int, ...]:
    out = []
    for w in windows:
        try:
            wi = int(w)
        except (TypeError, ValueError):
            raise ChainTriageError(f"window {w!r} is not a whole number of days") from None
        if wi != w or wi < 2 or wi > 10_000:
            raise ChainTriageError(f"window {w!r} must be a whole number of days from 2 to 10000")
        out.append(wi)
    if not out:
        raise ChainTriageError("no window given")
    return tuple(sorted(set(out)))
