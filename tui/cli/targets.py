"""`chaintriage targets`: per expiry, the strike nearest a target, for scripts and terminals.

Loads snapshot files, runs the core pipeline and prints one row per expiry
(core.targets): the contract of the chosen side nearest a sigma distance, an
|delta| or a P(beyond), its neighbouring strikes, the quote, the odds, and the
economics at the bid and the ask. Plain, csv or json on stdout; findings on
stderr; exit status as `table` and `check`.
"""

from __future__ import annotations

import argparse
import math
import sys
from typing import TYPE_CHECKING

from chaintriage.tui.cli.annotated_tables import (
    annotated_status,
    COMMON_NOTES,
    add_table_options,
    load_and_annotate,
    nothing_usable,
    report_findings,
    with_as_of,
)
from chaintriage.tui.cli.common import write_out

if TYPE_CHECKING:  # pragma: no cover
    from chaintriage.core.targets import Target

# pandas, core.targets and the table writer are imported by the functions that run the command, so
# that `targets --help` loads none of them.

#: Columns of `targets`, in order (csv/json add as_of after underlying).
TARGETS_COLUMNS = [
    "underlying", "expiry", "calendar_days", "trading_days", "kind", "strike", "strike_below", "strike_above",
    "bid", "ask", "iv", "delta", "sigma_distance", "p_beyond", "p_touch", "p_profit_sell", "p_profit_buy",
    "premium_per_day_sell", "return_sell", "return_sell_annual", "spread_pct", "open_interest", "flags",
]

TARGETS_EPILOG = """\
examples:
  chaintriage targets chain.csv --side puts --sigma 1.5
  chaintriage targets chain.csv --side calls --delta 0.16
  chaintriage targets chain.csv --side puts --beyond 0.10 --format csv

One row per expiry: the contract of the chosen side whose measure is nearest
the target, with the next listed strike below and above it. --sigma Z is the
sigma distance out of the money (ln(K/F) / (atm iv sqrt(T)), counted upward
for calls and downward for puts; below zero is in the money); --delta D is
|delta|; --beyond P is the chance of finishing beyond the strike (0.10 or 10%).
An expiry with no usable contract of that side prints empty figures.

P(profit) is the chance of ending expiry ahead at the bid (seller) or the ask
(buyer), risk-neutral and at expiry only. The return is the seller's simple
return on capital: a cash-secured put earns bid / (strike - bid), a covered
call bid / spot; annualised simply as return x 365 / calendar days. Returns
leave out commissions, assignment and margin rules.

""" + COMMON_NOTES


def _finite(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"not a number: {text!r}") from None
    if not math.isfinite(value):
        raise argparse.ArgumentTypeError(f"must be a finite number: {text!r}")
    return value


def _fraction(text: str) -> float:
    """A decimal in (0, 1), or a percentage with '%'."""
    try:
        value = float(text.rstrip("%")) / (100.0 if text.endswith("%") else 1.0)
    except ValueError:
        raise argparse.ArgumentTypeError(f"not a number: {text!r}") from None
    if not 0.0 < value < 1.0:
        raise argparse.ArgumentTypeError(f"must be between 0 and 1 (or 0%% and 100%%): {text!r}")
    return value


def configure(p: argparse.ArgumentParser) -> None:
    """Add `targets`' description, options and ``func`` to its parser."""
    p.description = ("For each expiry, the call or put nearest a target (a sigma distance, an |delta| or a\n"
                     "P(beyond)) with its neighbouring strikes, quote, odds and economics at the bid and ask.")
    p.epilog = TARGETS_EPILOG
    add_table_options(p)
    p.add_argument("--side", choices=("calls", "puts"), required=True, help="which kind to target")
    target = p.add_mutually_exclusive_group(required=True)
    target.add_argument("--sigma", type=_finite, metavar="Z", help="sigma distance out of the money, e.g. 1.5")
    target.add_argument("--delta", type=_fraction, metavar="D", help="|delta|, e.g. 0.16")
    target.add_argument("--beyond", type=_fraction, metavar="P", help="P(beyond), e.g. 0.10 or 10%%")
    p.set_defaults(func=run_targets)


def target_from_args(args: argparse.Namespace) -> Target:
    """The core Target of the parsed options (exactly one of --sigma, --delta, --beyond is set)."""
    from chaintriage.core.targets import Target

    for measure in ("sigma", "delta", "beyond"):
        value = getattr(args, measure)
        if value is not None:
            return Target(args.side, measure, value)
    raise ValueError("no target given")  # argparse's required group prevents this


def run_targets(args: argparse.Namespace) -> int:
    import pandas as pd

    from chaintriage.core.targets import select_targets
    from chaintriage.tui.cli.table_output import render

    result, annotated = load_and_annotate(args)
    if not annotated:
        return nothing_usable(args, result)
    target = target_from_args(args)
    frames = []
    for a in annotated:
        a.fill_touch()  # touch figures are computed per expiry on demand
        table = select_targets(a.contracts, a.expiries, target)
        table.insert(0, "underlying", a.snapshot.underlying)
        table["kind"] = target.side[:-1]
        frames.append(with_as_of(table[TARGETS_COLUMNS].copy(), a, args.format))
    write_out(render(pd.concat(frames, ignore_index=True), args.format))
    report_findings(args, result, [a.findings for a in annotated])
    return annotated_status(result, [a.findings for a in annotated])
