"""The strike ladder's columns, without Textual: each column's heading, width, the field of the
contracts table it shows and its formatter; the default set; dropping unknown keys.

Kept apart from the ladder widget so the width plan, the settings and the app's first frame
need neither Textual's scroll view nor numpy.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable, Iterable

from rich.cells import cell_len, set_cell_size

from chaintriage.tui import formatting as fm

CALL = "call"
PUT = "put"


def _fmt_text(value: Any, width: int | None = None, ascii_only: bool = False) -> str:
    """Text from data, cleaned and fitted to ``width`` terminal cells (wide characters counted)."""
    text = fm.clean_text(value)
    if ascii_only:
        text = text.encode("ascii", "replace").decode("ascii")
    if width is None:
        return text
    if cell_len(text) > width:
        return set_cell_size(text, width - 1) + "~"
    return set_cell_size(text, width)


@dataclass(frozen=True)
class ColumnSpec:
    """One per-side column: its key, heading (and ASCII heading), width in cells,
    the contracts-table field it shows, and its formatter."""

    key: str
    heading: str
    heading_ascii: str
    width: int
    field: str
    fmt: Callable[..., str]
    text: bool = False


#: Every column the grid can show, in the order a column picker should list them.
COLUMNS: dict[str, ColumnSpec] = {
    spec.key: spec
    for spec in (
        ColumnSpec("bid", "bid", "bid", 8, "bid", fm.fmt_price),
        ColumnSpec("ask", "ask", "ask", 8, "ask", fm.fmt_price),
        ColumnSpec("mid", "mid", "mid", 8, "mid", fm.fmt_price),
        ColumnSpec("iv", "IV", "IV", 6, "iv", fm.fmt_vol),
        ColumnSpec("sigma", "σ dist", "s dist", 7, "sigma_distance", fm.fmt_sigma),
        ColumnSpec("p_beyond", "beyond", "beyond", 6, "p_beyond", fm.fmt_prob),
        ColumnSpec("p_flat", "1-vol", "1-vol", 6, "p_beyond_flat", fm.fmt_prob),
        ColumnSpec("p_touch", "touch", "touch", 6, "p_touch", fm.fmt_prob),
        ColumnSpec("p_touch_low", "t.low", "t.low", 6, "p_touch_low", fm.fmt_prob),
        ColumnSpec("p_touch_high", "t.high", "t.high", 6, "p_touch_high", fm.fmt_prob),
        ColumnSpec("delta", "delta", "delta", 6, "delta", fm.fmt_delta),
        ColumnSpec("breakeven", "BE", "BE", 8, "breakeven", fm.fmt_price),
        ColumnSpec("p_breakeven", "P(BE)", "P(BE)", 6, "p_breakeven", fm.fmt_prob),
        ColumnSpec("spread", "spread", "spread", 6, "spread_pct", fm.fmt_spread),
        ColumnSpec("open_interest", "OI", "OI", 9, "open_interest", fm.fmt_count),
        ColumnSpec("volume", "volume", "volume", 8, "volume", fm.fmt_count),
        ColumnSpec("flags", "flags", "flags", 12, "flags", _fmt_text, text=True),
        ColumnSpec("gamma", "gamma", "gamma", 7, "gamma", fm.fmt_greek),
        ColumnSpec("theta", "theta", "theta", 7, "theta", fm.fmt_greek),
        ColumnSpec("vega", "vega", "vega", 7, "vega", fm.fmt_greek),
        ColumnSpec("p_profit_sell", "P sell", "P sell", 6, "p_profit_sell", fm.fmt_prob),
        ColumnSpec("p_profit_buy", "P buy", "P buy", 6, "p_profit_buy", fm.fmt_prob),
        ColumnSpec("per_day_sell", "/day", "/day", 7, "premium_per_day_sell", fm.fmt_price),
        ColumnSpec("return_sell_annual", "yr ret", "yr ret", 7, "return_sell_annual", fm.fmt_return),
        ColumnSpec("edge_share_sell", "edge", "edge", 6, "edge_share_sell", fm.fmt_spread),
        ColumnSpec("hist_p_beyond", "RV bey", "RV bey", 6, "hist_p_beyond", fm.fmt_prob),
        ColumnSpec("boot_p_beyond", "boot", "boot", 6, "boot_p_beyond", fm.fmt_prob),
        ColumnSpec("boot_p_beyond_se", "boot±", "boot+-", 6, "boot_p_beyond_se", fm.fmt_prob),
        ColumnSpec("hist_p_touch", "RV tch", "RV tch", 6, "hist_p_touch", fm.fmt_prob),
        ColumnSpec("boot_p_touch", "b.tch", "b.tch", 6, "boot_p_touch", fm.fmt_prob),
    )
}

#: Key in a contracts frame's ``attrs`` naming the fields whose figures are still being computed
#: (the ladder shows ``formatting.pending_mark`` in their cells); the touch fields are such.
TOUCH_PENDING = "pending_fields"
TOUCH_FIELDS = ("p_touch", "p_touch_low", "p_touch_high")

#: The compact set shown until the user picks others.
DEFAULT_COLUMNS: tuple[str, ...] = ("bid", "ask", "iv", "sigma", "p_beyond", "p_touch")

#: Header lines above the strike rows (title, side labels, column headings).
HEADER_LINES = 3


#: The words of a ladder sort's order in the settings file.
SORT_ORDERS = ("ascending", "descending")


def sort_text(sort: tuple[str, str, bool] | None) -> str:
    """A ladder sort (column key, side, descending) as the settings file keeps it, e.g.
    ``"p_beyond put descending"``; "" for strike order."""
    if sort is None:
        return ""
    key, side, descending = sort
    return f"{key} {side} {SORT_ORDERS[bool(descending)]}"


def parse_sort_text(text: Any) -> tuple[str, str, bool] | None:
    """The ladder sort ``sort_text`` wrote (None for "": strike order); ValueError for anything else
    (an unknown column, side or order, or not text)."""
    if not isinstance(text, str):
        raise ValueError("should be text such as 'p_beyond put descending'")
    words = text.split()
    if not words:
        return None
    if len(words) != 3 or words[0] not in COLUMNS or words[1] not in (CALL, PUT) or words[2] not in SORT_ORDERS:
        raise ValueError("should be a column, call or put, and ascending or descending, "
                         "e.g. 'p_beyond put descending'")
    return words[0], words[1], words[2] == SORT_ORDERS[1]


def known_columns(keys: Iterable[str]) -> list[str]:
    """``keys`` without the ones the grid does not know (e.g. from an older settings file)."""
    return [k for k in keys if k in COLUMNS]
