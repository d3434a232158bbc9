"""contract_figures computes what the library functions it shares work among compute, to the bit [D].

The per-contract figures are computed with their intermediate values shared
(ln(K/F), d1 and N(d1), per-expiry sqrt(t) and carry terms) and few
temporaries; every column must equal, bit for bit, the one composed from the
functions that define it (distribution.prob_above / prob_above_flat,
black76.delta, greeks.gamma_theta_vega, trade_economics), on rows meant to
reach every branch: no vol, zero and negative bids and asks, put breakevens
at or below zero, an expiry without a smile, an expiry with no time left,
several blocks of rows. The figures' own correctness is checked against
outside references in test_pipeline_trade.py, test_greeks.py,
test_trade_economics.py and test_distribution.py.
"""

from __future__ import annotations

import numpy as np
import pytest

from chaintriage.core import black76, greeks
from chaintriage.core import contract_figures as cf
from chaintriage.core import trade_economics as econ
from chaintriage.core.distribution import prob_above, prob_above_flat
from chaintriage.core.svi import SviParams, SviSlices


def _reference(spot, strike, bid, ask, mid, iv, k_row, is_call, code, have_smile, slices, atm_ivs, t_exp, t_cal,
               forwards, discounts, per_year) -> dict[str, np.ndarray]:
    """The figures from the defining functions, one whole-table pass (the pipeline's former composition)."""
    n = strike.size
    t_row, f_row, df_row = t_exp[code], forwards[code], discounts[code]
    nan = lambda: np.full(n, np.nan)  # noqa: E731
    sigma_distance, p_above, p_above_flat, smile_vol, p_above_be = nan(), nan(), nan(), nan(), nan()
    breakeven = np.where(is_call, strike + mid, strike - mid)
    rows = np.flatnonzero(have_smile[code])
    row_smiles = slices.take(code[rows])
    atm_row, t_r, f_r = atm_ivs[code[rows]], t_row[rows], f_row[rows]
    with np.errstate(divide="ignore", invalid="ignore"):
        sigma_distance[rows] = k_row[rows] / (atm_row * np.sqrt(t_r))
        p_above[rows] = prob_above(row_smiles, f_r, strike[rows])
        p_above_flat[rows] = prob_above_flat(f_r, strike[rows], atm_row, t_r)
        w_r = np.asarray(row_smiles.total_variance(k_row[rows]), dtype=float)
        smile_vol[rows] = np.sqrt(np.where(w_r > 0, w_r, np.nan) / t_r)
        be = breakeven[rows]
        ok = np.isfinite(be) & (be > 0)
        pa_be = np.full(rows.size, np.nan)
        pa_be[ok] = prob_above(row_smiles.take(ok), f_r[ok], be[ok])
        p_above_be[rows] = pa_be
        vol = np.where(np.isfinite(iv), iv, smile_vol)
        delta = df_row * (f_row / spot) * black76.delta(f_row, strike, vol, t_row, 1.0, is_call)
        spread_pct = np.where(mid > 0, (ask - np.where(np.isfinite(bid), bid, 0.0)) / mid, np.nan)
        sell, buy = econ.executable_premiums(bid, ask)
        p_sell, p_buy = nan(), nan()
        p_sell[rows], p_buy[rows] = econ.profit_probabilities(row_smiles, f_row[rows], strike[rows], sell[rows],
                                                              buy[rows], is_call[rows])
        days = t_cal[code] * 365.0
        gamma, theta, vega = greeks.gamma_theta_vega(spot, f_row, strike, vol, t_row, df_row, t_row * per_year, is_call)
        ret = econ.seller_return(strike, spot, sell, is_call)
        edge = econ.edge_to_mid(ask, mid)
        be_buy = econ.breakeven(strike, buy, is_call)
        return {
            "sigma_distance": sigma_distance,
            "p_beyond": np.where(is_call, p_above, 1.0 - p_above),
            "p_beyond_flat": np.where(is_call, p_above_flat, 1.0 - p_above_flat),
            "delta": delta, "breakeven": breakeven,
            "p_breakeven": np.where(is_call, p_above_be, 1.0 - p_above_be),
            "spread_pct": spread_pct, "gamma": gamma, "theta": theta, "vega": vega,
            "sell_premium": sell, "buy_premium": buy,
            "breakeven_sell": econ.breakeven(strike, sell, is_call), "breakeven_buy": be_buy,
            "p_profit_sell": p_sell, "p_profit_buy": p_buy,
            "premium_per_day_sell": econ.premium_per_day(sell, days),
            "premium_per_day_buy": econ.premium_per_day(buy, days),
            "return_sell": ret, "return_sell_annual": econ.annualised_simple(ret, days),
            "move_to_breakeven_buy": econ.move_to_breakeven(f_row, be_buy, atm_ivs[code], t_row, is_call),
            "edge_to_mid": edge,
            "edge_share_sell": econ.share_of_premium(edge, sell), "edge_share_buy": econ.share_of_premium(edge, buy),
        }


def _chain(n: int, seed: int, all_smiles: bool):
    """Rows over 6 expiries with the awkward cases mixed in (see the module docstring)."""
    rng = np.random.default_rng(seed)
    n_exp = 6
    t_exp = np.array([0.0, 0.02, 0.1, 0.5, 1.0, 2.0])
    t_cal = t_exp * 1.05
    forwards = np.array([100.0, 100.5, 101.0, 102.0, 104.0, 108.0])
    discounts = np.exp(-0.04 * t_cal)
    have_smile = np.ones(n_exp, dtype=bool) if all_smiles else np.array([False, True, True, False, True, True])
    a = np.array([0.001, 0.002, 0.008, 0.04, 0.08, 0.16])
    params = SviParams(a, np.full(n_exp, 0.1), np.full(n_exp, -0.4), np.full(n_exp, 0.02), np.full(n_exp, 0.15))
    slices = SviSlices(params)
    atm_ivs = np.sqrt(np.asarray(slices.total_variance(0.0)) / np.where(t_exp > 0, t_exp, np.nan))
    if not all_smiles:
        atm_ivs[~have_smile] = np.nan
    code = np.sort(rng.integers(0, n_exp, n))
    f_row = forwards[code]
    strike = np.round(f_row * np.exp(rng.normal(0, 0.4, n)), 2)
    is_call = rng.random(n) < 0.5
    mid = np.abs(rng.normal(0, 8.0, n)) + 0.01
    half = 0.05 * mid
    bid, ask = mid - half, mid + half
    pick = rng.random(n)
    bid[pick < 0.1] = 0.0
    bid[(pick >= 0.1) & (pick < 0.13)] = np.nan
    ask[(pick >= 0.13) & (pick < 0.15)] = -1.0
    mid[(pick >= 0.15) & (pick < 0.17)] = 0.0
    big = (pick >= 0.17) & (pick < 0.2) & ~is_call  # put breakevens at or below zero
    mid[big] = strike[big] + 1.0
    bid[big] = strike[big] + 0.5
    ask[big] = strike[big]
    iv = np.where(rng.random(n) < 0.2, np.nan, 0.1 + 0.5 * rng.random(n))
    k_row = np.log(strike / f_row)
    return (100.0, strike, bid, ask, mid, iv, k_row, is_call, code, have_smile, slices, atm_ivs, t_exp, t_cal,
            forwards, discounts, 252.0)


def _same_bits(x: np.ndarray, y: np.ndarray) -> bool:
    nx, ny = np.isnan(x), np.isnan(y)
    return bool(np.array_equal(nx, ny) and np.array_equal(x[~nx].view(np.int64), y[~ny].view(np.int64)))


@pytest.mark.parametrize("all_smiles", [True, False])
def test_every_figure_equals_the_defining_functions_to_the_bit(all_smiles, monkeypatch):
    monkeypatch.setattr(cf, "CONTRACT_BLOCK", 1000)  # several blocks, the last one short
    args = _chain(4321, 7, all_smiles)
    got = cf.contract_figures(*args)
    want = _reference(*args)
    assert list(got) == cf.FIGURE_COLUMNS == list(want)
    for name in cf.FIGURE_COLUMNS:
        assert _same_bits(got[name], want[name]), name
    # the awkward rows were there: finite and NaN figures side by side
    for name in ("p_breakeven", "p_profit_sell", "p_profit_buy", "delta", "theta", "move_to_breakeven_buy",
                 *(() if all_smiles else ("p_beyond", "sigma_distance"))):
        assert np.isfinite(got[name]).any() and np.isnan(got[name]).any(), name


def test_no_rows_gives_empty_figures():
    args = list(_chain(10, 1, True))
    for i in (1, 2, 3, 4, 5, 6, 7, 8):
        args[i] = args[i][:0]
    got = cf.contract_figures(*args)
    assert list(got) == cf.FIGURE_COLUMNS and all(v.size == 0 for v in got.values())
