"""Targeting strikes (core/targets.py).

- On a flat-vol chain priced by QuantLib [L], the strike chosen for a target
  is the listed strike next to the strike that meets the target exactly,
  found in closed form with scipy's inverse normal [L]: sigma distance
  K = F e^{-z sigma sqrt T} (puts, REFERENCE.md s.9 convention [C]); |delta|
  of a put e^{-qT} N(-d1) = D gives d1 = -N^{-1}(D e^{qT}); P(beyond) of a put
  N(-d2) = P gives d2 = -N^{-1}(P).
- The vectorised selection equals a plain per-expiry loop written here [D]
  (consistency, on a skewed chain with many expiries), neighbours and shifts
  included.
- The filter predicate on each measure, alone and combined [D].
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy.special import ndtri

from chaintriage.core.findings import ChainTriageError
from chaintriage.core.pipeline import PipelineSettings, annotate
from chaintriage.core.targets import TARGET_TABLE_COLUMNS, Target, TargetSelector, measure, select_targets, target_mask
from tests.core.chain_builders import build_snapshot, ql_black, year_fractions

SPOT, RATE, DIV, VOL = 100.0, 0.04, 0.01, 0.25
EXPIRIES = ["2026-12-18", "2027-01-15", "2027-03-19", "2027-06-17"]
STEP = 0.5


@pytest.fixture(scope="module")
def flat():
    ts = year_fractions(EXPIRIES)
    fwd = SPOT * np.exp((RATE - DIV) * ts)
    dfs = np.exp(-RATE * ts)
    strikes = [np.arange(50.0, 160.0 + STEP, STEP)] * len(EXPIRIES)
    snap = build_snapshot(EXPIRIES, strikes, lambda i, k: ql_black(fwd[i], k, VOL, ts[i], dfs[i], True),
                          lambda i, k: ql_black(fwd[i], k, VOL, ts[i], dfs[i], False), spot=SPOT,
                          half_spread=0.002)
    return annotate(snap, PipelineSettings(basis="365")), ts, fwd


def _exact_put_strike(which, value, f, t):
    s = VOL * np.sqrt(t)
    if which == "sigma":
        return f * np.exp(-value * s)
    if which == "delta":  # e^{-qT} N(-d1) = value
        d1 = -ndtri(value * np.exp(DIV * t))
        return f * np.exp(-d1 * s + 0.5 * s * s)
    d2 = -ndtri(value)  # N(-d2) = value
    return f * np.exp(-d2 * s - 0.5 * s * s)


@pytest.mark.parametrize("which, value", [("sigma", 1.5), ("sigma", 0.5), ("delta", 0.16), ("delta", 0.30),
                                          ("beyond", 0.10), ("beyond", 0.25)])
def test_flat_chain_puts_land_next_to_the_exact_strike(flat, which, value):
    """[L] scipy ndtri closed forms: the chosen listed strike is within one strike step of the exact one,
    and its measure is the closest to the target among the listed puts of that expiry."""
    ann, ts, fwd = flat
    table = select_targets(ann.contracts, ann.expiries, Target("puts", which, value))
    assert list(table.columns) == TARGET_TABLE_COLUMNS and len(table) == len(EXPIRIES)
    exact = _exact_put_strike(which, value, fwd, ts)
    assert np.all(np.abs(table["strike"].to_numpy() - exact) <= STEP / 2 + 1e-9), (table["strike"], exact)
    np.testing.assert_allclose(table["strike_below"], table["strike"] - STEP)
    np.testing.assert_allclose(table["strike_above"], table["strike"] + STEP)
    assert np.all(np.abs(table["miss"]) < 0.05)


def test_flat_chain_calls_by_sigma(flat):
    """[C] calls: K = F e^{+z sigma sqrt T}."""
    ann, ts, fwd = flat
    table = select_targets(ann.contracts, ann.expiries, Target("calls", "sigma", 1.0))
    exact = fwd * np.exp(VOL * np.sqrt(ts))
    assert np.all(np.abs(table["strike"].to_numpy() - exact) <= STEP / 2 + 1e-9)
    assert np.all(table["sigma_distance"] > 0.9)


def _brute_force(contracts, expiries, target, shift=0):
    """Per-expiry loop: the reference the vectorised selection must equal [D]."""
    side = "call" if target.side == "calls" else "put"
    m_all = measure(contracts, target.measure)
    out = []
    for e in pd.DatetimeIndex(expiries["expiry"]):
        idx = np.flatnonzero(((contracts["expiry"] == e) & (contracts["kind"] == side)).to_numpy())
        idx = idx[np.argsort(contracts["strike"].to_numpy()[idx], kind="stable")]
        miss = np.abs(m_all[idx] - target.value)
        if not np.isfinite(miss).any():
            out.append((-1, -1, -1))
            continue
        j = int(np.nanargmin(np.where(np.isfinite(miss), miss, np.inf)))
        j = min(max(j + shift, 0), idx.size - 1)
        out.append((idx[j], idx[j - 1] if j > 0 else -1, idx[j + 1] if j + 1 < idx.size else -1))
    return np.array(out)


@pytest.fixture(scope="module")
def skewed():
    import sys
    from pathlib import Path

    sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "bench"))
    from bench_pipeline import synthetic_snapshot

    return annotate(synthetic_snapshot(4000, 12, seed=7))


@pytest.mark.parametrize("target", [Target("puts", "sigma", 1.5), Target("calls", "sigma", 0.8),
                                    Target("calls", "delta", 0.16), Target("puts", "delta", 0.25),
                                    Target("puts", "beyond", 0.10), Target("calls", "beyond", 0.05),
                                    Target("puts", "sigma", -0.5)])
@pytest.mark.parametrize("shift", [0, -1, 2, -1000])
def test_vectorised_selection_equals_a_per_expiry_loop(skewed, target, shift):
    """[D] the grouped minimum equals the loop for every expiry, neighbours and shifts included."""
    c, e = skewed.contracts, skewed.expiries
    table = TargetSelector(c, e).select(target, shift)
    expected = _brute_force(c, e, target, shift)
    np.testing.assert_array_equal(table[["row", "row_below", "row_above"]].to_numpy(), expected)
    got = table["row"].to_numpy()
    np.testing.assert_array_equal(table["strike"].to_numpy(), c["strike"].to_numpy()[got])
    np.testing.assert_array_equal(table["p_profit_sell"].to_numpy(), c["p_profit_sell"].to_numpy()[got])
    np.testing.assert_array_equal(table["flags"].to_numpy(), c["flags"].to_numpy(dtype=object)[got])


def test_selector_reuse_gives_the_same_tables(skewed):
    """[D] a kept selector answers as a fresh one after other targets and sides."""
    c, e = skewed.contracts, skewed.expiries
    sel = TargetSelector(c, e)
    first = sel.select(Target("puts", "delta", 0.2))
    sel.select(Target("calls", "beyond", 0.3))
    pd.testing.assert_frame_equal(sel.select(Target("puts", "delta", 0.2)), first)


def test_expiry_without_usable_contracts_gets_an_empty_row(flat):
    """[D] an expiry where no contract of the side has the measure: NaN figures, row -1, no flags."""
    ann, _, _ = flat
    c = ann.contracts.copy()
    gone = c["expiry"] == pd.Timestamp(EXPIRIES[1])
    c.loc[gone, "delta"] = np.nan
    table = select_targets(c, ann.expiries, Target("puts", "delta", 0.2))
    assert table.loc[1, "row"] == -1 and np.isnan(table.loc[1, "strike"]) and table.loc[1, "flags"] == ""
    assert (table.drop(index=1)["row"] >= 0).all()
    empty = select_targets(c.iloc[:0], ann.expiries, Target("puts", "delta", 0.2))
    assert len(empty) == len(EXPIRIES) and (empty["row"] == -1).all()


@pytest.mark.parametrize("bad", [("both", "sigma", 1.0), ("puts", "gamma", 1.0), ("puts", "delta", 1.5),
                                 ("puts", "beyond", 0.0), ("calls", "sigma", float("nan")), ("calls", "sigma", "x")])
def test_target_refuses_unusable_values(bad):
    with pytest.raises(ChainTriageError):
        Target(*bad)


def test_target_mask_each_limit_and_combined(flat):
    """[D] sigma: out of the money by at least z; |delta| and P(beyond) ranges inclusive; side; all at once."""
    ann, _, _ = flat
    c = ann.contracts
    z = c["sigma_distance"].to_numpy()
    call = (c["kind"] == "call").to_numpy()
    d = np.abs(c["delta"].to_numpy())
    pb = c["p_beyond"].to_numpy()
    np.testing.assert_array_equal(target_mask(c, sigma=1.0), np.where(call, z >= 1.0, z <= -1.0))
    np.testing.assert_array_equal(target_mask(c, delta=(0.10, 0.20)), (d >= 0.10) & (d <= 0.20))
    np.testing.assert_array_equal(target_mask(c, beyond=(None, 0.15)), pb <= 0.15)
    np.testing.assert_array_equal(target_mask(c, side="puts"), ~call)
    both = target_mask(c, sigma=0.5, delta=(0.05, None), beyond=(0.02, 0.3), side="calls")
    np.testing.assert_array_equal(both, call & (z >= 0.5) & (d >= 0.05) & (pb >= 0.02) & (pb <= 0.3))
    assert both.any() and not both.all()
    with pytest.raises(ChainTriageError):
        target_mask(c, side="sideways")
