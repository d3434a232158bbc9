"""The key line at the bottom of a screen: the keys its bindings show, drawn as one line of text.

One widget (Textual's footer mounts a widget per key, and mounts them again after the first
frame: ~35 ms of the screen's thread while the loading worker imports numpy and pandas). The
line is drawn from ``Screen.active_bindings`` at every refresh, asked for when the screen's
bindings change; a click on a key presses it.
"""

from __future__ import annotations

from rich.style import Style
from rich.text import Text
from textual import events
from textual.widget import Widget


#: How a key that cannot be used now is drawn (over its usual style).
DISABLED = Style(dim=True)


class KeyLine(Widget):
    """The shown bindings of the screen as ``key description`` pairs, one per action, in order."""

    ALLOW_SELECT = False
    COMPONENT_CLASSES = {"key-line--key", "key-line--description"}

    DEFAULT_CSS = """
    KeyLine {
        dock: bottom;
        height: 1;
        width: 1fr;
        text-wrap: nowrap;
        text-overflow: clip;
        color: $footer-foreground;
        background: $footer-background;
    }
    KeyLine > .key-line--key {
        color: $footer-key-foreground;
        background: $footer-key-background;
        text-style: bold;
    }
    KeyLine > .key-line--description {
        color: $footer-description-foreground;
        background: $footer-description-background;
    }
    """

    def __init__(self, *, id: str | None = None, classes: str | None = None) -> None:  # noqa: A002
        super().__init__(id=id, classes=classes)
        #: (first cell, end cell, key, enabled) of each key drawn last, for clicks.
        self._spans: list[tuple[int, int, str, bool]] = []

    def on_mount(self) -> None:
        self.screen.bindings_updated_signal.subscribe(self, self._bindings_changed)

    def on_unmount(self) -> None:
        self.screen.bindings_updated_signal.unsubscribe(self)

    def _bindings_changed(self, screen) -> None:
        self.refresh()

    def shown_keys(self) -> list[tuple[str, str, str, bool]]:
        """(key, key as shown, description, enabled) of each action the screen's bindings show."""
        seen: set[str] = set()
        keys = []
        for _node, binding, enabled, _tooltip in self.screen.active_bindings.values():
            if not binding.show or binding.action in seen:
                continue
            seen.add(binding.action)
            keys.append((binding.key, self.app.get_key_display(binding), binding.description, enabled))
        return keys

    def render(self) -> Text:
        key_style = self.get_component_rich_style("key-line--key")
        text_style = self.get_component_rich_style("key-line--description")
        line = Text(no_wrap=True, overflow="crop", end="")
        spans = []
        for key, shown, description, enabled in self.shown_keys():
            start = line.cell_len
            line.append(f" {shown} ", key_style if enabled else key_style + DISABLED)
            if description:
                line.append(f"{description} ", text_style if enabled else text_style + DISABLED)
            spans.append((start, line.cell_len, key, enabled))
        self._spans = spans
        return line

    def on_click(self, event: events.Click) -> None:
        for start, end, key, enabled in self._spans:
            if start <= event.x < end:
                event.stop()
                if enabled:
                    self.app.simulate_key(key)
                else:
                    self.app.bell()
                return
