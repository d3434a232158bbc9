"""Stopping the app cleanly on SIGTERM and SIGHUP.

By default either signal ends the process at once: the terminal stays in the
alternate screen with mouse reporting on and the cursor hidden, and a file
being written can leave its hidden temp file behind. ``install`` makes both
signals ask the app to exit the ordinary way (Textual restores the terminal),
after removing the temp files of writes under way and stopping clipboard tools.
A second signal while the app is still stopping restores the terminal by hand
and ends the process at once. The ordinary exit can itself get stuck (after
SIGHUP the terminal is gone, and writing the last frame to it, or a worker
thread still waiting on the stopped screen, can block for ever, which no
second signal reaches because the event loop is blocked too): a watchdog
thread ends the process ``STOP_GRACE_S`` seconds after the first signal.
"""

from __future__ import annotations

import asyncio
import os
import signal
import sys
import threading
from typing import Any

from . import clipboard
from .files import remove_pending_temps

#: The signals handled, where the platform has them.
SIGNALS = tuple(getattr(signal, name) for name in ("SIGTERM", "SIGHUP") if hasattr(signal, name))

#: Leave the alternate screen, mouse reporting and bracketed paste; show the cursor; reset colours.
RESTORE_TERMINAL = ("\x1b[?1000l\x1b[?1002l\x1b[?1003l\x1b[?1006l\x1b[?1015l\x1b[?2004l"
                    "\x1b[?1004l\x1b[?1049l\x1b[?25h\x1b[0m")


#: Seconds the ordinary exit may take after a signal before the process is ended by hand.
STOP_GRACE_S = 3.0


def exit_status(signum: int) -> int:
    """The shell's convention for a process ended by a signal: 128 + the signal number."""
    return 128 + int(signum)


def restore_terminal(stream: Any = None) -> None:
    """Write the codes that put the terminal back (best effort, never raises)."""
    stream = stream or sys.__stderr__
    try:
        stream.write(RESTORE_TERMINAL)
        stream.flush()
    except (OSError, ValueError, AttributeError):
        pass


def _end_now(signum: int) -> None:
    """Remove temp files, put the terminal back and end the process with 128 + ``signum``."""
    remove_pending_temps()
    restore_terminal()
    os._exit(exit_status(signum))


#: Watchdogs started by a signal and not yet fired (``uninstall`` cancels them).
_watchdogs: list[threading.Timer] = []


def signal_handler(app: Any, grace: float | None = None, watchdog: bool = True):
    """The callback for SIGTERM/SIGHUP: ask ``app`` to exit; a second signal, or ``grace`` seconds
    (default ``STOP_GRACE_S``) without the process having ended, ends it by hand (the latter only
    with ``watchdog``: an app run headless inside a test process must not end that process)."""
    state = {"stopping": False}

    def on_signal(signum: int) -> None:
        remove_pending_temps()
        clipboard.stop_all()
        if state["stopping"]:  # the ordinary exit is stuck: put the terminal back and go
            _end_now(signum)
            return
        state["stopping"] = True
        if watchdog:
            timer = threading.Timer(STOP_GRACE_S if grace is None else grace, _end_now, args=(signum,))
            timer.daemon = True  # never keeps a finished process alive
            _watchdogs.append(timer)
            timer.start()
        app.exit(return_code=exit_status(signum))

    return on_signal


def install(app: Any) -> bool:
    """Handle SIGTERM and SIGHUP on the running event loop; False where that is not possible.

    Call from inside the app (e.g. on mount). The app exits with status 128 + signal.
    """
    try:
        loop = asyncio.get_running_loop()
    except RuntimeError:
        return False
    on_signal = signal_handler(app, watchdog=not getattr(app, "is_headless", False))
    installed = False
    for sig in SIGNALS:
        try:
            loop.add_signal_handler(sig, on_signal, sig)
            installed = True
        except (NotImplementedError, RuntimeError, ValueError, OSError):
            pass
    return installed


def uninstall() -> None:
    """Give the signals back their default handling (after the app has stopped); cancel watchdogs."""
    while _watchdogs:
        _watchdogs.pop().cancel()
    try:
        loop = asyncio.get_running_loop()
    except RuntimeError:
        return
    for sig in SIGNALS:
        try:
            loop.remove_signal_handler(sig)
        except (NotImplementedError, RuntimeError, ValueError, OSError):
            pass
