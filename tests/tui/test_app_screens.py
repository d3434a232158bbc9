"""The shortlist, export, findings, help and column screens, through the pilot.

Checks are about what the screens hold and write, against core's output and
the shortlist module [D]; the exported CSV is read back with Python's csv module.
"""

from __future__ import annotations

import csv

import pandas as pd

from chaintriage.tui import formatting as fm
from chaintriage.tui import help_text as ht
from chaintriage.tui.screens.column_picker import ColumnPicker
from chaintriage.tui.screens.confirm_dialog import ConfirmDialog
from chaintriage.tui.screens.findings import FindingsScreen
from chaintriage.tui.screens.help import HelpScreen
from chaintriage.tui.screens.shortlist import ShortlistScreen
from chaintriage.tui.settings import load_settings
from chaintriage.tui.widgets.strike_grid import COLUMNS

from .app_support import bar, demo_annotated, make_app, notes, run, type_export_path


async def mark(pilot, *keys):
    await pilot.press(*keys, "m")


def test_marking_across_expiries_and_snapshots_fills_the_shortlist():
    app = make_app()

    async def scenario(pilot):
        await mark(pilot)
        k1 = app.triage.grid.highlighted
        assert any("●" in line for line in app.triage.grid.render_lines_text())
        await mark(pilot, "]", "right")
        await mark(pilot, "right_curly_bracket")
        assert len(app.state.shortlist) == 3
        keys = [e.key for e in app.state.shortlist.entries]
        assert [k.underlying for k in keys] == ["OSPX", "OSPX", "TSBH"]
        assert keys[0].expiry != keys[1].expiry and (keys[0].strike, keys[0].kind) == k1
        assert keys[1].kind == "put"
        assert "shortlist 3" in bar(app, "topbar")
        # m again takes it off
        await pilot.press("m")
        assert len(app.state.shortlist) == 2

    run(app, scenario)


def test_shortlist_screen_lists_removes_copies_and_goes_to():
    app = make_app()

    async def scenario(pilot):
        await mark(pilot)
        await mark(pilot, "]", "down")
        await pilot.press("s")
        screen = app.screen
        assert isinstance(screen, ShortlistScreen)
        table = screen.query_one("#shortlist-table")
        assert table.row_count == 2
        first = app.state.shortlist.entries[0]
        row = [c.plain for c in table.get_row_at(0)]
        assert row[0] == "OSPX" and row[1] == first.key.expiry and row[4] == first.key.kind  # underlying, expiry, days, strike, kind
        await pilot.press("c")
        assert app.clipboard.startswith(f"OSPX {fm.fmt_strike(first.key.strike)} {first.key.kind}, "
                                        f"expiry {first.key.expiry}")
        await pilot.press("down", "d")
        assert table.row_count == 1 and len(app.state.shortlist) == 1
        await pilot.press("enter")  # go to the remaining (first) contract
        assert app.screen is app.triage
        assert app.triage.grid.highlighted == (first.key.strike, first.key.kind)
        assert pd.Timestamp(first.key.expiry) == app.state.current_expiry

    run(app, scenario)


def test_export_writes_csv_and_markdown_and_asks_before_replacing(tmp_path):
    app = make_app()
    target = tmp_path / "picks.csv"
    md = tmp_path / "picks.md"

    async def scenario(pilot):
        await mark(pilot)
        await pilot.press("s")
        await type_export_path(app, pilot, target)
        rows = list(csv.DictReader(target.open(newline="", encoding="utf-8")))
        assert len(rows) == 1 and rows[0]["underlying"] == "OSPX"
        oracle = demo_annotated()[0].contracts
        key = app.state.shortlist.entries[0].key
        want = oracle[(oracle["expiry"] == pd.Timestamp(key.expiry)) & (oracle["strike"] == key.strike)
                      & (oracle["kind"] == key.kind)].iloc[0]
        assert abs(float(rows[0]["p_beyond"]) - want["p_beyond"]) <= 1e-9 * abs(want["p_beyond"])  # 10 digits
        assert any(str(target) in n for n in notes(app))
        before = target.read_bytes()
        # a second contract, then the same path: a question, and "no" keeps the file
        await pilot.press("escape", "down", "m", "s")
        await type_export_path(app, pilot, target)
        assert isinstance(app.screen, ConfirmDialog)
        await pilot.press("n")
        assert target.read_bytes() == before
        await type_export_path(app, pilot, target)
        assert isinstance(app.screen, ConfirmDialog)
        await pilot.press("y")
        await pilot.pause()
        assert len(list(csv.DictReader(target.open(newline="", encoding="utf-8")))) == 2
        await type_export_path(app, pilot, md)
        text = md.read_text(encoding="utf-8")
        assert text.startswith("| underlying |") and text.count("\n| OSPX |") == 2

    run(app, scenario)


def test_export_to_an_unwritable_place_says_why_and_keeps_going(tmp_path):
    app = make_app()

    async def scenario(pilot):
        await mark(pilot)
        await pilot.press("s", "w")
        app.screen.query_one("#path-input").value = str(tmp_path / "no" / "such" / "dir" / "x.csv")
        await pilot.press("enter")
        await pilot.pause()
        assert any("cannot write" in n for n in notes(app))
        assert isinstance(app.screen, ShortlistScreen)
        await pilot.press("w")
        app.screen.query_one("#path-input").value = str(tmp_path)
        await pilot.press("enter")
        await pilot.pause()
        assert any("is a folder" in n for n in notes(app)) and isinstance(app.screen, ShortlistScreen)

    run(app, scenario)


def test_findings_screen_lists_the_snapshots_findings():
    app = make_app()

    async def scenario(pilot):
        view = app.state.view
        findings = view.findings()
        assert findings
        assert f"{len(findings)} findings" in bar(app, "topbar")
        await pilot.press("e")
        screen = app.screen
        assert isinstance(screen, FindingsScreen)
        table = screen.query_one("#findings-table")
        # One row per group of like findings (per file, expiry, column and reason), with its count.
        groups = view.finding_groups()
        assert table.row_count == len(groups) < len(findings)
        counts = [int(table.row_cells(i)[1].replace(",", "")) for i in range(table.row_count)]
        assert sum(counts) == len(findings)
        singles = {f.reason for g in groups if g.count == 1 for f in findings.take(g.rows)}
        assert singles <= {table.row_cells(i)[5] for i in range(table.row_count)}
        severities = {table.row_cells(i)[0] for i in range(table.row_count)}
        assert severities <= {"left-out", "warning", "note"}
        await pilot.press("escape")
        assert app.screen is app.triage

    run(app, scenario)


def test_findings_of_a_file_show_file_line_and_column(tmp_path):
    p = tmp_path / "chain.csv"
    lines = ["underlying,as_of,spot,expiry,strike,kind,bid,ask"]
    for k in range(90, 111, 5):
        lines.append(f"QRTZ,2026-03-02T15:30:00-05:00,100,2026-03-20,{k},call,{max(0.05, 100.5 - k):.2f},"
                     f"{max(0.10, 100.5 - k) + 0.2:.2f}")
        lines.append(f"QRTZ,2026-03-02T15:30:00-05:00,100,2026-03-20,{k},put,{max(0.05, k - 99.5):.2f},"
                     f"{max(0.10, k - 99.5) + 0.2:.2f}")
    lines.append("QRTZ,2026-03-02T15:30:00-05:00,100,2026-03-20,100,call,abc,1.0")
    p.write_text("\n".join(lines) + "\n", encoding="utf-8")
    app = make_app(paths=[str(p)])

    async def scenario(pilot):
        await pilot.press("e")
        table = app.screen.query_one("#findings-table")
        rows = [list(table.row_cells(i)) for i in range(table.row_count)]
        bad = [i for i, r in enumerate(rows) if r[2] == f"chain.csv line {len(lines)}"]
        assert bad and rows[bad[0]][0] == "left-out" and rows[bad[0]][3] == "bid" and rows[bad[0]][1] == "1"
        table.move_cursor(row=bad[0])
        await pilot.pause()
        detail = str(app.screen.query_one("#finding-detail").render())
        assert f"{p} line {len(lines)}" in detail and "left-out" in detail  # the full path in the detail pane

    run(app, scenario)


def test_help_lists_every_key_and_the_cautions():
    app = make_app()

    async def scenario(pilot):
        await pilot.press("question_mark")
        screen = app.screen
        assert isinstance(screen, HelpScreen)
        shown = str(screen.query_one("#help-body").render())
        assert max(len(line) for line in shown.splitlines()) <= screen.size.width
        text = " ".join(shown.split())  # wrapped to the screen: compare word runs
        for k in ht.KEYS:
            assert " ".join(k.description.split()) in text
        for c in ht.COLUMNS:
            assert " ".join(c.meaning.split()) in text
        assert "not advice" in text and "European exercise" in text and "risk-neutral" in text
        await pilot.press("escape")
        assert app.screen is app.triage

    run(app, scenario)


def test_column_picker_changes_the_ladder_and_remembers(config_home):
    app = make_app()

    async def scenario(pilot):
        await pilot.press("o")
        picker = app.screen
        assert isinstance(picker, ColumnPicker)
        sl = picker.query_one("#column-list")
        keys = list(COLUMNS)
        sl.highlighted = keys.index("mid")
        await pilot.press("space")
        sl.highlighted = keys.index("bid")
        await pilot.press("space")
        await pilot.pause()
        assert app.state.columns == ["ask", "mid", "iv", "sigma", "p_beyond", "p_touch"]
        assert app.triage.grid.columns == app.state.columns
        heads = app.triage.grid.render_lines_text()[1]
        assert "mid" in heads and "bid" not in heads
        await pilot.press("escape")
        assert app.screen is app.triage
        assert load_settings()[0].columns == app.state.columns

    run(app, scenario)


def test_findings_screen_draws_a_row_per_group_not_per_finding():
    """200,000 zero-bid findings in two groups open as two rows; the detail pane expands a few."""
    import numpy as np

    from chaintriage.core.finding_table import FindingTable
    from chaintriage.core.findings import Finding

    n = 100_000
    rows = [Finding("warning", "zero bid", file="big.csv", line=i + 2, column="bid", underlying="QRTZ",
                    expiry="2027-01-15") for i in range(2)]
    base = FindingTable.of(rows)
    idx = np.zeros(2 * n, dtype=np.int64)
    idx[n:] = 1
    big = base.take(idx)
    big.line = np.concatenate([np.arange(2, n + 2), np.arange(n + 10, 2 * n + 10)])
    big.expiry = np.array(["2027-01-15"] * n + ["2027-02-19"] * n, dtype=object)
    app = make_app()

    async def scenario(pilot):
        app.push_screen(FindingsScreen("big", big, ()))
        await pilot.pause()
        table = app.screen.query_one("#findings-table")
        assert table.row_count == len(big.groups()) == 2
        assert [table.row_cells(i)[1] for i in range(2)] == ["100,000", "100,000"]
        detail = str(app.screen.query_one("#finding-detail").render())
        assert "lines 2-100001" in detail and "and 99,996 more" in detail

    run(app, scenario)


def test_findings_screen_with_many_groups_has_every_row_from_its_first_frame(monkeypatch):
    """More groups than the screen shows: every group is a row from the first frame, in order, each
    made when first drawn or read (the rest in small batches after the first frame), the count line
    from the first frame [D]."""
    import numpy as np

    from chaintriage.core.finding_table import FindingTable
    from chaintriage.core.findings import Finding
    from chaintriage.tui.widgets import line_table

    monkeypatch.setattr(line_table, "FILL_BATCH", 10)
    k = 45
    base = FindingTable.of([Finding("warning", "zero bid", file="big.csv", line=2, column="bid", underlying="QRTZ")])
    big = base.take(np.zeros(2 * k, dtype=np.int64))
    big.line = np.arange(2, 2 * k + 2)
    big.expiry = np.array([f"2027-01-{1 + i // 2:02d} #{i // 2}" for i in range(2 * k)], dtype=object)
    app = make_app()

    async def scenario(pilot):
        app.push_screen(FindingsScreen("big", big, ()))
        await pilot.pause()
        table = app.screen.query_one("#findings-table")
        assert table.row_count == k
        assert "90 findings" in str(app.screen.query_one("#findings-title").render())
        for _ in range(20):
            await pilot.pause()
        assert [table.row_cells(i)[4] for i in (0, k - 1)] == ["2027-01-01 #0", f"2027-01-{k:02d} #{k - 1}"]
        await pilot.press("end")
        assert table.cursor_row == k - 1
        assert f"2027-01-{k:02d} #{k - 1}" in str(app.screen.query_one("#finding-detail").render())

    run(app, scenario)
