"""The batched SVI fit (core/smile_batch.py) against the single-expiry fit.

Sources (tags as in REFERENCE.md):
- [D] the reference is ``smile_fit.fit_smile`` itself (tested on its own
  against G&J 2014 and known slices in test_smile_fit.py): the batched fit
  must give each expiry the same kind of result (method, arbitrage flags,
  quotes used and left out, notes) and a weighted cost at least as low.
- [V] Gatheral & Jacquier (2014) Example 3.1 (Vogt slice, REFERENCE §6): a
  slice with butterfly arbitrage, handed to the single fit's penalised re-fit.
- [D] quotes generated from known raw SVI parameters must be recovered.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import least_squares

from chaintriage.core import smile_fit, svi
from chaintriage.core.black76 import price, vega
from chaintriage.core.findings import ChainTriageError
from chaintriage.core.smile_batch import MAX_ITER, fit_smiles, grid_start_batch, polish_batch
from chaintriage.core.smile_fit import fit_smile, quote_weights
from chaintriage.core.svi import SviParams

VOGT = SviParams.from_gj_order(-0.0410, 0.1331, 0.3586, 0.3060, 0.4153)  # G&J Example 3.1 [V], T = 1

KNOWN = [  # the noiseless slices of test_smile_fit.py [D]
    (SviParams(a=0.02, b=0.1, rho=-0.6, m=0.05, sigma=0.15), 1.0, np.linspace(-0.6, 0.4, 40)),
    (SviParams(a=0.04, b=0.2, rho=-0.8, m=0.1, sigma=0.3), 2.0, np.linspace(-0.8, 0.5, 25)),
    (SviParams(a=0.001, b=0.03, rho=-0.3, m=0.0, sigma=0.05), 0.25, np.linspace(-0.3, 0.2, 30)),
    (SviParams(a=1.5e-4, b=0.004, rho=-0.4, m=0.002, sigma=0.01), 2.0 / 252, np.linspace(-0.05, 0.04, 20)),
    (SviParams(a=0.01, b=0.05, rho=0.2, m=-0.05, sigma=0.2), 0.5, np.linspace(-0.4, 0.4, 9)),
]


def random_slice(rng, n_max=90):
    """One expiry of out-of-the-money quotes from a random valid SVI slice with quote noise (test data).

    Returns (k, total variance, t, vega, spread). Some slices get a few wild
    quotes, a missing vol, or fewer than five quotes.
    """
    t = rng.uniform(0.01, 2.5)
    atm = rng.uniform(0.12, 0.6)
    sd = atm * np.sqrt(t)
    rho, m, sig, b = rng.uniform(-0.85, 0.4), rng.normal(0.0, 0.3) * sd, rng.uniform(0.1, 1.5) * sd, rng.uniform(0.1, 0.7) * sd
    a = atm * atm * t - b * (rho * -m + np.sqrt(m * m + sig * sig))
    a = max(a, -b * sig * np.sqrt(1.0 - rho * rho) + 0.1 * atm * atm * t)
    p = SviParams(a, b, rho, m, sig)
    n = int(rng.integers(3, 5)) if rng.random() < 0.1 else int(rng.integers(5, n_max))
    k = np.sort(rng.uniform(-3.5 * sd, 2.5 * sd, n))
    iv = np.sqrt(svi.total_variance(p, k) / t) + rng.uniform(0.0, 0.006) * rng.standard_normal(n)
    if rng.random() < 0.3:
        j = rng.integers(0, n, size=max(1, n // 15))
        iv[j] += rng.choice([-1.0, 1.0], j.size) * rng.uniform(0.03, 0.15, j.size)
    iv = np.abs(iv) + 0.01
    if rng.random() < 0.1:
        iv[rng.integers(0, n)] = np.nan
    strikes = 100.0 * np.exp(k)
    prices = price(100.0, strikes, iv, t, 1.0, strikes >= 100.0)
    spread = np.maximum(0.01, 0.05 * prices)
    return k, iv * iv * t, t, vega(100.0, strikes, iv, t, 1.0), spread


def stack(slices):
    k, w, t, vg, sp = zip(*slices)
    group = np.concatenate([np.full(x.size, i) for i, x in enumerate(k)])
    return np.concatenate(k), np.concatenate(w), np.array(t), group, np.concatenate(vg), np.concatenate(sp)


def weighted_cost(p: SviParams, k, w, t, vg, sp, left_out=()):
    """sum wt (w_svi - w)^2 on the quotes the fit rests on, weights as fit_smile builds them."""
    wt = quote_weights(np.sqrt(np.where(w > 0, w, np.nan) / t), t, vg, sp)
    keep = (wt > 0) & np.isfinite(k) & (w > 0) & ~np.isin(k, left_out)
    wt = wt[keep] / wt[keep].mean()
    return float(np.sum(wt * (svi.total_variance(p, k[keep]) - w[keep]) ** 2))


@pytest.fixture(scope="module")
def random_batch():
    rng = np.random.default_rng(20240611)
    slices = [random_slice(rng) for _ in range(60)]
    k, w, t, group, vg, sp = stack(slices)
    batched = fit_smiles(k, w, t, group, vega=vg, spread=sp)
    reference = []
    for kk, ww, tt, vv, ss in slices:
        try:
            reference.append(fit_smile(kk, ww, t=tt, vega=vv, spread=ss))
        except ChainTriageError as exc:
            reference.append(exc)
    return slices, batched, reference


def test_batched_fit_gives_each_expiry_the_same_kind_of_result(random_batch):
    # [D] same branch of the method for every expiry: method, flags, quotes used and left out, notes
    slices, batched, reference = random_batch
    assert len(batched) == len(reference) == len(slices)
    methods, left_out, penalised = set(), 0, 0
    for got, ref in zip(batched, reference):
        if isinstance(ref, ChainTriageError):
            assert isinstance(got, ChainTriageError) and str(got) == str(ref)
            continue
        methods.add(ref.method)
        left_out += bool(ref.left_out_k)
        penalised += ref.penalised
        assert (got.method, got.arbitrage_free, got.penalised, got.n_quotes) == (
            ref.method, ref.arbitrage_free, ref.penalised, ref.n_quotes)
        assert got.left_out_k == ref.left_out_k and got.reason == ref.reason
        assert len(got.notes) == len(ref.notes)
        assert got.t == ref.t and got.k_range == ref.k_range
        assert [fd.severity for fd in got.findings()] == [fd.severity for fd in ref.findings()]
    assert methods == {"svi", "flat"} and left_out and penalised  # the branches were exercised


def test_batched_fit_cost_is_never_worse(random_batch):
    # [D] weighted least-squares cost of the batched fit <= the single fit's, to a relative 1e-12
    slices, batched, reference = random_batch
    compared = 0
    for (k, w, t, vg, sp), got, ref in zip(slices, batched, reference):
        if isinstance(ref, ChainTriageError) or ref.method != "svi":
            continue
        c_got = weighted_cost(got.params, k, w, t, vg, sp, ref.left_out_k)
        c_ref = weighted_cost(ref.params, k, w, t, vg, sp, ref.left_out_k)
        assert c_got <= c_ref * (1.0 + 1e-12), (c_got, c_ref)
        # same fit: the fitted vols at the quotes agree to well under a hundredth of a vol point
        np.testing.assert_allclose(got.vol(k), ref.vol(k), atol=1e-5, rtol=0)
        assert got.rmse_vol == pytest.approx(ref.rmse_vol, rel=1e-6, abs=1e-12)
        compared += 1
    assert compared >= 30


def test_batched_fit_arbitrage_checks_match_the_single_fit(random_batch):
    # [D] min g, where it is, and the checked k range come from the same butterfly check
    _, batched, reference = random_batch
    for got, ref in zip(batched, reference):
        if isinstance(ref, ChainTriageError) or ref.method != "svi":
            continue
        assert got.check_range == pytest.approx(ref.check_range, abs=1e-7)
        assert got.min_g == pytest.approx(ref.min_g, rel=1e-5, abs=1e-9)
        assert got.negative_intervals == ref.negative_intervals


@pytest.mark.parametrize("p, t, k", KNOWN)
def test_noiseless_quotes_recover_the_parameters(p, t, k):
    # [D] quotes from known raw SVI parameters, fitted together with the other known slices
    ks, ws, ts = zip(*[(kk, svi.total_variance(pp, kk), tt) for pp, tt, kk in KNOWN])
    group = np.concatenate([np.full(x.size, i) for i, x in enumerate(ks)])
    fits = fit_smiles(np.concatenate(ks), np.concatenate(ws), np.array(ts), group)
    sm = fits[[i for i, (pp, _, _) in enumerate(KNOWN) if pp is p][0]]
    assert sm.method == "svi" and sm.arbitrage_free and sm.min_g > 0
    np.testing.assert_allclose(sm.total_variance(k), svi.total_variance(p, k), atol=1e-8, rtol=0)
    np.testing.assert_allclose(sm.params.as_tuple(), p.as_tuple(), atol=1e-5)
    assert sm.rmse_vol < 1e-7


def test_rare_branches_are_exactly_the_single_fit():
    # [V] Vogt slice (butterfly arbitrage -> penalised re-fit) and [D] fewer than 5 quotes,
    # no usable quote, and a non-positive time, next to an ordinary slice
    k_v = np.linspace(-1.5, 1.5, 40)
    p0, t0, k0 = KNOWN[0]
    inputs = [
        (k_v, svi.total_variance(VOGT, k_v), 1.0),
        (np.array([-0.1, 0.05, 0.2]), np.array([0.05, 0.04, 0.045]), 0.5),
        (np.array([-0.1, 0.1]), np.array([np.nan, -1.0]), 0.5),
        (k0, svi.total_variance(p0, k0), 0.0),
        (k0, svi.total_variance(p0, k0), t0),
    ]
    k = np.concatenate([x[0] for x in inputs])
    w = np.concatenate([x[1] for x in inputs])
    group = np.concatenate([np.full(x[0].size, i) for i, x in enumerate(inputs)])
    got = fit_smiles(k, w, np.array([x[2] for x in inputs]), group)
    vogt = fit_smile(k_v, svi.total_variance(VOGT, k_v), None, 1.0)
    assert got[0].penalised and got[0].params == vogt.params and got[0].notes == vogt.notes
    assert got[1].method == "flat" and got[1] == fit_smile(*inputs[1][:2], None, 0.5)
    for i in (2, 3):
        assert isinstance(got[i], ChainTriageError)
        with pytest.raises(ChainTriageError) as exc:
            fit_smile(*inputs[i][:2], None, inputs[i][2])
        assert str(got[i]) == str(exc.value)
    assert got[4].method == "svi" and got[4].arbitrage_free


def test_wild_quote_is_left_out_as_the_single_fit_does():
    # [D] one quote 8 vol points off a known slice: left out, named in the notes, same re-fit
    p, t = SviParams(a=0.02, b=0.1, rho=-0.6, m=0.05, sigma=0.15), 1.0
    k = np.linspace(-0.6, 0.4, 41)
    iv = np.sqrt(svi.total_variance(p, k) / t)
    iv[12] += 0.08
    w = iv * iv * t
    k2 = np.linspace(-0.5, 0.3, 30)
    w2 = svi.total_variance(p, k2)
    got = fit_smiles(np.concatenate([k, k2]), np.concatenate([w, w2]), np.array([t, t]),
                     np.repeat([0, 1], [k.size, k2.size]))
    ref = fit_smile(k, w, None, t)
    assert got[0].left_out_k == ref.left_out_k == (float(k[12]),)
    assert got[0].notes[1] == ref.notes[1] and "left out" in got[0].notes[1]
    np.testing.assert_allclose(got[0].total_variance(k), ref.total_variance(k), atol=1e-9)
    assert not got[1].left_out_k


def test_grid_start_picks_the_single_fit_candidate():
    # [D] the quasi-explicit start of every expiry: the same (m, sigma) candidate as smile_fit._grid_start
    rng = np.random.default_rng(7)
    slices = [random_slice(rng) for _ in range(40)]
    prepared = []
    for k, w, t, vg, sp in slices:
        wt = quote_weights(np.sqrt(np.where(w > 0, w, np.nan) / t), t, vg, sp)
        ok = (wt > 0) & (w > 0)
        if ok.sum() >= 5:
            prepared.append((k[ok], w[ok], wt[ok] / wt[ok].mean()))
    k, w, wt = (np.concatenate(x) for x in zip(*prepared))
    starts = np.concatenate([[0], np.cumsum([x[0].size for x in prepared])[:-1]])
    got = grid_start_batch(k, w, wt, starts)
    for row, (kk, ww, wtt) in zip(got, prepared):
        ref = smile_fit._grid_start(kk, ww, wtt)
        assert row[3] == ref.m and row[4] == ref.sigma  # the same grid point, exactly
        np.testing.assert_allclose(row[:3], [ref.a, ref.b, ref.rho], rtol=1e-6, atol=1e-12)


def _minpack_cost(k, w, wt, start: SviParams) -> float:
    """Cost after smile_fit's own scipy Levenberg-Marquardt polish (the reference optimiser)."""
    p = smile_fit._polish(k, w, wt, start)
    return float(np.sum(wt * (svi.total_variance(p, k) - w) ** 2))


def test_polish_reaches_the_single_fit_cost_from_the_same_start():
    # [D] batched Levenberg-Marquardt vs scipy's MINPACK from the same start: cost never higher
    rng = np.random.default_rng(11)
    prepared = []
    while len(prepared) < 40:
        k, w, t, vg, sp = random_slice(rng)
        wt = quote_weights(np.sqrt(np.where(w > 0, w, np.nan) / t), t, vg, sp)
        ok = (wt > 0) & (w > 0)
        if ok.sum() >= 5:
            prepared.append((k[ok], w[ok], wt[ok] / wt[ok].mean()))
    k, w, wt = (np.concatenate(x) for x in zip(*prepared))
    starts = np.concatenate([[0], np.cumsum([x[0].size for x in prepared])[:-1]])
    start = grid_start_batch(k, w, wt, starts)
    got, converged = polish_batch(k, w, wt, starts, start, max_iter=MAX_ITER)
    assert converged.sum() >= 30  # the rest are handed to fit_smile by fit_smiles
    for row, ok, s0, (kk, ww, wtt) in zip(got, converged, start, prepared):
        if not ok:
            continue
        p = SviParams(*row)
        assert svi.is_valid(p)  # inside the box: a valid slice within Lee's bound
        cost = float(np.sum(wtt * (svi.total_variance(p, kk) - ww) ** 2))
        assert cost <= _minpack_cost(kk, ww, wtt, SviParams(*s0)) * (1.0 + 1e-12)


def test_polish_stops_at_a_stationary_point():
    # [D] at the batched optimum a further scipy polish with tight tolerances moves the cost by < 1e-13
    p, t, k = KNOWN[1]
    rng = np.random.default_rng(3)
    w = svi.total_variance(p, k) * (1.0 + 0.01 * rng.standard_normal(k.size))
    wt = np.ones_like(k)
    start = grid_start_batch(k, w, wt, np.array([0]))
    got, converged = polish_batch(k, w, wt, np.array([0]), start)
    assert converged[0]
    lo, hi = smile_fit._bounds(k, w)
    x0 = smile_fit._from_params(SviParams(*got[0]))
    u0 = np.log((x0 - lo) / (hi - x0))

    def res(u):
        return smile_fit._model_and_jac(lo + (hi - lo) / (1.0 + np.exp(-u)), k)[0] - w

    more = least_squares(res, u0, method="lm", ftol=1e-15, xtol=1e-15, gtol=1e-15)
    assert 2.0 * more.cost == pytest.approx(float(np.sum(res(u0) ** 2)), rel=1e-13)


def test_given_weights_and_switches_are_passed_through():
    # [D] explicit weights, no outlier pass, no arbitrage re-fit: still the single fit's kind of result
    rng = np.random.default_rng(5)
    slices = [random_slice(rng) for _ in range(12)]
    k_v = np.linspace(-1.5, 1.5, 40)
    slices.append((k_v, svi.total_variance(VOGT, k_v), 1.0, None, None))
    k = np.concatenate([s[0] for s in slices])
    w = np.concatenate([s[1] for s in slices])
    t = np.array([s[2] for s in slices])
    group = np.concatenate([np.full(s[0].size, i) for i, s in enumerate(slices)])
    weights = np.where(w > 0, 1.0 / np.where(w > 0, w, 1.0), 0.0)  # equal weight per relative w error
    got = fit_smiles(k, w, t, group, weights=weights, outlier_check=False, arbitrage_refit=False)
    for i, (kk, ww, tt, _, _) in enumerate(slices):
        s = group == i
        try:
            ref = fit_smile(kk, ww, weights[s], tt, outlier_check=False, arbitrage_refit=False)
        except ChainTriageError as exc:
            assert isinstance(got[i], ChainTriageError) and str(got[i]) == str(exc)
            continue
        assert (got[i].method, got[i].arbitrage_free, got[i].penalised, got[i].left_out_k) == (
            ref.method, ref.arbitrage_free, ref.penalised, ref.left_out_k)
        ok = np.isfinite(kk) & (ww > 0)
        wt = weights[s][ok] / weights[s][ok].mean()
        cost = [float(np.sum(wt * (sm.total_variance(kk[ok]) - ww[ok]) ** 2)) for sm in (got[i], ref)]
        assert cost[0] <= cost[1] * (1.0 + 1e-12)
    assert got[-1].arbitrage_free is False and not got[-1].penalised  # Vogt slice kept as fitted [V]
    assert got[-1].min_g == pytest.approx(-0.032864, abs=1e-6)


def test_repeated_strikes_stay_on_the_batched_path(monkeypatch):
    """A big expiry that lists some strikes twice (k non-decreasing, not increasing) is fitted by the
    batched polish, not handed to the single-expiry fit, and lands on the same smile as that fit [D]."""
    from chaintriage.core import smile_batch

    p = SviParams(a=0.01, b=0.1, rho=-0.4, m=0.02, sigma=0.15)
    k = np.round(np.linspace(-0.4, 0.3, 3000), 3)  # rounding repeats many k
    assert np.any(np.diff(k) == 0)
    w = svi.total_variance(p, k)
    ref = fit_smile(k, w, None, 0.5)

    def refuse(*args, **kwargs):
        raise AssertionError("handed to fit_smile")

    monkeypatch.setattr(smile_batch, "fit_smile", refuse)
    got = smile_batch.fit_smiles(k, w, np.array([0.5]), np.zeros(k.size, dtype=np.int64))[0]
    assert got.method == "svi" and got.arbitrage_free
    kk = np.linspace(-0.4, 0.3, 50)
    np.testing.assert_allclose(got.total_variance(kk), ref.total_variance(kk), rtol=1e-8)
