"""The column picker's list: a SelectionList whose cursor stops at the ends instead of wrapping
round (toggling the first column after Down on the last one is too easy)."""

from __future__ import annotations

from textual.widgets import SelectionList


class StoppingSelectionList(SelectionList[str]):
    """SelectionList whose Up/Down stop at the first/last option."""

    def action_cursor_up(self) -> None:
        if self.highlighted is None or self.highlighted > 0:
            super().action_cursor_up()

    def action_cursor_down(self) -> None:
        if self.highlighted is None or self.highlighted < self.option_count - 1:
            super().action_cursor_down()
