"""The filter dialog: the sigma threshold and the optional liquidity limits."""

from __future__ import annotations

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.screen import ModalScreen
from textual.widgets import Input, Static

from chaintriage.core.findings import ChainTriageError
from chaintriage.tui.screens.common import close
from chaintriage.tui.session import StrikeFilter


class FilterDialog(ModalScreen[StrikeFilter | None]):
    """Ask for the sigma threshold and the optional liquidity limits."""

    BINDINGS = [Binding("escape", "cancel", "cancel")]

    def __init__(self, current: StrikeFilter) -> None:
        super().__init__()
        self._current = current

    def compose(self) -> ComposeResult:
        c = self._current

        def val(x: float | None, scale: float = 1.0) -> str:
            if x is None:
                return ""
            return f"{x * scale:.4f}".rstrip("0").rstrip(".")

        with Vertical(classes="dialog"):
            yield Static(Text("show only strikes out of the money by at least", style="bold"))
            with Horizontal(classes="field"):
                yield Static(Text("sigmas"), classes="label")
                yield Input(value=val(c.sigma), placeholder="e.g. 1.5 (blank: any)", id="f-sigma",
                            compact=True)
            with Horizontal(classes="field"):
                yield Static(Text("max spread %"), classes="label")
                yield Input(value=val(c.max_spread, 100.0), placeholder="e.g. 20 (blank: any)", id="f-spread",
                            compact=True)
            with Horizontal(classes="field"):
                yield Static(Text("min open int."), classes="label")
                yield Input(value=val(c.min_open_interest), placeholder="e.g. 100 (blank: any)", id="f-oi",
                            compact=True)
            yield Static(Text(""), id="f-error")
            yield Static(Text("Enter applies, Tab moves, Esc cancels. A strike stays when its call or its put "
                              "qualifies.", style="dim"))

    def on_mount(self) -> None:
        self.query_one("#f-sigma", Input).focus()

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        try:
            flt = StrikeFilter.parse(self.query_one("#f-sigma", Input).value,
                                     self.query_one("#f-spread", Input).value,
                                     self.query_one("#f-oi", Input).value)
        except ChainTriageError as exc:
            self.query_one("#f-error", Static).update(Text(str(exc), style="bold"))
            return
        close(self, flt)

    def action_cancel(self) -> None:
        close(self, None)
