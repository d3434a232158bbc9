"""The filter dialog: how far out (sigmas, |delta| range, P(beyond) range), the side and the liquidity limits."""

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

#: What the side field takes: a word or its first letter.
SIDE_WORDS = {"": "both", "b": "both", "both": "both", "c": "calls", "call": "calls", "calls": "calls",
              "p": "puts", "put": "puts", "puts": "puts"}


def _val(x: float | None, scale: float = 1.0) -> str:
    if x is None:
        return ""
    return f"{x * scale:.4f}".rstrip("0").rstrip(".")


def range_text(bounds: tuple[float | None, float | None] | None, scale: float = 1.0) -> str:
    """A (low, high) range as the dialog shows it: "LOW-HIGH", "LOW-", "-HIGH" ("" for none)."""
    if bounds is None:
        return ""
    low, high = bounds
    if high is None:
        return f"{_val(low, scale)}-"
    return f"{_val(low, scale)}-{_val(high, scale)}"


def side_word(text: str) -> str:
    """calls, puts or both from what was typed (a word or its first letter); anything else is passed
    on for ``StrikeFilter.parse`` to refuse with its reason."""
    return SIDE_WORDS.get((text or "").strip().lower(), text)


class FilterDialog(ModalScreen[StrikeFilter | None]):
    """Ask for the targets (sigmas, |delta|, P(beyond), side) and the optional liquidity limits."""

    BINDINGS = [Binding("escape", "cancel", "cancel")]

    def __init__(self, current: StrikeFilter) -> None:
        super().__init__()
        self._current = current

    def compose(self) -> ComposeResult:
        c = self._current
        fields = (
            ("sigmas out", _val(c.sigma), "e.g. 1.5: at least that far out", "f-sigma"),
            ("max spread %", _val(c.max_spread, 100.0), "e.g. 20 (blank: any)", "f-spread"),
            ("min open int.", _val(c.min_open_interest), "e.g. 100 (blank: any)", "f-oi"),
            ("|delta|", range_text(c.delta), "e.g. 0.1-0.3, 0.2- or -0.3", "f-delta"),
            ("P(beyond) %", range_text(c.beyond, 100.0), "e.g. 5-20, 10- or -15", "f-beyond"),
            ("side", "" if c.side == "both" else c.side, "calls, puts or both (c, p, b)", "f-side"),
        )  # the first three in the order they always had: Tab keeps reaching them as before
        with Vertical(classes="dialog"):
            yield Static(Text("show only strikes whose call or put meets every limit set", style="bold"))
            for i, (label, value, hint, name) in enumerate(fields):
                with Horizontal(classes="field"):
                    yield Static(Text(label), classes="label")
                    yield Input(value=value, placeholder=hint, id=name, compact=True)
            yield Static(Text(""), id="f-error")
            yield Static(Text("Blank: no limit. Enter applies, Tab moves, Esc cancels. Ranges are inclusive; "
                              "with one side chosen only its contracts count.", style="dim"))

    def on_mount(self) -> None:
        # Six fields one under the other (no gap between them), so the dialog fits 24 lines.
        for i, field in enumerate(self.query(".field")):
            field.styles.margin = (1 if i == 0 else 0, 0, 0, 0)
        self.query_one("#f-sigma", Input).focus()

    def _value(self, name: str) -> str:
        return self.query_one(f"#{name}", Input).value

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        try:
            flt = StrikeFilter.parse(self._value("f-sigma"), self._value("f-spread"), self._value("f-oi"),
                                     delta=self._value("f-delta"), beyond=self._value("f-beyond"),
                                     side=side_word(self._value("f-side")))
        except ChainTriageError as exc:
            self.query_one("#f-error", Static).update(Text(str(exc), style="bold"))
            return
        close(self, flt)

    def action_cancel(self) -> None:
        close(self, None)
