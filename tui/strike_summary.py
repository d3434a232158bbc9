"""A contract's summary in plain words for a note or a chat, and copying text to the system clipboard.

One line, parts separated by " | ", readable without the app, e.g.

    OSPX 95 put, expiry 2027-01-15 (45 days) | bid 1.20 x ask 1.26, mid 1.23 | IV 31.2% |
    delta -0.16 | 1.48 sigmas below the forward | chance OSPX finishes below 95: 8.1% |
    chance OSPX trades at 95 before expiry: 15.9% |
    sold at 1.20: ends ahead if OSPX finishes above 93.80, chance 91.5% |
    bought at 1.26: ends ahead if OSPX finishes below 93.74, chance 7.9% |
    spot 100.00, forward 100.42 | flags: wide | as of 2026-12-01 14:30 -05:00 |
    risk-neutral model figures at expiry, not advice

Every figure comes from the contracts-table row (core's numbers); a figure
the row lacks shows as "--", and a part that needs figures the caller did not
give (days, spot and forward, touch bounds, the seller's or buyer's side) is
left out. Text from data (underlying, kind, flags) has escape sequences and
control characters removed, so a pasted summary cannot carry terminal codes.
"""

from __future__ import annotations

import os
import shutil
from typing import TYPE_CHECKING, Any, Callable, Mapping, Sequence

from . import formatting as fm

if TYPE_CHECKING:
    from .clipboard import CopyOutcome

SEPARATOR = " | "

#: The closing caution of every summary.
CAUTION = "risk-neutral model figures at expiry, not advice"


def summarize(contract: Mapping[str, Any], *, as_of: Any = None, underlying: str | None = None,
              ascii_only: bool = False, spot: Any = None, forward: Any = None, days: Any = None) -> str:
    """One line for the clipboard from a contracts-table row (dict or pandas Series).

    Reads ``underlying, expiry, strike, kind, bid, ask, mid, iv, delta,
    sigma_distance, p_beyond, p_touch`` and, when present, the touch bounds
    ``p_touch_low, p_touch_high``, the seller's ``sell_premium,
    breakeven_sell, p_profit_sell`` and the buyer's ``buy_premium,
    breakeven_buy, p_profit_buy``. ``as_of`` (the snapshot time) and
    ``underlying`` override the row's; ``spot``, ``forward`` (price units)
    and ``days`` (calendar days to expiry) come from the snapshot and the
    expiry. The line's own words and symbols are ASCII either way (``ascii_only``
    is kept for callers); text from data is kept as it is, cleaned.
    """
    def get(key: str) -> Any:
        try:
            return contract[key]
        except (KeyError, IndexError, TypeError):
            return None

    def price(value: Any) -> str:
        return fm.fmt_price(value, ascii_only=True)

    def prob(value: Any) -> str:
        return fm.fmt_prob(value, ascii_only=True)

    und = fm.clean_text(underlying if underlying is not None else get("underlying")).strip()
    kind = fm.clean_text(get("kind")).strip().lower()
    kind = {"c": "call", "p": "put"}.get(kind, kind)
    expiry = fm.fmt_date(get("expiry"), ascii_only=True)
    strike = fm.fmt_strike(get("strike"), ascii_only=True)
    payoff_side = {"call": "above", "put": "below"}.get(kind)
    other_side = {"call": "below", "put": "above"}.get(kind)
    it = und or "the underlying"
    n_days = fm.as_finite(days)
    head = " ".join(p for p in (und, strike, kind) if p)
    head += f", expiry {expiry}"
    if n_days is not None:
        head += f" ({n_days:.0f} day{'' if round(n_days) == 1 else 's'})"
    parts = [
        head,
        f"bid {price(get('bid'))} x ask {price(get('ask'))}, mid {price(get('mid'))}",
        f"IV {fm.fmt_vol(get('iv'), ascii_only=True)}",
        f"delta {fm.fmt_delta(get('delta'), ascii_only=True)}",
        _sigma_words(get("sigma_distance")),
        f"chance {it} finishes {payoff_side or 'beyond'} {strike}: {prob(get('p_beyond'))}",
        _touch_words(it, strike, get("p_touch"), get("p_touch_low"), get("p_touch_high")),
    ]
    for verb, premium, level, chance, side in (
            ("sold", "sell_premium", "breakeven_sell", "p_profit_sell", other_side),
            ("bought", "buy_premium", "breakeven_buy", "p_profit_buy", payoff_side)):
        if fm.as_finite(get(premium)) is not None and side is not None:
            parts.append(f"{verb} at {price(get(premium))}: ends ahead if {it} finishes {side} "
                         f"{price(get(level))}, chance {prob(get(chance))}")
    if fm.as_finite(spot) is not None or fm.as_finite(forward) is not None:
        parts.append(f"spot {fm.fmt_level(spot, ascii_only=True)}, forward {fm.fmt_level(forward, ascii_only=True)}")
    flags = fm.clean_text(get("flags") or "").strip() if isinstance(get("flags"), str) else ""
    if flags:
        parts.append(f"flags: {flags}")
    when = as_of if as_of is not None else get("as_of")
    parts += [f"as of {fm.fmt_timestamp(when, ascii_only=True)}", CAUTION]
    return fm.clean_text(SEPARATOR.join(parts))


def _sigma_words(value: Any) -> str:
    """'1.48 sigmas below the forward' (plain words, no symbol)."""
    x = fm.as_finite(value)
    if x is None:
        return "-- sigmas from the forward"
    size = fm.tidy_zero(f"{abs(x):.2f}")
    if size == "0.00":
        return "at the forward"
    return f"{size} sigma{'' if size == '1.00' else 's'} {'above' if x > 0 else 'below'} the forward"


def _touch_words(it: str, strike: str, p_touch: Any, low: Any, high: Any) -> str:
    text = f"chance {it} trades at {strike} before expiry: {fm.fmt_prob(p_touch, ascii_only=True)}"
    if fm.as_finite(low) is not None and fm.as_finite(high) is not None:
        text += (f" (any model fitting the quotes: {fm.fmt_prob(low, ascii_only=True)} to "
                 f"{fm.fmt_prob(high, ascii_only=True)})")
    return text


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
