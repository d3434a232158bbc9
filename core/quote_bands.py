"""How far a fitted smile's prices sit outside each quote's bid-ask band, in vol terms.

A quote with a bid above zero gives the band [bid, ask]. A zero or missing
bid gives an upper bound only, the ask: the price lies somewhere between 0 and
the ask, so the quote can say a smile is too high, never that it is too low,
and its mid (half the ask) is not a price to fit.

The distance is measured in price and turned into vol by the smile's vega at
the quote (first order: exact for a band edge within a small move of the
smile's vol, which is where a fit error is worth reading).

Units: prices in price units, vega per 1.00 of vol, distances in decimal vol
(0.01 = 1 vol point).
"""

from __future__ import annotations

import numpy as np


def price_outside(price, bid, ask) -> np.ndarray:
    """How far ``price`` lies outside [bid, ask] (price units): 0 inside; a zero/missing bid is no lower edge,
    a missing ask no upper edge; NaN where price is NaN."""
    price = np.asarray(price, dtype=float)
    bid = np.asarray(bid, dtype=float)
    ask = np.asarray(ask, dtype=float)
    with np.errstate(invalid="ignore"):
        below = np.where(np.isfinite(bid) & (bid > 0), bid - price, 0.0)
        above = np.where(np.isfinite(ask), price - ask, 0.0)
        return np.maximum(np.maximum(below, above), 0.0) + 0.0 * price


def vol_outside(price, vega, bid, ask) -> np.ndarray:
    """:func:`price_outside` over the vega at the quote (decimal vol); NaN where vega is not positive."""
    vega = np.asarray(vega, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        return price_outside(price, bid, ask) / np.where(vega > 0, vega, np.nan)
