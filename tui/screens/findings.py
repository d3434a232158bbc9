"""The findings screen: what the loader and the pipeline said about the current snapshot's data."""

from __future__ import annotations

import os
from typing import Sequence

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.screen import Screen
from textual.widgets import DataTable, Footer, Static

from chaintriage.core.findings import SEVERITIES, Finding
from chaintriage.tui import formatting as fm
from chaintriage.tui.screens.common import close, plain
from chaintriage.tui.widgets.row_table import RowTable


FINDING_COLUMNS = ("severity", "where", "column", "expiry", "reason")


def finding_row(f: Finding) -> tuple[Text, ...]:
    """One findings-table row: severity, file name:line, column, expiry, reason (plain text)."""
    if f.file is not None:
        name = os.path.basename(f.file) or f.file
        where = name if f.line is None else f"{name}:{f.line}"
    elif f.line is not None:
        where = f"line {f.line}"
    else:
        where = ""
    return (plain(f.severity), plain(where), plain(f.column or ""), plain(f.expiry or ""), plain(f.reason))


def finding_detail(f: Finding) -> Text:
    """The whole finding for the pane under the table: full location, then the reason."""
    out = Text(f"{f.severity}: ", style="bold")
    out.append(fm.clean_text(f.location()) or "the whole snapshot")
    out.append("\n")
    out.append(fm.clean_text(f.reason))
    return out


class FindingsScreen(Screen):
    """What the loader and the pipeline said about the current snapshot's data."""

    BINDINGS = [Binding("escape,q,e", "close", "close")]

    def __init__(self, title: str, findings: Sequence[Finding], file_errors: Sequence[str] = ()) -> None:
        super().__init__()
        self._title = title
        self._findings = list(findings)
        self._errors = list(file_errors)

    def compose(self) -> ComposeResult:
        n = len(self._findings)
        # One line at any width: the counts first, the snapshot's name last (cut with "~" if need be).
        head = Text(f" {n:,} finding{'s' if n != 1 else ''}", style="bold", no_wrap=True, overflow="crop")
        counts = {sev: sum(1 for f in self._findings if f.severity == sev) for sev in SEVERITIES}
        words = ", ".join(f"{c} {sev}" for sev, c in counts.items() if c)
        if words:
            head.append(f" ({words})")
        if self._errors:
            head.append(f"; {len(self._errors)} unusable file{'s' if len(self._errors) != 1 else ''}",
                        style="bold")
        head.append("  for ")
        head.append(fm.clean_text(self._title))
        self._head = head
        yield Static(head, classes="title", id="findings-title")
        yield RowTable(id="findings-table")
        yield Static(Text(""), id="finding-detail")
        yield Footer(show_command_palette=False)

    def on_resize(self) -> None:
        self._fit_title()

    def _fit_title(self) -> None:
        """Cut the title to the screen's width with one "~" (no wrapping, no ellipsis character)."""
        title = self.query_one("#findings-title", Static)
        full = self._head
        width = self.size.width or self.app.size.width
        if full.cell_len > width:
            cut = full.copy()
            cut.truncate(max(1, width - 1), overflow="crop")
            cut.append("~")
            title.update(cut)
        else:
            title.update(full)

    def on_mount(self) -> None:
        self._fit_title()
        table = self.query_one("#findings-table", DataTable)
        table.add_columns(*FINDING_COLUMNS)
        for message in self._errors:
            table.add_row(plain("unusable file"), plain(""), plain(""), plain(""), plain(message))
        for f in self._findings:
            table.add_row(*finding_row(f))
        if not self._findings and not self._errors:
            table.add_row(plain(""), plain(""), plain(""), plain(""), plain("nothing to report: every row was used"))
        table.focus()
        self._show_detail(0)

    def on_data_table_row_highlighted(self, event: DataTable.RowHighlighted) -> None:
        self._show_detail(event.cursor_row)

    def _show_detail(self, row: int) -> None:
        detail = self.query_one("#finding-detail", Static)
        k = row - len(self._errors)
        if 0 <= row < len(self._errors):
            detail.update(Text("unusable file\n", style="bold") + plain(self._errors[row]))
        elif 0 <= k < len(self._findings):
            detail.update(finding_detail(self._findings[k]))
        else:
            detail.update(Text(""))

    def action_close(self) -> None:
        close(self)
