"""History-based odds: the lognormal closed forms and the block bootstrap against them.

Sources:
- P(S_T > K) = N(d2): Hull Ex.15.6, S=42, K=40, r=.10, sigma=.20, T=.5 gives 0.7349 [V]
  (REFERENCE.md s.1 and s.4).
- P(touch): Haug's binary-barrier table via QuantLib's digitaloption.cpp [L], REFERENCE.md
  s.3: 0.656021 (down, S=105, H=100) and 0.786512 (up, S=95, H=100), T=.5, r=b=.10,
  sigma=.20; published to 4 dp of a price, so tol 1e-5.
- The bootstrap on lognormal history against those closed forms, within 4 Monte Carlo
  standard errors (REFERENCE.md s.3 "For MC tests allow 4 SE") [C]; with blocks, the
  closed form takes the variance a block sum really has, gamma_0 + 2 sum_l (1 - l/b)
  gamma_l per day (circular sample autocovariances; Politis and Romano 1992) [M].
- Brownian bridge extremes between grid points (Glasserman s.6.4) [M] give each
  simulated day its true high and low, so touch is watched continuously.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from chaintriage.core.findings import ChainTriageError
from chaintriage.core.history_odds import bootstrap_odds, day_pool, iv_rv_ratio, lognormal_odds


def test_lognormal_finish_beyond_is_hull_n_d2():
    f = 42 * math.exp(0.10 * 0.5)
    beyond, _ = lognormal_odds(42, f, 40, True, 0.5, 0.20)
    assert float(beyond) == pytest.approx(0.7349, abs=5e-5)
    put, _ = lognormal_odds(42, f, 40, False, 0.5, 0.20)
    assert float(put) == pytest.approx(0.2651, abs=5e-5)


def test_lognormal_touch_is_haug_binary_barrier():
    f_down = 105 * math.exp(0.10 * 0.5)
    _, down = lognormal_odds(105, f_down, 100, False, 0.5, 0.20)
    assert float(down) == pytest.approx(0.656021, abs=1e-5)
    _, up = lognormal_odds(95, 95 * math.exp(0.05), 100, True, 0.5, 0.20)
    assert float(up) == pytest.approx(0.786512, abs=1e-5)


def _lognormal_history(n_days: int, sigma: float, seed: int, steps: int = 40):
    """Closes, highs and lows of a driftless GBM; highs/lows are the exact bridge extremes."""
    rng = np.random.default_rng(seed)
    s = sigma * math.sqrt(1 / 252 / steps)
    inc = rng.normal(0, s, (n_days, steps))
    start = np.concatenate(([0.0], np.cumsum(inc.sum(axis=1))[:-1]))
    path = start[:, None] + np.concatenate((np.zeros((n_days, 1)), np.cumsum(inc, axis=1)), axis=1)
    a, b = path[:, :-1], path[:, 1:]
    top = 0.5 * (a + b + np.sqrt((b - a) ** 2 - 2 * s * s * np.log(rng.random(a.shape))))
    bot = 0.5 * (a + b - np.sqrt((b - a) ** 2 - 2 * s * s * np.log(rng.random(a.shape))))
    close = np.concatenate(([1.0], np.exp(path[:, -1])))
    high = np.concatenate(([np.nan], np.exp(top.max(axis=1))))
    low = np.concatenate(([np.nan], np.exp(bot.min(axis=1))))
    return 100 * high, 100 * low, 100 * close


def _block_variance(ret: np.ndarray, block: int) -> float:
    x = ret - ret.mean()
    n = x.size
    g = [np.dot(x, np.roll(x, -lag)) / n for lag in range(block)]
    return g[0] + 2 * sum((1 - lag / block) * g[lag] for lag in range(1, block))


@pytest.mark.parametrize("block", [1, 5])
def test_bootstrap_matches_closed_forms_on_lognormal_history(block):
    high, low, close = _lognormal_history(2520, 0.30, seed=5)
    pool = day_pool(high, low, close)
    steps = np.array([20, 60])
    t = steps / 252
    spot = 100.0
    fwd = spot * np.exp(0.04 * t)
    strikes = np.array([80, 90, 97, 103, 110, 125.0])
    k = np.tile(strikes, 2)
    call = k > spot
    ei = np.repeat([0, 1], strikes.size)
    odds = bootstrap_odds(pool, spot, fwd, steps, k, call, ei, paths=60_000, block=block, seed=42)
    day_var = (np.var(pool.ret) if block == 1 else _block_variance(pool.ret, block))
    sigma = math.sqrt(day_var * 252)
    beyond, touch = lognormal_odds(spot, fwd[ei], k, call, t[ei], sigma)
    z = (odds.p_beyond - beyond) / odds.p_beyond_se
    assert np.all(np.abs(z) < 4), z
    if block > 1:
        # within a block the path moves with the one-day variance, across blocks with the block variance:
        # no single-vol closed form for touch, so only the finish is checked here
        return
    # touch watched through each day's high/low: continuous closed form, 4 SE (+0.002 for the drift
    # being added at the close of each day rather than continuously) [C]
    assert np.all(np.abs(odds.p_touch - touch) < 4 * odds.p_touch_se + 0.002), (odds.p_touch, touch)
    assert odds.p_touch_se == pytest.approx(np.sqrt(odds.p_touch * (1 - odds.p_touch) / 60_000))


def test_closes_only_history_touches_less_than_continuous_watching():
    high, low, close = _lognormal_history(1000, 0.30, seed=9)
    watched = day_pool(high, low, close)
    closes = day_pool(high * np.nan, low * np.nan, close)
    args = (100.0, [100.0], [30], [85.0, 115.0], [False, True], 0)
    a = bootstrap_odds(watched, *args, paths=20_000, block=1, seed=1)
    b = bootstrap_odds(closes, *args, paths=20_000, block=1, seed=1)
    # discrete watching of closes misses touches (REFERENCE.md s.3 finding) [V]
    assert np.all(b.p_touch < a.p_touch - 4 * a.p_touch_se)


def test_seeded_and_guarded():
    high, low, close = _lognormal_history(300, 0.25, seed=2)
    pool = day_pool(high, low, close)
    args = (100.0, [101.0], [10], [95.0, 105.0], [False, True], 0)
    a = bootstrap_odds(pool, *args, paths=5000, seed=3)
    b = bootstrap_odds(pool, *args, paths=5000, seed=3)
    np.testing.assert_array_equal(a.p_beyond, b.p_beyond)
    with pytest.raises(ChainTriageError):
        day_pool([1.0], [1.0], [1.0])
    bad = bootstrap_odds(pool, 100.0, [101.0], [0], [95.0], [False], 0, paths=100)
    assert np.isnan(bad.p_beyond).all()
    np.testing.assert_allclose(iv_rv_ratio([0.3, 0.2, np.nan], [0.25, 0.0, 0.2]), [1.2, np.nan, np.nan])


def test_terminal_distribution_and_path_fan_match_the_lognormal():
    """Bootstrap of lognormal history against scipy.stats.lognorm [L]: quantiles and density."""
    from scipy.stats import lognorm

    from chaintriage.core.history_odds import bootstrap_paths, bootstrap_terminal, path_fan, terminal_density

    high, low, close = _lognormal_history(2520, 0.30, seed=8)
    pool = day_pool(high, low, close)
    steps, spot, fwd = 40, 100.0, 100.5
    sd = math.sqrt(np.var(pool.ret) * steps)
    law = lognorm(s=sd, scale=fwd * math.exp(-0.5 * sd * sd))
    term = bootstrap_terminal(pool, spot, fwd, steps, paths=80_000, block=1, seed=4)
    n = term.size
    for q in (0.05, 0.25, 0.5, 0.75, 0.95):
        # a sample quantile's standard error is sqrt(q(1-q)/n) / density [C]
        se = math.sqrt(q * (1 - q) / n) / law.pdf(law.ppf(q))
        assert abs(np.quantile(term, q) - law.ppf(q)) < 4 * se
    edges = np.linspace(70, 140, 36)
    dens = terminal_density(term, edges)
    mid = 0.5 * (edges[1:] + edges[:-1])
    assert np.allclose(dens, law.pdf(mid), atol=0.002)
    assert abs(dens @ np.diff(edges) - (law.cdf(140) - law.cdf(70))) < 0.005
    prices = bootstrap_paths(pool, spot, fwd, steps, paths=4000, block=5, seed=4)
    assert prices.shape == (4000, steps + 1) and (prices[:, 0] == spot).all()
    fan = path_fan(prices)
    assert fan.shape == (5, steps + 1) and (np.diff(fan, axis=0) >= 0).all()
    # the fan's middle band widens like sqrt(time) [C]
    assert fan[3, -1] - fan[1, -1] > fan[3, 10] - fan[1, 10]


def test_simulate_fan_against_the_lognormal_and_numpy_quantiles():
    """The app's path fan: its quantiles are numpy's on the same paths (numpy's default linear
    quantile [L]); its P(beyond) on lognormal history is the closed form N(d2) within 4 standard
    errors (REFERENCE.md s.3 [C]); its range holds the confidence of scipy.stats.lognorm [L]."""
    from scipy.stats import lognorm

    from chaintriage.core.history_odds import bootstrap_paths, simulate_fan

    high, low, close = _lognormal_history(2520, 0.30, seed=11)
    pool = day_pool(high, low, close)
    steps, spot, fwd = 60, 100.0, 100.6
    shares = []
    fan = simulate_fan(pool, spot, fwd, steps, paths=100_000, block=1, seed=7, progress=shares.append)
    assert fan.paths == 100_000 and fan.fan.shape == (5, steps + 1) and fan.terminal.size == 100_000
    assert shares[-1] == 1.0 and shares == sorted(shares)
    paths = bootstrap_paths(pool, spot, fwd, steps, paths=100_000, block=1, seed=7)
    np.testing.assert_allclose(fan.fan, np.quantile(paths, fan.levels, axis=0), rtol=2e-6)
    np.testing.assert_allclose(fan.sample[:, 0], spot)
    sd = math.sqrt(np.var(pool.ret, ddof=1) * steps)
    sigma = sd / math.sqrt(steps / 252)
    for k, call in ((90.0, False), (100.0, True), (112.0, True)):
        p, se = fan.p_beyond(k, call)
        closed, _ = lognormal_odds(spot, fwd, k, call, steps / 252, sigma)
        assert abs(p - float(closed)) < 4 * se, (k, p, float(closed), se)
    lo, hi = fan.central_range(0.9)
    law = lognorm(s=sd, scale=fwd * math.exp(-0.5 * sd * sd))
    assert law.cdf(hi) - law.cdf(lo) == pytest.approx(0.9, abs=0.01)
    # long horizons keep memory bounded: fewer paths
    from chaintriage.core.history_odds import FAN_CELLS

    assert simulate_fan(pool, spot, fwd, 400, paths=100_000, seed=1).paths == FAN_CELLS // 400
