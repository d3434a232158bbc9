"""The pipeline's Greek and trade-economics columns on a flat-vol chain priced by QuantLib.

- gamma, vega and theta against QuantLib's BlackCalculator on the forward [L]
  (its theta(spot, T) is per year of T; per day of the basis it is divided by
  252, 250 or 365), on the calendar and the trading basis;
- theta's day: per calendar day on 365, per trading day on 252, the decay over
  the remaining life (theta * days) the same on both [D];
- P(profit) at the bid and the ask against scipy.stats' lognormal [L];
- premium per day and returns from the expiry's calendar days [D].
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import QuantLib as ql
from scipy.stats import lognorm

from chaintriage.core.pipeline import (
    CONTRACT_TABLE_COLUMNS,
    GREEK_COLUMNS,
    TRADE_COLUMNS,
    PipelineSettings,
    annotate,
)
from tests.core.chain_builders import build_snapshot, ql_black, year_fractions

SPOT, RATE, DIV, VOL = 100.0, 0.04, 0.01, 0.25
EXPIRIES = ["2026-12-18", "2027-02-19", "2027-06-17"]


@pytest.fixture(scope="module")
def flat_chain():
    ts = year_fractions(EXPIRIES)
    fwd = SPOT * np.exp((RATE - DIV) * ts)
    dfs = np.exp(-RATE * ts)
    strikes = [np.arange(70.0, 132.5, 2.5)] * len(EXPIRIES)
    snap = build_snapshot(EXPIRIES, strikes, lambda i, k: ql_black(fwd[i], k, VOL, ts[i], dfs[i], True),
                          lambda i, k: ql_black(fwd[i], k, VOL, ts[i], dfs[i], False), spot=SPOT,
                          half_spread=0.03)
    return snap, ts, fwd, dfs


@pytest.fixture(scope="module", params=["365", "252"])
def annotated(request, flat_chain):
    snap, ts, fwd, dfs = flat_chain
    return request.param, annotate(snap, PipelineSettings(basis=request.param)), ts, fwd, dfs


def test_new_columns_come_last_in_the_documented_order(annotated):
    _, ann, *_ = annotated
    assert CONTRACT_TABLE_COLUMNS[-len(GREEK_COLUMNS) - len(TRADE_COLUMNS):] == GREEK_COLUMNS + TRADE_COLUMNS
    assert list(ann.contracts.columns) == CONTRACT_TABLE_COLUMNS


def test_greeks_against_quantlib_black_calculator(annotated):
    """[L] QuantLib BlackCalculator(payoff, F, sigma sqrt T, DF): gamma(S), vega(T)/100, theta(S, T)/days per year."""
    basis, ann, ts, fwd, dfs = annotated
    per_year = 365.0 if basis == "365" else float(basis)
    c = ann.contracts
    t_basis = ann.expiries.set_index("expiry")["t_years"]
    checked = 0
    for row in c[c["mid"] > 0.05].itertuples():
        i = EXPIRIES.index(f"{row.expiry:%Y-%m-%d}")
        kind = ql.Option.Call if row.kind == "call" else ql.Option.Put
        calc = ql.BlackCalculator(ql.PlainVanillaPayoff(kind, row.strike), fwd[i], VOL * np.sqrt(ts[i]), dfs[i])
        tb = float(t_basis[row.expiry])
        assert row.gamma == pytest.approx(calc.gamma(SPOT), rel=1e-7, abs=1e-10)
        assert row.vega == pytest.approx(calc.vega(tb) / 100.0, rel=1e-7, abs=1e-10)
        assert row.theta == pytest.approx(calc.theta(SPOT, tb) / per_year, rel=1e-7, abs=1e-10)
        checked += 1
    assert checked > 100


def test_theta_per_day_follows_the_basis(flat_chain):
    """[D] theta per calendar day on 365, per trading day on 252; theta * days left is the same on both."""
    snap, *_ = flat_chain
    a365 = annotate(snap, PipelineSettings(basis="365"))
    a252 = annotate(snap, PipelineSettings(basis="252"))
    days365 = a365.expiries.set_index("expiry")["t_years"] * 365.0
    days252 = a252.expiries.set_index("expiry")["t_years"] * 252.0
    e = a365.contracts["expiry"]
    decay365 = a365.contracts["theta"].to_numpy() * days365.loc[e].to_numpy()
    decay252 = a252.contracts["theta"].to_numpy() * days252.loc[e].to_numpy()
    ok = a365.contracts["mid"].to_numpy() > 0.05
    np.testing.assert_allclose(decay252[ok], decay365[ok], rtol=1e-6)
    # Fewer trading days than calendar days to each expiry: more decay per trading day.
    assert np.all(np.abs(a252.contracts["theta"].to_numpy()[ok]) > np.abs(a365.contracts["theta"].to_numpy()[ok]))


def test_p_profit_at_bid_and_ask_against_scipy_lognormal(annotated):
    """[L] scipy.stats.lognorm with s = sigma sqrt(T), scale F e^{-s^2/2}: tail beyond each breakeven."""
    _, ann, ts, fwd, _ = annotated
    c = ann.contracts
    for i, expiry in enumerate(EXPIRIES):
        sub = c[(c["expiry"] == pd.Timestamp(expiry)) & (c["bid"] > 0)]
        s = VOL * np.sqrt(ts[i])
        dist = lognorm(s=s, scale=fwd[i] * np.exp(-0.5 * s * s))
        call = (sub["kind"] == "call").to_numpy()
        k, bid, ask = sub["strike"].to_numpy(), sub["bid"].to_numpy(), sub["ask"].to_numpy()
        np.testing.assert_allclose(sub["breakeven_buy"], np.where(call, k + ask, k - ask), rtol=1e-15)
        np.testing.assert_allclose(sub["p_profit_buy"], np.where(call, dist.sf(k + ask), dist.cdf(k - ask)), atol=2e-6)
        np.testing.assert_allclose(sub["p_profit_sell"], np.where(call, dist.cdf(k + bid), dist.sf(k - bid)), atol=2e-6)


def test_per_day_and_returns_use_calendar_days(annotated):
    """[D] premium / calendar days; cash-secured put bid/(K - bid), covered call bid/spot, times 365/days."""
    _, ann, ts, _, _ = annotated
    c = ann.contracts
    days = pd.Series(ts * 365.0, index=pd.DatetimeIndex(EXPIRIES)).loc[c["expiry"]].to_numpy()
    bid = c["bid"].to_numpy()
    call = (c["kind"] == "call").to_numpy()
    has_bid = bid > 0
    np.testing.assert_allclose(c["premium_per_day_sell"][has_bid], (bid / days)[has_bid], rtol=1e-12)
    np.testing.assert_allclose(c["premium_per_day_buy"], c["ask"] / days, rtol=1e-12)
    ret = np.where(call, bid / SPOT, bid / (c["strike"].to_numpy() - bid))
    np.testing.assert_allclose(c["return_sell"][has_bid], ret[has_bid], rtol=1e-12)
    np.testing.assert_allclose(c["return_sell_annual"][has_bid], (ret * 365.0 / days)[has_bid], rtol=1e-12)
    assert c.loc[~has_bid, "sell_premium"].isna().all() and c.loc[~has_bid, "p_profit_sell"].isna().all()


def test_greeks_put_call_parity_in_the_table(annotated):
    """[D] C - P = DF (F - K): per strike, call delta - put delta = DF F / S, equal gamma and vega
    (the flat chain's calls and puts carry the same implied vol to ~1e-10)."""
    _, ann, ts, fwd, dfs = annotated
    c = ann.contracts
    for i, expiry in enumerate(EXPIRIES):
        sub = c[(c["expiry"] == pd.Timestamp(expiry)) & (c["mid"] > 0.05)]
        calls = sub[sub["kind"] == "call"].set_index("strike")
        puts = sub[sub["kind"] == "put"].set_index("strike")
        both = calls.index.intersection(puts.index)
        assert len(both) > 5
        np.testing.assert_allclose(calls.loc[both, "delta"] - puts.loc[both, "delta"], dfs[i] * fwd[i] / SPOT,
                                   rtol=1e-8)
        np.testing.assert_allclose(calls.loc[both, "gamma"], puts.loc[both, "gamma"], rtol=1e-7)
        np.testing.assert_allclose(calls.loc[both, "vega"], puts.loc[both, "vega"], rtol=1e-7)


def test_p_profit_at_a_zero_spread_is_p_beyond_the_mid_breakeven(flat_chain):
    """[D] with bid = ask = mid, the buyer's P(profit) is the table's P(beyond the breakeven) and the
    seller's its complement; the breakevens are the mid breakeven."""
    _, ts, fwd, dfs = flat_chain
    strikes = [np.arange(80.0, 122.5, 2.5)] * len(EXPIRIES)
    snap = build_snapshot(EXPIRIES, strikes, lambda i, k: ql_black(fwd[i], k, VOL, ts[i], dfs[i], True),
                          lambda i, k: ql_black(fwd[i], k, VOL, ts[i], dfs[i], False), spot=SPOT,
                          half_spread=0.0)
    c = annotate(snap, PipelineSettings(basis="365")).contracts
    c = c[c["mid"] > 0]
    np.testing.assert_array_equal(c["breakeven_buy"], c["breakeven"])
    np.testing.assert_array_equal(c["breakeven_sell"], c["breakeven"])
    np.testing.assert_allclose(c["p_profit_buy"], c["p_breakeven"], atol=1e-15)
    np.testing.assert_allclose(c["p_profit_sell"], 1.0 - c["p_breakeven"], atol=1e-15)
    assert (c["edge_to_mid"] == 0).all()
