"""`chaintriage open`: open the triage app on snapshot files (the demo when none are given)."""

from __future__ import annotations

import argparse

from chaintriage.tui.cli.common import add_snapshot_options, snapshot_options
from chaintriage.tui.cli.model_options import add_pipeline_options, pipeline_settings

OPEN_EPILOG = """\
examples:
  chaintriage                      (the bundled demo chains)
  chaintriage open chain.csv
  chaintriage open morning.csv afternoon.csv --basis 365
  chaintriage open export.csv --columns columns.toml

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
    p.set_defaults(func=run_open)


def run_open(args: argparse.Namespace) -> int:
    from chaintriage.tui.app import open_app  # lazy: textual loads only for the app

    overrides, column_map = snapshot_options(args)
    return open_app(args.files, overrides=overrides, column_map=column_map, settings=pipeline_settings(args))
