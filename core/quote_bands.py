"""Each quote's bid-ask band in vol terms, and how far a fitted smile sits outside it.

A quote with a bid above zero gives the band [iv(bid), iv(ask)] of implied vols
(Black-76 on the forward, as ``implied_vol``). A zero or missing bid gives an
upper bound only, iv(ask): the price lies somewhere between 0 and the ask, so
the quote can say a smile is too high, never that it is too low, and its mid
(half the ask) is not a price to fit. A bid below the no-arbitrage lower bound
leaves the band open below; an ask above the upper bound leaves it open above.

Units: prices and strikes in price units, ``t`` in years, vols decimal
(0.01 = 1 vol point).
"""

from __future__ import annotations

import numpy as np

from .implied_vol import implied_vol


def band_vols(forward, strike, t, discount, is_call, bid, ask) -> tuple[np.ndarray, np.ndarray]:
    """(iv_bid, iv_ask) per quote, decimal vol.

    ``iv_bid`` is 0 where the bid is zero, missing or below the lower bound
    (no lower edge); ``iv_ask`` is +inf where the ask is missing or above the
    upper bound (no upper edge). Arrays broadcast together.
    """
    bid = np.asarray(bid, dtype=float)
    ask = np.asarray(ask, dtype=float)
    with np.errstate(invalid="ignore"):
        has_bid = np.isfinite(bid) & (bid > 0)
        has_ask = np.isfinite(ask) & (ask > 0)
    lo = implied_vol(np.where(has_bid, bid, np.nan), forward, strike, t, discount, is_call).sigma
    hi = implied_vol(np.where(has_ask, ask, np.nan), forward, strike, t, discount, is_call).sigma
    return np.where(np.isfinite(lo), lo, 0.0), np.where(np.isfinite(hi), hi, np.inf)


def distance_outside(vol, iv_bid, iv_ask) -> np.ndarray:
    """How far ``vol`` lies outside [iv_bid, iv_ask] (decimal vol): 0 inside, NaN where vol is NaN."""
    vol = np.asarray(vol, dtype=float)
    with np.errstate(invalid="ignore"):
        return np.maximum(np.maximum(np.asarray(iv_bid, dtype=float) - vol, vol - np.asarray(iv_ask, dtype=float)),
                          0.0) + 0.0 * vol
