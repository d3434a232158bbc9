"""Writing the core tables for scripts and terminals: plain, csv, json.

csv and json carry raw decimals (probabilities 0..1, vols as decimals);
plain is a fixed-width table for reading, with percentages. Text from files
is printed as text: control characters are replaced, nothing is markup.
"""

from __future__ import annotations

import io
import json
import math

import pandas as pd

from chaintriage.tui.cli_common import plain

#: How plain output shows each known column: (heading, formatter name).
_PLAIN = {
    "underlying": ("underlying", "text"),
    "expiry": ("expiry", "date"),
    "strike": ("strike", "price"),
    "kind": ("kind", "text"),
    "bid": ("bid", "price"),
    "ask": ("ask", "price"),
    "mid": ("mid", "price"),
    "iv": ("iv", "pct"),
    "sigma_distance": ("sigma", "signed"),
    "p_beyond": ("P(beyond)", "pct"),
    "p_beyond_flat": ("P(beyond) flat", "pct"),
    "p_touch": ("P(touch)", "pct"),
    "delta": ("delta", "signed3"),
    "breakeven": ("breakeven", "price"),
    "p_breakeven": ("P(breakeven)", "pct"),
    "spread_pct": ("spread", "pct"),
    "flags": ("flags", "text"),
    "volume": ("volume", "int"),
    "open_interest": ("open int", "int"),
    "t_years": ("years", "f4"),
    "trading_days": ("tdays", "int"),
    "calendar_days": ("cdays", "int"),
    "forward": ("forward", "price"),
    "discount": ("discount", "f6"),
    "forward_method": ("fwd from", "text"),
    "atm_iv": ("atm iv", "pct"),
    "range_low": ("range low", "price"),
    "range_high": ("range high", "price"),
    "range_low_smile": ("smile low", "price"),
    "range_high_smile": ("smile high", "price"),
    "fit_rmse": ("fit rmse", "pct2"),
    "fit_method": ("fit", "text"),
    "arbitrage_free": ("arb-free", "bool"),
    "contracts": ("contracts", "int"),
    "findings": ("findings", "int"),
    "days": ("days", "g"),
    "as_of": ("as of", "text"),
}

MISSING = "--"


def _fmt(value: object, kind: str) -> str:
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return MISSING
    if kind == "text":
        return plain(value) if value != "" else ""
    if kind == "date":
        return f"{pd.Timestamp(value):%Y-%m-%d}"
    if kind == "bool":
        return "yes" if bool(value) else "no"
    try:
        x = float(value)
    except (TypeError, ValueError):
        return plain(value)
    if not math.isfinite(x):
        return MISSING
    if kind == "price":
        return f"{x:,.4f}" if 0 < abs(x) < 0.01 else f"{x:,.2f}"
    if kind == "pct":
        return f"{100 * x:.1f}%"
    if kind == "pct2":
        return f"{100 * x:.2f}"
    if kind == "signed":
        return f"{x:+.2f}"
    if kind == "signed3":
        return f"{x:+.3f}"
    if kind == "int":
        return f"{x:,.0f}"
    if kind == "g":
        return f"{x:g}"
    if kind == "f4":
        return f"{x:.4f}"
    if kind == "f6":
        return f"{x:.6f}"
    return plain(value)


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


def to_csv(frame: pd.DataFrame) -> str:
    """CSV with decimals at full precision, missing values empty, dates as YYYY-MM-DD."""
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
