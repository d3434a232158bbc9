"""The one-line contract summary and the system clipboard helper.

The contract row is a PRESENTATION FIXTURE (invented figures); the checks are
about the line's content and layout [D]. The clipboard tools are stand-in
scripts on a temporary PATH.
"""

from __future__ import annotations

import os
import stat
import sys
import time

import pandas as pd

from chaintriage.tui.strike_summary import clipboard_commands, copy_to_system_clipboard, summarize

AS_OF = pd.Timestamp("2026-12-01 14:30", tz="America/New_York")


def row(**over):
    """PRESENTATION FIXTURE: one put row with the pipeline's column names."""
    r = dict(underlying="QRTZ", expiry=pd.Timestamp("2027-01-15"), strike=95.0, kind="put",
             bid=1.20, ask=1.26, mid=1.23, iv=0.312, sigma_distance=-1.4849, p_beyond=0.081,
             p_touch=0.159, breakeven=93.77, delta=-0.1612, sell_premium=1.20, breakeven_sell=93.80,
             p_profit_sell=0.915, buy_premium=1.26, breakeven_buy=93.74, p_profit_buy=0.079, flags="wide")
    r.update(over)
    return r


def test_summary_line_content():
    """Every figure of the row, in plain words a reader outside the app understands."""
    line = summarize(row(), as_of=AS_OF, spot=100.0, forward=100.42, days=45)
    assert line == ("QRTZ 95 put, expiry 2027-01-15 (45 days) | bid 1.20 x ask 1.26, mid 1.23 | IV 31.2% | "
                    "delta -0.16 | 1.48 sigmas below the forward | chance QRTZ finishes below 95: 8.1% | "
                    "chance QRTZ trades at 95 before expiry: 15.9% | "
                    "sold at 1.20: ends ahead if QRTZ finishes above 93.80, chance 91.5% | "
                    "bought at 1.26: ends ahead if QRTZ finishes below 93.74, chance 7.9% | "
                    "spot 100.00, forward 100.42 | flags: wide | as of 2026-12-01 14:30 -05:00 | "
                    "risk-neutral model figures at expiry, not advice")


def test_summary_touch_bounds_and_missing_context():
    """Touch bounds when the row has them; no days, spot, forward or sides when not given or not quoted."""
    line = summarize(row(p_touch_low=0.12, p_touch_high=0.201, sell_premium=float("nan"), flags=""), as_of=AS_OF)
    assert "before expiry: 15.9% (any model fitting the quotes: 12.0% to 20.1%) |" in line
    assert "expiry 2027-01-15 |" in line and "spot" not in line and "sold at" not in line
    assert "bought at 1.26" in line and "flags" not in line


def test_summary_from_a_pandas_row_and_ascii():
    series = pd.Series(row(kind="c", strike=102.5, sigma_distance=0.52, breakeven=103.73))
    line = summarize(series, as_of=AS_OF, ascii_only=True)
    assert line.startswith("QRTZ 102.5 call, expiry 2027-01-15 | ")
    assert "| 0.52 sigmas above the forward |" in line and line.isascii()
    assert "chance QRTZ finishes above 102.5" in line


def test_missing_figures_and_hostile_text():
    line = summarize(row(mid=float("nan"), iv=None, sigma_distance=float("inf"),
                         underlying="QR\x1b[31mTZ\x07\n[b]x[/b]"), as_of=AS_OF)
    assert "\x1b" not in line and "\x07" not in line and "\n" not in line
    assert line.startswith("QRTZ [b]x[/b] 95 put, expiry 2027-01-15")
    assert "mid -- |" in line and "IV -- |" in line and "| -- sigmas from the forward |" in line
    assert "nan" not in line.lower() and "inf" not in line.lower()


def _tool(tmp_path, name, body):
    path = tmp_path / name
    path.write_text(f"#!{sys.executable}\n{body}\n", encoding="utf-8")
    path.chmod(path.stat().st_mode | stat.S_IXUSR)
    return str(path)


def test_copy_through_a_clipboard_tool(tmp_path):
    out = tmp_path / "clip.txt"
    tool = _tool(tmp_path, "fakeclip", f"import sys; open({str(out)!r}, 'wb').write(sys.stdin.buffer.read())")
    done = copy_to_system_clipboard("QRTZ 95 put | mid 1.23 σ", commands=[[tool]])
    assert done.ok and done.tool == tool and "copied with" in done.summary()
    assert out.read_text(encoding="utf-8") == "QRTZ 95 put | mid 1.23 σ"


def test_copy_never_raises_and_reports_failure(tmp_path):
    failing = _tool(tmp_path, "failclip", "import sys; sys.exit(3)")
    hanging = _tool(tmp_path, "slowclip", "import time; time.sleep(10)")
    assert not copy_to_system_clipboard("x", commands=[])
    assert "no clipboard tool found" in copy_to_system_clipboard("x", commands=[]).summary()
    missing = copy_to_system_clipboard("x", commands=[[str(tmp_path / "missing")]])
    assert not missing and "cannot start" in missing.summary()
    failed = copy_to_system_clipboard("x", commands=[[failing]])
    assert not failed and "exit status 3" in failed.summary()  # not "copied"
    t0 = time.monotonic()
    hung = copy_to_system_clipboard("x", commands=[[hanging]], timeout=0.5)
    assert not hung and "no answer" in hung.summary()
    assert time.monotonic() - t0 < 5
    # a failing tool is passed over for the next one
    out = tmp_path / "second.txt"
    ok = _tool(tmp_path, "okclip", f"import sys; open({str(out)!r}, 'wb').write(sys.stdin.buffer.read())")
    assert copy_to_system_clipboard("y", commands=[[failing], [ok]]).tool == ok
    assert out.read_text() == "y"


def test_tool_detection_follows_the_session():
    present = {"wl-copy", "xclip", "xsel", "pbcopy"}
    which = lambda name: f"/usr/bin/{name}" if name in present else None  # noqa: E731
    wayland = clipboard_commands({"WAYLAND_DISPLAY": "wayland-0"}, which)
    assert wayland[0] == ["wl-copy"]
    x11 = clipboard_commands({"DISPLAY": ":0"}, which)
    assert x11[0][0] == "xclip" and ["wl-copy"] not in x11
    bare = clipboard_commands({}, which)
    assert bare == [["pbcopy"]]
    assert clipboard_commands({"DISPLAY": ":0"}, lambda name: None) == []


def test_summary_shows_the_touch_bounds_when_present():
    line = summarize(row(p_touch_low=0.09, p_touch_high=0.21), as_of=AS_OF)
    assert "chance QRTZ trades at 95 before expiry: 15.9% (any model fitting the quotes: 9.0% to 21.0%) |" in line
    assert "any model" not in summarize(row(p_touch_low=float("nan"), p_touch_high=0.21), as_of=AS_OF)
