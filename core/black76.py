"""Black-76 on the forward, vectorised.

Units: ``forward`` and ``strike`` in price units of the underlying; ``sigma``
is annualised volatility (decimal, 0.2 = 20%); ``t`` in years on the same
basis as ``sigma`` (only the total variance sigma**2 * t matters);
``discount`` is the discount factor to the settlement date (dimensionless).
``is_call`` is a boolean array (True for calls, False for puts).
All functions broadcast numpy arrays and return float64 arrays.
"""

from __future__ import annotations

import numpy as np
from .standard_normal import ndtr

ArrayLike = np.ndarray | float


def d1_d2(forward, strike, sigma, t):
    """Return (d1, d2) of Black-76; dimensionless."""
    forward, strike, sigma, t = np.broadcast_arrays(
        *(np.asarray(a, dtype=float) for a in (forward, strike, sigma, t))
    )
    s = sigma * np.sqrt(t)
    with np.errstate(divide="ignore", invalid="ignore"):
        d1 = np.log(forward / strike) / s + 0.5 * s
    return d1, d1 - s


def price(forward, strike, sigma, t, discount=1.0, is_call=True):
    """Black-76 option price (discounted), in price units."""
    forward = np.asarray(forward, dtype=float)
    strike = np.asarray(strike, dtype=float)
    d1, d2 = d1_d2(forward, strike, sigma, t)
    call = np.asarray(is_call, dtype=bool)
    # A call needs N(d1), N(d2), a put N(-d2), N(-d1): two normal probabilities per contract, not four.
    n1 = ndtr(np.where(call, d1, -d2))
    n2 = ndtr(np.where(call, d2, -d1))
    return np.asarray(discount, dtype=float) * np.where(call, forward * n1 - strike * n2, strike * n1 - forward * n2)


def delta(forward, strike, sigma, t, discount=1.0, is_call=True):
    """Forward delta dV/dF divided by the discount factor: N(d1) for calls, N(d1)-1 for puts."""
    d1, _ = d1_d2(forward, strike, sigma, t)
    nd1 = ndtr(d1)
    return np.where(is_call, nd1, nd1 - 1.0)


def vega(forward, strike, sigma, t, discount=1.0):
    """dPrice/dsigma (per 1.00 of vol, not per vol point), in price units."""
    d1, _ = d1_d2(forward, strike, sigma, t)
    phi = np.exp(-0.5 * d1 * d1) / np.sqrt(2.0 * np.pi)
    return np.asarray(discount, dtype=float) * np.asarray(forward, dtype=float) * phi * np.sqrt(np.asarray(t, dtype=float))


def intrinsic(forward, strike, discount=1.0, is_call=True):
    """Discounted intrinsic value on the forward: DF*max(F-K,0) or DF*max(K-F,0)."""
    forward = np.asarray(forward, dtype=float)
    strike = np.asarray(strike, dtype=float)
    return np.asarray(discount, dtype=float) * np.where(
        is_call, np.maximum(forward - strike, 0.0), np.maximum(strike - forward, 0.0)
    )
