"""A prompt for a file path (opening a snapshot, writing the shortlist), with an optional second
field (the column mapping of the file being opened)."""

from __future__ import annotations

import os

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.screen import ModalScreen
from textual.widgets import Input, Static

from chaintriage.tui import formatting as fm
from chaintriage.tui.screens.common import close


class PathPrompt(ModalScreen[object]):
    """Ask for a file path; dismisses with the text typed (None on Esc).

    With ``second`` (its label and placeholder) a second field follows the path, and the
    result is (path, second field's text) instead; ``second_value`` fills it in.
    """

    BINDINGS = [Binding("escape", "cancel", "cancel")]

    def __init__(self, question: str, value: str = "", hint: str = "",
                 second: tuple[str, str] | None = None, second_value: str = "") -> None:
        super().__init__()
        self._question = question
        self._value = value
        self._hint = hint
        self._second = second
        self._second_value = second_value

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog wide"):
            yield Static(Text(self._question, style="bold"))
            yield Input(value=self._value, placeholder="path", id="path-input", compact=True)
            if self._second is not None:
                label, placeholder = self._second
                with Horizontal(classes="field"):
                    yield Static(label, classes="label")
                    yield Input(value=self._second_value, placeholder=placeholder, id="second-input",
                                compact=True)
            hint = Text((self._hint + "\n" if self._hint else ""), style="dim")
            hint.append("relative to ", style="dim")
            hint.append(fm.clean_text(os.getcwd()), style="dim")
            hint.append("; ~ is your home. ", style="dim")
            if self._second is not None:
                hint.append("Tab: next field. ", style="dim")
            hint.append("Enter accepts, Esc cancels", style="dim")
            yield Static(hint)

    def on_mount(self) -> None:
        self.query_one("#path-input", Input).focus()

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        value = self.query_one("#path-input", Input).value.strip()
        if self._second is None:
            close(self, value or None)
            return
        second = self.query_one("#second-input", Input).value.strip()
        close(self, (value, second) if value else None)

    def action_cancel(self) -> None:
        close(self, None)
