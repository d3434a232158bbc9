"""Themes and settings: loading, skipping bad files, round trips.

Sources: the TOML format itself (tomllib is the oracle for what we write [C]);
the Okabe & Ito (2008) palette hex values for the high-contrast theme [M].
"""

from __future__ import annotations

import asyncio
import os

from textual.app import App

from chaintriage.tui import settings as st
from chaintriage.tui import themes as th

OKABE_ITO = {"#000000", "#e69f00", "#56b4e9", "#009e73", "#f0e442", "#0072b2", "#d55e00", "#cc79a7"}


def good_theme_text(name: str = "mine", **overrides: str) -> str:
    colors = dict(th.FALLBACK_THEME.colors)
    colors.update(overrides)
    body = "\n".join(f'{k} = "{v}"' for k, v in colors.items())
    return f'name = "{name}"\ndark = false\n[colors]\n{body}\n'


def test_builtin_themes_load_with_every_role():
    ts = th.load_themes(include_user=False)
    assert ts.notices == []
    assert {"harbour", "paper", "contrast"} <= set(ts.themes)
    assert ts.themes["harbour"].dark and not ts.themes["paper"].dark
    for theme in ts.themes.values():
        assert set(theme.colors) == set(th.ROLES)
    assert ts.get(None).name == th.DEFAULT_THEME
    assert ts.get("no-such-theme").name == th.DEFAULT_THEME


def test_contrast_theme_uses_the_okabe_ito_hues_for_the_pairs_that_must_differ():
    c = th.load_themes(include_user=False).themes["contrast"].colors
    for role in ("otm_call", "otm_put", "plot_market", "plot_beyond", "forward_marker", "marked"):
        assert c[role] in OKABE_ITO, role
    assert c["otm_call"] != c["otm_put"]
    assert c["plot_market"] != c["plot_beyond"] != c["plot_flat"]
    assert c["itm"] not in (c["otm_call"], c["otm_put"])


def test_user_themes_load_and_bad_files_are_skipped_with_a_message(tmp_path):
    (tmp_path / "mine.toml").write_text(good_theme_text("mine", otm_call="#123"), encoding="utf-8")
    (tmp_path / "broken.toml").write_text('name = "broken"\n[colors\n', encoding="utf-8")
    (tmp_path / "partial.toml").write_text('name = "partial"\n[colors]\ntext = "#ffffff"\n', encoding="utf-8")
    (tmp_path / "badcolour.toml").write_text(good_theme_text("badcolour", text="red; rm -rf"), encoding="utf-8")
    (tmp_path / "binary.toml").write_bytes(b"\xff\xfe\x00garbage")
    (tmp_path / "notes.txt").write_text("ignored", encoding="utf-8")
    ts = th.load_themes(tmp_path)
    assert "mine" in ts.themes
    assert ts.themes["mine"].color("otm_call") == "#112233"  # "#rgb" expanded
    assert not {"broken", "partial", "badcolour"} & set(ts.themes)
    joined = "\n".join(ts.notices)
    assert len(ts.notices) == 4
    assert "broken.toml" in joined and "not valid TOML" in joined
    assert "partial.toml" in joined and "missing colour roles" in joined
    assert "badcolour.toml" in joined and "text" in joined
    assert "binary.toml" in joined


def test_user_theme_with_a_builtin_name_replaces_it(tmp_path):
    (tmp_path / "h.toml").write_text(good_theme_text("harbour"), encoding="utf-8")
    ts = th.load_themes(tmp_path)
    assert ts.themes["harbour"].dark is False
    assert any("replaces" in n for n in ts.notices)


def test_missing_user_dir_is_fine(tmp_path):
    ts = th.load_themes(tmp_path / "nope")
    assert "harbour" in ts.themes and ts.notices == []


def test_config_dir_follows_xdg_and_falls_back_to_home():
    assert th.config_dir({"XDG_CONFIG_HOME": "/x/cfg", "HOME": "/h"}) == th.Path("/x/cfg/chaintriage")
    assert th.config_dir({"XDG_CONFIG_HOME": "relative", "HOME": "/h"}) == th.Path("/h/.config/chaintriage")
    assert th.config_dir({"HOME": "/h"}) == th.Path("/h/.config/chaintriage")


def test_next_theme_cycles():
    ts = th.load_themes(include_user=False)
    names = ts.names()
    seen = [names[0]]
    for _ in range(len(names)):
        seen.append(ts.next_name(seen[-1]))
    assert seen[-1] == names[0] and set(seen) == set(names)


def test_textual_theme_registers_and_exposes_css_variables():
    theme = th.load_themes(include_user=False).themes["paper"]
    tt = th.to_textual_theme(theme)
    assert tt.name == "ct-paper" and tt.dark is False
    assert tt.variables["ct-otm-put"] == theme.color("otm_put")

    async def main():
        app = App()
        async with app.run_test() as pilot:
            app.register_theme(tt)
            app.theme = tt.name
            await pilot.pause()
            assert app.current_theme.name == "ct-paper"
            variables = app.get_css_variables()
            assert variables["ct-otm-put"].lower() == theme.color("otm_put")
    asyncio.run(main())


# ------------------------------------------------------------------ settings

def test_settings_round_trip(tmp_path):
    path = tmp_path / "sub" / "settings.toml"
    s = st.Settings(theme='my "odd"\\ theme\t\x01', ascii_only=True, columns=["bid", "ask", "sigma"],
                    confidence=0.95, extra={"future_key": "kept", "n": 3})
    st.save_settings(s, path)
    loaded, notices = st.load_settings(path)
    assert notices == []
    assert loaded == s
    leftovers = [p for p in path.parent.iterdir() if p.name != "settings.toml"]
    assert leftovers == []  # the temp file was renamed, not left behind


def test_missing_settings_give_defaults_quietly(tmp_path):
    loaded, notices = st.load_settings(tmp_path / "none.toml")
    assert loaded == st.Settings() and notices == []


def test_corrupt_settings_fall_back_with_a_notice(tmp_path):
    path = tmp_path / "settings.toml"
    path.write_text('theme = "paper\nascii_only = maybe\n', encoding="utf-8")
    loaded, notices = st.load_settings(path)
    assert loaded == st.Settings()
    assert len(notices) == 1 and "using defaults" in notices[0]


def test_wrong_types_fall_back_per_key(tmp_path):
    path = tmp_path / "settings.toml"
    path.write_text('theme = "paper"\nascii_only = "yes"\nconfidence = 7\ncolumns = [1, 2]\n', encoding="utf-8")
    loaded, notices = st.load_settings(path)
    assert loaded.theme == "paper"
    assert loaded.ascii_only is False and loaded.confidence == st.Settings().confidence
    assert loaded.columns == []
    assert len(notices) == 3


def test_save_overwrites_atomically(tmp_path):
    path = tmp_path / "settings.toml"
    st.save_settings(st.Settings(theme="paper"), path)
    st.save_settings(st.Settings(theme="contrast"), path)
    assert st.load_settings(path)[0].theme == "contrast"
    assert sorted(os.listdir(tmp_path)) == ["settings.toml"]


def test_toml_string_escapes_are_read_back_by_tomllib():
    import tomllib
    for raw in ['plain', 'quote " and \\ back', 'ctl \x00\x1f\x7f', 'tab\tnl\ncr\r', 'ünï €']:
        assert tomllib.loads(f"k = {st.toml_string(raw)}")["k"] == raw


def _luminance(colour: str) -> float:
    # WCAG 2.1 relative luminance of an sRGB colour [M: W3C WCAG 2.1, definition "relative luminance"]
    channels = [int(colour[i:i + 2], 16) / 255 for i in (1, 3, 5)]
    lin = [c / 12.92 if c <= 0.03928 else ((c + 0.055) / 1.055) ** 2.4 for c in channels]
    return 0.2126 * lin[0] + 0.7152 * lin[1] + 0.0722 * lin[2]


def contrast(a: str, b: str) -> float:
    la, lb = sorted((_luminance(a), _luminance(b)), reverse=True)
    return (la + 0.05) / (lb + 0.05)


def test_contrast_formula_matches_the_known_extremes():
    # black on white is 21:1 and a colour on itself 1:1 [M: WCAG 2.1 SC 1.4.3 understanding document]
    assert abs(contrast("#000000", "#ffffff") - 21.0) < 1e-9
    assert contrast("#777777", "#777777") == 1.0


def test_built_in_themes_keep_text_readable_where_the_screen_draws_it():
    # WCAG 2.1 SC 1.4.3: at least 4.5:1 for normal-size text [M]
    pairs = [("text", "background"), ("text", "surface"), ("dim", "background"), ("dim", "surface"),
             ("otm_call", "background"), ("otm_put", "background"), ("itm", "itm_background"),
             ("highlight_text", "highlight"), ("selected_text", "selected"), ("forward_marker", "background"),
             ("marked", "background"), ("warning", "surface"), ("warning", "background"),
             ("accent", "surface")]
    for theme in th.load_themes(include_user=False).themes.values():
        c = theme.colors
        for fg, bg in pairs:
            assert contrast(c[fg], c[bg]) >= 4.5, (theme.name, fg, bg, round(contrast(c[fg], c[bg]), 2))
