"""Python's cycle collector around bulk imports: paused while they run, their objects frozen after.

Importing numpy, pandas and core makes hundreds of thousands of objects and almost no cyclic
garbage; the collector's passes over that growing heap cost 50-90 ms of a start.
"""

from __future__ import annotations

import contextlib
import gc


@contextlib.contextmanager
def collector_paused():
    """No automatic cycle collection inside (gc.disable); the collector's state before is restored after."""
    was = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was:
            gc.enable()
