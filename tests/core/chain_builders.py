"""Test chains priced from a known model, built straight into a Snapshot.

Prices come from QuantLib's ``blackFormula`` (a test-only oracle) so the
pipeline under test never prices its own inputs. Quotes are symmetric around
the model price, so the mid equals the model price exactly.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import QuantLib as ql

from chaintriage.core.snapshot import CONTRACT_COLUMNS, Snapshot
from chaintriage.core.time_to_expiry import year_fraction

AS_OF = pd.Timestamp("2026-12-01 14:30", tz="America/New_York")


def ql_black(forward: float, strike: float, sigma: float, t: float, discount: float, is_call: bool) -> float:
    """Discounted Black-76 price from QuantLib."""
    kind = ql.Option.Call if is_call else ql.Option.Put
    return ql.blackFormula(kind, strike, forward, sigma * np.sqrt(t), discount)


def year_fractions(expiries: list[str], basis: str = "365") -> np.ndarray:
    """Years from AS_OF to each PM-settled expiry on the given basis."""
    return year_fraction(AS_OF, pd.DatetimeIndex(expiries), "pm", basis=basis)


def build_snapshot(
    expiries: list[str],
    strikes_by_expiry: list[np.ndarray],
    call_price,
    put_price,
    *,
    spot: float,
    half_spread: float = 0.005,
    underlying: str = "TSTX",
    rate: float = np.nan,
    div_yield: float = np.nan,
) -> Snapshot:
    """A Snapshot whose mids equal ``call_price(i, K)`` / ``put_price(i, K)`` for expiry i.

    Contracts whose model price is below 2 * half_spread get a zero bid.
    """
    rows = []
    line = 2
    for i, (expiry, strikes) in enumerate(zip(expiries, strikes_by_expiry)):
        for strike in strikes:
            for kind, fn in (("call", call_price), ("put", put_price)):
                p = float(fn(i, float(strike)))
                hs = min(half_spread, p)
                rows.append({
                    "expiry": pd.Timestamp(expiry), "strike": float(strike), "kind": kind,
                    "bid": p - hs, "ask": p + hs, "iv": np.nan, "iv_basis": "", "volume": 100.0,
                    "open_interest": 1000.0, "settle": "pm", "rate": rate, "div_yield": div_yield,
                    "source_file": "model.csv", "source_line": line,
                })
                line += 1
    frame = pd.DataFrame(rows, columns=list(CONTRACT_COLUMNS))
    return Snapshot(underlying=underlying, as_of=AS_OF, spot=spot, contracts=frame, sources=("model.csv",))


def write_flat_chain_csv(
    path,
    expiries: list[str],
    strike_step: float,
    *,
    vol: float,
    spot: float,
    half_spread: float = 0.005,
    underlying: str = "FLTX",
):
    """Write a one-vol chain (strikes 30-75, forward growth 3%, discounting 4%, ACT/365) as a snapshot CSV.

    Returns (path, year fractions, forwards) so tests can rebuild the exact model values.
    """
    ts = year_fractions(expiries, basis="365")
    fwd = spot * np.exp(0.03 * ts)
    dfs = np.exp(-0.04 * ts)
    strikes = [np.arange(30.0, 75.1, strike_step)] * len(expiries)
    snap = build_snapshot(
        expiries, strikes,
        lambda i, k: ql_black(fwd[i], k, vol, ts[i], dfs[i], True),
        lambda i, k: ql_black(fwd[i], k, vol, ts[i], dfs[i], False), spot=spot, half_spread=half_spread)
    frame = snap.contracts.drop(columns=["source_file", "source_line", "iv", "iv_basis"])
    frame.insert(0, "underlying", underlying)
    frame.insert(1, "as_of", AS_OF.isoformat())
    frame.insert(2, "spot", spot)
    frame["expiry"] = frame["expiry"].dt.strftime("%Y-%m-%d")
    frame.to_csv(path, index=False, float_format="%.12g")
    return path, ts, fwd
