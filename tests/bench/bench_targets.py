"""Benchmark: the per-expiry target selection on a 20,000-contract snapshot (run by hand, not by pytest).

    python tests/bench/bench_targets.py [--quick]

Prints, for a 20,000-contract, 50-expiry chain (the pipeline benchmark's
synthetic snapshot): the first selection on a fresh ``TargetSelector`` (it
groups each side's contracts once), then a target change on a kept selector
(a new value, measure or side each time), best and median of N, against the
50 ms budget for redrawing a target view after a target change. Also the
filter predicate ``target_mask`` with every limit set.
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from bench_pipeline import synthetic_snapshot  # noqa: E402

from chaintriage.core.pipeline import annotate  # noqa: E402
from chaintriage.core.targets import Target, TargetSelector, target_mask  # noqa: E402

BUDGET_MS = 50.0


def timed(fn) -> float:
    t0 = time.perf_counter()
    fn()
    return (time.perf_counter() - t0) * 1e3


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--quick", action="store_true", help="fewer repeats")
    args = parser.parse_args()
    repeats = 10 if args.quick else 40
    ann = annotate(synthetic_snapshot(20_000, 50))
    c, e = ann.contracts, ann.expiries
    print(f"snapshot: {len(c):,} contracts, {len(e)} expiries")

    first = [timed(lambda: TargetSelector(c, e).select(Target("puts", "sigma", 1.5))) for _ in range(repeats)]
    targets = [Target(side, which, value) for side in ("puts", "calls")
               for which, values in (("sigma", (0.5, 1.0, 1.5, 2.0)), ("delta", (0.10, 0.16, 0.25, 0.30)),
                                     ("beyond", (0.05, 0.10, 0.20, 0.30)))
               for value in values]
    selector = TargetSelector(c, e)
    selector.select(targets[0])
    selector.select(Target("calls", "delta", 0.2))  # both sides grouped once, as a screen would have them
    change = [timed(lambda t=t: selector.select(t)) for _ in range(max(1, repeats // 10)) for t in targets]
    shift = [timed(lambda: selector.select(Target("puts", "delta", 0.16), shift=1)) for _ in range(repeats)]
    mask = [timed(lambda: target_mask(c, sigma=0.5, delta=(0.05, 0.3), beyond=(0.02, 0.2), side="puts"))
            for _ in range(repeats)]

    def line(label: str, ms: list[float]) -> None:
        print(f"{label:44s} best {min(ms):6.2f} ms   median {statistics.median(ms):6.2f} ms   "
              f"budget {BUDGET_MS:.0f} ms: {BUDGET_MS / statistics.median(ms):5.1f}x under")

    line("first selection (fresh selector)", first)
    line(f"target change, kept selector ({len(change)} runs)", change)
    line("neighbour step (shift=1), kept selector", shift)
    line("filter predicate, every limit set", mask)


if __name__ == "__main__":
    main()
