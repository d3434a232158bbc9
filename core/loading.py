"""Reading snapshot files: the one module that opens files.

A snapshot file is a CSV (or, when pyarrow is installed, Parquet) table with
one row per contract; see DESIGN.md "Snapshot file" and ``column_map`` for the
column names. ``load_file`` turns one file into ``Snapshot`` objects (one per
underlying) plus ``Finding``s: every data row is accepted, accepted with a
warning, or left out with a reason, and ``rows_read == rows_accepted +
left-out rows`` always holds.

Decisions (documented for users in the README):

- Encoding: UTF-8 with or without BOM. Other bytes stop the file with an error
  naming the line (no guessing: a wrong guess would corrupt text silently).
- Line numbers are those a text editor shows (header = line 1), counting
  blank lines and the extra lines of quoted fields that contain newlines.
  ``\\r\\n`` and lone ``\\r`` count as one line break. Parquet rows get the
  line they would have in a CSV with a one-line header (first row = 2).
- Blank lines (nothing but spaces/tabs) are skipped and are not rows.
- A row with fewer fields than the header, or with extra non-empty fields, is
  left out; extra empty fields (a trailing comma) are ignored.
- ``as_of`` must carry a UTC offset (``Z``, ``+05:30``, ``-0500``); a naive
  time leaves the row out, because guessing the zone would shift time to
  expiry by hours. An override (``--as-of``) fixes a whole file.
- ``as_of``/``spot`` empty on some rows of an underlying are filled from its
  other rows (a NOTE says so). If they vary within one underlying, the latest
  ``as_of`` is used, and the spot of the first row at that time (a WARNING
  says so).
- A row is left out for the first problem found, checked in this order:
  field count, underlying, as_of, spot, expiry, strike, kind, bid, ask, the
  bid/ask pair, expiry before the snapshot date, duplicate contract. An
  accepted row may carry several warnings.
- Wide spread warning: ask - bid > 50 % of mid AND > 0.10 price units.
- Numbers are plain decimals (``1250``, ``0.35``, ``1e-3``); no thousands
  separators. ``iv``, ``rate`` and ``div_yield`` may end in ``%``.
- Number columns (spot, strike, bid, ask, iv, volume, open_interest, rate,
  div_yield) are read as numbers by pandas' C reader when every cell of the
  column is a plain decimal or empty; the cells that reader takes but cannot
  judge alone (empty, infinite, integer zeros that may be ``-0``) and the cells
  a message quotes are read again from the file's bytes, so values, findings
  and messages are those of reading every cell as text (the reference, used
  for any column holding other text).
- A file whose every line is a record of the header's width (no quotes, no
  blank lines; the common export) is read without scanning its records: line
  numbers follow from the line breaks, and when it is ASCII with \n line breaks
  it is never decoded as a whole. Any other file is split into records first.
- Text stays plain text: values are never interpreted; control characters in
  ``underlying`` are kept, with a warning. Values quoted in reasons are shown
  escaped (``repr``) so a finding is always safe to print.
"""

from __future__ import annotations

import csv
import difflib
import errno
import io
import math
import os
import re
import stat
from collections import Counter
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from .column_map import (
    KNOWN_COLUMNS,
    REQUIRED_COLUMNS,
    ColumnMap,
    check_expiry_format,
    header_key,
    load_column_map,
)
from .exchange_calendar import TZ as EXCHANGE_TZ
from .finding_table import FindingTable
from .findings import LEFT_OUT, NOTE, SEVERITIES, WARNING, ChainTriageError, Finding
from .snapshot import CONTRACT_COLUMNS, Snapshot

__all__ = [
    "SnapshotFileError",
    "SnapshotOverrides",
    "FileLoad",
    "LoadResult",
    "load_file",
    "load_files",
    "load_column_map",
    "ColumnMap",
    "WIDE_SPREAD_FRACTION",
    "WIDE_SPREAD_MIN",
]

#: A spread wider than this fraction of mid (and than WIDE_SPREAD_MIN) gets a warning.
WIDE_SPREAD_FRACTION = 0.5
#: ... and wider than this many price units.
WIDE_SPREAD_MIN = 0.10
#: A file iv above this (as a decimal, i.e. 500 %) is taken for a unit mistake.
IV_MAX = 5.0
#: A rate or dividend yield above this in absolute value (100 %) is taken for a unit mistake.
RATE_MAX = 1.0
#: Dates outside these years are left out (they are typos, and out of pandas' ns range).
YEAR_MIN, YEAR_MAX = 1900, 2199

_NUM_RE = r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?"
_NONFINITE_RE = r"(?i)[+-]?(?:nan|inf|infinity)"
_DATE_RE = r"\d{4}-\d{2}-\d{2}"
_TIME_RE = r"\d{4}-\d{2}-\d{2}[T ]\d{2}:\d{2}(?::\d{2}(?:\.\d+)?)?"
_OFFSET_RE = r"(?:Z|[+-]\d{2}(?::?\d{2})?)"
_CONTROL_RE = "[\x00-\x1f\x7f-\x9f\u200b-\u200f\u202a-\u202e\u2066-\u2069\ufeff]"
_KINDS = {"call": "call", "c": "call", "put": "put", "p": "put"}
_KIND_CODE = {"call": 0, "put": 1}
_SETTLES = {"pm": "pm", "am": "am"}
_IV_BASES = ("252", "250", "365")
_PARQUET_SUFFIXES = (".parquet", ".pq")


# --------------------------------------------------------------------------- public types


class SnapshotFileError(ChainTriageError):
    """A whole file cannot be used. The message names the file and the reason.

    ``findings`` holds the row findings when the file was read but no row was
    usable; ``rows_read`` counts its data rows (0 when it could not be read).
    """

    def __init__(self, path: str, reason: str, *, findings: Sequence[Finding] = (), rows_read: int = 0):
        self.path = str(path)
        self.reason = reason
        self.findings = FindingTable.of(findings)
        self.rows_read = rows_read
        super().__init__(f"{self.path}: {reason}")


@dataclass
class SnapshotOverrides:
    """Snapshot-wide values given on the command line; they replace file columns.

    ``as_of`` must carry a UTC offset (a tz-aware Timestamp, or ISO 8601 text
    such as ``2026-03-20T15:30:00-04:00``); ``spot`` is in price units.
    """

    underlying: str | None = None
    as_of: pd.Timestamp | str | None = None
    spot: float | None = None

    def resolved(self) -> SnapshotOverrides:
        """A checked copy: stripped underlying, tz-aware Timestamp, finite positive float.

        Raises ChainTriageError with a message when a value is unusable.
        """
        und = self.underlying
        if und is not None:
            und = str(und).strip()
            if not und:
                raise ChainTriageError("the underlying override is empty")
        as_of = self.as_of
        if as_of is not None:
            as_of = parse_as_of(as_of, what="the as_of override")
        spot = self.spot
        if spot is not None:
            try:
                spot = float(spot)
            except (TypeError, ValueError):
                raise ChainTriageError(f"the spot override {spot!r} is not a number") from None
            if not np.isfinite(spot) or spot <= 0:
                raise ChainTriageError(f"the spot override {spot!r} must be a positive number")
        return SnapshotOverrides(underlying=und, as_of=as_of, spot=spot)


@dataclass
class FileLoad:
    """What one file gave: its snapshots (one per underlying), findings and row counts.

    ``findings`` is a FindingTable: a list of every finding when iterated,
    and ``findings.groups()`` for the same findings grouped with line ranges.
    """

    path: str
    snapshots: list[Snapshot]
    findings: FindingTable
    rows_read: int
    rows_accepted: int

    @property
    def rows_left_out(self) -> int:
        return self.rows_read - self.rows_accepted


@dataclass
class LoadResult:
    """Everything ``load_files`` gave: merged snapshots, all findings, per-file loads, file errors."""

    snapshots: list[Snapshot]
    findings: FindingTable
    files: list[FileLoad]
    errors: list[SnapshotFileError]

    @property
    def rows_read(self) -> int:
        return sum(f.rows_read for f in self.files) + sum(e.rows_read for e in self.errors)

    @property
    def rows_accepted(self) -> int:
        return sum(f.rows_accepted for f in self.files)

    @property
    def rows_left_out(self) -> int:
        return self.rows_read - self.rows_accepted


def parse_as_of(value: pd.Timestamp | str, *, what: str = "as_of") -> pd.Timestamp:
    """One snapshot time as a tz-aware Timestamp (ISO 8601 text with a UTC offset)."""
    if not isinstance(value, str):
        try:
            value = pd.Timestamp(value)
        except (TypeError, ValueError):
            raise ChainTriageError(f"{what} {value!r} is not a time") from None
        if value.tzinfo is None:
            raise ChainTriageError(f"{what} {str(value)!r} has no UTC offset; give e.g. 2026-03-20T15:30:00-04:00")
        return value
    text = str(value).strip()
    if re.fullmatch(_TIME_RE + _OFFSET_RE, text):
        try:
            ts = pd.Timestamp(text)
        except (ValueError, OverflowError):
            ts = None
        if ts is not None and ts.tzinfo is not None and YEAR_MIN <= ts.year <= YEAR_MAX:
            return ts
        raise ChainTriageError(f"{what} {text!r} is not a possible time")
    if re.fullmatch(_TIME_RE, text) or re.fullmatch(_DATE_RE, text):
        raise ChainTriageError(f"{what} {text!r} has no UTC offset; give e.g. 2026-03-20T15:30:00-04:00")
    raise ChainTriageError(f"{what} {text!r} is not an ISO 8601 time such as 2026-03-20T15:30:00-04:00")


# --------------------------------------------------------------------------- reading the table


@dataclass
class _Table:
    """The raw table: header texts and every cell as a str, plus row positions."""

    headers: list[str]
    cells: pd.DataFrame  # columns 0..len(headers)-1, dtype str, no missing values
    line: np.ndarray  # first line of each row (int64)
    end_line: np.ndarray  # last line of each row (int64)
    nfields: np.ndarray  # number of fields in each row (int64)
    extra: np.ndarray  # bool: row has non-empty fields beyond the header
    #: When some columns were read as numbers (int64/float64 cells, NaN for an empty cell):
    #: ``cell_text(column, rows)`` gives those rows' cells as the file writes them (object array).
    cell_text: object = None
    #: A big file's number columns, judged block by block: column -> ``_KeptNumbers`` (their cells
    #: in ``cells`` are then placeholders).
    numbers: dict | None = None


def _show(value: object, width: int = 40) -> str:
    """A cell value quoted for a message: escaped, shortened."""
    text = str(value)
    if len(text) > width:
        text = text[: width - 3] + "..."
    return repr(text)


#: Leading bytes of compressed files: (magic, what it is).
_COMPRESSED = (
    (b"\x1f\x8b", "a gzip-compressed file; decompress it first (gunzip)"),
    (b"BZh", "a bzip2-compressed file; decompress it first (bunzip2)"),
    (b"\xfd7zXZ\x00", "an xz-compressed file; decompress it first (unxz)"),
    (b"\x28\xb5\x2f\xfd", "a zstd-compressed file; decompress it first (unzstd)"),
    (b"7z\xbc\xaf\x27\x1c", "a 7-Zip archive; extract the CSV from it first"),
)


def _utf16_without_bom(data: bytes) -> str | None:
    """'UTF-16LE' / 'UTF-16BE' when the start looks like ASCII text in UTF-16 without a byte-order mark."""
    head = data[:4096]
    if len(head) < 4 or b"\x00" not in head:
        return None
    even, odd = head[0::2], head[1::2]
    for zeros, text, name in ((odd, even, "UTF-16LE"), (even, odd, "UTF-16BE")):
        if zeros.count(0) >= 0.9 * len(zeros) and text.count(0) <= 0.1 * len(text):
            return name
    return None


def _decode(path: str, data: bytes) -> str:
    if data.startswith((b"\xff\xfe", b"\xfe\xff")):
        raise SnapshotFileError(path, "is UTF-16 text; save it as UTF-8 (CSV UTF-8)")
    if data.startswith(b"PK\x03\x04"):
        raise SnapshotFileError(path, "is a zip archive (perhaps a spreadsheet workbook); export it as CSV")
    for magic, what in _COMPRESSED:
        if data.startswith(magic):
            raise SnapshotFileError(path, f"is {what}")
    utf16 = _utf16_without_bom(data)
    if utf16:
        raise SnapshotFileError(path, f"looks like {utf16} text without a byte-order mark; save it as UTF-8 "
                                      "(CSV UTF-8)")
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        before = data[: exc.start].replace(b"\r\n", b"\n").replace(b"\r", b"\n")
        line = before.count(b"\n") + 1
        raise SnapshotFileError(
            path,
            f"is not UTF-8 text: byte 0x{data[exc.start]:02X} on line {line} cannot be decoded; "
            "save the file as UTF-8",
        ) from None
    return text.replace("\r\n", "\n").replace("\r", "\n") if "\r" in text else text


def _pick_delimiter(text: str) -> str:
    """Comma, semicolon or tab: whichever the first non-blank line has most of."""
    for line in _first_lines(text, 50):
        if line.strip(" \t"):
            counts = {d: line.count(d) for d in (",", ";", "\t")}
            best = max(counts, key=lambda d: (counts[d], d == ","))
            return best if counts[best] else ","
    return ","


def _first_lines(text: str, n: int):
    """``text.split("\\n", n)`` one piece at a time, without copying the rest until it is reached."""
    start = 0
    for _ in range(n):
        end = text.find("\n", start)
        if end < 0:
            break
        yield text[start:end]
        start = end + 1
    yield text[start:]


def _blank_bytes(delim: str) -> bytes:
    return b" " if delim == "\t" else b" \t"


def _records_fast(path: str, text: str, delim: str):
    """Record boundaries from the bytes, vectorised; None when quotes are not plain.

    Quotes are "plain" when each quote either opens a field (after a delimiter
    or line break) or closes one (before a delimiter, line break or an escaped
    quote). Then a line break ends a record exactly when an even number of
    quotes precede it, which is what the CSV tokenizer does.
    """
    raw = text.encode("utf-8")
    arr = np.frombuffer(raw, dtype=np.uint8)
    n = arr.size
    d = ord(delim)
    qpos = np.flatnonzero(arr == 34)
    if qpos.size:
        prev = np.where(qpos > 0, arr[np.maximum(qpos - 1, 0)], 10)
        nxt = np.where(qpos + 1 < n, arr[np.minimum(qpos + 1, n - 1)], 10)
        even = (np.arange(qpos.size) % 2) == 0
        ok_open = (prev == d) | (prev == 10) | (prev == 34)
        ok_close = (nxt == d) | (nxt == 10) | (nxt == 34)
        if not (ok_open[even].all() and ok_close[~even].all()):
            return None
        if qpos.size % 2:
            opener = qpos[-1]
            line = int(np.count_nonzero(arr[:opener] == 10)) + 1
            raise SnapshotFileError(path, f"a quoted field opened on line {line} is never closed")
    nl = np.flatnonzero(arr == 10)
    dpos = np.flatnonzero(arr == d)
    if qpos.size:
        inside = (np.searchsorted(qpos, nl) % 2) == 1
        ends = nl[~inside]
        starts = np.concatenate(([0], ends[:-1] + 1))
        start_line = np.searchsorted(nl, starts) + 1
        end_line = np.searchsorted(nl, ends) + 1
        dpos = dpos[(np.searchsorted(qpos, dpos) % 2) == 0]
    else:  # no quotes: every line break ends a record
        ends = nl
        starts = np.concatenate(([0], ends[:-1] + 1))
        start_line = np.arange(1, nl.size + 1)
        end_line = start_line.copy()
    first_d = np.searchsorted(dpos, starts)
    nfields = np.searchsorted(dpos, ends) - first_d + 1
    # blank records: empty, or only spaces (and tabs unless tab is the delimiter)
    length = ends - starts
    blank = length == 0
    ws = _blank_bytes(delim)
    cand = np.flatnonzero(~blank & np.isin(arr[np.minimum(starts, n - 1)], list(ws)))
    for i in cand:
        if not raw[starts[i] : ends[i]].strip(ws):
            blank[i] = True
    keep = ~blank
    starts, ends = starts[keep], ends[keep]
    start_line, end_line, nfields, first_d = start_line[keep], end_line[keep], nfields[keep], first_d[keep]
    return raw, dpos, starts, ends, start_line, end_line, nfields, first_d


def _table_fast(path: str, text: str, delim: str, columns: list[int] | None = None,
                numeric=None, raw: bytes | None = None) -> _Table | None:
    """The table of ``text`` (None when its quotes are not plain); ``columns``: read only these
    (the cells then hold only them, under their positions; the headers are then not read).
    ``numeric(headers)``, when given, names the columns to read as numbers where every cell is one
    (see ``_table_numbers``). ``raw``: the text's UTF-8 bytes when the caller has them."""
    if numeric is not None and columns is None:
        uniform = _UniformRecords.of(text, delim, raw)
        if uniform is not None:
            table = _table_numbers(path, delim, uniform, numeric)
            if table is not None:
                return table
    rec = _records_fast(path, text, delim)
    if rec is None:
        return None
    raw, dpos, starts, ends, start_line, end_line, nfields, first_d = rec
    if starts.size == 0:
        raise SnapshotFileError(path, "is empty (no header line)")
    width = int(nfields[0])
    maxf = int(nfields.max())
    if numeric is not None and columns is None:
        table = _table_numbers(path, delim, _ScannedRecords(rec, delim), numeric)
        if table is not None:
            return table
    try:
        df = pd.read_csv(
            io.StringIO(text),
            sep=delim,
            header=None,
            names=range(maxf),
            usecols=range(width) if columns is None else [c for c in columns if c < width],
            dtype=object,  # Python strings: no conversion to another string type per block
            keep_default_na=False,
            na_filter=False,
            skip_blank_lines=True,
            index_col=False,
            engine="c",
            quotechar='"',
            doublequote=True,
        )
    except (pd.errors.ParserError, ValueError):
        return None
    if len(df) != starts.size:
        return None
    # extra fields beyond the header: fine when they are all empty
    extra = _extra_fields(raw, dpos, starts, ends, nfields, first_d, width, delim)
    headers = [str(h) for h in df.iloc[0].tolist()] if columns is None else []
    cells = df.iloc[1:].reset_index(drop=True)
    cells.columns = range(width) if columns is None else [c for c in columns if c < width]
    return _Table(headers, cells, start_line[1:], end_line[1:], nfields[1:].astype(np.int64), extra[1:])


def _unquote(cell: str) -> str:
    """A field as the CSV reader gives it: a quoted field without its quotes, doubled quotes single."""
    if len(cell) >= 2 and cell[0] == '"' and cell[-1] == '"':
        return cell[1:-1].replace('""', '"')
    return cell


def _slices_text(raw: bytes, arr: np.ndarray, a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """``raw[a:b]`` for each pair, decoded and unquoted (object array), decoded once per distinct value.

    The slices are gathered into one fixed-width byte array, so the Python work is per
    distinct cell, not per row.
    """
    size = np.maximum(b - a, 0)
    out = np.full(size.size, "", dtype=object)
    some = np.flatnonzero(size > 0)
    if some.size == 0:
        return out
    width = int(size[some].max())
    if width > 64:  # long cells (text where numbers were expected): one by one
        out[some] = [_unquote(raw[x:y].decode("utf-8", "replace")) for x, y in zip(a[some], b[some])]
        return out
    step = np.arange(width)
    pos = a[some, None] + step
    mat = np.where(step < size[some, None], arr[np.minimum(pos, arr.size - 1)], 0).astype(np.uint8)
    keys = np.ascontiguousarray(mat).view(f"S{width}").reshape(-1)
    uniq, inverse = np.unique(keys, return_inverse=True)
    text = np.array([_unquote(u.decode("utf-8", "replace")) for u in uniq], dtype=object)
    out[some] = text[inverse.reshape(-1)]
    return out


def _table_numbers(path: str, delim: str, rec, numeric) -> _Table | None:
    """The table with the columns ``numeric(headers)`` read as numbers by pandas' C parser where
    every cell of the column is a plain decimal or empty (int64/float64 cells, NaN for an empty
    cell); every other column as categories of text, and a numeric column holding any other
    text as text.

    Numbers are parsed by the same C reader as ``pandas.read_csv`` (no Python string per cell).
    The C reader takes what ``_NUM_RE`` takes, plus ``inf``/``infinity`` and overflows (as
    infinities): those cells, empty cells and integer zeros (``-0``) are read again from their
    text by the checks (``cell_text``). None when the fast reading does not apply.
    ``rec``: where the records and their cells lie (``_UniformRecords`` or ``_ScannedRecords``).
    """
    raw, width, maxf = rec.raw, rec.width, rec.max_fields
    opts = dict(sep=delim, index_col=False, engine="c", quotechar='"', doublequote=True, skip_blank_lines=True)
    head = rec.header.decode("utf-8") + "\n"
    try:
        hdr = pd.read_csv(io.StringIO(head), header=None, names=range(width), dtype=object,
                          keep_default_na=False, na_filter=False, **opts)
    except (pd.errors.ParserError, ValueError):
        return None
    if len(hdr) != 1:
        return None
    headers = [str(h) for h in hdr.iloc[0].tolist()]
    wanted = sorted({int(i) for i in numeric(headers)} & set(range(width)))
    if not wanted:
        return None
    try:
        # without ``usecols`` the C reader refuses a line longer than ``names`` (``_UniformRecords`` relies on it)
        cols = {} if maxf == width else {"usecols": range(width)}
        df = pd.read_csv(io.BytesIO(raw), header=0, names=range(maxf), **cols,
                         dtype={} if _ARROW_TEXT else {i: "category" for i in range(width) if i not in wanted},
                         keep_default_na=False, na_values={i: [""] for i in wanted}, na_filter=True, **opts)
    except (pd.errors.ParserError, ValueError):
        return None
    if _ARROW_TEXT:  # text columns as the reader inferred them (``dtype=str`` would cost a Python object per cell)
        text = [i for i in range(width) if i not in wanted]
        again = [i for i in text if len(df) and not (pd.api.types.is_string_dtype(df[i].dtype)
                                                     and df[i].dtype != object)]
        for i in text:
            if i not in again:
                df[i] = _categories_of(df[i])
        if again:  # cells the reader took for numbers or booleans: read again as text
            try:
                cat = pd.read_csv(io.BytesIO(raw), header=0, names=range(maxf), usecols=again,
                                  dtype={i: "category" for i in again}, keep_default_na=False, na_filter=False, **opts)
            except (pd.errors.ParserError, ValueError):
                return None
            for i in again:
                df[i] = cat[i]
    if not rec.parsed(df):
        return None
    redo = []
    for i in wanted:
        col = df[i]
        if col.dtype == np.int64 or col.dtype == np.float64:
            continue
        if pd.api.types.is_string_dtype(col.dtype) and col.dtype != object:
            df[i] = col.fillna("")  # text after all: only an empty cell is NaN
        else:  # other types the parser inferred (booleans, mixed Python ints): read again as text
            redo.append(i)
    if redo:
        try:
            again = pd.read_csv(io.BytesIO(raw), header=0, names=range(maxf), usecols=redo, dtype=object,
                                keep_default_na=False, na_filter=False, **opts)
        except (pd.errors.ParserError, ValueError):
            return None
        for i in redo:
            df[i] = again[i].to_numpy(dtype=object)
    def cell_text(column: int, rows: np.ndarray) -> np.ndarray:
        a, b = rec.spans(column, np.asarray(rows, dtype=np.int64))
        return _slices_text(raw, rec.arr, a, b)

    return _Table(headers, df, rec.line, rec.end_line, rec.nfields, rec.extra(), cell_text)


#: Whether pandas' ``str`` columns are held by pyarrow. Then the C reader's text cells are read as ``str``
#: and coded by pyarrow's hashing (``_categories_of``), cheaper than the reader's own categorical
#: conversion; without pyarrow a ``str`` cell is a Python object, and the reader's categoricals are cheaper.
_ARROW_TEXT = getattr(pd.Series([""], dtype=str).dtype, "storage", None) == "pyarrow"


def _categories_of(col: pd.Series) -> pd.Categorical:
    """A text column (no missing cells) as the C reader's categorical gives it: the distinct texts
    sorted as categories, a code per cell. A column of one text (an underlying, an as_of) is found by
    one comparison instead of hashing every cell (tried when its first, middle and last cells agree)."""
    n = len(col)
    if n == 0:
        return pd.Categorical.from_codes(np.zeros(0, dtype=np.int8), pd.Index([], dtype=object))
    first = col.iloc[0]
    if col.iloc[-1] == first and col.iloc[n // 2] == first and bool((col == first).all()):
        return pd.Categorical.from_codes(np.zeros(n, dtype=np.int8), pd.Index([first], dtype=str))
    codes, uniques = pd.factorize(col)
    cats = pd.Index(uniques, dtype=str)
    order = cats.argsort()
    rank = np.empty(order.size, dtype=np.int64)
    rank[order] = np.arange(order.size)
    return pd.Categorical.from_codes(rank[codes] if order.size else codes, cats[order])


class _ScannedRecords:
    """The data records of a table as ``_records_fast`` found them (any plain quoting, blank lines,
    ragged rows): their lines, field counts, and where each cell lies in the bytes."""

    def __init__(self, rec, delim: str):
        raw, dpos, starts, ends, start_line, end_line, nfields, first_d = rec
        self.raw, self.arr = raw, np.frombuffer(raw, dtype=np.uint8)
        self.width, self.max_fields = int(nfields[0]), int(nfields.max())
        self.header = raw[starts[0]:ends[0]]
        self.rows = starts.size - 1
        self.line, self.end_line = start_line[1:], end_line[1:]
        self.nfields = nfields[1:].astype(np.int64)
        self._rec, self._delim = rec, delim

    def parsed(self, df: pd.DataFrame) -> bool:
        """Whether the C reader gave a row per record."""
        return len(df) == self.rows

    def extra(self) -> np.ndarray:
        raw, dpos, starts, ends, start_line, end_line, nfields, first_d = self._rec
        return _extra_fields(raw, dpos, starts, ends, nfields, first_d, self.width, self._delim)[1:]

    def spans(self, column: int, rows: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Byte ranges ``a:b`` of the cells ``column`` of the data records ``rows`` (0:0 for a cell the row lacks)."""
        raw, dpos, starts, ends, start_line, end_line, nfields, first_d = self._rec
        nf, fd, st, en = nfields[1:][rows], first_d[1:][rows], starts[1:][rows], ends[1:][rows]
        dp = dpos if dpos.size else np.zeros(1, dtype=np.int64)
        have = column < nf
        a = np.where(column == 0, st, dp[np.clip(fd + column - 1, 0, dp.size - 1)] + 1)
        b = np.where(column >= nf - 1, en, dp[np.clip(fd + column, 0, dp.size - 1)])
        return np.where(have, a, 0), np.where(have, b, 0)


#: Bytes compared at a time by ``_positions``: temporaries this small are reused, not mapped afresh.
_SCAN_BYTES = 1 << 20


def _positions(arr: np.ndarray, byte: int) -> np.ndarray:
    """Where ``byte`` occurs in ``arr`` (int64 positions), a block at a time (no file-sized temporary)."""
    parts = [np.flatnonzero(arr[i:i + _SCAN_BYTES] == byte) + i for i in range(0, arr.size, _SCAN_BYTES)]
    return np.concatenate(parts) if parts else np.zeros(0, dtype=np.int64)


#: The most bytes ``_UniformRecords.spans`` gathers at once to find the delimiters of some rows.
_GATHER_BYTES = 32 * 1024 * 1024


class _UniformRecords:
    """A table whose every line is a record of the header's width: no quotes, no blank lines, and
    exactly ``width - 1`` delimiters on each line (the common export). Then record ``r`` is line
    ``r + 2`` and nothing needs scanning but the line breaks, and only when a cell is read again."""

    def __init__(self, raw: bytes, width: int, lines: int):
        self.raw, self.arr = raw, np.frombuffer(raw, dtype=np.uint8)
        self.width = self.max_fields = width
        self.header = raw[:raw.index(b"\n")]
        self.rows = lines - 1
        self.line = np.arange(2, lines + 1, dtype=np.int64)
        self.end_line = self.line.copy()
        self.nfields = np.broadcast_to(np.int64(width), (self.rows,))  # read-only, no memory per row
        self._breaks = self._delim = None  # set by ``of``

    @classmethod
    def of(cls, text: str, delim: str, raw: bytes | None = None) -> _UniformRecords | None:
        """The records of ``text`` (ending in a line break) when the file has that shape, else None.

        No line is longer than the header: the C reader, given the header's width as names and no
        ``usecols``, refuses a longer line once the first data line is not longer (checked here). No line
        is shorter either when the C reader's last column has a value on every row (else ``parsed``
        counts the delimiters), and none was skipped as blank when it gives a row per line.
        """
        raw = text.encode("utf-8") if raw is None else raw
        if b'"' in raw:
            return None
        d = delim.encode()
        arr = np.frombuffer(raw, dtype=np.uint8)
        breaks = _positions(arr, 10)  # kept: cells read again are found from them
        lines = int(breaks.size)
        if lines < 1:
            return None
        width = raw[:breaks[0]].count(d) + 1
        if width < 2 or (lines > 1 and raw[breaks[0] + 1:breaks[1]].count(d) != width - 1):
            return None
        rec = cls(raw, width, lines)
        rec._delim, rec._breaks = d[0], breaks
        return rec

    def extra(self) -> np.ndarray:
        return np.zeros(self.rows, dtype=bool)

    def parsed(self, df: pd.DataFrame) -> bool:
        """Whether the C reader's rows are the records (see ``of``): a row per line, none short."""
        if len(df) != self.rows:
            return False
        # a short line leaves its last cell missing: NaN in a number column, "" in a text column
        last = df[self.width - 1]
        if isinstance(last.dtype, pd.CategoricalDtype):
            maybe_short = bool(last.isna().any()) or "" in last.cat.categories
        elif last.dtype.kind in "iuf":
            maybe_short = bool(last.isna().any())
        else:
            maybe_short = bool(last.isna().any()) or bool((last == "").any())
        if not maybe_short:
            return True
        return int(np.count_nonzero(self.arr == self._delim)) == (self.rows + 1) * (self.width - 1)

    def spans(self, column: int, rows: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Byte ranges ``a:b`` of the cells ``column`` of the data records ``rows``: each row's bytes are
        gathered and its delimiters found there (work per row asked for, not per byte of the file)."""
        a_row, b_row = self._breaks[rows] + 1, self._breaks[rows + 1]
        size = b_row - a_row
        out_a, out_b = np.zeros(rows.size, np.int64), np.zeros(rows.size, np.int64)
        if rows.size == 0:
            return out_a, out_b
        per = max(1, _GATHER_BYTES // max(int(size.max()), 1))
        for lo in range(0, rows.size, per):  # a few batches at most
            s, a0 = size[lo:lo + per], a_row[lo:lo + per]
            step = np.arange(int(s.max()))
            mat = self.arr[np.minimum(a0[:, None] + step, self.arr.size - 1)]
            hit = (mat == self._delim) & (step < s[:, None])
            cols = np.nonzero(hit)[1].reshape(s.size, self.width - 1)
            out_a[lo:lo + per] = a0 + (0 if column == 0 else cols[:, column - 1] + 1)
            out_b[lo:lo + per] = a0 + (s if column == self.width - 1 else cols[:, column])
        return out_a, out_b


def _extra_fields(raw, dpos, starts, ends, nfields, first_d, width: int, delim: str) -> np.ndarray:
    """Whether each record has non-empty fields beyond the header's ``width``."""
    extra = np.zeros(starts.size, dtype=bool)
    for i in np.flatnonzero(nfields > width):  # rare: parse just the tail of the row, with the same quoting rules
        cut = dpos[first_d[i] + width - 1]
        tail = raw[cut + 1 : ends[i]].decode("utf-8")
        fields = next(csv.reader(io.StringIO(tail, newline=""), delimiter=delim, quotechar='"',
                                 doublequote=True, strict=False), [])
        extra[i] = any(x.strip(" \t") for x in fields)
    return extra


def _table_csv_module(path: str, text: str, delim: str) -> _Table:
    """The exact but slower path, for files whose quotes are not plain."""
    sentinel = "\x00chaintriage-end\x00"
    reader = csv.reader(io.StringIO(text + ("" if text.endswith("\n") else "\n") + sentinel + "\n"),
                        delimiter=delim, quotechar='"', doublequote=True, strict=False)
    rows: list[list[str]] = []
    first_lines: list[int] = []
    last_lines: list[int] = []
    prev = 0
    ws = _blank_bytes(delim).decode()
    try:
        for row in reader:
            start, end = prev + 1, reader.line_num
            prev = end
            if not row or (len(row) == 1 and start == end and not row[0].strip(ws)):
                continue
            rows.append(row)
            first_lines.append(start)
            last_lines.append(end)
    except csv.Error as exc:
        raise SnapshotFileError(path, f"cannot be read as CSV near line {prev + 1} ({exc})") from None
    if not rows or rows[-1] != [sentinel]:
        start = first_lines[-1] if rows else 1
        raise SnapshotFileError(path, f"a quoted field opened on line {start} is never closed")
    rows.pop()
    first_lines.pop()
    last_lines.pop()
    if not rows:
        raise SnapshotFileError(path, "is empty (no header line)")
    headers = [h for h in rows[0]]
    width = len(headers)
    body = rows[1:]
    nfields = np.fromiter((len(r) for r in body), dtype=np.int64, count=len(body))
    extra = np.fromiter((any(x.strip(" \t") for x in r[width:]) for r in body), dtype=bool, count=len(body))
    fixed = [r[:width] + [""] * (width - len(r)) if len(r) != width else r for r in body]
    cells = pd.DataFrame(fixed, columns=range(width), dtype=str) if fixed else pd.DataFrame(
        {i: pd.Series([], dtype=str) for i in range(width)}
    )
    return _Table(headers, cells, np.asarray(first_lines[1:], np.int64), np.asarray(last_lines[1:], np.int64),
                  nfields, extra)


def _ascii_table(path: str, data: bytes, numeric) -> _Table | None:
    """The common export read from its bytes alone, never decoded as a whole: ASCII (so UTF-8, and
    its own text), \n line breaks, a header on its first line, every line a record of the header's
    width (``_UniformRecords``). None when the file is not like that."""
    if not (data.endswith(b"\n") and data.isascii() and b"\r" not in data):
        return None
    first = data[:data.index(b"\n")].decode("ascii")
    if not first.strip(" \t"):
        return None
    delim = _pick_delimiter(first + "\n")  # the first non-blank line is the first line
    rec = _UniformRecords.of("", delim, data)
    return None if rec is None else _table_numbers(path, delim, rec, numeric)


def _read_csv_table(path: str, data: bytes, numeric=None) -> _Table:
    if numeric is not None:
        table = _ascii_table(path, data, numeric)
        if table is not None:
            return table
    text = _decode(path, data)
    if not text or text.isspace():  # not text.strip(), without copying the text
        raise SnapshotFileError(path, "is empty")
    if not text.endswith("\n"):
        text += "\n"
    delim = _pick_delimiter(text)
    # the file's bytes are the text's own when nothing was changed in decoding (no BOM, no \r, a final break)
    same = not data.startswith(b"\xef\xbb\xbf") and data.endswith(b"\n") and b"\r" not in data
    table = _table_fast(path, text, delim, numeric=numeric, raw=data if same else None)
    if table is None:
        table = _table_csv_module(path, text, delim)
    return table


def _parquet_to_str(s: pd.Series) -> pd.Series:
    """One Parquet column as text, the way it would appear in a CSV export.

    A column the vectorised conversion cannot turn into text (bytes that are
    not UTF-8, times outside the years the standard library can format) is
    converted value by value instead, so its rows are checked like any other.
    """
    try:
        return _parquet_to_str_fast(s)
    except Exception:  # rare: pandas/pyarrow raise several types here
        missing = s.isna().to_numpy()
        out = pd.Series([_cell_text(v) for v in s], dtype=str, index=s.index)
        out[missing] = ""
        return out


def _cell_text(value: object) -> str:
    if isinstance(value, (bytes, bytearray)):
        return bytes(value).decode("utf-8", "backslashreplace")
    if isinstance(value, pd.Timestamp):
        try:
            return value.isoformat()
        except (NotImplementedError, ValueError, OverflowError):  # outside years 1-9999: left out by year anyway
            return (f"{value.year:04d}-{value.month:02d}-{value.day:02d}T{value.hour:02d}:{value.minute:02d}:"
                    f"{value.second:02d}" + ("Z" if value.tzinfo is not None else ""))
    return str(value)


def _parquet_to_str_fast(s: pd.Series) -> pd.Series:
    missing = s.isna().to_numpy()
    if isinstance(s.dtype, pd.DatetimeTZDtype):
        out = s.dt.strftime("%Y-%m-%dT%H:%M:%S.%f%z")
    elif pd.api.types.is_datetime64_any_dtype(s.dtype):
        ok = s.dropna()
        midnight = bool((ok == ok.dt.normalize()).all())
        out = s.dt.strftime("%Y-%m-%d" if midnight else "%Y-%m-%dT%H:%M:%S.%f")
    else:
        out = s.astype(str)
    out = out.astype(str)
    out[missing] = ""
    return out


def _read_parquet_table(path: str) -> _Table:
    try:
        import pyarrow  # noqa: F401
    except ImportError:
        raise SnapshotFileError(
            path, "is a Parquet file, and reading Parquet needs pyarrow: pip install 'chaintriage[parquet]'"
        ) from None
    try:
        df = pd.read_parquet(path)
    except Exception as exc:  # pyarrow raises many types for a damaged file
        raise SnapshotFileError(path, f"cannot be read as Parquet ({type(exc).__name__}: {exc})") from None
    headers = [str(c) for c in df.columns]
    cells = pd.DataFrame({i: _parquet_to_str(df.iloc[:, i]) for i in range(len(headers))})
    if not headers:
        cells = pd.DataFrame(index=range(len(df)))
    n = len(df)
    line = np.arange(n, dtype=np.int64) + 2
    return _Table(headers, cells.reset_index(drop=True), line, line.copy(),
                  np.full(n, len(headers), np.int64), np.zeros(n, bool))


#: Files bigger than this many bytes are read block by block, with every cell kept as a category
#: code: memory then follows the distinct values and the row count, not the file's bytes.
BIG_FILE_BYTES = 64 * 1024 * 1024
#: Bytes per block when reading a big file (the text of one block is held at a time).
CHUNK_BYTES = 8 * 1024 * 1024


def _block_cut(buf: bytes) -> int:
    """Where to cut ``buf``: just after its last line break outside quotes (0 when there is none)."""
    arr = np.frombuffer(buf, dtype=np.uint8)
    nl = np.flatnonzero(arr == 10)
    if nl.size == 0:
        return 0
    qpos = np.flatnonzero(arr == 34)
    even = (np.searchsorted(qpos, nl) % 2) == 0
    if not even.any():
        return 0
    return int(nl[np.flatnonzero(even)[-1]]) + 1


def _as_categories(cells: pd.DataFrame) -> pd.DataFrame:
    """Every column as a categorical (codes plus the distinct texts)."""
    def one(values: pd.Series) -> pd.Categorical:
        codes, uniq = pd.factorize(values.to_numpy(dtype=object))
        return pd.Categorical.from_codes(codes, pd.Index(np.asarray(uniq, dtype=object), dtype=object))

    return pd.DataFrame({c: one(cells[c]) for c in cells.columns}, index=cells.index)


def _join_tables(tables: list[_Table]) -> _Table:
    """One table of blocks read one after the other (categories united)."""
    from pandas.api.types import union_categoricals

    first = tables[0]
    width = len(first.headers)
    numbers = first.numbers or {}
    cells = pd.DataFrame({
        c: pd.Series(union_categoricals([t.cells[c] for t in tables]) if tables else [], dtype="category")
        for c in range(width) if c not in numbers})
    n = sum(len(t.line) for t in tables)
    for c in numbers:  # placeholders: the checks read ``numbers``
        cells[c] = np.zeros(n)
    cells = cells[list(range(width))]
    joined = {c: _KeptNumbers.join([t.numbers[c] for t in tables]) for c in numbers}
    cat = np.concatenate
    return _Table(first.headers, cells, cat([t.line for t in tables]), cat([t.end_line for t in tables]),
                  cat([t.nfields for t in tables]), cat([t.extra for t in tables]), numbers=joined or None)


def _decode_block(path: str, block: bytes, lines_before: int) -> str:
    """UTF-8 bytes of whole lines as text with \\n line breaks; a bad byte is named by its line in the file."""
    try:
        text = block.decode("utf-8")
    except UnicodeDecodeError as exc:
        before = block[: exc.start].replace(b"\r\n", b"\n").replace(b"\r", b"\n")
        line = lines_before + before.count(b"\n") + 1
        raise SnapshotFileError(
            path, f"is not UTF-8 text: byte 0x{block[exc.start]:02X} on line {line} cannot be decoded; "
            "save the file as UTF-8") from None
    return text.replace("\r\n", "\n").replace("\r", "\n") if "\r" in text else text


@dataclass
class _BlockSpan:
    """Where one block of a big CSV file lies: bytes ``start:end`` (``end`` None = to the end of the
    file), the line breaks before it, whether it holds the header, and whether its quotes need the
    csv module (then it runs to the end of the file)."""

    start: int
    end: int | None
    lines_before: int
    first: bool
    exact: bool = False


def _parse_block(path: str, block: bytes, span: _BlockSpan, headers: list[str] | None, delim: str,
                 columns: list[int] | None = None, numeric=None) -> _Table | None:
    """One block's rows with the line numbers of the whole file (cells as text); None when its quotes
    are not plain and the block is not ``exact`` (then it must run to the end of the file).

    The block holding the header is read as it is; every later block is read
    after a stand-in header of the same width, and its line numbers are shifted back.
    """
    text = _decode_block(path, block, span.lines_before)
    if not text.endswith("\n"):
        text += "\n"
    if span.first:
        offset, stand_in = span.lines_before, ""
    else:
        offset, stand_in = span.lines_before - 1, delim.join(["h"] * len(headers or [])) + "\n"
    try:
        if span.exact:
            table = _table_csv_module(path, stand_in + text, delim)
        else:
            block_numeric = None
            if numeric is not None:
                block_numeric = numeric if headers is None else (lambda _stand_in: numeric(headers))
            table = _table_fast(path, stand_in + text, delim, None if span.first else columns,
                                numeric=block_numeric)
    except SnapshotFileError as exc:  # a line named in the block: name it in the file
        raise SnapshotFileError(path, re.sub(r"line (\d+)", lambda m: f"line {int(m.group(1)) + offset}",
                                             exc.reason)) from None
    if table is None:
        return None
    if headers is not None:
        table.headers = headers
    table.line += offset
    table.end_line += offset
    return table


def _csv_blocks(path: str, fh, first: bytes, columns=None, numeric=None):
    """A big CSV file block by block: (table, span, delimiter) triples; each block ends at a line break
    outside quotes. ``columns(headers)``, when given, names the only columns to read after the
    header's block (see ``_table_fast``). Bytes are decoded block by block. When a block's quotes are not plain, where a
    record ends is known only by reading on from there, so the rest of the file is one block, read
    by the csv module (exact, slower, more memory).
    """
    pos = 0
    if first.startswith(b"\xef\xbb\xbf"):
        first, pos = first[3:], 3
    carry = first
    lines_before = 0  # line breaks in the bytes already read
    headers: list[str] | None = None
    delim = ","
    at_end = False
    while not at_end:
        more = fh.read(CHUNK_BYTES)
        at_end = not more
        buf = carry + more
        cut = len(buf) if at_end else _block_cut(buf)
        if cut == 0:  # no line break outside quotes yet: read on
            carry = buf
            continue
        block, carry = buf[:cut], buf[cut:]
        span = _BlockSpan(pos, pos + cut, lines_before, headers is None)
        pos += cut
        if not block.strip():
            lines_before += _line_breaks(block)
            continue
        if headers is None:
            delim = _pick_delimiter(_decode_block(path, block, lines_before))
        table = _parse_block(path, block, span, headers, delim, None if columns is None else columns(headers),
                             numeric)
        if table is None:
            block = block + carry + fh.read()
            carry, at_end = b"", True
            span = _BlockSpan(span.start, None, lines_before, span.first, exact=True)
            table = _parse_block(path, block, span, headers, delim)
        if headers is None:
            headers = table.headers
        lines_before += _line_breaks(block)
        yield table, span, delim


def _line_breaks(block: bytes) -> int:
    """Line breaks in ``block`` (\\r\\n, \\n and a lone \\r count one each)."""
    return block.count(b"\n") + block.count(b"\r") - block.count(b"\r\n")


def _read_csv_blocks(path: str, fh, first: bytes, numeric=None) -> _Table:
    """A big CSV file read block by block into one table (every cell kept as a category code; with
    ``numeric``, the number columns judged block by block, see ``_KeptNumbers``)."""
    if first.startswith((b"\xff\xfe", b"\xfe\xff")) or first.startswith(b"PK\x03\x04"):
        return _read_csv_table(path, first)  # its own message, from the first bytes
    tables = []
    roles: dict[int, str] | None = None
    for table, _, _ in _csv_blocks(path, fh, first, numeric=numeric):
        if numeric is not None:
            if roles is None:
                roles = dict(numeric(table.headers))
            table.numbers = {i: _KeptNumbers.of(table, i, role) for i, role in roles.items()
                             if i < len(table.headers)}
            table.cell_text = None  # the block's bytes go
            table.cells = table.cells.drop(columns=list(table.numbers))
        table.cells = _as_categories(table.cells)
        tables.append(table)
    if not tables:
        raise SnapshotFileError(path, "is empty")
    return _join_tables(tables)


def _read_table(path: str, numeric=None) -> _Table:
    """The table of a file; ``numeric(headers)``: columns a small CSV may give as numbers (see ``_table_numbers``)."""
    p = Path(path)
    try:
        if p.is_dir():
            raise SnapshotFileError(path, "is a directory, not a file")
        if not p.exists():
            if p.is_symlink():
                try:
                    os.stat(p)
                except OSError as exc:
                    if exc.errno == errno.ELOOP:
                        raise SnapshotFileError(path, "is a symbolic link that leads back to itself "
                                                      "(a link loop)") from None
                raise SnapshotFileError(path, "is a symbolic link to a file that does not exist")
            raise SnapshotFileError(path, "no such file")
        if not p.is_file():
            raise SnapshotFileError(path, "is not a regular file")
        with open(p, "rb") as fh:
            head = fh.read(4)
            if p.suffix.lower() in _PARQUET_SUFFIXES or head == b"PAR1":
                return _read_parquet_table(path)
            if p.stat().st_size > max(BIG_FILE_BYTES, CHUNK_BYTES):
                return _read_csv_blocks(path, fh, head, numeric)
            # the unbuffered file, from its start: one allocation of the file's size (the buffered reader,
            # its first bytes still buffered after a seek, would join them with the rest: a copy into fresh memory)
            fh.raw.seek(0)
            data = fh.raw.readall()
    except OSError as exc:
        raise SnapshotFileError(path, f"cannot be read ({exc.strerror or exc})") from None
    if not data:
        raise SnapshotFileError(path, "is empty")
    return _read_csv_table(path, data, numeric)


# --------------------------------------------------------------------------- cell parsing (vectorised)


#: Up to this many distinct texts, a parse runs in plain Python per text when every text is printable
#: ASCII (where Python's and the string backend's regex and whitespace rules agree): no fixed cost of
#: the vectorised string methods for a column of a few distinct cells.
_FEW_TEXTS = 4096
_NUM_FULL = re.compile(_NUM_RE)
_NONFINITE_FULL = re.compile(_NONFINITE_RE)


def _few_plain(texts) -> bool:
    """Whether ``texts`` are few and all printable ASCII (see ``_FEW_TEXTS``)."""
    return len(texts) <= _FEW_TEXTS and all(isinstance(t, str) and t.isascii() and t.isprintable() for t in texts)


def _number_one(text: str, percent: bool) -> tuple[float, int]:
    """``_numbers_unique`` of one printable ASCII text (already stripped)."""
    if text == "":
        return math.nan, 1
    pct = percent and text.endswith("%")
    body = text[:-1].rstrip() if pct else text
    if _NUM_FULL.fullmatch(body):
        value = float(body) / 100.0 if pct else float(body)
        return (value, 0) if math.isfinite(value) else (math.nan, 3)
    return math.nan, 3 if _NONFINITE_FULL.fullmatch(body) else 2


def _numbers_few(texts: list[str], *, percent: bool = False) -> tuple[np.ndarray, np.ndarray]:
    """``_numbers_unique`` of a few printable ASCII texts (see ``_FEW_TEXTS``)."""
    parsed = [_number_one(t, percent) for t in texts]
    return (np.array([v for v, _ in parsed], dtype=np.float64).reshape(len(texts)),
            np.array([c for _, c in parsed], dtype=np.int8).reshape(len(texts)))


def _numbers_unique(s: pd.Series, *, percent: bool = False) -> tuple[np.ndarray, np.ndarray]:
    """Parse stripped text to float. Returns (values, status): 0 ok, 1 empty, 2 not a number, 3 not finite."""
    n = len(s)
    body = s
    pct = np.zeros(n, dtype=bool)
    if percent:
        pct = s.str.endswith("%").to_numpy(dtype=bool)
        if pct.any():
            body = s.str.removesuffix("%").str.rstrip()
    empty = (s == "").to_numpy(dtype=bool)
    ok = body.str.fullmatch(_NUM_RE).to_numpy(dtype=bool)
    values = np.full(n, np.nan)
    if ok.any():
        values[ok] = body[ok].astype(float).to_numpy(dtype=float)
    values = np.where(pct, values / 100.0, values)
    status = np.full(n, 2, dtype=np.int8)
    status[empty] = 1
    status[ok] = 0
    nonfinite = (ok & ~np.isfinite(values)) | body.str.fullmatch(_NONFINITE_RE).to_numpy(dtype=bool)
    status[nonfinite] = 3
    values[status != 0] = np.nan
    return values, status


def _fullmatch(s: pd.Series, pattern: str, texts: list[str] | None) -> np.ndarray:
    """Whether each text matches ``pattern`` whole: by the string methods, or in Python per text of
    ``texts`` (a few printable ASCII texts, the same as ``s``; see ``_FEW_TEXTS``)."""
    if texts is None:
        return s.str.fullmatch(pattern).to_numpy(dtype=bool)
    rx = re.compile(pattern)
    return np.array([rx.fullmatch(t) is not None for t in texts], dtype=bool).reshape(len(texts))


def _years(s: pd.Series, where: np.ndarray, texts: list[str] | None) -> np.ndarray:
    """The year (the first four digits) of the texts ``where``, 0 elsewhere (int64)."""
    year = np.zeros(len(s), dtype=np.int64)
    if where.any():
        if texts is None:
            year[where] = s[where].str.slice(0, 4).astype(int).to_numpy()
        else:
            year[where] = [int(texts[i][:4]) for i in np.flatnonzero(where)]
    return year


def _dates_unique(s: pd.Series, fmt: str | None, texts: list[str] | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Parse dates. Returns (datetime64[ns] values, status): 0 ok, 1 empty, 2 wrong format, 3 impossible, 4 out of range.

    ``texts``: ``s`` as a list when it is a few printable ASCII texts (patterns then matched in Python)."""
    n = len(s)
    status = np.full(n, 2, dtype=np.int8)
    empty = (s == "").to_numpy(dtype=bool)
    out = np.full(n, np.datetime64("NaT"), dtype="datetime64[ns]")
    if fmt is None:
        shaped = _fullmatch(s, _DATE_RE, texts)
        year = _years(s, shaped, texts)
        in_range = shaped & (year >= YEAR_MIN) & (year <= YEAR_MAX)
        parsed = pd.to_datetime(s.where(in_range, ""), format="%Y-%m-%d", errors="coerce")
        good = in_range & parsed.notna().to_numpy()
        status[shaped & ~in_range] = 4
        status[in_range & ~good] = 3
    else:
        parsed = pd.to_datetime(s.where(~empty, ""), format=fmt, errors="coerce").dt.normalize()
        ok = parsed.notna().to_numpy()
        years = parsed.dt.year.to_numpy(dtype=float, na_value=np.nan)
        good = ok & (years >= YEAR_MIN) & (years <= YEAR_MAX)
        status[ok & ~good] = 4
    if good.any():
        out[good] = parsed[good].to_numpy().astype("datetime64[ns]")
        status[good] = 0
    status[empty] = 1
    return out, status


def _times_unique(s: pd.Series, texts: list[str] | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Parse as_of text. Returns (UTC int64 ns, status): 0 ok, 1 empty, 2 not a time, 3 no offset, 4 impossible.

    ``texts``: ``s`` as a list when it is a few printable ASCII texts (patterns then matched in Python)."""
    n = len(s)
    status = np.full(n, 2, dtype=np.int8)
    empty = (s == "").to_numpy(dtype=bool)
    aware = _fullmatch(s, _TIME_RE + _OFFSET_RE, texts)
    naive = _fullmatch(s, _TIME_RE, texts) | _fullmatch(s, _DATE_RE, texts)
    ns = np.zeros(n, dtype=np.int64)
    if aware.any():
        year = _years(s, aware, texts)
        ok_year = aware & (year >= YEAR_MIN) & (year <= YEAR_MAX)
        parsed = pd.to_datetime(s.where(ok_year, ""), format="ISO8601", utc=True, errors="coerce")
        good = ok_year & parsed.notna().to_numpy()
        if good.any():
            ns[good] = parsed[good].dt.tz_convert("UTC").dt.tz_localize(None).to_numpy().astype("datetime64[ns]").astype(np.int64)
        status[aware] = 4
        status[good] = 0
    status[naive] = 3
    status[empty] = 1
    return ns, status


def _per_unique(s: pd.Series, parse, *args, few=None, **kwargs):
    """Run ``parse`` once per distinct value of ``s`` and spread the result back to every row.

    Chains repeat values heavily (one as_of, a few dozen expiries, prices on
    a tick grid), so this makes the text work proportional to the distinct
    values, whatever string backend pandas uses. ``few``, when given, does what
    ``parse`` does on a list of a few printable ASCII texts (see ``_FEW_TEXTS``).
    """
    return _per_unique_codes(s, parse, *args, few=few, **kwargs)[0]


def _per_unique_codes(s: pd.Series, parse, *args, few=None, **kwargs):
    """``(_per_unique(...), codes, per_distinct)``: also each row's code (-1 for a missing cell) and
    the result per distinct value, so a later step can work per distinct value too. A categorical's
    own codes and categories serve as they are (no factorisation)."""
    if isinstance(s.dtype, pd.CategoricalDtype):
        codes, uniques = s.cat.codes.to_numpy().astype(np.intp), s.cat.categories
    else:
        codes, uniques = pd.factorize(s)
    texts = np.asarray(uniques, dtype=object)
    if few is not None and _few_plain(texts.tolist()):
        result = few(texts.tolist(), *args, **kwargs)
    else:
        result = parse(pd.Series(texts, dtype=str), *args, **kwargs)
    if isinstance(result, tuple):
        return tuple(np.asarray(r)[codes] for r in result), codes, result
    return np.asarray(result)[codes], codes, result


def _strip_few(texts: list[str]) -> np.ndarray:
    """Texts without surrounding whitespace (object array)."""
    out = np.empty(len(texts), dtype=object)
    out[:] = [t.strip() for t in texts]
    return out


def _numbers(s, *, percent: bool = False) -> tuple[np.ndarray, np.ndarray]:
    """Parse stripped text to float. Returns (values, status): 0 ok, 1 empty, 2 not a number, 3 not finite.

    ``s`` is a column of text, or a ``_NumberColumn`` (already parsed).
    """
    if isinstance(s, _NumberColumn):  # its values as a read-only view (no copy: the checks only read them)
        values = s.values.view()
        values.flags.writeable = False
        return values, s.status
    return _per_unique(s, _numbers_unique, percent=percent, few=_numbers_few)


class _NumberColumn:
    """A column the CSV reader gave as numbers: float values (NaN unless status 0), the status of
    ``_numbers`` per row, and each row's stripped text on demand (for messages).

    Cells the C reader takes that need their text to be judged as ``_numbers`` judges them
    (empty, infinite or overflowing, and integer zeros, which may be ``-0``) are parsed again
    from their text, once per distinct text.
    """

    def __init__(self, parsed: np.ndarray, cell_text):
        self._cell_text = cell_text
        again = ~np.isfinite(parsed)
        if parsed.dtype.kind in "iu":
            again |= parsed == 0
        rows = np.flatnonzero(again)
        values = parsed.astype(np.float64, copy=bool(rows.size))  # the reader's floats as they are when none is redone
        status = np.zeros(values.size, dtype=np.int8)
        if rows.size:
            v, st = _per_unique(pd.Series(self.text(rows), dtype=object), _numbers_unique, few=_numbers_few)
            values[rows] = v
            status[rows] = st
        self.values, self.status = values, status

    def __len__(self) -> int:
        return self.values.size

    def text(self, rows: np.ndarray) -> np.ndarray:
        """The stripped text of the cells ``rows`` (row indices), as an object array."""
        raw = self._cell_text(np.asarray(rows, dtype=np.int64))
        return _per_unique(pd.Series(raw, dtype=object), lambda u: u.str.strip().to_numpy(dtype=object),
                           few=_strip_few)


def _quoted_rows(role: str, values: np.ndarray, status: np.ndarray) -> np.ndarray:
    """The rows whose cell a message about a ``role`` column may quote (see ``check_rows`` and
    ``optional_columns``): not a number or not finite, and the values each check refuses."""
    ok = status == 0
    with np.errstate(invalid="ignore"):
        if role in ("spot", "strike"):
            refused = ok & ~(values > 0)
        elif role == "iv":
            refused = ok & (~(values > 0) | (values > IV_MAX))
        elif role in ("rate", "div_yield"):
            refused = ok & (np.abs(values) > RATE_MAX)
        else:  # bid, ask, volume, open_interest
            refused = ok & (values < 0)
    return np.flatnonzero(refused | (status >= 2))


class _KeptNumbers(_NumberColumn):
    """A number column of a big file, judged block by block: values and status of every row, and
    the text only of the rows a message may quote (``_quoted_rows``), so no block's bytes are kept."""

    def __init__(self, values: np.ndarray, status: np.ndarray, rows: np.ndarray, texts: np.ndarray):
        self.values, self.status, self.rows, self.texts = values, status, rows, texts

    @classmethod
    def of(cls, table: _Table, column: int, role: str) -> _KeptNumbers:
        """From one block's table: its cells read as numbers (``cell_text`` still there) or as text."""
        cells = table.cells[column]
        if table.cell_text is not None and cells.dtype.kind in "iuf":
            col = _NumberColumn(cells.to_numpy(), lambda rows: table.cell_text(column, rows))
            values, status = col.values, col.status
            rows = _quoted_rows(role, values, status)
            return cls(values, status, rows, col.text(rows))
        text = _stripped(cells, categorical=True)
        values, status = _numbers(text, percent=role in ("iv", "rate", "div_yield"))
        rows = _quoted_rows(role, values, status)
        return cls(values, status, rows, text.iloc[rows].to_numpy(dtype=object))

    @classmethod
    def join(cls, parts: list[_KeptNumbers]) -> _KeptNumbers:
        """The parts one after the other."""
        offsets = np.cumsum([0] + [p.values.size for p in parts])[:-1]
        cat = np.concatenate
        return cls(cat([p.values for p in parts]), cat([p.status for p in parts]),
                   cat([p.rows + o for p, o in zip(parts, offsets)]).astype(np.int64),
                   cat([p.texts for p in parts] + [np.empty(0, dtype=object)]))

    def text(self, rows: np.ndarray) -> np.ndarray:
        rows = np.asarray(rows, dtype=np.int64)
        at = np.searchsorted(self.rows, rows)
        if rows.size and (at.max() >= self.rows.size or not np.array_equal(self.rows[at], rows)):
            raise AssertionError("a message quotes a number cell whose text was not kept")
        return self.texts[at]


def _dates(s: pd.Series, fmt: str | None) -> tuple[np.ndarray, np.ndarray]:
    """Parse dates to datetime64[ns]; status 0 ok, 1 empty, 2 wrong format, 3 impossible, 4 out of range."""
    return _dates_coded(s, fmt)[0]


def _dates_coded(s: pd.Series, fmt: str | None):
    """``(_dates(s, fmt), codes, (values, status) per distinct text)``, see ``_per_unique_codes``."""
    return _per_unique_codes(s, _dates_unique, fmt, few=lambda texts, fmt: _dates_unique(pd.Series(texts, dtype=str), fmt,
                                                                                  texts))


def _times(s: pd.Series) -> tuple[np.ndarray, np.ndarray]:
    """Parse as_of text to UTC int64 ns; status 0 ok, 1 empty, 2 not a time, 3 no offset, 4 impossible."""
    return _per_unique(s, _times_unique, few=lambda texts: _times_unique(pd.Series(texts, dtype=str), texts))


def _strip_texts(raw: np.ndarray) -> np.ndarray:
    """Distinct texts (object array) without surrounding whitespace."""
    texts = raw.tolist()
    if _few_plain(texts):
        return _strip_few(texts)
    return pd.Series(raw, dtype=str).str.strip().to_numpy(dtype=object)


def _stripped(s: pd.Series, categorical: bool = False) -> pd.Series:
    """The column with surrounding whitespace removed (str dtype; a categorical stays one, and
    with ``categorical`` any column becomes one)."""
    if isinstance(s.dtype, pd.CategoricalDtype):
        raw = s.cat.categories.to_numpy(dtype=object)
        clean = _strip_texts(raw)
        if np.array_equal(raw, clean):
            return s.reset_index(drop=True)
        new_codes, new_cats = pd.factorize(clean)
        return pd.Series(pd.Categorical.from_codes(new_codes[s.cat.codes.to_numpy()], new_cats))
    codes, uniques = pd.factorize(s)
    raw = np.asarray(uniques, dtype=object)
    clean = _strip_texts(raw)
    if categorical:  # the distinct texts and a code per row: later parses work on the codes
        new_codes, new_cats = pd.factorize(clean)
        cats = pd.Index(np.asarray(new_cats, dtype=object), dtype=object)
        return pd.Series(pd.Categorical.from_codes(new_codes[codes] if len(codes) else codes, cats))
    if np.array_equal(raw, clean):
        return s.reset_index(drop=True)
    return pd.Series(clean[codes] if len(codes) else np.array([], dtype=object), dtype=str)


def _folded(s: pd.Series) -> np.ndarray:
    """Case-folded values as an object array."""
    return _per_unique(s, lambda u: u.str.casefold().to_numpy(dtype=object))


# --------------------------------------------------------------------------- validation


class _Rows:
    """Book-keeping of which rows are left out, and why (first reason wins)."""

    def __init__(self, n: int):
        self.free = np.ones(n, dtype=bool)
        self.reason = np.empty(n, dtype=object)
        self.topic = np.empty(n, dtype=object)
        self.column = np.empty(n, dtype=object)

    def leave_out(self, where: np.ndarray, column: str | None, text, values: Sequence | None = None,
                  topic: str | None = None) -> None:
        """Leave out the rows of ``where`` (a bool mask or row indices) not yet left out.

        ``text`` is a str, or a format with ``{v}`` filled from ``values`` (a
        cell per row), or a callable(index) -> str. ``topic`` is what the rows'
        reasons share, for grouping (default: ``text`` without its value).
        """
        where = np.asarray(where)
        sel = np.flatnonzero(where & self.free) if where.dtype == bool else where[self.free[where]]
        if sel.size == 0:
            return
        if callable(text):
            self.reason[sel] = [text(i) for i in sel]
        elif values is not None:
            self.reason[sel] = _formatted(text, _values_at(values, sel))
        else:
            self.reason[sel] = text
        self.topic[sel] = topic if topic is not None else _topic(text)
        self.column[sel] = column
        self.free[sel] = False


def _values_at(values, sel: np.ndarray) -> np.ndarray:
    """The cells ``sel`` of a column (text Series, array or ``_NumberColumn``) as an object array."""
    if isinstance(values, _NumberColumn):
        return values.text(sel)
    if isinstance(values, pd.Series):
        return values.iloc[sel].to_numpy(dtype=object)
    return np.asarray(values, dtype=object)[sel]


def _formatted(text: str, vals: np.ndarray) -> np.ndarray:
    """``text`` with ``{v}`` filled from each value (shown escaped), formatted once per distinct value."""
    if vals.size == 0:
        return np.empty(0, dtype=object)
    codes, uniq = pd.factorize(vals)
    return np.array([text.format(v=_show(v)) for v in uniq], dtype=object)[codes]


def _in_order(keys: tuple[np.ndarray, ...]) -> bool:
    """Whether the rows are already in ``np.lexsort(keys)`` order (the last key first; ties allowed)."""
    if keys[0].size < 2:
        return True
    after = np.zeros(keys[0].size - 1, dtype=bool)  # a row is after the one before it by an earlier key
    tied = np.ones(keys[0].size - 1, dtype=bool)  # ... or tied with it on every key so far
    for key in reversed(keys):
        a, b = key[:-1], key[1:]
        after |= tied & (b > a)
        tied &= b == a
        if not (after | tied).all():
            return False
    return True


def _first_seen(codes: np.ndarray, values: np.ndarray) -> tuple[np.ndarray, list]:
    """``pd.factorize(values)`` from integer ``codes`` that already name the distinct values:
    new codes in order of first appearance, and the values in that order."""
    if codes.size == 0:
        return codes.astype(np.int64), []
    uniq, first, inverse = np.unique(codes, return_index=True, return_inverse=True)
    rank = np.empty(uniq.size, dtype=np.int64)
    rank[np.argsort(first, kind="stable")] = np.arange(uniq.size)
    return rank[inverse.reshape(-1)], [values[i] for i in np.sort(first)]


def _fmt(x: float) -> str:
    return f"{x:.10g}"


def _topic(text) -> str:
    """The shared part of a reason template: the text without its quoted value."""
    if callable(text):
        return "other"
    return str(text).replace(" {v}", "").replace("{{", "{").replace("}}", "}")


def _fmt_many(x: np.ndarray) -> np.ndarray:
    """``_fmt`` of each value, as an object array (formatted once per distinct value)."""
    uniq, inverse = np.unique(x, return_inverse=True)
    return np.array([_fmt(v) for v in uniq], dtype=object)[inverse.reshape(-1)]


def _fmt_quotes(values: np.ndarray) -> list[str]:
    """``_fmt_quote`` of each value (float64 array): the test for cents made on the whole array
    (numpy's rounding, as ``round`` of a numpy float gives), a text per value."""
    values = np.asarray(values, dtype=np.float64)
    with np.errstate(invalid="ignore", over="ignore"):
        cents = np.isfinite(values) & (np.abs(values) < 1e12) & (np.round(values, 2) == values)
    return [f"{x:.2f}" if c else _fmt(x) for x, c in zip(values.tolist(), cents.tolist())]


def _fmt_quote(x: float) -> str:
    """A quoted price in a message: cents always shown (1.3 -> "1.30"), finer ticks kept (0.005)."""
    if not np.isfinite(x) or abs(x) >= 1e12 or round(x, 2) != x:
        return _fmt(x)
    return f"{x:.2f}"


class _FileValidator:
    def __init__(self, path: str, table: _Table, overrides: SnapshotOverrides, cmap: ColumnMap):
        self.path = path
        self.t = table
        self.ov = overrides
        self.cmap = cmap
        self.n = len(table.cells)
        self.rows = _Rows(self.n)
        self.file_findings: list[Finding] = []
        self.group_findings: list[Finding] = []
        self.warn: list[tuple[np.ndarray, str | None, list[str] | str]] = []
        self.col: dict[str, pd.Series] = {}
        self.label: dict[str, str] = {}
        #: the rows not left out before ``check_duplicates``, sorted by underlying, expiry, strike, kind and
        #: file order (None when it had fewer than two rows)
        self.by_contract: np.ndarray | None = None

    # -- columns ----------------------------------------------------------
    def resolve_columns(self, cells: bool = True) -> None:
        """Find our columns under the headers (``self.index``); with ``cells``, take their cells too."""
        keys = [header_key(h) for h in self.t.headers]
        where: dict[str, list[int]] = {}
        for i, k in enumerate(keys):
            where.setdefault(k, []).append(i)
        used: set[int] = set()
        chosen: dict[str, int] = {}
        missing: list[str] = []
        src = f" (column mapping {self.cmap.source})" if self.cmap.source else ""

        def pick(name: str, idx: list[int]) -> None:
            if len(idx) > 1:
                cols = ", ".join(str(i + 1) for i in idx)
                raise SnapshotFileError(self.path, f"column {self.t.headers[idx[0]].strip()!r} ({name}) appears "
                                        f"more than once (columns {cols})")
            chosen[name] = idx[0]
            used.add(idx[0])

        # mapped headers first, then our own names for the columns still unfound
        for name in KNOWN_COLUMNS:
            mapped = self.cmap.header_for(name)
            if mapped is not None and where.get(header_key(mapped)):
                pick(name, where[header_key(mapped)])
        for name in KNOWN_COLUMNS:
            if name in chosen:
                continue
            idx = [i for i in where.get(name, []) if i not in used]
            if idx:
                pick(name, idx)
                continue
            mapped = self.cmap.header_for(name)
            if name in REQUIRED_COLUMNS:
                missing.append(name if mapped is None else f"{name} (mapped to {mapped!r})")
            elif mapped is not None:
                self.file_findings.append(Finding(
                    NOTE, f"the column mapping names {mapped!r} for {name}, but the file has no such column",
                    file=self.path))
        self.index = dict(chosen)
        for name, i in chosen.items():
            column = self.t.cells[i] if cells else None
            if column is None:
                self.col[name] = None  # found, not taken
            elif self.t.numbers is not None and i in self.t.numbers:
                self.col[name] = self.t.numbers[i]
            elif self.t.cell_text is not None and column.dtype.kind in "iuf":
                self.col[name] = _NumberColumn(column.to_numpy(), lambda rows, i=i: self.t.cell_text(i, rows))
            else:
                self.col[name] = _stripped(column, categorical=True)
            self.label[name] = self.t.headers[i].strip() or name
        if missing:
            found = [h.strip() for h in self.t.headers if h.strip()]
            hint = ""
            guesses = []
            for m in missing:
                base = m.split(" ")[0]
                close = difflib.get_close_matches(base, [header_key(h) for h in found], n=1, cutoff=0.75)
                if close:
                    guesses.append(f"{close[0]!r} for {base}?")
            if guesses:
                hint = "; did you mean " + ", ".join(guesses)
            shown = ", ".join(_show(h, 30) for h in found[:20]) + (" ..." if len(found) > 20 else "")
            raise SnapshotFileError(
                self.path,
                f"required column(s) missing: {', '.join(missing)}{src}; the header has: {shown or 'nothing'}{hint}"
                f"{'' if src else '; a mapping file (--columns MAP.toml) can name the headers this file uses'}",
            )
        for name, flag, value in (("underlying", "--underlying", self.ov.underlying),
                                  ("as_of", "--as-of", self.ov.as_of), ("spot", "--spot", self.ov.spot)):
            if value is None and name not in self.col:
                raise SnapshotFileError(
                    self.path, f"no {name}: the file has no {name} column and no override was given ({flag})")
            if value is not None and name in self.col:
                self.file_findings.append(Finding(
                    NOTE, f"{name} comes from the override ({value}); the file's {self.label[name]!r} column is not used",
                    file=self.path))
        ignored = [h.strip() for i, h in enumerate(self.t.headers) if i not in used and h.strip()]
        if ignored:
            shown = ", ".join(_show(h, 30) for h in ignored[:20]) + (" ..." if len(ignored) > 20 else "")
            self.file_findings.append(Finding(NOTE, f"columns not used: {shown}", file=self.path))

    def lab(self, name: str) -> str:
        return self.label.get(name, name)

    # -- row checks -------------------------------------------------------
    def check_rows(self) -> None:
        t, rows, n = self.t, self.rows, self.n
        width = len(t.headers)
        short = t.nfields < width
        rows.leave_out(short, None, lambda i: f"row has {t.nfields[i]} fields; the header has {width}",
                       topic=f"row has fewer fields than the header ({width})")
        rows.leave_out(t.extra, None,
                       lambda i: f"row has {t.nfields[i]} fields; the header has {width} (extra values at the end)",
                       topic=f"row has more fields than the header ({width})")

        # underlying
        if self.ov.underlying is not None:
            self.und_codes, names = np.zeros(n, dtype=np.int64), [self.ov.underlying]
        else:
            s = self.col["underlying"]
            if isinstance(s.dtype, pd.CategoricalDtype):
                self.und_codes, names = s.cat.codes.to_numpy().astype(np.int64), s.cat.categories
            else:
                self.und_codes, names = pd.factorize(s.to_numpy(dtype=object))
        #: the underlying of row i is ``und_names[und_codes[i]]`` (the last entry, None: a missing cell)
        self.und_names = np.append(np.asarray(names, dtype=object), None)
        if self.ov.underlying is None:
            rows.leave_out((s == "").to_numpy(dtype=bool), self.lab("underlying"), "underlying is empty")
            if self.ov.spot is not None:
                names = pd.unique(s[rows.free & (s != "").to_numpy(dtype=bool)])
                if len(names) > 1:
                    listed = ", ".join(_show(x, 20) for x in names[:5]) + (" ..." if len(names) > 5 else "")
                    raise SnapshotFileError(
                        self.path,
                        f"holds {len(names)} underlyings ({listed}); one spot override cannot serve them all "
                        "(give --underlying too, or split the file)")

        # as_of
        if self.ov.as_of is None:
            s = self.col["as_of"]
            self.as_of_ns, st = _times(s)
            self.as_of_given = st == 0
            lab = self.lab("as_of")
            rows.leave_out(st == 2, lab, "as_of {v} is not an ISO 8601 time such as 2026-03-20T15:30:00-04:00", s)
            rows.leave_out(st == 3, lab, "as_of {v} has no UTC offset; write it like 2026-03-20T15:30:00-04:00 "
                           "or give --as-of", s)
            rows.leave_out(st == 4, lab, "as_of {v} is not a possible time", s)

        # spot
        if self.ov.spot is None:
            s = self.col["spot"]
            self.spot_v, st = _numbers(s)
            lab = self.lab("spot")
            rows.leave_out(st == 2, lab, "spot {v} is not a number", s)
            rows.leave_out(st == 3, lab, "spot {v} is not a finite number", s)
            rows.leave_out((st == 0) & ~(self.spot_v > 0), lab, "spot {v} is not positive", s)

        # expiry
        s = self.col["expiry"]
        (self.expiry, st), codes, (values, _) = _dates_coded(s, self.cmap.expiry_format)
        #: each row's expiry as text (None for none) is ``exp_text[exp_codes[row]]`` (a code of -1 takes the
        #: last text, as ``expiry`` takes the last value)
        self.exp_codes, self.exp_text = codes, _dates_text(np.asarray(values))
        #: the order of each distinct expiry among them (int16, for a radix sort), by ``exp_codes`` as above
        distinct = np.unique(np.asarray(values), return_inverse=True)[1].reshape(-1)
        self.exp_rank = distinct.astype(np.int16) if len(distinct) < 2 ** 15 else None
        lab = self.lab("expiry")
        rows.leave_out(st == 1, lab, "expiry is empty")
        if self.cmap.expiry_format is None:
            rows.leave_out(st == 2, lab, "expiry {v} is not a date written YYYY-MM-DD", s)
        else:  # strptime cannot tell a wrong shape from an impossible day
            fmt = self.cmap.expiry_format.replace("{", "{{").replace("}", "}}")
            rows.leave_out(st == 2, lab, f"expiry {{v}} is not a possible date in the format {fmt}", s)
        rows.leave_out(st == 3, lab, "expiry {v} is not a possible date", s)
        rows.leave_out(st == 4, lab, f"expiry {{v}} is outside the years {YEAR_MIN}-{YEAR_MAX}", s)

        # strike
        s = self.col["strike"]
        self.strike, st = _numbers(s)
        lab = self.lab("strike")
        rows.leave_out(st == 1, lab, "strike is empty")
        rows.leave_out(st == 2, lab, "strike {v} is not a number", s)
        rows.leave_out(st == 3, lab, "strike {v} is not a finite number", s)
        rows.leave_out((st == 0) & ~(self.strike > 0), lab, "strike {v} is not positive", s)

        # kind
        s = self.col["kind"]
        spellings = dict(_KINDS)
        spellings.update(self.cmap.kind_aliases())
        kind = _per_unique(s, lambda u: np.array([_KIND_CODE.get(spellings.get(x), -1) for x in u.str.casefold()],
                                                 dtype=np.int8),
                           few=lambda u: np.array([_KIND_CODE.get(spellings.get(x.casefold()), -1) for x in u],
                                                  dtype=np.int8))
        self.is_put = kind == 1  # a row of no valid kind is left out here
        lab = self.lab("kind")
        rows.leave_out((s == "").to_numpy(dtype=bool), lab, "kind is empty")
        extra = "/".join(sorted(self.cmap.kind_aliases()))
        expected = "call/put or c/p" + (f" or {extra}" if extra else "")
        rows.leave_out(kind < 0, lab, f"kind {{v}} is not {expected}", s)

        # bid / ask
        self.bid, bst = _numbers(self.col["bid"])
        self.ask, ast = _numbers(self.col["ask"])
        for name, v, st in (("bid", self.bid, bst), ("ask", self.ask, ast)):
            s, lab = self.col[name], self.lab(name)
            rows.leave_out(st == 2, lab, f"{name} {{v}} is not a number", s)
            rows.leave_out(st == 3, lab, f"{name} {{v}} is not a finite number", s)
            rows.leave_out((st == 0) & (v < 0), lab, f"{name} {{v}} is a negative price", s)
        bid, ask = self.bid, self.ask
        has_b, has_a = bst == 0, ast == 0
        rows.leave_out(~has_b & ~has_a, None, "no bid and no ask")
        rows.leave_out(has_b & ~has_a & (bid == 0), self.lab("bid"), "zero bid and no ask: no price")
        rows.leave_out(has_b & has_a & (bid == 0) & (ask == 0), None, "bid and ask are both zero: no quote")
        crossed = has_b & has_a & (bid > ask)
        rows.leave_out(crossed, None,
                       lambda i: f"crossed market: bid {_fmt_quote(bid[i])} is above ask {_fmt_quote(ask[i])}",
                       topic="crossed market: bid above ask")

    # -- per underlying ---------------------------------------------------
    def resolve_groups(self) -> None:
        """Per underlying: the snapshot's as_of and spot, and expiries before its date.

        Works on each underlying's row indices, so many underlyings cost no more
        than one.
        """
        rows, lines = self.rows, self.t.line
        self.snap: dict[str, tuple[pd.Timestamp, float]] = {}
        self.group_rows: dict[str, np.ndarray] = {}
        live = np.flatnonzero(rows.free)
        live_codes = self.und_codes[live]
        if live_codes.size and live_codes.min() == live_codes.max():  # one underlying: nothing to sort
            names, order, bounds = [self.und_names[live_codes[0]]], None, None
        else:
            codes, names = _first_seen(live_codes, self.und_names[live_codes])
            order = np.argsort(codes, kind="stable")
            bounds = np.searchsorted(codes[order], np.arange(len(names) + 1))
        for g, und in enumerate(names):
            gi = live if order is None else live[order[bounds[g]:bounds[g + 1]]]  # its rows, in file order
            self.group_rows[und] = gi
            if order is None:  # one underlying: its rows are the live rows, worked on as masks over the file
                self._resolve_one(und, gi.size)
                continue
            # as_of
            if self.ov.as_of is not None:
                as_of = self.ov.as_of
                at_latest = gi
            else:
                given = gi[self.as_of_given[gi]]
                if given.size == 0:
                    rows.leave_out(gi, self.lab("as_of"),
                                   f"no as_of for {_show(und, 30)}: the as_of cell is empty on all its rows")
                    continue
                ns = self.as_of_ns[given]
                latest = ns.max()
                at_latest = given[ns == latest]
                first = int(at_latest[0])
                as_of = _timestamp(self.col["as_of"].iloc[first], int(latest))
                self._as_of_notes(und, as_of, ns.min(), latest, given.size, gi.size, int(lines[first]))
            # spot
            if self.ov.spot is not None:
                spot = float(self.ov.spot)
            else:
                has = gi[np.isfinite(self.spot_v[gi])]
                if has.size == 0:
                    rows.leave_out(gi, self.lab("spot"),
                                   f"no spot for {_show(und, 30)}: the spot cell is empty on all its rows")
                    continue
                latest_row = np.zeros(self.n, dtype=bool)
                latest_row[at_latest] = True
                pick = has[latest_row[has]]
                first = int(pick[0] if pick.size else has[0])
                spot = float(self.spot_v[first])
                spots = self.spot_v[has]
                values = spots[:1] if spots.min() == spots.max() else np.unique(spots)  # one spot: no sort
                self._spot_notes(und, spot, values, has.size, gi.size, int(lines[first]))
            self._end_group(und, as_of, spot, gi, int(lines[gi[0]]))

    def _resolve_one(self, und: str, size: int) -> None:
        """``resolve_groups`` for the only underlying, whose rows are those not left out (``size`` of them):
        the same outcome, from masks and reductions over the whole file instead of gathers by row index
        (no row-sized index or value arrays made afresh)."""
        rows, lines = self.rows, self.t.line
        group = rows.free.copy()
        # as_of
        if self.ov.as_of is not None:
            as_of = self.ov.as_of
            at_latest = group
        else:
            given = group & self.as_of_given
            n_given = int(np.count_nonzero(given))
            if n_given == 0:
                rows.leave_out(group, self.lab("as_of"),
                               f"no as_of for {_show(und, 30)}: the as_of cell is empty on all its rows")
                return
            ns = self.as_of_ns
            info = np.iinfo(ns.dtype)
            latest = ns.max(where=given, initial=info.min)
            earliest = ns.min(where=given, initial=info.max)
            at_latest = given if earliest == latest else given & (ns == latest)
            first = int(np.argmax(at_latest))
            as_of = _timestamp(self.col["as_of"].iloc[first], int(latest))
            self._as_of_notes(und, as_of, earliest, latest, n_given, size, int(lines[first]))
        # spot
        if self.ov.spot is not None:
            spot = float(self.ov.spot)
        else:
            has = group & np.isfinite(self.spot_v)
            n_has = int(np.count_nonzero(has))
            if n_has == 0:
                rows.leave_out(group, self.lab("spot"),
                               f"no spot for {_show(und, 30)}: the spot cell is empty on all its rows")
                return
            pick = has & at_latest
            first = int(np.argmax(pick)) if pick.any() else int(np.argmax(has))
            spot = float(self.spot_v[first])
            low = self.spot_v.min(where=has, initial=np.inf)
            high = self.spot_v.max(where=has, initial=-np.inf)
            values = self.spot_v[first:first + 1] if low == high else np.unique(self.spot_v[has])  # one spot: no sort
            self._spot_notes(und, spot, values, n_has, size, int(lines[first]))
        self._end_group(und, as_of, spot, group, int(lines[np.argmax(group)]))

    def _as_of_notes(self, und: str, as_of: pd.Timestamp, earliest_ns, latest_ns, n_given: int, n_rows: int,
                     line: int) -> None:
        """Findings on an underlying's as_of cells: they vary (earliest and latest in ns since the epoch,
        UTC; ``line``: the row whose as_of is used), or ``n_given`` of its ``n_rows`` rows give one."""
        if earliest_ns != latest_ns:
            earliest = pd.Timestamp(int(earliest_ns), tz="UTC").tz_convert(as_of.tz)
            self.group_findings.append(Finding(
                WARNING,
                f"as_of varies across {n_given} rows (from {earliest.isoformat()} to "
                f"{as_of.isoformat()}); the latest is used for the whole snapshot",
                file=self.path, line=line, column=self.lab("as_of"), underlying=und))
        if n_given < n_rows:
            self.group_findings.append(Finding(
                NOTE, f"as_of is empty on {n_rows - n_given} of {n_rows} rows; "
                      f"{as_of.isoformat()} is used for them",
                file=self.path, column=self.lab("as_of"), underlying=und))

    def _spot_notes(self, und: str, spot: float, values: np.ndarray, n_has: int, n_rows: int, line: int) -> None:
        """Findings on an underlying's spot cells: more than one of ``values`` (its distinct spots, ascending;
        ``line``: the row whose spot is used), or ``n_has`` of its ``n_rows`` rows give one."""
        if values.size > 1:
            self.group_findings.append(Finding(
                WARNING,
                f"spot varies ({values.size} values from {_fmt(values[0])} to {_fmt(values[-1])}); "
                f"{_fmt(spot)} from this line (at the latest as_of) is used for the whole snapshot",
                file=self.path, line=line, column=self.lab("spot"), underlying=und))
        if n_has < n_rows:
            self.group_findings.append(Finding(
                NOTE, f"spot is empty on {n_rows - n_has} of {n_rows} rows; {_fmt(spot)} is used",
                file=self.path, column=self.lab("spot"), underlying=und))

    def _end_group(self, und: str, as_of: pd.Timestamp, spot: float, group: np.ndarray, first_line: int) -> None:
        """What closes an underlying's group (``group``: its rows, as indices or a mask; ``first_line``: its
        first line): expiries before the snapshot date left out, its as_of and spot kept, a warning for
        control characters in its name."""
        # expiry before the snapshot date, the date in the exchange's time zone (whatever offset as_of has)
        local = as_of.tz_convert(EXCHANGE_TZ)
        day = np.datetime64(local.tz_localize(None).normalize().to_datetime64(), "ns")
        before = group & (self.expiry < day) if group.dtype == bool else group[self.expiry[group] < day]
        if before.any() if before.dtype == bool else before.size:
            day_text = f"{local:%Y-%m-%d} (New York)"
            self.rows.leave_out(before, self.lab("expiry"), lambda i: (
                f"expiry {self.expiry[i].astype('datetime64[D]')} is before the snapshot date {day_text}"),
                topic=f"expiry is before the snapshot date {day_text}")
        self.snap[und] = (as_of, spot)
        # control characters in the name
        if self.ov.underlying is None and re.search(_CONTROL_RE, und):
            self.group_findings.append(Finding(
                WARNING, f"underlying {_show(und)} contains control or invisible characters; kept as written",
                file=self.path, line=first_line, column=self.lab("underlying"), underlying=und))

    def check_duplicates(self) -> None:
        """Leave out a contract given again (same underlying, expiry, strike, kind): the first is kept.

        Sort-based on integer and float keys (no hashing of text per row).
        """
        free = np.flatnonzero(self.rows.free)
        if free.size < 2:
            return
        u = self.und_codes[free]
        e = self.expiry[free].astype(np.int64)
        k = self.is_put[free]
        st = self.strike[free]
        # a stable sort keeps file order within a run (``free`` is in file order): the first of a run is the
        # first given; the underlying is a key only when there are several
        one = u.min() == u.max()
        keys = (k, st, e) if one else (k, st, e, u)
        if _in_order(keys):  # a file in contract order needs no sort
            order = None
        elif one and self.exp_rank is not None:  # np.lexsort(keys), the expiries sorted by their small ranks
            order = np.argsort(k.view(np.int8), kind="stable")
            order = order[np.argsort(st[order], kind="stable")]
            order = order[np.argsort(self.exp_rank[self.exp_codes[free]][order], kind="stable")]
        else:
            order = np.lexsort(keys)
        self.by_contract = free if order is None else free[order]  # the frame's order too (``run``)
        if order is None:
            order = np.arange(free.size)
        same = np.zeros(free.size, dtype=bool)
        same[1:] = True
        for key in (u, e, st, k):
            key = key[order]
            same[1:] &= key[1:] == key[:-1]
        if not same.any():
            return
        run_start = np.maximum.accumulate(np.where(same, 0, np.arange(free.size)))
        dup_rows = free[order[same]]
        first_rows = free[order[run_start[same]]]
        mask = np.zeros(self.n, dtype=bool)
        mask[dup_rows] = True
        firsts = np.zeros(self.n, dtype=np.int64)
        firsts[dup_rows] = self.t.line[first_rows]
        self.rows.leave_out(mask, None,
                            lambda i: f"duplicate of line {firsts[i]} (same underlying, expiry, strike and kind)",
                            topic="duplicate contract (same underlying, expiry, strike and kind)")

    # -- warnings for accepted rows ----------------------------------------
    def optional_columns(self) -> dict[str, np.ndarray]:
        n, ok = self.n, self.rows.free
        out: dict[str, np.ndarray] = {}
        for name in ("iv", "volume", "open_interest", "rate", "div_yield"):
            if name not in self.col:
                out[name] = np.full(n, np.nan)
                continue
            s, lab = self.col[name], self.lab(name)
            v, st = _numbers(s, percent=name in ("iv", "rate", "div_yield"))
            self.warn_rows(ok & (st == 2), lab, f"{name} {{v}} is not a number; left blank", s)
            self.warn_rows(ok & (st == 3), lab, f"{name} {{v}} is not a finite number; left blank", s)
            bad = np.zeros(n, dtype=bool)
            if name == "iv":
                bad = (st == 0) & ~(v > 0)
                self.warn_rows(ok & bad, lab, "iv {v} is not positive; left blank", s)
                big = (st == 0) & (v > IV_MAX)
                self.warn_rows(ok & big, lab, "iv {v} is above 500%; left blank (write a percentage with a % sign, "
                                             "e.g. 25.3%)", s)
                bad |= big
            elif name in ("volume", "open_interest"):
                bad = (st == 0) & (v < 0)
                self.warn_rows(ok & bad, lab, f"{name} {{v}} is negative; left blank", s)
            else:
                bad = (st == 0) & (np.abs(v) > RATE_MAX)
                self.warn_rows(ok & bad, lab, f"{name} {{v}} is above 100%; left blank (write 5% or 0.05)", s)
            out[name] = np.where(bad, np.nan, v) if bad.any() else v
        # iv_basis
        if "iv_basis" in self.col:
            s = self.col["iv_basis"]
            norm = s.str.replace(r"\.0*$", "", regex=True)
            valid = norm.isin(_IV_BASES).to_numpy(dtype=bool)
            empty = (s == "").to_numpy(dtype=bool)
            self.warn_rows(ok & ~valid & ~empty, self.lab("iv_basis"),
                           "iv_basis {v} is not 252, 250 or 365; left blank", s)
            out["iv_basis"] = np.where(valid, norm.to_numpy(dtype=object), "")
        else:
            out["iv_basis"] = _Repeated("", n)
        # settle
        if "settle" in self.col:
            s = self.col["settle"]
            folded = pd.Series(_folded(s), dtype=object)
            valid = folded.isin(list(_SETTLES)).to_numpy(dtype=bool)
            empty = (s == "").to_numpy(dtype=bool)
            self.warn_rows(ok & ~valid & ~empty, self.lab("settle"), "settle {v} is not pm or am; pm is used", s)
            out["settle"] = np.where(valid, folded.to_numpy(dtype=object), "pm")
        else:
            out["settle"] = _Repeated("pm", n)
        return out

    def warn_rows(self, mask: np.ndarray, column: str | None, text, values=None, *, topic: str | None = None,
                  strike: bool = False) -> None:
        """Warn about the rows of ``mask``: ``text`` as in ``_Rows.leave_out``, or an object array of
        reasons (one per selected row). ``strike`` records each row's strike for the group's strike range."""
        sel = np.flatnonzero(mask)
        if sel.size == 0:
            return
        if isinstance(text, np.ndarray):
            msgs = text
        elif callable(text):
            msgs = [text(i) for i in sel]
        elif values is not None:
            msgs = _formatted(text, _values_at(values, sel))
        else:
            msgs = text
        self.warn.append((sel, column, msgs, topic if topic is not None else _topic(text) if isinstance(text, str)
                          else "other", strike))

    def _on_contract(self, sel: np.ndarray, what: str, side: str, strike_text) -> np.ndarray:
        """``what`` + `` on the 95 put`` for each row of ``sel`` (object array; every row of ``side``),
        formatted once per distinct strike. ``strike_text``: (code per row, text per code) of the strikes."""
        codes, text = strike_text
        mine = codes[sel]
        used = np.flatnonzero(np.bincount(mine, minlength=len(text)))  # the distinct codes, sorted, without a sort
        texts = np.empty(len(text), dtype=object)
        texts[used] = [f"{what} on the {text[k]} {side}" for k in used.tolist()]
        return texts[mine]

    def quote_warnings(self) -> None:
        ok = self.rows.free
        bid, ask = self.bid, self.ask
        has_b, has_a = np.isfinite(bid), np.isfinite(ask)
        is_put = self.is_put
        zero_bid, no_bid = ok & has_b & has_a & (bid == 0), ok & ~has_b & has_a
        named = np.flatnonzero(zero_bid | no_bid)  # their strikes formatted once for the four groups
        strikes, inverse = np.unique(self.strike[named], return_inverse=True)
        codes = np.zeros(self.n, dtype=np.int64)
        codes[named] = inverse.reshape(-1)
        strike_text = (codes, [_fmt(k) for k in strikes.tolist()])
        for side, words, one in ((~is_put, "calls", "call"), (is_put, "puts", "put")):
            for mask, what, col in ((zero_bid, "zero bid", "bid"), (no_bid, "no bid", "bid")):
                mask = mask & side
                sel = np.flatnonzero(mask)
                if sel.size:
                    self.warn_rows(mask, self.lab(col), self._on_contract(sel, what, one, strike_text),
                                   topic=f"{what} on {words}", strike=True)
        no_ask = ok & has_b & ~has_a
        if no_ask.any():
            quoted = _fmt_quotes(bid[no_ask])
            self.warn_rows(no_ask, self.lab("ask"), np.array([f"no ask (bid {q})" for q in quoted], dtype=object),
                           topic="no ask", strike=True)
        with np.errstate(over="ignore", invalid="ignore"):  # rows already left out may hold +-1e308
            spread = ask - bid
            mid = 0.5 * ask + 0.5 * bid  # not (ask + bid) / 2: that overflows for prices near 1e308
            wide = ok & has_b & has_a & (bid > 0) & (spread > WIDE_SPREAD_FRACTION * mid) & (spread > WIDE_SPREAD_MIN)
        sel = np.flatnonzero(wide)
        if sel.size:
            # distinct (bid, ask) pairs from the codes of the distinct bids and asks
            b_val, b_code = np.unique(bid[sel], return_inverse=True)
            a_val, a_code = np.unique(ask[sel], return_inverse=True)
            pair, inverse = np.unique(b_code.reshape(-1) * a_val.size + a_code.reshape(-1), return_inverse=True)
            pb, pa = b_val[pair // a_val.size], a_val[pair % a_val.size]
            with np.errstate(over="ignore", invalid="ignore"):
                percent = (pa - pb) / (0.5 * pa + 0.5 * pb) * 100
            b_text, a_text = _fmt_quotes(b_val), _fmt_quotes(a_val)
            texts = np.array([f"wide spread: bid {b_text[i]}, ask {a_text[j]} (spread {p:.0f}% of mid)"
                              for i, j, p in zip((pair // a_val.size).tolist(), (pair % a_val.size).tolist(),
                                                 percent.tolist())], dtype=object)
            self.warn_rows(wide, None, texts[inverse.reshape(-1)],
                           topic=f"wide spread (over {WIDE_SPREAD_FRACTION:.0%} of mid)", strike=True)

    # -- output -----------------------------------------------------------
    def row_findings(self, severity: str, sel: np.ndarray, reason, topic, column, strike: bool) -> FindingTable:
        """Findings about the rows ``sel`` as one table (no Python work per row)."""
        named = np.array([u if isinstance(u, str) and u != "" else None for u in self.und_names], dtype=object)
        und = named[self.und_codes[sel]]
        exp_text = self.exp_text[self.exp_codes[sel]] if len(self.exp_text) else _dates_text(self.expiry[sel])
        return FindingTable(SEVERITIES.index(severity), reason, topic=topic, file=self.path, line=self.t.line[sel],
                            column=column, underlying=und, expiry=exp_text,
                            strike=self.strike[sel] if strike else None)

    def findings(self) -> FindingTable:
        rows, t = self.rows, self.t
        parts: list = [FindingTable.of(list(self.file_findings) + list(self.group_findings))]
        out_rows = np.flatnonzero(~rows.free)
        if out_rows.size:
            reason = rows.reason[out_rows].copy()
            for k in np.flatnonzero(t.end_line[out_rows] > t.line[out_rows]):  # rare: rows over several lines
                i = out_rows[k]
                reason[k] = f"{reason[k]} (this row spans lines {t.line[i]}-{t.end_line[i]})"
            parts.append(self.row_findings(LEFT_OUT, out_rows, reason, rows.topic[out_rows], rows.column[out_rows],
                                           False))
        for sel, column, msgs, topic, strike in self.warn:
            parts.append(self.row_findings(WARNING, sel, msgs, topic, column, strike))
        return FindingTable.concat(parts).sorted_by_line()

    def run(self, *, file_notes: bool = True, whole: bool = True) -> FileLoad:
        """Check every row and build the snapshots. ``whole=False`` for a part of a file (some of its
        underlyings): no error when no row is usable (``self.tally`` counts the reasons instead), and
        the notes about the file's columns only with ``file_notes``."""
        self.resolve_columns()
        if not file_notes:
            self.file_findings = []
        self.check_rows()
        self.resolve_groups()
        self.check_duplicates()
        optional = self.optional_columns()
        self.quote_warnings()
        findings = self.findings()
        accepted = int(self.rows.free.sum())
        if not whole:
            self.tally = _ReasonTally()
            self.tally.add(self.rows.reason[~self.rows.free])
            if accepted == 0:
                return FileLoad(path=self.path, snapshots=[], findings=findings, rows_read=self.n, rows_accepted=0)
        if accepted == 0:
            if self.n == 0:
                raise SnapshotFileError(self.path, "no usable row: there are no data rows below the header",
                                        findings=findings)
            common = _common_reasons(self.rows.reason[~self.rows.free])
            raise SnapshotFileError(
                self.path, f"no usable row: all {self.n} rows were left out ({common})",
                findings=findings, rows_read=self.n)
        # what only the checks needed goes before the frame is built (a big file's peak memory is here)
        self.col, self.warn = {}, []
        self.t.cells = self.t.cells.iloc[:0]
        self.t.cell_text = self.t.numbers = None  # the file's bytes, the kept number texts
        self.rows.reason = self.rows.topic = self.rows.column = None
        # one frame of every accepted row, sorted by underlying, expiry, strike, kind, then cut per underlying
        ok = self.rows.free
        names = list(self.snap)
        gid = np.full(self.n, -1, dtype=np.int64)
        for g, und in enumerate(names):
            gid[self.group_rows[und]] = g
        if self.by_contract is not None:  # the rows already sorted by contract in check_duplicates
            acc = self.by_contract[ok[self.by_contract] & (gid[self.by_contract] >= 0)]
            if len(names) > 1:
                acc = acc[np.argsort(gid[acc], kind="stable")]
        else:
            acc = np.flatnonzero(ok & (gid >= 0))
            # stable: rows of the same contract key stay in file order (``acc`` is in file order, as ``t.line``)
            keys = (self.is_put[acc], self.strike[acc], self.expiry[acc].astype(np.int64))
            acc = acc[np.lexsort(keys if len(names) == 1 else keys + (gid[acc],))]
        frame = pd.DataFrame(copy=False, data={
            "expiry": self.expiry[acc].astype("datetime64[ns]"),
            "strike": self.strike[acc].astype(np.float64, copy=False),
            "kind": _text_column(self.is_put[acc].astype(np.int64), ["call", "put"]),
            "bid": self.bid[acc].astype(np.float64, copy=False),
            "ask": self.ask[acc].astype(np.float64, copy=False),
            "iv": optional["iv"][acc].astype(np.float64, copy=False),
            "iv_basis": _text_column(optional["iv_basis"][acc]),
            "volume": optional["volume"][acc].astype(np.float64, copy=False),
            "open_interest": optional["open_interest"][acc].astype(np.float64, copy=False),
            "settle": _text_column(optional["settle"][acc]),
            "rate": optional["rate"][acc].astype(np.float64, copy=False),
            "div_yield": optional["div_yield"][acc].astype(np.float64, copy=False),
            "source_file": _text_column(np.zeros(acc.size, dtype=np.int64), [self.path]),
            "source_line": self.t.line[acc].astype(np.int64),
        })[list(CONTRACT_COLUMNS)]
        bounds = np.searchsorted(gid[acc], np.arange(len(names) + 1))
        if len(names) == 1:  # the common case: no factorisation of the findings' underlyings
            named = findings.underlying == names[0]
            by_underlying = ({} if not named.any() else {names[0]: findings} if named.all()
                             else {names[0]: findings.take(named)})
        else:
            by_underlying = findings.split("underlying")
        snapshots = []
        for g, und in enumerate(names):
            if bounds[g] == bounds[g + 1]:
                continue
            as_of, spot = self.snap[und]
            contracts = frame.iloc[bounds[g]:bounds[g + 1]].reset_index(drop=True)
            snapshots.append(Snapshot(underlying=und, as_of=as_of, spot=spot, contracts=contracts,
                                      findings=by_underlying.get(und, FindingTable.empty()), sources=(self.path,)))
        return FileLoad(path=self.path, snapshots=snapshots, findings=findings, rows_read=self.n,
                        rows_accepted=accepted)


class _Repeated:
    """One text on every row (a column the file does not have), taken by row indices like an array."""

    def __init__(self, text: str, n: int):
        self.text, self.n = text, n

    def __getitem__(self, rows: np.ndarray) -> _Repeated:
        rows = np.asarray(rows)
        return _Repeated(self.text, int(np.count_nonzero(rows)) if rows.dtype == bool else rows.size)


def _text_column(values, uniques: Sequence[str] | None = None) -> pd.Series:
    """A str Series of object ``values`` (or of codes into ``uniques``, or a ``_Repeated``), converted once
    per distinct value."""
    if isinstance(values, _Repeated):
        values, uniques = np.zeros(values.n, dtype=np.int64), [values.text]
    if uniques is None:
        values, uniques = pd.factorize(values)
    return pd.Series(pd.array(np.asarray(uniques, dtype=object), dtype=str).take(values))


def _dates_text(values: np.ndarray) -> np.ndarray:
    """datetime64 values as ``YYYY-MM-DD`` text, None for NaT (object array, formatted per distinct date)."""
    if values.size == 0:
        return np.empty(0, dtype=object)
    uniq, inverse = np.unique(values.astype("datetime64[D]"), return_inverse=True)
    text = np.array([None if np.isnat(u) else str(u) for u in uniq], dtype=object)
    return text[inverse.reshape(-1)]


def _timestamp(text: str, utc_ns: int) -> pd.Timestamp:
    """The as_of Timestamp in the file's own UTC offset (UTC if that cannot be kept)."""
    try:
        ts = pd.Timestamp(text)
        if ts.tzinfo is not None and ts.value == utc_ns:
            return ts
    except (ValueError, OverflowError):
        pass
    return pd.Timestamp(utc_ns, tz="UTC")


def _reason_kind(reason: str) -> str:
    """A reason with quoted values and numbers masked: the key for counting reasons of one kind."""
    return re.sub(r"'[^']*'|\"[^\"]*\"|line \d+|\d+(\.\d+)?", "…", reason)


class _ReasonTally:
    """Kinds of reason (see ``_reason_kind``) with their counts and first real example, added a
    batch of reasons at a time (work per distinct reason, not per row)."""

    def __init__(self) -> None:
        self.counts: Counter[str] = Counter()
        self.first: dict[str, str] = {}
        self.varied: set[str] = set()

    def add(self, reasons: Sequence[str]) -> None:
        reasons = np.asarray(reasons, dtype=object)
        if reasons.size == 0:
            return
        codes, uniq = pd.factorize(reasons)
        counts = np.bincount(codes, minlength=len(uniq))
        for r, c in zip(uniq, counts):
            key = _reason_kind(r)
            self.counts[key] += int(c)
            if key not in self.first:
                self.first[key] = r
            elif r != self.first[key]:
                self.varied.add(key)

    def merge(self, other: _ReasonTally) -> None:
        for key, c in other.counts.items():
            self.counts[key] += c
            if key not in self.first:
                self.first[key] = other.first[key]
            elif other.first[key] != self.first[key] or key in other.varied:
                self.varied.add(key)
            if key in other.varied:
                self.varied.add(key)

    def text(self, top: int = 3) -> str:
        return "; ".join(f"{c} x {self.first[k]}" + (", and the like" if k in self.varied else "")
                         for k, c in self.counts.most_common(top))


def _common_reasons(reasons: Sequence[str], top: int = 3) -> str:
    """The most common kinds of reason with their counts, each shown by its first real example
    ("12 x strike '-5' is not positive, and the like"), never with its numbers masked."""
    tally = _ReasonTally()
    tally.add(reasons)
    return tally.text(top)


def _tidy(contracts: pd.DataFrame) -> pd.DataFrame:
    """Canonical column order and dtypes, sorted by expiry, strike, kind (stable)."""
    contracts = contracts[list(CONTRACT_COLUMNS)]
    contracts = contracts.sort_values(["expiry", "strike", "kind"], kind="mergesort").reset_index(drop=True)
    contracts["expiry"] = contracts["expiry"].astype("datetime64[ns]")
    for c in ("strike", "bid", "ask", "iv", "volume", "open_interest", "rate", "div_yield"):
        contracts[c] = contracts[c].astype(np.float64)
    contracts["source_line"] = contracts["source_line"].astype(np.int64)
    return contracts


# --------------------------------------------------------------------------- public functions


def _as_column_map(column_map: ColumnMap | str | Path | None) -> ColumnMap:
    if column_map is None:
        return ColumnMap()
    if isinstance(column_map, ColumnMap):
        if column_map.expiry_format is not None:  # built in code, not read from a file: check it here
            check_expiry_format(column_map.expiry_format, column_map.source or "<mapping>")
        return column_map
    return load_column_map(column_map)


#: The columns that hold numbers (read by the CSV reader as numbers when every cell is one).
NUMBER_COLUMNS = ("spot", "strike", "bid", "ask", "iv", "volume", "open_interest", "rate", "div_yield")


def _number_columns(path: str, ov: SnapshotOverrides, cmap: ColumnMap):
    """``numeric(headers)`` for ``_read_table``: the positions of the number columns under these headers,
    each with its name (none when the header is refused: the checks then say why)."""
    def numeric(headers: list[str]) -> dict[int, str]:
        none = np.zeros(0, np.int64)
        v = _FileValidator(path, _Table(headers, pd.DataFrame(), none, none, none, none.astype(bool)), ov, cmap)
        try:
            v.resolve_columns(cells=False)
        except ChainTriageError:
            return {}
        return {v.index[n]: n for n in NUMBER_COLUMNS if n in v.index}
    return numeric


def load_file(
    path: str | Path,
    *,
    overrides: SnapshotOverrides | None = None,
    column_map: ColumnMap | str | Path | None = None,
) -> FileLoad:
    """Load one snapshot file (CSV, or Parquet when pyarrow is installed).

    ``overrides`` replace the file's underlying / as_of / spot columns;
    ``column_map`` (a ColumnMap or the path of a TOML mapping file) says how
    to find our columns under other header names. Raises SnapshotFileError
    when the file as a whole is unusable, ChainTriageError for a bad override
    or mapping file.
    """
    name = str(path)
    ov = (overrides or SnapshotOverrides()).resolved()
    cmap = _as_column_map(column_map)
    try:
        table = _read_table(name, _number_columns(name, ov, cmap))
        return _FileValidator(name, table, ov, cmap).run()
    except MemoryError:
        raise SnapshotFileError(name, _too_big(name)) from None


#: The most bytes of snapshot files the app opens at once (about 1.2 million contracts in a typical
#: export); bigger inputs go to `check` and `table`, which read them block by block.
OPEN_MAX_BYTES = 100 * 1000 * 1000


def too_big_to_open(paths: Iterable[str | Path], limit: int | None = None) -> str | None:
    """A message when the regular files among ``paths`` are together bigger than ``limit`` bytes, else None."""
    limit = OPEN_MAX_BYTES if limit is None else limit
    sizes = []
    for p in paths:
        try:
            if Path(p).is_file():
                sizes.append((str(p), Path(p).stat().st_size))
        except OSError:
            continue
    total = sum(n for _, n in sizes)
    if total <= limit:
        return None
    biggest = max(sizes, key=lambda x: x[1])
    return (f"{total / 1e6:,.0f} MB of snapshot files is more than the app opens at once ({limit / 1e6:,.0f} MB; "
            f"the biggest is {biggest[0]}, {biggest[1] / 1e6:,.0f} MB): use `chaintriage check` or "
            "`chaintriage table` on it, or split it (e.g. one file per underlying) and open a part")


def _too_big(path: str) -> str:
    """The reason for a file that does not fit in memory, with its size."""
    try:
        size = f" ({Path(path).stat().st_size / 1e6:,.0f} MB)"
    except OSError:
        size = ""
    return (f"is too big to load in the memory available{size}; split it (e.g. one file per underlying "
            "or per expiry) and load the parts")


def load_files(
    paths: Iterable[str | Path],
    *,
    overrides: SnapshotOverrides | None = None,
    column_map: ColumnMap | str | Path | None = None,
    column_maps: Sequence[ColumnMap | str | Path | None] | None = None,
) -> LoadResult:
    """Load several files, going on past unusable ones (their errors are collected).

    ``column_map`` maps the headers of every file; ``column_maps`` (one per path, None for
    a file in our own layout) gives each file its own mapping instead: a mapping belongs to
    the files it was given for.

    Snapshots of the same underlying at the same instant from different files
    are merged into one (e.g. calls and puts exported apart); a contract found
    in an earlier file is left out of the later file, with a finding, and that
    file's counts are adjusted. A bad override or mapping file raises
    ChainTriageError before any file is read.
    """
    ov = (overrides or SnapshotOverrides()).resolved()
    paths = list(paths)
    if column_maps is not None:
        if len(column_maps) != len(paths):
            raise ValueError("column_maps needs one entry per path")
        maps = [_as_column_map(m) for m in column_maps]
    else:
        maps = [_as_column_map(column_map)] * len(paths)
    files: list[FileLoad] = []
    errors: list[SnapshotFileError] = []
    seen: dict[tuple[int, int], str] = {}
    repeated: list[Finding] = []
    for p, cmap in zip(paths, maps):
        identity = _file_identity(p)
        if identity is not None and identity in seen:
            same = "" if seen[identity] == str(p) else f" (as {seen[identity]})"
            repeated.append(Finding(NOTE, f"{p} is given twice{same}; it is read once"))
            continue
        if identity is not None:
            seen[identity] = str(p)
        try:
            files.append(load_file(p, overrides=ov, column_map=cmap))
        except SnapshotFileError as exc:
            errors.append(exc)
    merged, merge_findings = _merge(files)
    findings = FindingTable.concat([fl.findings for fl in files] + [repeated, merge_findings])
    return LoadResult(snapshots=merged, findings=findings, files=files, errors=errors)


def _file_identity(path: str | Path) -> tuple[int, int] | None:
    """(device, inode) of a regular file, so one file given under two names is read once; None otherwise."""
    try:
        st = os.stat(path)
    except (OSError, ValueError):
        return None
    return (st.st_dev, st.st_ino) if stat.S_ISREG(st.st_mode) else None


def _merge(files: list[FileLoad]) -> tuple[list[Snapshot], list[Finding]]:
    """Merge snapshots with the same underlying and instant across files.

    A contract already given by an earlier file is left out of the later one:
    the later file gets a LEFT_OUT finding, its ``rows_accepted`` drops by one
    and the row leaves its own snapshot, so per-file accounting stays exact.
    """
    groups: dict[tuple[str, int], list[tuple[FileLoad, Snapshot]]] = {}
    for fl in files:
        for snap in fl.snapshots:
            groups.setdefault((snap.underlying, snap.as_of.value), []).append((fl, snap))
    out: list[Snapshot] = []
    extra_findings: list[Finding] = []
    for (und, _), members in groups.items():
        if len(members) == 1:
            out.append(members[0][1])
            continue
        first_fl, first = members[0]
        allc = pd.concat(
            [s.contracts.assign(_member=m) for m, (_, s) in enumerate(members)], ignore_index=True)
        keys = ["expiry", "strike", "kind"]
        dup = allc.duplicated(keys, keep="first").to_numpy()
        group_findings: list[Finding] = []
        if dup.any():
            first_at = allc.groupby(keys, sort=False)[["source_file", "source_line"]].transform("first")
            added: dict[int, list[Finding]] = {}
            for i in np.flatnonzero(dup):
                fl, snap = members[int(allc["_member"].iat[i])]
                finding = Finding(
                    LEFT_OUT,
                    f"duplicate of {first_at['source_file'].iat[i]}:{int(first_at['source_line'].iat[i])} "
                    "(same underlying, expiry, strike and kind)",
                    file=fl.path, line=int(allc["source_line"].iat[i]), underlying=und,
                    expiry=str(allc["expiry"].iat[i].date()))
                added.setdefault(int(allc["_member"].iat[i]), []).append(finding)
                fl.rows_accepted -= 1
            for m, new in added.items():
                fl, snap = members[m]
                fl.findings = FindingTable.concat([fl.findings, new])
                snap.findings = FindingTable.concat([snap.findings, new])
            for m, (fl, snap) in enumerate(members):
                gone = allc.loc[dup & (allc["_member"] == m).to_numpy(), "source_line"].to_numpy()
                if gone.size:
                    keep = ~np.isin(snap.contracts["source_line"].to_numpy(), gone)
                    snap.contracts = snap.contracts[keep].reset_index(drop=True)
                    fl.findings = fl.findings.sorted_by_line()
                    if snap.contracts.empty:
                        fl.snapshots.remove(snap)
        spots = [s.spot for _, s in members]
        if len(set(spots)) > 1:
            listed = ", ".join(f"{fl.path} {_fmt(s.spot)}" for fl, s in members)
            group_findings.append(Finding(
                WARNING, f"spot differs between files at the same as_of ({listed}); {_fmt(first.spot)} is used",
                underlying=und))
        extra_findings.extend(group_findings)
        contracts = _tidy(allc[~dup].drop(columns="_member").reset_index(drop=True))
        snap_findings = FindingTable.concat([s.findings for _, s in members] + [group_findings])
        sources = tuple(dict.fromkeys(src for _, s in members for src in s.sources))
        out.append(Snapshot(underlying=und, as_of=first.as_of, spot=first.spot, contracts=contracts,
                            findings=snap_findings, sources=sources))
    return out, extra_findings


# --------------------------------------------------------------------------- big inputs, a few underlyings at a time

#: Inputs bigger than this many bytes together are read by ``PartLoader`` (a few underlyings at a time) by
#: the command line's `check` and `table`, so their memory does not grow with the file.
PART_INPUT_BYTES = BIG_FILE_BYTES
#: Rows of one part: underlyings are gathered into a part until it holds this many rows (an underlying is
#: never split: its checks and its snapshot need all its rows).
PART_ROWS = 500_000
#: A big file whose rest (from where quotes stand inside fields) is more than this many bytes gets a
#: note saying it is read the slower way (the csv module, all at once).
SLOW_READ_NOTE_BYTES = 16 * 1024 * 1024


def inputs_bytes(paths: Iterable[str | Path]) -> int:
    """Bytes of the regular files among ``paths`` together (others count 0)."""
    total = 0
    for p in paths:
        try:
            if Path(p).is_file():
                total += Path(p).stat().st_size
        except OSError:
            continue
    return total


def _take_rows(t: _Table, sel: np.ndarray) -> _Table:
    """The rows ``sel`` (a bool mask) of a table."""
    cells = t.cells if sel.all() else t.cells[sel].reset_index(drop=True)
    return _Table(t.headers, cells, t.line[sel], t.end_line[sel], t.nfields[sel], t.extra[sel])


@dataclass
class _FileIndex:
    """What the first reading of one file found: its underlyings (rows each, in order of first
    appearance) and where their rows are (per block of a big CSV, or the whole table of a small one)."""

    path: str
    cmap: ColumnMap
    headers: list[str]
    delim: str = ","
    table: _Table | None = None  # a file read whole: its table (category codes)
    keys: np.ndarray | None = None  # ... and the underlying key of each of its rows
    blocks: list = None  # a file read in blocks: (span, set of keys in the block)
    counts: dict | None = None
    exact: tuple | None = None  # the rest of the file read by the csv module: (its table, its rows' keys)
    notes: list | None = None  # findings of the first reading, said with the file's first part
    started: bool = False  # a part of this file has been read (its notes about columns are said once)


class PartLoader:
    """Snapshot files read a few underlyings at a time, for inputs too big to hold at once.

    Creating it reads every file once, block by block, to find which
    underlyings it holds and where (``errors`` then holds the files that cannot
    be used at all). Iterating gives one ``LoadResult`` per part: the
    snapshots of some underlyings (merged across files as ``load_files``
    does), the findings about their rows, and per-file ``FileLoad``s whose
    row counts add up, over the parts, to each file's. Each part's files are
    read again, only the blocks holding its underlyings. After iterating,
    ``unusable()`` gives the errors of files of which no row was usable.

    Every row belongs to the part of its underlying (rows with an empty one
    to the part of the empty name), so each check sees exactly the rows it
    would see in the whole file: the outcome is that of ``load_files``, with
    findings in the same groups (see ``tests/core/test_loading_parts.py``).
    """

    def __init__(self, paths: Iterable[str | Path], *, overrides: SnapshotOverrides | None = None,
                 column_map: ColumnMap | str | Path | None = None, part_rows: int | None = None) -> None:
        self.ov = (overrides or SnapshotOverrides()).resolved()
        cmap = _as_column_map(column_map)
        self.part_rows = PART_ROWS if part_rows is None else part_rows
        self.errors: list[SnapshotFileError] = []
        self.repeated: list[Finding] = []
        self.files: list[_FileIndex] = []
        self.rows: dict[str, int] = {}
        self.accepted: dict[str, int] = {}
        self.tally: dict[str, _ReasonTally] = {}
        seen: dict[tuple[int, int], str] = {}
        for p in paths:
            identity = _file_identity(p)
            if identity is not None and identity in seen:
                same = "" if seen[identity] == str(p) else f" (as {seen[identity]})"
                self.repeated.append(Finding(NOTE, f"{p} is given twice{same}; it is read once"))
                continue
            if identity is not None:
                seen[identity] = str(p)
            try:
                self.files.append(self._index(str(p), cmap))
            except SnapshotFileError as exc:
                self.errors.append(exc)
            except MemoryError:
                self.errors.append(SnapshotFileError(str(p), _too_big(str(p))))

    # -- the first reading
    def _keys(self, t: _Table, column: int | None) -> np.ndarray:
        """The underlying of each row as the checks will see it: the override, or the stripped cell."""
        if self.ov.underlying is not None or column is None:
            return np.full(len(t.cells), self.ov.underlying or "", dtype=object)
        return _stripped(t.cells[column]).to_numpy(dtype=object)

    def _columns(self, path: str, headers: list[str], cmap: ColumnMap) -> int | None:
        """The underlying column's position (raises SnapshotFileError for a header the checks refuse)."""
        width = len(headers)
        empty = _Table(headers, pd.DataFrame({i: pd.Series([], dtype=str) for i in range(width)}),
                       np.zeros(0, np.int64), np.zeros(0, np.int64), np.zeros(0, np.int64), np.zeros(0, bool))
        v = _FileValidator(path, empty, self.ov, cmap)
        v.resolve_columns()
        return v.index.get("underlying")

    def _index(self, path: str, cmap: ColumnMap) -> _FileIndex:
        counts: dict[str, int] = {}
        named: dict[str, None] = {}  # underlyings of rows of the right width, for the spot override's check

        def count(t: _Table, keys: np.ndarray) -> set:
            codes, uniq = pd.factorize(keys)
            for k, c in zip(uniq, np.bincount(codes, minlength=len(uniq))):
                counts[k] = counts.get(k, 0) + int(c)
            if self.ov.spot is not None and self.ov.underlying is None:
                wide = (t.nfields >= len(t.headers)) & ~t.extra & (keys != "")
                for k in pd.unique(keys[wide]):
                    named.setdefault(k)
            return set(uniq)

        p = Path(path)
        blocks = None
        exact = None
        notes: list[Finding] = []
        try:
            if p.is_file() and p.suffix.lower() not in _PARQUET_SUFFIXES and p.stat().st_size > max(
                    BIG_FILE_BYTES, CHUNK_BYTES):
                with open(p, "rb") as fh:
                    head = fh.read(4)
                    if head != b"PAR1" and not head.startswith((b"\xff\xfe", b"\xfe\xff", b"PK\x03\x04")):
                        blocks, column, headers, delim = [], None, None, ","
                        for t, span, delim in _csv_blocks(path, fh, head, columns=lambda h: [column or 0]):
                            if headers is None:
                                headers = t.headers
                                column = self._columns(path, headers, cmap)
                            else:
                                t.headers = headers
                            keys = self._keys(t, column)
                            blocks.append((span, count(t, keys)))
                            if span.exact:  # read by the csv module: kept, never read that way again
                                t.cells = _as_categories(t.cells)
                                exact = (t, keys)
                                first_line = int(t.line[0]) if len(t.line) else span.lines_before + 1
                                if p.stat().st_size - span.start > SLOW_READ_NOTE_BYTES:
                                    notes.append(Finding(
                                        NOTE, f"quotes stand inside fields (not only around whole fields) at "
                                              f"or after line {first_line}, so the file from there on is read at "
                                              "once by the exact reader: slower, and its memory grows with the file",
                                        file=path))
                        if headers is None:
                            raise SnapshotFileError(path, "is empty")
        except OSError as exc:
            raise SnapshotFileError(path, f"cannot be read ({exc.strerror or exc})") from None
        if blocks is not None:
            index = _FileIndex(path, cmap, headers, delim=delim, blocks=blocks, counts=counts, exact=exact,
                               notes=notes)
        else:
            t = _read_table(path)
            t.cells = _as_categories(t.cells)
            keys = self._keys(t, self._columns(path, t.headers, cmap))
            count(t, keys)
            index = _FileIndex(path, cmap, t.headers, table=t, keys=keys, counts=counts)
        if len(named) > 1:
            names = list(named)
            listed = ", ".join(_show(x, 20) for x in names[:5]) + (" ..." if len(names) > 5 else "")
            raise SnapshotFileError(
                path, f"holds {len(names)} underlyings ({listed}); one spot override cannot serve them all "
                      "(give --underlying too, or split the file)")
        self.rows[path] = sum(counts.values())
        self.accepted[path] = 0
        self.tally[path] = _ReasonTally()
        return index

    # -- the parts
    def batches(self) -> list[list[str]]:
        """The underlyings of each part, in order of first appearance (file by file)."""
        sizes: dict[str, int] = {}
        for f in self.files:
            for k, c in f.counts.items():
                sizes[k] = sizes.get(k, 0) + c
        out: list[list[str]] = []
        rows = 0
        for k, c in sizes.items():
            if not out or rows + c > self.part_rows:
                out.append([])
                rows = 0
            out[-1].append(k)
            rows += c
        return out

    def _part_table(self, f: _FileIndex, wanted: set) -> _Table | None:
        """The rows of ``f`` whose underlying is in ``wanted`` (None when there are none)."""
        if f.table is not None:
            sel = pd.Series(f.keys, dtype=object).isin(wanted).to_numpy(dtype=bool)
            return _take_rows(f.table, sel) if sel.any() else None
        column = self._columns(f.path, f.headers, f.cmap)
        tables = []
        try:
            with open(f.path, "rb") as fh:
                for span, keys in f.blocks:
                    if not keys & wanted:
                        continue
                    if span.exact:
                        t, k = f.exact
                        tables.append(_take_rows(t, pd.Series(k, dtype=object).isin(wanted).to_numpy(dtype=bool)))
                        continue
                    fh.seek(span.start)
                    data = fh.read() if span.end is None else fh.read(span.end - span.start)
                    t = _parse_block(f.path, data, span, None if span.first else f.headers, f.delim)
                    if t is None:  # the file changed since the first reading
                        raise SnapshotFileError(f.path, "changed while it was being read")
                    t.headers = f.headers
                    k = self._keys(t, column)
                    tables.append(_take_rows(t, pd.Series(k, dtype=object).isin(wanted & keys).to_numpy(dtype=bool)))
        except OSError as exc:
            raise SnapshotFileError(f.path, f"cannot be read ({exc.strerror or exc})") from None
        tables = [t for t in tables if len(t.cells)]
        if not tables:
            return None
        cat = np.concatenate
        return _Table(f.headers, pd.concat([t.cells for t in tables], ignore_index=True),
                      cat([t.line for t in tables]), cat([t.end_line for t in tables]),
                      cat([t.nfields for t in tables]), cat([t.extra for t in tables]))

    def __iter__(self):
        for n, batch in enumerate(self.batches()):
            wanted = set(batch)
            loads: list[FileLoad] = []
            for f in self.files:
                if not wanted & set(f.counts):
                    continue
                t = self._part_table(f, wanted)
                if t is None:
                    continue
                v = _FileValidator(f.path, t, self.ov, f.cmap)
                try:
                    fl = v.run(file_notes=not f.started, whole=False)
                except MemoryError:
                    raise SnapshotFileError(f.path, _too_big(f.path)) from None
                if not f.started and f.notes:
                    fl.findings = FindingTable.concat([f.notes, fl.findings]).sorted_by_line()
                f.started = True
                self.tally[f.path].merge(v.tally)
                loads.append(fl)
                del v, t
            merged, merge_findings = _merge(loads)
            for fl in loads:
                self.accepted[fl.path] += fl.rows_accepted
            extra = self.repeated if n == 0 else []
            findings = FindingTable.concat([fl.findings for fl in loads] + [extra, merge_findings])
            yield LoadResult(snapshots=merged, findings=findings, files=loads, errors=[])

    def unusable(self) -> list[SnapshotFileError]:
        """After iterating: the files of which no row was usable (their findings are in the parts)."""
        out = []
        for f in self.files:
            n = self.rows[f.path]
            if self.accepted[f.path]:
                continue
            if n == 0:
                out.append(SnapshotFileError(f.path, "no usable row: there are no data rows below the header"))
            else:
                out.append(SnapshotFileError(
                    f.path, f"no usable row: all {n} rows were left out ({self.tally[f.path].text()})", rows_read=n))
        return out
