"""What a trade is worth at the prices one can actually deal at, for a seller and a buyer.

A seller gets the bid, a buyer pays the ask. Per contract, vectorised (numpy
arrays broadcast together); prices and strikes in price units, probabilities
and returns as decimals (0.05 = 5%), days as fractional calendar days.

- ``sell_premium`` = bid (NaN when the bid is not above zero: nothing to sell
  into); ``buy_premium`` = ask (NaN when the ask is not above zero).
- Breakeven at that premium: strike + premium for a call, strike - premium
  for a put (the premium is taken in cash, without interest to expiry).
- P(profit) at expiry from the smile's terminal distribution: a call buyer
  needs S_T > strike + ask, a put buyer S_T < strike - ask; a call seller
  profits when S_T < strike + bid, a put seller when S_T > strike - bid. So
  P(profit) is P(finishing beyond the breakeven) on the side that pays the
  position. Risk-neutral and at expiry only (no early exit, no assignment).
- Premium per day: premium / calendar days to settlement (capital is tied up
  every calendar day, weekends too).
- Seller's return on capital, simple: a cash-secured put earns
  bid / (strike - bid) (the cash set aside, net of the premium received); a
  covered call earns bid / spot (the shares bought at spot). Annualised
  simply (not compounded) on ACT/365: return * 365 / calendar days.
  Commissions, assignment and margin rules are left out.
- Buyer's move to break even, in sigmas: how far the underlying must end
  beyond the forward, in the payoff direction, for the bought contract to
  break even, ln(breakeven / F) / (sigma_atm * sqrt(T)) for a call and minus
  that for a put (the same scale as the sigma distance; below zero means the
  breakeven is already on the paying side of the forward).
- Edge to mid: ask - mid (= mid - bid), what dealing at the bid or ask gives
  up against the mid, in price units and as a share of each side's premium.
"""

from __future__ import annotations

import numpy as np

from .distribution import prob_above

#: Days per year of the simple annualisation (calendar days, ACT/365).
DAYS_PER_YEAR = 365.0


def _f(x):
    return np.asarray(x, dtype=float)


def executable_premiums(bid, ask):
    """(sell_premium, buy_premium): the bid and the ask, NaN where not above zero; price units."""
    bid, ask = _f(bid), _f(ask)
    with np.errstate(invalid="ignore"):
        return np.where(bid > 0, bid, np.nan), np.where(ask > 0, ask, np.nan)


def breakeven(strike, premium, is_call):
    """Underlying level at expiry where the position neither gains nor loses: K + premium (call), K - premium (put)."""
    strike, premium = _f(strike), _f(premium)
    return np.where(is_call, strike + premium, strike - premium)


def profit_probabilities(smile, forward, strike, sell_premium, buy_premium, is_call):
    """(p_profit_sell, p_profit_buy): chance the seller / buyer ends expiry ahead, in [0, 1].

    ``smile``: anything ``distribution.prob_above`` accepts, row-aligned with
    the contracts (e.g. ``SviSlices`` taken per row); ``forward`` per row.
    A put breakeven at or below zero is beyond any finish: the seller always
    profits (1) and the buyer never (0). NaN where the premium is missing.
    """
    is_call = np.asarray(is_call, dtype=bool)
    p_sell = _p_above_breakeven(smile, forward, breakeven(strike, sell_premium, is_call))
    p_buy = _p_above_breakeven(smile, forward, breakeven(strike, buy_premium, is_call))
    # Call: the buyer wants S_T above the breakeven, the seller below; a put the reverse.
    return np.where(is_call, 1.0 - p_sell, p_sell), np.where(is_call, p_buy, 1.0 - p_buy)


def _p_above_breakeven(smile, forward, level):
    """P(S_T > level); 1 where the level is at or below zero, NaN where it is missing."""
    level = _f(level)
    with np.errstate(invalid="ignore"):
        positive = level > 0
    p = np.asarray(prob_above(smile, forward, np.where(positive, level, np.nan)), dtype=float)
    return np.where(positive, p, np.where(np.isfinite(level), 1.0, np.nan))


def premium_per_day(premium, calendar_days):
    """Premium / calendar days to settlement, price units per day; NaN where no time is left."""
    premium, days = _f(premium), _f(calendar_days)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(days > 0, premium / days, np.nan)


def seller_return(strike, spot, sell_premium, is_call):
    """Simple return on capital for the seller, decimal.

    Put (cash-secured): bid / (strike - bid), NaN when bid >= strike.
    Call (covered): bid / spot.
    """
    strike, spot, prem = _f(strike), _f(spot), _f(sell_premium)
    with np.errstate(divide="ignore", invalid="ignore"):
        capital = np.where(is_call, spot, strike - prem)
        return np.where(capital > 0, prem / capital, np.nan)


def annualised_simple(ret, calendar_days):
    """Simple annualisation on ACT/365: ret * 365 / calendar days (not compounded); NaN where no time is left."""
    ret, days = _f(ret), _f(calendar_days)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(days > 0, ret * DAYS_PER_YEAR / days, np.nan)


def move_to_breakeven(forward, level, atm_vol, t, is_call):
    """Sigmas the underlying must end beyond the forward, in the payoff direction, to reach ``level``.

    ln(level / F) / (atm_vol * sqrt(t)) for calls, minus that for puts;
    ``atm_vol`` and ``t`` on one time basis (only atm_vol^2 * t matters).
    NaN where a level, forward, vol or time is not positive (a put breakeven
    at or below zero cannot be reached).
    """
    forward, level, atm_vol, t = _f(forward), _f(level), _f(atm_vol), _f(t)
    with np.errstate(divide="ignore", invalid="ignore"):
        ok = (forward > 0) & (level > 0) & (atm_vol > 0) & (t > 0)
        z = np.log(level / forward) / (atm_vol * np.sqrt(t))
        return np.where(ok, np.where(is_call, z, -z), np.nan)


def edge_to_mid(ask, mid):
    """What dealing at the bid or the ask gives up against the mid: ask - mid (= mid - bid), price units."""
    return _f(ask) - _f(mid)


def share_of_premium(amount, premium):
    """amount / premium as a decimal; NaN where the premium is missing or not above zero."""
    amount, premium = _f(amount), _f(premium)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(premium > 0, amount / premium, np.nan)
