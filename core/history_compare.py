"""History beside the market: one underlying's realised vol, cone and history-based odds for a snapshot.

``summarise_history`` gives what a history alone says (estimators by window,
the cone). ``compare_with_snapshot`` puts it beside an annotated snapshot:
per expiry the realised vol at the window nearest its trading days and the
ratio implied / realised (at-the-money implied vol of the smile, same time
basis); per contract the finish-beyond and touch probabilities (a) under a
lognormal at that realised vol with the forward's drift and (b) from a block
bootstrap of the underlying's own days, with standard errors. The market's
figures are left as they are: these are extra columns, never mixed in.

Units: vols decimal per sqrt(year) on the settings' basis; probabilities in
[0, 1]; windows and steps in trading days.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .findings import NOTE, WARNING, ChainTriageError, Finding
from .history_file import PriceHistory
from .history_odds import BootstrapOdds, bootstrap_odds, day_pool, iv_rv_ratio, lognormal_odds
from .realised_vol import DEFAULT_WINDOWS, ESTIMATORS, RealisedVolTable, _check_windows, realised_vol_table
from .vol_cone import VolCone, nearest_window, percentile_in_cone, vol_cone

__all__ = [
    "HistorySettings",
    "HistorySummary",
    "HistoryComparison",
    "summarise_history",
    "compare_with_snapshot",
    "event_sessions",
    "HISTORY_CONTRACT_COLUMNS",
    "HISTORY_EXPIRY_COLUMNS",
]

#: Columns ``compare_with_snapshot`` gives per contract (same rows and order as the annotated contracts).
HISTORY_CONTRACT_COLUMNS: dict[str, str] = {
    "hist_vol": "realised vol used for the contract's expiry (decimal per sqrt(year))",
    "hist_p_beyond": "P(finish beyond), lognormal at hist_vol with the forward's drift",
    "hist_p_touch": "P(touch), lognormal at hist_vol with the forward's drift (continuous watching)",
    "boot_p_beyond": "P(finish beyond), block bootstrap of the underlying's own days",
    "boot_p_beyond_se": "its Monte Carlo standard error",
    "boot_p_touch": "P(touch), block bootstrap (a day touches when its high or low reaches the strike)",
    "boot_p_touch_se": "its Monte Carlo standard error",
}
#: Columns ``compare_with_snapshot`` gives per expiry (same rows and order as the annotated expiries).
HISTORY_EXPIRY_COLUMNS: dict[str, str] = {
    "hist_window": "window (trading days) nearest the expiry's trading days",
    "hist_vol": "realised vol over that window (decimal per sqrt(year))",
    "iv_rv": "at-the-money implied vol / hist_vol",
    "cone_percentile": "share of the history's rolling vols of that window below the at-the-money implied vol",
}


@dataclass(frozen=True)
class HistorySettings:
    """Choices for the history work.

    ``estimator``: the realised vol used for odds and IV/RV ("auto": Yang-Zhang
    where the history has opens, highs and lows, else close-to-close).
    ``paths`` 0 skips the bootstrap. ``block``: days per bootstrap block.
    ``basis``: "252", "250" or "365", as the pipeline's.
    """

    windows: tuple[int, ...] = DEFAULT_WINDOWS
    basis: str = "252"
    estimator: str = "auto"
    paths: int = 20_000
    block: int = 5
    seed: int = 20261201
    spot_gap_warning: float = 0.05  # warn when the snapshot's spot and the last close differ by more
    skip_dates: tuple = ()  # bar dates left out of the realised vol and the cone (see ``event_sessions``)

    def __post_init__(self) -> None:
        object.__setattr__(self, "windows", _check_windows(self.windows))
        if str(self.basis) not in ("252", "250", "365"):
            raise ChainTriageError(f"unknown time basis {self.basis!r}; use one of 252, 250, 365")
        if self.estimator != "auto" and self.estimator not in ESTIMATORS:
            raise ChainTriageError(f"unknown estimator {self.estimator!r}; use auto or one of {', '.join(ESTIMATORS)}")
        if not (0 <= int(self.paths) <= 10_000_000):
            raise ChainTriageError("paths must be between 0 and 10,000,000")
        if not (1 <= int(self.block) <= 252):
            raise ChainTriageError("block must be between 1 and 252 days")


@dataclass
class HistorySummary:
    """What one history says on its own: the estimator table, the cone, the estimator picked, findings."""

    history: PriceHistory
    realised: RealisedVolTable
    cone: VolCone
    estimator: str
    findings: list[Finding] = field(default_factory=list)


@dataclass
class HistoryComparison:
    """History beside a snapshot: columns per contract and per expiry (see the column dicts), findings."""

    summary: HistorySummary
    contracts: pd.DataFrame
    expiries: pd.DataFrame
    bootstrap: BootstrapOdds | None
    findings: list[Finding] = field(default_factory=list)


def event_sessions(bar_dates, events) -> tuple:
    """The bar dates that carry each event's news: the first session after an ``after_close`` event,
    the session of the event's own date for a ``before_open`` one (``core.events.Event`` objects).

    For an ex-event realised vol: pass them as ``HistorySettings.skip_dates``. Events with no such
    session in the bars are ignored.
    """
    d = np.sort(np.asarray(bar_dates, dtype="datetime64[D]"))
    out = []
    for e in events:  # a handful of events
        day = np.datetime64(e.date, "D")
        i = np.searchsorted(d, day, side="right" if e.timing == "after_close" else "left")
        if i < d.size:
            out.append(d[i])
    return tuple(sorted(set(out)))


def summarise_history(history: PriceHistory, settings: HistorySettings | None = None) -> HistorySummary:
    """Estimators by window and the cone for one history (vectorised; a loop over windows only)."""
    st = settings or HistorySettings()
    table = realised_vol_table(history.bars, st.windows, st.basis, underlying=history.underlying,
                               skip_dates=st.skip_dates)
    estimator = st.estimator
    findings = list(table.findings)
    if estimator == "auto":
        has_range = np.isfinite(history.bars[["open", "high", "low"]].to_numpy()).all(axis=1).mean() >= 0.9
        estimator = "yang_zhang" if has_range else "close_to_close"
        if not has_range:
            findings.append(Finding(NOTE, "fewer than 90% of the days have open, high and low: "
                                          "close-to-close vol is used for the cone and the odds", underlying=history.underlying))
    cone = vol_cone(table.terms, st.windows, estimator, underlying=history.underlying)
    findings += cone.findings
    return HistorySummary(history=history, realised=table, cone=cone, estimator=estimator, findings=findings)


def compare_with_snapshot(annotated, history: PriceHistory, settings: HistorySettings | None = None,
                          summary: HistorySummary | None = None) -> HistoryComparison:
    """History columns for an annotated snapshot (``pipeline.AnnotatedSnapshot``) of the same underlying.

    ``summary`` may be passed to reuse one made earlier with the same settings.
    """
    st = settings or HistorySettings()
    summ = summary or summarise_history(history, st)
    findings = list(summ.findings)
    snap = annotated.snapshot
    und = snap.underlying
    spot = float(snap.spot)
    last = history.last_close
    if abs(last / spot - 1.0) > st.spot_gap_warning:
        findings.append(Finding(WARNING, f"the history's last close {last:.6g} ({history.last_date.date()}) is "
                                         f"{abs(last / spot - 1) * 100:.1f}% from the snapshot's spot {spot:.6g}; "
                                         "is it the same underlying, adjusted the same way?", underlying=und))
    snap_day = pd.Timestamp(snap.as_of.tz_localize(None).normalize())
    stale = int(np.busday_count(history.last_date.date(), snap_day.date()))
    if stale > 5:
        findings.append(Finding(NOTE, f"the history ends {stale} weekdays before the snapshot "
                                      f"({history.last_date.date()})", underlying=und))

    exp = annotated.expiries
    days = np.maximum(exp["trading_days"].to_numpy(dtype=float), 1.0)
    t = exp["t_years"].to_numpy(dtype=float)
    fwd = exp["forward"].to_numpy(dtype=float)
    atm = exp["atm_iv"].to_numpy(dtype=float)
    windows = nearest_window(days, st.windows)
    rv_by_window = summ.realised.vol[summ.estimator]
    rv = rv_by_window.reindex(windows).to_numpy(dtype=float)
    expiries = pd.DataFrame({
        "hist_window": windows,
        "hist_vol": rv,
        "iv_rv": iv_rv_ratio(atm, rv),
        "cone_percentile": percentile_in_cone(summ.cone, days, atm),
    }, index=exp.index)
    if np.isnan(rv).any():
        findings.append(Finding(NOTE, "no realised vol for some expiries (window longer than the history): "
                                      "their history columns are blank", underlying=und))

    con = annotated.contracts
    exp_days = exp["expiry"].to_numpy().astype("datetime64[ns]").astype(np.int64)
    con_days = con["expiry"].to_numpy().astype("datetime64[ns]").astype(np.int64)
    order = np.argsort(exp_days)
    pos = np.clip(np.searchsorted(exp_days[order], con_days), 0, max(len(exp_days) - 1, 0))
    codes = np.where(len(exp_days) and (exp_days[order][pos] == con_days), order[pos] if len(order) else -1, -1)
    strike = con["strike"].to_numpy(dtype=float)
    is_call = con["kind"].to_numpy(dtype=object) == "call"
    ok = codes >= 0
    ci = np.where(ok, codes, 0)
    hv = np.where(ok, rv[ci], np.nan) if len(rv) else np.full(len(con), np.nan)
    pb, pt = lognormal_odds(spot, fwd[ci] if len(fwd) else np.nan, strike, is_call, t[ci] if len(t) else np.nan, hv)
    boot = None
    nan = np.full(len(con), np.nan)
    if st.paths > 0 and len(history.bars) > 2 and len(con):
        b = history.bars
        pool = day_pool(b["high"].to_numpy(float), b["low"].to_numpy(float), b["close"].to_numpy(float))
        if pool.size >= max(20, st.block):
            boot = bootstrap_odds(pool, spot, fwd, days.astype(np.int64), strike, is_call,
                                  np.where(ok, codes, -1), paths=int(st.paths), block=int(st.block), seed=st.seed)
        else:
            findings.append(Finding(NOTE, f"only {pool.size} daily returns: too few for a bootstrap",
                                    underlying=und))
    contracts = pd.DataFrame({
        "hist_vol": hv, "hist_p_beyond": pb, "hist_p_touch": pt,
        "boot_p_beyond": boot.p_beyond if boot else nan,
        "boot_p_beyond_se": boot.p_beyond_se if boot else nan,
        "boot_p_touch": boot.p_touch if boot else nan,
        "boot_p_touch_se": boot.p_touch_se if boot else nan,
    }, index=con.index)
    return HistoryComparison(summary=summ, contracts=contracts, expiries=expiries, bootstrap=boot,
                             findings=findings)
