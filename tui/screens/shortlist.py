"""The shortlist screen: the contracts set aside; take them off, copy one, go to one, export them all."""

from __future__ import annotations

import os
from collections.abc import Callable
from pathlib import Path

import pandas as pd

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.screen import Screen
from textual.widgets import DataTable, Static

from chaintriage.core.findings import ChainTriageError
from chaintriage.tui import formatting as fm
from chaintriage.tui.files import TargetExistsError
from chaintriage.tui.screens.common import close, plain
from chaintriage.tui.screens.confirm_dialog import ConfirmDialog
from chaintriage.tui.screens.path_prompt import PathPrompt
from chaintriage.tui.shortlist import ContractKey, Shortlist, ShortlistEntry, default_export_path
from chaintriage.tui.widgets.key_line import KeyLine
from chaintriage.tui.widgets.row_table import RowTable


#: Endings that choose the export's format; a name with any other ending is asked about.
CSV_ENDINGS = (".csv",)
MARKDOWN_ENDINGS = (".md", ".markdown", ".txt", ".text")  # a text file gets the table a person reads


def export_format(path: Path) -> str | None:
    """'csv' or 'markdown' by the file name's ending; None when the ending says neither."""
    suffix = path.suffix.lower()
    if suffix in CSV_ENDINGS:
        return "csv"
    if suffix in MARKDOWN_ENDINGS:
        return "markdown"
    return None


def home_short(path: Path) -> str:
    """``path`` with the home folder written as ~ (shorter in a prompt)."""
    home = os.path.expanduser("~")
    text = str(path)
    if home not in ("", "/") and (text == home or text.startswith(home.rstrip(os.sep) + os.sep)):
        return "~" + text[len(home.rstrip(os.sep)):]
    return text

#: (heading, figure) of the shortlist table, in the order a trader reads them: what and when, the
#: quotes, then the model's figures (a seller's at the bid, a buyer's at the ask), the liquidity, spot and the
#: expiry's forward when it was set aside, the snapshot time. "days" is calendar days from
#: the snapshot's date to the expiry.
SHORTLIST_COLUMNS: tuple[tuple[str, str], ...] = (
    ("underlying", "underlying"), ("expiry", "expiry"), ("days", "days"), ("strike", "strike"),
    ("kind", "kind"), ("bid", "bid"), ("ask", "ask"), ("mid", "mid"), ("IV", "iv"),
    ("σ dist", "sigma_distance"), ("delta", "delta"), ("beyond", "p_beyond"), ("touch", "p_touch"),
    ("BE", "breakeven"), ("P(BE)", "p_breakeven"), ("P sell", "p_profit_sell"), ("BE sell", "breakeven_sell"),
    ("P buy", "p_profit_buy"), ("BE buy", "breakeven_buy"), ("spread", "spread_pct"), ("OI", "open_interest"),
    ("spot", "spot"), ("fwd", "forward"), ("flags", "flags"), ("as of", "as_of"),
)
#: Columns of text (left-aligned); every other column holds numbers (right-aligned, heading too).
TEXT_COLUMNS = frozenset({"underlying", "expiry", "kind", "flags", "as_of"})

_FORMATS = {
    "bid": fm.fmt_price, "ask": fm.fmt_price, "mid": fm.fmt_price, "iv": fm.fmt_vol,
    "sigma_distance": fm.fmt_sigma, "delta": fm.fmt_delta, "p_beyond": fm.fmt_prob, "p_touch": fm.fmt_prob,
    "breakeven": fm.fmt_price, "p_breakeven": fm.fmt_prob, "spread_pct": fm.fmt_spread,
    "open_interest": fm.fmt_count, "p_profit_sell": fm.fmt_prob, "p_profit_buy": fm.fmt_prob,
    "breakeven_sell": fm.fmt_price, "breakeven_buy": fm.fmt_price, "spot": fm.fmt_level, "forward": fm.fmt_level,
}


def days_to_expiry(key: ContractKey) -> int | None:
    """Calendar days from the snapshot's date to the expiry date (None when either is unreadable)."""
    try:
        as_of = pd.Timestamp(key.as_of)
        expiry = pd.Timestamp(key.expiry)
    except (ValueError, TypeError):
        return None
    if pd.isna(as_of) or pd.isna(expiry):
        return None
    return (expiry.date() - as_of.date()).days


def shortlist_heading(heading: str, name: str, ascii_only: bool = False) -> Text:
    """A column heading aligned like its cells (numbers to the right)."""
    text = heading.replace("σ", "s") if ascii_only else heading
    return Text(text, justify="left" if name in TEXT_COLUMNS else "right")


def shortlist_row(entry: ShortlistEntry, ascii_only: bool = False) -> tuple[Text, ...]:
    """One shortlist-table row, formatted for reading."""
    k, fig = entry.key, entry.figures
    cells: list[Text] = []
    for _, name in SHORTLIST_COLUMNS:
        if name in ("underlying", "expiry", "kind"):
            cells.append(plain(getattr(k, name)))
        elif name == "as_of":
            cells.append(plain(fm.fmt_timestamp(k.as_of, ascii_only)))
        elif name == "flags":
            cells.append(plain(fig.get("flags", "") or ""))
        elif name == "strike":
            cells.append(Text(fm.fmt_strike(k.strike), justify="right"))
        elif name == "days":
            days = days_to_expiry(k)
            cells.append(Text(fm.placeholder(ascii_only) if days is None else str(days), justify="right"))
        else:
            cells.append(Text(_FORMATS[name](fig.get(name), ascii_only=ascii_only), justify="right"))
    return tuple(cells)


class ShortlistScreen(Screen):
    """The contracts set aside: take them off, copy one, go to one, export them all."""

    BINDINGS = [
        Binding("escape,q,s", "close", "close"),
        Binding("d,delete", "remove_entry", "take off"),
        Binding("c", "copy_summary", "copy"),
        Binding("enter", "go_to", "go to", show=True),
        Binding("w", "export", "export"),
    ]

    def __init__(self, shortlist: Shortlist, ascii_only: bool = False, *,
                 on_change: Callable[[], None] = lambda: None,
                 copy_entry: Callable[[ShortlistEntry], None] = lambda entry: None,
                 go_to: Callable[[ContractKey], bool] = lambda key: False, cursor: int = 0,
                 on_cursor: Callable[[int], None] = lambda row: None) -> None:
        """``on_change`` is called after an entry is taken off, ``copy_entry`` copies one entry's
        summary, ``go_to`` shows a contract in the ladder (False when it cannot); the cursor starts
        on row ``cursor`` and ``on_cursor`` is told where it is (so reopening finds it there)."""
        super().__init__()
        self.shortlist = shortlist
        self._ascii = ascii_only
        self._on_change = on_change
        self._copy_entry = copy_entry
        self._go_to = go_to
        self._start_row = max(0, int(cursor))
        self._on_cursor = on_cursor

    def compose(self) -> ComposeResult:
        yield Static(id="shortlist-title", classes="title")
        yield RowTable(id="shortlist-table")
        yield Static(id="shortlist-more", classes="title")
        yield KeyLine()

    def on_mount(self) -> None:
        table = self.query_one("#shortlist-table", RowTable)
        table.add_columns(*[shortlist_heading(h, name, self._ascii) for h, name in SHORTLIST_COLUMNS])
        self.refresh_table(keep_row=self._start_row)
        table.focus()
        self.call_after_refresh(self._say_more)
        self.watch(table, "scroll_x", lambda _: self._say_more(), init=False)

    def on_resize(self) -> None:
        self.call_after_refresh(self._say_more)

    def _say_more(self) -> None:
        """A line under the table when columns lie beyond its right edge, with the keys that show them."""
        try:
            table = self.query_one("#shortlist-table", RowTable)
            line = self.query_one("#shortlist-more", Static)
        except Exception:  # closing
            return
        if len(self.shortlist) and table.more_to_the_right:
            arrow = "->" if self._ascii else "→"
            line.update(Text(f" more columns to the right {arrow}  (Ctrl+PgDn or the mouse scroll sideways)",
                             style="dim"))
            line.display = True
        else:
            line.update(Text(""))
            line.display = False

    def on_data_table_row_highlighted(self, event: DataTable.RowHighlighted) -> None:
        self._on_cursor(event.cursor_row)

    def refresh_table(self, keep_row: int | None = None) -> None:
        table = self.query_one("#shortlist-table", RowTable)
        table.clear()
        entries = self.shortlist.entries
        for i, e in enumerate(entries):
            table.add_row(*shortlist_row(e, self._ascii), key=str(i))
        n = len(entries)
        title = Text(" shortlist: ", style="bold")
        title.append(f"{n} contract{'s' if n != 1 else ''}", style="bold")
        if n:
            title.append("   Enter shows one in the ladder", style="dim")
        else:
            title.append("   empty: m on a contract in the ladder sets it aside", style="dim")
        self.query_one("#shortlist-title", Static).update(title)
        if n and keep_row is not None:
            table.move_cursor(row=min(keep_row, n - 1))

    def _current(self) -> ShortlistEntry | None:
        table = self.query_one("#shortlist-table", RowTable)
        entries = self.shortlist.entries
        if not entries or table.cursor_row is None or not 0 <= table.cursor_row < len(entries):
            return None
        return entries[table.cursor_row]

    def action_close(self) -> None:
        close(self)

    def action_remove_entry(self) -> None:
        entry = self._current()
        if entry is None:
            return
        row = self.query_one("#shortlist-table", RowTable).cursor_row
        self.shortlist.remove(entry.key)
        self._on_change()
        self.refresh_table(keep_row=row)

    def action_copy_summary(self) -> None:
        entry = self._current()
        if entry is not None:
            self._copy_entry(entry)

    def on_data_table_row_selected(self, event: DataTable.RowSelected) -> None:
        event.stop()
        self.action_go_to()

    def action_go_to(self) -> None:
        if getattr(self, "_dismissed_once", False):
            return
        entry = self._current()
        if entry is not None and self._go_to(entry.key):
            close(self)

    def action_export(self) -> None:
        if getattr(self, "_dismissed_once", False):
            return
        if not len(self.shortlist):
            self.notify("the shortlist is empty: nothing to write", severity="warning", markup=False)
            return
        proposed = default_export_path()
        self.app.push_screen(
            PathPrompt("write the shortlist to (.csv or .md)", value=home_short(proposed),
                       hint=f"proposed: a dated name in {home_short(proposed.parent)} (the folder the app was "
                            "started from, else ~/Documents or ~); .csv writes CSV, .md or .txt a Markdown "
                            "table; other endings are asked about"),
            self.export)

    def export(self, path: str | None, overwrite: bool = False, chosen: str | None = None) -> None:
        """Write the shortlist to ``path`` (.csv: CSV; .md, .markdown, .txt: Markdown; any other
        ending: ask, CSV on yes); ask before replacing a file."""
        if not path:
            return
        # Any OS error while checking or writing the path (a name too long for the file system, a
        # NUL byte, a folder that is not there or not writable) is a notice; the app and the
        # shortlist stay as they were.
        try:
            target = Path(os.path.expanduser(path))
            is_dir = target.is_dir()
        except (OSError, ValueError, RuntimeError) as exc:
            self.app.notify(f"{path[:80]!r} cannot be used as a file name: {getattr(exc, 'strerror', None) or exc}",
                            title="not written", severity="error", markup=False)
            return
        if is_dir:
            self.app.notify(f"{target} is a folder: give a file name, e.g. {target / 'shortlist.csv'}",
                            title="not written", severity="warning", markup=False)
            return
        fmt = chosen or export_format(target)
        try:  # only a new file is asked about: writing says why a name cannot be used, and an
            askable = target.parent.is_dir() and not target.exists()  # existing one gets one question
        except (OSError, ValueError):
            askable = False
        if fmt is None and not askable:
            fmt = "csv"
        if fmt is None:
            def answer(yes: bool | None) -> None:
                if yes:
                    self.export(path, overwrite=overwrite, chosen="csv")
                else:
                    self.app.notify("not written: give a name ending in .csv, .md or .txt", timeout=4,
                                    markup=False)

            self.app.push_screen(ConfirmDialog(
                f"{target.name} ends in neither .csv nor .md. Write it as CSV anyway?"), answer)
            return
        markdown = fmt == "markdown"
        try:
            if markdown:
                self.shortlist.export_markdown(target, overwrite=overwrite, ascii_only=self._ascii)
            else:
                self.shortlist.export_csv(target, overwrite=overwrite)
        except TargetExistsError:
            def answer(yes: bool | None) -> None:
                if yes:
                    self.export(path, overwrite=True, chosen=fmt)
                else:
                    self.app.notify("not written: the file was kept as it was", timeout=3, markup=False)

            as_what = "" if export_format(target) else " (with CSV)"
            self.app.push_screen(ConfirmDialog(f"{target} already exists. Replace it{as_what}?"), answer)
            return
        except ChainTriageError as exc:
            self.app.notify(str(exc), title="not written", severity="error", markup=False)
            return
        except (OSError, ValueError) as exc:
            self.app.notify(f"cannot write {str(target)[:80]}: {getattr(exc, 'strerror', None) or exc}",
                            title="not written", severity="error", markup=False)
            return
        n = len(self.shortlist)
        kind = "a Markdown table" if markdown else "CSV"
        self.app.notify(f"wrote {n} contract{'s' if n != 1 else ''} to {target} as {kind}", markup=False)
