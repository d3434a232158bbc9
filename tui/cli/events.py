"""`chaintriage events`: the move the market prices for each scheduled event, for scripts."""

from __future__ import annotations

import argparse
import sys
from typing import TYPE_CHECKING

from chaintriage.core.findings import ChainTriageError
from chaintriage.tui.cli.annotated_tables import (
    annotated_status,
    COMMON_NOTES,
    add_table_options,
    load_and_annotate,
    nothing_usable,
    report_findings,
    with_as_of,
)
from chaintriage.tui.cli.common import EXIT_UNUSABLE, error, one_line, write_out

if TYPE_CHECKING:  # pragma: no cover
    from chaintriage.core.events import Event

# pandas, the events and the term structure are imported by the functions that run a command, so
# that the options (and `--help`) of `events`, `expiries` and `history` load none of them.

#: Columns of `events`, in order.
EVENT_COLUMNS = [
    "underlying", "event", "date", "timing", "first_expiry", "event_variance", "move", "expected_abs_move",
    "move_price", "expected_abs_price", "ordinary_vol", "method", "fit_rmse",
]
#: Columns `events --history` adds: the underlying's past moves on its past event dates.
PAST_MOVE_COLUMNS = ["past_events", "past_mean_abs_move", "past_rms_move", "past_moves"]

EVENTS_EPILOG = """\
examples:
  chaintriage events chain.csv --events events.csv
  chaintriage events chain.csv --event OSPX:2027-01-12:amc --format json
  chaintriage expiries chain.csv --events events.csv

An events file is a CSV with the columns underlying, date (YYYY-MM-DD),
timing (after_close or before_open, also amc / bmo; empty = after the
close) and label. --event UNDERLYING:DATE[:amc|bmo] adds one on the
command line.

The event's variance is the jump in at-the-money total variance across it
beyond the ordinary (ex-event) vol: w(T) = sigma_ex^2 T + e^2 for expiries
after the event, fitted over the expiries around it. move = e (one standard
deviation of the price, as a fraction); expected_abs_move = sqrt(2/pi) e;
move_price and expected_abs_price are those at the spot. An implied move is
the market's price of the event, not a prediction; event dates in files can
be wrong or move.

With --history FILE (daily price history of the underlying) and past events
in the events file (or --event), each row also gives the underlying's past
moves on its event sessions (the close-to-close log return of the session
that carried the news; it holds one ordinary day besides the event):
past_events = how many of the last --last (default 8) were found,
past_mean_abs_move (beside expected_abs_move), past_rms_move (beside move)
and past_moves, each of them newest first (signed decimals). The past is not
a forecast either.

""" + COMMON_NOTES


def add_event_options(p: argparse.ArgumentParser) -> None:
    """--events FILE and --event UNDERLYING:DATE[:amc|bmo] (both repeatable)."""
    p.add_argument("--events", action="append", default=[], metavar="FILE",
                   help="events file (CSV: underlying, date, timing, label); repeatable")
    p.add_argument("--event", action="append", default=[], metavar="UNDERLYING:DATE[:amc|bmo]",
                   help="one event, after the close unless :bmo; repeatable")


def gather_events(args: argparse.Namespace) -> tuple[list[Event], bool, bool]:
    """(events, a file or value was unusable, rows were left out); errors and findings go to stderr."""
    from chaintriage.core.event_file import read_events_files
    from chaintriage.core.events import parse_event_option

    events: list[Event] = []
    bad = False
    for text in args.event:
        try:
            events.append(parse_event_option(text))
        except ChainTriageError as exc:
            error(str(exc))
            bad = True
    got, findings, errors = read_events_files(args.events)
    for exc in errors:
        error(str(exc))
    if not args.quiet:
        for f in findings:
            print(one_line(str(f)), file=sys.stderr)
    left_out = any(f.severity == "left-out" for f in findings)
    return events + got, bad or bool(errors), left_out


def configure(p: argparse.ArgumentParser) -> None:
    """Add `events`'s description, options and ``func`` to its parser."""
    p.description = ("For each scheduled event, the move the options price: the event's variance\n"
                     "separated from the ordinary vol, as one standard deviation and as the\n"
                     "expected absolute move, in percent and in price.")
    p.epilog = EVENTS_EPILOG
    add_table_options(p)
    add_event_options(p)
    p.add_argument("--history", action="append", default=[], metavar="HISTORY",
                   help="daily price history of the underlying: its past moves on past event dates; repeatable")
    p.add_argument("--history-columns", metavar="MAP.toml",
                   help="TOML file that maps history column names to the history files' headers")
    p.add_argument("--last", type=int, default=8, metavar="N",
                   help="how many of the latest past events the past moves use (default 8)")
    p.set_defaults(func=run_events)


def run_events(args: argparse.Namespace) -> int:
    import pandas as pd

    from chaintriage.core.term_structure import snapshot_term_structure
    from chaintriage.tui.cli.table_output import render

    events, bad, left_out = gather_events(args)
    if bad:
        return EXIT_UNUSABLE
    result, annotated = load_and_annotate(args)
    if not annotated:
        return nothing_usable(args, result)
    loads, past = _past_moves(args, annotated, events)
    frames = []
    extra = []
    for a in annotated:
        ts = snapshot_term_structure(a, events)
        extra.extend(ts.findings)
        spot = a.snapshot.spot
        rows = [{
            "underlying": a.snapshot.underlying, "event": est.name,
            "date": pd.Timestamp(est.events[0].date), "timing": est.events[0].timing,
            "first_expiry": est.first_expiry, "event_variance": est.variance, "move": est.move,
            "expected_abs_move": est.expected_abs_move, "move_price": spot * est.move,
            "expected_abs_price": spot * est.expected_abs_move, "ordinary_vol": ts.ordinary_vol,
            "method": est.method, "fit_rmse": ts.fit_rmse / 100.0,
        } for est in ts.events]
        frame = pd.DataFrame(rows, columns=EVENT_COLUMNS)
        if loads is not None:
            moves = past.get(id(a))
            frame["past_events"] = moves.used if moves is not None else 0
            frame["past_mean_abs_move"] = moves.mean_abs if moves is not None else float("nan")
            frame["past_rms_move"] = moves.rms if moves is not None else float("nan")
            frame["past_moves"] = " ".join(f"{m:+.4f}" for m in moves.moves()) if moves is not None else ""
            if moves is not None:
                extra.extend(moves.findings)
        frames.append(with_as_of(frame, a, args.format))
    write_out(render(pd.concat(frames, ignore_index=True), args.format))
    status = report_with_events(args, result, annotated, extra, left_out)
    if loads is not None:
        from chaintriage.tui.cli.common import EXIT_ROWS_LEFT_OUT

        if not args.quiet:
            for f in loads.findings:
                print(one_line(str(f)), file=sys.stderr)
        n = len(loads.files) + len(loads.errors)
        print(f"{n} history file{'s' if n != 1 else ''}, {loads.rows_read} rows read, "
              f"{loads.rows_read - loads.rows_left_out} accepted, {loads.rows_left_out} left out", file=sys.stderr)
        status = max(status, EXIT_UNUSABLE if loads.errors else EXIT_ROWS_LEFT_OUT if loads.rows_left_out else 0)
    return status


def _past_moves(args: argparse.Namespace, annotated: list, events: list[Event]):
    """(the history loads or None without --history, {id(annotated): PastEventMoves})."""
    if not args.history:
        return None, {}
    from chaintriage.core.event_moves import past_event_moves
    from chaintriage.core.history_file import load_histories, load_history_column_map

    if args.last < 1:
        raise ChainTriageError(f"--last {args.last}: give 1 or more")
    cmap = load_history_column_map(args.history_columns) if args.history_columns else None
    until = max(a.snapshot.as_of.tz_localize(None) for a in annotated)
    loads = load_histories(args.history, column_map=cmap, until=until)
    for exc in loads.errors:
        error(str(exc))
    by_name = {h.underlying.strip().casefold(): h for h in loads.histories}
    out = {}
    for a in annotated:
        h = by_name.get(a.snapshot.underlying.strip().casefold())
        if h is None:
            continue
        out[id(a)] = past_event_moves(h.bars, events, h.underlying, last=args.last, before=a.snapshot.as_of)
    return loads, out


def report_with_events(args: argparse.Namespace, result, annotated: list, term_findings: list,
                       events_left_out: bool) -> int:
    """Findings on stderr (the term structure's after the rest) and the exit status, 1 at least when
    the events files had rows left out."""
    report_findings(args, result, [a.findings for a in annotated])
    if not args.quiet:
        for f in term_findings:
            print(one_line(str(f)), file=sys.stderr)
    status = annotated_status(result, [a.findings for a in annotated])
    return max(status, 1) if events_left_out else status
