"""Benchmark: opening the findings screen with many findings (grouped, one row per group).

    python tests/bench/bench_findings_screen.py [N ...]     (default 30000 146000 1400000)

Prints, per N: the time to group the findings (done in the loading worker, off the screen's
thread) and the time from pushing the screen to its first drawn frame, against the 100 ms
target. Findings are zero-bid warnings over 50 expiries, two sides and 4 files.
"""

from __future__ import annotations

import asyncio
import sys
import time

import numpy as np

from chaintriage.core.finding_table import FindingTable
from chaintriage.core.findings import Finding
from chaintriage.tui.app import ChainTriageApp
from chaintriage.tui.screens.findings import FindingsScreen


def many_findings(n: int) -> FindingTable:
    rng = np.random.default_rng(1)
    proto = FindingTable.of([Finding("warning", "zero bid", file=f"chain{i % 4}.csv", line=2, column="bid",
                                     underlying="QRTZ", expiry="2027-01-15") for i in range(4)])
    big = proto.take(rng.integers(0, 4, n))
    big.line = np.arange(2, n + 2, dtype=np.int64)
    big.expiry = np.array([f"2027-{1 + m % 12:02d}-{1 + m // 12:02d}" for m in range(50)], dtype=object)[
        rng.integers(0, 50, n)]
    return big


def open_time(table: FindingTable, groups) -> float:
    app = ChainTriageApp(views=[])
    out = {}

    async def main() -> None:
        async with app.run_test(size=(160, 50)) as pilot:
            await pilot.pause()
            t0 = time.perf_counter()
            app.push_screen(FindingsScreen("bench", table, (), groups=groups))
            await pilot.pause()
            out["t"] = time.perf_counter() - t0

    asyncio.run(main())
    return out["t"]


def main(argv: list[str]) -> None:
    sizes = [int(a) for a in argv] or [30_000, 146_000, 1_400_000]
    print(f"{'findings':>10} {'groups':>7} {'group (worker)':>15} {'open screen':>12} {'target':>7} {'ratio':>6}")
    for n in sizes:
        table = many_findings(n)
        t0 = time.perf_counter()
        groups = table.groups()
        t_group = time.perf_counter() - t0
        t_open = open_time(table, groups)
        print(f"{n:>10,} {len(groups):>7,} {1000 * t_group:>12.0f} ms {1000 * t_open:>9.0f} ms {100:>4} ms "
              f"{t_open / 0.1:>5.2f}x")


if __name__ == "__main__":
    main(sys.argv[1:])
