"""`chaintriage expiries`: one row per expiry (forward, discount, at-the-money vol, ranges, fit), for scripts."""

from __future__ import annotations

import argparse
import sys

import pandas as pd

from chaintriage.tui.cli.annotated_tables import (
    COMMON_NOTES,
    add_table_options,
    load_and_annotate,
    nothing_usable,
    report_findings,
    with_as_of,
)
from chaintriage.tui.cli.check import check_status
from chaintriage.tui.cli.model_options import positive
from chaintriage.tui.cli.table_output import render

#: Columns of `expiries`, in order.
EXPIRY_COLUMNS = [
    "underlying", "expiry", "t_years", "trading_days", "calendar_days", "forward", "discount",
    "forward_method", "atm_iv", "range_low", "range_high", "range_low_smile", "range_high_smile", "fit_rmse",
    "arbitrage_free", "contracts", "findings",
]

#: Columns of `expiries --days`.
HORIZON_COLUMNS = ["underlying", "days", "forward", "range_low", "range_high"]

EXPIRIES_EPILOG = """\
examples:
  chaintriage expiries chain.csv
  chaintriage expiries chain.csv --confidence 0.95 --format json
  chaintriage expiries chain.csv --days 10 --days 30

With --days, prints instead the range N days ahead (trading days on the
252/250 bases, calendar days on 365), interpolating at-the-money total
variance in time between expiries.

""" + COMMON_NOTES


def configure(p: argparse.ArgumentParser) -> None:
    """Add `expiries`'s description, options and ``func`` to its parser."""
    p.description = ("Summarise each expiry: time, parity forward and discount factor, at-the-money\n"
                     "vol, the range at a confidence (plain and from the smile), smile fit quality.")
    p.epilog = EXPIRIES_EPILOG
    add_table_options(p)
    p.add_argument("--days", type=positive, action="append", default=[], metavar="N",
                   help="print the range N days ahead instead (repeatable)")
    p.set_defaults(func=run_expiries)


def run_expiries(args: argparse.Namespace) -> int:
    result, annotated = load_and_annotate(args)
    if not annotated:
        return nothing_usable(args, result)
    if args.days:
        rows = []
        for a in annotated:
            for days in args.days:
                f, lo, hi = a.horizon_range(days)
                rows.append({"underlying": a.snapshot.underlying, "days": days,
                             "forward": f, "range_low": lo, "range_high": hi})
        frame = pd.DataFrame(rows, columns=HORIZON_COLUMNS)
    else:
        frame = pd.concat([with_as_of(a.expiries[EXPIRY_COLUMNS].copy(), a, args.format) for a in annotated],
                          ignore_index=True)
    sys.stdout.write(render(frame, args.format))
    report_findings(args, result, annotated)
    return check_status(result)
