"""Benchmark: microseconds per expiry for year_fraction (run by hand, not collected by pytest).

    python tests/bench/bench_time_to_expiry.py
"""

from __future__ import annotations

import time

import numpy as np
import pandas as pd

from chaintriage.core.exchange_calendar import ExchangeCalendar
from chaintriage.core.time_to_expiry import BASES, year_fraction


def _per_expiry_us(fn, n: int, repeat: int) -> float:
    best = float("inf")
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t)
    return best / n * 1e6


def main() -> None:
    rng = np.random.default_rng(1)
    as_of = pd.Timestamp("2026-12-01 14:30", tz="America/New_York")
    cal = ExchangeCalendar()
    year_fraction(as_of, ["2026-12-04"], calendar=cal)  # warm the holiday cache
    print(f"{'n':>7} {'basis':>5} {'input':>10} {'us/expiry':>10} {'ms/call':>9}")
    for n in (50, 10_000):
        days = np.datetime64("2026-12-01") + rng.integers(0, 800, n).astype("timedelta64[D]")
        settle = rng.choice(np.array(["pm", "am"], dtype=object), n)
        text = days.astype(str).astype(object)
        repeat = 200 if n == 50 else 20
        for basis in BASES:
            for label, exp in (("datetime64", days), ("text", text)):
                us = _per_expiry_us(lambda: year_fraction(as_of, exp, settle, basis=basis, calendar=cal), n, repeat)
                print(f"{n:>7} {basis:>5} {label:>10} {us:>10.3f} {us * n / 1000:>9.3f}")
    # Cold start: a fresh calendar builds its holiday lists on first use.
    t = time.perf_counter()
    year_fraction(as_of, ["2026-12-04"], calendar=ExchangeCalendar())
    print(f"first call on a fresh calendar (builds holiday cache): {(time.perf_counter() - t) * 1000:.1f} ms")


if __name__ == "__main__":
    main()
