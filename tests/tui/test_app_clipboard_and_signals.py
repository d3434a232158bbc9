"""Copying with failing or hanging clipboard tools, and SIGTERM/SIGHUP, through the pilot.

[C] A tool's exit status says whether it took the text (0) or not; the app must
not claim a copy it did not make. [C] POSIX: SIGTERM asks a process to end;
a process ended by signal N reports 128 + N.
"""

from __future__ import annotations

import asyncio
import functools
import os
import signal
import stat
import subprocess
import sys

from chaintriage.tui import files
from chaintriage.tui.strike_summary import copy_to_system_clipboard

from .app_support import make_app, run, wait_copied


def _tool(tmp_path, name, body):
    path = tmp_path / name
    path.write_text(f"#!{sys.executable}\n{body}\n", encoding="utf-8")
    path.chmod(path.stat().st_mode | stat.S_IXUSR)
    return str(path)


def test_failing_tools_are_not_reported_as_a_copy(tmp_path):
    failing = _tool(tmp_path, "failclip", "import sys; sys.stdin.read(); sys.exit(1)")
    app = make_app(system_clipboard=functools.partial(copy_to_system_clipboard, commands=[[failing], [failing]]))

    async def scenario(pilot):
        await pilot.press("down", "right", "c")
        titles = await wait_copied(app, pilot)
        assert titles == ["not copied by a clipboard tool"]
        said = [n.message for n in app._notifications if n.title == titles[0]][0]
        assert "exit status 1" in said and "terminal's clipboard" in said

    run(app, scenario)


QUIT_WITH_A_HANGING_TOOL = """
import asyncio, functools, sys
sys.path.insert(0, {root!r})
from chaintriage.tui import clipboard
from chaintriage.tui.clipboard import run_tools
from tests.tui.app_support import make_app
app = make_app(system_clipboard=functools.partial(run_tools, commands=[[{tool!r}]] * 4, timeout=60, total=240))
async def main():
    async with app.run_test(size=(160, 50)) as pilot:
        await pilot.pause()
        await pilot.press("down", "right", "c")
        for _ in range(500):
            if clipboard._running:
                break
            await asyncio.sleep(0.01)
        print("pids", [p.pid for p in clipboard._running], flush=True)
        await pilot.press("q")
asyncio.run(main())
print("exited", app.return_code, flush=True)
"""


def test_quitting_while_a_tool_hangs_does_not_wait_for_it(tmp_path):
    hanging = _tool(tmp_path, "hangclip", "import time; time.sleep(120)")
    root = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
    env = dict(os.environ, XDG_CONFIG_HOME=str(tmp_path))
    # A hang guard, not a speed check: before the fix the process waited for the tool (60 s per tool).
    try:
        done = subprocess.run([sys.executable, "-c", QUIT_WITH_A_HANGING_TOOL.format(root=root, tool=hanging)],
                              capture_output=True, text=True, timeout=45, env=env)
    except subprocess.TimeoutExpired:
        raise AssertionError("quitting waited for the hanging clipboard tool") from None
    assert "exited" in done.stdout, done.stderr[-800:]
    pids = [int(x) for x in done.stdout.split("pids [")[1].split("]")[0].split(",") if x.strip()]
    assert pids
    for pid in pids:  # killed at quit: nothing left running
        try:
            os.kill(pid, 0)
        except ProcessLookupError:
            continue
        with open(f"/proc/{pid}/stat") as fh:  # a zombie (reaped later by init) is not running
            assert fh.read().split(")")[1].split()[0] == "Z"


import pytest


@pytest.fixture
def caught_signals():
    """Signals the app did not handle land here instead of ending the test run."""
    seen: list[int] = []
    old = {sig: signal.signal(sig, lambda n, f: seen.append(n)) for sig in (signal.SIGTERM, signal.SIGHUP)}
    yield seen
    for sig, handler in old.items():
        signal.signal(sig, handler)


def test_sigterm_exits_the_app_with_143_and_removes_temp_exports(tmp_path, caught_signals):
    app = make_app()
    temp = tmp_path / ".shortlist.csv.x.tmp"

    async def scenario(pilot):
        temp.write_text("half written")
        files._pending.add(str(temp))
        os.kill(os.getpid(), signal.SIGTERM)
        for _ in range(200):
            await pilot.pause(0.01)
            if app.return_code is not None:
                break

    run(app, scenario)
    assert caught_signals == []  # the app handled it
    assert app.return_code == 128 + signal.SIGTERM
    assert not temp.exists()


def test_sighup_exits_the_app_too(caught_signals):
    app = make_app()

    async def scenario(pilot):
        os.kill(os.getpid(), signal.SIGHUP)
        for _ in range(200):
            await pilot.pause(0.01)
            if app.return_code is not None:
                break

    run(app, scenario)
    assert caught_signals == [] and app.return_code == 128 + signal.SIGHUP
