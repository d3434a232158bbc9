"""Writing the core tables for scripts and terminals: plain, csv, json.

csv and json carry raw decimals (probabilities 0..1, vols as decimals);
plain is a fixed-width table for reading, with percentages. Text from files
is printed as text: control characters are replaced, nothing is markup. In
csv, text cells also have control characters escaped, and a text cell that
starts with = + - @ tab, carriage return or NUL gets a leading single quote
so a spreadsheet does not run it as a formula (OWASP CSV injection guidance,
``shortlist.neutralise_formula``); numbers stay numbers. json escapes every
non-ASCII and control character.
"""

from __future__ import annotations

import io
import json
import math

import pandas as pd

from chaintriage.tui.cli.common import one_line, plain
from chaintriage.tui.shortlist import neutralise_formula
from chaintriage.tui.formatting import (
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
    placeholder,
    signed,
)

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


def to_plain(frame: pd.DataFrame) -> str:
    """A fixed-width, right-aligned (text left-aligned) table for reading."""
    cols = list(frame.columns)
    headings = [_PLAIN.get(c, (c, "text"))[0] for c in cols]
    kinds = [_PLAIN.get(c, (c, "text"))[1] for c in cols]
    cells = [[_fmt(v, k) for v, k in zip(row, kinds)] for row in frame.itertuples(index=False, name=None)]
    widths = [max([len(h)] + [len(r[j]) for r in cells]) for j, h in enumerate(headings)]
    left = [k in ("text", "date") for k in kinds]

    def line(values: list[str]) -> str:
        return "  ".join(v.ljust(w) if lft else v.rjust(w) for v, w, lft in zip(values, widths, left)).rstrip()

    out = [line(headings), line(["-" * w for w in widths])]
    out.extend(line(r) for r in cells)
    return "\n".join(out) + "\n"


def _jsonable(frame: pd.DataFrame) -> list[dict]:
    records = []
    for row in frame.to_dict(orient="records"):
        rec = {}
        for key, value in row.items():
            if isinstance(value, pd.Timestamp):
                value = f"{value:%Y-%m-%d}"
            elif isinstance(value, float) and not math.isfinite(value):
                value = None
            elif hasattr(value, "item"):
                value = value.item()
                if isinstance(value, float) and not math.isfinite(value):
                    value = None
            rec[key] = value
        records.append(rec)
    return records


def to_json(frame: pd.DataFrame) -> str:
    """Records as JSON: decimals as numbers, missing values as null, dates as YYYY-MM-DD."""
    return json.dumps(_jsonable(frame), indent=1) + "\n"


def _safe_text_cells(frame: pd.DataFrame) -> pd.DataFrame:
    """A copy whose text cells are safe for a terminal and a spreadsheet (numbers untouched)."""
    out = frame.copy()
    for col in out.columns:
        if out[col].dtype == object or isinstance(out[col].dtype, pd.StringDtype):
            out[col] = [neutralise_formula(plain(v)) if isinstance(v, str) else v for v in out[col]]
    return out


def to_csv(frame: pd.DataFrame) -> str:
    """CSV with decimals at full precision, missing values empty, dates as YYYY-MM-DD.

    Text cells are escaped and neutralised (``_safe_text_cells``).
    """
    frame = _safe_text_cells(frame)
    buf = io.StringIO()
    frame.to_csv(buf, index=False, date_format="%Y-%m-%d", float_format="%.10g", lineterminator="\n")
    return buf.getvalue()


def render(frame: pd.DataFrame, fmt: str) -> str:
    """The table in one of 'plain', 'csv', 'json'."""
    if fmt == "csv":
        return to_csv(frame)
    if fmt == "json":
        return to_json(frame)
    return to_plain(frame)
