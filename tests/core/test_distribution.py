"""Finish-beyond probability with a smile, implied density, quantiles and ranges.

Sources (tags as in REFERENCE.md):
- [V] Hull, Options, Futures, and Other Derivatives: Ex. 15.6 (N(d2) = 0.7349)
  and Ch. 20 appendix Example 20A.1 (Breeden-Litzenberger with a smile).
- [V] Gatheral & Jacquier (2014): density p(k) = g/sqrt(2 pi w) exp(-d-^2/2);
  the Vogt slice's density integrates to 1 with E[S_T/F] = 1 (REFERENCE §6).
- [L] QuantLib ql.blackFormula and vollib black as test-only price oracles;
  scipy.stats.norm for the two-sided z values of REFERENCE §2.
- [C] the risk-neutral lognormal range of REFERENCE §9.
- [D] derived consistency values of REFERENCE §4 and §5.
"""

import numpy as np
import pytest
import QuantLib as ql
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st
from scipy.integrate import quad
from scipy.stats import lognorm, norm
from vollib.black import black as vollib_black

from chaintriage.core import distribution as dist
from chaintriage.core import svi
from chaintriage.core.smile_fit import fit_smile
from chaintriage.core.svi import SviParams


# ---------------------------------------------------------------------------
# tiny test-only smile objects (the distribution module takes any object with
# total_variance / dw_dk / d2w_dk2 on k)


class SviSlice:
    def __init__(self, p: SviParams):
        self.p = p

    def total_variance(self, k):
        return svi.total_variance(self.p, k)

    def dw_dk(self, k):
        return svi.dw_dk(self.p, k)

    def d2w_dk2(self, k):
        return svi.d2w_dk2(self.p, k)


def flat(sigma, t):
    return SviSlice(SviParams.flat(sigma * sigma * t))


class QuadraticVolSmile:
    """REFERENCE §4 test smile [D]: sigma(k) = 0.20 - 0.10 k + 0.20 k^2, w = sigma^2 T."""

    def __init__(self, t):
        self.t = t

    @staticmethod
    def vol(k):
        return 0.20 - 0.10 * k + 0.20 * k * k

    @staticmethod
    def dvol(k):
        return -0.10 + 0.40 * k

    def total_variance(self, k):
        return self.vol(k) ** 2 * self.t

    def dw_dk(self, k):
        return 2.0 * self.t * self.vol(k) * self.dvol(k)

    def d2w_dk2(self, k):
        return 2.0 * self.t * (self.dvol(k) ** 2 + self.vol(k) * 0.40)


class LinearInStrikeSmile:
    """Hull Example 20A.1 [V]: vol 30% at K=6 falling 1 point per unit of strike to 22% at K=14."""

    def __init__(self, forward, t):
        self.f, self.t = forward, t

    @staticmethod
    def vol_k(strike):
        return 0.30 - 0.01 * (strike - 6.0)

    def total_variance(self, k):
        return self.vol_k(self.f * np.exp(k)) ** 2 * self.t

    def dw_dk(self, k):
        strike = self.f * np.exp(k)
        return 2.0 * self.t * self.vol_k(strike) * (-0.01) * strike

    def d2w_dk2(self, k):
        strike = self.f * np.exp(k)
        return 2.0 * self.t * ((0.01 * strike) ** 2 - 0.01 * strike * self.vol_k(strike))


VOGT = SviParams.from_gj_order(-0.0410, 0.1331, 0.3586, 0.3060, 0.4153)  # G&J Example 3.1 [V], T = 1
EQUITY = SviParams(a=0.02, b=0.1, rho=-0.6, m=0.05, sigma=0.15)  # a typical skew (test data), T = 1


def ql_call(forward, strike, vol, t, df):
    """[L] QuantLib Black-76 call price (discounted)."""
    return ql.blackFormula(ql.Option.Call, float(strike), float(forward), float(vol) * np.sqrt(t), float(df))


# ---------------------------------------------------------------------------
# §4: P(S_T > K) with a smile


SEC4 = [  # K, sigma, sigma'(K), N(d2), formula  (REFERENCE §4 [D])
    (90.0, 0.212756, -0.0015794, 0.734055, 0.767036),
    (100.0, 0.200000, -0.0010000, 0.471814, 0.499953),
    (110.0, 0.192286, -0.0005625, 0.220957, 0.233944),
]


@pytest.mark.parametrize("strike, vol, dvol_dk_strike, nd2, formula", SEC4)
def test_prob_above_matches_reference_section4_table(strike, vol, dvol_dk_strike, nd2, formula):
    # [D] REFERENCE §4: F=100, T=.5, r=.04, sigma(k) = .20 - .10k + .20k^2
    f, t = 100.0, 0.5
    sm = QuadraticVolSmile(t)
    k = np.log(strike / f)
    assert sm.vol(k) == pytest.approx(vol, abs=5e-7)
    assert sm.dvol(k) / strike == pytest.approx(dvol_dk_strike, abs=5e-8)
    assert dist.prob_above_flat(f, strike, vol, t) == pytest.approx(nd2, abs=1e-6)
    assert dist.prob_above(sm, f, strike) == pytest.approx(formula, abs=1e-6)


@pytest.mark.parametrize("strike", [70.0, 90.0, 100.0, 110.0, 130.0])
def test_prob_above_equals_chain_rule_formula_and_price_differences(strike):
    # [D] REFERENCE §4: P = N(d2) - F phi(d1) sqrt(T) sigma'(K), computed independently with scipy.stats;
    # and P = -(1/DF) dC/dK by central differences (h = 0.1, tol 1e-5) of QuantLib Black prices [L]
    f, t, r = 100.0, 0.5, 0.04
    df = np.exp(-r * t)
    sm = QuadraticVolSmile(t)

    def vol_at(x):
        return sm.vol(np.log(x / f))

    sig = vol_at(strike)
    d1 = (np.log(f / strike) + 0.5 * sig * sig * t) / (sig * np.sqrt(t))
    d2 = d1 - sig * np.sqrt(t)
    dsig_dk_strike = sm.dvol(np.log(strike / f)) / strike
    chain_rule = norm.cdf(d2) - f * norm.pdf(d1) * np.sqrt(t) * dsig_dk_strike
    got = float(dist.prob_above(sm, f, strike))
    assert got == pytest.approx(chain_rule, abs=1e-12)
    h = 0.1
    fd = -(ql_call(f, strike + h, vol_at(strike + h), t, df) - ql_call(f, strike - h, vol_at(strike - h), t, df)) / (2 * h) / df
    assert got == pytest.approx(fd, abs=1e-5)
    assert float(dist.prob_below(sm, f, strike)) == pytest.approx(1.0 - got, abs=1e-15)


def test_flat_smile_at_the_forward_is_below_one_half():
    # [D] REFERENCE §4: flat smile, K = F: P(S_T > F) = N(-sigma sqrt(T)/2) = 0.480061 for sigma .2, T .25
    assert float(dist.prob_above(flat(0.2, 0.25), 100.0, 100.0)) == pytest.approx(0.480061, abs=1e-6)
    assert float(dist.prob_above_flat(100.0, 100.0, 0.2, 0.25)) == pytest.approx(0.480061, abs=1e-6)


def test_hull_15_6_risk_neutral_probability_of_exercise():
    # [V] Hull Ex. 15.6: S=42, K=40, r=.10, sigma=.20, T=.5; N(d2) = 0.7349 (F = 42 e^{0.05})
    f = 42.0 * np.exp(0.10 * 0.5)
    assert float(dist.prob_above_flat(f, 40.0, 0.2, 0.5)) == pytest.approx(0.7349, abs=5e-5)
    assert float(dist.prob_above(flat(0.2, 0.5), f, 40.0)) == pytest.approx(0.7349, abs=5e-5)


def test_prob_above_is_vectorised_clipped_and_nan_on_bad_input():
    sm = SviSlice(EQUITY)
    out = dist.prob_above(sm, 100.0, np.array([[50.0, 100.0], [0.0, -5.0]]))
    assert out.shape == (2, 2)
    assert np.all((out[0] >= 0) & (out[0] <= 1))
    assert np.all(np.isnan(out[1]))
    assert np.isnan(dist.prob_above_flat(100.0, 100.0, 0.0, 0.25))
    # Vogt's arbitrage region: still clipped to [0, 1] [V slice]
    p = dist.prob_above(SviSlice(VOGT), 1.0, np.exp(np.linspace(-3, 3, 301)))
    assert np.all((p >= 0) & (p <= 1))


# ---------------------------------------------------------------------------
# §5: Breeden-Litzenberger


@pytest.mark.parametrize("strike, q", [(80.0, 0.01132539), (100.0, 0.02813904), (120.0, 0.00932452)])
def test_flat_smile_density_matches_reference_section5(strike, q):
    # [D] REFERENCE §5: F=100, T=.5, DF=e^-0.02, sigma=.2; lognormal q(K) and second differences at h=0.1, rel tol 1e-5
    f, t, df, vol = 100.0, 0.5, np.exp(-0.02), 0.2
    assert float(dist.density_strike(flat(vol, t), f, strike)) == pytest.approx(q, rel=1e-5)
    assert float(dist.density_strike_flat(f, strike, vol, t)) == pytest.approx(q, rel=1e-5)
    h = 0.1
    second = (ql_call(f, strike - h, vol, t, df) - 2 * ql_call(f, strike, vol, t, df) + ql_call(f, strike + h, vol, t, df)) / h**2 / df
    assert float(dist.density_strike(flat(vol, t), f, strike)) == pytest.approx(second, rel=1e-5)


HULL_S, HULL_R, HULL_T = 10.0, 0.03, 0.25
HULL_F = HULL_S * np.exp(HULL_R * HULL_T)
HULL_DF = np.exp(-HULL_R * HULL_T)


def hull_call(strike):
    """Example 20A.1 call price with the linearly interpolated vol; vollib black as the oracle [L]."""
    strike = np.atleast_1d(np.asarray(strike, dtype=float))
    return np.array([
        vollib_black("c", HULL_F, kk, HULL_T, HULL_R, LinearInStrikeSmile.vol_k(kk)) for kk in strike
    ])


def test_hull_20a1_prices_and_book_densities():
    # [V] Hull Example 20A.1: prices 4.045, 3.549, 3.055 at K = 6, 6.5, 7
    np.testing.assert_allclose(hull_call([6.0, 6.5, 7.0]), [4.045, 3.549, 3.055], atol=5e-4)
    # [V] densities g1..g8 at K = 6.5, ..., 13.5 with delta = 0.5, to 4dp, total 0.9985
    strikes = np.arange(6.5, 14.0, 1.0)
    delta = 0.5
    g = np.exp(HULL_R * HULL_T) * (hull_call(strikes - delta) + hull_call(strikes + delta) - 2 * hull_call(strikes)) / delta**2
    book = [0.0057, 0.0444, 0.1545, 0.2781, 0.2813, 0.1659, 0.0573, 0.0113]
    np.testing.assert_allclose(g, book, atol=5e-5)
    assert g.sum() == pytest.approx(0.9985, abs=5e-5)


def test_hull_20a1_closed_form_density_of_the_same_smile():
    # [D] our closed-form density for the Example 20A.1 smile vs fine second differences of its prices (h = 0.001)
    sm = LinearInStrikeSmile(HULL_F, HULL_T)
    strikes = np.arange(6.5, 14.0, 1.0)
    h = 1e-3
    fine = np.exp(HULL_R * HULL_T) * (hull_call(strikes - h) + hull_call(strikes + h) - 2 * hull_call(strikes)) / h**2
    ours = dist.density_strike(sm, HULL_F, strikes)
    np.testing.assert_allclose(ours, fine, atol=1e-6)
    # [V] the book's coarse second differences (delta = 0.5) are exactly the closed-form density averaged
    # with the tent weight (delta - |x - K|)/delta^2; integrating ours that way gives the book's g1..g8 to 4dp
    book = [0.0057, 0.0444, 0.1545, 0.2781, 0.2813, 0.1659, 0.0573, 0.0113]
    delta = 0.5
    tent = [
        quad(lambda x, c=c: float(dist.density_strike(sm, HULL_F, x)) * (delta - abs(x - c)) / delta**2,
             c - delta, c + delta, points=[c], epsabs=1e-12)[0]
        for c in strikes
    ]
    np.testing.assert_allclose(tent, book, atol=5e-5)
    p_6_14 = float(dist.prob_above(sm, HULL_F, 6.0) - dist.prob_above(sm, HULL_F, 14.0))
    assert p_6_14 == pytest.approx(0.9985, abs=5e-4)


def test_hull_20a1_flat_26pct_interval_probabilities():
    # [V] Hull Example 20A.1 with a flat 26% vol: P(6 < S_T < 7) = 0.0031, P(13 < S_T < 14) = 0.0167
    pa = dist.prob_above_flat(HULL_F, np.array([6.0, 7.0, 13.0, 14.0]), 0.26, HULL_T)
    assert pa[0] - pa[1] == pytest.approx(0.0031, abs=5e-5)
    assert pa[2] - pa[3] == pytest.approx(0.0167, abs=5e-5)


@pytest.mark.parametrize("p", [EQUITY, VOGT, SviParams(0.001, 0.03, -0.3, 0.0, 0.05)])
def test_svi_density_equals_second_difference_of_call_prices(p):
    # [V] G&J 2014 via REFERENCE §6: the density per strike equals e^{rT} d2C/dK2, checked to 1e-6,
    # with C from QuantLib Black prices [L] at the SVI vols
    f, t, r = 100.0, 1.0, 0.03
    df = np.exp(-r * t)
    sm = SviSlice(p)

    def call(strike):
        return ql_call(f, strike, np.sqrt(svi.total_variance(p, np.log(strike / f)) / t), t, df)

    h = 0.01
    strikes = np.linspace(60.0, 160.0, 21)
    second = np.array([(call(kk - h) - 2 * call(kk) + call(kk + h)) / h**2 / df for kk in strikes])
    np.testing.assert_allclose(dist.density_strike(sm, f, strikes), second, atol=1e-6)


@pytest.mark.parametrize("p", [VOGT, EQUITY])
def test_density_integrates_to_one_with_mean_at_the_forward(p):
    # [V] REFERENCE §6: the Vogt density integrates to 1 and E[S_T/F] = 1 (also for an arbitrage-free slice);
    # scipy quad [L] on the closed form, tol 1e-8, and the grid Distribution, tol 1e-4
    sm = SviSlice(p)
    mass, _ = quad(lambda k: float(dist.density_k(sm, k)), -12, 12, limit=400, points=[-1, 0, 1])
    mean, _ = quad(lambda k: float(np.exp(k) * dist.density_k(sm, k)), -12, 12, limit=400, points=[-1, 0, 1])
    assert mass == pytest.approx(1.0, abs=1e-8)
    assert mean == pytest.approx(1.0, abs=1e-8)
    f = 250.0
    d = dist.terminal_distribution(sm, f, 1.0, float(np.sqrt(svi.total_variance(p, 0.0))))
    assert d.mass() == pytest.approx(1.0, abs=1e-4)
    assert d.mean() == pytest.approx(f, rel=1e-4)
    assert d.mass_flat() == pytest.approx(1.0, abs=1e-8)  # lognormal: [D]
    assert d.mean_flat() == pytest.approx(f, rel=1e-8)


def test_sharp_vertex_gets_a_finer_grid():
    # [D] a smile whose vertex is far narrower than the 401-point spacing: the grid is made finer until
    # the trapezoid mass matches the closed-form CDF (G&J: the density integrates to 1)
    p = SviParams(a=0.002, b=0.05, rho=-0.3, m=0.0, sigma=0.001)  # t = 0.05
    d = dist.terminal_distribution(SviSlice(p), 100.0, 0.05, 0.25)
    assert d.strikes.size > 401
    assert d.mass() + sum(d.tail_mass()) == pytest.approx(1.0, abs=1e-6)
    assert not any("do not resolve" in s for s in d.notes)
    coarse = dist.terminal_distribution(SviSlice(p), 100.0, 0.05, 0.25, max_doublings=0)
    assert coarse.strikes.size == 401 and any("do not resolve" in s for s in coarse.notes)


def test_fat_wings_report_the_mass_and_mean_beyond_the_grid():
    # [V] E[S_T] = F (REFERENCE §6, martingale); with a left wing slope of 1.12 (arbitrage-free slice)
    # much of the probability sits near zero, beyond the grid, and the closed-form tail figures close the gap [D]
    p = SviParams(a=0.05, b=0.7, rho=-0.6, m=0.0, sigma=0.4)  # wing slopes 1.12 and 0.28
    assert svi.butterfly_check(p, np.linspace(-30, 10, 8001))[0]
    f = 100.0
    d = dist.terminal_distribution(SviSlice(p), f, 1.0, 0.3)
    below, above = d.tail_mass()
    assert below > 1e-4 and any("beyond the grid" in s for s in d.notes)
    assert d.mass() + below + above == pytest.approx(1.0, abs=1e-6)
    assert d.mean() + sum(d.tail_mean()) == pytest.approx(f, rel=1e-6)
    # the lower tail's E[S_T; S_T < K0] by quad on the closed-form density [L scipy]
    k0 = float(np.log(d.strikes[0] / f))
    direct, _ = quad(lambda k: float(f * np.exp(k) * dist.density_k(SviSlice(p), k)), -200.0, k0, limit=500)
    assert d.tail_mean()[0] == pytest.approx(direct, rel=1e-6, abs=1e-9)


def test_vogt_density_is_negative_exactly_where_g_is_and_kept():
    # [V] G&J Example 3.1: g < 0 on k in [0.6424, 1.2569]; the density there is kept negative and flagged
    f = 100.0
    d = dist.terminal_distribution(SviSlice(VOGT), f, 1.0, 0.13, n=801)
    assert d.negative_density
    assert any("negative" in s for s in d.notes)
    kneg = np.log(d.strikes[d.density < 0] / f)
    assert kneg.min() == pytest.approx(0.6424, abs=0.01)
    assert kneg.max() == pytest.approx(1.2569, abs=0.01)
    g = svi.g_function(VOGT, np.log(d.strikes / f))
    assert np.array_equal(d.density < 0, g < 0)
    # an arbitrage-free slice has no negative density [D]
    assert not dist.terminal_distribution(SviSlice(EQUITY), f, 1.0, 0.2).negative_density


def test_distribution_cdf_comes_from_the_digital_and_is_consistent_with_the_density():
    # [D] cdf = 1 - P(above); its increments match the trapezoid of the density
    f, t = 100.0, 1.0
    d = dist.terminal_distribution(SviSlice(EQUITY), f, t, 0.2)
    np.testing.assert_allclose(d.cdf, 1.0 - dist.prob_above(SviSlice(EQUITY), f, d.strikes), atol=1e-15)
    for i, j in [(0, 100), (150, 200), (200, 201), (250, 330), (330, 400)]:
        area, _ = quad(lambda x: float(dist.density_strike(SviSlice(EQUITY), f, x)), d.strikes[i], d.strikes[j],
                       epsabs=1e-13, limit=200)
        assert d.cdf[j] - d.cdf[i] == pytest.approx(area, abs=1e-10)
    np.testing.assert_allclose(d.cdf_flat, norm.cdf(np.log(d.strikes / f) / 0.2 + 0.1), atol=1e-12)  # [L] scipy
    assert d.cdf[0] < 1e-6 and d.cdf[-1] > 1 - 1e-6  # the grid covers the tails
    assert d.strikes.shape == (401,) and np.all(np.diff(d.strikes) > 0)


def test_linear_spacing_grid():
    d = dist.terminal_distribution(SviSlice(EQUITY), 100.0, 1.0, 0.2, n=2001, spacing="linear")
    assert np.allclose(np.diff(d.strikes), d.strikes[1] - d.strikes[0])
    assert d.mass() == pytest.approx(1.0, abs=1e-4)


# ---------------------------------------------------------------------------
# quantiles and ranges


def test_quantile_cdf_round_trip():
    # [D] closed-form quantile inverts the closed-form CDF; the grid quantile inverts the grid CDF
    sm = SviSlice(EQUITY)
    f = 100.0
    p = np.array([1e-4, 0.01, 0.1, 0.5, 0.9, 0.99, 0.9999])
    strikes = dist.quantile(sm, f, p)
    np.testing.assert_allclose(1.0 - dist.prob_above(sm, f, strikes), p, atol=1e-10)
    d = dist.terminal_distribution(sm, f, 1.0, 0.2)
    np.testing.assert_allclose(d.quantile(d.cdf[10:-10:20]), d.strikes[10:-10:20], rtol=1e-9)
    np.testing.assert_allclose(d.quantile(p), strikes, rtol=2e-3)
    assert np.all(np.isnan(dist.quantile(sm, f, [0.0, 1.0, np.nan])))


def test_range_flat_median_centred_matches_reference_section9():
    # [C] REFERENCE §9: F=100, sigma=.25, T=.25 -> [87.5627, 112.4333] at 68.27% and [77.6617, 126.7673] at 95%
    # (the 68.27% row uses c = 0.6827, z = 1.000022 of REFERENCE §2; with z exactly 1 the low end is 87.5629)
    lo, hi = dist.range_flat(100.0, 0.25, 0.25, 0.6827)  # the default centre is this central interval
    assert (float(lo), float(hi)) == pytest.approx((87.5627, 112.4333), abs=5e-5)
    lo, hi = dist.range_flat(100.0, 0.25, 0.25, 0.95, centre="median")
    assert (float(lo), float(hi)) == pytest.approx((77.6617, 126.7673), abs=5e-5)
    # the default confidence is the one-sigma level, z = 1 exactly [L] REFERENCE §2 (0.682689492 -> z 1)
    lo, hi = dist.range_flat(100.0, 0.25, 0.25)
    assert (float(lo), float(hi)) == pytest.approx((100 * np.exp(-0.0078125 - 0.125), 100 * np.exp(-0.0078125 + 0.125)),
                                                   rel=1e-12)
    assert float(lo) == pytest.approx(87.5629, abs=5e-5)


def test_default_confidence_is_the_one_sigma_level():
    # [L] REFERENCE §2: N(1) - N(-1) = 0.6826895 (scipy); the app's label 68.27%
    from chaintriage.core.confidence import DEFAULT_CONFIDENCE

    assert DEFAULT_CONFIDENCE == pytest.approx(norm.cdf(1.0) - norm.cdf(-1.0), abs=1e-15)
    assert DEFAULT_CONFIDENCE == pytest.approx(0.6826895, abs=1e-7)


@pytest.mark.parametrize("f, vol, t, conf", [(100.0, 0.45, 1.0, 0.6827), (285.0, 0.3, 0.5, 0.95), (50.0, 0.8, 2.0, 0.9)])
def test_plain_range_holds_its_confidence_under_the_lognormal_with_mean_f(f, vol, t, conf):
    # [L] scipy.stats.lognorm: the one-vol risk-neutral lognormal (mean F, log-sd vol sqrt T) puts (1 - c)/2
    # below the plain range and (1 - c)/2 above it. The old band F exp(-/+ z s) left 22% / 11% for 45% vol, 1 year.
    s = vol * np.sqrt(t)
    ln = lognorm(s, scale=f * np.exp(-0.5 * s * s))
    assert ln.mean() == pytest.approx(f, rel=1e-12)
    lo, hi = dist.range_flat(f, vol, t, conf)
    assert ln.cdf(float(lo)) == pytest.approx(0.5 * (1 - conf), abs=1e-12)
    assert ln.sf(float(hi)) == pytest.approx(0.5 * (1 - conf), abs=1e-12)


@pytest.mark.parametrize("conf, z", [(0.6827, 1.000022), (0.80, 1.281552), (0.90, 1.644854), (0.95, 1.959964), (0.99, 2.575829)])
def test_range_flat_uses_two_sided_z(conf, z):
    # [L] REFERENCE §2 two-sided z (scipy); centre='forward' is the band F exp(-/+ z sigma sqrt T) (the sigma marks)
    f, vol, t = 100.0, 0.25, 0.25
    lo, hi = dist.range_flat(f, vol, t, conf, centre="forward")
    assert np.log(hi / f) / (vol * np.sqrt(t)) == pytest.approx(z, abs=1e-6)
    assert np.log(f / lo) / (vol * np.sqrt(t)) == pytest.approx(z, abs=1e-6)
    # [D] the default (median-centred) band is the same band shifted by exp(-sigma^2 T/2)
    mlo, mhi = dist.range_flat(f, vol, t, conf)
    assert float(mlo) == pytest.approx(float(lo) * np.exp(-0.5 * vol * vol * t), rel=1e-14)
    assert float(mhi) == pytest.approx(float(hi) * np.exp(-0.5 * vol * vol * t), rel=1e-14)


def test_range_flat_bad_input():
    lo, hi = dist.range_flat(100.0, 0.2, 0.25, np.array([1.5, -0.1]))
    assert np.all(np.isnan(lo)) and np.all(np.isnan(hi))
    from chaintriage.core.findings import ChainTriageError

    with pytest.raises(ChainTriageError):
        dist.range_flat(100.0, 0.2, 0.25, 0.9, centre="middle")


def test_range_smile_of_a_flat_smile_is_the_risk_neutral_lognormal_range():
    # [C] REFERENCE §9: for a flat smile the smile quantiles are F exp(-sigma^2 T/2 -/+ z sigma sqrt T)
    lo, hi = dist.range_smile(flat(0.25, 0.25), 100.0, 0.95)
    assert (float(lo), float(hi)) == pytest.approx((77.6617, 126.7673), abs=5e-5)


def test_range_smile_endpoints_carry_the_tail_mass():
    # [D] P(S_T < low) = (1 - c)/2 and P(S_T > high) = (1 - c)/2 under the smile, for several c at once
    sm = SviSlice(EQUITY)
    conf = np.array([0.5, 0.6827, 0.95, 0.99])
    lo, hi = dist.range_smile(sm, 100.0, conf)
    np.testing.assert_allclose(dist.prob_below(sm, 100.0, lo), 0.5 * (1 - conf), atol=1e-10)
    np.testing.assert_allclose(dist.prob_above(sm, 100.0, hi), 0.5 * (1 - conf), atol=1e-10)
    # the downward skew fattens the left tail: at 95% and 99% the smile's low end is below the
    # lognormal one at the at-the-money vol [D]
    flo, _ = dist.range_flat(100.0, float(np.sqrt(svi.total_variance(EQUITY, 0.0))), 1.0, conf, centre="median")
    assert np.all(lo[2:] < flo[2:])


# ---------------------------------------------------------------------------
# property: fitted arbitrage-free smiles give a monotone finish-beyond probability


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.filter_too_much])
@given(
    v=st.floats(0.002, 0.08),
    b=st.floats(0.02, 0.6),
    rho=st.floats(-0.9, 0.6),
    m=st.floats(-0.15, 0.15),
    sig=st.floats(0.05, 0.5),
    t=st.floats(0.02, 2.0),
    seed=st.integers(0, 2**31 - 1),
)
def test_prob_above_monotone_for_fitted_arbitrage_free_smiles(v, b, rho, m, sig, t, seed):
    # [D] Breeden-Litzenberger: P(S_T > K) = -(1/DF) dC/dK is non-increasing wherever the density is >= 0
    p = SviParams(a=v - b * sig * np.sqrt(1 - rho * rho), b=b, rho=rho, m=m, sigma=sig)
    assume(max(svi.wing_slopes(p)) < 2)
    rng = np.random.default_rng(seed)
    k = np.linspace(-0.6, 0.35, 30)
    w = svi.total_variance(p, k) * (1.0 + 0.01 * rng.standard_normal(k.size))
    sm = fit_smile(k, w, None, 1.0)
    assume(sm.arbitrage_free)
    lo, hi = sm.check_range
    strikes = 100.0 * np.exp(np.linspace(max(lo, -6.0), min(hi, 6.0), 600))
    pa = dist.prob_above(sm, 100.0, strikes)
    assert np.all((pa >= 0) & (pa <= 1))
    assert np.all(np.diff(pa) <= 1e-12)
