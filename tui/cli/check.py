"""`chaintriage check`: validate snapshot files and report every finding."""

from __future__ import annotations

import argparse
import dataclasses
import heapq
import json
import re
import tempfile
from pathlib import Path
from collections.abc import Iterator, Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any, TextIO

from chaintriage.core.findings import LEFT_OUT, NOTE, SEVERITIES, WARNING, Finding
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

if TYPE_CHECKING:  # pragma: no cover
    from chaintriage.core.finding_table import FindingGroup, FindingTable
    from chaintriage.core.loading import FileLoad, LoadResult, SnapshotFileError

# numpy and the loader (core.loading, core.finding_table) are imported by the functions that use
# them, so that `check --help` (and the modules that import names from here) load none of them.

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


def group_line(group: FindingGroup, table: FindingTable | None, *, with_file: bool = False,
               severity: bool = False) -> str:
    """One report line for a group: the finding itself when alone, else its topic, count and line ranges.

    ``severity`` puts the severity between place and message (``place: warning: message``).
    """
    from chaintriage.core.finding_table import ranges_text

    if group.count == 1:
        f = group.first if group.first is not None else table[int(group.rows[0])]
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
    write_groups(findings.groups(), findings.counts(), out, indent)


def write_groups(groups: Sequence[FindingGroup], counts: dict[str, int], out: TextIO, indent: str = "  ") -> None:
    """Groups of findings by severity (``counts``: findings per severity), as ``write_grouped``."""
    for severity, title in _SEVERITY_TITLES:
        mine = [g for g in groups if g.severity == severity]
        if not mine:
            continue
        n = counts[severity]
        k = len(mine)
        head = f"{indent}{title} ({n})" if k == n else f"{indent}{title} ({n}, in {k} group{'s' if k != 1 else ''})"
        print(head, file=out)
        for g in mine:
            print(f"{indent}  {group_line(g, None)}", file=out)


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


@dataclass
class FileOutcome:
    """What the report says about one file: its rows, its findings' groups and counts, and (json only)
    every finding and its snapshots. ``error`` is the reason when the file is unusable."""

    path: str
    error: str | None
    rows_read: int
    rows_accepted: int
    groups: list[FindingGroup]
    counts: dict[str, int]
    findings: FindingTable | None = None
    snapshots: list[dict[str, Any]] = field(default_factory=list)

    @property
    def rows_left_out(self) -> int:
        return self.rows_read - self.rows_accepted


def _snapshot_dicts(snapshots) -> list[dict[str, Any]]:
    return [{"underlying": s.underlying, "as_of": s.as_of.isoformat(), "spot": s.spot,
             "contracts": len(s.contracts), "expiries": len(s.expiries())} for s in snapshots]


def _outcomes(paths: Sequence[str], result: LoadResult, *, every: bool) -> list[FileOutcome]:
    from chaintriage.core.finding_table import FindingTable
    from chaintriage.core.loading import SnapshotFileError

    out = []
    for item in _ordered_outcomes(paths, result):
        t = FindingTable.of(item.findings)
        if isinstance(item, SnapshotFileError):
            out.append(FileOutcome(item.path, item.reason, item.rows_read, 0, t.groups(), t.counts(),
                                   t if every else None))
        else:
            out.append(FileOutcome(item.path, None, item.rows_read, item.rows_accepted, t.groups(), t.counts(),
                                   t if every else None, _snapshot_dicts(item.snapshots)))
    return out


def outcome_summary(outcomes: Sequence[FileOutcome], across: FindingTable) -> dict[str, int]:
    return {
        "files": len(outcomes),
        "unusable": sum(o.error is not None for o in outcomes),
        "rows_read": sum(o.rows_read for o in outcomes),
        "rows_accepted": sum(o.rows_accepted for o in outcomes),
        "warnings": sum(o.counts[WARNING] for o in outcomes) + across.counts()[WARNING],
        "left_out": sum(o.rows_left_out for o in outcomes),
    }


def outcome_status(outcomes: Sequence[FileOutcome]) -> int:
    if any(o.error is not None for o in outcomes):
        return EXIT_UNUSABLE
    return EXIT_ROWS_LEFT_OUT if any(o.rows_left_out for o in outcomes) else EXIT_OK


def write_plain_report(paths: Sequence[str], result: LoadResult, out: TextIO) -> None:
    """The `check` report as plain text: findings grouped by file and severity, then a summary line."""
    _write_plain(_outcomes(paths, result, every=False), result.findings.where(file=None), out)


def _write_plain(outcomes: Sequence[FileOutcome], across: FindingTable, out: TextIO) -> None:
    for o in outcomes:
        if o.error is not None:
            head = f"{o.path}: unusable"
            if o.rows_read:
                head += f" ({o.rows_read} rows read, 0 accepted)"
        else:
            head = f"{o.path}: {o.rows_read} rows read, {o.rows_accepted} accepted, {o.rows_left_out} left out"
        print(one_line(head), file=out)
        write_groups(o.groups, o.counts, out)
    if len(across):
        print("across files", file=out)
        for f in across:
            print(f"  {f.severity}: {_finding_line(f)}", file=out)
    print(summary_line(outcome_summary(outcomes, across)), file=out)


def json_report(paths: Sequence[str], result: LoadResult) -> dict[str, Any]:
    """The `check` report as a JSON-ready dict.

    Each file has ``findings`` (every finding, one per line) and
    ``finding_groups`` (the same findings grouped per underlying, expiry,
    column and topic, with a count and line runs as [first, last] pairs).
    """
    return _json(_outcomes(paths, result, every=True), result.findings.where(file=None))


def _json(outcomes: Sequence[FileOutcome], across: FindingTable) -> dict[str, Any]:
    files = []
    for o in outcomes:
        files.append({
            "path": o.path, "usable": o.error is None, "error": o.error,
            "rows_read": o.rows_read, "rows_accepted": o.rows_accepted, "rows_left_out": o.rows_left_out,
            "snapshots": o.snapshots, "findings": [f.as_dict() for f in (o.findings or [])],
            "finding_groups": [g.as_dict() for g in o.groups],
        })
    return {
        "files": files,
        "findings_across_files": [f.as_dict() for f in across],
        "summary": outcome_summary(outcomes, across),
        "exit_status": outcome_status(outcomes),
    }


def read_in_parts(paths: Sequence[str], overrides, column_map, *, spill: FindingSpill | None = None,
                  on_part=None) -> tuple[list[FileOutcome], FindingTable, list[SnapshotFileError]]:
    """Big inputs read a few underlyings at a time (``PartLoader``), keeping per file only its counts and
    its findings' groups (every finding goes to ``spill``, for json, when given). ``on_part(part)`` sees
    each part (a LoadResult) before it is let go. Returns the outcomes in the order of ``paths``, the
    findings about no file, and the unusable files' errors."""
    import numpy as np

    from chaintriage.core.finding_table import FindingTable
    from chaintriage.core.loading import PartLoader

    no_rows = np.zeros(0, dtype=np.int64)
    loader = PartLoader(paths, overrides=overrides, column_map=column_map)
    per: dict[str, FileOutcome] = {}
    across: list[FindingTable] = []
    for f in loader.files:
        per[f.path] = FileOutcome(f.path, None, 0, 0, [], {s: 0 for s in SEVERITIES})
    for part in loader:
        for fl in part.files:
            o = per[fl.path]
            o.rows_read += fl.rows_read
            o.rows_accepted += fl.rows_accepted
            t = FindingTable.of(fl.findings)
            o.groups.extend(dataclasses.replace(g, rows=no_rows) for g in t.groups())
            for sev, c in t.counts().items():
                o.counts[sev] += c
            o.snapshots.extend(_snapshot_dicts(fl.snapshots))
            if spill is not None:
                spill.add(fl.path, t)
        across.append(part.findings.where(file=None))
        if on_part is not None:
            on_part(part)
        del part
    for o in per.values():
        # groups of all parts in the order of their first finding, as one file's groups come
        o.groups.sort(key=lambda g: (g.first_line > 0, g.first_line))
    errors = list(loader.errors) + loader.unusable()
    for e in errors:
        o = per.get(e.path)
        if o is None:
            per[e.path] = FileOutcome(e.path, e.reason, 0, 0, [], {s: 0 for s in SEVERITIES})
        else:
            o.error, o.rows_accepted, o.snapshots = e.reason, 0, []
    ordered = []
    pending = dict(per)
    for p in paths:
        if str(p) in pending:
            ordered.append(pending.pop(str(p)))
    return ordered + list(pending.values()), FindingTable.concat(across), errors


#: Indent of one finding of a file in the json report (``json.dumps(report, indent=2)``).
_FINDING_INDENT = " " * 8


class FindingSpill:
    """Every finding of big inputs, kept on disk (a temporary folder) instead of in memory, for the json
    report: each part's findings of a file, sorted by line, as the report's text of each finding; read
    back merged by line (``texts``), the order ``FindingTable.concat(parts).sorted_by_line()`` gives."""

    def __init__(self) -> None:
        self._dir = tempfile.TemporaryDirectory(prefix="chaintriage-check-")
        self._segments: dict[str, list[Path]] = {}
        self._written = 0

    def add(self, path: str, table: FindingTable) -> None:
        """One part's findings of the file ``path``."""
        if not len(table):
            return
        t = table.sorted_by_line()
        segments = self._segments.setdefault(path, [])
        self._written += 1
        name = Path(self._dir.name) / str(self._written)
        lines = t.line.tolist()
        with open(name, "wb") as fh:
            for a in range(0, len(t), 10_000):
                rows = []
                for i in range(a, min(a + 10_000, len(t))):
                    text = json.dumps(t[i].as_dict(), indent=2, ensure_ascii=False)
                    # json escapes every control character inside strings: NUL stands for the layout's line breaks
                    rows.append(f"{int(lines[i] > 0)} {lines[i]} {text.replace(chr(10), chr(0))}\n")
                fh.write("".join(rows).encode("utf-8", "surrogatepass"))
        segments.append(name)

    @staticmethod
    def _read(name: Path) -> Iterator[tuple[int, int, str]]:
        with open(name, "rb") as fh:
            for raw in fh:
                flag, line, text = raw.decode("utf-8", "surrogatepass").rstrip("\n").split(" ", 2)
                yield int(flag), int(line), text

    def texts(self, path: str) -> Iterator[str]:
        """The file's findings as the report writes them (indented), in line order (stable across parts)."""
        merged = heapq.merge(*(self._read(n) for n in self._segments.get(path, [])), key=lambda r: r[:2])
        for _, _, text in merged:
            yield _FINDING_INDENT + text.replace("\0", "\n" + _FINDING_INDENT)

    def close(self) -> None:
        self._dir.cleanup()


#: Characters json.dumps(ensure_ascii=False) leaves raw that a terminal may act on or that hide text:
#: C1 controls (U+009B is a one-byte CSI), invisible and bidirectional marks, line separators.
_UNSAFE_IN_JSON = re.compile("[\x7f-\x9f\u200b-\u200f\u2028\u2029\u202a-\u202e\u2066-\u2069\ufeff]")


def json_text(report: dict[str, Any], *, ascii_only: bool = False) -> str:
    """The JSON report as text: readable non-ASCII kept (escaped as \\uXXXX with ``ascii_only``, for
    an output that cannot hold it), but every character a terminal could act on escaped."""
    text = json.dumps(report, indent=2, ensure_ascii=ascii_only)
    return _UNSAFE_IN_JSON.sub(lambda m: f"\\u{ord(m.group()):04x}", text) + "\n"


def _ascii_escaped(text: str) -> str:
    """Every non-ASCII character as ``\\uXXXX`` (a pair for those above U+FFFF), as ``json.dumps`` escapes."""
    def esc(m: re.Match) -> str:
        c = ord(m.group())
        if c < 0x10000:
            return f"\\u{c:04x}"
        c -= 0x10000
        return f"\\u{0xd800 | (c >> 10):04x}\\u{0xdc00 | (c & 0x3ff):04x}"
    return re.sub("[^\x00-\x7f]", esc, text)


def write_json_streamed(outcomes: Sequence[FileOutcome], across: FindingTable, spill: FindingSpill,
                        out: TextIO) -> None:
    """The json report of big inputs, each file's findings streamed from ``spill``: the text of
    ``json_text`` (each piece's non-ASCII escaped only when the output cannot hold that piece)."""
    def emit(text: str) -> None:
        text = _UNSAFE_IN_JSON.sub(lambda m: f"\\u{ord(m.group()):04x}", text)
        out.write(text if can_encode(text, out) else _ascii_escaped(text))

    report = _json([dataclasses.replace(o, findings=None) for o in outcomes], across)
    empty = '\n      "findings": []'  # each file's (the only key at that indent: strings hold no line break)
    pieces = json.dumps(report, indent=2, ensure_ascii=False).split(empty)
    emit(pieces[0])
    for o, rest in zip(outcomes, pieces[1:]):
        items = spill.texts(o.path)
        first = next(items, None)
        if first is None:
            emit(empty)
        else:
            batch = ['\n      "findings": [\n' + first]
            for text in items:
                batch.append(text)
                if len(batch) >= 5_000:
                    emit(",\n".join(batch) + ",\n")
                    batch = []
            emit(",\n".join(batch) + "\n      ]")
        emit(rest)
    emit("\n")


def run_check(args: argparse.Namespace) -> int:
    from chaintriage.core import loading
    from chaintriage.core.loading import inputs_bytes, load_files

    overrides, column_map = snapshot_options(args)
    if inputs_bytes(args.files) > loading.PART_INPUT_BYTES:  # big: a few underlyings at a time
        spill = FindingSpill() if args.format == "json" else None
        try:
            outcomes, across, errors = read_in_parts(args.files, overrides, column_map, spill=spill)
            for exc in errors:
                error(str(exc))
            if spill is not None:
                write_json_streamed(outcomes, across, spill, StdoutWriter())
            else:
                _write_plain(outcomes, across, StdoutWriter())
        finally:
            if spill is not None:
                spill.close()
        return outcome_status(outcomes)
    result = load_files(args.files, overrides=overrides, column_map=column_map)
    for exc in result.errors:
        error(str(exc))
    if args.format == "json":
        _write_json(json_report(args.files, result))
    else:
        write_plain_report(args.files, result, StdoutWriter())
    return check_status(result)


def _write_json(report: dict[str, Any]) -> None:
    text = json_text(report)
    StdoutWriter().write(text if can_encode(text) else json_text(report, ascii_only=True))
