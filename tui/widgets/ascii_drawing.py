"""Plain-ASCII drawing of Textual's own parts: scroll bars and the column list's check boxes.

Textual draws scroll bars with block characters and check boxes with half blocks; in ASCII
mode (``a``) the app switches both to ASCII: a scroll bar's handle is a column of "#" on a
blank run, a check box is "[X]". Textual reads these from class attributes, so the switch is
process-wide (one app per process).
"""

from __future__ import annotations

from rich.segment import Segment, Segments
from textual.scrollbar import ScrollBar, ScrollBarRender
from textual.widgets._toggle_button import ToggleButton

_UNICODE_BUTTON = (ToggleButton.BUTTON_LEFT, ToggleButton.BUTTON_INNER, ToggleButton.BUTTON_RIGHT)
_UNICODE_RENDERER = ScrollBar.renderer


class AsciiScrollBarRender(ScrollBarRender):
    """A scroll bar drawn in ASCII: the handle is a column of "#" (still in inverse colours), the rest blank."""

    VERTICAL_BARS = [" "] * 8
    HORIZONTAL_BARS = [" "] * 8

    @classmethod
    def render_bar(cls, *args, **kwargs) -> Segments:  # type: ignore[override]
        drawn = super().render_bar(*args, **kwargs)
        out = []
        for seg in drawn.segments:
            if seg.style is not None and seg.style.reverse and seg.text.strip() == "" and seg.text:
                seg = Segment("#" * len(seg.text), seg.style, seg.control)
            out.append(seg)
        return Segments(out, new_lines=drawn.new_lines)


def use_ascii_drawing(ascii_only: bool) -> None:
    """Draw Textual's scroll bars and check boxes in ASCII (True) or with its own characters."""
    ScrollBar.renderer = AsciiScrollBarRender if ascii_only else _UNICODE_RENDERER
    if ascii_only:
        ToggleButton.BUTTON_LEFT, ToggleButton.BUTTON_INNER, ToggleButton.BUTTON_RIGHT = "[", "X", "]"
    else:
        ToggleButton.BUTTON_LEFT, ToggleButton.BUTTON_INNER, ToggleButton.BUTTON_RIGHT = _UNICODE_BUTTON
