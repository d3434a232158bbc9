"""The side pane's other picture (key p): a fan of simulated history paths for the highlighted contract.

Pure drawing, no Textual: ``draw_path_fan`` turns what core simulated
(``core.history_odds.PathFan``: quantiles per day, a few whole paths, the sorted
prices at expiry) and the market's figures into rows of Rich Text. Time runs
left to right (trading days), price bottom to top; the strike is a line across,
the range at the chosen confidence is marked at the right edge. Below, when the
pane is tall enough, the market-implied and the history-based distributions at
expiry share one price axis.
"""

from __future__ import annotations

import math
from typing import Any, Sequence

import numpy as np
from rich.style import Style
from rich.text import Text

from chaintriage.core.history_odds import terminal_density
from chaintriage.tui import formatting as fm

#: Glyphs: (unicode, ascii).
GLYPHS = {"outer": ("·", "."), "middle": ("░", ":"), "median": ("─", "-"), "path": ("∙", "'"),
          "strike": ("╌", "="), "range": ("▐", "]"), "market": ("█", "#"), "history": ("•", "*")}


def _band_rows(n_rows: int, lo: float, hi: float):
    def row_of(v: float) -> int:
        return int(round((hi - v) / (hi - lo) * (n_rows - 1)))
    return row_of


def draw_path_fan(fan: Any, *, width: int, height: int, colors: Any, ascii_only: bool = False,
                  underlying: str = "", strike: float | None = None, kind: str = "call",
                  confidence: float = 0.6827, p_market: float | None = None,
                  market_range: tuple[float, float] = (math.nan, math.nan),
                  market_strikes: Sequence[float] | None = None, market_density: Sequence[float] | None = None,
                  p_beyond: tuple[float, float] | None = None,
                  history_range: tuple[float, float] | None = None) -> list[Text]:
    """The pane's rows (at most ``height`` of ``width`` cells); see the module docstring.

    ``fan``: a ``PathFan``; ``p_beyond``: (P, standard error) of the highlighted contract from the fan;
    ``history_range``: the fan's central range at ``confidence``; ``market_*``: the smile's figures.
    """
    g = 1 if ascii_only else 0
    st_text = Style(color=colors.text, bgcolor=colors.background)
    st_dim = Style(color=colors.dim, bgcolor=colors.background)
    st_band = Style(color=colors.flat, bgcolor=colors.background)
    st_med = Style(color=colors.flat, bgcolor=colors.background, bold=True)
    st_strike = Style(color=colors.highlight, bgcolor=colors.background, bold=True)
    st_range = Style(color=colors.forward, bgcolor=colors.background, bold=True)
    st_market = Style(color=colors.market, bgcolor=colors.background)
    st_hist = Style(color=colors.beyond, bgcolor=colors.background, bold=True)
    width = max(int(width), 20)
    height = max(int(height), 8)
    pm = "+/-" if ascii_only else "±"
    dash = "-" if ascii_only else "–"
    rows: list[Text] = []
    head = Text(f" paths: {fan.paths:,} from {fm.clean_text(underlying)}'s own days", style=st_text)
    rows.append(head)
    rows.append(Text(f" {fan.steps} trading days, block bootstrap; p: back", style=st_dim))
    dist_rows = 6 if height >= 24 else 0
    foot_rows = 3
    chart_h = height - len(rows) - foot_rows - dist_rows - 1
    margin = 7
    plot_w = width - margin - 1
    if chart_h < 4 or plot_w < 10:
        return rows + [Text(" (too small for the paths)", style=st_dim)]
    lo = float(np.nanmin(fan.fan[0]))
    hi = float(np.nanmax(fan.fan[-1]))
    if strike is not None and np.isfinite(strike) and lo * 0.8 < strike < hi * 1.25:
        lo, hi = min(lo, strike), max(hi, strike)
    pad = 0.04 * (hi - lo) if hi > lo else max(abs(hi), 1.0) * 0.01
    lo, hi = lo - pad, hi + pad
    row_of = _band_rows(chart_h, lo, hi)
    cells = [[(" ", st_text)] * plot_w for _ in range(chart_h)]
    steps = fan.fan.shape[1] - 1
    cols = np.minimum(np.round(np.arange(plot_w) / max(plot_w - 1, 1) * steps).astype(int), steps)
    n_lv = fan.fan.shape[0]
    outer = (0, n_lv - 1)
    middle = (1, n_lv - 2) if n_lv >= 5 else outer
    med = n_lv // 2
    for c, j in enumerate(cols):
        for r in range(row_of(fan.fan[outer[1], j]), row_of(fan.fan[outer[0], j]) + 1):
            cells[r][c] = (GLYPHS["outer"][g], st_dim)
        for r in range(row_of(fan.fan[middle[1], j]), row_of(fan.fan[middle[0], j]) + 1):
            cells[r][c] = (GLYPHS["middle"][g], st_band)
        cells[row_of(fan.fan[med, j])][c] = (GLYPHS["median"][g], st_med)
    for path in fan.sample[:4]:
        for c, j in enumerate(cols):
            v = path[j]
            if lo <= v <= hi:
                cells[row_of(v)][c] = (GLYPHS["path"][g], st_text)
    strike_row = None
    if strike is not None and np.isfinite(strike) and lo <= strike <= hi:
        strike_row = row_of(strike)
        for c in range(plot_w):
            ch, _ = cells[strike_row][c]
            cells[strike_row][c] = (GLYPHS["strike"][g], st_strike)
    rng = history_range or (math.nan, math.nan)
    range_rows = set()
    if all(np.isfinite(rng)):
        a, b = sorted((row_of(min(max(rng[0], lo), hi)), row_of(min(max(rng[1], lo), hi))))
        range_rows = set(range(a, b + 1))
    labels = {0: hi, chart_h // 2: (hi + lo) / 2, chart_h - 1: lo}
    if strike_row is not None:
        labels = {r: v for r, v in labels.items() if abs(r - strike_row) > 0}
        labels[strike_row] = float(strike)
    bar = "|" if ascii_only else "│"
    for r in range(chart_h):
        line = Text(no_wrap=True, overflow="crop", style=st_text)
        label = fm.fmt_level(labels[r], ascii_only=ascii_only) if r in labels else ""
        line.append(f"{label[:margin - 1]:>{margin - 1}}", style=st_strike if r == strike_row else st_dim)
        line.append(bar, style=st_dim)
        for ch, style in cells[r]:
            line.append(ch, style=style)
        line.append(GLYPHS["range"][g] if r in range_rows else " ", style=st_range)
        rows.append(line)
    axis = Text(" " * (margin - 1) + ("+" if ascii_only else "└") + ("-" if ascii_only else "─") * plot_w,
                style=st_dim)
    rows.append(axis)
    if dist_rows:
        rows += _distributions(fan, dist_rows, width, lo, hi, market_strikes, market_density, ascii_only,
                               st_dim, st_market, st_hist, margin)
    from chaintriage.tui.session import fmt_confidence  # the same words as the header

    foot = Text(no_wrap=True, overflow="ellipsis", style=st_text)
    if strike is not None and np.isfinite(strike):
        foot.append(f" {fm.fmt_level(strike, ascii_only=ascii_only)} {kind} beyond: ", style=st_dim)
        if p_beyond is not None and np.isfinite(p_beyond[0]):
            foot.append("hist ", style=st_dim)
            foot.append(f"{100 * p_beyond[0]:.1f}%{pm}{100 * p_beyond[1]:.1f}", style=st_hist)
        foot.append("  mkt ", style=st_dim)
        foot.append(f"{fm.fmt_prob(p_market, ascii_only=ascii_only)}", style=st_market)
    rows.append(foot)
    line = Text(no_wrap=True, overflow="ellipsis", style=st_text)
    line.append(f" {fmt_confidence(confidence)}: ", style=st_dim)
    if all(np.isfinite(rng)):
        line.append("hist ", style=st_dim)
        line.append(f"{fm.fmt_level(rng[0], ascii_only=ascii_only)}{dash}{fm.fmt_level(rng[1], ascii_only=ascii_only)}",
                    style=st_range)
    if all(np.isfinite(market_range)):
        line.append("  smile ", style=st_dim)
        line.append(f"{fm.fmt_level(market_range[0], ascii_only=ascii_only)}{dash}"
                    f"{fm.fmt_level(market_range[1], ascii_only=ascii_only)}", style=st_market)
    rows.append(line)
    rows.append(Text(" history is not a forecast", style=st_dim))
    return rows[:height]


def _distributions(fan, n_rows: int, width: int, lo: float, hi: float, strikes, density, ascii_only: bool,
                   st_dim: Style, st_market: Style, st_hist: Style, margin: int) -> list[Text]:
    """Both distributions at expiry on one price axis (left to right): the market's as bars, history's as dots."""
    g = 1 if ascii_only else 0
    plot_w = width - margin - 1
    edges = np.linspace(lo, hi, plot_w + 1)
    centres = 0.5 * (edges[1:] + edges[:-1])
    hist = terminal_density(fan.terminal, edges)
    market = np.zeros(plot_w)
    if strikes is not None and density is not None:
        k = np.asarray(strikes, dtype=float)
        d = np.asarray(density, dtype=float)
        ok = np.isfinite(k) & np.isfinite(d)
        if ok.sum() >= 2:
            market = np.interp(centres, k[ok], np.maximum(d[ok], 0.0), left=0.0, right=0.0)
    top = max(float(np.max(hist, initial=0.0)), float(np.max(market, initial=0.0)))
    chart = n_rows - 2
    out = [Text(" at expiry: " + GLYPHS["market"][g] + " market  " + GLYPHS["history"][g] + " history",
                style=st_dim, no_wrap=True, overflow="crop")]
    if top <= 0:
        return out + [Text("")] * (n_rows - 1)
    hm = np.round(market / top * chart).astype(int)
    hh = np.round(hist / top * chart).astype(int)
    for r in range(chart, 0, -1):
        line = Text(" " * margin, no_wrap=True, overflow="crop", style=st_dim)
        for c in range(plot_w):
            if hh[c] == r:
                line.append(GLYPHS["history"][g], style=st_hist)
            elif hm[c] >= r:
                line.append(GLYPHS["market"][g], style=st_market)
            else:
                line.append(" ")
        out.append(line)
    axis = Text(no_wrap=True, overflow="crop", style=st_dim)
    left, right = fm.fmt_level(lo, ascii_only=ascii_only), fm.fmt_level(hi, ascii_only=ascii_only)
    axis.append(" " * margin + left + " " * max(plot_w - len(left) - len(right), 1) + right)
    out.append(axis)
    return out
