"""Benchmark: load_file on a generated 100k-row snapshot CSV (run by hand, not by pytest).

    python tests/bench/bench_loading.py [ROWS]

Prints rows/second for load_file, best of 3, for a plain file and for a file
whose every field is quoted, and the ratio to pandas.read_csv alone on the same
file (the floor: reading every cell as text).
"""

from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

from chaintriage.core.loading import load_file


def make_rows(n: int, seed: int = 7, underlyings: int = 1) -> pd.DataFrame:
    """n contracts of fictional underlyings (U0001, ...), with a few bad rows mixed in."""
    rng = np.random.default_rng(seed)
    expiries = pd.date_range("2026-04-17", periods=40, freq="7D").strftime("%Y-%m-%d").to_numpy()
    per = 2 * 40
    strikes = 50 + 0.5 * (np.arange(n) // per)
    kind = np.where(np.arange(n) % 2 == 0, "call", "put")
    exp = expiries[(np.arange(n) // 2) % 40]
    mid = rng.uniform(0.05, 20.0, n)
    half = rng.uniform(0.01, 0.2, n)
    bid = np.round(mid - half, 2).clip(0)
    ask = np.round(mid + half, 2)
    df = pd.DataFrame({
        "underlying": "QRTZ" if underlyings == 1 else [f"U{i % underlyings:04d}" for i in range(n)],
        "as_of": "2026-04-01T15:30:00-04:00",
        "spot": "100.25",
        "expiry": exp,
        "strike": strikes,
        "kind": kind,
        "bid": bid,
        "ask": ask,
        "iv": np.round(rng.uniform(0.1, 0.9, n), 4),
        "volume": rng.integers(0, 5000, n),
        "open_interest": rng.integers(0, 50000, n),
    })
    df["bid"] = df["bid"].astype(str)
    df.loc[df.index % 997 == 0, "bid"] = "x"  # some rows to leave out
    return df


def best_of(fn, repeat: int = 3) -> float:
    best = float("inf")
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def main() -> None:
    n = int(sys.argv[1]) if len(sys.argv) > 1 else 100_000
    cases = (("plain", 0, 1), ("all fields quoted", 1, 1), ("2000 underlyings", 0, 2000))
    with tempfile.TemporaryDirectory() as tmp:
        for label, quoting, unds in cases:
            df = make_rows(n, underlyings=unds)
            path = Path(tmp) / f"chain_{quoting}_{unds}.csv"
            df.to_csv(path, index=False, quoting=quoting)
            res = load_file(path)
            assert res.rows_read == n, (res.rows_read, n)
            # Nothing dropped silently: every row accepted or left out with a finding of its own.
            left_out_lines = {f.line for f in res.findings if f.severity == "left-out"}
            assert res.rows_accepted + res.rows_left_out == n
            assert len(left_out_lines) == res.rows_left_out, (len(left_out_lines), res.rows_left_out)
            t_load = best_of(lambda: load_file(path))
            t_pd = best_of(lambda: pd.read_csv(path, dtype=str, keep_default_na=False))
            size = path.stat().st_size / 1e6
            print(f"{label}: {n} rows ({size:.1f} MB), accepted {res.rows_accepted}, "
                  f"left out {res.rows_left_out} (each named), "
                  f"{len(res.findings)} findings, {len(res.snapshots)} snapshots")
            print(f"  load_file        best of 3: {t_load:.3f} s = {n / t_load:,.0f} rows/s")
            print(f"  pandas.read_csv  best of 3: {t_pd:.3f} s = {n / t_pd:,.0f} rows/s"
                  f"  (load_file takes {t_load / t_pd:.1f}x)")


if __name__ == "__main__":
    main()
