"""The shipped demo price histories are reproducible and fit their snapshots.

Invented data: these tests prove the demo files are well-formed and match the
demo chains; they prove nothing about chaintriage's correctness. Trading days
come from the US exchange calendar of REFERENCE.md section 8 [V].
"""

from __future__ import annotations

import subprocess
import sys
from importlib.resources import files
from pathlib import Path

import numpy as np
import pandas as pd

from chaintriage.core.findings import LEFT_OUT, WARNING
from chaintriage.core.history_file import load_history
from chaintriage.core.loading import load_file
from chaintriage.demo_chains import make_demo as md
from chaintriage.demo_chains import make_demo_history as mh

DEMO_DIR = Path(str(files("chaintriage.demo_chains")))
HISTORY_DIR = DEMO_DIR / mh.HISTORY_DIR


def test_generator_reproduces_the_shipped_histories_and_leaves_the_chains_alone(tmp_path):
    before = {p.name: p.read_bytes() for p in DEMO_DIR.glob("*.csv")}
    subprocess.run([sys.executable, "-m", "chaintriage.demo_chains.make_demo_history", "--out", str(tmp_path)],
                   check=True, capture_output=True)
    for style in mh.STYLES:
        assert (tmp_path / mh.file_name(style)).read_bytes() == (HISTORY_DIR / mh.file_name(style)).read_bytes()
    assert {p.name: p.read_bytes() for p in DEMO_DIR.glob("*.csv")} == before


def test_histories_load_cleanly_and_end_at_the_snapshot_spot():
    for style in mh.STYLES:
        snap = load_file(DEMO_DIR / md.file_name(style.underlying)).snapshots[0]
        load = load_history(HISTORY_DIR / mh.file_name(style), until=snap.as_of)
        assert not [f for f in load.findings if f.severity in (LEFT_OUT, WARNING)]
        (h,) = load.histories
        assert h.underlying == snap.underlying
        assert h.last_close == snap.spot
        assert h.last_date < snap.as_of.tz_localize(None)
        assert len(h.bars) > 750  # enough for a 252-day cone


def test_ospx_gaps_at_its_past_event_dates():
    load = load_history(HISTORY_DIR / "ospx_history.csv")
    b = load.histories[0].bars
    gap = np.abs(np.log(b["open"].to_numpy()[1:] / b["close"].to_numpy()[:-1]))
    dates = b["date"].to_numpy()[1:]
    events = mh.event_days(mh.STYLES[1], b["date"].to_numpy().astype("datetime64[D]"))[1:]
    assert events.sum() >= 12
    # every event day is a Wednesday after a Tuesday release, and the median event gap dwarfs ordinary ones
    assert (pd.DatetimeIndex(dates[events]).day_of_week == 2).all()
    assert np.median(gap[events]) > 4 * np.median(gap[~events])
