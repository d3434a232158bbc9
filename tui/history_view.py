"""Price histories in the app, without Textual: reading the history files (the demo's when the
demo is shown), matching them to the loaded snapshots by underlying, and the history figures
of one snapshot (``ViewHistory``), computed by core off the UI thread.

Everything here is numbers from ``chaintriage.core`` (``history_compare``, ``event_moves``,
``history_odds``); this module only chooses what to ask for and caches it.
"""

from __future__ import annotations

import contextlib
import math
import threading
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field, replace
from importlib import resources
from typing import Any

import numpy as np
import pandas as pd

from chaintriage.core.event_moves import DEFAULT_LAST, PastEventMoves, past_event_moves
from chaintriage.core.findings import NOTE, ChainTriageError, Finding
from chaintriage.core.history_compare import (
    HistoryComparison,
    HistorySettings,
    compare_with_snapshot,
    summarise_history,
)
from chaintriage.core.history_file import HistoryLoads, PriceHistory, load_histories

DEMO_PACKAGE = "chaintriage.demo_chains"
#: The demo histories' folder inside the demo package.
DEMO_HISTORY_FOLDER = "history"
#: Bootstrap paths for the ladder's history columns (each probability carries its standard error).
LADDER_PATHS = 20_000
#: Simulated paths of the side pane's path picture (fewer for horizons past 120 trading days).
FAN_PATHS = 100_000


def demo_history_names() -> list[str]:
    """Names of the bundled demo price histories (CSV files in ``demo_chains/history``), sorted."""
    try:
        root = resources.files(DEMO_PACKAGE) / DEMO_HISTORY_FOLDER
        return sorted(p.name for p in root.iterdir() if p.name.lower().endswith(".csv"))
    except (ModuleNotFoundError, FileNotFoundError, NotADirectoryError):
        return []


def read_histories(paths: Sequence[str] | None, *, column_map: Any = None, until=None) -> HistoryLoads:
    """Read history files (``paths``; None: the bundled demo's) with rows up to ``until``.

    Never raises for a bad file: its error is in ``HistoryLoads.errors``.
    """
    if paths is not None:
        return load_histories(list(paths), column_map=column_map, until=until)
    names = demo_history_names()
    root = resources.files(DEMO_PACKAGE) / DEMO_HISTORY_FOLDER
    with contextlib.ExitStack() as stack:
        real = [str(stack.enter_context(resources.as_file(root / n))) for n in names]
        return load_histories(real, until=until)


def _snapshot_day(view) -> pd.Timestamp:
    return pd.Timestamp(view.snapshot.as_of.tz_localize(None).normalize())


def _last_bar_day(view) -> tuple[pd.Timestamp, bool]:
    """(the snapshot's New York date, whether that day's bar is complete: taken at or after the 16:00 close)."""
    from chaintriage.core.exchange_calendar import TZ

    as_of = pd.Timestamp(view.snapshot.as_of)
    ny = as_of.tz_convert(TZ) if as_of.tzinfo is not None else as_of
    return pd.Timestamp(ny.tz_localize(None).normalize()), ny.hour >= 16


def history_until(histories: Sequence[PriceHistory], view) -> PriceHistory | None:
    """The history of ``view``'s underlying cut to the bars before its snapshot's day (that day's too when
    the snapshot was taken after the close); None: none, or fewer than three bars left."""
    want = view.snapshot.underlying.strip().casefold()
    for h in histories:
        if h.underlying.strip().casefold() != want:
            continue
        day, closed = _last_bar_day(view)
        if h.last_date >= day:
            keep = ((h.bars["date"] <= day) if closed else (h.bars["date"] < day)).to_numpy()
            h = PriceHistory(h.underlying, h.bars[keep].reset_index(drop=True), h.findings, h.source)
        return h if len(h.bars) >= 3 else None
    return None


def _bars_after_cut(histories: Sequence[PriceHistory], cut: PriceHistory) -> int:
    """How many bars of ``cut``'s underlying ``history_until`` left out (after the snapshot's day)."""
    for h in histories:
        if h.underlying == cut.underlying:
            return max(len(h.bars) - len(cut.bars), 0)
    return 0


@dataclass
class ViewHistory:
    """One snapshot's history figures: the summary (estimators by window, the cone), the comparison
    with the snapshot (per expiry RV and IV/RV; per contract history P(beyond)), the past event moves,
    and caches of the path pictures (per expiry)."""

    history: PriceHistory
    comparison: HistoryComparison
    settings: HistorySettings
    past_moves: PastEventMoves | None
    findings: list[Finding] = field(default_factory=list)
    fans: dict = field(default_factory=dict)

    @property
    def summary(self):
        return self.comparison.summary

    def fan(self, view, expiry, progress=None, paths: int = FAN_PATHS):
        """The path fan of ``expiry`` (``core.history_odds.PathFan``), simulated once and cached (heavy:
        call off the UI thread; ``progress(share)`` is called as it goes). None when the expiry has no
        trading days or forward."""
        from chaintriage.core.history_odds import day_pool, simulate_fan

        key = pd.Timestamp(expiry)
        if key in self.fans:
            return self.fans[key]
        exp = view.annotated.expiries
        hit = np.flatnonzero(pd.DatetimeIndex(exp["expiry"]) == key)
        if not hit.size:
            return None
        row = exp.iloc[int(hit[0])]
        steps = int(max(round(float(row["trading_days"])), 1)) if np.isfinite(row["trading_days"]) else 0
        forward = float(row["forward"])
        if steps < 1 or not (forward > 0):
            return None
        b = self.history.bars
        pool = day_pool(b["high"].to_numpy(float), b["low"].to_numpy(float), b["close"].to_numpy(float))
        fan = simulate_fan(pool, float(view.snapshot.spot), forward, steps, paths=paths,
                           block=self.settings.block, seed=self.settings.seed, progress=progress)
        self.fans[key] = fan
        return fan

    def expiry_figures(self, index: int) -> tuple[int | None, float, float]:
        """(window in trading days, realised vol, IV/RV) of expiry number ``index`` (NaN when unknown)."""
        e = self.comparison.expiries
        if not 0 <= index < len(e):
            return None, math.nan, math.nan
        row = e.iloc[index]
        w = row["hist_window"]
        return (int(w) if np.isfinite(w) else None), float(row["hist_vol"]), float(row["iv_rv"])


def build_view_history(view, histories: Sequence[PriceHistory], events: Sequence = (),
                       paths: int = LADDER_PATHS) -> ViewHistory | None:
    """The history figures of ``view`` (a ``session.SnapshotView``) from the histories read, or None
    when none is of its underlying (heavy: call off the UI thread)."""
    h = history_until(histories, view)
    if h is None:
        return None
    settings = HistorySettings(basis=view.annotated.settings.basis, paths=int(paths))
    summary = summarise_history(h, settings)
    comparison = compare_with_snapshot(view.annotated, h, settings, summary=summary)
    moves = None
    findings = list(comparison.findings)
    later = _bars_after_cut(histories, h)
    if later:
        findings.append(Finding(NOTE, f"{later:,} daily bar{'s' if later != 1 else ''} of the price history "
                                f"after {h.last_date.date()} not used (the snapshot is earlier)",
                                file=h.source, underlying=h.underlying))
    mine = [e for e in events if e.underlying.strip().casefold() == h.underlying.strip().casefold()]
    if mine:
        moves = past_event_moves(h.bars, mine, h.underlying, last=DEFAULT_LAST, before=view.snapshot.as_of)
        findings += moves.findings
    return ViewHistory(h, comparison, settings, moves, findings)


class HistoryFiles:
    """The price history files of an app session, read once (every row: each snapshot's figures use
    the bars up to its own day, see ``history_until``), and the figures of each snapshot from them.

    Safe to call from several worker threads; never call it on the UI thread (it reads files).
    ``paths`` None: the bundled demo's histories.
    """

    def __init__(self, paths: Sequence[str] | None, *, column_map: Any = None) -> None:
        self.paths = None if paths is None else list(paths)
        self.column_map = column_map
        self.loads: HistoryLoads | None = None
        #: The files' own findings not yet handed to a snapshot (each goes with the first of its underlying).
        self._file_findings: list[Finding] = []
        self._lock = threading.Lock()

    def read(self, on_busy: Callable[[str], None] = lambda text: None) -> list[str]:
        """Read the files unless read already; returns the error messages of this read (never raises)."""
        with self._lock:
            if self.loads is not None:
                return []
            on_busy("reading price histories")
            try:
                loads = read_histories(self.paths, column_map=self.column_map)
            except ChainTriageError as exc:
                loads = HistoryLoads([], [])
                self.loads = loads
                return [str(exc)]
            except Exception as exc:  # never a traceback on screen
                self.loads = HistoryLoads([], [])
                return [f"could not use the price histories: {type(exc).__name__}: {exc}"]
            self.loads = loads
            self._file_findings = list(loads.findings)
            return [str(e) for e in loads.errors]

    def _take_file_findings(self, underlying: str) -> list[Finding]:
        with self._lock:
            want = underlying.strip().casefold()
            mine = [f for f in self._file_findings
                    if f.underlying is None or f.underlying.strip().casefold() == want]
            self._file_findings = [f for f in self._file_findings if f not in mine]
            return mine

    def figures(self, view, events: Sequence = ()) -> tuple[ViewHistory | None, list[Finding]]:
        """(``view``'s history figures or None, the findings that go with them), reading the files first
        if need be (heavy: off the UI thread). Never raises."""
        self.read()
        loads = self.loads
        und = view.snapshot.underlying
        mine = self._take_file_findings(und)
        try:
            vh = build_view_history(view, loads.histories, events)
        except ChainTriageError as exc:
            vh = None
            mine.append(Finding(NOTE, f"price history not used: {exc}", underlying=und))
        except Exception as exc:  # never a traceback on screen
            vh = None
            mine.append(Finding(NOTE, f"price history not used: {type(exc).__name__}: {exc}", underlying=und))
        given = {h.underlying.strip().casefold() for h in loads.histories}
        if vh is None and self.paths is not None and und.strip().casefold() not in given:
            mine.append(Finding(NOTE, f"no price history for {und!r} among the files given", underlying=und))
        return vh, mine + (vh.findings if vh is not None else [])
