"""The core pipeline: from one loaded snapshot to the annotated chain.

Per expiry (DESIGN.md, "Computation, per expiry"): time to settlement,
parity forward and discount factor, implied vols, a fitted smile, then per
contract the sigma distance, finish-beyond probabilities (smile and flat),
touch probability, delta, breakeven and its probability, spread and flags;
per expiry the ranges at a chosen confidence. Work is vectorised over all
contracts; the only Python loop is over expiries (tens, not thousands).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from . import black76
from .distribution import (
    Distribution,
    prob_above,
    prob_above_flat,
    range_flat,
    range_smile,
    terminal_distribution,
)
from .exchange_calendar import ExchangeCalendar
from .findings import WARNING, ChainTriageError, Finding
from .implied_vol import implied_vol
from .parity_forward import ForwardEstimate, implied_forward
from .smile_fit import Smile, fit_smile
from .snapshot import Snapshot
from .time_to_expiry import (
    calendar_days_to_expiry,
    convert_vol,
    trading_days_to_expiry,
    year_fraction,
)
from .touch import prob_touch_smile

#: Columns of the annotated contract table, in display order.
CONTRACT_TABLE_COLUMNS = [
    "underlying", "expiry", "strike", "kind", "bid", "ask", "mid", "iv",
    "sigma_distance", "p_beyond", "p_beyond_flat", "p_touch", "delta",
    "breakeven", "p_breakeven", "spread_pct", "flags",
    "volume", "open_interest", "otm", "source_line",
]

#: Columns of the per-expiry table, in display order.
EXPIRY_TABLE_COLUMNS = [
    "underlying", "expiry", "t_years", "trading_days", "calendar_days",
    "forward", "discount", "forward_method", "atm_iv",
    "range_low", "range_high", "range_low_smile", "range_high_smile",
    "fit_rmse", "fit_method", "arbitrage_free", "contracts", "findings",
]


@dataclass(frozen=True)
class PipelineSettings:
    """Choices that change the numbers.

    ``basis``: '252', '250' (trading days) or '365' (calendar ACT/365).
    ``confidence``: two-sided level of the ranges, in (0, 1).
    ``use_file_iv``: take the file's ``iv`` column instead of solving from mids.
    ``wide_spread``: spread / mid above which a contract is flagged 'wide'.
    ``thin_open_interest``: open interest below which a contract is flagged 'thin'.
    """

    basis: str = "252"
    confidence: float = 0.68
    use_file_iv: bool = False
    wide_spread: float = 0.25
    thin_open_interest: float = 10.0
    extra_closed: tuple = ()

    def __post_init__(self) -> None:
        if self.basis not in ("252", "250", "365"):
            raise ValueError(f"unknown time basis {self.basis!r}: use 252, 250 or 365")
        if not 0.0 < self.confidence < 1.0:
            raise ValueError(f"confidence must be between 0 and 1, got {self.confidence}")


@dataclass
class ExpiryResult:
    """Everything computed for one expiry (scalars in price units or years)."""

    expiry: pd.Timestamp
    t_years: float
    forward_estimate: ForwardEstimate
    smile: Smile | None
    atm_iv: float
    findings: list[Finding] = field(default_factory=list)

    @property
    def forward(self) -> float:
        return self.forward_estimate.forward

    @property
    def discount(self) -> float:
        return self.forward_estimate.discount


@dataclass
class AnnotatedSnapshot:
    """The pipeline's output for one snapshot: contract and expiry tables."""

    snapshot: Snapshot
    settings: PipelineSettings
    contracts: pd.DataFrame
    expiries: pd.DataFrame
    results: dict[pd.Timestamp, ExpiryResult]
    findings: list[Finding]

    def distribution(self, expiry, n: int = 401) -> Distribution | None:
        """Terminal distribution of one expiry on a strike grid (None when no smile)."""
        res = self.results.get(pd.Timestamp(expiry))
        if res is None or res.smile is None or not res.t_years > 0:
            return None
        return terminal_distribution(res.smile, res.forward, res.t_years, res.atm_iv, n=n)

    def horizon_range(self, days: float, confidence: float | None = None) -> tuple[float, float, float]:
        """(forward, low, high) of the plain range ``days`` trading/calendar days ahead.

        Days are counted on the settings' basis (trading days for 252/250).
        At-the-money total variance is interpolated linearly in time between
        expiries and the forward log-linearly; beyond the last expiry the
        variance rate and carry of the last expiry are held.
        """
        conf = self.settings.confidence if confidence is None else confidence
        per_year = 365.0 if self.settings.basis == "365" else float(self.settings.basis)
        t = float(days) / per_year
        usable = [r for r in self.results.values() if r.t_years > 0 and np.isfinite(r.atm_iv)]
        if t <= 0 or not usable:
            spot = self.snapshot.spot
            return spot, spot, spot
        ts = np.array([r.t_years for r in usable])
        order = np.argsort(ts)
        ts = ts[order]
        w = np.array([r.atm_iv ** 2 * r.t_years for r in usable])[order]
        logf = np.log(np.array([r.forward for r in usable]))[order]
        spot = self.snapshot.spot
        # Anchor at t=0 with zero variance and the spot.
        ts = np.concatenate([[0.0], ts])
        w = np.concatenate([[0.0], w])
        logf = np.concatenate([[np.log(spot)], logf])
        if t <= ts[-1]:
            w_t = float(np.interp(t, ts, w))
            logf_t = float(np.interp(t, ts, logf))
        else:
            w_t = w[-1] * t / ts[-1]
            logf_t = np.log(spot) + (logf[-1] - np.log(spot)) * t / ts[-1]
        f = float(np.exp(logf_t))
        sigma = np.sqrt(w_t / t)
        low, high = range_flat(f, sigma, t, conf)
        return f, float(low), float(high)


def _first_per_expiry(frame: pd.DataFrame, column: str) -> pd.Series:
    """First non-missing value of a column per expiry."""
    return frame.groupby("expiry", sort=True)[column].first()


def _mids(bid: np.ndarray, ask: np.ndarray) -> np.ndarray:
    """Mid price where the ask is quoted (a zero bid counts as 0), NaN otherwise."""
    bid0 = np.where(np.isfinite(bid), bid, 0.0)
    with np.errstate(invalid="ignore"):
        return np.where(np.isfinite(ask) & (ask > 0), 0.5 * (bid0 + ask), np.nan)


def annotate(snapshot: Snapshot, settings: PipelineSettings | None = None) -> AnnotatedSnapshot:
    """Run the whole per-expiry pipeline over a snapshot."""
    settings = settings or PipelineSettings()
    calendar = ExchangeCalendar(extra_closed=settings.extra_closed)
    df = snapshot.contracts.sort_values(["expiry", "strike", "kind"], kind="stable").reset_index(drop=True)
    findings: list[Finding] = []
    underlying = snapshot.underlying

    strike = df["strike"].to_numpy(float)
    is_call = (df["kind"] == "call").to_numpy()
    bid = df["bid"].to_numpy(float)
    ask = df["ask"].to_numpy(float)
    mid = _mids(bid, ask)

    # 1. Time to settlement per expiry.
    expiries = pd.DatetimeIndex(sorted(df["expiry"].unique()))
    settle = _first_per_expiry(df, "settle").reindex(expiries).fillna("pm").to_numpy()
    t_exp = np.asarray(year_fraction(snapshot.as_of, expiries, settle, basis=settings.basis, calendar=calendar), float)
    trading_days = np.asarray(trading_days_to_expiry(snapshot.as_of, expiries, calendar=calendar))
    calendar_days = np.asarray(calendar_days_to_expiry(snapshot.as_of, expiries))
    rates = _first_per_expiry(df, "rate").reindex(expiries).to_numpy(float)
    divs = _first_per_expiry(df, "div_yield").reindex(expiries).to_numpy(float)

    exp_code = pd.Categorical(df["expiry"], categories=expiries).codes
    t_row = t_exp[exp_code]

    # 2. Forward and discount factor per expiry from put-call parity.
    forwards = np.full(len(expiries), np.nan)
    discounts = np.full(len(expiries), np.nan)
    estimates: list[ForwardEstimate] = []
    expiry_findings: list[list[Finding]] = [[] for _ in expiries]
    for i, expiry in enumerate(expiries):
        sel = exp_code == i
        sub = df.loc[sel, ["strike", "kind", "bid", "ask"]]
        calls = sub[sub["kind"] == "call"].set_index("strike")
        puts = sub[sub["kind"] == "put"].set_index("strike")
        ks = np.union1d(calls.index.to_numpy(float), puts.index.to_numpy(float))
        c = calls.reindex(ks)
        p = puts.reindex(ks)
        est = implied_forward(
            ks, c["bid"].to_numpy(float), c["ask"].to_numpy(float),
            p["bid"].to_numpy(float), p["ask"].to_numpy(float),
            spot=snapshot.spot, t=max(t_exp[i], 1e-12),
            rate=None if np.isnan(rates[i]) else float(rates[i]),
            div_yield=None if np.isnan(divs[i]) else float(divs[i]),
        )
        estimates.append(est)
        forwards[i] = est.forward
        discounts[i] = est.discount
        for fnd in est.findings:
            expiry_findings[i].append(Finding(fnd.severity, f"forward: {fnd.reason}", underlying=underlying,
                                              expiry=f"{expiry:%Y-%m-%d}"))
        if not t_exp[i] > 0:
            expiry_findings[i].append(Finding(WARNING, "expiry has no time left at the snapshot time; "
                                              "no vols or probabilities", underlying=underlying,
                                              expiry=f"{expiry:%Y-%m-%d}"))

    f_row = forwards[exp_code]
    df_row = discounts[exp_code]

    # 3. Implied vols, all contracts at once.
    if settings.use_file_iv:
        file_iv = df["iv"].to_numpy(float)
        basis = df["iv_basis"].replace("", settings.basis).to_numpy()
        iv = file_iv.copy()
        for other in ("252", "250", "365"):
            if other == settings.basis:
                continue
            m = basis == other
            if m.any():
                t_other = np.asarray(year_fraction(snapshot.as_of, expiries, settle, basis=other, calendar=calendar), float)
                with np.errstate(divide="ignore", invalid="ignore"):
                    iv[m] = convert_vol(file_iv[m], t_other[exp_code][m], t_row[m])
        iv_status_ok = np.isfinite(iv)
    else:
        result = implied_vol(mid, f_row, strike, t_row, df_row, is_call)
        iv = result.sigma
        iv_status_ok = np.isfinite(iv)

    # 4-5. Smile per expiry, then per-contract figures.
    k_row = np.log(strike / f_row)
    otm = np.where(is_call, strike >= f_row, strike < f_row)
    n = len(df)
    sigma_distance = np.full(n, np.nan)
    p_above = np.full(n, np.nan)
    p_above_flat = np.full(n, np.nan)
    p_touch = np.full(n, np.nan)
    smile_vol = np.full(n, np.nan)
    p_above_be = np.full(n, np.nan)
    breakeven = np.where(is_call, strike + mid, strike - mid)
    atm_ivs = np.full(len(expiries), np.nan)
    results: dict[pd.Timestamp, ExpiryResult] = {}
    ranges = np.full((len(expiries), 4), np.nan)
    fit_rmse = np.full(len(expiries), np.nan)
    fit_method = np.full(len(expiries), "", dtype=object)
    arb_free = np.zeros(len(expiries), dtype=bool)

    for i, expiry in enumerate(expiries):
        t = t_exp[i]
        exp_label = f"{expiry:%Y-%m-%d}"
        sel = np.flatnonzero(exp_code == i)
        smile = None
        if t > 0:
            fit_sel = sel[otm[sel] & iv_status_ok[sel]]
            if fit_sel.size:
                vega = black76.vega(f_row[fit_sel], strike[fit_sel], iv[fit_sel], t, df_row[fit_sel])
                spread = ask[fit_sel] - np.where(np.isfinite(bid[fit_sel]), bid[fit_sel], 0.0)
                try:
                    smile = fit_smile(k_row[fit_sel], iv[fit_sel] ** 2 * t, t=t, vega=vega, spread=spread)
                except ChainTriageError as exc:
                    expiry_findings[i].append(Finding(WARNING, f"no smile for this expiry: {exc}",
                                                      underlying=underlying, expiry=exp_label))
            else:
                expiry_findings[i].append(Finding(WARNING, "no out-of-the-money quote with an implied vol; "
                                                  "no smile for this expiry", underlying=underlying, expiry=exp_label))
        if smile is not None:
            expiry_findings[i].extend(smile.findings(underlying, exp_label))
            atm = float(smile.atm_vol())
            atm_ivs[i] = atm
            F = forwards[i]
            ks = strike[sel]
            sqrt_t = np.sqrt(t)
            sigma_distance[sel] = k_row[sel] / (atm * sqrt_t)
            p_above[sel] = prob_above(smile, F, ks)
            p_above_flat[sel] = prob_above_flat(F, ks, atm, t)
            smile_vol[sel] = smile.vol(k_row[sel])
            be = breakeven[sel]
            with np.errstate(invalid="ignore", divide="ignore"):
                ok = np.isfinite(be) & (be > 0)
            pa_be = np.full(sel.size, np.nan)
            pa_be[ok] = prob_above(smile, F, be[ok])
            p_above_be[sel] = pa_be
            ranges[i, 0:2] = range_flat(F, atm, t, settings.confidence)
            ranges[i, 2:4] = range_smile(smile, F, settings.confidence)
            fit_rmse[i] = smile.rmse_vol
            fit_method[i] = smile.method
            arb_free[i] = bool(smile.arbitrage_free)
        results[expiry] = ExpiryResult(expiry, float(t), estimates[i], smile, atm_ivs[i], expiry_findings[i])

    p_beyond = np.where(is_call, p_above, 1.0 - p_above)
    p_beyond_flat = np.where(is_call, p_above_flat, 1.0 - p_above_flat)
    p_breakeven = np.where(is_call, p_above_be, 1.0 - p_above_be)

    # Touch probability from spot, at each strike's smile vol, floored by finishing past it.
    have = np.isfinite(smile_vol) & (t_row > 0)
    if have.any():
        p_touch[have] = prob_touch_smile(
            snapshot.spot, f_row[have], strike[have], t_row[have], smile_vol[have], p_beyond[have],
            is_call=is_call[have],
        )

    # Delta on the spot (dV/dS = DF * F/S * dV/dF), at the contract's own vol, else the smile's.
    vol_for_greeks = np.where(np.isfinite(iv), iv, smile_vol)
    with np.errstate(invalid="ignore", divide="ignore"):
        fwd_delta = black76.delta(f_row, strike, vol_for_greeks, t_row, 1.0, is_call)
        delta = df_row * (f_row / snapshot.spot) * fwd_delta
        spread_pct = np.where(mid > 0, (ask - np.where(np.isfinite(bid), bid, 0.0)) / mid, np.nan)

    flags = _flags(df, bid, iv, spread_pct, settings)

    out = pd.DataFrame({
        "underlying": underlying,
        "expiry": df["expiry"],
        "strike": strike,
        "kind": df["kind"],
        "bid": bid,
        "ask": ask,
        "mid": mid,
        "iv": iv,
        "sigma_distance": sigma_distance,
        "p_beyond": p_beyond,
        "p_beyond_flat": p_beyond_flat,
        "p_touch": p_touch,
        "delta": delta,
        "breakeven": breakeven,
        "p_breakeven": p_breakeven,
        "spread_pct": spread_pct,
        "flags": flags,
        "volume": df["volume"].to_numpy(float),
        "open_interest": df["open_interest"].to_numpy(float),
        "otm": otm,
        "source_line": df["source_line"].to_numpy(),
    })

    counts = np.bincount(exp_code, minlength=len(expiries))
    exp_table = pd.DataFrame({
        "underlying": underlying,
        "expiry": expiries,
        "t_years": t_exp,
        "trading_days": trading_days,
        "calendar_days": calendar_days,
        "forward": forwards,
        "discount": discounts,
        "forward_method": [e.method for e in estimates],
        "atm_iv": atm_ivs,
        "range_low": ranges[:, 0],
        "range_high": ranges[:, 1],
        "range_low_smile": ranges[:, 2],
        "range_high_smile": ranges[:, 3],
        "fit_rmse": fit_rmse,
        "fit_method": fit_method,
        "arbitrage_free": arb_free,
        "contracts": counts,
        "findings": [len(f) for f in expiry_findings],
    })
    for fs in expiry_findings:
        findings.extend(fs)
    return AnnotatedSnapshot(snapshot, settings, out, exp_table, results, findings)


def _flags(df: pd.DataFrame, bid: np.ndarray, iv: np.ndarray, spread_pct: np.ndarray,
           settings: PipelineSettings) -> np.ndarray:
    """Short plain words per contract, comma-separated: no-iv, zero-bid, wide, thin."""
    oi = df["open_interest"].to_numpy(float)
    parts = [
        (~np.isfinite(iv), "no-iv"),
        (~(bid > 0), "zero-bid"),
        (spread_pct > settings.wide_spread, "wide"),
        (np.isfinite(oi) & (oi < settings.thin_open_interest), "thin"),
    ]
    out = np.full(len(df), "", dtype=object)
    for mask, word in parts:
        out = np.where(mask, np.where(out == "", word, out + "," + word), out)
    return out
