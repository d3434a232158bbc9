"""History beside an annotated snapshot: per-expiry and per-contract columns.

Oracles: the lognormal N(d2) from scipy.stats.norm (Hull s.15.8) [L]; the
definition IV/RV = at-the-money implied vol / realised vol [D]; the demo data
is used only as a carrier (invented data proves nothing by itself).
"""

from __future__ import annotations

import math
from importlib.resources import files
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy.stats import norm

from chaintriage.core.findings import WARNING, ChainTriageError
from chaintriage.core.history_compare import (
    HISTORY_CONTRACT_COLUMNS,
    HISTORY_EXPIRY_COLUMNS,
    HistorySettings,
    compare_with_snapshot,
    summarise_history,
)
from chaintriage.core.history_file import PriceHistory, load_history
from chaintriage.core.loading import load_file
from chaintriage.core.pipeline import annotate

DEMO = Path(str(files("chaintriage.demo_chains")))


@pytest.fixture(scope="module")
def ospx():
    snap = load_file(DEMO / "ospx_2026-12-01.csv").snapshots[0]
    hist = load_history(DEMO / "history" / "ospx_history.csv", until=snap.as_of).histories[0]
    return annotate(snap), hist


def test_columns_and_their_definitions(ospx):
    annotated, hist = ospx
    cmp = compare_with_snapshot(annotated, hist, HistorySettings(paths=3000))
    assert list(cmp.contracts.columns) == list(HISTORY_CONTRACT_COLUMNS)
    assert list(cmp.expiries.columns) == list(HISTORY_EXPIRY_COLUMNS)
    assert cmp.contracts.index.equals(annotated.contracts.index)
    exp = annotated.expiries
    np.testing.assert_allclose(cmp.expiries["iv_rv"], exp["atm_iv"] / cmp.expiries["hist_vol"])
    # the realised vol of each expiry is the summary's figure at the window nearest its trading days
    table = cmp.summary.realised.vol[cmp.summary.estimator]
    for w, v, d in zip(cmp.expiries["hist_window"], cmp.expiries["hist_vol"], exp["trading_days"]):
        assert v == table.loc[w]
        assert abs(w - max(d, 1)) == min(abs(x - max(d, 1)) for x in table.index)
    c = annotated.contracts.join(cmp.contracts).merge(exp[["expiry", "t_years", "forward"]], on="expiry")
    sd = c["hist_vol"] * np.sqrt(c["t_years"])
    d2 = (np.log(c["forward"] / c["strike"]) - 0.5 * sd**2) / sd
    want = np.where(c["kind"] == "call", norm.cdf(d2), norm.cdf(-d2))
    np.testing.assert_allclose(c["hist_p_beyond"], want, atol=1e-12)
    assert ((cmp.contracts["boot_p_touch"] >= cmp.contracts["boot_p_beyond"] - 1e-12)
            | (annotated.contracts["strike"] == annotated.snapshot.spot)
            | ~annotated.contracts["otm"]).all()  # a path that ends beyond an OTM strike touched it [C]


def test_a_history_far_from_spot_warns(ospx):
    annotated, hist = ospx
    bars = hist.bars.copy()
    for col in ("open", "high", "low", "close"):
        bars[col] *= 0.5  # e.g. an unadjusted 2-for-1 split
    odd = PriceHistory(hist.underlying, bars, [], hist.source)
    cmp = compare_with_snapshot(annotated, odd, HistorySettings(paths=0))
    assert any(f.severity == WARNING and "from the snapshot's spot" in f.reason for f in cmp.findings)
    assert cmp.contracts["boot_p_beyond"].isna().all()


def test_short_history_leaves_long_windows_blank(ospx):
    annotated, hist = ospx
    short = PriceHistory(hist.underlying, hist.bars.tail(40).reset_index(drop=True), [], hist.source)
    cmp = compare_with_snapshot(annotated, short, HistorySettings(paths=1000))
    long_ones = cmp.expiries["hist_window"] > 39
    assert cmp.expiries.loc[long_ones, "hist_vol"].isna().all()
    assert cmp.expiries.loc[~long_ones, "hist_vol"].notna().all()
    assert any("window" in f.reason for f in cmp.findings)


def test_settings_are_checked():
    for bad in (dict(basis="360"), dict(estimator="range"), dict(paths=-1), dict(block=0), dict(windows=(1,))):
        with pytest.raises(ChainTriageError):
            HistorySettings(**bad)


def test_parquet_history(tmp_path):
    pytest.importorskip("pyarrow")
    frame = pd.DataFrame({"Date": pd.bdate_range("2026-10-01", periods=30), "Close": np.linspace(100, 110, 30)})
    p = tmp_path / "h.parquet"
    frame.to_parquet(p)
    load = load_history(p, underlying="Q")
    assert load.rows_accepted == 30
    s = summarise_history(load.histories[0], HistorySettings(windows=(10, 21)))
    r = np.diff(np.log(frame["Close"].to_numpy()))
    assert s.realised.vol.loc[21, "close_to_close"] == pytest.approx(np.std(r[-21:], ddof=1) * math.sqrt(252))


def test_ex_event_realised_vol_leaves_the_event_sessions_out():
    """Left-out days: the estimate equals numpy's on the remaining returns [C]; event timing per core.events [D]."""
    import datetime as dt

    from chaintriage.core.events import Event
    from chaintriage.core.history_compare import event_sessions
    from chaintriage.demo_chains import make_demo_history as mh

    hist = load_history(DEMO / "history" / "ospx_history.csv").histories[0]
    bars = hist.bars
    dates = bars["date"].to_numpy().astype("datetime64[D]")
    past = [Event("OSPX", dt.date(2026, 10, 13)), Event("OSPX", dt.date(2026, 7, 14)),
            Event("OSPX", dt.date(2026, 4, 15), timing="before_open")]
    skip = event_sessions(dates, past)
    assert [str(d) for d in skip] == ["2026-04-15", "2026-07-15", "2026-10-14"]
    assert set(skip) <= set(dates[mh.event_days(mh.STYLES[1], dates)]) | {np.datetime64("2026-04-15")}
    plain = summarise_history(hist, HistorySettings(windows=(126,), estimator="close_to_close"))
    ex = summarise_history(hist, HistorySettings(windows=(126,), estimator="close_to_close", skip_dates=skip))
    r = np.diff(np.log(bars["close"].to_numpy()))[-126:]
    kept = ~np.isin(dates[1:][-126:], np.asarray(skip))
    want = np.std(r[kept], ddof=1) * math.sqrt(252)
    assert ex.realised.vol.loc[126, "close_to_close"] == pytest.approx(want, rel=1e-12)
    assert ex.realised.vol.loc[126, "close_to_close"] < plain.realised.vol.loc[126, "close_to_close"]
    assert any("event day(s) left out" in f.reason for f in ex.findings)
