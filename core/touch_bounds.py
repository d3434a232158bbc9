"""Model-free bounds on the touch probability from the prices of European options.

Brown, Hobson & Rogers, "Robust hedging of barrier options", *Finance and
Stochastics* 5 (2001) [M]: any model whose paths are continuous and that
reprices every quoted European option gives a touch probability between

- low: P(S_T beyond the level on the far side of spot). A continuous path that
  ends beyond the level crossed it.
- high: for a level H below spot, min over y > H of Put(y) / (DF (y - H));
  above spot, min over y < H of Call(y) / (DF (H - y)). Superhedge for a
  martingale G: hold 1/(y - H) puts struck at y and, when G first reaches H,
  buy 1/(y - H) forwards at H; the payoff is at least 1 on every touched path.

Carry (r != q): the spot is not a martingale, the forward price for the expiry,
G_t = S_t F_T / F_t, is (F_t the forward for time t, F_0 = S_0, G_T = S_T). S
touches H exactly when G touches the moving level H F_T / F_t, which runs
from H F_T / S_0 at the snapshot to H at expiry. The superhedge above works
with the moving level if the bound uses its worst value: for a level below
spot H' = H max(1, F_T / S_0) (the highest the moving level gets), for a level
above spot H' = H min(1, F_T / S_0) (the lowest); the puts/calls are the
market's on S_T. This assumes carry of one sign up to expiry (the forward
moves monotonically from S_0 to F_T). Zero carry gives the bounds as stated.

Units: prices and levels in price units; ``w`` total variance; probabilities
in [0, 1]. Put and call prices are taken undiscounted (DF cancels).
"""

from __future__ import annotations

import numpy as np
from .standard_normal import ndtr

from .distribution import prob_above

#: Grid of y for the upper bound: this many points over +/- ``Y_SPAN_SD`` at-the-money standard deviations.
Y_POINTS = 801
Y_SPAN_SD = 8.0
#: Levels per block of the upper-bound minimum (keeps each block's ratios in the processor's cache).
RATIO_BLOCK = 64


def _undiscounted_black(forward: float, strike: np.ndarray, w: np.ndarray, is_call: bool) -> np.ndarray:
    """E[(S_T - K)+] or E[(K - S_T)+] under a lognormal with total variance w (price units)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        sw = np.sqrt(np.maximum(w, 1e-300))
        d1 = (np.log(forward / strike) + 0.5 * w) / sw
        d2 = d1 - sw
        if is_call:
            return forward * ndtr(d1) - strike * ndtr(d2)
        return strike * ndtr(-d2) - forward * ndtr(-d1)


def _undiscounted_puts_and_calls(forward: float, strike: np.ndarray, w: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(put, call) of ``_undiscounted_black`` at once: the four normal probabilities in one ``ndtr`` call
    (elementwise, so the same numbers; a grid of a few hundred points pays mostly per call)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        sw = np.sqrt(np.maximum(w, 1e-300))
        d1 = (np.log(forward / strike) + 0.5 * w) / sw
        d2 = d1 - sw
        n = d1.size
        nd1, nd2, n_md2, n_md1 = ndtr(np.concatenate([d1, d2, -d2, -d1])).reshape(4, n)
        return strike * n_md2 - forward * n_md1, forward * nd1 - strike * nd2


def _lowest_ratio(price: np.ndarray, y: np.ndarray, h: np.ndarray, puts: bool) -> np.ndarray:
    """min over the grid ``y`` of price(y) / |y - h| for each level ``h``: y > h with puts, y < h with calls.

    inf where no grid point lies on that side; NaN where a price on that side
    is NaN. Levels go in sorted blocks of ``RATIO_BLOCK``; a block reads only
    the grid points on some level's side that can hold a level's minimum. The
    ratio grows as the level nears the point (rounded subtraction and division
    keep that order), so a point's ratio at the block's level furthest from
    it is a floor for all the block's levels, and the minimum at the level
    nearest to the points is a cap on every level's minimum; a point whose
    floor is above the cap is never the minimum and is skipped (exactly the
    same result).
    """
    out = np.full(h.size, np.inf)
    if not h.size:
        return out
    order = np.argsort(h)
    hs = h[order]
    got = np.empty(h.size)
    with np.errstate(divide="ignore", invalid="ignore"):
        for a in range(0, h.size, RATIO_BLOCK):
            hb = hs[a:a + RATIO_BLOCK]
            if puts:  # columns right of the block's lowest level
                j = int(np.searchsorted(y, hb[0], side="right"))
                yb, pb = y[j:], price[j:]
                cap_level, floor_level = hb[-1], hb[0]
                capped = yb > cap_level
                gap_cap = yb - cap_level
            else:  # columns left of its highest level
                j = int(np.searchsorted(y, hb[-1], side="left"))
                yb, pb = y[:j], price[:j]
                cap_level, floor_level = hb[0], hb[-1]
                capped = yb < cap_level
                gap_cap = cap_level - yb
            if not yb.size:
                got[a:a + hb.size] = np.inf
                continue
            cap = (pb[capped] / gap_cap[capped]).min() if capped.any() else np.inf
            floor = pb / ((yb - floor_level) if puts else (floor_level - yb))
            keep = ~(floor > cap)  # NaN prices stay (they make the minimum NaN)
            yb, pb = yb[keep], pb[keep]
            gap = (yb[None, :] - hb[:, None]) if puts else (hb[:, None] - yb[None, :])
            ratio = np.full(gap.shape, np.inf)
            np.divide(pb[None, :], gap, out=ratio, where=gap > 0)
            got[a:a + hb.size] = ratio.min(axis=1) if yb.size else np.inf
    out[order] = got
    return out


def touch_bounds(smile, forward: float, spot: float, levels) -> tuple[np.ndarray, np.ndarray]:
    """(low, high) touch bounds of each level (price units) for the expiry of ``smile`` with forward F_T.

    A level at spot gets (1, 1). NaN where the level is not a positive number
    or the smile gives no variance.
    """
    levels = np.asarray(levels, dtype=float)
    low = np.full(levels.shape, np.nan)
    high = np.full(levels.shape, np.nan)
    ok = np.isfinite(levels) & (levels > 0)
    if not (np.isfinite(forward) and forward > 0 and np.isfinite(spot) and spot > 0) or not ok.any():
        return low, high
    h, back = np.unique(levels[ok], return_inverse=True)
    below = h < spot
    at = h == spot
    above_p = np.asarray(prob_above(smile, forward, h), dtype=float)
    lo = np.where(below, 1.0 - above_p, above_p)

    w_atm = float(np.asarray(smile.total_variance(0.0)))
    sd = np.sqrt(w_atm) if np.isfinite(w_atm) and w_atm > 0 else 0.1
    ratio = forward / spot
    h_eff = np.where(below, h * max(1.0, ratio), h * min(1.0, ratio))
    k_h = np.log(h_eff / forward)
    span = Y_SPAN_SD * sd
    k = np.linspace(min(-span, k_h.min()), max(span, k_h.max()), Y_POINTS)
    y = forward * np.exp(k)
    w = np.asarray(smile.total_variance(k), dtype=float)
    put, call = _undiscounted_puts_and_calls(forward, y, w)
    hi = np.empty(h.size)
    hi[below] = _lowest_ratio(put, y, h_eff[below], True)
    hi[~below] = _lowest_ratio(call, y, h_eff[~below], False)
    hi = np.clip(hi, 0.0, 1.0)
    lo = np.clip(lo, 0.0, 1.0)
    hi = np.fmax(hi, lo)
    lo = np.where(at, 1.0, lo)
    hi = np.where(at, 1.0, hi)
    low[ok] = lo[back.ravel()]
    high[ok] = hi[back.ravel()]
    return low, high
