"""The app under abuse: seeded random keys through every screen and state.

Keys are drawn from the app's real bindings (main screen, ladder, every other
screen and dialog), printable characters, Enter, Escape, Tab, arrows and
PgUp/PgDn, with mouse clicks, terminal resizes between 80x24 and 200x50 and a
20,000-contract file opened (and keys pressed) while it loads. Nothing may
escape: Textual's pilot re-raises any exception from the app, and the app must
still be running at the end with no "nan"/"inf" or traceback on screen.

Scale up with CHAINTRIAGE_ABUSE_KEYS (keys per seed) and CHAINTRIAGE_ABUSE_SEEDS
(comma-separated seeds). Any crash found is fixed and its seed kept in SEEDS.
"""

from __future__ import annotations

import asyncio
import os
import re
import time

import pytest
import textual.app

from chaintriage.tui import snapshot_loading
from chaintriage.tui.app import ChainTriageApp
from chaintriage.tui.screens.triage import TriageScreen
from chaintriage.tui.screens.column_picker import ColumnPicker
from chaintriage.tui.screens.confirm_dialog import ConfirmDialog
from chaintriage.tui.screens.filter_dialog import FilterDialog
from chaintriage.tui.screens.findings import FindingsScreen
from chaintriage.tui.screens.help import HelpScreen
from chaintriage.tui.screens.path_prompt import PathPrompt
from chaintriage.tui.screens.shortlist import ShortlistScreen
from chaintriage.tui.screens.sort_chooser import SortChooser
from chaintriage.tui.screens.target_view import TargetValuePrompt, TargetViewScreen
from chaintriage.tui.widgets.strike_grid import StrikeGrid

from .abuse_support import Driver, binding_keys, drive, quick_idle, write_big_chain
from .app_support import Clipboard, bar, demo_views, wait_ready

KEYS_PER_SEED = int(os.environ.get("CHAINTRIAGE_ABUSE_KEYS", "340"))
SEEDS = [int(s) for s in os.environ.get("CHAINTRIAGE_ABUSE_SEEDS", "11,12,13,14,15,16").split(",") if s.strip()]
BINDINGS = binding_keys(TriageScreen, StrikeGrid, HelpScreen, FindingsScreen, ShortlistScreen, ColumnPicker,
                        FilterDialog, PathPrompt, ConfirmDialog, TargetViewScreen, TargetValuePrompt, SortChooser)
BAD_TEXT = re.compile(r"\b(nan|NaN|inf|Inf|Traceback)\b")

#: Figures gathered over the run, printed by the last test (pytest -s shows them).
FIGURES: dict[int, Driver] = {}


@pytest.fixture(scope="module")
def big_chain(tmp_path_factory):
    path = tmp_path_factory.mktemp("big") / "bigq_20k.csv"
    assert write_big_chain(path) == 20_000
    return str(path)


def screen_text(app: ChainTriageApp) -> list[str]:
    texts = [bar(app, n) for n in ("topbar", "expirybar", "filterbar")]
    if app.state.views:
        texts += app.triage.grid.render_lines_text()
        if app.triage.plot.display and app.triage.plot.last_result is not None:
            texts += list(app.triage.plot.last_result.plain)
    texts += [str(n.message) for n in app._notifications]
    return texts


async def back_to_main(app: ChainTriageApp, pilot) -> int:
    """Escape until the main screen shows; returns the keys pressed."""
    pressed = 0
    await pilot.pause()
    while app.screen is not app.triage:
        await pilot.press("escape")
        await pilot.pause()
        pressed += 1
        assert pressed < 20, app.screen
    return pressed


def abuse(seed: int, tmp_path, big_chain: str, monkeypatch, *, start_loading: bool) -> Driver:
    """One seed: KEYS_PER_SEED keys; with ``start_loading`` the app starts on the big file, else on the
    demo and opens the big file with the open-file key a third of the way in."""
    work = tmp_path / "work"
    work.mkdir()
    monkeypatch.chdir(work)  # exports and typed paths land here
    monkeypatch.setattr(textual.app, "wait_for_idle", quick_idle)
    real_load = snapshot_loading.load_for_app

    def slower_load(*args, **kwargs):
        time.sleep(0.5)  # a slower disk: keys surely land while the file loads
        return real_load(*args, **kwargs)

    monkeypatch.setattr(snapshot_loading, "load_for_app", slower_load)
    if start_loading:
        app = ChainTriageApp([big_chain], system_clipboard=Clipboard())
    else:
        app = ChainTriageApp(views=demo_views(), system_clipboard=Clipboard())
    driver = Driver(seed, BINDINGS)
    size = (80, 24) if seed % 2 else (200, 50)

    async def main() -> None:
        async with app.run_test(size=size) as pilot:
            await pilot.pause()
            if start_loading:
                await drive(app, pilot, driver, KEYS_PER_SEED // 3)  # keys while the first load runs
                await wait_ready(app, pilot, timeout=60)
            else:
                await drive(app, pilot, driver, KEYS_PER_SEED // 3)
                driver.pressed += await back_to_main(app, pilot)
                await pilot.press("l")
                await pilot.pause()
                app.screen.query_one("#path-input").value = big_chain
                await pilot.press("enter")
                await pilot.pause()
                driver.pressed += 2
            await drive(app, pilot, driver, KEYS_PER_SEED)
            await wait_ready(app, pilot, timeout=60)
            await back_to_main(app, pilot)
            assert app.is_running and app.return_code is None
            for text in screen_text(app):
                assert not BAD_TEXT.search(text), (seed, text)

    asyncio.run(main())
    assert app.return_code in (None, 0)
    assert any(v.snapshot.underlying == "BIGQ" for v in app.state.views), app.state.file_errors
    FIGURES[seed] = driver
    return driver


@pytest.mark.parametrize("seed", SEEDS)
def test_random_keys_raise_nothing(seed, tmp_path, big_chain, monkeypatch):
    driver = abuse(seed, tmp_path, big_chain, monkeypatch, start_loading=seed % 3 == 0)
    assert driver.pressed >= KEYS_PER_SEED
    assert driver.pressed_while_loading > 0  # some keys did land while the big file loaded


def test_the_seeds_together_reach_every_screen_and_enough_keys():
    if set(FIGURES) != set(SEEDS):
        pytest.skip("needs every seed of this module to have run")
    seen = set().union(*(d.screens_seen for d in FIGURES.values()))
    wanted = {"TriageScreen", "HelpScreen", "FindingsScreen", "ShortlistScreen", "ColumnPicker",
              "FilterDialog", "PathPrompt", "ConfirmDialog", "TargetViewScreen", "SortChooser"}
    assert wanted <= seen, wanted - seen
    total = sum(d.pressed for d in FIGURES.values())
    if "CHAINTRIAGE_ABUSE_KEYS" not in os.environ and "CHAINTRIAGE_ABUSE_SEEDS" not in os.environ:
        assert total >= 2000
    assert sum(d.resizes for d in FIGURES.values()) > 0 and sum(d.opened for d in FIGURES.values()) > 0
    for seed, d in sorted(FIGURES.items()):
        print(f"seed {seed}: {d.pressed} keys ({d.pressed_while_loading} while loading), {d.resizes} resizes, {d.opened} files opened, {d.clicks} clicks, {d.bursts} bursts, "
              f"slowest key {d.slowest_key[1]!r} {1000 * d.slowest_key[0]:.0f} ms")
    print(f"total: {total} keys")


def test_tiny_and_odd_terminal_sizes(monkeypatch):
    monkeypatch.setattr(textual.app, "wait_for_idle", quick_idle)
    app = ChainTriageApp(views=demo_views(), system_clipboard=Clipboard())
    keys = ["down", "]", "question_mark", "escape", "e", "down", "escape", "s", "escape", "f", "escape", "o",
            "escape", "c", "m", "v", "a", "t", "pagedown", "end", "l", "escape", "t", "t", "a"]

    async def main() -> None:
        async with app.run_test(size=(80, 24)) as pilot:
            await wait_ready(app, pilot)
            for size in ((1, 1), (10, 5), (30, 8), (2, 40), (300, 3), (80, 24)):
                await pilot.resize_terminal(*size)
                for key in keys:
                    await pilot.press(key)
                assert app.is_running, size
            for text in screen_text(app):
                assert not BAD_TEXT.search(text), text

    asyncio.run(main())
    assert app.return_code is None


@pytest.mark.parametrize("opener, burst, left", [
    (("question_mark",), ("escape", "escape"), 1), (("e",), ("escape", "escape"), 1),
    (("s",), ("escape", "escape"), 1), (("o",), ("escape", "escape"), 1), (("f",), ("escape", "escape"), 1),
    (("f",), ("enter", "enter"), 1), (("l",), ("escape", "escape"), 1), (("l",), ("enter", "enter"), 1),
    (("m", "s"), ("enter", "enter"), 1), (("m", "s", "w"), ("escape", "escape", "escape"), 1),
    (("m", "s", "w", "enter", "w", "enter"), ("y", "y"), 2), (("m", "s", "w", "enter", "w", "enter"), ("n", "n"), 2),
    (("s",), ("s", "s"), 2), (("question_mark",), ("question_mark", "question_mark"), 2),
    (("o",), ("o", "o", "o"), 1), (("e",), ("e", "e", "escape"), 1),
])
def test_keys_faster_than_a_screen_closes_close_only_that_screen(opener, burst, left, monkeypatch, tmp_path):
    # Found by the random keys (keys pressed in one burst): a second Escape or Enter reached the
    # closing screen and dismissed the screen under it too, down to an empty screen stack.
    monkeypatch.chdir(tmp_path)
    monkeypatch.setattr(textual.app, "wait_for_idle", quick_idle)
    app = ChainTriageApp(views=demo_views(), system_clipboard=Clipboard())

    async def main() -> None:
        async with app.run_test(size=(120, 40)) as pilot:
            await wait_ready(app, pilot)
            for key in opener:
                await pilot.press(key)
                await pilot.pause()
            assert len(app.screen_stack) >= 2
            await pilot.press(*burst)  # one burst: no wait between the keys
            await pilot.pause()
            assert app.is_running and app.return_code is None
            assert len(app.screen_stack) == left, app.screen_stack
            assert app.screen_stack[0] is app.triage

    asyncio.run(main())
