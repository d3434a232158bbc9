"""The batched pipeline against a per-expiry composition of the one-expiry functions.

``annotate`` fits, aligns and evaluates all expiries together. Here each
expiry is redone on its own with the one-expiry reference functions
(pandas pivot + implied_forward, implied_vol, fit_smile, prob_above,
range_smile), the way the pipeline used to run, and the results must agree.

Sources (tags as in REFERENCE.md):
- [D] consistency with the one-expiry functions, which have their own outside
  checks (test_parity_forward.py, test_smile_fit.py, test_distribution.py).
- [L] chain prices from QuantLib's blackFormula (tests/core/chain_builders.py)
  on a skewed raw SVI smile per expiry, with quote noise and a few bad quotes.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from chaintriage.core import svi
from chaintriage.core.black76 import vega as bs_vega
from chaintriage.core.distribution import prob_above, range_smile
from chaintriage.core.implied_vol import implied_vol
from chaintriage.core.loading import load_file
from chaintriage.core.parity_forward import implied_forward
from chaintriage.core.time_to_expiry import year_fraction
from chaintriage.core.pipeline import PipelineSettings, annotate
from chaintriage.core.smile_fit import fit_smile, quote_weights
from chaintriage.core.snapshot import Snapshot
from chaintriage.core.svi import SviParams
from tests.core.chain_builders import build_snapshot, ql_black, year_fractions

DEMO_DIR = Path(__file__).resolve().parents[2] / "demo_chains"


def skewed_chain(seed: int = 5) -> Snapshot:
    """12 expiries priced with QuantLib from raw SVI smiles, then noisy quotes and a few bad ones (test data)."""
    rng = np.random.default_rng(seed)
    expiries = [f"{d:%Y-%m-%d}" for d in pd.bdate_range("2026-12-04", periods=400)[[0, 3, 8, 13, 23, 43, 63, 90,
                                                                                       130, 190, 260, 380]]]
    ts = year_fractions(expiries)
    fwd = 100.0 * np.exp(0.02 * ts)
    dfs = np.exp(-0.04 * ts)
    smiles = []
    strikes = []
    for i, t in enumerate(ts):
        sd = 0.25 * np.sqrt(t)
        smiles.append(SviParams(a=0.04 * t, b=0.5 * sd, rho=-0.5, m=0.1 * sd, sigma=0.7 * sd))
        n = 4 if i == 0 else 20 + 3 * i  # the first expiry has too few strikes for SVI
        strikes.append(np.round(fwd[i] * np.exp(np.linspace(-3.0 * sd, 2.5 * sd, n)), 2))

    def vol(i, k):
        return float(np.sqrt(svi.total_variance(smiles[i], np.log(k / fwd[i])) / ts[i]))

    snap = build_snapshot(expiries, strikes, lambda i, k: ql_black(fwd[i], k, vol(i, k), ts[i], dfs[i], True),
                          lambda i, k: ql_black(fwd[i], k, vol(i, k), ts[i], dfs[i], False),
                          spot=100.0, half_spread=0.02, rate=0.04)
    c = snap.contracts.copy()
    bump = 1.0 + 0.002 * rng.standard_normal(len(c)) + 0.2 * (rng.random(len(c)) < 0.02)
    c["bid"] *= bump
    c["ask"] *= bump
    return Snapshot(snap.underlying, snap.as_of, snap.spot, c, [], snap.sources)


def demo_snapshots():
    out = []
    for path in sorted(DEMO_DIR.glob("*.csv")):
        if path.name not in ("messy_export.csv", "demo_events.csv"):  # the events file is not a chain
            out.extend(load_file(path).snapshots)
    return out


CASES = [("skewed", skewed_chain(), PipelineSettings()),
         ("skewed-365", skewed_chain(9), PipelineSettings(basis="365", confidence=0.9))]
CASES += [(s.underlying, s, PipelineSettings()) for s in demo_snapshots()]


def _mids(bid, ask):
    return np.where(np.isfinite(ask) & (ask > 0), 0.5 * (np.where(np.isfinite(bid), bid, 0.0) + ask), np.nan)


@pytest.mark.parametrize("name, snap, settings", CASES, ids=[c[0] for c in CASES])
def test_batched_pipeline_equals_the_per_expiry_reference(name, snap, settings):
    ann = annotate(snap, settings)
    df = snap.contracts.sort_values(["expiry", "strike", "kind"], kind="stable").reset_index(drop=True)
    out = ann.contracts
    # same rows in the same order
    np.testing.assert_array_equal(out["strike"].to_numpy(), df["strike"].to_numpy())
    assert list(out["kind"]) == list(df["kind"]) and list(out["source_line"]) == list(df["source_line"])
    exp_tab = ann.expiries.set_index("expiry")
    checked_smiles = 0
    for expiry, sub in df.groupby("expiry", sort=True):
        res = ann.results[expiry]
        t = float(exp_tab.loc[expiry, "t_years"])
        rows = sub.index.to_numpy()
        # forward: the old pandas pivot and implied_forward, one expiry at a time
        calls = sub[sub["kind"] == "call"].set_index("strike")
        puts = sub[sub["kind"] == "put"].set_index("strike")
        ks = np.union1d(calls.index.to_numpy(float), puts.index.to_numpy(float))
        c, p = calls.reindex(ks), puts.reindex(ks)
        rate, div = sub["rate"].dropna(), sub["div_yield"].dropna()
        # parity works in calendar time (interest accrues on ACT/365), whatever the variance basis
        t_cal = float(year_fraction(snap.as_of, [expiry], sub["settle"].iloc[0], basis="365")[0])
        est = implied_forward(ks, c["bid"].to_numpy(float), c["ask"].to_numpy(float), p["bid"].to_numpy(float),
                              p["ask"].to_numpy(float), spot=snap.spot, t=max(t_cal, 1e-12),
                              rate=float(rate.iloc[0]) if len(rate) else None,
                              div_yield=float(div.iloc[0]) if len(div) else None)
        got = res.forward_estimate
        assert (got.method, got.reason, got.findings, got.strikes_used) == (est.method, est.reason, est.findings,
                                                                            est.strikes_used)
        assert got.forward == pytest.approx(est.forward, rel=1e-12)
        assert got.discount == pytest.approx(est.discount, rel=1e-12)
        # implied vols and the smile fit of this expiry alone
        strike = sub["strike"].to_numpy(float)
        is_call = (sub["kind"] == "call").to_numpy()
        bid, ask = sub["bid"].to_numpy(float), sub["ask"].to_numpy(float)
        mid = _mids(bid, ask)
        f, dfac = est.forward, est.discount
        iv = implied_vol(mid, np.full(len(sub), f), strike, np.full(len(sub), t), np.full(len(sub), dfac), is_call).sigma
        np.testing.assert_allclose(out["iv"].to_numpy()[rows], iv, rtol=1e-13, atol=0, equal_nan=True)
        if not t > 0:
            assert res.smile is None
            continue
        otm = np.where(is_call, strike >= f, strike < f) & np.isfinite(iv)
        k = np.log(strike[otm] / f)
        w = iv[otm] ** 2 * t
        vg = bs_vega(f, strike[otm], iv[otm], t, dfac)
        spread = ask[otm] - np.where(np.isfinite(bid[otm]), bid[otm], 0.0)
        ref = fit_smile(k, w, t=t, vega=vg, spread=spread)
        sm = res.smile
        assert (sm.method, sm.arbitrage_free, sm.penalised, sm.n_quotes, sm.left_out_k, sm.reason) == (
            ref.method, ref.arbitrage_free, ref.penalised, ref.n_quotes, ref.left_out_k, ref.reason)
        # the batched fit is at least as good (weighted cost on the quotes it rests on)
        wt = quote_weights(np.sqrt(w / t), t, vg, spread)
        keep = (wt > 0) & ~np.isin(k, ref.left_out_k)
        wt = wt[keep] / wt[keep].mean()
        cost = [float(np.sum(wt * (s.total_variance(k[keep]) - w[keep]) ** 2)) for s in (sm, ref)]
        assert cost[0] <= cost[1] * (1.0 + 1e-12)
        # per-contract smile probabilities and the smile range, to 1e-8
        p_above = prob_above(ref, f, strike)
        want = np.where(is_call, p_above, 1.0 - p_above)
        np.testing.assert_allclose(out["p_beyond"].to_numpy()[rows], want, atol=1e-8, rtol=0)
        lo, hi = range_smile(ref, f, settings.confidence)
        assert exp_tab.loc[expiry, "range_low_smile"] == pytest.approx(float(lo), rel=1e-8)
        assert exp_tab.loc[expiry, "range_high_smile"] == pytest.approx(float(hi), rel=1e-8)
        assert exp_tab.loc[expiry, "atm_iv"] == pytest.approx(ref.atm_vol(), rel=1e-8)
        checked_smiles += 1
    assert checked_smiles >= 5
