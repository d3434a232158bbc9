"""Keys and screens as a trader uses them, through the pilot (Textual's App.run_test [L]).

Each test is a defect seen when the app was driven by hand: the shortlist and
findings lists move by rows (j/k, Home/End), the column picker stops at its
ends, a key goes back to the forward row, paging snapshots keeps the expiry
date, the highlighted row has a glyph, the shortlist keeps its cursor and its
filter. Expected values come from core's own tables for the demo chains [D].
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from chaintriage.tui.screens.column_picker import ColumnPicker
from chaintriage.tui.screens.findings import FindingsScreen
from chaintriage.tui.screens.shortlist import SHORTLIST_COLUMNS, ShortlistScreen
from chaintriage.tui.session import StrikeFilter

from .app_support import make_app, notes, run


async def mark_rows(pilot, count: int) -> None:
    for _ in range(count):
        await pilot.press("m", "]")


def test_j_and_k_move_the_shortlist_cursor_and_end_goes_to_the_last_row():
    app = make_app()

    async def scenario(pilot):
        await mark_rows(pilot, 4)
        assert len(app.state.shortlist) == 4
        await pilot.press("s")
        table = app.screen.query_one("#shortlist-table")
        assert table.cursor_row == 0
        await pilot.press("j", "j")
        assert table.cursor_row == 2
        await pilot.press("k")
        assert table.cursor_row == 1
        await pilot.press("end")
        assert table.cursor_row == 3
        await pilot.press("home")
        assert table.cursor_row == 0

    run(app, scenario, size=(80, 24))


def test_end_in_findings_goes_to_the_last_finding_and_the_detail_follows():
    app = make_app()

    async def scenario(pilot):
        findings = app.state.view.findings()
        assert len(findings) > 2
        await pilot.press("e")
        screen = app.screen
        assert isinstance(screen, FindingsScreen)
        table = screen.query_one("#findings-table")
        await pilot.press("end")
        await pilot.pause()
        assert table.cursor_row == table.row_count - 1
        assert table.scroll_x == 0  # not sideways into blank space
        detail = str(screen.query_one("#finding-detail").render())
        last_reason = table.row_cells(table.row_count - 1)[-1]
        assert last_reason[:30] in detail.replace("\n", " ")

    run(app, scenario, size=(80, 24))


def test_column_picker_stops_at_its_ends():
    app = make_app()

    async def scenario(pilot):
        await pilot.press("o")
        picker = app.screen
        assert isinstance(picker, ColumnPicker)
        options = picker.query_one("#column-list")
        await pilot.press("up")  # at the first option already
        assert options.highlighted == 0
        for _ in range(options.option_count + 3):
            await pilot.press("down")
        assert options.highlighted == options.option_count - 1

    run(app, scenario)


def test_g_goes_back_to_the_forward_row():
    app = make_app()

    async def scenario(pilot):
        grid = app.triage.grid
        forward = grid.forward
        nearest = float(grid.strikes[np.argmin(np.abs(grid.strikes - forward))])
        await pilot.press("up", "up", "up", "up", "up")
        assert grid.highlighted[0] != nearest
        await pilot.press("g")
        assert grid.highlighted[0] == nearest

    run(app, scenario)


def test_switching_snapshot_keeps_the_expiry_date_every_time():
    app = make_app()

    async def scenario(pilot):
        st = app.state
        for _ in range(3):
            await pilot.press("]")
        wanted = st.current_expiry
        for _ in range(4):  # there and back, twice
            await pilot.press("}")
            assert st.current_expiry == st.view.expiries[st.view.nearest_expiry_index(wanted)]
            assert st.current_expiry == wanted  # both demo chains list this date
        await pilot.press("[")  # the date changes in one snapshot ...
        wanted = st.current_expiry
        await pilot.press("}")  # ... and the other follows it
        assert st.current_expiry == wanted

    run(app, scenario)


def test_highlighted_row_has_a_glyph_on_its_selected_side():
    app = make_app()

    async def scenario(pilot):
        grid = app.triage.grid
        lines = grid.render_lines_text()
        pointed = [line for line in lines if "▸" in line or "◂" in line]
        assert len(pointed) == 1 and "▸" in pointed[0]  # one row, the call side selected first
        await pilot.press("right")
        pointed = [line for line in grid.render_lines_text() if "▸" in line or "◂" in line]
        assert len(pointed) == 1 and "◂" in pointed[0]
        await pilot.press("a")  # ASCII drawing
        pointed = [line for line in grid.render_lines_text() if "<" in line or ">" in line]
        assert len(pointed) == 1 and "<" in pointed[0]

    run(app, scenario)


def test_shortlist_keeps_its_cursor_and_shows_quotes_delta_and_days():
    app = make_app()

    async def scenario(pilot):
        await mark_rows(pilot, 3)
        await pilot.press("s")
        headings = [str(c.label) for c in app.screen.query_one("#shortlist-table").columns.values()]
        for wanted in ("bid", "ask", "delta", "P(BE)", "flags", "days"):
            assert wanted in headings
        await pilot.press("j", "j", "escape", "s")
        assert app.screen.query_one("#shortlist-table").cursor_row == 2
        entry = app.state.shortlist.entries[0]
        row = app.screen.query_one("#shortlist-table").get_row_at(0)
        days = [h for h, _ in SHORTLIST_COLUMNS].index("days")
        expected = (pd.Timestamp(entry.key.expiry).date() - pd.Timestamp(entry.key.as_of).date()).days
        assert row[days].plain == str(expected)

    run(app, scenario)


def test_shortlist_says_there_are_more_columns_to_the_right_at_80_columns():
    app = make_app()

    async def scenario(pilot):
        await mark_rows(pilot, 1)
        await pilot.press("s")
        await pilot.pause()
        await pilot.pause()
        more = app.screen.query_one("#shortlist-more")
        assert more.display and "more columns to the right" in str(more.render())

    run(app, scenario, size=(80, 24))


def test_enter_in_the_shortlist_keeps_a_filter_the_contract_passes():
    app = make_app()

    async def scenario(pilot):
        app.set_filter(StrikeFilter(sigma=1.0))
        await pilot.pause()
        grid = app.triage.grid
        await pilot.press("end", "m")  # the highest strike's call passes the filter
        kept = app.state.strike_filter
        await pilot.press("s", "enter")
        await pilot.pause()
        assert app.screen is app.triage
        assert app.state.strike_filter == kept
        assert "filter cleared to show the contract" not in notes(app)
        assert grid.highlighted[0] == app.state.shortlist.entries[0].key.strike

    run(app, scenario)


def test_enter_in_the_shortlist_clears_a_filter_that_hides_the_contract():
    app = make_app()

    async def scenario(pilot):
        await pilot.press("g", "m")  # the at-the-money call: no sigma filter keeps it
        app.set_filter(StrikeFilter(sigma=2.0))
        await pilot.pause()
        await pilot.press("s", "enter")
        await pilot.pause()
        assert not app.state.strike_filter.active
        assert "filter cleared to show the contract" in notes(app)

    run(app, scenario)


def test_header_height_is_steady_while_paging_expiries_at_80_columns():
    app = make_app()

    async def scenario(pilot):
        for _snapshot in range(2):
            tops = set()
            for _ in range(len(app.state.view.expiries)):
                await pilot.pause()
                tops.add(app.triage.grid.region.y)
                await pilot.press("]")
            assert len(tops) == 1, tops
            await pilot.press("}")

    run(app, scenario, size=(80, 24))


def test_notices_do_not_cover_the_ladder_at_80_columns():
    import asyncio

    from textual.widgets._toast import Toast

    from .app_support import wait_ready

    app = make_app()

    async def main():
        async with app.run_test(size=(80, 24), notifications=True) as pilot:  # toasts drawn
            await wait_ready(app, pilot)
            await pilot.press("c")
            await pilot.pause(0.3)
            toasts = [w for w in app.screen.walk_children(with_self=False) if isinstance(w, Toast)]
            assert toasts
            grid = app.triage.grid.region
            for toast in toasts:
                assert not toast.region.overlaps(grid), (toast.region, grid)

    asyncio.run(main())


def test_the_plot_yields_before_the_quotes_at_120_columns():
    app = make_app()

    async def scenario(pilot):
        grid = app.triage.grid
        assert {"bid", "ask", "p_touch"} <= set(grid.columns)  # every default column
        assert not app.triage.plot.display

    run(app, scenario, size=(120, 40))


def test_a_remembered_plot_keeps_the_quotes_and_odds_at_80_columns(config_home):
    from chaintriage.tui.settings import load_settings, save_preferences

    settings, _ = load_settings()
    save_preferences(settings, theme="harbour", ascii_only=False, columns=["bid", "ask", "iv", "sigma", "p_beyond",
                                                                          "p_touch"],
                     confidence=0.6827, plot="shown")
    app = make_app()

    async def scenario(pilot):
        assert app.state.plot_pref == "shown"
        grid = app.triage.grid
        assert {"bid", "sigma", "p_beyond"} <= set(grid.columns), grid.columns
        assert not app.triage.plot.display
        assert "wider terminal" in app.triage.bar("filterbar").plain

    run(app, scenario, size=(80, 24))


def test_liquidity_columns_outrank_the_breakeven_when_the_width_runs_short():
    app = make_app()

    async def scenario(pilot):
        app.set_columns(["bid", "ask", "sigma", "p_beyond", "spread", "open_interest", "flags", "breakeven",
                         "p_breakeven"])
        await pilot.pause()
        cols = app.triage.grid.columns
        assert {"spread", "open_interest"} <= set(cols), cols
        assert "p_breakeven" not in cols

    run(app, scenario, size=(120, 40))


def test_a_spread_limit_is_tested_on_the_out_of_the_money_side():
    from .app_support import demo_annotated

    app = make_app()

    async def scenario(pilot):
        st = app.state
        want = pd.Timestamp("2026-12-04")
        st.expiry_positions[st.view_index] = st.view.expiry_index(want)
        app.set_filter(StrikeFilter(max_spread=0.05))
        await pilot.pause()
        oracle = demo_annotated()[0].contracts
        exp = oracle[oracle["expiry"] == want]
        otm = exp[exp["otm"].astype(bool)]
        passing = set(otm.loc[otm["spread_pct"] <= 0.05 + 1e-12, "strike"].astype(float))
        shown = set(app.triage.grid.strikes.astype(float))
        assert shown == passing, sorted(shown ^ passing)
        # A strike whose only liquid contract is in the money is gone (e.g. far calls at zero bid).
        itm_only = set(exp.loc[~exp["otm"].astype(bool) & (exp["spread_pct"] <= 0.05), "strike"]) - passing
        assert itm_only and not (itm_only & shown)
        assert "out-of-the-money side" in app.triage.bar("filterbar").plain

    run(app, scenario, size=(200, 50))


def test_shortlist_number_headings_align_right_over_their_numbers():
    app = make_app()

    async def scenario(pilot):
        await pilot.press("m", "s")
        await pilot.pause()
        table = app.screen.query_one("#shortlist-table")
        head, row = table.render_line(0).text, table.render_line(1).text
        cells = [c.plain for c in table.get_row_at(0)]
        headings = [str(c.label) for c in table.columns.values()]
        for name in ("mid", "BE", "strike", "bid"):
            value = cells[headings.index(name)]
            end = head.index(f" {name} ") + 1 + len(name) if f" {name} " in head else head.index(name) + len(name)
            assert row[:end].endswith(value), (name, head, row)

    run(app, scenario, size=(200, 30))
