"""Number formatting for reading: pure functions, no Textual, no Rich.

Every function takes a value (float, int, numpy scalar or None) and returns a
plain string. A missing or non-finite value (None, NaN, +/-inf) is never shown
as "nan" or "inf": it becomes a neutral placeholder ("·", or "--" in ASCII
mode). With ``width`` the result is right-aligned to exactly that many cells;
a number too long for its width is shown as a run of "#" (like a too-narrow
spreadsheet column) rather than cut, since a cut number reads as another number.

Units: probabilities, vols and spreads are decimals in (0.123 -> "12.3%");
prices and strikes are in price units; sigma distance in sigmas.
"""

from __future__ import annotations

import math
import re
from typing import Any

# numpy and pandas are imported where they are used: the app's first frame needs neither.

#: Placeholder for a missing number (Unicode mode).
PLACEHOLDER = "·"
#: Placeholder for a missing number (ASCII mode).
PLACEHOLDER_ASCII = "--"
#: Sigma sign (Unicode) and its ASCII stand-in.
SIGMA = "σ"
SIGMA_ASCII = "s"


def placeholder(ascii_only: bool = False) -> str:
    """The neutral mark shown instead of a missing number."""
    return PLACEHOLDER_ASCII if ascii_only else PLACEHOLDER


#: The mark shown in a cell whose figure is still being computed (e.g. P(touch) of an expiry just opened).
PENDING = "…"
PENDING_ASCII = ".."


def pending_mark(width: int | None = None, ascii_only: bool = False) -> str:
    """The pending mark fitted to ``width`` cells."""
    return fit(PENDING_ASCII if ascii_only else PENDING, width)


def as_finite(value: Any) -> float | None:
    """``value`` as a finite float, or None when missing, NaN, inf or not a number."""
    if value is None or isinstance(value, bool):
        return None
    try:
        x = float(value)
    except (TypeError, ValueError):
        return None
    return x if math.isfinite(x) else None


def fit(text: str, width: int | None, *, numeric: bool = True, align: str = "right") -> str:
    """Pad ``text`` to ``width`` cells (right-aligned by default).

    Too-long numbers become "#" * width; too-long words are cut with a trailing "~".
    """
    if width is None:
        return text
    if width <= 0:
        return ""
    if len(text) > width:
        if numeric:
            return "#" * width
        return text[: width - 1] + "~" if width > 1 else text[:1]
    if align == "left":
        return text.ljust(width)
    if align == "center":
        return text.center(width)
    return text.rjust(width)


def tidy_zero(text: str, keep_sign: bool = False) -> str:
    """A rounded number that reads as zero never shows a minus: "-0.00" -> "0.00" ("+0.00" when
    ``keep_sign``), "-0.0%" -> "0.0%"."""
    if text.startswith("-") and float(text.rstrip("%")) == 0.0:
        return ("+" if keep_sign else "") + text[1:]
    return text


def signed(x: float, decimals: int = 2) -> str:
    """A number with its sign and fixed decimals, zero as "+0.00"."""
    return tidy_zero(f"{x:+.{decimals}f}", keep_sign=True)


def _missing(width: int | None, ascii_only: bool) -> str:
    return fit(placeholder(ascii_only), width)


def fmt_pct(value: Any, decimals: int = 1, width: int | None = None, ascii_only: bool = False) -> str:
    """A decimal as a percentage: 0.1234 -> "12.3%". Used for vols (IV) and spreads."""
    x = as_finite(value)
    if x is None:
        return _missing(width, ascii_only)
    if not math.isfinite(x * 100):
        return fit("####", width) if width is None else "#" * width
    return fit(tidy_zero(f"{x * 100:.{decimals}f}%"), width)


def fmt_vol(value: Any, width: int | None = None, ascii_only: bool = False) -> str:
    """An annualised implied vol (decimal) as a percentage with one decimal: 0.312 -> "31.2%"."""
    return fmt_pct(value, 1, width, ascii_only)


def fmt_prob(value: Any, width: int | None = None, ascii_only: bool = False) -> str:
    """A probability (decimal 0..1) as a percentage with one decimal.

    Tiny and near-certain values are not rounded to a false 0 or 100:
    0.0004 -> "<0.1%", 0.9996 -> ">99.9%". Exactly 0 or 1 show as "0.0%" and "100.0%".
    """
    x = as_finite(value)
    if x is None:
        return _missing(width, ascii_only)
    if 0.0 < x < 0.0005:
        text = "<0.1%"
    elif 0.9995 <= x < 1.0:
        text = ">99.9%"
    elif not math.isfinite(x * 100):
        text = "####"
    else:
        text = tidy_zero(f"{x * 100:.1f}%")
    return fit(text, width)


def fmt_spread(value: Any, width: int | None = None, ascii_only: bool = False) -> str:
    """Bid-ask spread as a percentage of mid (decimal in): 0.052 -> "5.2%"; >= 1000% -> ">999%"."""
    x = as_finite(value)
    if x is None:
        return _missing(width, ascii_only)
    if x >= 9.995:
        return fit(">999%", width)
    return fmt_pct(x, 1, width, ascii_only)


def price_decimals(value: float) -> int:
    """Decimals needed to show a price to its tick: 2, or 3-4 for sub-penny prices."""
    for d in (2, 3):
        if abs(round(value, d) - round(value, 4)) < 1e-9:
            return d
    return 4


#: From this size on, prices, levels and strikes are shown in scientific notation
#: (no real underlying trades there; a 300-digit number helps nobody).
HUGE = 1e12
#: Below this size (and above zero) too: fixed decimals would show them as 0 and
#: make different values look the same.
TINY = 1e-3


def _huge(x: float) -> str:
    return f"{x:.4g}"


def _outside_fixed(x: float) -> bool:
    """Whether ``x`` is too large or too small (but not zero) for fixed decimals."""
    return abs(x) >= HUGE or 0.0 < abs(x) < TINY


def fmt_price(value: Any, width: int | None = None, ascii_only: bool = False) -> str:
    """A price in price units: two decimals, more when it has sub-penny digits (1.225, 0.0035)."""
    x = as_finite(value)
    if x is None:
        return _missing(width, ascii_only)
    if _outside_fixed(x):
        return fit(_huge(x), width)
    return fit(tidy_zero(f"{x:.{price_decimals(x)}f}"), width)


def fmt_level(value: Any, width: int | None = None, ascii_only: bool = False) -> str:
    """A price level computed by a model (forward, range ends): 2 decimals, 4 below 1.00."""
    x = as_finite(value)
    if x is None:
        return _missing(width, ascii_only)
    if _outside_fixed(x):
        return fit(_huge(x), width)
    return fit(tidy_zero(f"{x:.{2 if abs(x) >= 1 else 4}f}"), width)


def strike_decimals(values: Any) -> int:
    """Fewest decimals (0..3) that show every strike in ``values`` exactly (ignoring non-finite)."""
    import numpy as np

    try:
        x = np.asarray(values, dtype=float).ravel()
    except (TypeError, ValueError):
        x = np.array([v for v in (as_finite(v) for v in values) if v is not None], dtype=float)
    x = x[np.isfinite(x)]
    for d in range(0, 3):
        if np.all(np.abs(np.round(x, d) - x) < 1e-9):
            return d
    return 3


def fmt_strike(value: Any, decimals: int | None = None, width: int | None = None, ascii_only: bool = False) -> str:
    """A strike: 95 -> "95", 97.5 -> "97.5"; ``decimals`` forces a fixed count (for a column)."""
    x = as_finite(value)
    if x is None:
        return _missing(width, ascii_only)
    if _outside_fixed(x):
        return fit(_huge(x), width)
    d = strike_decimals([x]) if decimals is None else decimals
    if round(x, d) == 0 and x != 0:  # a small strike in a column of fewer decimals: never a false 0
        return fit(_huge(x), width)
    return fit(f"{x:.{d}f}", width)


def strike_column_width(strikes: Any) -> int:
    """Cells of the ladder's strike column for ``strikes`` (ascending or not): the longest of the
    lowest and highest at the fewest decimals that show every strike, a space each side, at least 8."""
    import numpy as np

    x = np.asarray(strikes, dtype=float).ravel()
    x = x[np.isfinite(x)]
    if not x.size:
        return 8
    decimals = strike_decimals(x)
    longest = max(len(fmt_strike(float(v), decimals)) for v in (x.min(), x.max()))
    return max(8, longest + 2)


def fmt_sigma(value: Any, width: int | None = None, ascii_only: bool = False) -> str:
    """Sigma distance with its sign: 1.523 -> "+1.52σ" ("+1.52s" in ASCII mode)."""
    x = as_finite(value)
    if x is None:
        return _missing(width, ascii_only)
    return fit(signed(x) + (SIGMA_ASCII if ascii_only else SIGMA), width)


def fmt_delta(value: Any, width: int | None = None, ascii_only: bool = False) -> str:
    """Delta (decimal, calls 0..1, puts -1..0) with its sign and two decimals: "+0.25", "-0.31"."""
    x = as_finite(value)
    if x is None:
        return _missing(width, ascii_only)
    return fit(signed(x), width)


def fmt_greek(value: Any, width: int | None = None, ascii_only: bool = False) -> str:
    """gamma, theta or vega: four decimals below 1 (-0.0118), three below 100, one above; huge in e-notation."""
    x = as_finite(value)
    if x is None:
        return _missing(width, ascii_only)
    if abs(x) >= HUGE:
        return fit(_huge(x), width)
    decimals = 4 if abs(x) < 1 else (3 if abs(x) < 100 else 1)
    return fit(tidy_zero(f"{x:.{decimals}f}"), width)


def fmt_return(value: Any, width: int | None = None, ascii_only: bool = False) -> str:
    """A return on capital (decimal) as a percentage with one decimal; >= 10,000% as ">9999%"."""
    x = as_finite(value)
    if x is None:
        return _missing(width, ascii_only)
    if abs(x) >= 99.995:
        return fit(">9999%" if x > 0 else "<-9999%", width)
    return fmt_pct(x, 1, width, ascii_only)


def fmt_count(value: Any, width: int | None = None, ascii_only: bool = False) -> str:
    """A count (open interest, volume) with thousands separators: 12345 -> "12,345"."""
    x = as_finite(value)
    if x is None:
        return _missing(width, ascii_only)
    return fit(f"{round(x):,d}", width)


def _as_timestamp(value: Any):
    """A pandas Timestamp, or None for a missing or unreadable value."""
    import pandas as pd

    if value is None:
        return None
    try:
        ts = pd.Timestamp(value)
    except (TypeError, ValueError):
        return None
    if ts is pd.NaT or pd.isna(ts):
        return None
    return ts


def fmt_timestamp(value: Any, ascii_only: bool = False) -> str:
    """A snapshot time as "2026-12-01 14:30 -05:00" (offset kept when the time has one)."""
    ts = _as_timestamp(value)
    if ts is None:
        return placeholder(ascii_only)
    text = ts.strftime("%Y-%m-%d %H:%M")
    if ts.tzinfo is not None:
        off = ts.strftime("%z")  # +HHMM
        if len(off) == 5:
            text += f" {off[:3]}:{off[3:]}"
    return text


def fmt_date(value: Any, ascii_only: bool = False) -> str:
    """An expiry as "2027-01-15"."""
    ts = _as_timestamp(value)
    if ts is None:
        return placeholder(ascii_only)
    return ts.strftime("%Y-%m-%d")


# Escape sequences (CSI, OSC, DCS/SOS/PM/APC strings, two-byte ESC codes) and
# their 8-bit C1 forms, then any other control or bidirectional-override character.
_ESCAPE_RE = re.compile(
    r"(?:\x1b\[|\x9b)[0-?]*[ -/]*[@-~]"                 # CSI ... final byte
    r"|(?:\x1b[\]PX^_]|[\x90\x98\x9d\x9e\x9f]).*?(?:\x07|\x1b\\|\x9c|$)"  # OSC/DCS/... to terminator
    r"|\x1b[ -/]*[0-~]",                                 # other ESC sequences
    re.DOTALL,
)
_CONTROL_RE = re.compile(
    "[\x00-\x08\x0b-\x1f\x7f-\x9f\u061c\u200e\u200f\u202a-\u202e\u2066-\u2069\ufeff]"
)


def clean_text(value: Any, *, keep_newlines: bool = False) -> str:
    """Text from data made safe to show or copy: escape sequences and control
    characters (C0, C1, DEL, every bidi control, a stray byte-order mark) removed;
    tabs and newlines become spaces unless ``keep_newlines``. None and NaN give ""."""
    if value is None:
        return ""
    if isinstance(value, float) and not math.isfinite(value):
        return ""
    text = str(value)
    text = _ESCAPE_RE.sub("", text)
    if not keep_newlines:
        text = text.replace("\r\n", " ").replace("\n", " ").replace("\r", " ")
        text = text.replace("\u2028", " ").replace("\u2029", " ")  # Unicode line and paragraph separators
    text = text.replace("\t", " ")
    return _CONTROL_RE.sub("", text)
