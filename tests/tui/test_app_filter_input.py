"""What the filter dialog accepts, through the pilot.

[C] A decimal comma ("1,5") means 1.5 in much of the world and a thousands
separator elsewhere: the dialog refuses it rather than guess (15 sigmas would
silently hide almost every strike). Only plain decimals within bounds are taken.
"""

from __future__ import annotations

import pytest

from chaintriage.tui.screens.filter_dialog import FilterDialog

from .app_support import bar, make_app, run


async def _type_sigma(pilot, text: str):
    await pilot.press("f")
    dialog = pilot.app.screen
    assert isinstance(dialog, FilterDialog)
    dialog.query_one("#f-sigma").value = ""
    await pilot.press(*list(text), "enter")
    await pilot.pause()
    return dialog


@pytest.mark.parametrize("typed, said", [
    ("1,5", "comma"), ("1_5", "not a number"), ("-0", "zero or more"), ("1e308", "not a number"),
    ("100000", "at most"), ("inf", "not a number"), ("0x10", "not a number"),
])
def test_unusable_sigma_text_keeps_the_dialog_open_with_the_reason(typed, said):
    app = make_app()

    async def scenario(pilot):
        dialog = await _type_sigma(pilot, typed)
        assert app.screen is dialog
        assert said in str(dialog.query_one("#f-error").render())
        await pilot.press("escape")
        assert not app.state.strike_filter.active

    run(app, scenario)


def test_a_plain_decimal_is_taken_and_shown_without_a_minus_zero():
    app = make_app()

    async def scenario(pilot):
        await _type_sigma(pilot, "1.5")
        assert app.screen is app.triage and app.state.strike_filter.sigma == 1.5
        assert "1.5" in bar(app, "filterbar")
        await _type_sigma(pilot, "0")
        assert app.state.strike_filter.sigma == 0 and "-0" not in bar(app, "filterbar")

    run(app, scenario)


async def _fill(pilot, **values: str):
    """Open the dialog, set the named fields (ids without "f-"), press Enter in the first one."""
    await pilot.press("f")
    dialog = pilot.app.screen
    assert isinstance(dialog, FilterDialog)
    for name, text in values.items():
        dialog.query_one(f"#f-{name}").value = text
    dialog.query_one("#f-sigma").focus()
    await pilot.press("enter")
    await pilot.pause()
    return dialog


@pytest.mark.parametrize("fields, said", [
    ({"delta": "0,1-0,3"}, "comma"), ({"delta": "0.3-0.1"}, "low end is above"), ({"delta": "1.5"}, "at most"),
    ({"beyond": "5-150"}, "at most"), ({"beyond": "-"}, "LOW-HIGH"), ({"beyond": "1,5"}, "comma"),
    ({"side": "straddles"}, "not calls, puts or both"), ({"delta": "0.1-0.2-0.3"}, "not a number"),
])
def test_unusable_range_or_side_keeps_the_dialog_open(fields, said):
    app = make_app()

    async def scenario(pilot):
        dialog = await _fill(pilot, **fields)
        assert app.screen is dialog
        assert said in str(dialog.query_one("#f-error").render())
        await pilot.press("escape")
        assert not app.state.strike_filter.active

    run(app, scenario)


def test_ranges_side_and_limits_combine_and_reopen_as_typed():
    """[D] What the dialog makes is StrikeFilter.parse of the typed text (ranges inclusive; P(beyond)
    in percent); the ladder then shows exactly the strikes that filter keeps; reopening shows the
    values again in the same form."""
    from chaintriage.tui.session import StrikeFilter

    app = make_app()

    async def scenario(pilot):
        await _fill(pilot, sigma="0.5", delta="0.05-0.30", beyond="2-", side="p", spread="25", oi="1,000")
        flt = app.state.strike_filter
        assert flt == StrikeFilter(sigma=0.5, delta=(0.05, 0.30), beyond=(0.02, None), side="puts",
                                   max_spread=0.25, min_open_interest=1000.0)
        view = app.state.view
        kept, _ = flt.apply(view.frame(app.state.current_expiry))
        assert list(app.triage.grid.strikes) == sorted(set(kept["strike"]))
        assert "puts only" in bar(app, "filterbar") and "P(beyond)" in bar(app, "filterbar")
        await pilot.press("f")
        dialog = app.screen
        shown = {n: dialog.query_one(f"#f-{n}").value for n in ("sigma", "delta", "beyond", "side", "spread", "oi")}
        assert shown == {"sigma": "0.5", "delta": "0.05-0.3", "beyond": "2-", "side": "puts", "spread": "25",
                         "oi": "1000"}
        await pilot.press("enter")  # applying the shown values again gives the same filter
        await pilot.pause()
        assert app.state.strike_filter == flt
        await _fill(pilot, sigma="", delta="", beyond="-10", side="", spread="", oi="")
        assert app.state.strike_filter == StrikeFilter(beyond=(None, 0.10))

    run(app, scenario)


def test_side_words_and_range_text():
    from chaintriage.tui.screens.filter_dialog import range_text, side_word

    assert [side_word(t) for t in ("", "b", "Calls", " p ", "put", "x")] == ["both", "both", "calls", "puts",
                                                                           "puts", "x"]
    assert range_text(None) == "" and range_text((0.1, None)) == "0.1-" and range_text((None, 0.3)) == "-0.3"
    assert range_text((0.05, 0.2), 100.0) == "5-20"
