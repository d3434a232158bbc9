"""A prompt for a file path (opening a snapshot, writing the shortlist)."""

from __future__ import annotations

import os

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Input, Static

from chaintriage.tui import formatting as fm
from chaintriage.tui.screens.common import close


class PathPrompt(ModalScreen[str | None]):
    """Ask for a file path; dismisses with the text typed (None on Esc)."""

    BINDINGS = [Binding("escape", "cancel", "cancel")]

    def __init__(self, question: str, value: str = "", hint: str = "") -> None:
        super().__init__()
        self._question = question
        self._value = value
        self._hint = hint

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog wide"):
            yield Static(Text(self._question, style="bold"))
            yield Input(value=self._value, placeholder="path", id="path-input", compact=True)
            hint = Text((self._hint + "\n" if self._hint else ""), style="dim")
            hint.append("relative to ", style="dim")
            hint.append(fm.clean_text(os.getcwd()), style="dim")
            hint.append("; ~ is your home. Enter accepts, Esc cancels", style="dim")
            yield Static(hint)

    def on_mount(self) -> None:
        self.query_one("#path-input", Input).focus()

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        value = event.value.strip()
        close(self, value or None)

    def action_cancel(self) -> None:
        close(self, None)
