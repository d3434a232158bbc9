"""User theme folders under abuse: hundreds of broken files, a theme named like the built-in fallback.

The rules are the project's own [D]: a bad theme file is skipped with a notice,
many of them with one summary notice; every colour on screen comes from one theme.
"""

from __future__ import annotations

from pathlib import Path

from chaintriage.tui.themes import FALLBACK_THEME, load_themes

from .app_support import make_app, notes, run

ROOT = Path(__file__).resolve().parent.parent.parent


def _broken_themes(folder: Path, n: int) -> None:
    folder.mkdir(parents=True, exist_ok=True)
    for i in range(n):
        (folder / f"bad{i:03d}.toml").write_text(f'name = "bad{i}"\n[colors]\nbackground = "red"\n', encoding="utf-8")


def test_500_broken_user_themes_give_one_summary_notice(config_home):
    _broken_themes(config_home / "chaintriage" / "themes", 500)
    app = make_app()

    async def scenario(pilot):
        about_themes = [n for n in notes(app) if "theme" in n]
        assert len(about_themes) == 1, len(about_themes)
        assert "500 theme files" in about_themes[0] and "bad000.toml" in about_themes[0]
        assert app.is_running

    run(app, scenario)


def test_a_few_broken_themes_are_each_named(tmp_path):
    _broken_themes(tmp_path, 2)
    found = load_themes(tmp_path)
    assert len(found.notices) == 2 and all("missing colour roles" in n for n in found.notices)


def test_a_user_theme_named_like_the_built_in_fallback_cannot_mix_colours(config_home):
    folder = config_home / "chaintriage" / "themes"
    folder.mkdir(parents=True)
    text = (ROOT / "themes" / "paper.toml").read_text(encoding="utf-8")
    (folder / "mine.toml").write_text(text.replace('name = "paper"', f'name = "{FALLBACK_THEME.name}"'),
                                      encoding="utf-8")
    (config_home / "chaintriage" / "settings.toml").write_text(f'theme = "{FALLBACK_THEME.name}"\n',
                                                              encoding="utf-8")
    app = make_app()

    async def scenario(pilot):
        # the widgets' colours and the screen's CSS colours come from the same theme
        css = app.get_css_variables()["ct-background"].lower()
        assert app.triage.grid._theme.color("background").lower() == css
        assert app.triage.plot._theme.color("background").lower() == css
        assert any("reserved" in n for n in notes(app)), notes(app)

    run(app, scenario)
