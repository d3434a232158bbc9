"""Handing text to the system clipboard tools, and saying what actually happened.

Each tool found (``strike_summary.clipboard_commands``) is tried in turn until
one takes the text and exits with status 0. A tool that cannot start, exits
non-zero, or gives no answer within ``timeout`` seconds is stopped and the next
one is tried; the whole attempt ends after ``total`` seconds at most. The result
(``CopyOutcome``) names the tool that took the text, or each tool's problem.

Tools run as child processes that ``stop_all`` kills: the app calls it when it
quits, so a hanging tool never holds up quitting or outlives the app. Copies
run in a daemon thread (``copy_in_background``), never on the UI thread.
"""

from __future__ import annotations

import os
import signal
import subprocess
import threading
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field

#: Seconds one tool may take before it is stopped, and the whole attempt at most.
TOOL_TIMEOUT = 2.0
TOTAL_TIMEOUT = 4.0

_running: set[subprocess.Popen] = set()
_lock = threading.Lock()
_stopping = threading.Event()


@dataclass
class CopyOutcome:
    """What a copy to the system clipboard did: ``tool`` that took the text (None if none did),
    ``problems`` one line per tool that failed, ``tried`` how many tools were tried."""

    tool: str | None = None
    problems: list[str] = field(default_factory=list)
    tried: int = 0

    @property
    def ok(self) -> bool:
        return self.tool is not None

    def __bool__(self) -> bool:
        return self.ok

    def summary(self) -> str:
        """One plain line for the user."""
        if self.ok:
            return f"copied with {self.tool}"
        if not self.tried:
            return "no clipboard tool found (wl-copy, xclip, xsel or pbcopy)"
        return "no clipboard tool took it: " + "; ".join(self.problems)


def as_outcome(result: object) -> CopyOutcome:
    """A CopyOutcome from what a clipboard function returned (a CopyOutcome, or True/False)."""
    if isinstance(result, CopyOutcome):
        return result
    if result:
        return CopyOutcome(tool="the clipboard tool", tried=1)
    return CopyOutcome(problems=["the clipboard tool failed"], tried=1)


def _kill(proc: subprocess.Popen) -> None:
    """Kill the tool and whatever it started (it runs in its own session, so its own process group)."""
    try:
        os.killpg(proc.pid, signal.SIGKILL)
    except (OSError, AttributeError):
        try:
            proc.kill()
        except OSError:
            pass


def _stop(proc: subprocess.Popen) -> None:
    _kill(proc)
    try:
        proc.wait(timeout=1.0)
    except (subprocess.SubprocessError, OSError):
        pass


def run_tools(text: str, commands: Sequence[Sequence[str]], *, timeout: float = TOOL_TIMEOUT,
              total: float = TOTAL_TIMEOUT) -> CopyOutcome:
    """Hand ``text`` to the first of ``commands`` (argv lists) that takes it. Never raises."""
    data = text.encode("utf-8", "replace")
    outcome = CopyOutcome()
    deadline = time.monotonic() + total
    for argv in commands:
        name = str(argv[0]) if argv else "?"
        left = deadline - time.monotonic()
        if _stopping.is_set() or left <= 0:
            outcome.problems.append(f"{name}: not tried (out of time)")
            continue
        outcome.tried += 1
        try:
            proc = subprocess.Popen(list(argv), stdin=subprocess.PIPE, stdout=subprocess.DEVNULL,
                                    stderr=subprocess.DEVNULL, start_new_session=True)
        except (OSError, ValueError) as exc:
            outcome.problems.append(f"{name}: cannot start ({getattr(exc, 'strerror', None) or exc})")
            continue
        with _lock:
            _running.add(proc)
        try:
            wait = min(timeout, left)
            try:
                proc.communicate(data, timeout=wait)
            except subprocess.TimeoutExpired:
                _stop(proc)
                outcome.problems.append(f"{name}: no answer in {wait:g} s (stopped)")
                continue
            except (OSError, ValueError) as exc:  # e.g. the tool closed its input early
                _stop(proc)
                outcome.problems.append(f"{name}: {getattr(exc, 'strerror', None) or exc}")
                continue
            if _stopping.is_set():
                outcome.problems.append(f"{name}: stopped")
                continue
            if proc.returncode == 0:
                outcome.tool = name
                return outcome
            outcome.problems.append(f"{name}: exit status {proc.returncode}")
        finally:
            with _lock:
                _running.discard(proc)
    return outcome


def copy_in_background(copy: Callable[[str], object], text: str,
                       done: Callable[[CopyOutcome], None]) -> threading.Thread:
    """Run ``copy(text)`` in a daemon thread and call ``done`` with its outcome (in that thread)."""

    def work() -> None:
        try:
            result = as_outcome(copy(text))
        except Exception as exc:  # a clipboard function must never take the app down
            result = CopyOutcome(problems=[f"the clipboard tool failed ({type(exc).__name__})"], tried=1)
        if not _stopping.is_set():
            done(result)

    thread = threading.Thread(target=work, name="clipboard", daemon=True)
    thread.start()
    return thread


def stop_all() -> None:
    """Kill every clipboard tool still running (at quit): none outlives the app or holds it up."""
    _stopping.set()
    with _lock:
        procs = list(_running)
    for proc in procs:
        _kill(proc)


def reset() -> None:
    """Allow copies again after ``stop_all`` (a new app in the same process, e.g. tests)."""
    _stopping.clear()
