"""Benchmark: the whole core pipeline on synthetic chains (run by hand, not by pytest).

    python tests/bench/bench_pipeline.py [--quick] [--baseline REV] [--fresh N] [--profile]

Prints the warm time (best of N) of ``annotate`` for a 20,000-contract,
50-expiry chain, a 200,000-contract chain and a 1,000,000-contract chain
(10,000 quotes per expiry and side; cost per contract should not grow: at 1M
at most 1.1x that at 200k), and the peak memory of a 100,000-contract run measured in a fresh
child process (its resident high-water mark, which includes the interpreter
and libraries). Times are printed as wall and as process CPU time (user plus
system; the system part is the kernel's, mostly page faults of fresh memory),
with the load average at the start and the end, since the machine may be shared.

``--baseline REV`` also runs the same measurements on the core/ of a git
revision (exported to a temporary directory and imported in child
processes, alternating with the working tree), so before and after come
from one run on the same, shared machine. ``--profile`` prints the top
functions of a cProfile of the 20,000-contract run. ``--fresh N`` (with
``--baseline``) measures instead the first ``annotate`` of a fresh process, as
the command line runs it (one BLAS thread, no huge-page requests; the file
loaded first, not timed): N rounds, each a child per revision and size in turn,
on bench_table's index-like chains of 100 expiries (a quarter of the quotes,
the cheapest of each expiry, with no bid), written once as CSV files.
"""

from __future__ import annotations

import argparse
import cProfile
import io
import json
import os
import pstats
import subprocess
import sys
import tempfile
import time
from pathlib import Path

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


def best_of_times(fn, repeats: int) -> tuple[float, float, float]:
    """Best wall, best process CPU and the system (kernel) part of that best CPU run, in seconds.

    CPU time counts this process only, so it is less inflated than wall time on a
    shared machine; the system part is the kernel's share (page faults of fresh memory).
    """
    best_wall = best_cpu = best_sys = float("inf")
    for _ in range(repeats):
        r0, c0, t0 = os.times(), time.process_time(), time.perf_counter()
        fn()
        r1, c1, t1 = os.times(), time.process_time(), time.perf_counter()
        best_wall = min(best_wall, t1 - t0)
        if c1 - c0 < best_cpu:  # os.times counts in clock ticks (10 ms): only the system part is read from it
            best_cpu, best_sys = c1 - c0, r1.system - r0.system
    return best_wall, best_cpu, best_sys


def peak_memory_child(n_contracts: int, env: dict | None = None) -> float:
    """Peak resident memory (MB) of a fresh process that builds and annotates the chain.

    Read from VmHWM in /proc/self/status (Linux): ru_maxrss would also count
    the parent's memory, inherited across fork before exec.
    """
    code = (
        "import resource, sys; sys.path.insert(0, %r)\n"
        "from bench_pipeline import synthetic_snapshot\n"
        "from chaintriage.core.pipeline import annotate\n"
        "annotate(synthetic_snapshot(%d, 50))\n"
        "try:\n"
        "    print([int(l.split()[1]) for l in open('/proc/self/status') if l.startswith('VmHWM')][0])\n"
        "except (OSError, IndexError):\n"
        "    print(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)\n"
    ) % (str(Path(__file__).parent), n_contracts)
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True, env=env)
    return int(out.stdout.strip()) / 1024.0


def measure(repeats: int) -> dict:
    """Warm best-of-N (wall ms, CPU ms, system ms) per chain size (this process's chaintriage)."""
    settings = PipelineSettings()
    out = {}
    for n in SIZES:
        snap = synthetic_snapshot(n, 50)
        annotate(snap, settings)  # warm: imports, calendar cache
        secs = best_of_times(lambda: annotate(snap, settings),
                             repeats if n == 20_000 else max(2, repeats // 2) if n == 200_000 else 2)
        out[n] = tuple(x * 1e3 for x in secs)
        del snap
    return out


#: Chain sizes measured (contracts), all with 50 expiries.
SIZES = (20_000, 200_000, 1_000_000)


def child_env(core_root: str | None) -> dict:
    env = dict(os.environ)
    if core_root:
        env["PYTHONPATH"] = core_root + os.pathsep + env.get("PYTHONPATH", "")
    return env


def export_revision(rev: str, into: str) -> str:
    """core/ of a git revision as an importable ``chaintriage.core`` under ``into``."""
    repo = Path(__file__).resolve().parents[2]
    pkg = Path(into) / "chaintriage"
    pkg.mkdir(parents=True)
    (pkg / "__init__.py").write_text("")
    archive = subprocess.run(["git", "-C", str(repo), "archive", rev, "core"], capture_output=True, check=True)
    subprocess.run(["tar", "-x", "-C", str(pkg)], input=archive.stdout, check=True)
    return into


def run_child(core_root: str | None, repeats: int) -> dict:
    code = "import json, sys; sys.path.insert(0, %r); import bench_pipeline as b; print(json.dumps(b.measure(%d)))" % (
        str(Path(__file__).parent), repeats)
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True,
                         env=child_env(core_root))
    return {int(k): tuple(v) for k, v in json.loads(out.stdout.strip().splitlines()[-1]).items()}


#: The first annotate of a fresh process, after loading the file as the command line does:
#: CPU, wall and system seconds of annotate, as JSON on the last line.
FRESH_CHILD = (
    "import os, sys, time, json\n"
    "os.environ.setdefault('OPENBLAS_NUM_THREADS', '1'); os.environ.setdefault('NUMPY_MADVISE_HUGEPAGE', '0')\n"
    "from chaintriage.core.loading import load_files\n"
    "from chaintriage.core.pipeline import annotate\n"
    "snap = load_files([sys.argv[1]]).snapshots[0]\n"
    "r0, c0, t0 = os.times(), time.process_time(), time.perf_counter()\n"
    "annotate(snap)\n"
    "r1, c1, t1 = os.times(), time.process_time(), time.perf_counter()\n"
    "print(json.dumps([t1 - t0, c1 - c0, r1.system - r0.system]))\n"
)


def fresh_rounds(root: str, rounds: int, sizes=SIZES) -> dict:
    """{label: {n: [(wall, cpu, sys) seconds per round]}} of the first annotate in fresh children,
    baseline (core/ under ``root``) and now alternating, sizes in turn."""
    from bench_table import write_chain

    got: dict = {"baseline": {n: [] for n in sizes}, "now": {n: [] for n in sizes}}
    with tempfile.TemporaryDirectory() as tmp:
        files = {}
        for n in sizes:
            files[n] = os.path.join(tmp, f"chain{n}.csv")
            write_chain(Path(files[n]), n, 100)
        for _ in range(rounds):
            for n in sizes:
                for label, env in (("baseline", child_env(root)), ("now", child_env(None))):
                    out = subprocess.run([sys.executable, "-c", FRESH_CHILD, files[n]], capture_output=True, text=True,
                                         check=True, env=env)
                    got[label][n].append(tuple(json.loads(out.stdout.strip().splitlines()[-1])))
    return got


def report_fresh(got: dict, rounds: int) -> None:
    """Best and median CPU and wall (ms) per size, baseline and now, and the ratios of the CPU figures."""
    print(f"first annotate in a fresh process, bench_table's chains of 100 expiries, {rounds} alternating rounds "
          "(ms: best / median; system part of the best-CPU run in brackets)")
    for n in got["now"]:
        line = [f"{n:>9,} contracts:"]
        stats = {}
        for label in ("baseline", "now"):
            runs = got[label][n]
            cpu = sorted(r[1] for r in runs)
            wall = sorted(r[0] for r in runs)
            sys_best = min(runs, key=lambda r: r[1])[2]
            stats[label] = (cpu[0], cpu[len(cpu) // 2])
            line.append(f"{label} cpu {1e3 * cpu[0]:7.1f} / {1e3 * cpu[len(cpu) // 2]:7.1f} ({1e3 * sys_best:4.0f}) "
                        f"wall {1e3 * wall[0]:7.1f} / {1e3 * wall[len(wall) // 2]:7.1f}")
        line.append(f"cpu ratio best {stats['baseline'][0] / stats['now'][0]:.2f}x, "
                    f"median {stats['baseline'][1] / stats['now'][1]:.2f}x")
        print("   ".join(line))


def load_text() -> str:
    load = os.getloadavg() if hasattr(os, "getloadavg") else (float("nan"),) * 3
    return f"load average {load[0]:.1f} {load[1]:.1f} {load[2]:.1f} on {os.cpu_count()} cores"


def report(label: str, ms: dict, mb: float) -> None:
    """One line of wall times and one of CPU times (system part in brackets) with the per-contract ratios."""
    for i, what in ((0, "wall"), (1, "cpu")):
        v = {n: ms[n][i] for n in SIZES}
        ratio = (v[200_000] / 200_000) / (v[20_000] / 20_000)
        big = (v[1_000_000] / 1_000_000) / (v[200_000] / 200_000)
        sys_part = "" if i == 0 else "   sys " + " / ".join(f"{ms[n][2]:.0f}" for n in SIZES) + " ms"
        tail = f"   peak 100k: {mb:5.0f} MB" if i == 0 else sys_part
        print(f"{label:9s} {what:4s} 20k: {v[20_000]:8.1f} ms   200k: {v[200_000]:8.1f} ms   "
              f"1M: {v[1_000_000]:8.1f} ms   per-contract 200k/20k: {ratio:.2f}x   1M/200k: {big:.2f}x{tail}")


def profile_20k(top: int = 15) -> None:
    snap = synthetic_snapshot(20_000, 50)
    annotate(snap)
    prof = cProfile.Profile()
    prof.enable()
    for _ in range(3):
        annotate(snap)
    prof.disable()
    buf = io.StringIO()
    pstats.Stats(prof, stream=buf).sort_stats("tottime").print_stats(top)
    print(buf.getvalue())


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--quick", action="store_true", help="fewer repeats")
    parser.add_argument("--baseline", metavar="REV", help="also measure core/ of this git revision")
    parser.add_argument("--profile", action="store_true", help="print a cProfile of the 20k run")
    parser.add_argument("--fresh", type=int, metavar="N",
                        help="with --baseline: the first annotate of fresh processes, N alternating rounds")
    args = parser.parse_args()
    repeats = 2 if args.quick else 5

    if args.fresh and args.baseline:
        with tempfile.TemporaryDirectory() as tmp:
            root = export_revision(args.baseline, tmp)
            print(f"start: {load_text()}; baseline = {args.baseline}")
            got = fresh_rounds(root, args.fresh)
        print(f"end: {load_text()}")
        report_fresh(got, args.fresh)
    elif args.baseline:
        with tempfile.TemporaryDirectory() as tmp:
            root = export_revision(args.baseline, tmp)
            rounds = {"baseline": [], "now": []}
            print(f"start: {load_text()}")
            for _ in range(2):  # alternate, keep the best of each
                rounds["baseline"].append(run_child(root, repeats))
                rounds["now"].append(run_child(None, repeats))
            best = {k: {n: tuple(min(r[n][i] for r in v) if i < 2 else min(v, key=lambda r: r[n][1])[n][2]
                                 for i in range(3)) for n in SIZES} for k, v in rounds.items()}
            mb = {"baseline": peak_memory_child(100_000, child_env(root)), "now": peak_memory_child(100_000)}
        print(f"annotate, 50 expiries, warm best of {repeats} (two alternating rounds); baseline = {args.baseline}; "
              f"end: {load_text()}")
        report("baseline", best["baseline"], mb["baseline"])
        report("now", best["now"], mb["now"])
        for i, what in ((0, "wall"), (1, "cpu")):
            print(f"speed-up ({what}) at 20k: {best['baseline'][20_000][i] / best['now'][20_000][i]:.2f}x, "
                  f"at 200k: {best['baseline'][200_000][i] / best['now'][200_000][i]:.2f}x, "
                  f"at 1M: {best['baseline'][1_000_000][i] / best['now'][1_000_000][i]:.2f}x")
    else:
        print(f"start: {load_text()}")
        got = measure(repeats)
        for n in SIZES:
            wall, cpu, sys_ms = got[n]
            print(f"pipeline  {n:>9,} contracts, 50 expiries: {wall:8.1f} ms warm, cpu {cpu:8.1f} ms "
                  f"(system {sys_ms:6.1f} ms) ({cpu / n * 1e3:.2f} us cpu per contract)")
        for i, what in ((0, "wall"), (1, "cpu")):
            ms = {n: got[n][i] for n in SIZES}
            ratio = (ms[200_000] / 200_000) / (ms[20_000] / 20_000)
            big = (ms[1_000_000] / 1_000_000) / (ms[200_000] / 200_000)
            print(f"cost per contract ({what}), 200k vs 20k: {ratio:.2f}x; 1M vs 200k: {big:.2f}x "
                  f"(1.0 = linear; target <= 1.1x)")
        print(f"end: {load_text()}")
        mb = peak_memory_child(100_000)
        print(f"peak memory, 100,000 contracts (whole process): {mb:.0f} MB (target <= 400 MB)")
    print("targets: 20k-contract pipeline <= 60 ms warm; per-contract cost not growing (1M <= 1.1x 200k); "
          "peak <= 400 MB")
    if args.profile:
        profile_20k()


if __name__ == "__main__":
    main()
