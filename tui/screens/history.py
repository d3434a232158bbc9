"""The history screen (key h): realised vol by estimator and window, the volatility cone with
today's at-the-money implied vols against it, implied against realised per expiry, and the cautions.

The numbers come from ``core`` (``history_compare``, ``vol_cone``) through the snapshot's
``ViewHistory``; this module lays them out. Text from files is shown as rich Text.
"""

from __future__ import annotations

import numpy as np
from rich.style import Style
from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import VerticalScroll
from textual.screen import Screen
from textual.widgets import Static

from chaintriage.core.realised_vol import ESTIMATORS
from chaintriage.core.vol_cone import cone_at
from chaintriage.tui import formatting as fm
from chaintriage.tui.screens.common import close
from chaintriage.tui.themes import FALLBACK_THEME, ChainTheme
from chaintriage.tui.widgets.cone_chart import ConeStyles, chart_days, cone_chart, cone_legend
from chaintriage.tui.widgets.key_line import KeyLine

#: Estimators by their published names.
ESTIMATOR_NAMES = {"close_to_close": "close-to-close", "parkinson": "Parkinson", "garman_klass": "Garman-Klass",
                   "rogers_satchell": "Rogers-Satchell", "yang_zhang": "Yang-Zhang"}

CAUTIONS = (
    "History is not a forecast: the past days say how the underlying has moved, not how it will.",
    "Realised and implied vol measure different things: implied vol carries the premium option sellers "
    "ask (the variance risk premium) and the events before the expiry; a ratio IV/RV above 1 is usual.",
    "The range estimators (Parkinson, Garman-Klass, Rogers-Satchell) see only the trading session, not the "
    "overnight gap. Model outputs, not advice.",
)


def cone_styles(theme: ChainTheme | None) -> ConeStyles:
    c = (theme or FALLBACK_THEME).colors
    return ConeStyles(text=Style(color=c["text"]), dim=Style(color=c["dim"]), band=Style(color=c["otm_put"]),
                      median=Style(color=c["otm_put"], bold=True), implied=Style(color=c["accent"], bold=True),
                      current=Style(color=c["otm_call"], bold=True))


def _vol(x, ascii_only: bool) -> str:
    return fm.fmt_vol(x, ascii_only=ascii_only)


def estimator_table(vh, ascii_only: bool = False) -> Text:
    """Realised vol by window (rows) and estimator (columns), ending at the history's last bar."""
    vol = vh.summary.realised.vol
    names = [ESTIMATOR_NAMES[e] for e in ESTIMATORS]
    widths = [max(len(n), 6) for n in names]
    out = Text(no_wrap=True, overflow="crop")
    out.append(" window " + " ".join(f"{n:>{w}}" for n, w in zip(names, widths)) + "\n", style="bold")
    for window in vol.index:
        out.append(f" {int(window):>5}d")
        for e, w in zip(ESTIMATORS, widths):
            text = f"{_vol(vol.loc[window, e], ascii_only):>{w}}"
            out.append(" " + text, style="bold" if e == vh.summary.estimator else None)
        out.append("\n")
    return out


def expiry_table(view, vh, ascii_only: bool = False) -> Text:
    """One row per expiry: trading days, ATM IV, the window matched, its realised vol, IV/RV, and where
    the ATM IV sits among the history's rolling vols of that window."""
    exp = view.annotated.expiries.reset_index(drop=True)
    cmp = vh.comparison.expiries.reset_index(drop=True)
    out = Text(no_wrap=True, overflow="crop")
    out.append("  expiry       days  ATM IV  window      RV  IV/RV  history below IV\n", style="bold")
    for i in range(len(exp)):
        w = cmp["hist_window"].iat[i]
        ratio = cmp["iv_rv"].iat[i]
        pct = cmp["cone_percentile"].iat[i]
        out.append(f"  {fm.fmt_date(exp['expiry'].iat[i], ascii_only=ascii_only):<11}"
                   f"{fm.fmt_count(exp['trading_days'].iat[i], ascii_only=ascii_only):>6}"
                   f"{_vol(exp['atm_iv'].iat[i], ascii_only):>8}"
                   f"{(str(int(w)) + 'd') if np.isfinite(w) else fm.placeholder(ascii_only):>8}"
                   f"{_vol(cmp['hist_vol'].iat[i], ascii_only):>8}"
                   f"{(f'{ratio:.2f}' if np.isfinite(ratio) else fm.placeholder(ascii_only)):>7}"
                   f"{(f'{100 * pct:.0f}%' if np.isfinite(pct) else fm.placeholder(ascii_only)):>18}\n")
    return out


def past_moves_table(moves, ascii_only: bool = False) -> Text:
    """The last past event sessions (``core.event_moves.PastEventMoves``), newest first, and their summary."""
    out = Text(no_wrap=True, overflow="crop")
    if moves is None or not moves.used:
        out.append("  no past event dates inside the history (give them with --events)", style="dim")
        return out
    out.append(f"  last {moves.used}: mean |move| {100 * moves.mean_abs:.1f}%, rms {100 * moves.rms:.1f}% "
               "(compare with the implied move on y)\n", style="bold")
    out.append("  event date  timing        session      move   open gap\n", style="bold")
    t = moves.table.iloc[:moves.used]
    for row in t.itertuples(index=False):
        gap = f"{100 * row.gap:+.1f}%" if np.isfinite(row.gap) else fm.placeholder(ascii_only)
        out.append(f"  {row.date:%Y-%m-%d}  {row.timing:<12}  {row.session:%Y-%m-%d}  {100 * row.move:+6.1f}%"
                   f"  {gap:>8}\n")
    return out


class HistoryScreen(Screen):
    """Realised vol, the cone and implied against realised for one snapshot's underlying."""

    BINDINGS = [Binding("escape,q,h", "close", "close")]

    def __init__(self, view, vh, *, theme: ChainTheme | None = None, ascii_only: bool = False) -> None:
        super().__init__()
        self._view = view
        self._vh = vh
        self._theme = theme
        self._ascii = ascii_only

    def compose(self) -> ComposeResult:
        vh, a = self._vh, self._ascii
        h = vh.history
        b = h.bars
        head = Text(" history ", style="bold")
        head.append(fm.clean_text(h.underlying), style="bold")
        head.append(f": {len(b):,} days {b['date'].iat[0]:%Y-%m-%d} to {b['date'].iat[-1]:%Y-%m-%d}, "
                    f"close {fm.fmt_price(h.last_close, ascii_only=a)}, basis {vh.settings.basis}")
        yield Static(head, classes="title")
        with VerticalScroll(id="history-scroll"):
            yield Static(Text("realised vol by estimator and window (bold: used for the cone and odds)",
                              style="bold"))
            yield Static(estimator_table(vh, a), id="history-estimators")
            est = ESTIMATOR_NAMES.get(vh.summary.estimator, vh.summary.estimator)
            yield Static(Text(f"volatility cone (Burghardt-Lane), {est}, and today's ATM IVs", style="bold"))
            yield Static(cone_legend(a, cone_styles(self._theme)), id="history-legend")
            yield Static(Text(""), id="history-cone")
            yield Static(Text("implied against realised per expiry (window nearest its days)", style="bold"))
            yield Static(expiry_table(self._view, vh, a), id="history-expiries")
            yield Static(Text("past event sessions (close to close, newest first)", style="bold"))
            yield Static(past_moves_table(vh.past_moves, a), id="history-past-moves")
            yield Static(Text("\n".join(f"- {c}" for c in CAUTIONS), style="dim"), id="history-cautions")
        yield KeyLine()

    def on_mount(self) -> None:
        self.query_one("#history-scroll").focus()
        self._draw_cone()

    def on_resize(self) -> None:
        self._draw_cone()

    def _draw_cone(self) -> None:
        vh = self._vh
        cone = vh.summary.cone
        table = cone.table
        exp = self._view.annotated.expiries
        idays = exp["trading_days"].to_numpy(dtype=float)
        iv = exp["atm_iv"].to_numpy(dtype=float)
        width = max((self.size.width or 80) - 4, 30)
        plot_w = width - 8
        days = chart_days(table.index.to_numpy(), idays, plot_w)
        q = cone_at(cone, days)
        rows = cone_chart(days, {c: q[c].to_numpy() for c in ("min", "q25", "median", "q75", "max")},
                          table.index.to_numpy(), table["current"].to_numpy(dtype=float), idays, iv, width,
                          max(min(16, (self.size.height or 24) - 8), 8), ascii_only=self._ascii,
                          styles=cone_styles(self._theme))
        self.query_one("#history-cone", Static).update(Text("\n").join(rows))

    def action_close(self) -> None:
        close(self)
