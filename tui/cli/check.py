"""`chaintriage check`: validate snapshot files and report every finding."""

from __future__ import annotations

import argparse
import json
import re
from collections.abc import Sequence
from typing import Any, TextIO

from chaintriage.core.findings import LEFT_OUT, NOTE, WARNING, Finding
from chaintriage.core.loading import FileLoad, LoadResult, SnapshotFileError, load_files
from chaintriage.tui.cli.common import (
    EXIT_OK,
    EXIT_ROWS_LEFT_OUT,
    EXIT_UNUSABLE,
    StdoutWriter,
    add_snapshot_options,
    can_encode,
    error,
    one_line,
    snapshot_options,
)

CHECK_EPILOG = """\
examples:
  chaintriage check chain.csv
  chaintriage check calls.csv puts.csv --format json > report.json
  chaintriage check export.csv --columns columns.toml --underlying QRTZ \\
      --spot 101.25 --as-of 2026-03-20T15:30:00-04:00

Every row is accepted, accepted with a warning, or left out with a reason;
the report lists them by file and severity, with the line numbers a text
editor shows (header = line 1).

exit status:
  0  every row is usable (warnings allowed)
  1  some rows were left out
  2  a file is unusable, or an option or the mapping file is bad
"""


def configure(p: argparse.ArgumentParser) -> None:
    """Add `check`'s description, options and ``func`` to its parser."""
    p.description = ("Validate snapshot files: report the rows accepted, accepted with a\n"
                     "warning, and left out (with the reason), by file and severity.")
    p.epilog = CHECK_EPILOG
    p.add_argument("files", nargs="+", metavar="FILE", help="snapshot files (CSV, or Parquet with pyarrow)")
    add_snapshot_options(p)
    p.add_argument("--format", choices=("plain", "json"), default="plain",
                   help="report format on stdout (default: plain)")
    p.set_defaults(func=run_check)


_SEVERITY_TITLES = ((LEFT_OUT, "left out"), (WARNING, "warnings"), (NOTE, "notes"))


def _finding_line(f: Finding, *, with_file: bool = False) -> str:
    where = f.location(with_file=with_file)
    return one_line(f"{where}: {f.reason}" if where else f.reason)


def _ordered_outcomes(paths: Sequence[str], result: LoadResult) -> list[FileLoad | SnapshotFileError]:
    """Loads and errors in the order the files were given."""
    pending: list[FileLoad | SnapshotFileError] = [*result.files, *result.errors]
    out = []
    for p in paths:
        for i, item in enumerate(pending):
            if item.path == str(p):
                out.append(pending.pop(i))
                break
    return out + pending


def _summary(result: LoadResult) -> dict[str, int]:
    findings = [f for f in result.findings] + [f for e in result.errors for f in e.findings]
    return {
        "files": len(result.files) + len(result.errors),
        "unusable": len(result.errors),
        "rows_read": result.rows_read,
        "rows_accepted": result.rows_accepted,
        "warnings": sum(f.severity == WARNING for f in findings),
        "left_out": result.rows_left_out,
    }


def check_status(result: LoadResult) -> int:
    """Exit status of `check` for a load result."""
    if result.errors:
        return EXIT_UNUSABLE
    if result.rows_left_out:
        return EXIT_ROWS_LEFT_OUT
    return EXIT_OK


def summary_line(s: dict[str, int]) -> str:
    files = f"{s['files']} file" + ("s" if s["files"] != 1 else "")
    if s["unusable"]:
        files += f" ({s['unusable']} unusable)"
    return (f"{files}, {s['rows_read']} rows read, {s['rows_accepted']} accepted, "
            f"{s['warnings']} warnings, {s['left_out']} left out")


def write_plain_report(paths: Sequence[str], result: LoadResult, out: TextIO) -> None:
    """The `check` report as plain text: findings grouped by file and severity, then a summary line."""
    for item in _ordered_outcomes(paths, result):
        if isinstance(item, SnapshotFileError):
            head = f"{item.path}: unusable"
            if item.rows_read:
                head += f" ({item.rows_read} rows read, 0 accepted)"
            findings = item.findings
        else:
            head = (f"{item.path}: {item.rows_read} rows read, {item.rows_accepted} accepted, "
                    f"{item.rows_left_out} left out")
            findings = item.findings
        print(one_line(head), file=out)
        for severity, title in _SEVERITY_TITLES:
            group = [f for f in findings if f.severity == severity]
            if group:
                print(f"  {title} ({len(group)})", file=out)
                for f in group:
                    print(f"    {_finding_line(f)}", file=out)
    across = [f for f in result.findings if f.file is None]
    if across:
        print("across files", file=out)
        for f in across:
            print(f"  {f.severity}: {_finding_line(f)}", file=out)
    print(summary_line(_summary(result)), file=out)


def json_report(paths: Sequence[str], result: LoadResult) -> dict[str, Any]:
    """The `check` report as a JSON-ready dict."""
    files = []
    for item in _ordered_outcomes(paths, result):
        if isinstance(item, SnapshotFileError):
            files.append({
                "path": item.path, "usable": False, "error": item.reason,
                "rows_read": item.rows_read, "rows_accepted": 0, "rows_left_out": item.rows_read,
                "snapshots": [], "findings": [f.as_dict() for f in item.findings],
            })
        else:
            files.append({
                "path": item.path, "usable": True, "error": None,
                "rows_read": item.rows_read, "rows_accepted": item.rows_accepted,
                "rows_left_out": item.rows_left_out,
                "snapshots": [{
                    "underlying": s.underlying, "as_of": s.as_of.isoformat(), "spot": s.spot,
                    "contracts": len(s.contracts), "expiries": len(s.expiries()),
                } for s in item.snapshots],
                "findings": [f.as_dict() for f in item.findings],
            })
    return {
        "files": files,
        "findings_across_files": [f.as_dict() for f in result.findings if f.file is None],
        "summary": _summary(result),
        "exit_status": check_status(result),
    }


#: Characters json.dumps(ensure_ascii=False) leaves raw that a terminal may act on or that hide text:
#: C1 controls (U+009B is a one-byte CSI), invisible and bidirectional marks, line separators.
_UNSAFE_IN_JSON = re.compile("[\x7f-\x9f\u200b-\u200f\u2028\u2029\u202a-\u202e\u2066-\u2069\ufeff]")


def json_text(report: dict[str, Any], *, ascii_only: bool = False) -> str:
    """The JSON report as text: readable non-ASCII kept (escaped as \\uXXXX with ``ascii_only``, for
    an output that cannot hold it), but every character a terminal could act on escaped."""
    text = json.dumps(report, indent=2, ensure_ascii=ascii_only)
    return _UNSAFE_IN_JSON.sub(lambda m: f"\\u{ord(m.group()):04x}", text) + "\n"


def run_check(args: argparse.Namespace) -> int:
    overrides, column_map = snapshot_options(args)
    result = load_files(args.files, overrides=overrides, column_map=column_map)
    for exc in result.errors:
        error(str(exc))
    if args.format == "json":
        report = json_report(args.files, result)
        text = json_text(report)
        StdoutWriter().write(text if can_encode(text) else json_text(report, ascii_only=True))
    else:
        write_plain_report(args.files, result, StdoutWriter())
    return check_status(result)
