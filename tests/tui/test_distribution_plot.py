"""The text distribution plot.

Expected columns are computed here from the inputs and the documented x
mapping (domain [F*exp(-3s), F*exp(3s)] cut to the strikes, column =
floor((x - lo)/(hi - lo)*width)) [D]. The densities are scipy.stats.lognorm
(test-only oracle); its value at the forward is checked against REFERENCE.md
§5 (F=100, T=.5, sigma=.2: q(100) = 0.02813904) [D]. The mode of a lognormal,
scale*exp(-s^2), is a textbook fact [C].
"""

from __future__ import annotations

import asyncio
import math

import numpy as np
import pytest
from scipy.stats import lognorm
from textual.app import App, ComposeResult

from chaintriage.tui.widgets.distribution_plot import NEGATIVE_NOTE, DistributionPlot, draw_distribution
from chaintriage.tui.themes import load_themes

THEME = load_themes(include_user=False).get("harbour")
F = 100.0
S = 0.2 * math.sqrt(0.5)  # sigma*sqrt(T)
K = np.linspace(40.0, 220.0, 721)
W, H = 72, 18


def lognormal(k, forward, s):
    return lognorm.pdf(k, s, scale=forward * math.exp(-0.5 * s * s))


FLAT = lognormal(K, F, S)
MARKET = lognormal(K, F * 0.99, S * 1.15)  # a wider, shifted curve: a stand-in for a smile's density


def expected_col(x, width=W):
    lo = max(K.min(), F * math.exp(-3 * S))
    hi = min(K.max(), F * math.exp(3 * S))
    return int(math.floor((x - lo) / (hi - lo) * width))


def draw(**kw):
    args = dict(forward=F, sigma_sqrt_t=S, highlight_strike=90.0, highlight_kind="put", p_beyond=0.081,
                colors=THEME, width=W, height=H)
    args.update(kw)
    return draw_distribution(K, args.pop("density", MARKET), args.pop("density_flat", FLAT), **args)


def test_fixture_density_matches_the_reference_value():
    assert lognormal(np.array([100.0]), 100.0, 0.2 * math.sqrt(0.5))[0] == pytest.approx(0.02813904, rel=1e-6)


def test_size_is_exact():
    r = draw()
    assert len(r.lines) == H
    assert all(line.cell_len == W for line in r.lines)


@pytest.mark.parametrize("ascii_only", [False, True])
def test_forward_and_sigma_marks_at_the_computed_columns(ascii_only):
    r = draw(ascii_only=ascii_only, highlight_strike=None)
    axis = r.plain[H - 2]
    assert axis[expected_col(F)] == "F"
    for n in (1, 2):
        assert axis[expected_col(F * math.exp(n * S))] == str(n)
        assert axis[expected_col(F * math.exp(-n * S))] == str(n)
    assert sorted(ch for ch in axis if ch.isdigit()) == ["1", "1", "2", "2"]


def test_sigma_marks_print_their_own_values_and_are_named():
    # [D] the label under each "2" is F exp(+/-2 s) (not the domain edge); the legend names the sigma marks
    r = draw(highlight_strike=None)
    labels = r.plain[H - 1]
    for n in (-2, 2):
        value = f"{F * math.exp(n * S):.0f}"  # whole units: the domain spans more than 50
        col = expected_col(F * math.exp(n * S))
        start = labels.find(value)
        assert start >= 0 and start <= col < start + len(value), (value, labels)
    assert "σ marks" in r.plain[0]


@pytest.mark.parametrize("kind", ["put", "call"])
def test_highlighted_strike_and_the_area_beyond_it(kind):
    strike = 90.0 if kind == "put" else 112.0
    r = draw(highlight_strike=strike, highlight_kind=kind)
    c = expected_col(strike)
    axis = r.plain[H - 2]
    assert axis[c] == "▲"
    plot = r.plain[1:H - 2]
    assert plot[0][c] == "│"  # the strike's line shows above the bar
    beyond_cols = range(0, c) if kind == "put" else range(c + 1, W)
    inside_cols = range(c + 1, W) if kind == "put" else range(0, c)
    bottom = plot[-1]
    beyond_cells = {bottom[i] for i in beyond_cols if bottom[i] not in " •"}
    inside_cells = {bottom[i] for i in inside_cols if bottom[i] not in " •"}
    assert "▓" in beyond_cells and "█" not in beyond_cells
    assert "█" in inside_cells and "▓" not in inside_cells
    # ... and painted in the theme's colours
    line = r.lines[H - 3]
    styles = {line.plain[s.start]: s.style for s in line.spans if line.plain[s.start] in "▓█"}
    assert styles["▓"].color.name == THEME.color("plot_beyond")
    assert styles["█"].color.name == THEME.color("plot_market")
    assert f"{'90' if kind == 'put' else '112'} {kind}  P(beyond) 8.1%" in r.plain[0]


def test_two_series_are_drawn_with_different_glyphs():
    r = draw(highlight_strike=None)
    body = "".join(r.plain[1:H - 2])
    assert "•" in body and "█" in body
    assert "market" in r.plain[0] and "1-vol" in r.plain[0]


def test_tallest_bar_sits_at_the_mode():
    r = draw(density=FLAT, highlight_strike=None, width=60)
    plot = r.plain[1:H - 2]
    heights = [sum(1 for row in plot if row[c] in "█▇▆▅▄▃▂▁•") for c in range(60)]
    mode = F * math.exp(-0.5 * S * S) * math.exp(-S * S)  # lognormal mode = scale*exp(-s^2) [C]
    top = [c for c, h in enumerate(heights) if h == max(heights)]
    assert min(abs(c - expected_col(mode, 60)) for c in top) <= 1


def test_ascii_mode_is_pure_ascii():
    r = draw(ascii_only=True)
    for line in r.plain:
        assert line.isascii(), line
    axis = r.plain[H - 2]
    assert axis[expected_col(90.0)] == "^" and axis[expected_col(F)] == "F"
    assert "#" in "".join(r.plain) and "=" in "".join(r.plain) and "o" in "".join(r.plain[1:])


def test_negative_density_is_drawn_as_zero_with_a_note():
    market = MARKET.copy()
    dip = (K > 118) & (K < 124)
    market[dip] = -0.002
    r = draw(density=market, highlight_strike=None)
    assert NEGATIVE_NOTE in r.plain[1]
    assert r.notes == [NEGATIVE_NOTE]
    c = expected_col(121.0)
    assert r.plain[H - 3][c] in " •┆"  # no bar where the density is negative


def test_bad_inputs_do_not_crash():
    nan = float("nan")
    for kwargs in (dict(forward=nan), dict(sigma_sqrt_t=nan), dict(sigma_sqrt_t=-1.0),
                   dict(highlight_strike=nan), dict(p_beyond=nan), dict(width=5, height=3),
                   dict(width=0, height=0)):
        r = draw(**kwargs)
        assert len(r.lines) == kwargs.get("height", H)
        assert "nan" not in "".join(r.plain).lower()
    r = draw_distribution([], [], [], forward=F, sigma_sqrt_t=S, width=30, height=6)
    assert "no distribution" in r.plain[0]


def test_widget_redraws_for_new_inputs_and_size():
    class PlotApp(App):
        def compose(self) -> ComposeResult:
            yield DistributionPlot(theme=THEME)

    async def main():
        app = PlotApp()
        async with app.run_test(size=(60, 16)) as pilot:
            plot = app.query_one(DistributionPlot)
            await pilot.pause()
            assert "no expiry" in plot.last_result.plain[0]
            plot.update_plot(K, MARKET, FLAT, forward=F, sigma_sqrt_t=S, highlight_strike=90.0,
                             highlight_kind="put", p_beyond=0.081)
            await pilot.pause()
            assert plot.last_result.plot_width == 60 and len(plot.last_result.lines) == 16
            await pilot.resize_terminal(90, 24)
            await pilot.pause()
            assert plot.last_result.plot_width == 90 and len(plot.last_result.lines) == 24
            plot.set_highlight(112.0, "call", 0.2)
            await pilot.pause()
            assert "112 call  P(beyond) 20.0%" in plot.last_result.plain[0]
    asyncio.run(main())
