"""`chaintriage open`: open the triage app on snapshot files (the demo when none are given)."""

from __future__ import annotations

import argparse

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
    return open_app(args.files, overrides=overrides, column_map=column_map, settings=pipeline_settings(args),
                    events=events)
