"""The header mapping file: how an export's column names map onto our schema.

A small TOML file lets users load exports whose headers differ from ours::

    [columns]            # our column name = the export's header
    strike = "Strike Price"
    kind = "Type"
    expiry = "Expiration"

    [kind_values]        # extra spellings of call / put (case-insensitive)
    call = ["C", "CALL", "Calls"]
    put = ["P", "PUT", "Puts"]

    [formats]            # optional: strftime format of the expiry column
    expiry = "%m/%d/%Y"

Header names match case-insensitively, ignoring surrounding spaces, and runs
of spaces, hyphens and underscores count as one underscore, so
``"Open Interest"`` matches ``open_interest``.
"""

from __future__ import annotations

import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

import pandas as pd

from .findings import ChainTriageError
from .small_files import SmallFileError, read_small_file

#: Columns every snapshot file must have.
REQUIRED_COLUMNS: tuple[str, ...] = ("expiry", "strike", "kind", "bid", "ask")
#: Snapshot-wide columns (a file column, or an override from the command line).
SNAPSHOT_COLUMNS: tuple[str, ...] = ("underlying", "as_of", "spot")
#: Optional per-contract columns.
OPTIONAL_COLUMNS: tuple[str, ...] = (
    "iv",
    "iv_basis",
    "volume",
    "open_interest",
    "settle",
    "rate",
    "div_yield",
)
#: Every column name the loader understands.
KNOWN_COLUMNS: tuple[str, ...] = REQUIRED_COLUMNS + SNAPSHOT_COLUMNS + OPTIONAL_COLUMNS

_KIND_KEYS = ("call", "put")
_TABLES = ("columns", "kind_values", "formats")
_SEPARATORS = re.compile(r"[\s\-_]+")


def header_key(name: str) -> str:
    """Normalise a header for matching: trimmed, case-folded, and runs of
    spaces / hyphens / underscores replaced by one underscore."""
    return _SEPARATORS.sub("_", name.strip().strip("\ufeff").strip().casefold())


@dataclass(frozen=True)
class ColumnMap:
    """How to find our columns in a foreign export.

    ``columns`` maps our column name to the export's header as written in the
    mapping file; ``kind_values`` maps ``'call'``/``'put'`` to extra spellings;
    ``expiry_format`` is a strftime format for the expiry column (None means
    YYYY-MM-DD). ``source`` names the mapping file, for messages.
    """

    columns: dict[str, str] = field(default_factory=dict)
    kind_values: dict[str, tuple[str, ...]] = field(default_factory=dict)
    expiry_format: str | None = None
    source: str | None = None

    def header_for(self, column: str) -> str | None:
        """The export header mapped to our ``column``, or None."""
        return self.columns.get(column)

    def kind_aliases(self) -> dict[str, str]:
        """Case-folded spelling -> 'call' or 'put' (only the extra spellings)."""
        out: dict[str, str] = {}
        for kind, spellings in self.kind_values.items():
            for s in spellings:
                out[s.strip().casefold()] = kind
        return out


def _fail(path: str, reason: str) -> ChainTriageError:
    return ChainTriageError(f"{path}: column mapping file: {reason}")


def _string_list(path: str, where: str, value: object) -> tuple[str, ...]:
    if isinstance(value, str):
        value = [value]
    if not isinstance(value, list) or not value:
        raise _fail(path, f"{where} must be a string or a non-empty list of strings")
    out = []
    for item in value:
        if not isinstance(item, str) or not item.strip():
            raise _fail(path, f"{where} must hold non-empty strings, found {item!r}")
        out.append(item)
    return tuple(out)


def parse_column_map(data: dict, source: str = "<mapping>", *, known: tuple[str, ...] = KNOWN_COLUMNS,
                     date_column: str = "expiry") -> ColumnMap:
    """Validate an already-parsed TOML document (a dict) into a ColumnMap.

    ``known`` lists the column names the file may map and ``date_column`` the
    one column whose strftime format ``[formats]`` may set (kept in
    ``expiry_format``); the defaults are the snapshot schema's. Raises
    ChainTriageError naming ``source`` on any problem.
    """
    unknown_tables = sorted(set(data) - set(_TABLES))
    if unknown_tables:
        raise _fail(
            source,
            f"unknown section(s) {', '.join(map(repr, unknown_tables))}; "
            f"allowed: {', '.join('[' + t + ']' for t in _TABLES)}",
        )
    for table in _TABLES:
        if table in data and not isinstance(data[table], dict):
            raise _fail(source, f"[{table}] must be a table of key = value lines")

    columns: dict[str, str] = {}
    seen_headers: dict[str, str] = {}
    for ours, theirs in data.get("columns", {}).items():
        key = header_key(ours)
        if key not in known:
            raise _fail(
                source,
                f"[columns] has unknown column {ours!r}; known columns: {', '.join(known)}",
            )
        if key in columns:
            raise _fail(source, f"[columns] maps {key!r} twice")
        if not isinstance(theirs, str) or not theirs.strip():
            raise _fail(source, f"[columns] {ours} must be a non-empty string (the export's header)")
        hk = header_key(theirs)
        if hk in seen_headers:
            raise _fail(
                source,
                f"[columns] maps both {seen_headers[hk]!r} and {key!r} to the header {theirs!r}",
            )
        seen_headers[hk] = key
        columns[key] = theirs

    kind_values: dict[str, tuple[str, ...]] = {}
    seen_spellings: dict[str, str] = {}
    for kind, spellings in data.get("kind_values", {}).items():
        k = kind.strip().casefold()
        if k not in _KIND_KEYS:
            raise _fail(source, f"[kind_values] keys must be 'call' or 'put', found {kind!r}")
        values = _string_list(source, f"[kind_values] {kind}", spellings)
        for v in values:
            fv = v.strip().casefold()
            if seen_spellings.get(fv, k) != k:
                raise _fail(source, f"[kind_values] {v!r} is given for both call and put")
            seen_spellings[fv] = k
        kind_values[k] = values
    for builtin, k in (("call", "call"), ("c", "call"), ("put", "put"), ("p", "put")):
        if seen_spellings.get(builtin, k) != k:
            raise _fail(source, f"[kind_values] {builtin!r} always means {k}; it cannot stand for the other kind")

    expiry_format = None
    formats = data.get("formats", {})
    for key, value in formats.items():
        if key != date_column:
            raise _fail(source, f"[formats] only {date_column!r} can be set, found {key!r}")
        if not isinstance(value, str) or "%" not in value:
            raise _fail(source, f"[formats] {date_column} must be a strftime format such as \"%m/%d/%Y\", "
                                f"found {value!r}")
        check_expiry_format(value, source, column=date_column)
        expiry_format = value

    return ColumnMap(columns=columns, kind_values=kind_values, expiry_format=expiry_format, source=source)


_TZ_DIRECTIVE = re.compile(r"(?:^|[^%])(?:%%)*%[zZ]")


def check_expiry_format(fmt: str, source: str = "<mapping>", *, column: str = "expiry") -> None:
    """Raise ChainTriageError naming ``source`` unless ``fmt`` is a date format the loader can use.

    Refused: directives the date parser does not know (``%Q``, a stray ``%``,
    a directive given twice, ``%U`` without a weekday) and time zones
    (``%z``/``%Z``: an expiry is a calendar date; a zone would move it).
    """
    if _TZ_DIRECTIVE.search(fmt):
        what = "an expiry" if column == "expiry" else f"a {column}"
        raise _fail(source, f"[formats] {column} {fmt!r} holds a time zone (%z or %Z); {what} is a date, "
                            "write the format without it")
    try:
        pd.to_datetime(pd.Series(["2000-01-01"], dtype=object), format=fmt, errors="coerce")
    except Exception as exc:  # ValueError for a bad directive, re.error for a repeated one
        raise _fail(source, f"[formats] {column} {fmt!r} is not a usable date format ({exc})") from None


def load_column_map(path: str | Path, *, known: tuple[str, ...] = KNOWN_COLUMNS,
                    date_column: str = "expiry") -> ColumnMap:
    """Read a TOML mapping file (see module docstring). Raises ChainTriageError naming the file.

    ``known`` and ``date_column`` as in ``parse_column_map`` (another file schema, e.g. price history).
    """
    name = str(path)
    try:
        raw = read_small_file(name)
    except SmallFileError as exc:
        raise _fail(name, exc.reason) from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise _fail(name, "is not UTF-8 text") from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise _fail(name, f"is not valid TOML ({exc})") from None
    return parse_column_map(data, source=name, known=known, date_column=date_column)
