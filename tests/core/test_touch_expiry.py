"""One expiry's touch figures (core/touch_expiry.py): the one-vol fallback where no local vol is built."""

from __future__ import annotations

import numpy as np
import pandas as pd

from chaintriage.core.pipeline import PipelineSettings, annotate
from chaintriage.core.touch import prob_touch_smile
from tests.core.chain_builders import build_snapshot, ql_black, year_fractions


def test_flat_fallback_smile_uses_the_one_vol_touch_with_a_finding():
    """An expiry with 3 strikes gets the flat fallback smile: its touch is the one-vol reflection formula
    (REFERENCE.md s.3 [M], at the smile vol, floored by the far-side finish chance) and a finding says so;
    the next expiry, with a full smile, still uses local vol."""
    expiries = ["2027-01-15", "2027-02-19"]
    ts = year_fractions(expiries, basis="365")
    fwd = 100.0 * np.exp(0.02 * ts)
    dfs = np.exp(-0.03 * ts)
    strikes = [np.array([95.0, 100.0, 105.0]), np.arange(80.0, 121.0, 2.5)]
    snap = build_snapshot(expiries, strikes, lambda i, k: ql_black(fwd[i], k, 0.25, ts[i], dfs[i], True),
                          lambda i, k: ql_black(fwd[i], k, 0.25, ts[i], dfs[i], False), spot=100.0)
    ann = annotate(snap, PipelineSettings(basis="365"), touch=True)
    first, second = (ann.touched[pd.Timestamp(e)] for e in expiries)
    assert first.method == "one-vol" and second.method == "local vol"
    assert any("one-vol" in f.reason for f in ann.results[pd.Timestamp(expiries[0])].findings)
    res = ann.results[pd.Timestamp(expiries[0])]
    c = ann.contracts[ann.contracts["expiry"] == pd.Timestamp(expiries[0])]
    k = c["strike"].to_numpy()
    vol = np.sqrt(np.asarray(res.smile.total_variance(np.log(k / res.forward))) / res.t_years)
    expected = prob_touch_smile(100.0, res.forward, k, res.t_years, vol, c["p_touch_low"].to_numpy())
    np.testing.assert_allclose(c["p_touch"].to_numpy(), expected, rtol=1e-12)
