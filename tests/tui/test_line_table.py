"""LineTable: text rows under a heading, a row cursor, fixed first columns when scrolled sideways.

The rows are PRESENTATION FIXTURES; the checks are the widget's stated rules [D].
"""

from __future__ import annotations

import asyncio

from textual.app import App, ComposeResult

from chaintriage.tui.widgets.line_table import GAP, LineTable

HEADINGS = ["name", "a", "b", "c", "d", "e", "f"]
RIGHT = [False, True, True, True, True, True, True]


def rows(n: int) -> list[tuple[str, ...]]:
    return [(f"row{i}", *[f"{i}{c}" * 4 for c in "abcdef"]) for i in range(n)]


class TableApp(App):
    def __init__(self) -> None:
        super().__init__()
        self.chosen: list[int] = []

    def compose(self) -> ComposeResult:
        yield LineTable(id="t", fixed=1)

    def on_line_table_chosen(self, event: LineTable.Chosen) -> None:
        self.chosen.append(event.row)


def drive(scenario, size=(40, 10)) -> None:
    async def main() -> None:
        app = TableApp()
        async with app.run_test(size=size) as pilot:
            table = app.query_one(LineTable)
            table.set_columns(HEADINGS, RIGHT)
            table.set_rows(rows(30))
            table.focus()
            await pilot.pause()
            await scenario(app, table, pilot)

    asyncio.run(main())


def test_text_alignment_and_widths():
    async def scenario(app, table, pilot) -> None:
        lines = table.lines_text()
        assert len(lines) == 31
        head, first = lines[0], lines[1]
        assert head.startswith(" name ") and first.startswith(" row0 ")
        # right-aligned number columns: the heading sits at the column's right edge, over the cells' ends
        assert head.index(" a ") + 1 == first.index("0a0a0a0a") + len("0a0a0a0a") - 1
        widths = [max(len(h), *(len(r[i]) for r in rows(30))) for i, h in enumerate(HEADINGS)]
        assert len(first) == sum(w + GAP for w in widths)
        table.set_row(0, ("changed", "1", "2", "3", "4", "5", "6"))
        assert table.lines_text()[1].startswith(" chang ")  # wider than its column: cut to it
        assert len(table.lines_text()[1]) == len(first)

    drive(scenario)


def test_cursor_keys_and_enter():
    async def scenario(app, table, pilot) -> None:
        await pilot.press("j", "j", "down")
        assert table.cursor_row == 3
        await pilot.press("k")
        assert table.cursor_row == 2
        await pilot.press("end")
        assert table.cursor_row == 29
        assert table.scroll_offset.y > 0  # scrolled to keep it in view
        await pilot.press("pageup")
        assert table.cursor_row < 29
        await pilot.press("home", "enter")
        assert table.cursor_row == 0 and app.chosen == [0]
        table.set_rows(rows(5))  # fewer rows: the cursor is held within them
        table.move_cursor(99)
        assert table.cursor_row == 4

    drive(scenario)


def test_sideways_by_whole_columns_with_the_first_fixed():
    async def scenario(app, table, pilot) -> None:
        assert table.more_to_the_right
        visible = [table.render_line(y).text for y in range(2)]
        assert visible[0].startswith(" name ") and " a " in visible[0]
        await pilot.press("ctrl+pagedown")
        moved = [table.render_line(y).text for y in range(2)]
        assert moved[0].startswith(" name ") and moved[1].startswith(" row0 ")  # the fixed column stays
        assert " a " not in moved[0]
        # a whole column comes first after the fixed one: its cell is not cut on the left
        after_fixed = moved[1][len(" row0 ") + 1:]
        assert after_fixed.lstrip()[:1].isdigit() and after_fixed.lstrip().split()[0] in rows(1)[0]
        for _ in range(5):
            await pilot.press("ctrl+pagedown")
        assert not table.more_to_the_right and "5f5f" not in table.render_line(1).text
        assert "0f0f0f0f" in table.render_line(1).text
        for _ in range(5):
            await pilot.press("ctrl+pageup")
        assert table.scroll_offset.x == 0

    drive(scenario)


def test_a_row_source_makes_the_rows_on_screen_first_and_the_rest_after(monkeypatch):
    """100,000 rows from a function: before the first frame only the rows on screen (and at most one
    batch) are made; every row soon after, between turns of the event loop; the columns widen to
    the widest cell made, however far down it is [D]."""
    from chaintriage.tui.widgets import line_table

    monkeypatch.setattr(line_table, "FILL_BATCH", 5000)
    n = 100_000
    made: list[int] = []
    at_first_frame: list[int] = []

    def row_at(i: int) -> tuple[str, ...]:
        made.append(i)
        wide = "x" * 30 if i == n - 1 else ""
        return (f"row{i}", str(i), wide, "", "", "", "")

    async def scenario(app, table, pilot) -> None:
        table.set_row_source(n, row_at)
        table.call_after_refresh(lambda: at_first_frame.append(len(made)))
        await pilot.pause()
        assert table.row_count == n
        assert at_first_frame and at_first_frame[0] <= table.size.height + line_table.FILL_BATCH < n
        assert table.render_line(1).text.startswith(" row0 ")
        for _ in range(200):
            if len(made) == n:
                break
            await pilot.pause()
        assert sorted(made) == list(range(n))  # every row made, once
        assert table.row_cells(n - 1)[2] == "x" * 30
        await pilot.press("end")
        assert table.cursor_row == n - 1
        shown = [table.render_line(y).text for y in range(table.scrollable_content_region.height)]
        assert any(f" row{n - 1} " in line for line in shown)
        assert "x" * 30 in table.lines_text()[-1]

    drive(scenario)
