"""Many findings at once: a columnar table of findings and their groups.

A big file can give a million findings (a zero bid on every far
out-of-the-money quote). ``FindingTable`` keeps them as columns and makes a
``Finding`` object only when one is read; ``FindingTable.groups()`` gives the
same findings grouped per file, underlying, expiry, column and topic, with a
count, the runs of line numbers ("lines 96-130, 140") and the strike range,
at a cost per group rather than per finding. Line numbers are as a text
editor shows them (header = line 1).
"""

from __future__ import annotations

from collections.abc import Iterable, Iterator, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from .findings import SEVERITIES, Finding

_SEVERITY_CODE = {s: i for i, s in enumerate(SEVERITIES)}


def _line_ranges(lines: np.ndarray) -> list[tuple[int, int]]:
    """Sorted distinct line numbers as (first, last) runs of consecutive lines."""
    if lines.size == 0:
        return []
    lines = np.unique(lines)
    breaks = np.flatnonzero(np.diff(lines) != 1)
    firsts = np.concatenate(([lines[0]], lines[breaks + 1]))
    lasts = np.concatenate((lines[breaks], [lines[-1]]))
    return [(int(a), int(b)) for a, b in zip(firsts, lasts)]


def ranges_text(ranges: Sequence[tuple[int, int]], limit: int = 6) -> str:
    """``line 7``, ``lines 96-130, 140`` (at most ``limit`` runs, then ``and N more runs``)."""
    if not ranges:
        return ""
    parts = [str(a) if a == b else f"{a}-{b}" for a, b in ranges[:limit]]
    rest = len(ranges) - limit
    more = f" and {rest} more run{'s' if rest != 1 else ''}" if rest > 0 else ""
    single = len(ranges) == 1 and ranges[0][0] == ranges[0][1]
    return ("line " if single else "lines ") + ", ".join(parts) + more


@dataclass(frozen=True, slots=True)
class FindingGroup:
    """Findings that say the same thing about one file, underlying, expiry and column.

    ``topic`` is the shared message (e.g. ``zero bid on puts``); ``count`` the
    number of findings; ``lines`` the runs of line numbers they point at, as
    (first, last) pairs (empty when the findings are not about rows);
    ``strikes`` the lowest and highest strike named, or None; ``rows`` the
    positions of the members in the table the group came from (expand them
    with ``FindingTable.take``).
    """

    severity: str
    topic: str
    file: str | None
    underlying: str | None
    expiry: str | None
    column: str | None
    count: int
    lines: tuple[tuple[int, int], ...]
    strikes: tuple[float, float] | None
    rows: np.ndarray = field(repr=False, compare=False)
    first: Finding | None = field(default=None, repr=False, compare=False)

    @property
    def first_line(self) -> int:
        """The line of the first member (0 when it names none)."""
        return int(self.first.line or 0) if self.first is not None else (self.lines[0][0] if self.lines else 0)

    def location(self, with_file: bool = True) -> str:
        """Where the group points, e.g. ``chain.csv lines 96-130 [bid] QRTZ 2026-12-04``."""
        parts = []
        if self.file is not None and with_file:
            parts.append(self.file)
        if self.lines:
            parts.append(ranges_text(self.lines))
        if self.column:
            parts.append(f"[{self.column}]")
        if self.underlying:
            parts.append(self.underlying)
        if self.expiry:
            parts.append(self.expiry)
        return " ".join(parts)

    def summary(self, reason_of_one: str | None = None) -> str:
        """The message of the group: the reason itself for one finding, else topic, count, strike range."""
        if self.count == 1 and reason_of_one is not None:
            return reason_of_one
        text = f"{self.topic} ({self.count:,} rows" if self.lines else f"{self.topic} ({self.count:,} times"
        if self.strikes is not None:
            lo, hi = self.strikes
            text += f", strike {lo:.10g}" if lo == hi else f", strikes {lo:.10g} to {hi:.10g}"
        return text + ")"

    def as_dict(self) -> dict[str, Any]:
        """A JSON-ready dict (line runs as [first, last] pairs)."""
        return {
            "severity": self.severity, "topic": self.topic, "file": self.file, "underlying": self.underlying,
            "expiry": self.expiry, "column": self.column, "count": self.count,
            "lines": [list(r) for r in self.lines],
            "strikes": None if self.strikes is None else list(self.strikes),
        }


def _obj(values, n: int) -> np.ndarray:
    """An object array of length n from a scalar or a sequence."""
    if isinstance(values, np.ndarray) and values.dtype == object and values.shape == (n,):
        return values
    if values is None or isinstance(values, str):
        out = np.empty(n, dtype=object)
        out[:] = values
        return out
    out = np.empty(n, dtype=object)
    out[:] = list(values)
    return out


class FindingTable(Sequence[Finding]):
    """Many findings as columns, expanded to ``Finding`` objects only when asked.

    It behaves like a read-only list of ``Finding`` (len, index, slice,
    iteration, equality with a list), so code that wants every finding still
    gets every finding; ``groups()`` gives the same findings grouped per file,
    underlying, expiry, column and topic with a count and line ranges, cheap
    to compute at any size. Columns: ``severity`` (int8 index into
    SEVERITIES), ``reason``, ``topic``, ``file``, ``column``, ``underlying``,
    ``expiry`` (object arrays of str or None), ``line`` (int64, 0 for none),
    ``strike`` (float64, NaN for none; used only by groups).
    """

    __slots__ = ("severity", "reason", "topic", "file", "line", "column", "underlying", "expiry", "strike")

    def __init__(self, severity, reason, *, topic=None, file=None, line=None, column=None, underlying=None,
                 expiry=None, strike=None) -> None:
        sev = np.asarray(severity)
        n = int(sev.size) if sev.ndim else len(reason)
        if sev.ndim == 0:
            sev = np.full(n, _SEVERITY_CODE[str(sev)] if sev.dtype.kind in "US" else int(sev), dtype=np.int8)
        elif sev.dtype.kind in "USO":
            sev = np.fromiter((_SEVERITY_CODE[s] for s in sev), dtype=np.int8, count=n)
        self.severity = sev.astype(np.int8, copy=False)
        self.reason = _obj(reason, n)
        self.topic = self.reason if topic is None else _obj(topic, n)
        self.file = _obj(file, n)
        self.line = np.zeros(n, np.int64) if line is None else np.broadcast_to(
            np.asarray(line, dtype=np.int64), (n,)).copy()
        self.column = _obj(column, n)
        self.underlying = _obj(underlying, n)
        self.expiry = _obj(expiry, n)
        self.strike = np.full(n, np.nan) if strike is None else np.broadcast_to(
            np.asarray(strike, dtype=np.float64), (n,)).copy()

    # -- building
    @classmethod
    def empty(cls) -> FindingTable:
        return cls(np.zeros(0, np.int8), [])

    @classmethod
    def of(cls, findings: Iterable[Finding]) -> FindingTable:
        """A table of ``findings`` (a FindingTable is returned as it is)."""
        if isinstance(findings, FindingTable):
            return findings
        fs = list(findings)
        return cls(np.fromiter((_SEVERITY_CODE[f.severity] for f in fs), np.int8, len(fs)),
                   [f.reason for f in fs], file=[f.file for f in fs],
                   line=np.fromiter((f.line or 0 for f in fs), np.int64, len(fs)),
                   column=[f.column for f in fs], underlying=[f.underlying for f in fs],
                   expiry=[f.expiry for f in fs])

    @classmethod
    def concat(cls, parts: Iterable[Iterable[Finding]]) -> FindingTable:
        """One table of several tables or lists of findings, in order."""
        tables = [cls.of(p) for p in parts]
        tables = [t for t in tables if len(t)] or [cls.empty()]
        if len(tables) == 1:
            return tables[0]
        out = cls.__new__(cls)
        for name in cls.__slots__:
            setattr(out, name, np.concatenate([getattr(t, name) for t in tables]))
        return out

    def take(self, rows) -> FindingTable:
        """The findings at ``rows`` (positions or a bool mask), in that order."""
        out = FindingTable.__new__(FindingTable)
        for name in self.__slots__:
            setattr(out, name, getattr(self, name)[rows])
        return out

    def sorted_by_line(self) -> FindingTable:
        """Findings about no line first (in order), then by line (stable)."""
        if self.line.size < 2 or (self.line[1:] >= self.line[:-1]).all():
            return self
        return self.take(np.argsort(self.line, kind="stable"))  # lines are >= 1, and 0 for none

    def where(self, *, underlying: str | None | type = ..., file: str | None | type = ...,
              expiry: str | None | type = ...) -> FindingTable:
        """The findings whose fields equal the given values (``...`` = any)."""
        mask = np.ones(len(self), dtype=bool)
        for name, value in (("underlying", underlying), ("file", file), ("expiry", expiry)):
            if value is not ...:
                col = getattr(self, name)
                mask &= pd.isna(col) if value is None else (col == value)
        return self.take(mask)

    def split(self, name: str) -> dict[Any, FindingTable]:
        """The findings per distinct value of one column (e.g. ``underlying``), None values left out."""
        codes, uniq = _factorize(getattr(self, name))
        order = np.argsort(codes, kind="stable")
        bounds = np.searchsorted(codes[order], np.arange(len(uniq) + 1))
        return {u: self.take(order[bounds[k]:bounds[k + 1]]) for k, u in enumerate(uniq) if u is not None}

    # -- reading
    def __len__(self) -> int:
        return int(self.severity.size)

    def _one(self, i: int) -> Finding:
        line = int(self.line[i])
        return Finding(SEVERITIES[self.severity[i]], self.reason[i], file=self.file[i], line=line or None,
                       column=self.column[i], underlying=self.underlying[i], expiry=self.expiry[i])

    def __getitem__(self, i):
        if isinstance(i, slice):
            return [self._one(k) for k in range(*i.indices(len(self)))]
        n = len(self)
        if not -n <= i < n:
            raise IndexError("finding index out of range")
        return self._one(i % n)

    def __iter__(self) -> Iterator[Finding]:
        for i in range(len(self)):
            yield self._one(i)

    def __eq__(self, other: object) -> bool:
        if isinstance(other, (FindingTable, list, tuple)):
            return len(self) == len(other) and list(self) == list(other)
        return NotImplemented

    __hash__ = None  # type: ignore[assignment]

    def __repr__(self) -> str:
        return f"FindingTable({len(self)} findings)"

    def counts(self) -> dict[str, int]:
        """Findings per severity (every severity present as a key)."""
        c = np.bincount(self.severity, minlength=len(SEVERITIES))
        return {s: int(c[i]) for i, s in enumerate(SEVERITIES)}

    def groups(self) -> list[FindingGroup]:
        """The findings grouped per severity, file, underlying, expiry, column and topic.

        Groups come in order of their first member; within a group, rows are
        in table order. Cost: one factorisation of the key columns, then a
        Python step per group (not per finding).
        """
        n = len(self)
        if n == 0:
            return []
        gid = self.severity.astype(np.int64)
        for name in ("file", "underlying", "expiry", "column", "topic"):
            codes, uniq = _factorize(getattr(self, name))
            gid, _ = pd.factorize(gid * max(len(uniq), 1) + codes)  # numbered in order of first appearance
        n_groups = int(gid.max()) + 1
        members = np.argsort(gid, kind="stable")
        bounds = np.searchsorted(gid[members], np.arange(n_groups + 1))
        firsts = members[bounds[:-1]]
        sizes = np.diff(bounds)
        # strike range per group (NaN-aware minimum and maximum over each group's run of members)
        strikes = self.strike[members]
        lo = np.fmin.reduceat(strikes, bounds[:-1])
        hi = np.fmax.reduceat(strikes, bounds[:-1])
        # runs of consecutive line numbers per group, all groups at once: members sorted by (group, line)
        lines = self.line
        named = lines > 0
        by_line = np.lexsort((lines, gid))
        by_line = by_line[named[by_line]]
        g_sorted, l_sorted = gid[by_line], lines[by_line]
        keep = np.ones(by_line.size, dtype=bool)
        keep[1:] = (g_sorted[1:] != g_sorted[:-1]) | (l_sorted[1:] != l_sorted[:-1])
        g_sorted, l_sorted = g_sorted[keep], l_sorted[keep]
        starts = np.ones(l_sorted.size, dtype=bool)
        starts[1:] = (g_sorted[1:] != g_sorted[:-1]) | (l_sorted[1:] != l_sorted[:-1] + 1)
        run_first = np.flatnonzero(starts).astype(np.int64)
        run_last = np.append(run_first[1:], l_sorted.size)[: run_first.size] - 1
        run_group = g_sorted[run_first]
        run_a, run_b = l_sorted[run_first].tolist(), l_sorted[run_last].tolist()
        run_bounds = np.searchsorted(run_group, np.arange(n_groups + 1)).tolist()
        out = []
        for g in range(n_groups):
            i = int(firsts[g])
            a, b = run_bounds[g], run_bounds[g + 1]
            out.append(FindingGroup(
                severity=SEVERITIES[self.severity[i]], topic=self.topic[i], file=self.file[i],
                underlying=self.underlying[i], expiry=self.expiry[i], column=self.column[i],
                count=int(sizes[g]), lines=tuple(zip(run_a[a:b], run_b[a:b])),
                strikes=(float(lo[g]), float(hi[g])) if np.isfinite(lo[g]) else None,
                rows=members[bounds[g]:bounds[g + 1]], first=self._one(i)))
        return out


def _factorize(values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Integer codes of an object array whose items are str or None (None gets its own code)."""
    return pd.factorize(values, use_na_sentinel=False)
