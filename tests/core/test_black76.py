"""Black-76 pricing (core/black76.py) against published worked examples and reference libraries.

Sources and tags follow /work/shared/REFERENCE.md §1 and §9. BSM examples are
priced as Black-76 on the forward: F = S*exp(b*T) with cost of carry b = r - q,
DF = exp(-r*T). A rounded published number is checked to half a unit in its
last digit.
"""

import math

import numpy as np
import pytest
import QuantLib as ql
from vollib.black import black as vl_black

from chaintriage.core.black76 import d1_d2, delta, intrinsic, price, vega
from chaintriage.core.implied_vol import OK, implied_vol

# (source, S, K, T, r, b, sigma, is_call, published price, decimals published)
WORKED_EXAMPLES = [
    # Hull, Options, Futures, and Other Derivatives, Example 15.6 [V]
    ("Hull Ex.15.6 call [V]", 42.0, 40.0, 0.5, 0.10, 0.10, 0.20, True, 4.76, 2),
    ("Hull Ex.15.6 put [V]", 42.0, 40.0, 0.5, 0.10, 0.10, 0.20, False, 0.81, 2),
    # Hull Ex.15.7 [V]
    ("Hull Ex.15.7 call [V]", 40.0, 60.0, 5.0, 0.03, 0.03, 0.30, True, 7.04, 2),
    # Hull Ex.15.9, spot less PV of dividends 0.9742 [V]
    ("Hull Ex.15.9 call [V]", 40.0 - 0.9742, 40.0, 0.5, 0.09, 0.09, 0.30, True, 3.67, 2),
    # Haug, Option Pricing Formulas (1998), pp.2-8, via QuantLib europeanoption.cpp [L]
    ("Haug BS73 call [L]", 60.0, 65.0, 0.25, 0.08, 0.08, 0.30, True, 2.1334, 4),
    ("Haug Merton put [L]", 100.0, 95.0, 0.5, 0.10, 0.05, 0.20, False, 2.4648, 4),
    ("Haug Black-76 call [L]", 19.0, 19.0, 0.75, 0.10, 0.0, 0.28, True, 1.7011, 4),
    ("Haug Black-76 put [L]", 19.0, 19.0, 0.75, 0.10, 0.0, 0.28, False, 1.7011, 4),
    ("Haug Garman-Kohlhagen call [L]", 1.56, 1.60, 0.5, 0.06, 0.06 - 0.08, 0.12, True, 0.0291, 4),
    ("Haug GBSM put [L]", 75.0, 70.0, 0.5, 0.10, 0.05, 0.35, False, 4.0870, 4),
    # vollib docstring, BS call [L] (published to 9 decimals)
    ("vollib docstring BS call [L]", 100.0, 90.0, 0.5, 0.01, 0.01, 0.20, True, 12.111581435, 9),
    # Hull, futures-option chapter, crude-oil put [M] (from memory, not verified)
    ("Hull futures put [M]", 20.0, 20.0, 4.0 / 12.0, 0.09, 0.0, 0.25, False, 1.12, 2),
]


def _forward_and_df(s, t, r, b):
    return s * math.exp(b * t), math.exp(-r * t)


@pytest.mark.parametrize("row", WORKED_EXAMPLES, ids=[r[0] for r in WORKED_EXAMPLES])
def test_worked_example_prices(row):
    _, s, k, t, r, b, sigma, is_call, published, decimals = row
    f, df = _forward_and_df(s, t, r, b)
    got = float(price(f, k, sigma, t, df, is_call))
    assert abs(got - published) <= 0.5 * 10.0**-decimals


@pytest.mark.parametrize("row", WORKED_EXAMPLES, ids=[r[0] for r in WORKED_EXAMPLES])
def test_worked_example_prices_match_quantlib_and_vollib(row):
    # QuantLib blackFormula and vollib black as oracles [L]; REFERENCE §1 says all agree to 1e-12.
    _, s, k, t, r, b, sigma, is_call, _, _ = row
    f, df = _forward_and_df(s, t, r, b)
    got = float(price(f, k, sigma, t, df, is_call))
    kind = ql.Option.Call if is_call else ql.Option.Put
    assert got == pytest.approx(ql.blackFormula(kind, k, f, sigma * math.sqrt(t), df), rel=1e-12)
    assert got == pytest.approx(vl_black("c" if is_call else "p", f, k, t, r, sigma), rel=1e-12)


@pytest.mark.parametrize("row", WORKED_EXAMPLES, ids=[r[0] for r in WORKED_EXAMPLES])
def test_worked_example_vols_round_trip(row):
    # Price at the example's vol, then recover the vol with the solver [D, consistency].
    _, s, k, t, r, b, sigma, is_call, _, _ = row
    f, df = _forward_and_df(s, t, r, b)
    res = implied_vol(price(f, k, sigma, t, df, is_call), f, k, t, df, is_call)
    assert res.status == OK
    assert abs(float(res.sigma) - sigma) <= 1e-12


@pytest.mark.parametrize("row", WORKED_EXAMPLES[:-1], ids=[r[0] for r in WORKED_EXAMPLES[:-1]])
def test_vol_from_published_price(row):
    # The published (rounded) price gives back the example's vol to within
    # half a unit of its last digit divided by vega.
    _, s, k, t, r, b, sigma, is_call, published, decimals = row
    f, df = _forward_and_df(s, t, r, b)
    res = implied_vol(published, f, k, t, df, is_call)
    tol = 0.5 * 10.0**-decimals / float(vega(f, k, sigma, t, df)) * 1.01 + 1e-12
    assert res.status == OK
    assert abs(float(res.sigma) - sigma) <= tol


def test_hull_15_6_d1_d2_and_probabilities():
    # Hull Ex.15.6 [V]: d1 .7693, d2 .6278, N(d1) .7791, N(d2) .7349, N(-d1) .2209, N(-d2) .2651.
    f, df = _forward_and_df(42.0, 0.5, 0.10, 0.10)
    d1, d2 = d1_d2(f, 40.0, 0.20, 0.5)
    assert abs(float(d1) - 0.7693) <= 5e-5
    assert abs(float(d2) - 0.6278) <= 5e-5
    assert abs(float(delta(f, 40.0, 0.20, 0.5, df, True)) - 0.7791) <= 5e-5
    assert abs(float(delta(f, 40.0, 0.20, 0.5, df, False)) + 0.2209) <= 5e-5
    # Computed values in REFERENCE §1: d1 0.769263, d2 0.627841.
    assert abs(float(d1) - 0.769263) <= 5e-7
    assert abs(float(d2) - 0.627841) <= 5e-7


def test_haug_black76_d1_is_minus_d2():
    # Haug Black-76 example via QuantLib [L]: F=K=19, T=.75, sigma=.28 -> d1 = -d2 = 0.1212.
    d1, d2 = d1_d2(19.0, 19.0, 0.28, 0.75)
    assert abs(float(d1) - 0.1212) <= 5e-5
    assert abs(float(d2) + 0.1212) <= 5e-5


def test_hull_15_9_d1_d2():
    # Hull Ex.15.9 [V]: d1 .2020, d2 -.0102.
    f, _ = _forward_and_df(40.0 - 0.9742, 0.5, 0.09, 0.09)
    d1, d2 = d1_d2(f, 40.0, 0.30, 0.5)
    assert abs(float(d1) - 0.2020) <= 5e-5
    assert abs(float(d2) + 0.0102) <= 5e-5


def test_haug_greeks():
    # Haug greeks via QuantLib [L]: futures option F=105, K=100, T=.5, r=.1, sigma=.36:
    # delta .5946 (call) / -.3566 (put). black76.delta is divided by DF, so multiply back.
    df = math.exp(-0.1 * 0.5)
    assert abs(df * float(delta(105.0, 100.0, 0.36, 0.5, df, True)) - 0.5946) <= 5e-5
    assert abs(df * float(delta(105.0, 100.0, 0.36, 0.5, df, False)) + 0.3566) <= 5e-5
    # S=55, K=60, T=.75, r=b=.10, sigma=.30: vega 18.9358 per 1.00 of vol.
    f, df = _forward_and_df(55.0, 0.75, 0.10, 0.10)
    assert abs(float(vega(f, 60.0, 0.30, 0.75, df)) - 18.9358) <= 5e-5


def test_hull_15_6_parity_identity():
    # REFERENCE §9 [D]: for Hull 15.6, c - p = 3.950823 = S - K*exp(-rT).
    f, df = _forward_and_df(42.0, 0.5, 0.10, 0.10)
    c = float(price(f, 40.0, 0.2, 0.5, df, True))
    p = float(price(f, 40.0, 0.2, 0.5, df, False))
    assert c - p == pytest.approx(42.0 - 40.0 * math.exp(-0.05), abs=1e-12)
    assert abs((c - p) - 3.950823) <= 5e-7


def test_intrinsic_values():
    # Definition of discounted intrinsic value on the forward [C].
    got = intrinsic(np.array([110.0, 90.0, 110.0, 90.0]), 100.0, 0.9, np.array([True, True, False, False]))
    np.testing.assert_allclose(got, [9.0, 0.0, 0.0, 9.0], rtol=0, atol=1e-12)


def test_random_contracts_match_quantlib():
    # ql.blackFormula as oracle [L] over seeded random contracts.
    rng = np.random.default_rng(76)
    n = 2000
    f = np.exp(rng.uniform(np.log(1.0), np.log(5000.0), n))
    k = f * np.exp(rng.uniform(np.log(0.5), np.log(2.0), n))
    sigma = rng.uniform(0.05, 1.5, n)
    t = rng.uniform(2 / 365, 2.0, n)
    df = np.exp(-rng.uniform(0.0, 0.06, n) * t)
    is_call = rng.random(n) < 0.5
    got = price(f, k, sigma, t, df, is_call)
    want = np.array(
        [
            ql.blackFormula(ql.Option.Call if is_call[i] else ql.Option.Put, k[i], f[i], sigma[i] * math.sqrt(t[i]), df[i])
            for i in range(n)
        ]
    )
    # Relative where the price is material, absolute (a tiny share of F) in the far tails.
    np.testing.assert_allclose(got, want, rtol=1e-11, atol=1e-13 * f.max())


def test_price_takes_two_normal_probabilities_per_contract_to_the_bit():
    """[D] price computes N only at the two points each contract's side needs; every price equals, bit for
    bit, the call F N(d1) - K N(d2) or the put K N(-d2) - F N(-d1), discounted (zero time, zero strike,
    missing vol and an infinite forward among the rows)."""
    from chaintriage.core.standard_normal import ndtr

    rng = np.random.default_rng(3)
    n = 5000
    f = rng.uniform(50, 150, n)
    k = f * np.exp(rng.normal(0, 0.8, n))
    sig = rng.uniform(0.01, 2.0, n)
    t = rng.uniform(0.0, 3.0, n)
    sig[::97], t[::101], k[::103], f[::107] = np.nan, 0.0, 0.0, np.inf
    df = np.exp(-0.03 * t)
    is_call = rng.random(n) < 0.5
    with np.errstate(all="ignore"):
        d1, d2 = d1_d2(f, k, sig, t)
        want = df * np.where(is_call, f * ndtr(d1) - k * ndtr(d2), k * ndtr(-d2) - f * ndtr(-d1))
        got = price(f, k, sig, t, df, is_call)
    nan = np.isnan(want)
    assert np.array_equal(nan, np.isnan(got))
    assert np.array_equal(want[~nan].view(np.int64), got[~nan].view(np.int64))
