"""No "nan", "inf" or traceback on any screen, for every expiry of the demo chains and of
edge-case chains: an expiry today with minutes left, calls only, a single strike,
no strike quoted on both sides. Product rule [C]: a missing figure shows as a
placeholder, never as a Python float's name.
"""

from __future__ import annotations

import html
import re

import textual.app

from chaintriage.core.loading import load_files

from .abuse_support import quick_idle
from .app_support import demo_views, make_app, run

BAD = re.compile(r"\b(nan|NaN|NAN|inf|Inf|INF|infinity|Infinity|None|Traceback)\b")
AS_OF = "2026-03-02T15:52:00-05:00"  # eight minutes before the close


def _mid(k: float, kind: str, width: float, spot: float = 100.0) -> float:
    c = max(spot - k, 0) + width * 2.5 * 2.718 ** (-((k - spot) / (12 * width)) ** 2)
    return max(c if kind == "call" else c - (spot - k), 0.06)


def edge_chain(path, underlying: str = "EDGQ") -> str:
    """Presentation data for odd shapes (not a correctness fixture)."""
    rows = []

    def add(expiry, k, kind, width):
        m = _mid(k, kind, width)
        rows.append(f"{underlying},{AS_OF},100,{expiry},{k},{kind},{m - 0.05:.2f},{m + 0.05:.2f},50")

    for k in range(90, 111, 5):  # today, minutes left
        add("2026-03-02", k, "call", 0.2)
        add("2026-03-02", k, "put", 0.2)
    for k in range(85, 116, 5):  # calls only
        add("2026-03-06", k, "call", 0.6)
    add("2026-03-13", 100, "call", 0.9)  # a single strike
    add("2026-03-13", 100, "put", 0.9)
    for k in range(80, 121, 5):  # no strike quoted on both sides
        add("2026-03-20", k, "call" if k >= 100 else "put", 1.2)
    add("2026-03-27", 105, "put", 1.4)  # one contract alone
    with open(path, "w", encoding="utf-8") as fh:
        fh.write("underlying,as_of,spot,expiry,strike,kind,bid,ask,open_interest\n" + "\n".join(rows) + "\n")
    return str(path)


def calls_only_chain(path) -> str:
    rows = [f"CALQ,{AS_OF},100,{e},{k},call,{_mid(k, 'call', w) - 0.05:.2f},{_mid(k, 'call', w) + 0.05:.2f},10"
            for e, w in (("2026-03-20", 1.0), ("2026-04-17", 1.6)) for k in range(80, 121, 5)]
    with open(path, "w", encoding="utf-8") as fh:
        fh.write("underlying,as_of,spot,expiry,strike,kind,bid,ask,open_interest\n" + "\n".join(rows) + "\n")
    return str(path)


def screen_words(app) -> str:
    """The text of the whole rendered screen (from Textual's SVG screenshot: the <text> runs)."""
    svg = app.export_screenshot()
    runs = re.findall(r"<text[^>]*>(.*?)</text>", svg, flags=re.DOTALL)
    return "\n".join(html.unescape(re.sub(r"<[^>]+>", "", r)) for r in runs)


async def walk(app, pilot) -> int:
    """Every expiry of every snapshot, on the main screen and the screens over it; returns screens read."""
    read = 0
    for v in range(len(app.state.views)):
        app.triage.show_view(v)
        for i in range(len(app.state.view.expiries)):
            app.state.expiry_positions[v] = i
            app.triage.show_expiry()
            await pilot.pause()
            for keys in ((), ("end", "right"), ("home", "plus", "plus", "plus", "plus")):
                await pilot.press(*keys)
                words = screen_words(app)
                assert not BAD.search(words), (app.state.view.label, app.state.current_expiry, BAD.search(words), words)
                read += 1
            await pilot.press("minus", "minus", "minus", "minus", "m", "c")
    for keys in (("s",), ("e",), ("question_mark",)):
        await pilot.press(*keys)
        await pilot.pause()
        words = screen_words(app)
        assert not BAD.search(words), (keys, words)
        await pilot.press("escape")
        read += 1
    return read


def test_every_expiry_of_the_edge_chains_reads_cleanly(tmp_path, monkeypatch):
    monkeypatch.setattr(textual.app, "wait_for_idle", quick_idle)
    result = load_files([edge_chain(tmp_path / "edge.csv"), calls_only_chain(tmp_path / "calls.csv")])
    assert len(result.snapshots) == 2, [str(e) for e in result.errors]
    app = make_app(snapshots=result.snapshots)

    async def scenario(pilot):
        assert [v.snapshot.underlying for v in app.state.views] == ["CALQ", "EDGQ"] or \
            [v.snapshot.underlying for v in app.state.views] == ["EDGQ", "CALQ"], app.state.file_errors
        assert sum(len(v.expiries) for v in app.state.views) >= 6
        assert await walk(app, pilot) > 15

    run(app, scenario, size=(120, 40))


def test_every_expiry_of_the_demo_chains_reads_cleanly(monkeypatch):
    monkeypatch.setattr(textual.app, "wait_for_idle", quick_idle)
    app = make_app(views=demo_views())

    async def scenario(pilot):
        assert await walk(app, pilot) > 30

    run(app, scenario, size=(200, 50))
