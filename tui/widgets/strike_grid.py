"""The strike ladder of one expiry: a line-drawn Textual widget.

One row per strike: the call side on the left, the strike in the middle, the
put side on the right, each side showing the same chosen columns. A dashed
line across the ladder sits between the strikes around the forward and shows
the forward's value. Out-of-the-money figures take the theme's ``otm_call`` /
``otm_put`` colours; in-the-money figures the ``itm`` colours. The highlighted
strike row is painted ``highlight``; on it, the selected side (call or put,
switched with left/right) is painted ``selected``. Shortlisted contracts carry
a mark beside the strike.

Filtering is the caller's job: ``set_rows`` receives only the rows to show.

``set_sort`` orders the rows by one column of one side (ascending or
descending; missing values last, ties in strike order) instead of by strike;
``set_sort(None)`` goes back to strike order. While sorted the forward line is
left out (it sits between strikes, which no longer run in order), the side
label names the sort, and ``g`` still goes to the strike nearest the forward,
wherever the sort put it.

The widget draws itself line by line (``ScrollView.render_line``) from cached
``Strip``s built from plain Segments: text from data is never parsed as markup.
Rows are formatted lazily, when first drawn, so a new expiry costs only the
visible rows. Switching expiry draws one frame: the vertical scroll bar is
always there (an empty track when every row fits) and a new row count updates
it without a layout pass (see ``_update_virtual_size``).
"""

from __future__ import annotations

import math
from collections import OrderedDict
from typing import Any, Iterable, Sequence

import numpy as np
import pandas as pd
from rich.segment import Segment
from rich.style import Style
from textual.binding import Binding
from textual.events import Click
from textual.geometry import Size
from textual.message import Message
from textual.scroll_view import ScrollView
from textual.strip import Strip

from chaintriage.tui import formatting as fm
from chaintriage.tui.ladder_columns import (  # noqa: F401  (the ladder's columns, re-exported)
    CALL,
    COLUMNS,
    DEFAULT_COLUMNS,
    HEADER_LINES,
    PUT,
    TOUCH_PENDING,
    ColumnSpec,
    _fmt_text,
    known_columns,
)
from chaintriage.tui.themes import FALLBACK_THEME, ChainTheme


#: Expiries whose arrays and drawn rows the ladder keeps, so switching back to one formats nothing again.
KEEP_EXPIRIES = 16


class _Styles:
    """Rich styles for one theme."""

    def __init__(self, theme: ChainTheme) -> None:
        c = theme.colors
        bg = c["background"]
        self.base = Style(color=c["text"], bgcolor=bg)
        self.dim = Style(color=c["dim"], bgcolor=bg)
        self.header = Style(color=c["text"], bgcolor=c["surface"], bold=True)
        self.header_dim = Style(color=c["dim"], bgcolor=c["surface"])
        self.header_selected = Style(color=c["selected_text"], bgcolor=c["selected"], bold=True)
        self.otm = {CALL: Style(color=c["otm_call"], bgcolor=bg), PUT: Style(color=c["otm_put"], bgcolor=bg)}
        self.itm = Style(color=c["itm"], bgcolor=c["itm_background"])
        self.missing = Style(color=c["dim"], bgcolor=bg)
        self.strike = Style(color=c["text"], bgcolor=c["surface"], bold=True)
        self.rule = Style(color=c["dim"], bgcolor=bg)
        self.cursor = Style(color=c["highlight_text"], bgcolor=c["highlight"])
        self.cursor_strike = Style(color=c["highlight_text"], bgcolor=c["highlight"], bold=True)
        self.selected = Style(color=c["selected_text"], bgcolor=c["selected"], bold=True)
        self.mark = Style(color=c["marked"], bgcolor=bg, bold=True)
        # On the highlighted row the mark takes the row's text colour: the mark colour may not
        # stand out from the highlight (the shape of the mark says it).
        self.cursor_mark = Style(color=c["highlight_text"], bgcolor=c["highlight"], bold=True)
        self.forward = Style(color=c["forward_marker"], bgcolor=bg)
        self.forward_label = Style(color=c["forward_marker"], bgcolor=bg, bold=True)



class _Numbers:
    """Number columns of a frame as one float matrix: ``values`` (rows x fields), ``fields`` in order."""

    def __init__(self, values: np.ndarray, fields: list[str]) -> None:
        self.values = values
        self.fields = fields
        self.shape = values.shape


def _number_columns(frame: pd.DataFrame, fields: Sequence[str]) -> _Numbers:
    """``fields`` of ``frame`` that it has, as floats (what is not a number is NaN): the columns of a number
    dtype taken together (one conversion, not a Series per column), any other one by ``pd.to_numeric``."""
    present = [f for f in dict.fromkeys(fields) if f in frame.columns]
    dtypes = frame.dtypes
    together = [f for f in present if pd.api.types.is_numeric_dtype(dtypes[f])]
    values = np.empty((len(frame), len(present)))
    if together:
        at = [present.index(f) for f in together]
        values[:, at] = frame[together].to_numpy(dtype=float, na_value=np.nan)
    for j, f in enumerate(present):
        if f not in together:
            values[:, j] = pd.to_numeric(frame[f], errors="coerce").to_numpy(dtype=float)
    return _Numbers(values, present)

class StrikeGrid(ScrollView, can_focus=True):
    """One expiry's strike ladder. Public API: ``set_rows``, ``set_columns``,
    ``set_marked``, ``set_theme``, ``set_ascii``, ``cursor_to_strike``,
    ``highlighted``, ``highlighted_contract``; message ``StrikeGrid.StrikeHighlighted``."""

    DEFAULT_CSS = """
    StrikeGrid {
        height: 1fr;
        width: 1fr;
        overflow-y: scroll;
    }
    """

    BINDINGS = [
        Binding("up,k", "cursor_up", "previous strike", show=False),
        Binding("down,j", "cursor_down", "next strike", show=False),
        Binding("pageup", "cursor_page_up", "page up", show=False),
        Binding("pagedown", "cursor_page_down", "page down", show=False),
        Binding("home", "cursor_first", "first strike", show=False),
        Binding("end", "cursor_last", "last strike", show=False),
        Binding("g", "cursor_forward", "forward row", show=False),
        Binding("left", "select_side('call')", "call side", show=False),
        Binding("right", "select_side('put')", "put side", show=False),
    ]

    class StrikeHighlighted(Message):
        """The highlighted strike or the selected side changed.

        ``strike`` is None when the grid has no rows; ``kind`` is "call" or "put";
        ``expiry`` is a pd.Timestamp (or None if unknown).
        """

        def __init__(self, grid: "StrikeGrid", expiry: pd.Timestamp | None,
                     strike: float | None, kind: str) -> None:
            super().__init__()
            self.grid = grid
            self.expiry = expiry
            self.strike = strike
            self.kind = kind

        @property
        def control(self) -> "StrikeGrid":
            return self.grid

    def __init__(self, *, theme: ChainTheme | None = None, columns: Sequence[str] | None = None,
                 ascii_only: bool = False, title: bool = True, name: str | None = None,
                 id: str | None = None, classes: str | None = None) -> None:
        """``title=False`` leaves out the title line (underlying, expiry, forward, strike count)
        when the screen shows those elsewhere: the header is then HEADER_LINES - 1 lines."""
        super().__init__(name=name, id=id, classes=classes)
        self._title = bool(title)
        self.header_lines = HEADER_LINES if self._title else HEADER_LINES - 1
        self._theme = theme or FALLBACK_THEME
        self._styles = _Styles(self._theme)
        self._ascii = ascii_only
        self._columns: tuple[ColumnSpec, ...] = tuple(COLUMNS[k] for k in DEFAULT_COLUMNS)
        self._frame: pd.DataFrame = pd.DataFrame()
        self._strikes = np.empty(0)
        self._pos = {CALL: np.empty(0, dtype=np.int64), PUT: np.empty(0, dtype=np.int64)}
        self._values: dict[tuple[str, str], np.ndarray] = {}
        self._otm = {CALL: np.empty(0, dtype=bool), PUT: np.empty(0, dtype=bool)}
        self._forward = math.nan
        self._fwd_pos = -1
        self._expiry: pd.Timestamp | None = None
        self._underlying = ""
        self._hidden = 0
        self._strike_decimals = 0
        self._strike_width = 8
        self._pending: frozenset[str] = frozenset()
        self._marked: set[tuple[float, str]] = set()
        self._cursor = -1
        self._side = CALL
        self._row_cache: dict[tuple[int, int], Strip] = {}
        self._header_cache: list[Strip] | None = None
        #: What ``set_rows`` computed for recent inputs, with their drawn rows (see ``_rows_for_current``).
        self._kept: OrderedDict[tuple, dict[str, Any]] = OrderedDict()
        self._kept_key: tuple | None = None
        #: Bumped whenever the looks of every row change (columns, theme, ASCII).
        self._looks = 0
        #: (column key, side, descending) the rows are sorted by; None: strike order.
        self._sort: tuple[str, str, bool] | None = None
        #: Strike index shown on each display row while sorted (and its inverse); None in strike order.
        self._order: np.ndarray | None = None
        self._rank: np.ndarray | None = None
        if columns is not None:
            self._columns = self._specs(columns)
        self._update_virtual_size()

    # ------------------------------------------------------------------ data

    @staticmethod
    def _specs(keys: Iterable[str]) -> tuple[ColumnSpec, ...]:
        specs = []
        for key in keys:
            if key not in COLUMNS:
                raise ValueError(f"unknown grid column {key!r}; known: {', '.join(COLUMNS)}")
            if COLUMNS[key] not in specs:
                specs.append(COLUMNS[key])
        return tuple(specs)

    def set_rows(self, expiry_frame: pd.DataFrame, forward: float, *, expiry: Any = None,
                 underlying: str | None = None, hidden: int = 0, keep_highlight: bool = True,
                 strike_width: int = 0) -> None:
        """Show these contracts (one expiry, both kinds, already filtered by the caller).

        ``forward`` in price units places the forward line (NaN: no line);
        ``hidden`` is how many strikes the caller's filter left out (shown in the title).
        The highlight stays on the nearest strike to the one highlighted before, or
        goes to the strike nearest the forward (always, with ``keep_highlight=False``,
        e.g. for another underlying). ``strike_width``: the least width of the strike column (the
        caller's widest over every expiry keeps the ladder's width, and so the screen's layout, while
        paging through them).
        """
        before = self._highlight_key()
        prev_strike = self.highlighted[0] if (self.highlighted and keep_highlight) else None
        frame = expiry_frame
        fwd_key = float(forward) if forward is not None and np.isfinite(forward) else math.nan
        key = (id(frame), repr(fwd_key), str(expiry), str(underlying), int(hidden))
        kept = self._kept.get(key)
        if kept is not None and kept["_frame"] is frame:
            self._kept.move_to_end(key)
            for name in self._KEPT_FIELDS:
                setattr(self, name, kept[name])
        else:
            self._compute_rows(frame, forward, expiry, underlying, hidden)
            kept = {name: getattr(self, name) for name in self._KEPT_FIELDS}
            kept["rows"] = {}
            self._kept[key] = kept
            while len(self._kept) > KEEP_EXPIRIES:
                self._kept.popitem(last=False)
        self._kept_key = key
        self._strike_width = max(self._strike_width, int(strike_width))
        self._apply_sort()
        strikes = self._strikes
        m = len(strikes)
        # Where the highlight goes.
        if m == 0:
            self._cursor = -1
        else:
            target = prev_strike if prev_strike is not None else self._forward
            if target is None or not math.isfinite(target):
                self._cursor = 0
            else:
                self._cursor = int(np.argmin(np.abs(strikes - target)))
        self._invalidate()
        self._update_virtual_size()
        self._scroll_cursor_into_view(center=True)
        if self.is_mounted:
            # The scroll limits follow a new width (a scrollbar coming or going) only after the next
            # layout: look again then (nothing moves, and nothing is drawn again, when it was right).
            self.call_after_refresh(self._scroll_cursor_into_view, True)
        self._post_if_changed(before)

    #: What ``_compute_rows`` sets, kept per input in ``_kept``.
    _KEPT_FIELDS = ("_frame", "_strikes", "_pos", "_values", "_otm", "_forward", "_fwd_pos", "_expiry",
                    "_underlying", "_hidden", "_strike_decimals", "_strike_width", "_pending")

    def _compute_rows(self, frame: pd.DataFrame, forward: float, expiry: Any, underlying: str | None,
                      hidden: int) -> None:
        """The per-strike arrays of ``frame`` (see ``set_rows``)."""
        self._pos = {}
        self._otm = {}
        self._frame = frame
        self._pending = frozenset(frame.attrs.get(TOUCH_PENDING, ()))  # fields still being computed
        n = len(frame)
        if n:
            strikes_all = pd.to_numeric(frame["strike"], errors="coerce").to_numpy(dtype=float)
            kinds = frame["kind"].astype(str).str.lower().to_numpy()
            ok = np.isfinite(strikes_all)
            strikes = np.unique(strikes_all[ok])
        else:
            strikes_all = np.empty(0)
            kinds = np.empty(0, dtype=object)
            ok = np.empty(0, dtype=bool)
            strikes = np.empty(0)
        self._strikes = strikes
        m = len(strikes)
        idx = np.searchsorted(strikes, np.where(ok, strikes_all, 0.0)) if n else np.empty(0, dtype=np.int64)
        rows = np.arange(n)
        for side in (CALL, PUT):
            pos = np.full(m, -1, dtype=np.int64)
            sel = ok & (kinds == side) if n else ok
            pos[idx[sel]] = rows[sel]
            self._pos[side] = pos
        self._values = {}
        numbers = _number_columns(frame, [spec.field for spec in COLUMNS.values() if not spec.text])
        by_field: dict[tuple[str, str], np.ndarray] = {}
        for side in (CALL, PUT):  # every number column of a side laid out by strike at once
            pos = self._pos[side]
            has = pos >= 0
            laid = np.full((m, numbers.shape[1]), np.nan)
            if has.any():
                laid[has] = numbers.values[pos[has]]
            for j, field in enumerate(numbers.fields):
                by_field[(field, side)] = laid[:, j]
        for spec in COLUMNS.values():
            col = frame[spec.field].to_numpy() if spec.text and spec.field in frame.columns else None
            for side in (CALL, PUT):
                if not spec.text:
                    out = by_field.get((spec.field, side))
                    self._values[(spec.key, side)] = np.full(m, np.nan) if out is None else out
                    continue
                pos = self._pos[side]
                has = pos >= 0
                out = np.full(m, "", dtype=object)
                if col is not None and has.any():
                    out[has] = col[pos[has]]
                self._values[(spec.key, side)] = out
        self._forward = float(forward) if forward is not None and np.isfinite(forward) else math.nan
        otm_known = otm_vals = None
        if "otm" in frame.columns and n:
            try:
                flags = frame["otm"].astype("boolean")
                otm_known = ~flags.isna().to_numpy(dtype=bool)
                otm_vals = flags.fillna(False).to_numpy(dtype=bool)
            except (TypeError, ValueError):
                otm_known = otm_vals = None  # not booleans: fall back to strike vs forward
        for side in (CALL, PUT):
            pos = self._pos[side]
            out = strikes > self._forward if side == CALL else strikes < self._forward
            if otm_known is not None:
                sel = pos >= 0
                sel[sel] = otm_known[pos[sel]]
                out[sel] = otm_vals[pos[sel]]
            self._otm[side] = out
        self._fwd_pos = int(np.searchsorted(strikes, self._forward, side="right")) \
            if math.isfinite(self._forward) else -1
        if expiry is None and n and "expiry" in frame.columns:
            expiry = frame["expiry"].iloc[0]
        try:
            self._expiry = pd.Timestamp(expiry) if expiry is not None else None
        except (TypeError, ValueError):
            self._expiry = None
        if underlying is None and n and "underlying" in frame.columns:
            underlying = frame["underlying"].iloc[0]
        self._underlying = fm.clean_text(underlying) if underlying is not None else ""
        self._hidden = int(hidden)
        self._strike_decimals = fm.strike_decimals(strikes)
        self._strike_width = fm.strike_column_width(strikes)

    def set_columns(self, columns: Sequence[str]) -> None:
        """Choose the per-side columns by key (see COLUMNS), in display order."""
        specs = self._specs(columns)
        if not specs:
            raise ValueError("choose at least one column")
        self._columns = specs
        self._looks += 1
        self._invalidate()
        self._update_virtual_size()

    @property
    def columns(self) -> list[str]:
        """The keys of the columns shown on each side."""
        return [s.key for s in self._columns]

    def set_marked(self, marked: Iterable[tuple[float, str]]) -> None:
        """Mark these (strike, kind) pairs as shortlisted (kind "call"/"put")."""
        marked = {(float(k), str(kind)) for k, kind in marked}
        if marked == self._marked:
            return
        self._marked = marked
        self._invalidate()

    def set_sort(self, sort: tuple[str, str, bool] | None) -> None:
        """Order the rows by ``(column key, "call" or "put", descending)``, or by strike with None.

        Missing values go last either way; equal values keep strike order. The
        highlight stays on its contract, centred.
        """
        if sort is not None:
            key, side, descending = sort
            if key not in COLUMNS or side not in (CALL, PUT):
                raise ValueError(f"cannot sort by {key!r} on the {side!r} side")
            sort = (key, side, bool(descending))
        if sort == self._sort:
            return
        self._sort = sort
        self._apply_sort()
        self._header_cache = None
        self._invalidate()
        self._update_virtual_size()
        self._scroll_cursor_into_view(center=True)

    @property
    def sort(self) -> tuple[str, str, bool] | None:
        """(column key, side, descending) of the sort, or None in strike order."""
        return self._sort

    def sort_words(self) -> str:
        """The sort in plain words, e.g. "by bid, high to low" ("" in strike order)."""
        if self._sort is None:
            return ""
        key, _, descending = self._sort
        spec = COLUMNS[key]
        heading = spec.heading_ascii if self._ascii else spec.heading
        if spec.text:
            return f"by {heading}, {'Z to A' if descending else 'A to Z'}"
        return f"by {heading}, {'high to low' if descending else 'low to high'}"

    def _apply_sort(self) -> None:
        """Work out the display order of the current rows for the sort (None: strike order)."""
        m = len(self._strikes)
        if self._sort is None or not m:
            self._order = self._rank = None
            return
        key, side, descending = self._sort
        values = self._values.get((key, side))
        index = np.arange(m)
        if values is None:
            order = index
        elif COLUMNS[key].text:
            texts = [fm.clean_text(v) for v in values]
            filled = [i for i in range(m) if texts[i]]
            filled.sort(key=lambda i: texts[i].lower(), reverse=descending)  # stable: ties stay in strike order
            order = np.array(filled + [i for i in range(m) if not texts[i]], dtype=np.int64)
        else:
            v = np.asarray(values, dtype=float)
            missing = ~np.isfinite(v)
            v = np.where(missing, 0.0, -v if descending else v)
            order = np.lexsort((index, v, missing))
        rank = np.empty(m, dtype=np.int64)
        rank[order] = index
        self._order, self._rank = order, rank

    def set_theme(self, theme: ChainTheme) -> None:
        """Repaint with ``theme``'s colours."""
        self._theme = theme
        self._styles = _Styles(theme)
        self._looks += 1
        self._invalidate()

    def set_ascii(self, ascii_only: bool) -> None:
        """Draw with ASCII characters only (True) or Unicode (False)."""
        self._ascii = bool(ascii_only)
        self._looks += 1
        self._invalidate()

    @property
    def strikes(self) -> np.ndarray:
        """The strikes shown, ascending (price units)."""
        return self._strikes

    @property
    def strike_width(self) -> int:
        """Cells of the strike column (grows with the longest strike shown)."""
        return self._strike_width

    @property
    def expiry(self) -> pd.Timestamp | None:
        return self._expiry

    @property
    def forward(self) -> float:
        return self._forward

    @property
    def selected_kind(self) -> str:
        """The selected side: "call" or "put"."""
        return self._side

    @property
    def highlighted(self) -> tuple[float, str] | None:
        """(strike, kind) of the highlighted contract, or None when there are no rows."""
        if self._cursor < 0 or self._cursor >= len(self._strikes):
            return None
        return float(self._strikes[self._cursor]), self._side

    def highlighted_contract(self) -> dict[str, Any] | None:
        """The highlighted contract's row (all its columns) as a dict, or None if that
        side has no contract at the highlighted strike."""
        pos = self._highlighted_row()
        return self._frame.iloc[pos].to_dict() if pos >= 0 else None

    def highlighted_value(self, field: str) -> Any:
        """One column of the highlighted contract's row (None when that side has no contract at the
        highlighted strike or the rows have no such column): cheaper than the whole row."""
        pos = self._highlighted_row()
        return self._frame[field].iat[pos] if pos >= 0 and field in self._frame.columns else None

    def _highlighted_row(self) -> int:
        """Position of the highlighted contract in the expiry's rows (-1: none on that side there)."""
        if self.highlighted is None:
            return -1
        return int(self._pos[self._side][self._cursor])

    def cursor_to_strike(self, strike: float, kind: str | None = None) -> None:
        """Highlight the strike nearest ``strike`` (and select ``kind`` if given)."""
        if not len(self._strikes):
            return
        before = self._highlight_key()
        self._cursor = int(np.argmin(np.abs(self._strikes - float(strike))))
        if kind in (CALL, PUT):
            self._side = kind
            self._header_cache = None
        self._scroll_cursor_into_view()
        self.refresh()
        self._post_if_changed(before)

    # ------------------------------------------------------------- layout

    def _side_width(self) -> int:
        return sum(spec.width + 1 for spec in self._columns)

    def _total_width(self) -> int:
        # call cells, " " + mark, "|", strike, "|", mark + " ", put cells
        return 2 * self._side_width() + 2 + 1 + self._strike_width + 1 + 2

    def _display_count(self) -> int:
        m = len(self._strikes)
        if m == 0:
            return 1  # the "nothing to show" line
        return m + (1 if self._fwd_pos >= 0 and self._order is None else 0)

    def _display_row(self, i: int) -> int:
        if self._rank is not None:
            return int(self._rank[i])
        return i + (1 if 0 <= self._fwd_pos <= i else 0)

    def _strike_index(self, r: int) -> int | None:
        """Strike index of display row ``r``; None for the forward line."""
        if self._order is not None:
            return int(self._order[r])
        if self._fwd_pos >= 0:
            if r == self._fwd_pos:
                return None
            if r > self._fwd_pos:
                return r - 1
        return r

    def forward_line_index(self) -> int | None:
        """The display row (0 = first row under the header) of the forward line, or None (also while sorted)."""
        return self._fwd_pos if self._fwd_pos >= 0 and len(self._strikes) and self._order is None else None

    def _update_virtual_size(self) -> None:
        size = Size(self._total_width(), self._display_count() + self.header_lines)
        if size == self.virtual_size:
            return
        if size.width != self.virtual_size.width or not self.is_mounted or not hasattr(self, "_scroll_update"):
            self.virtual_size = size  # Textual lays the screen out again
            return
        # Only the row count changed (another expiry): no layout pass. A layout pass makes Textual
        # update the scroll bars after the frame, which draws a second frame (or more). The scroll
        # bars are updated here instead, before the frame (the vertical bar is always shown, an empty
        # track when every row fits, so paging never shows or hides it, which would lay out again).
        self.set_reactive(StrikeGrid.virtual_size, size)
        self._scroll_update(size)
        self.refresh()

    def _rows_for_current(self) -> dict[tuple[int, int], Strip]:
        """The drawn-rows cache of the rows shown now, with the current looks and marks (kept per
        expiry, so switching back finds its rows drawn)."""
        kept = self._kept.get(self._kept_key) if self._kept_key is not None else None
        if kept is None:
            return {}
        wanted = (self._looks, frozenset(self._marked), self._sort)
        rows = kept["rows"]
        for other in [k for k in rows if k[0] != self._looks]:
            del rows[other]  # drawn with looks that are gone
        return rows.setdefault(wanted, {})

    def _invalidate(self) -> None:
        self._row_cache = self._rows_for_current()
        self._header_cache = None
        self.refresh()

    def _data_height(self) -> int:
        return max(1, self.scrollable_content_region.height - self.header_lines)

    def _scroll_cursor_into_view(self, center: bool = False) -> None:
        if self._cursor < 0:
            return
        r = self._display_row(self._cursor)
        h = self._data_height()
        top = int(self.scroll_offset.y)
        if center:
            new_top = min(max(0, r - h // 2), self.max_scroll_y)
        elif r < top:
            new_top = r
        elif r >= top + h:
            new_top = r - h + 1
        else:
            return
        if new_top != top:
            self.scroll_to(y=new_top, animate=False, immediate=True)

    # ------------------------------------------------------------- drawing

    def _cell(self, spec: ColumnSpec, side: str, i: int) -> str:
        if spec.field in self._pending:
            return fm.pending_mark(spec.width, self._ascii)
        value = self._values[(spec.key, side)][i]
        return spec.fmt(value, spec.width, self._ascii)

    def _side_segments(self, side: str, i: int, state: int) -> list[Segment]:
        st = self._styles
        has = self._pos[side][i] >= 0
        if state:
            style = st.selected if (state == 1) == (side == CALL) else st.cursor
        elif not has:
            style = st.missing
        elif self._otm[side][i]:
            style = st.otm[side]
        else:
            style = st.itm
        if not has:
            blank = fm.placeholder(self._ascii)
            text = "".join(" " + fm.fit(blank, spec.width) for spec in self._columns)
        else:
            text = "".join(" " + self._cell(spec, side, i) for spec in self._columns)
        if side == PUT:
            text = text[1:] + " "  # cells then a trailing space, mirroring the call side
        return [Segment(text, style)]

    def _pointer(self, side: str) -> str:
        """The glyph beside the strike on the highlighted row's selected side."""
        if self._ascii:
            return ">" if side == CALL else "<"
        return "▸" if side == CALL else "◂"

    def _mark_char(self, strike: float, side: str) -> str:
        if (strike, side) in self._marked:
            return "*" if self._ascii else "●"
        return " "

    def _row_strip(self, r: int) -> Strip:
        i = self._strike_index(r)
        if i is None:
            return self._forward_strip()
        state = 0
        if i == self._cursor:
            state = 1 if self._side == CALL else 2
        key = (r, state)
        strip = self._row_cache.get(key)
        if strip is not None:
            return strip
        st = self._styles
        strike = float(self._strikes[i])
        bar = "|" if self._ascii else "│"
        mark_style = st.cursor_mark if state else st.mark
        rule_style = st.cursor if state else st.rule
        strike_text = fm.fmt_strike(strike, self._strike_decimals).center(self._strike_width)
        # The highlighted row carries a pointer on its selected side, so it reads without colour
        # (monochrome terminals, screen captures, colour-blind users).
        call_pointer = self._pointer(CALL) if state == 1 else " "
        put_pointer = self._pointer(PUT) if state == 2 else " "
        segments = self._side_segments(CALL, i, state)
        segments += [
            Segment(call_pointer, st.cursor_mark if state else st.base),
            Segment(self._mark_char(strike, CALL), mark_style),
            Segment(bar, rule_style),
            Segment(strike_text, st.cursor_strike if state else st.strike),
            Segment(bar, rule_style),
            Segment(self._mark_char(strike, PUT), mark_style),
            Segment(put_pointer, st.cursor_mark if state else st.base),
        ]
        segments += self._side_segments(PUT, i, state)
        strip = Strip(segments)
        self._row_cache[key] = strip
        return strip

    def _forward_strip(self) -> Strip:
        key = (-1, 0)
        strip = self._row_cache.get(key)
        if strip is not None:
            return strip
        st = self._styles
        total = self._total_width()
        fill = "-" if self._ascii else "╌"
        label = f" fwd {fm.fmt_level(self._forward)} "
        centre = self._side_width() + 3 + self._strike_width // 2
        start = max(0, min(total - len(label), centre - len(label) // 2))
        left = fill * start
        right = fill * max(0, total - start - len(label))
        strip = Strip([Segment(left, st.forward), Segment(label, st.forward_label),
                       Segment(right, st.forward)], total)
        self._row_cache[key] = strip
        return strip

    def _empty_strip(self) -> Strip:
        text = " no strikes to show"
        if self._hidden:
            text += f" ({self._hidden} hidden by the filter)"
        return Strip([Segment(text, self._styles.dim)], len(text))

    def _headers(self) -> list[Strip]:
        if self._header_cache is not None:
            return self._header_cache
        st = self._styles
        total = self._total_width()
        side_w = self._side_width()
        # Line 0: title.
        parts = []
        if self._underlying:
            parts.append(self._underlying)
        parts.append(fm.fmt_date(self._expiry, self._ascii) if self._expiry is not None else "")
        title = " " + "  ".join(p for p in parts if p)
        info = f"  fwd {fm.fmt_level(self._forward, ascii_only=self._ascii)}  {len(self._strikes)} strikes"
        if self._hidden:
            info += f", {self._hidden} hidden by the filter"
        line0 = Strip([Segment(title, st.header), Segment(info, st.header_dim)]).extend_cell_length(total, st.header_dim)
        # Line 1: side labels, the selected side painted.
        fill = "-" if self._ascii else "─"

        sorted_side = self._sort[1] if self._sort is not None else None

        def label(word: str, selected: bool, width: int) -> list[Segment]:
            if sorted_side is not None and word == sorted_side + "s":
                word = f"{word} {self.sort_words()}"
            word_text = f" {word} "
            if len(word_text) > width:
                word_text = word_text[:max(0, width - 1)] + ("~" if self._ascii else "…")
            left = (width - len(word_text)) // 2
            right = width - len(word_text) - left
            return [Segment(fill * max(0, left), st.header_dim),
                    Segment(word_text, st.header_selected if selected else st.header),
                    Segment(fill * max(0, right), st.header_dim)]

        mid_w = 2 + 1 + self._strike_width + 1 + 2
        line1 = Strip(label("calls", self._side == CALL, side_w)
                      + [Segment(" " * mid_w, st.header_dim)]
                      + label("puts", self._side == PUT, side_w), total)
        # Line 2: column headings.
        def headings() -> str:
            return "".join(" " + fm.fit(s.heading_ascii if self._ascii else s.heading, s.width,
                                        numeric=False, align="left" if s.text else "right")
                           for s in self._columns)

        call_h = headings()
        put_h = call_h[1:] + " "
        bar = "|" if self._ascii else "│"
        line2 = Strip([Segment(call_h + "  ", st.header), Segment(bar, st.header_dim),
                       Segment("strike".center(self._strike_width), st.header),
                       Segment(bar, st.header_dim), Segment("  " + put_h, st.header)], total)
        self._header_cache = [line0, line1, line2]
        return self._header_cache

    def render_line(self, y: int) -> Strip:
        scroll_x, scroll_y = self.scroll_offset
        width = self.scrollable_content_region.width
        if y < self.header_lines:
            strip = self._headers()[y + (0 if self._title else 1)]
        else:
            r = int(scroll_y) + y - self.header_lines
            if not len(self._strikes):
                strip = self._empty_strip() if r == 0 else Strip.blank(0, self._styles.base)
            elif 0 <= r < self._display_count():
                strip = self._row_strip(r)
            else:
                strip = Strip.blank(0, self._styles.base)
        return strip.crop_extend(int(scroll_x), int(scroll_x) + width, self._styles.base)

    def render_lines_text(self) -> list[str]:
        """The plain text of every line currently visible (for tests and copying a view)."""
        return [self.render_line(y).text for y in range(self.scrollable_content_region.height)]

    # ------------------------------------------------------------- input

    def _highlight_key(self) -> tuple[Any, ...]:
        return (self._expiry, self.highlighted)

    def _post_if_changed(self, before: tuple[Any, ...]) -> None:
        if self._highlight_key() != before:
            hl = self.highlighted
            self.post_message(self.StrikeHighlighted(self, self._expiry, hl[0] if hl else None, self._side))

    def _move_to(self, index: int) -> None:
        if not len(self._strikes):
            return
        before = self._highlight_key()
        self._cursor = max(0, min(len(self._strikes) - 1, index))
        self._scroll_cursor_into_view()
        self.refresh()
        self._post_if_changed(before)

    def _step(self, rows: int) -> None:
        """Move the highlight ``rows`` rows down (up when negative) in the order shown."""
        if self._order is None or self._cursor < 0:
            self._move_to(self._cursor + rows)
            return
        rank = max(0, min(len(self._order) - 1, int(self._rank[self._cursor]) + rows))
        self._move_to(int(self._order[rank]))

    def _move_to_row(self, rank: int) -> None:
        """Highlight the strike on row ``rank`` of the order shown (0 = top)."""
        if not len(self._strikes):
            return
        rank = max(0, min(len(self._strikes) - 1, rank))
        self._move_to(int(self._order[rank]) if self._order is not None else rank)

    def action_cursor_up(self) -> None:
        self._step(-1)

    def action_cursor_down(self) -> None:
        self._step(1)

    def action_cursor_page_up(self) -> None:
        self._step(-max(1, self._data_height() - 1))

    def action_cursor_page_down(self) -> None:
        self._step(max(1, self._data_height() - 1))

    def action_cursor_first(self) -> None:
        self._move_to_row(0)

    def action_cursor_last(self) -> None:
        self._move_to_row(len(self._strikes) - 1)

    def action_cursor_forward(self) -> None:
        """Back to the strike nearest the forward (the at-the-money row), centred."""
        if not len(self._strikes) or not math.isfinite(self._forward):
            return
        self._move_to(int(np.argmin(np.abs(self._strikes - self._forward))))
        self._scroll_cursor_into_view(center=True)

    def action_select_side(self, side: str) -> None:
        if side not in (CALL, PUT) or side == self._side:
            return
        before = self._highlight_key()
        self._side = side
        self._header_cache = None
        self.refresh()
        self._post_if_changed(before)

    def on_click(self, event: Click) -> None:
        y = event.y
        if y < self.header_lines or not len(self._strikes):
            return
        r = int(self.scroll_offset.y) + y - self.header_lines
        if not 0 <= r < self._display_count():
            return
        i = self._strike_index(r)
        if i is None:
            return
        x = event.x + int(self.scroll_offset.x)
        centre = self._side_width() + 3 + self._strike_width // 2
        before = self._highlight_key()
        if x < centre - self._strike_width // 2:
            self._side = CALL
        elif x > centre + self._strike_width // 2:
            self._side = PUT
        self._header_cache = None
        self._cursor = i
        self._scroll_cursor_into_view()
        self.refresh()
        self._post_if_changed(before)
