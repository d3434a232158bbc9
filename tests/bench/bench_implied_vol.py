"""Benchmark of the implied-volatility solver (run by hand, not collected by pytest).

    python tests/bench/bench_implied_vol.py [--quick]

Seeded synthetic contracts: F log-uniform in [1, 5000], K/F log-uniform in
[0.5, 2], sigma uniform in [0.05, 1.5], T uniform in [2/365, 2] years, rate
uniform in [0, 0.06], calls and puts half and half, priced with Black-76.
Prints microseconds per contract for chaintriage's vectorised solver at
20,000 and 1,000,000 contracts (best of 3 runs), beside per-contract loops
over QuantLib's ``blackFormulaImpliedStdDev`` (accuracy 1e-14) and vollib's
``implied_volatility`` on a 20,000-contract subsample, the speed ratios, and
the largest vol error of each against the true vols. Errors are reported
twice: over every contract that has at least half a cent of time value, and
over the out-of-the-money ones only (an in-the-money price carries the
rounding of its intrinsic value, which limits every solver alike).

The machine is shared, so timings are noisy; best-of-N is the fairest figure.
"""

from __future__ import annotations

import math
import os
import platform
import sys
import time

import numpy as np

from chaintriage.core.black76 import intrinsic, price
from chaintriage.core.implied_vol import OK, implied_vol

SEED = 20261201
TIME_VALUE_FLOOR = 0.005


def contracts(n: int, seed: int = SEED):
    """Synthetic contracts: (price, F, K, T, DF, r, is_call, true sigma)."""
    rng = np.random.default_rng(seed)
    f = np.exp(rng.uniform(np.log(1.0), np.log(5000.0), n))
    k = f * np.exp(rng.uniform(np.log(0.5), np.log(2.0), n))
    sigma = rng.uniform(0.05, 1.5, n)
    t = rng.uniform(2.0 / 365.0, 2.0, n)
    r = rng.uniform(0.0, 0.06, n)
    df = np.exp(-r * t)
    is_call = rng.random(n) < 0.5
    return price(f, k, sigma, t, df, is_call), f, k, t, df, r, is_call, sigma


def best_of(fn, repeats: int) -> float:
    """Best wall time of ``repeats`` runs, in seconds."""
    best = math.inf
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def quantlib_loop(p, f, k, t, df, is_call):
    import QuantLib as ql

    out = np.full(p.size, np.nan)
    for i in range(p.size):
        kind = ql.Option.Call if is_call[i] else ql.Option.Put
        try:
            std = ql.blackFormulaImpliedStdDev(
                kind, float(k[i]), float(f[i]), float(p[i]), float(df[i]), 0.0, ql.nullDouble(), 1e-14, 100
            )
        except RuntimeError:
            continue
        out[i] = std / math.sqrt(t[i])
    return out


def vollib_loop(p, f, k, t, r, is_call):
    from vollib.black.implied_volatility import implied_volatility as vl_iv

    out = np.full(p.size, np.nan)
    for i in range(p.size):
        try:
            out[i] = vl_iv(float(p[i]), float(f[i]), float(k[i]), float(r[i]), float(t[i]), "c" if is_call[i] else "p")
        except Exception:  # vollib signals prices outside its bounds by exceptions
            continue
    return out


def max_errors(vol, sigma, time_value, otm):
    """Largest |vol - sigma| with time value >= floor: (all, OTM only); unsolved count."""
    keep = time_value >= TIME_VALUE_FLOOR
    err = np.abs(vol - sigma)
    unsolved = int(np.sum(keep & ~np.isfinite(vol)))
    return float(np.nanmax(err[keep])), float(np.nanmax(err[keep & otm])), unsolved


def main() -> None:
    quick = "--quick" in sys.argv
    repeats = 3
    n_small, n_large, n_oracle = 20_000, (200_000 if quick else 1_000_000), (2_000 if quick else 20_000)

    print("chaintriage implied-volatility benchmark")
    print(f"python {platform.python_version()}, numpy {np.__version__}, {os.cpu_count()} cpus, {platform.machine()}")
    env = {k: v for k, v in os.environ.items() if k.startswith(("OPENBLAS", "OMP_", "MKL_"))}
    print("thread/BLAS environment:", env or "(none set)")
    print(f"timings are best of {repeats} runs on a shared machine; expect noise")
    print()

    rows = []
    for n in (n_small, n_large):
        p, f, k, t, df, r, is_call, sigma = contracts(n)
        implied_vol(p[:1000], f[:1000], k[:1000], t[:1000], df[:1000], is_call[:1000])  # warm-up
        secs = best_of(lambda: implied_vol(p, f, k, t, df, is_call), repeats)
        res = implied_vol(p, f, k, t, df, is_call)
        tv = p - intrinsic(f, k, df, is_call)
        otm = np.where(is_call, k >= f, k <= f)
        vol = np.where(res.status == OK, res.sigma, np.nan)
        rows.append((n, secs / n * 1e6, *max_errors(vol, sigma, tv, otm)))
    us_ours = {n: us for n, us, *_ in rows}

    p, f, k, t, df, r, is_call, sigma = contracts(n_oracle, seed=SEED + 1)
    tv = p - intrinsic(f, k, df, is_call)
    otm = np.where(is_call, k >= f, k <= f)
    secs_ours = best_of(lambda: implied_vol(p, f, k, t, df, is_call), repeats)
    secs_ql = best_of(lambda: quantlib_loop(p, f, k, t, df, is_call), repeats)
    secs_vl = best_of(lambda: vollib_loop(p, f, k, t, r, is_call), 1 if quick else 2)
    res = implied_vol(p, f, k, t, df, is_call)
    ours = np.where(res.status == OK, res.sigma, np.nan)
    ql_vol = quantlib_loop(p, f, k, t, df, is_call)
    vl_vol = vollib_loop(p, f, k, t, r, is_call)

    header = f"{'solver':<34}{'contracts':>10}{'us/contract':>13}{'max err (tv>=0.005)':>22}{'OTM only':>11}{'unsolved':>10}"
    print("Our solver at two sizes:")
    print(header)
    for n, us, e_all, e_otm, uns in rows:
        print(f"{'chaintriage implied_vol':<34}{n:>10,}{us:>13.3f}{e_all:>22.2e}{e_otm:>11.2e}{uns:>10}")
    print()
    print(f"All three on the same {n_oracle:,}-contract subsample (QuantLib accuracy 1e-14, vollib as shipped):")
    print(header)
    for name, secs, vol in (
        ("chaintriage implied_vol", secs_ours, ours),
        ("QuantLib blackFormulaImpliedStdDev", secs_ql, ql_vol),
        ("vollib implied_volatility", secs_vl, vl_vol),
    ):
        e_all, e_otm, uns = max_errors(vol, sigma, tv, otm)
        print(f"{name:<34}{n_oracle:>10,}{secs / n_oracle * 1e6:>13.3f}{e_all:>22.2e}{e_otm:>11.2e}{uns:>10}")
    print()
    ref = us_ours[n_large]
    print(f"ours at {n_large:,}: {ref:.3f} us/contract (target <= 0.4)")
    print(f"QuantLib / ours: {secs_ql / n_oracle * 1e6 / ref:6.1f}x (target >= 5x)")
    print(f"vollib / ours:   {secs_vl / n_oracle * 1e6 / ref:6.1f}x (target >= 50x)")
    print(f"(ratios use our {n_large:,}-contract figure; against our own time on the same subsample they are "
          f"{secs_ql / secs_ours:.1f}x and {secs_vl / secs_ours:.1f}x)")


if __name__ == "__main__":
    main()
