"""The help screen: every key, what each column means, the marks and the cautions."""

from __future__ import annotations

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import VerticalScroll
from textual.screen import Screen
from textual.widgets import Static

from chaintriage.tui.help_text import help_text, wrap_help
from chaintriage.tui.screens.common import close
from chaintriage.tui.widgets.key_line import KeyLine


class HelpScreen(Screen):
    """Every key, what each column means, the marks and the cautions."""

    BINDINGS = [
        Binding("escape,q,question_mark", "close", "close"),
    ]

    def __init__(self, ascii_only: bool = False) -> None:
        super().__init__()
        self._ascii = ascii_only

    def compose(self) -> ComposeResult:
        yield Static(Text(" chaintriage help    Esc closes, arrows and PgUp/PgDn scroll", style="bold"),
                     classes="title")
        with VerticalScroll(id="help-scroll"):
            yield Static(Text(help_text(self._ascii)), id="help-body")
        yield KeyLine()

    def on_mount(self) -> None:
        self.query_one("#help-scroll").focus()
        self._wrap()
        self.call_after_refresh(self._wrap)

    def on_resize(self) -> None:
        self.call_after_refresh(self._wrap)

    def _wrap(self) -> None:
        body = self.query_one("#help-body", Static)
        # The body's own content width once laid out (padding and scrollbar excluded).
        width = body.content_region.width or (self.size.width or 80) - 6
        body.update(Text(wrap_help(help_text(self._ascii), width)))

    def action_close(self) -> None:
        close(self)
