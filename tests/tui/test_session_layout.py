"""The screen's pure parts: the strike filter, confidence levels, the width plan, packed bars.

The frames are PRESENTATION FIXTURES (invented numbers with the pipeline's
column names); the checks are the stated rules of each function [D] and facts
of the trade [C] (a call is out of the money above the forward, a put below).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from rich.text import Text

from chaintriage.core.findings import ChainTriageError
from chaintriage.tui.widgets.info_bars import pack_pieces
from chaintriage.tui.layout import MIN_PLOT, PLOT_HIDDEN, PLOT_SHOWN, fit_columns, ladder_width, plan_layout
from chaintriage.tui.session import CONFIDENCE_LEVELS, StrikeFilter, fmt_confidence, step_confidence
from chaintriage.tui.widgets.strike_grid import DEFAULT_COLUMNS


def fixture_frame() -> pd.DataFrame:
    """PRESENTATION FIXTURE: strikes 90..110 around a forward of 100, both kinds."""
    rows = []
    for k in (90.0, 95.0, 100.0, 105.0, 110.0):
        z = (k - 100.0) / 5.0  # -2 .. +2 sigmas
        for kind in ("call", "put"):
            rows.append(dict(strike=k, kind=kind, sigma_distance=z,
                             spread_pct=0.05 if kind == "call" else 0.30,
                             open_interest=500.0 if k != 110.0 else np.nan))
    return pd.DataFrame(rows)


def test_sigma_filter_keeps_strikes_out_of_the_money_by_z_on_either_side():
    f = fixture_frame()
    kept, hidden = StrikeFilter(sigma=1.0).apply(f)
    assert sorted(set(kept["strike"])) == [90.0, 95.0, 105.0, 110.0] and hidden == 1
    kept, hidden = StrikeFilter(sigma=2.0).apply(f)
    assert sorted(set(kept["strike"])) == [90.0, 110.0] and hidden == 3
    # both contracts of a kept strike stay (the ladder shows the row)
    assert len(kept) == 4
    # only out-of-the-money contracts qualify: at z = +2 the call does, the put does not
    q = StrikeFilter(sigma=2.0).qualifies(f)
    assert q[(f["strike"] == 110.0).to_numpy() & (f["kind"] == "put").to_numpy()].tolist() == [False]
    assert StrikeFilter(sigma=0.0).apply(f)[1] == 0


def test_liquidity_limits_and_missing_values():
    f = fixture_frame()
    kept, _ = StrikeFilter(max_spread=0.10).apply(f)
    # every call is tight, but a limit is tested on the out-of-the-money side only: the calls above F
    assert set(kept["strike"]) == {105.0, 110.0}
    assert not StrikeFilter(max_spread=0.10, sigma=1.0).qualifies(f)[(f["kind"] == "put").to_numpy()].any()
    kept, _ = StrikeFilter(min_open_interest=100).apply(f)
    assert 110.0 not in set(kept["strike"])  # missing open interest fails a set limit


def test_filter_parsing_and_description():
    f = StrikeFilter.parse("1.5", "20%", "1,000")
    assert f == StrikeFilter(sigma=1.5, max_spread=0.20, min_open_interest=1000.0)
    assert StrikeFilter.parse("", "", "") == StrikeFilter() and not StrikeFilter().active
    assert f.describe() == ("1.5σ or more out of the money · spread ≤ 20% · OI ≥ 1,000"
                            " · limits tested on the out-of-the-money side")
    assert f.describe(ascii_only=True).isascii()
    for bad in (("x", "", ""), ("-1", "", ""), ("", "nan", ""), ("inf", "", "")):
        with pytest.raises(ChainTriageError):
            StrikeFilter.parse(*bad)


def test_confidence_steps_stop_at_the_ends():
    one_sigma = 0.6826894921370859  # N(1) - N(-1) [L] REFERENCE §2
    assert CONFIDENCE_LEVELS == (one_sigma, 0.80, 0.90, 0.95, 0.99)
    seq = [CONFIDENCE_LEVELS[0]]
    for _ in range(6):
        seq.append(step_confidence(seq[-1], +1))
    assert seq == [one_sigma, 0.8, 0.9, 0.95, 0.99, 0.99, 0.99]
    assert step_confidence(one_sigma, -1) == one_sigma
    assert step_confidence(0.85, +1) == 0.9 and step_confidence(0.85, -1) == 0.8
    assert [fmt_confidence(c) for c in CONFIDENCE_LEVELS] == ["68.27%", "80%", "90%", "95%", "99%"]


def test_width_plan_keeps_the_important_columns_and_the_plot_when_it_fits():
    cols = list(DEFAULT_COLUMNS)
    full = ladder_width(cols, 8)
    assert full == 2 * (9 + 9 + 7 + 8 + 7 + 7) + 14
    shown, out = fit_columns(cols, 79, 8)
    assert shown == ["bid", "iv", "sigma", "p_beyond"] and ladder_width(shown, 8) <= 79  # one quote, the odds
    assert {"bid", "ask", "sigma", "p_beyond"} <= set(fit_columns(cols, 95, 8)[0])  # both quotes once they fit
    assert shown == [c for c in cols if c in shown] and set(shown) | set(out) == set(cols)
    assert fit_columns(cols, 10, 8)[0] == ["bid"]  # always one column: the quote first
    wide = plan_layout(200, cols, 8)
    assert wide.columns == cols and wide.plot_width == 200 - full - 1
    narrow = plan_layout(80, cols, 8)
    assert narrow.plot_width == 0 and narrow.left_out
    # The plot yields before the quotes: a remembered "shown" at 80 columns keeps the ladder whole.
    assert plan_layout(80, cols, 8, PLOT_SHOWN).plot_width == 0
    assert plan_layout(80, cols, 8, PLOT_SHOWN).plot_squeezed
    assert plan_layout(200, cols, 8, PLOT_HIDDEN).plot_width == 0
    mid = plan_layout(130, cols, 8)
    assert mid.plot_width == 0 and mid.columns == cols  # auto: every chosen column before the plot
    shown = plan_layout(130, cols, 8, PLOT_SHOWN)
    assert shown.plot_width == MIN_PLOT and ladder_width(shown.columns, 8) + 1 <= 130 - MIN_PLOT
    assert {"bid", "ask", "sigma", "p_beyond"} <= set(shown.columns)


def test_pieces_pack_into_lines_without_splitting_a_piece():
    pieces = [Text("alpha beta"), Text("gamma"), Text("delta epsilon zeta")]
    lines = [t.plain for t in pack_pieces(pieces, 20)]
    assert lines == [" alpha beta  gamma", " delta epsilon zeta"]
    assert [t.plain for t in pack_pieces(pieces, 200)] == [" alpha beta  gamma  delta epsilon zeta"]
    cut = pack_pieces([Text("x" * 50)], 10)
    assert len(cut) == 1 and cut[0].cell_len <= 10 and cut[0].plain.endswith("~")
    assert [t.plain for t in pack_pieces([], 10)] == [" "]


def test_liquidity_limits_follow_the_side_read():
    f = fixture_frame()
    calls = StrikeFilter(max_spread=0.10, side="calls")
    # calls chosen: every tight call counts, in the money or not
    assert set(calls.apply(f)[0]["strike"]) == {90.0, 95.0, 100.0, 105.0, 110.0}
    assert "limits tested on the calls" in calls.describe()
    assert "out-of-the-money side" in StrikeFilter(max_spread=0.10).describe()
