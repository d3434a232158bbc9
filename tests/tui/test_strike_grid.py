"""StrikeGrid behaviour through Textual's pilot.

The frames below are PRESENTATION FIXTURES: invented numbers laid out with the
pipeline's column names so the widget has something to draw. They prove
nothing about the figures themselves; the checks here are about layout,
keys and messages (consistency checks [D], and facts of the trade [C] such as
"a call is in the money below the forward").
"""

from __future__ import annotations

import asyncio
import math

import numpy as np
import pandas as pd
from textual.app import App, ComposeResult

from chaintriage.tui import formatting as fm
from chaintriage.tui.widgets.strike_grid import COLUMNS, DEFAULT_COLUMNS, HEADER_LINES, StrikeGrid
from chaintriage.tui.themes import load_themes

THEME = load_themes(include_user=False).get("harbour")
EXPIRY = pd.Timestamp("2027-01-15")


def presentation_chain(strikes, forward, *, expiry=EXPIRY, underlying="QRTZ", flags="",
                       drop=()) -> pd.DataFrame:
    """PRESENTATION FIXTURE (not correctness data): both kinds at every strike,
    minus the (strike, kind) pairs in ``drop``."""
    rows = []
    for kind in ("call", "put"):
        for k in strikes:
            if (k, kind) in drop:
                continue
            z = math.log(k / forward) / 0.1
            rows.append(dict(
                underlying=underlying, expiry=expiry, strike=float(k), kind=kind,
                bid=1.20, ask=1.25, mid=1.225, iv=0.312, sigma_distance=z,
                p_beyond=0.081, p_beyond_flat=0.07, p_touch=0.159,
                delta=0.3 if kind == "call" else -0.3, breakeven=k + 1.225, p_breakeven=0.05,
                spread_pct=0.04, flags=flags, volume=12.0, open_interest=12345.0,
                otm=bool(k > forward) if kind == "call" else bool(k < forward), source_line=1,
            ))
    return pd.DataFrame(rows)


STRIKES = [90.0 + 2.5 * i for i in range(9)]  # 90 .. 110
FORWARD = 101.3


class GridApp(App):
    def __init__(self) -> None:
        super().__init__()
        self.seen: list[StrikeGrid.StrikeHighlighted] = []

    def compose(self) -> ComposeResult:
        yield StrikeGrid(theme=THEME)

    def on_strike_grid_strike_highlighted(self, message: StrikeGrid.StrikeHighlighted) -> None:
        self.seen.append(message)


def run(coro_fn, size=(130, 30)):
    async def main():
        app = GridApp()
        async with app.run_test(size=size) as pilot:
            grid = app.query_one(StrikeGrid)
            grid.focus()
            await coro_fn(app, grid, pilot)
    asyncio.run(main())


def strike_of_line(text: str) -> float | None:
    """The strike printed between the two rules of a ladder line."""
    parts = text.split("│")
    if len(parts) < 3:
        return None
    try:
        return float(parts[1].strip())
    except ValueError:
        return None


def sides(grid: StrikeGrid, y: int):
    """The call-side and put-side cell segments of ladder line ``y``."""
    segs = list(grid.render_line(y))
    rules = [i for i, seg in enumerate(segs) if seg.text == "│"]
    return segs[0], segs[rules[1] + 3]


def data_lines(grid: StrikeGrid) -> list[str]:
    return grid.render_lines_text()[HEADER_LINES:]


def test_highlight_starts_near_forward_and_moves_with_keys():
    async def body(app, grid, pilot):
        grid.set_rows(presentation_chain(STRIKES, FORWARD), FORWARD)
        await pilot.pause()
        # 102.5 is the strike nearest 101.3 [D].
        assert grid.highlighted == (102.5, "call")
        await pilot.press("down")
        assert grid.highlighted == (105.0, "call")
        await pilot.press("up", "up")
        assert grid.highlighted == (100.0, "call")
        await pilot.press("k")
        assert grid.highlighted == (97.5, "call")
        await pilot.press("j")
        assert grid.highlighted == (100.0, "call")
        await pilot.press("home")
        assert grid.highlighted == (90.0, "call")
        await pilot.press("up")  # stays on the first strike
        assert grid.highlighted == (90.0, "call")
        await pilot.press("end")
        assert grid.highlighted == (110.0, "call")
        await pilot.press("pageup")
        assert grid.highlighted[0] < 110.0
    run(body)


def test_page_keys_move_a_screenful_and_keep_highlight_visible():
    strikes = [50.0 + i for i in range(200)]
    async def body(app, grid, pilot):
        grid.set_rows(presentation_chain(strikes, 120.2), 120.2)
        await pilot.pause()
        await pilot.press("home")
        await pilot.pause()
        await pilot.press("pagedown")
        await pilot.pause()
        k = grid.highlighted[0]
        visible = data_lines(grid)
        page = grid.size.height - HEADER_LINES
        assert 50.0 + page - 3 <= k <= 50.0 + page  # a screenful, less one row of context
        assert any(strike_of_line(t) == k for t in visible)
        await pilot.press("end")
        await pilot.pause()
        assert grid.highlighted[0] == 249.0
        assert any(strike_of_line(t) == 249.0 for t in data_lines(grid))
    run(body, size=(130, 24))


def test_change_message_carries_strike_expiry_and_side():
    async def body(app, grid, pilot):
        grid.set_rows(presentation_chain(STRIKES, FORWARD), FORWARD)
        await pilot.pause()
        first = app.seen[-1]
        assert (first.strike, first.kind) == (102.5, "call")
        assert first.expiry == EXPIRY
        n = len(app.seen)
        await pilot.press("down")
        await pilot.pause()
        assert len(app.seen) == n + 1
        assert (app.seen[-1].strike, app.seen[-1].kind, app.seen[-1].expiry) == (105.0, "call", EXPIRY)
        await pilot.press("right")
        await pilot.pause()
        assert (app.seen[-1].strike, app.seen[-1].kind) == (105.0, "put")
        n = len(app.seen)
        await pilot.press("right")  # already on puts: no change, no message
        await pilot.pause()
        assert len(app.seen) == n
    run(body)


def test_left_right_select_side_and_highlight_shows_it():
    async def body(app, grid, pilot):
        grid.set_rows(presentation_chain(STRIKES, FORWARD), FORWARD)
        await pilot.pause()
        r = HEADER_LINES + next(i for i, t in enumerate(data_lines(grid)) if strike_of_line(t) == 102.5)

        def side_bg(y):
            call, put = sides(grid, y)
            return call.style.bgcolor.name, put.style.bgcolor.name

        def header_selected_word():
            for seg in grid.render_line(1):
                if seg.text.strip() in ("calls", "puts") and seg.style.bgcolor.name == THEME.color("selected"):
                    return seg.text.strip()
            return None

        assert side_bg(r)[0] == THEME.color("selected")
        assert side_bg(r)[1] == THEME.color("highlight")
        assert header_selected_word() == "calls"
        await pilot.press("right")
        await pilot.pause()
        assert grid.selected_kind == "put"
        assert side_bg(r)[0] == THEME.color("highlight")
        assert side_bg(r)[1] == THEME.color("selected")
        assert header_selected_word() == "puts"
        await pilot.press("left")
        assert grid.selected_kind == "call"
    run(body)


def test_forward_marker_sits_between_the_strikes_around_the_forward():
    async def body(app, grid, pilot):
        grid.set_rows(presentation_chain(STRIKES, FORWARD), FORWARD)
        await pilot.pause()
        lines = data_lines(grid)
        at = [i for i, t in enumerate(lines) if "fwd 101.30" in t]
        assert len(at) == 1
        i = at[0]
        # 100 < 101.3 < 102.5 [D]
        assert strike_of_line(lines[i - 1]) == 100.0
        assert strike_of_line(lines[i + 1]) == 102.5
        # Another forward: the line moves.
        grid.set_rows(presentation_chain(STRIKES, 93.0), 93.0)
        await pilot.pause()
        lines = data_lines(grid)
        i = next(i for i, t in enumerate(lines) if "fwd 93.00" in t)
        assert strike_of_line(lines[i - 1]) == 92.5 and strike_of_line(lines[i + 1]) == 95.0
        # Forward below every strike: the line comes first.
        grid.set_rows(presentation_chain(STRIKES, 80.0), 80.0)
        await pilot.pause()
        lines = data_lines(grid)
        assert "fwd 80.00" in lines[0] and strike_of_line(lines[1]) == 90.0
    run(body)


def test_moving_over_the_forward_line_skips_it():
    async def body(app, grid, pilot):
        grid.set_rows(presentation_chain(STRIKES, FORWARD), FORWARD)
        await pilot.pause()
        grid.cursor_to_strike(100.0)
        await pilot.press("down")
        assert grid.highlighted == (102.5, "call")
    run(body)


def test_in_and_out_of_the_money_take_the_theme_colours():
    async def body(app, grid, pilot):
        grid.set_rows(presentation_chain(STRIKES, FORWARD), FORWARD)
        await pilot.pause()
        grid.cursor_to_strike(110.0)  # keep the highlight off the rows we read
        await pilot.pause()
        lines = data_lines(grid)
        y95 = HEADER_LINES + next(i for i, t in enumerate(lines) if strike_of_line(t) == 95.0)
        y105 = HEADER_LINES + next(i for i, t in enumerate(lines) if strike_of_line(t) == 105.0)
        s95 = sides(grid, y95)
        s105 = sides(grid, y105)
        # Below the forward a call is in the money and a put out of it, above the reverse [C].
        assert s95[0].style.color.name == THEME.color("itm")
        assert s95[0].style.bgcolor.name == THEME.color("itm_background")
        assert s95[-1].style.color.name == THEME.color("otm_put")
        assert s105[0].style.color.name == THEME.color("otm_call")
        assert s105[-1].style.color.name == THEME.color("itm")
    run(body)


def test_markup_like_text_from_data_is_shown_literally():
    nasty = "[bold red]QR[/]TZ"
    flags = "[link=https://x]wide[/link]"
    async def body(app, grid, pilot):
        grid.set_columns(["bid", "flags"])
        grid.set_rows(presentation_chain(STRIKES, FORWARD, underlying=nasty + "\x1b[31m", flags=flags), FORWARD)
        await pilot.pause()
        text = "\n".join(grid.render_lines_text())
        assert nasty in text  # the title shows the brackets as typed
        assert "\x1b" not in text  # escape sequences are removed
        assert flags[:11] + "~" in text  # the 12-cell flags column shows the raw start, cut
        for y in range(grid.size.height):
            for seg in grid.render_line(y):
                assert not seg.style or not seg.style.link
    run(body)


def test_marked_contracts_show_a_mark_on_their_side():
    async def body(app, grid, pilot):
        grid.set_rows(presentation_chain(STRIKES, FORWARD), FORWARD)
        grid.set_marked({(95.0, "put"), (105.0, "call")})
        await pilot.pause()
        lines = data_lines(grid)
        l95 = next(t for t in lines if strike_of_line(t) == 95.0)
        l105 = next(t for t in lines if strike_of_line(t) == 105.0)
        l100 = next(t for t in lines if strike_of_line(t) == 100.0)
        assert l95.split("│")[2].startswith("●") and not l95.split("│")[0].rstrip().endswith("●")
        assert l105.split("│")[0].rstrip().endswith("●") and not l105.split("│")[2].startswith("●")
        assert "●" not in l100
    run(body)


def test_columns_can_be_chosen_and_unknown_ones_refused():
    async def body(app, grid, pilot):
        grid.set_rows(presentation_chain(STRIKES, FORWARD), FORWARD)
        await pilot.pause()
        assert grid.columns == list(DEFAULT_COLUMNS)
        grid.set_columns(["mid", "delta", "breakeven", "p_breakeven", "spread", "open_interest", "volume"])
        await pilot.pause()
        heads = grid.render_lines_text()[2]
        words = heads.replace("│", " ").split()
        for word in ("mid", "delta", "BE", "P(BE)", "spread", "OI", "volume"):
            assert words.count(word) == 2, word  # once per side
        assert "beyond" not in heads
        assert "12,345" in "\n".join(data_lines(grid))
        try:
            grid.set_columns(["bid", "rho"])
        except ValueError as exc:
            assert "rho" in str(exc)
        else:
            raise AssertionError("unknown column accepted")
    run(body, size=(170, 30))


def test_missing_side_and_nan_figures_show_placeholders_never_nan():
    frame = presentation_chain(STRIKES, FORWARD, drop={(90.0, "call")})
    frame.loc[frame["strike"] == 110.0, ["iv", "p_touch", "sigma_distance"]] = [np.nan, np.inf, -np.inf]
    async def body(app, grid, pilot):
        grid.set_rows(frame, FORWARD)
        await pilot.pause()
        grid.cursor_to_strike(100.0)
        await pilot.pause()
        lines = data_lines(grid)
        l90 = next(t for t in lines if strike_of_line(t) == 90.0)
        assert l90.split("│")[0].split() == ["·"] * len(DEFAULT_COLUMNS)
        text = "\n".join(lines).lower()
        assert "nan" not in text and "inf" not in text
    run(body)


def test_empty_rows_and_hidden_count():
    async def body(app, grid, pilot):
        grid.set_rows(presentation_chain(STRIKES, FORWARD).iloc[0:0], FORWARD, expiry=EXPIRY, hidden=9)
        await pilot.pause()
        assert grid.highlighted is None
        assert app.seen == [] or app.seen[-1].strike is None
        text = "\n".join(grid.render_lines_text())
        assert "no strikes to show" in text and "9 hidden" in text
        await pilot.press("down")  # no crash on an empty ladder
    run(body)


def test_new_expiry_keeps_the_nearest_strike_and_posts_once():
    async def body(app, grid, pilot):
        grid.set_rows(presentation_chain(STRIKES, FORWARD), FORWARD)
        await pilot.pause()
        grid.cursor_to_strike(95.0, "put")
        await pilot.pause()
        n = len(app.seen)
        later = pd.Timestamp("2027-02-19")
        grid.set_rows(presentation_chain([91.0, 96.0, 101.0], 99.0, expiry=later), 99.0)
        await pilot.pause()
        assert grid.highlighted == (96.0, "put")
        assert len(app.seen) == n + 1 and app.seen[-1].expiry == later
        contract = grid.highlighted_contract()
        assert contract["strike"] == 96.0 and contract["kind"] == "put"
    run(body)


def test_ascii_mode_draws_ascii_only():
    async def body(app, grid, pilot):
        grid.set_ascii(True)
        grid.set_rows(presentation_chain(STRIKES, FORWARD), FORWARD)
        grid.set_marked({(95.0, "put")})
        await pilot.pause()
        text = "\n".join(grid.render_lines_text())
        assert text.isascii()
        assert "s dist" in text and "*" in text
    run(body)


def test_every_column_has_a_fixed_width_that_fits_its_heading():
    for spec in COLUMNS.values():
        assert len(spec.heading) <= spec.width and len(spec.heading_ascii) <= spec.width
        assert spec.heading_ascii.isascii()


def test_wide_characters_in_data_keep_the_columns_aligned():
    async def body(app, grid, pilot):
        grid.set_columns(["flags", "bid"])
        grid.set_rows(presentation_chain(STRIKES, FORWARD, flags="宽价差宽价差宽价差"), FORWARD)
        await pilot.pause()
        from rich.cells import cell_len
        rows = [t for t in data_lines(grid) if strike_of_line(t) is not None]
        positions = {cell_len(t.split("│")[0]) for t in rows}
        assert len(positions) == 1  # the strike column starts at the same cell on every row
    run(body)


def test_clicking_a_side_highlights_that_contract():
    async def body(app, grid, pilot):
        grid.set_rows(presentation_chain(STRIKES, FORWARD), FORWARD)
        await pilot.pause()
        lines = grid.render_lines_text()
        y = next(i for i, t in enumerate(lines) if strike_of_line(t) == 97.5)
        put_x = len(lines[y].split("│")[0]) + 1 + len(lines[y].split("│")[1]) + 5
        await pilot.click(StrikeGrid, offset=(put_x, y))
        await pilot.pause()
        assert grid.highlighted == (97.5, "put")
        assert app.seen[-1].strike == 97.5 and app.seen[-1].kind == "put"
        await pilot.click(StrikeGrid, offset=(3, y + 1))
        await pilot.pause()
        assert grid.highlighted == (100.0, "call")
    run(body)


def test_known_columns_drops_unknown_names():
    from chaintriage.tui.widgets.strike_grid import known_columns
    assert known_columns(["bid", "rho", "p_touch"]) == ["bid", "p_touch"]


def test_otm_column_from_data_wins_and_missing_values_fall_back_to_the_forward():
    frame = presentation_chain(STRIKES, FORWARD)
    frame["otm"] = frame["otm"].astype(object)
    # Data says the 95 call is out of the money (say the pipeline used another forward);
    # the 105 call has no flag, so strike vs forward decides (out of the money) [C].
    frame.loc[(frame.strike == 95.0) & (frame.kind == "call"), "otm"] = True
    frame.loc[(frame.strike == 105.0) & (frame.kind == "call"), "otm"] = None
    async def body(app, grid, pilot):
        grid.set_rows(frame, FORWARD)
        await pilot.pause()
        grid.cursor_to_strike(110.0)
        await pilot.pause()
        lines = data_lines(grid)
        y95 = HEADER_LINES + next(i for i, t in enumerate(lines) if strike_of_line(t) == 95.0)
        y105 = HEADER_LINES + next(i for i, t in enumerate(lines) if strike_of_line(t) == 105.0)
        assert sides(grid, y95)[0].style.color.name == THEME.color("otm_call")
        assert sides(grid, y105)[0].style.color.name == THEME.color("otm_call")
    run(body)


def test_a_given_strike_width_keeps_the_ladder_as_wide_for_shorter_strikes():
    """[D] The strike column fits the longest strike at the fewest decimals that show them all, with
    a space each side (at least 8 cells); a caller's wider width (its widest expiry) is kept, so the
    columns stay put when the next expiry's strikes are shorter."""
    long_strikes = [995.5, 1000.0, 1004.5]  # "1004.5": 6 characters -> 8 cells
    longer_strikes = [9995.25, 10000.0]  # "10000.00": 8 characters -> 10 cells
    assert fm.strike_column_width(long_strikes) == 8
    assert fm.strike_column_width(longer_strikes) == 10
    assert fm.strike_column_width(longer_strikes + [float("nan")]) == 10
    assert fm.strike_column_width([]) == 8

    async def body(app, grid, pilot):
        grid.set_rows(presentation_chain(long_strikes, 1000.0), 1000.0)
        assert grid.strike_width == 8
        narrow = grid.virtual_size.width
        grid.set_rows(presentation_chain(longer_strikes, 10000.0), 10000.0)
        assert grid.strike_width == 10 and grid.virtual_size.width == narrow + 2
        grid.set_rows(presentation_chain(long_strikes, 1000.0), 1000.0, strike_width=10)
        await pilot.pause()
        assert grid.strike_width == 10 and grid.virtual_size.width == narrow + 2
        line = next(t for t in data_lines(grid) if strike_of_line(t) == 1004.5)
        assert len(line.split("│")[1]) == 10  # the strike centred in the wider column
    run(body)


def test_highlighted_value_reads_one_column_of_the_highlighted_contract():
    """[D] ``highlighted_value`` is the whole row's value for that column (None where the side has
    no contract, or the rows no such column)."""
    async def body(app, grid, pilot):
        frame = presentation_chain(STRIKES, FORWARD, drop=[(95.0, "put")])
        frame.loc[(frame["strike"] == 95.0) & (frame["kind"] == "call"), "p_beyond"] = 0.42
        grid.set_rows(frame, FORWARD)
        grid.cursor_to_strike(95.0, "call")
        assert grid.highlighted_value("p_beyond") == grid.highlighted_contract()["p_beyond"] == 0.42
        assert grid.highlighted_value("no_such_column") is None
        grid.cursor_to_strike(95.0, "put")
        assert grid.highlighted_contract() is None and grid.highlighted_value("p_beyond") is None
    run(body)


def test_number_columns_read_as_pandas_reads_each_column_alone():
    # [L] pandas.to_numeric(errors="coerce") column by column (what the grid read before) is the oracle
    from chaintriage.tui.widgets.strike_grid import _number_columns

    frame = pd.DataFrame({
        "a": [1.5, np.nan, -2.0],
        "b": [1, 2, 3],
        "c": pd.array([0.25, None, 4.0], dtype="Float64"),
        "d": ["1.5", "x", None],
        "e": [True, False, True],
        "f": pd.array([7, None, 9], dtype="Int64"),
    })
    got = _number_columns(frame, ["f", "a", "missing", "b", "c", "d", "e", "a"])
    assert got.fields == ["f", "a", "b", "c", "d", "e"]
    for j, name in enumerate(got.fields):
        want = pd.to_numeric(frame[name], errors="coerce").to_numpy(dtype=float, na_value=np.nan)
        np.testing.assert_array_equal(got.values[:, j], want)
