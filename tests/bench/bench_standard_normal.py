"""Benchmark: core.standard_normal's ndtr, ndtri, erfcx against scipy.special's ufuncs (run by hand).

    python tests/bench/bench_standard_normal.py [--quick]

For arrays of 200, 2,000, 20,000, 200,000 and 1,000,000 values (normal deviates times 2 for ndtr
and erfcx, uniform probabilities for ndtri) prints the best time per call of each, as wall and
as this thread's CPU time, their ratio, and the load average (the machine may be shared).
Also prints what importing scipy.special costs in a fresh process beside numpy and pandas.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import time

import numpy as np
import scipy.special as sp

from chaintriage.core import standard_normal as sn

SIZES = (200, 2_000, 20_000, 200_000, 1_000_000)


def best(fn, arg, calls: int, repeats: int) -> tuple[float, float]:
    """Best (wall, thread CPU) seconds per call over ``repeats`` rounds of ``calls`` calls."""
    wall = cpu = float("inf")
    for _ in range(repeats):
        t0, c0 = time.perf_counter(), time.thread_time()
        for _ in range(calls):
            fn(arg)
        wall = min(wall, (time.perf_counter() - t0) / calls)
        cpu = min(cpu, (time.thread_time() - c0) / calls)
    return wall, cpu


def import_cost(repeats: int) -> None:
    code = ("import time, numpy, pandas; t = time.process_time(); import scipy.special; "
            "print(time.process_time() - t)")
    cpu = sorted(float(subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                                      check=True).stdout) for _ in range(repeats))
    print(f"import scipy.special after numpy and pandas: cpu median {1e3 * cpu[len(cpu) // 2]:.1f} ms, "
          f"min {1e3 * cpu[0]:.1f} ms (n={repeats})")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--quick", action="store_true", help="fewer repeats")
    args = parser.parse_args()
    repeats = 3 if args.quick else 7
    print(f"load average {' '.join(f'{x:.2f}' for x in os.getloadavg())} on {os.cpu_count()} cores")
    import_cost(repeats)
    rng = np.random.default_rng(1)
    for n in SIZES:
        x = 2.0 * rng.normal(size=n)
        p = rng.uniform(size=n)
        calls = max(1, 200_000 // n)
        parts = []
        for name, ours, theirs, arg in (("ndtr", sn.ndtr, sp.ndtr, x), ("erfcx", sn.erfcx, sp.erfcx, x),
                                        ("ndtri", sn.ndtri, sp.ndtri, p)):
            w0, c0 = best(ours, arg, calls, repeats)
            w1, c1 = best(theirs, arg, calls, repeats)
            parts.append(f"{name} {1e6 * c0:8.1f} / {1e6 * c1:7.1f} us cpu ({c0 / c1:4.2f}x; wall {w0 / w1:4.2f}x)")
        print(f"{n:>9,}  " + "   ".join(parts), flush=True)
    print("(each: ours / scipy.special, microseconds of CPU per call)")
    print(f"load average {' '.join(f'{x:.2f}' for x in os.getloadavg())}")


if __name__ == "__main__":
    main()
