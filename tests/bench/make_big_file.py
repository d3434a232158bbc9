"""Make a big snapshot file for the big-file benchmarks, deterministically (run by hand).

    python tests/bench/make_big_file.py OUT.csv [--rows N] [--per-underlying N]

The file holds copies of one index-like chain (Black-76 prices from an SSVI
surface, 100 expiries, a quarter of the quotes with zero bids: see
``bench_table.write_chain``) under fictional underlyings U0000, U0001, ...,
one after another, until it has ``--rows`` data rows (default 5,000,000, about
400 MB). The same arguments always give the same bytes. Delete the file after.
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
from pathlib import Path

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)


def make_big_file(out: Path, rows: int = 5_000_000, per_underlying: int = 200_000) -> int:
    """Write ``rows`` data rows to ``out`` (an existing file is refused); returns the rows written."""
    from bench_table import write_chain

    if out.exists():
        raise SystemExit(f"{out} exists; delete it first")
    with tempfile.TemporaryDirectory() as tmp:
        one = Path(tmp) / "one.csv"
        write_chain(one, per_underlying, 100)
        header, body = one.read_text().split("\n", 1)
    lines = body.splitlines(keepends=True)
    name = lines[0].split(",", 1)[0]
    written = 0
    with open(out, "x") as fh:
        fh.write(header + "\n")
        k = 0
        while written < rows:
            part = lines[: rows - written]
            fh.write("".join(part).replace(name + ",", f"U{k:04d},"))
            written += len(part)
            k += 1
    return written


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("out", type=Path)
    ap.add_argument("--rows", type=int, default=5_000_000)
    ap.add_argument("--per-underlying", type=int, default=200_000)
    args = ap.parse_args()
    n = make_big_file(args.out, args.rows, args.per_underlying)
    print(f"{args.out}: {n:,} rows, {args.out.stat().st_size / 1e6:,.0f} MB")


if __name__ == "__main__":
    main()
