"""The target view (r): one row per expiry, the contract nearest a target, and its keys.

The selection itself is core's (tests/core/test_targets.py); here the screen must show
core's rows, its economics must agree with the distribution they come from, and its keys
must change the target, the side, the strike and open the ladder.
"""

from __future__ import annotations

import asyncio
import math

import numpy as np
import pandas as pd
import pytest

from chaintriage.core.distribution import prob_above, trapezoid
from chaintriage.core.findings import ChainTriageError
from chaintriage.core.targets import Target, select_targets
from chaintriage.tui import formatting as fm
from chaintriage.tui.screens.target_view import (
    TARGET_VIEW_COLUMNS,
    view_columns,
    TargetViewScreen,
    describe_target,
    format_rows,
    parse_target_value,
    step_target,
    target_figures,
)

from .app_support import demo_views, make_app, run

TARGETS = [Target("puts", "sigma", 1.5), Target("calls", "sigma", 0.5), Target("puts", "delta", 0.16),
           Target("calls", "delta", 0.30), Target("puts", "beyond", 0.10), Target("calls", "beyond", 0.05)]
KEYS = [c.key for c in TARGET_VIEW_COLUMNS]


def cell(rows, i: int, key: str) -> str:
    return rows[i][KEYS.index(key)]


@pytest.mark.parametrize("target", TARGETS, ids=str)
def test_rows_are_cores_selection(target):
    """[D] The view's rows are core.targets.select_targets' rows, one per expiry, formatted."""
    for view in demo_views():
        a = view.annotated
        core = select_targets(a.contracts, a.expiries, target)
        shown = target_figures(view, target)
        assert len(shown) == len(view.expiries) == len(core)
        assert (shown["row"].to_numpy() == core["row"].to_numpy()).all()
        rows = format_rows(shown)
        strikes = core["strike"].to_numpy(dtype=float)
        decimals = fm.strike_decimals(strikes[np.isfinite(strikes)])
        for i in range(len(core)):
            assert cell(rows, i, "expiry") == fm.fmt_date(core["expiry"].iloc[i])
            assert cell(rows, i, "strike") == fm.fmt_strike(strikes[i], decimals)
            assert cell(rows, i, "p_profit_sell") == fm.fmt_prob(core["p_profit_sell"].iloc[i])
            assert cell(rows, i, "return_sell_annual") == fm.fmt_return(core["return_sell_annual"].iloc[i])


@pytest.mark.parametrize("side", ["calls", "puts"])
def test_nearest_by_delta_read_from_the_expiry_ladder(side):
    """[D] Each row's contract is the one of its side whose |delta| is nearest the target in that
    expiry's own contracts (read straight from the ladder's frame, not through the selector)."""
    view = demo_views()[0]
    target = Target(side, "delta", 0.16)
    shown = target_figures(view, target)
    kind = side[:-1]
    for pos, expiry in enumerate(view.expiries):
        frame = view.frame(expiry)
        frame = frame[frame["kind"] == kind]
        miss = (frame["delta"].abs() - 0.16).abs()
        if not miss.notna().any():
            assert shown["row"].iat[pos] == -1
            continue
        best = miss.min()
        nearest = frame.loc[miss <= best + 1e-12, "strike"].min()  # a tie goes to the lower strike
        assert shown["strike"].iat[pos] == nearest


def test_profit_chance_is_the_chance_beyond_the_breakeven():
    """[D] identity: P(profit) at the executable price = P(finishing beyond the breakeven) from the
    expiry's distribution. A put seller at the bid profits above K - bid, a put buyer at the ask
    below K - ask (calls mirrored). Checked two ways: core's closed-form digital of the smile, and
    the Breeden-Litzenberger density integrated beyond the breakeven (trapezoid, fine grid)."""
    checked = 0
    for view in demo_views():
        for target in (Target("puts", "sigma", 1.0), Target("calls", "delta", 0.25)):
            table = target_figures(view, target)
            is_call = target.side == "calls"
            for pos, expiry in enumerate(view.expiries):
                row = table.iloc[pos]
                res = view.annotated.results.get(expiry)
                if row["row"] < 0 or res is None or res.smile is None:
                    continue
                k, bid, ask = row["strike"], row["bid"], row["ask"]
                be_sell = k + bid if is_call else k - bid
                be_buy = k + ask if is_call else k - ask
                assert row["breakeven_sell"] == pytest.approx(be_sell, abs=1e-12)
                assert row["breakeven_buy"] == pytest.approx(be_buy, abs=1e-12)
                up_sell = float(prob_above(res.smile, res.forward, be_sell))
                up_buy = float(prob_above(res.smile, res.forward, be_buy))
                want_sell = 1.0 - up_sell if is_call else up_sell
                want_buy = up_buy if is_call else 1.0 - up_buy
                assert row["p_profit_sell"] == pytest.approx(want_sell, abs=1e-12)
                assert row["p_profit_buy"] == pytest.approx(want_buy, abs=1e-12)
                dist = view.annotated.distribution(expiry, n=4001)
                x, f = dist.strikes, dist.density
                for be, p in ((be_sell, want_sell), (be_buy, want_buy)):
                    if not x[0] < be < x[-1]:
                        continue
                    above = x > be
                    xs = np.concatenate([[be], x[above]])
                    fs = np.concatenate([[np.interp(be, x, f)], f[above]])
                    mass_above = trapezoid(fs, xs)
                    if be is be_sell:
                        density_p = 1.0 - mass_above if is_call else mass_above
                    else:
                        density_p = mass_above if is_call else 1.0 - mass_above
                    assert density_p == pytest.approx(p, abs=3e-3)
                checked += 1
    assert checked >= 30


def test_return_figures_by_hand_on_one_contract():
    """[D] The seller's return on one named contract, by hand: a cash-secured put earns
    bid / (strike - bid), annualised simply x 365 / days; premium per day = bid / days, with days
    the ACT/365 time to the expiry's settlement in days (fractional: the shown whole days round it)."""
    from chaintriage.core.time_to_expiry import year_fraction

    view = demo_views()[0]
    table = target_figures(view, Target("puts", "sigma", 1.0))
    row = table.iloc[3]
    k, bid = row["strike"], row["bid"]
    settle = view.annotated.contracts["settle"].iat[int(row["row"])] if "settle" in view.annotated.contracts \
        else "pm"
    days = 365.0 * float(year_fraction(view.snapshot.as_of, [row["expiry"]], settle, basis="365")[0])
    assert abs(days - row["calendar_days"]) < 1.0
    assert row["return_sell"] == pytest.approx(bid / (k - bid), rel=1e-12)
    assert row["return_sell_annual"] == pytest.approx(bid / (k - bid) * 365.0 / days, rel=1e-12)
    assert row["premium_per_day_sell"] == pytest.approx(bid / days, rel=1e-12)
    rows = format_rows(table)
    assert cell(rows, 3, "return_sell_annual") == fm.fmt_return(bid / (k - bid) * 365.0 / days)
    assert cell(rows, 3, "quote") == f"{fm.fmt_price(bid)} × {fm.fmt_price(row['ask'])}"


def test_the_measure_column_follows_the_quote():
    for measure, key in (("sigma", "sigma_distance"), ("delta", "delta"), ("beyond", "p_beyond")):
        keys = [c.key for c in view_columns(measure)]
        assert keys[keys.index("quote") + 1] == key
        assert sorted(keys) == sorted(KEYS)  # every column still there, once


def test_typed_values_and_steps():
    assert parse_target_value("sigma", "1.5") == 1.5
    assert parse_target_value("sigma", "-0.5") == -0.5
    assert parse_target_value("delta", "0.16") == 0.16
    assert parse_target_value("beyond", "10%") == pytest.approx(0.10)
    assert parse_target_value("beyond", "12.5") == pytest.approx(0.125)
    for measure, text, words in (("sigma", "1,5", "comma"), ("delta", "1.5", "at most"),
                                 ("delta", "0", "from"), ("beyond", "100", "from"), ("sigma", "51", "at most"),
                                 ("sigma", "abc", "not a number"), ("delta", "", "type a value"),
                                 ("beyond", "-5", "zero or more"), ("sigma", "1e3", "not a number")):
        with pytest.raises(ChainTriageError, match=words):
            parse_target_value(measure, text)
    assert step_target(Target("puts", "sigma", 1.0), 1).value == 1.25
    assert step_target(Target("puts", "delta", 0.16), -1).value == pytest.approx(0.15)
    assert step_target(Target("puts", "delta", 0.01), -1).value == pytest.approx(0.01)  # held at its end
    assert step_target(Target("calls", "beyond", 0.99), 1).value == pytest.approx(0.99)
    assert describe_target(Target("puts", "sigma", -0.5)) == "puts nearest 0.5σ in the money"
    assert describe_target(Target("calls", "beyond", 0.1), 2) == "calls nearest P(beyond) 10%, then 2 strikes up"


def _table_text(screen) -> list[str]:
    from chaintriage.tui.widgets.line_table import LineTable

    return screen.query_one("#target-table", LineTable).lines_text()[1:]


def test_keys_change_target_side_strike_and_open_the_ladder():
    app = make_app()

    async def scenario(pilot) -> None:
        app.triage.grid.action_select_side("put")
        await pilot.press("r")
        await pilot.pause()
        screen = app.screen
        assert isinstance(screen, TargetViewScreen)
        assert screen.target == Target("puts", "sigma", 1.0)
        view = app.state.view
        assert len(_table_text(screen)) == len(view.expiries)
        await pilot.press("2")
        assert screen.target == Target("puts", "delta", 0.16)
        await pilot.press("plus", "plus")
        assert screen.target.value == pytest.approx(0.18)
        await pilot.press("left")
        assert screen.target.side == "calls"
        core = select_targets(view.annotated.contracts, view.annotated.expiries, screen.target)
        assert (screen.table["row"].to_numpy() == core["row"].to_numpy()).all()
        await pilot.press("3", "v")
        await pilot.pause()
        await pilot.press(*"20", "enter")  # the prompt starts with the current value, selected: typing replaces it
        await pilot.pause()
        assert screen.target == Target("calls", "beyond", 0.20)
        await pilot.press("full_stop")
        shifted = select_targets(view.annotated.contracts, view.annotated.expiries, screen.target, shift=1)
        assert (screen.table["row"].to_numpy() == shifted["row"].to_numpy()).all()
        assert "1 strike up" in str(screen.query_one("#target-line").content)
        await pilot.press("home", "j", "j", "m")
        await pilot.pause()
        assert len(app.state.shortlist) == 1
        entry = app.state.shortlist.entries[0]
        assert entry.key.strike == screen.table["strike"].iat[2] and entry.key.kind == "call"
        assert entry.figures["spot"] == view.snapshot.spot
        assert entry.figures["forward"] == view.info(2, app.state.confidence).forward
        contract = view.annotated.contracts.iloc[int(screen.table["row"].iat[2])]
        for name in ("p_profit_sell", "p_profit_buy", "breakeven_sell", "breakeven_buy"):
            assert entry.figures[name] == contract[name]
        csv_lines = app.state.shortlist.to_csv_text().splitlines()
        header, values = csv_lines[0].split(","), csv_lines[1].split(",")
        assert float(values[header.index("p_profit_sell")]) == pytest.approx(contract["p_profit_sell"], rel=1e-9)
        assert float(values[header.index("forward")]) == pytest.approx(entry.figures["forward"], rel=1e-9)
        assert _table_text(screen)[2].lstrip().startswith("●")
        expiry, strike = view.expiries[2], screen.table["strike"].iat[2]
        await pilot.press("enter")
        await pilot.pause()
        assert app.screen is app.triage
        assert app.state.current_expiry == expiry
        assert app.triage.grid.highlighted == (strike, "call")
        await pilot.press("r")  # opens again at the last target, on the ladder's expiry
        await pilot.pause()
        assert app.screen.target == Target("calls", "beyond", 0.20)
        assert app.screen.query_one("#target-table").cursor_row == 2
        await pilot.press("escape")
        await pilot.pause()
        assert app.screen is app.triage

    run(app, scenario)


@pytest.mark.parametrize("size", [(80, 24), (200, 50)])
def test_readable_at_both_sizes(size):
    """At 80x24 the expiry, days, strike, quote, delta and P(beyond) are on screen, the caution is
    there and the target line is one line; touch figures get filled in while the view is open."""
    app = make_app()

    async def scenario(pilot) -> None:
        await pilot.press("r")
        await pilot.pause(0.5)
        screen = app.screen
        for _ in range(100):
            if not screen._touch_queue:
                break
            await pilot.pause(0.05)
        await pilot.pause()
        text = "\n".join(str(screen.query_one(f"#{n}").content) for n in ("target-line", "target-caution"))
        assert "risk-neutral" in text and "commissions" in text
        shot = app.export_screenshot()
        for heading in ("expiry", "days", "strike", "bid", "delta", "beyond"):
            assert heading in shot
        assert np.isfinite(screen.table["p_touch"].to_numpy(dtype=float)).sum() >= len(screen.table) - 1

    run(app, scenario, size=size)


def test_copy_from_the_view_and_ascii_drawing():
    """c copies the row's contract summary (its strike and expiry in it); ASCII mode draws ASCII only."""
    from .app_support import wait_copied

    app = make_app()

    async def scenario(pilot) -> None:
        await pilot.press("a", "r")  # ASCII drawing first
        await pilot.pause()
        screen = app.screen
        assert all(line.isascii() for line in _table_text(screen))
        assert str(screen.query_one("#target-line").content).isascii()
        await pilot.press("home", "j", "c")
        await wait_copied(app, pilot)
        text = app._system_clipboard.texts[-1]
        row = screen.table.iloc[1]
        assert fm.fmt_strike(row["strike"]) in text and fm.fmt_date(row["expiry"], ascii_only=True) in text

    run(app, scenario)
