"""Benchmark: smile fits and terminal distributions (run by hand, not collected by pytest).

    python tests/bench/bench_smile.py

Fits raw SVI to 50 expiries x 40 out-of-the-money quotes (noisy, weighted by
vega and spread) and builds the 401-point terminal distribution of each.
Prints milliseconds; the target is under ~150 ms for the 50 fits.
"""

from __future__ import annotations

import time

import numpy as np

from chaintriage.core import distribution as dist
from chaintriage.core import svi
from chaintriage.core.black76 import price, vega
from chaintriage.core.smile_fit import fit_smile

N_EXPIRIES, N_STRIKES, REPEATS = 50, 40, 5


def make_chain(rng):
    forward = 100.0
    expiries = []
    for t in np.geomspace(2.0 / 252.0, 2.0, N_EXPIRIES):
        atm = 0.18 + 0.06 * np.exp(-2.0 * t)
        sd = atm * np.sqrt(t)
        rho, m, sig = -0.65, 0.1 * sd, 0.8 * sd
        b = 0.45 * sd
        a = atm * atm * t - b * (rho * (-m) + np.sqrt(m * m + sig * sig))
        p = svi.SviParams(a=a, b=b, rho=rho, m=m, sigma=sig)
        k = np.linspace(-3.5 * sd, 2.5 * sd, N_STRIKES)
        strikes = forward * np.exp(k)
        iv = np.sqrt(svi.total_variance(p, k) / t) + 0.003 * rng.standard_normal(k.size)
        prices = price(forward, strikes, iv, t, 1.0, strikes >= forward)
        spread = np.maximum(0.01, 0.05 * prices)
        expiries.append((t, k, iv, vega(forward, strikes, iv, t), spread, p))
    return forward, expiries


def best_of(fn, repeats=REPEATS):
    times = []
    out = None
    for _ in range(repeats):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return min(times) * 1e3, float(np.median(times)) * 1e3, out


def main():
    rng = np.random.default_rng(20261201)
    forward, expiries = make_chain(rng)

    def fit_all():
        return [fit_smile(k, iv * iv * t, t=t, vega=vg, spread=sp) for t, k, iv, vg, sp, _ in expiries]

    fit_all()  # warm-up
    best, med, smiles = best_of(fit_all)
    print(f"fit_smile, {N_EXPIRIES} expiries x {N_STRIKES} quotes: best {best:.1f} ms, median {med:.1f} ms "
          f"({best / N_EXPIRIES:.2f} ms per expiry; target < 150 ms)")
    methods = {s.method for s in smiles}
    rmse = np.array([s.rmse_vol for s in smiles])
    print(f"  methods {sorted(methods)}, arbitrage-free {sum(s.arbitrage_free for s in smiles)}/{len(smiles)}, "
          f"penalised {sum(s.penalised for s in smiles)}, RMSE median {100 * np.median(rmse):.3f} "
          f"max {100 * rmse.max():.3f} vol points (quotes carry 0.3 vol point noise)")
    err = [np.max(np.abs(s.vol(k) - np.sqrt(svi.total_variance(p, k) / t))) for s, (t, k, _, _, _, p) in zip(smiles, expiries)]
    print(f"  largest distance from the true smile inside the quotes: {100 * max(err):.3f} vol points")

    def dists():
        return [dist.terminal_distribution(s, forward, s.t, s.atm_vol(), n=401) for s in smiles]

    best, med, ds = best_of(dists)
    print(f"terminal_distribution(n=401) x {N_EXPIRIES}: best {best:.1f} ms ({best / N_EXPIRIES:.2f} ms each)")
    mass = np.array([d.mass() for d in ds])
    mean = np.array([d.mean() / forward for d in ds])
    print(f"  mass - 1: max |.| {np.max(np.abs(mass - 1)):.2e}; mean/F - 1: max |.| {np.max(np.abs(mean - 1)):.2e}")

    vogt = svi.SviParams.from_gj_order(-0.0410, 0.1331, 0.3586, 0.3060, 0.4153)
    kv = np.linspace(-1.5, 1.5, N_STRIKES)
    best, _, sm_v = best_of(lambda: fit_smile(kv, svi.total_variance(vogt, kv), None, 1.0))
    print(f"fit_smile on a slice with butterfly arbitrage (G&J Example 3.1), penalised re-fit: {best:.1f} ms "
          f"(kept penalised: {sm_v.penalised}, RMSE {100 * sm_v.rmse_vol:.3f} vol points)")

    strikes = forward * np.exp(np.linspace(-1.0, 1.0, 2000))
    sm = smiles[N_EXPIRIES // 2]
    best, _, _ = best_of(lambda: dist.prob_above(sm, forward, strikes), 50)
    print(f"prob_above on 2000 strikes: {1e3 * best:.0f} us")
    best, _, _ = best_of(lambda: dist.range_smile(sm, forward, np.array([0.6827, 0.95, 0.99])), 20)
    print(f"range_smile at 3 confidence levels: {best:.2f} ms")


if __name__ == "__main__":
    main()
