"""A text chart of the volatility cone with today's at-the-money implied vols drawn against it.

Pure drawing, no Textual: ``cone_chart`` turns what core computed (the cone's
quantiles at each horizon, ``core.vol_cone.cone_at``; each expiry's trading
days and ATM IV) into rows of Rich Text. Horizon (trading days) runs left to
right on a log scale; vol runs bottom to top. Per column: the span from the
cone's minimum to its maximum, the quartile band inside it, the median, and
the expiries' implied vols as marks on top.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np
from rich.style import Style
from rich.text import Text

from chaintriage.tui.widgets.chart_grid import grid_lines

#: Glyphs: (unicode, ascii).
GLYPHS = {"range": ("·", "."), "quartiles": ("░", ":"), "median": ("─", "-"), "implied": ("●", "o"),
          "current": ("+", "+")}
NAMES = {"range": "min-max", "quartiles": "middle half", "median": "median",
         "current": "RV now", "implied": "ATM IV by expiry"}


@dataclass(frozen=True)
class ConeStyles:
    """Rich styles of the chart's parts."""

    text: Style = Style()
    dim: Style = Style(dim=True)
    band: Style = Style()
    median: Style = Style(bold=True)
    implied: Style = Style(bold=True)
    current: Style = Style()


def cone_chart(columns_days: np.ndarray, quantiles: dict[str, np.ndarray], windows: Sequence[int],
               current: Sequence[float], implied_days: Sequence[float], implied_vol: Sequence[float],
               width: int, height: int, *, ascii_only: bool = False, styles: ConeStyles | None = None) -> list[Text]:
    """The chart as ``height`` rows of at most ``width`` cells.

    ``columns_days``: the horizon of each plot column (trading days; from ``chart_days``);
    ``quantiles``: "min", "q25", "median", "q75", "max" -> vol per column (decimal, the cone at that
    horizon); ``windows`` and ``current``: the cone's windows and today's realised vol over each;
    ``implied_days`` / ``implied_vol``: each expiry's trading days and ATM IV (decimal).
    """
    st = styles or ConeStyles()
    g = 1 if ascii_only else 0
    days = np.asarray(columns_days, dtype=float)
    plot_w = days.size
    plot_h = max(int(height) - 2, 4)
    q = {k: np.asarray(v, dtype=float) for k, v in quantiles.items()}
    iv = np.asarray(implied_vol, dtype=float)
    idays = np.asarray(implied_days, dtype=float)
    cur = np.asarray(current, dtype=float)
    vals = np.concatenate([q["min"], q["max"], iv, cur])
    vals = vals[np.isfinite(vals)]
    if vals.size == 0 or plot_w < 4:
        return [Text("no realised vol to draw (the history is too short for the windows)", style=st.dim)]
    lo, hi = float(vals.min()), float(vals.max())
    pad = max(0.05 * (hi - lo), 0.005)
    lo, hi = max(lo - pad, 0.0), hi + pad
    d_lo, d_hi = float(np.log(days[0])), float(np.log(days[-1]))

    def row_of(v: float) -> int:
        return int(round((hi - v) / (hi - lo) * (plot_h - 1)))

    def col_of(d: float) -> int:
        x = (np.log(max(d, 1.0)) - d_lo) / max(d_hi - d_lo, 1e-9)
        return int(round(min(max(x, 0.0), 1.0) * (plot_w - 1)))

    cells: list[list[tuple[str, Style]]] = [[(" ", st.text)] * plot_w for _ in range(plot_h)]
    for c in range(plot_w):
        if not np.isfinite(q["min"][c]):
            continue
        r_max, r_min = row_of(q["max"][c]), row_of(q["min"][c])
        r75, r25, rmed = row_of(q["q75"][c]), row_of(q["q25"][c]), row_of(q["median"][c])
        for r in range(r_max, r_min + 1):
            cells[r][c] = (GLYPHS["range"][g], st.dim)
        for r in range(r75, r25 + 1):
            cells[r][c] = (GLYPHS["quartiles"][g], st.band)
        cells[rmed][c] = (GLYPHS["median"][g], st.median)
    for w, v in zip(windows, cur):
        if np.isfinite(v):
            cells[row_of(float(v))][col_of(float(w))] = (GLYPHS["current"][g], st.current)
    for d, v in zip(idays, iv):
        if np.isfinite(d) and np.isfinite(v) and d > 0:
            cells[row_of(float(v))][col_of(float(d))] = (GLYPHS["implied"][g], st.implied)

    rows = grid_lines(cells, hi, lo, st.dim, ascii_only)
    under = [" "] * (plot_w + 8)
    for w in windows:
        label = f"{int(w)}"
        c = col_of(float(w))
        start = min(max(c - len(label) // 2, 0), plot_w + 8 - len(label))
        if all(ch == " " for ch in under[max(start - 1, 0):start + len(label) + 1]):
            under[start:start + len(label)] = list(label)
    foot = Text(no_wrap=True, overflow="crop")
    foot.append(" " * 7 + "".join(under).rstrip() + "  trading days (log scale)", style=st.dim)
    rows.append(foot)
    return rows


def chart_days(windows: Sequence[int], implied_days: Sequence[float], plot_w: int) -> np.ndarray:
    """The horizon (trading days) of each of ``plot_w`` columns, log-spaced over the windows and expiries."""
    d = np.concatenate([np.asarray(windows, dtype=float), np.asarray(implied_days, dtype=float)])
    d = d[np.isfinite(d) & (d >= 1)]
    lo = float(d.min()) if d.size else 10.0
    hi = float(d.max()) if d.size else 252.0
    hi = max(hi, lo * 1.5)
    return np.exp(np.linspace(np.log(lo), np.log(hi), max(int(plot_w), 4)))


def cone_legend(ascii_only: bool = False, styles: ConeStyles | None = None) -> Text:
    """One line naming each glyph."""
    st = styles or ConeStyles()
    g = 1 if ascii_only else 0
    out = Text(no_wrap=True, overflow="ellipsis")
    for name, style in (("implied", st.implied), ("current", st.current), ("median", st.median),
                        ("quartiles", st.band), ("range", st.dim)):
        out.append(GLYPHS[name][g] + " ", style=style)
        out.append(NAMES[name] + "  ", style=st.text)
    return out
