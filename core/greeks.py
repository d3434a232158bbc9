"""Greeks on the Black-76 forward basis, reported against the spot, vectorised.

Inputs (all broadcast together): ``spot``, ``forward`` and ``strike`` in price
units; ``sigma`` annualised decimal vol on the time basis of ``t``; ``t`` in
years on that basis (only the total standard deviation s = sigma*sqrt(t)
matters for the shape); ``discount`` the discount factor DF to settlement;
``days`` the days left to settlement counted on the same basis (t * 252 or
t * 250 trading days, or t * 365 calendar days, fractions allowed);
``is_call`` boolean. The carry is read off the quotes: F/S = exp(b T) and
DF = exp(-r T) for any clock, so no rate or dividend yield is needed.

With d1 = ln(F/K)/s + s/2, phi the standard normal density and the forward
delta D_F = N(d1) (call) or N(d1) - 1 (put):

- delta  = DF * (F/S) * D_F                       per unit of spot (dV/dS; the
  pipeline's ``delta`` column, computed there);
- gamma  = DF * F * phi(d1) / (S^2 * s)           per unit of spot, per unit of spot;
- vega   = DF * F * phi(d1) * sqrt(t) / 100       price units per vol point
  (one point = 0.01 of the vol as quoted on the basis of ``t``);
- theta  = -[DF*F*phi(d1)*s/2 + ln(DF)*V + ln(F/S)*DF*F*D_F] / days
  price units per day of the basis (trading day on 252/250, calendar day on
  365), with V the Black-76 value. This is the value lost when one day's share
  of the remaining life passes with spot and vol held: variance time, interest
  (DF) and carry (F/S) all run down in proportion, so theta * days is the
  first-order decay over the whole remaining life. On the calendar basis it is
  the Black-Scholes-Merton theta (spot held) divided by 365.

Spot held fixed is the usual convention for equity options (QuantLib's
analytic European engine reports the same delta, gamma, vega/100 and
theta/365). NaN wherever an input is missing, non-positive (prices, vol,
time, days) or the result is undefined.
"""

from __future__ import annotations

import numpy as np
from .standard_normal import ndtr

_SQRT_2PI = np.sqrt(2.0 * np.pi)


def _arrays(*values):
    return np.broadcast_arrays(*(np.asarray(v, dtype=float) for v in values))


def _shape(forward, strike, sigma, t):
    """(total std dev s, d1, phi(d1), N(d1)) with NaN where the inputs are unusable."""
    with np.errstate(divide="ignore", invalid="ignore"):
        ok = (forward > 0) & (strike > 0) & (sigma > 0) & (t > 0)
        s = np.where(ok, sigma * np.sqrt(np.where(t > 0, t, np.nan)), np.nan)
        d1 = np.log(forward / strike) / s + 0.5 * s
    phi = np.exp(-0.5 * d1 * d1) / _SQRT_2PI
    return s, d1, phi, ndtr(d1)


def gamma_theta_vega(spot, forward, strike, sigma, t, discount, days, is_call=True):
    """(gamma, theta per day, vega per point) in one pass; units as ``gamma``, ``theta_per_day``, ``vega_per_point``."""
    spot, forward, strike, sigma, t, discount, days = _arrays(spot, forward, strike, sigma, t, discount, days)
    is_call = np.broadcast_to(np.asarray(is_call, dtype=bool), spot.shape)
    s, d1, phi, nd1 = _shape(forward, strike, sigma, t)
    with np.errstate(divide="ignore", invalid="ignore"):
        dfp = discount * forward * phi
        gam = np.where(spot > 0, dfp / (spot * spot * s), np.nan)
        vega = dfp * (s / np.where(sigma > 0, sigma, np.nan)) / 100.0  # s / sigma = sqrt(t)
        nd2 = ndtr(d1 - s)
        # Black-76 value from N(d1), N(d2); the put through parity.
        call = forward * nd1 - strike * nd2
        value = discount * np.where(is_call, call, call - (forward - strike))
        fwd_delta = np.where(is_call, nd1, nd1 - 1.0)
        life = dfp * s / 2.0 + np.log(discount) * value + np.log(forward / spot) * discount * forward * fwd_delta
        ok = (spot > 0) & (discount > 0) & (days > 0)
        theta = np.where(ok, -life / np.where(days > 0, days, np.nan), np.nan)
    return gam, theta, vega


def gamma(spot, forward, strike, sigma, t, discount=1.0):
    """d2V/dS2 per unit of spot squared: DF * F * phi(d1) / (S^2 * sigma * sqrt(t)); same for calls and puts."""
    return gamma_theta_vega(spot, forward, strike, sigma, t, discount, 1.0)[0]


def vega_per_point(forward, strike, sigma, t, discount=1.0):
    """dV/dsigma per vol point (0.01 of the vol on the basis of ``t``), price units; same for calls and puts."""
    return gamma_theta_vega(1.0, forward, strike, sigma, t, discount, 1.0)[2]


def theta_per_day(spot, forward, strike, sigma, t, discount, days, is_call=True):
    """Value change per day of the basis with spot and vol held (negative = decay), price units per day.

    ``days``: days left to settlement on the basis of ``t`` (trading days for
    a trading basis, calendar days for ACT/365). See the module docstring for
    the formula and why it needs no separate rate.
    """
    return gamma_theta_vega(spot, forward, strike, sigma, t, discount, days, is_call)[1]
