"""Stopping on SIGTERM/SIGHUP, and clipboard tools that fail or hang.

[C] POSIX: a process ended by signal N reports status 128 + N to the shell;
SIGTERM's default action ends the process without any cleanup. [L] asyncio's
loop.add_signal_handler runs the callback on the loop, between callbacks.
"""

from __future__ import annotations

import asyncio
import os
import signal
import stat
import sys
import threading
import time

import pytest

from chaintriage.tui import clipboard, files, terminal_signals
from chaintriage.tui.clipboard import CopyOutcome, copy_in_background, run_tools


def _tool(tmp_path, name, body):
    path = tmp_path / name
    path.write_text(f"#!{sys.executable}\n{body}\n", encoding="utf-8")
    path.chmod(path.stat().st_mode | stat.S_IXUSR)
    return str(path)


@pytest.fixture(autouse=True)
def copies_allowed_after_each_test():
    """A signal stops clipboard copies for the whole process: allow them again for the tests after."""
    yield
    terminal_signals.uninstall()
    clipboard.reset()


class FakeApp:
    def __init__(self):
        self.codes = []

    def exit(self, return_code=0):
        self.codes.append(return_code)


def test_sigterm_and_sighup_ask_the_app_to_exit_and_remove_temp_files(tmp_path):
    left_behind = tmp_path / ".shortlist.csv.abc.tmp"
    left_behind.write_text("half")
    files._pending.add(str(left_behind))  # a write under way when the signal comes
    app = FakeApp()

    async def main():
        assert terminal_signals.install(app)
        try:
            for sig in (signal.SIGTERM,):
                os.kill(os.getpid(), sig)
                for _ in range(100):
                    await asyncio.sleep(0.01)
                    if app.codes:
                        break
        finally:
            terminal_signals.uninstall()
            clipboard.reset()

    asyncio.run(main())
    assert app.codes == [128 + signal.SIGTERM]
    assert not left_behind.exists()


def test_a_tool_that_fails_is_not_reported_as_copied(tmp_path):
    failing = _tool(tmp_path, "failclip", "import sys; sys.stdin.read(); sys.exit(1)")
    out = run_tools("x", [[failing], [failing]])
    assert not out.ok and out.tried == 2
    assert out.summary().startswith("no clipboard tool took it") and "exit status 1" in out.summary()


def test_stop_all_ends_a_hanging_tool_at_once(tmp_path):
    hanging = _tool(tmp_path, "hangclip", "import time; time.sleep(60)")
    results: list[CopyOutcome] = []
    thread = copy_in_background(lambda text: run_tools(text, [[hanging]], timeout=60, total=60), "x",
                                results.append)
    for _ in range(200):  # until the tool runs
        if clipboard._running:
            break
        time.sleep(0.01)
    procs = list(clipboard._running)
    assert procs and thread.daemon  # a daemon thread: it never holds the interpreter at exit
    clipboard.stop_all()
    try:
        thread.join(timeout=10)
        assert not thread.is_alive()
        assert all(p.poll() is not None for p in procs)  # the tool is gone, not left running
        assert results == []  # nothing is reported after quitting
    finally:
        clipboard.reset()


def test_a_stuck_exit_is_ended_by_the_watchdog_after_the_grace(monkeypatch):
    """The app is asked to exit; when the process is still there after the grace, it is ended by hand."""
    ended = []
    monkeypatch.setattr(terminal_signals, "_end_now", ended.append)
    app = FakeApp()
    on_signal = terminal_signals.signal_handler(app, grace=0.2)
    try:
        on_signal(signal.SIGHUP)
        assert app.codes == [128 + signal.SIGHUP] and ended == []  # asked first, not ended at once
        for _ in range(300):
            if ended:
                break
            time.sleep(0.01)
        assert ended == [signal.SIGHUP]
    finally:
        terminal_signals.uninstall()
        clipboard.reset()  # the signal stopped clipboard copies for this process


def test_no_watchdog_for_a_headless_app_and_uninstall_cancels_one(monkeypatch):
    ended = []
    monkeypatch.setattr(terminal_signals, "_end_now", ended.append)
    headless = FakeApp()
    headless.is_headless = True

    async def main():
        assert terminal_signals.install(headless)
        try:
            os.kill(os.getpid(), signal.SIGTERM)
            for _ in range(100):
                await asyncio.sleep(0.01)
                if headless.codes:
                    break
            assert not terminal_signals._watchdogs
        finally:
            terminal_signals.uninstall()

    asyncio.run(main())
    on_signal = terminal_signals.signal_handler(FakeApp(), grace=0.2)
    on_signal(signal.SIGTERM)
    terminal_signals.uninstall()
    clipboard.reset()  # the signals stopped clipboard copies for this process
    time.sleep(0.4)
    assert ended == [] and headless.codes == [128 + signal.SIGTERM]


STUCK_PROCESS = r"""
import asyncio, os, signal, sys, threading
from chaintriage.tui import terminal_signals

class StuckApp:  # its ordinary exit never finishes, and a worker thread waits for ever
    is_headless = False
    def exit(self, return_code=0):
        pass

async def main():
    assert terminal_signals.install(StuckApp())
    threading.Thread(target=threading.Event().wait).start()  # not a daemon: holds the interpreter
    print("ready", flush=True)
    await asyncio.Event().wait()

asyncio.run(main())
"""


def test_a_process_whose_exit_hangs_still_ends_on_sighup_with_129():
    """[C] status 128 + N for signal N; the process must not outlive its terminal."""
    import subprocess

    proc = subprocess.Popen([sys.executable, "-c", STUCK_PROCESS], stdout=subprocess.PIPE,
                            stderr=subprocess.DEVNULL, text=True)
    try:
        assert proc.stdout.readline().strip() == "ready"
        proc.send_signal(signal.SIGHUP)
        status = proc.wait(timeout=terminal_signals.STOP_GRACE_S + 20)
    finally:
        if proc.poll() is None:
            proc.kill()
    assert status == 128 + signal.SIGHUP
