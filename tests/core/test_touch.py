"""Touch probabilities (core/touch.py) against outside sources.

Sources (REFERENCE.md tags): Haug's binary-barrier table via QuantLib
digitaloption.cpp [L]; QuantLib AnalyticDigitalAmericanEngine as an oracle [L];
the driftless reflection principle P(touch) = 2 P(finish beyond) [V, Shreve,
Stochastic Calculus for Finance II, ch. 7]; REFERENCE §3 table [D/L];
continuity of paths (touch >= finish beyond) [C].
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.special import log_ndtr, ndtr

from chaintriage.core.touch import prob_touch, prob_touch_smile

# ------------------------------------------------ Haug published prices [L]
# Haug (1998) p.95 / (2007) p.180, binary barrier cases 5/6/9/10 as quoted in
# QuantLib test-suite/digitaloption.cpp [L]: cash-at-expiry-or-nothing paying
# 15, T=.5, r=b=.10, sigma=.2. P(touch) = price / (15 e^{-rT}).
HAUG_T, HAUG_R, HAUG_VOL, HAUG_CASH = 0.5, 0.10, 0.20, 15.0
HAUG_PV1 = HAUG_CASH * math.exp(-HAUG_R * HAUG_T)


@pytest.mark.parametrize(
    "spot,knock_in,no_touch,p_published,p_formula",
    [
        (105.0, 9.3604, 4.9081, 0.656021, 0.656018),  # down: H=100 below spot
        (95.0, 11.2223, 3.0461, 0.786512, 0.786514),  # up: H=100 above spot
    ],
)
def test_haug_binary_barrier_table(spot, knock_in, no_touch, p_published, p_formula):
    p = prob_touch(spot, 100.0, HAUG_T, HAUG_VOL, HAUG_R)
    # The published knock-in price, converted to a probability (REFERENCE §3).
    assert knock_in / HAUG_PV1 == pytest.approx(p_published, abs=5e-7)
    # Our closed form against it: tol 1e-5. The ~3e-6 gap is the 4-dp rounding
    # of the published price (half a unit = 5e-5 / 14.27 = 3.5e-6 in probability).
    assert p == pytest.approx(p_published, abs=1e-5)
    assert p == pytest.approx(1.0 - no_touch / HAUG_PV1, abs=1e-5)
    # And priced back: within half a unit of the published 4-dp prices.
    assert HAUG_PV1 * p == pytest.approx(knock_in, abs=5e-5)
    assert HAUG_PV1 * (1.0 - p) == pytest.approx(no_touch, abs=5e-5)
    # REFERENCE §3's recomputed closed-form value (6 dp).
    assert p == pytest.approx(p_formula, abs=5e-7)


# ------------------------------------------------------ §3 table [D, L]

SECTION3 = [
    # spot, barrier, T, sigma, mu, closed form, 2 * P(finish beyond)
    (105.0, 100.0, 0.5, 0.20, 0.10, 0.656018, 0.530108),
    (95.0, 100.0, 0.5, 0.20, 0.10, 0.786514, 0.936352),
    (100.0, 110.0, 0.25, 0.25, 0.25**2 / 2, 0.445773, 0.445773),  # nu = 0
    (100.0, 90.0, 30 / 365, 0.30, 0.05 - 0.01, 0.221862, 0.222374),
]


@pytest.mark.parametrize("spot,barrier,t,sigma,mu,expected,twice_beyond", SECTION3)
def test_reference_section3_cases(spot, barrier, t, sigma, mu, expected, twice_beyond):
    # REFERENCE §3 table: closed form to 1e-5, and the "2 x finish beyond" column.
    assert prob_touch(spot, barrier, t, sigma, mu) == pytest.approx(expected, abs=1e-5)
    nu = mu - 0.5 * sigma**2
    d = (math.log(spot / barrier) + nu * t) / (sigma * math.sqrt(t))  # P(S_T > H) = N(d)
    beyond = ndtr(d) if barrier > spot else ndtr(-d)
    assert 2 * beyond == pytest.approx(twice_beyond, abs=1e-6)


def test_vectorised_matches_scalar_calls():
    s, h, t, v, m = (np.array(c) for c in zip(*[row[:5] for row in SECTION3]))
    vec = prob_touch(s, h, t, v, m)
    assert vec.shape == (4,)
    assert np.array_equal(vec, [prob_touch(*row[:5]) for row in SECTION3])


# --------------------------------------- nu = 0: reflection principle [V]

@settings(max_examples=60, deadline=None)
@given(
    log_dist=st.floats(-1.5, 1.5).filter(lambda x: abs(x) > 1e-6),
    t=st.floats(1e-3, 5.0),
    sigma=st.floats(0.01, 2.0),
)
def test_driftless_log_price_touch_is_twice_finish_beyond(log_dist, t, sigma):
    # Reflection principle [V, Shreve ch.7]: with nu = mu - sigma^2/2 = 0,
    # P(max >= b) = 2 P(W_T >= b) exactly (REFERENCE §3: exact only when nu = 0).
    spot = 100.0
    barrier = spot * math.exp(log_dist)
    p = prob_touch(spot, barrier, t, sigma, 0.5 * sigma * sigma)
    beyond = ndtr(-abs(math.log(barrier / spot)) / (sigma * math.sqrt(t)))
    assert p == pytest.approx(2.0 * beyond, rel=1e-12, abs=1e-300)


# ------------------------------------------- QuantLib oracle [L]

def _quantlib_touch(ql, today, spot, barrier, days, r, q, vol):
    """P(touch) from QuantLib's AnalyticDigitalAmericanEngine (payoff at expiry) / (cash * DF)."""
    dc = ql.Actual365Fixed()
    maturity = today + days
    rts = ql.YieldTermStructureHandle(ql.FlatForward(today, r, dc))
    qts = ql.YieldTermStructureHandle(ql.FlatForward(today, q, dc))
    vts = ql.BlackVolTermStructureHandle(ql.BlackConstantVol(today, ql.NullCalendar(), vol, dc))
    process = ql.BlackScholesMertonProcess(ql.QuoteHandle(ql.SimpleQuote(spot)), qts, rts, vts)
    kind = ql.Option.Call if barrier > spot else ql.Option.Put
    cash = 10.0
    option = ql.VanillaOption(ql.CashOrNothingPayoff(kind, barrier, cash), ql.AmericanExercise(today, maturity, True))
    option.setPricingEngine(ql.AnalyticDigitalAmericanEngine(process))
    return option.NPV() / (cash * rts.discount(maturity))


def test_quantlib_american_digital_oracle():
    # QuantLib AnalyticDigitalAmericanEngine [L], 300 random cases. T is a whole
    # number of days on Actual/365 so QuantLib's day rounding does not enter.
    ql = pytest.importorskip("QuantLib")
    today = ql.Date(4, ql.March, 2024)
    ql.Settings.instance().evaluationDate = today
    rng = np.random.default_rng(20240304)
    n = 300
    spot = rng.uniform(5.0, 800.0, n)
    log_dist = rng.uniform(0.005, 0.8, n) * rng.choice([-1.0, 1.0], n)
    barrier = spot * np.exp(log_dist)
    days = rng.integers(1, 3 * 365, n)
    r = rng.uniform(-0.01, 0.12, n)
    q = rng.uniform(0.0, 0.08, n)
    vol = rng.uniform(0.04, 1.2, n)
    expected = np.array([
        _quantlib_touch(ql, today, float(spot[i]), float(barrier[i]), int(days[i]), float(r[i]), float(q[i]), float(vol[i]))
        for i in range(n)
    ])
    got = prob_touch(spot, barrier, days / 365.0, vol, r - q)
    assert np.all(np.isfinite(got))
    assert np.max(np.abs(got - expected)) < 1e-12


# ------------------------------------------------ edge behaviour [C, D]

def test_barrier_at_spot_is_one_and_expired_is_zero():
    assert prob_touch(100.0, 100.0, 0.5, 0.2, 0.03) == 1.0
    assert prob_touch(100.0, 100.0, 0.0, 0.2, 0.03) == 1.0
    assert prob_touch(100.0, 110.0, 0.0, 0.2, 0.03) == 0.0
    assert prob_touch(100.0, 90.0, -0.1, 0.2, 0.03) == 0.0


def test_invalid_inputs_give_nan():
    got = prob_touch([100.0, -1.0, 100.0, 100.0, 100.0, np.nan],
                     [np.nan, 90.0, 90.0, 90.0, 0.0, 90.0],
                     [0.5, 0.5, np.nan, 0.5, 0.5, 0.5],
                     [0.2, 0.2, 0.2, -0.1, 0.2, 0.2], 0.0)
    assert np.all(np.isnan(got))


def test_zero_vol_is_the_deterministic_path():
    # sigma = 0: ln S_t = ln S0 + mu t; the level is touched iff the path reaches it.
    mu, t = 0.10, 1.0
    reach = 100.0 * math.exp(mu * t)
    got = prob_touch(100.0, [reach * 0.999, reach * 1.001, 95.0], t, 0.0, mu)
    assert list(got) == [1.0, 0.0, 0.0]


def test_small_vol_matches_naive_formula_where_it_is_finite():
    # [D] Where exp(2 nu' b / sigma^2) does not overflow, the stable form equals
    # the textbook form of REFERENCE §3 computed in log space with log_ndtr.
    rng = np.random.default_rng(7)
    n = 2000
    spot = 100.0
    barrier = spot * np.exp(rng.uniform(-0.3, 0.3, n))
    t = rng.uniform(0.01, 2.0, n)
    sigma = rng.uniform(0.01, 0.6, n)
    mu = rng.uniform(-0.3, 0.3, n)
    b = np.log(barrier / spot)
    nu = mu - 0.5 * sigma**2
    s = sigma * np.sqrt(t)
    up = b > 0
    a1 = np.where(up, (-b + nu * t) / s, (b - nu * t) / s)
    a2 = np.where(up, (-b - nu * t) / s, (b + nu * t) / s)
    expo = 2 * nu * b / sigma**2
    ok = expo < 600
    naive = ndtr(a1) + np.exp(expo + log_ndtr(a2))
    got = prob_touch(spot, barrier, t, sigma, mu)
    assert ok.sum() > 1500
    np.testing.assert_allclose(got[ok], np.clip(naive[ok], 0, 1), rtol=1e-9, atol=1e-13)


def test_tiny_vol_does_not_overflow():
    # [D] sigma = 1e-4 with drift toward the level: exp(2 nu b / sigma^2) would be
    # e^(1e6); the answer must still be finite and tend to the deterministic path.
    with np.errstate(all="raise"):
        got = prob_touch(100.0, [104.0, 106.0, 96.0, 94.0], 1.0, 1e-4, [0.05, 0.05, -0.05, -0.05])
    # ln(1.04) = 0.0392 < 0.05 reached; ln(1.06) = 0.0583 > 0.05 not reached.
    np.testing.assert_allclose(got, [1.0, 0.0, 1.0, 0.0], atol=1e-12)
    assert np.all((got >= 0) & (got <= 1))


@settings(max_examples=80, deadline=None)
@given(
    log_dist=st.floats(-1.0, 1.0).filter(lambda x: abs(x) > 1e-4),
    t=st.floats(1e-3, 3.0),
    sigma=st.floats(0.02, 1.5),
    mu=st.floats(-0.5, 0.5),
)
def test_touch_at_least_finish_beyond_and_grows_with_time(log_dist, t, sigma, mu):
    # Continuous paths [C]: finishing beyond a level on the far side of spot
    # means the path touched it; and a longer window can only add touches.
    spot = 50.0
    barrier = spot * math.exp(log_dist)
    p = prob_touch(spot, barrier, t, sigma, mu)
    nu = mu - 0.5 * sigma * sigma
    z = (-abs(log_dist) + math.copysign(1.0, log_dist) * nu * t) / (sigma * math.sqrt(t))
    beyond = ndtr(z)
    assert 0.0 <= p <= 1.0
    assert p >= beyond - 1e-14
    assert prob_touch(spot, barrier, 1.5 * t, sigma, mu) >= p - 1e-14


# ------------------------------------------------- prob_touch_smile [D, C]

def _far_side_flat(spot, forward, strike, t, vol):
    """P(S_T beyond the strike, away from spot) under a flat-vol lognormal."""
    d2 = (math.log(forward / strike) - 0.5 * vol * vol * t) / (vol * math.sqrt(t))
    return ndtr(d2) if strike > spot else ndtr(-d2)


def test_smile_helper_drift_comes_from_the_forward():
    # [D] mu = ln(F/S)/T: with F = S e^{(r-q)T} it reproduces the Haug up case.
    f = 95.0 * math.exp(HAUG_R * HAUG_T)
    far = _far_side_flat(95.0, f, 100.0, HAUG_T, HAUG_VOL)
    got = prob_touch_smile(95.0, f, 100.0, HAUG_T, HAUG_VOL, far)
    assert got == pytest.approx(0.786512, abs=1e-5)  # Haug via QuantLib [L]
    assert got == pytest.approx(prob_touch(95.0, 100.0, HAUG_T, HAUG_VOL, HAUG_R), rel=1e-13)


def test_smile_helper_floors_by_finish_beyond():
    # [C] A skewed smile can put the digital above the one-vol touch figure;
    # touching is implied by finishing beyond, so the floor applies.
    assert prob_touch_smile(100.0, 101.0, 130.0, 0.1, 0.2, 0.05) == 0.05
    p = prob_touch(100.0, 130.0, 0.1, 0.2, math.log(1.01) / 0.1)
    assert p < 1e-3
    assert prob_touch_smile(100.0, 101.0, 130.0, 0.1, 0.2, 0.0) == pytest.approx(p, rel=1e-15)


def test_smile_helper_strike_between_spot_and_forward():
    # [C] Strike above spot but below the forward: the path must still climb
    # to it, and finishing above it implies the climb, so touch >= P(S_T > K).
    spot, fwd, k, t, vol = 100.0, 104.0, 102.0, 1.0, 0.1
    far = _far_side_flat(spot, fwd, k, t, vol)
    assert far > 0.5
    got = prob_touch_smile(spot, fwd, k, t, vol, far)
    assert far <= got < 1.0
    assert got == pytest.approx(prob_touch(spot, k, t, vol, math.log(fwd / spot)), rel=1e-13)


def test_smile_helper_in_the_money_by_spot_uses_the_other_tail():
    # [C] A put struck above spot finishes beyond (below K) without touching K;
    # the floor must be the far-side tail 1 - P(put finishes beyond).
    spot, fwd, k, t, vol = 100.0, 100.0, 115.0, 0.5, 0.3
    far = _far_side_flat(spot, fwd, k, t, vol)  # P(S_T > 115)
    put_beyond = 1.0 - far  # P(S_T < 115), large
    p_touch = prob_touch(spot, k, t, vol, 0.0)
    got = prob_touch_smile(spot, fwd, k, t, vol, put_beyond, is_call=False)
    assert got == pytest.approx(p_touch, rel=1e-15)  # not floored up to ~0.7
    assert got < put_beyond
    # Same strike as a call: out of the money by spot, p_beyond is the far tail.
    assert prob_touch_smile(spot, fwd, k, t, vol, 0.9, is_call=True) == 0.9
    # Vectorised over contracts.
    both = prob_touch_smile(spot, fwd, [k, k], t, vol, [put_beyond, far], is_call=[False, True])
    np.testing.assert_allclose(both, [p_touch, p_touch], rtol=1e-15)


def test_smile_helper_edges():
    assert prob_touch_smile(100.0, 101.0, 100.0, 0.5, 0.2, 0.4) == 1.0  # at spot
    assert prob_touch_smile(100.0, 101.0, 110.0, 0.0, 0.2, 0.4) == 0.0  # expired
    assert math.isnan(prob_touch_smile(100.0, 101.0, 110.0, 0.5, np.nan, 0.4))  # no vol
    p = prob_touch(100.0, 110.0, 0.5, 0.2, math.log(1.01) / 0.5)
    assert prob_touch_smile(100.0, 101.0, 110.0, 0.5, 0.2, np.nan) == pytest.approx(p, rel=1e-15)
