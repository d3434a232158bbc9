"""The target view: one row per expiry, the contract nearest a chosen target.

A target is a side (calls or puts) and a value of one measure of how far out
a contract is: a sigma distance out of the money, an |delta| or a P(beyond)
(``core.targets.Target``). Each expiry of the snapshot gets one row: the
contract of that side nearest the target (core's ``TargetSelector``, kept by
the ``SnapshotView``), its quote, odds, touch figures where computed, and the
economics at the bid (seller) and the ask (buyer) from
``core.trade_economics`` (columns of the annotated contract table).

Keys: 1 / 2 / 3 choose the measure, + / - step its value, v types a value,
left / right choose calls or puts, , and . move every row one strike down or
up, j / k move along the expiries, m sets a contract aside, c copies its
summary, Enter opens that
expiry's ladder on that strike, Esc closes. This module only lays figures out.
"""

from __future__ import annotations

import math
import re
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd
from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen, Screen
from textual.widgets import Input, Static

from chaintriage.core.findings import ChainTriageError
from chaintriage.core.targets import Target
from chaintriage.tui import formatting as fm
from chaintriage.tui.screens.common import close, plain
from chaintriage.tui.session import SIGMA_LIMIT, SnapshotView
from chaintriage.tui.widgets.key_line import KeyLine
from chaintriage.tui.widgets.line_table import LineTable

#: Measures in the order keys 1, 2, 3 choose them.
MEASURE_KEYS = ("sigma", "delta", "beyond")
#: One press of + or - moves the value this much (sigmas; |delta| and P(beyond) as decimals).
STEPS = {"sigma": 0.25, "delta": 0.01, "beyond": 0.01}
#: Where a measure's value starts when the view switches to it.
STARTS = {"sigma": 1.0, "delta": 0.16, "beyond": 0.10}
#: Lowest and highest value of each measure (decimals for |delta| and P(beyond), which exclude 0 and 1).
BOUNDS = {"sigma": (-SIGMA_LIMIT, SIGMA_LIMIT), "delta": (0.01, 0.99), "beyond": (0.01, 0.99)}

CAUTION = ("P(profit) is risk-neutral and at expiry; returns leave out commissions, assignment and margin. "
           "Model outputs, not advice.")
#: Seconds between two expiries' touch figures (keys are handled in between).
TOUCH_PAUSE = 0.01

#: Contract-table columns the view reads by row besides core's target table (touch figures are filled
#: per expiry on demand, so they are read from the contracts each time).
_BY_ROW = ("p_touch", "p_touch_low", "p_touch_high", "premium_per_day_buy", "edge_to_mid", "edge_share_sell",
           "return_sell", "breakeven_sell", "breakeven_buy")


@dataclass(frozen=True)
class ViewColumn:
    """One column of the target view: heading, the figure it shows (see ``target_figures``), text or number."""

    heading: str
    key: str
    text: bool = False


#: Columns that stay in place when the table scrolls sideways (mark, expiry, days, strike).
FIXED_COLUMNS = 4
#: The view's columns, in the order a trader reads them (the first ones fit 80 columns).
TARGET_VIEW_COLUMNS: tuple[ViewColumn, ...] = (
    ViewColumn("", "mark", text=True),
    ViewColumn("expiry", "expiry", text=True),
    ViewColumn("days", "calendar_days"),
    ViewColumn("strike", "strike"),
    ViewColumn("bid x ask", "quote"),
    ViewColumn("delta", "delta"),
    ViewColumn("beyond", "p_beyond"),
    ViewColumn("P sell", "p_profit_sell"),
    ViewColumn("/day", "premium_per_day_sell"),
    ViewColumn("yr ret", "return_sell_annual"),
    ViewColumn("σ dist", "sigma_distance"),
    ViewColumn("IV", "iv"),
    ViewColumn("touch", "p_touch"),
    ViewColumn("touch range", "touch_range"),
    ViewColumn("event", "events", text=True),
    ViewColumn("flags", "flags", text=True),
    ViewColumn("P buy", "p_profit_buy"),
    ViewColumn("buy /day", "premium_per_day_buy"),
    ViewColumn("return", "return_sell"),
    ViewColumn("BE sell", "breakeven_sell"),
    ViewColumn("BE buy", "breakeven_buy"),
    ViewColumn("edge", "edge_to_mid"),
    ViewColumn("edge %", "edge_share_sell"),
    ViewColumn("spread", "spread_pct"),
    ViewColumn("OI", "open_interest"),
    ViewColumn("nearby", "nearby"),
)
#: The column of each measure: it comes right after the quote while that measure is the target.
MEASURE_COLUMNS = {"sigma": "sigma_distance", "delta": "delta", "beyond": "p_beyond"}


def view_columns(measure: str) -> tuple[ViewColumn, ...]:
    """TARGET_VIEW_COLUMNS with the target measure's column moved to just after the quote."""
    key = MEASURE_COLUMNS.get(measure)
    cols = [c for c in TARGET_VIEW_COLUMNS if c.key != key]
    at = next(i for i, c in enumerate(cols) if c.key == "quote") + 1
    return tuple(cols[:at] + [c for c in TARGET_VIEW_COLUMNS if c.key == key] + cols[at:])


#: Widest event and flags cells (longer text is cut, the help and the ladder have the whole).
TEXT_WIDTH = 18

_FORMATS: dict[str, Callable[..., str]] = {
    "calendar_days": fm.fmt_count, "strike": fm.fmt_strike, "p_beyond": fm.fmt_prob,
    "p_profit_sell": fm.fmt_prob, "p_profit_buy": fm.fmt_prob, "premium_per_day_sell": fm.fmt_price,
    "premium_per_day_buy": fm.fmt_price, "return_sell_annual": fm.fmt_return, "return_sell": fm.fmt_return,
    "iv": fm.fmt_vol, "delta": fm.fmt_delta, "sigma_distance": fm.fmt_sigma, "p_touch": fm.fmt_prob,
    "breakeven_sell": fm.fmt_price, "breakeven_buy": fm.fmt_price, "edge_to_mid": fm.fmt_price,
    "edge_share_sell": fm.fmt_spread, "spread_pct": fm.fmt_spread, "open_interest": fm.fmt_count,
}


def describe_target(target: Target, shift: int = 0, ascii_only: bool = False) -> str:
    """Plain words for a target, e.g. "puts nearest 1.5σ out of the money" or "calls nearest |delta| 0.16"."""
    sig = fm.SIGMA_ASCII if ascii_only else fm.SIGMA
    v = target.value
    if target.measure == "sigma":
        what = f"{_num(v)}{sig} out of the money" if v >= 0 else f"{_num(-v)}{sig} in the money"
    elif target.measure == "delta":
        what = f"|delta| {_num(v, 2)}"
    else:
        what = f"P(beyond) {_num(100 * v, 1)}%"
    text = f"{target.side} nearest {what}"
    if shift:
        n = abs(shift)
        text += f", then {n} strike{'s' if n != 1 else ''} {'up' if shift > 0 else 'down'}"
    return text


def _cut(value: Any, ascii_only: bool) -> str:
    text = fm.clean_text(value)
    if ascii_only:
        text = text.encode("ascii", "replace").decode("ascii")
    if len(text) > TEXT_WIDTH:
        text = text[:TEXT_WIDTH - 1] + ("~" if ascii_only else "…")
    return text


def _num(x: float, decimals: int = 2) -> str:
    return fm.tidy_zero(f"{x:.{decimals}f}".rstrip("0").rstrip("."))


def step_target(target: Target, steps: int) -> Target:
    """``target`` moved ``steps`` steps of its measure (STEPS), held within BOUNDS; rounded to the step."""
    step = STEPS[target.measure]
    low, high = BOUNDS[target.measure]
    value = round((target.value + steps * step) / step) * step
    value = min(high, max(low, round(value, 6)))
    return Target(target.side, target.measure, value)


def with_measure(target: Target, measure: str) -> Target:
    """The same side with ``measure`` at its starting value (the same target when the measure is unchanged)."""
    if measure == target.measure:
        return target
    return Target(target.side, measure, STARTS[measure])


def with_side(target: Target, side: str) -> Target:
    return Target(side, target.measure, target.value)


_SIGNED = re.compile(r"\s*([+-]?)\s*(.*)")


def parse_target_value(measure: str, text: str) -> float:
    """A typed target value: sigmas (a plain number, "-" for in the money), |delta| as a decimal
    (0.16), P(beyond) in percent (10 or 10%). Raises ChainTriageError naming the problem."""
    from chaintriage.tui.session import _parse_number  # the filter dialog's reading of a typed number

    raw = (text or "").strip()
    if not raw:
        raise ChainTriageError("type a value")
    if measure == "sigma":
        sign, rest = _SIGNED.fullmatch(raw).groups()  # type: ignore[union-attr]
        value = _parse_number(rest, "sigmas", limit=SIGMA_LIMIT)
        value = -value if sign == "-" and value is not None else value
    elif measure == "delta":
        value = _parse_number(raw, "|delta|", limit=1.0)
    else:
        value = _parse_number(raw[:-1] if raw.endswith("%") else raw, "P(beyond) %", limit=100.0)
        value = None if value is None else value / 100.0
    if value is None:
        raise ChainTriageError("type a value")
    low, high = BOUNDS[measure]
    if measure != "sigma" and not low <= value <= high:
        unit = "%" if measure == "beyond" else ""
        scale = 100.0 if measure == "beyond" else 1.0
        raise ChainTriageError(f"give a value from {_num(scale * low)}{unit} to {_num(scale * high)}{unit}")
    return value + 0.0


def target_figures(view: SnapshotView, target: Target, shift: int = 0) -> pd.DataFrame:
    """core's target table for ``view`` with the figures the view reads by row added (``_BY_ROW``,
    read fresh from the contracts), one row per expiry; NaN where an expiry has no contract."""
    table = view.targets(target, shift)
    rows = table["row"].to_numpy(dtype=np.int64)
    has = rows >= 0
    contracts = view.annotated.contracts
    for name in _BY_ROW:
        values = np.full(len(rows), np.nan)
        if has.any() and name in contracts.columns:
            values[has] = contracts[name].to_numpy(dtype=float)[rows[has]]
        table[name] = values
    return table


def format_rows(table: pd.DataFrame, *, events: list[str] | None = None, marked: set[int] | None = None,
                ascii_only: bool = False,
                columns: tuple[ViewColumn, ...] = TARGET_VIEW_COLUMNS) -> list[tuple[str, ...]]:
    """The view's cells (``columns``) per row of ``target_figures``, as plain strings.

    ``events``: names of the events before each expiry ("" for none); ``marked``: contract rows on
    the shortlist (marked in the first column).
    """
    n = len(table)
    missing = fm.placeholder(ascii_only)
    mark = "*" if ascii_only else "●"
    times = "x" if ascii_only else "×"
    rows = table["row"].to_numpy(dtype=np.int64).tolist()
    strikes = table["strike"].to_numpy(dtype=float)
    decimals = fm.strike_decimals(strikes[np.isfinite(strikes)])

    def floats(name: str) -> list[float]:
        return table[name].to_numpy(dtype=float).tolist()

    def strike_text(x: float) -> str:
        return fm.fmt_strike(x, decimals, ascii_only=ascii_only) if math.isfinite(x) else missing

    def figures(name: str) -> list[str]:
        fmt = _FORMATS[name]
        return [fmt(x, ascii_only=ascii_only) for x in floats(name)]

    def column(key: str) -> list[str]:
        """One column's cells for every row (column by column: one branch per column, not per cell)."""
        if key == "mark":
            return [mark if marked and r in marked else " " for r in rows]
        if key == "expiry":
            return [fm.fmt_date(e, ascii_only) for e in pd.DatetimeIndex(table["expiry"]).tolist()]
        if key == "strike":
            return [strike_text(x) for x in strikes.tolist()]
        if key == "quote":
            return [missing if r < 0 else f"{fm.fmt_price(b, ascii_only=ascii_only)} {times} "
                                          f"{fm.fmt_price(a, ascii_only=ascii_only)}"
                    for r, b, a in zip(rows, floats("bid"), floats("ask"))]
        if key == "touch_range":
            return [f"{fm.fmt_prob(lo, ascii_only=ascii_only)}-{fm.fmt_prob(hi, ascii_only=ascii_only)}"
                    if math.isfinite(lo) and math.isfinite(hi) else missing
                    for lo, hi in zip(floats("p_touch_low"), floats("p_touch_high"))]
        if key == "nearby":
            return [f"{strike_text(lo)} / {strike_text(hi)}"
                    for lo, hi in zip(floats("strike_below"), floats("strike_above"))]
        if key == "events":
            names = list(events or [])
            return [_cut(names[i] if i < len(names) else "", ascii_only) for i in range(n)]
        if key == "flags":
            return [_cut(x, ascii_only) for x in table["flags"].tolist()]
        return figures(key)

    return list(zip(*(column(c.key) for c in columns))) if n else []


class TargetValuePrompt(ModalScreen[float | None]):
    """Ask for a target value of one measure (parsed by ``parse_target_value``)."""

    BINDINGS = [Binding("escape", "cancel", "cancel")]

    _HINTS = {"sigma": "sigmas out of the money, e.g. 1.5 (-0.5: half a sigma in the money)",
              "delta": "|delta| as a decimal, e.g. 0.16", "beyond": "P(beyond) in percent, e.g. 10"}

    def __init__(self, measure: str, current: float) -> None:
        super().__init__()
        self._measure = measure
        self._current = current

    def compose(self) -> ComposeResult:
        shown = 100 * self._current if self._measure == "beyond" else self._current
        with Vertical(classes="dialog"):
            yield Static(Text("target value", style="bold"))
            yield Input(value=_num(shown, 4), placeholder=self._HINTS[self._measure], id="target-value",
                        compact=True)
            yield Static(Text(""), id="f-error")
            yield Static(Text(self._HINTS[self._measure] + ". Enter applies, Esc cancels.", style="dim"))

    def on_mount(self) -> None:
        self.query_one("#target-value", Input).focus()

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        try:
            value = parse_target_value(self._measure, event.value)
        except ChainTriageError as exc:
            self.query_one("#f-error", Static).update(Text(str(exc), style="bold"))
            return
        close(self, value)

    def action_cancel(self) -> None:
        close(self, None)


class TargetViewScreen(Screen):
    """One row per expiry: the contract nearest the target (see the module docstring).

    ``on_open(expiry, strike, kind)`` shows that contract in the ladder (True when it could);
    ``on_mark(contract)`` sets a contract-table row (a dict) aside or takes it off ``shortlist``;
    ``on_copy(contract)`` copies its one-line summary;
    ``on_target(target)`` remembers the target for next time.
    """

    DEFAULT_CSS = """
    TargetViewScreen #target-line, TargetViewScreen #target-note { text-wrap: nowrap; text-overflow: ellipsis; }
    """

    BINDINGS = [
        Binding("escape,q,r", "close", "close"),
        Binding("enter", "open_ladder", "ladder"),
        Binding("1", "measure('sigma')", "sigmas", key_display="1"),
        Binding("2", "measure('delta')", "|delta|", key_display="2"),
        Binding("3", "measure('beyond')", "P(beyond)", key_display="3"),
        Binding("plus,equals_sign", "step(1)", "further", key_display="+"),
        Binding("minus", "step(-1)", "nearer", key_display="-"),
        Binding("v", "type_value", "value"),
        Binding("left", "side('calls')", "calls", show=False, priority=True),
        Binding("right", "side('puts')", "puts", show=False, priority=True),
        Binding("comma", "shift(-1)", "strike down", show=False),
        Binding("full_stop", "shift(1)", "strike up", show=False),
        Binding("m", "mark", "mark"),
        Binding("c", "copy", "copy"),
        Binding("question_mark", "app.show_help", "help", show=False),
    ]

    def __init__(self, view: SnapshotView, target: Target, *, on_open: Callable[[Any, float, str], Any],
                 shortlist: Any = None, on_mark: Callable[[dict], Any] | None = None,
                 on_copy: Callable[[dict], Any] | None = None,
                 on_target: Callable[[Target], None] = lambda t: None, current_expiry: Any = None,
                 theme: Any = None, ascii_only: bool = False) -> None:
        super().__init__()
        self._theme = theme
        self.view = view
        self.target = target
        self.shift = 0
        self._on_open = on_open
        self._shortlist = shortlist
        self._on_mark = on_mark
        self._on_copy = on_copy
        self._on_target = on_target
        self._ascii = ascii_only
        self._current_expiry = current_expiry
        self._events = self._event_names()
        self.table: pd.DataFrame = pd.DataFrame()
        self._shown_columns: tuple[ViewColumn, ...] = ()
        #: Expiries whose touch figures are still to be worked out (one per timer tick while the view is open).
        self._touch_queue: list[pd.Timestamp] = []

    @property
    def columns(self) -> tuple[ViewColumn, ...]:
        """The columns shown, in order (the target measure's right after the quote)."""
        return view_columns(self.target.measure)

    def _marked_rows(self, table: pd.DataFrame) -> set[int]:
        """Contract rows of ``table`` that are on the shortlist."""
        if not self._shortlist:
            return set()
        from chaintriage.tui.shortlist import ContractKey

        snap = self.view.snapshot
        out = set()
        contracts = self.view.annotated.contracts
        rows = table["row"].to_numpy(dtype=np.int64)
        rows = rows[rows >= 0]
        expiries = contracts["expiry"].to_numpy()[rows]
        strikes = contracts["strike"].to_numpy(dtype=float)[rows]
        kinds = contracts["kind"].to_numpy()[rows]
        for row, expiry, strike, kind in zip(rows, expiries, strikes, kinds):
            if ContractKey.of(snap.underlying, snap.as_of, pd.Timestamp(expiry), strike, kind) in self._shortlist:
                out.add(int(row))
        return out

    def _event_names(self) -> list[str]:
        names = []
        for i in range(len(self.view.expiries)):
            try:
                names.append(self.view.event_names(i))
            except (ChainTriageError, KeyError, ValueError, IndexError):
                names.append("")
        return names

    def compose(self) -> ComposeResult:
        head = Text(" targets by expiry: ", style="bold")
        head.append(fm.clean_text(self.view.label))
        spot = fm.as_finite(self.view.snapshot.spot)
        if spot is not None:
            head.append(f"  spot {fm.fmt_level(spot, ascii_only=self._ascii)}", style="dim")
        yield Static(head, classes="title")
        yield Static(Text(""), id="target-line", classes="title")
        yield LineTable(id="target-table", fixed=FIXED_COLUMNS, theme=self._theme)
        yield Static(Text(""), id="target-note")
        yield Static(Text(CAUTION, style="dim"), id="target-caution")
        yield KeyLine()

    def on_mount(self) -> None:
        table = self.query_one("#target-table", LineTable)
        self._touch_queue = [e for e in self.view.expiries if e not in self.view.annotated.touched]
        self.redraw()
        if self._touch_queue:
            self.set_timer(TOUCH_PAUSE, self._fill_touch)
        if self._current_expiry is not None:
            pos = self.view.expiry_index(self._current_expiry)
            if pos is not None and pos < table.row_count:
                table.move_cursor(pos)
        table.focus()
        self.watch(table, "scroll_x", lambda _: self._draw_lines(), init=False)

    def on_resize(self) -> None:
        self.call_after_refresh(self._draw_lines)

    # ------------------------------------------------------------ drawing

    def _fill_touch(self) -> None:
        """Compute one expiry's touch figures (as its ladder would) and draw them; then the next one,
        after a pause that lets keys through."""
        if not self._touch_queue or not self.is_attached:
            return
        expiry = self._touch_queue.pop(0)
        self.view.frame(expiry)  # fills that expiry's touch columns once
        if self._touch_queue:
            self.set_timer(TOUCH_PAUSE, self._fill_touch)
        pos = self.view.expiry_index(expiry)
        if pos is None or pos >= len(self.table):
            return
        row = int(self.table["row"].iat[pos])
        if row < 0:
            return
        contracts = self.view.annotated.contracts
        figures = {name: float(contracts[name].iat[row]) for name in ("p_touch", "p_touch_low", "p_touch_high")}
        for name, value in figures.items():
            self.table.loc[self.table.index[pos], name] = value
        cells = format_rows(self.table.iloc[pos:pos + 1], events=self._events[pos:pos + 1],
                            marked=self._marked_rows(self.table.iloc[pos:pos + 1]), ascii_only=self._ascii,
                            columns=self.columns)[0]
        self.query_one("#target-table", LineTable).set_row(pos, cells)
        if not self._touch_queue:
            self._draw_lines()

    def redraw(self) -> None:
        """Select the targets again and draw every row (the cursor stays on its expiry)."""
        self.table = target_figures(self.view, self.target, self.shift)
        columns = self.columns
        rows = format_rows(self.table, events=self._events, marked=self._marked_rows(self.table),
                           ascii_only=self._ascii, columns=columns)
        table = self.query_one("#target-table", LineTable)
        if columns != self._shown_columns:
            sig = fm.SIGMA_ASCII if self._ascii else fm.SIGMA
            table.set_columns([c.heading.replace(fm.SIGMA, sig) for c in columns], [not c.text for c in columns])
            self._shown_columns = columns
        table.set_rows(rows)
        self._draw_lines()
        self.call_after_refresh(self._draw_lines)  # the table's width is known after the next layout

    def _draw_lines(self) -> None:
        line = Text(" " + describe_target(self.target, self.shift, self._ascii), style="bold", no_wrap=True,
                    overflow="ellipsis")
        arrows = "<- ->" if self._ascii else "← →"
        dot = "/" if self._ascii else "·"
        line.append(f"   1 2 3 measure {dot} + - value {dot} v type {dot} {arrows} side {dot} , . strike",
                    style="dim")
        self.query_one("#target-line", Static).update(line)
        table = self.table
        missing = int((table["row"].to_numpy() < 0).sum()) if len(table) else 0
        touch_known = int(np.isfinite(table["p_touch"].to_numpy(dtype=float)).sum()) if len(table) else 0
        parts = []
        if self.query_one("#target-table", LineTable).more_to_the_right:
            parts.append("more columns: Ctrl+PgDn")
        if missing:
            parts.append(f"{missing} expir{'ies have' if missing != 1 else 'y has'} no usable {self.target.side}")
        if touch_known < len(table) - missing and self._touch_queue:
            parts.append("working out touch figures")
        parts.append("P sell at the bid, P buy at the ask; yr ret = return x 365 / days (? explains)")
        self.query_one("#target-note", Static).update(Text(" " + "; ".join(parts), style="dim", no_wrap=True,
                                                           overflow="ellipsis"))

    def _say(self, message: str) -> None:
        self.app.notify(message, timeout=2, markup=False)

    # ------------------------------------------------------------ keys

    def _set_target(self, target: Target, shift: int | None = None) -> None:
        self.target = target
        if shift is not None:
            self.shift = shift
        self._on_target(target)
        self.redraw()

    def action_measure(self, measure: str) -> None:
        if measure in MEASURE_KEYS and measure != self.target.measure:
            self._set_target(with_measure(self.target, measure), shift=0)

    def action_step(self, steps: int) -> None:
        moved = step_target(self.target, steps)
        if moved == self.target:
            self._say("that is as far as this target goes")
            return
        self._set_target(moved, shift=0)

    def action_side(self, side: str) -> None:
        if side != self.target.side:
            self._set_target(with_side(self.target, side), shift=0)

    def action_shift(self, step: int) -> None:
        self.shift += step
        self.redraw()

    def action_type_value(self) -> None:
        def done(value: float | None) -> None:
            if value is not None:
                self._set_target(Target(self.target.side, self.target.measure, value), shift=0)

        self.app.push_screen(TargetValuePrompt(self.target.measure, self.target.value), done)

    def _current_row(self) -> tuple[int, int] | None:
        """(expiry position, contract row) under the cursor; None when the expiry has no contract."""
        pos = self.query_one("#target-table", LineTable).cursor_row
        if not 0 <= pos < len(self.table):
            return None
        row = int(self.table["row"].iat[pos])
        return (pos, row) if row >= 0 else None

    def action_open_ladder(self) -> None:
        if getattr(self, "_dismissed_once", False):
            return
        got = self._current_row()
        if got is None:
            self._say(f"this expiry has no usable {self.target.side}")
            return
        pos, row = got
        contract = self.view.annotated.contracts.iloc[row]
        if close(self):
            self._on_open(self.view.expiries[pos], float(contract["strike"]), str(contract["kind"]))

    def on_line_table_chosen(self, event: LineTable.Chosen) -> None:
        event.stop()
        self.action_open_ladder()

    def _row_contract(self, verb: str, handler: Callable | None) -> dict | None:
        """The highlighted row's contract as a dict, or None (and say so) when there is none or no ``handler``."""
        got = self._current_row()
        if got is None or handler is None:
            self._say(f"nothing to {verb}: this expiry has no usable {self.target.side}")
            return None
        return self.view.annotated.contracts.iloc[got[1]].to_dict()

    def action_mark(self) -> None:
        contract = self._row_contract("mark", self._on_mark)
        if contract is not None:
            self._on_mark(contract)
            self.redraw()

    def action_copy(self) -> None:
        contract = self._row_contract("copy", self._on_copy)
        if contract is not None:
            self._on_copy(contract)

    def action_close(self) -> None:
        close(self)


def initial_target(remembered: Target | None, selected_kind: str, strike_filter: Any = None) -> Target:
    """Where the view starts: the last target, else the ladder's selected side at the filter's
    sigma distance (else STARTS["sigma"])."""
    if isinstance(remembered, Target):
        return remembered
    side = "puts" if selected_kind == "put" else "calls"
    sigma = getattr(strike_filter, "sigma", None)
    return Target(side, "sigma", float(sigma) if sigma is not None else STARTS["sigma"])
