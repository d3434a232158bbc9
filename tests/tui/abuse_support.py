"""Helpers for the abuse tests: generated chain files and the random key driver.

The chains written here are presentation data to push the screen around (a
plain Black-76 price [L: core.black76] with a made-up skew), not fixtures for
any figure's correctness.
"""

from __future__ import annotations

import asyncio
import random
import string
import time
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from chaintriage.core.black76 import price as black76_price

AS_OF = "2026-03-02T15:30:00-05:00"


def write_big_chain(path, n_contracts: int = 20_000, n_expiries: int = 25, underlying: str = "BIGQ",
                    spot: float = 250.0) -> int:
    """A ``n_contracts``-row snapshot CSV (calls and puts at every strike); returns the row count."""
    per_expiry = n_contracts // n_expiries // 2
    as_of = pd.Timestamp(AS_OF)
    frames = []
    for i in range(n_expiries):
        expiry = (as_of.normalize() + pd.Timedelta(days=7 * (i + 1) + 4)).tz_localize(None)
        t = (7 * (i + 1) + 4) / 365.0
        strikes = np.round(np.linspace(0.4 * spot, 1.8 * spot, per_expiry), 1)
        k = np.log(strikes / spot)
        vol = 0.3 - 0.15 * k + 0.2 * k * k
        for kind, is_call in (("call", True), ("put", False)):
            mid = np.maximum(np.asarray(black76_price(spot, strikes, vol, t, 1.0, is_call)), 0.03)
            frames.append(pd.DataFrame({
                "expiry": expiry.strftime("%Y-%m-%d"), "strike": strikes, "kind": kind,
                "bid": np.round(mid * 0.98, 2), "ask": np.round(mid * 1.02 + 0.01, 2),
                "open_interest": 100, "volume": 5,
            }))
    out = pd.concat(frames, ignore_index=True)
    out.insert(0, "spot", spot)
    out.insert(0, "as_of", AS_OF)
    out.insert(0, "underlying", underlying)
    out.to_csv(path, index=False)
    return len(out)


def binding_keys(*classes) -> list[str]:
    """Every key named in the BINDINGS of ``classes`` (a binding may list several, comma-separated)."""
    keys: list[str] = []
    for cls in classes:
        for b in cls.BINDINGS:
            key = b.key if hasattr(b, "key") else b[0]
            keys.extend(k.strip() for k in key.split(",") if k.strip())
    return sorted(set(keys))


NAVIGATION = ["enter", "escape", "tab", "shift+tab", "up", "down", "left", "right", "pageup", "pagedown",
              "home", "end", "space", "backspace", "delete"]
#: Paths typed into the open-file prompt: folders, devices, missing files, the run's own exports.
OPEN_ATTEMPTS = [".", "/", "/dev/zero", "/dev/null", "missing.csv", "shortlist.csv", "shortlist.md", "",
                 "~", "[bold]x[/].csv", "\x1b[31m.csv"]
PRINTABLE = [c for c in string.ascii_letters + string.digits + string.punctuation]


@dataclass
class Driver:
    """Draws keys for one seed and counts what happened."""

    seed: int
    binding_pool: list[str]
    rng: random.Random = field(init=False)
    pressed: int = 0
    pressed_while_loading: int = 0
    resizes: int = 0
    opened: int = 0
    clicks: int = 0
    bursts: int = 0
    screens_seen: set[str] = field(default_factory=set)
    slowest_key: tuple[float, str] = (0.0, "")

    def __post_init__(self) -> None:
        self.rng = random.Random(self.seed)

    def draw(self) -> list[str] | tuple[str, int, int]:
        """One move: a list of keys, or ("resize", width, height)."""
        r = self.rng.random()
        if r < 0.03:
            return ("resize", self.rng.randint(80, 200), self.rng.randint(24, 50))
        if r < 0.037:  # a click somewhere on the screen (x, y as fractions of its size)
            return ("click", self.rng.random(), self.rng.random())
        if r < 0.042:  # a burst: keys faster than the app handles them (a held or double-struck key)
            pool = [k for k in self.binding_pool + NAVIGATION if k != "q"]
            key = self.rng.choice(pool)
            return ("burst", [key] * self.rng.randint(2, 3) if self.rng.random() < 0.6 else
                    [self.rng.choice(pool) for _ in range(self.rng.randint(2, 4))], 0)
        if r < 0.047:  # open something that is not a usable chain, or the files this run wrote
            return ("open", self.rng.choice(OPEN_ATTEMPTS), 0)
        if r < 0.08:  # walks that reach the deeper states: export (twice: the replace question), marks
            # (the export name carries the minute, so a walk that exports twice reaches the question itself)
            return self.rng.choice([["m", "s", "w", "enter"], ["s", "w", "enter", "y"], ["m", "down", "m"],
                                    ["m", "s", "w", "enter", "w", "enter", "n"],
                                    ["f", "1", "enter"], ["e", "down", "down"], ["o", "space", "down", "enter"]])
        if r < 0.50:
            return [self.rng.choice(self.binding_pool)]
        if r < 0.75:
            return [self.rng.choice(NAVIGATION)]
        return [self.rng.choice(PRINTABLE)]

    def timed(self, seconds: float, what: str) -> None:
        if seconds > self.slowest_key[0]:
            self.slowest_key = (seconds, what)


async def quick_idle(*args, **kwargs) -> None:
    """Stands in for Textual's ``wait_for_idle`` in the pilot (which sleeps 20 ms or more per key):
    each key is still handled in order before the next test step, just without the idle wait."""
    await asyncio.sleep(0)


async def drive(app, pilot, driver: Driver, n_keys: int) -> None:
    """Press ``n_keys`` random keys (q only where it closes a screen, never the app)."""
    triage = app.triage
    while driver.pressed < n_keys:
        move = driver.draw()
        if isinstance(move, tuple) and move[0] == "resize":
            await pilot.resize_terminal(move[1], move[2])
            driver.resizes += 1
            continue
        if isinstance(move, tuple) and move[0] == "click":
            await pilot.pause()
            width, height = app.size
            rows = height - 1 if app.screen is triage else height  # the main footer's "q quit" ends the app
            await pilot.click(offset=(int(move[1] * (width - 1)), int(move[2] * (rows - 1))))
            driver.clicks += 1
            continue
        if isinstance(move, tuple) and move[0] == "burst":  # no wait between these keys
            await pilot.press(*move[1])
            driver.pressed += len(move[1])
            driver.bursts += 1
            assert app.is_running and app.return_code is None, f"seed {driver.seed}: the app ended at {move}"
            continue
        if isinstance(move, tuple):  # ("open", path, 0): the open-file key, the path, Enter
            await pilot.pause()
            if app.screen is not triage:
                continue
            await pilot.press("l")
            await pilot.pause()
            if type(app.screen).__name__ == "PathPrompt":
                app.screen.query_one("#path-input").value = move[1]
                await pilot.press("enter")
                driver.opened += 1
            driver.pressed += 2
            continue
        for key in move:
            if key == "q":
                await pilot.pause()  # let the screen settle: q on the main screen would end the app
                if app.screen is triage:
                    continue  # the only key that ends the app; every other is fair game
            loading = bool(app.state.loads_running)
            t0 = time.perf_counter()
            await pilot.press(key)
            driver.timed(time.perf_counter() - t0, key)
            driver.pressed += 1
            driver.pressed_while_loading += loading or bool(app.state.loads_running)
            driver.screens_seen.add(type(app.screen).__name__)
            assert app.is_running and app.return_code is None, f"seed {driver.seed}: the app ended at {key!r}"
