"""When the price history reaches the app: right after a snapshot is first shown (before the
background work on its other expiries), and, for a snapshot opened later with `l`, cut at that
snapshot's own day from the files read once.

The order is shown with a blocked background step (no timing); the cut is read against the
bars written into the history file here and the 16:00 New York close rule (a snapshot taken
before the close does not see that day's bar, one taken after it does) [C]; the history
figures themselves are core's (consistency [D]).
"""

from __future__ import annotations

import asyncio
import os
import threading

import pandas as pd

from chaintriage.tui import history_view, snapshot_loading

from .app_support import DEMO_DIR, bar, make_app, wait_ready


def test_history_is_on_screen_before_the_other_expiries_are_worked_out(monkeypatch):
    real = snapshot_loading.precompute_view
    entered = threading.Event()
    release = threading.Event()
    finished = []

    def blocked(view, confidence, start=0, stop=None, pause=0.0):
        if start >= 1:  # the background step after a view is shown: held until the test lets it go
            entered.set()
            release.wait(30)
        real(view, confidence, start=start, stop=stop, pause=pause)
        if start >= 1:
            finished.append(view)

    monkeypatch.setattr(snapshot_loading, "precompute_view", blocked)
    app = make_app(views=None, paths=())  # the demo chains with the demo histories

    async def main() -> None:
        async with app.run_test(size=(160, 50)) as pilot:
            try:
                loop = asyncio.get_running_loop()
                end = loop.time() + 30
                while loop.time() < end and not entered.is_set():
                    await pilot.pause(0.05)
                assert entered.is_set(), "the background step never started"
                view = app.state.view
                assert view is not None and not finished
                # the history was attached before that step began, and the expiry line shows it
                assert view.history is not None
                await pilot.pause()
                window, rv, ratio = view.history.expiry_figures(app.state.expiry_pos)
                assert window is not None and rv > 0
                assert f"RV {window}d" in bar(app, "expirybar") and "IV/RV" in bar(app, "expirybar")
                assert app.state.loads_running  # still loading: the other expiries wait
            finally:
                release.set()
            await wait_ready(app, pilot)
            assert finished and all(v.history is not None for v in app.state.views)

    asyncio.run(main())


def _later_chain(tmp_path, as_of: str) -> str:
    """The demo's OSPX chain as if taken at ``as_of`` (its expiries all lie after it)."""
    src = os.path.join(DEMO_DIR, "ospx_2026-12-01.csv")
    text = open(src, encoding="utf-8").read().replace("2026-12-01T14:30:00-05:00", as_of)
    path = tmp_path / "ospx_later.csv"
    path.write_text(text, encoding="utf-8")
    return str(path)


def _history_with_later_bars(tmp_path) -> str:
    """The demo's OSPX history (last bar 2026-11-30) and three more daily bars, 2026-12-01 .. 12-03."""
    src = os.path.join(DEMO_DIR, "history", "ospx_history.csv")
    lines = open(src, encoding="utf-8").read().splitlines()
    assert lines[-1].startswith("OSPX,2026-11-30,")
    lines += ["OSPX,2026-12-01,296.00,299.10,293.20,297.50,900000",
              "OSPX,2026-12-02,297.50,301.00,295.80,299.90,850000",
              "OSPX,2026-12-03,299.90,302.40,297.10,298.30,870000"]
    path = tmp_path / "ospx_prices.csv"
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return str(path)


def test_a_snapshot_opened_later_gets_the_bars_up_to_its_own_day(monkeypatch, tmp_path):
    reads = []
    real = history_view.read_histories

    def counted(*args, **kwargs):
        reads.append(args)
        return real(*args, **kwargs)

    monkeypatch.setattr(history_view, "read_histories", counted)
    hist = _history_with_later_bars(tmp_path)
    first = os.path.join(DEMO_DIR, "ospx_2026-12-01.csv")  # taken 14:30 New York: before the close
    later = _later_chain(tmp_path, "2026-12-03T16:30:00-05:00")  # after that day's close
    app = make_app(views=None, paths=[first], histories=[hist])

    async def main() -> None:
        async with app.run_test(size=(160, 50)) as pilot:
            await wait_ready(app, pilot)
            early = app.state.view
            assert early.history is not None
            assert early.history.history.last_date == pd.Timestamp("2026-11-30")
            # the three bars after it are said to be left out, once, as a note
            notes = [f for f in early.findings() if "after 2026-11-30 not used" in f.reason]
            assert len(notes) == 1 and notes[0].reason.startswith("3 daily bars")

            await pilot.press("l")
            app.screen.query_one("#path-input").value = later
            await pilot.press("enter")
            await pilot.pause()
            await wait_ready(app, pilot)
            await pilot.pause()
            assert len(app.state.views) == 2
            late = app.state.view
            assert late is not early and late.snapshot.as_of > early.snapshot.as_of
            assert late.history is not None
            assert late.history.history.last_date == pd.Timestamp("2026-12-03")
            assert len(late.history.history.bars) == len(early.history.history.bars) + 3
            assert not [f for f in late.findings() if "not used (the snapshot is earlier)" in f.reason]
            # the earlier snapshot keeps its own cut; the files were read once
            assert early.history.history.last_date == pd.Timestamp("2026-11-30")
            assert len(reads) == 1

    asyncio.run(main())
