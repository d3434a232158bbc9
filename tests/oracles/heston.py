"""Heston stochastic-volatility oracle for tests: a chain priced with QuantLib and a Monte Carlo.

Model (Heston 1993 [M]), risk-neutral, continuous rate ``r`` and dividend yield ``q``::

    dS/S = (r - q) dt + sqrt(v) dW1,   dv = kappa (theta - v) dt + xi sqrt(v) dW2,   d<W1, W2> = rho dt

Units: prices in price units, ``t`` in years, ``v0`` and ``theta`` variances per year,
``kappa`` per year, ``xi`` (vol of variance) per sqrt(year), rates continuously compounded per year.

- European prices come from QuantLib's ``AnalyticHestonEngine`` [L]. QuantLib counts time in whole
  days, so an expiry of ``t`` years is priced on a maturity of ``D`` whole days (``D/365`` years)
  with the model rescaled in time by ``c = (D/365)/t``: kappa/c, theta/c, xi/c, v0/c, r/c, q/c. The
  rescaled process on [0, D/365] has the same law at its end as the original one on [0, t]
  (the integrated variance and the carry are unchanged) [D].
- ``heston_snapshot`` builds a chain through ``tests/core/chain_builders.build_snapshot`` whose
  mids are those prices; use ``PipelineSettings(basis="365")`` so the pipeline's clock is the
  model's.
- ``heston_mc`` simulates the model (full-truncation Euler, Lord, Koekkoek & van Dijk 2010 [M];
  antithetic normals; seeded) and returns, for a list of levels, P(the path touches the level
  before t) under continuous monitoring, using the exact law of a Brownian bridge's minimum /
  maximum inside each step (Glasserman, *Monte Carlo Methods in Financial Engineering*, §6.4 [M]):
  given ln S at both ends of a step of variance s2 = v dt, the minimum is
  (a + b - sqrt((b - a)^2 - 2 s2 ln U)) / 2 with U uniform, and symmetrically the maximum.
  It also returns P(S_t beyond the level on the far side of spot) and discounted European prices
  from the same paths, each with its standard error (antithetic pairs averaged first).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import QuantLib as ql

from tests.core.chain_builders import build_snapshot, year_fractions


@dataclass(frozen=True)
class HestonParams:
    """Heston parameters (units in the module docstring)."""

    spot: float = 100.0
    r: float = 0.04
    q: float = 0.015
    v0: float = 0.04
    kappa: float = 2.5
    theta: float = 0.05
    xi: float = 0.55
    rho: float = -0.75

    def forward(self, t):
        """Forward price for ``t`` years."""
        return self.spot * np.exp((self.r - self.q) * np.asarray(t, float))

    def discount(self, t):
        """Discount factor exp(-r t)."""
        return np.exp(-self.r * np.asarray(t, float))


#: Strong-skew parameters used by the tests (Feller condition not met, as in equity fits).
STRONG_SKEW = HestonParams()

_TODAY = ql.Date(1, 12, 2026)


def heston_price(p: HestonParams, t: float, strikes, is_call: bool) -> np.ndarray:
    """Discounted European prices from QuantLib's AnalyticHestonEngine for ``t`` years (rescaled in time)."""
    ql.Settings.instance().evaluationDate = _TODAY
    days = max(int(round(t * 365.0)), 1)
    c = (days / 365.0) / float(t)
    dc = ql.Actual365Fixed()
    rf = ql.YieldTermStructureHandle(ql.FlatForward(_TODAY, p.r / c, dc))
    dv = ql.YieldTermStructureHandle(ql.FlatForward(_TODAY, p.q / c, dc))
    s0 = ql.QuoteHandle(ql.SimpleQuote(p.spot))
    process = ql.HestonProcess(rf, dv, s0, p.v0 / c, p.kappa / c, p.theta / c, p.xi / c, p.rho)
    engine = ql.AnalyticHestonEngine(ql.HestonModel(process), 1e-12, 100000)
    exercise = ql.EuropeanExercise(_TODAY + days)
    kind = ql.Option.Call if is_call else ql.Option.Put
    out = []
    for k in np.atleast_1d(np.asarray(strikes, float)):
        opt = ql.VanillaOption(ql.PlainVanillaPayoff(kind, float(k)), exercise)
        opt.setPricingEngine(engine)
        out.append(opt.NPV())
    return np.array(out)


#: Expiries of the test chain: a few days to a year after chain_builders.AS_OF (2026-12-01).
EXPIRIES = ["2026-12-04", "2026-12-11", "2026-12-24", "2027-01-15", "2027-03-19", "2027-06-18", "2027-12-01"]


def strike_grid(p: HestonParams, t: float, n_sd: float = 3.5, target: int = 60) -> np.ndarray:
    """Strikes around the forward covering about +/- ``n_sd`` standard deviations, on a round step."""
    f = float(p.forward(t))
    sd = np.sqrt(p.theta * t) * f
    raw = 2.0 * n_sd * sd / target
    step = min((s for s in (0.25, 0.5, 1.0, 2.5, 5.0) if s >= raw), default=5.0)
    lo = max(np.floor((f - n_sd * sd) / step) * step, step)
    hi = np.ceil((f + n_sd * sd) / step) * step
    return np.arange(lo, hi + step / 2, step)


def heston_snapshot(p: HestonParams = STRONG_SKEW, expiries=EXPIRIES, half_spread: float = 0.0):
    """(snapshot, t_years, strikes per expiry) of a chain whose mids are QuantLib Heston prices."""
    t = year_fractions(list(expiries), basis="365")
    strikes = [strike_grid(p, ti) for ti in t]
    calls = [heston_price(p, ti, ks, True) for ti, ks in zip(t, strikes)]
    puts = [heston_price(p, ti, ks, False) for ti, ks in zip(t, strikes)]
    lookup_c = [dict(zip(ks, cs)) for ks, cs in zip(strikes, calls)]
    lookup_p = [dict(zip(ks, ps)) for ks, ps in zip(strikes, puts)]
    snap = build_snapshot(
        list(expiries), strikes, lambda i, k: lookup_c[i][k], lambda i, k: lookup_p[i][k],
        spot=p.spot, half_spread=half_spread, rate=p.r, div_yield=p.q,
    )
    return snap, np.asarray(t, float), strikes


@dataclass
class HestonMcResult:
    """Monte Carlo figures per level (arrays of the levels' shape) with their standard errors."""

    levels: np.ndarray
    p_touch: np.ndarray
    p_touch_se: np.ndarray
    p_beyond: np.ndarray      # P(S_t on the far side of the level from spot)
    p_beyond_se: np.ndarray
    call: np.ndarray          # discounted E[(S_t - K)+] with K = level
    call_se: np.ndarray
    put: np.ndarray
    put_se: np.ndarray


def _pair_mean_se(x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Mean and standard error over axis 0 of antithetic pairs (first half paired with second half)."""
    n = x.shape[0] // 2
    pairs = 0.5 * (x[:n] + x[n:])
    return pairs.mean(axis=0), pairs.std(axis=0, ddof=1) / np.sqrt(n)


def heston_mc(p: HestonParams, t: float, levels, n_paths: int = 200_000, steps_per_year: int = 500,
              min_steps: int = 50, seed: int = 12345) -> HestonMcResult:
    """Touch, finish-beyond and European prices at ``levels`` after ``t`` years by Monte Carlo."""
    rng = np.random.default_rng(seed)
    levels = np.asarray(levels, float)
    half = n_paths // 2
    n_steps = max(int(np.ceil(steps_per_year * t)), min_steps)
    dt = t / n_steps
    x0 = np.log(p.spot)
    x = np.full(2 * half, x0)
    v = np.full(2 * half, p.v0)
    run_min = x.copy()
    run_max = x.copy()
    sr = np.sqrt(1.0 - p.rho * p.rho)
    carry = p.r - p.q
    for _ in range(n_steps):
        z = rng.standard_normal((2, half))
        z1 = np.concatenate([z[0], -z[0]])
        z2 = np.concatenate([z[1], -z[1]])
        vp = np.maximum(v, 0.0)
        sd = np.sqrt(vp * dt)
        x_new = x + (carry - 0.5 * vp) * dt + sd * z1
        v = v + p.kappa * (p.theta - vp) * dt + p.xi * sd * (p.rho * z1 + sr * z2)
        s2 = vp * dt
        d2 = (x_new - x) ** 2
        u = rng.random((2, 2 * half))
        lo = 0.5 * (x + x_new - np.sqrt(d2 - 2.0 * s2 * np.log(u[0])))
        hi = 0.5 * (x + x_new + np.sqrt(d2 - 2.0 * s2 * np.log(u[1])))
        np.minimum(run_min, lo, out=run_min)
        np.maximum(run_max, hi, out=run_max)
        x = x_new
    lh = np.log(levels)
    below = levels < p.spot
    touched = np.where(below, run_min[:, None] <= lh, run_max[:, None] >= lh).astype(float)
    beyond = np.where(below, x[:, None] < lh, x[:, None] > lh).astype(float)
    st = np.exp(x)[:, None]
    df = float(p.discount(t))
    call = df * np.maximum(st - levels, 0.0)
    put = df * np.maximum(levels - st, 0.0)
    out = [_pair_mean_se(a) for a in (touched, beyond, call, put)]
    return HestonMcResult(levels, *out[0], *out[1], *out[2], *out[3])
