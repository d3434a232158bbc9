"""Touch figures of one expiry: local-vol P(touch) with its model-free bounds, or the one-vol fallback.

Assembles, for the strikes of one expiry, what ``touch_local_vol`` (the path
model: Dupire local vol from every fitted smile up to this expiry) and
``touch_bounds`` (Brown-Hobson-Rogers) compute, and decides what to show:

- P(touch) from the local-vol model, clipped into [low, high] where the
  numerics cross a bound (the count is returned and said in a note);
- the one-vol closed form (``touch.prob_touch_smile``: reflection principle at
  each strike's smile vol, floored by the far-side finish probability; the
  flat-smile special case of the model) with a finding when the local vol
  cannot be built: this expiry's smile is a fallback, or the local variance
  had to be guarded at more than ``MAX_GUARDED_SHARE`` of the grid near the
  forward, or the equation did not give a number;
- levels further than the grid span from spot get the far-side finish
  probability (the low bound; the touch is tiny that far out).

Units: ``t`` years on the smiles' clock; prices in price units.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .findings import NOTE, WARNING, Finding
from .local_vol import LocalVolSurface
from .touch import prob_touch_smile
from .touch_bounds import touch_bounds
from .touch_local_vol import touch_local_vol

#: Above this share of guarded local-variance points near the forward, the one-vol figure is used instead.
MAX_GUARDED_SHARE = 0.25
#: Touch figures this far outside a bound are "crossing" (counted and clipped); smaller gaps are rounding.
CROSS_TOLERANCE = 1e-9
#: Crossings larger than this get a note on the expiry (smaller ones are grid noise in the far wings).
CROSS_NOTE = 1e-4

#: Smile methods that are fallbacks (no shape to build local vol from).
FALLBACK_SMILES = ("flat",)

LOCAL_VOL = "local vol"
ONE_VOL = "one-vol"


@dataclass
class ExpiryTouch:
    """Per-strike touch figures of one expiry (arrays aligned with the strikes given).

    ``method``: 'local vol' or 'one-vol' (the fallback); ``clipped``: strikes
    whose local-vol figure crossed a bound and was clipped into it, ``max_cross``
    the largest distance outside a bound before clipping.
    """

    p_touch: np.ndarray
    low: np.ndarray
    high: np.ndarray
    method: str
    clipped: int = 0
    guarded_share: float = 0.0
    findings: list[Finding] = field(default_factory=list)
    max_cross: float = 0.0


def expiry_touch(strikes, spot: float, t: np.ndarray, forwards: np.ndarray, smiles: list, index: int,
                 smile_vol, underlying: str | None = None, label: str | None = None) -> ExpiryTouch:
    """Touch figures for ``strikes`` of expiry ``index``.

    ``t``, ``forwards``, ``smiles``: per expiry of the snapshot (years, price
    units, smile or None); only expiries with a smile and 0 < t <= t[index]
    build the surface. ``smile_vol``: the smile's vol at each strike (for the one-vol fallback).
    """
    strikes = np.asarray(strikes, dtype=float)
    smile = smiles[index]
    t_e = float(t[index])
    low, high = touch_bounds(smile, float(forwards[index]), spot, strikes)
    findings: list[Finding] = []

    def one_vol(reason: str) -> ExpiryTouch:
        findings.append(Finding(WARNING, f"touch: {reason}; P(touch) is the one-vol figure at each strike's "
                                "smile vol", underlying=underlying, expiry=label))
        p = prob_touch_smile(spot, float(forwards[index]), strikes, t_e, smile_vol, low)
        return ExpiryTouch(np.asarray(p, dtype=float), low, high, ONE_VOL, findings=findings)

    if getattr(smile, "method", "") in FALLBACK_SMILES:
        return one_vol("this expiry's smile is a fallback, so no local volatility is built from it")
    use = [i for i in range(len(smiles)) if smiles[i] is not None and np.isfinite(t[i]) and 0 < t[i] <= t_e
           and np.isfinite(forwards[i]) and forwards[i] > 0]
    use.sort(key=lambda i: (t[i], i == index))
    surface = LocalVolSurface.build([t[i] for i in use], [forwards[i] for i in use], spot,
                                    [smiles[i] for i in use])
    solution = touch_local_vol(surface, t_e, strikes)
    if solution.guarded_share > MAX_GUARDED_SHARE:
        return one_vol(f"local variance floored or capped at {solution.guarded_share:.0%} of the grid near "
                       "the forward (calendar or butterfly arbitrage in the smiles)")
    p = solution.p_touch
    inside_grid = np.isfinite(p)
    if not inside_grid.any() and np.isfinite(strikes).any():
        return one_vol("the local-volatility equation gave no number")
    p = np.where(inside_grid, p, low)  # beyond the grid span: the far-side finish probability
    if solution.guarded_share > 0:
        findings.append(Finding(NOTE, f"touch: local variance floored or capped at {solution.guarded_share:.1%} "
                                "of the grid near the forward (calendar or butterfly arbitrage in the smiles)",
                                underlying=underlying, expiry=label))
    with np.errstate(invalid="ignore"):
        crossed = (p < low - CROSS_TOLERANCE) | (p > high + CROSS_TOLERANCE)
    clipped = int(np.count_nonzero(crossed))
    gap = np.fmax(low - p, p - high)
    max_cross = float(np.nanmax(np.where(crossed, gap, 0.0))) if p.size else 0.0
    p = np.where(np.isfinite(low), np.clip(p, low, np.where(np.isfinite(high), high, 1.0)), p)
    if max_cross > CROSS_NOTE:
        findings.append(Finding(NOTE, f"touch: the local-vol figure crossed a model-free bound at {clipped} "
                                f"strike(s) (by up to {max_cross:.4f}) and was clipped into it", underlying=underlying, expiry=label))
    return ExpiryTouch(p, low, high, LOCAL_VOL, clipped, solution.guarded_share, findings, max_cross)
