"""The price history reader: header matching, mapping files, and a finding for every row.

Oracle: the accounting rule of DESIGN.md "Snapshot file", applied to history
files by the issue [D]; the trading calendar of REFERENCE.md section 8 [V]
(Thanksgiving 2026-11-26 is no gap).
"""

from __future__ import annotations

import numpy as np
import pytest

from chaintriage.core.findings import LEFT_OUT, NOTE, WARNING, ChainTriageError
from chaintriage.core.history_file import HistoryFileError, load_history, load_history_column_map

GOOD = (
    "date,open,high,low,close,volume\n"
    "2026-11-23,100,101,99,100.5,1000\n"
    "2026-11-24,100.5,102,100,101,1200\n"
    "2026-11-25,101,102.5,100.5,102,900\n"
    "2026-11-27,102,103,101,102.5,400\n"   # 26 Nov is Thanksgiving: no gap
    "2026-11-30,102.5,104,102,103,1100\n"
)


def _write(tmp_path, text, name="hist.csv"):
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


def _by_line(load):
    out = {}
    for f in load.findings:
        if f.line is not None:
            out.setdefault(f.line, []).append(f)
    return out


def test_clean_file_accepts_every_row_in_date_order(tmp_path):
    load = load_history(_write(tmp_path, GOOD), underlying="QRTZ")
    assert load.rows_read == 5 and load.rows_accepted == 5
    assert not [f for f in load.findings if f.severity != NOTE]
    (h,) = load.histories
    assert h.underlying == "QRTZ"
    assert list(h.bars["close"]) == [100.5, 101, 102, 102.5, 103]
    assert h.last_close == 103 and str(h.last_date.date()) == "2026-11-30"


def test_each_row_problem_has_its_own_line(tmp_path):
    text = (
        "Date,Open,High,Low,Close,Volume\n"
        "2026-11-23,100,101,99,100.5,1000\n"        # 2 ok
        "2026-11-24,100.5,102,100,101,x\n"          # 3 volume warning
        "2026-11-24,100.5,102,100,101,5\n"          # 4 duplicate date
        "2026-11-25,100.5,99,100,101,5\n"           # 5 high below low
        "2026-11-27,101,103,100,104,5\n"            # 6 close outside range
        "2026-11-30,101,103,100,-1,5\n"             # 7 non-positive close
        "2026-11-20,abc,103,100,102,5\n"            # 8 open not a number; out of order
        "2026-12-02,101,103,100,102,5\n"            # 9 after the snapshot
        "2026-11-31,101,103,100,102,5\n"            # 10 impossible date
        "2026-12-01,101,103,100,nan,5\n"            # 11 close not finite
        "2026-12-01,101,103\n"                      # 12 short row
        "2026-11-13,101,103,100,102,5\n"            # 13 gap: 16-19 Nov missing (4 trading days)
        "2026-11-17,0,103,100,102,5\n"              # 14 open not positive
    )
    load = load_history(_write(tmp_path, text), underlying="QRTZ", until="2026-12-01T14:30:00-05:00")
    lines = _by_line(load)
    assert load.rows_read == 13
    left = {f.line for f in load.findings if f.severity == LEFT_OUT}
    assert left == {4, 7, 9, 10, 11, 12}
    assert load.rows_accepted == 13 - len(left)
    assert "duplicate of line 3" in lines[4][0].reason
    assert "after the snapshot date 2026-12-01" in lines[9][0].reason
    assert "high 99 is below low 100" in lines[5][0].reason
    assert "outside the day's low-high" in lines[6][0].reason
    assert "not a number" in lines[8][0].reason and lines[8][0].severity == WARNING
    assert "not positive" in lines[14][0].reason and lines[14][0].severity == WARNING
    # 13 Nov -> 17 Nov skips Mon 16 Nov only: one trading day
    gap = [f for f in load.findings if "gap" in f.reason]
    assert len(gap) == 2 and {f.line for f in gap} == {14, 8}
    assert any("3 trading days missing between 2026-11-20 and 2026-11-13" in f.reason or
               "1 trading day missing between 2026-11-13 and 2026-11-17" in f.reason for f in gap)
    (h,) = load.histories
    bars = h.bars
    assert (np.diff(bars["date"].to_numpy().astype(np.int64)) > 0).all()
    assert bars.loc[bars["source_line"] == 5, ["open", "high", "low"]].isna().all(axis=None)
    assert bars.loc[bars["source_line"] == 5, "close"].item() == 101
    assert any("not in date order" in f.reason for f in load.findings)


def test_gap_counts_missing_trading_days(tmp_path):
    text = "date,close\n2026-11-02,100\n2026-11-09,101\n"  # 3..6 Nov missing: 4 trading days
    load = load_history(_write(tmp_path, text), underlying="Q")
    (gap,) = [f for f in load.findings if "gap" in f.reason]
    assert gap.line == 3 and "4 trading days missing" in gap.reason
    assert any("no open/high/low column" in f.reason for f in load.findings)


def test_mapping_file_and_date_format(tmp_path):
    m = tmp_path / "map.toml"
    m.write_text('[columns]\ndate = "Trade Day"\nclose = "Adj Close"\nunderlying = "Sym"\n'
                 '[formats]\ndate = "%m/%d/%Y"\n', encoding="utf-8")
    text = "Sym,Trade Day,Adj Close,Close\nQRTZ,11/23/2026,10,11\nQRTZ,11/24/2026,10.5,11\nMNOP,11/24/2026,5,6\n"
    load = load_history(_write(tmp_path, text), column_map=m)
    assert sorted(h.underlying for h in load.histories) == ["MNOP", "QRTZ"]
    assert list(load.get("QRTZ").bars["close"]) == [10, 10.5]
    assert any("columns not used: 'Close'" in f.reason for f in load.findings)
    with pytest.raises(ChainTriageError, match="unknown column 'strike'"):
        bad = tmp_path / "bad.toml"
        bad.write_text('[columns]\nstrike = "K"\n', encoding="utf-8")
        load_history_column_map(bad)


@pytest.mark.parametrize("text, reason", [
    ("", "empty"),
    ("date,open\n2026-01-02,3\n", "required column(s) missing: close"),
    ("date,close,Close\n2026-01-02,3,4\n", "appears more than once"),
    ("date,close\n", "no data rows"),
    ("date,close\nx,1\ny,2\n", "all 2 rows were left out"),
])
def test_unusable_files_raise_the_project_error(tmp_path, text, reason):
    with pytest.raises(HistoryFileError, match=".*") as info:
        load_history(_write(tmp_path, text))
    assert reason in str(info.value) and str(info.value).startswith(str(tmp_path))


def test_missing_file_and_folder(tmp_path):
    with pytest.raises(HistoryFileError, match="no such file"):
        load_history(tmp_path / "nope.csv")
    with pytest.raises(HistoryFileError, match="directory"):
        load_history(tmp_path)


def test_bar_of_the_snapshot_day_is_left_out_when_the_snapshot_comes_before_the_close(tmp_path):
    text = "date,close\n2026-11-30,100\n2026-12-01,101\n"
    p = _write(tmp_path, text)
    # 14:30 New York, mid-session: the 1 December close is still to come [D]
    load = load_history(p, underlying="Q", until="2026-12-01T14:30:00-05:00")
    (left,) = [f for f in load.findings if f.severity == LEFT_OUT]
    assert left.line == 3 and "close (16:00 New York) comes after the snapshot time" in left.reason
    # after the close, and with a plain date, the day's bar is kept
    assert load_history(p, underlying="Q", until="2026-12-01T16:30:00-05:00").rows_accepted == 2
    assert load_history(p, underlying="Q", until="2026-12-01").rows_accepted == 2
