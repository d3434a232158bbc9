"""How the triage screen shares its width between the ladder and the plot.

Pure functions (no Textual). The ladder needs ``2 * side + middle`` cells,
where each side is the sum of its columns' widths plus one space each and the
middle is the strike column plus six cells of marks and rules (see
strike_grid). When the terminal is too narrow for every chosen column, the
least important ones are left out of the drawing (not out of the settings)
and named in the filter line.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

from chaintriage.tui.ladder_columns import COLUMNS

#: Columns in the order they are kept when the width runs short (most important first): the
#: quotes a trader deals at, then how far out the strike is and its odds, the vol, the touch
#: odds, then liquidity (what the filter's limits test: spread, open interest, flags), then
#: the rest. Columns not named here (added later) come after all of these.
PRIORITY: tuple[str, ...] = (
    "bid", "ask", "sigma", "p_beyond", "iv", "p_touch", "mid", "delta", "spread", "open_interest", "flags",
    "breakeven", "p_breakeven", "p_flat", "p_touch_low", "p_touch_high", "volume",
)
#: When the ladder cannot hold both quotes beside the distance and the odds, it keeps one
#: quote (the bid), the distance, the odds and the vol first, then the ask.
NARROW_PRIORITY: tuple[str, ...] = ("bid", "sigma", "p_beyond", "iv", "ask") + tuple(
    k for k in PRIORITY if k not in ("bid", "sigma", "p_beyond", "iv", "ask"))


#: How many of the chosen columns (by PRIORITY) the ladder keeps before the plot gets any width:
#: the plot yields before the quotes and the odds do.
ESSENTIAL_COLUMNS = 4

#: The narrowest plot pane worth drawing (cells, with its left border).
MIN_PLOT = 40
#: Below this terminal width the plot is hidden unless the user asked for it.
AUTO_PLOT_MIN_WIDTH = 120
#: Cells the ladder's vertical scrollbar takes.
SCROLLBAR = 1

PLOT_AUTO = "auto"
PLOT_SHOWN = "shown"
PLOT_HIDDEN = "hidden"


def side_width(keys: Sequence[str]) -> int:
    """Cells one side of the ladder takes for these columns."""
    return sum(COLUMNS[k].width + 1 for k in keys)


def ladder_width(keys: Sequence[str], strike_width: int) -> int:
    """Cells the whole ladder takes (both sides, marks, rules and the strike column)."""
    return 2 * side_width(keys) + strike_width + 6


def fit_columns(keys: Sequence[str], available: int, strike_width: int) -> tuple[list[str], list[str]]:
    """(columns drawn, columns left out) so the ladder fits ``available`` cells.

    Columns are taken by PRIORITY while they fit (by NARROW_PRIORITY when even the
    essential columns do not fit) (a smaller, less important one
    may still fit after a wider one did not); the drawn ones keep the order of
    ``keys``. At least one column is always drawn.
    """
    keys = [k for k in keys if k in COLUMNS]
    if not keys:
        return [], []
    if ladder_width(keys, strike_width) <= available:
        return list(keys), []
    budget = (available - strike_width - 6) // 2
    order = PRIORITY if ladder_width(essential(keys), strike_width) <= available else NARROW_PRIORITY
    rank = {k: (order.index(k) if k in order else len(order)) for k in keys}
    chosen: set[str] = set()
    used = 0
    for k in sorted(keys, key=lambda k: rank[k]):
        w = COLUMNS[k].width + 1
        if used + w <= budget:
            chosen.add(k)
            used += w
    if not chosen:
        chosen.add(min(keys, key=lambda k: rank[k]))
    return [k for k in keys if k in chosen], [k for k in keys if k not in chosen]


@dataclass(frozen=True)
class Plan:
    """The plot pane's width (0: hidden) and the ladder columns drawn / left out.

    ``plot_squeezed`` is True when the plot was wanted (asked for, or the terminal is wide
    enough for it) but left out because the ladder's essential columns needed the width.
    """

    plot_width: int
    columns: list[str]
    left_out: list[str]
    plot_squeezed: bool = False


def essential(keys: Sequence[str]) -> list[str]:
    """The first ESSENTIAL_COLUMNS of ``keys`` by PRIORITY (the ones the plot never displaces)."""
    known = [k for k in keys if k in COLUMNS]
    rank = {k: (PRIORITY.index(k) if k in PRIORITY else len(PRIORITY)) for k in known}
    return sorted(known, key=lambda k: rank[k])[:ESSENTIAL_COLUMNS]


def plan_layout(term_width: int, keys: Sequence[str], strike_width: int, plot: str = PLOT_AUTO) -> Plan:
    """Share ``term_width`` cells: the ladder gets what its columns need, the plot the rest.

    ``plot``: "auto" shows the plot when at least MIN_PLOT cells are left beside the whole
    ladder; "shown" (a remembered choice) shows it at MIN_PLOT cells or more as long as the
    ladder beside it keeps its essential columns (``essential``); "hidden" never. Whatever
    the setting, the plot yields before the quotes: when the essential columns and MIN_PLOT do
    not both fit, the plot is left out (``plot_squeezed``), and it comes back at a wider size.
    """
    known = [k for k in keys if k in COLUMNS]
    need = ladder_width(known, strike_width) + SCROLLBAR
    spare = term_width - need
    squeezed = False
    if plot == PLOT_HIDDEN:
        plot_w = 0
    elif spare >= MIN_PLOT:
        plot_w = spare
    elif plot == PLOT_SHOWN or term_width >= AUTO_PLOT_MIN_WIDTH:
        core_need = ladder_width(essential(known), strike_width) + SCROLLBAR
        if term_width - core_need >= MIN_PLOT and plot == PLOT_SHOWN:
            plot_w = MIN_PLOT
        else:
            plot_w = 0
            squeezed = True
    else:
        plot_w = 0
    cols, left_out = fit_columns(keys, term_width - plot_w - SCROLLBAR, strike_width)
    return Plan(plot_w, cols, left_out, squeezed)
