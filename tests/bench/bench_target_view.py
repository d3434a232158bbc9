"""Benchmark: redrawing the target view (r) after a target change, 20,000 contracts (run by hand).

    python tests/bench/bench_target_view.py [--quick] [--size WxH]

The snapshot is the pipeline benchmark's synthetic one (20,000 contracts, 50
expiries: benchmark data only). The app runs headless with that snapshot, the
target view open (its touch figures filled first). Each run changes the target
(a new value, measure or side in turn, as the keys 1 2 3, + -, left / right
do) and times, best and median, wall and CPU (process_time):

  figures : core's selection + the figures read by row (``target_figures``);
  cells   : figures + every row's cells as text (``format_rows``);
  redraw  : the screen's ``redraw`` (figures, cells, the rows handed to its LineTable);
  frame   : redraw + Textual's layout and full-screen composition of the next
            frame (Screen._refresh_layout + Compositor.render_full_update, private
            Textual APIs used only here to time the frame without the pilot's idle wait);
  key     : a key press through the pilot until the app is idle again (includes
            the pilot's own waiting: an upper bound).

Against the 50 ms budget for the view after a target change. The machine is
shared: compare CPU with wall and the load average printed.
"""

from __future__ import annotations

import argparse
import asyncio
import os
import statistics
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from bench_pipeline import synthetic_snapshot  # noqa: E402

from chaintriage.core.pipeline import annotate  # noqa: E402
from chaintriage.core.targets import Target  # noqa: E402
from chaintriage.tui.app import ChainTriageApp  # noqa: E402
from chaintriage.tui.screens.target_view import TargetViewScreen, format_rows, target_figures  # noqa: E402
from chaintriage.tui.session import SnapshotView  # noqa: E402

BUDGET_MS = 50.0
TARGETS = [Target(side, which, value) for side in ("puts", "calls")
           for which, values in (("sigma", (0.5, 1.0, 1.5, 2.0)), ("delta", (0.10, 0.16, 0.25, 0.30)),
                                 ("beyond", (0.05, 0.10, 0.20, 0.30)))
           for value in values]
KEYS = ["plus", "minus", "2", "plus", "3", "minus", "1", "left", "right", "full_stop", "comma"]


def timed(fn) -> tuple[float, float]:
    w0, c0 = time.perf_counter(), time.process_time()
    fn()
    return (time.perf_counter() - w0) * 1e3, (time.process_time() - c0) * 1e3


def line(label: str, samples: list[tuple[float, float]]) -> None:
    wall = [w for w, _ in samples]
    cpu = [c for _, c in samples]
    med, cpu_med = statistics.median(wall), statistics.median(cpu)
    print(f"{label:38s} wall best {min(wall):6.1f} median {med:6.1f} ms   cpu median {cpu_med:6.1f} ms   "
          f"{BUDGET_MS:.0f} ms budget / median: wall {BUDGET_MS / med:4.1f}x, cpu {BUDGET_MS / cpu_med:4.1f}x")


async def bench(view: SnapshotView, repeats: int, size: tuple[int, int]) -> None:
    app = ChainTriageApp(views=[view], system_clipboard=None, events=[])
    async with app.run_test(size=size) as pilot:
        for _ in range(200):
            if app.state.views:
                break
            await pilot.pause(0.05)
        await pilot.press("r")
        await pilot.pause()
        screen = app.screen
        assert isinstance(screen, TargetViewScreen), "the target view did not open"
        for expiry in view.expiries:  # touch figures as the open view would fill them
            view.frame(expiry)
        screen._touch_queue = []
        screen.redraw()
        await pilot.pause()
        table = screen.query_one("#target-table")
        print(f"view: {len(view.expiries)} rows x {len(table._headings)} columns, screen {size[0]}x{size[1]}, "
              f"table {table.size.width}x{table.size.height} cells")
        figures, cells, redraw, frame, keys = [], [], [], [], []
        runs = [TARGETS[i % len(TARGETS)] for i in range(repeats)]
        for t in runs:
            figures.append(timed(lambda t=t: target_figures(view, t)))
        for t in runs:
            cells.append(timed(lambda t=t: format_rows(target_figures(view, t), events=screen._events)))
        for t in runs:
            screen.target = t
            redraw.append(timed(screen.redraw))
            await pilot.pause()
        for t in runs:
            screen.target = t

            def whole() -> None:
                screen.redraw()
                screen._refresh_layout(screen.size)
                screen._compositor.render_full_update()

            frame.append(timed(whole))
            await pilot.pause()
        for i in range(repeats):
            key = KEYS[i % len(KEYS)]
            w0, c0 = time.perf_counter(), time.process_time()
            await pilot.press(key)
            await pilot.pause()
            keys.append(((time.perf_counter() - w0) * 1e3, (time.process_time() - c0) * 1e3))
        assert app.screen is screen and table.row_count == len(view.expiries)
    line("figures (selection + by-row figures)", figures)
    line("cells (figures + text of every row)", cells)
    line("redraw (cells + table filled)", redraw)
    line("frame (redraw + composed screen)", frame)
    line("key through the pilot (upper bound)", keys)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--quick", action="store_true", help="fewer repeats")
    parser.add_argument("--size", default="200x50", help="terminal size, e.g. 80x24")
    args = parser.parse_args()
    width, height = (int(x) for x in args.size.lower().split("x"))
    repeats = 12 if args.quick else 48
    w0, c0 = time.perf_counter(), time.process_time()
    view = SnapshotView(annotate(synthetic_snapshot(20_000, 50)))
    print(f"snapshot: {len(view):,} contracts, {len(view.expiries)} expiries "
          f"(annotated in {time.perf_counter() - w0:.1f} s wall, {time.process_time() - c0:.1f} s cpu); "
          f"load average {os.getloadavg()[0]:.2f}")
    asyncio.run(bench(view, repeats, (width, height)))
    print(f"load average at the end {os.getloadavg()[0]:.2f}")


if __name__ == "__main__":
    main()
