"""Make the fictional daily price histories of the demo underlyings (deterministic).

    python -m chaintriage.demo_chains.make_demo_history [--out DIR]

writes, by default into this package's ``history/`` folder, one file per demo
underlying of ``make_demo`` (TSBH and OSPX, invented companies):
``tsbh_history.csv`` and ``ospx_history.csv``, daily bars for every US
exchange trading day from 2022-12-01 to 2026-11-30, the last trading day
before the snapshots (2026-12-01, mid-session). The last close equals the
snapshot's spot. Prices are taken to be adjusted for splits and dividends.

How the bars are made
---------------------
- Daily variance follows GARCH(1,1): v_t = omega + alpha e_{t-1}^2 + beta v_{t-1}
  with alpha = 0.06, beta = 0.92 and omega set so the long-run vol is
  ``long_vol`` (TSBH 21%, OSPX 40% a year on 252 days; below the chains'
  implied vols, as is usual).
- A day is an overnight move (``night_share`` of the day's variance) and a
  session of 39 ten-minute steps of Brownian motion; the high and low are the
  extremes of those steps, open and close included.
- OSPX has quarterly earnings after the close on Tuesdays 13 weeks apart,
  counting back from the fictional release of 2027-01-12 that the chain
  prices; the next open gaps by a normal move with sd ``event_move`` (9.5%, the
  square root of the chain's earnings variance 0.009).
- The whole path is shifted (a constant factor, which leaves every return as
  it is) so the last close is the spot; prices are rounded to the cent, the
  high up and the low down. Volume: lognormal around ``volume`` shares, three
  times higher on event days.

Columns: underlying, date, open, high, low, close, volume.
"""

from __future__ import annotations

import argparse
import datetime as dt
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from chaintriage.core.exchange_calendar import ExchangeCalendar
from chaintriage.demo_chains.make_demo import OSPX, TSBH, Underlying

FIRST_DAY = dt.date(2022, 12, 1)
LAST_DAY = dt.date(2026, 11, 30)
STEPS = 39
HISTORY_DIR = "history"


@dataclass(frozen=True)
class HistoryStyle:
    underlying: Underlying
    long_vol: float
    night_share: float
    volume: float
    seed: int
    event_move: float = 0.0
    next_event: dt.date | None = None  # the chain's coming release (after the close); past ones every 13 weeks


STYLES = (
    HistoryStyle(TSBH, long_vol=0.21, night_share=0.20, volume=850_000, seed=20221201),
    HistoryStyle(OSPX, long_vol=0.40, night_share=0.25, volume=3_600_000, seed=20221202,
                 event_move=math.sqrt(OSPX.earnings_jump), next_event=OSPX.earnings.date()),
)


def file_name(style: HistoryStyle) -> str:
    return f"{style.underlying.ticker.lower()}_history.csv"


def trading_days() -> np.ndarray:
    days = np.arange(np.datetime64(FIRST_DAY), np.datetime64(LAST_DAY) + 1)
    return days[ExchangeCalendar().is_trading_day(days)]


def event_days(style: HistoryStyle, days: np.ndarray) -> np.ndarray:
    """Bool per day: the open after a past release (releases after the close, every 13 weeks back)."""
    out = np.zeros(days.size, dtype=bool)
    if style.next_event is None:
        return out
    release = np.datetime64(style.next_event) - np.arange(1, 40) * 91
    for r in release:  # a few dozen dates
        after = np.searchsorted(days, r, side="right")
        if after < days.size and r >= days[0]:
            out[after] = True
    return out


def history_text(style: HistoryStyle) -> str:
    rng = np.random.default_rng(style.seed)
    days = trading_days()
    n = days.size
    events = event_days(style, days)
    alpha, beta = 0.06, 0.92
    v_long = style.long_vol**2 / 252
    omega = (1 - alpha - beta) * v_long
    z = rng.standard_normal((n, STEPS + 1))
    jump = style.event_move * rng.standard_normal(n) * events
    v = np.empty(n)
    ordinary = np.empty(n)  # the day's return without the event gap: it drives the GARCH recursion
    e_prev, v_prev = 0.0, v_long
    for i in range(n):  # the recursion runs over days (a generator, not a hot path)
        v[i] = omega + alpha * e_prev**2 + beta * v_prev
        ordinary[i] = math.sqrt(v[i]) * (z[i, 0] * math.sqrt(style.night_share)
                                         + z[i, 1:].sum() * math.sqrt((1 - style.night_share) / STEPS))
        e_prev, v_prev = ordinary[i], v[i]
    session = z[:, 1:] * np.sqrt((1 - style.night_share) * v / STEPS)[:, None]
    day_ret = ordinary + jump
    log_close = np.cumsum(day_ret)
    log_open = log_close - session.sum(axis=1)
    inside = log_open[:, None] + np.cumsum(session, axis=1)
    log_high = np.maximum(inside.max(axis=1), log_open)
    log_low = np.minimum(inside.min(axis=1), log_open)
    shift = math.log(style.underlying.spot) - log_close[-1]
    o, h, lo, c = (np.exp(x + shift) for x in (log_open, log_high, log_low, log_close))
    o, c = np.round(o, 2), np.round(c, 2)
    h = np.maximum(np.ceil(h * 100 - 1e-9) / 100, np.maximum(o, c))
    lo = np.minimum(np.floor(lo * 100 + 1e-9) / 100, np.minimum(o, c))
    vol = np.round(style.volume * np.exp(0.35 * rng.standard_normal(n)) * np.where(events, 3.0, 1.0), -2)
    lines = ["underlying,date,open,high,low,close,volume"]
    t = style.underlying.ticker
    for i in range(n):
        lines.append(f"{t},{days[i]},{o[i]:.2f},{h[i]:.2f},{lo[i]:.2f},{c[i]:.2f},{int(vol[i])}")
    return "\n".join(lines) + "\n"


def write_histories(out_dir: Path | str) -> list[Path]:
    """Write the demo histories into ``out_dir`` (created if needed); return their paths."""
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    written = []
    for style in STYLES:
        p = out / file_name(style)
        p.write_bytes(history_text(style).encode("utf-8"))
        written.append(p)
    return written


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description="Write the fictional demo price histories.")
    ap.add_argument("--out", default=str(Path(__file__).resolve().parent / HISTORY_DIR), help="output folder")
    args = ap.parse_args(argv)
    for p in write_histories(args.out):
        print(p)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
