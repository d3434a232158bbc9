"""The whole per-expiry pipeline on chains priced from known models.

Two model worlds, each with outside references:

- A flat-vol Black-Scholes world: prices from QuantLib's blackFormula [L];
  P(beyond) must equal N(d2), Hull's risk-neutral probability of exercise
  (Hull §15.8 [V]); P(touch) must equal the reflection-principle formula
  (REFERENCE.md §3, Shreve) and a seeded Monte Carlo path simulation with a
  Brownian-bridge crossing correction (error bars stated); delta must equal
  QuantLib's BSM delta [L].
- A skewed two-lognormal mixture world (an arbitrage-free model whose smile is
  not SVI): P(beyond) must match the model's exact digital, sum_i p_i N(d2_i)
  [D], and a seeded Monte Carlo of S_T within 4 standard errors.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import QuantLib as ql
from scipy.special import ndtr
from scipy.stats import norm

from chaintriage.core.pipeline import (
    CONTRACT_TABLE_COLUMNS,
    EXPIRY_TABLE_COLUMNS,
    PipelineSettings,
    annotate,
)
from tests.core.chain_builders import build_snapshot, ql_black, year_fractions

SPOT = 100.0
RATE = 0.04
DIV = 0.01
EXPIRIES = ["2027-01-15", "2027-03-19", "2027-06-17"]
SETTINGS = PipelineSettings(basis="365", confidence=0.68)


def _strikes(t: float) -> np.ndarray:
    steps = int(np.ceil(max(20.0, 100.0 * 3.5 * 0.25 * np.sqrt(t)) / 2.5))
    return 100.0 + 2.5 * np.arange(-steps, steps + 1)


# --------------------------------------------------------------------------- flat world

FLAT_VOL = 0.25


@pytest.fixture(scope="module")
def flat_world():
    ts = year_fractions(EXPIRIES)
    fwd = SPOT * np.exp((RATE - DIV) * ts)
    dfs = np.exp(-RATE * ts)
    strikes = [_strikes(t) for t in ts]

    def call(i, k):
        return ql_black(fwd[i], k, FLAT_VOL, ts[i], dfs[i], True)

    def put(i, k):
        return ql_black(fwd[i], k, FLAT_VOL, ts[i], dfs[i], False)

    snap = build_snapshot(EXPIRIES, strikes, call, put, spot=SPOT)
    return annotate(snap, SETTINGS, touch=True), ts, fwd, dfs


def test_tables_have_the_documented_columns(flat_world):
    ann, *_ = flat_world
    assert list(ann.contracts.columns) == CONTRACT_TABLE_COLUMNS
    assert list(ann.expiries.columns) == EXPIRY_TABLE_COLUMNS
    assert len(ann.expiries) == len(EXPIRIES)


def test_flat_world_forward_discount_and_vols(flat_world):
    """Parity recovers F and DF (C - P = DF(F - K), Hull [V]); IVs recover the model vol."""
    ann, ts, fwd, dfs = flat_world
    np.testing.assert_allclose(ann.expiries["forward"], fwd, rtol=1e-9)
    np.testing.assert_allclose(ann.expiries["discount"], dfs, rtol=1e-9)
    np.testing.assert_allclose(ann.expiries["t_years"], ts, rtol=1e-15)
    c = ann.contracts
    priced = c["mid"] > 0.01
    np.testing.assert_allclose(c.loc[priced, "iv"], FLAT_VOL, atol=1e-9)
    np.testing.assert_allclose(ann.expiries["atm_iv"], FLAT_VOL, atol=1e-6)


def test_flat_world_p_beyond_is_n_d2(flat_world):
    """P(S_T > K) = N(d2) under a flat vol (Hull §15.8 [V]); puts give N(-d2)."""
    ann, ts, fwd, _ = flat_world
    c = ann.contracts
    t = np.array([ts[EXPIRIES.index(f"{e:%Y-%m-%d}")] for e in c["expiry"]])
    f = np.array([fwd[EXPIRIES.index(f"{e:%Y-%m-%d}")] for e in c["expiry"]])
    k = c["strike"].to_numpy()
    d2 = (np.log(f / k) - 0.5 * FLAT_VOL**2 * t) / (FLAT_VOL * np.sqrt(t))
    expected = np.where(c["kind"] == "call", norm.cdf(d2), norm.cdf(-d2))
    np.testing.assert_allclose(c["p_beyond"], expected, atol=2e-6)
    np.testing.assert_allclose(c["p_beyond_flat"], expected, atol=2e-6)


def test_flat_world_sigma_distance_convention(flat_world):
    """sigma distance = ln(K/F)/(atm_iv sqrt T) (REFERENCE.md §9, strike distance in SDs [C])."""
    ann, ts, fwd, _ = flat_world
    c = ann.contracts
    first = c["expiry"] == pd.Timestamp(EXPIRIES[0])
    k = c.loc[first, "strike"].to_numpy()
    expected = np.log(k / fwd[0]) / (FLAT_VOL * np.sqrt(ts[0]))
    np.testing.assert_allclose(c.loc[first, "sigma_distance"], expected, atol=1e-5)


def test_flat_world_delta_matches_quantlib(flat_world):
    """Spot delta e^{-qT} N(d1) (calls) and e^{-qT}(N(d1) - 1) (puts), QuantLib BlackCalculator [L]."""
    ann, ts, fwd, dfs = flat_world
    c = ann.contracts.sample(40, random_state=3)
    for row in c.itertuples():
        i = EXPIRIES.index(f"{row.expiry:%Y-%m-%d}")
        kind = ql.Option.Call if row.kind == "call" else ql.Option.Put
        calc = ql.BlackCalculator(ql.PlainVanillaPayoff(kind, row.strike), fwd[i],
                                  FLAT_VOL * np.sqrt(ts[i]), dfs[i])
        assert row.delta == pytest.approx(calc.delta(SPOT), abs=1e-7)


def _mc_touch(spot, barrier, t, sigma, mu, n_paths, n_steps, rng):
    """Monte Carlo P(touch) of GBM with an exact Brownian-bridge crossing test between steps."""
    dt = t / n_steps
    x = np.full(n_paths, np.log(spot))
    logb = np.log(barrier)
    up = barrier > spot
    touched = np.zeros(n_paths, dtype=bool)
    drift = (mu - 0.5 * sigma**2) * dt
    for _ in range(n_steps):
        x_new = x + drift + sigma * np.sqrt(dt) * rng.standard_normal(n_paths)
        crossed = (x_new >= logb) if up else (x_new <= logb)
        # Probability that the bridge between x and x_new reached the level.
        with np.errstate(over="ignore"):
            p_bridge = np.exp(-2.0 * (logb - x) * (logb - x_new) / (sigma**2 * dt))
        touched |= crossed | (rng.random(n_paths) < np.where(crossed, 1.0, p_bridge))
        x = x_new
    return touched.mean()


def test_flat_world_p_touch_against_monte_carlo(flat_world):
    """P(touch) vs a seeded Monte Carlo (Brownian bridge, exact for GBM); 200k paths, SE ~ 1e-3, 4 SE allowed."""
    ann, ts, fwd, _ = flat_world
    c = ann.contracts
    i = 1
    t = ts[i]
    mu = np.log(fwd[i] / SPOT) / t
    rng = np.random.default_rng(20261201)
    n = 200_000
    for strike, kind in ((115.0, "call"), (85.0, "put")):
        row = c[(c["expiry"] == pd.Timestamp(EXPIRIES[i])) & (c["strike"] == strike) & (c["kind"] == kind)].iloc[0]
        est = _mc_touch(SPOT, strike, t, FLAT_VOL, mu, n, 20, rng)
        se = np.sqrt(est * (1 - est) / n)
        assert abs(row.p_touch - est) < 4 * se, (strike, row.p_touch, est, se)
        assert row.p_touch >= row.p_beyond


def test_flat_world_touch_is_reflection_formula(flat_world):
    """REFERENCE.md §3 closed form (reflection principle with drift, Shreve [M section]); the local-vol
    equation on the fitted (flat) surface, within its tolerance of 2e-3."""
    ann, ts, fwd, _ = flat_world
    c = ann.contracts
    i = 2
    t = ts[i]
    nu = np.log(fwd[i] / SPOT) / t - 0.5 * FLAT_VOL**2
    sel = (c["expiry"] == pd.Timestamp(EXPIRIES[i])) & (c["strike"] > SPOT + 5) & (c["kind"] == "call")
    h = c.loc[sel, "strike"].to_numpy()
    b = np.log(h / SPOT)
    s = FLAT_VOL * np.sqrt(t)
    expected = ndtr((-b + nu * t) / s) + np.exp(2 * nu * b / FLAT_VOL**2) * ndtr((-b - nu * t) / s)
    np.testing.assert_allclose(c.loc[sel, "p_touch"], expected, atol=2e-3)


def test_flat_world_breakeven(flat_world):
    """Breakeven = K + mid (calls), K - mid (puts) [C]; its probability is N(d2) at the breakeven."""
    ann, ts, fwd, _ = flat_world
    c = ann.contracts
    i = 0
    sel = (c["expiry"] == pd.Timestamp(EXPIRIES[i])) & (c["mid"] > 0.05)
    sub = c[sel]
    be = np.where(sub["kind"] == "call", sub["strike"] + sub["mid"], sub["strike"] - sub["mid"])
    np.testing.assert_allclose(sub["breakeven"], be, rtol=1e-15)
    d2 = (np.log(fwd[i] / be) - 0.5 * FLAT_VOL**2 * ts[i]) / (FLAT_VOL * np.sqrt(ts[i]))
    expected = np.where(sub["kind"] == "call", norm.cdf(d2), norm.cdf(-d2))
    np.testing.assert_allclose(sub["p_breakeven"], expected, atol=2e-6)


def test_flat_world_ranges(flat_world):
    """Plain range F exp(-sigma^2 T/2 -/+ z sigma sqrt T), z = N^{-1}((1+c)/2) (REFERENCE.md §9 [C], scipy [L]);
    on a flat smile the smile range (the smile's quantiles) is the same band."""
    ann, ts, fwd, _ = flat_world
    e = ann.expiries
    z = norm.ppf(0.84)
    s = FLAT_VOL * np.sqrt(ts)
    np.testing.assert_allclose(e["range_low"], fwd * np.exp(-0.5 * s**2 - z * s), rtol=1e-6)
    np.testing.assert_allclose(e["range_high"], fwd * np.exp(-0.5 * s**2 + z * s), rtol=1e-6)
    np.testing.assert_allclose(e["range_low_smile"], fwd * np.exp(-0.5 * s**2 - z * s), rtol=1e-5)
    np.testing.assert_allclose(e["range_high_smile"], fwd * np.exp(-0.5 * s**2 + z * s), rtol=1e-5)


def test_flat_world_distribution_integrates_to_one_with_mean_forward(flat_world):
    ann, ts, fwd, _ = flat_world
    dist = ann.distribution(EXPIRIES[1])
    assert dist.mass() == pytest.approx(1.0, abs=1e-4)
    assert dist.mean() == pytest.approx(fwd[1], rel=1e-4)


def test_horizon_range_interpolates_total_variance(flat_world):
    """At an expiry's own horizon the range equals that expiry's plain range; between expiries the
    flat world's total variance sigma^2 t is linear in t, so the range uses sigma = 0.25 [D]."""
    ann, ts, fwd, _ = flat_world
    days = ts[1] * 365.0
    f, lo, hi = ann.horizon_range(days)
    assert f == pytest.approx(fwd[1], rel=1e-9)
    assert lo == pytest.approx(ann.expiries["range_low"].iloc[1], rel=1e-5)
    mid_days = 0.5 * (ts[0] + ts[1]) * 365.0
    f, lo, hi = ann.horizon_range(mid_days)
    z = norm.ppf(0.84)
    t = mid_days / 365.0
    s = FLAT_VOL * np.sqrt(t)
    assert hi / f == pytest.approx(np.exp(-0.5 * s * s + z * s), rel=1e-5)  # REFERENCE.md §9 [C]


def test_probability_properties(flat_world):
    """Probabilities in [0, 1]; call and put P(beyond) at one strike sum to 1; P(beyond) monotone
    in strike; P(touch) >= P(beyond) out of the money [C, facts of probability]."""
    ann, *_ = flat_world
    c = ann.contracts
    for col in ("p_beyond", "p_beyond_flat", "p_touch", "p_breakeven"):
        v = c[col].dropna()
        assert ((v >= 0) & (v <= 1)).all(), col
    pivot = c.pivot_table(index=["expiry", "strike"], columns="kind", values="p_beyond")
    np.testing.assert_allclose(pivot["call"] + pivot["put"], 1.0, atol=1e-12)
    for _, grp in c[c["kind"] == "call"].groupby("expiry"):
        assert (np.diff(grp.sort_values("strike")["p_beyond"].to_numpy()) <= 1e-12).all()
    otm_spot = np.where(c["kind"] == "call", c["strike"] > SPOT, c["strike"] < SPOT)
    assert (c.loc[otm_spot, "p_touch"] >= c.loc[otm_spot, "p_beyond"] - 1e-12).all()


# --------------------------------------------------------------------------- mixture world

MIX_P = 0.6
MIX_SIG = (0.20, 0.30)
MIX_SHIFT = 0.01  # component 1 forward is F(1 + u); component 2 keeps the mean at F


def _mixture_parts(f):
    f1 = f * (1 + MIX_SHIFT)
    f2 = (f - MIX_P * f1) / (1 - MIX_P)
    return (f1, f2)


@pytest.fixture(scope="module")
def mixture_world():
    ts = year_fractions(EXPIRIES)
    fwd = SPOT * np.exp((RATE - DIV) * ts)
    dfs = np.exp(-RATE * ts)
    strikes = [_strikes(t) for t in ts]

    def price(i, k, is_call):
        f1, f2 = _mixture_parts(fwd[i])
        return (MIX_P * ql_black(f1, k, MIX_SIG[0], ts[i], dfs[i], is_call)
                + (1 - MIX_P) * ql_black(f2, k, MIX_SIG[1], ts[i], dfs[i], is_call))

    snap = build_snapshot(EXPIRIES, strikes, lambda i, k: price(i, k, True), lambda i, k: price(i, k, False),
                          spot=SPOT)
    return annotate(snap, SETTINGS), ts, fwd


def _mixture_p_above(f, k, t):
    out = 0.0
    for p, fi, s in zip((MIX_P, 1 - MIX_P), _mixture_parts(f), MIX_SIG):
        out = out + p * norm.cdf((np.log(fi / k) - 0.5 * s * s * t) / (s * np.sqrt(t)))
    return out


def test_mixture_world_p_beyond_matches_model_digital(mixture_world):
    """The smile's digital reproduces the model's exact P(S_T > K) = sum p_i N(d2_i) [D] to 2e-3 (raw SVI
    cannot follow a lognormal mixture's flattening wings exactly; measured 1.1e-3), while the one-vol
    figure is off by more than five times that where the skew matters."""
    ann, ts, fwd = mixture_world
    c = ann.contracts
    for i, e in enumerate(EXPIRIES):
        sub = c[(c["expiry"] == pd.Timestamp(e)) & (c["kind"] == "call")]
        exact = _mixture_p_above(fwd[i], sub["strike"].to_numpy(), ts[i])
        err = np.abs(sub["p_beyond"].to_numpy() - exact)
        assert err.max() < 2e-3, (e, err.max())
        flat_err = np.abs(sub["p_beyond_flat"].to_numpy() - exact)
        assert flat_err.max() > 5 * err.max()


def test_mixture_world_p_beyond_against_monte_carlo(mixture_world):
    """Seeded Monte Carlo of S_T under the mixture: 400k draws, SE <= 8e-4; 4 SE plus the 2e-3 fit error allowed."""
    ann, ts, fwd = mixture_world
    c = ann.contracts
    i = 1
    t = ts[i]
    rng = np.random.default_rng(7)
    n = 400_000
    regime = rng.random(n) < MIX_P
    f1, f2 = _mixture_parts(fwd[i])
    f_i = np.where(regime, f1, f2)
    s_i = np.where(regime, MIX_SIG[0], MIX_SIG[1])
    s_t = f_i * np.exp(-0.5 * s_i**2 * t + s_i * np.sqrt(t) * rng.standard_normal(n))
    assert s_t.mean() == pytest.approx(fwd[i], rel=3e-3)
    for strike, kind in ((80.0, "put"), (90.0, "put"), (110.0, "call"), (120.0, "call")):
        row = c[(c["expiry"] == pd.Timestamp(EXPIRIES[i])) & (c["strike"] == strike) & (c["kind"] == kind)].iloc[0]
        est = (s_t > strike).mean() if kind == "call" else (s_t < strike).mean()
        se = np.sqrt(est * (1 - est) / n)
        assert abs(row.p_beyond - est) < 4 * se + 2e-3, (strike, kind, row.p_beyond, est, se)


def test_mixture_world_smile_fit_is_close_and_arbitrage_free(mixture_world):
    ann, *_ = mixture_world
    e = ann.expiries
    assert (e["fit_rmse"] < 0.005).all()
    assert e["arbitrage_free"].all()
    assert (e["fit_method"] == "svi").all()
