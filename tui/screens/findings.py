"""The findings screen: what the loader and the pipeline said about the current snapshot's data,
grouped per file, underlying, expiry, column and reason with a count and the runs of lines.

A big file can give a million findings; the screen shows one row per group (the groups are
computed once per snapshot, off the screen's thread, by ``SnapshotView.finding_groups``), and a
finding is built as an object only when the detail pane shows it. The list is a ``LineTable``
fed by a row source: only the rows on screen are made before the first frame (the others follow
in batches), so opening costs the same at any count, 20,000 groups included.
"""

from __future__ import annotations

import os
from typing import Any, Sequence

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.screen import Screen
from textual.widgets import Static

from chaintriage.core.finding_table import FindingGroup, FindingTable, ranges_text
from chaintriage.core.findings import SEVERITIES, Finding
from chaintriage.tui import formatting as fm
from chaintriage.tui.screens.common import close, plain
from chaintriage.tui.widgets.key_line import KeyLine
from chaintriage.tui.widgets.line_table import LineTable

FINDING_COLUMNS = ("severity", "count", "where", "column", "expiry", "reason")
#: Right-aligned columns (the count).
RIGHT_ALIGNED = (False, True, False, False, False, False)
#: Runs of lines shown in the table's "where" cell (the detail pane shows more).
RUNS_IN_TABLE = 3
#: Runs of lines, and example findings, shown in the detail pane.
RUNS_IN_DETAIL = 12
EXAMPLES_IN_DETAIL = 4
NOTHING_TO_REPORT = "nothing to report: every row was used"


def _file_name(path: str | None) -> str:
    return "" if path is None else (os.path.basename(path) or path)


def group_row(group: FindingGroup, table: FindingTable) -> tuple[str, ...]:
    """One findings-table row as data text (control characters removed): severity, count, file name
    and line runs, column, expiry, reason."""
    where = " ".join(p for p in (_file_name(group.file), ranges_text(group.lines, limit=RUNS_IN_TABLE)) if p)
    one = table.reason[int(group.rows[0])] if group.count == 1 else None
    clean = fm.clean_text
    return (clean(group.severity), f"{group.count:,}", clean(where), clean(group.column or ""),
            clean(group.expiry or ""), clean(group.summary(one)))


def group_detail(group: FindingGroup, table: FindingTable) -> Text:
    """The whole group for the pane under the table: where, what, and a few of its findings."""
    one = table.reason[int(group.rows[0])] if group.count == 1 else None
    out = Text(f"{group.severity}: ", style="bold")
    out.append(fm.clean_text(group.summary(one)))
    out.append("\n")
    where = [p for p in (group.file, ranges_text(group.lines, limit=RUNS_IN_DETAIL),
                         f"[{group.column}]" if group.column else "", group.underlying or "",
                         group.expiry or "") if p]
    out.append(fm.clean_text(" ".join(where)) or "the whole snapshot")
    if group.count > 1:
        for f in table.take(group.rows[:EXAMPLES_IN_DETAIL]):
            out.append("\n  ")
            out.append(fm.clean_text(f"line {f.line}: {f.reason}" if f.line else f.reason), style="dim")
        if group.count > EXAMPLES_IN_DETAIL:
            out.append(f"\n  ... and {group.count - EXAMPLES_IN_DETAIL:,} more", style="dim")
    return out


class FindingsScreen(Screen):
    """What the loader and the pipeline said about the current snapshot's data, grouped."""

    BINDINGS = [Binding("escape,q,e", "close", "close")]

    def __init__(self, title: str, findings: Sequence[Finding] | FindingTable,
                 file_errors: Sequence[str] = (), groups: Sequence[FindingGroup] | None = None,
                 theme: Any = None) -> None:
        """``groups`` are ``findings``' groups when already computed (else they are computed here);
        ``theme`` the table's colours (default: the app's current theme)."""
        super().__init__()
        self._theme = theme
        self._title = title
        self._findings = FindingTable.of(findings)
        self._groups = list(groups) if groups is not None else self._findings.groups()
        self._errors = list(file_errors)

    def compose(self) -> ComposeResult:
        n = len(self._findings)
        # One line at any width: the counts first, the snapshot's name last (cut with "~" if need be).
        head = Text(f" {n:,} finding{'s' if n != 1 else ''}", style="bold", no_wrap=True, overflow="crop")
        counts = self._findings.counts()
        words = ", ".join(f"{counts[sev]:,} {sev}" for sev in SEVERITIES if counts.get(sev))
        if words:
            head.append(f" ({words})")
        k = len(self._groups)
        if k and k != n:
            head.append(f" in {k:,} group{'s' if k != 1 else ''}")
        if self._errors:
            head.append(f"; {len(self._errors)} unusable file{'s' if len(self._errors) != 1 else ''}",
                        style="bold")
        head.append("  for ")
        head.append(fm.clean_text(self._title))
        self._head = head
        yield Static(head, classes="title", id="findings-title")
        theme = self._theme or getattr(getattr(self.app, "state", None), "theme", None)
        yield LineTable(id="findings-table", theme=theme)
        yield Static(Text(""), id="finding-detail")
        yield KeyLine()

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
        table = self.query_one("#findings-table", LineTable)
        table.set_columns(FINDING_COLUMNS, RIGHT_ALIGNED)
        count = len(self._errors) + len(self._groups)
        table.set_row_source(count or 1, self._row)
        if self.focused is not table:
            table.focus()
        self._show_detail(0)

    def _row(self, i: int) -> tuple[str, ...]:
        """Table row ``i``: the unusable files first, then one row per group."""
        k = i - len(self._errors)
        if i < len(self._errors):
            return ("unusable file", "", "", "", "", fm.clean_text(self._errors[i]))
        if k < len(self._groups):
            return group_row(self._groups[k], self._findings)
        return ("", "", "", "", "", NOTHING_TO_REPORT)

    def on_line_table_highlighted(self, event: LineTable.Highlighted) -> None:
        self._show_detail(event.row)

    def _show_detail(self, row: int) -> None:
        detail = self.query_one("#finding-detail", Static)
        k = row - len(self._errors)
        if 0 <= row < len(self._errors):
            detail.update(Text("unusable file\n", style="bold") + plain(self._errors[row]))
        elif 0 <= k < len(self._groups):
            detail.update(group_detail(self._groups[k], self._findings))
        else:
            detail.update(Text(""))

    def action_close(self) -> None:
        close(self)
