"""Benchmark: opening the findings screen with many findings (grouped, one row per group).

    python tests/bench/bench_findings_screen.py [N ...] [--many-groups] [--baseline REV] [--size WxH]
                                                            (default 30000 146000 1400000, 160x50)

Prints, per N: the time to group the findings (done in the loading worker, off the screen's
thread), then per screen the time from pushing it to
  first frame: the first screen update written after the screen is mounted (its title, rows and
               detail pane are in it; the footer's keys come a little later, as on every screen),
  settled:     the first after-refresh callback, which runs once the screen has nothing left to
               redraw (the footer's keys shown),
each as wall time and CPU time of this process (the machine may be loaded by others: the load
average is printed), median of 5 opens, against the 100 ms target. The floor is an empty screen
with one line of text pushed in the same app. Findings are zero-bid warnings over 50 expiries and
4 files (200 groups); ``--many-groups`` spreads them over 20,000 expiry-like values instead
(20,000 groups). ``--baseline REV`` opens git revision REV's findings screen too (its
``tui/screens/findings.py``, loaded beside the working tree's; the modules it imports come from
the tree), alternating open by open with the tree's in the same app, so before and after come
from one run.
"""

from __future__ import annotations

import asyncio
import importlib.util
import os
import statistics
import subprocess
import sys
import tempfile
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
_FRAMES: list[tuple[float, float]] = []


def _first_frame() -> None:
    _MARK.append((time.perf_counter(), time.process_time()))


def baseline_screen(rev: str, into: str) -> type:
    """``FindingsScreen`` of git revision ``rev`` (its module file, imported under another name)."""
    here = os.path.dirname(os.path.abspath(__file__))
    repo = os.path.dirname(os.path.dirname(here))
    source = subprocess.run(["git", "-C", repo, "show", f"{rev}:tui/screens/findings.py"],
                            capture_output=True, check=True).stdout
    path = os.path.join(into, "findings_baseline.py")
    with open(path, "wb") as fh:
        fh.write(source)
    spec = importlib.util.spec_from_file_location("findings_baseline", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module.FindingsScreen


def open_times(table: FindingTable, groups, repeat: int = 5, baseline: type | None = None,
               size: tuple[int, int] = (160, 50)) -> dict[str, dict[str, tuple[float, float]]]:
    """Per screen (the empty floor, the findings screen and, if given, the baseline's), the median
    (wall, CPU) seconds from push to its first frame and to its first after-refresh callback."""
    app = ChainTriageApp(views=[])
    out: dict[str, dict[str, list[tuple[float, float]]]] = {}
    screens = [("floor", _Empty), ("now", lambda: FindingsScreen("bench", table, (), groups=groups))]
    if baseline is not None:
        screens.insert(1, ("base", lambda: baseline("bench", table, (), groups=groups)))
    display = app._display
    pushed: list = [None]

    def recording_display(screen, update) -> None:
        if screen is pushed[0] and screen.is_mounted and not _FRAMES:
            _FRAMES.append((time.perf_counter(), time.process_time()))
        display(screen, update)

    app._display = recording_display  # type: ignore[method-assign]

    async def main() -> None:
        async with app.run_test(size=size) as pilot:
            await pilot.pause()
            await asyncio.sleep(0.5)
            for _ in range(repeat):
                for name, make in screens:
                    _MARK.clear()
                    _FRAMES.clear()
                    t0, c0 = time.perf_counter(), time.process_time()
                    screen = pushed[0] = make()
                    app.push_screen(screen)
                    screen.call_after_refresh(_first_frame)  # queued before the screen's own later work
                    await pilot.pause()
                    while not _MARK:
                        await asyncio.sleep(0.01)
                    got = out.setdefault(name, {"first": [], "settled": []})
                    got["first"].append((_FRAMES[0][0] - t0, _FRAMES[0][1] - c0))
                    got["settled"].append((_MARK[0][0] - t0, _MARK[0][1] - c0))
                    app.pop_screen()
                    await pilot.pause()
                    await asyncio.sleep(0.1)

    asyncio.run(main())
    return {name: {k: (statistics.median(w for w, _ in v), statistics.median(c for _, c in v)) for k, v in d.items()}
            for name, d in out.items()}


def main(argv: list[str]) -> None:
    many = "--many-groups" in argv
    rev = argv[argv.index("--baseline") + 1] if "--baseline" in argv else None
    size = tuple(int(x) for x in argv[argv.index("--size") + 1].split("x")) if "--size" in argv else (160, 50)
    sizes = [int(a) for a in argv if a.isdigit()] or [30_000, 146_000, 1_400_000]
    with tempfile.TemporaryDirectory() as tmp:
        baseline = baseline_screen(rev, tmp) if rev else None
        print(f"load average {os.getloadavg()[0]:.2f}; screen {size[0]}x{size[1]}; times wall / CPU in ms, "
              f"median of 5 opens; target 100 ms" + (f"; base = {rev}'s screen, alternating with the tree's" if rev else ""))
        print(f"{'findings':>10} {'groups':>7} {'group (worker)':>15}  {'screen':<6} {'first frame':>13} "
              f"{'settled':>13} {'first CPU/target':>16}" + (f" {'base/now CPU first, settled':>28}" if rev else ""))
        for n in sizes:
            table = many_findings(n, many)
            t0, c0 = time.perf_counter(), time.process_time()
            groups = table.groups()
            t_group, c_group = time.perf_counter() - t0, time.process_time() - c0
            res = open_times(table, groups, baseline=baseline, size=size)
            lead = f"{n:>10,} {len(groups):>7,} {1000 * t_group:>6.0f} /{1000 * c_group:>6.0f} "
            for name in ("floor", "base", "now"):
                if name not in res:
                    continue
                (fw, fc), (sw, sc) = res[name]["first"], res[name]["settled"]
                line = (f"{lead}  {name:<6} {1000 * fw:>5.0f} /{1000 * fc:>5.0f} {1000 * sw:>5.0f} /{1000 * sc:>5.0f} "
                        f"{fc / 0.1:>15.2f}x")
                if name == "now" and rev:
                    (_, bfc), (_, bsc) = res["base"]["first"], res["base"]["settled"]
                    line += f" {bfc / fc:>17.1f}x, {bsc / sc:.1f}x"
                print(line)
                lead = " " * len(lead)


if __name__ == "__main__":
    main(sys.argv[1:])
