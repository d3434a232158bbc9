"""Benchmark: touch probability accuracy against the oracles, and its speed (run by hand, not by pytest).

    python tests/bench/bench_touch.py [--quick] [--baseline REV] [--speed-only]

Accuracy, in one run:
- flat surfaces: the local-vol equation vs the reflection-principle closed form (REFERENCE.md s.3);
- a skewed SSVI surface (Gatheral-Jacquier Thm 4.2): vs a Brownian-bridge Monte Carlo under the same
  local vol (count within 4 SE + 0.005) and vs every level solved on a fine grid (target 0.01);
- a Heston chain priced with QuantLib: local-vol touch and the previous one-vol figure vs Heston Monte
  Carlo (below / above spot), and how often each lies outside the carry-adjusted model-free bounds;
  how often the local-vol figure had to be clipped into the bounds (and by how much).
Speed: one expiry's touch (Heston chain; a 200-strike expiry of the pipeline benchmark chain), the
20,000-contract pipeline warm (touch on demand, so not in it) with its ratio to the 60 ms target,
and every expiry's touch of that chain.

``--baseline REV`` adds a before/after table of the touch step alone, from one
run (child processes alternating between the core/ of git revision REV and
the working tree, best of each): one expiry at 200 strikes (the 20,000-contract
chain) and at 1,000 strikes, and all 100 expiries of a 200,000-contract chain
(100 expiries x 1,000 strikes x 2 kinds) one expiry after another
(``touch``) and together (``touch_many``, single-threaded and with a second
thread), wall and CPU time. ``--speed-only`` skips the accuracy part.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(Path(__file__).parent))

from bench_pipeline import best_of, child_env, export_revision, load_text, synthetic_snapshot  # noqa: E402

from chaintriage.core.local_vol import LocalVolSurface  # noqa: E402
from chaintriage.core.pipeline import PipelineSettings, annotate  # noqa: E402
from chaintriage.core.svi import SviParams, SviSlices  # noqa: E402
from chaintriage.core.touch import prob_touch, prob_touch_smile  # noqa: E402
from chaintriage.core.touch_local_vol import touch_local_vol  # noqa: E402
from tests.oracles.heston import STRONG_SKEW, heston_mc, heston_snapshot  # noqa: E402
from tests.oracles.local_vol_mc import local_vol_touch_mc  # noqa: E402
from tests.oracles.ssvi import SKEW_ETA, SKEW_RHO, skew_theta, ssvi_slice  # noqa: E402


def best_cpu(fn, repeats: int) -> float:
    """Best process CPU seconds of ``fn`` over ``repeats`` runs (less sensitive than wall time to a shared machine)."""
    best = float("inf")
    for _ in range(repeats):
        t0 = time.process_time()
        fn()
        best = min(best, time.process_time() - t0)
    return best


def flat_cases() -> None:
    cases = [(105.0, 100.0, 0.5, 0.2, 0.10, 0.0), (95.0, 100.0, 0.5, 0.2, 0.10, 0.0),
             (100.0, 110.0, 0.25, 0.25, 0.03125, 0.0), (100.0, 90.0, 30 / 365, 0.3, 0.05, 0.01)]
    errs = []
    for s, h, t, sig, r, q in cases:
        surf = LocalVolSurface.build([t], [s * np.exp((r - q) * t)], s, [SviSlices(SviParams.flat(sig * sig * t))])
        errs.append(abs(touch_local_vol(surf, t, [h]).p_touch[0] - prob_touch(s, h, t, sig, r - q)))
    levels = np.arange(50.0, 180.0, 1.0)
    surf = LocalVolSurface.build([0.4], [100 * np.exp(0.03 * 0.4)], 100.0, [SviSlices(SviParams.flat(0.09 * 0.4))])
    many = np.abs(touch_local_vol(surf, 0.4, levels).p_touch - prob_touch(100.0, levels, 0.4, 0.3, 0.03))
    print(f"flat surface vs closed form: Haug/REFERENCE s.3 cases max {max(errs):.2e}; "
          f"130 strikes at once max {np.nanmax(many):.2e}, mean {np.nanmean(many):.2e}")


def ssvi_cases(paths: int) -> None:
    times = np.array([7, 21, 49, 91, 182, 365]) / 365
    smiles = [ssvi_slice(th, SKEW_RHO, SKEW_ETA) for th in skew_theta(times)]
    surf = LocalVolSurface.build(times, 100 * np.exp(0.03 * times), 100.0, smiles)
    d_mc, d_fine, inside, n = [], [], 0, 0
    for i in (0, 2, 3, 5):
        t = times[i]
        sd = np.sqrt(skew_theta(t))
        levels = 100 * np.exp(sd * np.array([-3, -2, -1.2, -0.6, -0.25, 0.25, 0.6, 1.2, 2, 3]))
        strikes = np.union1d(levels, np.round(100 * np.exp(sd * np.linspace(-4, 4, 161)), 2))
        got = touch_local_vol(surf, t, strikes).p_touch[np.searchsorted(strikes, levels)]
        mc, se = local_vol_touch_mc(surf, t, levels, n_paths=paths)
        fine = touch_local_vol(surf, t, levels, n_space=600, n_time=240, solved_per_side=None).p_touch
        d_mc.append(np.abs(got - mc))
        d_fine.append(np.abs(got - fine))
        inside += int(np.sum(np.abs(got - mc) <= 4 * se + 0.005))
        n += levels.size
    d_mc, d_fine = np.concatenate(d_mc), np.concatenate(d_fine)
    print(f"SSVI surface (4 expiries x 10 levels): vs local-vol MC max {d_mc.max():.4f} mean {d_mc.mean():.4f}, "
          f"{inside}/{n} within 4 SE + 0.005; vs fine grid max {d_fine.max():.4f} mean {d_fine.mean():.4f} "
          f"(target 0.01)")


def heston_cases(paths: int) -> None:
    snap, t, _ = heston_snapshot()
    ann = annotate(snap, PipelineSettings(basis="365"), touch=True)
    c = ann.contracts
    spot = STRONG_SKEW.spot
    rows_all = []
    clipped = sum(g.clipped for g in ann.touched.values())
    max_cross = max(g.max_cross for g in ann.touched.values())
    n_all = sum(np.isfinite(g.p_touch).sum() for g in ann.touched.values())
    stats = {"lv": {True: [], False: []}, "old": {True: [], False: []}}
    out_lv = out_old = out_mc = total = 0
    for i, (expiry, res) in enumerate(ann.results.items()):
        rows = c[(c["expiry"] == expiry) & np.where(c["kind"] == "put", c["strike"] < spot, c["strike"] > spot)]
        rows = rows.sort_values("strike")
        strikes = rows["strike"].to_numpy()
        mc = heston_mc(STRONG_SKEW, t[i], strikes, n_paths=paths, seed=100 + i)
        k = np.log(strikes / res.forward)
        vol = np.sqrt(np.asarray(res.smile.total_variance(k)) / res.t_years)
        old = prob_touch_smile(spot, res.forward, strikes, res.t_years, vol, rows["p_touch_low"].to_numpy())
        lo, hi = rows["p_touch_low"].to_numpy(), rows["p_touch_high"].to_numpy()
        lv = rows["p_touch"].to_numpy()
        below = strikes < spot
        for side in (True, False):
            stats["lv"][side].append(lv[below == side] - mc.p_touch[below == side])
            stats["old"][side].append(old[below == side] - mc.p_touch[below == side])
        out_lv += int(np.sum((lv < lo - 1e-12) | (lv > hi + 1e-12)))
        out_old += int(np.sum((old < lo - 1e-9) | (old > hi + 1e-9)))
        slack = 4 * mc.p_touch_se + 3.0 / paths  # 3/N: no hits in N paths still allows p up to ~3/N
        out_mc += int(np.sum((mc.p_touch < lo - slack) | (mc.p_touch > hi + slack)))
        total += strikes.size
        rows_all.append(strikes.size)
    print(f"Heston chain ({len(ann.results)} expiries, {total} out-of-the-money strikes, MC {paths:,} paths):")
    for name, label in (("lv", "local vol"), ("old", "one-vol (before)")):
        for side, word in ((True, "below spot"), (False, "above spot")):
            d = np.concatenate(stats[name][side])
            print(f"  {label:17s} {word}: error vs Heston MC max {np.abs(d).max():.4f} mean {np.abs(d).mean():.4f} "
                  f"(mean signed {d.mean():+.4f})")
    print(f"  outside the bounds: local vol {out_lv}/{total}, one-vol (before) {out_old}/{total}, "
          f"Heston MC truth {out_mc}/{total} (4 SE + 3/paths slack)")
    print(f"  clipped into the bounds by the numerics: {clipped} of {n_all} contract rows, by at most {max_cross:.1e}")


def speed(quick: bool) -> None:
    snap, t, strikes = heston_snapshot()
    ann = annotate(snap, PipelineSettings(basis="365"))
    expiries = list(ann.results)

    def one(e):
        ann.touched.pop(e, None)
        ann.touch(e)

    reps = 3 if quick else 7
    per = [best_of(lambda e=e: one(e), reps) * 1e3 for e in expiries]
    cpu = [best_cpu(lambda e=e: one(e), reps) * 1e3 for e in expiries]
    print(f"load average {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores")
    print(f"speed, Heston chain: one expiry's touch {np.median(per):.1f} ms median wall ({np.median(cpu):.1f} ms CPU), "
          f"{max(per):.1f} ms max ({int(np.median([len(s) for s in strikes]))} strikes, both kinds) -> ratio to 10 ms "
          f"{np.median(per) / 10:.2f} wall, {np.median(cpu) / 10:.2f} CPU")
    big = synthetic_snapshot(20_000, 50)
    settings = PipelineSettings()
    a = annotate(big, settings)
    warm = best_of(lambda: annotate(big, settings), 5 if quick else 15) * 1e3
    warm_cpu = best_cpu(lambda: annotate(big, settings), 5 if quick else 15) * 1e3
    n_strikes = a.contracts.groupby("expiry")["strike"].nunique()
    es = list(a.results)
    per_big, cpu_big = [], []
    for e in es[:: (10 if quick else 5)]:
        per_big.append(best_of(lambda e=e: (a.touched.pop(e, None), a.touch(e)), 3) * 1e3)
        cpu_big.append(best_cpu(lambda e=e: (a.touched.pop(e, None), a.touch(e)), 3) * 1e3)
    t0 = time.perf_counter()
    a.touched.clear()
    a.fill_touch()
    all_ms = (time.perf_counter() - t0) * 1e3
    print(f"speed, pipeline chain (20,000 contracts, {len(es)} expiries, {int(n_strikes.median())} strikes each): "
          f"annotate {warm:.1f} ms warm ({warm_cpu:.1f} ms CPU) -> ratio to 60 ms {warm / 60:.2f} wall, "
          f"{warm_cpu / 60:.2f} CPU; one expiry's touch {np.median(per_big):.1f} ms median wall "
          f"({np.median(cpu_big):.1f} ms CPU), {max(per_big):.1f} ms max -> ratio to 10 ms "
          f"{np.median(per_big) / 10:.2f} wall, {np.median(cpu_big) / 10:.2f} CPU; "
          f"every expiry's touch {all_ms:.0f} ms")


def _clock(fn) -> tuple[float, float]:
    """(wall, process CPU) seconds of one call."""
    w0, c0 = time.perf_counter(), time.process_time()
    fn()
    return time.perf_counter() - w0, time.process_time() - c0


def touch_step_times(repeats: int) -> dict:
    """Touch-step times (ms, as [wall, cpu]) of this process's chaintriage: the figures of ``--baseline``.

    Per expiry: the median over a spread of expiries of the best of ``repeats``
    (the expiry's kept result dropped before each run). All expiries: best of
    ``repeats`` on a fresh annotation each time.
    """
    out = {}
    for label, n, n_exp in (("200", 20_000, 50), ("1000", 200_000, 100)):
        a = annotate(synthetic_snapshot(n, n_exp), PipelineSettings())
        es = list(a.results)[:: max(1, len(a.results) // 10)]
        per = []
        for e in es:
            best = [float("inf"), float("inf")]
            for _ in range(repeats):
                a.touched.pop(e, None)
                w, c = _clock(lambda e=e: a.touch(e))
                best = [min(best[0], w), min(best[1], c)]
            per.append(best)
        out[f"one expiry, {label} strikes"] = [float(np.median([p[0] for p in per]) * 1e3),
                                              float(np.median([p[1] for p in per]) * 1e3)]
        if label != "1000":
            continue
        snap = a.snapshot
        ways = {"all 100 expiries, one by one (touch)": lambda a: [a.touch(e) for e in a.results]}
        if hasattr(a, "touch_many"):
            ways["all 100 expiries together (touch_many)"] = lambda a: a.touch_many()
            ways["all 100 expiries together, 2 threads"] = lambda a: a.touch_many(workers=2)
        for name, way in ways.items():
            best = [float("inf"), float("inf")]
            for _ in range(max(2, repeats - 1)):
                fresh = annotate(snap, PipelineSettings())
                w, c = _clock(lambda: way(fresh))
                best = [min(best[0], w), min(best[1], c)]
            out[name] = [best[0] * 1e3, best[1] * 1e3]
    return out


def _core_dir() -> str:
    import chaintriage.core as core

    return str(Path(core.__file__).parent)


def _child_times(core_root: str | None, repeats: int) -> dict:
    code = ("import json, sys; sys.path.insert(0, %r); import bench_touch as b; "
            "print(json.dumps(dict(b.touch_step_times(%d), core=b._core_dir())))") % (str(Path(__file__).parent), repeats)
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True,
                         env=child_env(core_root))
    return json.loads(out.stdout.strip().splitlines()[-1])


def compare_with(rev: str, repeats: int) -> None:
    """Before (core/ of ``rev``) and after (the working tree) touch-step times from one run, alternating."""
    with tempfile.TemporaryDirectory() as tmp:
        root = export_revision(rev, tmp)
        print(f"touch step, baseline = {rev}; start: {load_text()}")
        rounds = {"baseline": [], "now": []}
        for _ in range(2):
            rounds["baseline"].append(_child_times(root, repeats))
            rounds["now"].append(_child_times(None, repeats))
    print("core/ read from: " + ", ".join(f"{k} {v[0].pop('core')}" for k, v in rounds.items()))
    for v in rounds.values():
        for r in v[1:]:
            r.pop("core")
    best = {k: {name: [min(r[name][i] for r in v) for i in (0, 1)] for name in v[0]} for k, v in rounds.items()}
    print(f"end: {load_text()}; best of 2 alternating rounds, each best of {repeats}")
    print(f"{'':42s} {'baseline wall':>13s} {'cpu':>9s} {'now wall':>10s} {'cpu':>9s} {'ratio wall':>10s} {'cpu':>6s}")
    one_by_one = best["baseline"]["all 100 expiries, one by one (touch)"]
    for name, (w_now, c_now) in best["now"].items():
        w_b, c_b = best["baseline"].get(name, one_by_one if name.startswith("all") else [float("nan")] * 2)
        print(f"{name:42s} {w_b:11.1f}ms {c_b:7.1f}ms {w_now:8.1f}ms {c_now:7.1f}ms "
              f"{w_b / w_now:9.2f}x {c_b / c_now:5.2f}x")
    print("(the baseline has no touch_many: its 'together' rows compare with its one-by-one time)")


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true", help="fewer Monte Carlo paths and repeats")
    ap.add_argument("--baseline", metavar="REV", help="also time the touch step of this git revision's core/")
    ap.add_argument("--speed-only", action="store_true", help="skip the accuracy checks")
    args = ap.parse_args()
    paths = 40_000 if args.quick else 200_000
    if not args.speed_only:
        flat_cases()
        ssvi_cases(paths // 2)
        heston_cases(paths)
    speed(args.quick)
    if args.baseline:
        compare_with(args.baseline, 3 if args.quick else 5)


if __name__ == "__main__":
    main()
