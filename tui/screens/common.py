"""What every screen and dialog shares: data text for widgets, and closing a screen once.

Every text shown in a screen that came from a file (underlying names, finding
reasons, file names) goes in as ``rich.text.Text`` with control characters
removed: never as markup.
"""

from __future__ import annotations

from typing import Any

from rich.text import Text
from textual.screen import Screen

from chaintriage.tui import formatting as fm


def plain(text: Any) -> Text:
    """Data text for a widget: control characters removed, never parsed as markup."""
    return Text(fm.clean_text(text))


def close(screen: Screen, result: Any = None) -> bool:
    """Dismiss ``screen`` with ``result`` once, and only while it is the top screen; True if it did.

    Keys typed faster than a screen closes (Escape twice, Enter twice in a dialog) all reach the
    closing screen: without this the second one would close the screen under it as well, down to
    an empty screen stack.
    """
    if getattr(screen, "_dismissed_once", False) or not screen.is_active:
        return False
    screen._dismissed_once = True  # type: ignore[attr-defined]
    screen.dismiss(result)
    return True
