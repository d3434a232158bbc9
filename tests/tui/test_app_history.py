"""The price history in the app: `open --history`, the history screen (h), the path pane (p),
the ex-event view (n) and the ladder's history columns.

The screen is read against core's own output for the same inputs (the screen only shows core's
numbers: consistency [D]); the ex-event P(beyond) against scipy.stats.norm's Black-76 digital at
the ex-event vol [L] (N(d2), Hull Ex.15.6's formula, REFERENCE.md s.1).
"""

from __future__ import annotations

import math
import os

import numpy as np
import pandas as pd
import pytest
from scipy.stats import norm

from chaintriage.core.history_compare import HistorySettings, summarise_history
from chaintriage.tui import formatting as fm
from chaintriage.tui.cli import main as cli

from .app_support import DEMO_DIR, bar, make_app, notes, run

WIDE = (200, 50)


async def _wait(pilot, test, timeout: float = 20.0) -> None:
    loop = __import__("asyncio").get_running_loop()
    end = loop.time() + timeout
    while loop.time() < end:
        if test():
            return
        await pilot.pause(0.05)
    raise AssertionError("timed out")


def _goto(app, expiry: str) -> None:
    view = app.state.view
    app.state.expiry_positions[app.state.view_index] = view.expiry_index(pd.Timestamp(expiry))
    app.triage.show_expiry()


def _show_ospx(app) -> None:
    i = next(i for i, v in enumerate(app.state.views) if v.snapshot.underlying == "OSPX")
    app.triage.show_view(i)


def test_demo_opens_with_its_histories_and_h_p_n_work():
    from chaintriage.tui.screens.history import HistoryScreen

    app = make_app(views=None, paths=())  # the loading path: the demo chains and the demo histories

    async def scenario(pilot):
        views = app.state.views
        assert {v.snapshot.underlying for v in views} == {"OSPX", "TSBH"}
        assert all(v.history is not None for v in views)
        _show_ospx(app)
        view = app.state.view
        vh = view.history
        _goto(app, "2027-01-15")
        await pilot.pause()
        # the expiry line: RV over the matched window and IV/RV, as core computed them
        window, rv, ratio = vh.expiry_figures(app.state.expiry_pos)
        line = bar(app, "expirybar")
        assert f"RV {window}d {fm.fmt_vol(rv)}" in line and f"IV/RV {ratio:.2f}" in line

        # h: the estimators by window, as summarise_history gives them for the same bars
        await pilot.press("h")
        await pilot.pause(0.2)
        assert isinstance(app.screen, HistoryScreen)
        table = str(app.screen.query_one("#history-estimators").render())
        summ = summarise_history(vh.history, HistorySettings(basis="252"))
        for est, name in (("close_to_close", "close-to-close"), ("yang_zhang", "Yang-Zhang")):
            assert name in table
            assert fm.fmt_vol(summ.realised.vol.loc[21, est]) in table
        cone = str(app.screen.query_one("#history-cone").render())
        assert "trading days (log scale)" in cone and "●" in cone
        assert "not a forecast" in str(app.screen.query_one("#history-cautions").render())
        past = str(app.screen.query_one("#history-past-moves").render())
        moves = vh.past_moves
        assert moves.used == 8 and f"mean |move| {100 * moves.mean_abs:.1f}%" in past
        assert f"{100 * moves.table['move'].iat[0]:+6.1f}%" in past
        await pilot.press("escape")
        await pilot.pause(0.1)

        # n: P(beyond) on the ex-event vol where the expiry carries the event
        strike, kind = app.triage.grid.highlighted
        market = app.triage.grid.highlighted_contract()["p_beyond"]
        await pilot.press("n")
        await pilot.pause(0.1)
        assert "EX-EVENT VIEW" in bar(app, "expirybar")
        row = view.expiry_table.iloc[app.state.expiry_pos]
        ex_vol = view.info(app.state.expiry_pos, app.state.confidence).ex_event_vol
        assert 0.2 < ex_vol < row["atm_iv"]
        f, t = row["forward"], row["t_years"]
        d2 = (math.log(f / strike) - 0.5 * ex_vol**2 * t) / (ex_vol * math.sqrt(t))
        want = norm.cdf(d2) if kind == "call" else norm.cdf(-d2)
        assert app.triage.grid.highlighted_contract()["p_beyond"] == pytest.approx(want, rel=1e-12)
        assert "range on ex-event vol" in bar(app, "expirybar")
        # what is shortlisted (and copied) keeps the market's figure
        await pilot.press("m")
        await pilot.pause(0.1)
        (entry,) = list(app.state.shortlist)
        assert entry.figures["p_beyond"] == market
        await pilot.press("m")
        _goto(app, "2026-12-11")  # before the event: figures as they are
        await pilot.pause()
        assert "carries no event" in bar(app, "expirybar")
        _goto(app, "2027-01-15")
        await pilot.press("n")
        await pilot.pause(0.1)
        assert "EX-EVENT VIEW" not in bar(app, "expirybar")
        assert app.triage.grid.highlighted_contract()["p_beyond"] == market

        # p: the path fan, simulated off the screen's thread, then drawn with the strike's odds
        await pilot.press("p")
        await _wait(pilot, lambda: pd.Timestamp("2027-01-15") in vh.fans and app.triage.plot.last_result
                    and "paths:" in app.triage.plot.last_result.plain[0])
        await pilot.pause(0.1)
        fan = vh.fans[pd.Timestamp("2027-01-15")]
        assert fan.paths == 100_000 and fan.steps == int(row["trading_days"])
        text = "\n".join(app.triage.plot.last_result.plain)
        strike, kind = app.triage.grid.highlighted
        p, se = fan.p_beyond(strike, kind == "call")
        assert f"hist {100 * p:.1f}%±{100 * se:.1f}" in text
        assert "history is not a forecast" in text
        lo, hi = fan.central_range(app.state.confidence)
        assert f"{fm.fmt_level(lo)}–{fm.fmt_level(hi)}" in text
        await pilot.press("k")  # another strike: the same fan, the new strike's odds
        await pilot.pause(0.1)
        strike2, kind2 = app.triage.grid.highlighted
        p2, se2 = fan.p_beyond(strike2, kind2 == "call")
        assert f"hist {100 * p2:.1f}%±{100 * se2:.1f}" in "\n".join(app.triage.plot.last_result.plain)
        await pilot.press("p")
        await pilot.pause(0.1)
        assert "paths:" not in app.triage.plot.last_result.plain[0]

        # plain ASCII drawing: the path pane and the history screen keep to ASCII
        await pilot.press("a")
        await pilot.press("p")
        await pilot.pause(0.2)
        text = "\n".join(app.triage.plot.last_result.plain)
        assert "paths:" in text and text.isascii()
        await pilot.press("p")
        await pilot.press("h")
        await pilot.pause(0.2)
        for part in ("#history-estimators", "#history-cone", "#history-legend", "#history-expiries"):
            assert str(app.screen.query_one(part).render()).isascii(), part
        await pilot.press("escape")
        await pilot.press("a")
        await pilot.pause(0.1)

        # the column picker's history columns show core's comparison figures
        app.set_columns(["bid", "ask", "p_beyond", "hist_p_beyond", "boot_p_beyond", "boot_p_beyond_se"])
        await pilot.pause(0.1)
        heads = "\n".join(app.triage.grid.render_lines_text()[:4])
        assert "RV bey" in heads and "boot" in heads
        c = app.triage.grid.highlighted_contract()
        hist = vh.comparison.contracts
        con = view.annotated.contracts
        sel = (con["expiry"] == pd.Timestamp("2027-01-15")) & (con["strike"] == strike2) & (con["kind"] == kind2)
        assert c["hist_p_beyond"] == hist.loc[sel, "hist_p_beyond"].iat[0]
        assert c["boot_p_beyond_se"] == hist.loc[sel, "boot_p_beyond_se"].iat[0] > 0

    run(app, scenario, size=WIDE)


def test_open_with_a_history_file_and_its_findings(tmp_path):
    src = os.path.join(DEMO_DIR, "history", "ospx_history.csv")
    lines = open(src, encoding="utf-8").read().splitlines()
    lines.insert(5, "OSPX,2022-12-07,1,1,1,-5,100")  # a non-positive close: left out, named by line
    hist = tmp_path / "ospx_prices.csv"
    hist.write_text("\n".join(lines) + "\n", encoding="utf-8")
    chain = os.path.join(DEMO_DIR, "ospx_2026-12-01.csv")
    app = make_app(views=None, paths=[chain], histories=[str(hist)])

    async def scenario(pilot):
        view = app.state.view
        assert view.history is not None and view.history.history.source.endswith("ospx_prices.csv")
        found = [f for f in view.findings() if f.file and f.file.endswith("ospx_prices.csv")]
        assert found and found[0].line == 6 and found[0].severity == "left-out"
        # and the findings screen lists it (grouped with its line)
        await pilot.press("e")
        await pilot.pause(0.2)
        groups = view.finding_groups()
        assert any(g.file and g.file.endswith("ospx_prices.csv") for g in groups)
        await pilot.press("escape")
        await pilot.pause(0.1)
        # no events given: no past moves, and n says why it does nothing
        assert view.history.past_moves is None
        await pilot.press("n")
        await pilot.pause(0.1)
        assert any("no expiry of this snapshot carries" in n for n in notes(app))

    run(app, scenario, size=WIDE)


def test_without_a_history_h_and_p_say_so():
    app = make_app(views=None, paths=[os.path.join(DEMO_DIR, "tsbh_2026-12-01.csv")])

    async def scenario(pilot):
        assert app.state.view.history is None
        await pilot.press("h")
        await pilot.pause(0.1)
        assert any("no price history" in n for n in notes(app))
        await pilot.press("p")
        await pilot.pause(0.1)
        assert "no price history" in app.triage.plot.last_result.plain[0]
        assert "RV " not in bar(app, "expirybar")

    run(app, scenario, size=WIDE)


def test_open_command_passes_the_histories(monkeypatch, tmp_path, capsys):
    import chaintriage.tui.app as app_module

    seen = {}

    def fake_open_app(paths, **kwargs):
        seen.update(kwargs, paths=paths)
        return 0

    monkeypatch.setattr(app_module, "open_app", fake_open_app)
    chain = os.path.join(DEMO_DIR, "ospx_2026-12-01.csv")
    hist = os.path.join(DEMO_DIR, "history", "ospx_history.csv")
    assert cli.main(["open", chain, "--history", hist]) == 0
    assert seen["histories"] == [hist] and seen["paths"] == [chain]
    assert cli.main(["open", chain]) == 0
    assert seen["histories"] is None  # none given: the app decides (the demo's only for the demo)
    assert cli.main(["open", chain, "--history", str(tmp_path / "missing.csv")]) == 2
    assert "no such history file" in capsys.readouterr().err
