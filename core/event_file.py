"""The events file: one scheduled event per row.

CSV (or Parquet) with a header line; headers are matched like a snapshot
file's (case, spaces, hyphens and underscores alike). Columns:

- ``underlying`` (required): the underlying's name, as in its snapshot;
- ``date`` (required): the event's date, ``YYYY-MM-DD`` (New York);
- ``timing`` (optional): ``after_close`` / ``amc`` or ``before_open`` / ``bmo``;
  empty means after the close;
- ``label`` (optional): a short plain-text name, e.g. ``Q4 results``.

Every row is accepted or left out with a finding naming the file, line and
reason; a repeated event (same underlying, date and timing) is kept once.
The bytes are read and decoded by ``loading`` (the one module that reads
files); this module only reads the cells.
"""

from __future__ import annotations

from pathlib import Path

from .column_map import header_key
from .events import AFTER_CLOSE, Event, parse_date, parse_timing
from .findings import LEFT_OUT, WARNING, ChainTriageError, Finding
from .loading import SnapshotFileError, _read_table

#: Largest events file read (bytes): a calendar of events is small.
MAX_EVENTS_FILE_BYTES = 8 * 1024 * 1024

_CONTROL = dict.fromkeys(list(range(0x00, 0x20)) + list(range(0x7F, 0xA0)), " ")


def _clean(text: str) -> str:
    return " ".join(str(text).translate(_CONTROL).split())


def read_events_file(path: str | Path) -> tuple[list[Event], list[Finding]]:
    """Events of one file and the findings about its rows.

    Raises ``SnapshotFileError`` (a ``ChainTriageError``) when the file as a
    whole cannot be used: unreadable, too large, not text, or without the
    required columns.
    """
    name = str(path)
    p = Path(path)
    try:
        if p.is_file() and p.stat().st_size > MAX_EVENTS_FILE_BYTES:
            raise SnapshotFileError(name, f"is larger than {MAX_EVENTS_FILE_BYTES // (1024 * 1024)} MB; "
                                    "an events file holds one row per event")
    except OSError as exc:
        raise SnapshotFileError(name, f"cannot be read ({exc.strerror or exc})") from None
    table = _read_table(name)
    keys = [header_key(h) for h in table.headers]
    where = {k: i for i, k in reversed(list(enumerate(keys)))}
    missing = [c for c in ("underlying", "date") if c not in where]
    if missing:
        raise SnapshotFileError(name, "has no column " + " or ".join(repr(c) for c in missing)
                                + " (an events file needs underlying and date; timing and label are optional)")
    cells = table.cells
    events: list[Event] = []
    findings: list[Finding] = []
    seen: dict[tuple, int] = {}

    def col(key: str) -> list[str]:
        return cells[where[key]].tolist() if key in where else [""] * len(cells)

    for und, date_text, timing_text, label, line, nf, extra in zip(
            col("underlying"), col("date"), col("timing"), col("label"), table.line.tolist(),
            table.nfields.tolist(), table.extra.tolist()):
        def leave_out(reason: str, column: str | None = None) -> None:
            findings.append(Finding(LEFT_OUT, reason, file=name, line=int(line), column=column))

        if nf < len(table.headers) and nf <= max(where["underlying"], where["date"]):
            leave_out(f"row has {nf} fields where the header has {len(table.headers)}")
            continue
        if extra:
            leave_out(f"row has more fields than the header's {len(table.headers)}")
            continue
        und = _clean(und)
        if not und:
            leave_out("underlying is empty", "underlying")
            continue
        date = parse_date(date_text)
        if date is None:
            leave_out(f"date {_clean(date_text)[:40]!r} is not a date written YYYY-MM-DD", "date")
            continue
        timing = AFTER_CLOSE
        if str(timing_text).strip():
            found = parse_timing(timing_text)
            if found is None:
                leave_out(f"timing {_clean(timing_text)[:40]!r} is not after_close (amc) or before_open (bmo)",
                          "timing")
                continue
            timing = found
        key = (und.casefold(), date, timing)
        if key in seen:
            findings.append(Finding(WARNING, f"repeats the event on line {seen[key]}; kept once", file=name,
                                    line=int(line)))
            continue
        seen[key] = int(line)
        events.append(Event(und, date, timing, _clean(label)[:80], f"{name}:{line}"))
    if not events and findings:
        raise SnapshotFileError(name, "has no usable event row", findings=findings, rows_read=len(cells))
    return events, findings


def read_events_files(paths) -> tuple[list[Event], list[Finding], list[ChainTriageError]]:
    """Events of several files: (events, row findings, errors of files that could not be used)."""
    events: list[Event] = []
    findings: list[Finding] = []
    errors: list[ChainTriageError] = []
    for path in paths:
        try:
            ev, fnd = read_events_file(path)
        except ChainTriageError as exc:
            errors.append(exc)
            continue
        events.extend(ev)
        findings.extend(fnd)
    return events, findings, errors
