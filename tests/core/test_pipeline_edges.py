"""Edge-case chains through the pipeline: usable output where it can be computed, findings where not.

Prices come from QuantLib's blackFormula [L] at one vol; the checks here are
about behaviour (no exception, no inf, a finding that says why), so they use
facts of the trade [C] rather than published numbers.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from chaintriage.core.pipeline import PipelineSettings, annotate
from tests.core.chain_builders import build_snapshot, ql_black, year_fractions

VOL = 0.25
SPOT = 100.0


def _priced(expiries, strikes, **kw):
    ts = year_fractions(expiries)
    fwd = SPOT * np.exp(0.02 * ts)
    dfs = np.exp(-0.03 * ts)
    return build_snapshot(
        expiries, [np.asarray(strikes, float)] * len(expiries),
        lambda i, k: ql_black(fwd[i], k, VOL, max(ts[i], 1e-9), dfs[i], True),
        lambda i, k: ql_black(fwd[i], k, VOL, max(ts[i], 1e-9), dfs[i], False), spot=SPOT, **kw)


def _no_infinities(ann):
    num = ann.contracts.select_dtypes("number")
    assert not np.isinf(num.to_numpy()).any()
    num = ann.expiries.select_dtypes("number")
    assert not np.isinf(num.to_numpy()).any()


def test_calls_only_falls_back_to_rates_with_a_finding():
    snap = _priced(["2027-01-15"], np.arange(80, 121, 2.5), rate=0.03, div_yield=0.01)
    snap.contracts = snap.contracts[snap.contracts["kind"] == "call"].reset_index(drop=True)
    ann = annotate(snap, PipelineSettings(basis="365"))
    _no_infinities(ann)
    assert ann.expiries["forward_method"].iloc[0] == "rates"
    assert any("forward" in f.reason for f in ann.findings)
    # Vols still come out, from the rates forward.
    assert ann.contracts["iv"].notna().sum() > 10


def test_no_strike_quoted_on_both_sides_and_no_rates_uses_spot():
    snap = _priced(["2027-01-15"], np.arange(80, 121, 2.5))
    c = snap.contracts
    keep = ((c["kind"] == "call") & (c["strike"] >= 100)) | ((c["kind"] == "put") & (c["strike"] < 100))
    snap.contracts = c[keep].reset_index(drop=True)
    ann = annotate(snap, PipelineSettings(basis="365"))
    _no_infinities(ann)
    assert ann.expiries["forward_method"].iloc[0] == "spot"
    assert ann.expiries["forward"].iloc[0] == SPOT
    assert any(f.severity == "warning" and "forward" in f.reason for f in ann.findings)


def test_single_strike_gives_a_flat_smile_and_probabilities():
    snap = _priced(["2027-01-15"], [100.0])
    ann = annotate(snap, PipelineSettings(basis="365"))
    _no_infinities(ann)
    c = ann.contracts
    assert c["p_beyond"].notna().all()
    assert ann.expiries["fit_method"].iloc[0] == "flat"


def test_all_bids_zero_still_gives_vols_from_the_ask_half():
    snap = _priced(["2027-01-15"], np.arange(80, 121, 2.5))
    snap.contracts["bid"] = 0.0
    ann = annotate(snap, PipelineSettings(basis="365"))
    _no_infinities(ann)
    assert (ann.contracts["flags"].str.contains("zero-bid")).all()


def test_expiry_already_past_at_as_of_has_no_probabilities_and_a_finding():
    # Expiry on the snapshot date, PM settled, but the snapshot is taken after the close.
    snap = _priced(["2026-12-01"], np.arange(90, 111, 5.0))
    snap.as_of = pd.Timestamp("2026-12-01 16:30", tz="America/New_York")
    ann = annotate(snap, PipelineSettings(basis="252"))
    _no_infinities(ann)
    assert ann.expiries["t_years"].iloc[0] == 0.0
    assert ann.contracts["p_beyond"].isna().all()
    assert any("no time left" in f.reason for f in ann.findings)


def test_expiry_today_with_minutes_left():
    snap = _priced(["2026-12-01"], np.arange(90, 111, 1.0))
    snap.as_of = pd.Timestamp("2026-12-01 15:50", tz="America/New_York")
    ann = annotate(snap, PipelineSettings(basis="252"))
    _no_infinities(ann)
    t = ann.expiries["t_years"].iloc[0]
    assert t == pytest.approx(10 / 390 / 252)  # 10 minutes of a 390-minute session [C]


def test_prices_below_intrinsic_get_no_vol_and_the_rest_still_works():
    snap = _priced(["2027-01-15"], np.arange(80, 121, 2.5))
    c = snap.contracts
    deep = (c["kind"] == "call") & (c["strike"] == 80.0)
    c.loc[deep, ["bid", "ask"]] = [1.0, 1.2]  # far below the ~20 of intrinsic value
    ann = annotate(snap, PipelineSettings(basis="365"))
    _no_infinities(ann)
    row = ann.contracts[(ann.contracts["kind"] == "call") & (ann.contracts["strike"] == 80.0)].iloc[0]
    assert np.isnan(row["iv"])
    assert "no-iv" in row["flags"]
    assert ann.contracts["iv"].notna().sum() > 20


def test_sub_penny_and_very_large_prices():
    ts = year_fractions(["2027-06-17"])
    snap = build_snapshot(
        ["2027-06-17"], [np.arange(4000.0, 6001.0, 50.0)],
        lambda i, k: ql_black(5000.0, k, VOL, ts[i], 1.0, True),
        lambda i, k: ql_black(5000.0, k, VOL, ts[i], 1.0, False), spot=5000.0, half_spread=0.0005)
    ann = annotate(snap, PipelineSettings(basis="365"))
    _no_infinities(ann)
    np.testing.assert_allclose(ann.expiries["atm_iv"], VOL, atol=1e-4)


def test_empty_snapshot_does_not_crash():
    snap = _priced(["2027-01-15"], [100.0])
    snap.contracts = snap.contracts.iloc[0:0]
    ann = annotate(snap, PipelineSettings(basis="365"))
    assert len(ann.contracts) == 0 and len(ann.expiries) == 0


def test_a_mid_below_intrinsic_is_named_in_a_finding_with_its_line():
    snap = _priced(["2027-01-15"], np.arange(80, 121, 2.5))
    c = snap.contracts
    deep = (c["kind"] == "call") & (c["strike"] == 80.0)
    c.loc[deep, ["bid", "ask"]] = [1.0, 1.2]
    line = int(c.loc[deep, "source_line"].iloc[0])
    ann = annotate(snap, PipelineSettings(basis="365"))
    hits = [f for f in ann.findings if f.line == line]
    assert len(hits) == 1
    # In the money relative to the forward, so a note rather than a warning.
    assert hits[0].severity == "note" and "intrinsic" in hits[0].reason and "call 80" in hits[0].reason


def test_rates_accrue_in_calendar_time_on_a_trading_day_basis():
    """Interest and carry accrue on calendar days (ACT/365) [C, common practice], while the 252 basis
    is the variance clock: the rates fallback must give DF = exp(-r T_365), F = S exp((r - q) T_365)."""
    from chaintriage.core.time_to_expiry import year_fraction

    snap = _priced(["2027-01-15"], np.arange(80, 121, 2.5), rate=0.05, div_yield=0.01)
    snap.contracts = snap.contracts[snap.contracts["kind"] == "call"].reset_index(drop=True)
    ann = annotate(snap, PipelineSettings(basis="252"))
    t365 = year_fraction(snap.as_of, ["2027-01-15"], "pm", basis="365")[0]
    row = ann.expiries.iloc[0]
    assert row["forward_method"] == "rates"
    assert row["discount"] == pytest.approx(np.exp(-0.05 * t365), rel=1e-14)
    assert row["forward"] == pytest.approx(SPOT * np.exp(0.04 * t365), rel=1e-14)
    assert row["t_years"] != pytest.approx(t365, rel=1e-3)  # the variance clock differs


def test_expiry_on_an_exchange_holiday_gets_a_finding():
    """Fri 2027-01-01 is a NYSE holiday (NYSE holiday calendar 2027, REFERENCE.md §8 [V])."""
    snap = _priced(["2027-01-01", "2027-01-15"], np.arange(90, 111, 5.0))
    ann = annotate(snap, PipelineSettings(basis="252"))
    hits = [f for f in ann.findings if "not an exchange trading day" in f.reason]
    assert [f.expiry for f in hits] == ["2027-01-01"]


def test_flags_are_the_words_of_each_contracts_own_quote_and_sort_as_text():
    """[D] every contract's flags are the words its own figures call for (no-iv: no implied vol,
    zero-bid: no bid above zero, wide: spread beyond the setting, thin: open interest below it), joined
    in that order; the column (a categorical) sorts as its texts do."""
    snap = _priced(["2027-01-15", "2027-03-19"], np.arange(60, 141, 2.5))
    c = snap.contracts
    rng = np.random.default_rng(4)
    c["bid"] = np.where(rng.random(len(c)) < 0.3, 0.0, c["bid"])
    c["ask"] = np.where(rng.random(len(c)) < 0.3, c["ask"] * 3 + 0.5, c["ask"])
    c["open_interest"] = rng.choice([np.nan, 3.0, 5000.0], len(c))
    deep = (c["kind"] == "call") & (c["strike"] == 60.0)
    c.loc[deep, ["bid", "ask"]] = [1.0, 1.2]  # below intrinsic: no vol
    settings = PipelineSettings(basis="365")
    a = annotate(snap, settings).contracts
    words = np.array(["no-iv", "zero-bid", "wide", "thin"])
    with np.errstate(invalid="ignore"):
        called = np.column_stack([a["iv"].isna(), ~(a["bid"] > 0), a["spread_pct"] > settings.wide_spread,
                                  a["open_interest"].notna() & (a["open_interest"] < settings.thin_open_interest)])
    expected = [",".join(words[row]) for row in called]
    assert a["flags"].tolist() == expected
    assert len(set(expected)) >= 6  # several combinations met
    assert a["flags"].sort_values(kind="stable").tolist() == sorted(expected)
    assert (a["flags"] == "").sum() == expected.count("")
