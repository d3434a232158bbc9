"""The sigma filter, the liquidity limits and copying, through the pilot.

Which strikes must stay is worked out here from core's contracts table with
the rule stated in the issue (a strike stays when its call has sigma distance
>= Z or its put <= -Z, and the liquidity limits hold): a consistency check [D]
of the screen against core's figures.
"""

from __future__ import annotations

import numpy as np

from chaintriage.tui import formatting as fm
from chaintriage.tui.screens.filter_dialog import FilterDialog
from chaintriage.tui.strike_summary import summarize

from .app_support import bar, demo_annotated, make_app, notes, run, wait_copied


def expected_strikes(expiry, z=None, max_spread=None, min_oi=None) -> np.ndarray:
    c = demo_annotated()[0].contracts
    c = c[c["expiry"] == expiry]
    ok = np.ones(len(c), dtype=bool)
    if z is not None:
        call = (c["kind"] == "call").to_numpy()
        s = c["sigma_distance"].to_numpy()
        ok &= np.where(call, s >= z, s <= -z)
    if max_spread is not None:
        ok &= c["spread_pct"].to_numpy() <= max_spread
    if min_oi is not None:
        ok &= c["open_interest"].to_numpy() >= min_oi
    if max_spread is not None or min_oi is not None:  # limits are tested on the out-of-the-money side
        ok &= c["otm"].astype(bool).to_numpy()
    return np.unique(c["strike"].to_numpy()[ok])


async def type_filter(pilot, sigma="", spread="", oi=""):
    await pilot.press("f")
    dialog = pilot.app.screen
    assert isinstance(dialog, FilterDialog)
    for field, value in (("#f-sigma", sigma), ("#f-spread", spread), ("#f-oi", oi)):
        box = dialog.query_one(field)
        box.value = ""
    await pilot.press(*list(sigma))
    await pilot.press("tab", *list(spread))
    await pilot.press("tab", *list(oi), "enter")
    await pilot.pause()


def test_filter_at_one_and_two_sigma_then_clear():
    app = make_app()

    async def scenario(pilot):
        await pilot.press("]", "]", "]")  # a 30-day expiry: plenty of strikes both sides
        expiry = app.state.current_expiry
        all_strikes = app.triage.grid.strikes.copy()
        await type_filter(pilot, sigma="1")
        want1 = expected_strikes(expiry, z=1.0)
        assert 0 < len(want1) < len(all_strikes)
        assert np.array_equal(app.triage.grid.strikes, want1)
        line = bar(app, "filterbar")
        assert "1σ or more out of the money" in line
        assert f"{len(want1)} of {len(all_strikes)} strikes shown" in line
        await type_filter(pilot, sigma="2")
        want2 = expected_strikes(expiry, z=2.0)
        assert np.array_equal(app.triage.grid.strikes, want2) and len(want2) < len(want1)
        # the filter holds across expiries
        await pilot.press("]")
        assert np.array_equal(app.triage.grid.strikes, expected_strikes(app.state.current_expiry, z=2.0))
        await pilot.press("x")
        assert len(app.triage.grid.strikes) == len(np.unique(demo_annotated()[0].contracts.query(
            "expiry == @app.state.current_expiry")["strike"]))
        assert "filter off" in bar(app, "filterbar")

    run(app, scenario)


def test_liquidity_limits_with_and_without_a_sigma():
    app = make_app()

    async def scenario(pilot):
        await pilot.press("]", "]", "]")
        expiry = app.state.current_expiry
        await type_filter(pilot, spread="10", oi="500")
        want = expected_strikes(expiry, max_spread=0.10, min_oi=500)
        assert 0 < len(want) and np.array_equal(app.triage.grid.strikes, want)
        assert "spread ≤ 10%" in bar(app, "filterbar") and "OI ≥ 500" in bar(app, "filterbar")
        await type_filter(pilot, sigma="1.5", spread="10", oi="500")
        assert np.array_equal(app.triage.grid.strikes, expected_strikes(expiry, 1.5, 0.10, 500))

    run(app, scenario)


def test_a_filter_that_leaves_nothing_says_so():
    app = make_app()

    async def scenario(pilot):
        await type_filter(pilot, sigma="50")
        assert len(app.triage.grid.strikes) == 0
        assert "0 of" in bar(app, "filterbar")
        assert any("no strikes to show" in line for line in app.triage.grid.render_lines_text())
        await pilot.press("c")  # nothing highlighted: a notice, not a crash
        assert any("nothing to copy" in n for n in notes(app))

    run(app, scenario)


def test_bad_filter_input_keeps_the_dialog_open_and_escape_keeps_the_old_filter():
    app = make_app()

    async def scenario(pilot):
        await pilot.press("f")
        dialog = app.screen
        await pilot.press("a", "b", "c", "enter")
        assert app.screen is dialog
        assert "not a number" in str(dialog.query_one("#f-error").render())
        await pilot.press("escape")
        assert app.screen is app.triage
        assert not app.state.strike_filter.active

    run(app, scenario)


def test_copy_puts_the_summary_on_both_clipboards_and_shows_it():
    oracle = demo_annotated()[0]
    app = make_app()

    async def scenario(pilot):
        await pilot.press("down", "right", "c")
        assert await wait_copied(app, pilot) == ["copied to the clipboard"]
        strike, kind = app.triage.grid.highlighted
        row = oracle.contracts[(oracle.contracts["expiry"] == app.state.current_expiry)
                               & (oracle.contracts["strike"] == strike) & (oracle.contracts["kind"] == kind)]
        exp = oracle.expiries.set_index("expiry").loc[app.state.current_expiry]
        expected = summarize(row.iloc[0], as_of=oracle.snapshot.as_of, underlying="OSPX", spot=oracle.snapshot.spot,
                             forward=exp["forward"], days=exp["calendar_days"])
        assert app.clipboard == expected
        assert app._system_clipboard.texts == [expected]
        assert expected in notes(app)
        assert f" {fm.fmt_strike(strike)} put, expiry " in expected

    run(app, scenario)
