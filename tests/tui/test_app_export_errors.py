"""Exporting the shortlist to names the file system refuses: a notice, never an exit.

[C] POSIX: a path component longer than NAME_MAX (255 bytes on common file
systems) gives ENAMETOOLONG; a NUL byte cannot be in a path; a path through a
regular file gives ENOTDIR.
"""

from __future__ import annotations

import pytest

from chaintriage.tui.screens.shortlist import ShortlistScreen

from .app_support import make_app, notes, run


@pytest.mark.parametrize("name", [
    "x" * 300 + ".csv",          # ENAMETOOLONG, from the folder check
    "y" * 300 + ".md",
    "bad\x00name.csv",           # a NUL byte
    "/dev/null/shortlist.csv",   # through a file
    "/proc/version",             # an existing file that cannot be replaced
])
def test_an_unusable_export_name_leaves_the_app_and_the_shortlist_intact(tmp_path, monkeypatch, name):
    monkeypatch.chdir(tmp_path)
    app = make_app()

    async def scenario(pilot):
        await pilot.press("m", "down", "m", "s", "w")
        assert len(app.state.shortlist) == 2
        app.screen.query_one("#path-input").value = name
        await pilot.press("enter")
        await pilot.pause()
        if type(app.screen).__name__ == "ConfirmDialog":  # an existing file: say yes to replacing it
            await pilot.press("y")
            await pilot.pause()
        assert app.is_running and app.return_code is None
        assert isinstance(app.screen, ShortlistScreen)
        assert len(app.state.shortlist) == 2
        said = [n for n in notes(app) if "cannot" in n or "not written" in n.lower() or "File name" in n]
        assert said, notes(app)
        # and a good name still works afterwards
        await pilot.press("w")
        app.screen.query_one("#path-input").value = str(tmp_path / "ok.csv")
        await pilot.press("enter")
        await pilot.pause()
        assert (tmp_path / "ok.csv").exists()

    run(app, scenario)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["ok.csv"]  # no temp file left behind
