"""The shortlist: contracts the user set aside, across expiries, with their figures.

A contract is identified by (underlying, as_of, expiry, strike, kind). The
shortlist keeps a copy of its figures as they were when it was added, and
exports to CSV or Markdown. Exports are written atomically and never replace
an existing file unless ``overwrite=True``.

CSV cells holding text that starts with "=", "+", "-", "@", a tab, a
carriage return or a NUL get a leading single quote, so a spreadsheet does
not run them as formulas: OWASP "CSV Injection" guidance [M], as written in
OWASP ASVS 5.0 requirement 1.2.10 ("'=', '+', '-', '@', '\\t' (tab), and '\\0'
(null character)) must be escaped with a single quote if they appear as the
first character in a field value") [V]; carriage return added per the OWASP
CSV Injection page [M]. NUL characters are dropped from text cells. Numbers
are written as plain numbers with at most 10 significant digits, as
``chaintriage table --format csv`` writes them (so "-1.48" stays a number,
181.1 is not 181.10000000000002 and an open interest of 718 is "718"); missing
numbers as empty cells. Lines end in CR LF (RFC 4180), which also makes the
csv module quote a text cell holding a carriage return. Markdown cells have pipes escaped and line breaks removed, and their text
cells get the same formula guard (a Markdown table pasted into a spreadsheet
becomes cells too).
"""

from __future__ import annotations

import csv
import io
import math
import os
import sys
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Iterable, Iterator, Mapping

from . import formatting as fm
from .files import write_text_atomic

#: Figures kept per contract (contracts-table column names), in export order.
#: ``p_profit_sell`` / ``p_profit_buy``: the chance a seller at the bid / a buyer at the ask ends expiry
#: ahead (risk-neutral), at the breakevens ``breakeven_sell`` (strike -/+ bid) and ``breakeven_buy``;
#: ``spot`` and ``forward`` (the expiry's) as they were when the contract was set aside.
FIGURES: tuple[str, ...] = (
    "bid", "ask", "mid", "iv", "sigma_distance", "p_beyond", "p_beyond_flat", "p_touch",
    "delta", "breakeven", "p_breakeven", "spread_pct", "open_interest", "volume",
    "p_profit_sell", "p_profit_buy", "breakeven_sell", "breakeven_buy", "spot", "forward", "flags",
)
#: Figures that are text, not numbers.
TEXT_FIGURES = frozenset({"flags"})

KEY_FIELDS: tuple[str, ...] = ("underlying", "as_of", "expiry", "strike", "kind")

#: Characters that make a spreadsheet treat a cell as a formula (OWASP CSV Injection).
FORMULA_PREFIXES = ("=", "+", "-", "@", "\t", "\r", "\0")

#: Markdown headings: our words for each exported field.
MARKDOWN_HEADINGS: dict[str, str] = {
    "underlying": "underlying", "as_of": "as of", "expiry": "expiry", "strike": "strike", "kind": "kind",
    "bid": "bid", "ask": "ask", "mid": "mid", "iv": "IV", "sigma_distance": "σ dist",
    "p_beyond": "P(beyond)", "p_beyond_flat": "P(beyond) 1-vol", "p_touch": "P(touch)", "delta": "delta",
    "breakeven": "BE", "p_breakeven": "P(BE)", "spread_pct": "spread", "open_interest": "OI",
    "volume": "volume", "flags": "flags", "p_profit_sell": "P(profit) selling at bid",
    "p_profit_buy": "P(profit) buying at ask", "breakeven_sell": "BE selling", "breakeven_buy": "BE buying",
    "spot": "spot", "forward": "forward",
}


@dataclass(frozen=True, order=True)
class ContractKey:
    """Identity of a shortlisted contract: as_of is ISO 8601 text, expiry "YYYY-MM-DD",
    strike in price units, kind "call" or "put"."""

    underlying: str
    as_of: str
    expiry: str
    strike: float
    kind: str

    @classmethod
    def of(cls, underlying: Any, as_of: Any, expiry: Any, strike: Any, kind: Any) -> "ContractKey":
        """Build a key from loose values (Timestamps, numpy floats, "c"/"p")."""
        k = str(kind).strip().lower()
        k = {"c": "call", "p": "put"}.get(k, k)
        pd = sys.modules.get("pandas")  # not imported yet: as_of cannot be a Timestamp
        when = as_of.isoformat() if pd is not None and isinstance(as_of, pd.Timestamp) else str(as_of)
        return cls(underlying=str(underlying), as_of=when, expiry=fm.fmt_date(expiry, ascii_only=True),
                   strike=float(strike), kind=k)

    @classmethod
    def from_row(cls, row: Mapping[str, Any], as_of: Any = None) -> "ContractKey":
        """The key of a contracts-table row (``as_of`` from the snapshot when the row has none)."""
        return cls.of(row["underlying"], as_of if as_of is not None else row.get("as_of"),
                      row["expiry"], row["strike"], row["kind"])


@dataclass
class ShortlistEntry:
    """A shortlisted contract and its figures when it was added."""

    key: ContractKey
    figures: dict[str, Any] = field(default_factory=dict)


def _figures_of(row: Mapping[str, Any] | None) -> dict[str, Any]:
    if row is None:
        return {}
    out: dict[str, Any] = {}
    for name in FIGURES:
        try:
            value = row[name]
        except (KeyError, IndexError, TypeError):
            continue
        if name in TEXT_FIGURES:
            out[name] = "" if value is None or (isinstance(value, float) and math.isnan(value)) else str(value)
        else:
            x = fm.as_finite(value)
            out[name] = math.nan if x is None else x
    return out


class Shortlist:
    """Contracts set aside, in the order they were added."""

    def __init__(self) -> None:
        self._entries: dict[ContractKey, ShortlistEntry] = {}

    def add(self, key: ContractKey, figures: Mapping[str, Any] | None = None) -> None:
        """Add (or refresh the figures of) a contract."""
        self._entries[key] = ShortlistEntry(key, _figures_of(figures))

    def remove(self, key: ContractKey) -> bool:
        """Remove a contract; True if it was there."""
        return self._entries.pop(key, None) is not None

    def toggle(self, key: ContractKey, figures: Mapping[str, Any] | None = None) -> bool:
        """Add if absent, remove if present; True if it is on the shortlist afterwards."""
        if key in self._entries:
            del self._entries[key]
            return False
        self.add(key, figures)
        return True

    def clear(self) -> None:
        self._entries.clear()

    def __contains__(self, key: object) -> bool:
        return key in self._entries

    def __len__(self) -> int:
        return len(self._entries)

    def __iter__(self) -> Iterator[ShortlistEntry]:
        return iter(list(self._entries.values()))

    @property
    def entries(self) -> list[ShortlistEntry]:
        return list(self._entries.values())

    def marked_in(self, underlying: Any, as_of: Any, expiry: Any) -> set[tuple[float, str]]:
        """(strike, kind) of the shortlisted contracts of one expiry (for StrikeGrid.set_marked)."""
        probe = ContractKey.of(underlying, as_of, expiry, 0.0, "call")
        return {(e.key.strike, e.key.kind) for e in self._entries.values()
                if (e.key.underlying, e.key.as_of, e.key.expiry) == (probe.underlying, probe.as_of, probe.expiry)}

    # ------------------------------------------------------------ export

    def to_csv_text(self) -> str:
        """The shortlist as CSV text (header row, then one row per contract)."""
        buf = io.StringIO()
        writer = csv.writer(buf, lineterminator="\r\n")
        writer.writerow(KEY_FIELDS + FIGURES)
        for e in self._entries.values():
            k = e.key
            row = [_csv_text(k.underlying), _csv_text(k.as_of),
                   _csv_text(k.expiry), _csv_number(k.strike), _csv_text(k.kind)]
            # Text from data keeps its characters in CSV (a quoted field may hold
            # anything); only the leading formula trigger is neutralised.
            for name in FIGURES:
                value = e.figures.get(name)
                if name in TEXT_FIGURES:
                    row.append(_csv_text(value))
                else:
                    row.append(_csv_number(value))
            writer.writerow(row)
        return buf.getvalue()

    def to_markdown_text(self, ascii_only: bool = False) -> str:
        """The shortlist as a Markdown table with figures formatted for reading."""
        fields = KEY_FIELDS + FIGURES
        head = [MARKDOWN_HEADINGS[f] if not ascii_only else MARKDOWN_HEADINGS[f].replace("σ", "s") for f in fields]
        lines = ["| " + " | ".join(head) + " |",
                 "|" + "|".join("---:" if f not in TEXT_FIGURES and f not in
                                ("underlying", "as_of", "expiry", "kind") else "---" for f in fields) + "|"]
        for e in self._entries.values():
            k = e.key
            cells = [markdown_text(k.underlying), markdown_text(k.as_of), markdown_text(k.expiry),
                     fm.fmt_strike(k.strike), markdown_text(k.kind)]
            cells += [markdown_figure(name, e.figures.get(name), ascii_only) for name in FIGURES]
            lines.append("| " + " | ".join(escape_markdown(c) for c in cells) + " |")
        return "\n".join(lines) + "\n"

    def export_csv(self, path: str | os.PathLike[str], *, overwrite: bool = False) -> Path:
        """Write the CSV export atomically; TargetExistsError if ``path`` exists and not ``overwrite``."""
        return write_text_atomic(path, self.to_csv_text(), overwrite=overwrite, newline="")

    def export_markdown(self, path: str | os.PathLike[str], *, overwrite: bool = False,
                        ascii_only: bool = False) -> Path:
        """Write the Markdown export atomically; TargetExistsError if ``path`` exists and not ``overwrite``."""
        return write_text_atomic(path, self.to_markdown_text(ascii_only), overwrite=overwrite)


def _csv_text(text: Any) -> str:
    s = "" if text is None or (isinstance(text, float) and math.isnan(text)) else str(text)
    return neutralise_formula(s.replace("\0", ""))


def neutralise_formula(text: Any) -> str:
    """A text cell that a spreadsheet will not run: a leading single quote when the text
    starts with = + - @ tab, carriage return or NUL (OWASP ASVS 5.0 1.2.10 [V])."""
    s = "" if text is None else str(text)
    if s.startswith(FORMULA_PREFIXES):
        return "'" + s
    return s


#: printf format of numbers in the CSV export: the one ``table --format csv`` uses.
CSV_NUMBER_FORMAT = "%.10g"


def _csv_number(value: Any) -> str:
    x = fm.as_finite(value)
    return "" if x is None else CSV_NUMBER_FORMAT % float(x)


def markdown_figure(name: str, value: Any, ascii_only: bool = False) -> str:
    """A figure formatted for reading in the Markdown export."""
    if name in TEXT_FIGURES:
        return markdown_text(value)
    if name in ("bid", "ask", "mid", "breakeven", "breakeven_sell", "breakeven_buy"):
        return fm.fmt_price(value, ascii_only=True)
    if name in ("spot", "forward"):
        return fm.fmt_level(value, ascii_only=True)
    if name == "iv":
        return fm.fmt_vol(value, ascii_only=True)
    if name == "sigma_distance":
        return fm.fmt_sigma(value, ascii_only=ascii_only) if fm.as_finite(value) is not None else "--"
    if name in ("p_beyond", "p_beyond_flat", "p_touch", "p_breakeven", "p_profit_sell", "p_profit_buy"):
        return fm.fmt_prob(value, ascii_only=True)
    if name == "delta":
        return fm.fmt_delta(value, ascii_only=True)
    if name == "spread_pct":
        return fm.fmt_spread(value, ascii_only=True)
    if name in ("open_interest", "volume"):
        return fm.fmt_count(value, ascii_only=True)
    x = fm.as_finite(value)
    return "--" if x is None else repr(x)


def markdown_text(value: Any) -> str:
    """A text cell for the Markdown export: control characters removed, outer spaces trimmed
    (a table cell is trimmed when read), and a formula prefix neutralised as in the CSV."""
    return neutralise_formula(fm.clean_text(value).strip())


def escape_markdown(text: Any) -> str:
    """A Markdown table cell: control characters removed, backslashes and pipes escaped."""
    s = fm.clean_text(text)
    return s.replace("\\", "\\\\").replace("|", "\\|")


#: Where the export prompt proposes to write, in this order: the folder the app was started
#: from (unless it is inside the installed package or not writable), ~/Documents, the home folder.
EXPORT_NAME_FORMAT = "shortlist-%Y-%m-%d-%H%M.csv"


def package_folders() -> list[Path]:
    """The folders the installed chaintriage package lives in (never a place to write exports)."""
    import importlib

    folders = []
    for name in ("chaintriage.core", "chaintriage.tui", "chaintriage.themes", "chaintriage.demo_chains"):
        try:
            module = importlib.import_module(name)
        except ImportError:
            continue
        for where in getattr(module, "__path__", []):
            folders.append(Path(where).resolve())
    # A wheel installs every subpackage under one chaintriage/ folder: that one too.
    parents = {f.parent for f in folders if f.parent.name == "chaintriage"}
    return folders + sorted(parents)


def _inside(path: Path, folders: Iterable[Path]) -> bool:
    return any(path == f or f in path.parents for f in folders)


def default_export_path(now: Any = None, cwd: str | os.PathLike[str] | None = None,
                        home: str | os.PathLike[str] | None = None) -> Path:
    """A dated file name for the shortlist export in a writable folder the user owns.

    The name is ``shortlist-YYYY-MM-DD-HHMM.csv`` (local time ``now``); the folder is the one
    the app was started from, unless that is inside the installed package (or site-packages)
    or cannot be written, then ~/Documents when it exists, else the home folder.
    """
    import datetime

    stamp = datetime.datetime.now() if now is None else now  # anything with strftime
    name = stamp.strftime(EXPORT_NAME_FORMAT)
    start = Path(os.getcwd() if cwd is None else cwd).resolve()
    home_dir = Path(os.path.expanduser("~") if home is None else home)
    unsuitable = _inside(start, package_folders()) or "site-packages" in start.parts \
        or not os.access(start, os.W_OK)
    if not unsuitable:
        return start / name
    documents = home_dir / "Documents"
    return (documents if documents.is_dir() else home_dir) / name


def shortlist_from(entries: Iterable[tuple[ContractKey, Mapping[str, Any] | None]]) -> Shortlist:
    """A shortlist holding these (key, figures) pairs."""
    sl = Shortlist()
    for key, figures in entries:
        sl.add(key, figures)
    return sl
