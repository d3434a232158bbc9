"""Past moves on past event dates (core.event_moves).

Sources:
- A constructed history with known log returns on known dates: the move of an
  after-close event is the next session's close-to-close return, of a before-open
  event its own day's (the timing convention of REFERENCE.md s.10 and
  core.events) [D]; mean absolute and root mean square worked by hand [D].
- The demo OSPX history: the sessions its generator gapped (make_demo_history.event_days,
  an independent path to the dates) and their returns read straight from the CSV with
  pandas [D]. Invented data: this checks the plumbing, not correctness.
"""

from __future__ import annotations

import datetime as dt
import math
from importlib.resources import files
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from chaintriage.core.event_moves import past_event_moves
from chaintriage.core.events import AFTER_CLOSE, BEFORE_OPEN, Event


def _bars(dates, returns):
    close = 100.0 * np.exp(np.concatenate(([0.0], np.cumsum(returns))))
    d = pd.to_datetime(dates)
    return pd.DataFrame({"date": d, "open": close, "high": close, "low": close, "close": close})


# Tue 2026-03-03 .. Fri 2026-03-13 (weekdays): returns on each bar after the first
DATES = ["2026-03-02", "2026-03-03", "2026-03-04", "2026-03-05", "2026-03-06", "2026-03-09", "2026-03-10",
         "2026-03-11", "2026-03-12", "2026-03-13"]
RETURNS = [0.01, -0.02, 0.08, 0.005, -0.06, -0.003, 0.002, 0.0, 0.05]


def test_moves_on_constructed_history_by_hand():
    bars = _bars(DATES, RETURNS)
    events = [
        Event("TSTX", dt.date(2026, 3, 4), AFTER_CLOSE, "q1"),    # news after 03-04 close: session 03-05, +0.08
        Event("TSTX", dt.date(2026, 3, 9), BEFORE_OPEN, "q2"),    # before 03-09 open: that session, -0.06
        Event("TSTX", dt.date(2026, 3, 6), AFTER_CLOSE, "fri"),   # after Friday close: Monday 03-09 as well
        Event("TSTX", dt.date(2026, 3, 12), AFTER_CLOSE, "q3"),   # session 03-13, +0.05
        Event("OTHER", dt.date(2026, 3, 4), AFTER_CLOSE, "x"),    # another underlying: ignored
    ]
    m = past_event_moves(bars, events, "tstx")
    # newest first
    assert list(m.table["event"]) == ["q3", "q2", "fri", "q1"]
    assert [str(d.date()) for d in m.table["session"]] == ["2026-03-13", "2026-03-09", "2026-03-09", "2026-03-05"]
    np.testing.assert_allclose(m.table["move"], [0.05, -0.06, -0.06, 0.08], atol=1e-12)
    assert m.used == 4
    assert m.mean_abs == pytest.approx((0.05 + 0.06 + 0.06 + 0.08) / 4)
    assert m.rms == pytest.approx(math.sqrt((0.05**2 + 0.06**2 * 2 + 0.08**2) / 4))
    # the last N only
    two = past_event_moves(bars, events, "TSTX", last=2)
    assert two.used == 2 and two.mean_abs == pytest.approx((0.05 + 0.06) / 2)
    np.testing.assert_allclose(two.moves(), [0.05, -0.06])


def test_events_outside_the_history_or_after_the_cut_are_left_out():
    bars = _bars(DATES, RETURNS)
    events = [Event("TSTX", dt.date(2026, 2, 20), AFTER_CLOSE, "before history"),
              Event("TSTX", dt.date(2026, 3, 13), AFTER_CLOSE, "after the last bar"),
              Event("TSTX", dt.date(2026, 3, 4), AFTER_CLOSE, "kept"),
              Event("TSTX", dt.date(2026, 3, 10), AFTER_CLOSE, "after the cut")]
    m = past_event_moves(bars, events, "TSTX", before=pd.Timestamp("2026-03-09 10:00", tz="America/New_York"))
    assert list(m.table["event"]) == ["kept"]
    assert m.findings and "2026-02-20" in m.findings[0].reason
    # a gap: the next bar a week later is not the event's session
    gap = _bars(["2026-03-02", "2026-03-03", "2026-03-16"], [0.01, 0.2])
    g = past_event_moves(gap, [Event("TSTX", dt.date(2026, 3, 4), AFTER_CLOSE)], "TSTX")
    assert g.used == 0 and math.isnan(g.mean_abs) and g.findings
    none = past_event_moves(bars, [], "TSTX")
    assert none.used == 0 and none.table.empty


def test_demo_ospx_history_moves_are_its_gapped_sessions():
    from chaintriage.core.event_file import read_events_file
    from chaintriage.core.history_file import load_history
    from chaintriage.demo_chains import make_demo_history as mh

    root = Path(str(files("chaintriage.demo_chains")))
    raw = pd.read_csv(root / "history" / "ospx_history.csv")
    dates = raw["date"].to_numpy().astype("datetime64[D]")
    gapped = mh.event_days(mh.STYLES[1], dates)
    ret = np.log(raw["close"].to_numpy()[1:] / raw["close"].to_numpy()[:-1])
    expected = ret[gapped[1:]][::-1]  # newest first
    events, _ = read_events_file(root / "demo_events.csv")
    h = load_history(root / "history" / "ospx_history.csv").histories[0]
    m = past_event_moves(h.bars, events, "OSPX", last=50, before=pd.Timestamp("2026-12-01 14:30", tz="America/New_York"))
    assert m.used == gapped.sum() >= 12
    np.testing.assert_allclose(m.table["move"], expected, rtol=1e-12)
    eight = past_event_moves(h.bars, events, "OSPX", before=pd.Timestamp("2026-12-01"))
    assert eight.used == 8
    assert eight.mean_abs == pytest.approx(np.mean(np.abs(expected[:8])))
