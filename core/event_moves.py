"""The underlying's past moves on its past event dates, from a daily price history.

For each past event (``core.events.Event``) the session that carried the news
is found in the bars: the first session after the event's date for an
``after_close`` event, the session of the event's own date for a
``before_open`` one (as ``history_compare.event_sessions``). Its move is the
close-to-close log return over that session, ln(C_s / C_{s-1}) (a decimal;
the opening gap ln(O_s / C_{s-1}) is given too). The move holds one ordinary
day's variance besides the event's, so it slightly overstates the event's own
move (a day at 40% a year is about 2.5%).

The summary over the last ``last`` events (8 by default): the mean absolute
move (to set beside the implied expected absolute move sqrt(2/pi) e of
``term_structure``) and the root mean square (beside the implied one-sigma
move e). Vectorised over events (searchsorted), no loop per event.

An event whose session is missing from the bars (before the history starts,
after it ends, or more than ``MAX_SESSION_GAP_DAYS`` calendar days after the
event's date: a gap in the history) is left out, with a note.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .events import AFTER_CLOSE, events_for
from .exchange_calendar import TZ
from .findings import NOTE, Finding

__all__ = ["PAST_MOVE_COLUMNS", "DEFAULT_LAST", "MAX_SESSION_GAP_DAYS", "PastEventMoves", "past_event_moves"]

#: How many of the latest past events the summary uses.
DEFAULT_LAST = 8
#: A session more than this many calendar days after the event's date is a gap in the history, not the event's.
MAX_SESSION_GAP_DAYS = 5

#: Columns of ``PastEventMoves.table`` (newest event first).
PAST_MOVE_COLUMNS: dict[str, str] = {
    "event": "the event's name (plain text)",
    "date": "the event's date (datetime64, midnight)",
    "timing": "after_close or before_open",
    "session": "the session that carried the news (datetime64, midnight)",
    "move": "close-to-close log return over that session (decimal, signed)",
    "abs_move": "|move| (decimal)",
    "gap": "opening gap ln(open / previous close) of that session (decimal, signed; NaN without an open)",
}


@dataclass
class PastEventMoves:
    """Past moves of one underlying on its event sessions, and their summary over the last ``last``.

    ``mean_abs`` and ``rms`` are decimals (NaN when no event is found); ``used``
    counts the events they rest on (at most ``last``).
    """

    underlying: str
    table: pd.DataFrame
    last: int
    mean_abs: float
    rms: float
    used: int
    findings: list[Finding] = field(default_factory=list)

    def moves(self) -> np.ndarray:
        """The signed moves of the events the summary uses, newest first (decimals)."""
        return self.table["move"].to_numpy(dtype=float)[: self.used]


def past_event_moves(bars: pd.DataFrame, events, underlying: str, *, last: int = DEFAULT_LAST,
                     before=None) -> PastEventMoves:
    """Past event moves of ``underlying`` from its daily ``bars`` (``history_file.BAR_COLUMNS``).

    ``events`` may hold other underlyings' events (only ``underlying``'s are
    used, names compared without regard to case). ``before`` (a date or
    timestamp) keeps only events dated before it (e.g. the snapshot's date);
    events after the last bar have no session and are not counted.
    """
    last = max(1, int(last))
    mine = events_for(events, underlying)
    if before is not None:
        ts = pd.Timestamp(before)
        if ts.tzinfo is not None:
            ts = ts.tz_convert(TZ).tz_localize(None)
        cut = np.datetime64(ts.date(), "D")
        mine = [e for e in mine if np.datetime64(e.date, "D") < cut]
    dates = bars["date"].to_numpy().astype("datetime64[D]")
    close = bars["close"].to_numpy(dtype=float)
    open_ = bars["open"].to_numpy(dtype=float) if "open" in bars else np.full(close.size, np.nan)
    findings: list[Finding] = []
    ev_days = np.array([np.datetime64(e.date, "D") for e in mine], dtype="datetime64[D]")
    after = np.array([e.timing == AFTER_CLOSE for e in mine], dtype=bool)
    # the session carrying the news: first bar after the day (after close) or on it (before open)
    right = np.searchsorted(dates, ev_days, side="right")
    left = np.searchsorted(dates, ev_days, side="left")
    s = np.where(after, right, left)
    inside = (s >= 1) & (s < dates.size)
    sc = np.clip(s, 1, max(dates.size - 1, 1))
    gap_days = np.where(inside, (dates[sc] - ev_days).astype(np.int64) if dates.size else 0, -1) \
        if ev_days.size else np.zeros(0, dtype=np.int64)
    ok = inside & (gap_days <= MAX_SESSION_GAP_DAYS) if ev_days.size else np.zeros(0, dtype=bool)
    missing = [e for e, good in zip(mine, ok) if not good]  # names for the note only
    if missing and dates.size:
        first, end = dates[0], dates[-1]
        shown = ", ".join(f"{e.date:%Y-%m-%d}" for e in missing[-6:])
        findings.append(Finding(NOTE, f"{len(missing)} past event(s) of {underlying} have no session in the "
                                      f"history ({first} to {end}) or fall in a gap of it: {shown}",
                                underlying=underlying))
    idx = sc[ok]
    with np.errstate(divide="ignore", invalid="ignore"):
        move = np.log(close[idx] / close[idx - 1]) if idx.size else np.zeros(0)
        gap = np.log(open_[idx] / close[idx - 1]) if idx.size else np.zeros(0)
    kept = [e for e, good in zip(mine, ok) if good]
    table = pd.DataFrame({
        "event": [e.name for e in kept],
        "date": pd.to_datetime([pd.Timestamp(e.date) for e in kept]) if kept else pd.to_datetime([]),
        "timing": [e.timing for e in kept],
        "session": dates[idx].astype("datetime64[ns]"),
        "move": move,
        "abs_move": np.abs(move),
        "gap": gap,
    }, columns=list(PAST_MOVE_COLUMNS))
    table = table.iloc[::-1].reset_index(drop=True)  # newest first
    recent = table["move"].to_numpy(dtype=float)[:last]
    used = int(recent.size)
    mean_abs = float(np.mean(np.abs(recent))) if used else float("nan")
    rms = float(np.sqrt(np.mean(recent * recent))) if used else float("nan")
    return PastEventMoves(underlying, table, last, mean_abs, rms, used, findings)
