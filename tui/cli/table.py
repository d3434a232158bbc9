"""`chaintriage table`: one row per contract with its figures, for scripts."""

from __future__ import annotations

import argparse
from typing import TYPE_CHECKING

from chaintriage.core.findings import LEFT_OUT, ChainTriageError
from chaintriage.tui.cli.annotated_tables import (
    annotated_status,
    COMMON_NOTES,
    add_table_options,
    nothing_usable,
    report_findings,
    report_groups,
    with_as_of,
)
from chaintriage.tui.cli.check import outcome_status, read_in_parts
from chaintriage.tui.cli.common import EXIT_ROWS_LEFT_OUT, EXIT_UNUSABLE, StdoutWriter, error, snapshot_options
from chaintriage.tui.cli.history import (
    HISTORY_TABLE_COLUMNS,
    HistoryComparer,
    add_history_options,
    finish_with_history,
    history_columns,
    history_for,
)
from chaintriage.tui.cli.model_options import non_negative, parse_day, pipeline_settings

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd

# pandas, the loader, the pipeline and the table writer are imported by the functions that run the
# command, so that `table --help` loads none of them.

#: Columns of `table` up to the flags; the Greeks and the economics at the bid and the ask follow
#: (core.pipeline's GREEK_COLUMNS and TRADE_COLUMNS; see ``TABLE_COLUMNS``).
_QUOTE_COLUMNS = [
    "underlying", "expiry", "strike", "kind", "bid", "ask", "mid", "iv", "sigma_distance",
    "p_beyond", "p_beyond_flat", "p_touch", "p_touch_low", "p_touch_high", "delta", "breakeven", "p_breakeven",
    "spread_pct", "open_interest", "flags",
]


def table_columns() -> list[str]:
    """Columns of `table`, in order (csv/json add as_of after underlying): ``TABLE_COLUMNS``."""
    from chaintriage.core.pipeline import GREEK_COLUMNS, TRADE_COLUMNS

    # Greeks and the economics at the bid and the ask (core/greeks.py, core/trade_economics.py).
    return [*_QUOTE_COLUMNS, *GREEK_COLUMNS, *TRADE_COLUMNS]


def __getattr__(name: str):
    """``TABLE_COLUMNS`` (a list, made once), built when first asked for: it needs core.pipeline."""
    if name == "TABLE_COLUMNS":
        globals()[name] = columns = table_columns()
        return columns
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


TABLE_EPILOG = """\
examples:
  chaintriage table chain.csv
  chaintriage table chain.csv --expiry 2027-01-15 --beyond 1.5 --side puts
  chaintriage table chain.csv --format csv --basis 365 > annotated.csv

--beyond Z keeps out-of-the-money contracts (relative to the forward) whose
sigma distance is at least Z in size: puts below F, calls above.

theta is per day of --basis (a trading day on 252/250, a calendar day on 365);
vega per vol point. A seller gets the bid, a buyer pays the ask: breakevens,
P(profit) (risk-neutral, at expiry), premium per calendar day, the seller's
simple return (cash-secured put: bid / (strike - bid); covered call: bid /
spot) and its simple annualisation (x 365 / calendar days), the buyer's move
to break even in sigmas, and the edge to mid. Returns leave out commissions,
assignment and margin rules.

--history FILE adds a second opinion from the underlying's daily prices:
hist_vol (realised vol at the window nearest the expiry), hist_p_beyond and
hist_p_touch (lognormal at hist_vol with the forward's drift), boot_p_beyond
and boot_p_touch (block bootstrap of its own days, with standard errors).
History is not a forecast; see `chaintriage history --help`.

""" + COMMON_NOTES


def configure(p: argparse.ArgumentParser) -> None:
    """Add `table`'s description, options and ``func`` to its parser."""
    p.description = ("Annotate every contract: mid, implied vol, sigma distance, P(beyond) from the\n"
                     "smile and flat, P(touch), delta, breakeven and its probability, spread, flags;\n"
                     "gamma, theta, vega; and the economics at the bid (seller) and the ask (buyer).")
    p.epilog = TABLE_EPILOG
    add_table_options(p)
    p.add_argument("--expiry", action="append", default=[], metavar="DATE",
                   help="only this expiry, YYYY-MM-DD (repeatable)")
    p.add_argument("--beyond", type=non_negative, metavar="Z",
                   help="only out-of-the-money contracts at least Z sigmas from the forward")
    p.add_argument("--side", choices=("calls", "puts", "both"), default="both", help="which kinds (default both)")
    add_history_options(p)
    p.set_defaults(func=run_table)


def _wanted_expiries(args: argparse.Namespace) -> list[pd.Timestamp]:
    """The --expiry dates; raises ChainTriageError for one that is not a date the loader could hold."""
    from chaintriage.core.loading import YEAR_MAX, YEAR_MIN

    wanted = []
    for text in args.expiry:
        day = parse_day(text)
        # a date the loader could hold: naive, inside its years (year 1 is outside pandas' ns range)
        if day is None or day.tzinfo is not None or not YEAR_MIN <= day.year <= YEAR_MAX:
            raise ChainTriageError(f"--expiry {text!r} is not a date (YYYY-MM-DD)")
        wanted.append(day)
    return wanted


def _selected(a, args: argparse.Namespace, wanted: list[pd.Timestamp], pending=None):
    """The rows of one annotated snapshot that `table` writes (touch figures computed for them), the
    mask that chose them, and the touch columns when a second process computes them (``pending``, a
    ``touch_process.PendingTouch``: the frame's touch cells are then placeholders), else None."""
    import pandas as pd

    if pending is None:  # touch figures are computed on demand: the asked expiries together
        a.touch_many(_touch_expiries(a.results, wanted))
    else:
        pending.attach(a)
    c = a.contracts
    keep = pd.Series(True, index=c.index)
    if wanted:
        keep &= c["expiry"].isin(wanted)
    if args.side != "both":
        keep &= c["kind"] == args.side[:-1]
    if args.beyond is not None:
        keep &= c["otm"] & (c["sigma_distance"].abs() >= args.beyond)
    # boolean selection already copies; a further .copy() would merge the blocks (0.4 s at 200k rows)
    frame = with_as_of(c.loc[keep, _columns()], a, args.format)
    return frame, keep, (pending.columns(keep) if pending is not None else None)


def _touch_expiries(expiries, wanted: list[pd.Timestamp]) -> list[pd.Timestamp]:
    """The expiries whose touch figures `table` computes."""
    return [expiry for expiry in expiries if not wanted or expiry in wanted]


def _annotated(snap, settings, wanted: list[pd.Timestamp], touch_server):
    """``annotate`` of one snapshot and, when ``touch_server`` (``touch_process.TouchServer``) takes
    them, its touch figures being computed by the second process from the moment its smiles are
    fitted (a ``PendingTouch``), else None."""
    from chaintriage.core.pipeline import annotate

    if touch_server is None:
        return annotate(snap, settings), None
    pending = []

    def smiles_ready(source) -> None:
        pending.append(touch_server.submit(source, _touch_expiries(source.results, wanted)))

    a = annotate(snap, settings, smiles_ready=smiles_ready)
    return a, (pending[0] if pending else None)


def _columns() -> list[str]:
    """``TABLE_COLUMNS`` (made on first use)."""
    return globals().get("TABLE_COLUMNS") or __getattr__("TABLE_COLUMNS")


def _latest_snapshot(args: argparse.Namespace, overrides, column_map, wanted) -> tuple[object, set]:
    """A first reading for --history (the history files' rows after the latest snapshot time are left
    out): the latest snapshot time (naive, as a whole reading takes it) and the expiries present."""
    latest = [None]
    present: set = set()

    def on_part(part) -> None:
        for snap in part.snapshots:
            t = snap.as_of.tz_localize(None)
            latest[0] = t if latest[0] is None else max(latest[0], t)
            if wanted:
                present.update(snap.contracts["expiry"].unique())

    read_in_parts(args.files, overrides, column_map, on_part=on_part)
    return latest[0], present


def _run_table_in_parts(args: argparse.Namespace, overrides, column_map, settings) -> int:
    """`table` on big inputs: read a few underlyings at a time, each snapshot annotated, written and let
    go (with --expiry, the chosen rows are kept until every wanted expiry is known to be there). With
    --history the files are read twice: first for the latest snapshot time, which the history files
    are read up to, then to annotate and write."""
    from chaintriage.core.pipeline import annotate
    from chaintriage.tui.cli.table_output import TableStream

    wanted = _wanted_expiries(args)
    compare = None
    if args.history:
        latest, present = _latest_snapshot(args, overrides, column_map, wanted)
        missing = [w for w in wanted if w not in present]
        if latest is not None and not missing:  # else the second reading reports what is wrong
            compare = HistoryComparer(args, latest)
    stream = None
    kept: list[pd.DataFrame] = []
    present: set = set()
    model_findings = []
    seen = [0]

    def on_part(part) -> None:
        nonlocal stream
        snapshots = part.snapshots
        while snapshots:
            snap = snapshots.pop(0)
            seen[0] += 1
            if wanted:
                present.update(snap.contracts["expiry"].unique())
            a = annotate(snap, settings)
            del snap
            frame, keep, _ = _selected(a, args, wanted)  # (big inputs read in parts: in-process)
            if compare is not None:
                cmp = compare(a)
                frame = history_columns(frame, cmp.contracts if cmp else None, keep, HISTORY_TABLE_COLUMNS)
            model_findings.append(a.findings)
            del a, keep
            if wanted:
                kept.append(frame)
                continue
            if stream is None:
                stream = TableStream(args.format, StdoutWriter())
            stream.write(frame)

    outcomes, across, errors = read_in_parts(args.files, overrides, column_map, on_part=on_part)
    for exc in errors:
        error(str(exc))
    if not seen[0]:
        report_groups(args, outcomes, across, [])
        error("no usable snapshot")
        return EXIT_UNUSABLE
    if wanted:
        if _say_missing_expiries(wanted, present):
            return EXIT_UNUSABLE
        stream = TableStream(args.format, StdoutWriter())
        for frame in kept:
            stream.write(frame)
    stream.close()
    report_groups(args, outcomes, across, model_findings, wanted)
    status = outcome_status(outcomes)
    if status == 0 and any(f.severity == LEFT_OUT for fs in model_findings for f in fs):
        status = EXIT_ROWS_LEFT_OUT
    if compare is None:
        return status
    return finish_with_history(args, compare.loads, compare.extra, status)


def _say_missing_expiries(wanted, present) -> bool:
    """Print which asked expiries no contract has (and those that exist); True when any is missing."""
    missing = [w for w in wanted if w not in present]
    if missing:
        have = ", ".join(sorted(f"{e:%Y-%m-%d}" for e in present))
        error(f"no contracts expire on {', '.join(f'{m:%Y-%m-%d}' for m in missing)}; expiries: {have}")
    return bool(missing)


def run_table(args: argparse.Namespace) -> int:
    """Load, then annotate and write one snapshot at a time (csv and json leave as they are made)."""
    from chaintriage.core import loading
    from chaintriage.core.loading import inputs_bytes
    from chaintriage.tui.cli import touch_process

    overrides, column_map = snapshot_options(args)
    settings = pipeline_settings(args)
    size = inputs_bytes(args.files)
    if size > loading.PART_INPUT_BYTES:
        return _run_table_in_parts(args, overrides, column_map, settings)
    # P(touch) of a big chain by a second process, started now to import its modules meanwhile, its
    # figures streamed to the writer (--history annotates every snapshot first: in-process)
    server = touch_process.serve(size) if not args.history else None
    try:
        return _run_table_whole(args, overrides, column_map, settings, server)
    finally:
        if server is not None:
            server.close()


def _run_table_whole(args: argparse.Namespace, overrides, column_map, settings, touch_server) -> int:
    """`table` on inputs read whole (``run_table``)."""
    from chaintriage.core.loading import load_files
    from chaintriage.core.pipeline import annotate
    from chaintriage.tui.cli.table_output import TableStream

    result = load_files(args.files, overrides=overrides, column_map=column_map)
    for exc in result.errors:
        error(str(exc))
    if not result.snapshots:
        return nothing_usable(args, result)
    wanted = _wanted_expiries(args)
    if wanted:
        present = {e for s in result.snapshots for e in s.contracts["expiry"].unique()}
        if _say_missing_expiries(wanted, present):
            return EXIT_UNUSABLE
    stream = TableStream(args.format, StdoutWriter())
    model_findings = []
    history, loads, extra = {}, None, []
    if args.history:  # the history odds need every snapshot's time: annotate them all first
        annotated = [annotate(snap, settings) for snap in result.snapshots]
        history, loads, extra = history_for(args, annotated)
        items = ((i, a, None) for i, a in enumerate(annotated))
    else:  # one snapshot at a time: annotated, written, let go
        items = ((i, *_annotated(snap, settings, wanted, touch_server)) for i, snap in enumerate(result.snapshots))
    for i, a, pending in items:
        frame, keep, late = _selected(a, args, wanted, pending)
        if loads is not None:
            cmp = history.get(i)
            frame = history_columns(frame, cmp.contracts if cmp else None, keep, HISTORY_TABLE_COLUMNS)
        stream.write(frame, late=late)
        model_findings.append(a.findings)  # (the touch findings join this list when they come)
        del a, keep, late, pending
    stream.close()
    if touch_server is not None:
        touch_server.finish()
    report_findings(args, result, model_findings, wanted)
    return finish_with_history(args, loads, extra, annotated_status(result, model_findings))


