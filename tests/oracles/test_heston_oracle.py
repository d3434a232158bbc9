"""The Heston Monte Carlo oracle against QuantLib's analytic Heston engine [L]."""

from __future__ import annotations

import numpy as np
import pytest

from tests.oracles.heston import STRONG_SKEW, heston_mc, heston_price


@pytest.mark.slow
@pytest.mark.parametrize("t", [10 / 365, 0.25, 1.0])
def test_mc_european_prices_match_quantlib(t):
    """European prices from the MC paths vs QuantLib AnalyticHestonEngine [L], within 4 SE + Euler bias 0.01% of spot."""
    p = STRONG_SKEW
    f = float(p.forward(t))
    sd = np.sqrt(p.theta * t) * f
    ks = f + sd * np.array([-2.0, -1.0, 0.0, 1.0, 2.0])
    mc = heston_mc(p, t, ks, n_paths=100_000, seed=7)
    for k_i, c, c_se, pt, p_se in zip(ks, mc.call, mc.call_se, mc.put, mc.put_se):
        ref_c = heston_price(p, t, [k_i], True)[0]
        ref_p = heston_price(p, t, [k_i], False)[0]
        assert abs(c - ref_c) <= 4 * c_se + 0.01, (t, k_i, c, ref_c, c_se)
        assert abs(pt - ref_p) <= 4 * p_se + 0.01, (t, k_i, pt, ref_p, p_se)


def test_quantlib_parity_and_time_rescaling():
    """Put-call parity of the QuantLib prices [C] (checks the time rescaling keeps the carry exact)."""
    p = STRONG_SKEW
    t = 0.3712
    ks = np.array([80.0, 100.0, 120.0])
    c = heston_price(p, t, ks, True)
    pu = heston_price(p, t, ks, False)
    np.testing.assert_allclose(c - pu, p.discount(t) * (p.forward(t) - ks), atol=1e-8)


def test_zero_vol_of_variance_is_black_scholes():
    """With xi -> 0 and v0 = theta Heston is Black-Scholes [C]: touch vs the reflection closed form (REFERENCE.md s.3)."""
    from dataclasses import replace

    from scipy.stats import norm

    p = replace(STRONG_SKEW, v0=0.04, theta=0.04, xi=1e-6, r=0.05, q=0.01)
    t = 30 / 365
    h = 90.0
    mc = heston_mc(p, t, [h], n_paths=200_000, seed=3)
    sig = 0.2
    nu = p.r - p.q - 0.5 * sig * sig
    b = np.log(h / p.spot)
    s = sig * np.sqrt(t)
    ref = norm.cdf((b - nu * t) / s) + np.exp(2 * nu * b / sig**2) * norm.cdf((b + nu * t) / s)
    assert abs(mc.p_touch[0] - ref) <= 4 * mc.p_touch_se[0], (mc.p_touch[0], ref, mc.p_touch_se[0])
