"""A character grid drawn as a chart: percent labels on the left edge, a vertical bar, and the time axis.

Shared by the text charts of vols (the term structure and the volatility cone).
"""

from __future__ import annotations

from rich.style import Style
from rich.text import Text


def grid_lines(cells: list[list[tuple[str, Style]]], hi: float, lo: float, dim: Style,
               ascii_only: bool = False) -> list[Text]:
    """One Text per grid row (top labelled ``hi``, middle the mean, bottom ``lo``; vols as fractions,
    shown in percent), then the axis line under the plot area."""
    plot_h = len(cells)
    plot_w = len(cells[0]) if cells else 0
    label_rows = {0: hi, plot_h // 2: (hi + lo) / 2, plot_h - 1: lo}
    bar = "|" if ascii_only else "│"
    rows: list[Text] = []
    for r in range(plot_h):
        line = Text(no_wrap=True, overflow="crop")
        label = f"{100 * label_rows[r]:5.1f}%" if r in label_rows else ""
        line.append(f"{label:>6}", style=dim)
        line.append(bar, style=dim)
        for ch, style in cells[r]:
            line.append(ch, style=style)
        rows.append(line)
    axis = Text(no_wrap=True, overflow="crop")
    axis.append(" " * 6 + ("+" if ascii_only else "└") + ("-" if ascii_only else "─") * plot_w, style=dim)
    rows.append(axis)
    return rows
