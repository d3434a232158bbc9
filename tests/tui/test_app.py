"""The minimal Textual app: starts, shows the loaded contracts, shows file text literally.

Driven with Textual's own test pilot (App.run_test) [L: Textual testing guide];
async tests run through asyncio.run because pytest-asyncio is not a dependency.
"""

from __future__ import annotations

import asyncio
from pathlib import Path

from rich.text import Text
from textual.widgets import DataTable

from chaintriage.tui import app as app_module
from chaintriage.tui.app import TABLE_COLUMNS, ChainTriageApp, demo_files, load_for_app, open_app

AS_OF = "2026-03-02T15:30:00-05:00"


def write_chain(tmp_path: Path, underlying: str) -> Path:
    p = tmp_path / "chain.csv"
    p.write_text(
        "underlying,as_of,spot,expiry,strike,kind,bid,ask\n"
        f"{underlying},{AS_OF},100.5,2026-03-20,95,put,1.10,1.20\n"
        f"{underlying},{AS_OF},100.5,2026-03-20,105,call,0.80,0.90\n"
        f"{underlying},{AS_OF},100.5,2026-04-17,100,call,3.10,\n",
        encoding="utf-8",
    )
    return p


def screen_lines(table: DataTable, n: int) -> list[str]:
    return [table.render_line(y).text for y in range(n)]


def test_app_starts_and_shows_rows(tmp_path):
    result = load_for_app([write_chain(tmp_path, "QRTZ")])
    app = ChainTriageApp(result.snapshots, findings_count=len(result.findings))

    async def scenario():
        async with app.run_test(size=(120, 20)) as pilot:
            await pilot.pause()
            table = app.query_one(DataTable)
            assert table.row_count == 3
            assert [str(c.label) for c in table.columns.values()] == list(TABLE_COLUMNS)
            lines = screen_lines(table, 4)
            assert "underlying" in lines[0] and "strike" in lines[0]
            assert "QRTZ" in lines[1] and "2026-03-20" in lines[1] and "95.00" in lines[1]
            assert "1.10" in lines[1] and "1.20" in lines[1]
            assert app.title == "chaintriage"
            assert app.sub_title == "1 snapshot, 3 contracts, 1 findings"  # the missing ask warns
            await pilot.press("q")
        assert app.return_code == 0

    asyncio.run(scenario())


def test_markup_in_file_text_is_shown_literally(tmp_path):
    result = load_for_app([write_chain(tmp_path, "[bold]VELM[/bold]")])
    app = ChainTriageApp(result.snapshots)

    async def scenario():
        async with app.run_test(size=(120, 20)) as pilot:
            await pilot.pause()
            table = app.query_one(DataTable)
            cell = table.get_row_at(0)[0]
            assert isinstance(cell, Text) and cell.plain == "[bold]VELM[/bold]"
            line = screen_lines(table, 2)[1]
            assert "[bold]VELM[/bold]" in line  # drawn as typed, not as bold "VELM"

    asyncio.run(scenario())


def test_no_demo_chains_gives_a_clear_message(monkeypatch, capsys):
    monkeypatch.setattr(app_module, "demo_files", lambda: [])
    assert open_app([]) == 2
    assert "no demo chains are bundled" in capsys.readouterr().err


def test_demo_files_skip_messy_ones(tmp_path):
    for name in ("b_chain.csv", "a_chain.CSV", "chain_messy.csv", "MESSY_two.csv", "themes.toml"):
        (tmp_path / name).write_text("x")
    assert demo_files(tmp_path) == ["a_chain.CSV", "b_chain.csv"]
    assert demo_files(tmp_path / "missing") == []
    # the installed package is searched by default (it may hold no demo files yet)
    assert all(n.lower().endswith(".csv") and "messy" not in n.lower() for n in demo_files())


def test_open_app_reports_unusable_files(tmp_path, capsys):
    empty = tmp_path / "empty.csv"
    empty.write_text("")
    assert open_app([empty]) == 2
    err = capsys.readouterr().err
    assert f"{empty}: is empty" in err and "nothing to show" in err
