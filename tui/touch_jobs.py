"""Touch figures computed off the screen's thread, without Textual.

The first look at an expiry would otherwise compute its P(touch) (a local-vol
equation per expiry, ~17 ms per 1,000 strikes) on the screen's thread, and an
expiry switch would wait for it. Instead a ``SnapshotView`` whose
``touch_later`` hook is set shows a pending mark in the touch cells and asks
``TouchJobs`` for the figures; one background thread at a time computes them
(the expiry on screen first, then those asked for most recently, then the
neighbours of each asked one, fetched ahead for paging) and hands each result
to the screen's thread, which writes it and draws the expiry again.
"""

from __future__ import annotations

import threading
from collections.abc import Callable
from typing import Any

#: Expiries either side of an asked one that are computed ahead (paging with ] and [ finds them ready).
AHEAD = 1


class TouchJobs:
    """The queue of (view, expiry) whose touch figures are wanted, and the loop a worker thread runs.

    ``start_worker()`` is called (on the asking thread) when work is asked for and no worker runs:
    it must start a thread that calls ``run``. ``shown()`` gives the (view, expiry) on screen (or
    None); ``deliver(view, {expiry: ExpiryTouch})`` hands a result over (it may block until the
    screen's thread has written it; it returns False when nothing more is wanted, e.g. at exit).
    """

    def __init__(self, start_worker: Callable[[], None], shown: Callable[[], Any],
                 deliver: Callable[[Any, dict], bool]) -> None:
        self._start_worker = start_worker
        self._shown = shown
        self._deliver = deliver
        self._lock = threading.Lock()
        self._asked: list[tuple[Any, Any]] = []  # most recent first
        self._ahead: list[tuple[Any, Any]] = []  # neighbours, in the order asked
        self._running = False
        self.closed = False

    def ask(self, view: Any, expiry: Any) -> None:
        """Want ``expiry``'s touch figures of ``view`` (and, with lower priority, its neighbours')."""
        if self.closed:
            return
        key = (view, expiry)
        ahead = []
        try:
            pos = view.expiries.index(expiry)
            ahead = [(view, view.expiries[p]) for p in range(pos - AHEAD, pos + AHEAD + 1)
                     if p != pos and 0 <= p < len(view.expiries)]
        except (AttributeError, ValueError):
            pass
        with self._lock:
            self._asked = [key] + [k for k in self._asked if not _same(k, key)]
            self._ahead += [k for k in ahead if not any(_same(k, o) for o in self._ahead + self._asked)]
            start = not self._running
            self._running = True
        if start:
            try:
                self._start_worker()
            except Exception:  # noqa: BLE001 - no worker (the app is closing): nothing is computed
                with self._lock:
                    self._running = False

    def pending(self) -> int:
        """How many (view, expiry) are waiting."""
        with self._lock:
            return len(self._asked) + len(self._ahead)

    def _next(self) -> tuple[Any, Any] | None:
        shown = None
        try:
            shown = self._shown()
        except Exception:  # noqa: BLE001 - read from another thread while it changes: take the queue's order
            shown = None
        with self._lock:
            for queue in (self._asked, self._ahead):
                for i, k in enumerate(queue):
                    if shown is not None and _same(k, shown):
                        return queue.pop(i)
            for queue in (self._asked, self._ahead):
                if queue:
                    return queue.pop(0)
            self._running = False
            return None

    def run(self) -> None:
        """The worker thread's loop: compute and hand over until nothing is wanted. A computation that
        fails is handed over as None (the screen's thread then computes that expiry itself, as it did
        before, and says what is wrong)."""
        while not self.closed:
            job = self._next()
            if job is None:
                return
            view, expiry = job
            annotated = view.annotated
            if not annotated.needs_touch(expiry):
                done = annotated.touched.get(expiry)
                if done is not None and not self._deliver(view, {expiry: done}):  # computed elsewhere meanwhile
                    self.close()
                continue
            try:
                got = annotated.compute_touch(expiry)
            except Exception:  # noqa: BLE001 - see above
                got = None
            if not self._deliver(view, {expiry: got}):
                self.close()
        with self._lock:
            self._running = False

    def close(self) -> None:
        """Stop: the loop ends after the expiry it is computing; nothing more is asked."""
        self.closed = True
        with self._lock:
            self._asked.clear()
            self._ahead.clear()


def _same(a: tuple[Any, Any], b: tuple[Any, Any]) -> bool:
    return a[0] is b[0] and a[1] == b[1]
