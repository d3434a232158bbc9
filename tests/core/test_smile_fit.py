"""Fitting raw SVI to one expiry, the arbitrage report and the fallback.

Sources (tags as in REFERENCE.md):
- [V] Gatheral & Jacquier (2014) Example 3.1 (Vogt slice): min g -0.032864 at
  k 0.8793, g < 0 on [0.6424, 1.2569] (REFERENCE §6).
- [V] Lee (2004) wing bound b(1 +/- rho) <= 2, as cited in G&J 2014.
- [D] derived: quotes generated from known SVI parameters must be recovered.
"""

import numpy as np
import pytest

from chaintriage.core import smile_fit, svi
from chaintriage.core.black76 import price, vega
from chaintriage.core.findings import NOTE, WARNING, ChainTriageError
from chaintriage.core.smile_fit import fit_smile, quote_weights
from chaintriage.core.svi import SviParams

VOGT = SviParams.from_gj_order(-0.0410, 0.1331, 0.3586, 0.3060, 0.4153)  # G&J Example 3.1 [V], T = 1

KNOWN = [
    # (params, t, k grid)  -- test data, each a valid slice inside Lee's bound
    (SviParams(a=0.02, b=0.1, rho=-0.6, m=0.05, sigma=0.15), 1.0, np.linspace(-0.6, 0.4, 40)),
    (SviParams(a=0.04, b=0.2, rho=-0.8, m=0.1, sigma=0.3), 2.0, np.linspace(-0.8, 0.5, 25)),
    (SviParams(a=0.001, b=0.03, rho=-0.3, m=0.0, sigma=0.05), 0.25, np.linspace(-0.3, 0.2, 30)),
    (SviParams(a=1.5e-4, b=0.004, rho=-0.4, m=0.002, sigma=0.01), 2.0 / 252, np.linspace(-0.05, 0.04, 20)),
    (SviParams(a=0.01, b=0.05, rho=0.2, m=-0.05, sigma=0.2), 0.5, np.linspace(-0.4, 0.4, 9)),
]


@pytest.mark.parametrize("p, t, k", KNOWN)
def test_noiseless_quotes_recover_the_parameters(p, t, k):
    # [D] quotes generated from known raw SVI parameters: exact total variance to 1e-8, parameters to 1e-5
    w = svi.total_variance(p, k)
    sm = fit_smile(k, w, None, t)
    assert sm.method == "svi"
    np.testing.assert_allclose(sm.total_variance(k), w, atol=1e-8, rtol=0)
    dense = np.linspace(k.min(), k.max(), 101)
    np.testing.assert_allclose(sm.total_variance(dense), svi.total_variance(p, dense), atol=1e-8, rtol=0)
    np.testing.assert_allclose(sm.params.as_tuple(), p.as_tuple(), atol=1e-5)
    assert sm.rmse_vol < 1e-7
    assert sm.arbitrage_free and sm.min_g > 0
    assert sm.n_quotes == k.size and sm.k_range == (k.min(), k.max())


def test_smile_methods_and_units():
    p, t, k = KNOWN[0]
    sm = fit_smile(k, svi.total_variance(p, k), None, t)
    kk = np.array([-0.3, 0.0, 0.2])
    np.testing.assert_allclose(sm.vol(kk), np.sqrt(svi.total_variance(p, kk) / t), atol=1e-8)  # annualised, decimal
    assert sm.atm_vol() == pytest.approx(float(np.sqrt(svi.total_variance(p, 0.0) / t)), abs=1e-8)
    np.testing.assert_allclose(sm.dw_dk(kk), svi.dw_dk(p, kk), atol=1e-7)
    np.testing.assert_allclose(sm.d2w_dk2(kk), svi.d2w_dk2(p, kk), atol=1e-6)
    np.testing.assert_allclose(sm.g(kk), svi.g_function(p, kk), atol=1e-6)
    assert sm.findings() == []


def test_rmse_is_in_decimal_vol():
    # [D] quotes with 0.5 vol point of noise give an RMSE near 0.005 (0.01 = 1 vol point)
    p, t, k = SviParams(a=0.02, b=0.1, rho=-0.6, m=0.05, sigma=0.15), 1.0, np.linspace(-0.6, 0.4, 200)
    rng = np.random.default_rng(7)
    iv = np.sqrt(svi.total_variance(p, k) / t) + 0.005 * rng.standard_normal(k.size)
    sm = fit_smile(k, iv * iv * t, None, t)
    assert sm.method == "svi"
    assert 0.004 < sm.rmse_vol < 0.006
    assert sm.max_err_vol >= sm.rmse_vol
    assert "vol points" in sm.notes[0]


def test_fitted_slices_respect_validity_and_lee_bound():
    # [V] G&J eq. 3.1 conditions and Lee's bound hold for every fit, even for data asking for steeper wings
    k = np.linspace(-1.0, 1.0, 21)
    steep = 0.05 + 2.6 * np.abs(k)  # wing slope 2.6 > 2 in total variance
    sm = fit_smile(k, steep, None, 1.0)
    assert sm.method == "svi"
    assert svi.is_valid(sm.params)
    assert max(svi.wing_slopes(sm.params)) <= 2.0


# ---------------------------------------------------------------------------
# weights and a wild quote


def chain(p, forward, t, strikes):
    k = np.log(strikes / forward)
    iv = np.sqrt(svi.total_variance(p, k) / t)
    is_call = strikes >= forward  # out of the money side
    prices = price(forward, strikes, iv, t, 1.0, is_call)
    return k, iv, prices, vega(forward, strikes, iv, t)


def test_quote_weights_follow_the_vol_uncertainty():
    # [D] weight = 1/(iv^2 t dvol^2), dvol = spread/2/vega floored at 0.1 vol point
    iv = np.array([0.2, 0.2, 0.2, 0.4])
    vg = np.array([10.0, 10.0, 10.0, 10.0])
    spread = np.array([0.4, 0.8, 0.0, 0.4])  # dvol 0.02, 0.04, floor 0.001, 0.02
    wt = quote_weights(iv, 0.5, vg, spread)
    assert wt.mean() == pytest.approx(1.0)
    assert wt[0] / wt[1] == pytest.approx(4.0)
    assert wt[2] / wt[0] == pytest.approx((0.02 / 0.001) ** 2)
    assert wt[0] / wt[3] == pytest.approx(4.0)
    bad = quote_weights(np.array([0.2, 0.2, np.nan]), 0.5, np.array([0.0, 10.0, 10.0]), np.array([0.1, -1.0, 0.1]))
    assert np.all(bad == 0.0)
    plain = quote_weights(iv, 0.5)  # without vega/spread: 1/iv^2, equal weight in vol terms
    assert plain[0] / plain[3] == pytest.approx(4.0) and plain.mean() == pytest.approx(1.0)


def test_one_wild_quote_with_a_wide_spread_does_not_move_the_fit():
    # [D] a quote 10 vol points off, with a spread 20x wider than its neighbours, barely moves the fit
    p, f, t = SviParams(a=0.004, b=0.04, rho=-0.7, m=0.02, sigma=0.08), 100.0, 0.25
    strikes = np.arange(70.0, 126.0, 2.5)
    k, iv, prices, vg = chain(p, f, t, strikes)
    spread = np.maximum(0.02, 0.05 * prices)
    bad = 8
    iv = iv.copy()
    iv[bad] += 0.10
    spread[bad] *= 20.0
    sm = fit_smile(k, iv * iv * t, t=t, vega=vg, spread=spread, outlier_check=False)
    keep = np.arange(k.size) != bad
    assert sm.method == "svi"
    assert np.max(np.abs(sm.vol(k[keep]) - np.sqrt(svi.total_variance(p, k[keep]) / t))) < 2e-3
    # the same quote at an ordinary spread pulls a plain fit much further (the weights did the work)
    spread2 = np.maximum(0.02, 0.05 * prices)
    plain = fit_smile(k, iv * iv * t, t=t, vega=vg, spread=spread2, outlier_check=False)
    assert np.max(np.abs(plain.vol(k[keep]) - np.sqrt(svi.total_variance(p, k[keep]) / t))) > 5e-3


def test_wild_quote_is_left_out_and_named_in_the_notes():
    # [D] with the outlier pass, the wild quote is left out (with a note) and the rest is fitted exactly
    p, f, t = SviParams(a=0.004, b=0.04, rho=-0.7, m=0.02, sigma=0.08), 100.0, 0.25
    strikes = np.arange(70.0, 126.0, 2.5)
    k, iv, _, _ = chain(p, f, t, strikes)
    iv = iv.copy()
    iv[8] += 0.10
    sm = fit_smile(k, iv * iv * t, None, t)
    assert sm.left_out_k == (pytest.approx(k[8]),)
    assert any("left out of the fit" in s for s in sm.notes)
    assert sm.n_quotes == k.size - 1
    keep = np.arange(k.size) != 8
    np.testing.assert_allclose(sm.total_variance(k[keep]), svi.total_variance(p, k[keep]), atol=1e-8)
    assert any(fd.severity == NOTE for fd in sm.findings())


# ---------------------------------------------------------------------------
# arbitrage report


def test_fit_of_a_smile_with_negative_g_reports_it():
    # [V] quotes from the Vogt slice: the plain fit reproduces it, so the check finds G&J's numbers
    k = np.linspace(-1.5, 1.5, 40)
    sm = fit_smile(k, svi.total_variance(VOGT, k), None, 1.0, arbitrage_refit=False)
    assert sm.method == "svi"
    assert sm.arbitrage_free is False
    assert sm.min_g == pytest.approx(-0.032864, abs=1e-6)
    assert sm.k_at_min_g == pytest.approx(0.8793, abs=5e-5)
    assert len(sm.negative_intervals) == 1
    assert sm.negative_intervals[0] == pytest.approx((0.6424, 1.2569), abs=5e-5)
    assert any("butterfly arbitrage" in s for s in sm.notes)
    warnings = [fd for fd in sm.findings(underlying="QRTZ", expiry="2027-01-15") if fd.severity == WARNING]
    assert len(warnings) == 1 and "0.6424" in warnings[0].reason and warnings[0].expiry == "2027-01-15"


def test_penalised_refit_removes_arbitrage_and_says_so():
    # [V] same Vogt quotes; the penalised re-fit is arbitrage-free and kept, the notes report the plain fit's g
    k = np.linspace(-1.5, 1.5, 40)
    w = svi.total_variance(VOGT, k)
    sm = fit_smile(k, w, None, 1.0)
    assert sm.penalised and sm.arbitrage_free and sm.min_g >= 0
    assert sm.min_g_plain == pytest.approx(-0.032864, abs=1e-6)
    assert any("penalty" in s and "kept" in s for s in sm.notes)
    free, min_g, _, _ = svi.butterfly_check(sm.params, np.linspace(*sm.check_range, 4001))
    assert free and min_g >= 0
    assert 0 < sm.rmse_vol < 0.02  # the price of removing it, under 2 vol points
    found = sm.findings()
    assert [fd.severity for fd in found] == [NOTE] and "penalty" in found[0].reason


# ---------------------------------------------------------------------------
# fallback


def test_three_quotes_fall_back_to_flat_at_the_money_level():
    # [D] fewer than 5 quotes: flat total variance interpolated at k = 0
    k = np.array([-0.1, 0.05, 0.2])
    w = np.array([0.05, 0.04, 0.045])
    sm = fit_smile(k, w, None, 0.5)
    assert sm.method == "flat"
    assert "3" in sm.reason and "fewer than 5" in sm.reason
    w0 = 0.05 + (0.04 - 0.05) * (0.1 / 0.15)
    np.testing.assert_allclose(sm.total_variance([-1.0, 0.0, 1.0]), w0, atol=1e-15)
    assert sm.atm_vol() == pytest.approx(np.sqrt(w0 / 0.5))
    np.testing.assert_allclose(sm.dw_dk([-1.0, 1.0]), 0.0)
    assert sm.arbitrage_free and sm.min_g == 1.0
    assert sm.rmse_vol > 0 and any("Flat smile" in s for s in sm.notes)
    assert any(fd.severity == NOTE and "fallback" in fd.reason for fd in sm.findings())


def test_quotes_all_on_one_side_use_the_nearest_for_the_flat_level():
    sm = fit_smile(np.array([0.1, 0.2]), np.array([0.03, 0.04]), None, 0.5)
    assert sm.method == "flat" and float(sm.total_variance(0.0)) == 0.03
    assert any("nearest" in s for s in sm.notes)


def test_optimiser_failure_falls_back(monkeypatch):
    p, t, k = KNOWN[0]

    def boom(*args, **kwargs):
        raise FloatingPointError("no convergence")

    monkeypatch.setattr(smile_fit, "_polish", boom)
    sm = fit_smile(k, svi.total_variance(p, k), None, t)
    assert sm.method == "flat" and "optimiser failed" in sm.reason


def test_wild_fit_falls_back(monkeypatch):
    # a fit whose vol leaves [0.5x, 2x] the quoted vols inside the quoted range is not used
    p, t, k = KNOWN[0]
    monkeypatch.setattr(smile_fit, "_polish", lambda *a, **kw: SviParams(a=0.5, b=0.1, rho=0.0, m=0.0, sigma=0.1))
    sm = fit_smile(k, svi.total_variance(p, k), None, t)
    assert sm.method == "flat" and "leaves" in sm.reason


def test_bad_quotes_are_left_out_with_a_note():
    p, t, k = KNOWN[0]
    w = svi.total_variance(p, k).copy()
    w[3] = np.nan
    w[5] = -0.01
    kk = k.copy()
    kk[7] = np.inf
    sm = fit_smile(kk, w, None, t)
    assert sm.method == "svi" and sm.n_quotes == k.size - 3
    assert any("3 of 40 quote(s) left out" in s for s in sm.notes)


@pytest.mark.parametrize(
    "args",
    [
        (np.array([0.0]), np.array([np.nan]), None, 1.0),  # nothing usable
        (np.array([0.0, 0.1]), np.array([0.04, 0.04]), None, 0.0),  # t not positive
        (np.array([0.0, 0.1]), np.array([0.04, 0.04]), None, None),  # t missing
        (np.array([0.0, 0.1]), np.array([0.04, 0.04]), None, "soon"),  # t not a number
        (np.array([0.0, 0.1]), np.array([0.04]), None, 1.0),  # lengths differ
    ],
)
def test_unusable_input_raises_the_projects_error(args):
    with pytest.raises(ChainTriageError):
        fit_smile(*args)


def test_penalised_refit_that_costs_too_much_is_not_kept(monkeypatch):
    # [V] Vogt quotes again, with no RMSE cost allowed for the re-fit: the plain fit stays, reported as arbitrage
    monkeypatch.setattr(smile_fit, "ARBITRAGE_REFIT_MAX_COST", 0.0)
    k = np.linspace(-1.5, 1.5, 40)
    sm = fit_smile(k, svi.total_variance(VOGT, k), None, 1.0)
    assert not sm.penalised and sm.arbitrage_free is False
    assert sm.min_g == pytest.approx(-0.032864, abs=1e-6)
    assert any("plain fit is kept" in s for s in sm.notes)
