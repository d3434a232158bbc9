"""The column picker: which columns each side of the ladder shows."""

from __future__ import annotations

from typing import Sequence

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import SelectionList, Static
from textual.widgets.selection_list import Selection

from chaintriage.tui.help_text import COLUMNS as COLUMN_HELP
from chaintriage.tui.screens.common import close
from chaintriage.tui.ladder_columns import COLUMNS
from chaintriage.tui.widgets.column_list import StoppingSelectionList


#: Characters of each column's meaning shown in the list (the help has the whole text).
MEANING_WIDTH = 38


class ColumnPicker(ModalScreen[None]):
    """Choose the columns each side of the ladder shows (applied as you go)."""

    BINDINGS = [Binding("escape,o", "close", "close")]

    def __init__(self, chosen: Sequence[str], on_change, ascii_only: bool = False) -> None:
        super().__init__()
        self._ascii = ascii_only
        self._chosen = list(chosen)
        self._on_change = on_change

    def compose(self) -> ComposeResult:
        meanings = {c.key: c.meaning for c in COLUMN_HELP}
        options = []
        for key, spec in COLUMNS.items():
            heading = spec.heading_ascii if self._ascii else spec.heading
            meaning = meanings.get(key, "")
            if self._ascii:
                meaning = meaning.replace("σ", "s").encode("ascii", "replace").decode("ascii")
            if len(meaning) > MEANING_WIDTH:  # one line each: the list stays a list at 80 columns
                meaning = meaning[:MEANING_WIDTH - 1].rstrip() + ("~" if self._ascii else "…")
            label = Text(f"{heading:<7} ", style="bold", no_wrap=True, overflow="crop")
            label.append(meaning, style="dim")
            options.append(Selection(label, key, key in self._chosen))
        with Vertical(classes="dialog wide"):
            yield Static(Text("columns on each side of the ladder", style="bold"))
            yield StoppingSelectionList(*options, id="column-list")
            yield Static(Text("Space or Enter shows/hides a column; Esc closes", style="dim"),
                         id="column-hint")

    def on_mount(self) -> None:
        self.query_one("#column-list").focus()

    def on_selection_list_selected_changed(self, event: SelectionList.SelectedChanged) -> None:
        selected = set(event.selection_list.selected)
        keys = [k for k in COLUMNS if k in selected]
        hint = self.query_one("#column-hint", Static)
        if not keys:
            hint.update(Text("choose at least one column (the ladder keeps the last one)", style="bold"))
            return
        hint.update(Text("Space or Enter shows/hides a column; Esc closes", style="dim"))
        self._on_change(keys)

    def action_close(self) -> None:
        close(self, None)
