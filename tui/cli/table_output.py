"""Writing the core tables for scripts and terminals: plain, csv, json.

csv and json carry raw decimals (probabilities 0..1, vols as decimals);
plain is a fixed-width table for reading, with percentages. Text from files
is printed as text: control characters are replaced, nothing is markup. In
csv, text cells also have control characters escaped, and a text cell that
starts with = + - @ tab, carriage return or NUL gets a leading single quote
so a spreadsheet does not run it as a formula (OWASP CSV injection guidance,
``shortlist.neutralise_formula``); numbers stay numbers. json escapes every
non-ASCII and control character.

The writers work a column at a time and lay rows out as bytes in blocks
(``core.text_rows``), so memory beyond the frame stays small: csv decimals
are formatted a block at a time by ``core.number_text`` (printf ``%.10g``
byte for byte); plain numbers once per distinct shown value, their fixed
decimals at once (``number_text.fixed_bytes``; a value near a rounding tie or
in a special branch of its formatter by the formatter itself); json numbers
once per distinct value by Python's own repr; text is cleaned once per
distinct value.
"""

from __future__ import annotations

import io
import json
import math
import sys
from typing import Protocol, TextIO

import numpy as np

import pandas as pd

from chaintriage.core.number_text import as_strings, fixed_bytes, general_bytes
from chaintriage.core.text_rows import compact, line_matrix, strip_line_ends, text_bytes
from chaintriage.tui.cli.common import one_line, plain
from chaintriage.tui.shortlist import neutralise_formula
from chaintriage.tui.formatting import (
    TINY,
    as_finite,
    fmt_count,
    fmt_date,
    fmt_delta,
    fmt_level,
    fmt_price,
    fmt_prob,
    fmt_spread,
    fmt_strike,
    fmt_vol,
    HUGE,
    placeholder,
    signed,
    tidy_zero,
)


class LateColumns(Protocol):
    """Decimal columns of a table whose values are still being computed (e.g. by another process)
    when the table is handed to a writer (their cells in the frame are placeholders): the writers
    format the other columns first and ask for these a block of rows at a time."""

    #: the columns' names
    names: tuple[str, ...]

    def rows(self, stop: int) -> dict[str, np.ndarray]:
        """Each late column's values (float, one per row of the frame), known at least for the rows
        before ``stop`` (waiting for them if need be). Every call returns the same arrays, filled in
        place: the csv writer keeps those of ``rows(0)`` and reads each block after asking for it."""


def with_late(frame: pd.DataFrame, late: LateColumns | None) -> pd.DataFrame:
    """``frame`` with the late columns' values in place (waiting for all of them); itself when
    ``late`` is None."""
    if late is None:
        return frame
    values = late.rows(len(frame))
    names = [n for n in late.names if n in frame.columns]
    if not names:
        return frame
    frame = frame.copy(deep=False)
    for n in names:
        frame[n] = values[n]
    return frame


#: How plain output shows each known column: (heading, formatter name).
_PLAIN = {
    "underlying": ("underlying", "text"),
    "as_of": ("as of", "text"),
    "expiry": ("expiry", "date"),
    "strike": ("strike", "strike"),
    "kind": ("kind", "text"),
    "bid": ("bid", "price"),
    "ask": ("ask", "price"),
    "mid": ("mid", "price"),
    "iv": ("iv", "vol"),
    "sigma_distance": ("sigma", "signed"),
    "p_beyond": ("P(beyond)", "prob"),
    "p_beyond_flat": ("P(beyond) flat", "prob"),
    "p_touch": ("P(touch)", "prob"),
    "p_touch_low": ("touch low", "prob"),
    "p_touch_high": ("touch high", "prob"),
    "delta": ("delta", "delta"),
    "breakeven": ("breakeven", "price"),
    "p_breakeven": ("P(breakeven)", "prob"),
    "spread_pct": ("spread", "spread"),
    "flags": ("flags", "text"),
    "volume": ("volume", "count"),
    "open_interest": ("open int", "count"),
    "t_years": ("years", "f4"),
    "trading_days": ("tdays", "count"),
    "calendar_days": ("cdays", "count"),
    "forward": ("forward", "level"),
    "discount": ("discount", "f6"),
    "forward_method": ("fwd from", "text"),
    "atm_iv": ("atm iv", "vol"),
    "range_low": ("range low", "level"),
    "range_high": ("range high", "level"),
    "range_low_smile": ("smile low", "level"),
    "range_high_smile": ("smile high", "level"),
    "fit_rmse": ("fit rmse", "points"),
    "fit_method": ("fit", "text"),
    "arbitrage_free": ("arb-free", "bool"),
    "arbitrage_note": ("arbitrage", "text"),
    "contracts": ("contracts", "count"),
    "findings": ("findings", "count"),
    "days": ("days", "g"),
    "forward_vol": ("fwd vol", "vol"),
    "event_variance": ("event var", "f6"),
    "ex_event_vol": ("ex-event vol", "vol"),
    "events": ("events", "text"),
    "event": ("event", "text"),
    "date": ("date", "date"),
    "timing": ("timing", "text"),
    "first_expiry": ("first expiry", "date"),
    "move": ("1-sd move", "vol"),
    "expected_abs_move": ("mean |move|", "vol"),
    "move_price": ("1-sd price", "price"),
    "expected_abs_price": ("mean |price|", "price"),
    "ordinary_vol": ("ordinary vol", "vol"),
    "past_events": ("past events", "count"),
    "past_mean_abs_move": ("past mean |move|", "vol"),
    "past_rms_move": ("past rms move", "vol"),
    "past_moves": ("past moves, newest first", "text"),
    "method": ("method", "text"),
    "extrapolated": ("extrapolated", "bool"),
    "gamma": ("gamma", "f4"),
    "theta": ("theta", "f4"),
    "vega": ("vega", "f4"),
    "sell_premium": ("sell at", "price"),
    "buy_premium": ("buy at", "price"),
    "breakeven_sell": ("BE sell", "price"),
    "breakeven_buy": ("BE buy", "price"),
    "p_profit_sell": ("P(profit) sell", "prob"),
    "p_profit_buy": ("P(profit) buy", "prob"),
    "premium_per_day_sell": ("per day sell", "f4"),
    "premium_per_day_buy": ("per day buy", "f4"),
    "return_sell": ("return sell", "pct2"),
    "return_sell_annual": ("a year sell", "pct2"),
    "move_to_breakeven_buy": ("BE move buy", "signed"),
    "edge_to_mid": ("edge", "price"),
    "edge_share_sell": ("edge/bid", "pct2"),
    "edge_share_buy": ("edge/ask", "pct2"),
    "strike_below": ("below", "strike"),
    "strike_above": ("above", "strike"),
    # history (realised vol, cone, history-based odds)
    "window": ("window", "count"),
    "close_to_close": ("close-close", "vol"),
    "parkinson": ("Parkinson", "vol"),
    "garman_klass": ("Garman-Klass", "vol"),
    "rogers_satchell": ("Rogers-Satchell", "vol"),
    "yang_zhang": ("Yang-Zhang", "vol"),
    "cone_min": ("cone min", "vol"),
    "cone_q25": ("cone 25%", "vol"),
    "cone_median": ("cone median", "vol"),
    "cone_q75": ("cone 75%", "vol"),
    "cone_max": ("cone max", "vol"),
    "cone_samples": ("windows", "count"),
    "hist_window": ("rv window", "count"),
    "hist_vol": ("rv", "vol"),
    "iv_rv": ("iv/rv", "f2"),
    "cone_percentile": ("iv in cone", "prob"),
    "hist_p_beyond": ("hist P(beyond)", "prob"),
    "hist_p_touch": ("hist P(touch)", "prob"),
    "boot_p_beyond": ("boot P(beyond)", "prob"),
    "boot_p_beyond_se": ("+/-", "prob"),
    "boot_p_touch": ("boot P(touch)", "prob"),
    "boot_p_touch_se": ("+/-", "prob"),
}

#: Formatters shared with the app (tui.formatting), in ASCII mode for plain terminals.
_FORMATTERS = {
    "price": fmt_price, "level": fmt_level, "strike": fmt_strike, "vol": fmt_vol, "prob": fmt_prob,
    "spread": fmt_spread, "delta": fmt_delta, "count": fmt_count,
}


def _fmt(value: object, kind: str) -> str:
    if kind == "text":
        return one_line(value)
    if kind == "date":
        return fmt_date(value, ascii_only=True)
    if kind == "bool":
        return "yes" if bool(value) else "no"
    if kind in _FORMATTERS:
        return _FORMATTERS[kind](value, ascii_only=True)
    x = as_finite(value)
    if x is None:
        return placeholder(ascii_only=True)
    if kind == "signed":
        return signed(x)
    if kind == "points":
        return f"{100 * x:.2f}"
    if kind == "pct2":
        return f"{100 * x:.2f}%" if abs(x) < 1e6 else f"{100 * x:.3g}%"
    if kind == "g":
        return f"{x:g}"
    if kind == "f4":
        return f"{x:.4f}" if abs(x) < 1e6 else f"{x:.4g}"
    if kind == "f2":
        return f"{x:.2f}"
    return f"{x:.6f}"


#: Rows per block when writing (bounds the text held in memory at once).
BLOCK_ROWS = 20_000

#: Per plain formatter: how many units of the value one step of the last shown digit is,
#: and the values that have a text of their own (special branches of the formatter).
_STEP = {"prob": 1000.0, "vol": 1000.0, "spread": 1000.0, "delta": 100.0, "signed": 100.0,
         "points": 10000.0, "count": 1.0, "g": None, "f4": 10000.0, "f6": 1e6, "pct2": 10000.0}

#: Per plain formatter whose ordinary text is a fixed-point number: (decimals, None for the
#: per-value decimals of prices and strikes; whether a plus sign shows; suffix).
_FIXED = {"prob": (1, False, b"%"), "vol": (1, False, b"%"), "spread": (1, False, b"%"),
          "delta": (2, True, b""), "signed": (2, True, b""), "points": (2, False, b""),
          "f4": (4, False, b""), "f6": (6, False, b""), "pct2": (2, False, b"%"),
          "price": (None, False, b""), "strike": (None, False, b"")}

#: Scaled values at least this large are formatted one by one (the float product's error could
#: pass the tie margin).
_SCALED_LIMIT = 1e9


def _special(x: np.ndarray, kind: str) -> np.ndarray:
    """Codes (0 = none) for the values a formatter shows in a branch of its own."""
    code = np.zeros(x.shape, dtype=np.int8)
    with np.errstate(invalid="ignore", over="ignore"):
        if kind == "prob":
            code[(x > 0) & (x < 0.0005)] = 1
            code[(x >= 0.9995) & (x < 1.0)] = 2
        if kind == "spread":
            code[x >= 9.995] = 3
        if kind in ("f4", "pct2"):
            code[~(np.abs(x) < 1e6)] = 5  # scientific notation from there
        code[~np.isfinite(x * 100.0)] = 4
    return code


def _decimals(x: np.ndarray, kind: str) -> np.ndarray:
    """Decimals ``fmt_price`` / ``fmt_strike`` would choose for each value (vectorised)."""
    with np.errstate(invalid="ignore", over="ignore"):
        if kind == "price":
            r4 = np.round(x, 4)
            return np.where(np.abs(np.round(x, 2) - r4) < 1e-9, 2, np.where(np.abs(np.round(x, 3) - r4) < 1e-9, 3, 4))
        d = np.full(x.shape, 3)
        for k in (2, 1, 0):
            d = np.where(np.abs(np.round(x, k) - x) < 1e-9, k, d)
        return d


def _format_codes(values, kind: str) -> tuple[np.ndarray, np.ndarray]:
    """(codes, texts): ``texts[codes]`` is ``_fmt(value, kind)`` for every value of a column.

    Values that show the same text are formatted once: a key per row is the
    value rounded to the last shown digit; values within 1e-6 of a rounding
    tie (where scaled arithmetic and printf could disagree) and values in
    special ranges (tiny, huge, non-finite) are keyed by their exact value.
    """
    n = len(values)
    worded = None
    if kind in ("text", "date", "bool") or n == 0:
        if kind == "text" and isinstance(values, pd.Series) and _is_text(values) \
                and (_nan_missing_text(values.dtype) or isinstance(values.dtype, pd.CategoricalDtype)):
            codes, uniq = _factorized(values)  # as it is: the same as via objects, faster
        else:
            arr = np.asarray(values, dtype=object) if kind != "date" else values
            codes, uniq = pd.factorize(pd.Series(arr), use_na_sentinel=False)
        return codes, np.array([_fmt(u, kind) for u in uniq], dtype=object)
    x = pd.to_numeric(pd.Series(values), errors="coerce").to_numpy(dtype=float, na_value=np.nan)
    decimals = None
    with np.errstate(invalid="ignore", over="ignore"):
        if kind in ("price", "strike"):
            decimals = _decimals(x, kind)
            scale = 10.0 ** decimals
            # the decimals compare roundings 1e-9 apart: float error stays far below that under 1e5
            lone = ~(np.abs(x) < 1e5)
            if kind == "price":
                # Python's round() decides the decimals against the value to 4 decimals: a tie there on its
                # own (a tie at 2 or 3 decimals leaves the value 5e-4 or more from those roundings, either way)
                y4 = x * 10000.0
                lone |= np.abs(np.abs(y4 - np.floor(y4)) - 0.5) < 1e-6
        elif _STEP.get(kind) is not None:
            scale = np.full(n, _STEP[kind])
            special = _special(x, kind)
            lone = special > 0
            worded = (special >= 1) & (special <= 3)  # "<0.1%", ">99.9%", ">999%": one text per word
        else:  # shown digits depend on the value itself: one text per distinct value
            scale = None
            lone = np.ones(n, dtype=bool)
        if decimals is not None:  # tiny prices and strikes print in scientific notation: each by the formatter
            lone |= (x != 0) & (np.abs(x) < TINY)
        if scale is not None:
            y = x * scale
            lone |= (np.abs(np.abs(y - np.floor(y)) - 0.5) < 1e-6) | ~(np.abs(y) < _SCALED_LIMIT)
            zero = np.round(y) == 0
            key = np.round(y) / scale if decimals is None else np.round(y) * 8 + decimals  # decimals apart
        else:
            key = x
            zero = x == 0
        key = np.where(lone, x, key)
        if worded is not None:
            key = np.where(worded, special, key)
    # a lone row is keyed by its exact value, apart from the rounded keys; a key of zero from a
    # negative value apart too (factorize takes -0.0 for 0.0, but some formats show "-0")
    negz = (zero & ~lone | (x == 0)) & np.signbit(x)
    codes = np.empty(n, dtype=np.int64)
    texts: list[str] = []
    worded = np.zeros(n, dtype=bool) if worded is None else worded
    for rows in (np.flatnonzero(~lone & ~negz), np.flatnonzero(worded), np.flatnonzero(lone & ~negz & ~worded),
                 np.flatnonzero(negz)):
        if rows.size == 0:
            continue
        if kind in _FIXED and not lone[rows[0]] and not negz[rows[0]]:  # rounded values: keyed by whole units
            _fixed_group(rows, np.round(y[rows]), None if decimals is None else decimals[rows], kind, codes, texts)
            continue
        c, uniq = pd.factorize(key[rows], use_na_sentinel=False)
        # factorize numbers keys in order of first appearance: a first is where the running maximum rises
        top = np.maximum.accumulate(c)
        first = rows[np.flatnonzero(np.concatenate([[True], top[1:] > top[:-1]]))]
        codes[rows] = c + len(texts)
        texts.extend(_fmt(x[i], kind) for i in first)
    return codes, np.array(texts, dtype=object)


def _fixed_group(rows: np.ndarray, units: np.ndarray, decimals: np.ndarray | None, kind: str,
                 codes: np.ndarray, texts: list[str]) -> None:
    """Codes and texts of rows whose text is their rounded value: ``units`` whole steps of the last shown
    digit (|units| < ``_SCALED_LIMIT``), with ``decimals`` per row for prices and strikes. Distinct
    (units, decimals) found by a table over their range when it is small, else by hashing."""
    key = units.astype(np.int64)
    if decimals is not None:
        key = key * 8 + decimals  # decimals 0..4 apart
    low = int(key.min())
    span = int(key.max()) - low + 1
    if span <= 4 * key.size + 4096:
        present = np.zeros(span, dtype=bool)
        present[key - low] = True
        c = (np.cumsum(present) - 1)[key - low]
        distinct = np.flatnonzero(present) + low
    else:
        c, distinct = pd.factorize(key, use_na_sentinel=False)
    codes[rows] = c + len(texts)
    if decimals is None:
        texts.extend(_fixed_texts(distinct, kind, None))
    else:
        texts.extend(_fixed_texts(distinct >> 3, kind, distinct & 7))


def _fixed_texts(units: np.ndarray, kind: str, decimals: np.ndarray | None) -> list[str]:
    """The plain text of rounded values (whole steps of the shown last digit; never a rounding tie,
    never a special branch), as the formatter of ``kind`` prints them: fixed decimals, a sign
    (plus too for deltas and sigmas; none on zero), the suffix."""
    places, plus, suffix = _FIXED[kind]
    k = units.astype(np.int64)
    sign = np.where(k < 0, np.uint8(ord("-")), np.uint8(ord("+") if plus else 0))
    if places is not None:
        return as_strings(fixed_bytes(k, places, sign, suffix)).tolist()
    out = np.empty(k.size, dtype=object)
    for d in np.unique(decimals).tolist():
        at = np.flatnonzero(decimals == d)
        out[at] = as_strings(fixed_bytes(k[at], d, sign[at], suffix))
    return out.tolist()


def format_column(values, kind: str) -> np.ndarray:
    """Every value of a column as plain text (object array), equal to ``_fmt(value, kind)`` for each."""
    codes, texts = _format_codes(values, kind)
    return texts[codes] if len(codes) else np.empty(0, dtype=object)


def _plain_kinds(frame: pd.DataFrame) -> tuple[list[str], list[str]]:
    cols = list(frame.columns)
    return [_PLAIN.get(c, (c, "text"))[0] for c in cols], [_PLAIN.get(c, (c, "text"))[1] for c in cols]


def write_plain(frame: pd.DataFrame, out: TextIO, late: LateColumns | None = None) -> None:
    """A fixed-width, right-aligned (text left-aligned) table for reading. ``late``: columns of
    ``frame`` whose values come later (``LateColumns``), formatted after the others."""
    headings, _ = _plain_kinds(frame)
    coded, widths, left = _plain_coded(frame, late)
    _plain_heading(headings, widths, left, out)
    _plain_rows(coded, widths, left, len(frame), out)


def _plain_coded(frame: pd.DataFrame, late: LateColumns | None = None) -> tuple[list, list[int], list[bool]]:
    """Each column's (codes, texts, ASCII texts), the widths of its heading and widest text, and which
    are left-aligned. The ASCII texts are ``texts`` as a numpy bytes array, None when one is not ASCII.
    ``late``: columns whose values are asked for (``LateColumns.rows``) once the others are coded."""
    headings, kinds = _plain_kinds(frame)
    names = list(frame.columns)
    later = [] if late is None else [j for j, name in enumerate(names) if name in late.names]
    coded = [None if j in later else (*_format_codes(frame.iloc[:, j], k), None) for j, k in enumerate(kinds)]
    if late is not None:  # asked for even when the frame shows none of them: whoever computes them finishes
        values = late.rows(len(frame))
        for j in later:
            coded[j] = (*_format_codes(pd.Series(values[names[j]]), kinds[j]), None)
    widths = []
    for j, (h, (codes, texts, _)) in enumerate(zip(headings, coded)):
        if not len(codes):
            widths.append(len(h))
            continue
        try:  # ASCII texts (numbers always): their lengths at C speed, the array kept for the cells
            narrow = np.array(texts.tolist(), dtype=bytes)
            coded[j] = (codes, texts, narrow)
            longest = int(np.strings.str_len(narrow).max())
        except UnicodeEncodeError:
            longest = int(np.strings.str_len(texts.astype(str)).max())
        widths.append(max(len(h), longest))
    return coded, widths, [k in ("text", "date") for k in kinds]


def _plain_heading(headings: list[str], widths: list[int], left: list[bool], out: TextIO) -> None:
    def line(values: list[str]) -> str:
        return "  ".join(v.ljust(w) if lft else v.rjust(w) for v, w, lft in zip(values, widths, left)).rstrip()

    out.write(line(headings) + "\n" + line(["-" * w for w in widths]) + "\n")


def _plain_rows(coded: list, widths: list[int], left: list[bool], n: int, out: TextIO) -> None:
    if not coded:
        out.write("\n" * n)
        return
    try:
        cells = [_plain_cells(texts, w, lft, narrow)
                 for (codes, texts, narrow), w, lft in zip(coded, widths, left)]
    except ValueError:  # a text Python's rstrip would treat otherwise than bytes (NUL, other blanks)
        _plain_rows_as_strings(coded, widths, left, n, out)
        return
    # a line ends in spaces only where its last cell may: left-aligned, or an empty or blank-ended text
    last = coded[-1][1].tolist()
    strip = left[-1] or any(t[-1:] in ("", " ") for t in last)
    # ASCII cells are padded to their width with spaces (no holes): unless line ends are stripped, the
    # lines are the matrix's bytes as they are
    holes = strip or not all(m.all() for m in cells)
    widened: dict = {}  # the cells widened for gathering, made once (``text_rows.place_cells``)
    for a in range(0, n, BLOCK_ROWS):
        lines = line_matrix([(m, codes[a:a + BLOCK_ROWS]) for (codes, *_), m in zip(coded, cells)], sep=b"  ",
                            widened=widened)
        if holes:
            _write_bytes(out, compact(strip_line_ends(lines) if strip else lines))
        else:
            _write_bytes(out, memoryview(lines).cast("B"))


def _plain_cells(texts: np.ndarray, width: int, left: bool, narrow: np.ndarray | None = None) -> np.ndarray:
    """Each distinct text of a column padded with spaces to ``width`` characters (left- or
    right-aligned), as a byte matrix with holes (``core.text_rows``). ``narrow``: the texts as a
    numpy bytes array when they are ASCII (``_plain_coded``).

    Raises ValueError for a text with a NUL or ending in a blank other than a space.
    """
    listed = texts.tolist()
    if left and any(t.rstrip(" ") != t.rstrip() for t in listed):  # (right-aligned: our own number texts)
        raise ValueError("a text ends in a blank other than a space")
    if "\0" in "".join(listed):  # numpy's strings would drop a trailing one
        raise ValueError("a text cell holds a NUL character")
    if narrow is not None:  # ASCII: every cell exactly ``width`` bytes, no holes
        narrow = np.strings.ljust(narrow, width) if left else np.strings.rjust(narrow, width)
    else:
        wide = np.array(listed, dtype=str)
        padded = np.strings.ljust(wide, width) if left else np.strings.rjust(wide, width)
    try:
        if narrow is None:
            narrow = padded.astype(bytes)
    except UnicodeEncodeError:
        body = text_bytes(listed)
        short = width - np.char.str_len(wide).astype(np.int64)
        pad = np.where(np.arange(max(width, 0))[None, :] < short[:, None], np.uint8(32), np.uint8(0))
        return np.concatenate([body, pad] if left else [pad, body], axis=1)
    if narrow.dtype.itemsize == 0 or width == 0:
        return np.zeros((len(listed), 0), dtype=np.uint8)
    cells = narrow.view(np.uint8).reshape(len(listed), narrow.dtype.itemsize)
    if cells.shape[1] != width or not cells.all():
        raise ValueError("a text cell holds a NUL character")
    return cells


def _plain_rows_as_strings(coded: list, widths: list[int], left: list[bool], n: int, out: TextIO) -> None:
    padded = [(codes, np.array([t.ljust(w) if lft else t.rjust(w) for t in texts], dtype=object))
              for (codes, texts, _), w, lft in zip(coded, widths, left)]
    for a in range(0, n, BLOCK_ROWS):
        block = [texts[codes[a:a + BLOCK_ROWS]].tolist() for codes, texts in padded]
        out.write("\n".join(r.rstrip() for r in map("  ".join, zip(*block))) + "\n")


def to_plain(frame: pd.DataFrame) -> str:
    """``write_plain`` as a string."""
    buf = io.StringIO()
    write_plain(frame, buf)
    return buf.getvalue()


def _is_text(s: pd.Series) -> bool:
    """Text cells: object, pandas' ``str``, or a categorical of those (e.g. ``as_of``)."""
    dtype = s.dtype
    if isinstance(dtype, pd.CategoricalDtype):
        dtype = dtype.categories.dtype
    return dtype == object or isinstance(dtype, pd.StringDtype)


def _once_per_value(s: pd.Series, fn) -> np.ndarray:
    """``fn`` of every cell (object array), computed once per distinct value."""
    codes, uniq = pd.factorize(s, use_na_sentinel=False)
    if len(s) == 0:
        return np.empty(0, dtype=object)
    return np.array([fn(u) for u in uniq], dtype=object)[codes]


def _csv_cell_text(v: object) -> str:
    """One text cell for csv: control characters escaped, formula prefixes neutralised, quoted when needed."""
    if not isinstance(v, str):
        return _csv_scalar(v)
    text = neutralise_formula(plain(v))
    if any(ch in text for ch in ',"\n\r'):
        text = '"' + text.replace('"', '""') + '"'
    return text


def _csv_scalar(v: object) -> str:
    if v is None or v is pd.NaT:
        return ""
    if isinstance(v, pd.Timestamp):
        return f"{v:%Y-%m-%d}"
    if isinstance(v, (bool, np.bool_)):
        return "True" if v else "False"
    if isinstance(v, (float, np.floating)):
        return "" if math.isnan(v) else "%.10g" % v
    return str(v)


#: Rows per block of csv lines (at most ``BLOCK_ROWS``): a block's numbers, their text, cells and lines (~5 MB at 40 columns)
#: are memory reused from block to block, and fresh memory's first touch costs page faults.
CSV_BLOCK_ROWS = 4096

#: Significant digits of decimals in csv (printf ``%.10g``).
CSV_PRECISION = 10


def _csv_column(s: pd.Series) -> np.ndarray:
    """One column's csv cells as strings (object array), each text computed once per distinct value."""
    if pd.api.types.is_float_dtype(s.dtype):
        x = s.to_numpy(dtype=float, na_value=np.nan)
        codes, uniq = pd.factorize(x, use_na_sentinel=False)
        texts = np.array(["" if math.isnan(u) else "%.10g" % u for u in uniq.tolist()], dtype=object)
        return texts[codes] if len(x) else np.empty(0, dtype=object)
    if _is_text(s):
        return _once_per_value(s.astype(object), _csv_cell_text)
    return _once_per_value(s, _csv_scalar)


def _coded_cells(s: pd.Series, fn) -> tuple[np.ndarray, np.ndarray]:
    """(codes, matrix): ``fn`` of each distinct value of a column as UTF-8 bytes (``core.text_rows``),
    ``matrix[codes]`` being the column's cells."""
    codes, uniq = _factorized(s)
    return codes, text_bytes([fn(u) for u in uniq])


def _factorized(s: pd.Series) -> tuple[np.ndarray, object]:
    """``pd.factorize`` of a column (missing values a value of their own), text as Python objects.

    A text column whose missing value is NaN (pandas' ``str``) is factorized as it is, a few times
    faster than as objects and with the same codes and values; a categorical by its codes (the categories
    present, in their order, then a missing value; an unused category would widen a plain column); other
    text columns as objects."""
    if isinstance(s.dtype, pd.CategoricalDtype):
        values = np.array([*s.cat.categories.to_numpy(dtype=object), np.nan], dtype=object)
        codes = s.cat.codes.to_numpy().astype(np.intp) % values.size  # -1 (missing): the last value
        present = np.flatnonzero(np.bincount(codes, minlength=values.size)) if codes.size else codes
        if present.size < values.size:  # only the values met, numbered anew
            renumber = np.zeros(values.size, dtype=np.intp)
            renumber[present] = np.arange(present.size)
            codes, values = renumber[codes], values[present]
        return codes, values.tolist()
    if _is_text(s) and not _nan_missing_text(s.dtype):
        s = s.astype(object)
    return pd.factorize(s, use_na_sentinel=False)


def _nan_missing_text(dtype) -> bool:
    na = getattr(dtype, "na_value", None)
    return isinstance(dtype, pd.StringDtype) and isinstance(na, float) and math.isnan(na)


def _csv_lines(frame: pd.DataFrame, out: TextIO, late: LateColumns | None = None) -> None:
    """The csv lines of ``frame`` (no heading), block by block: the decimals of a block formatted at
    once (``core.number_text``, ``%.10g``, NaN empty), other cells once per distinct value. ``late``:
    decimal columns whose values are asked for a block at a time (``LateColumns.rows``)."""
    floats = [j for j in range(frame.shape[1]) if pd.api.types.is_float_dtype(frame.dtypes.iloc[j])]
    late_values = late.rows(0) if late is not None else {}
    numbers = [late_values[frame.columns[j]] if frame.columns[j] in late_values
               else frame.iloc[:, j].to_numpy(dtype=float, na_value=np.nan) for j in floats]
    slot = {j: i for i, j in enumerate(floats)}
    coded = {j: _coded_cells(frame.iloc[:, j], _csv_cell_text if _is_text(frame.iloc[:, j]) else _csv_scalar)
             for j in range(frame.shape[1]) if j not in slot}
    # memory reused from block to block (fresh memory costs the kernel's page faults): the decimals'
    # text by byte position, and the lines
    step = min(BLOCK_ROWS, CSV_BLOCK_ROWS)
    rows_max = min(step, len(frame))
    width = 2 * CSV_PRECISION + 10
    text_room = np.empty((width, len(floats) * rows_max), dtype=np.uint8)
    number_room = np.empty(len(floats) * rows_max)
    cell_room = np.empty(width * len(floats) * rows_max, dtype=np.uint8)  # the decimals' cells, (row, byte)
    line_room, line_bytes = np.empty(0, dtype=np.uint8), bytearray()  # line_room: a view of line_bytes
    widened: dict = {}  # text cells widened for gathering (``text_rows.place_cells``), made once
    for a in range(0, len(frame), step):
        rows = min(step, len(frame) - a)
        if late is not None:  # the late values of this block's rows (the arrays in ``numbers`` filled)
            late.rows(a + rows)
        # one call for every decimal of the block, column after column (columns all missing left out)
        filled = [i for i, x in enumerate(numbers) if not np.isnan(x[a:a + rows]).all()]
        place = {i: k for k, i in enumerate(filled)}
        if filled:
            block = number_room[:len(filled) * rows].reshape(len(filled), rows)
            for k, i in enumerate(filled):
                block[k] = numbers[i][a:a + rows]
            text = text_room[:, :block.size]
            general_bytes(block.ravel(), CSV_PRECISION, nan="", trim=False, out=text)
            in_use = text.reshape(text.shape[0], len(filled), rows).any(axis=2)  # (byte position, column)
        cells = []
        for j in range(frame.shape[1]):
            if j in slot:
                if slot[j] not in place:
                    cells.append(np.zeros((rows, 0), dtype=np.uint8))
                    continue
                k = place[slot[j]]
                # the byte positions in use, turned to (row, byte position) in reused memory a position at
                # a time (numpy's 2-d transposing copy runs its inner loop over the few positions: ~3x slower)
                bp = text[:, k * rows:(k + 1) * rows]
                used = np.flatnonzero(in_use[:, k]).tolist()
                cell = cell_room[k * rows * width:(k * width + len(used)) * rows].reshape(rows, len(used))
                for q, i in enumerate(used):
                    cell[:, q] = bp[i]
                cells.append(cell)
            else:
                codes, matrix = coded[j]
                cells.append((matrix, codes[a:a + rows]))
        lines = line_matrix(cells, room=line_room, widened=widened)
        if lines.base is None:  # did not fit (the first block): room for somewhat wider lines kept
            size = lines.size
            _write_bytes(out, compact(lines))
            del lines, cells  # before the room is made
            line_bytes = bytearray(size + size // 4)
            line_room = np.frombuffer(line_bytes, dtype=np.uint8)
        else:  # compacted where it lies (no copy first); bytes past the lines made holes
            line_room[lines.size:] = 0
            _write_bytes(out, line_bytes.translate(None, b"\0"))


def _write_bytes(out: TextIO, data) -> None:
    """UTF-8 text given as bytes (or a byte buffer) to ``out``: through its ``write_bytes`` where it
    has one (stdout, see ``common.StdoutWriter``), else decoded."""
    put = getattr(out, "write_bytes", None)
    if put is None:
        out.write(bytes(data).decode("utf-8"))
    else:
        put(data)


def _csv_header(name: object) -> str:
    return _csv_cell_text(str(name))


def write_csv(frame: pd.DataFrame, out: TextIO, header: bool = True, late: LateColumns | None = None) -> None:
    """CSV with decimals to 10 significant digits, missing values empty, dates as YYYY-MM-DD.

    Text cells are escaped and neutralised (``_safe_text_cells``), then quoted
    where they hold a comma, quote or line break. ``late``: decimal columns
    whose values come later (``LateColumns``), taken a block at a time.
    """
    if late is not None and not all(pd.api.types.is_float_dtype(frame[n].dtype)
                                    for n in late.names if n in frame.columns):
        frame, late = with_late(frame, late), None
    if header:
        out.write(",".join(_csv_header(c) for c in frame.columns) + "\n")
    if frame.shape[1] == 0:
        with_late(frame, late)  # asked for all the same: whoever computes them finishes
        out.write("\n" * len(frame))
        return
    try:
        _csv_lines(frame, out, late)
    except ValueError:  # a cell's text holds a NUL character (``text_bytes``): string by string
        frame = with_late(frame, late)
        for a in range(0, len(frame), BLOCK_ROWS):
            block = frame.iloc[a:a + BLOCK_ROWS]
            cols = [_csv_column(block.iloc[:, j]).tolist() for j in range(block.shape[1])]
            out.write("\n".join(map(",".join, zip(*cols))) + "\n")


def _json_scalar(v: object) -> str:
    if v is None or v is pd.NaT:
        return "null"
    if isinstance(v, pd.Timestamp):
        return f'"{v:%Y-%m-%d}"'
    if hasattr(v, "item"):
        v = v.item()
    if isinstance(v, float) and not math.isfinite(v):
        return "null"
    return json.dumps(v)


def _json_column(s: pd.Series) -> np.ndarray:
    if pd.api.types.is_float_dtype(s.dtype):
        x = s.to_numpy(dtype=float, na_value=np.nan)
        codes, uniq = pd.factorize(x, use_na_sentinel=False)
        texts = np.array([float.__repr__(u) if math.isfinite(u) else "null" for u in uniq.tolist()], dtype=object)
        return texts[codes] if len(x) else np.empty(0, dtype=object)
    return _once_per_value(s.astype(object) if _is_text(s) else s, _json_scalar)


def write_json(frame: pd.DataFrame, out: TextIO) -> None:
    """Records as JSON: decimals as numbers, missing values as null, dates as YYYY-MM-DD.

    Written block by block, laid out as ``json.dumps(records, indent=1)`` would.
    """
    if len(frame) == 0:
        out.write("[]\n")
        return
    out.write("[\n")
    _json_records(frame, out, first=True)
    out.write("\n]\n")


def _json_records(frame: pd.DataFrame, out: TextIO, first: bool, late: LateColumns | None = None) -> None:
    """The records of ``frame``, comma-separated (a leading comma unless ``first``). ``late``: decimal
    columns whose values are asked for a block at a time (``LateColumns.rows``)."""
    if late is not None and (frame.shape[1] == 0 or not all(
            pd.api.types.is_float_dtype(frame[n].dtype) for n in late.names if n in frame.columns)):
        frame, late = with_late(frame, late), None
    if frame.shape[1] == 0:
        for a in range(0, len(frame), BLOCK_ROWS):
            rows = [" {}"] * len(frame.iloc[a:a + BLOCK_ROWS])
            out.write(("" if a == 0 and first else ",\n") + ",\n".join(rows))
        return
    floats = [pd.api.types.is_float_dtype(t) for t in frame.dtypes]
    keys = [np.frombuffer(((" {\n" if j == 0 else ",\n") + "  " + json.dumps(str(c)) + ": ").encode("ascii"),
                          dtype=np.uint8) for j, c in enumerate(frame.columns)]
    try:  # other cells once per distinct value of the whole table; decimals (mostly distinct) per block
        coded = {j: _json_cells(frame.iloc[:, j]) for j in range(frame.shape[1]) if not floats[j]}
        late_values = late.rows(0) if late is not None else {}
        later = {j: late_values[c] for j, c in enumerate(frame.columns) if c in late_values}
        for a in range(0, len(frame), BLOCK_ROWS):
            block = frame.iloc[a:a + BLOCK_ROWS]
            if later:  # the late values of this block's rows (the arrays in ``later`` filled)
                late.rows(a + len(block))
            cells = []
            for j in range(frame.shape[1]):
                if j in later:
                    codes, matrix = _json_cells(pd.Series(later[j][a:a + len(block)]))
                else:
                    codes, matrix = coded[j] if j in coded else _json_cells(block.iloc[:, j])
                cells += [np.broadcast_to(keys[j], (len(block), keys[j].size)),
                          (matrix, codes[a:a + len(block)] if j in coded else codes)]
            lines = line_matrix(cells, sep=b"", end=b"\n },\n")
            if not (a == 0 and first):
                out.write(",\n")
            _write_bytes(out, compact(lines)[:-2])  # records joined by ",\n"
    except ValueError:  # a text with a NUL character (``text_bytes``): string by string
        _json_records_as_strings(with_late(frame, late), out, first)


def _json_cells(s: pd.Series) -> tuple[np.ndarray, np.ndarray]:
    """(codes, matrix): the JSON text of each distinct value of a column as a byte matrix
    (``core.text_rows``), ``matrix[codes]`` being the column's cells."""
    if pd.api.types.is_float_dtype(s.dtype):
        x = s.to_numpy(dtype=float, na_value=np.nan)
        codes, uniq = pd.factorize(x, use_na_sentinel=False)
        finite = np.isfinite(uniq)
        texts = np.full(len(uniq), "null", dtype=object)
        texts[finite] = list(map(float.__repr__, uniq[finite].tolist()))  # Python's shortest round-trip text
        texts = texts.tolist()
        negative_zero = (x == 0) & np.signbit(x)  # factorize takes -0.0 for 0.0
        if negative_zero.any():
            codes = np.where(negative_zero, len(texts), codes)
            texts.append("-0.0")
    else:
        codes, uniq = _factorized(s)
        texts = [_json_scalar(u) for u in uniq]
    return codes, text_bytes(texts)


def _json_records_as_strings(frame: pd.DataFrame, out: TextIO, first: bool) -> None:
    keys = ['  ' + json.dumps(str(c)) + ": " for c in frame.columns]
    for a in range(0, len(frame), BLOCK_ROWS):
        block = frame.iloc[a:a + BLOCK_ROWS]
        cols = [(keys[j] + _json_column(block.iloc[:, j])).tolist() for j in range(block.shape[1])]
        rows = [" {\n" + r + "\n }" for r in map(",\n".join, zip(*cols))]
        out.write(("" if a == 0 and first else ",\n") + ",\n".join(rows))


def to_json(frame: pd.DataFrame) -> str:
    """``write_json`` as a string."""
    buf = io.StringIO()
    write_json(frame, buf)
    return buf.getvalue()


def _safe_text_cells(frame: pd.DataFrame) -> pd.DataFrame:
    """A copy whose text cells are safe for a terminal and a spreadsheet (numbers untouched)."""
    out = frame.copy()
    for col in out.columns:
        if _is_text(out[col]):
            out[col] = _once_per_value(out[col].astype(object),
                                       lambda v: neutralise_formula(plain(v)) if isinstance(v, str) else v)
    return out


def to_csv(frame: pd.DataFrame) -> str:
    """``write_csv`` as a string."""
    buf = io.StringIO()
    write_csv(frame, buf)
    return buf.getvalue()


_WRITERS = {"csv": write_csv, "json": write_json, "plain": write_plain}


#: Rows plain output keeps to size its columns to every one of them; past them it streams (``TableStream``).
PLAIN_WIDTH_ROWS = 200_000


class TableStream:
    """One table written piece by piece: csv and json go out as each piece comes (memory: one piece).

    plain keeps the pieces while they hold at most ``PLAIN_WIDTH_ROWS`` rows
    and writes them at ``close``, its columns as wide as their widest cell:
    the text then equals ``write(pd.concat(pieces), fmt)``. Past that many
    rows, the kept rows are written with their widths and each later piece
    as it comes, its columns widened (never narrowed) where one of its cells
    is wider than the column so far, so rows before a widening keep the
    narrower layout (memory: one piece, whatever the table's size).
    """

    def __init__(self, fmt: str, out: TextIO | None = None) -> None:
        self.fmt = fmt if fmt in _WRITERS else "plain"
        self.out = out or sys.stdout
        self.rows = 0
        self.pieces = 0
        self._kept: list[tuple[pd.DataFrame, LateColumns | None]] = []
        self._kept_rows = 0
        self._widths: list[int] | None = None  # plain, once streaming: the widths so far

    def write(self, frame: pd.DataFrame, late: LateColumns | None = None) -> None:
        """Add rows (every piece has the same columns). ``late``: decimal columns of ``frame`` whose
        values come later (``LateColumns``): csv and json ask for them a block at a time, plain once
        its other columns are coded (when the table is written)."""
        if self.fmt == "plain":
            if self._widths is not None:
                self._plain_piece(with_late(frame, late))
            else:
                self._kept.append((frame, late))
                self._kept_rows += len(frame)
                if self._kept_rows > PLAIN_WIDTH_ROWS:
                    self._flush_kept()
        elif self.fmt == "csv":
            write_csv(frame, self.out, header=self.pieces == 0, late=late)
        elif len(frame):
            if self.rows == 0:
                self.out.write("[\n")
            _json_records(frame, self.out, first=self.rows == 0, late=late)
        self.rows += len(frame)
        self.pieces += 1

    def _flush_kept(self) -> None:
        """The kept rows written (heading first); from here on plain streams."""
        kept, late = self._kept_frame()
        headings, _ = _plain_kinds(kept)
        coded, widths, left = _plain_coded(kept, late)
        _plain_heading(headings, widths, left, self.out)
        _plain_rows(coded, widths, left, len(kept), self.out)
        self._widths = widths

    def _kept_frame(self) -> tuple[pd.DataFrame, LateColumns | None]:
        """The kept pieces as one frame (forgotten here), and the late columns of a lone piece (several
        pieces get their late values first)."""
        kept, self._kept = self._kept, []
        if len(kept) == 1:
            return kept[0]
        return pd.concat([with_late(frame, late) for frame, late in kept], ignore_index=True), None

    def _plain_piece(self, frame: pd.DataFrame) -> None:
        coded, widths, left = _plain_coded(frame)
        self._widths = [max(a, b) for a, b in zip(self._widths, widths)]
        _plain_rows(coded, self._widths, left, len(frame), self.out)

    def close(self) -> None:
        """Finish the table."""
        if self.fmt == "plain":
            if self._kept:
                frame, late = self._kept_frame()
                write_plain(frame, self.out, late)
        elif self.fmt == "json":
            self.out.write("[]\n" if self.rows == 0 else "\n]\n")


def write(frame: pd.DataFrame, fmt: str, out: TextIO | None = None) -> None:
    """Write the table in one of 'plain', 'csv', 'json' to ``out`` (default stdout), block by block."""
    _WRITERS.get(fmt, write_plain)(frame, out or sys.stdout)


def render(frame: pd.DataFrame, fmt: str) -> str:
    """The table in one of 'plain', 'csv', 'json', as one string."""
    buf = io.StringIO()
    write(frame, fmt, buf)
    return buf.getvalue()
