"""The sort chooser (z): order the ladder by one of its shown columns, or back to strike order.

Two steps, keyboard only: a list of the columns the ladder shows (and "strike
order"), then low to high or high to low. The column is read on the side
selected in the ladder (calls or puts). The result is ``(column key,
descending)``, ``("strike", False)`` for strike order, or None when cancelled.
"""

from __future__ import annotations

from typing import Sequence

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import OptionList, Static
from textual.widgets.option_list import Option

from chaintriage.tui.help_text import COLUMNS as COLUMN_HELP
from chaintriage.tui.ladder_columns import COLUMNS
from chaintriage.tui.screens.common import close

#: The choice that puts the ladder back in strike order.
STRIKE_ORDER = "strike"
#: Characters of each column's meaning shown beside it.
MEANING_WIDTH = 44


class SortChooser(ModalScreen[tuple[str, bool] | None]):
    """Choose a column of ``columns`` (keys of ``COLUMNS``), then the direction (see the module docstring)."""

    DEFAULT_CSS = """
    SortChooser #sort-list { border: none; height: auto; max-height: 14; padding: 0; margin: 1 0; }
    """

    BINDINGS = [Binding("escape", "back", "back")]

    def __init__(self, columns: Sequence[str], side: str, current: tuple[str, str, bool] | None = None,
                 ascii_only: bool = False) -> None:
        super().__init__()
        self._columns = [k for k in columns if k in COLUMNS]
        self._side = side
        self._current = current
        self._ascii = ascii_only
        self._chosen: str | None = None

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog"):
            yield Static(Text(f"sort the ladder by a column of the {self._side}s", style="bold"), id="sort-title")
            yield OptionList(*self._column_options(), id="sort-list")
            yield Static(Text(f"the {self._side}s are the selected side (← → in the ladder). Enter chooses, "
                              "Esc leaves the order as it is".replace("← →", "Left/Right" if self._ascii else "← →"),
                              style="dim"))

    def _column_options(self) -> list[Option]:
        meanings = {c.key: c.meaning for c in COLUMN_HELP}
        now = self._current[0] if self._current is not None else STRIKE_ORDER
        options = [Option(Text("strike order" + ("  (now)" if now == STRIKE_ORDER else ""), no_wrap=True),
                          id=STRIKE_ORDER)]
        for key in self._columns:
            spec = COLUMNS[key]
            heading = spec.heading_ascii if self._ascii else spec.heading
            meaning = meanings.get(key, "")
            if self._ascii:
                meaning = meaning.replace("σ", "s").encode("ascii", "replace").decode("ascii")
            if len(meaning) > MEANING_WIDTH:
                meaning = meaning[:MEANING_WIDTH - 1].rstrip() + ("~" if self._ascii else "…")
            label = Text(f"{heading:<7} ", style="bold", no_wrap=True, overflow="crop")
            label.append(meaning, style="dim")
            if key == now:
                label.append("  (now)")
            options.append(Option(label, id=key))
        return options

    def on_mount(self) -> None:
        olist = self.query_one("#sort-list", OptionList)
        now = self._current[0] if self._current is not None else STRIKE_ORDER
        ids = [STRIKE_ORDER, *self._columns]
        olist.highlighted = ids.index(now) if now in ids else 0
        olist.focus()

    def on_option_list_option_selected(self, event: OptionList.OptionSelected) -> None:
        event.stop()
        choice = event.option.id or STRIKE_ORDER
        if self._chosen is None:
            if choice == STRIKE_ORDER:
                close(self, (STRIKE_ORDER, False))
                return
            self._chosen = choice
            spec = COLUMNS[choice]
            heading = spec.heading_ascii if self._ascii else spec.heading
            low, high = ("A to Z", "Z to A") if spec.text else ("low to high", "high to low")
            self.query_one("#sort-title", Static).update(Text(f"{heading} on the {self._side}s:", style="bold"))
            olist = self.query_one("#sort-list", OptionList)
            olist.clear_options()
            olist.add_options([Option(low, id="ascending"), Option(high, id="descending")])
            descending_now = self._current is not None and self._current[0] == choice and self._current[2]
            olist.highlighted = 1 if descending_now else 0
            return
        close(self, (self._chosen, choice == "descending"))

    def action_back(self) -> None:
        close(self, None)

