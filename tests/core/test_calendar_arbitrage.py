"""Calendar-arbitrage check (core/calendar_arbitrage.py): total variance at fixed ln(K/F) must not fall
with expiry (Gatheral & Jacquier 2014 s.2.1 [M]; SSVI Theorem 4.1 for the clean surface [M])."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from chaintriage.core.calendar_arbitrage import calendar_findings, calendar_violations
from chaintriage.core.pipeline import PipelineSettings, annotate
from chaintriage.core.svi import SviParams, SviSlices
from tests.core.chain_builders import build_snapshot, ql_black, year_fractions
from tests.oracles.ssvi import SKEW_ETA, SKEW_RHO, skew_theta, ssvi_slice


def test_clean_ssvi_surface_has_no_finding():
    """An SSVI surface with increasing theta and theta*phi (G&J Thm 4.1) has no calendar arbitrage."""
    t = np.array([0.02, 0.1, 0.25, 0.5, 1.0])
    smiles = [ssvi_slice(th, SKEW_RHO, SKEW_ETA) for th in skew_theta(t)]
    assert calendar_violations(smiles, t) == []
    assert calendar_findings(smiles, t, [str(x) for x in t]) == []


def test_constructed_violation_names_both_expiries_and_moneyness():
    """Two flat-ATM slices whose later one has a much lower put wing: w falls on the left [D]."""
    t = np.array([0.25, 0.5])
    early = SviSlices(SviParams(a=0.004, b=0.08, rho=-0.9, m=0.0, sigma=0.1))  # steep put wing
    late = SviSlices(SviParams.flat(float(early.total_variance(0.0)) * 2.0))   # flat, twice the ATM
    found = calendar_violations([early, late], t)
    assert len(found) == 1
    v = found[0]
    assert (v.earlier, v.later) == (0, 1)
    assert v.k < 0 and v.w_earlier > v.w_later
    w_early = float(early.total_variance(v.k))
    assert w_early == pytest.approx(v.w_earlier)
    msgs = calendar_findings([early, late], t, ["2027-03-19", "2027-06-18"], "TSTX")
    assert len(msgs) == 1
    text = msgs[0].reason
    assert "2027-03-19" in text and "2027-06-18" in text and f"{v.k:+.3f}" in text
    assert msgs[0].expiry == "2027-06-18" and msgs[0].severity == "warning"


def test_missing_smiles_and_equal_times_are_skipped():
    t = np.array([0.25, 0.25, 0.5])
    flat = SviSlices(SviParams.flat(0.02))
    assert calendar_violations([flat, None, SviSlices(SviParams.flat(0.03))], t) == []
    assert calendar_violations([SviSlices(SviParams.flat(0.05)), flat], np.array([0.3, 0.3])) == []


def test_pipeline_reports_calendar_arbitrage_of_a_chain():
    """A chain priced at 30% vol for the first expiry and 15% for the next (total variance falls):
    the pipeline's findings name both expiries [D, prices from QuantLib's blackFormula [L]]."""
    expiries = ["2027-01-15", "2027-02-19"]
    ts = year_fractions(expiries, basis="365")
    vols = [0.30, 0.15]
    fwd = 100.0 * np.exp(0.02 * ts)
    dfs = np.exp(-0.03 * ts)
    strikes = [np.arange(80.0, 121.0, 2.5)] * 2
    snap = build_snapshot(expiries, strikes, lambda i, k: ql_black(fwd[i], k, vols[i], ts[i], dfs[i], True),
                          lambda i, k: ql_black(fwd[i], k, vols[i], ts[i], dfs[i], False), spot=100.0)
    ann = annotate(snap, PipelineSettings(basis="365"))
    cal = [f for f in ann.findings if "calendar arbitrage" in f.reason]
    assert len(cal) == 1 and "2027-01-15" in cal[0].reason and "2027-02-19" in cal[0].reason
    # Touch still comes out, inside its bounds, with the local variance guarded.
    got = ann.touch(pd.Timestamp("2027-02-19"))
    assert got is not None
    ok = np.isfinite(got.p_touch)
    assert np.all((got.p_touch[ok] >= got.low[ok] - 1e-12) & (got.p_touch[ok] <= got.high[ok] + 1e-12))

