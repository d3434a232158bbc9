"""Raw SVI formulas and the butterfly (g function) check.

Sources (tags as in REFERENCE.md):
- [V] Gatheral & Jacquier (2014), "Arbitrage-free SVI volatility surfaces",
  Quantitative Finance 14(1): eq. 2.1 (g), eq. 3.1 (raw SVI), Example 3.1
  (counter-example credited to Axel Vogt), values as vetted in REFERENCE.md §6.
- [V] Lee (2004) wing bound b(1 +/- rho) <= 2, as cited in G&J 2014.
- [D] derived consistency checks (flat w gives g = 1; derivatives vs finite differences).
"""

import numpy as np
import pytest

from chaintriage.core import svi
from chaintriage.core.svi import SviParams

# G&J 2014 Example 3.1 lists (a, b, m, rho, sigma) = (-0.0410, 0.1331, 0.3586, 0.3060, 0.4153) [V]
VOGT = SviParams.from_gj_order(-0.0410, 0.1331, 0.3586, 0.3060, 0.4153)
EQUITY = SviParams(a=0.02, b=0.1, rho=-0.6, m=0.05, sigma=0.15)  # a typical downward skew (test data)
K_PAPER = np.linspace(-1.5, 1.5, 3001)  # the range REFERENCE §6 reports on


def test_gj_order_constructor_puts_m_and_rho_in_place():
    assert VOGT.m == 0.3586 and VOGT.rho == 0.3060
    assert "(a, b, m" in SviParams.__doc__  # the docstring warns about the paper's order


def test_vogt_spot_values_of_g():
    # [V] G&J 2014 Example 3.1, REFERENCE §6: g(0)=1.038650, g(0.5)=0.069379, g(0.9)=-0.032685, g(1.5)=0.029124, tol 1e-6
    g = svi.g_function(VOGT, [0.0, 0.5, 0.9, 1.5])
    np.testing.assert_allclose(g, [1.038650, 0.069379, -0.032685, 0.029124], atol=1e-6)


def test_vogt_minimum_and_negative_interval():
    # [V] G&J 2014 Example 3.1, REFERENCE §6: min g -0.032864 at k 0.8793; g < 0 exactly on [0.6424, 1.2569]
    free, min_g, k_min, intervals = svi.butterfly_check(VOGT, K_PAPER)
    assert free is False
    assert min_g == pytest.approx(-0.032864, abs=1e-6)
    assert k_min == pytest.approx(0.8793, abs=5e-5)
    assert len(intervals) == 1
    assert intervals[0][0] == pytest.approx(0.6424, abs=5e-5)
    assert intervals[0][1] == pytest.approx(1.2569, abs=5e-5)


def test_vogt_default_grid_finds_the_same_arbitrage():
    # [V] same values with the module's own default grid
    free, min_g, k_min, intervals = svi.butterfly_check(VOGT)
    assert not free
    assert min_g == pytest.approx(-0.032864, abs=1e-6)
    assert k_min == pytest.approx(0.8793, abs=5e-5)


def test_vogt_minimum_variance_and_wing_slopes():
    # [V] REFERENCE §6: min total variance 0.011625, wing slopes 0.0924 and 0.1738
    assert svi.min_total_variance(VOGT) == pytest.approx(0.011625, abs=5e-7)
    from scipy.optimize import minimize_scalar  # [L] independent numerical minimum

    res = minimize_scalar(lambda x: float(svi.total_variance(VOGT, x)), bounds=(-3, 3), method="bounded",
                          options={"xatol": 1e-10})
    assert res.fun == pytest.approx(svi.min_total_variance(VOGT), abs=1e-12)
    left, right = svi.wing_slopes(VOGT)
    assert left == pytest.approx(0.0924, abs=5e-5)
    assert right == pytest.approx(0.1738, abs=5e-5)
    assert svi.is_valid(VOGT)  # the slice is a valid SVI: the arbitrage is in g only


def test_swapped_parameter_trap():
    # [V] REFERENCE §6: taking the paper's list as (a, b, rho, m, sigma) gives min g -0.024599 at k 0.7867
    swapped = SviParams(-0.0410, 0.1331, 0.3586, 0.3060, 0.4153)
    free, min_g, k_min, _ = svi.butterfly_check(swapped, K_PAPER)
    assert not free
    assert min_g == pytest.approx(-0.024599, abs=1e-6)
    assert k_min == pytest.approx(0.7867, abs=5e-5)
    assert min_g != pytest.approx(-0.032864, abs=1e-4)  # and it is NOT the paper's number


def test_flat_total_variance_gives_g_identically_one():
    # [D] REFERENCE §6: flat w (b = 0) gives g == 1
    k = np.linspace(-2, 2, 101)
    for w0 in (0.001, 0.04, 0.5):
        np.testing.assert_allclose(svi.g_function(SviParams.flat(w0), k), 1.0, atol=1e-15)
    free, min_g, _, intervals = svi.butterfly_check(SviParams.flat(0.04))
    assert free and min_g == pytest.approx(1.0) and intervals == []


@pytest.mark.parametrize("p", [VOGT, EQUITY, SviParams(0.001, 0.03, -0.3, 0.0, 0.05)])
def test_derivatives_against_finite_differences(p):
    # [D] REFERENCE §6: w' = b(rho + x/R), w'' = b sigma^2/R^3 checked against finite differences to 1e-8
    k = np.linspace(-1.2, 1.2, 49)
    h = 1e-5
    fd1 = (svi.total_variance(p, k + h) - svi.total_variance(p, k - h)) / (2 * h)
    fd2 = (svi.dw_dk(p, k + h) - svi.dw_dk(p, k - h)) / (2 * h)
    fd2w = (svi.total_variance(p, k + 1e-3) - 2 * svi.total_variance(p, k) + svi.total_variance(p, k - 1e-3)) / 1e-6
    np.testing.assert_allclose(svi.dw_dk(p, k), fd1, atol=1e-8)
    np.testing.assert_allclose(svi.d2w_dk2(p, k), fd2, rtol=1e-6, atol=1e-8)
    np.testing.assert_allclose(svi.d2w_dk2(p, k), fd2w, rtol=1e-3, atol=1e-6)  # second difference of w itself


@pytest.mark.parametrize("p", [VOGT, EQUITY])
def test_one_pass_derivatives_are_the_separate_ones(p):
    # [D] w_and_derivatives (local vol's one pass) gives total_variance, dw_dk and d2w_dk2 bit for bit,
    # for one slice and for stacked slices broadcast against a grid
    k = np.linspace(-1.2, 1.2, 49)
    for params, kk in ((p, k), (svi.SviSlices.stack([p, EQUITY]).take((slice(None), None)).params, k[None, :])):
        got = svi.w_and_derivatives(params, kk)
        for g, want in zip(got, (svi.total_variance(params, kk), svi.dw_dk(params, kk), svi.d2w_dk2(params, kk))):
            assert np.array_equal(g, want)


def test_g_from_generic_w_matches_svi_g():
    # [D] the generic g (used for any smile) equals the SVI one
    k = np.linspace(-1, 1, 21)
    p = EQUITY
    np.testing.assert_allclose(
        svi.g_from_w(k, svi.total_variance(p, k), svi.dw_dk(p, k), svi.d2w_dk2(p, k)), svi.g_function(p, k)
    )


def test_typical_equity_slice_is_arbitrage_free():
    # [D] a moderate skew: g stays positive everywhere on the grid
    free, min_g, _, intervals = svi.butterfly_check(EQUITY)
    assert free and min_g > 0 and intervals == []


@pytest.mark.parametrize(
    "p, words",
    [
        (SviParams(0.02, -0.1, 0.0, 0.0, 0.1), "b = "),  # G&J eq 3.1: b >= 0
        (SviParams(0.02, 0.1, 1.0, 0.0, 0.1), "|rho|"),  # |rho| < 1
        (SviParams(0.02, 0.1, 0.0, 0.0, 0.0), "sigma"),  # sigma > 0
        (SviParams(-0.05, 0.1, 0.0, 0.0, 0.1), "minimum total variance"),  # a + b sigma sqrt(1-rho^2) >= 0
        (SviParams(0.02, 1.5, 0.5, 0.0, 0.1), "Lee"),  # b(1+rho) = 2.25 > 2 (Lee 2004 [V])
        (SviParams(0.02, float("nan"), 0.0, 0.0, 0.1), "finite"),
    ],
)
def test_validity_problems_name_the_broken_condition(p, words):
    probs = svi.validity_problems(p)
    assert any(words in s for s in probs), probs
    assert not svi.is_valid(p)


def test_lee_bound_slice_never_called_arbitrage_free():
    # [V] Lee 2004 via G&J Lemma 2.2: wing slope 2 or more is arbitrage, even with g >= 0 on the grid
    p = SviParams(0.02, 1.6, 0.25, 0.0, 0.3)  # right slope 2.0
    free, _, _, _ = svi.butterfly_check(p)
    assert not free


def test_nonpositive_total_variance_is_reported_not_crashing():
    p = SviParams(-0.05, 0.1, 0.0, 0.0, 0.1)  # w < 0 near the vertex
    free, min_g, k_min, intervals = svi.butterfly_check(p)
    assert not free and np.isnan(min_g) and intervals
    assert np.isnan(svi.g_function(p, 0.0))
