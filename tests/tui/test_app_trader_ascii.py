"""ASCII drawing as a trader on a plain terminal sees it: every character on every screen is
ASCII, the plot's one-vol dots never cut a hole in the market bars, and the copied summary
writes the sigma distance with a word, not an "s" that reads as seconds [D]."""

from __future__ import annotations

import asyncio
import html
import re


from chaintriage.tui.strike_summary import summarize
from chaintriage.tui.widgets.distribution_plot import draw_distribution

from .app_support import make_app, wait_ready
from .test_distribution_plot import FLAT, K, MARKET, THEME, F, S


def screen_chars(app) -> set[str]:
    svg = app.export_screenshot()
    runs = re.findall(r"<text[^>]*>(.*?)</text>", svg, flags=re.DOTALL)
    text = "".join(html.unescape(re.sub(r"<[^>]+>", "", r)) for r in runs).replace("\xa0", " ")
    return {ch for ch in text if not (32 <= ord(ch) < 127 or ch == "\n")}


def test_ascii_mode_draws_every_screen_in_ascii(config_home):
    app = make_app()

    async def main():
        async with app.run_test(size=(80, 24), notifications=True) as pilot:
            await wait_ready(app, pilot)
            await pilot.press("a", "c", "m")  # ASCII on; a notice; a shortlisted contract
            await pilot.pause(0.3)
            seen = {}
            for keys in ((), ("e",), ("escape", "s"), ("escape", "question_mark"), ("escape", "o"),
                         ("escape", "f"), ("escape", "v"), ("end",)):
                await pilot.press(*keys)
                await pilot.pause(0.2)
                seen[(keys, type(app.screen).__name__)] = screen_chars(app)
            assert all(not chars for chars in seen.values()), {k: v for k, v in seen.items() if v}

    asyncio.run(main())


def test_ascii_plot_dots_never_replace_bar_cells():
    # The market curve is wider: in its tails the one-vol dots fall inside the market bars.
    flat = FLAT
    r = draw_distribution(K, MARKET, flat, forward=F, sigma_sqrt_t=S, colors=THEME, width=60, height=16,
                          ascii_only=True)
    rows = [line.plain for line in r.lines]
    bottom = max(i for i, row in enumerate(rows) if set(row) & set("#="))
    legend = [i for i, row in enumerate(rows) if "market" in row]
    first = (legend[0] + 1) if legend and legend[0] < bottom else 0
    plot = rows[first:bottom + 1]
    gaps = 0
    for c in range(len(rows[bottom])):
        column = "".join(row[c] if len(row) > c else " " for row in plot)
        filled = column.rstrip()
        start = len(filled) - len(filled.lstrip(" o.:|"))
        body = filled[start:]
        if "#" in body or "=" in body:
            bar = body[body.find("#") if "#" in body else body.find("="):]
            gaps += any(ch not in "#=" for ch in bar)
    assert gaps == 0
    assert any("o" in row for row in plot)  # the dots that lie above the bars are still drawn


def test_copied_summary_in_ascii_writes_sigma_as_a_word():
    row = dict(underlying="OSPX", expiry="2026-12-04", strike=295.0, kind="call", mid=5.525, iv=0.354,
               sigma_distance=-0.1281, p_beyond=0.619, p_touch=0.907, breakeven=300.525)
    text = summarize(row, as_of="2026-12-01T14:30:00-05:00", ascii_only=True)
    assert text.isascii()
    assert not re.search(r"\d s\b|\ds\b", text), text
    assert "0.13 sigmas below the forward" in text
