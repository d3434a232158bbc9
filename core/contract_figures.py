"""Per-contract figures of an annotated chain, each row from its own expiry (the pipeline's last step).

The formulas are those of ``distribution.prob_above`` and ``prob_above_flat``, ``black76.delta``,
``greeks.gamma_theta_vega`` and ``trade_economics``, operation for operation, so the figures are
the same to the bit (tests/core/test_contract_figures.py compares them); what several figures
share is computed once: ln(K/F) at the strike (the pipeline's ``k_row``) and the smile's w(k)
there, d1 and N(d1) of delta and the greeks, ln(breakeven/F) of the buyer's P(profit) and move
to break even, and per expiry (then taken per row) sqrt(t), the ATM scale sigma_atm*sqrt(t),
ln(DF), the carry term and the day counts. Rows go ``CONTRACT_BLOCK`` at a time, in few
temporaries, written straight into one buffer holding every figure.

Units: prices and strikes in price units; vols annualised decimal; t in years on the basis;
probabilities in [0, 1]; gamma per unit of spot squared, theta per day of the basis, vega per
vol point; premiums per calendar day; returns decimal.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .standard_normal import ndtr
from .svi import SviSlices

#: Greeks beside delta: gamma per unit of spot squared, theta in price units per day of the
#: basis (a trading day on 252/250, a calendar day on 365), vega in price units per vol point.
GREEK_COLUMNS = ["gamma", "theta", "vega"]

#: Economics at executable prices (seller at the bid, buyer at the ask), core/trade_economics.py:
#: premiums and breakevens in price units; P(profit) at expiry, risk-neutral; premium per
#: calendar day; the seller's simple return on capital (cash-secured put: bid / (strike - bid),
#: covered call: bid / spot) and its simple ACT/365 annualisation; the buyer's move to break
#: even in sigmas (payoff direction, from the forward); the edge to mid (ask - mid) in price
#: units and as a share of each side's premium.
TRADE_COLUMNS = [
    "sell_premium", "buy_premium", "breakeven_sell", "breakeven_buy", "p_profit_sell", "p_profit_buy",
    "premium_per_day_sell", "premium_per_day_buy", "return_sell", "return_sell_annual",
    "move_to_breakeven_buy", "edge_to_mid", "edge_share_sell", "edge_share_buy",
]

#: The figures ``contract_figures`` returns, in this order.
FIGURE_COLUMNS = ["sigma_distance", "p_beyond", "p_beyond_flat", "delta", "breakeven", "p_breakeven", "spread_pct",
                  *GREEK_COLUMNS, *TRADE_COLUMNS]

#: Rows per block: a block's temporaries stay in the processor's cache and the allocator hands the
#: same memory back block after block, where whole-table temporaries would be fresh memory every
#: time (paid in page faults, more than the arithmetic at a million rows); large enough that the
#: per-block Python overhead does not show.
CONTRACT_BLOCK = 32768

_SQRT_2PI = np.sqrt(2.0 * np.pi)
_DAYS_PER_YEAR = 365.0  # trade_economics.DAYS_PER_YEAR


@dataclass(frozen=True)
class _PerExpiry:
    """What every row of an expiry shares, one value per expiry (taken per row by expiry index)."""

    a: np.ndarray  # SVI parameters, and sigma^2
    b: np.ndarray
    rho: np.ndarray
    m: np.ndarray
    sigma2: np.ndarray
    have_smile: np.ndarray
    t: np.ndarray  # years on the basis
    sqrt_t: np.ndarray
    forward: np.ndarray
    forward_ok: np.ndarray  # finite and positive
    discount: np.ndarray
    df_f_over_s: np.ndarray  # DF * (F / S): spot delta per unit of forward delta
    df_f: np.ndarray  # DF * F
    log_df: np.ndarray
    carry: np.ndarray  # ln(F/S) * DF * F
    atm_scale: np.ndarray  # sigma_atm * sqrt(t)
    flat_s: np.ndarray  # sigma_atm * sqrt(t) where both are positive, else NaN
    flat_half: np.ndarray  # 0.5 * flat_s
    atm_ok: np.ndarray  # sigma_atm > 0 and t > 0
    theta_days: np.ndarray  # days of the basis where theta is defined, else NaN
    calendar_days: np.ndarray  # calendar days where positive, else NaN


@dataclass(frozen=True)
class _RowSmiles:
    """Each row's raw SVI parameters (and sigma^2) and whether its forward is finite and positive."""

    a: np.ndarray
    b: np.ndarray
    rho: np.ndarray
    m: np.ndarray
    sigma2: np.ndarray
    forward_ok: np.ndarray

    @classmethod
    def of(cls, e: _PerExpiry, c) -> "_RowSmiles":
        return cls(e.a[c], e.b[c], e.rho[c], e.m[c], e.sigma2[c], e.forward_ok[c])


def _per_expiry(spot, have_smile, slices: SviSlices, atm_ivs, t_exp, t_cal, forwards, discounts, per_year):
    p = slices.params
    with np.errstate(divide="ignore", invalid="ignore"):
        sqrt_t = np.sqrt(t_exp)
        basis_days = t_exp * per_year
        calendar_days = t_cal * 365.0
        theta_ok = (spot > 0) & (discounts > 0) & (basis_days > 0)
        flat_ok = (atm_ivs > 0) & (t_exp > 0)
        flat_s = np.where(flat_ok, atm_ivs * np.sqrt(np.where(t_exp > 0, t_exp, np.nan)), np.nan)
        return _PerExpiry(
            a=np.asarray(p.a, dtype=float), b=np.asarray(p.b, dtype=float), rho=np.asarray(p.rho, dtype=float),
            m=np.asarray(p.m, dtype=float), sigma2=np.asarray(p.sigma, dtype=float) * np.asarray(p.sigma, dtype=float),
            have_smile=have_smile, t=t_exp, sqrt_t=sqrt_t, forward=forwards,
            forward_ok=np.isfinite(forwards) & (forwards > 0), discount=discounts,
            df_f_over_s=discounts * (forwards / spot), df_f=discounts * forwards, log_df=np.log(discounts),
            carry=np.log(forwards / spot) * discounts * forwards, atm_scale=atm_ivs * sqrt_t,
            flat_s=flat_s, flat_half=0.5 * flat_s, atm_ok=flat_ok,
            theta_days=np.where(theta_ok, np.where(basis_days > 0, basis_days, np.nan), np.nan),
            calendar_days=np.where(calendar_days > 0, calendar_days, np.nan),
        )


def contract_figures(spot, strike, bid, ask, mid, iv, k_row, is_call, exp_code, have_smile, slices, atm_ivs, t_exp,
                     t_cal, forwards, discounts, per_year) -> dict[str, np.ndarray]:
    """Per-contract figures (rows in table order), ``CONTRACT_BLOCK`` rows at a time.

    Arrays per row: ``strike``, ``bid``, ``ask``, ``mid`` (price units), ``iv`` (decimal), ``k_row`` =
    ln(K/F), ``is_call``, ``exp_code`` (expiry index). Per expiry: ``have_smile``, ``slices`` (SviSlices,
    one per expiry), ``atm_ivs``, ``t_exp`` (years on the basis), ``t_cal`` (ACT/365 years),
    ``forwards``, ``discounts``; ``per_year``: days of the basis per year. Returns the
    ``FIGURE_COLUMNS``, each a row of one buffer; every figure of a row depends on that row and its
    expiry only, so the blocks give what one pass would. Smile figures (sigma distance, P(beyond),
    P(breakeven), P(profit)) are NaN on rows whose expiry has no smile.
    """
    n = strike.size
    e = _per_expiry(float(spot), np.asarray(have_smile, dtype=bool), slices, np.asarray(atm_ivs, dtype=float),
                    np.asarray(t_exp, dtype=float), np.asarray(t_cal, dtype=float), np.asarray(forwards, dtype=float),
                    np.asarray(discounts, dtype=float), float(per_year))
    buffer = np.empty((len(FIGURE_COLUMNS), n))
    out = dict(zip(FIGURE_COLUMNS, buffer))
    for lo in range(0, n, CONTRACT_BLOCK):
        b = slice(lo, min(lo + CONTRACT_BLOCK, n))
        _block(e, float(spot), strike[b], bid[b], ask[b], mid[b], iv[b], k_row[b], is_call[b], exp_code[b],
               {name: v[b] for name, v in out.items()})
    return out


def _w_and_slope(sm: _RowSmiles, k):
    """(w(k), w'(k)) of raw SVI per row, as svi.w_and_dw_dk computes them."""
    x = k - sm.m
    r = x * x
    r += sm.sigma2
    np.sqrt(r, out=r)
    b = sm.b
    rho = sm.rho
    w = rho * x
    w += r
    w *= b
    w += sm.a
    w1 = np.divide(x, r, out=x)
    w1 += rho
    w1 *= b
    return w, w1


def _total_variance(sm: _RowSmiles, k):
    """w(k) of raw SVI per row, as svi.total_variance computes it."""
    x = k - sm.m
    r = x * x
    r += sm.sigma2
    np.sqrt(r, out=r)
    x *= sm.rho
    x += r
    x *= sm.b
    x += sm.a
    return x


def _prob_above_w(k, w, w1):
    """P(S_T > F e^k) clipped to [0, 1] from w and w' at k, as distribution.prob_above computes it;
    overwrites ``w1``. NaN where k is NaN or w <= 0."""
    sw = np.where(w > 0, w, np.nan)
    np.sqrt(sw, out=sw)
    dm = np.negative(k)
    dm /= sw
    dm -= 0.5 * sw
    p = ndtr(dm)
    phi = np.multiply(-0.5, dm)
    phi *= dm
    np.exp(phi, out=phi)
    phi /= _SQRT_2PI
    phi *= w1
    sw *= 2.0
    phi /= sw
    p -= phi
    np.clip(p, 0.0, 1.0, out=p)
    return p


def _log_ratio_where_ok(level, forward, forward_ok, log_ratio=None):
    """ln(level / F) where F and the level are finite and positive, else NaN (distribution._log_moneyness);
    ``log_ratio``: ln(level / F) already computed."""
    ok = np.isfinite(level)
    ok &= level > 0
    ok &= forward_ok
    return np.where(ok, np.log(level / forward) if log_ratio is None else log_ratio, np.nan)


def _prob_above_level(sm: _RowSmiles, forward, level, log_ratio=None):
    """P(S_T > level) from each row's smile (distribution.prob_above), NaN where the level or F is unusable."""
    k = _log_ratio_where_ok(level, forward, sm.forward_ok, log_ratio)
    w, w1 = _w_and_slope(sm, k)
    return _prob_above_w(k, w, w1)


def _p_above_breakeven(sm: _RowSmiles, forward, level, log_ratio=None):
    """trade_economics._p_above_breakeven: P(S_T > level), 1 where the level is at or below zero."""
    positive = level > 0
    p = _prob_above_level(sm, forward, np.where(positive, level, np.nan), log_ratio)
    return np.where(positive, p, np.where(np.isfinite(level), 1.0, np.nan))


def _either_side(is_call, p, call_takes_p: bool):
    """where(is_call, p, 1 - p) (call_takes_p) or where(is_call, 1 - p, p)."""
    q = np.subtract(1.0, p)
    return np.where(is_call, p, q) if call_takes_p else np.where(is_call, q, p)


def _put_side(out, rows, p, is_call, call_takes_p: bool) -> None:
    """``_put`` of ``_either_side(is_call, p, call_takes_p)``."""
    _put(out, rows, _either_side(is_call, p, call_takes_p))


def _put(out, rows, values) -> None:
    """``values`` (one per row of ``rows``) into ``out``, NaN elsewhere; rows None: every row."""
    if rows is None:
        out[...] = values
    else:
        out.fill(np.nan)
        out[rows] = values


def _block(e: _PerExpiry, spot, strike, bid, ask, mid, iv, k_row, is_call, c, o) -> None:
    """Every figure of one block of rows (``c``: each row's expiry index) into the views ``o``."""
    n = strike.size
    f = e.forward[c]
    t = e.t[c]
    # Breakeven at the mid: K + mid (call), K - mid (put).
    # (np.where rather than ufuncs with where=: calls and puts alternate row by row, and a masked
    # ufunc pays per run of the mask)
    be = o["breakeven"]
    be[...] = np.where(is_call, strike + mid, strike - mid)

    with np.errstate(divide="ignore", invalid="ignore"):
        # Smile figures on the rows whose expiry has a smile (rows None: all of them).
        smile = e.have_smile[c]
        rows = None if smile.all() else np.flatnonzero(smile)
        smile_vol = None
        if rows is None or rows.size:
            r = slice(None) if rows is None else rows
            cr, kr, fr, sr = c[r], k_row[r], f[r], strike[r]
            sm = _RowSmiles.of(e, cr)
            _put(o["sigma_distance"], rows, kr / e.atm_scale[cr])
            strike_ok = np.isfinite(sr)
            strike_ok &= sr > 0
            strike_ok &= sm.forward_ok
            all_ok = bool(strike_ok.all())
            k = kr if all_ok else np.where(strike_ok, kr, np.nan)
            w, w1 = _w_and_slope(sm, k)
            w_strike = w if all_ok else _total_variance(sm, kr)
            vol = np.where(w_strike > 0, w_strike, np.nan)
            vol /= t[r]
            np.sqrt(vol, out=vol)
            if rows is None:
                smile_vol = vol
            else:
                smile_vol = np.full(n, np.nan)
                smile_vol[rows] = vol
            _put_side(o["p_beyond"], rows, _prob_above_w(k, w, w1), is_call[r], True)
            s_flat = e.flat_s[cr]
            z = np.negative(k)
            z /= s_flat
            z -= e.flat_half[cr]
            _put_side(o["p_beyond_flat"], rows, ndtr(z), is_call[r], True)
            be_r = be[r]
            _put_side(o["p_breakeven"], rows, _prob_above_level(sm, fr, be_r), is_call[r], True)
        else:
            for name in ("sigma_distance", "p_beyond", "p_beyond_flat", "p_breakeven", "p_profit_sell",
                         "p_profit_buy"):
                o[name].fill(np.nan)

        # Delta on the spot (dV/dS = DF * F/S * dV/dF), at the contract's own vol, else the smile's.
        vol = np.where(np.isfinite(iv), iv, np.nan if smile_vol is None else smile_vol)
        s = vol * e.sqrt_t[c]
        log_fk = np.log(f / strike)
        d1 = log_fk / s
        d1 += 0.5 * s
        nd1 = ndtr(d1)
        fwd_delta = np.where(is_call, nd1, nd1 - 1.0)
        np.multiply(e.df_f_over_s[c], fwd_delta, out=o["delta"])
        spread = o["spread_pct"]
        np.subtract(ask, np.where(np.isfinite(bid), bid, 0.0), out=spread)
        spread /= mid
        np.copyto(spread, np.nan, where=~(mid > 0))

        # Gamma, theta, vega (greeks.gamma_theta_vega): d1 and N(d1) as above where the inputs are usable.
        ok = f > 0
        ok &= strike > 0
        ok &= vol > 0
        ok &= t > 0
        bad = ~ok
        np.copyto(s, np.nan, where=bad)
        np.copyto(d1, np.nan, where=bad)
        np.copyto(nd1, np.nan, where=bad)
        np.copyto(fwd_delta, np.nan, where=bad)
        phi = np.multiply(-0.5, d1)
        phi *= d1
        np.exp(phi, out=phi)
        phi /= _SQRT_2PI
        dfp = np.multiply(e.df_f[c], phi, out=phi)
        gamma = o["gamma"]
        if spot > 0:
            np.multiply(spot * spot, s, out=gamma)
            np.divide(dfp, gamma, out=gamma)
        else:
            gamma.fill(np.nan)
        vega = o["vega"]
        np.divide(s, np.where(vol > 0, vol, np.nan), out=vega)
        vega *= dfp
        vega /= 100.0
        d1 -= s
        nd2 = ndtr(d1)
        call = np.multiply(f, nd1, out=nd1)
        nd2 *= strike
        call -= nd2
        value = np.where(is_call, call, call - (f - strike))
        value *= e.discount[c]
        life = np.multiply(dfp, s, out=dfp)
        life /= 2.0
        value *= e.log_df[c]
        life += value
        fwd_delta *= e.carry[c]
        life += fwd_delta
        theta = o["theta"]
        np.negative(life, out=theta)
        theta /= e.theta_days[c]

        # Economics at the bid and the ask (trade_economics).
        sell = o["sell_premium"]
        sell[...] = np.where(bid > 0, bid, np.nan)
        buy = o["buy_premium"]
        buy[...] = np.where(ask > 0, ask, np.nan)
        be_sell = o["breakeven_sell"]
        be_sell[...] = np.where(is_call, strike + sell, strike - sell)
        be_buy = o["breakeven_buy"]
        be_buy[...] = np.where(is_call, strike + buy, strike - buy)
        log_buy = np.log(be_buy / f)
        z = log_buy / e.atm_scale[c]
        move_ok = f > 0
        move_ok &= be_buy > 0
        move_ok &= e.atm_ok[c]
        o["move_to_breakeven_buy"][...] = np.where(move_ok, np.where(is_call, z, -z), np.nan)
        if rows is None or rows.size:
            r = slice(None) if rows is None else rows
            fr = f[r]
            _put_side(o["p_profit_sell"], rows, _p_above_breakeven(sm, fr, be_sell[r]), is_call[r], False)
            _put_side(o["p_profit_buy"], rows, _p_above_breakeven(sm, fr, be_buy[r], log_buy[r]), is_call[r], True)
        days = e.calendar_days[c]
        np.divide(sell, days, out=o["premium_per_day_sell"])
        np.divide(buy, days, out=o["premium_per_day_buy"])
        ret = o["return_sell"]
        capital = np.where(is_call, spot, strike - sell)
        ret[...] = np.where(capital > 0, sell / capital, np.nan)
        annual = np.multiply(ret, _DAYS_PER_YEAR, out=o["return_sell_annual"])
        annual /= days
        edge = o["edge_to_mid"]
        np.subtract(ask, mid, out=edge)
        np.divide(edge, sell, out=o["edge_share_sell"])
        np.divide(edge, buy, out=o["edge_share_buy"])
