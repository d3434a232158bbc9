"""Corrupt settings and theme files never stop the app; settings are written atomically.

Each bad settings file gives the defaults (for what was bad) and a notice in the
app; a malformed user theme is skipped with a notice. The settings writer goes
through a temp file in the same folder and a rename, so a failure mid-write
leaves the old file whole [C: write-then-rename, POSIX rename(2) atomicity].
"""

from __future__ import annotations

import os
import re

import pytest

from chaintriage.core.findings import ChainTriageError
from chaintriage.tui import files as files_module
from chaintriage.tui.settings import Settings, load_settings, save_settings, settings_path
from chaintriage.tui.themes import DEFAULT_THEME

from .app_support import bar, make_app, notes, run

BAD_TEXT = re.compile(r"\b(nan|NaN|inf|Inf|Traceback)\b")

CORRUPT = {
    "garbage bytes": bytes(range(256)) * 8,
    "not TOML": b"theme = [\n\x00\x01 = = =",
    "wrong types": b'theme = 5\nascii_only = "yes"\ncolumns = {a = 1}\nconfidence = "wide"\nplot = 7\n',
    "huge values": b"confidence = 1e400\ncolumns = [" + b'"bid", ' * 5000 + b'"ask"]\nplot = "' + b"x" * 100_000
                   + b'"\ntheme = "' + b"t" * 10_000 + b'"\n',
    "tiny confidence": b"confidence = 1e-300\n",
    "near-one confidence": b"confidence = 0.9999999999999\n",
    "negative and bool": b"confidence = -3\nascii_only = 1\n",
    "unknown theme": b'theme = "no such theme"\n',
    "unknown columns": b'columns = ["nope", "[bold]", "\\u001b[31m"]\n',
}


def _screen_clean(app) -> None:
    texts = [bar(app, n) for n in ("topbar", "expirybar", "filterbar")] + app.triage.grid.render_lines_text()
    for t in texts:
        assert not BAD_TEXT.search(t), t


@pytest.mark.parametrize("case", list(CORRUPT))
def test_a_corrupt_settings_file_gives_defaults_and_a_notice(case):
    path = settings_path()
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_bytes(CORRUPT[case])
    app = make_app()

    async def scenario(pilot):
        assert app.state.theme.name in app.themes.names()
        assert 0 < app.state.confidence < 1 and app.state.columns
        if case not in ("tiny confidence", "near-one confidence", "unknown columns"):
            assert notes(app), case  # something said the file was not used as it was
        _screen_clean(app)
        await pilot.press("t", "a", "plus", "minus", "minus", "v", "right_square_bracket")
        _screen_clean(app)
        assert app.is_running

    run(app, scenario)
    # The app's own saves replaced the bad file with a readable one.
    assert load_settings()[1] == []


def test_an_unknown_theme_name_is_named_in_a_notice():
    path = settings_path()
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text('theme = "no such theme"\n', encoding="utf-8")
    app = make_app()

    async def scenario(pilot):
        assert app.state.theme.name == DEFAULT_THEME
        assert any("no such theme" in n for n in notes(app)), notes(app)

    run(app, scenario)


def test_a_folder_where_the_settings_file_should_be():
    path = settings_path()
    path.mkdir(parents=True)
    app = make_app()

    async def scenario(pilot):
        assert any("could not be read" in n for n in notes(app)), notes(app)
        await pilot.press("t", "t", "a")  # each would save: one notice says the settings cannot be kept
        saying = [n for n in notes(app) if "settings not saved" in n]
        assert len(saying) == 1, notes(app)
        assert app.is_running

    run(app, scenario)
    assert path.is_dir()


def test_malformed_user_themes_are_skipped_with_a_notice(config_home):
    themes = config_home / "chaintriage" / "themes"
    themes.mkdir(parents=True)
    (themes / "bytes.toml").write_bytes(b"\xff\xfe\x00garbage")
    (themes / "types.toml").write_text('name = 5\n[colors]\nbackground = 1\n', encoding="utf-8")
    (themes / "markup.toml").write_text('name = "[bold]x"\n', encoding="utf-8")
    (themes / "folder.toml").mkdir()
    app = make_app()

    async def scenario(pilot):
        said = "\n".join(notes(app))
        for name in ("bytes.toml", "types.toml", "markup.toml"):
            assert name in said, said
        await pilot.press(*["t"] * (len(app.themes.names()) + 1))
        assert app.is_running

    run(app, scenario)


def test_settings_are_written_through_a_temp_file_and_a_rename(tmp_path, monkeypatch):
    path = tmp_path / "settings.toml"
    save_settings(Settings(theme="paper"), path)
    before = path.read_bytes()
    seen = []
    real_replace = os.replace

    def replace(src, dst):
        seen.append((os.fspath(src), os.fspath(dst)))
        return real_replace(src, dst)

    monkeypatch.setattr(files_module.os, "replace", replace)
    save_settings(Settings(theme="contrast"), path)
    assert len(seen) == 1 and seen[0][1] == str(path)
    assert os.path.dirname(seen[0][0]) == str(tmp_path) and seen[0][0] != str(path)
    assert load_settings(path)[0].theme == "contrast"

    def failing(src, dst):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(files_module.os, "replace", failing)
    after_good = path.read_bytes()
    with pytest.raises(ChainTriageError):
        save_settings(Settings(theme="paper"), path)
    assert path.read_bytes() == after_good != before  # the old file is whole
    assert sorted(p.name for p in tmp_path.iterdir()) == ["settings.toml"]  # no temp file left
