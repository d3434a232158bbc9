"""The vols-by-expiry screen: the at-the-money term structure, forward vols and scheduled events.

Top: the chart (ATM vol, ex-event vol and forward vol against time, events
marked); then the implied move of each event; then one row per expiry. Keys
move along the expiries; Enter opens that expiry's ladder. The numbers come
from ``core.term_structure``; this module only lays them out.
"""

from __future__ import annotations

from typing import Callable, Sequence

import numpy as np
import pandas as pd
from rich.style import Style
from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.screen import Screen
from textual.widgets import DataTable, Static

from chaintriage.core.term_structure import TermStructure
from chaintriage.tui import formatting as fm
from chaintriage.tui.screens.common import close, plain
from chaintriage.tui.themes import FALLBACK_THEME, ChainTheme
from chaintriage.tui.widgets.key_line import KeyLine
from chaintriage.tui.widgets.term_chart import ChartStyles, legend, term_chart

#: Columns of the expiry table.
TERM_TABLE_COLUMNS = ("expiry", "days", "ATM vol", "fwd vol", "ex-event vol", "event var", "events")

CAUTION = ("An implied move is the market's price of an event, not a prediction; "
           "event dates can be wrong or move. Model outputs, not advice.")


def chart_styles(theme: ChainTheme | None) -> ChartStyles:
    """The chart's styles from a theme's colours."""
    c = (theme or FALLBACK_THEME).colors
    return ChartStyles(text=Style(color=c["text"]), dim=Style(color=c["dim"]),
                       atm=Style(color=c["accent"], bold=True), ex_event=Style(color=c["otm_call"]),
                       forward=Style(color=c["otm_put"]), event=Style(color=c["warning"], bold=True))


def past_move_lines(moves, ascii_only: bool = False) -> list[Text]:
    """The underlying's past moves on its past event sessions (``core.event_moves.PastEventMoves``)."""
    line = Text(" ", no_wrap=True, overflow="ellipsis")
    if moves is None:
        line.append("past moves: give past event dates (--events) with the price history", style="dim")
        return [line]
    if not moves.used:
        line.append("past moves: no past event date falls inside the price history", style="dim")
        return [line]
    line.append(f"past {moves.used} event sessions (close to close): ")
    line.append(f"mean |move| {100 * moves.mean_abs:.1f}%", style="bold")
    line.append(f", rms {100 * moves.rms:.1f}%")
    each = Text("   newest first: " + " ".join(f"{100 * m:+.1f}" for m in moves.moves()) + " (%)",
                no_wrap=True, overflow="ellipsis")
    return [line, each]


def event_lines(ts: TermStructure, spot: float, ascii_only: bool = False, past_moves=None,
                with_history: bool = False) -> list[Text]:
    """One line per event: letter, name, date and timing, the one-sd and expected absolute move; then the
    past moves on past event dates when a price history is loaded (``with_history``)."""
    lines = []
    pm = "+/-" if ascii_only else "±"
    for i, est in enumerate(ts.events):
        letter = chr(ord("A") + i % 26)
        first = est.events[0]
        line = Text(no_wrap=True, overflow="ellipsis")
        line.append(f" {letter} ", style="bold")
        line.append(fm.clean_text(est.name))
        line.append(f"  {first.date:%Y-%m-%d} {first.timing_text}")
        lines.append(line)
        line = Text("   ", no_wrap=True, overflow="ellipsis")
        if np.isfinite(est.variance):
            line.append(f"one-sd move {pm}{100 * est.move:.1f}% ({pm}{fm.fmt_level(spot * est.move, ascii_only=ascii_only)})")
            line.append(f"  expected |move| {100 * est.expected_abs_move:.1f}% "
                        f"({fm.fmt_level(spot * est.expected_abs_move, ascii_only=ascii_only)})")
            if est.method != "fit":
                line.append(f"  [{est.method}]")
        else:
            line.append("move not readable from this chain")
        lines.append(line)
    if not lines:
        lines.append(Text(" no scheduled events for this underlying (open with --events FILE or --event)",
                          no_wrap=True, overflow="ellipsis"))
    fit = Text(no_wrap=True, overflow="ellipsis")
    if np.isfinite(ts.ordinary_vol):
        fit.append(f" ordinary (ex-event) vol {100 * ts.ordinary_vol:.1f}%")
        if ts.events and np.isfinite(ts.fit_rmse):
            fit.append(f", fit {ts.fit_rmse:.2f} vol pts over {ts.fitted_expiries} expiries")
    lines.append(fit)
    if ts.events and (with_history or past_moves is not None):
        lines.extend(past_move_lines(past_moves, ascii_only))
    return lines


def _vol(x: float, ascii_only: bool) -> str:
    return fm.fmt_vol(x, ascii_only=ascii_only)


class TermStructureScreen(Screen):
    """Vols by expiry for one snapshot; Enter calls ``on_choose(expiry)`` and closes."""

    BINDINGS = [
        Binding("escape,q,y", "close", "close"),
        Binding("enter", "choose", "open expiry"),
        Binding("j", "cursor(1)", "down", show=False),
        Binding("k", "cursor(-1)", "up", show=False),
    ]

    def __init__(self, title: str, ts: TermStructure, spot: float, trading_days: Sequence[float],
                 current: pd.Timestamp | None, on_choose: Callable[[pd.Timestamp], None], *,
                 theme: ChainTheme | None = None, ascii_only: bool = False, past_moves=None,
                 with_history: bool = False) -> None:
        super().__init__()
        self._past_moves = past_moves
        self._with_history = with_history
        self._title = title
        self._ts = ts
        self._spot = spot
        self._days = list(trading_days)
        self._current = current
        self._on_choose = on_choose
        self._theme = theme
        self._ascii = ascii_only

    def compose(self) -> ComposeResult:
        head = Text(" vols by expiry: ", style="bold")
        head.append(fm.clean_text(self._title))
        yield Static(head, classes="title")
        yield Static(Text(""), id="term-chart")
        yield Static(legend(self._ascii, chart_styles(self._theme), with_events=bool(self._ts.events)),
                     id="term-legend")
        yield Static(Text("\n").join(event_lines(self._ts, self._spot, self._ascii, self._past_moves,
                                                     self._with_history)), id="term-events")
        yield DataTable(id="term-table", cursor_type="row", zebra_stripes=True)
        yield Static(Text(CAUTION, style="dim"), id="term-caution")
        yield KeyLine()

    def on_mount(self) -> None:
        table = self.query_one("#term-table", DataTable)
        table.add_columns(*TERM_TABLE_COLUMNS)
        frame = self._ts.table
        for i, row in enumerate(frame.itertuples(index=False)):
            days = self._days[i] if i < len(self._days) else float("nan")
            table.add_row(
                plain(fm.fmt_date(row.expiry, ascii_only=self._ascii)),
                Text(fm.fmt_count(days, ascii_only=self._ascii), justify="right"),
                Text(_vol(row.atm_iv, self._ascii), justify="right"),
                Text(_vol(row.forward_vol, self._ascii), justify="right"),
                Text(_vol(row.ex_event_vol, self._ascii), justify="right"),
                Text(f"{row.event_variance:.5f}" if np.isfinite(row.event_variance) else
                     fm.placeholder(ascii_only=self._ascii), justify="right"),
                plain(row.events),
            )
        if self._current is not None:
            hits = np.flatnonzero(pd.DatetimeIndex(frame["expiry"]) == pd.Timestamp(self._current))
            if hits.size:
                table.move_cursor(row=int(hits[0]))
        table.focus()
        self._draw_chart()

    def on_resize(self) -> None:
        self._draw_chart()

    def _draw_chart(self) -> None:
        chart = self.query_one("#term-chart", Static)
        width = max(self.size.width - 2, 20)
        height = max(min(14, self.size.height - 14 - 2 * len(self._ts.events)), 6)
        frame = self._ts.table
        rows = term_chart(frame["t_years"], {"atm": frame["atm_iv"], "ex_event": frame["ex_event_vol"],
                                             "forward": frame["forward_vol"]},
                          [e.t_years for e in self._ts.events], width, height, ascii_only=self._ascii,
                          styles=chart_styles(self._theme))
        chart.update(Text("\n").join(rows))

    def action_cursor(self, step: int) -> None:
        table = self.query_one("#term-table", DataTable)
        table.move_cursor(row=max(0, table.cursor_row + step))

    def action_choose(self) -> None:
        table = self.query_one("#term-table", DataTable)
        frame = self._ts.table
        if not len(frame):
            return
        expiry = pd.Timestamp(frame["expiry"].iloc[max(0, min(table.cursor_row, len(frame) - 1))])
        if close(self):
            self._on_choose(expiry)

    def on_data_table_row_selected(self, event: DataTable.RowSelected) -> None:
        self.action_choose()

    def action_close(self) -> None:
        close(self)

