"""Reading daily price history files: one row per trading day of an underlying.

A history file is a CSV (or Parquet, with pyarrow) table of daily bars:
``date`` (YYYY-MM-DD, or the ``[formats] date`` of a mapping file), ``close``,
and, for the range-based volatility estimators, ``open``, ``high`` and
``low``; optional ``volume`` and ``underlying`` (or ``underlying=`` given by
the caller). Prices must be adjusted for splits and dividends (an unadjusted
split looks like a crash). Headers match as in snapshot files (case,
spaces, hyphens and underscores do not matter) and a TOML mapping file with
a ``[columns]`` table maps other header names (see ``load_history_column_map``).

The file is opened, decoded and split into cells by ``loading`` (the one
place that reads files); this module checks the cells. Every data row is
accepted, accepted with a warning, or left out with a reason, and
``rows_read == rows_accepted + left-out rows`` always holds:

- left out (first problem wins, in this order): wrong field count; empty
  underlying; date empty, not a date, impossible or outside the years
  1900-2199; close empty, not a number, not finite or not positive; date
  after the snapshot date (``until``), or on it when the snapshot was taken
  before that day's close; a second row for the same date (the first one in
  the file is kept).
- accepted with a warning, the day's open/high/low not used (the close is):
  open, high or low not a number or not positive; high below low; close or
  open outside the day's low-high range. ``volume`` that is not a
  non-negative number is left blank with a warning.
- a warning on the row after a gap: trading days of the US exchange
  calendar missing between two consecutive dates.
- a note when rows are not in date order (they are sorted) and when the file
  lacks the open/high/low columns (only close-to-close estimates then).

Units: prices in price units; dates are calendar dates (datetime64[ns],
midnight, no time zone).
"""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from .column_map import ColumnMap, check_expiry_format, header_key, load_column_map
from .exchange_calendar import _CLOSE_MIN, TZ, default_calendar
from .findings import LEFT_OUT, NOTE, WARNING, ChainTriageError, Finding
from .loading import (
    YEAR_MAX,
    YEAR_MIN,
    SnapshotFileError,
    _dates,
    _fmt,
    _numbers,
    _read_table,
    _reason_kind,
    _Rows,
    _show,
    _stripped,
)

__all__ = [
    "HISTORY_COLUMNS",
    "HISTORY_REQUIRED",
    "BAR_COLUMNS",
    "HistoryFileError",
    "PriceHistory",
    "HistoryLoad",
    "load_history",
    "load_history_column_map",
    "HistoryLoads",
    "load_histories",
]

#: Every column name a history file may have.
HISTORY_COLUMNS: tuple[str, ...] = ("date", "open", "high", "low", "close", "volume", "underlying")
#: Columns a history file must have.
HISTORY_REQUIRED: tuple[str, ...] = ("date", "close")
#: Columns of ``PriceHistory.bars``, in order, with their units.
BAR_COLUMNS: dict[str, str] = {
    "date": "trading date (datetime64[ns], midnight, no time zone)",
    "open": "opening price (float, price units; NaN when absent or not usable)",
    "high": "day's high (float, price units; NaN when absent or not usable)",
    "low": "day's low (float, price units; NaN when absent or not usable)",
    "close": "closing price, adjusted (float, price units; always positive and finite)",
    "volume": "traded shares (float, NaN when absent)",
    "source_line": "1-based line number in the file, header = line 1 (int)",
}


class HistoryFileError(ChainTriageError):
    """A whole history file cannot be used; the message names the file and the reason.

    ``findings`` holds the row findings when the file was read but no row was
    usable; ``rows_read`` counts its data rows (0 when it could not be read).
    """

    def __init__(self, path: str, reason: str, *, findings=(), rows_read: int = 0):
        self.path = str(path)
        self.reason = reason
        self.findings = list(findings)
        self.rows_read = rows_read
        super().__init__(f"{self.path}: {reason}")


@dataclass
class PriceHistory:
    """One underlying's daily bars, sorted by date (see ``BAR_COLUMNS``), and its findings."""

    underlying: str
    bars: pd.DataFrame
    findings: list[Finding]
    source: str

    @property
    def first_date(self) -> pd.Timestamp:
        return pd.Timestamp(self.bars["date"].iat[0])

    @property
    def last_date(self) -> pd.Timestamp:
        return pd.Timestamp(self.bars["date"].iat[-1])

    @property
    def last_close(self) -> float:
        """The latest close, in price units."""
        return float(self.bars["close"].iat[-1])


@dataclass
class HistoryLoad:
    """What one history file gave: histories (one per underlying), findings, row counts."""

    path: str
    histories: list[PriceHistory]
    findings: list[Finding]
    rows_read: int
    rows_accepted: int

    @property
    def rows_left_out(self) -> int:
        return self.rows_read - self.rows_accepted

    def get(self, underlying: str) -> PriceHistory | None:
        """The history of ``underlying`` (exact name), or None."""
        for h in self.histories:
            if h.underlying == underlying:
                return h
        return None


def load_history_column_map(path: str | Path) -> ColumnMap:
    """Read a TOML mapping file for history files: ``[columns]`` over HISTORY_COLUMNS, ``[formats] date``.

    The date format is kept in ``ColumnMap.expiry_format``. Raises ChainTriageError naming the file.
    """
    return load_column_map(path, known=HISTORY_COLUMNS, date_column="date")


def _as_history_map(column_map: ColumnMap | str | Path | None) -> ColumnMap:
    if column_map is None:
        return ColumnMap()
    if isinstance(column_map, ColumnMap):
        unknown = [c for c in column_map.columns if c not in HISTORY_COLUMNS]
        if unknown:
            raise ChainTriageError(f"{column_map.source or '<mapping>'}: column mapping names "
                                   f"{', '.join(map(repr, unknown))}, not history columns "
                                   f"({', '.join(HISTORY_COLUMNS)})")
        if column_map.expiry_format is not None:
            check_expiry_format(column_map.expiry_format, column_map.source or "<mapping>", column="date")
        return column_map
    return load_history_column_map(column_map)


def _as_day(until) -> tuple[np.datetime64 | None, bool]:
    """The last date a bar may carry, and whether that date's own bar closes after a snapshot time."""
    if until is None:
        return None, False
    try:
        ts = pd.Timestamp(until)
    except (TypeError, ValueError, OverflowError):
        raise ChainTriageError(f"the snapshot date {until!r} is not a date") from None
    if pd.isna(ts):
        return None, False
    same_day_late = False
    if ts.tzinfo is not None:  # a snapshot time: its own calendar date; that day's close may still be to come
        ny = ts.tz_convert(TZ)
        same_day_late = ny.hour * 60 + ny.minute < _CLOSE_MIN and ny.date() == ts.tz_localize(None).date()
        ts = ts.tz_localize(None)
    return np.datetime64(ts.normalize().to_datetime64(), "ns"), same_day_late


class _HistoryValidator:
    def __init__(self, path: str, table, cmap: ColumnMap, underlying: str | None, until):
        self.path = path
        self.t = table
        self.cmap = cmap
        self.override = underlying
        self.until = until
        self.n = len(table.cells)
        self.rows = _Rows(self.n)
        self.file_findings: list[Finding] = []
        self.warn: list[tuple[int, str | None, str]] = []  # (row, column, reason)
        self.col: dict[str, pd.Series] = {}
        self.label: dict[str, str] = {}

    def lab(self, name: str) -> str:
        return self.label.get(name, name)

    def resolve_columns(self) -> None:
        keys = [header_key(h) for h in self.t.headers]
        where: dict[str, list[int]] = {}
        for i, k in enumerate(keys):
            where.setdefault(k, []).append(i)
        used: set[int] = set()
        chosen: dict[str, int] = {}

        def pick(name: str, idx: list[int]) -> None:
            if len(idx) > 1:
                cols = ", ".join(str(i + 1) for i in idx)
                raise HistoryFileError(self.path, f"column {_show(self.t.headers[idx[0]].strip(), 30)} ({name}) "
                                                  f"appears more than once (columns {cols})")
            chosen[name] = idx[0]
            used.add(idx[0])

        for name in HISTORY_COLUMNS:
            mapped = self.cmap.header_for(name)
            if mapped is not None and where.get(header_key(mapped)):
                pick(name, where[header_key(mapped)])
        missing = []
        for name in HISTORY_COLUMNS:
            if name in chosen:
                continue
            idx = [i for i in where.get(name, []) if i not in used]
            if idx:
                pick(name, idx)
                continue
            mapped = self.cmap.header_for(name)
            if name in HISTORY_REQUIRED:
                missing.append(name if mapped is None else f"{name} (mapped to {_show(mapped, 30)})")
            elif mapped is not None:
                self.file_findings.append(Finding(
                    NOTE, f"the column mapping names {_show(mapped, 30)} for {name}, but the file has no such column",
                    file=self.path))
        for name, i in chosen.items():
            self.col[name] = _stripped(self.t.cells[i])
            self.label[name] = self.t.headers[i].strip() or name
        if missing:
            found = [h.strip() for h in self.t.headers if h.strip()]
            shown = ", ".join(_show(h, 30) for h in found[:20]) + (" ..." if len(found) > 20 else "")
            src = f" (column mapping {self.cmap.source})" if self.cmap.source else ""
            raise HistoryFileError(self.path, f"required column(s) missing: {', '.join(missing)}{src}; "
                                              f"the header has: {shown or 'nothing'}")
        absent = [c for c in ("open", "high", "low") if c not in chosen]
        if absent:
            self.file_findings.append(Finding(
                NOTE, f"no {'/'.join(absent)} column: the estimators that need the day's range "
                      "(Parkinson, Garman-Klass, Rogers-Satchell, Yang-Zhang) have nothing to work on",
                file=self.path))
        if self.override is not None and "underlying" in chosen:
            self.file_findings.append(Finding(
                NOTE, f"underlying comes from the override ({_show(self.override, 30)}); the file's "
                      f"{_show(self.label['underlying'], 30)} column is not used", file=self.path))
        ignored = [h.strip() for i, h in enumerate(self.t.headers) if i not in used and h.strip()]
        if ignored:
            shown = ", ".join(_show(h, 30) for h in ignored[:20]) + (" ..." if len(ignored) > 20 else "")
            self.file_findings.append(Finding(NOTE, f"columns not used: {shown}", file=self.path))

    def check_rows(self) -> None:
        t, rows, n = self.t, self.rows, self.n
        width = len(t.headers)
        rows.leave_out(t.nfields < width, None, lambda i: f"row has {t.nfields[i]} fields; the header has {width}")
        rows.leave_out(t.extra, None,
                       lambda i: f"row has {t.nfields[i]} fields; the header has {width} (extra values at the end)")
        # underlying
        if self.override is not None:
            self.und = np.full(n, self.override, dtype=object)
        elif "underlying" in self.col:
            s = self.col["underlying"]
            self.und = s.to_numpy(dtype=object)
            rows.leave_out((s == "").to_numpy(dtype=bool), self.lab("underlying"), "underlying is empty")
        else:
            name = Path(self.path).stem.strip() or "history"
            self.und = np.full(n, name, dtype=object)
            self.file_findings.append(Finding(
                NOTE, f"no underlying column: the file name {_show(name, 30)} is used as the underlying "
                      "(give --underlying to name it)", file=self.path))
        # date
        s = self.col["date"]
        fmt = self.cmap.expiry_format
        self.date, st = _dates(s, fmt)
        lab = self.lab("date")
        rows.leave_out(st == 1, lab, "date is empty")
        if fmt is None:
            rows.leave_out(st == 2, lab, "date {v} is not a date written YYYY-MM-DD", s)
        else:
            f = fmt.replace("{", "{{").replace("}", "}}")
            rows.leave_out(st == 2, lab, f"date {{v}} is not a possible date in the format {f}", s)
        rows.leave_out(st == 3, lab, "date {v} is not a possible date", s)
        rows.leave_out(st == 4, lab, f"date {{v}} is outside the years {YEAR_MIN}-{YEAR_MAX}", s)
        # close
        s = self.col["close"]
        self.close, st = _numbers(s)
        lab = self.lab("close")
        rows.leave_out(st == 1, lab, "close is empty")
        rows.leave_out(st == 2, lab, "close {v} is not a number", s)
        rows.leave_out(st == 3, lab, "close {v} is not a finite number", s)
        rows.leave_out((st == 0) & ~(self.close > 0), lab, "close {v} is not positive", s)
        # after the snapshot
        until, same_day_late = self.until
        if until is not None:
            late = rows.free & (self.date > until)
            day = str(until.astype("datetime64[D]"))
            rows.leave_out(late, self.lab("date"), lambda i: (
                f"date {self.date[i].astype('datetime64[D]')} is after the snapshot date {day}"))
            if same_day_late:
                rows.leave_out(rows.free & (self.date == until), self.lab("date"), (
                    f"date {day} is the snapshot's date, and that day's close (16:00 New York) comes after "
                    "the snapshot time"))
        # duplicates within an underlying
        free = np.flatnonzero(rows.free)
        if free.size > 1:
            keys = pd.DataFrame({"u": self.und[free], "d": self.date[free].astype(np.int64), "line": t.line[free]})
            dup = keys.duplicated(["u", "d"], keep="first").to_numpy()
            if dup.any():
                first = keys.groupby(["u", "d"], sort=False)["line"].transform("first").to_numpy()
                firsts = np.zeros(n, dtype=np.int64)
                firsts[free] = first
                mask = np.zeros(n, dtype=bool)
                mask[free[dup]] = True
                rows.leave_out(mask, self.lab("date"),
                               lambda i: f"duplicate of line {firsts[i]} (same date)")

    def range_columns(self) -> dict[str, np.ndarray]:
        """open/high/low/volume per row; problems blank the day's range with a warning."""
        n, ok = self.n, self.rows.free
        out: dict[str, np.ndarray] = {}
        bad_range = np.zeros(n, dtype=bool)
        for name in ("open", "high", "low"):
            if name not in self.col:
                out[name] = np.full(n, np.nan)
                continue
            s, lab = self.col[name], self.lab(name)
            v, st = _numbers(s)
            for mask, text in ((st == 1, f"{name} is empty"),
                               (st == 2, f"{name} {{v}} is not a number"),
                               (st == 3, f"{name} {{v}} is not a finite number"),
                               ((st == 0) & ~(v > 0), f"{name} {{v}} is not positive")):
                sel = np.flatnonzero(ok & mask & ~bad_range)
                for i in sel:
                    self.warn.append((int(i), lab, text.format(v=_show(s.iat[i]))
                                      + "; the day's open/high/low are not used"))
                bad_range |= ok & mask
            out[name] = np.where(st == 0, v, np.nan)
        o, h, lo, c = out["open"], out["high"], out["low"], self.close
        with np.errstate(invalid="ignore"):
            checks = (
                (h < lo, lambda i: f"high {_fmt(h[i])} is below low {_fmt(lo[i])}"),
                ((c > h) | (c < lo), lambda i: f"close {_fmt(c[i])} is outside the day's low-high "
                                               f"{_fmt(lo[i])}-{_fmt(h[i])}"),
                ((o > h) | (o < lo), lambda i: f"open {_fmt(o[i])} is outside the day's low-high "
                                               f"{_fmt(lo[i])}-{_fmt(h[i])}"),
            )
        for mask, text in checks:
            sel = np.flatnonzero(ok & mask & ~bad_range)
            for i in sel:
                self.warn.append((int(i), None, text(i) + "; the day's open/high/low are not used"))
            bad_range |= ok & mask
        for name in ("open", "high", "low"):
            out[name] = np.where(bad_range, np.nan, out[name])
        if "volume" in self.col:
            s, lab = self.col["volume"], self.lab("volume")
            v, st = _numbers(s)
            bad = (st >= 2) | ((st == 0) & ~(v >= 0))
            for i in np.flatnonzero(ok & bad):
                self.warn.append((int(i), lab, f"volume {_show(s.iat[i])} is not a non-negative number; left blank"))
            out["volume"] = np.where((st == 0) & ~bad, v, np.nan)
        else:
            out["volume"] = np.full(n, np.nan)
        return out

    def finding(self, severity: str, i: int, reason: str, column: str | None) -> Finding:
        und = self.und[i]
        und = und if isinstance(und, str) and und else None
        return Finding(severity, reason, file=self.path, line=int(self.t.line[i]), column=column, underlying=und)

    def run(self) -> HistoryLoad:
        self.resolve_columns()
        self.check_rows()
        cols = self.range_columns()
        rows, t = self.rows, self.t
        ok = rows.free
        acc = np.flatnonzero(ok)
        group_findings: list[Finding] = []
        histories: list[PriceHistory] = []
        codes, names = pd.factorize(pd.Series(self.und[acc], dtype=object))
        per_und: list[tuple[str, np.ndarray]] = []
        for g, und in enumerate(names):
            gi = acc[codes == g]
            order = np.argsort(self.date[gi], kind="stable")
            if (np.diff(order) < 0).any():
                group_findings.append(Finding(NOTE, "rows are not in date order; they are sorted by date",
                                              file=self.path, underlying=und))
            gi = gi[order]
            per_und.append((und, gi))
            # gaps: trading days missing between consecutive dates
            if gi.size > 1:
                d = self.date[gi].astype("datetime64[D]")
                missing = default_calendar().trading_days_between(d[:-1] + 1, d[1:])
                for j in np.flatnonzero(missing > 0):
                    k = int(gi[j + 1])
                    days = int(missing[j])
                    self.warn.append((k, self.lab("date"), (
                        f"gap: {days} trading day{'s' if days != 1 else ''} missing between {d[j]} and {d[j + 1]} "
                        "(the return spans the gap)")))
        findings: list[Finding] = list(self.file_findings) + group_findings
        for i in np.flatnonzero(~ok):
            reason = rows.reason[i]
            if t.end_line[i] > t.line[i]:
                reason += f" (this row spans lines {t.line[i]}-{t.end_line[i]})"
            findings.append(self.finding(LEFT_OUT, int(i), reason, rows.column[i]))
        for i, column, reason in self.warn:
            findings.append(self.finding(WARNING, i, reason, column))
        findings.sort(key=lambda f: (f.line is not None, f.line or 0))
        accepted = int(acc.size)
        if accepted == 0:
            if self.n == 0:
                raise HistoryFileError(self.path, "no usable row: there are no data rows below the header",
                                       findings=findings)
            counts = Counter(_reason_kind(r) for r in rows.reason[~ok])
            common = "; ".join(f"{c} x {r}" for r, c in counts.most_common(3))
            raise HistoryFileError(self.path, f"no usable row: all {self.n} rows were left out ({common})",
                                   findings=findings, rows_read=self.n)
        for und, gi in per_und:
            bars = pd.DataFrame({
                "date": self.date[gi].astype("datetime64[ns]"),
                "open": cols["open"][gi].astype(np.float64),
                "high": cols["high"][gi].astype(np.float64),
                "low": cols["low"][gi].astype(np.float64),
                "close": self.close[gi].astype(np.float64),
                "volume": cols["volume"][gi].astype(np.float64),
                "source_line": t.line[gi].astype(np.int64),
            })
            mine = [f for f in findings if f.underlying == und or f.underlying is None]
            histories.append(PriceHistory(underlying=str(und), bars=bars, findings=mine, source=self.path))
        return HistoryLoad(path=self.path, histories=histories, findings=findings, rows_read=self.n,
                           rows_accepted=accepted)


def load_history(
    path: str | Path,
    *,
    underlying: str | None = None,
    column_map: ColumnMap | str | Path | None = None,
    until=None,
) -> HistoryLoad:
    """Load one daily price history file (see the module docstring for the rules).

    ``underlying`` names every row (replacing the file's column); ``column_map``
    is a ColumnMap or the path of a TOML mapping file over HISTORY_COLUMNS;
    ``until`` (a date, or a tz-aware snapshot time whose own calendar date is
    used) leaves out rows dated after it, and, for a snapshot time before
    16:00 New York, the row of that date too (its close comes after the
    snapshot). Raises HistoryFileError when the file as
    a whole is unusable, ChainTriageError for a bad mapping file or argument.
    """
    name = str(path)
    if underlying is not None:
        underlying = str(underlying).strip()
        if not underlying:
            raise ChainTriageError("the underlying override is empty")
    cmap = _as_history_map(column_map)
    day = _as_day(until)
    try:
        table = _read_table(name)
    except SnapshotFileError as exc:
        raise HistoryFileError(name, exc.reason) from None
    return _HistoryValidator(name, table, cmap, underlying, day).run()


@dataclass
class HistoryLoads:
    """Several history files: what each gave, and the files that could not be used."""

    files: list[HistoryLoad]
    errors: list[HistoryFileError]

    @property
    def histories(self) -> list[PriceHistory]:
        """Every history, first file first; a later file's history of an underlying already seen is skipped."""
        seen: dict[str, PriceHistory] = {}
        for fl in self.files:
            for h in fl.histories:
                seen.setdefault(h.underlying, h)
        return list(seen.values())

    @property
    def findings(self) -> list[Finding]:
        return [f for fl in self.files for f in fl.findings] + [f for e in self.errors for f in e.findings]

    @property
    def rows_read(self) -> int:
        return sum(f.rows_read for f in self.files) + sum(e.rows_read for e in self.errors)

    @property
    def rows_left_out(self) -> int:
        return self.rows_read - sum(f.rows_accepted for f in self.files)


def load_histories(paths, *, underlying: str | None = None, column_map: ColumnMap | str | Path | None = None,
                   until=None) -> HistoryLoads:
    """Load several history files, going on past unusable ones (their errors are collected).

    A bad mapping file or argument raises ChainTriageError before any file is read.
    """
    cmap = _as_history_map(column_map)
    files: list[HistoryLoad] = []
    errors: list[HistoryFileError] = []
    for p in paths:
        try:
            files.append(load_history(p, underlying=underlying, column_map=cmap, until=until))
        except HistoryFileError as exc:
            errors.append(exc)
    return HistoryLoads(files=files, errors=errors)
