"""Benchmark: opening the findings screen with many findings (grouped, one row per group).

    python tests/bench/bench_findings_screen.py [N ...]     (default 30000 146000 1400000)

Prints, per N: the time to group the findings (done in the loading worker, off the screen's
thread) and the time from pushing the screen to its first drawn frame, against the 100 ms
target, each as wall time and CPU time of this process (the machine may be loaded by others:
the load average is printed), and beside it the floor: an empty screen with one line of text
pushed in the same app (median of 5 opens each). Findings are zero-bid warnings over 50
expiries and 4 files (200 groups); ``--many-groups`` spreads them over 20,000 expiry-like
values instead (20,000 groups), where only the first screenful of rows is made at opening.
"""

from __future__ import annotations

import asyncio
import os
import statistics
import sys
import time

import numpy as np

from chaintriage.core.finding_table import FindingTable
from chaintriage.core.findings import Finding
from chaintriage.tui.app import ChainTriageApp
from chaintriage.tui.screens.findings import FindingsScreen
from textual.screen import Screen
from textual.widgets import Static


def many_findings(n: int, many_groups: bool = False) -> FindingTable:
    rng = np.random.default_rng(1)
    proto = FindingTable.of([Finding("warning", "zero bid", file=f"chain{i % 4}.csv", line=2, column="bid",
                                     underlying="QRTZ", expiry="2027-01-15") for i in range(4)])
    big = proto.take(rng.integers(0, 4, n))
    big.line = np.arange(2, n + 2, dtype=np.int64)
    k = 5000 if many_groups else 50
    big.expiry = np.array([f"2027-{1 + m % 12:02d}-{1 + m // 12:02d}" + (f" #{m}" if many_groups else "")
                           for m in range(k)], dtype=object)[rng.integers(0, k, n)]
    return big


class _Empty(Screen):
    def compose(self):
        yield Static("floor")


_MARK: list[tuple[float, float]] = []


def _first_frame() -> None:
    _MARK.append((time.perf_counter(), time.process_time()))


def open_times(table: FindingTable, groups, repeat: int = 5) -> dict[str, tuple[float, float]]:
    """Median (wall, CPU) seconds from push to the first frame drawn (the first after-refresh callback):
    the findings screen and the empty floor."""
    app = ChainTriageApp(views=[])
    out: dict[str, list[tuple[float, float]]] = {"findings": [], "floor": []}

    async def main() -> None:
        async with app.run_test(size=(160, 50)) as pilot:
            await pilot.pause()
            await asyncio.sleep(0.5)
            for _ in range(repeat):
                for name, make in (("floor", _Empty), ("findings", lambda: FindingsScreen("bench", table, (), groups=groups))):
                    _MARK.clear()
                    t0, c0 = time.perf_counter(), time.process_time()
                    screen = make()
                    app.push_screen(screen)
                    screen.call_after_refresh(_first_frame)  # queued before the screen's own later work
                    await pilot.pause()
                    t1, c1 = _MARK[0]
                    out[name].append((t1 - t0, c1 - c0))
                    app.pop_screen()
                    await pilot.pause()
                    await asyncio.sleep(0.1)

    asyncio.run(main())
    return {k: (statistics.median(w for w, _ in v), statistics.median(c for _, c in v)) for k, v in out.items()}


def main(argv: list[str]) -> None:
    many = "--many-groups" in argv
    sizes = [int(a) for a in argv if not a.startswith("--")] or [30_000, 146_000, 1_400_000]
    print(f"load average {os.getloadavg()[0]:.2f}; times wall / CPU; open: median of 5, target 100 ms")
    print(f"{'findings':>10} {'groups':>7} {'group (worker)':>17} {'open screen':>15} {'floor (empty)':>15} "
          f"{'CPU vs target':>13}")
    for n in sizes:
        table = many_findings(n, many)
        t0, c0 = time.perf_counter(), time.process_time()
        groups = table.groups()
        t_group, c_group = time.perf_counter() - t0, time.process_time() - c0
        res = open_times(table, groups)
        (w, c), (fw, fc) = res["findings"], res["floor"]
        print(f"{n:>10,} {len(groups):>7,} {1000 * t_group:>7.0f} /{1000 * c_group:>6.0f} ms "
              f"{1000 * w:>5.0f} /{1000 * c:>4.0f} ms {1000 * fw:>5.0f} /{1000 * fc:>4.0f} ms {c / 0.1:>12.2f}x")


if __name__ == "__main__":
    main(sys.argv[1:])
