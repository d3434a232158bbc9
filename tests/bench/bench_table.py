"""Benchmark: `chaintriage table` and `check` against their floors, time and peak memory (by hand).

    python tests/bench/bench_table.py [--contracts N] [--big] [--formats csv plain json]

On an index-like chain (100 expiries x 1,000 strikes = 200,000 contracts by
default, priced with Black-76 from an SSVI surface, a quarter of the quotes
with zero bids), printed in one run:

- each command as a fresh process (`table --format F --quiet`, `check`), wall
  time and peak memory (the process's own VmHWM), with the ratio to the floor
  pandas.read_csv of the same file (also a fresh process: the interpreter,
  pandas and the read); the json run's memory is also shown against the csv run;
  children write and use bytecode caches (one untimed run first), as an installed
  package has its modules compiled;
- the writers alone, in this process, on the annotated frame: our csv, plain
  and json writers against pandas' ``DataFrame.to_csv`` of the same frame
  (the plain write floor) with the ratio.

--big adds a 5,000,000-row file (25 underlyings of the same chain): check and
table in each format, time and peak memory against read_csv. --baseline DIR runs the
commands of another revision beside these (DIR holds its ``chaintriage``
package, e.g. the core/, tui/, themes/ and demo_chains/ of ``git archive REV``
copied into DIR/chaintriage/).
"""

from __future__ import annotations

import argparse
import io
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)


def write_chain(path: Path, n_contracts: int, n_expiries: int) -> None:
    from bench_app import write_big_csv

    write_big_csv(str(path), n_contracts, n_expiries)
    df = pd.read_csv(path)
    cheap = df.groupby("expiry")["ask"].rank(pct=True) < 0.25  # far out-of-the-money: no bid
    df.loc[cheap, "bid"] = 0.0
    df.to_csv(path, index=False)


def repeat_underlyings(src: Path, dst: Path, copies: int) -> None:
    header, body = src.read_text().split("\n", 1)
    name = body.split(",", 1)[0]
    with open(dst, "w") as fh:
        fh.write(header + "\n")
        for k in range(copies):
            fh.write(body.replace(name + ",", f"U{k:04d},"))


#: Prefix for a child's code: at exit it writes its own peak resident memory (VmHWM, reset by exec,
#: unlike ru_maxrss, which keeps the high-water mark of the forking parent) to stderr.
PEAK_HOOK = ("import atexit, sys; atexit.register(lambda: sys.stderr.write('\\nPEAK_KB ' + "
             "open('/proc/self/status').read().split('VmHWM:')[1].split()[0] + '\\n')); ")


#: The children's environment: bytecode caches written and used, as an installed package has its
#: modules compiled (pandas' are, and ours must not be compiled afresh in every timed run).
CHILD_ENV = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}

#: CPU seconds (user + system) of the last fresh process ``run`` ran (the machine may be loaded by others).
LAST_CPU = [0.0]


def run(argv: list[str]) -> tuple[float, float, int]:
    """(seconds, peak MB, exit status) of a fresh process running ``python -c CODE ...``, stdout thrown away;
    its CPU seconds go to ``LAST_CPU``."""
    argv = [argv[0], argv[1], PEAK_HOOK + argv[2], *argv[3:]]
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t0 = time.perf_counter()
    with open(os.devnull, "w") as null:
        proc = subprocess.run(argv, stdout=null, stderr=subprocess.PIPE, env=CHILD_ENV)
    seconds = time.perf_counter() - t0
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    LAST_CPU[0] = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    err = proc.stderr.decode(errors="replace")
    if proc.returncode not in (0, 1) or "PEAK_KB " not in err:
        raise SystemExit(f"{argv} failed ({proc.returncode}): {err[-500:]}")
    return seconds, int(err.rsplit("PEAK_KB ", 1)[1].split()[0]) / 1024, proc.returncode


#: A folder holding another revision's ``chaintriage`` package (--baseline), run beside this one.
BASELINE: str | None = None


def cli(*args: str, baseline: str | None = None) -> list[str]:
    code = "import sys; "
    if baseline:  # that revision's package instead of the installed one
        code += ("sys.meta_path[:] = [f for f in sys.meta_path if 'Editable' not in getattr(f, '__name__', '')]; "
                 f"sys.path.insert(0, {baseline!r}); ")
    return [sys.executable, "-c", code + "from chaintriage.tui.cli.main import main; sys.exit(main())", *args]


def floor_read_csv(path: Path) -> tuple[float, float, int]:
    return run([sys.executable, "-c", f"import pandas as pd; pd.read_csv({str(path)!r})"])


def commands(path: Path, formats: list[str], label: str) -> None:
    for rev in ([None, BASELINE] if BASELINE else [None]):  # one untimed run writes the bytecode caches
        run(cli("check", str(path), "--format", "plain", baseline=rev))
        run(cli("table", str(path), "--format", formats[0], "--quiet", baseline=rev))
    t_pd, m_pd, _ = floor_read_csv(path)
    c_pd = LAST_CPU[0]
    print(f"{label}: {path.stat().st_size / 1e6:.0f} MB; load average {os.getloadavg()[0]:.2f}")
    print(f"  floor read_csv (fresh process)  {t_pd:7.2f} s  {m_pd:7,.0f} MB   cpu {c_pd:6.2f} s")
    mem = {}
    for rev in ([None, BASELINE] if BASELINE else [None]):
        tag = "" if rev is None else " [baseline]"
        for fmt in formats:
            t, m, _ = run(cli("table", str(path), "--format", fmt, "--quiet", baseline=rev))
            mem[fmt] = m
            extra = f"  json memory = {m / mem['csv']:.2f}x csv" if fmt == "json" and "csv" in mem else ""
            print(f"  table --format {fmt:5s}{tag:11s} {t:7.2f} s  {m:7,.0f} MB   time = {t / t_pd:5.1f}x "
                  f"read_csv, memory = {m / m_pd:4.1f}x{extra}; cpu {LAST_CPU[0]:6.2f} s = "
                  f"{LAST_CPU[0] / c_pd:5.1f}x read_csv's")
        for fmt in ("plain", "json"):
            t, m, _ = run(cli("check", str(path), "--format", fmt, baseline=rev))
            print(f"  check --format {fmt:5s}{tag:11s} {t:7.2f} s  {m:7,.0f} MB   time = {t / t_pd:5.1f}x read_csv, "
                  f"memory = {m / m_pd:4.1f}x; cpu {LAST_CPU[0]:6.2f} s = {LAST_CPU[0] / c_pd:5.1f}x read_csv's")


#: Times ``render`` of a pickled frame in each format (best of 3): wall and CPU seconds, one line per format.
WRITER_TIMING = """
import pickle, sys, time
from chaintriage.tui.cli.table_output import render
frame = pickle.load(open(sys.argv[1], "rb"))
for fmt in sys.argv[2:]:
    wall = cpu = float("inf")
    for _ in range(3):
        t0, c0 = time.perf_counter(), time.process_time()
        render(frame, fmt)
        wall, cpu = min(wall, time.perf_counter() - t0), min(cpu, time.process_time() - c0)
    print(fmt, wall, cpu)
"""


def writer_times(frame_path: str, formats: list[str], baseline: str | None) -> dict[str, tuple[float, float]]:
    """{format: (wall s, CPU s)} of the writers of this revision or ``baseline``'s, in a fresh process."""
    code = ""
    if baseline:
        code = ("import sys; sys.meta_path[:] = [f for f in sys.meta_path if 'Editable' not in "
                f"getattr(f, '__name__', '')]; sys.path.insert(0, {baseline!r})\n")
    out = subprocess.run([sys.executable, "-c", code + WRITER_TIMING, frame_path, *formats],
                         capture_output=True, text=True, check=True).stdout
    return {f: (float(w), float(c)) for f, w, c in (line.split() for line in out.splitlines())}


def writers(path: Path) -> None:
    from chaintriage.core.loading import load_files
    from chaintriage.core.pipeline import PipelineSettings, annotate
    from chaintriage.tui.cli.table import TABLE_COLUMNS

    snap = load_files([path]).snapshots[0]
    frame = annotate(snap, PipelineSettings()).contracts[TABLE_COLUMNS].copy()
    frame.insert(1, "as_of", snap.as_of.isoformat())
    frame_path = str(path) + ".frame.pickle"
    frame.to_pickle(frame_path)

    t0, c0 = time.perf_counter(), time.process_time()
    best_wall = best_cpu = float("inf")
    for _ in range(3):
        t0, c0 = time.perf_counter(), time.process_time()
        frame.to_csv(io.StringIO(), index=False)
        best_wall, best_cpu = min(best_wall, time.perf_counter() - t0), min(best_cpu, time.process_time() - c0)
    print(f"writers alone on the annotated frame ({len(frame):,} rows x {frame.shape[1]} columns), best of 3, "
          f"each revision in a fresh process; load average {os.getloadavg()[0]:.2f}:")
    print(f"  floor DataFrame.to_csv          {best_wall:7.2f} s   cpu {best_cpu:6.2f} s")
    formats = ["csv", "plain", "json"]
    ours = writer_times(frame_path, formats, None)
    base = writer_times(frame_path, formats, BASELINE) if BASELINE else {}
    for fmt in formats:
        w, c = ours[fmt]
        line = f"  {fmt:5s} writer                    {w:7.2f} s   cpu {c:6.2f} s   = {w / best_wall:4.2f}x to_csv"
        if fmt in base:
            bw, bc = base[fmt]
            line += f";  baseline {bw:6.2f} s cpu {bc:6.2f} s: {bc / c:4.1f}x less cpu ({bw / w:4.1f}x wall)"
        print(line)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--contracts", type=int, default=200_000)
    ap.add_argument("--expiries", type=int, default=100)
    ap.add_argument("--formats", nargs="*", default=["csv", "plain", "json"])
    ap.add_argument("--big", action="store_true", help="also 5,000,000 rows: check and table in each format")
    ap.add_argument("--no-writers", action="store_true")
    ap.add_argument("--baseline", metavar="DIR",
                    help="a folder with another revision's chaintriage package (e.g. from `git archive`), "
                         "run beside this one")
    args = ap.parse_args()
    global BASELINE
    BASELINE = args.baseline
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "chain.csv"
        write_chain(path, args.contracts, args.expiries)
        commands(path, args.formats, f"{args.contracts:,} contracts")
        if not args.no_writers:
            writers(path)
        if args.big:
            big = Path(tmp) / "big.csv"
            repeat_underlyings(path, big, -(-5_000_000 // args.contracts))
            commands(big, args.formats, "5,000,000 contracts (25 underlyings)")


if __name__ == "__main__":
    main()
