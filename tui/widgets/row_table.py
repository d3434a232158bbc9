"""A table of rows for the shortlist screen: the keys move between rows.

``RowTable`` is Textual's DataTable with a row cursor where j/k move like the
arrows, Home/End go to the first/last row (not sideways: a list screen is read
by rows), and Ctrl+PgUp/Ctrl+PgDn scroll sideways as in the ladder.
"""

from __future__ import annotations

from textual.binding import Binding
from textual.widgets import DataTable


class RowTable(DataTable):
    """DataTable for lists read row by row (see the module docstring)."""

    BINDINGS = [
        Binding("down,j", "cursor_down", "next row", show=False),
        Binding("up,k", "cursor_up", "previous row", show=False),
        Binding("home", "scroll_top", "first row", show=False),
        Binding("end", "scroll_bottom", "last row", show=False),
        Binding("ctrl+pageup", "page_left", "scroll left", show=False),
        Binding("ctrl+pagedown", "page_right", "scroll right", show=False),
    ]

    def __init__(self, **kwargs) -> None:
        kwargs.setdefault("cursor_type", "row")
        kwargs.setdefault("zebra_stripes", True)
        super().__init__(**kwargs)

    @property
    def more_to_the_right(self) -> bool:
        """True when columns lie beyond the right edge (scroll sideways to see them)."""
        return self.scroll_x < self.max_scroll_x
