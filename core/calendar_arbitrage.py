"""Calendar arbitrage across expiries: total variance must not fall with expiry.

At a fixed log-forward moneyness k = ln(K/F_T), the total implied variance
w(k, T) = sigma_implied(k, T)^2 * T must be non-decreasing in T; otherwise a
calendar spread of calls (same k, longer expiry bought, shorter sold) has a
negative price in forward terms (Gatheral & Jacquier 2014, section 2.1 [M]).
Dupire local variance has dw/dT in its numerator, so a fall in w makes the
local variance negative there.

Units: ``t`` in years (any one clock, the same for every expiry); ``k``
dimensionless log-moneyness; ``w`` dimensionless total variance. A smile is
any object with a ``total_variance(k)`` method (``Smile``, one ``SviSlices``
row).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .findings import WARNING, Finding
from .svi import SviParams, SviSlices

#: Standard deviations (of the later expiry's at-the-money total variance) either side of k = 0 checked.
CHECK_SPAN_SD = 3.0
#: Points of the k grid per pair of expiries.
CHECK_POINTS = 121
#: A fall in w smaller than this absolute amount, or this fraction of w, is fit noise, not a finding.
ABS_TOLERANCE = 1e-6
REL_TOLERANCE = 1e-4


@dataclass(frozen=True)
class CalendarViolation:
    """The worst fall of total variance between two expiries (indices into the inputs).

    ``k`` is the log-forward moneyness of the worst fall; ``w_earlier`` >
    ``w_later`` are the total variances there; ``k_low``/``k_high`` bound the
    part of the checked k grid where w falls.
    """

    earlier: int
    later: int
    k: float
    w_earlier: float
    w_later: float
    k_low: float
    k_high: float


def calendar_violations(smiles, t, span_sd: float = CHECK_SPAN_SD, n: int = CHECK_POINTS) -> list[CalendarViolation]:
    """Pairs of consecutive expiries (in time order) whose total variance falls at some fixed k.

    ``smiles``: one smile per expiry, or None where an expiry has none
    (skipped); ``t``: years per expiry. Expiries with no time left, and pairs
    with the same time, are not compared. The grid for a pair is k in
    +/- ``span_sd`` times the later expiry's at-the-money sqrt(w), the part
    of the smile that the quotes and the touch grid use.
    """
    t = np.asarray(t, dtype=float)
    usable = [i for i, s in enumerate(smiles) if s is not None and np.isfinite(t[i]) and t[i] > 0]
    usable.sort(key=lambda i: t[i])
    out: list[CalendarViolation] = []
    pairs = [(a, b) for a, b in zip(usable[:-1], usable[1:]) if t[b] > t[a]]
    if not pairs:
        return out
    grid = np.linspace(-span_sd, span_sd, n)
    if all(isinstance(getattr(smiles[i], "params", None), SviParams) for i in usable):
        # raw SVI slices: every pair on its own grid in one evaluation (the same numbers as pair by pair)
        earlier = SviSlices.stack([smiles[a].params for a, _ in pairs])
        later = SviSlices.stack([smiles[b].params for _, b in pairs])
        w_atm_all = np.asarray(later.total_variance(0.0), dtype=float)
        with np.errstate(invalid="ignore"):
            ok = np.isfinite(w_atm_all) & (w_atm_all > 0)
            k_all = grid[None, :] * np.sqrt(np.where(ok, w_atm_all, 1.0))[:, None]
            wa_all = np.asarray(SviSlices(SviParams(*(v[:, None] for v in earlier.params.as_tuple())))
                                .total_variance(k_all), dtype=float)
            wb_all = np.asarray(SviSlices(SviParams(*(v[:, None] for v in later.params.as_tuple())))
                                .total_variance(k_all), dtype=float)
            any_bad = np.any(wa_all - wb_all > np.maximum(ABS_TOLERANCE, REL_TOLERANCE * np.abs(wa_all)), axis=1)
        check = [j for j in range(len(pairs)) if ok[j] and any_bad[j]]
    else:
        check = range(len(pairs))
    for j in check:
        a, b = pairs[j]
        w_atm = float(np.asarray(smiles[b].total_variance(0.0)))
        if not (np.isfinite(w_atm) and w_atm > 0):
            continue
        k = grid * np.sqrt(w_atm)
        wa = np.asarray(smiles[a].total_variance(k), dtype=float)
        wb = np.asarray(smiles[b].total_variance(k), dtype=float)
        with np.errstate(invalid="ignore"):
            fall = wa - wb
            bad = fall > np.maximum(ABS_TOLERANCE, REL_TOLERANCE * np.abs(wa))
        if not bad.any():
            continue
        j = int(np.nanargmax(np.where(bad, fall, -np.inf)))
        out.append(CalendarViolation(a, b, float(k[j]), float(wa[j]), float(wb[j]),
                                     float(k[bad].min()), float(k[bad].max())))
    return out


def calendar_findings(smiles, t, labels, underlying: str | None = None) -> list[Finding]:
    """One WARNING per violating pair, naming both expiries and the moneyness (attached to the later expiry)."""
    out = []
    for v in calendar_violations(smiles, t):
        out.append(Finding(
            WARNING,
            f"calendar arbitrage: total variance falls from {labels[v.earlier]} to {labels[v.later]} "
            f"at log-moneyness ln(K/F) = {v.k:+.3f} ({v.w_earlier:.6f} -> {v.w_later:.6f}; falls on "
            f"{v.k_low:+.3f} to {v.k_high:+.3f}); local volatility is floored there",
            underlying=underlying, expiry=labels[v.later]))
    return out
