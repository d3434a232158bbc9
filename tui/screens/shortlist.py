"""The screens and dialogs over the triage screen: help, findings, shortlist,
column picker, filter, a path prompt and a yes/no question.

Every text shown here that came from a file (underlying names, finding
reasons, file names) goes in as ``rich.text.Text`` with control characters
removed: never as markup.
"""

from __future__ import annotations

import os
from typing import TYPE_CHECKING, Any, Sequence

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.screen import ModalScreen, Screen
from textual.widgets import DataTable, Footer, Input, SelectionList, Static
from textual.widgets.selection_list import Selection

from chaintriage.core.findings import SEVERITIES, ChainTriageError, Finding

from . import formatting as fm
from .help_text import COLUMNS as COLUMN_HELP
from .help_text import help_text, wrap_help
from .session import StrikeFilter
from .shortlist import ShortlistEntry
from .strike_grid import COLUMNS

if TYPE_CHECKING:  # pragma: no cover
    from .app import ChainTriageApp


def plain(text: Any) -> Text:
    """Data text for a widget: control characters removed, never parsed as markup."""
    return Text(fm.clean_text(text))


def close(screen: Screen, result: Any = None) -> bool:
    """Dismiss ``screen`` with ``result`` once, and only while it is the top screen; True if it did.

    Keys typed faster than a screen closes (Escape twice, Enter twice in a dialog) all reach the
    closing screen: without this the second one would close the screen under it as well, down to
    an empty screen stack.
    """
    if getattr(screen, "_dismissed_once", False) or not screen.is_active:
        return False
    screen._dismissed_once = True  # type: ignore[attr-defined]
    screen.dismiss(result)
    return True



# ---------------------------------------------------------------- help


class HelpScreen(Screen):
    """Every key, what each column means, the marks and the cautions."""

    BINDINGS = [
        Binding("escape,q,question_mark", "close", "close"),
    ]

    def __init__(self, ascii_only: bool = False) -> None:
        super().__init__()
        self._ascii = ascii_only

    def compose(self) -> ComposeResult:
        yield Static(Text(" chaintriage help    Esc closes, arrows and PgUp/PgDn scroll", style="bold"),
                     classes="title")
        with VerticalScroll(id="help-scroll"):
            yield Static(Text(help_text(self._ascii)), id="help-body")
        yield Footer(show_command_palette=False)

    def on_mount(self) -> None:
        self.query_one("#help-scroll").focus()
        self._wrap()
        self.call_after_refresh(self._wrap)

    def on_resize(self) -> None:
        self.call_after_refresh(self._wrap)

    def _wrap(self) -> None:
        body = self.query_one("#help-body", Static)
        # The body's own content width once laid out (padding and scrollbar excluded).
        width = body.content_region.width or (self.size.width or 80) - 6
        body.update(Text(wrap_help(help_text(self._ascii), width)))

    def action_close(self) -> None:
        close(self)


# ---------------------------------------------------------------- findings


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
        head = Text(" findings for ", style="bold")
        head.append(fm.clean_text(self._title))
        head.append(f"  {n:,} finding{'s' if n != 1 else ''}", style="bold")
        counts = {sev: sum(1 for f in self._findings if f.severity == sev) for sev in SEVERITIES}
        words = ", ".join(f"{c} {sev}" for sev, c in counts.items() if c)
        if words:
            head.append(f" ({words})")
        if self._errors:
            head.append(f"; {len(self._errors)} unusable file{'s' if len(self._errors) != 1 else ''}",
                        style="bold")
        yield Static(head, classes="title")
        yield DataTable(id="findings-table", cursor_type="row", zebra_stripes=True)
        yield Static(Text(""), id="finding-detail")
        yield Footer(show_command_palette=False)

    def on_mount(self) -> None:
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


# ---------------------------------------------------------------- shortlist


SHORTLIST_COLUMNS: tuple[tuple[str, str], ...] = (
    ("underlying", "underlying"), ("expiry", "expiry"), ("strike", "strike"), ("kind", "kind"),
    ("mid", "mid"), ("IV", "iv"), ("σ dist", "sigma_distance"), ("beyond", "p_beyond"),
    ("touch", "p_touch"), ("BE", "breakeven"), ("spread", "spread_pct"), ("OI", "open_interest"),
    ("as of", "as_of"),
)


def shortlist_row(entry: ShortlistEntry, ascii_only: bool = False) -> tuple[Text, ...]:
    """One shortlist-table row, formatted for reading."""
    k, fig = entry.key, entry.figures
    cells: list[Text] = [plain(k.underlying), plain(k.expiry), Text(fm.fmt_strike(k.strike), justify="right"),
                         plain(k.kind)]
    fmts = {
        "mid": fm.fmt_price, "iv": fm.fmt_vol, "sigma_distance": fm.fmt_sigma, "p_beyond": fm.fmt_prob,
        "p_touch": fm.fmt_prob, "breakeven": fm.fmt_price, "spread_pct": fm.fmt_spread,
        "open_interest": fm.fmt_count,
    }
    for _, name in SHORTLIST_COLUMNS[4:-1]:
        cells.append(Text(fmts[name](fig.get(name), ascii_only=ascii_only), justify="right"))
    cells.append(plain(fm.fmt_timestamp(k.as_of, ascii_only)))
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

    def __init__(self, ascii_only: bool = False) -> None:
        super().__init__()
        self._ascii = ascii_only

    @property
    def main(self) -> "ChainTriageApp":
        return self.app  # type: ignore[return-value]

    def compose(self) -> ComposeResult:
        yield Static(id="shortlist-title", classes="title")
        yield DataTable(id="shortlist-table", cursor_type="row", zebra_stripes=True)
        yield Footer(show_command_palette=False)

    def on_mount(self) -> None:
        table = self.query_one("#shortlist-table", DataTable)
        table.add_columns(*[(h.replace("σ", "s") if self._ascii else h) for h, _ in SHORTLIST_COLUMNS])
        self.refresh_table()
        table.focus()

    def refresh_table(self, keep_row: int | None = None) -> None:
        table = self.query_one("#shortlist-table", DataTable)
        table.clear()
        entries = self.main.shortlist.entries
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
        table = self.query_one("#shortlist-table", DataTable)
        entries = self.main.shortlist.entries
        if not entries or table.cursor_row is None or not 0 <= table.cursor_row < len(entries):
            return None
        return entries[table.cursor_row]

    def action_close(self) -> None:
        close(self)

    def action_remove_entry(self) -> None:
        entry = self._current()
        if entry is None:
            return
        row = self.query_one("#shortlist-table", DataTable).cursor_row
        self.main.shortlist.remove(entry.key)
        self.main.shortlist_changed()
        self.refresh_table(keep_row=row)

    def action_copy_summary(self) -> None:
        entry = self._current()
        if entry is not None:
            self.main.copy_entry(entry)

    def on_data_table_row_selected(self, event: DataTable.RowSelected) -> None:
        event.stop()
        self.action_go_to()

    def action_go_to(self) -> None:
        if getattr(self, "_dismissed_once", False):
            return
        entry = self._current()
        if entry is not None and self.main.go_to_contract(entry.key):
            close(self)

    def action_export(self) -> None:
        if getattr(self, "_dismissed_once", False):
            return
        if not len(self.main.shortlist):
            self.notify("the shortlist is empty: nothing to write", severity="warning", markup=False)
            return
        self.app.push_screen(
            PathPrompt("write the shortlist to (.csv or .md)", value=self.main.default_export_name(),
                       hint="a name ending in .md writes a Markdown table; anything else, CSV"),
            self.main.export_shortlist)


# ---------------------------------------------------------------- column picker


class ColumnPicker(ModalScreen[None]):
    """Choose the columns each side of the ladder shows (applied as you go)."""

    BINDINGS = [Binding("escape,o", "close", "close")]

    def __init__(self, chosen: Sequence[str], on_change) -> None:
        super().__init__()
        self._chosen = list(chosen)
        self._on_change = on_change

    def compose(self) -> ComposeResult:
        meanings = {c.key: c.meaning for c in COLUMN_HELP}
        options = []
        for key, spec in COLUMNS.items():
            label = Text(f"{spec.heading:<7} ", style="bold")
            label.append(meanings.get(key, ""), style="dim")
            options.append(Selection(label, key, key in self._chosen))
        with Vertical(classes="dialog wide"):
            yield Static(Text("columns on each side of the ladder", style="bold"))
            yield SelectionList[str](*options, id="column-list")
            yield Static(Text("Space or Enter shows/hides a column; Esc closes", style="dim"),
                         id="column-hint")

    def on_mount(self) -> None:
        self.query_one("#column-list").focus()

    def on_selection_list_selected_changed(self, event: SelectionList.SelectedChanged) -> None:
        selected = set(event.selection_list.selected)
        keys = [k for k in COLUMNS if k in selected]
        hint = self.query_one("#column-hint", Static)
        if not keys:
            hint.update(Text("choose at least one column (the ladder keeps the last one)", style="bold"))
            return
        hint.update(Text("Space or Enter shows/hides a column; Esc closes", style="dim"))
        self._on_change(keys)

    def action_close(self) -> None:
        close(self, None)


# ---------------------------------------------------------------- filter


class FilterDialog(ModalScreen[StrikeFilter | None]):
    """Ask for the sigma threshold and the optional liquidity limits."""

    BINDINGS = [Binding("escape", "cancel", "cancel")]

    def __init__(self, current: StrikeFilter) -> None:
        super().__init__()
        self._current = current

    def compose(self) -> ComposeResult:
        c = self._current

        def val(x: float | None, scale: float = 1.0) -> str:
            if x is None:
                return ""
            return f"{x * scale:.4f}".rstrip("0").rstrip(".")

        with Vertical(classes="dialog"):
            yield Static(Text("show only strikes out of the money by at least", style="bold"))
            with Horizontal(classes="field"):
                yield Static(Text("sigmas"), classes="label")
                yield Input(value=val(c.sigma), placeholder="e.g. 1.5 (blank: any)", id="f-sigma",
                            compact=True)
            with Horizontal(classes="field"):
                yield Static(Text("max spread %"), classes="label")
                yield Input(value=val(c.max_spread, 100.0), placeholder="e.g. 20 (blank: any)", id="f-spread",
                            compact=True)
            with Horizontal(classes="field"):
                yield Static(Text("min open int."), classes="label")
                yield Input(value=val(c.min_open_interest), placeholder="e.g. 100 (blank: any)", id="f-oi",
                            compact=True)
            yield Static(Text(""), id="f-error")
            yield Static(Text("Enter applies, Tab moves, Esc cancels. A strike stays when its call or its put "
                              "qualifies.", style="dim"))

    def on_mount(self) -> None:
        self.query_one("#f-sigma", Input).focus()

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        try:
            flt = StrikeFilter.parse(self.query_one("#f-sigma", Input).value,
                                     self.query_one("#f-spread", Input).value,
                                     self.query_one("#f-oi", Input).value)
        except ChainTriageError as exc:
            self.query_one("#f-error", Static).update(Text(str(exc), style="bold"))
            return
        close(self, flt)

    def action_cancel(self) -> None:
        close(self, None)


# ---------------------------------------------------------------- small prompts


class PathPrompt(ModalScreen[str | None]):
    """Ask for a file path; dismisses with the text typed (None on Esc)."""

    BINDINGS = [Binding("escape", "cancel", "cancel")]

    def __init__(self, question: str, value: str = "", hint: str = "") -> None:
        super().__init__()
        self._question = question
        self._value = value
        self._hint = hint

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog wide"):
            yield Static(Text(self._question, style="bold"))
            yield Input(value=self._value, placeholder="path", id="path-input", compact=True)
            hint = Text((self._hint + "\n" if self._hint else ""), style="dim")
            hint.append("relative to ", style="dim")
            hint.append(fm.clean_text(os.getcwd()), style="dim")
            hint.append("; ~ is your home. Enter accepts, Esc cancels", style="dim")
            yield Static(hint)

    def on_mount(self) -> None:
        self.query_one("#path-input", Input).focus()

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        value = event.value.strip()
        close(self, value or None)

    def action_cancel(self) -> None:
        close(self, None)


class ConfirmDialog(ModalScreen[bool]):
    """A yes/no question: y says yes; n or Esc says no."""

    BINDINGS = [
        Binding("y", "answer(True)", "yes"),
        Binding("n,escape", "answer(False)", "no"),
    ]

    def __init__(self, question: str) -> None:
        super().__init__()
        self._question = question

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog wide"):
            yield Static(plain(self._question), id="confirm-question")
            yield Static(Text("y: yes    n or Esc: no", style="bold"))

    def action_answer(self, yes: bool) -> None:
        close(self, bool(yes))
