"""The triage screen through Textual's pilot: expiries, snapshots, ladder keys, what is shown.

The figures on screen are checked against core's own ``annotate`` output for the
same contract (consistency [D]: the screen must show what core computed), and
the ranges against ``range_flat`` / ``range_smile`` called directly [D]. The
demo chains are invented data: they are used here to drive the screen, not to
prove any figure right.
"""

from __future__ import annotations

import re

import numpy as np
import pandas as pd
import pytest

from chaintriage.core.distribution import range_flat, range_smile
from chaintriage.tui import formatting as fm
from chaintriage.tui.screens.triage import TriageScreen
from chaintriage.tui.help_text import KEYS
from chaintriage.tui.strike_summary import summarize

from .app_support import bar, demo_annotated, make_app, notes, run

BAR = "│"


def grid_row(app, strike: float) -> str:
    """The rendered ladder line of ``strike`` (the grid must show it)."""
    for line in app.triage.grid.render_lines_text():
        parts = line.split(BAR)
        if len(parts) == 3 and parts[1].strip() and _num(parts[1]) == strike:
            return line
    raise AssertionError(f"strike {strike} not on screen")


def _num(text: str) -> float | None:
    try:
        return float(text.strip())
    except ValueError:
        return None


def cells(side: str) -> list[str]:
    return side.replace("●", " ").replace("▸", " ").replace("◂", " ").split()


def contract(annotated, expiry: str, strike: float, kind: str) -> pd.Series:
    c = annotated.contracts
    row = c[(c["expiry"] == pd.Timestamp(expiry)) & (c["strike"] == strike) & (c["kind"] == kind)]
    assert len(row) == 1
    return row.iloc[0]


def goto_expiry(app, expiry: str) -> None:
    view = app.state.view
    app.state.expiry_positions[app.state.view_index] = view.expiry_index(expiry)
    app.triage.show_expiry()


# ---------------------------------------------------------------- opening


def test_demo_opens_on_the_first_expiry_with_the_strike_nearest_the_forward():
    app = make_app(paths=())  # the real path: the bundled demo, loaded and annotated in a worker

    async def scenario(pilot):
        assert [v.snapshot.underlying for v in app.state.views] == ["OSPX", "TSBH"]
        oracle = demo_annotated()[0]
        first = oracle.expiries.iloc[0]
        assert app.state.current_expiry == pd.Timestamp(first["expiry"])
        strikes = app.triage.grid.strikes
        nearest = float(strikes[np.argmin(np.abs(strikes - first["forward"]))])
        assert app.triage.grid.highlighted == (nearest, "call")
        top = bar(app, "topbar")
        assert "OSPX" in top and "snapshot 1/2" in top and "2026-12-01 14:30 -05:00" in top
        assert f"1 of {len(oracle.expiries)}" in bar(app, "expirybar")
        assert "filter off" in bar(app, "filterbar")
        assert app.triage.query_one("#loading").has_class("-hidden")

    run(app, scenario)


def test_expiry_keys_step_through_every_expiry_and_stop_at_the_ends():
    app = make_app()

    async def scenario(pilot):
        expiries = app.state.view.expiries
        seen = [app.state.current_expiry]
        for _ in range(len(expiries) - 1):
            await pilot.press("]")
            seen.append(app.state.current_expiry)
            assert fm.fmt_date(app.state.current_expiry) in bar(app, "expirybar")
            assert app.triage.grid.expiry == app.state.current_expiry
        assert seen == expiries
        await pilot.press("]")
        assert app.state.current_expiry == expiries[-1]
        assert "this is the last expiry" in notes(app)
        await pilot.press("[")
        assert app.state.current_expiry == expiries[-2]

    run(app, scenario)


def test_snapshot_keys_switch_underlying_and_keep_the_nearest_expiry():
    app = make_app()

    async def scenario(pilot):
        await pilot.press("]", "]")
        ospx_expiry = app.state.current_expiry
        await pilot.press("right_curly_bracket")
        assert app.state.view.snapshot.underlying == "TSBH"
        assert "TSBH" in bar(app, "topbar") and "snapshot 2/2" in bar(app, "topbar")
        gaps = [abs((e - ospx_expiry).days) for e in app.state.view.expiries]
        assert app.state.current_expiry == app.state.view.expiries[int(np.argmin(gaps))]
        # another underlying: the highlight starts at its forward, not at the old strike level
        strikes = app.triage.grid.strikes
        assert app.triage.grid.highlighted[0] == float(strikes[np.argmin(np.abs(strikes - app.triage.grid.forward))])
        await pilot.press("left_curly_bracket")
        assert app.state.view.snapshot.underlying == "OSPX"
        assert app.state.current_expiry == ospx_expiry  # each snapshot remembers its expiry

    run(app, scenario)


def test_ladder_keys_move_the_highlight_and_the_plot_follows():
    app = make_app()

    async def scenario(pilot):
        grid = app.triage.grid
        strikes = list(grid.strikes)
        start = strikes.index(grid.highlighted[0])
        await pilot.press("down")
        assert grid.highlighted == (strikes[start + 1], "call")
        await pilot.press("k")
        assert grid.highlighted == (strikes[start], "call")
        await pilot.press("j")
        assert grid.highlighted[0] == strikes[start + 1]
        await pilot.press("right")
        assert grid.highlighted == (strikes[start + 1], "put")
        await pilot.press("home")
        assert grid.highlighted[0] == strikes[0]
        await pilot.press("end")
        assert grid.highlighted[0] == strikes[-1]
        await pilot.press("pageup")
        assert grid.highlighted[0] < strikes[-1]
        await pilot.press("pagedown")
        assert grid.highlighted[0] == strikes[-1]
        await pilot.press("up", "left")
        await pilot.pause()
        title = app.triage.plot.last_result.plain[0]
        k = fm.fmt_strike(strikes[-2])
        p = contract(demo_annotated()[0], fm.fmt_date(app.state.current_expiry), strikes[-2], "call")["p_beyond"]
        assert f"{k} call" in title and f"P(beyond) {fm.fmt_prob(p)}" in title

    run(app, scenario)


# ---------------------------------------------------------------- what the screen shows


def test_one_known_contract_reads_as_core_computed_it():
    oracle = demo_annotated()[0]
    call = contract(oracle, "2026-12-18", 305.0, "call")
    put = contract(oracle, "2026-12-18", 305.0, "put")
    app = make_app()

    async def scenario(pilot):
        goto_expiry(app, "2026-12-18")
        app.triage.grid.cursor_to_strike(305.0, "put")
        await pilot.pause()
        line = grid_row(app, 305.0)
        left, _, right = line.split(BAR)
        assert app.triage.grid.columns == ["bid", "ask", "iv", "sigma", "p_beyond", "p_touch"]
        for side, row in ((cells(left), call), (cells(right), put)):
            assert side == [fm.fmt_price(row["bid"]), fm.fmt_price(row["ask"]), fm.fmt_vol(row["iv"]),
                            fm.fmt_sigma(row["sigma_distance"]), fm.fmt_prob(row["p_beyond"]),
                            fm.fmt_prob(row["p_touch"])]
        # spelled out too, so a formatting slip in both places cannot hide a wrong number
        assert cells(left)[:2] == ["7.05", "7.35"] and cells(right)[:2] == ["15.00", "15.55"]
        await pilot.press("c")
        text = app.clipboard
        exp = oracle.expiries.set_index("expiry").loc[pd.Timestamp("2026-12-18")]
        assert text == summarize(put, as_of=oracle.snapshot.as_of, underlying="OSPX", spot=oracle.snapshot.spot,
                                 forward=exp["forward"], days=exp["calendar_days"])
        assert text.startswith(f"OSPX 305 put, expiry 2026-12-18 ({exp['calendar_days']:.0f} days) | "
                               "bid 15.00 x ask 15.55, mid 15.275 | IV 39.2% |")
        assert "| 0.29 sigmas above the forward | chance OSPX finishes below 305: 59.2% |" in text
        assert f"forward {fm.fmt_level(exp['forward'])} |" in text
        # the header: forward, ATM IV and ranges as core gives them
        res = oracle.results[pd.Timestamp("2026-12-18")]
        head = bar(app, "expirybar")
        lo, hi = range_flat(res.forward, res.atm_iv, res.t_years, app.state.confidence)
        slo, shi = range_smile(res.smile, res.forward, app.state.confidence)
        assert f"fwd {fm.fmt_level(res.forward)}" in head
        assert f"ATM IV {fm.fmt_vol(res.atm_iv)}" in head
        assert f"range {fm.fmt_level(lo)}–{fm.fmt_level(hi)}" in head
        assert f"smile {fm.fmt_level(slo)}–{fm.fmt_level(shi)}" in head
        row = oracle.expiries[oracle.expiries["expiry"] == pd.Timestamp("2026-12-18")].iloc[0]
        assert f"{row['trading_days']} trading / {row['calendar_days']} calendar days" in head
        assert f"fit {100 * row['fit_rmse']:.2f} vol pts" in head

    run(app, scenario)


def test_no_nan_inf_anywhere_on_any_expiry():
    app = make_app()
    bad = re.compile(r"\b(nan|inf|NaN|Inf|None)\b")

    async def scenario(pilot):
        for v in range(len(app.state.views)):
            app.triage.show_view(v)
            for i in range(len(app.state.view.expiries)):
                app.state.expiry_positions[v] = i
                app.triage.show_expiry()
                await pilot.pause()
                texts = app.triage.grid.render_lines_text() + app.triage.plot.last_result.plain
                texts += [bar(app, n) for n in ("topbar", "expirybar", "filterbar")]
                for t in texts:
                    assert not bad.search(t), t

    run(app, scenario)


def test_confidence_keys_cycle_the_levels_and_the_ranges_follow():
    oracle = demo_annotated()[0]
    app = make_app()

    async def scenario(pilot):
        res = oracle.results[app.state.current_expiry]
        assert "68.27% range" in bar(app, "expirybar")
        for key, level in (("plus", "80%"), ("equals_sign", "90%"), ("plus", "95%"), ("plus", "99%")):
            await pilot.press(key)
            assert f"{level} range" in bar(app, "expirybar")
        lo, hi = range_flat(res.forward, res.atm_iv, res.t_years, 0.99)
        assert f"{fm.fmt_level(lo)}–{fm.fmt_level(hi)}" in bar(app, "expirybar")
        await pilot.press("plus")
        assert "99% is the widest range" in notes(app)
        for level in ("95%", "90%", "80%", "68.27%"):
            await pilot.press("minus")
            assert f"{level} range" in bar(app, "expirybar")
        await pilot.press("minus")
        assert app.state.confidence == pytest.approx(0.6826894921370859, abs=1e-15)  # N(1) - N(-1) [L]

    run(app, scenario)


# ---------------------------------------------------------------- keys are coherent


def test_every_documented_screen_key_is_bound_and_every_binding_documented():
    bound = {}
    for b in TriageScreen.BINDINGS:
        for key in b.key.split(","):
            bound[key] = b.action.removeprefix("app.")
    documented = {}
    for k in KEYS:
        if k.context != "screen":
            continue
        actions = [a.strip() for a in k.action.split("/")]
        for i, key in enumerate(k.keys):
            documented[key] = actions[min(i, len(actions) - 1)]
    documented["equals_sign"] = "confidence_up"  # documented in the words of the "+" entry
    assert bound == documented
    for action in set(bound.values()):
        assert hasattr(make_app(), f"action_{action}"), action


def test_open_with_a_confidence_starts_the_range_there():
    from chaintriage.core.pipeline import PipelineSettings

    app = make_app(pipeline_settings=PipelineSettings(confidence=0.95))

    async def scenario(pilot):
        assert app.state.confidence == 0.95 and "95% range" in bar(app, "expirybar")
        await pilot.press("plus")
        assert "99% range" in bar(app, "expirybar")

    run(app, scenario)


def test_q_closes_a_screen_and_then_quits():
    app = make_app()

    async def scenario(pilot):
        for key in ("question_mark", "e", "s"):
            await pilot.press(key)
            assert app.screen is not app.triage
            await pilot.press("q")  # q on a screen closes it, it does not quit
            assert app.screen is app.triage
        await pilot.press("q")
        await pilot.pause()

    run(app, scenario)
    assert app.return_code == 0


def test_greek_and_trade_columns_read_as_core_computed_them(config_home):
    """[D] the picker's new columns show core's gamma, theta, vega, P(profit) both ways, premium per day,
    annualised return and edge share for the contract on the ladder (four at a time, to fit the width)."""
    oracle = demo_annotated()[0]
    call = contract(oracle, "2026-12-18", 305.0, "call")
    put = contract(oracle, "2026-12-18", 305.0, "put")
    app = make_app()
    shown = {
        ("gamma", "theta", "vega", "p_profit_sell"):
            lambda r: [fm.fmt_greek(r["gamma"]), fm.fmt_greek(r["theta"]), fm.fmt_greek(r["vega"]),
                       fm.fmt_prob(r["p_profit_sell"])],
        ("p_profit_buy", "per_day_sell", "return_sell_annual", "edge_share_sell"):
            lambda r: [fm.fmt_prob(r["p_profit_buy"]), fm.fmt_price(r["premium_per_day_sell"]),
                       fm.fmt_return(r["return_sell_annual"]), fm.fmt_spread(r["edge_share_sell"])],
    }

    async def scenario(pilot):
        for keys, expected in shown.items():
            app.set_columns(list(keys))
            goto_expiry(app, "2026-12-18")
            app.triage.grid.cursor_to_strike(305.0, "put")
            await pilot.pause()
            assert app.triage.grid.columns == list(keys)
            left, _, right = grid_row(app, 305.0).split(BAR)
            for side, row in ((cells(left), call), (cells(right), put)):
                assert side == expected(row)
            if keys[0] == "gamma":
                assert float(cells(right)[1]) < 0 < float(cells(right)[0])  # theta decays, gamma positive

    run(app, scenario)
