"""What `table`, `expiries` and `targets` share: their common options, loading and annotating
the files, and reporting the findings on stderr.

Both load snapshot files, run the core pipeline and print one table on
stdout (plain, csv or json). Findings go to stderr. Exit status as `check`:
0 every row usable, 1 rows left out, 2 a file unusable or a bad option.
"""

from __future__ import annotations

import argparse
import sys
from typing import TYPE_CHECKING

from chaintriage.core.findings import LEFT_OUT
from chaintriage.tui.cli.check import outcome_summary, _summary, check_status, group_line, summary_line
from chaintriage.tui.cli.common import (
    EXIT_ROWS_LEFT_OUT,
    EXIT_UNUSABLE,
    add_snapshot_options,
    error,
    snapshot_options,
)
from chaintriage.tui.cli.model_options import add_pipeline_options, pipeline_settings

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd

    from chaintriage.core.finding_table import FindingTable
    from chaintriage.core.loading import LoadResult
    from chaintriage.core.pipeline import AnnotatedSnapshot

# The loader, the pipeline and pandas are imported by the functions that run a command, so that the
# options (and `--help`) of the commands built on this module load none of them.

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
    from chaintriage.core.loading import load_files
    from chaintriage.core.pipeline import annotate

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
    from chaintriage.core.finding_table import FindingTable

    core = FindingTable.concat(model_findings)
    groups = FindingTable.concat([result.findings, core]).groups() if not args.quiet else []
    _report(args, groups, summary_line(_summary(result)), len(core), wanted)


def report_groups(args, outcomes, across: FindingTable, model_findings: list,
                  wanted: list[pd.Timestamp] | None = None) -> None:
    """``report_findings`` for inputs read in parts: the files' groups (``check.FileOutcome``s, in the
    order of the files; an unusable file's left out), those about no file, then the model's."""
    from chaintriage.core.finding_table import FindingTable

    core = FindingTable.concat(model_findings)
    groups = []
    if not args.quiet:
        for o in outcomes:
            if o.error is None:
                groups.extend(o.groups)
        groups.extend(across.groups())
        groups.extend(core.groups())
    _report(args, groups, summary_line(outcome_summary(outcomes, across)), len(core), wanted)


def _report(args, groups, summary: str, n_model: int, wanted) -> None:
    if not args.quiet:
        shown, rest = groups, []
        if wanted:
            days = {f"{w:%Y-%m-%d}" for w in wanted}
            shown = [g for g in groups if g.expiry is None or g.expiry in days]
            rest = [g for g in groups if not (g.expiry is None or g.expiry in days)]
        for g in shown:
            print(group_line(g, None, with_file=True, severity=True), file=sys.stderr)
        n_rest = sum(g.count for g in rest)
        if n_rest:
            n_exp = len({g.expiry for g in rest})
            print(f"{n_rest} more finding{'s' if n_rest != 1 else ''} about {n_exp} other "
                  f"expir{'ies' if n_exp != 1 else 'y'} not listed (chaintriage check lists every one)",
                  file=sys.stderr)
    print(f"{summary}; {n_model} model findings", file=sys.stderr)


def nothing_usable(args, result: LoadResult) -> int:
    report_findings(args, result, [])
    error("no usable snapshot")
    return EXIT_UNUSABLE


def with_as_of(frame: pd.DataFrame, a: AnnotatedSnapshot, fmt: str) -> pd.DataFrame:
    """``frame`` with the snapshot time (ISO text) as column ``as_of`` after the first one (not in plain).

    One value for every row: a categorical of one category (a byte of code per row), where a text column
    would lay out the text once per row (with pyarrow, a fresh buffer of n copies; without it, n object
    pointers). The writers take a categorical of text as text (``table_output._is_text``)."""
    if fmt != "plain":
        import numpy as np
        import pandas as pd

        one = pd.Index([a.snapshot.as_of.isoformat()], dtype=object)
        frame.insert(1, "as_of", pd.Categorical.from_codes(np.zeros(len(frame), dtype=np.int8), one))
    return frame


def annotated_status(result: LoadResult, model_findings: list) -> int:
    """As `check`, and 1 too when the pipeline left rows out (strikes far outside their expiry).

    ``model_findings``: the pipeline's findings, one list (or FindingTable) per annotated snapshot.
    """
    status = check_status(result)
    if status == 0 and any(f.severity == LEFT_OUT for fs in model_findings for f in fs):
        return EXIT_ROWS_LEFT_OUT
    return status
