"""`chaintriage table`: one row per contract with its figures, for scripts."""

from __future__ import annotations

import argparse
import sys

import pandas as pd

from chaintriage.core.loading import YEAR_MAX, YEAR_MIN
from chaintriage.tui.cli.annotated_tables import (
    COMMON_NOTES,
    add_table_options,
    load_and_annotate,
    nothing_usable,
    report_findings,
    with_as_of,
)
from chaintriage.tui.cli.check import check_status
from chaintriage.tui.cli.common import EXIT_UNUSABLE, error
from chaintriage.tui.cli.history import (
    HISTORY_TABLE_COLUMNS,
    add_history_options,
    finish_with_history,
    history_columns,
    history_for,
)
from chaintriage.tui.cli.model_options import non_negative, parse_day
from chaintriage.tui.cli.table_output import render

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

--history FILE adds a second opinion from the underlying's daily prices:
hist_vol (realised vol at the window nearest the expiry), hist_p_beyond and
hist_p_touch (lognormal at hist_vol with the forward's drift), boot_p_beyond
and boot_p_touch (block bootstrap of its own days, with standard errors).
History is not a forecast; see `chaintriage history --help`.

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
    add_history_options(p)
    p.set_defaults(func=run_table)


def run_table(args: argparse.Namespace) -> int:
    result, annotated = load_and_annotate(args)
    if not annotated:
        return nothing_usable(args, result)
    wanted = []
    for text in args.expiry:
        day = parse_day(text)
        # a date the loader could hold: naive, inside its years (year 1 is outside pandas' ns range)
        if day is None or day.tzinfo is not None or not YEAR_MIN <= day.year <= YEAR_MAX:
            error(f"--expiry {text!r} is not a date (YYYY-MM-DD)")
            return EXIT_UNUSABLE
        wanted.append(day)
    history, loads, extra = history_for(args, annotated)
    frames = []
    for i, a in enumerate(annotated):
        c = a.contracts
        keep = pd.Series(True, index=c.index)
        if wanted:
            keep &= c["expiry"].isin(wanted)
        if args.side != "both":
            keep &= c["kind"] == args.side[:-1]
        if args.beyond is not None:
            keep &= c["otm"] & (c["sigma_distance"].abs() >= args.beyond)
        frame = with_as_of(c.loc[keep, TABLE_COLUMNS].copy(), a, args.format)
        if loads is not None:
            cmp = history.get(i)
            frame = history_columns(frame, cmp.contracts if cmp else None, keep, HISTORY_TABLE_COLUMNS)
        frames.append(frame)
    if wanted:
        present = {e for a in annotated for e in a.contracts["expiry"].unique()}
        missing = [w for w in wanted if w not in present]
        if missing:
            have = ", ".join(sorted(f"{e:%Y-%m-%d}" for e in present))
            error(f"no contracts expire on {', '.join(f'{m:%Y-%m-%d}' for m in missing)}; expiries: {have}")
            return EXIT_UNUSABLE
    sys.stdout.write(render(pd.concat(frames, ignore_index=True), args.format))
    report_findings(args, result, annotated)
    return finish_with_history(args, loads, extra, check_status(result))


