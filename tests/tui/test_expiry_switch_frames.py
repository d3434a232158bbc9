"""What an expiry switch draws: one frame, no layout pass when no size changes.

A second frame after a switch (Textual redrawing the ladder's scroll bar after a
layout pass) doubled the time to a settled screen; these checks count the
screen updates the app writes and the layout requests (behaviour, not timing;
the times are in tests/bench/bench_app.py --only expiry). Consistency checks [D]
on the demo chains, which are invented data used only to drive the screen.
"""

from __future__ import annotations

import asyncio

from rich.text import Text
from textual.app import App, ComposeResult
from textual.geometry import Offset
from textual.selection import Selection

from chaintriage.tui.widgets.info_bars import InfoBar

from .app_support import make_app, run


def test_every_expiry_switch_draws_one_frame():
    app = make_app()

    async def scenario(pilot):
        drawn = [0]
        display = app._display

        def counting(*args, **kwargs):
            drawn[0] += 1
            return display(*args, **kwargs)

        app._display = counting
        frames: list[int] = []
        for view_index in range(len(app.state.views)):
            expiries = app.state.view.expiries
            for key in ["]"] * (len(expiries) - 1) + ["["] * (len(expiries) - 1):
                await pilot.pause()
                await asyncio.sleep(0.05)
                drawn[0] = 0
                before = app.state.current_expiry
                await pilot.press(key)
                await pilot.pause()
                await asyncio.sleep(0.1)  # a frame that follows late counts too
                frames.append(drawn[0])
                assert app.state.current_expiry != before
            await pilot.press("}")  # the next snapshot (another underlying)
            await pilot.pause()
        assert len(frames) > 20 and set(frames) == {1}, str(frames)

    run(app, scenario)


class BarApp(App):
    def compose(self) -> ComposeResult:
        yield InfoBar(id="bar")


def _pieces(*words: str) -> list[Text]:
    return [Text(w) for w in words]


def test_a_bar_asks_for_a_layout_only_when_its_height_changes():
    async def main():
        app = BarApp()
        async with app.run_test(size=(40, 10)) as pilot:
            bar = app.query_one(InfoBar)
            bar.set_pieces(_pieces("alpha", "beta"))
            await pilot.pause()
            asked: list[bool] = []
            refresh = bar.refresh

            def recording(*args, **kwargs):
                asked.append(bool(kwargs.get("layout", False)))
                return refresh(*args, **kwargs)

            bar.refresh = recording
            bar.set_pieces(_pieces("gamma", "delta"))  # one line still
            await pilot.pause()
            assert asked == [False] and bar.plain == " gamma  delta"
            assert bar.size.height == 1
            bar.set_pieces(_pieces("x" * 20, "y" * 20))  # two lines at 40 cells
            await pilot.pause()
            assert asked[-1] is True and bar.size.height == 2
            assert bar.plain.splitlines() == [" " + "x" * 20, " " + "y" * 20]
            n = len(asked)
            bar.set_pieces(_pieces("x" * 20, "y" * 20))  # the same: nothing to draw
            assert len(asked) == n
            # The drawn lines are the packed pieces, padded to the bar's width.
            assert [bar.render_line(y).text for y in range(2)] == [" " + "x" * 20 + " " * 19,
                                                                  " " + "y" * 20 + " " * 19]

    asyncio.run(main())


def test_a_bar_keeps_textual_text_selection():
    """[L: Textual's Selection] the drawn lines carry the offsets a mouse selection starts from;
    while a selection is shown Textual draws the bar and reads the selected text itself."""
    async def main():
        app = BarApp()
        async with app.run_test(size=(40, 10)) as pilot:
            bar = app.query_one(InfoBar)
            bar.set_pieces(_pieces("alpha", "beta"))
            await pilot.pause()
            first = bar.render_line(0)
            starts = [seg.style.meta.get("offset") for seg in first if seg.text.strip()]
            assert starts and all(o is not None for o in starts)
            app.screen.selections = {bar: Selection(Offset(1, 0), Offset(6, 0))}
            await pilot.pause()
            assert bar.render_line(0).text.startswith(" alpha  beta")
            assert app.screen.get_selected_text() == "alpha"
            app.screen.selections = {}
            await pilot.pause()
            assert bar.render_line(0).text == first.text

    asyncio.run(main())
