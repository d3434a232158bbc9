"""Benchmark: `table` on a big chain with the parent sharing the touch work it would wait for, against a baseline.

    python tests/bench/bench_touch_share.py FILE --baseline DIR [--rounds 7] [--formats plain csv]
                                            [--no-share]

Alternating in one run, fresh processes, ``--rounds`` rounds: ``pandas.read_csv(FILE)``
(the floor), then per format ``table FILE --format F --quiet`` of the baseline
revision (DIR holds its ``chaintriage`` package: the core/, tui/, themes/ and
demo_chains/ of ``git archive REV`` copied into DIR/chaintriage/) and of this
one, the order swapped every round. Printed: the load average, and per command
the medians of wall and CPU seconds (children included: the second process of
touch_process.py, reaped by its parent, is counted as /usr/bin/time counts it)
and of the per-round ratio of wall to the floor's. ``--no-share`` runs this
revision with the sharing off (``touch_process.SHARE = False``) instead of the
baseline.
"""

from __future__ import annotations

import argparse
import os
import resource
import statistics
import subprocess
import sys
import time


def run(argv: list[str]) -> tuple[float, float]:
    """(wall s, CPU s of the process and its reaped children) of a fresh process, stdout thrown away."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t0 = time.perf_counter()
    with open(os.devnull, "w") as null:
        proc = subprocess.run(argv, stdout=null, stderr=subprocess.PIPE)
    wall = time.perf_counter() - t0
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    if proc.returncode not in (0, 1):
        raise SystemExit(f"{argv} failed ({proc.returncode}): {proc.stderr.decode(errors='replace')[-500:]}")
    return wall, (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)


def cli(args: list[str], baseline: str | None, share: bool = True) -> list[str]:
    code = "import sys; "
    if baseline:  # that revision's package instead of the installed one
        code += ("sys.meta_path[:] = [f for f in sys.meta_path if 'Editable' not in getattr(f, '__name__', '')]; "
                 f"sys.path.insert(0, {baseline!r}); ")
    if not share:
        code += "from chaintriage.tui.cli import touch_process; touch_process.SHARE = False; "
    return [sys.executable, "-c", code + "from chaintriage.tui.cli.main import main; sys.exit(main())", *args]


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("file")
    ap.add_argument("--baseline", metavar="DIR")
    ap.add_argument("--no-share", action="store_true", help="this revision with sharing off as the baseline")
    ap.add_argument("--rounds", type=int, default=7)
    ap.add_argument("--formats", nargs="*", default=["plain", "csv"])
    args = ap.parse_args()
    if not args.baseline and not args.no_share:
        ap.error("--baseline DIR or --no-share")
    base_label = "sharing off" if args.no_share else "baseline"
    commands = {"read_csv": [sys.executable, "-c", f"import pandas as pd; pd.read_csv({args.file!r})"]}
    for fmt in args.formats:
        table = ["table", args.file, "--format", fmt, "--quiet"]
        commands[f"{fmt} {base_label}"] = cli(table, None if args.no_share else args.baseline, share=not args.no_share)
        commands[f"{fmt} this"] = cli(table, None)
    for argv in commands.values():  # bytecode caches written, files in the page cache
        run(argv)
    times: dict[str, list[tuple[float, float]]] = {name: [] for name in commands}
    loads = [os.getloadavg()[0]]
    for r in range(args.rounds):
        names = list(commands)
        if r % 2:  # baseline and this one swapped every other round
            names = [names[0]] + [n for pair in zip(names[2::2], names[1::2]) for n in pair]
        for name in names:
            times[name].append(run(commands[name]))
        loads.append(os.getloadavg()[0])
    print(f"load average (1 min) during the rounds: {min(loads):.2f} .. {max(loads):.2f}; {os.cpu_count()} cores")
    floor = [w for w, _ in times["read_csv"]]
    for name, got in times.items():
        wall = statistics.median(w for w, _ in got)
        cpu = statistics.median(c for _, c in got)
        ratio = statistics.median(w / f for (w, _), f in zip(got, floor))
        print(f"{name:20s} wall {wall:6.3f} s  cpu {cpu:6.3f} s  wall / read_csv {ratio:5.2f}x"
              f"  (walls {' '.join(f'{w:.2f}' for w, _ in got)})")


if __name__ == "__main__":
    main()
