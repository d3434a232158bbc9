"""Realised volatility estimators and the volatility cone, against their published formulas.

Sources:
- close-to-close: sample variance of daily log returns, annualised by sqrt(252)
  (Hull, Options, Futures, and Other Derivatives, "estimating volatility from
  historical data", and REFERENCE.md s.9: daily 1.216% -> 0.193) [V].
- Parkinson (J. Business 1980), Garman-Klass (J. Business 1980), Rogers-Satchell
  (Ann. Appl. Prob. 1991), Yang-Zhang (J. Business 2000): formulas as written in
  REFERENCE.md s.10 [M], re-implemented below in plain scalar Python, and
  checked for unbiasedness on simulated GBM with known sigma.
- Efficiencies used for tolerances (variance of the close-to-close variance
  estimate divided by the estimator's): Parkinson 5.2, Garman-Klass 7.4 [M];
  Rogers-Satchell and Yang-Zhang taken as 1 (conservative) [C].
- Brownian bridge maximum between two grid points, (a + b + sqrt((b - a)^2 -
  2 s^2 ln U)) / 2 (Glasserman, Monte Carlo Methods in Financial Engineering,
  s.6.4) [M]: the day's true high and low, so discrete sampling does not bias
  the range estimators.
- The cone against pandas' rolling standard deviation and quantile [L].
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest

from chaintriage.core.findings import ChainTriageError
from chaintriage.core.realised_vol import (
    ESTIMATORS,
    daily_terms,
    realised_vol,
    realised_vol_table,
    rolling_vol,
    yang_zhang_k,
)
from chaintriage.core.vol_cone import cone_at, percentile_in_cone, vol_cone

# six bars, invented prices (the formulas are the oracle, not the data)
O = [100.0, 101.0, 99.5, 100.2, 102.0, 101.1]
H = [101.5, 102.3, 101.0, 102.5, 103.1, 102.0]
L = [99.2, 100.1, 98.7, 99.9, 100.8, 99.6]
C = [101.0, 99.8, 100.4, 102.1, 101.2, 100.0]


def _scalar_estimates(n: int) -> dict[str, float]:
    """Every estimator over the last n bars, per day (variance), straight from the formulas."""
    idx = range(len(C) - n, len(C))
    ln = math.log
    rets = [ln(C[i] / C[i - 1]) for i in idx]
    mean = sum(rets) / n
    cc = sum((r - mean) ** 2 for r in rets) / (n - 1)
    pk = sum(ln(H[i] / L[i]) ** 2 for i in idx) / (4 * ln(2) * n)
    gk = sum(0.5 * ln(H[i] / L[i]) ** 2 - (2 * ln(2) - 1) * ln(C[i] / O[i]) ** 2 for i in idx) / n
    rs = sum(ln(H[i] / C[i]) * ln(H[i] / O[i]) + ln(L[i] / C[i]) * ln(L[i] / O[i]) for i in idx) / n
    ov = [ln(O[i] / C[i - 1]) for i in idx]
    oc = [ln(C[i] / O[i]) for i in idx]
    mo, mc = sum(ov) / n, sum(oc) / n
    so = sum((x - mo) ** 2 for x in ov) / (n - 1)
    sc = sum((x - mc) ** 2 for x in oc) / (n - 1)
    k = 0.34 / (1.34 + (n + 1) / (n - 1))
    yz = so + k * sc + (1 - k) * rs
    return dict(close_to_close=cc, parkinson=pk, garman_klass=gk, rogers_satchell=rs, yang_zhang=yz)


@pytest.mark.parametrize("estimator", ESTIMATORS)
def test_each_estimator_matches_its_formula_on_a_tiny_series(estimator):
    want = math.sqrt(_scalar_estimates(5)[estimator] * 252)
    got = realised_vol(O, H, L, C, 5, estimator, basis="252")
    assert got == pytest.approx(want, rel=1e-12)


def test_hand_computed_values():
    # Parkinson, one day H=110, L=100: ln(1.1)^2 / (4 ln 2) = 0.0953101798^2 / 2.7725887222 = 0.0032763 [hand]
    t = daily_terms([100.0], [110.0], [100.0], [105.0])
    assert t.parkinson[0] == pytest.approx(0.0032763, abs=1e-7)
    # Yang-Zhang k for n = 21: 0.34 / (1.34 + 22/20) = 0.139344 [hand]
    assert yang_zhang_k(21) == pytest.approx(0.139344, abs=1e-6)
    # Hull: daily sd 1.216% annualises to 0.193 on 252 days (REFERENCE.md s.9) [V]
    c = 100 * np.exp(np.cumsum(np.tile([0.01216, -0.01216], 20)))
    r = np.diff(np.log(c))
    scale = 0.01216 / np.std(r, ddof=1)  # make the sample sd exactly 1.216%
    c = 100 * np.exp(np.concatenate(([0.0], np.cumsum(r * scale))))
    v = realised_vol(c * np.nan, c * np.nan, c * np.nan, c, len(c) - 1)
    assert round(v, 3) == 0.193


def test_bases_and_gaps():
    # consecutive weekdays Mon..Fri, then the next Monday: the last return spans 3 calendar days
    dates = pd.to_datetime(["2026-11-02", "2026-11-03", "2026-11-04", "2026-11-05", "2026-11-06", "2026-11-09"])
    c = np.array([100, 101, 100, 102, 101, 103.0])
    r = np.diff(np.log(c))
    var = np.var(r, ddof=1)
    nan = c * np.nan
    assert realised_vol(nan, nan, nan, c, 5, basis="252", dates=dates) == pytest.approx(math.sqrt(var * 252))
    assert realised_vol(nan, nan, nan, c, 5, basis="250", dates=dates) == pytest.approx(math.sqrt(var * 250))
    # ACT/365: 5 returns over 7 calendar days [D: total variance per calendar time]
    assert realised_vol(nan, nan, nan, c, 5, basis="365", dates=dates) == pytest.approx(math.sqrt(var * 365 * 5 / 7))
    with pytest.raises(ChainTriageError):
        realised_vol(nan, nan, nan, c, 5, basis="360")


def test_too_short_history_gives_nan_and_a_note():
    bars = pd.DataFrame({"date": pd.bdate_range("2026-11-02", periods=8), "open": O + O[:2], "high": H + H[:2],
                         "low": L + L[:2], "close": C + C[:2]})
    table = realised_vol_table(bars, windows=(5, 10))
    assert np.isfinite(table.vol.loc[5]).all()
    assert table.vol.loc[10].isna().all()
    assert any("10-day window" in f.reason and "only 7" in f.reason for f in table.findings)


def _gbm_days(n_days: int, sigma_session: float, sigma_night: float, steps: int, seed: int):
    """Daily bars of GBM with zero drift: overnight jump, then `steps` intraday steps; exact bridge extremes."""
    rng = np.random.default_rng(seed)
    dt = 1.0 / 252
    s_step = sigma_session * math.sqrt(dt / steps)
    night = rng.normal(0.0, sigma_night * math.sqrt(dt), n_days)
    inc = rng.normal(0.0, s_step, (n_days, steps))
    log_open = np.cumsum(night + np.concatenate(([0.0], inc.sum(axis=1)[:-1])))
    path = log_open[:, None] + np.concatenate((np.zeros((n_days, 1)), np.cumsum(inc, axis=1)), axis=1)
    a, b = path[:, :-1], path[:, 1:]
    u1, u2 = rng.random(a.shape), rng.random(a.shape)
    top = 0.5 * (a + b + np.sqrt((b - a) ** 2 - 2 * s_step**2 * np.log(u1)))
    bottom = 0.5 * (a + b - np.sqrt((b - a) ** 2 - 2 * s_step**2 * np.log(u2)))
    return (100 * np.exp(log_open), 100 * np.exp(top.max(axis=1)), 100 * np.exp(bottom.min(axis=1)),
            100 * np.exp(path[:, -1]))


@pytest.mark.parametrize("estimator, efficiency, sees_overnight", [
    ("close_to_close", 1.0, True),
    ("parkinson", 5.2, False),
    ("garman_klass", 7.4, False),
    ("rogers_satchell", 1.0, False),
    ("yang_zhang", 1.0, True),
])
def test_unbiased_on_gbm_with_many_intraday_steps(estimator, efficiency, sees_overnight):
    n = 4000
    s_sess, s_night = 0.30, 0.12
    o, h, lo, c = _gbm_days(n, s_sess, s_night, steps=100, seed=7)
    got = realised_vol(o, h, lo, c, n - 1, estimator)
    true_var = s_sess**2 + (s_night**2 if sees_overnight else 0.0)
    rel_se_var = math.sqrt(2.0 / (n * efficiency))
    assert abs(got**2 / true_var - 1.0) < 4 * rel_se_var, (got, math.sqrt(true_var))


def test_rolling_windows_and_missing_range_days():
    o, h, lo, c = _gbm_days(300, 0.25, 0.0, steps=20, seed=3)
    h = h.copy()
    h[100:110] = np.nan  # ten days without a high: the range estimators skip them
    terms = daily_terms(o, h, lo, c)
    vol, days = rolling_vol(terms, 21, "parkinson")
    assert days[105] == 21 - 6 and np.isfinite(vol[105])
    vol, days = rolling_vol(terms, 21, "parkinson", min_days=20)
    assert np.isnan(vol[105])


def test_cone_quantiles_match_pandas_rolling():
    rng = np.random.default_rng(11)
    c = 100 * np.exp(np.concatenate(([0.0], np.cumsum(rng.normal(0, 0.015, 1500) * np.repeat([1, 2, 1], 500)))))
    nan = c * np.nan
    terms = daily_terms(nan, nan, nan, c)
    cone = vol_cone(terms, windows=(10, 21, 63))
    r = pd.Series(np.log(c)).diff()
    for w in (10, 21, 63):
        roll = (r.rolling(w).std() * math.sqrt(252)).dropna()
        want = roll.quantile([0, 0.25, 0.5, 0.75, 1]).to_numpy()
        got = cone.table.loc[w, ["min", "q25", "median", "q75", "max"]].to_numpy(float)
        np.testing.assert_allclose(got, want, rtol=1e-9)
        assert cone.table.loc[w, "current"] == pytest.approx(roll.iloc[-1], rel=1e-9)
        assert cone.table.loc[w, "samples"] == len(roll)
    # placing a vol on the cone: the median of the 21-day vols sits at the 50th percentile [D]
    med = cone.table.loc[21, "median"]
    assert percentile_in_cone(cone, 21, med)[0] == pytest.approx(0.5, abs=1.0 / cone.table.loc[21, "samples"])
    at = cone_at(cone, [21, 42])
    assert at.loc[21.0, "median"] == pytest.approx(med)
    lo, hi = sorted([cone.table.loc[21, "median"], cone.table.loc[63, "median"]])
    assert lo <= at.loc[42.0, "median"] <= hi
