"""Benchmark: the triage app and the command line's start (run by hand, not collected by pytest).

    python tests/bench/bench_app.py [--quick] [--only help|cold|expiry|big] [--baseline REV]

Prints, in milliseconds, each figure beside its floor measured in the same run
and the ratio to it (medians of several runs; targets from the speed issue),
the CPU time of the process beside its wall time (the machine is shared: CPU
time says what the work costs, wall time what a user waits), and the load
average. ``--baseline REV`` measures a git revision's package too (exported to
a temporary directory, imported ahead of the working tree), alternating run by
run with the working tree for the spawned figures (process by process, twice,
for the expiry switch), so before and after come from one run. Child processes
write bytecode caches (as an installed package has them), so no run pays for
compiling the sources:
  help       : `chaintriage --help` and `chaintriage SUBCOMMAND --help` for every
               subcommand, each in a fresh process, floor `python -c pass`;
               target for `chaintriage --help` <= 150 ms;
  cold start : a fresh process that runs the app the way the `chaintriage`
               command does, headless at 160x50: time from spawning it to the
               first frame (the screen with its loading state; floor: importing
               textual.app; target <= 350 ms) and to the first frame with the
               demo data (floor: importing textual, numpy and pandas; target
               <= 600 ms);
  expiry     : switching to another 400-strike expiry (the `]` action), the frame
               it draws (Textual's Screen._refresh_layout + Compositor.render_full_update,
               private APIs used only to time a frame without the pilot's idle
               wait) and whether a second frame follows (the ladder re-scrolling
               after the refresh), at 160x50 and 200x50; target: one frame,
               key to settled frame <= 16 ms;
  big        : a 200,000-contract chain (100 expiries x 1,000 strikes, written by
               ``write_big_csv``): spawn to first data frame (floor: the imports
               plus pandas.read_csv of the file; target <= 1000 ms), to every expiry
               ready (target <= 3000 ms), and in-process, how long seeded keys wait
               while the background work runs (p50/p99/max; target p99 <= 50 ms).
The chains are synthetic (an SSVI surface priced with Black-76; see
bench_pipeline.synthetic_snapshot), for timing only.
"""

from __future__ import annotations

import argparse
import asyncio
import math
import os
import random
import resource
import statistics
import subprocess
import sys
import tempfile
import time

HERE = os.path.dirname(os.path.abspath(__file__))

#: The app as the `chaintriage` command starts it; prints FIRST at the first frame (loading state),
#: READY at the first frame with data and ALL when every expiry's distribution is computed, each
#: with the wall clock and the process's CPU time.
CHILD = r"""
import sys, time
import chaintriage.tui.cli.main  # the entry point's own imports
from chaintriage.tui.app import ChainTriageApp

paths = sys.argv[1:]
app = ChainTriageApp(paths, system_clipboard=None)
add_view, screen_ready, load_done = app._add_view, app.screen_ready, app._load_done
shown = []

def say(word):
    print(word, f"{time.perf_counter():.6f}", f"{time.process_time():.6f}", flush=True)

async def first_frame():
    app.call_after_refresh(say, "FIRST")
    await screen_ready()

def ready():
    lines = app.triage.grid.render_lines_text()
    assert any("│" in l for l in lines), lines
    say("READY")

def first_view(view, select, drawn=None):
    add_view(view, select, drawn)
    if not shown:
        shown.append(view)
        # after the next refresh: the frame with the data has been composed and written
        app.call_after_refresh(ready)

def done(*args):
    load_done(*args)
    say("ALL")
    app.exit()

app.screen_ready, app._add_view, app._load_done = first_frame, first_view, done
app.run(headless=True, size=(160, 50))
"""


#: One measurement: (wall seconds, CPU seconds of the measured process).
Sample = tuple[float, float]


def child_cpu() -> float:
    """CPU seconds (user + system) of the children waited for so far."""
    r = resource.getrusage(resource.RUSAGE_CHILDREN)
    return r.ru_utime + r.ru_stime


def spawn_marks(args: list[str], env: dict[str, str]) -> dict[str, Sample]:
    """(seconds from spawning CHILD, CPU seconds of the child) at each mark it prints (FIRST, READY, ALL)."""
    t0 = time.perf_counter()
    proc = subprocess.Popen([sys.executable, "-c", CHILD, *args], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, env=env)
    marks: dict[str, Sample] = {}
    for line in proc.stdout:
        parts = line.split()
        if parts and parts[0] in ("FIRST", "READY", "ALL"):
            marks[parts[0]] = (time.perf_counter() - t0, float(parts[2]))
    proc.wait(120)
    if "READY" not in marks:
        raise RuntimeError(f"child never got ready: {proc.stderr.read()[-2000:]}")
    return marks


def spawn(code: str, env: dict[str, str], args: tuple[str, ...] = ()) -> Sample:
    cpu0 = child_cpu()
    t0 = time.perf_counter()
    subprocess.run([sys.executable, "-c", code, *args], check=True, env=env, stdout=subprocess.DEVNULL)
    return time.perf_counter() - t0, child_cpu() - cpu0


def load() -> str:
    return "load average " + " ".join(f"{x:.2f}" for x in os.getloadavg())


def summary(name: str, samples: list, target_ms: float | None = None, floor: Sample | None = None) -> Sample:
    """Print the median wall (and CPU) time of ``samples`` (Samples, or wall seconds alone), the ratio
    to ``floor`` (a median Sample) and whether the wall median meets ``target_ms``; return the medians."""
    walls = sorted(1000 * (s[0] if isinstance(s, tuple) else s) for s in samples)
    cpus = [1000 * s[1] for s in samples if isinstance(s, tuple)]
    med = statistics.median(walls)
    cpu = statistics.median(cpus) if cpus else math.nan
    cpu_text = f"  cpu {cpu:7.1f}" if cpus else " " * 13
    ratio = ""
    if floor:
        ratio = f"  {med / (1000 * floor[0]):5.2f}x floor"
        if cpus and floor[1] > 0:
            ratio += f" (cpu {cpu / (1000 * floor[1]):4.2f}x)"
    verdict = "" if target_ms is None else ("   target met" if med <= target_ms else f"   target {target_ms:.0f} NOT met")
    print(f"{name:<52} wall {med:7.1f} ms{cpu_text}   min {walls[0]:7.1f} max {walls[-1]:7.1f} (n={len(walls)})"
          f"{ratio}{verdict}", flush=True)
    return med / 1000, cpu / 1000


def alternate(variants: list[tuple[str, dict[str, str]]], repeats: int, run) -> dict[str, list]:
    """``run(env)`` ``repeats`` times for each variant, the variants taking turns; samples by label."""
    out: dict[str, list] = {label: [] for label, _ in variants}
    for _ in range(repeats):
        for label, env in variants:
            out[label].append(run(env))
    return out


def tag(label: str, name: str) -> str:
    return f"[{label}] {name}" if label else name


def bench_help(variants, repeats: int) -> None:
    print(f"== chaintriage --help   ({load()})")
    env0 = variants[0][1]
    floor = summary("python -c pass (floor)", [spawn("pass", env0) for _ in range(repeats)])
    code = ("import sys\nfrom chaintriage.tui.cli.main import main\nsys.argv = ['chaintriage', %r]\n"
            "try:\n    main()\nexcept SystemExit:\n    pass\n")
    helps = alternate(variants, repeats, lambda env: spawn(code % "--help", env))
    for label, _ in variants:
        summary(tag(label, "chaintriage --help"), helps[label], 150, floor)
    from chaintriage.tui.cli.main import COMMANDS  # argparse only

    for command in COMMANDS:  # each subcommand's --help imports its module and builds its options
        sub = alternate(variants, repeats,
                        lambda env: spawn(code.replace("%r]", "%r, '--help']") % command.name, env))
        for label, _ in variants:
            summary(tag(label, f"chaintriage {command.name} --help"), sub[label], None, floor)


def bench_cold_start(variants, repeats: int) -> None:
    print(f"== cold start: first frame, first frame with the demo chains   ({load()})")
    env0 = variants[0][1]
    summary("python -c pass", [spawn("pass", env0) for _ in range(repeats)])
    floor_frame = summary("import textual.app (floor of the first frame)",
                          [spawn("import textual.app", env0) for _ in range(repeats)])
    floor_data = summary("import textual.app, numpy, pandas (floor of data)",
                         [spawn("import textual.app, numpy, pandas", env0) for _ in range(repeats)])
    alls = alternate(variants, repeats, lambda env: spawn(
        "import chaintriage.tui.cli.main, chaintriage.tui.app, chaintriage.core.pipeline", env))
    runs = alternate(variants, repeats, lambda env: spawn_marks([], env))
    for label, _ in variants:
        summary(tag(label, "import textual, app, core pipeline (all of it)"), alls[label])
        summary(tag(label, "chaintriage (demo) to first frame"), [r["FIRST"] for r in runs[label]], 350, floor_frame)
        summary(tag(label, "chaintriage (demo) to first data frame"), [r["READY"] for r in runs[label]], 600,
                floor_data)
    print(f"   ({load()})")


# ---------------------------------------------------------------- expiry switch


def synthetic_view(n_contracts: int, n_expiries: int):
    sys.path.insert(0, HERE)
    from bench_pipeline import synthetic_snapshot

    from chaintriage.core.pipeline import PipelineSettings
    from chaintriage.tui.snapshot_loading import annotate_view

    snap = synthetic_snapshot(n_contracts, n_expiries)
    return annotate_view(snap, PipelineSettings(), (), 0.6827)


def _frame(screen) -> None:
    screen._refresh_layout(screen.size)
    screen._compositor.render_full_update()


async def _expiry_switch(size: tuple[int, int], repeats: int) -> None:
    from chaintriage.tui.app import ChainTriageApp

    view = synthetic_view(8000, 10)  # 400 strikes x 2 kinds per expiry
    app = ChainTriageApp(views=[view], system_clipboard=None)
    composed, actions, settled, frames = [], [], [], []
    async with app.run_test(size=size) as pilot:
        await pilot.pause()
        n = len(view.expiries)
        strikes = len(app.triage.grid.strikes)
        screen = app.screen
        for i in range(repeats):
            step = app.action_next_expiry if (i // (n - 1)) % 2 == 0 else app.action_previous_expiry
            await pilot.pause()
            t0, c0 = time.perf_counter(), time.thread_time()
            step()
            actions.append((time.perf_counter() - t0, time.thread_time() - c0))
            _frame(screen)
            composed.append((time.perf_counter() - t0, time.thread_time() - c0))
        # The app's own frames: every screen update written to the (headless) terminal is counted.
        drawn: list[tuple[float, float]] = []
        real_display = app._display

        def counting_display(*args, **kwargs):
            result = real_display(*args, **kwargs)
            drawn.append((time.perf_counter(), time.thread_time()))
            return result

        app._display = counting_display
        # Back to the first expiry, so the run below pages like the one above and never reaches an end
        # of the list (there the key shows a notice instead of switching).
        while app.state.expiry_pos > 0:
            app.action_previous_expiry()
            await pilot.pause()
        for i in range(repeats):
            step = app.action_next_expiry if (i // (n - 1)) % 2 == 0 else app.action_previous_expiry
            await pilot.pause()
            await asyncio.sleep(0.05)
            drawn.clear()
            t0, c0 = time.perf_counter(), time.thread_time()
            step()
            await pilot.pause()
            await asyncio.sleep(0.1)  # a frame that follows late is counted too
            frames.append(len(drawn))
            if drawn:
                settled.append((drawn[-1][0] - t0, drawn[-1][1] - c0))
        print(f"-- {size[0]}x{size[1]}: {strikes} strikes per expiry, plot "
              f"{'shown' if app.triage.plot.display else 'hidden'}"
              f" ({app.triage.plot.size.width}x{app.triage.plot.size.height})")
    summary("  ] action (ladder, header, plot inputs)", actions)
    summary("  ] action + composed frame (in-process)", composed)
    summary("  ] key to settled frame (the app's own frames)", settled, 16)
    print(f"  frames per switch: mean {statistics.mean(frames):.2f}, min {min(frames)}, max {max(frames)}; target 1")


#: Terminal sizes of the expiry-switch figures.
EXPIRY_SIZES = ((160, 50), (200, 50))


def bench_expiry_switch(repeats: int, sizes=EXPIRY_SIZES) -> None:
    print(f"== switching expiry, 400 strikes   ({load()}; cpu: this thread's)")
    for size in sizes:
        asyncio.run(_expiry_switch(tuple(size), repeats))


# ---------------------------------------------------------------- a big chain


def write_big_csv(path: str, n_contracts: int = 200_000, n_expiries: int = 100) -> int:
    """A snapshot file of ``n_contracts`` (n_expiries expiries, both kinds at every strike)."""
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


#: Keys of the seeded key run: moving in the ladder and between expiries, the range, the plot.
KEY_RUN = ["down", "down", "up", "pagedown", "pageup", "]", "[", "]", "left", "right", "plus", "minus", "home"]


async def _keys_while_loading(path: str, n_keys: int, seed: int):
    """(seconds each key waited from sent to handled, the same for the keys sent while the
    background work ran, seconds late of a 10 ms timer, how many keys were sent while the work
    ran), on the app opening ``path``."""
    from textual import events

    from chaintriage.tui.app import ChainTriageApp

    waits: list[float] = []
    busy_waits: list[float] = []
    sent: dict[int, tuple[float, bool]] = {}

    class Timed(ChainTriageApp):
        async def on_event(self, event) -> None:
            t = sent.pop(id(event), None)
            await super().on_event(event)
            if t is not None:
                waits.append(time.perf_counter() - t[0])
                if t[1]:
                    busy_waits.append(waits[-1])

    app = Timed([path], system_clipboard=None)
    late: list[float] = []
    rng = random.Random(seed)
    during = 0
    async with app.run_test(size=(200, 50)) as pilot:
        while not app.state.views:
            await asyncio.sleep(0.01)
        await pilot.pause()
        last = [time.perf_counter()]

        def tick() -> None:
            now = time.perf_counter()
            late.append(max(0.0, now - last[0] - 0.01))
            last[0] = now

        timer = app.set_interval(0.01, tick)
        for _ in range(n_keys):
            busy = bool(app.state.loads_running)
            key = rng.choice(KEY_RUN)
            event = events.Key(key, None)
            event.set_sender(app)
            sent[id(event)] = (time.perf_counter(), busy)
            app.post_message(event)
            during += busy
            await asyncio.sleep(rng.uniform(0.005, 0.03))
        timer.stop()
        await pilot.pause()
    return waits, busy_waits, late, during


def bench_big_open(variants, repeats: int, n_keys: int) -> None:
    print(f"== opening a 200,000-contract snapshot (100 expiries x 1,000 strikes)   ({load()})")
    env0 = variants[0][1]
    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "big.csv")
        n = write_big_csv(path)
        print(f"file: {n:,} contracts, {os.path.getsize(path) / 1e6:.1f} MB")
        floor = summary("floor: import textual, numpy, pandas + read_csv",
                        [spawn("import sys, textual.app, numpy, pandas; pandas.read_csv(sys.argv[1])", env0, (path,))
                         for _ in range(repeats)])
        runs = alternate(variants, repeats, lambda env: spawn_marks([path], env))
        for label, _ in variants:
            summary(tag(label, "chaintriage open big.csv to first frame"), [r["FIRST"] for r in runs[label]], 350)
            summary(tag(label, "chaintriage open big.csv to first data frame"), [r["READY"] for r in runs[label]],
                    1000, floor)
            summary(tag(label, "chaintriage open big.csv to every expiry ready"), [r["ALL"] for r in runs[label]],
                    3000, floor)
        for label, env in variants:
            code = (f"import sys; sys.path.insert(0, {HERE!r}); import bench_app as b; "
                    f"b.print_key_waits({path!r}, {n_keys}, 7)")
            subprocess.run([sys.executable, "-c", code], check=True, env=env)
            if label:
                print(f"   (the line above: {label})")
        print(f"   ({load()})")


def print_key_waits(path: str, n_keys: int, seed: int) -> None:
    """Run the seeded keys on the app opening ``path`` (in this process) and print how long they waited."""
    cpu0 = time.process_time()
    waits, busy_waits, late, during = asyncio.run(_keys_while_loading(path, n_keys, seed=seed))

    def line(what: str, xs: list[float]) -> None:
        w = sorted(1000 * x for x in xs)
        p = lambda q: w[min(len(w) - 1, int(q * len(w)))]  # noqa: E731
        verdict = "target met" if p(0.99) <= 50 else "target 50 NOT met"
        print(f"{what}: {len(w)} keys, wait p50 {p(0.5):.1f} ms, p99 {p(0.99):.1f} ms, max {w[-1]:.1f} ms   {verdict}")

    if waits:
        line("keys, the whole run", waits)
    if busy_waits:
        line("keys sent while the background work ran", busy_waits)
    print(f"   (run's cpu {time.process_time() - cpu0:.1f} s; {during} of the keys sent while the work ran)")
    if late:
        lt = sorted(1000 * x for x in late)
        print(f"10 ms UI timer: {len(lt)} ticks, lateness p50 {lt[len(lt) // 2]:.1f} ms, "
              f"p99 {lt[min(len(lt) - 1, int(0.99 * len(lt)))]:.1f} ms, max {lt[-1]:.1f} ms", flush=True)


def export_revision(rev: str, into: str) -> str:
    """The package (core, tui, themes, demo_chains) of git revision ``rev`` as an importable
    ``chaintriage`` under ``into`` (put ahead of the working tree on PYTHONPATH)."""
    repo = os.path.dirname(os.path.dirname(HERE))
    pkg = os.path.join(into, "chaintriage")
    os.makedirs(pkg)
    with open(os.path.join(pkg, "__init__.py"), "w"):
        pass
    archive = subprocess.run(["git", "-C", repo, "archive", rev, "core", "tui", "themes", "demo_chains"],
                             capture_output=True, check=True)
    subprocess.run(["tar", "-x", "-C", pkg], input=archive.stdout, check=True)
    return into


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true", help="fewer repeats")
    ap.add_argument("--only", choices=("help", "cold", "expiry", "big"), help="run one part")
    ap.add_argument("--baseline", metavar="REV", help="also measure this git revision, alternating with the tree")
    args = ap.parse_args()
    repeats = 3 if args.quick else 7
    print(f"bench_app: {os.cpu_count()} CPUs, {load()}")
    with tempfile.TemporaryDirectory() as cfg:
        env = dict(os.environ, XDG_CONFIG_HOME=cfg)  # never touch the real settings
        env.pop("PYTHONDONTWRITEBYTECODE", None)  # an installed package has its bytecode compiled
        os.environ["XDG_CONFIG_HOME"] = cfg
        variants = [("", env)]
        if args.baseline:
            base = export_revision(args.baseline, os.path.join(cfg, "baseline"))
            base_env = dict(env, PYTHONPATH=base + os.pathsep + env.get("PYTHONPATH", ""))
            variants = [(f"base {args.baseline}", base_env), ("now", env)]
        for _, e in variants:  # compile and cache every module once, outside the timings
            subprocess.run([sys.executable, "-c", "import chaintriage.tui.app, chaintriage.core.pipeline, "
                            "chaintriage.tui.cli.main, chaintriage.tui.snapshot_loading as s; "
                            "s.import_numerical_modules()"], check=True, env=e)
        if args.only in (None, "help"):
            bench_help(variants, repeats)
        if args.only in (None, "cold"):
            bench_cold_start(variants, repeats)
        if args.only in (None, "expiry"):
            # One process per size and variant, the variants taking turns (twice with a baseline),
            # so a change in the machine's load falls on both.
            rounds = 2 if args.baseline else 1
            for size in EXPIRY_SIZES:
                for _ in range(rounds):
                    for label, e in variants:
                        if label:
                            print(f"-- {label}")
                        code = (f"import sys; sys.path.insert(0, {HERE!r}); import bench_app as b; "
                                f"b.bench_expiry_switch({30 if not args.quick else 12}, [{size!r}])")
                        subprocess.run([sys.executable, "-c", code], check=True, env=e)
        if args.only in (None, "big"):
            bench_big_open(variants, repeats if not args.quick else 2, 200 if not args.quick else 80)


if __name__ == "__main__":
    main()
