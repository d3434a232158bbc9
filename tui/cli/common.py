"""Shared pieces of the command line: exit codes, safe printing, snapshot options.

Streams: data (reports, tables) goes to stdout; messages about unusable
files, bad options and other errors go to stderr, prefixed ``chaintriage:``.
Text from files is printed with control characters escaped.

Whatever the locale, output never fails: ``safe_streams`` makes stdout and
stderr escape (``\\xe9``) what their encoding cannot hold, and ``write_out``
stops quietly when the reader of a pipe goes away (``check big.csv | head``),
so the command still ends with the status its data deserves.
"""

from __future__ import annotations

import argparse
import codecs
import errno
import os
import re
import sys
from typing import TYPE_CHECKING, TextIO

if TYPE_CHECKING:  # pragma: no cover
    from chaintriage.core.loading import ColumnMap, SnapshotOverrides

PROG = "chaintriage"

#: Exit status: every row usable (warnings allowed).
EXIT_OK = 0
#: Exit status: some rows were left out.
EXIT_ROWS_LEFT_OUT = 1
#: Exit status: a file was unusable, or an option / mapping file was bad.
EXIT_UNUSABLE = 2

_CONTROL = re.compile("[\x00-\x08\x0b-\x1f\x7f-\x9f\u200b-\u200f\u202a-\u202e\u2066-\u2069\ufeff]")


_LINE_CONTROL = re.compile("[\x00-\x1f\x7f-\x9f\u2028\u2029\u200b-\u200f\u202a-\u202e\u2066-\u2069\ufeff]")


def _escape(match: re.Match) -> str:
    return match.group().encode("unicode_escape").decode("ascii")


def plain(text: object) -> str:
    """Text safe to print on a terminal: control and invisible characters escaped (tab and newline kept)."""
    return _CONTROL.sub(_escape, str(text))


def one_line(text: object) -> str:
    """Like ``plain``, but tab, newline and line separators escaped too: for one table cell or report line,
    so text from a file cannot break the layout or forge a line of its own."""
    return _LINE_CONTROL.sub(_escape, str(text))


def safe_streams() -> None:
    """Make stdout and stderr escape the characters their encoding cannot hold (ASCII / Latin-1 locales)."""
    for stream in (sys.stdout, sys.stderr):
        try:
            if stream is not None and not _is_utf(stream):
                stream.reconfigure(errors="backslashreplace")
        except (AttributeError, ValueError, OSError):
            pass  # not a text stream we can reconfigure (tests capture, or a closed stream)


def _is_utf(stream: TextIO) -> bool:
    try:
        return codecs.lookup(getattr(stream, "encoding", None) or "ascii").name.startswith("utf")
    except LookupError:
        return False


def can_encode(text: str, stream: TextIO | None = None) -> bool:
    """Whether ``stream`` (stdout) can write ``text`` as it is."""
    stream = stream or sys.stdout
    try:
        text.encode(getattr(stream, "encoding", None) or "utf-8")
    except UnicodeEncodeError:
        return False
    except LookupError:
        return True
    return True


#: Set once stdout's reader has gone away; later output is dropped.
_pipe_closed = False


def write_out(text: str) -> None:
    """Write to stdout. When the reader has gone away, drop this and later output silently."""
    global _pipe_closed
    if _pipe_closed:
        return
    try:
        sys.stdout.write(text)
    except BrokenPipeError:
        _pipe_closed = True
        stdout_to_devnull()


def write_out_bytes(data) -> None:
    """Write UTF-8 text given as bytes (or a byte buffer) to stdout (a big table's lines): straight
    to its byte stream when stdout writes UTF-8 with plain line feeds, so the text is not decoded
    and encoded again; else as text (``write_out``). The same quiet stop when the reader has gone."""
    global _pipe_closed
    if _pipe_closed:
        return
    stream = sys.stdout
    raw = getattr(stream, "buffer", None)
    if raw is None or os.linesep != "\n" or not _is_utf8(stream):
        write_out(bytes(data).decode("utf-8"))
        return
    try:
        stream.flush()  # text written before goes first
        rest = memoryview(data).cast("B")
        while rest:  # an unbuffered stdout (python -u) may take part of it at a time
            done = raw.write(rest)
            if done is None:  # a non-blocking stdout that is full: as its text layer would say
                raise BlockingIOError(errno.EAGAIN, "stdout cannot take more now")
            rest = rest[done:]
    except BrokenPipeError:
        _pipe_closed = True
        stdout_to_devnull()


def _is_utf8(stream: TextIO) -> bool:
    try:
        return codecs.lookup(getattr(stream, "encoding", None) or "ascii").name == "utf-8"
    except LookupError:
        return False


def flush_out() -> None:
    """Flush stdout, with the same quiet stop as ``write_out``."""
    global _pipe_closed
    if _pipe_closed:
        return
    try:
        sys.stdout.flush()
    except BrokenPipeError:
        _pipe_closed = True
        stdout_to_devnull()


class StdoutWriter:
    """A file-like object for ``print(..., file=...)`` that writes through ``write_out``."""

    encoding = property(lambda self: getattr(sys.stdout, "encoding", "utf-8"))

    def write(self, text: str) -> int:
        write_out(text)
        return len(text)

    def write_bytes(self, data: bytes) -> None:
        """Write UTF-8 text given as bytes (``write_out_bytes``)."""
        write_out_bytes(data)

    def flush(self) -> None:
        flush_out()


def stdout_to_devnull() -> None:
    """Point stdout's descriptor at /dev/null (so Python's final flush cannot fail on a closed pipe)."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        os.close(devnull)
    except (OSError, ValueError, AttributeError):
        pass


def error(message: str, stream: TextIO | None = None) -> None:
    """Print a message for the user on stderr."""
    print(f"{PROG}: {one_line(message)}", file=stream or sys.stderr)


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
    from chaintriage.core.loading import SnapshotOverrides, load_column_map

    overrides = SnapshotOverrides(underlying=args.underlying, as_of=args.as_of, spot=args.spot).resolved()
    column_map = load_column_map(args.columns) if args.columns else None
    return overrides, column_map
