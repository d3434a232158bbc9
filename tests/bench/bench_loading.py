"""Benchmark: load_file against its floors, time and peak memory (run by hand, not by pytest).

    python tests/bench/bench_loading.py [--rows N ...] [--big] [--repeat R]

For each generated snapshot CSV (200,000 rows by default; --big adds 5,000,000
rows, 25 underlyings) it prints, measured in one run:

- load_file, best of R, and its floors: pandas.read_csv of the same file with
  default types (numbers parsed in C) and with every cell as text (what the
  loader must look at), with the ratio to each;
- peak memory (its own VmHWM from /proc) of a fresh process that loads
  the file, beside a fresh process that only runs read_csv, and one that only
  imports (the interpreter and libraries);
- the accounting: every row accepted or left out with a finding of its own,
  and how many groups the findings make.

The files carry a quarter of zero bids (far out-of-the-money quotes), the case
where one finding per row used to cost a Python object each.
"""

from __future__ import annotations

import argparse
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

from chaintriage.core.findings import LEFT_OUT
from chaintriage.core.loading import load_file


def make_rows(n: int, seed: int = 7, underlyings: int = 1) -> pd.DataFrame:
    """n contracts of fictional underlyings (U0001, ...), a quarter with zero bids, a few bad rows."""
    rng = np.random.default_rng(seed)
    expiries = pd.date_range("2026-04-17", periods=40, freq="7D").strftime("%Y-%m-%d").to_numpy()
    per = 2 * 40 * underlyings
    strikes = 50 + 0.5 * (np.arange(n) // per)
    kind = np.where(np.arange(n) % 2 == 0, "call", "put")
    exp = expiries[(np.arange(n) // 2) % 40]
    mid = rng.uniform(0.05, 20.0, n)
    half = rng.uniform(0.01, 0.2, n)
    bid = np.round(mid - half, 2).clip(0)
    bid[rng.random(n) < 0.25] = 0.0
    ask = np.round(mid + half, 2)
    df = pd.DataFrame({
        "underlying": "QRTZ" if underlyings == 1 else [f"U{i % underlyings:04d}" for i in range(n)],
        "as_of": "2026-04-01T15:30:00-04:00",
        "spot": "100.25",
        "expiry": exp,
        "strike": strikes,
        "kind": kind,
        "bid": bid,
        "ask": ask,
        "iv": np.round(rng.uniform(0.1, 0.9, n), 4),
        "volume": rng.integers(0, 5000, n),
        "open_interest": rng.integers(0, 50000, n),
    })
    df["bid"] = df["bid"].astype(str)
    df.loc[df.index % 997 == 0, "bid"] = "x"  # some rows to leave out
    return df


def write_file(path: Path, n: int) -> None:
    """The file of n rows; above 1,000,000 rows, 200,000-row parts of 25 underlyings written one after another."""
    if n <= 1_000_000:
        make_rows(n).to_csv(path, index=False)
        return
    part = make_rows(200_000)
    text = part.to_csv(index=False)
    header, body = text.split("\n", 1)
    with open(path, "w") as fh:
        fh.write(header + "\n")
        for k in range(-(-n // 200_000)):
            fh.write(body.replace("QRTZ,", f"U{k:04d},"))


def best_of(fn, repeat: int) -> float:
    best = float("inf")
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def peak_mb(code: str) -> tuple[float, float]:
    """(seconds, peak resident MB) of a fresh Python process running ``code``.

    The child reports its own VmHWM at exit (reset by exec; ru_maxrss would keep
    the high-water mark of this forking parent).
    """
    hook = ("import atexit, sys; atexit.register(lambda: sys.stderr.write('PEAK_KB ' + "
            "open('/proc/self/status').read().split('VmHWM:')[1].split()[0] + '\\n')); ")
    t0 = time.perf_counter()
    proc = subprocess.run([sys.executable, "-c", hook + code], stderr=subprocess.PIPE)
    err = proc.stderr.decode(errors="replace")
    if proc.returncode or "PEAK_KB " not in err:
        raise SystemExit(f"child failed: {code}: {err[-500:]}")
    return time.perf_counter() - t0, int(err.rsplit("PEAK_KB ", 1)[1].split()[0]) / 1024


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--rows", type=int, nargs="*", default=[200_000])
    ap.add_argument("--big", action="store_true", help="also 5,000,000 rows (one repeat)")
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    sizes = [(n, args.repeat) for n in args.rows] + ([(5_000_000, 1)] if args.big else [])
    with tempfile.TemporaryDirectory() as tmp:
        for n, repeat in sizes:
            path = Path(tmp) / f"chain_{n}.csv"
            write_file(path, n)
            size = path.stat().st_size / 1e6
            res = load_file(path)
            left = [f for f in res.findings if f.severity == LEFT_OUT]
            assert res.rows_read == n and res.rows_accepted + res.rows_left_out == n
            assert len({f.line for f in left}) == res.rows_left_out  # nothing dropped silently
            groups = res.findings.groups()
            del res, left
            t_load = best_of(lambda: load_file(path), repeat)
            t_pd = best_of(lambda: pd.read_csv(path), repeat)
            t_str = best_of(lambda: pd.read_csv(path, dtype=str, keep_default_na=False), repeat)
            print(f"{n:,} rows ({size:.0f} MB), best of {repeat}; {len(groups):,} finding groups")
            print(f"  load_file                     {t_load:8.3f} s  {n / t_load:12,.0f} rows/s")
            print(f"  floor read_csv (types)        {t_pd:8.3f} s   load_file = {t_load / t_pd:5.1f}x")
            print(f"  floor read_csv (all as text)  {t_str:8.3f} s   load_file = {t_load / t_str:5.1f}x")
            imp = "import numpy, pandas; from chaintriage.core import loading"
            _, m_imp = peak_mb(imp)
            _, m_pd = peak_mb(f"import pandas as pd; pd.read_csv({str(path)!r})")
            _, m_load = peak_mb(f"{imp}; loading.load_file({str(path)!r})")
            print(f"  peak memory: load_file {m_load:,.0f} MB, read_csv {m_pd:,.0f} MB "
                  f"(load_file = {m_load / m_pd:.1f}x), imports alone {m_imp:,.0f} MB")


if __name__ == "__main__":
    main()
