"""P(touch) off the screen's thread (tui/touch_jobs.py): an expiry opened for the first time shows a
pending mark in its touch cells, never computes them on the screen's thread, and then shows the
figures core computes for that expiry [D] consistency with ``annotate(...).fill_touch()``."""

from __future__ import annotations

import asyncio
import threading

import numpy as np
import pandas as pd

from chaintriage.core.pipeline import AnnotatedSnapshot, PipelineSettings, annotate
from chaintriage.tui import formatting as fm
from chaintriage.tui.ladder_columns import TOUCH_FIELDS, TOUCH_PENDING
from chaintriage.tui.touch_jobs import TouchJobs

from .app_support import demo_load, demo_paths, make_app, wait_ready


def test_touch_jobs_compute_the_shown_expiry_first_then_the_asked_then_neighbours():
    computed = []

    class FakeAnnotated:
        def needs_touch(self, e):
            return True

        def compute_touch(self, e):
            computed.append(e)
            return object()

    class FakeView:
        annotated = FakeAnnotated()
        expiries = list(range(10))

    view = FakeView()
    shown = [None]
    jobs = TouchJobs(lambda: None, lambda: shown[0], lambda v, got: True)  # no thread: run() by hand
    jobs.ask(view, 2)
    jobs.ask(view, 7)
    shown[0] = (view, 2)
    jobs.run()
    # 2 is shown; 7 was asked most recently; then the neighbours of 2 and of 7, in the order asked
    assert computed == [2, 7, 1, 3, 6, 8]
    assert jobs.pending() == 0


def test_a_failed_computation_is_handed_over_as_none():
    got = []

    class Broken:
        def needs_touch(self, e):
            return True

        def compute_touch(self, e):
            raise FloatingPointError("boom")

    class View:
        annotated = Broken()
        expiries = [0]

    jobs = TouchJobs(lambda: None, lambda: None, lambda v, c: got.append(c) or True)
    jobs.ask(View(), 0)
    jobs.run()
    assert got == [{0: None}]


def test_a_pending_frame_shows_the_mark_then_the_figures():
    from chaintriage.tui.session import SnapshotView

    snap = demo_load().snapshots[0]
    view = SnapshotView(annotate(snap, PipelineSettings()))
    asked = []
    view.touch_later = lambda v, e: asked.append(e)
    e = view.expiries[1]
    frame = view.frame(e)
    assert asked == [e] and frame.attrs[TOUCH_PENDING] == TOUCH_FIELDS
    assert frame["p_touch"].isna().all()
    view.touch_arrived({e: view.annotated.compute_touch(e)})
    done = view.frame(e)
    assert TOUCH_PENDING not in done.attrs and done["p_touch"].notna().any()
    oracle = annotate(snap, PipelineSettings()).fill_touch().contracts
    np.testing.assert_array_equal(done["p_touch"].to_numpy(), oracle[oracle["expiry"] == e]["p_touch"].to_numpy())


def test_a_pending_frame_is_made_again_when_another_screen_computed_the_figures():
    from chaintriage.tui.session import SnapshotView

    view = SnapshotView(annotate(demo_load().snapshots[0], PipelineSettings()))
    view.touch_later = lambda v, e: None
    e = view.expiries[2]
    assert TOUCH_PENDING in view.frame(e).attrs
    view.annotated.touch(e)  # e.g. the target view computes it on its own
    again = view.frame(e)
    assert TOUCH_PENDING not in again.attrs and again["p_touch"].notna().any()


def test_expiry_switches_never_compute_touch_on_the_screens_thread(monkeypatch):
    """The app loading the demo files: switching through every expiry of the first snapshot shows
    pending marks or figures, computed in other threads; in the end every expiry's touch cells read
    as core computes them."""
    where: list[str] = []
    real = AnnotatedSnapshot.compute_touch

    def recording(self, expiry):
        where.append(threading.current_thread().name)
        return real(self, expiry)

    monkeypatch.setattr(AnnotatedSnapshot, "compute_touch", recording)
    app = make_app(paths=demo_paths())
    seen_pending = []

    async def main():
        async with app.run_test(size=(160, 50)) as pilot:
            await wait_ready(app, pilot)
            main_thread = threading.current_thread().name
            where.clear()
            view = app.state.view
            for _ in range(len(view.expiries) - 1):
                app.action_next_expiry()
                seen_pending.append(app.triage.grid._pending == frozenset(TOUCH_FIELDS))
                await pilot.pause()
            for _ in range(200):
                if app.touch_jobs.pending() == 0 and not any(view.touch_pending(e) for e in view.expiries):
                    break
                await asyncio.sleep(0.02)
            await pilot.pause()
            assert main_thread not in where
            assert app.triage.grid._pending == frozenset()
            lines = app.triage.grid.render_lines_text()
            assert not any(fm.PENDING in line for line in lines)
            oracle = annotate(view.snapshot, PipelineSettings()).fill_touch().contracts
            for e in view.expiries:
                got = view.frame(e)
                want = oracle[oracle["expiry"] == e]
                np.testing.assert_array_equal(got["p_touch"].to_numpy(), want["p_touch"].to_numpy())

    asyncio.run(main())
    assert any(seen_pending)  # at least one switch did not wait for its figures
