"""Economics at executable prices (core/trade_economics.py): outside references and identities.

- P(profit) is P(finishing beyond the breakeven) on the paying side [D], checked
  against scipy.stats' lognormal survival function for a flat smile [L] and
  against REFERENCE.md s.4's smile digital (a quadratic-in-k smile; its table
  was checked there by a central finite difference of call prices) [D].
- With a flat smile the buyer's P(profit) is N(-move - s/2), s = sigma sqrt(T),
  tying the move to break even to the probability [D].
- Return formulas worked by hand on named contracts [D]: TSBH 2027-01-15 95 put
  and 105 call, spot 100, 30 calendar days to settlement.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.stats import lognorm, norm

from chaintriage.core import trade_economics as econ
from chaintriage.core.svi import SviParams
from chaintriage.core import svi


class FlatSmile:
    """w(k) = sigma^2 T everywhere (raw SVI with b = 0)."""

    def __init__(self, sigma, t):
        self.p = SviParams.flat(sigma * sigma * t)

    def total_variance(self, k):
        return svi.total_variance(self.p, k)

    def dw_dk(self, k):
        return svi.dw_dk(self.p, k)

    def d2w_dk2(self, k):
        return svi.d2w_dk2(self.p, k)


class QuadraticVolSmile:
    """REFERENCE.md s.4 test smile [D]: sigma(k) = 0.20 - 0.10 k + 0.20 k^2, w = sigma^2 T, T = 0.5."""

    t = 0.5

    def total_variance(self, k):
        k = np.asarray(k, dtype=float)
        return (0.20 - 0.10 * k + 0.20 * k * k) ** 2 * self.t

    def dw_dk(self, k):
        k = np.asarray(k, dtype=float)
        vol = 0.20 - 0.10 * k + 0.20 * k * k
        return 2.0 * self.t * vol * (-0.10 + 0.40 * k)


def test_executable_premiums_are_bid_and_ask():
    """[C] a seller gets the bid, a buyer pays the ask; no bid (0 or missing) is nothing to sell into."""
    sell, buy = econ.executable_premiums([1.2, 0.0, np.nan, 2.0], [1.3, 0.05, 0.4, np.nan])
    np.testing.assert_array_equal(sell, [1.2, np.nan, np.nan, 2.0])
    np.testing.assert_array_equal(buy, [1.3, 0.05, 0.4, np.nan])


def test_p_profit_flat_smile_against_scipy_lognormal():
    """[L] scipy.stats.lognorm: S_T = F exp(-s^2/2 + s Z); P(profit) is its tail beyond the breakeven."""
    f, sigma, t = 100.0, 0.25, 0.4
    s = sigma * math.sqrt(t)
    dist = lognorm(s=s, scale=f * math.exp(-0.5 * s * s))
    strike = np.array([90.0, 95.0, 100.0, 105.0, 110.0, 90.0, 95.0, 100.0, 105.0, 110.0])
    is_call = np.array([True] * 5 + [False] * 5)
    bid = np.array([11.0, 7.1, 3.9, 1.8, 0.7, 1.1, 2.4, 4.2, 7.0, 10.8])
    ask = bid + np.array([0.1, 0.2, 0.3, 0.15, 0.05, 0.1, 0.2, 0.3, 0.15, 0.05])
    smile = FlatSmile(sigma, t)
    p_sell, p_buy = econ.profit_probabilities(smile, f, strike, bid, ask, is_call)
    expected_buy = np.where(is_call, dist.sf(strike + ask), dist.cdf(strike - ask))
    expected_sell = np.where(is_call, dist.cdf(strike + bid), dist.sf(strike - bid))
    np.testing.assert_allclose(p_buy, expected_buy, atol=1e-12)
    np.testing.assert_allclose(p_sell, expected_sell, atol=1e-12)
    # [D] at one price the seller's and the buyer's chances add up to one.
    p_sell_at_ask, _ = econ.profit_probabilities(smile, f, strike, ask, ask, is_call)
    np.testing.assert_allclose(p_sell_at_ask + p_buy, 1.0, atol=1e-14)


def test_p_profit_is_p_beyond_breakeven_with_a_smile():
    """[D] REFERENCE.md s.4 smile: P(S_T > 90, 100, 110) = 0.767036, 0.499953, 0.233944 (F = 100)."""
    smile = QuadraticVolSmile()
    # Breakevens 110 (105 call at 5), 90 (95 put at 5) and 100 (103 put at 3).
    strike = np.array([105.0, 95.0, 103.0])
    premium = np.array([5.0, 5.0, 3.0])
    is_call = np.array([True, False, False])
    p_sell, p_buy = econ.profit_probabilities(smile, 100.0, strike, premium, premium, is_call)
    above = np.array([0.233944, 0.767036, 0.499953])
    np.testing.assert_allclose(p_buy, np.where(is_call, above, 1.0 - above), atol=1e-6)
    np.testing.assert_allclose(p_sell, np.where(is_call, 1.0 - above, above), atol=1e-6)


def test_put_premium_beyond_strike_and_missing_premium():
    """[D] a put breakeven at or below zero: the seller always ends ahead, the buyer never; no premium, no number."""
    smile = FlatSmile(0.3, 0.5)
    p_sell, p_buy = econ.profit_probabilities(smile, 100.0, np.array([2.0, 50.0, 50.0]),
                                              np.array([2.5, np.nan, 1.0]), np.array([2.6, 1.0, np.nan]),
                                              np.array([False, False, False]))
    assert p_sell[0] == 1.0 and p_buy[0] == 0.0
    assert np.isnan(p_sell[1]) and np.isfinite(p_buy[1])
    assert np.isfinite(p_sell[2]) and np.isnan(p_buy[2])


def test_breakeven_formula():
    """[C] call: strike + premium; put: strike - premium."""
    np.testing.assert_allclose(econ.breakeven([105.0, 95.0], [1.25, 0.8], [True, False]), [106.25, 94.2])


def test_returns_by_hand_on_named_contracts():
    """[D] by hand. TSBH 2027-01-15 95 put, bid 1.20, spot 100, 30 calendar days: cash-secured capital
    95 - 1.20 = 93.80, return 1.20 / 93.80 = 0.0127932, annualised simply 0.0127932 * 365 / 30 = 0.155650,
    premium per day 1.20 / 30 = 0.04. TSBH 105 call, bid 0.85: covered by shares at 100, return 0.0085,
    annualised 0.0085 * 365 / 30 = 0.103417."""
    strike = np.array([95.0, 105.0])
    bid = np.array([1.20, 0.85])
    is_call = np.array([False, True])
    ret = econ.seller_return(strike, 100.0, bid, is_call)
    np.testing.assert_allclose(ret, [0.0127932, 0.0085], atol=5e-8)
    np.testing.assert_allclose(econ.annualised_simple(ret, 30.0), [0.155650, 0.103417], atol=5e-7)
    np.testing.assert_allclose(econ.premium_per_day(bid, 30.0), [0.04, 0.85 / 30.0], rtol=1e-15)
    # Premium at or above the strike leaves no capital to secure: no return.
    assert np.isnan(econ.seller_return(2.0, 100.0, 2.5, False))
    # No time left: no per-day or annualised figure.
    assert np.isnan(econ.premium_per_day(1.0, 0.0)) and np.isnan(econ.annualised_simple(0.01, 0.0))


def test_move_to_breakeven_matches_the_buyers_probability():
    """[D] flat smile: P(S_T > F e^{z s}) = N(-z - s/2), so a call buyer's P(profit) is N(-move - s/2)
    and a put buyer's N(-move + s/2) (the move counted downward); and the
    move by hand for a 105 call bought at 2 (F 100, vol 20%, T 0.25): ln(107/100) / 0.1 = 0.676586."""
    f, sigma, t = 100.0, 0.2, 0.25
    s = sigma * math.sqrt(t)
    strike = np.array([105.0, 110.0, 95.0, 88.0])
    ask = np.array([2.0, 0.6, 1.9, 0.3])
    is_call = np.array([True, True, False, False])
    move = econ.move_to_breakeven(f, econ.breakeven(strike, ask, is_call), sigma, t, is_call)
    assert move[0] == pytest.approx(0.676586, abs=5e-7)
    _, p_buy = econ.profit_probabilities(FlatSmile(sigma, t), f, strike, ask, ask, is_call)
    np.testing.assert_allclose(p_buy, norm.cdf(-move + np.where(is_call, -s, s) / 2), atol=1e-12)
    assert np.all(move[2:] > 0)  # puts: the move is counted downward, positive when out of reach yet
    assert np.isnan(econ.move_to_breakeven(f, -1.0, sigma, t, False))


def test_edge_to_mid_and_its_share():
    """[D] ask - mid = mid - bid for a two-sided quote; as a share of the bid (seller) and the ask (buyer)."""
    bid, ask = np.array([1.0, 0.0]), np.array([1.2, 0.1])
    mid = 0.5 * (bid + ask)
    edge = econ.edge_to_mid(ask, mid)
    np.testing.assert_allclose(edge, [0.1, 0.05])
    np.testing.assert_allclose(edge[0], mid[0] - bid[0])
    sell, buy = econ.executable_premiums(bid, ask)
    np.testing.assert_allclose(econ.share_of_premium(edge, sell), [0.1, np.nan])
    np.testing.assert_allclose(econ.share_of_premium(edge, buy), [0.1 / 1.2, 0.5])
