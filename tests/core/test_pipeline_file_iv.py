"""`use_file_iv`: the file's iv column, converted to the chosen time basis.

Total variance sigma^2 * T is the invariant (Hull §15.4: volatility scales with
the square root of time, 252 trading days a year [V]), so a vol quoted on
ACT/365 becomes sigma_365 * sqrt(T_365 / T_252) on the 252 basis.
"""

from __future__ import annotations

import numpy as np

from chaintriage.core.pipeline import PipelineSettings, annotate
from chaintriage.core.time_to_expiry import year_fraction
from tests.core.chain_builders import AS_OF, build_snapshot, ql_black, year_fractions

EXPIRIES = ["2027-01-15", "2027-03-19"]


def _snapshot_with_file_iv(vol365: float):
    ts = year_fractions(EXPIRIES, basis="365")
    fwd = 100.0 * np.exp(0.02 * ts)
    dfs = np.exp(-0.03 * ts)
    snap = build_snapshot(
        EXPIRIES, [np.arange(80.0, 121.0, 5.0)] * 2,
        lambda i, k: ql_black(fwd[i], k, vol365, ts[i], dfs[i], True),
        lambda i, k: ql_black(fwd[i], k, vol365, ts[i], dfs[i], False), spot=100.0)
    snap.contracts["iv"] = vol365
    snap.contracts["iv_basis"] = "365"
    return snap


def test_file_iv_is_converted_to_the_chosen_basis():
    snap = _snapshot_with_file_iv(0.30)
    ann = annotate(snap, PipelineSettings(basis="252", use_file_iv=True))
    t365 = year_fraction(AS_OF, EXPIRIES, "pm", basis="365")
    t252 = year_fraction(AS_OF, EXPIRIES, "pm", basis="252")
    expected = 0.30 * np.sqrt(t365 / t252)
    for e, want in zip(EXPIRIES, expected):
        got = ann.contracts.loc[ann.contracts["expiry"] == e, "iv"].to_numpy()
        np.testing.assert_allclose(got, want, rtol=1e-12)
    # Same total variance as the vols solved from the mids on the file's own basis.
    solved = annotate(snap, PipelineSettings(basis="365"))
    w_file = ann.contracts["iv"].to_numpy() ** 2 * np.repeat(t252, len(ann.contracts) // 2)
    w_solved = solved.contracts["iv"].to_numpy() ** 2 * np.repeat(t365, len(ann.contracts) // 2)
    np.testing.assert_allclose(w_file, w_solved, rtol=1e-8)


def test_file_iv_on_the_same_basis_is_used_as_is():
    snap = _snapshot_with_file_iv(0.22)
    ann = annotate(snap, PipelineSettings(basis="365", use_file_iv=True))
    np.testing.assert_allclose(ann.contracts["iv"], 0.22, rtol=1e-15)
