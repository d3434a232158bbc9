"""Benchmark: smile-fit accuracy on Heston chains (run by hand, not by pytest).

    python tests/bench/bench_smile_accuracy.py [--baseline REV]

``--baseline REV`` first prints the same table for the core/ of a git revision (exported to a
temporary directory and imported in a child process), so before and after come from one run.

Chains are priced with QuantLib's analytic Heston engine (tests/oracles/heston_quotes.py), clean
(bid = ask = model price) and with realistic quotes (tick-rounded, spreads widening in the wings,
zero bids in the far wings). For each expiry it prints the largest |P(beyond) - truth| near the
money (|sigma distance| <= 1) and in the wings (truth: QuantLib's Heston digital by a tight
difference of call prices in strike), the ATM IV error in vol points, the largest gap between the
fitted and the Heston implied vol within one sd of the forward ("wiggle", vol points), the sign of the fitted
SVI rho (truth: negative, the model's rho < 0), the reported fit error and how many zero-bid quotes the expiry has.

Targets: P(beyond) within 0.005 near the money and 0.01 in the wings on clean chains; within
0.015 on realistic quotes; ATM IV within 0.1 vol points on clean chains; the right skew sign.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from chaintriage.core.pipeline import PipelineSettings, annotate  # noqa: E402
from tests.oracles.heston import STRONG_SKEW, HestonParams  # noqa: E402
from tests.oracles.heston_quotes import heston_chain, score, strikes_for  # noqa: E402

#: A milder equity-like model beside the strong-skew one.
MILD = HestonParams(spot=100.0, r=0.03, q=0.01, v0=0.0225, kappa=1.5, theta=0.04, xi=0.4, rho=-0.6)

EXPIRIES = ["2026-12-08", "2026-12-31", "2027-01-15", "2027-02-19", "2027-03-19"]


def seven_day_zero_bid_chain(p: HestonParams):
    """The 7-day expiry with its strikes run into both far wings (4 sds below, 6 above): about 20 zero-bid quotes."""
    e = ["2026-12-08"]
    t = 7 / 365
    ks = strikes_for(p, t, n_sd_low=4.0, n_sd_high=6.0, n=40)
    return heston_chain(p, e, realistic=True, strikes=[ks], base=0.03), e


def run_case(label, p, snap_t_strikes, expiries):
    snap, t, _ = snap_t_strikes
    ann = annotate(snap, PipelineSettings(basis="365"))
    c = ann.contracts
    worst = {"near": 0.0, "wing": 0.0, "atm": 0.0, "wiggle": 0.0}
    for e, ti in zip(expiries, t):
        s = score(ann, p, e, ti)
        sub = c[(c["expiry"] == np.datetime64(e)) & c["otm"]]
        zero_bid = int((sub["bid"] <= 0).sum())
        row = ann.expiries.set_index("expiry").loc[np.datetime64(e)]
        status = row.get("smile_status", "arbitrage-free" if row["arbitrage_free"] else "arbitrage")
        print(f"  {label:22s} {e} {int(round(ti * 365)):4d}d  near {s['near']:.4f}  wing {s['wing']:.4f}  "
              f"ATM IV err {s['atm']:.3f} vp  wiggle {s['wiggle']:.3f} vp  skew {'-' if s['skew_sign'] < 0 else '+'}  "
              f"fit err {s['rmse']:.3f} vp  zero-bid {zero_bid:2d}  {status}")
        for key in worst:
            worst[key] = max(worst[key], s[key])
    return worst


def main() -> None:
    import argparse
    import os
    import subprocess
    import tempfile

    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--baseline", metavar="REV", help="also score core/ of this git revision, first")
    args = parser.parse_args()
    if args.baseline:
        sys.path.insert(0, str(Path(__file__).parent))
        from bench_pipeline import export_revision

        with tempfile.TemporaryDirectory() as tmp:
            root = export_revision(args.baseline, tmp)
            env = dict(os.environ, PYTHONPATH=root + os.pathsep + os.environ.get("PYTHONPATH", ""))
            print(f"=== baseline: core/ of {args.baseline}")
            sys.stdout.flush()
            subprocess.run([sys.executable, __file__], env=env, check=True)
        print("=== now")
    score_all()


def score_all() -> None:
    print("P(beyond) error (largest over out-of-the-money strikes), ATM IV error (vol points):")
    summary = {}
    for name, p in (("strong skew", STRONG_SKEW), ("mild", MILD)):
        summary[name, "clean"] = run_case(f"{name} clean", p, heston_chain(p, EXPIRIES, realistic=False), EXPIRIES)
        summary[name, "realistic"] = run_case(f"{name} realistic", p, heston_chain(p, EXPIRIES, realistic=True),
                                              EXPIRIES)
        chain, e = seven_day_zero_bid_chain(p)
        summary[name, "7d zero-bid"] = run_case(f"{name} 7d far wings", p, chain, e)
    print()
    print("worst per case                       near    wing   ATM IV (vp)  wiggle (vp)  target near/wing")
    for (name, case), w in summary.items():
        target = "0.005 / 0.010, ATM 0.1" if case == "clean" else "0.015 / 0.015"
        print(f"  {name:12s} {case:14s}      {w['near']:.4f}  {w['wing']:.4f}  {w['atm']:8.3f}  {w['wiggle']:8.3f}"
              f"     {target}")


if __name__ == "__main__":
    main()
