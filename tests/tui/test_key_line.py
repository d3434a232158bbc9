"""The key line at the bottom of the triage screen (widgets/key_line.py): one widget, drawn from the
screen's bindings; a click on a key presses it. [D] read against the screen's own BINDINGS."""

from __future__ import annotations

import asyncio

from chaintriage.tui.screens.help import HelpScreen
from chaintriage.tui.screens.triage import TriageScreen
from chaintriage.tui.widgets.key_line import KeyLine

from .app_support import make_app


def test_the_key_line_shows_each_shown_binding_once_in_order_and_is_one_widget():
    app = make_app()

    async def main():
        async with app.run_test(size=(160, 30)) as pilot:
            await pilot.pause()
            line = app.triage.query_one(KeyLine)
            assert not line.children  # one widget, not one per key
            text = str(line.render())
            shown, actions = [], set()
            for b in TriageScreen.BINDINGS:
                if b.show and b.action not in actions:
                    actions.add(b.action)
                    shown.append(f" {b.key_display or b.key} {b.description} ")
            pos = [text.index(s) for s in shown]
            assert pos == sorted(pos) and pos[0] == 0
            hidden = [b.description for b in TriageScreen.BINDINGS if not b.show]
            assert hidden and not any(f" {d} " in text for d in hidden)
            # the line drawn on the screen is the widget's text
            assert app.screen._compositor.render_strips()[-1].text.rstrip() == text.rstrip()

    asyncio.run(main())


def test_a_click_on_a_key_presses_it():
    app = make_app()

    async def main():
        async with app.run_test(size=(160, 30)) as pilot:
            await pilot.pause()
            line = app.triage.query_one(KeyLine)
            text = str(line.render())
            await pilot.click(KeyLine, offset=(text.index("help") - 1, 0))  # on the "?" key's cell
            await pilot.pause()
            assert isinstance(app.screen, HelpScreen)

    asyncio.run(main())
