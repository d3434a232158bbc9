"""`chaintriage check`: validate snapshot files and report every finding."""

from __future__ import annotations

import argparse
import json
import re
from collections.abc import Sequence
from typing import Any, TextIO

from chaintriage.core.finding_table import FindingGroup, FindingTable, ranges_text
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
editor shows (header = line 1). Findings that say the same thing about one
expiry are shown as one line with their count and line ranges (e.g. "lines
96-130"); the json report keeps every finding with its own line, and the
groups beside them.

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


#: Runs of line numbers a plain-report line shows for a group of warnings or notes (json has them all);
#: left-out rows always show every run, so each one can be found.
WARNING_RUNS_SHOWN = 8


def group_line(group: FindingGroup, table: FindingTable, *, with_file: bool = False,
               severity: bool = False) -> str:
    """One report line for a group: the finding itself when alone, else its topic, count and line ranges.

    ``severity`` puts the severity between place and message (``place: warning: message``).
    """
    if group.count == 1:
        f = table[int(group.rows[0])]
        where = f.location(with_file=with_file)
        text = f"{f.severity}: {f.reason}" if severity else f.reason
        return one_line(f"{where}: {text}" if where else text)
    limit = len(group.lines) if group.severity == LEFT_OUT else WARNING_RUNS_SHOWN
    parts = [group.file] if with_file and group.file is not None else []
    if group.lines:
        parts.append(ranges_text(group.lines, limit=limit))
    for extra in (f"[{group.column}]" if group.column else "", group.underlying or "", group.expiry or ""):
        if extra:
            parts.append(extra)
    where = " ".join(parts)
    text = f"{group.severity}: {group.summary()}" if severity else group.summary()
    return one_line(f"{where}: {text}" if where else text)


def write_grouped(findings: FindingTable, out: TextIO, indent: str = "  ") -> None:
    """Findings by severity, each severity's findings grouped per file, underlying, expiry, column and topic."""
    groups = findings.groups()
    counts = findings.counts()
    for severity, title in _SEVERITY_TITLES:
        mine = [g for g in groups if g.severity == severity]
        if not mine:
            continue
        n = counts[severity]
        k = len(mine)
        head = f"{indent}{title} ({n})" if k == n else f"{indent}{title} ({n}, in {k} group{'s' if k != 1 else ''})"
        print(head, file=out)
        for g in mine:
            print(f"{indent}  {group_line(g, findings)}", file=out)


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
    warnings = result.findings.counts()[WARNING] + sum(e.findings.counts()[WARNING] for e in result.errors)
    return {
        "files": len(result.files) + len(result.errors),
        "unusable": len(result.errors),
        "rows_read": result.rows_read,
        "rows_accepted": result.rows_accepted,
        "warnings": warnings,
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
        write_grouped(FindingTable.of(findings), out)
    across = [f for f in result.findings.where(file=None)]
    if across:
        print("across files", file=out)
        for f in across:
            print(f"  {f.severity}: {_finding_line(f)}", file=out)
    print(summary_line(_summary(result)), file=out)


def json_report(paths: Sequence[str], result: LoadResult) -> dict[str, Any]:
    """The `check` report as a JSON-ready dict.

    Each file has ``findings`` (every finding, one per line) and
    ``finding_groups`` (the same findings grouped per underlying, expiry,
    column and topic, with a count and line runs as [first, last] pairs).
    """
    files = []
    for item in _ordered_outcomes(paths, result):
        if isinstance(item, SnapshotFileError):
            files.append({
                "path": item.path, "usable": False, "error": item.reason,
                "rows_read": item.rows_read, "rows_accepted": 0, "rows_left_out": item.rows_read,
                "snapshots": [], "findings": [f.as_dict() for f in item.findings],
                "finding_groups": [g.as_dict() for g in item.findings.groups()],
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
                "finding_groups": [g.as_dict() for g in item.findings.groups()],
            })
    return {
        "files": files,
        "findings_across_files": [f.as_dict() for f in result.findings.where(file=None)],
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
