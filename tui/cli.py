"""The `chaintriage` command line.

``chaintriage`` with no arguments opens the app on the bundled demo chains.
Subcommands are registered by the functions in ``COMMANDS`` (see
``add_commands``); each one adds its parser and sets ``func`` to a function
``(args) -> exit status``.

Streams: data (reports, tables) goes to stdout; messages about unusable
files, bad options and other errors go to stderr, prefixed ``chaintriage:``.
Text from files is printed with control characters escaped.
"""

from __future__ import annotations

import argparse
import json
import os
import re
import sys
from collections.abc import Callable, Sequence
from typing import Any, TextIO

from chaintriage.core.findings import LEFT_OUT, NOTE, WARNING, ChainTriageError, Finding
from chaintriage.core.loading import (
    ColumnMap,
    FileLoad,
    LoadResult,
    SnapshotFileError,
    SnapshotOverrides,
    load_column_map,
    load_files,
)

PROG = "chaintriage"

#: Exit status: every row usable (warnings allowed).
EXIT_OK = 0
#: Exit status: some rows were left out.
EXIT_ROWS_LEFT_OUT = 1
#: Exit status: a file was unusable, or an option / mapping file was bad.
EXIT_UNUSABLE = 2

_CONTROL = re.compile("[\x00-\x08\x0b-\x1f\x7f-\x9f\u200b-\u200f\u202a-\u202e\u2066-\u2069\ufeff]")


def plain(text: object) -> str:
    """Text safe to print on a terminal: control and invisible characters escaped."""
    return _CONTROL.sub(lambda m: m.group().encode("unicode_escape").decode("ascii"), str(text))


def error(message: str, stream: TextIO | None = None) -> None:
    """Print a message for the user on stderr."""
    print(f"{PROG}: {plain(message)}", file=stream or sys.stderr)


# --------------------------------------------------------------------------- shared options


def add_snapshot_options(parser: argparse.ArgumentParser) -> None:
    """Options every command that loads snapshot files accepts (--columns, --underlying, --as-of, --spot)."""
    group = parser.add_argument_group("snapshot options")
    group.add_argument("--columns", metavar="MAP.toml",
                       help="TOML file that maps our column names to the file's headers")
    group.add_argument("--underlying", metavar="NAME",
                       help="underlying name for every row (replaces the file's underlying column)")
    group.add_argument("--as-of", metavar="TIME", dest="as_of",
                       help="snapshot time, ISO 8601 with a UTC offset, e.g. 2026-03-20T15:30:00-04:00 "
                            "(replaces the file's as_of column)")
    group.add_argument("--spot", metavar="PRICE", type=_spot_arg,
                       help="underlying price (replaces the file's spot column)")


def _spot_arg(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"not a number: {text!r}") from None
    if not (value > 0 and value != float("inf")):
        raise argparse.ArgumentTypeError(f"must be a positive number: {text!r}")
    return value


def snapshot_options(args: argparse.Namespace) -> tuple[SnapshotOverrides, ColumnMap | None]:
    """The overrides and column map from parsed options. Raises ChainTriageError when one is bad."""
    overrides = SnapshotOverrides(underlying=args.underlying, as_of=args.as_of, spot=args.spot).resolved()
    column_map = load_column_map(args.columns) if args.columns else None
    return overrides, column_map


# --------------------------------------------------------------------------- check


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


def add_check_command(subparsers: argparse._SubParsersAction) -> None:
    p = subparsers.add_parser(
        "check",
        help="validate snapshot files and report every finding",
        description="Validate snapshot files: report the rows accepted, accepted with a\n"
                    "warning, and left out (with the reason), by file and severity.",
        epilog=CHECK_EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("files", nargs="+", metavar="FILE", help="snapshot files (CSV, or Parquet with pyarrow)")
    add_snapshot_options(p)
    p.add_argument("--format", choices=("plain", "json"), default="plain",
                   help="report format on stdout (default: plain)")
    p.set_defaults(func=run_check)


_SEVERITY_TITLES = ((LEFT_OUT, "left out"), (WARNING, "warnings"), (NOTE, "notes"))


def _in_file_location(f: Finding) -> str:
    parts = []
    if f.line is not None:
        parts.append(f"line {f.line}")
    if f.column:
        parts.append(f"[{f.column}]")
    if f.underlying:
        parts.append(f.underlying)
    if f.expiry:
        parts.append(f.expiry)
    return " ".join(parts)


def _finding_line(f: Finding, *, with_file: bool = False) -> str:
    where = f.location() if with_file else _in_file_location(f)
    return plain(f"{where}: {f.reason}" if where else f.reason)


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
        print(plain(head), file=out)
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


def run_check(args: argparse.Namespace) -> int:
    overrides, column_map = snapshot_options(args)
    result = load_files(args.files, overrides=overrides, column_map=column_map)
    for exc in result.errors:
        error(str(exc))
    if args.format == "json":
        json.dump(json_report(args.files, result), sys.stdout, indent=2, ensure_ascii=False)
        sys.stdout.write("\n")
    else:
        write_plain_report(args.files, result, sys.stdout)
    return check_status(result)


# --------------------------------------------------------------------------- parser and main

#: Functions that each register one subcommand on the subparsers object.
#: ``open``, ``table`` and ``expiries`` are to be appended here by their modules
#: (each as ``add_<name>_command(subparsers)`` setting ``func``).
COMMANDS: list[Callable[[argparse._SubParsersAction], None]] = [add_check_command]


def add_commands(subparsers: argparse._SubParsersAction) -> None:
    """Register every subcommand in ``COMMANDS``."""
    for add in COMMANDS:
        add(subparsers)


MAIN_EPILOG = """\
Run without arguments to open the app on the bundled demo chains.

examples:
  chaintriage
  chaintriage check chain.csv
  chaintriage check --help

Every figure is a model output from market quotes under stated assumptions;
it is not advice.
"""


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog=PROG,
        description="Option chain triage from the keyboard.",
        epilog=MAIN_EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("--version", action="version", version=f"%(prog)s {_version()}")
    subparsers = parser.add_subparsers(dest="command", metavar="COMMAND", title="commands")
    add_commands(subparsers)
    return parser


def _version() -> str:
    try:
        from importlib.metadata import version

        return version("chaintriage")
    except Exception:  # not installed (e.g. run from a source tree)
        return "unknown"


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point: returns the exit status."""
    argv = list(sys.argv[1:] if argv is None else argv)
    try:
        if not argv:
            from chaintriage.tui.app import open_app  # lazy: textual loads only for the app

            return open_app([])
        parser = build_parser()
        args = parser.parse_args(argv)
        if getattr(args, "func", None) is None:
            parser.print_help(sys.stderr)
            return EXIT_UNUSABLE
        return args.func(args)
    except ChainTriageError as exc:
        error(str(exc))
        return EXIT_UNUSABLE
    except BrokenPipeError:  # e.g. `chaintriage check big.csv | head`: stop quietly
        try:
            devnull = os.open(os.devnull, os.O_WRONLY)
            os.dup2(devnull, sys.stdout.fileno())
        except (OSError, ValueError, AttributeError):
            pass
        return EXIT_OK
    except KeyboardInterrupt:
        return 130


if __name__ == "__main__":
    sys.exit(main())
