"""Benchmark: load_file against its floors, time and peak memory (run by hand, not by pytest).

    python tests/bench/bench_loading.py [--rows N ...] [--big] [--repeat R]
    python tests/bench/bench_loading.py --baseline REV [--rows N ...] [--repeat R]

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

``--baseline REV`` instead measures load_file of a git revision (its packages
exported to a temporary directory and imported ahead of the working tree) and of
the working tree, in child processes that alternate (--rounds pairs), beside
pandas.read_csv of the same file in the same process (the two alternating run by
run): CPU time (process time), user CPU time and wall time, best and median of
every run, at 20,000, 200,000 and 1,000,000 contracts unless --rows says
otherwise, with the load average (the machine may be shared).

The files carry a quarter of zero bids (far out-of-the-money quotes), the case
where one finding per row used to cost a Python object each.
"""

from __future__ import annotations

import argparse
import json
import os
import resource
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


def best_times(fn, repeat: int) -> tuple[float, float]:
    """Best wall and best process CPU time of ``fn`` over ``repeat`` runs, in seconds."""
    wall = cpu = float("inf")
    for _ in range(repeat):
        c0, t0 = time.process_time(), time.perf_counter()
        fn()
        c1, t1 = time.process_time(), time.perf_counter()
        wall, cpu = min(wall, t1 - t0), min(cpu, c1 - c0)
    return wall, cpu


def _user() -> float:
    """User CPU time of this process in seconds (microsecond resolution, unlike os.times)."""
    return resource.getrusage(resource.RUSAGE_SELF).ru_utime


def all_times(fn, repeat: int) -> list[list[float]]:
    """Wall, process CPU and user CPU time of each of ``repeat`` runs of ``fn``, in seconds."""
    out = []
    for _ in range(repeat):
        u0, c0, t0 = _user(), time.process_time(), time.perf_counter()
        fn()
        u1, c1, t1 = _user(), time.process_time(), time.perf_counter()
        out.append([t1 - t0, c1 - c0, u1 - u0])
    return out


def measure(paths: dict[int, str], repeat: int) -> dict:
    """Per file: (load times, read_csv times, rows accepted, findings) in this process, load_file first
    warmed once (imports); times as ``all_times`` gives them, load_file and read_csv alternating."""
    from chaintriage.core import loading

    out = {}
    for n, path in paths.items():
        res = loading.load_file(path)
        accepted, found = res.rows_accepted, len(res.findings)
        del res
        load, pand = [], []
        for _ in range(repeat):
            load += all_times(lambda: loading.load_file(path), 1)
            pand += all_times(lambda: pd.read_csv(path), 1)
        out[n] = (load, pand, accepted, found)
    out["module"] = loading.__file__
    return out


def export_revision(rev: str, into: str) -> str:
    """The packages of a git revision as an importable ``chaintriage`` under ``into``."""
    repo = Path(__file__).resolve().parents[2]
    pkg = Path(into) / "chaintriage"
    pkg.mkdir(parents=True)
    (pkg / "__init__.py").write_text("")
    archive = subprocess.run(["git", "-C", str(repo), "archive", rev, "core", "tui", "themes", "demo_chains"],
                             capture_output=True, check=True)
    subprocess.run(["tar", "-x", "-C", str(pkg)], input=archive.stdout, check=True)
    return into


def run_child(root: str | None, paths: dict[int, str], repeat: int) -> dict:
    env = dict(os.environ)
    if root:
        env["PYTHONPATH"] = root + os.pathsep + env.get("PYTHONPATH", "")
    code = ("import json, sys; sys.path.insert(0, %r); import bench_loading as b; "
            "print(json.dumps(b.measure({int(k): v for k, v in json.loads(%r).items()}, %d)))") % (
        str(Path(__file__).parent), json.dumps(paths), repeat)
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env)
    if out.returncode:
        raise SystemExit(f"child failed: {out.stderr[-800:]}")
    got = json.loads(out.stdout.strip().splitlines()[-1])
    module = got.pop("module")
    if root and not module.startswith(root):
        raise SystemExit(f"the baseline child imported {module}, not the exported revision")
    return {int(k): tuple(v) for k, v in got.items()}


def load_text() -> str:
    load = os.getloadavg() if hasattr(os, "getloadavg") else (float("nan"),) * 3
    return f"load average {load[0]:.1f} {load[1]:.1f} {load[2]:.1f} on {os.cpu_count()} cores"


def _ratio(a: float, b: float) -> str:
    """``a / b`` as ``1.23x``; ``n/a`` when ``b`` is 0 (user time counts whole clock ticks on some kernels)."""
    return f"{a / b:4.2f}x" if b > 0 else " n/a "


def compare(rev: str, sizes: list[int], repeat: int, rounds: int = 2) -> None:
    """load_file of ``rev`` and of the working tree beside read_csv, alternating child processes."""
    with tempfile.TemporaryDirectory() as tmp:
        paths = {}
        for n in sizes:
            paths[n] = str(Path(tmp) / f"chain_{n}.csv")
            write_file(Path(paths[n]), n)
        root = export_revision(rev, str(Path(tmp) / "baseline"))
        print(f"start: {load_text()}")
        runs = {"baseline": [], "now": []}
        for _ in range(rounds):  # alternate children; every run kept
            runs["baseline"].append(run_child(root, paths, repeat))
            runs["now"].append(run_child(None, paths, repeat))
        sizes_mb = {n: Path(p).stat().st_size / 1e6 for n, p in paths.items()}
    print(f"end: {load_text()}")
    print(f"load_file vs pandas.read_csv (default types) in the same process, {repeat} runs each x {rounds} "
          f"alternating children; baseline = {rev}; times in ms (cpu = process time, user = user CPU time); "
          "ratio = load_file / read_csv of the same statistic")
    for n in sizes:
        same = {k: {(r[n][2], r[n][3]) for r in v} for k, v in runs.items()}
        print(f"{n:>9,} contracts ({sizes_mb[n]:.0f} MB), rows accepted / findings: baseline {same['baseline']}, "
              f"now {same['now']}")
        stat = {}
        for k in ("baseline", "now"):
            load = np.array([t for r in runs[k] for t in r[n][0]]) * 1e3
            pand = np.array([t for r in runs[k] for t in r[n][1]]) * 1e3
            for name, f in (("best", np.min), ("median", np.median)):
                lo, pa = f(load, axis=0), f(pand, axis=0)
                stat[k, name] = lo
                print(f"  {k:8s} {name:6s} load_file cpu {lo[1]:7.1f} user {lo[2]:7.1f} wall {lo[0]:7.1f}   "
                      f"read_csv cpu {pa[1]:6.1f} user {pa[2]:6.1f} wall {pa[0]:6.1f}   "
                      f"ratio cpu {lo[1] / pa[1]:4.2f}x user {_ratio(lo[2], pa[2])} wall {lo[0] / pa[0]:4.2f}x")
        for name in ("best", "median"):
            b, w = stat["baseline", name], stat["now", name]
            print(f"  speed-up of load_file ({name}): cpu {b[1] / w[1]:.2f}x, user {_ratio(b[2], w[2])}, "
                  f"wall {b[0] / w[0]:.2f}x")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--rows", type=int, nargs="*", default=None)
    ap.add_argument("--big", action="store_true", help="also 5,000,000 rows (one repeat)")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--baseline", metavar="REV", help="compare with load_file of this git revision")
    ap.add_argument("--rounds", type=int, default=2, help="alternating child pairs with --baseline")
    args = ap.parse_args()
    if args.baseline:
        compare(args.baseline, args.rows or [20_000, 200_000, 1_000_000], args.repeat, args.rounds)
        return
    args.rows = args.rows or [200_000]
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
