"""`chaintriage table` and `chaintriage expiries`: the core tables for scripts.

Both load snapshot files, run the core pipeline and print one table on
stdout (plain, csv or json). Findings go to stderr. Exit status as `check`:
0 every row usable, 1 rows left out, 2 a file unusable or a bad option.
"""

from __future__ import annotations

import argparse
import sys

import pandas as pd

from chaintriage.core.findings import ChainTriageError, Finding
from chaintriage.core.loading import YEAR_MAX, YEAR_MIN, LoadResult, load_files
from chaintriage.core.pipeline import AnnotatedSnapshot, PipelineSettings, annotate
from chaintriage.tui.check_command import check_status, summary_line, _summary
from chaintriage.tui.cli_common import EXIT_UNUSABLE, add_snapshot_options, error, one_line, snapshot_options
from chaintriage.tui.table_output import render

#: Columns of `table`, in order (csv/json add as_of after underlying).
TABLE_COLUMNS = [
    "underlying", "expiry", "strike", "kind", "bid", "ask", "mid", "iv", "sigma_distance",
    "p_beyond", "p_beyond_flat", "p_touch", "delta", "breakeven", "p_breakeven", "spread_pct",
    "open_interest", "flags",
]

#: Columns of `expiries`, in order.
EXPIRY_COLUMNS = [
    "underlying", "expiry", "t_years", "trading_days", "calendar_days", "forward", "discount",
    "forward_method", "atm_iv", "range_low", "range_high", "range_low_smile", "range_high_smile", "fit_rmse",
    "arbitrage_free", "contracts", "findings",
]

#: Columns of `expiries --days`.
HORIZON_COLUMNS = ["underlying", "days", "forward", "range_low", "range_high"]

COMMON_NOTES = """\
Probabilities and vols are decimals in csv and json (0.084 = 8.4%%);
plain output shows percentages. Figures are risk-neutral model outputs
from the quotes (European exercise assumed), not advice.

exit status:
  0  every row is usable (warnings allowed)
  1  some rows were left out (see stderr)
  2  a file is unusable, or an option is bad
"""

TABLE_EPILOG = """\
examples:
  chaintriage table chain.csv
  chaintriage table chain.csv --expiry 2027-01-15 --beyond 1.5 --side puts
  chaintriage table chain.csv --format csv --basis 365 > annotated.csv

--beyond Z keeps out-of-the-money contracts (relative to the forward) whose
sigma distance is at least Z in size: puts below F, calls above.

""" + COMMON_NOTES

EXPIRIES_EPILOG = """\
examples:
  chaintriage expiries chain.csv
  chaintriage expiries chain.csv --confidence 0.95 --format json
  chaintriage expiries chain.csv --days 10 --days 30

With --days, prints instead the range N days ahead (trading days on the
252/250 bases, calendar days on 365), interpolating at-the-money total
variance in time between expiries.

""" + COMMON_NOTES


def _confidence(text: str) -> float:
    try:
        value = float(text.rstrip("%")) / (100.0 if text.endswith("%") else 1.0)
    except ValueError:
        raise argparse.ArgumentTypeError(f"not a number: {text!r}") from None
    if not 0.0 < value < 1.0:
        raise argparse.ArgumentTypeError(f"must be between 0 and 1 (or 0%% and 100%%): {text!r}")
    return value


def _non_negative(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"not a number: {text!r}") from None
    if not value >= 0 or value == float("inf"):
        raise argparse.ArgumentTypeError(f"must be zero or more: {text!r}")
    return value


def _positive(text: str) -> float:
    value = _non_negative(text)
    if value == 0:
        raise argparse.ArgumentTypeError(f"must be more than zero: {text!r}")
    return value


def add_pipeline_options(parser: argparse.ArgumentParser) -> None:
    """Options that change the numbers: --basis, --confidence, --use-file-iv, --closed."""
    group = parser.add_argument_group("model options")
    group.add_argument("--basis", choices=("252", "250", "365"), default="252",
                       help="time basis: trading days per year (252, 250) or calendar ACT/365 (default 252)")
    group.add_argument("--confidence", type=_confidence, default=0.68, metavar="C",
                       help="two-sided confidence of the ranges, e.g. 0.68 or 95%% (default 0.68)")
    group.add_argument("--use-file-iv", action="store_true",
                       help="use the file's iv column (converted to --basis) instead of solving from mids")
    group.add_argument("--closed", action="append", default=[], metavar="DATE",
                       help="an extra exchange-closed date, YYYY-MM-DD (repeatable)")


def _day(text: str) -> pd.Timestamp | None:
    """The date in an option's text (midnight), or None when it is not a date (empty text and 'NaT' included)."""
    try:
        ts = pd.Timestamp(text)
    except (ValueError, TypeError, OverflowError):
        return None
    return None if ts is pd.NaT else ts.normalize()


def pipeline_settings(args: argparse.Namespace) -> PipelineSettings:
    """PipelineSettings from parsed options. Raises ChainTriageError on a bad date."""
    closed = []
    for text in args.closed:
        day = _day(text)
        if day is None:
            raise ChainTriageError(f"--closed {text!r} is not a date (YYYY-MM-DD)")
        closed.append(day)
    return PipelineSettings(basis=args.basis, confidence=args.confidence,
                            use_file_iv=args.use_file_iv, extra_closed=tuple(closed))


def _common(p: argparse.ArgumentParser) -> None:
    p.add_argument("files", nargs="+", metavar="FILE", help="snapshot files (CSV, or Parquet with pyarrow)")
    add_snapshot_options(p)
    add_pipeline_options(p)
    p.add_argument("--format", choices=("plain", "csv", "json"), default="plain",
                   help="output format on stdout (default: plain)")
    p.add_argument("--quiet", action="store_true",
                   help="print only a summary line on stderr instead of every finding")


def add_table_command(subparsers: argparse._SubParsersAction) -> None:
    p = subparsers.add_parser(
        "table", help="one row per contract: vols, sigma distance, finish-beyond and touch odds",
        description="Annotate every contract: mid, implied vol, sigma distance, P(beyond) from the\n"
                    "smile and flat, P(touch), delta, breakeven and its probability, spread, flags.",
        epilog=TABLE_EPILOG, formatter_class=argparse.RawDescriptionHelpFormatter)
    _common(p)
    p.add_argument("--expiry", action="append", default=[], metavar="DATE",
                   help="only this expiry, YYYY-MM-DD (repeatable)")
    p.add_argument("--beyond", type=_non_negative, metavar="Z",
                   help="only out-of-the-money contracts at least Z sigmas from the forward")
    p.add_argument("--side", choices=("calls", "puts", "both"), default="both", help="which kinds (default both)")
    p.set_defaults(func=run_table)


def add_expiries_command(subparsers: argparse._SubParsersAction) -> None:
    p = subparsers.add_parser(
        "expiries", help="one row per expiry: forward, discount, atm iv, ranges, fit quality",
        description="Summarise each expiry: time, parity forward and discount factor, at-the-money\n"
                    "vol, the range at a confidence (plain and from the smile), smile fit quality.",
        epilog=EXPIRIES_EPILOG, formatter_class=argparse.RawDescriptionHelpFormatter)
    _common(p)
    p.add_argument("--days", type=_positive, action="append", default=[], metavar="N",
                   help="print the range N days ahead instead (repeatable)")
    p.set_defaults(func=run_expiries)


def _load_and_annotate(args: argparse.Namespace) -> tuple[LoadResult, list[AnnotatedSnapshot]]:
    overrides, column_map = snapshot_options(args)
    settings = pipeline_settings(args)
    result = load_files(args.files, overrides=overrides, column_map=column_map)
    for exc in result.errors:
        error(str(exc))
    annotated = [annotate(s, settings) for s in result.snapshots]
    return result, annotated


def _report_findings(args, result: LoadResult, annotated: list[AnnotatedSnapshot]) -> None:
    core: list[Finding] = [f for a in annotated for f in a.findings]
    if not args.quiet:
        for f in [*result.findings, *core]:
            print(one_line(str(f)), file=sys.stderr)
    line = summary_line(_summary(result))
    print(f"{line}; {len(core)} model findings", file=sys.stderr)


def _nothing_usable(args, result: LoadResult) -> int:
    _report_findings(args, result, [])
    error("no usable snapshot")
    return EXIT_UNUSABLE


def _with_as_of(frame: pd.DataFrame, a: AnnotatedSnapshot, fmt: str) -> pd.DataFrame:
    if fmt != "plain":
        frame.insert(1, "as_of", a.snapshot.as_of.isoformat())
    return frame


def run_table(args: argparse.Namespace) -> int:
    result, annotated = _load_and_annotate(args)
    if not annotated:
        return _nothing_usable(args, result)
    wanted = []
    for text in args.expiry:
        day = _day(text)
        # a date the loader could hold: naive, inside its years (year 1 is outside pandas' ns range)
        if day is None or day.tzinfo is not None or not YEAR_MIN <= day.year <= YEAR_MAX:
            error(f"--expiry {text!r} is not a date (YYYY-MM-DD)")
            return EXIT_UNUSABLE
        wanted.append(day)
    frames = []
    for a in annotated:
        c = a.contracts
        keep = pd.Series(True, index=c.index)
        if wanted:
            keep &= c["expiry"].isin(wanted)
        if args.side != "both":
            keep &= c["kind"] == args.side[:-1]
        if args.beyond is not None:
            keep &= c["otm"] & (c["sigma_distance"].abs() >= args.beyond)
        frames.append(_with_as_of(c.loc[keep, TABLE_COLUMNS].copy(), a, args.format))
    if wanted:
        present = {e for a in annotated for e in a.contracts["expiry"].unique()}
        missing = [w for w in wanted if w not in present]
        if missing:
            have = ", ".join(sorted(f"{e:%Y-%m-%d}" for e in present))
            error(f"no contracts expire on {', '.join(f'{m:%Y-%m-%d}' for m in missing)}; expiries: {have}")
            return EXIT_UNUSABLE
    sys.stdout.write(render(pd.concat(frames, ignore_index=True), args.format))
    _report_findings(args, result, annotated)
    return check_status(result)


def run_expiries(args: argparse.Namespace) -> int:
    result, annotated = _load_and_annotate(args)
    if not annotated:
        return _nothing_usable(args, result)
    if args.days:
        rows = []
        for a in annotated:
            for days in args.days:
                f, lo, hi = a.horizon_range(days)
                rows.append({"underlying": a.snapshot.underlying, "days": days,
                             "forward": f, "range_low": lo, "range_high": hi})
        frame = pd.DataFrame(rows, columns=HORIZON_COLUMNS)
    else:
        frame = pd.concat([_with_as_of(a.expiries[EXPIRY_COLUMNS].copy(), a, args.format) for a in annotated],
                          ignore_index=True)
    sys.stdout.write(render(frame, args.format))
    _report_findings(args, result, annotated)
    return check_status(result)
