"""Looks as a trader reads them: one truncation marker, a findings title on one line at 80
columns, quotes with their cents in messages, theme backgrounds that stay neutral on a
256-colour terminal (Rich's own downgrade to the xterm palette [L: rich.color]), and the
same words from copy and mark when there is nothing to act on."""

from __future__ import annotations

import glob
import os
import tomllib

from rich.color import Color, ColorSystem
from rich.text import Text

from chaintriage.tui.screens.findings import FindingsScreen
from chaintriage.tui.widgets.info_bars import pack_pieces

from .app_support import ROOT, make_app, notes, run


def test_a_cut_piece_has_one_marker():
    piece = Text("narrow terminal: bid, ask, touch not shown; plot hidden (v shows it)",
                 no_wrap=True, overflow="ellipsis")
    for width in (20, 40, 60):
        line = pack_pieces([piece], width)[0].plain
        assert line.endswith("~") and "…" not in line and "...~" not in line
        assert len(line) <= width


def test_findings_title_is_one_line_at_80_columns():
    app = make_app()

    async def scenario(pilot):
        await pilot.press("e")
        screen = app.screen
        assert isinstance(screen, FindingsScreen)
        await pilot.pause()
        title = screen.query_one("#findings-title")
        assert title.region.height == 1
        assert "findings" in str(title.render())

    run(app, scenario, size=(80, 24))


def test_near_neutral_backgrounds_stay_neutral_on_256_colours():
    for path in glob.glob(os.path.join(ROOT, "themes", "*.toml")):
        with open(path, "rb") as fh:
            colors = tomllib.load(fh)["colors"]
        for role in ("background", "surface", "itm_background"):
            c = Color.parse(colors[role])
            rgb = c.get_truecolor()
            if max(rgb) - min(rgb) > 16:
                continue  # a tinted background by design
            down = c.downgrade(ColorSystem.EIGHT_BIT).get_truecolor()
            assert max(down) - min(down) <= 16, (os.path.basename(path), role, colors[role], down)


def test_copy_and_mark_say_the_same_when_the_side_has_no_contract():
    app = make_app()

    async def scenario(pilot):
        grid = app.triage.grid
        # Find a strike where the selected side has no contract (calls only at some strikes?).
        await pilot.press("home")
        empty = None
        for side in ("left", "right"):
            await pilot.press(side, "home")
            for _ in range(len(grid.strikes)):
                if grid.highlighted_contract() is None:
                    empty = grid.highlighted
                    break
                await pilot.press("down")
            if empty:
                break
        if empty is None:  # every strike quoted on both sides: an empty ladder instead
            from chaintriage.tui.session import StrikeFilter

            app.set_filter(StrikeFilter(sigma=99.0))
            await pilot.pause()
        await pilot.press("c", "m")
        said = [n for n in notes(app) if n.startswith("nothing to")]
        assert len(said) == 2
        assert said[0].split(": ", 1)[1] == said[1].split(": ", 1)[1]

    run(app, scenario)
