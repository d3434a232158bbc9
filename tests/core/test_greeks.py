"""Greeks on the forward basis (core/greeks.py) against QuantLib, a textbook example and identities.

- QuantLib's AnalyticEuropeanEngine on a Black-Scholes-Merton process [L]:
  300 seeded contracts (spot, strike, rate, dividend yield, vol, whole days to
  expiry on Actual/365 Fixed), delta, gamma, vega / 100 and thetaPerDay
  (= theta / 365).
- Hull, Options, Futures, and Other Derivatives, chapter "The Greek Letters",
  the 100,000-call example (S=49, K=50, r=5%, sigma=20%, T=20 weeks): book
  values recalled from memory [M], and the closed forms recomputed with scipy
  [C] (REFERENCE.md s.10).
- Put-call parity of Greeks [D]: C - P = DF (F - K) has gamma and vega 0,
  delta DF F/S, and a theta read off the same proportional clock.
- The day convention of theta: per calendar day on ACT/365, per trading day on
  252/250, with theta * days (the first-order decay over the remaining life)
  the same on every basis [D], and a finite difference of the Black-76 price
  [D] over one day's share of the remaining life.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import QuantLib as ql
from scipy.stats import norm

from chaintriage.core import black76
from chaintriage.core.greeks import gamma, theta_per_day, vega_per_point

TODAY = ql.Date(1, 12, 2026)


def _ql_greeks(spot, strike, r, q, sigma, days, is_call):
    """(npv, delta, gamma, vega per point, theta per day) from QuantLib's analytic European engine."""
    ql.Settings.instance().evaluationDate = TODAY
    dc = ql.Actual365Fixed()
    process = ql.BlackScholesMertonProcess(
        ql.QuoteHandle(ql.SimpleQuote(spot)),
        ql.YieldTermStructureHandle(ql.FlatForward(TODAY, q, dc)),
        ql.YieldTermStructureHandle(ql.FlatForward(TODAY, r, dc)),
        ql.BlackVolTermStructureHandle(ql.BlackConstantVol(TODAY, ql.NullCalendar(), sigma, dc)),
    )
    kind = ql.Option.Call if is_call else ql.Option.Put
    option = ql.VanillaOption(ql.PlainVanillaPayoff(kind, strike), ql.EuropeanExercise(TODAY + int(days)))
    option.setPricingEngine(ql.AnalyticEuropeanEngine(process))
    return option.NPV(), option.delta(), option.gamma(), option.vega() / 100.0, option.thetaPerDay()


def _forward_basis(spot, r, q, t):
    return spot * np.exp((r - q) * t), np.exp(-r * t)


@pytest.fixture(scope="module")
def seeded_contracts():
    rng = np.random.default_rng(20261203)
    n = 300
    spot = rng.uniform(20.0, 500.0, n)
    strike = spot * np.exp(rng.uniform(-0.5, 0.4, n))
    r = rng.uniform(0.0, 0.08, n)
    q = rng.uniform(0.0, 0.05, n)
    sigma = rng.uniform(0.08, 0.9, n)
    days = rng.integers(1, 900, n)
    is_call = rng.random(n) < 0.5
    ql_values = np.array([_ql_greeks(*args) for args in zip(spot, strike, r, q, sigma, days, is_call)])
    return spot, strike, r, q, sigma, days, is_call, ql_values


def test_greeks_match_quantlib_analytic_european_engine(seeded_contracts):
    """[L] QuantLib AnalyticEuropeanEngine: gamma, vega/100, thetaPerDay; and the spot delta formula."""
    spot, strike, r, q, sigma, days, is_call, ql_values = seeded_contracts
    t = days / 365.0
    f, df = _forward_basis(spot, r, q, t)
    npv, ql_delta, ql_gamma, ql_vega, ql_theta = ql_values.T
    scale = np.maximum(npv, 1e-3)
    # Black-76 price and spot delta on the forward basis agree with the engine (the pipeline's delta).
    np.testing.assert_allclose(black76.price(f, strike, sigma, t, df, is_call), npv, rtol=1e-10, atol=1e-10)
    delta = df * f / spot * black76.delta(f, strike, sigma, t, 1.0, is_call)
    np.testing.assert_allclose(delta, ql_delta, atol=1e-10)
    np.testing.assert_allclose(gamma(spot, f, strike, sigma, t, df), ql_gamma, rtol=1e-9, atol=1e-14)
    np.testing.assert_allclose(vega_per_point(f, strike, sigma, t, df), ql_vega, rtol=1e-9, atol=1e-12)
    got_theta = theta_per_day(spot, f, strike, sigma, t, df, days.astype(float), is_call)
    assert np.max(np.abs(got_theta - ql_theta) / scale) < 1e-9
    np.testing.assert_allclose(got_theta, ql_theta, rtol=1e-8, atol=1e-12)


# Hull, "The Greek Letters" chapter, the 100,000-call example: S=49, K=50, r=.05, q=0, sigma=.20, T=20/52.
HULL = dict(spot=49.0, strike=50.0, r=0.05, sigma=0.20, t=20.0 / 52.0)


def _hull():
    f, df = _forward_basis(HULL["spot"], HULL["r"], 0.0, HULL["t"])
    return f, df


def test_hull_greek_letters_example_book_values():
    """[M] book values from memory: gamma 0.066, vega 12.1 per unit of vol, theta -4.31 per year (/365 per day)."""
    f, df = _hull()
    s, k, sig, t = HULL["spot"], HULL["strike"], HULL["sigma"], HULL["t"]
    assert abs(float(gamma(s, f, k, sig, t, df)) - 0.066) <= 0.0005
    assert abs(float(vega_per_point(f, k, sig, t, df)) * 100.0 - 12.1) <= 0.05
    assert abs(float(theta_per_day(s, f, k, sig, t, df, t * 365.0, True)) * 365.0 - (-4.31)) <= 0.005


def test_hull_greek_letters_example_recomputed():
    """[C] closed forms recomputed with scipy (REFERENCE.md s.10): gamma 0.065544, vega 0.121055 per
    point, theta -4.305330 per year = -0.011795 per calendar day."""
    f, df = _hull()
    s, k, r, sig, t = HULL["spot"], HULL["strike"], HULL["r"], HULL["sigma"], HULL["t"]
    d1 = (math.log(s / k) + (r + 0.5 * sig**2) * t) / (sig * math.sqrt(t))
    d2 = d1 - sig * math.sqrt(t)
    gamma_ref = norm.pdf(d1) / (s * sig * math.sqrt(t))
    vega_ref = s * norm.pdf(d1) * math.sqrt(t) / 100.0
    theta_ref = (-s * norm.pdf(d1) * sig / (2 * math.sqrt(t)) - r * k * math.exp(-r * t) * norm.cdf(d2)) / 365.0
    assert float(gamma(s, f, k, sig, t, df)) == pytest.approx(gamma_ref, rel=1e-12)
    assert float(gamma(s, f, k, sig, t, df)) == pytest.approx(0.065544, abs=5e-7)
    assert float(vega_per_point(f, k, sig, t, df)) == pytest.approx(vega_ref, rel=1e-12)
    assert float(vega_per_point(f, k, sig, t, df)) == pytest.approx(0.121055, abs=5e-7)
    got = float(theta_per_day(s, f, k, sig, t, df, t * 365.0, True))
    assert got == pytest.approx(theta_ref, rel=1e-12)
    assert got == pytest.approx(-0.011795, abs=5e-7)


def test_put_call_parity_of_greeks(seeded_contracts):
    """[D] C - P = DF (F - K): gamma and vega equal; delta_C - delta_P = DF F / S (= e^{-qT});
    theta_C - theta_P = -(ln(DF) DF (F - K) + ln(F/S) DF F) / days."""
    spot, strike, r, q, sigma, days, _, _ = seeded_contracts
    t = days / 365.0
    f, df = _forward_basis(spot, r, q, t)
    days_f = days.astype(float)
    # Gamma and vega take no side (one function serves both): check gamma against a central
    # difference of each side's delta, so the call's and the put's gamma are both that one number.
    h = 1e-4 * spot
    for is_call in (True, False):
        def spot_delta(s):
            fs = s * np.exp((r - q) * t)
            return df * fs / s * black76.delta(fs, strike, sigma, t, 1.0, is_call)
        fd = (spot_delta(spot + h) - spot_delta(spot - h)) / (2 * h)
        np.testing.assert_allclose(gamma(spot, f, strike, sigma, t, df), fd, rtol=1e-3, atol=1e-10)
    dc = df * f / spot * black76.delta(f, strike, sigma, t, 1.0, True)
    dp = df * f / spot * black76.delta(f, strike, sigma, t, 1.0, False)
    np.testing.assert_allclose(dc - dp, np.exp(-q * t), rtol=1e-12)
    tc = theta_per_day(spot, f, strike, sigma, t, df, days_f, True)
    tp = theta_per_day(spot, f, strike, sigma, t, df, days_f, False)
    expected = -(np.log(df) * df * (f - strike) + np.log(f / spot) * df * f) / days_f
    np.testing.assert_allclose(tc - tp, expected, rtol=1e-9, atol=1e-12)
    # The same parity in QuantLib's numbers [L]: thetaPerDay(call) - thetaPerDay(put) per contract.
    calls = np.array([_ql_greeks(s, k, rr, qq, sg, d, True)[4] for s, k, rr, qq, sg, d in
                      zip(spot[:40], strike[:40], r[:40], q[:40], sigma[:40], days[:40])])
    puts = np.array([_ql_greeks(s, k, rr, qq, sg, d, False)[4] for s, k, rr, qq, sg, d in
                     zip(spot[:40], strike[:40], r[:40], q[:40], sigma[:40], days[:40])])
    np.testing.assert_allclose(calls - puts, expected[:40], rtol=1e-8, atol=1e-12)


def test_vega_per_point_is_a_price_difference():
    """[D] vega per point = dPrice/dsigma / 100 (central difference, h = 1e-5); a whole point's
    price change differs only by the curvature in vol (within 0.1% here)."""
    f, k, sig, t, df = 101.0, np.array([80.0, 100.0, 125.0]), 0.3, 0.4, 0.98
    h = 1e-5
    fd = (black76.price(f, k, sig + h, t, df, True) - black76.price(f, k, sig - h, t, df, True)) / (2 * h)
    np.testing.assert_allclose(vega_per_point(f, k, sig, t, df), fd / 100.0, rtol=1e-7)
    point = black76.price(f, k, sig + 0.005, t, df, True) - black76.price(f, k, sig - 0.005, t, df, True)
    np.testing.assert_allclose(vega_per_point(f, k, sig, t, df), point, rtol=1e-3)


@pytest.mark.parametrize("basis, per_year", [("365", 365.0), ("252", 252.0), ("250", 250.0)])
def test_theta_day_convention(basis, per_year):
    """Theta per day of the basis: on 365 the BSM theta / 365 per calendar day [L: QuantLib thetaPerDay];
    on a trading basis per trading day, with theta * days equal on every basis and equal to a finite
    difference of the Black-76 value over one day's share of the remaining life [D]."""
    spot, strike, r, q, sig365 = 100.0, 95.0, 0.04, 0.01, 0.25
    cal_days = 45
    t365 = cal_days / 365.0
    f, df = _forward_basis(spot, r, q, t365)
    # The same expiry on another basis: 31 trading days to go; the vol rescaled so total variance is equal.
    basis_days = cal_days if basis == "365" else 31.0
    t = basis_days / per_year
    sig = sig365 * math.sqrt(t365 / t)
    got = float(theta_per_day(spot, f, strike, sig, t, df, basis_days, False))
    ql_theta = _ql_greeks(spot, strike, r, q, sig365, cal_days, False)[4]
    assert got * basis_days == pytest.approx(ql_theta * cal_days, rel=1e-9)
    if basis == "365":
        assert got == pytest.approx(ql_theta, rel=1e-9)
    else:
        assert got == pytest.approx(ql_theta * cal_days / basis_days, rel=1e-9)
        assert abs(got) > abs(ql_theta)  # fewer trading days than calendar days: more per day
    # One day of the basis passes: every clock (variance time, interest, carry) runs down by 1/days.
    lam = 1.0 - 1.0 / basis_days
    eps = 1e-3 / basis_days
    lam_up, lam_dn = 1.0 + eps, 1.0 - eps

    def value(lmb):
        return float(black76.price(spot * (f / spot) ** lmb, strike, sig, t * lmb, df ** lmb, False))

    slope = (value(lam_up) - value(lam_dn)) / (2 * eps)  # dV / d(fraction of life)
    assert got == pytest.approx(-slope / basis_days, rel=1e-6)
    assert value(lam) - value(1.0) == pytest.approx(got, rel=0.05)


def test_greeks_are_nan_on_unusable_inputs():
    """[D] NaN, not an error, where vol, time, days, spot, forward or strike is missing or not positive."""
    spot = np.array([100.0, 100.0, 100.0, 0.0, 100.0, 100.0])
    f = np.array([100.0, 100.0, 100.0, 100.0, np.nan, 100.0])
    k = np.array([100.0, 100.0, 100.0, 100.0, 100.0, -5.0])
    sig = np.array([0.0, 0.2, np.nan, 0.2, 0.2, 0.2])
    t = np.array([0.1, 0.0, 0.1, 0.1, 0.1, 0.1])
    with np.errstate(all="raise"):
        g = gamma(spot, f, k, sig, t, 1.0)
        v = vega_per_point(f, k, sig, t, 1.0)
        th = theta_per_day(spot, f, k, sig, t, 1.0, t * 365.0, True)
    assert np.isnan(g).all() and np.isnan(th).all()
    assert np.isnan(v[[0, 1, 2, 4, 5]]).all()
