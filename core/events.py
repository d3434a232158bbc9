"""Scheduled events (earnings releases and the like) per underlying.

An event is a date and a timing: ``after_close`` (the news lands after that
day's close, so the next session's open carries it) or ``before_open`` (it
lands before that day's open). An expiry carries an event when it settles
after the news: a PM (close) settlement on the event day carries a
before-open event but not an after-close one; an AM (open) settlement on the
event day carries a before-open event.

Events come from an events file (read by ``loading.read_events_file``) or
from the command line (``parse_event_option``: ``UNDERLYING:DATE[:amc|bmo]``).
Without a timing an event is taken to land after the close (the usual time
of an earnings release; stated in every place that shows it).
"""

from __future__ import annotations

import datetime as _dt
import re
from dataclasses import dataclass

import numpy as np
import pandas as pd

from .exchange_calendar import TZ
from .findings import NOTE, WARNING, ChainTriageError, Finding

AFTER_CLOSE = "after_close"
BEFORE_OPEN = "before_open"
TIMINGS = (AFTER_CLOSE, BEFORE_OPEN)

#: Spellings accepted for the timing, in files and on the command line.
TIMING_WORDS = {
    "after_close": AFTER_CLOSE, "amc": AFTER_CLOSE, "after": AFTER_CLOSE,
    "before_open": BEFORE_OPEN, "bmo": BEFORE_OPEN, "before": BEFORE_OPEN,
}

#: New York wall-clock minutes at which the news is taken to land.
_AFTER_CLOSE_MIN = 16 * 60
_BEFORE_OPEN_MIN = 9 * 60 + 30

_DATE_RE = re.compile(r"\d{4}-\d{2}-\d{2}")


@dataclass(frozen=True)
class Event:
    """One scheduled event of one underlying.

    ``date`` is the calendar date of the news (New York); ``timing`` is
    ``after_close`` or ``before_open``; ``label`` is plain text (may be empty);
    ``source`` says where it came from (``file:line`` or ``--event``).
    """

    underlying: str
    date: _dt.date
    timing: str = AFTER_CLOSE
    label: str = ""
    source: str = ""

    def __post_init__(self) -> None:
        if self.timing not in TIMINGS:
            raise ValueError(f"unknown event timing {self.timing!r}")

    @property
    def name(self) -> str:
        """Plain-text name: the label, or ``event 2027-01-12`` without one."""
        return self.label or f"event {self.date:%Y-%m-%d}"

    @property
    def timing_text(self) -> str:
        """``after the close`` or ``before the open``."""
        return "after the close" if self.timing == AFTER_CLOSE else "before the open"

    def instant(self) -> pd.Timestamp:
        """When the news lands: the event day's 16:00 (after close) or 09:30 (before open), New York."""
        minutes = _AFTER_CLOSE_MIN if self.timing == AFTER_CLOSE else _BEFORE_OPEN_MIN
        naive = pd.Timestamp(self.date) + pd.Timedelta(minutes=minutes)
        return naive.tz_localize(TZ)


def parse_timing(text: str) -> str | None:
    """``after_close`` / ``before_open`` from any accepted spelling (None when not understood)."""
    word = "_".join(str(text).strip().lower().replace("-", " ").replace("_", " ").split())
    return TIMING_WORDS.get(word)


def parse_date(text: str) -> _dt.date | None:
    """A ``YYYY-MM-DD`` date, or None when the text is not one (or not a real date)."""
    text = str(text).strip()
    if not _DATE_RE.fullmatch(text):
        return None
    try:
        return _dt.date.fromisoformat(text)
    except ValueError:
        return None


def parse_event_option(text: str) -> Event:
    """One ``--event`` value, ``UNDERLYING:DATE[:amc|bmo]``, as an Event.

    Raises ChainTriageError naming the value and what is wrong with it.
    """
    parts = str(text).split(":")
    if len(parts) not in (2, 3) or not parts[0].strip():
        raise ChainTriageError(f"--event {text!r}: write UNDERLYING:YYYY-MM-DD, optionally :amc or :bmo")
    date = parse_date(parts[1])
    if date is None:
        raise ChainTriageError(f"--event {text!r}: {parts[1]!r} is not a date written YYYY-MM-DD")
    timing = AFTER_CLOSE
    if len(parts) == 3:
        found = parse_timing(parts[2])
        if found is None:
            raise ChainTriageError(f"--event {text!r}: timing {parts[2]!r} is not amc (after the close) "
                                   "or bmo (before the open)")
        timing = found
    return Event(parts[0].strip(), date, timing, "", "--event")


def events_for(events, underlying: str) -> list[Event]:
    """The events of one underlying (names compared without regard to case), sorted by time, duplicates once."""
    want = underlying.strip().casefold()
    seen: dict[tuple, Event] = {}
    for e in events:
        if e.underlying.strip().casefold() == want:
            seen.setdefault((e.date, e.timing), e)
    return sorted(seen.values(), key=lambda e: e.instant())


def carried(events, settlement: pd.DatetimeIndex) -> np.ndarray:
    """Bool matrix [expiry, event]: does the expiry settling at ``settlement`` (tz-aware) carry the event?"""
    settle_ns = np.asarray(settlement.tz_convert("UTC").asi8 if settlement.tz is not None
                           else settlement.asi8, dtype=np.int64)
    inst = np.array([e.instant().tz_convert("UTC").value for e in events], dtype=np.int64)
    if inst.size == 0:
        return np.zeros((settle_ns.size, 0), dtype=bool)
    before_open = np.array([e.timing == BEFORE_OPEN for e in events])
    # An open settlement at 09:30 carries news that landed before that open.
    return np.where(before_open[None, :], settle_ns[:, None] >= inst[None, :],
                    settle_ns[:, None] > inst[None, :])


def past_event_finding(event: Event) -> Finding:
    """The finding for an event that lies before the snapshot time."""
    return past_events_finding([event])


def past_events_finding(events) -> Finding:
    """One note for the events that lie before the snapshot time (an events file may list past
    releases on purpose: with a price history they give the underlying's past moves)."""
    events = list(events)
    shown = "; ".join(f"{e.name} on {e.date:%Y-%m-%d} ({e.timing_text})" for e in events[-4:])
    more = f" and {len(events) - 4} earlier" if len(events) > 4 else ""
    first = events[0]
    return Finding(NOTE, f"{shown}{more}: before the snapshot time; not used for the term structure "
                   "(with a price history they give the past moves)",
                   file=first.source or None, underlying=first.underlying)
