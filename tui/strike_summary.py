"""A contract's one-line plain-text summary, and copying text to the system clipboard.

    QRTZ 2027-01-15 95 put | mid 1.23 | IV 31.2% | -1.48σ | P(beyond) 8.1% |
    P(touch) 15.9% | BE 93.77 | as of 2026-12-01 14:30 -05:00      (one line)

Text from data (underlying, kind) has escape sequences and control characters
removed, so a pasted summary cannot carry terminal codes.
"""

from __future__ import annotations

import os
import shutil
from typing import TYPE_CHECKING, Any, Callable, Mapping, Sequence

from . import formatting as fm

if TYPE_CHECKING:
    from .clipboard import CopyOutcome

SEPARATOR = " | "


def summarize(contract: Mapping[str, Any], *, as_of: Any = None, underlying: str | None = None,
              ascii_only: bool = False) -> str:
    """One line for the clipboard from a contracts-table row (dict or pandas Series).

    Reads ``underlying, expiry, strike, kind, mid, iv, sigma_distance, p_beyond,
    p_touch (with p_touch_low / p_touch_high when present), breakeven``; ``as_of`` (the snapshot time) and ``underlying`` override
    the row's. A missing figure shows as "--". ``ascii_only`` writes "s" for sigma.
    """
    def get(key: str) -> Any:
        try:
            return contract[key]
        except (KeyError, IndexError, TypeError):
            return None

    und = fm.clean_text(underlying if underlying is not None else get("underlying")).strip()
    kind = fm.clean_text(get("kind")).strip().lower()
    kind = {"c": "call", "p": "put"}.get(kind, kind)
    expiry = fm.fmt_date(get("expiry"), ascii_only=True)
    strike = fm.fmt_strike(get("strike"), ascii_only=True)
    head = " ".join(p for p in (und, expiry, strike, kind) if p)
    when = as_of if as_of is not None else get("as_of")
    parts = [
        head,
        f"mid {fm.fmt_price(get('mid'), ascii_only=True)}",
        f"IV {fm.fmt_vol(get('iv'), ascii_only=True)}",
        _sigma_part(get("sigma_distance"), ascii_only),
        f"P(beyond) {fm.fmt_prob(get('p_beyond'), ascii_only=True)}",
        f"P(touch) {fm.fmt_prob(get('p_touch'), ascii_only=True)}" + _touch_bounds_part(get),
        f"BE {fm.fmt_price(get('breakeven'), ascii_only=True)}",
        f"as of {fm.fmt_timestamp(when, ascii_only=True)}",
    ]
    return fm.clean_text(SEPARATOR.join(parts))


def _touch_bounds_part(get) -> str:
    """" (bounds 9.0%-21.0%)" after P(touch) when both touch bounds are numbers, else nothing."""
    low, high = fm.as_finite(get("p_touch_low")), fm.as_finite(get("p_touch_high"))
    if low is None or high is None:
        return ""
    return f" (bounds {fm.fmt_prob(low, ascii_only=True)}-{fm.fmt_prob(high, ascii_only=True)})"


def _sigma_part(value: Any, ascii_only: bool) -> str:
    if fm.as_finite(value) is None:
        return "--" + (fm.SIGMA_ASCII if ascii_only else fm.SIGMA)
    return fm.fmt_sigma(value, ascii_only=ascii_only)


def clipboard_commands(env: Mapping[str, str] | None = None,
                       which: Callable[[str], str | None] = shutil.which) -> list[list[str]]:
    """Clipboard tools found on this system, most fitting first (argv lists)."""
    env = os.environ if env is None else env
    found: list[list[str]] = []
    candidates: list[tuple[bool, list[str]]] = [
        (bool(env.get("WAYLAND_DISPLAY")), ["wl-copy"]),
        (bool(env.get("DISPLAY")), ["xclip", "-selection", "clipboard", "-in"]),
        (bool(env.get("DISPLAY")), ["xsel", "--clipboard", "--input"]),
        (True, ["pbcopy"]),
    ]
    for usable, argv in candidates:
        if usable and which(argv[0]):
            found.append(argv)
    return found


def copy_to_system_clipboard(text: str, *, timeout: float = 2.0,
                             commands: Sequence[Sequence[str]] | None = None) -> "CopyOutcome":
    """Hand ``text`` to the first clipboard tool that accepts it (exit status 0).

    Never raises: a missing tool, a failure or a timeout just tries the next
    one. The result is true when a tool took the text and names it, or lists
    each tool's problem (see ``clipboard.run_tools``); the app can still use
    the terminal's own clipboard through Textual's ``App.copy_to_clipboard``.
    """
    from .clipboard import run_tools

    return run_tools(text, clipboard_commands() if commands is None else commands, timeout=timeout)
