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

import os
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field

import numpy as np

from .findings import NOTE, WARNING, Finding
from .local_vol import LocalVolSurface
from .touch import prob_touch_smile
from .touch_bounds import touch_bounds

# touch_local_vol (scipy.linalg) is imported where the equations are solved: a process that only
# receives ExpiryTouch figures (from a second process) needs none of it.

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
    return expiries_touch([strikes], spot, t, forwards, smiles, [index], [smile_vol], underlying, [label])[0]


def expiries_touch(strikes: list, spot: float, t, forwards, smiles: list, indices: list, smile_vols: list,
                   underlying: str | None = None, labels: list | None = None,
                   workers: int = 1) -> list[ExpiryTouch]:
    """``expiry_touch`` for several expiries of one snapshot (``strikes[j]``, ``smile_vols[j]`` of expiry ``indices[j]``).

    A ``smile_vols[j]`` of None stands for the smile's own vol at the strikes
    (``smile_vol_at``), computed only where the one-vol fallback needs it.

    The same figures as one ``expiry_touch`` call per expiry, faster: the
    local-vol time stepping of all of them runs side by side
    (``touch_local_vol_many``). ``workers`` >= 2 computes the model-free
    bounds in a second thread meanwhile (numpy releases the GIL in their
    large array operations); at most ``os.cpu_count()`` threads in all.
    """
    from .touch_local_vol import touch_local_vol_many

    t = np.asarray(t, dtype=float)
    fw = np.asarray(forwards, dtype=float)
    labels = list(labels) if labels is not None else [None] * len(indices)
    strikes = [np.asarray(k, dtype=float) for k in strikes]
    threads = 1 if int(workers) <= 1 else min(int(workers), os.cpu_count() or 1)

    def bounds(j: int) -> tuple[np.ndarray, np.ndarray]:
        i = indices[j]
        return touch_bounds(smiles[i], float(fw[i]), spot, strikes[j])

    pool = ThreadPoolExecutor(1) if threads >= 2 and len(indices) > 1 else None
    try:
        pending = [pool.submit(bounds, j) for j in range(len(indices))] if pool else None
        got_bounds = None if pool else [bounds(j) for j in range(len(indices))]
        has_smile = np.fromiter((sm is not None for sm in smiles), dtype=bool, count=len(smiles))
        with np.errstate(invalid="ignore"):
            usable = has_smile & np.isfinite(t) & (t > 0) & np.isfinite(fw) & (fw > 0)
        cases, solved = [], []
        for j, i in enumerate(indices):
            if getattr(smiles[i], "method", "") in FALLBACK_SMILES:
                continue
            use = np.flatnonzero(usable & (t <= t[i]))
            use = use[np.lexsort((use == i, t[use]))]  # by time, this expiry last among equal times
            surface = LocalVolSurface.build(t[use], fw[use], spot, [smiles[u] for u in use])
            cases.append((surface, float(t[i]), strikes[j]))
            solved.append(j)
        solutions = dict(zip(solved, touch_local_vol_many(cases)))
        if pool:
            got_bounds = [f.result() for f in pending]
    finally:
        if pool:
            pool.shutdown()
    return [_assemble(strikes[j], spot, float(fw[i]), float(t[i]), smile_vols[j], *got_bounds[j],
                      solutions.get(j), underlying, labels[j], smiles[i]) for j, i in enumerate(indices)]


def smile_vol_at(smile, forward: float, t_e: float, strikes: np.ndarray) -> np.ndarray:
    """The smile's vol (decimal) at each strike: sqrt(w(ln(K/F)) / t), NaN where w <= 0."""
    with np.errstate(divide="ignore", invalid="ignore"):
        k = np.log(strikes / forward)
        w = np.asarray(smile.total_variance(k), dtype=float)
        return np.sqrt(np.where(w > 0, w, np.nan) / t_e)


def _assemble(strikes: np.ndarray, spot: float, forward: float, t_e: float, smile_vol, low: np.ndarray,
              high: np.ndarray, solution, underlying: str | None, label: str | None, smile=None) -> ExpiryTouch:
    """One expiry's figures from its bounds and local-vol solution (None: the smile is a fallback);
    ``smile_vol`` None: ``smile_vol_at`` of ``smile``, computed only for the one-vol fallback."""
    findings: list[Finding] = []

    def one_vol(reason: str) -> ExpiryTouch:
        findings.append(Finding(WARNING, f"touch: {reason}; P(touch) is the one-vol figure at each strike's "
                                "smile vol", underlying=underlying, expiry=label))
        vol = smile_vol_at(smile, forward, t_e, strikes) if smile_vol is None else smile_vol
        p = prob_touch_smile(spot, forward, strikes, t_e, vol, low)
        return ExpiryTouch(np.asarray(p, dtype=float), low, high, ONE_VOL, findings=findings)

    if solution is None:
        return one_vol("this expiry's smile is a fallback, so no local volatility is built from it")
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
