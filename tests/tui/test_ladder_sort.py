"""Sorting the ladder by a column (z) and back to strike order.

The order is checked against pandas' own stable sort of the expiry's contracts
[C: DataFrame.sort_values(kind="stable", na_position="last")]: missing values
last in either direction, equal values in strike order. Keys through the pilot.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from chaintriage.tui.ladder_columns import COLUMNS
from chaintriage.tui.screens.sort_chooser import SortChooser

from .app_support import make_app, run


def shown_strikes(grid) -> list[float]:
    """Strikes in the order the ladder shows them (the forward line skipped)."""
    out = []
    for r in range(grid._display_count()):
        i = grid._strike_index(r)
        if i is not None:
            out.append(float(grid.strikes[i]))
    return out


def expected(frame: pd.DataFrame, key: str, kind: str, descending: bool) -> list[float]:
    """The strikes of ``frame`` ordered by ``key``'s field on the ``kind`` side (oracle: pandas)."""
    field = COLUMNS[key].field
    strikes = pd.DataFrame({"strike": np.unique(frame["strike"].to_numpy(dtype=float))})
    side = frame[frame["kind"] == kind][["strike", field]]
    table = strikes.merge(side, on="strike", how="left").sort_values("strike")
    if COLUMNS[key].text:
        table[field] = table[field].fillna("").astype(str).str.lower().replace("", np.nan)
    table = table.sort_values(field, ascending=not descending, kind="stable", na_position="last")
    return table["strike"].tolist()


async def choose(pilot, column: str | None, descending: bool = False) -> None:
    """z, then the column (None: strike order), then the direction."""
    app = pilot.app
    await pilot.press("z")
    await pilot.pause()
    chooser = app.screen
    assert isinstance(chooser, SortChooser)
    ids = ["strike", *chooser._columns]
    await pilot.press("home", *["down"] * ids.index(column or "strike"), "enter")
    await pilot.pause()
    if column is not None:
        await pilot.press("home", *(["down"] if descending else []), "enter")
        await pilot.pause()
    assert app.screen is app.triage


@pytest.mark.parametrize("key, side, descending", [
    ("bid", "put", True), ("p_beyond", "call", False), ("iv", "put", False), ("p_touch", "call", True),
    ("sigma", "put", True), ("flags", "call", False),
])
def test_sorted_order_matches_pandas_and_back_to_strike_order(key, side, descending):
    app = make_app()
    app.state.columns = ["bid", "ask", "iv", "sigma", "p_beyond", "p_touch", "flags"]

    async def scenario(pilot) -> None:
        app.triage.update_layout()
        await pilot.press("]", "]", "]", "left" if side == "call" else "right")
        await pilot.pause()
        grid = app.triage.grid
        if key not in grid.columns:
            pytest.skip(f"{key} not drawn at this width")
        await choose(pilot, key, descending)
        assert grid.sort == (key, side, descending)
        frame = app.state.view.frame(app.state.current_expiry)
        assert shown_strikes(grid) == expected(frame, key, side, descending)
        assert grid.forward_line_index() is None  # no forward line between unordered strikes
        words = "Z to A" if descending else "A to Z"
        if not COLUMNS[key].text:
            words = "high to low" if descending else "low to high"
        assert words in grid.render_lines_text()[0]
        # The sort stays on another expiry, read from that expiry's figures.
        await pilot.press("]")
        await pilot.pause()
        frame = app.state.view.frame(app.state.current_expiry)
        assert shown_strikes(grid) == expected(frame, key, side, descending)
        await choose(pilot, None)
        assert grid.sort is None
        assert shown_strikes(grid) == sorted(shown_strikes(grid))
        assert grid.forward_line_index() is not None

    run(app, scenario)


def test_keys_move_in_the_shown_order_and_g_finds_the_forward():
    app = make_app()

    async def scenario(pilot) -> None:
        await pilot.press("]", "]", "]", "right")
        grid = app.triage.grid
        await choose(pilot, "p_beyond", descending=True)
        order = shown_strikes(grid)
        await pilot.press("home")
        assert grid.highlighted == (order[0], "put")
        await pilot.press("j", "j")
        assert grid.highlighted == (order[2], "put")
        await pilot.press("k")
        assert grid.highlighted == (order[1], "put")
        await pilot.press("end")
        assert grid.highlighted == (order[-1], "put")
        await pilot.press("g")
        nearest = float(grid.strikes[np.argmin(np.abs(grid.strikes - grid.forward))])
        assert grid.highlighted == (nearest, "put")
        await pilot.press("z", "escape")  # Esc leaves the sort as it was
        await pilot.pause()
        assert grid.sort == ("p_beyond", "put", True)

    run(app, scenario)


def test_the_sort_text_round_trips_and_refuses_what_is_not_a_sort():
    # [D] the settings file's form of a sort: column key, side, order
    from chaintriage.tui.ladder_columns import parse_sort_text, sort_text

    for sort in [("p_beyond", "put", True), ("bid", "call", False), ("flags", "put", False), None]:
        assert parse_sort_text(sort_text(sort)) == sort
    assert sort_text(("iv", "call", True)) == "iv call descending"
    assert parse_sort_text("  ") is None
    for bad in ["nonsense put descending", "bid both ascending", "bid put sideways", "bid put", 3,
                "bid put descending extra"]:
        with pytest.raises(ValueError):
            parse_sort_text(bad)


def test_the_sort_is_kept_in_the_settings_for_the_next_start(config_home):
    from chaintriage.tui.settings import load_settings

    app = make_app()

    async def sort_then_back(pilot) -> None:
        await pilot.press("]", "right")
        await pilot.pause()
        await choose(pilot, "p_beyond", descending=True)
        assert app.triage.grid.sort == ("p_beyond", "put", True)

    run(app, sort_then_back)
    settings, notices = load_settings()
    assert notices == [] and settings.extra["ladder_sort"] == "p_beyond put descending"

    again = make_app()

    async def restarted(pilot) -> None:
        grid = again.triage.grid
        assert grid.sort == ("p_beyond", "put", True)
        frame = again.state.view.frame(again.state.current_expiry)
        assert shown_strikes(grid) == expected(frame, "p_beyond", "put", True)  # oracle: pandas' stable sort
        await choose(pilot, None)  # back to strike order: kept too
        assert grid.sort is None

    run(again, restarted)
    assert load_settings()[0].extra["ladder_sort"] == ""
    assert make_app().state.ladder_sort is None


def test_an_unreadable_saved_sort_gives_strike_order_and_a_notice(config_home):
    (config_home / "chaintriage").mkdir(exist_ok=True)
    (config_home / "chaintriage" / "settings.toml").write_text('ladder_sort = "strike sideways"\n')
    app = make_app()
    assert app.state.ladder_sort is None
    assert any("ladder_sort" in n for n in app._startup_notices)

    async def scenario(pilot) -> None:
        assert app.triage.grid.sort is None

    run(app, scenario)
