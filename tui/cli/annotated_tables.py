"""What `table`, `expiries` and `targets` share: their common options, loading and annotating
the files, and reporting the findings on stderr.

Both load snapshot files, run the core pipeline and print one table on
stdout (plain, csv or json). Findings go to stderr. Exit status as `check`:
0 every row usable, 1 rows left out, 2 a file unusable or a bad option.
"""

from __future__ import annotations

import argparse
import sys

import pandas as pd

from chaintriage.core.findings import LEFT_OUT, Finding
from chaintriage.core.loading import LoadResult, load_files
from chaintriage.core.pipeline import AnnotatedSnapshot, annotate
from chaintriage.tui.cli.check import _summary, check_status, summary_line
from chaintriage.tui.cli.common import (
    EXIT_ROWS_LEFT_OUT,
    EXIT_UNUSABLE,
    add_snapshot_options,
    error,
    one_line,
    snapshot_options,
)
from chaintriage.tui.cli.model_options import add_pipeline_options, pipeline_settings

COMMON_NOTES = """\
Probabilities and vols are decimals in csv and json (0.084 = 8.4%);
plain output shows percentages. Figures are risk-neutral model outputs
from the quotes (European exercise assumed), not advice.

exit status:
  0  every row is usable (warnings allowed)
  1  some rows were left out (see stderr)
  2  a file is unusable, or an option is bad
"""


def add_table_options(p: argparse.ArgumentParser) -> None:
    """The files and the options `table` and `expiries` both take (snapshot, model, --format, --quiet)."""
    p.add_argument("files", nargs="+", metavar="FILE", help="snapshot files (CSV, or Parquet with pyarrow)")
    add_snapshot_options(p)
    add_pipeline_options(p)
    p.add_argument("--format", choices=("plain", "csv", "json"), default="plain",
                   help="output format on stdout (default: plain)")
    p.add_argument("--quiet", action="store_true",
                   help="print only a summary line on stderr instead of every finding")


def load_and_annotate(args: argparse.Namespace) -> tuple[LoadResult, list[AnnotatedSnapshot]]:
    overrides, column_map = snapshot_options(args)
    settings = pipeline_settings(args)
    result = load_files(args.files, overrides=overrides, column_map=column_map)
    for exc in result.errors:
        error(str(exc))
    annotated = [annotate(s, settings) for s in result.snapshots]
    return result, annotated


def report_findings(args, result: LoadResult, annotated: list[AnnotatedSnapshot]) -> None:
    core: list[Finding] = [f for a in annotated for f in a.findings]
    if not args.quiet:
        for f in [*result.findings, *core]:
            print(one_line(str(f)), file=sys.stderr)
    line = summary_line(_summary(result))
    print(f"{line}; {len(core)} model findings", file=sys.stderr)


def nothing_usable(args, result: LoadResult) -> int:
    report_findings(args, result, [])
    error("no usable snapshot")
    return EXIT_UNUSABLE


def with_as_of(frame: pd.DataFrame, a: AnnotatedSnapshot, fmt: str) -> pd.DataFrame:
    if fmt != "plain":
        frame.insert(1, "as_of", a.snapshot.as_of.isoformat())
    return frame




def annotated_status(result: LoadResult, annotated: list[AnnotatedSnapshot]) -> int:
    """As `check`, and 1 too when the pipeline left rows out (strikes far outside their expiry)."""
    status = check_status(result)
    if status == 0 and any(f.severity == LEFT_OUT for a in annotated for f in a.findings):
        return EXIT_ROWS_LEFT_OUT
    return status
