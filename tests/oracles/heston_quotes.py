"""Heston chains with clean or realistic quotes, and the truth to score a smile fit against.

Prices: QuantLib's AnalyticHestonEngine via ``tests/oracles/heston.heston_price`` [L].

- Clean quotes: bid = ask = the model price (half spread 0).
- Realistic quotes (common practice of listed equity options [C]): the half spread is
  ``base + rel * price`` widened in the wings by ``(1 + wing * |z|)`` (z the strike's distance
  in flat standard deviations), then bid rounded down and ask rounded up to the tick (0.01 below
  a price of 3, 0.05 above). A model price below one tick gets a zero bid and an ask of one tick
  or two: those are the far-wing quotes with a zero bid, whose mid is not the model price.
- Truth: P(S_T > K) is QuantLib's analytic Heston digital, taken as a central difference of call
  prices in strike, -(C(K+h) - C(K-h)) / (2 h DF), with h = 1e-3 F (error O(h^2), about 1e-8 here)
  [D]; the at-the-money implied vol is QuantLib's Black implied vol of the Heston call at K = F
  (``ql.blackFormulaImpliedStdDev``) [L].
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import QuantLib as ql

from chaintriage.core.snapshot import CONTRACT_COLUMNS, Snapshot
from tests.core.chain_builders import AS_OF, year_fractions
from tests.oracles.heston import HestonParams, heston_price


def strikes_for(p: HestonParams, t: float, n_sd_low: float = 4.0, n_sd_high: float = 3.0,
                n: int = 60) -> np.ndarray:
    """About ``n`` strikes from ``n_sd_low`` flat sds below the forward to ``n_sd_high`` above, on a round step."""
    f = float(p.forward(t))
    sd = np.sqrt(p.v0 * t)
    raw = f * (np.exp(n_sd_high * sd) - np.exp(-n_sd_low * sd)) / n
    step = min((s for s in (0.1, 0.25, 0.5, 1.0, 2.5, 5.0) if s >= raw), default=5.0)
    lo = max(np.floor(f * np.exp(-n_sd_low * sd) / step) * step, step)
    hi = np.ceil(f * np.exp(n_sd_high * sd) / step) * step
    return np.arange(lo, hi + step / 2, step)


def quotes(price: np.ndarray, z: np.ndarray, *, base: float = 0.02, rel: float = 0.03,
           wing: float = 0.35) -> tuple[np.ndarray, np.ndarray]:
    """Realistic (bid, ask) around model prices (rules in the module docstring)."""
    half = (base + rel * price) * (1.0 + wing * np.abs(z))
    tick = np.where(price < 3.0, 0.01, 0.05)
    bid = np.floor((price - half) / tick + 1e-9) * tick
    ask = np.ceil((price + half) / tick - 1e-9) * tick
    bid = np.where(price < tick, 0.0, np.maximum(bid, 0.0))
    ask = np.maximum(ask, tick)
    return np.round(bid, 6), np.round(ask, 6)


def heston_chain(p: HestonParams, expiries: list[str], *, realistic: bool, strikes=None,
                 underlying: str = "HSTN", **quote_kw):
    """(snapshot, t per expiry, strikes per expiry): calls and puts at every strike, QuantLib Heston prices."""
    t = np.asarray(year_fractions(list(expiries), basis="365"), float)
    strikes = strikes or [strikes_for(p, ti) for ti in t]
    rows = []
    for e, ti, ks in zip(expiries, t, strikes):
        f = float(p.forward(ti))
        z = np.log(ks / f) / np.sqrt(p.v0 * ti)
        for kind in ("call", "put"):
            price = heston_price(p, ti, ks, kind == "call")
            if realistic:
                bid, ask = quotes(price, z, **quote_kw)
            else:
                bid, ask = price, price
            rows.append(pd.DataFrame({
                "expiry": pd.Timestamp(e), "strike": ks, "kind": kind, "bid": bid, "ask": ask,
                "iv": np.nan, "iv_basis": "", "volume": 100.0, "open_interest": 1000.0, "settle": "pm",
                "rate": p.r, "div_yield": p.q, "source_file": "heston.csv",
            }))
    frame = pd.concat(rows, ignore_index=True)
    frame["source_line"] = np.arange(2, len(frame) + 2)
    snap = Snapshot(underlying=underlying, as_of=AS_OF, spot=p.spot, contracts=frame[list(CONTRACT_COLUMNS)],
                    sources=("heston.csv",))
    return snap, t, strikes


def true_prob_above(p: HestonParams, t: float, strikes) -> np.ndarray:
    """P(S_T > K) under the Heston model: central difference of QuantLib call prices in strike."""
    ks = np.asarray(strikes, float)
    h = 1e-3 * float(p.forward(t))
    up = heston_price(p, t, ks + h, True)
    dn = heston_price(p, t, ks - h, True)
    return -(up - dn) / (2.0 * h * float(p.discount(t)))


def true_atm_vol(p: HestonParams, t: float) -> float:
    """Black implied vol of the Heston call struck at the forward (QuantLib)."""
    f = float(p.forward(t))
    df = float(p.discount(t))
    c = float(heston_price(p, t, [f], True)[0])
    return ql.blackFormulaImpliedStdDev(ql.Option.Call, f, f, c, df) / np.sqrt(t)


def true_vols(p: HestonParams, t: float, strikes) -> np.ndarray:
    """Black implied vols of the Heston out-of-the-money prices at ``strikes`` (QuantLib)."""
    f = float(p.forward(t))
    df = float(p.discount(t))
    ks = np.asarray(strikes, float)
    out = []
    for k in ks:
        is_call = k >= f
        price = float(heston_price(p, t, [k], is_call)[0])
        kind = ql.Option.Call if is_call else ql.Option.Put
        out.append(ql.blackFormulaImpliedStdDev(kind, float(k), f, price, df) / np.sqrt(t))
    return np.array(out)


def score(annotated, p: HestonParams, expiry: str, t: float, near_sd: float = 1.0):
    """Errors of one expiry's out-of-the-money P(beyond) and ATM IV against the truth.

    Returns dict: near / wing = largest |P(beyond) - truth| over out-of-the-money contracts with
    |sigma distance| <= ``near_sd`` / beyond it (within the quoted strikes); atm = |ATM IV - truth|
    in vol points; wiggle = largest |fitted vol - Heston implied vol| within ``near_sd`` sds, vol
    points; skew_sign = sign of the fitted SVI rho (the model's rho < 0 skews the smile down:
    the left wing steeper than the right).
    """
    c = annotated.contracts
    sub = c[(c["expiry"] == pd.Timestamp(expiry)) & c["otm"]]
    sub = sub[np.isfinite(sub["p_beyond"].to_numpy(float))]
    ks = sub["strike"].to_numpy(float)
    truth_above = true_prob_above(p, t, ks)
    truth = np.where(sub["kind"].to_numpy() == "call", truth_above, 1.0 - truth_above)
    err = np.abs(sub["p_beyond"].to_numpy(float) - truth)
    z = np.abs(sub["sigma_distance"].to_numpy(float))
    res = annotated.results[pd.Timestamp(expiry)]
    atm = abs(res.atm_iv - true_atm_vol(p, t)) * 100.0
    near = z <= near_sd
    wiggle = float("nan")
    if res.smile is not None and near.any():
        true_iv = true_vols(p, t, ks[near])
        wiggle = float(np.max(np.abs(res.smile.vol(np.log(ks[near] / res.forward)) - true_iv))) * 100.0
    slope = float(res.smile.params.rho) if res.smile is not None else float("nan")
    return {
        "near": float(err[z <= near_sd].max(initial=0.0)),
        "wing": float(err[z > near_sd].max(initial=0.0)),
        "atm": atm,
        "skew_sign": float(np.sign(slope)),
        "wiggle": wiggle,
        "rmse": float(annotated.expiries.set_index("expiry").loc[pd.Timestamp(expiry), "fit_rmse"]) * 100.0,
        "n": int(len(sub)),
    }
