"""Implied volatility (core/implied_vol.py) against published examples and reference libraries.

Sources and tags follow /work/shared/REFERENCE.md. Oracles: vollib (an
implementation of Jäckel's "Let's Be Rational") and QuantLib's
blackFormulaImpliedStdDev, both test-only. BSM examples are solved as
Black-76 on the forward: F = S*exp(rT), DF = exp(-rT).

About the accuracy checks: an in-the-money price is intrinsic value plus time
value, so a price rounded to float64 already carries an uncertainty of about
eps*price in its time value, which no solver can remove. Checks on
in-the-money prices therefore allow that data error divided by vega on top of
the 1e-12 target; out-of-the-money prices are held to 1e-12 flat.
"""

import math
import warnings

import numpy as np
import pytest
import QuantLib as ql
from hypothesis import given, settings
from hypothesis import strategies as st
from vollib.black import black as vl_black
from vollib.black.implied_volatility import implied_volatility as vl_iv

from chaintriage.core import implied_vol as iv_module
from chaintriage.core.black76 import intrinsic, price, vega
from chaintriage.core.implied_vol import (
    ABOVE_UPPER_BOUND,
    BELOW_INTRINSIC,
    NO_PRICE,
    NO_TIME,
    OK,
    STATUS_REASONS,
    ImpliedVolResult,
    implied_vol,
)

EPS = np.finfo(float).eps
TIME_VALUE_FLOOR = 0.005  # half a cent


def wide_contracts(n, seed):
    """Seeded random contracts over the solver's stated range.

    F in [1, 5000], K/F in [0.2, 5], sigma in [0.01, 3], T in [1 hour, 5 years]
    (all log-uniform), rates in [-1%, 8%], calls and puts. Prices: the
    out-of-the-money price from Black-76, plus discounted intrinsic value by
    put-call parity for in-the-money contracts.
    """
    rng = np.random.default_rng(seed)
    f = np.exp(rng.uniform(np.log(1.0), np.log(5000.0), n))
    k = f * np.exp(rng.uniform(np.log(0.2), np.log(5.0), n))
    sigma = np.exp(rng.uniform(np.log(0.01), np.log(3.0), n))
    t = np.exp(rng.uniform(np.log(1.0 / 365.0 / 24.0), np.log(5.0), n))
    r = rng.uniform(-0.01, 0.08, n)
    df = np.exp(-r * t)
    is_call = rng.random(n) < 0.5
    otm_is_call = k >= f
    time_value = price(f, k, sigma, t, df, otm_is_call)
    p = time_value + intrinsic(f, k, df, is_call)
    return p, f, k, t, df, r, is_call, sigma, time_value


def vol_tolerance(p, f, k, sigma, t, df, is_call):
    """1e-12, plus for in-the-money prices the price's own rounding divided by vega."""
    itm = np.where(is_call, f > k, k > f)
    with np.errstate(divide="ignore", over="ignore", invalid="ignore"):
        data_error = 2.0 * EPS * p / vega(f, k, sigma, t, df)
    return 1e-12 + np.where(itm, data_error, 0.0)


# ---------------------------------------------------------------- published examples


def test_hull_15_11_implied_vol():
    # Hull §15.11 [V]: c=1.875, S=21, K=20, r=.1, T=.25 -> sigma = 0.235 (to 3 dp).
    s, k, r, t = 21.0, 20.0, 0.1, 0.25
    f, df = s * math.exp(r * t), math.exp(-r * t)
    res = implied_vol(1.875, f, k, t, df, True)
    assert res.status == OK
    assert abs(float(res.sigma) - 0.235) <= 0.0005
    # REFERENCE §1 computed value 0.234513 (vollib) / 0.234512 (QuantLib); recompute both oracles.
    want_vl = vl_iv(1.875, f, k, r, t, "c")
    want_ql = ql.blackFormulaImpliedStdDev(ql.Option.Call, k, f, 1.875, df, 0.0, ql.nullDouble(), 1e-14, 100)
    assert abs(float(res.sigma) - want_vl) <= 1e-9
    assert abs(float(res.sigma) - want_ql / math.sqrt(t)) <= 1e-9
    assert abs(float(res.sigma) - 0.234513) <= 1.5e-6


def test_hull_15_11_trial_prices():
    # Hull §15.11 [V]: the trial prices of the search, 1.76 at sigma=.20 and 2.10 at sigma=.30.
    f, df = 21.0 * math.exp(0.025), math.exp(-0.025)
    assert abs(float(price(f, 20.0, 0.20, 0.25, df, True)) - 1.76) <= 0.005
    assert abs(float(price(f, 20.0, 0.30, 0.25, df, True)) - 2.10) <= 0.005


@pytest.mark.parametrize(
    "f, k, t, sigma, is_call",
    [
        (100.0, 150.0, 0.1, 0.3, True),  # price about 2.4e-5
        (100.0, 60.0, 0.05, 0.6, False),
        (100.0, 100.0, 1.0 / 365.0, 0.15, True),
    ],
)
def test_reference_round_trip_cases(f, k, t, sigma, is_call):
    # REFERENCE §9 implied-vol round trip [L]: vollib and QuantLib recover sigma to 1e-10.
    p = float(price(f, k, sigma, t, 1.0, is_call))
    if k == 150.0:
        assert abs(p - 2.4e-5) <= 0.05e-5
    res = implied_vol(p, f, k, t, 1.0, is_call)
    assert res.status == OK
    assert abs(float(res.sigma) - sigma) <= 1e-12
    assert abs(vl_iv(p, f, k, 0.0, t, "c" if is_call else "p") - sigma) <= 1e-10


@pytest.mark.parametrize(
    "sigma, t, exact, approx, approx_sigma",
    [(0.20, 0.25, 3.987761, 3.989423, 0.199917), (0.20, 30 / 365, 2.287151, 2.287464, 0.199973), (0.50, 1.0, 19.741265, 19.947114, 0.494840)],
)
def test_brenner_subrahmanyam_atm(sigma, t, exact, approx, approx_sigma):
    # Brenner & Subrahmanyam (1988), FAJ 44(5) [V citation]: C_ATM ~ DF*F*sigma*sqrt(T)/sqrt(2*pi),
    # so sigma ~ sqrt(2*pi/T)*C/(DF*F). REFERENCE §9 table for F=K=100, DF=1 (values to 6 dp).
    f = 100.0
    assert abs(float(price(f, f, sigma, t)) - exact) <= 5e-7
    assert abs(f * sigma * math.sqrt(t) / math.sqrt(2 * math.pi) - approx) <= 5e-7
    # The exact (rounded) price gives back sigma, within the rounding over vega.
    res = implied_vol(exact, f, f, t)
    assert res.status == OK
    assert abs(float(res.sigma) - sigma) <= 5e-7 / float(vega(f, f, sigma, t)) + 1e-12
    # The approximation used as a vol estimate on the exact price: the table's last column.
    bs_sigma = math.sqrt(2 * math.pi / t) * exact / f
    assert abs(bs_sigma - approx_sigma) <= 5e-7
    # It reads low by about s^2/24 relative, s = sigma*sqrt(T) (from the erf series of the ATM price).
    s = sigma * math.sqrt(t)
    assert abs(bs_sigma / float(res.sigma) - (1 - s * s / 24)) <= s**4 / 100 + 1e-6
    # And our solver reads the approximation's price back as sigma to first order.
    res = implied_vol(approx, f, f, t)
    assert res.status == OK
    assert abs(float(res.sigma) / sigma - (1 + s * s / 24)) <= s**4 / 100 + 1e-6


# ---------------------------------------------------------------- oracles over random contracts


def test_agrees_with_vollib():
    # vollib implied_volatility as oracle [L]; it converges to near machine precision.
    p, f, k, t, df, r, is_call, sigma, tv = wide_contracts(3000, seed=101)
    res = implied_vol(p, f, k, t, df, is_call)
    compared = 0
    worst = 0.0
    # Compared where the price determines the vol: half a cent of time value or more.
    for i in np.flatnonzero((res.status == OK) & (tv >= TIME_VALUE_FLOOR)):
        flag = "c" if is_call[i] else "p"
        try:
            want = vl_iv(p[i], f[i], k[i], r[i], t[i], flag)
        except Exception:  # vollib reports its own bound violations by exceptions
            continue
        # The oracle converged if its vol reprices the input (its own pricer).
        repriced = vl_black(flag, f[i], k[i], t[i], r[i], want)
        if not abs(repriced - p[i]) <= 1e-9 * p[i]:
            continue
        compared += 1
        worst = max(worst, abs(res.sigma[i] - want))
    assert compared >= 0.9 * np.count_nonzero(tv >= TIME_VALUE_FLOOR)
    assert worst <= 1e-9


def test_agrees_with_quantlib():
    # QuantLib blackFormulaImpliedStdDev (accuracy 1e-14 in std dev) as oracle [L].
    p, f, k, t, df, r, is_call, sigma, tv = wide_contracts(3000, seed=202)
    res = implied_vol(p, f, k, t, df, is_call)
    compared = 0
    worst = 0.0
    # Compared where the price determines the vol: half a cent of time value or more.
    for i in np.flatnonzero((res.status == OK) & (tv >= TIME_VALUE_FLOOR)):
        kind = ql.Option.Call if is_call[i] else ql.Option.Put
        try:
            std = ql.blackFormulaImpliedStdDev(kind, k[i], f[i], p[i], df[i], 0.0, ql.nullDouble(), 1e-14, 1000)
        except RuntimeError:
            continue
        repriced = ql.blackFormula(kind, k[i], f[i], std, df[i])
        if not (std > 0 and abs(repriced - p[i]) <= 1e-9 * p[i]):
            continue
        compared += 1
        worst = max(worst, abs(res.sigma[i] - std / math.sqrt(t[i])))
    assert compared >= 0.9 * np.count_nonzero(tv >= TIME_VALUE_FLOOR)
    assert worst <= 1e-9


# ---------------------------------------------------------------- accuracy and round trips


def test_vol_accuracy_over_wide_range():
    # [D] consistency: true vol back to 1e-12 wherever there is half a cent of time value.
    p, f, k, t, df, r, is_call, sigma, tv = wide_contracts(200_000, seed=303)
    keep = tv >= TIME_VALUE_FLOOR
    assert keep.sum() > 30_000
    res = implied_vol(p, f, k, t, df, is_call)
    assert np.all(res.status[keep] == OK)
    err = np.abs(res.sigma - sigma)
    tol = vol_tolerance(p, f, k, sigma, t, df, is_call)
    otm = np.where(is_call, k >= f, k <= f)
    assert np.max(err[keep & otm]) <= 1e-12
    assert np.all(err[keep] <= tol[keep])


def test_round_trip_price_vol_price_with_vollib_pricer():
    # price -> vol -> price, priced both ways with vollib's black [L] (accurate in the tails):
    # within 1e-12 relative where there is half a cent of time value.
    p0, f, k, t, df, r, is_call, sigma, tv = wide_contracts(6000, seed=404)
    idx = np.flatnonzero(tv >= TIME_VALUE_FLOOR)[:1500]
    flags = ["c" if c else "p" for c in is_call[idx]]
    p = np.array([vl_black(fl, f[i], k[i], t[i], r[i], sigma[i]) for fl, i in zip(flags, idx)])
    res = implied_vol(p, f[idx], k[idx], t[idx], df[idx], is_call[idx])
    assert np.all(res.status == OK)
    back = np.array([vl_black(fl, f[i], k[i], t[i], r[i], s) for fl, i, s in zip(flags, idx, res.sigma)])
    np.testing.assert_allclose(back, p, rtol=1e-12, atol=0)
    tol = vol_tolerance(p, f[idx], k[idx], sigma[idx], t[idx], df[idx], is_call[idx])
    assert np.all(np.abs(res.sigma - sigma[idx]) <= tol)


def test_round_trip_with_black76_pricer():
    # Same round trip through core/black76.price [D]. Its F*N(d1) - K*N(d2) form
    # loses digits by cancellation for short-dated near-the-money OTM options, so
    # the allowance is 1e-12 relative plus a few eps of the larger term.
    p, f, k, t, df, r, is_call, sigma, tv = wide_contracts(100_000, seed=505)
    keep = tv >= TIME_VALUE_FLOOR
    res = implied_vol(p, f, k, t, df, is_call)
    back = price(f, k, res.sigma, t, df, is_call)
    big_term = df * np.maximum(f, k)
    assert np.all(np.abs(back - p)[keep] <= (1e-12 * p + 8 * EPS * big_term)[keep])


def test_put_and_call_give_the_same_vol_under_parity():
    # Put-call parity on the forward, c - p = DF*(F - K) [C]: both prices carry one vol.
    p, f, k, t, df, r, is_call, sigma, tv = wide_contracts(50_000, seed=606)
    call = price(f, k, sigma, t, df, True)
    put = call - df * (f - k)
    keep = (tv >= TIME_VALUE_FLOOR) & (put > 0)
    rc = implied_vol(call[keep], f[keep], k[keep], t[keep], df[keep], True)
    rp = implied_vol(put[keep], f[keep], k[keep], t[keep], df[keep], False)
    assert np.all(rc.status == OK) and np.all(rp.status == OK)
    # Both see the same time value up to the rounding of the larger price.
    bigger = np.maximum(call[keep], put[keep])
    tol = 1e-12 + 4 * EPS * bigger / vega(f[keep], k[keep], sigma[keep], t[keep], df[keep])
    assert np.all(np.abs(rc.sigma - rp.sigma) <= tol)


@settings(max_examples=150, deadline=None)
@given(
    f=st.floats(1.0, 5000.0),
    moneyness=st.floats(0.2, 5.0),
    sigma=st.floats(0.01, 3.0),
    t=st.floats(1.0 / 365.0 / 24.0, 5.0),
    rate=st.floats(-0.01, 0.08),
    is_call=st.booleans(),
)
def test_round_trip_property(f, moneyness, sigma, t, rate, is_call):
    # Hypothesis property [D]: vol -> price -> vol, wherever there is half a cent of time value.
    k = f * moneyness
    df = math.exp(-rate * t)
    p = float(price(f, k, sigma, t, df, is_call))
    if p - float(intrinsic(f, k, df, is_call)) < TIME_VALUE_FLOOR:
        return
    res = implied_vol(p, f, k, t, df, is_call)
    assert res.status == OK
    itm = f > k if is_call else k > f
    # black76.price rounds an in-the-money price to a few eps of F or K; that
    # data error over vega is allowed on top of 1e-12 for those.
    data_error = 4 * EPS * df * max(f, k) / float(vega(f, k, sigma, t, df)) if itm else 0.0
    assert abs(float(res.sigma) - sigma) <= 1e-12 + data_error


def test_extreme_but_valid_prices_are_solved():
    # [D] far outside the usual range: tiny OTM prices and prices close to the bound.
    f = np.array([100.0, 100.0, 100.0, 100.0, 1.0, 5000.0])
    k = np.array([500.0, 20.0, 100.0, 100.0, 1.0, 5000.0])
    t = np.array([0.1, 0.1, 5.0, 1e-6, 5.0, 1.0])
    sigma = np.array([0.3, 0.3, 4.0, 0.2, 3.0, 0.0005])
    is_call = np.array([True, False, True, True, False, True])
    p = price(f, k, sigma, t, 1.0, is_call)
    assert p[0] < 1e-60 and p[1] < 1e-60  # deep tails
    assert f[2] - p[2] < 1e-2  # within a cent of the upper bound F
    res = implied_vol(p, f, k, t, 1.0, is_call)
    assert np.all(res.status == OK)
    np.testing.assert_allclose(res.sigma, sigma, rtol=1e-9)


def test_unconverged_elements_get_polished(monkeypatch):
    # [D] Far-away strikes with very large total variance are where the two
    # whole-array steps may stop short; those elements alone get the polish.
    polished = []
    real_polish = iv_module._polish

    def counting_polish(beta, x, s):
        polished.append(beta.size)
        return real_polish(beta, x, s)

    monkeypatch.setattr(iv_module, "_polish", counting_polish)
    f = 100.0
    k = np.array([1e-8, 1e-4, 1e8, 90.0, 100.0, 110.0])
    sigma = np.array([2.0, 4.0, 4.0, 0.2, 0.2, 0.2])
    is_call = k > f
    p = price(f, k, sigma, 5.0, 1.0, is_call)
    res = implied_vol(p, f, k, 5.0, 1.0, is_call)
    assert np.all(res.status == OK)
    assert 0 < sum(polished) < k.size
    np.testing.assert_allclose(res.sigma, sigma, rtol=1e-12, atol=0)


def test_polish_converges_from_far_starting_points():
    # [D] The safety net on its own: from starting points a thousand times too
    # small or too large, the bracketed loop still lands on the root.
    x = -np.array([0.0, 0.1, 1.0, 5.0, 20.0, 0.5, 0.005])
    s_true = np.array([0.2, 0.05, 1.0, 3.0, 8.0, 6.0, 1e-3])
    bmax = np.exp(0.5 * x)
    beta, _ = iv_module._black(x, s_true, bmax, 1.0 / bmax)
    assert np.all((beta > 0) & (beta < bmax))
    for start in (s_true * 1e-3, s_true * 1e3, np.full_like(s_true, np.nan)):  # NaN: no guess at all
        got = iv_module._polish(beta, x, start.copy())
        np.testing.assert_allclose(got, s_true, rtol=1e-12, atol=0)


# ---------------------------------------------------------------- status codes


def test_status_codes():
    f, k, t, df = 100.0, 90.0, 0.5, 0.98
    intr = df * (f - k)
    cases = [
        # (price, forward, strike, t, discount, is_call, expected)
        (intr - 0.01, f, k, t, df, True, BELOW_INTRINSIC),  # below intrinsic
        (intr, f, k, t, df, True, BELOW_INTRINSIC),  # at intrinsic: no time value
        (df * f, f, k, t, df, True, ABOVE_UPPER_BOUND),  # call at DF*F
        (df * f + 1.0, f, k, t, df, True, ABOVE_UPPER_BOUND),  # call above DF*F
        (df * k, f, k, t, df, False, ABOVE_UPPER_BOUND),  # put at DF*K
        (np.nan, f, k, t, df, True, NO_PRICE),
        (0.0, f, k, t, df, True, NO_PRICE),
        (-1.0, f, k, t, df, True, NO_PRICE),
        (np.inf, f, k, t, df, True, NO_PRICE),
        (12.0, np.nan, k, t, df, True, NO_PRICE),
        (12.0, f, 0.0, t, df, True, NO_PRICE),
        (12.0, f, k, np.nan, df, True, NO_PRICE),
        (12.0, f, k, t, 0.0, True, NO_PRICE),
        (12.0, f, k, 0.0, df, True, NO_TIME),  # t = 0
        (12.0, f, k, -0.1, df, True, NO_TIME),
        (12.0, f, k, t, df, True, OK),
        (2.0, f, k, t, df, False, OK),
    ]
    cols = list(zip(*cases))
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # bad input raises no numpy warnings either
        res = implied_vol(*[np.array(c) for c in cols[:6]])
    assert res.status.dtype == np.int8
    assert res.status.tolist() == list(cols[6])
    assert np.all(np.isnan(res.sigma[res.status != OK]))
    assert np.all(np.isfinite(res.sigma[res.status == OK]))
    # The two OK cases are right (QuantLib oracle [L]).
    for i in np.flatnonzero(res.status == OK):
        kind = ql.Option.Call if cols[5][i] else ql.Option.Put
        std = ql.blackFormulaImpliedStdDev(kind, k, f, cols[0][i], df, 0.0, ql.nullDouble(), 1e-14, 100)
        assert abs(res.sigma[i] - std / math.sqrt(t)) <= 1e-9


def test_reasons_are_plain_text_for_every_code():
    assert set(STATUS_REASONS) == {OK, NO_PRICE, BELOW_INTRINSIC, ABOVE_UPPER_BOUND, NO_TIME}
    assert len({OK, NO_PRICE, BELOW_INTRINSIC, ABOVE_UPPER_BOUND, NO_TIME}) == 5
    assert all(isinstance(v, str) and v and "[" not in v for v in STATUS_REASONS.values())
    res = implied_vol([np.nan, 1.0, 2.0], 100.0, 100.0, [0.5, 0.0, 0.5])
    assert res.reasons().tolist() == [STATUS_REASONS[NO_PRICE], STATUS_REASONS[NO_TIME], STATUS_REASONS[OK]]


# ---------------------------------------------------------------- shapes and blocks


def test_scalar_and_broadcast_shapes():
    res = implied_vol(1.7011, 19.0, 19.0, 0.75, math.exp(-0.075))
    assert isinstance(res, ImpliedVolResult)
    assert res.sigma.shape == () and res.status.shape == ()
    # Haug Black-76 [L]: 1.7011 at sigma .28 (rounded price, tolerance over vega).
    assert abs(float(res.sigma) - 0.28) <= 1e-5
    strikes = np.array([[90.0], [100.0], [110.0]])
    times = np.array([0.25, 0.5, 1.0, 2.0])
    p = price(100.0, strikes, 0.3, times, 0.99, True)
    res = implied_vol(p, 100.0, strikes, times, 0.99, True)
    assert res.sigma.shape == (3, 4) and res.status.shape == (3, 4)
    np.testing.assert_allclose(res.sigma, 0.3, rtol=0, atol=1e-12)
    empty = implied_vol(np.array([]), 100.0, 100.0, 1.0)
    assert empty.sigma.shape == (0,) and empty.status.shape == (0,)


def test_many_blocks_with_bad_rows_mixed_in():
    # More contracts than one internal block, with unusable rows scattered through;
    # every solvable row must come out as if solved alone.
    n = iv_module._BLOCK * 2 + 123
    rng = np.random.default_rng(707)
    f = rng.uniform(50.0, 150.0, n)
    k = rng.uniform(60.0, 140.0, n)
    sigma = rng.uniform(0.1, 0.8, n)
    t = rng.uniform(0.05, 1.0, n)
    is_call = k > f  # out of the money
    p = price(f, k, sigma, t, 0.97, is_call)
    bad = rng.random(n) < 0.05
    p[bad] = np.nan
    res = implied_vol(p, f, k, t, 0.97, is_call)
    assert np.all(res.status[bad] == NO_PRICE)
    good = ~bad & (p > 1e-3)
    assert np.all(res.status[good] == OK)
    assert np.max(np.abs(res.sigma[good] - sigma[good])) <= 1e-12
    some = np.flatnonzero(good)[:: n // 40]
    for i in some:
        alone = implied_vol(p[i], f[i], k[i], t[i], 0.97, is_call[i])
        assert float(alone.sigma) == res.sigma[i]
