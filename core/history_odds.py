"""History-based odds per contract: finish beyond and touch, from the underlying's own past.

Two second opinions beside the market's (risk-neutral, smile) figures:

(a) lognormal at a realised vol: ln S_T ~ N(ln F - sigma^2 T / 2, sigma^2 T), i.e.
    the forward's drift mu = ln(F/S)/T with the realised sigma in place of the
    implied one. P(S_T > K) = N((ln(F/K) - sigma^2 T/2) / (sigma sqrt T)); touch
    by the reflection formula of ``touch.prob_touch`` (continuous watching).

(b) block bootstrap of the underlying's own days (blocks of ``block``
    consecutive days drawn with replacement, wrapping around the end of the
    history: the circular block bootstrap of Politis and Romano; it keeps
    volatility clustering within a block): each simulated day carries the day's close
    return and its high and low relative to the previous close, so a touch
    is counted when a day's high (low) reaches the level, not only its close.
    The returns are recentred: their mean is removed and a constant drift m
    per day added so that E[ln S_T] = ln F - s^2 T / 2 with s the returns'
    own vol (the same centring as (a); history's average return is not
    used, it is mostly noise). A day without high/low uses its two closes.
    Seeded; each probability comes with its Monte Carlo standard error
    sqrt(p (1 - p) / paths).

Units: prices in price units; ``t`` in years on the basis of ``sigma``;
``steps`` in trading days; vols decimal per sqrt(year); probabilities in [0, 1].
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from .standard_normal import ndtr

from .findings import ChainTriageError
from .touch import prob_touch

__all__ = [
    "bootstrap_paths",
    "bootstrap_terminal",
    "path_fan",
    "terminal_density",
    "lognormal_odds",
    "DayPool",
    "day_pool",
    "BootstrapOdds",
    "bootstrap_odds",
    "iv_rv_ratio",
    "FAN_LEVELS",
    "PathFan",
    "simulate_fan",
]

#: Path-days simulated at once (bounds memory: a few arrays of this many floats).
CHUNK_CELLS = 3_000_000


def lognormal_odds(spot, forward, strike, is_call, t, sigma) -> tuple[np.ndarray, np.ndarray]:
    """(P(finish beyond), P(touch)) under a lognormal at ``sigma`` with the forward's drift.

    Beyond is above the strike for a call, below for a put; touch is the path
    from spot reaching the strike before ``t`` (1 at spot). Broadcasts; NaN for
    unusable inputs (non-positive prices, NaN vol, t <= 0 gives NaN beyond).
    """
    s0, f, k, call, t, sig = np.broadcast_arrays(
        *(np.asarray(a, dtype=float) for a in (spot, forward, strike, is_call, t, sigma)))
    with np.errstate(divide="ignore", invalid="ignore"):
        sd = sig * np.sqrt(t)
        d2 = (np.log(f / k) - 0.5 * sd * sd) / sd
        above = ndtr(d2)
        beyond = np.where(call.astype(bool), above, 1.0 - above)
        ok = (s0 > 0) & (f > 0) & (k > 0) & (sd > 0) & np.isfinite(sd)
        beyond = np.where(ok, beyond, np.nan)
        mu = np.where(t > 0, np.log(f / s0) / np.where(t > 0, t, 1.0), np.nan)
    touch = np.asarray(prob_touch(s0, k, t, sig, mu), dtype=float)
    return beyond, touch


@dataclass(frozen=True)
class DayPool:
    """The days a bootstrap draws from, in date order (decimals, log scale, per day).

    ``ret`` ln(C_t/C_{t-1}); ``up`` ln(max(H_t, C_t, C_{t-1}) / C_{t-1}) >= 0 and
    ``down`` ln(min(L_t, C_t, C_{t-1}) / C_{t-1}) <= 0: the day's excursions from
    the previous close (the closes alone where high/low are missing).
    """

    ret: np.ndarray
    up: np.ndarray
    down: np.ndarray

    @property
    def size(self) -> int:
        return int(self.ret.size)

    @property
    def daily_var(self) -> float:
        """Sample variance of the daily log return (decimal^2 per day)."""
        return float(np.var(self.ret, ddof=1)) if self.ret.size > 1 else float("nan")


def day_pool(high, low, close, last: int | None = None) -> DayPool:
    """The pool of days from price arrays (price units; NaN high/low allowed); ``last`` keeps the latest days."""
    h, lo, c = (np.asarray(a, dtype=float) for a in (high, low, close))
    if c.size < 2:
        raise ChainTriageError("a bootstrap needs at least two closes (one daily return)")
    with np.errstate(divide="ignore", invalid="ignore"):
        prev = c[:-1]
        ret = np.log(c[1:] / prev)
        hi = np.fmax(np.fmax(h[1:], c[1:]), prev)
        low = np.fmin(np.fmin(lo[1:], c[1:]), prev)
        up = np.log(hi / prev)
        down = np.log(low / prev)
    ok = np.isfinite(ret) & np.isfinite(up) & np.isfinite(down)
    ret, up, down = ret[ok], up[ok], down[ok]
    if last is not None:
        ret, up, down = ret[-last:], up[-last:], down[-last:]
    return DayPool(ret, up, down)


@dataclass
class BootstrapOdds:
    """Per contract: P(beyond) and P(touch) with their standard errors, and the run's settings."""

    p_beyond: np.ndarray
    p_beyond_se: np.ndarray
    p_touch: np.ndarray
    p_touch_se: np.ndarray
    paths: int
    block: int
    seed: int


def _block_starts(rng: np.random.Generator, n_pool: int, n_paths: int, steps: int, block: int) -> np.ndarray:
    """Start days of the blocks: ``ceil(steps / block)`` per path, uniform over the pool (int64).

    Blocks wrap around the end of the pool (the circular block bootstrap), so
    every day is drawn equally often and the centred returns keep mean zero.
    """
    n_blocks = -(-steps // block)
    return rng.integers(0, n_pool, size=(n_paths, n_blocks))


def _gather(blocks: np.ndarray, starts: np.ndarray, steps: int) -> np.ndarray:
    """Days of every path from the block table (rows = blocks), ``steps`` per path (float32)."""
    m = starts.shape[0]
    return blocks[starts].reshape(m, -1)[:, :steps]


def _drift_per_day(pool: DayPool, spot: float, forward, steps) -> np.ndarray:
    """The drift m per day that centres ln S_T on ln F - s^2 T / 2 (decimal per day; NaN without steps)."""
    f = np.atleast_1d(np.asarray(forward, dtype=float))
    n = np.atleast_1d(np.asarray(steps, dtype=np.int64))
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(n > 0, (np.log(f / spot) - 0.5 * pool.daily_var * n) / np.maximum(n, 1), np.nan)


class _Sampler:
    """Draws chunks of bootstrap paths: log closes and day highs/lows relative to spot.

    The returns are centred and carry the drift ``base_drift`` per day; callers add
    (their drift - base_drift) * day where they need another one.
    """

    def __init__(self, pool: DayPool, block: int, base_drift: float, seed: int):
        if pool.size < 2:
            raise ChainTriageError("a bootstrap needs at least two daily returns")
        self.block = max(1, min(int(block), pool.size))
        self.base_drift = float(base_drift) if np.isfinite(base_drift) else 0.0
        mean = pool.ret.mean()
        shift = self.base_drift - mean
        b = self.block

        # one row per possible block: its `block` consecutive days, wrapping around the end (float32 halves
        # the memory traffic; log prices to ~1e-6 are plenty for counting which side of a strike a path ends)
        def table(v: np.ndarray) -> np.ndarray:
            wrapped = np.concatenate((v, v[:b - 1])) + shift
            return np.ascontiguousarray(np.lib.stride_tricks.sliding_window_view(wrapped.astype(np.float32), b))

        self.ret, self.up, self.down = table(pool.ret), table(pool.up), table(pool.down)
        self.n_pool = pool.size
        self.rng = np.random.default_rng(seed)

    def closes(self, m: int, steps: int) -> np.ndarray:
        """ln(S_j / S_0) at the closes j = 1..steps, (m, steps) float32."""
        starts = _block_starts(self.rng, self.n_pool, m, steps, self.block)
        return np.cumsum(_gather(self.ret, starts, steps), axis=1)

    def chunk(self, m: int, steps: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(log closes, log day highs, log day lows) relative to spot, each (m, steps) float32."""
        starts = _block_starts(self.rng, self.n_pool, m, steps, self.block)
        x = np.cumsum(_gather(self.ret, starts, steps), axis=1)
        hi = _gather(self.up, starts, steps)
        hi[:, 1:] += x[:, :-1]
        lo = _gather(self.down, starts, steps)
        lo[:, 1:] += x[:, :-1]
        return x, hi, lo


def bootstrap_odds(pool: DayPool, spot: float, forward, steps, strike, is_call, expiry_index,
                   *, paths: int = 100_000, block: int = 5, seed: int = 20261201) -> BootstrapOdds:
    """Block-bootstrap P(beyond) and P(touch) for contracts of several expiries, from one set of paths.

    ``forward`` and ``steps`` (trading days to expiry, >= 1) are per expiry;
    ``strike``, ``is_call`` and ``expiry_index`` (into those arrays) per
    contract. The paths run to the longest expiry; each expiry reads them at
    its own step with its own drift. Loops run over expiries and path chunks,
    never over contracts. Raises ChainTriageError for a pool too small.
    """
    fwd = np.atleast_1d(np.asarray(forward, dtype=float))
    n_steps = np.atleast_1d(np.asarray(steps, dtype=np.int64))
    k = np.atleast_1d(np.asarray(strike, dtype=float))
    call = np.broadcast_to(np.asarray(is_call, dtype=bool), k.shape)
    ei = np.broadcast_to(np.asarray(expiry_index, dtype=np.int64), k.shape)
    if pool.size < 2:
        raise ChainTriageError("a bootstrap needs at least two daily returns")
    if paths < 1:
        raise ChainTriageError("paths must be at least 1")
    n_exp = fwd.size
    max_steps = int(max(n_steps.max(initial=1), 1))
    drift = _drift_per_day(pool, spot, fwd, n_steps)
    with np.errstate(divide="ignore", invalid="ignore"):
        log_k = np.log(k / spot)
    longest = int(np.argmax(n_steps)) if n_exp else 0
    sampler = _Sampler(pool, block, drift[longest] if n_exp else 0.0, seed)
    beyond_n = np.zeros(k.shape)  # counts per contract, accumulated over chunks
    touch_n = np.zeros(k.shape)
    by_expiry = [np.flatnonzero(ei == e) for e in range(n_exp)]
    j = np.arange(1, max_steps + 1, dtype=np.float32)
    done = 0
    while done < paths:
        m = min(max(1_000, CHUNK_CELLS // max_steps), paths - done)
        x, hi, lo = sampler.chunk(m, max_steps)
        for e in range(n_exp):  # loops over expiries only
            sel = by_expiry[e]
            s = int(n_steps[e])
            if sel.size == 0 or s < 1 or not np.isfinite(drift[e]):
                continue
            extra = drift[e] - sampler.base_drift
            terminal = np.sort(x[:, s - 1].astype(float) + extra * s)
            if extra == 0:
                top, bottom = np.max(hi[:, :s], axis=1), np.min(lo[:, :s], axis=1)
            else:
                dj = np.float32(extra) * j[:s]
                top, bottom = np.max(hi[:, :s] + dj, axis=1), np.min(lo[:, :s] + dj, axis=1)
            top, bottom = np.sort(top.astype(float)), np.sort(bottom.astype(float))
            lk = log_k[sel]
            above = m - np.searchsorted(terminal, lk, side="right")   # S_T > K
            below = np.searchsorted(terminal, lk, side="left")        # S_T < K
            beyond_n[sel] += np.where(call[sel], above, below)
            reach_up = m - np.searchsorted(top, lk, side="left")      # max >= K
            reach_down = np.searchsorted(bottom, lk, side="right")    # min <= K
            touch_n[sel] += np.where(lk > 0, reach_up, np.where(lk < 0, reach_down, m))
        done += m
    pb = beyond_n / paths
    pt = touch_n / paths
    valid = (ei >= 0) & (ei < n_exp) & np.isfinite(log_k)
    if n_exp:
        cl = np.clip(ei, 0, n_exp - 1)
        valid &= (n_steps[cl] >= 1) & np.isfinite(drift[cl])
    pb = np.where(valid, pb, np.nan)
    pt = np.where(valid, pt, np.nan)
    se = lambda p: np.sqrt(np.clip(p * (1.0 - p), 0.0, None) / paths)  # noqa: E731
    return BootstrapOdds(pb, se(pb), pt, se(pt), paths=paths, block=sampler.block, seed=seed)


def bootstrap_paths(pool: DayPool, spot: float, forward: float, steps: int, *, paths: int = 200,
                    block: int = 5, seed: int = 20261201) -> np.ndarray:
    """Simulated close prices for a path picture: (paths, steps + 1) float64, column 0 = spot.

    The same random walk as ``bootstrap_odds`` (same centring on the forward, same blocks).
    """
    steps = int(steps)
    if steps < 1 or paths < 1:
        raise ChainTriageError("a path picture needs at least one step and one path")
    d = _drift_per_day(pool, spot, forward, steps)[0]
    x = _Sampler(pool, block, d, seed).closes(int(paths), steps).astype(float)
    return spot * np.exp(np.concatenate((np.zeros((x.shape[0], 1)), x), axis=1))


def bootstrap_terminal(pool: DayPool, spot: float, forward: float, steps: int, *, paths: int = 100_000,
                       block: int = 5, seed: int = 20261201) -> np.ndarray:
    """Sorted simulated prices at ``steps`` days (float64, price units), for quantiles and densities."""
    steps = int(steps)
    if steps < 1 or paths < 1:
        raise ChainTriageError("a terminal distribution needs at least one step and one path")
    d = _drift_per_day(pool, spot, forward, steps)[0]
    sampler = _Sampler(pool, block, d, seed)
    out = []
    done = 0
    while done < paths:
        m = min(max(1_000, CHUNK_CELLS // steps), paths - done)
        out.append(sampler.closes(m, steps)[:, -1].astype(float))
        done += m
    return np.sort(spot * np.exp(np.concatenate(out)))


def path_fan(prices: np.ndarray, levels=(0.05, 0.25, 0.5, 0.75, 0.95)) -> np.ndarray:
    """Quantiles of simulated prices at each step: (len(levels), steps + 1), price units."""
    return np.quantile(np.asarray(prices, dtype=float), np.asarray(levels, dtype=float), axis=0)


def terminal_density(sorted_prices: np.ndarray, edges) -> np.ndarray:
    """Histogram density per unit price of simulated prices over the bins ``edges`` (len(edges) - 1 values).

    Mass outside the edges is not shown: the values integrate to the share inside them.
    """
    e = np.asarray(edges, dtype=float)
    p = np.asarray(sorted_prices, dtype=float)
    counts = np.diff(np.searchsorted(p, e, side="left"))
    return counts / max(p.size, 1) / np.diff(e)


#: Quantile levels of a path fan (outer band, middle half, median).
FAN_LEVELS: tuple[float, ...] = (0.05, 0.25, 0.5, 0.75, 0.95)
#: Path-days a fan keeps at once (float32): longer horizons get fewer paths.
FAN_CELLS = 12_000_000


@dataclass
class PathFan:
    """Simulated paths summarised for a picture: quantiles per day, the sorted prices at the last day
    and a few whole paths (price units; day 0 = spot)."""

    steps: int
    paths: int
    levels: np.ndarray
    fan: np.ndarray  # (len(levels), steps + 1)
    terminal: np.ndarray  # sorted, (paths,)
    sample: np.ndarray  # (n, steps + 1)

    def p_beyond(self, strike: float, is_call: bool) -> tuple[float, float]:
        """(P(finish beyond the strike), its Monte Carlo standard error): above for a call, below for a put."""
        n = self.terminal.size
        if not (np.isfinite(strike) and n):
            return float("nan"), float("nan")
        if is_call:
            k = n - np.searchsorted(self.terminal, strike, side="right")
        else:
            k = np.searchsorted(self.terminal, strike, side="left")
        p = k / n
        return float(p), float(np.sqrt(p * (1.0 - p) / n))

    def central_range(self, confidence: float) -> tuple[float, float]:
        """The central interval of the simulated prices at the last day holding ``confidence`` (0..1)."""
        c = float(confidence)
        if not (0.0 < c < 1.0) or not self.terminal.size:
            return float("nan"), float("nan")
        lo, hi = np.quantile(self.terminal, [(1.0 - c) / 2.0, (1.0 + c) / 2.0])
        return float(lo), float(hi)


def _quantiles_by_row(x: np.ndarray, levels: np.ndarray) -> np.ndarray:
    """Quantiles (linear between order statistics, as numpy's default) of each row of ``x``: (levels, rows)."""
    n = x.shape[1]
    h = (n - 1) * levels
    lo = np.floor(h).astype(np.int64)
    hi = np.minimum(lo + 1, n - 1)
    part = np.partition(x, np.unique(np.concatenate((lo, hi))), axis=1)
    w = (h - lo)[:, None]
    return (part[:, lo] * (1.0 - w.T) + part[:, hi] * w.T).T


def simulate_fan(pool: DayPool, spot: float, forward: float, steps: int, *, paths: int = 100_000,
                 levels=FAN_LEVELS, sample: int = 8, block: int = 5, seed: int = 20261201,
                 progress=None) -> PathFan:
    """A path fan from the block bootstrap of ``bootstrap_paths`` (same centring on the forward).

    Paths are capped at FAN_CELLS / steps for long horizons. ``progress(done_share)`` is called
    after each chunk (for a progress bar). Raises ChainTriageError for a pool too small.
    """
    steps = int(steps)
    if steps < 1 or paths < 1:
        raise ChainTriageError("a path picture needs at least one step and one path")
    paths = int(max(1, min(int(paths), FAN_CELLS // steps)))
    d = _drift_per_day(pool, spot, forward, steps)[0]
    sampler = _Sampler(pool, block, d, seed)
    x = np.empty((steps, paths), dtype=np.float32)  # log price relative to spot, one row per day
    done = 0
    chunk = max(1_000, min(paths // 10 + 1, CHUNK_CELLS // steps))
    while done < paths:
        m = min(chunk, paths - done)
        x[:, done:done + m] = sampler.closes(m, steps).T
        done += m
        if progress is not None:
            progress(done / paths)
    lv = np.asarray(levels, dtype=float)
    q = _quantiles_by_row(x, lv).astype(float)  # (levels, steps)
    fan = spot * np.exp(np.concatenate((np.zeros((lv.size, 1)), q), axis=1))
    terminal = np.sort(spot * np.exp(x[-1].astype(float)))
    n_s = min(int(sample), paths)
    shown = np.concatenate((np.zeros((n_s, 1)), x[:, :n_s].T.astype(float)), axis=1)
    return PathFan(steps, paths, lv, fan, terminal, spot * np.exp(shown))


def iv_rv_ratio(implied_vol, realised) -> np.ndarray:
    """Implied vol / realised vol (both decimals per sqrt(year) on one basis); NaN where either is missing."""
    iv = np.asarray(implied_vol, dtype=float)
    rv = np.asarray(realised, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where((rv > 0) & np.isfinite(iv) & (iv > 0), iv / rv, np.nan)
