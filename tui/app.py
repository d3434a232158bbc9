"""The Textual app (minimal for now): the loaded contracts in one table.

Text from files is shown as plain text (rich.text.Text cells), never as markup.
"""

from __future__ import annotations

import contextlib
from collections.abc import Sequence
from importlib import resources
from pathlib import Path

import numpy as np
from rich.text import Text
from textual.app import App, ComposeResult
from textual.binding import Binding
from textual.widgets import DataTable, Footer, Header

from chaintriage.core.findings import ChainTriageError
from chaintriage.core.loading import ColumnMap, LoadResult, SnapshotOverrides, load_files
from chaintriage.core.snapshot import Snapshot
from chaintriage.tui.cli_common import error

#: Columns of the contracts table, in order.
TABLE_COLUMNS = ("underlying", "as_of", "spot", "expiry", "strike", "kind", "bid", "ask")

DEMO_PACKAGE = "chaintriage.demo_chains"


def _number(value: float, digits: int = 2) -> Text:
    if value is None or not np.isfinite(value):
        return Text("", justify="right")
    return Text(f"{value:,.{digits}f}", justify="right")


def contract_rows(snapshot: Snapshot) -> list[tuple[Text, ...]]:
    """Table rows for one snapshot, every cell a plain rich Text."""
    c = snapshot.contracts
    und = Text(snapshot.underlying)
    as_of = Text(snapshot.as_of.isoformat(timespec="minutes"))
    spot = _number(snapshot.spot)
    expiries = c["expiry"].dt.strftime("%Y-%m-%d").tolist()
    rows = []
    for exp, strike, kind, bid, ask in zip(expiries, c["strike"].tolist(), c["kind"].tolist(),
                                           c["bid"].tolist(), c["ask"].tolist()):
        rows.append((und, as_of, spot, Text(exp), _number(strike, 2), Text(kind), _number(bid), _number(ask)))
    return rows


class ChainTriageApp(App):
    """Shows the loaded snapshots' contracts in a DataTable; q quits."""

    TITLE = "chaintriage"
    BINDINGS = [Binding("q", "quit", "Quit")]

    def __init__(self, snapshots: Sequence[Snapshot], *, findings_count: int = 0) -> None:
        super().__init__()
        self.snapshots = list(snapshots)
        self.findings_count = findings_count

    def compose(self) -> ComposeResult:
        yield Header()
        yield DataTable(id="contracts", cursor_type="row", zebra_stripes=True)
        yield Footer()

    def on_mount(self) -> None:
        table = self.query_one("#contracts", DataTable)
        table.add_columns(*TABLE_COLUMNS)
        total = 0
        for snap in self.snapshots:
            rows = contract_rows(snap)
            table.add_rows(rows)
            total += len(rows)
        n = len(self.snapshots)
        self.sub_title = (f"{n} snapshot{'s' if n != 1 else ''}, {total:,} contracts, "
                          f"{self.findings_count:,} findings")
        table.focus()


def demo_files(root=None) -> list[str]:
    """Names of the bundled demo chains (CSV files, except the deliberately messy ones), sorted.

    ``root`` is the folder to look in (a Traversable); default: the chaintriage.demo_chains package.
    """
    try:
        root = resources.files(DEMO_PACKAGE) if root is None else root
        names = [p.name for p in root.iterdir() if p.name.lower().endswith(".csv")]
    except (ModuleNotFoundError, FileNotFoundError, NotADirectoryError):
        return []
    return sorted(n for n in names if "messy" not in n.lower())


def load_for_app(paths: Sequence[str | Path], *, overrides: SnapshotOverrides | None = None,
                 column_map: ColumnMap | None = None) -> LoadResult:
    """Load the given files, or the bundled demo chains when ``paths`` is empty.

    Raises ChainTriageError when there is nothing to load.
    """
    if paths:
        return load_files(paths, overrides=overrides, column_map=column_map)
    names = demo_files()
    if not names:
        raise ChainTriageError(
            "no demo chains are bundled with this installation; give snapshot files to open")
    root = resources.files(DEMO_PACKAGE)
    with contextlib.ExitStack() as stack:
        real = [str(stack.enter_context(resources.as_file(root / n))) for n in names]
        return load_files(real, overrides=overrides, column_map=column_map)


def open_app(paths: Sequence[str | Path], *, overrides: SnapshotOverrides | None = None,
             column_map: ColumnMap | None = None, settings=None) -> int:
    """Load snapshots (the demo chains when ``paths`` is empty) and run the app. Returns an exit status."""
    try:
        result = load_for_app(paths, overrides=overrides, column_map=column_map)
    except ChainTriageError as exc:
        error(str(exc))
        return 2
    for exc in result.errors:
        error(str(exc))
    if not result.snapshots:
        error("nothing to show: no file gave a usable snapshot")
        return 2
    ChainTriageApp(result.snapshots, findings_count=len(result.findings)).run()
    return 0
