"""NO_COLOR=1 and the theme's colours in the plot and the grid.

[L] no-color.org: a program honouring NO_COLOR drops colour, nothing else;
Textual then runs every segment through its monochrome filter, which needs a
style on each one. [D] Every cell the plot and the grid draw carries the
theme's colours (no terminal-default cell inside a light theme).
"""

from __future__ import annotations

from rich.segment import Segment

from .app_support import make_app, run


def test_no_color_draws_the_plot_and_the_grid_without_a_traceback(monkeypatch):
    monkeypatch.setenv("NO_COLOR", "1")
    app = make_app()

    async def scenario(pilot):
        assert app.no_color
        for key in ("v", "down", "right_square_bracket", "f", "escape", "down", "down"):
            await pilot.press(key)
            await pilot.pause()
        assert app.is_running and app.return_code is None

    run(app, scenario)


def _segments(strips):
    for strip in strips:
        yield from strip


def test_every_plot_and_grid_cell_carries_the_themes_colours():
    app = make_app()

    async def scenario(pilot):
        await pilot.pause()
        bg = app.state.theme.color("background").lower()
        plot, grid = app.triage.plot, app.triage.grid
        assert plot.size.width > 0 and grid.size.width > 0
        plot_strips = [plot.render_line(y) for y in range(plot.size.height + 2)]
        grid_strips = [grid.render_line(y) for y in range(grid.size.height + 2)]
        for seg in _segments(plot_strips + grid_strips):
            assert isinstance(seg, Segment)
            assert seg.style is not None, seg
            assert seg.style.bgcolor is not None and seg.style.color is not None, seg
        # the plot's background is the theme's, not the terminal's default
        assert any(s.style.bgcolor.triplet.hex == bg for s in _segments(plot_strips))

    run(app, scenario)
