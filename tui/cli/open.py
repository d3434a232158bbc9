"""`chaintriage open`: open the triage app on snapshot files (the demo when none are given)."""

from __future__ import annotations

import argparse
import os

from chaintriage.core.findings import ChainTriageError
from chaintriage.tui.cli.common import add_snapshot_options, snapshot_options
from chaintriage.tui.cli.model_options import add_pipeline_options, pipeline_settings

OPEN_EPILOG = """\
examples:
  chaintriage                      (the bundled demo chains)
  chaintriage open chain.csv
  chaintriage open morning.csv afternoon.csv --basis 365
  chaintriage open export.csv --columns columns.toml
  chaintriage open chain.csv --events events.csv     (y: vols by expiry, events marked)
  chaintriage open chain.csv --history prices.csv    (h: realised vol and the cone)

The demo opens with its fictional price histories and events. A history file
holds daily bars (date, open, high, low, close; adjusted for splits and
dividends) of the snapshots' underlyings; its rows after a snapshot's day are
not used. History is not a forecast.

Files bigger than 100 MB together are refused with a message (use check or
table on them, which read big files block by block, or split them).

Every figure is a model output from market quotes under stated assumptions;
it is not advice. Press ? in the app for keys and cautions.
"""


def configure(p: argparse.ArgumentParser) -> None:
    """Add `open`'s description, options and ``func`` to its parser."""
    p.description = "Open the triage app on one or more snapshot files."
    p.epilog = OPEN_EPILOG
    p.add_argument("files", nargs="*", metavar="FILE", help="snapshot files; none opens the bundled demo")
    add_snapshot_options(p)
    add_pipeline_options(p)
    p.add_argument("--events", action="append", default=[], metavar="FILE",
                   help="events file (CSV: underlying, date, timing, label); repeatable")
    p.add_argument("--event", action="append", default=[], metavar="UNDERLYING:DATE[:amc|bmo]",
                   help="one event, after the close unless :bmo; repeatable")
    p.add_argument("--history", action="append", default=[], metavar="HISTORY",
                   help="daily price history of an underlying (CSV or Parquet): realised vol, the cone and "
                        "history columns; repeatable")
    p.add_argument("--history-columns", metavar="MAP.toml",
                   help="TOML file that maps history column names to the history files' headers")
    p.set_defaults(func=run_open)


def run_open(args: argparse.Namespace) -> int:
    from chaintriage.core.loading import too_big_to_open
    from chaintriage.tui.app import open_app  # lazy: textual loads only for the app

    from chaintriage.core.event_file import read_events_files
    from chaintriage.core.events import parse_event_option
    from chaintriage.core.findings import ChainTriageError
    from chaintriage.tui.cli.common import EXIT_UNUSABLE, error, one_line

    overrides, column_map = snapshot_options(args)
    refusal = too_big_to_open(args.files)
    if refusal:
        raise ChainTriageError(refusal)
    events = None
    if args.events or args.event:
        events = []
        for text in args.event:
            try:
                events.append(parse_event_option(text))
            except ChainTriageError as exc:
                error(str(exc))
                return EXIT_UNUSABLE
        got, findings, errors = read_events_files(args.events)
        for exc in errors:
            error(str(exc))
        if errors:
            return EXIT_UNUSABLE
        for f in findings:
            error(one_line(str(f)))
        events.extend(got)
    history_map = None
    if args.history_columns:
        from chaintriage.core.history_file import load_history_column_map

        history_map = load_history_column_map(args.history_columns)
    missing = [p for p in args.history if not os.path.isfile(p)]
    for p in missing:
        error(f"{p}: no such history file")
    if missing:
        return EXIT_UNUSABLE
    return open_app(args.files, overrides=overrides, column_map=column_map, settings=pipeline_settings(args),
                    events=events, histories=args.history if args.history else None,
                    history_column_map=history_map)
