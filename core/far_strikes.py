"""Strikes far outside their expiry's range: typos and unit mistakes, left out before any fit.

One strike of 1e300 in an expiry otherwise quoted around 100 would drag the
parity forward, the smile fit and every probability of that expiry. A strike
is taken for a mistake when it lies more than ``FAR_FACTOR`` times away (above
or below) from its expiry's reference strike. The reference is the median
strike of the expiry among the strikes within ``FAR_FACTOR`` of spot (the
median of all its strikes when none are), so a few absurd strikes cannot move
it, and a wrong spot cannot throw out a whole sane expiry.

``FAR_FACTOR`` = 100 is far outside any listed chain: with a 100 % vol and
three years to expiry, 100x the forward is still 2.7 sigmas away in log terms,
but no exchange lists strikes at 100x (or 1/100 of) the underlying's price.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

#: A strike more than this many times above, or below, its expiry's reference strike is left out.
FAR_FACTOR = 100.0


def far_strikes(expiry: pd.Series | np.ndarray, strike: np.ndarray, spot: float) -> np.ndarray:
    """Boolean mask of strikes (price units, > 0) far outside their expiry's range; vectorised.

    ``expiry`` labels each row's expiry (any hashable values); ``spot`` is the
    underlying's price in the same units as the strikes.
    """
    strike = np.asarray(strike, dtype=float)
    if strike.size == 0:
        return np.zeros(0, dtype=bool)
    limit = np.log(FAR_FACTOR)
    with np.errstate(divide="ignore", invalid="ignore"):
        logk = np.log(strike)
        near_spot = np.abs(logk - np.log(spot)) <= limit if spot > 0 and np.isfinite(spot) else np.zeros_like(logk, bool)
    frame = pd.DataFrame({"e": np.asarray(expiry), "all": logk, "near": np.where(near_spot, logk, np.nan)})
    grouped = frame.groupby("e", sort=False)
    ref_near = grouped["near"].transform("median").to_numpy(dtype=float)
    ref_all = grouped["all"].transform("median").to_numpy(dtype=float)
    ref = np.where(np.isfinite(ref_near), ref_near, ref_all)
    with np.errstate(invalid="ignore"):
        return np.abs(logk - ref) > limit


def far_strikes_grouped(starts: np.ndarray, strike: np.ndarray, spot: float) -> np.ndarray | None:
    """:func:`far_strikes` for rows already grouped by expiry with strikes ascending in each group.

    ``starts``: first row of each expiry group (in order, the first 0); ``strike``: price units.
    The same mask as ``far_strikes``, without sorting: in each group the strikes within
    ``FAR_FACTOR`` of spot are one run of rows, whose middle gives the median. None when a strike
    is not a finite positive number (``far_strikes`` handles those).
    """
    strike = np.asarray(strike, dtype=float)
    n = strike.size
    if n == 0:
        return np.zeros(0, dtype=bool)
    with np.errstate(divide="ignore", invalid="ignore"):
        logk = np.log(strike)
    if not np.all(np.isfinite(logk)):
        return None
    starts = np.asarray(starts, dtype=np.int64)
    size = np.diff(np.append(starts, n))
    limit = np.log(FAR_FACTOR)
    if spot > 0 and np.isfinite(spot):
        near = np.abs(logk - np.log(spot)) <= limit
        count = np.add.reduceat(near.astype(np.int64), starts)
        first = np.minimum.reduceat(np.where(near, np.arange(n), n), starts)
    else:
        count = np.zeros(starts.size, dtype=np.int64)
        first = starts
    use_all = count == 0
    first = np.where(use_all, starts, first)
    count = np.where(use_all, size, count)
    ref = 0.5 * (logk[first + (count - 1) // 2] + logk[first + count // 2])
    return np.abs(logk - np.repeat(ref, size)) > limit
