"""Benchmark: the triage app (run by hand, not collected by pytest).

    python tests/bench/bench_app.py [--quick]

Prints, in milliseconds:
  cold start : a fresh Python process that imports the app the way the
               `chaintriage` command does and runs it headless until the first
               frame with the demo data is drawn (wall time from spawning the
               process to its "ready" line), next to a bare `python -c pass`
               and a process that only imports the modules; target <= 1200 ms;
  expiry     : switching to another 400-strike expiry (the `]` action) plus
               Textual's layout and full-screen composition of the next frame
               (Screen._refresh_layout + Compositor.render_full_update, private
               Textual APIs used only to time the frame without the pilot's idle
               wait), at 160x50 and 200x50; target <= 30 ms;
  20k open   : opening a 20,000-contract snapshot file to a usable screen, in a
               fresh process (spawn to first frame with the data), and in-process
               split into reading the file, core's annotate, and the app's own
               work (distributions, ranges, first frame); target <= 2000 ms.
The chains are synthetic (an SSVI surface priced with Black-76; see
bench_pipeline.synthetic_snapshot), for timing only.
"""

from __future__ import annotations

import argparse
import asyncio
import os
import statistics
import subprocess
import sys
import tempfile
import time

HERE = os.path.dirname(os.path.abspath(__file__))

CHILD = r"""
import sys, time
import chaintriage.tui.cli.main  # the entry point's own imports
from chaintriage.tui.app import ChainTriageApp

paths = sys.argv[1:]
app = ChainTriageApp(paths, system_clipboard=None)
add_view = app._add_view
shown = []

def ready():
    lines = app.triage.grid.render_lines_text()
    assert any("│" in l for l in lines), lines
    print("READY", flush=True)
    app.exit()

def first_view(view, select, drawn=None):
    add_view(view, select, drawn)
    if not shown:
        shown.append(view)
        # after the next refresh: the frame with the data has been composed and written
        app.call_after_refresh(ready)

app._add_view = first_view
app.run(headless=True, size=(160, 50))
"""


def spawn_until_ready(args: list[str], env: dict[str, str]) -> float:
    t0 = time.perf_counter()
    proc = subprocess.Popen([sys.executable, "-c", CHILD, *args], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, env=env)
    for line in proc.stdout:
        if line.strip() == "READY":
            elapsed = time.perf_counter() - t0
            break
    else:
        raise RuntimeError(f"child never got ready: {proc.stderr.read()[-2000:]}")
    proc.wait(30)
    return elapsed


def spawn(code: str, env: dict[str, str]) -> float:
    t0 = time.perf_counter()
    subprocess.run([sys.executable, "-c", code], check=True, env=env)
    return time.perf_counter() - t0


def summary(name: str, samples: list[float], target_ms: float | None = None) -> float:
    ms = sorted(s * 1000 for s in samples)
    med = statistics.median(ms)
    verdict = "" if target_ms is None else ("   target met" if med <= target_ms else f"   target {target_ms:.0f} NOT met")
    print(f"{name:<44} median {med:8.1f} ms   min {ms[0]:8.1f}   max {ms[-1]:8.1f}  (n={len(ms)}){verdict}")
    return med


def bench_cold_start(env: dict[str, str], repeats: int) -> None:
    print("== cold start to the first screen with the demo chains")
    summary("python -c pass", [spawn("pass", env) for _ in range(repeats)])
    summary("import textual + app + core pipeline", [spawn(
        "import chaintriage.tui.cli.main, chaintriage.tui.app, chaintriage.core.pipeline", env)
        for _ in range(repeats)])
    summary("chaintriage (demo) to first data frame", [spawn_until_ready([], env) for _ in range(repeats)], 1200)


def synthetic_view(n_contracts: int, n_expiries: int):
    sys.path.insert(0, HERE)
    from bench_pipeline import synthetic_snapshot

    from chaintriage.core.pipeline import PipelineSettings
    from chaintriage.tui.snapshot_loading import annotate_view

    snap = synthetic_snapshot(n_contracts, n_expiries)
    return annotate_view(snap, PipelineSettings(), (), 0.6827)


async def _expiry_switch(size: tuple[int, int], repeats: int) -> None:
    from chaintriage.tui.app import ChainTriageApp

    view = synthetic_view(8000, 10)  # 400 strikes x 2 kinds per expiry
    app = ChainTriageApp(views=[view], system_clipboard=None)
    composed, actions, piloted = [], [], []
    async with app.run_test(size=size) as pilot:
        await pilot.pause()
        n = len(view.expiries)
        strikes = len(app.triage.grid.strikes)
        screen = app.screen
        for i in range(repeats):
            step = app.action_next_expiry if (i // (n - 1)) % 2 == 0 else app.action_previous_expiry
            t0 = time.perf_counter()
            step()
            actions.append(time.perf_counter() - t0)
            screen._refresh_layout(screen.size)
            screen._compositor.render_full_update()
            composed.append(time.perf_counter() - t0)
            await pilot.pause()
        for i in range(repeats):
            step = app.action_next_expiry if (i // (n - 1)) % 2 == 0 else app.action_previous_expiry
            t0 = time.perf_counter()
            step()
            await pilot.pause()
            piloted.append(time.perf_counter() - t0)
        print(f"-- {size[0]}x{size[1]}: {strikes} strikes per expiry, plot {'shown' if app.triage.plot.display else 'hidden'}"
              f" ({app.triage.plot.size.width}x{app.triage.plot.size.height})")
    summary("  ] action (ladder, header, plot inputs)", actions)
    summary("  ] action + composed frame", composed, 30)
    summary("  ] action + pilot frame (incl. idle wait)", piloted)


def bench_expiry_switch(repeats: int) -> None:
    print("== switching expiry, 400 strikes")
    for size in ((160, 50), (200, 50)):
        asyncio.run(_expiry_switch(size, repeats))


def write_big_csv(path: str, n_contracts: int = 20_000, n_expiries: int = 25) -> int:
    sys.path.insert(0, HERE)
    from bench_pipeline import synthetic_snapshot

    snap = synthetic_snapshot(n_contracts, n_expiries)
    c = snap.contracts
    out = c[["expiry", "strike", "kind", "bid", "ask", "volume", "open_interest"]].copy()
    out.insert(0, "spot", snap.spot)
    out.insert(0, "as_of", snap.as_of.isoformat())
    out.insert(0, "underlying", snap.underlying)
    out["expiry"] = out["expiry"].dt.strftime("%Y-%m-%d")
    out["bid"] = out["bid"].round(2)
    out["ask"] = (out["ask"].round(2)).clip(lower=0.01)
    out.to_csv(path, index=False)
    return len(out)


def bench_big_open(env: dict[str, str], repeats: int) -> None:
    from chaintriage.core.loading import load_files
    from chaintriage.core.pipeline import PipelineSettings, annotate
    from chaintriage.tui.session import SnapshotView

    print("== opening a 20,000-contract snapshot")
    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "big.csv")
        n = write_big_csv(path)
        print(f"file: {n:,} contracts, {os.path.getsize(path) / 1e6:.1f} MB")
        reads, cores, views = [], [], []
        for _ in range(repeats):
            t0 = time.perf_counter()
            res = load_files([path])
            t1 = time.perf_counter()
            ann = annotate(res.snapshots[0], PipelineSettings())
            t2 = time.perf_counter()
            view = SnapshotView(ann)
            for e in view.expiries:
                view.distribution(e)
                view.ranges(e, 0.6827)
            t3 = time.perf_counter()
            reads.append(t1 - t0)
            cores.append(t2 - t1)
            views.append(t3 - t2)
        summary("  read the file (core.loading)", reads)
        summary("  annotate (core.pipeline)", cores)
        summary("  distributions + ranges (core, via the app)", views)
        summary("chaintriage open big.csv to first data frame",
                [spawn_until_ready([path], env) for _ in range(repeats)], 2000)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true", help="fewer repeats")
    ap.add_argument("--only", choices=("cold", "expiry", "big"), help="run one part")
    args = ap.parse_args()
    repeats = 3 if args.quick else 7
    with tempfile.TemporaryDirectory() as cfg:
        env = dict(os.environ, XDG_CONFIG_HOME=cfg)  # never touch the real settings
        os.environ["XDG_CONFIG_HOME"] = cfg
        if args.only in (None, "cold"):
            bench_cold_start(env, repeats)
        if args.only in (None, "expiry"):
            bench_expiry_switch(30 if not args.quick else 12)
        if args.only in (None, "big"):
            bench_big_open(env, repeats if not args.quick else 2)


if __name__ == "__main__":
    main()
