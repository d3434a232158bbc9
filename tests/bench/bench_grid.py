"""Benchmark: switching the strike ladder to another 400-strike expiry.

Run by hand:  python tests/bench/bench_grid.py
Not collected by pytest. Prints milliseconds; the target is <= 30 ms for the
next frame after switching to a 400-row expiry.

Timed, per switch (alternating between two expiries' frames):
  direct : StrikeGrid.set_rows(frame, forward) + render_line() for every
           visible line of the mounted widget (what the compositor asks for);
  pilot  : set_rows + a full screen refresh through Textual (pilot.pause()),
           i.e. wall time until the frame is composed;
  compose: set_rows + Textual's own screen layout and full-screen
           composition (Screen._refresh_layout + Compositor.render_full_update,
           private Textual APIs used here only to time the frame without the
           pilot's idle-wait);
  table  : for comparison, Textual's DataTable clear() + add_rows(400 rows)
           + pilot.pause().
The frames are PRESENTATION FIXTURES (invented numbers), not correctness data.
"""

from __future__ import annotations

import asyncio
import math
import statistics
import time

import numpy as np
import pandas as pd
from textual.app import App, ComposeResult
from textual.widgets import DataTable

from chaintriage.tui.widgets.strike_grid import StrikeGrid
from chaintriage.tui.themes import load_themes

N_STRIKES = 400
REPEATS = 30
SIZE = (160, 50)


def presentation_frame(expiry: str, forward: float, n: int = N_STRIKES) -> pd.DataFrame:
    """PRESENTATION FIXTURE: n strikes, both kinds, plausible-looking invented figures."""
    rng = np.random.default_rng(7)
    k = forward * np.exp(np.linspace(-0.8, 0.8, n))
    k = np.round(k * 2) / 2 + np.arange(n) * 1e-3  # distinct strikes
    frames = []
    for kind in ("call", "put"):
        z = np.log(k / forward) / 0.12
        mid = np.abs(rng.normal(2.0, 1.0, n)) + 0.05
        frames.append(pd.DataFrame(dict(
            underlying="QRTZ", expiry=pd.Timestamp(expiry), strike=k, kind=kind,
            bid=mid * 0.97, ask=mid * 1.03, mid=mid, iv=0.25 + 0.1 * z ** 2 / 10,
            sigma_distance=z, p_beyond=np.clip(0.5 - z / 6, 0, 1), p_beyond_flat=np.clip(0.5 - z / 6.2, 0, 1),
            p_touch=np.clip(1 - np.abs(z) / 4, 0, 1), delta=np.clip(0.5 - z / 6, 0, 1) * (1 if kind == "call" else -1),
            breakeven=k + mid if kind == "call" else k - mid, p_breakeven=np.clip(0.4 - z / 6, 0, 1),
            spread_pct=0.06, flags="", volume=rng.integers(0, 5000, n).astype(float),
            open_interest=rng.integers(0, 90000, n).astype(float),
            otm=(k > forward) if kind == "call" else (k < forward), source_line=np.arange(n),
        )))
    return pd.concat(frames, ignore_index=True)


class GridApp(App):
    def compose(self) -> ComposeResult:
        yield StrikeGrid(theme=load_themes(include_user=False).get("harbour"))


class TableApp(App):
    def compose(self) -> ComposeResult:
        yield DataTable()


def summarise(name: str, samples: list[float]) -> float:
    ms = [s * 1000 for s in samples]
    med = statistics.median(ms)
    print(f"{name:<34} median {med:7.2f} ms   min {min(ms):7.2f}   max {max(ms):7.2f}   (n={len(ms)})")
    return med


async def bench_grid() -> tuple[float, float]:
    frames = [(presentation_frame("2027-01-15", 101.3), 101.3), (presentation_frame("2027-02-19", 102.1), 102.1)]
    app = GridApp()
    direct, pilot_t, base, compose = [], [], [], []
    async with app.run_test(size=SIZE) as pilot:
        grid = app.query_one(StrikeGrid)
        grid.set_rows(*frames[1])
        await pilot.pause()
        height = grid.size.height
        for i in range(REPEATS):
            frame, fwd = frames[i % 2]
            t0 = time.perf_counter()
            grid.set_rows(frame, fwd)
            for y in range(height):
                grid.render_line(y)
            direct.append(time.perf_counter() - t0)
            await pilot.pause()
        for i in range(REPEATS):
            frame, fwd = frames[i % 2]
            t0 = time.perf_counter()
            grid.set_rows(frame, fwd)
            await pilot.pause()
            pilot_t.append(time.perf_counter() - t0)
        screen = app.screen
        for i in range(REPEATS):
            frame, fwd = frames[i % 2]
            t0 = time.perf_counter()
            grid.set_rows(frame, fwd)
            screen._refresh_layout(screen.size)
            screen._compositor.render_full_update()
            compose.append(time.perf_counter() - t0)
            await pilot.pause()
        for i in range(REPEATS):
            t0 = time.perf_counter()
            grid.refresh()
            await pilot.pause()
            base.append(time.perf_counter() - t0)
        lines = grid.render_lines_text()
        assert sum(1 for t in lines if "│" in t) >= height - 4, "the grid did not draw its rows"
        print(f"grid: {N_STRIKES} strikes x 2 kinds, widget {grid.size.width}x{height} cells")
    out = (summarise("StrikeGrid set_rows + visible lines", direct),
           summarise("StrikeGrid set_rows + composed screen", compose),
           summarise("StrikeGrid set_rows + pilot frame", pilot_t))
    summarise("  (pilot frame, unchanged rows)", base)
    return out


async def bench_table() -> float:
    frame = presentation_frame("2027-01-15", 101.3)
    calls = frame[frame.kind == "call"].reset_index(drop=True)
    puts = frame[frame.kind == "put"].reset_index(drop=True)
    rows = [(f"{c.bid:.2f}", f"{c.ask:.2f}", f"{c.iv:.1%}", f"{c.sigma_distance:+.2f}", f"{c.p_beyond:.1%}",
             f"{c.p_touch:.1%}", f"{c.strike:.2f}", f"{p.bid:.2f}", f"{p.ask:.2f}", f"{p.iv:.1%}",
             f"{p.sigma_distance:+.2f}", f"{p.p_beyond:.1%}", f"{p.p_touch:.1%}")
            for c, p in zip(calls.itertuples(), puts.itertuples())]
    app = TableApp()
    samples = []
    async with app.run_test(size=SIZE) as pilot:
        table = app.query_one(DataTable)
        table.add_columns(*[f"c{i}" for i in range(13)])
        for _ in range(max(5, REPEATS // 3)):
            t0 = time.perf_counter()
            table.clear()
            table.add_rows(rows)
            await pilot.pause()
            samples.append(time.perf_counter() - t0)
    return summarise("DataTable clear + add_rows + frame", samples)


def main() -> None:
    direct, composed, piloted = asyncio.run(bench_grid())
    table = asyncio.run(bench_table())
    print("target <= 30 ms: " + ", ".join(f"{name} {'met' if v <= 30 else 'NOT met'}" for name, v in
                                          (("direct", direct), ("composed", composed), ("pilot", piloted))))
    print("note: the pilot figure includes Textual's idle wait (see the unchanged-rows line)")
    if not math.isclose(table, 0.0):
        print(f"DataTable / StrikeGrid (pilot frame) ratio: {table / piloted:.1f}x")


if __name__ == "__main__":
    main()
