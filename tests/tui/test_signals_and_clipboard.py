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

from chaintriage.tui import clipboard, files, terminal_signals
from chaintriage.tui.clipboard import CopyOutcome, copy_in_background, run_tools


def _tool(tmp_path, name, body):
    path = tmp_path / name
    path.write_text(f"#!{sys.executable}\n{body}\n", encoding="utf-8")
    path.chmod(path.stat().st_mode | stat.S_IXUSR)
    return str(path)


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
