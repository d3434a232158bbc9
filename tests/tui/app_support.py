"""Helpers for the app's pilot tests (Textual's App.run_test [L: Textual testing guide]).

pytest-asyncio is not a dependency: each test drives its scenario with asyncio.run.
The demo chains are annotated once per test session and handed to each app as
ready views, except where a test exercises the loading path itself.
"""

from __future__ import annotations

import asyncio
import functools
import os
from collections.abc import Awaitable, Callable

from chaintriage.core.loading import load_files
from chaintriage.core.pipeline import PipelineSettings, annotate
from chaintriage.tui.app import ChainTriageApp
from chaintriage.tui.session import SnapshotView, file_findings_without_underlying
from chaintriage.tui.snapshot_loading import demo_files

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
DEMO_DIR = os.path.join(ROOT, "demo_chains")
SIZE = (160, 50)


def demo_paths() -> list[str]:
    return [os.path.join(DEMO_DIR, name) for name in demo_files()]


@functools.lru_cache(maxsize=1)
def demo_load():
    return load_files(demo_paths())


@functools.lru_cache(maxsize=1)
def demo_annotated():
    """core's own output for the demo chains (the oracle the screen is read against)."""
    return [annotate(s, PipelineSettings()) for s in demo_load().snapshots]


def demo_views() -> list[SnapshotView]:
    """Fresh views (their caches start empty) over the shared annotated demo."""
    result = demo_load()
    return [SnapshotView(a, file_findings_without_underlying(result.findings, a.snapshot.sources))
            for a in demo_annotated()]


class Clipboard:
    """Stands in for the system clipboard tool: records what it was given."""

    def __init__(self) -> None:
        self.texts: list[str] = []

    def __call__(self, text: str) -> bool:
        self.texts.append(text)
        return True


def make_app(**kwargs) -> ChainTriageApp:
    kwargs.setdefault("system_clipboard", Clipboard())
    if "views" not in kwargs and "snapshots" not in kwargs and "paths" not in kwargs:
        kwargs["views"] = demo_views()
    paths = kwargs.pop("paths", ())
    return ChainTriageApp(paths, **kwargs)


async def wait_ready(app: ChainTriageApp, pilot, timeout: float = 20.0) -> None:
    """Wait until something is shown and no load is running (or the app has exited)."""
    loop = asyncio.get_running_loop()
    end = loop.time() + timeout
    while loop.time() < end:
        if app.return_code is not None:
            return
        if app.state.views and not app.state.loads_running:
            await pilot.pause()
            return
        await pilot.pause(0.02)
    raise AssertionError("the app did not get ready in time")


def run(app: ChainTriageApp, scenario: Callable[..., Awaitable[None]], size=SIZE) -> None:
    async def main() -> None:
        async with app.run_test(size=size) as pilot:
            await wait_ready(app, pilot)
            await scenario(pilot)

    asyncio.run(main())


def notes(app: ChainTriageApp) -> list[str]:
    """The messages of the notifications currently shown."""
    return [n.message for n in app._notifications]


def bar(app: ChainTriageApp, name: str) -> str:
    return app.triage.bar(name).plain


async def wait_copied(app: ChainTriageApp, pilot, timeout: float = 10.0) -> list[str]:
    """Wait until the app has said what a copy did (the system clipboard runs in a thread);
    returns the titles of the clipboard notices."""
    loop = asyncio.get_running_loop()
    end = loop.time() + timeout
    while loop.time() < end:
        titles = [n.title for n in app._notifications if "clipboard" in n.title]
        if titles:
            return titles
        await pilot.pause(0.02)
    raise AssertionError("the app never said what the copy did")


async def type_export_path(app: ChainTriageApp, pilot, path) -> None:
    """From the shortlist: `w`, type ``path`` into the export prompt, Enter."""
    from chaintriage.tui.screens.path_prompt import PathPrompt

    await pilot.press("w")
    prompt = app.screen
    assert isinstance(prompt, PathPrompt)
    prompt.query_one("#path-input").value = str(path)
    await pilot.press("enter")
    await pilot.pause()
