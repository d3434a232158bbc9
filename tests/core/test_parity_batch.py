"""Forwards of many expiries at once (parity_forward.implied_forwards) against the one-expiry function.

Sources (tags as in REFERENCE.md):
- [D] the reference is ``implied_forward`` itself (checked against REFERENCE §7
  and Hull in test_parity_forward.py): every expiry must get the same method,
  reason, findings and strikes, and the same forward and discount factor.
- [L] quotes priced with QuantLib's blackFormula, so the model forward is known.
"""

from __future__ import annotations

import numpy as np
import pytest
import QuantLib as ql

from chaintriage.core.findings import ChainTriageError
from chaintriage.core.parity_forward import implied_forward, implied_forwards


def _ql_prices(f, df, strikes, sigma, t):
    """Discounted Black-76 call and put prices from QuantLib [L]."""
    sd = sigma * np.sqrt(t)
    c = np.array([ql.blackFormula(ql.Option.Call, float(k), f, sd, df) for k in strikes])
    p = np.array([ql.blackFormula(ql.Option.Put, float(k), f, sd, df) for k in strikes])
    return c, p


def random_chain(rng, n_exp=40, spot=100.0):
    """Expiries with clean, noisy, one-sided, single-strike and unquoted cases (test data)."""
    rows = []
    t = rng.uniform(0.005, 2.0, n_exp)
    rate = np.where(rng.random(n_exp) < 0.5, 0.03, np.nan)
    div = np.where(rng.random(n_exp) < 0.3, 0.01, np.nan)
    for e in range(n_exp):
        case = rng.random()
        n = 1 if case < 0.08 else int(rng.integers(2, 30))
        strikes = np.sort(rng.choice(np.arange(60.0, 140.0, 2.5), n, replace=False))
        f = spot * np.exp(rng.uniform(-0.02, 0.05) * t[e])
        df = np.exp(-rng.uniform(0.0, 0.06) * t[e])
        if case > 0.95:
            df = 0.3  # implausible discount factor in the quotes
        c, p = _ql_prices(f, df, strikes, 0.25, t[e])
        h = 0.01 + 0.02 * rng.random(n)
        cb, ca, pb, pa = c - h, c + h, p - h, p + h
        if 0.08 <= case < 0.4:  # a few inconsistent quotes
            bad = rng.random(n) < 0.2
            cb = np.where(bad, cb + rng.normal(0.0, 2.0, n), cb)
            ca = np.where(bad, ca + 2.0, ca)
        if 0.4 <= case < 0.5:  # missing put bids
            pb = np.where(rng.random(n) < 0.5, np.nan, pb)
        if 0.5 <= case < 0.55:  # nothing quoted on both sides
            pb = np.full(n, np.nan)
        rows.append((np.full(n, e), strikes, cb, ca, pb, pa))
    cols = [np.concatenate(x) for x in zip(*rows)]
    return cols, t, rate, div


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_batched_forwards_equal_the_one_expiry_function(seed):
    # [D] same estimate per expiry, forward and DF to 1e-12 relative
    rng = np.random.default_rng(seed)
    (group, k, cb, ca, pb, pa), t, rate, div = random_chain(rng)
    got = implied_forwards(group, k, cb, ca, pb, pa, spot=100.0, t=t, rate=rate, div_yield=div)
    methods, set_aside = set(), 0
    for e, est in enumerate(got):
        s = group == e
        ref = implied_forward(k[s], cb[s], ca[s], pb[s], pa[s], spot=100.0, t=t[e], rate=rate[e], div_yield=div[e])
        methods.add(ref.method)
        set_aside += ref.strikes_set_aside > 0
        assert (est.method, est.reason, est.findings, est.strikes_used, est.strikes_set_aside) == (
            ref.method, ref.reason, ref.findings, ref.strikes_used, ref.strikes_set_aside)
        for name in ("forward", "discount", "rate_implied"):
            assert getattr(est, name) == pytest.approx(getattr(ref, name), rel=1e-12, abs=1e-15)
        if np.isnan(ref.residual_rms):
            assert np.isnan(est.residual_rms)
        else:
            assert est.residual_rms == pytest.approx(ref.residual_rms, rel=1e-9, abs=1e-12)
    # every path was exercised ('parity-rate' too, on seeds whose noise hides the given rate)
    assert {"parity", "parity-single", "rates", "spot"} <= methods <= {
        "parity", "parity-rate", "parity-single", "rates", "spot"} and set_aside


def test_clean_chain_recovers_the_model_forward():
    # [L] QuantLib prices with symmetric quotes: the parity forward and DF are the model's
    t = np.array([0.25, 0.5, 1.0])
    fwd = 100.0 * np.exp(0.02 * t)
    dfs = np.exp(-0.04 * t)
    parts = []
    for e in range(3):
        strikes = np.arange(80.0, 121.0, 5.0)
        c, p = _ql_prices(fwd[e], dfs[e], strikes, 0.2, t[e])
        parts.append((np.full(strikes.size, e), strikes, c - 0.02, c + 0.02, p - 0.02, p + 0.02))
    group, k, cb, ca, pb, pa = (np.concatenate(x) for x in zip(*parts))
    got = implied_forwards(group, k, cb, ca, pb, pa, spot=100.0, t=t)
    for e, est in enumerate(got):
        assert est.method == "parity" and est.reason == "" and est.findings == ()
        assert est.forward == pytest.approx(fwd[e], rel=1e-10)
        assert est.discount == pytest.approx(dfs[e], rel=1e-10)
        assert est.strikes_used == 8


def test_rows_must_be_grouped_by_expiry():
    with pytest.raises(ChainTriageError):
        implied_forwards(np.array([1, 0]), np.array([100.0, 100.0]), *([np.ones(2)] * 4), spot=100.0,
                         t=np.array([0.5, 0.5]))
