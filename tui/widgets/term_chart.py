"""A text chart of vols by expiry: at-the-money vol, ex-event vol and forward vol against time.

Pure drawing, no Textual: ``term_chart`` turns the numbers core computed into
rows of Rich Text. Time runs left to right on a square-root scale (so the
short expiries, where events matter, are not crushed against the axis); vol
runs bottom to top. Scheduled events are drawn as a dotted column at the
time they land, lettered A, B, ... under the axis.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np
from rich.style import Style
from rich.text import Text

from chaintriage.tui.widgets.chart_grid import grid_lines

#: Glyphs per series: (unicode, ascii).
GLYPHS = {"atm": ("●", "o"), "ex_event": ("◆", "+"), "forward": ("·", ".")}
EVENT_COLUMN = ("┊", ":")

#: The legend words of each series.
SERIES_NAMES = {"atm": "ATM vol", "ex_event": "ex-event vol", "forward": "forward vol"}


@dataclass(frozen=True)
class ChartStyles:
    """Rich styles of the chart's parts."""

    text: Style = Style()
    dim: Style = Style(dim=True)
    atm: Style = Style(bold=True)
    ex_event: Style = Style()
    forward: Style = Style(dim=True)
    event: Style = Style()


def _finite(values) -> np.ndarray:
    return np.asarray(values, dtype=float)


def term_chart(t_years: Sequence[float], series: dict[str, Sequence[float]], event_times: Sequence[float],
               width: int, height: int, *, ascii_only: bool = False,
               styles: ChartStyles | None = None) -> list[Text]:
    """The chart as ``height`` rows of at most ``width`` cells.

    ``t_years``: each expiry's time (years); ``series``: name ("atm",
    "ex_event", "forward") -> vol per expiry (decimal; NaN left out);
    ``event_times``: when each event lands (years). The last rows are the time
    axis and the event letters; a left margin carries the vol labels.
    """
    st = styles or ChartStyles()
    t = _finite(t_years)
    width = max(int(width), 20)
    height = max(int(height), 6)
    margin = 7  # "45.0% " plus the axis line
    plot_w = width - margin
    plot_h = height - 2  # axis and labels below
    vols = np.concatenate([_finite(v)[np.isfinite(_finite(v))] for v in series.values()] + [np.zeros(0)])
    ok_t = t[np.isfinite(t) & (t > 0)]
    if vols.size == 0 or ok_t.size == 0:
        return [Text("no vols to draw", style=st.dim)]
    lo, hi = float(vols.min()), float(vols.max())
    pad = max(0.05 * (hi - lo), 0.005)
    lo, hi = max(lo - pad, 0.0), hi + pad
    t_max = float(ok_t.max())

    def col_of(x: float) -> int:
        return int(round(np.sqrt(max(x, 0.0) / t_max) * (plot_w - 1)))

    def row_of(v: float) -> int:
        return int(round((hi - v) / (hi - lo) * (plot_h - 1)))

    cells: list[list[tuple[str, Style]]] = [[(" ", st.text)] * plot_w for _ in range(plot_h)]
    ev_glyph = EVENT_COLUMN[1 if ascii_only else 0]
    letters = []
    for i, te in enumerate(event_times):
        if not np.isfinite(te) or te <= 0 or te > t_max:
            continue
        c = col_of(float(te))
        letters.append((c, chr(ord("A") + i % 26)))
        for r in range(plot_h):
            cells[r][c] = (ev_glyph, st.event)
    # Later series are drawn first so the at-the-money vol sits on top.
    for name in ("forward", "ex_event", "atm"):
        if name not in series:
            continue
        glyph = GLYPHS[name][1 if ascii_only else 0]
        style = getattr(st, name)
        for x, v in zip(t, _finite(series[name])):
            if np.isfinite(x) and x > 0 and np.isfinite(v):
                cells[row_of(float(v))][col_of(float(x))] = (glyph, style)

    rows = grid_lines(cells, hi, lo, st.dim, ascii_only)
    under = [" "] * plot_w
    days_label = f"{t_max:.2f}y"
    for c, letter in letters:
        under[c] = letter
    text = "".join(under)
    tail = f"  sqrt time to {days_label}"
    foot = Text(no_wrap=True, overflow="crop")
    foot.append(" " * (margin), style=st.dim)
    foot.append(text.rstrip(), style=st.event)
    if len(text.rstrip()) + len(tail) < plot_w:
        foot.append(tail, style=st.dim)
    rows.append(foot)
    return rows


def legend(ascii_only: bool = False, styles: ChartStyles | None = None, with_events: bool = True) -> Text:
    """One line naming each series' glyph."""
    st = styles or ChartStyles()
    out = Text(no_wrap=True, overflow="ellipsis")
    for name in ("atm", "ex_event", "forward"):
        out.append(GLYPHS[name][1 if ascii_only else 0] + " ", style=getattr(st, name))
        out.append(SERIES_NAMES[name] + "   ", style=st.text)
    if with_events:
        out.append(EVENT_COLUMN[1 if ascii_only else 0] + " ", style=st.event)
        out.append("event (letter under the axis)", style=st.text)
    return out
