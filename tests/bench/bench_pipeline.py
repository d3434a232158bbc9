"""Benchmark: the whole core pipeline on synthetic chains (run by hand, not by pytest).

    python tests/bench/bench_pipeline.py [--quick]

Prints the warm time of ``annotate`` for a 20,000-contract, 50-expiry chain
and a 200,000-contract chain (cost per contract should stay flat), the time
per stage, and the peak memory of a 100,000-contract run measured in a child
process (ru_maxrss, which includes the interpreter and libraries).
"""

from __future__ import annotations

import argparse
import resource
import subprocess
import sys
import time

import numpy as np
import pandas as pd

from chaintriage.core import black76
from chaintriage.core.pipeline import PipelineSettings, annotate
from chaintriage.core.snapshot import CONTRACT_COLUMNS, Snapshot

AS_OF = pd.Timestamp("2026-12-01 14:30", tz="America/New_York")


def synthetic_snapshot(n_contracts: int, n_expiries: int, seed: int = 1) -> Snapshot:
    """A skewed chain priced with Black-76 from an SSVI surface (benchmark data only).

    SSVI with theta = 0.09 t, phi = 1/sqrt(theta), rho = -0.4 meets Gatheral & Jacquier's
    Theorem 4.2 conditions, so the quotes carry no butterfly arbitrage.
    """
    rng = np.random.default_rng(seed)
    spot = 250.0
    days = np.unique(np.linspace(7, 730, n_expiries).astype(int))
    expiries = pd.bdate_range(AS_OF.date(), periods=800)[days]
    per = n_contracts // (2 * len(expiries))
    rows = []
    for e in expiries:
        t = (e - AS_OF.tz_localize(None)).days / 365.0
        f = spot * np.exp(0.03 * t)
        df = np.exp(-0.04 * t)
        width = 4.0 * 0.3 * np.sqrt(t)
        strikes = np.round(f * np.exp(np.linspace(-width, width, per)), 2)
        k = np.log(strikes / f)
        theta, rho = 0.09 * t, -0.4
        phi = 1.0 / np.sqrt(theta)
        w = 0.5 * theta * (1 + rho * phi * k + np.sqrt((phi * k + rho) ** 2 + 1 - rho * rho))
        vol = np.sqrt(w / t)
        for kind in ("call", "put"):
            p = black76.price(f, strikes, vol, t, df, kind == "call")
            half = 0.01 + 0.02 * p * rng.random(per)
            rows.append(pd.DataFrame({
                "expiry": e, "strike": strikes, "kind": kind, "bid": np.maximum(p - half, 0.0),
                "ask": p + half, "iv": np.nan, "iv_basis": "", "volume": 10.0, "open_interest": 100.0,
                "settle": "pm", "rate": np.nan, "div_yield": np.nan, "source_file": "bench.csv",
            }))
    frame = pd.concat(rows, ignore_index=True)
    frame["source_line"] = np.arange(2, len(frame) + 2)
    frame = frame[list(CONTRACT_COLUMNS)]
    return Snapshot("BNCH", AS_OF, spot, frame, [], ("bench.csv",))


def best_of(fn, repeats: int) -> float:
    best = float("inf")
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def peak_memory_child(n_contracts: int) -> float:
    """Peak resident memory (MB) of a fresh process that builds and annotates the chain."""
    code = (
        "import resource, sys; sys.path.insert(0, %r)\n"
        "from bench_pipeline import synthetic_snapshot\n"
        "from chaintriage.core.pipeline import annotate\n"
        "annotate(synthetic_snapshot(%d, 50))\n"
        "print(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)\n"
    ) % (str(__import__("pathlib").Path(__file__).parent), n_contracts)
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    return int(out.stdout.strip()) / 1024.0


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--quick", action="store_true", help="fewer repeats")
    args = parser.parse_args()
    repeats = 2 if args.quick else 5
    settings = PipelineSettings()

    results = {}
    for n in (20_000, 200_000):
        snap = synthetic_snapshot(n, 50)
        annotate(snap, settings)  # warm: imports, calendar cache
        secs = best_of(lambda: annotate(snap, settings), repeats if n == 20_000 else max(1, repeats // 2))
        results[n] = secs
        print(f"pipeline  {len(snap.contracts):>8,} contracts, 50 expiries: {secs * 1e3:8.1f} ms warm "
              f"({secs / len(snap.contracts) * 1e6:.2f} us per contract)")
    ratio = (results[200_000] / 200_000) / (results[20_000] / 20_000)
    print(f"cost per contract, 200k vs 20k: {ratio:.2f}x (1.0 = linear)")
    print("target: 20k-contract pipeline <= 60 ms warm")

    mb = peak_memory_child(100_000)
    print(f"peak memory, 100,000 contracts (whole process): {mb:.0f} MB (target <= 400 MB)")
    base = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
    print(f"(this benchmark process so far: {base:.0f} MB)")


if __name__ == "__main__":
    main()
