"""The events file: every row accepted or left out with file, line and reason."""

from __future__ import annotations

import datetime as dt

import pytest

from chaintriage.core.event_file import read_events_file, read_events_files
from chaintriage.core.events import AFTER_CLOSE, BEFORE_OPEN
from chaintriage.core.findings import ChainTriageError


def _write(tmp_path, text: str, name: str = "events.csv"):
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


def test_rows_are_read_with_their_timing_and_label(tmp_path):
    p = _write(tmp_path, "Underlying,Date,Timing,Label\nTSTX,2027-01-12,amc,Q4 results\n"
                         "tstx,2027-04-20,Before-Open,\nQRTZ,2027-02-02,,\n")
    events, findings = read_events_file(p)
    assert findings == []
    assert [(e.underlying, e.date, e.timing, e.label) for e in events] == [
        ("TSTX", dt.date(2027, 1, 12), AFTER_CLOSE, "Q4 results"),
        ("tstx", dt.date(2027, 4, 20), BEFORE_OPEN, ""),
        ("QRTZ", dt.date(2027, 2, 2), AFTER_CLOSE, ""),
    ]
    assert events[0].source.endswith("events.csv:2")


def test_bad_rows_are_left_out_with_line_and_reason(tmp_path):
    p = _write(tmp_path, "underlying,date,timing,label\n"
                         "TSTX,2027-01-12,amc,ok\n"       # 2
                         "TSTX,2027-02-30,amc,bad\n"      # 3 impossible date
                         ",2027-03-01,amc,x\n"             # 4 no underlying
                         "TSTX,2027-03-02,noon,x\n"        # 5 bad timing
                         "TSTX,2027-01-12,after_close,dup\n"  # 6 repeat of line 2
                         "TSTX,2027-03-03,amc,x,extra\n")  # 7 extra field
    events, findings = read_events_file(p)
    assert [e.date for e in events] == [dt.date(2027, 1, 12)]
    got = {f.line: f.reason for f in findings}
    assert set(got) == {3, 4, 5, 6, 7}
    assert "2027-02-30" in got[3] and "underlying is empty" in got[4] and "noon" in got[5]
    assert "line 2" in got[6] and "more fields" in got[7]


def test_unusable_files_raise_the_projects_error(tmp_path):
    with pytest.raises(ChainTriageError, match="no column 'date'"):
        read_events_file(_write(tmp_path, "underlying,when\nTSTX,2027-01-12\n"))
    with pytest.raises(ChainTriageError, match="no such file"):
        read_events_file(tmp_path / "missing.csv")
    with pytest.raises(ChainTriageError, match="no usable event row"):
        read_events_file(_write(tmp_path, "underlying,date\nTSTX,soon\n", "bad.csv"))
    events, findings, errors = read_events_files([tmp_path / "missing.csv",
                                                  _write(tmp_path, "underlying,date\nTSTX,2027-01-12\n", "ok.csv")])
    assert len(events) == 1 and len(errors) == 1 and findings == []


def test_control_characters_in_labels_are_removed(tmp_path):
    p = _write(tmp_path, "underlying,date,label\nTSTX,2027-01-12,\"\x1b[31mred\x07 [b]x[/b]\"\n")
    (event,), _ = read_events_file(p)
    assert "\x1b" not in event.label and "\x07" not in event.label
    assert "[b]x[/b]" in event.label  # text stays text; display code never reads it as markup
