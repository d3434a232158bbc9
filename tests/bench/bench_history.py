"""Benchmark: the history work for one underlying, and the bootstrap simulation (run by hand).

    python tests/bench/bench_history.py [--repeat N]

Targets (issue): all history work for one underlying with 10 years of daily
data <= 100 ms warm; the simulation with 100,000 paths x 60 steps <= 300 ms.
Prints the best of N warm runs of each step and its ratio to the target.
The 10-year history is random GBM bars written to a temporary file; the
chain is the OSPX demo snapshot (1,136 contracts, 12 expiries).
"""

from __future__ import annotations

import argparse
import tempfile
import time
from importlib.resources import files
from pathlib import Path

import numpy as np
import pandas as pd

from chaintriage.core.history_compare import HistorySettings, compare_with_snapshot, summarise_history
from chaintriage.core.history_file import load_history
from chaintriage.core.history_odds import bootstrap_odds, bootstrap_paths, day_pool, path_fan, simulate_fan
from chaintriage.core.loading import load_file
from chaintriage.core.pipeline import annotate

TARGET_HISTORY_MS = 100.0
TARGET_SIM_MS = 300.0


def best_ms(fn, repeat: int) -> tuple[float, float]:
    """Best wall-clock and best CPU time of ``repeat`` warm runs, in ms (CPU time is steadier on a busy machine)."""
    fn()  # warm
    best, best_cpu = float("inf"), float("inf")
    for _ in range(repeat):
        t, c = time.perf_counter(), time.process_time()
        fn()
        best = min(best, time.perf_counter() - t)
        best_cpu = min(best_cpu, time.process_time() - c)
    return best * 1000, best_cpu * 1000


def ten_year_file(folder: Path) -> Path:
    rng = np.random.default_rng(3)
    days = pd.bdate_range("2016-12-01", "2026-11-30")
    n = len(days)
    close = 296.42 * np.exp(np.cumsum(rng.normal(0, 0.02, n)) - np.cumsum(rng.normal(0, 0.02, n))[-1] * 0)
    opn = close * np.exp(rng.normal(0, 0.008, n))
    high = np.maximum(opn, close) * np.exp(np.abs(rng.normal(0, 0.008, n)))
    low = np.minimum(opn, close) * np.exp(-np.abs(rng.normal(0, 0.008, n)))
    frame = pd.DataFrame({"underlying": "OSPX", "date": days.strftime("%Y-%m-%d"), "open": opn.round(2),
                          "high": np.ceil(high * 100) / 100, "low": np.floor(low * 100) / 100,
                          "close": close.round(2), "volume": rng.integers(1e6, 5e6, n)})
    path = folder / "ospx_10y.csv"
    frame.to_csv(path, index=False)
    return path


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=7)
    args = ap.parse_args()
    demo = Path(str(files("chaintriage.demo_chains")))
    snap = load_file(demo / "ospx_2026-12-01.csv").snapshots[0]
    annotated = annotate(snap)
    with tempfile.TemporaryDirectory() as tmp:
        path = ten_year_file(Path(tmp))
        load = load_history(path, until=snap.as_of)
        hist = load.histories[0]
        n = len(hist.bars)
        no_sim = HistorySettings(paths=0)
        t_load = best_ms(lambda: load_history(path, until=snap.as_of), args.repeat)
        t_summary = best_ms(lambda: summarise_history(hist, no_sim), args.repeat)
        t_compare = best_ms(lambda: compare_with_snapshot(annotated, hist, no_sim), args.repeat)

        def load_and_all():
            h = load_history(path, until=snap.as_of).histories[0]
            compare_with_snapshot(annotated, h, no_sim)

        t_all = best_ms(load_and_all, args.repeat)
        pool = day_pool(hist.bars["high"], hist.bars["low"], hist.bars["close"])
        strikes = np.linspace(200, 400, 50)
        t_sim = best_ms(lambda: bootstrap_odds(pool, snap.spot, [snap.spot * 1.006], [60], strikes,
                                               strikes > snap.spot, 0, paths=100_000, block=5), args.repeat)
        t_sim1 = best_ms(lambda: bootstrap_odds(pool, snap.spot, [snap.spot * 1.006], [60], strikes,
                                                strikes > snap.spot, 0, paths=100_000, block=1), args.repeat)
        # the app's path pane: the fan, the terminal prices and a few paths in one pass, against the
        # whole path matrix and numpy's quantiles over it
        t_fan = best_ms(lambda: simulate_fan(pool, snap.spot, snap.spot * 1.006, 60, paths=100_000), args.repeat)
        t_fan_ref = best_ms(lambda: path_fan(bootstrap_paths(pool, snap.spot, snap.spot * 1.006, 60,
                                                             paths=100_000)), max(2, args.repeat // 2))
        exp = annotated.expiries
        t_table = best_ms(lambda: compare_with_snapshot(annotated, hist, HistorySettings(paths=20_000)),
                          max(2, args.repeat // 2))
    import os

    load_avg = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    print(f"history: {n} daily bars (10 years); chain: {len(annotated.contracts)} contracts, {len(exp)} expiries; "
          f"best of {args.repeat} warm runs; load average {load_avg:.1f} on {os.cpu_count()} CPUs")
    rows = [
        ("load + check the file", t_load, None),
        ("estimators x 5 windows + cone", t_summary, None),
        ("that + per-expiry IV/RV + lognormal odds per contract", t_compare, None),
        ("all history work (load, estimators, cone, odds)", t_all, TARGET_HISTORY_MS),
        ("bootstrap 100,000 paths x 60 steps, block 5, 50 strikes", t_sim, TARGET_SIM_MS),
        ("bootstrap 100,000 paths x 60 steps, block 1, 50 strikes", t_sim1, TARGET_SIM_MS),
        ("path pane: simulate_fan 100,000 paths x 60 steps (fan, terminal, sample)", t_fan, TARGET_SIM_MS),
        ("  the same from bootstrap_paths + path_fan (whole matrix, np.quantile)", t_fan_ref, TARGET_SIM_MS),
        (f"table columns with bootstrap (20,000 paths, {len(exp)} expiries to "
         f"{int(exp['trading_days'].max())} days)", t_table, None),
    ]
    print(f"{'step':<74} {'wall ms':>8} {'cpu ms':>7} {'target':>7} {'wall/target':>11} {'cpu/target':>10}")
    for label, (ms, cpu), target in rows:
        tail = (f"{target:>7.0f} {ms / target:>11.2f} {cpu / target:>10.2f}" if target
                else f"{'':>7} {'':>11} {'':>10}")
        print(f"{label:<74} {ms:>8.1f} {cpu:>7.1f} {tail}")


if __name__ == "__main__":
    main()
