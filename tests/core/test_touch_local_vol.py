"""Local-volatility touch probability (core/local_vol.py, core/touch_local_vol.py) against outside checks.

- Flat surface: the reflection-principle closed form, REFERENCE.md section 3 (Haug's binary-barrier
  cases via QuantLib digitaloption.cpp [L]; the formula [M, Shreve]) within the PDE tolerance 2e-3.
- Flat surface: Dupire gives back the flat vol exactly (REFERENCE.md section 10 [C]).
- Skewed SSVI surface meeting Gatheral-Jacquier Theorem 4.2 [V]: Gatheral's local variance vs Dupire's
  formula in call prices by finite differences [M]; P(touch) vs a Brownian-bridge Monte Carlo under
  the same local vol (4 SE + 0.005) and vs a fine-grid solution of every level (0.01, the target).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.stats import norm

from chaintriage.core.local_vol import LocalVolSurface, dupire_local_variance
from chaintriage.core.svi import SviParams, SviSlices
from chaintriage.core.touch import prob_touch
from chaintriage.core.touch_local_vol import touch_local_vol
from tests.oracles.local_vol_mc import local_vol_touch_mc
from tests.oracles.ssvi import (SKEW_ETA, SKEW_RHO, skew_theta, ssvi_slice, ssvi_total_variance,
                                theorem_4_2_holds)

#: PDE tolerance against the closed form on the default grid (measured about 1e-4 on these cases).
PDE_TOL = 2e-3


def flat_surface(spot, sigma, r, q, times):
    times = np.asarray(times, float)
    smiles = [SviSlices(SviParams.flat(sigma * sigma * t)) for t in times]
    return LocalVolSurface.build(times, spot * np.exp((r - q) * times), spot, smiles)


# REFERENCE.md section 3: (spot, level, T, sigma, r, q, closed form).
SECTION3 = [
    (105.0, 100.0, 0.5, 0.2, 0.10, 0.0, 0.656018),
    (95.0, 100.0, 0.5, 0.2, 0.10, 0.0, 0.786514),
    (100.0, 110.0, 0.25, 0.25, 0.03125, 0.0, 0.445773),  # nu = mu - sigma^2/2 = 0
    (100.0, 90.0, 30 / 365, 0.3, 0.05, 0.01, 0.221862),
]


@pytest.mark.parametrize("spot,level,t,sigma,r,q,expected", SECTION3)
def test_flat_surface_reproduces_closed_form(spot, level, t, sigma, r, q, expected):
    """Flat vol: the local-vol equation gives the reflection-principle value (REFERENCE.md s.3 [L])."""
    surface = flat_surface(spot, sigma, r, q, [t / 3, t, 2 * t])
    got = touch_local_vol(surface, t, [level]).p_touch[0]
    assert got == pytest.approx(expected, abs=PDE_TOL)
    assert got == pytest.approx(prob_touch(spot, level, t, sigma, r - q), abs=PDE_TOL)


def test_flat_surface_many_levels_against_closed_form():
    """All strikes of an expiry at once, interpolated between solved levels: still the closed form [M]."""
    spot, sigma, r, q, t = 100.0, 0.3, 0.05, 0.02, 0.4
    levels = np.arange(50.0, 180.0, 1.0)
    surface = flat_surface(spot, sigma, r, q, [0.1, t])
    got = touch_local_vol(surface, t, levels).p_touch
    ref = prob_touch(spot, levels, t, sigma, r - q)
    assert np.nanmax(np.abs(got - ref)) < PDE_TOL
    assert got[levels == 100.0][0] == 1.0


def test_flat_surface_local_vol_is_the_flat_vol():
    """Dupire on w = sigma^2 T gives sigma exactly (REFERENCE.md s.10 [C])."""
    surface = flat_surface(100.0, 0.27, 0.03, 0.01, [0.1, 0.5, 1.0])
    for tau in (0.05, 0.3, 0.9):
        var, guarded = surface.local_variance(tau, np.linspace(-1, 1, 21))
        np.testing.assert_allclose(var, 0.27 ** 2, rtol=1e-12)
        assert not guarded.any()


def _ssvi_surface(spot=100.0, r=0.04, q=0.01, times=(7 / 365, 21 / 365, 49 / 365, 91 / 365, 0.5, 1.0)):
    times = np.asarray(times, float)
    thetas = skew_theta(times)
    assert all(theorem_4_2_holds(th, SKEW_RHO, SKEW_ETA) for th in thetas)
    smiles = [ssvi_slice(th, SKEW_RHO, SKEW_ETA) for th in thetas]
    return LocalVolSurface.build(times, spot * np.exp((r - q) * times), spot, smiles), times


def test_ssvi_slice_is_raw_svi():
    """G&J Lemma 3.2 [M]: the raw SVI form of an SSVI slice has the same total variance."""
    k = np.linspace(-2, 2, 41)
    for th in (0.01, 0.05, 0.2):
        np.testing.assert_allclose(ssvi_slice(th, SKEW_RHO, SKEW_ETA).total_variance(k),
                                   ssvi_total_variance(k, th, SKEW_RHO, SKEW_ETA), rtol=1e-12)


def test_gatheral_local_variance_matches_dupire_in_call_prices():
    """Gatheral eq. 1.10 [M] vs Dupire's formula in strikes, by finite differences on call prices [M]:

    sigma^2 = 2 (dC/dT + (r - q) K dC/dK + q C) / (K^2 d2C/dK2), C undiscounted-forward Black prices
    of the SSVI surface interpolated linearly in T at fixed ln(K/F_T) (the surface's own rule).
    """
    spot, r, q = 100.0, 0.04, 0.01
    surface, _ = _ssvi_surface(spot, r, q)

    def call(k_strike, tau):
        lf = surface.log_forward_at(tau)
        y = np.log(k_strike) - lf
        w = surface.total_variance(tau, y)[0]
        d1 = (-y + 0.5 * w) / np.sqrt(w)
        return np.exp(-r * tau) * (np.exp(lf) * norm.cdf(d1) - k_strike * norm.cdf(d1 - np.sqrt(w)))

    tau = 0.3  # inside a segment (0.249, 0.5)
    strikes = np.array([80.0, 90.0, 100.0, 110.0, 120.0])
    hk, ht = 0.01, 1e-5
    c = call(strikes, tau)
    c_t = (call(strikes, tau + ht) - call(strikes, tau - ht)) / (2 * ht)
    c_k = (call(strikes + hk, tau) - call(strikes - hk, tau)) / (2 * hk)
    c_kk = (call(strikes + hk, tau) - 2 * c + call(strikes - hk, tau)) / hk ** 2
    dupire = 2 * (c_t + (r - q) * strikes * c_k + q * c) / (strikes ** 2 * c_kk)
    y = np.log(strikes) - surface.log_forward_at(tau)
    gatheral, guarded = surface.local_variance(tau, y)
    assert not guarded.any()
    np.testing.assert_allclose(gatheral, dupire, rtol=2e-4)


def test_variance_and_slope_are_those_of_total_variance():
    """[D] variance_and_slope (the far-side digital's one pass) gives total_variance's w and dw/dy bit for
    bit: before the first expiry, inside a segment, at an expiry and beyond the last."""
    surface, _ = _ssvi_surface(100.0, 0.04, 0.01)
    y = np.linspace(-1.0, 1.0, 41)
    for tau in (0.5 * surface.t[0], 0.3, surface.t[2], 1.5 * surface.t[-1]):
        w, _, w1, _ = surface.total_variance(tau, y)
        got_w, got_w1 = surface.variance_and_slope(tau, y)
        assert np.array_equal(got_w, w) and np.array_equal(got_w1, w1)


def test_negative_denominator_and_falling_variance_are_floored():
    """Guards: dw/dT <= 0 (calendar) or a non-positive denominator (butterfly) give the floor, marked [D]."""
    var, guarded = dupire_local_variance([0.0, 0.0, 0.5], [0.04, 0.04, 0.04], [-0.01, 0.05, 0.05],
                                         [0.0, 0.0, 0.2], [0.0, 0.0, 0.0])  # third: denominator -0.19
    assert guarded.tolist() == [True, False, True]
    assert var[0] == var[2] == 1e-4
    assert var[1] == pytest.approx(0.05)


@pytest.mark.slow
@pytest.mark.parametrize("index", [1, 3, 5])
def test_ssvi_touch_against_monte_carlo_and_fine_grid(index):
    """PDE touch vs Brownian-bridge MC under the same local vol (4 SE + 0.005 [C]) and vs a fine grid
    solving every level on its own equation (0.01, the target [D])."""
    surface, times = _ssvi_surface()
    t = times[index]
    sd = np.sqrt(skew_theta(t))
    levels = 100.0 * np.exp(sd * np.array([-3.0, -2.0, -1.2, -0.6, -0.25, 0.25, 0.6, 1.2, 2.0, 3.0]))
    all_strikes = np.union1d(levels, np.round(100.0 * np.exp(sd * np.linspace(-4, 4, 161)), 2))
    got = touch_local_vol(surface, t, all_strikes).p_touch
    got_at = got[np.searchsorted(all_strikes, levels)]
    mc, se = local_vol_touch_mc(surface, t, levels, n_paths=80_000)
    assert np.all(np.abs(got_at - mc) <= 4 * se + 0.005), (levels, got_at, mc, se)
    fine = touch_local_vol(surface, t, levels, n_space=600, n_time=240, solved_per_side=None).p_touch
    assert np.max(np.abs(got_at - fine)) < 0.01, (got_at, fine)


def test_ssvi_touch_monotone_away_from_spot_and_one_at_spot():
    """Touch falls away from spot on both sides [C]; a level at spot is touched (1)."""
    surface, times = _ssvi_surface()
    levels = np.arange(60.0, 140.5, 0.5)
    for t in times[[0, 3, 5]]:
        p = touch_local_vol(surface, t, levels).p_touch
        below, above = p[levels < 100.0], p[levels > 100.0]
        ok_b, ok_a = np.isfinite(below), np.isfinite(above)
        assert np.all(np.diff(below[ok_b]) >= -1e-12)
        assert np.all(np.diff(above[ok_a]) <= 1e-12)
        assert p[levels == 100.0][0] == 1.0
