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

from chaintriage.core.finding_table import FindingTable
from chaintriage.core.findings import LEFT_OUT
from chaintriage.core.loading import LoadResult, load_files
from chaintriage.core.pipeline import AnnotatedSnapshot, annotate
from chaintriage.tui.cli.check import _summary, check_status, group_line, summary_line
from chaintriage.tui.cli.common import (
    EXIT_ROWS_LEFT_OUT,
    EXIT_UNUSABLE,
    add_snapshot_options,
    error,
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


def report_findings(args, result: LoadResult, model_findings: list,
                    wanted: list[pd.Timestamp] | None = None) -> None:
    """Findings on stderr, repeated ones grouped per expiry and reason with a count and line ranges.

    ``model_findings``: the pipeline's findings, one list per annotated
    snapshot. With ``wanted`` expiries, only findings about them (and about no
    expiry in particular) are listed, and the rest counted in one line.
    """
    core = FindingTable.concat(model_findings)
    if not args.quiet:
        every = FindingTable.concat([result.findings, core])
        shown = every
        if wanted:
            days = [f"{w:%Y-%m-%d}" for w in wanted]
            mine = pd.isna(every.expiry) | pd.Series(every.expiry, dtype=object).isin(days).to_numpy(bool)
            shown, rest = every.take(mine), every.take(~mine)
        for g in shown.groups():
            print(group_line(g, shown, with_file=True, severity=True), file=sys.stderr)
        if wanted and len(rest):
            n_exp = len(set(rest.expiry))
            print(f"{len(rest)} more finding{'s' if len(rest) != 1 else ''} about {n_exp} other "
                  f"expir{'ies' if n_exp != 1 else 'y'} not listed (chaintriage check lists every one)",
                  file=sys.stderr)
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




def annotated_status(result: LoadResult, model_findings: list) -> int:
    """As `check`, and 1 too when the pipeline left rows out (strikes far outside their expiry).

    ``model_findings``: the pipeline's findings, one list (or FindingTable) per annotated snapshot.
    """
    status = check_status(result)
    if status == 0 and any(f.severity == LEFT_OUT for fs in model_findings for f in fs):
        return EXIT_ROWS_LEFT_OUT
    return status
