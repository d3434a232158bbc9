"""Probability that the underlying touches a level before expiry.

Model: geometric Brownian motion d ln S = nu dt + sigma dW with nu = mu - sigma^2/2,
watched continuously from the snapshot time to expiry. The closed form is the
reflection principle with a drift change (the joint law of drifted Brownian
motion and its running maximum). With b = ln(H/S0):

    upper (b > 0): P = N((-b + nu T)/(s)) + exp(2 nu b / sigma^2) N((-b - nu T)/s)
    lower (b < 0): P = N(( b - nu T)/(s)) + exp(2 nu b / sigma^2) N(( b + nu T)/s)

with s = sigma sqrt(T). Both cases are one formula in the distance
beta = |b| and the drift toward the level nu' = nu * sign(b):

    P = N(x1) + exp(2 nu' beta / sigma^2) N(x2),
    x1 = (nu' T - beta)/s,  x2 = -(nu' T + beta)/s.

Units: ``spot``, ``barrier``, ``forward`` and ``strike`` in price units;
``t`` in years; ``sigma`` annualised (decimal) on the same time basis as ``t``;
``drift`` mu annualised, continuously compounded (decimal per year). All
probabilities are plain numbers in [0, 1]. Invalid inputs (non-positive or
non-finite prices, negative or NaN vol, NaN time or drift) give NaN; the
pipeline turns a NaN into a finding.
"""

from __future__ import annotations

import numpy as np
from .standard_normal import erfcx, ndtr

_SQRT1_2 = np.sqrt(0.5)


def prob_touch(spot, barrier, t, sigma, drift):
    """P(the underlying trades at ``barrier`` at some time in (0, t]), in [0, 1].

    Vectorised (numpy broadcasting) over all arguments. ``barrier`` above
    ``spot`` is an upper level, below it a lower level. Edge behaviour:
    ``barrier == spot`` gives 1; ``t <= 0`` gives 0 otherwise; ``sigma == 0``
    gives the deterministic answer (1 if spot * exp(drift * t) reaches the
    barrier by t, else 0). Stable for tiny sigma: with drift toward the level
    the product exp(2 nu' beta / sigma^2) N(x2) is evaluated as
    0.5 erfcx(-x2/sqrt 2) exp(-x1^2/2), which never overflows.
    """
    s0, h, t, sig, mu = np.broadcast_arrays(
        *(np.asarray(a, dtype=float) for a in (spot, barrier, t, sigma, drift))
    )
    out = np.full(s0.shape, np.nan)

    valid = (
        np.isfinite(s0) & (s0 > 0) & np.isfinite(h) & (h > 0)
        & np.isfinite(t) & np.isfinite(sig) & (sig >= 0) & np.isfinite(mu)
    )
    at = valid & (h == s0)
    expired = valid & ~at & (t <= 0)
    flat = valid & ~at & ~expired & (sig == 0)
    live = valid & ~at & ~expired & (sig > 0)

    out[at] = 1.0
    out[expired] = 0.0

    with np.errstate(divide="ignore", invalid="ignore", over="ignore", under="ignore"):
        b = np.log(h / s0)
        beta = np.abs(b)
        nu = mu - 0.5 * sig * sig
        nu_to = nu * np.sign(b)  # drift toward the level

        # sigma == 0: the path is deterministic, ln S_t = ln S0 + mu t.
        out[flat] = (mu[flat] * np.sign(b[flat]) * t[flat] >= beta[flat]).astype(float)

        L = live
        sq = np.sqrt(t[L])
        sd = sig[L] * sq
        x1 = (nu_to[L] * t[L] - beta[L]) / sd
        x2 = -(nu_to[L] * t[L] + beta[L]) / sd
        # Second term: exp(2 nu' beta / sigma^2) * N(x2).
        # Drift away from the level (nu' <= 0): the exponent is <= 0, the plain form is safe
        # and keeps full relative accuracy deep in the tail.
        # Drift toward it (nu' > 0, so x2 < 0): write N(x2) = 0.5 erfcx(-x2/sqrt2) exp(-x2^2/2)
        # and use 2 nu' beta / sigma^2 - x2^2/2 = -x1^2/2 (no overflow for any sigma).
        toward = nu_to[L] > 0
        second = np.where(
            toward,
            0.5 * erfcx(-x2 * _SQRT1_2) * np.exp(-0.5 * x1 * x1),
            np.exp(np.minimum(2.0 * nu_to[L] * beta[L] / (sig[L] * sig[L]), 0.0)) * ndtr(x2),
        )
        out[L] = np.clip(ndtr(x1) + second, 0.0, 1.0)

    return out if out.ndim else float(out)


def prob_touch_smile(spot, forward, strike, t, smile_vol_at_strike, p_beyond, is_call=None):
    """Touch probability of ``strike`` with the smile vol at that strike, floored by finishing past it.

    Returns max(P_touch, P(finish on the far side of the strike from spot)), in [0, 1].

    - P_touch is ``prob_touch`` with sigma = the smile's vol at the strike and the
      risk-neutral drift mu = ln(forward/spot)/t (per year). Using one vol per
      strike is an approximation: a smile has no unique path model, so there is
      no exact smile touch probability without choosing dynamics.
    - The floor: paths are continuous, so ending beyond a level that lies on the
      far side of spot means the path crossed it: P(touch) >= P(S_T past the
      strike, away from spot). This holds for every strike, including those
      between spot and the forward. The smile's digital can exceed the one-vol
      figure at a skewed strike, so the floor keeps the two columns consistent.
    - Which side is "far": strike above spot -> P(S_T > K); below -> P(S_T < K).
      ``p_beyond`` is a contract's finish-beyond probability (payoff direction:
      above the strike for a call, below for a put). With ``is_call`` given
      (bool array), the far-side probability is ``p_beyond`` for contracts that
      are out of the money relative to spot (call above spot, put below) and
      ``1 - p_beyond`` for those in the money relative to spot. With
      ``is_call=None`` ``p_beyond`` is taken to be already the far-side figure
      (the out-of-the-money side).
    - Touch here means the path from spot reaches the strike (DESIGN: "trades at
      the strike"), so a strike that spot has already passed in a contract's
      payoff direction is not automatically touched: its P(touch) is the chance
      of coming back to it. Only a strike exactly at spot gets 1.
    - A NaN smile vol gives NaN (the floor alone is not a touch figure); a NaN
      ``p_beyond`` leaves P_touch unfloored. ``t <= 0`` gives 0 (1 at spot).
    """
    s0, f, k, t, vol, pb = np.broadcast_arrays(
        *(np.asarray(a, dtype=float) for a in (spot, forward, strike, t, smile_vol_at_strike, p_beyond))
    )
    with np.errstate(divide="ignore", invalid="ignore"):
        mu = np.where(t > 0, np.log(f / s0) / np.where(t > 0, t, 1.0), 0.0)
        # An expired or unusable forward only matters while there is time left.
        mu = np.where((t > 0) | np.isnan(t), mu, 0.0)
    p_touch = np.asarray(prob_touch(s0, k, t, vol, mu), dtype=float)

    if is_call is None:
        far = pb
    else:
        call = np.broadcast_to(np.asarray(is_call, dtype=bool), pb.shape)
        otm_by_spot = np.where(call, k > s0, k < s0)
        far = np.where(otm_by_spot, pb, 1.0 - pb)
    far = np.where(t > 0, far, np.nan)  # at expiry nothing is left to finish beyond
    out = np.where(np.isnan(p_touch), np.nan, np.fmax(p_touch, np.clip(far, 0.0, 1.0)))
    return out if out.ndim else float(out)
