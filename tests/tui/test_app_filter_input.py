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
