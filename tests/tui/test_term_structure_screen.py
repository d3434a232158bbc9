"""The vols-by-expiry screen (y): the chart, the event lines and going to an expiry.

The numbers are core's (tested in tests/core/test_term_structure.py against a surface
built with a known event variance); here the screen must show them and move the ladder.
"""

from __future__ import annotations

import asyncio
import datetime as dt

import numpy as np
import pandas as pd

from chaintriage.core.events import AFTER_CLOSE, Event
from chaintriage.core.term_structure import snapshot_term_structure
from chaintriage.tui.app import ChainTriageApp
from chaintriage.tui.widgets.term_chart import term_chart

from .app_support import Clipboard, demo_views, wait_ready


def test_chart_places_series_and_events():
    rows = term_chart([0.25, 1.0], {"atm": [0.2, 0.3]}, [0.25], 40, 10, ascii_only=True)
    text = [r.plain for r in rows]
    assert len(text) == 10 and all(len(t) <= 40 for t in text)
    plot = text[:8]
    # The higher vol is on the top row, at the right edge (time 1.0 = the last column).
    assert plot[0].rstrip().endswith("o") and "o" in plot[-1]
    assert "A" in text[-1]  # the event's letter under the axis
    assert ":" in plot[3]  # its dotted column
    assert term_chart([0.1], {"atm": [np.nan]}, [], 40, 10)[0].plain == "no vols to draw"


def test_the_screen_shows_events_and_opens_the_chosen_expiry():
    views = demo_views()
    ospx = next(i for i, v in enumerate(views) if v.snapshot.underlying == "OSPX")
    event = Event("OSPX", dt.date(2027, 1, 12), AFTER_CLOSE, "quarterly results")
    app = ChainTriageApp(views=views, system_clipboard=Clipboard(), events=[event])
    ts = snapshot_term_structure(views[ospx].annotated, [event])

    async def main() -> None:
        async with app.run_test(size=(120, 40)) as pilot:
            await wait_ready(app, pilot)
            while app.state.view.snapshot.underlying != "OSPX":
                await pilot.press("}")
            await pilot.press("y")
            await pilot.pause()
            text = "\n".join(str(app.screen.query_one(f"#{name}").content)
                             for name in ("term-chart", "term-legend", "term-events", "term-caution"))
            text += str(app.screen.query_one(".title").content)
            assert "vols by expiry" in text and "quarterly results" in text
            assert f"{100 * ts.events[0].move:.1f}%" in text
            assert "not a prediction" in text
            await pilot.press("home")
            for _ in range(5):
                await pilot.press("j")
            await pilot.press("enter")
            await pilot.pause()
            assert app.screen is app.triage
            assert app.state.current_expiry == pd.Timestamp(ts.table["expiry"].iloc[5])

    asyncio.run(main())


def test_the_expiry_line_marks_expiries_that_carry_an_event():
    views = demo_views()
    event = Event("OSPX", dt.date(2027, 1, 12), AFTER_CLOSE, "quarterly results")
    app = ChainTriageApp(views=views, system_clipboard=Clipboard(), events=[event])
    ospx = next(v for v in views if v.snapshot.underlying == "OSPX")
    table = snapshot_term_structure(ospx.annotated, [event]).table.set_index("expiry")

    async def main() -> None:
        async with app.run_test(size=(200, 50)) as pilot:
            await wait_ready(app, pilot)
            while app.state.view.snapshot.underlying != "OSPX":
                await pilot.press("}")
            await pilot.pause()
            before = app.triage.bar("expirybar").plain
            assert "carries" not in before and "ex-event" not in before  # the first expiry is before the event
            while app.state.current_expiry != pd.Timestamp("2027-01-15"):
                await pilot.press("]")
            await pilot.pause()
            line = app.triage.bar("expirybar").plain
            assert "carries quarterly results" in line
            ex = table.loc[pd.Timestamp("2027-01-15"), "ex_event_vol"]
            assert f"ex-event {100 * ex:.1f}%" in line

    asyncio.run(main())
