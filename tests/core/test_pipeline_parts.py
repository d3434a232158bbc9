"""``annotate_in_parts``: the first expiry annotated alone, then the whole, equal to ``annotate`` in
every figure, finding and touch result [D] consistency (each expiry is computed from its own quotes;
what compares expiries is added when the parts are joined).

The chains: the bundled demo, a chain whose total variance falls between its first two expiries
(a calendar-arbitrage finding across the cut; prices from QuantLib's blackFormula [L]) and one
with a typo strike in its first expiry (left out before the fit, with a finding)."""

from __future__ import annotations

from importlib import resources

import numpy as np
import pandas as pd
import pytest

from chaintriage.core.findings import LEFT_OUT
from chaintriage.core.loading import load_files
from chaintriage.core.pipeline import PipelineSettings, annotate, annotate_in_parts
from tests.core.chain_builders import build_snapshot, ql_black, year_fractions


def _demo_snapshots():
    from chaintriage.tui.snapshot_loading import demo_files

    root = resources.files("chaintriage.demo_chains")
    return load_files([str(root / n) for n in demo_files()]).snapshots


def _chain(vols, extra_first_strike=None):
    expiries = ["2027-01-15", "2027-02-19", "2027-03-19"][:len(vols)]
    ts = year_fractions(expiries, basis="365")
    fwd = 100.0 * np.exp(0.02 * ts)
    dfs = np.exp(-0.03 * ts)
    strikes = [np.arange(80.0, 121.0, 2.5) for _ in expiries]
    if extra_first_strike is not None:
        strikes[0] = np.append(strikes[0], extra_first_strike)

    def price(i, k, call):
        return 0.5 if k > 1e6 else ql_black(fwd[i], k, vols[i], ts[i], dfs[i], call)

    return build_snapshot(expiries, strikes, lambda i, k: price(i, k, True), lambda i, k: price(i, k, False),
                          spot=100.0)


def _assert_same(whole, joined):
    pd.testing.assert_frame_equal(whole.contracts, joined.contracts, check_exact=True)
    pd.testing.assert_frame_equal(whole.expiries, joined.expiries, check_exact=True)
    assert joined.findings == whole.findings
    assert list(joined.results) == list(whole.results)
    for e, r in whole.results.items():
        assert joined.results[e].findings == r.findings


def _cases():
    return [(s.underlying, s, PipelineSettings()) for s in _demo_snapshots()] + [
        ("calendar", _chain([0.30, 0.15, 0.20]), PipelineSettings(basis="365")),
        ("typo", _chain([0.25, 0.25], extra_first_strike=1e300), PipelineSettings(basis="365")),
    ]


@pytest.mark.parametrize("name,snap,settings", _cases(), ids=lambda x: x if isinstance(x, str) else "")
def test_parts_join_into_the_whole_annotation(name, snap, settings):
    whole = annotate(snap, settings)
    parts = list(annotate_in_parts(snap, settings))
    assert len(parts) == 2
    first, joined = parts
    assert len(first.expiries) == 1
    assert first.expiries["expiry"].iloc[0] == whole.expiries["expiry"].iloc[0]
    _assert_same(whole, joined)
    # the first part's contracts are the whole's first expiry's, figure for figure
    n = len(first.contracts)
    pd.testing.assert_frame_equal(first.contracts, whole.contracts.iloc[:n], check_exact=True)
    # touch figures (computed on demand from every expiry up to each) agree too
    whole.fill_touch()
    joined.fill_touch()
    _assert_same(whole, joined)
    if name == "calendar":  # the finding across the cut is there, on the later expiry
        cal = [f for f in joined.findings if "calendar arbitrage" in f.reason]
        assert cal and cal[0].expiry == "2027-02-19"
    if name == "typo":
        assert any(f.column == "strike" and f.severity == LEFT_OUT for f in first.findings)


def test_one_expiry_comes_whole_at_once():
    snap = _chain([0.25])
    parts = list(annotate_in_parts(snap, PipelineSettings(basis="365")))
    assert len(parts) == 1
    _assert_same(annotate(snap, PipelineSettings(basis="365")), parts[0])
