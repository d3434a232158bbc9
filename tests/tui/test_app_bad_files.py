"""Opening unreadable or malformed files from inside the app, and writing nothing unasked.

Each bad file gives a notice and leaves the app as it was: the same snapshot
and expiry shown, and the keys still work. Product rules [C]: bad input never
stops the app, and nothing is written next to the user's files unless asked.
"""

from __future__ import annotations

import os

import pytest

from .app_support import make_app, notes, run, wait_ready
from .test_app_looks_and_loading import write_chain


def _bad_files(tmp_path) -> dict[str, str]:
    folder = tmp_path / "a_folder.csv"
    folder.mkdir()
    binary = tmp_path / "binary.csv"
    binary.write_bytes(bytes(range(256)) * 40 + b"\x00\xff\xfe" * 100)
    empty = tmp_path / "empty.csv"
    empty.write_bytes(b"")
    header_only = tmp_path / "header_only.csv"
    header_only.write_text("underlying,as_of,spot,expiry,strike,kind,bid,ask\n", encoding="utf-8")
    no_usable = tmp_path / "no_usable_row.csv"
    no_usable.write_text("underlying,as_of,spot,expiry,strike,kind,bid,ask\n"
                         "QRTZ,2026-03-02T15:30:00-05:00,100,not-a-date,abc,maybe,x,y\n"
                         "QRTZ,2026-03-02T15:30:00-05:00,100,2026-03-20,-5,call,2,1\n", encoding="utf-8")
    utf16 = tmp_path / "utf16.csv"
    utf16.write_text("underlying,expiry\nQRTZ,2026-03-20\n", encoding="utf-16")
    return {
        "folder": str(folder), "missing": str(tmp_path / "missing.csv"), "binary": str(binary),
        "empty": str(empty), "header only": str(header_only), "no usable row": str(no_usable),
        "utf-16": str(utf16),
    }


async def _open(app, pilot, path: str) -> None:
    await pilot.press("l")
    await pilot.pause()
    app.screen.query_one("#path-input").value = path
    await pilot.press("enter")
    await pilot.pause()
    await wait_ready(app, pilot)
    await pilot.pause()


def test_bad_files_say_so_and_leave_the_app_as_it_was(tmp_path):
    bad = _bad_files(tmp_path)
    app = make_app()

    async def scenario(pilot):
        await pilot.press("right_square_bracket", "down", "down")
        before = (app.state.view_index, app.state.view.snapshot.underlying, app.state.current_expiry, app.triage.grid.highlighted)
        for what, path in bad.items():
            shown_before = len(app._notifications)
            await _open(app, pilot, path)
            assert app.screen is app.triage, what
            assert (app.state.view_index, app.state.view.snapshot.underlying, app.state.current_expiry,
                    app.triage.grid.highlighted) == before, what
            assert len(app.state.views) == 2, what
            new = notes(app)[shown_before:] if len(notes(app)) > shown_before else notes(app)
            assert any(os.path.basename(path) in n for n in new), (what, new)
            assert not any("Traceback" in n for n in notes(app))
        await pilot.press("right_square_bracket")  # the keys still work
        assert app.state.current_expiry != before[2]
        await pilot.press("down")
        assert app.triage.grid.highlighted != before[3]
        await pilot.press("e")
        assert type(app.screen).__name__ == "FindingsScreen"
        await pilot.press("escape")
        assert app.is_running and app.return_code is None

    run(app, scenario)


@pytest.mark.skipif(os.name != "posix", reason="file modes are POSIX")
def test_a_file_without_read_permission(tmp_path):
    locked = tmp_path / "locked.csv"
    write_chain(locked)
    os.chmod(locked, 0)
    try:
        if os.access(locked, os.R_OK):
            pytest.skip("running as a user who can read any file (root): mode 000 does not block reading")
        app = make_app()

        async def scenario(pilot):
            before = (app.state.view_index, app.state.current_expiry)
            await _open(app, pilot, str(locked))
            assert (app.state.view_index, app.state.current_expiry) == before and len(app.state.views) == 2
            assert any("locked.csv" in n for n in notes(app))

        run(app, scenario)
    finally:
        os.chmod(locked, 0o600)


def test_driving_the_app_writes_nothing_next_to_the_input_file(tmp_path, monkeypatch):
    data = tmp_path / "data"
    data.mkdir()
    path = write_chain(data / "qrtz.csv")
    elsewhere = tmp_path / "cwd"
    elsewhere.mkdir()
    monkeypatch.chdir(elsewhere)
    listing = sorted(os.listdir(data))
    stat = os.stat(path)
    app = make_app(paths=[path])

    async def scenario(pilot):
        keys = ["]", "[", "down", "m", "c", "t", "a", "a", "v", "v", "plus", "minus", "f", "1", "enter", "x",
                "e", "escape", "?", "escape", "s", "escape", "o", "space", "space", "escape"]
        await pilot.press(*keys)
        await _open(app, pilot, path)  # the same file again
        await pilot.press("right_curly_bracket", "m", "c")

    run(app, scenario)
    assert sorted(os.listdir(data)) == listing
    assert os.stat(path).st_mtime_ns == stat.st_mtime_ns and os.stat(path).st_size == stat.st_size
