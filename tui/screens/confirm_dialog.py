"""A yes/no question (e.g. before replacing a file)."""

from __future__ import annotations

from rich.text import Text
from textual.binding import Binding
from textual.app import ComposeResult
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Static

from chaintriage.tui.screens.common import close, plain


class ConfirmDialog(ModalScreen[bool]):
    """A yes/no question: y says yes; n or Esc says no."""

    BINDINGS = [
        Binding("y", "answer(True)", "yes"),
        Binding("n,escape", "answer(False)", "no"),
    ]

    def __init__(self, question: str) -> None:
        super().__init__()
        self._question = question

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog wide"):
            yield Static(plain(self._question), id="confirm-question")
            yield Static(Text("y: yes    n or Esc: no", style="bold"))

    def action_answer(self, yes: bool) -> None:
        close(self, bool(yes))
