"""A light table of text rows drawn line by line, for screens that redraw every row often.

``LineTable`` shows rows of plain strings under one heading line, with a row
cursor (up/down, j/k, PgUp/PgDn, Home/End) and sideways scrolling (Ctrl+PgUp /
Ctrl+PgDn, the mouse) in which the first ``fixed`` columns stay in place.
Each line is one ``Strip`` of plain Segments (text is never markup), built when
first drawn and kept until the rows change: a redraw of every row costs the
text, not a widget per cell (Textual's DataTable renders each cell through
Rich, too slow for a view redrawn on every key).

A long list can be given as a row count and a function that makes one row
(``set_row_source``): only the rows on screen are made before a frame, so
opening costs the same at any count; the others are made after the first
frame, a batch per turn of the event loop (keys are handled in between), and
the columns widen to the widest cell made so far.
"""

from __future__ import annotations

from typing import Callable, Sequence

from rich.cells import cell_len, set_cell_size
from rich.segment import Segment
from rich.style import Style
from textual.binding import Binding
from textual.events import Click
from textual.geometry import Region, Size
from textual.message import Message
from textual.scroll_view import ScrollView
from textual.strip import Strip

from chaintriage.tui.themes import FALLBACK_THEME, ChainTheme

#: Cells between two columns.
GAP = 2
#: Rows of a row source made per turn of the event loop after the first frame.
FILL_BATCH = 500


class LineTable(ScrollView, can_focus=True):
    """Rows of text under a heading line; see the module docstring. Public API: ``set_columns``,
    ``set_rows``, ``set_row_source``, ``set_row``, ``set_theme``, ``cursor_row``, ``move_cursor``,
    ``row_count``, ``row_cells``, ``lines_text``; messages ``LineTable.Highlighted`` and
    ``LineTable.Chosen`` (Enter)."""

    DEFAULT_CSS = """
    LineTable { height: 1fr; width: 1fr; }
    """

    BINDINGS = [
        Binding("up,k", "cursor(-1)", "previous row", show=False),
        Binding("down,j", "cursor(1)", "next row", show=False),
        Binding("pageup", "page(-1)", "page up", show=False),
        Binding("pagedown", "page(1)", "page down", show=False),
        Binding("home", "first", "first row", show=False),
        Binding("end", "last", "last row", show=False),
        Binding("ctrl+pageup", "page_left", "scroll left", show=False),
        Binding("ctrl+pagedown", "page_right", "scroll right", show=False),
        Binding("enter", "choose", "choose", show=False),
    ]

    class Highlighted(Message):
        """The cursor moved to ``row``."""

        def __init__(self, table: "LineTable", row: int) -> None:
            super().__init__()
            self.table = table
            self.row = row

    class Chosen(Message):
        """Enter (or a click on the cursor row) on ``row``."""

        def __init__(self, table: "LineTable", row: int) -> None:
            super().__init__()
            self.table = table
            self.row = row

    def __init__(self, *, fixed: int = 0, theme: ChainTheme | None = None, id: str | None = None,
                 classes: str | None = None) -> None:
        super().__init__(id=id, classes=classes)
        self._fixed = max(0, int(fixed))
        self._headings: list[str] = []
        self._right: list[bool] = []
        #: One tuple of cells per row; None for a row of the row source not made yet.
        self._rows: list[tuple[str, ...] | None] = []
        self._row_at: Callable[[int], Sequence[str]] | None = None
        self._unmade = 0  # rows of the source before this one are all made
        self._source = 0  # which row source the fill works for (a new one stops the old fill)
        self._widths: list[int] = []
        self._cursor = 0
        self._cache: dict[int, tuple[str, str]] = {}
        self.set_theme(theme or FALLBACK_THEME)

    # ------------------------------------------------------------ data

    def set_theme(self, theme: ChainTheme) -> None:
        c = theme.colors
        self._base = Style(color=c["text"], bgcolor=c["background"])
        self._head = Style(color=c["text"], bgcolor=c["surface"], bold=True)
        self._cursor_style = Style(color=c["highlight_text"], bgcolor=c["highlight"])
        self._cache.clear()
        self.refresh()

    def set_columns(self, headings: Sequence[str], right: Sequence[bool]) -> None:
        """Headings and, per column, True to align it (heading too) to the right."""
        self._headings = list(headings)
        self._right = list(right)
        if self._row_at is not None:
            self.set_row_source(len(self._rows), self._row_at)
        elif self._rows or self._widths:
            self.set_rows(self._rows)  # type: ignore[arg-type]
        else:
            self._widths = [cell_len(h) for h in self._headings]

    def set_rows(self, rows: Sequence[Sequence[str]]) -> None:
        """Show these rows (one string per column); the cursor stays on its row number."""
        self._source += 1
        self._row_at = None
        self._rows = [tuple(r) for r in rows]
        self._unmade = len(self._rows)
        self._widths = [cell_len(h) for h in self._headings]
        self._widen(self._rows)  # type: ignore[arg-type]
        self._relayout()

    def set_row_source(self, count: int, row_at: Callable[[int], Sequence[str]]) -> None:
        """Show ``count`` rows, row ``i`` being ``row_at(i)`` (one string per column), each made when
        first drawn or read: a screenful now (so the first frame has its column widths), the rest
        once the screen has settled, ``FILL_BATCH`` per turn of the event loop. The cursor stays on
        its row number."""
        self._source += 1
        self._row_at = row_at
        self._rows = [None] * max(0, int(count))
        self._unmade = 0
        self._widths = [cell_len(h) for h in self._headings]
        top = int(self.scroll_offset.y)
        self._make(top, top + max(self.size.height, self.app.size.height if self.is_attached else 0))
        self._relayout()
        if self._rows:
            source = self._source
            self.call_after_refresh(lambda: self.call_after_refresh(self._fill, source))

    def _widen(self, rows: Sequence[tuple[str, ...]]) -> bool:
        """Widen the columns to these rows' cells; True if any column grew."""
        widths = self._widths
        grew = False
        for row in rows:
            for i, text in enumerate(row[:len(widths)]):
                n = cell_len(text)
                if n > widths[i]:
                    widths[i] = n
                    grew = True
        return grew

    def _relayout(self) -> None:
        """After the rows or the widths changed: lines drawn again, the scroll area resized."""
        self._cache.clear()
        self._cursor = min(self._cursor, max(0, len(self._rows) - 1))
        self.virtual_size = Size(self._line_width(), len(self._rows) + 1)
        self.refresh()

    def _make(self, start: int, stop: int) -> None:
        """Make the rows of the source in [start, stop) not made yet (widening the columns)."""
        rows = self._rows
        start, stop = max(0, start), min(len(rows), stop)
        if self._row_at is None or start >= stop:
            return
        made = []
        for i in range(start, stop):
            if rows[i] is None:
                row = rows[i] = tuple(self._row_at(i))
                made.append(row)
        if made and self._widen(made):
            self._relayout()

    def _fill(self, source: int) -> None:
        """Make the next batch of rows not made yet; again on the next turn until every row is made."""
        if source != self._source or not self.is_attached:
            return
        rows = self._rows
        at = self._unmade
        while at < len(rows) and rows[at] is not None:
            at += 1
        self._make(at, at + FILL_BATCH)
        self._unmade = at = min(len(rows), at + FILL_BATCH)
        if at < len(rows):
            self.call_later(self._fill, source)

    def render_lines(self, crop: Region) -> list[Strip]:
        top = int(self.scroll_offset.y)
        self._make(top, top + self.size.height)  # the rows on screen, before any line is drawn
        return super().render_lines(crop)

    def set_row(self, index: int, cells: Sequence[str]) -> None:
        """Replace one row's cells (a wider cell than its column is cut to the column)."""
        if 0 <= index < len(self._rows):
            self._rows[index] = tuple(cells)
            self._cache.pop(index, None)
            self.refresh()

    @property
    def row_count(self) -> int:
        return len(self._rows)

    def row_cells(self, index: int) -> tuple[str, ...]:
        """The cells of row ``index`` as given (made now if not yet)."""
        row = self._rows[index]
        if row is None:
            self._make(index, index + 1)
            row = self._rows[index]
        return row  # type: ignore[return-value]

    @property
    def cursor_row(self) -> int:
        return self._cursor

    def move_cursor(self, row: int) -> None:
        """Put the cursor on ``row`` (held within the rows) and scroll it into view."""
        if not self._rows:
            return
        row = max(0, min(len(self._rows) - 1, int(row)))
        moved = row != self._cursor
        self._cursor = row
        self._scroll_into_view()
        self.refresh()
        if moved:
            self.post_message(self.Highlighted(self, row))

    def lines_text(self) -> list[str]:
        """The heading line and every row as plain text (whole width, for tests and copying)."""
        self._make(0, len(self._rows))
        return [self._texts(-1)[0] + self._texts(-1)[1]] + \
            [a + b for a, b in (self._texts(i) for i in range(len(self._rows)))]

    # ------------------------------------------------------------ drawing

    def _line_width(self) -> int:
        return sum(w + GAP for w in self._widths)

    def _fixed_width(self) -> int:
        return sum(w + GAP for w in self._widths[:self._fixed])

    def _texts(self, r: int) -> tuple[str, str]:
        """(fixed part, scrolling part) of line ``r`` (-1: the headings)."""
        got = self._cache.get(r)
        if got is not None:
            return got
        cells = self._headings if r < 0 else self.row_cells(r)
        parts = []
        for i, w in enumerate(self._widths):
            text = cells[i] if i < len(cells) else ""
            if cell_len(text) > w:
                text = set_cell_size(text, w)
            pad = " " * (w - cell_len(text))
            parts.append(" " + (pad + text if self._right[i] else text + pad) + " ")
        got = ("".join(parts[:self._fixed]), "".join(parts[self._fixed:]))
        self._cache[r] = got
        return got

    def render_line(self, y: int) -> Strip:
        width = self.scrollable_content_region.width
        scroll_x, scroll_y = int(self.scroll_offset.x), int(self.scroll_offset.y)
        if y == 0:
            r, style = -1, self._head
        else:
            r = scroll_y + y - 1
            if not 0 <= r < len(self._rows):
                return Strip.blank(width, self._base)
            style = self._cursor_style if r == self._cursor else self._base
        fixed, rest = self._texts(r)
        fixed_w = cell_len(fixed)
        rest = Strip([Segment(rest, style)]).crop(scroll_x, scroll_x + max(0, width - fixed_w))
        strip = Strip([Segment(fixed, style), *rest])
        return strip.crop_extend(0, width, style)

    # ------------------------------------------------------------ moving

    def _data_height(self) -> int:
        return max(1, self.scrollable_content_region.height - 1)

    def _scroll_into_view(self) -> None:
        top = int(self.scroll_offset.y)
        h = self._data_height()
        if self._cursor < top:
            self.scroll_to(y=self._cursor, animate=False, immediate=True)
        elif self._cursor >= top + h:
            self.scroll_to(y=self._cursor - h + 1, animate=False, immediate=True)

    def action_cursor(self, step: int) -> None:
        self.move_cursor(self._cursor + step)

    def action_page(self, step: int) -> None:
        self.move_cursor(self._cursor + step * max(1, self._data_height() - 1))

    def action_first(self) -> None:
        self.move_cursor(0)

    def action_last(self) -> None:
        self.move_cursor(len(self._rows) - 1)

    def _starts(self) -> list[int]:
        """Where each scrolling column starts, in cells from the first scrolling column."""
        out, at = [], 0
        for w in self._widths[self._fixed:]:
            out.append(at)
            at += w + GAP
        return out

    @property
    def more_to_the_right(self) -> bool:
        """True when columns lie beyond the right edge."""
        return self.scroll_offset.x < self.max_scroll_x

    def action_page_right(self) -> None:
        """Scroll so the first column not wholly shown comes first after the fixed ones."""
        x = int(self.scroll_offset.x)
        room = max(1, self.scrollable_content_region.width - self._fixed_width())
        starts = self._starts()
        widths = self._widths[self._fixed:]
        for start, w in zip(starts, widths):
            if start + w + GAP > x + room:
                self.scroll_to(x=min(self.max_scroll_x, max(start, x + 1)), animate=False, immediate=True)
                return

    def action_page_left(self) -> None:
        """Scroll back by as many whole columns as fit."""
        x = int(self.scroll_offset.x)
        room = max(1, self.scrollable_content_region.width - self._fixed_width())
        target = 0
        for start in self._starts():
            if start >= x:
                break
            if x - start <= room:
                target = start
                break
        self.scroll_to(x=target, animate=False, immediate=True)

    def action_choose(self) -> None:
        if self._rows:
            self.post_message(self.Chosen(self, self._cursor))

    def on_click(self, event: Click) -> None:
        r = int(self.scroll_offset.y) + event.y - 1
        if event.y < 1 or not 0 <= r < len(self._rows):
            return
        if r == self._cursor:
            self.action_choose()
        else:
            self.move_cursor(r)
