"""`chaintriage table`: one row per contract with its figures, for scripts."""

from __future__ import annotations

import argparse
import sys

import pandas as pd

from chaintriage.core.findings import ChainTriageError
from chaintriage.core.loading import YEAR_MAX, YEAR_MIN, load_files
from chaintriage.core.pipeline import annotate
from chaintriage.tui.cli.annotated_tables import (
    COMMON_NOTES,
    add_table_options,
    nothing_usable,
    report_findings,
    with_as_of,
)
from chaintriage.tui.cli.check import check_status
from chaintriage.tui.cli.common import EXIT_UNUSABLE, error, snapshot_options
from chaintriage.tui.cli.model_options import non_negative, parse_day, pipeline_settings
from chaintriage.tui.cli.table_output import TableStream

#: Columns of `table`, in order (csv/json add as_of after underlying).
TABLE_COLUMNS = [
    "underlying", "expiry", "strike", "kind", "bid", "ask", "mid", "iv", "sigma_distance",
    "p_beyond", "p_beyond_flat", "p_touch", "delta", "breakeven", "p_breakeven", "spread_pct",
    "open_interest", "flags",
]

TABLE_EPILOG = """\
examples:
  chaintriage table chain.csv
  chaintriage table chain.csv --expiry 2027-01-15 --beyond 1.5 --side puts
  chaintriage table chain.csv --format csv --basis 365 > annotated.csv

--beyond Z keeps out-of-the-money contracts (relative to the forward) whose
sigma distance is at least Z in size: puts below F, calls above.

""" + COMMON_NOTES


def configure(p: argparse.ArgumentParser) -> None:
    """Add `table`'s description, options and ``func`` to its parser."""
    p.description = ("Annotate every contract: mid, implied vol, sigma distance, P(beyond) from the\n"
                     "smile and flat, P(touch), delta, breakeven and its probability, spread, flags.")
    p.epilog = TABLE_EPILOG
    add_table_options(p)
    p.add_argument("--expiry", action="append", default=[], metavar="DATE",
                   help="only this expiry, YYYY-MM-DD (repeatable)")
    p.add_argument("--beyond", type=non_negative, metavar="Z",
                   help="only out-of-the-money contracts at least Z sigmas from the forward")
    p.add_argument("--side", choices=("calls", "puts", "both"), default="both", help="which kinds (default both)")
    p.set_defaults(func=run_table)


def _wanted_expiries(args: argparse.Namespace) -> list[pd.Timestamp]:
    """The --expiry dates; raises ChainTriageError for one that is not a date the loader could hold."""
    wanted = []
    for text in args.expiry:
        day = parse_day(text)
        # a date the loader could hold: naive, inside its years (year 1 is outside pandas' ns range)
        if day is None or day.tzinfo is not None or not YEAR_MIN <= day.year <= YEAR_MAX:
            raise ChainTriageError(f"--expiry {text!r} is not a date (YYYY-MM-DD)")
        wanted.append(day)
    return wanted


def run_table(args: argparse.Namespace) -> int:
    """Load, then annotate and write one snapshot at a time (csv and json leave as they are made)."""
    overrides, column_map = snapshot_options(args)
    settings = pipeline_settings(args)
    result = load_files(args.files, overrides=overrides, column_map=column_map)
    for exc in result.errors:
        error(str(exc))
    if not result.snapshots:
        return nothing_usable(args, result)
    wanted = _wanted_expiries(args)
    if wanted:
        present = {e for s in result.snapshots for e in s.contracts["expiry"].unique()}
        missing = [w for w in wanted if w not in present]
        if missing:
            have = ", ".join(sorted(f"{e:%Y-%m-%d}" for e in present))
            error(f"no contracts expire on {', '.join(f'{m:%Y-%m-%d}' for m in missing)}; expiries: {have}")
            return EXIT_UNUSABLE
    stream = TableStream(args.format, sys.stdout)
    model_findings = []
    for snap in result.snapshots:
        a = annotate(snap, settings)
        c = a.contracts
        keep = pd.Series(True, index=c.index)
        if wanted:
            keep &= c["expiry"].isin(wanted)
        if args.side != "both":
            keep &= c["kind"] == args.side[:-1]
        if args.beyond is not None:
            keep &= c["otm"] & (c["sigma_distance"].abs() >= args.beyond)
        stream.write(with_as_of(c.loc[keep, TABLE_COLUMNS].copy(), a, args.format))
        model_findings.append(a.findings)
        del a, c, keep
    stream.close()
    report_findings(args, result, model_findings, wanted)
    return check_status(result)
