"""Benchmark: the first visit to an expiry, with P(touch) computed on the screen's thread (as before)
against computed by the touch worker (tui/touch_jobs.py: the cells marked pending until it arrives).

    python tests/bench/bench_first_visit.py [--strikes N] [--expiries M] [--repeat R]

In-process, headless at 200x50: a synthetic chain (bench_pipeline.synthetic_snapshot; for timing
only) of M expiries x N strikes; each run opens a fresh app and steps through every expiry once
(the `]` action, then the frame composed: Textual's private Screen._refresh_layout and
Compositor.render_full_update, as bench_app does). Prints per switch the screen thread's CPU time
(thread_time) beside the wall time, p50/p99/max, the two ways alternating run by run, and the load
average; then how long the worker took until every expiry had its touch figures.
"""

from __future__ import annotations

import argparse
import asyncio
import os
import statistics
import sys
import time

HERE = os.path.dirname(os.path.abspath(__file__))


def _view(n_strikes: int, n_expiries: int):
    sys.path.insert(0, HERE)
    from bench_pipeline import synthetic_snapshot

    from chaintriage.core.pipeline import PipelineSettings
    from chaintriage.tui.snapshot_loading import annotate_view

    return annotate_view(synthetic_snapshot(2 * n_strikes * n_expiries, n_expiries), PipelineSettings(), (), 0.6827)


async def _one_run(view, background: bool) -> tuple[list[float], list[float], float]:
    from chaintriage.tui.app import ChainTriageApp

    app = ChainTriageApp(views=[view], system_clipboard=None)
    walls, cpus = [], []
    async with app.run_test(size=(200, 50)) as pilot:
        await pilot.pause()
        if background:
            view.annotated.prepare_touch()
            view.touch_later = app.touch_jobs.ask
        screen = app.screen
        for _ in range(len(view.expiries) - 1):
            await pilot.pause()
            t0, c0 = time.perf_counter(), time.thread_time()
            app.action_next_expiry()
            screen._refresh_layout(screen.size)
            screen._compositor.render_full_update()
            walls.append(time.perf_counter() - t0)
            cpus.append(time.thread_time() - c0)
        t_end = time.perf_counter()
        while any(view.touch_pending(e) for e in view.expiries) or app.touch_jobs.pending():
            await asyncio.sleep(0.005)
        settled = time.perf_counter() - t_end
    return walls, cpus, settled


def _line(name: str, walls: list[float], cpus: list[float]) -> None:
    w = sorted(1000 * x for x in walls)
    c = sorted(1000 * x for x in cpus)

    def p(xs, q):
        return xs[min(len(xs) - 1, int(q * len(xs)))]

    print(f"{name:<44} wall p50 {p(w, .5):6.1f} p99 {p(w, .99):6.1f} max {w[-1]:6.1f} ms   "
          f"screen-thread cpu p50 {p(c, .5):6.1f} p99 {p(c, .99):6.1f} ms   (n={len(w)})", flush=True)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--strikes", type=int, default=1000)
    ap.add_argument("--expiries", type=int, default=20)
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    print(f"bench_first_visit: {os.cpu_count()} CPUs, load average "
          + " ".join(f"{x:.2f}" for x in os.getloadavg()))
    print(f"first visit to each of {args.expiries} expiries x {args.strikes} strikes, 200x50")
    out = {False: ([], []), True: ([], [])}
    settle = []
    for _ in range(args.repeat):
        for background in (False, True):
            view = _view(args.strikes, args.expiries)  # fresh: no expiry has its touch figures yet
            walls, cpus, settled = asyncio.run(_one_run(view, background))
            out[background][0].extend(walls)
            out[background][1].extend(cpus)
            if background:
                settle.append(settled)
    _line("touch on the screen's thread (before)", *out[False])
    _line("touch in the worker, cells pending (now)", *out[True])
    print(f"worker: every expiry's touch figures in, after the last switch: median "
          f"{1000 * statistics.median(settle):.0f} ms   (load average "
          + " ".join(f"{x:.2f}" for x in os.getloadavg()) + ")")


if __name__ == "__main__":
    main()
