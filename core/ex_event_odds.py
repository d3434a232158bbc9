"""P(beyond) and the range with the scheduled events' variance taken out: the odds on the ex-event vol.

An expiry that carries an event has total variance w = sigma_ex^2 T + e^2
(``term_structure``). Taking the event out leaves a lognormal at the ex-event
(ordinary-day) vol sigma_ex with the forward F: P(S_T > K) = N(d2),
d2 = (ln(F/K) - sigma_ex^2 T / 2) / (sigma_ex sqrt T) (the Black-76 digital),
beyond = above for a call, below for a put; the range at confidence c is the
central interval F exp(-sigma_ex^2 T / 2 +/- z sigma_ex sqrt T), z = N^-1((1 + c) / 2).
Set beside the market's figures, the difference is what the event adds to a
strike's odds. This is flat across strikes (one vol per expiry): the smile's
skew is not in it, so compare it with the one-vol P(beyond) for the event
alone, with the smile's for everything.

Units: prices in price units, ``t`` in years on the basis of the vol, vols
decimal per sqrt(year), probabilities in [0, 1].
"""

from __future__ import annotations

import numpy as np
from .standard_normal import ndtr, ndtri

__all__ = ["ex_event_p_beyond", "ex_event_range"]


def ex_event_p_beyond(forward, strike, is_call, t, ex_event_vol) -> np.ndarray:
    """P(finish beyond the strike) under a lognormal at the ex-event vol (Black-76 digital). Broadcasts;
    NaN where an input is unusable (non-positive price or time, missing vol)."""
    f, k, call, t, sig = np.broadcast_arrays(*(np.asarray(a, dtype=float) for a in
                                              (forward, strike, is_call, t, ex_event_vol)))
    with np.errstate(divide="ignore", invalid="ignore"):
        sd = sig * np.sqrt(t)
        d2 = (np.log(f / k) - 0.5 * sd * sd) / sd
        above = ndtr(d2)
    ok = (f > 0) & (k > 0) & (t > 0) & (sd > 0) & np.isfinite(sd)
    return np.where(ok, np.where(call.astype(bool), above, 1.0 - above), np.nan)


def ex_event_range(forward, t, ex_event_vol, confidence) -> tuple[np.ndarray, np.ndarray]:
    """(low, high) of the central interval holding ``confidence`` of the lognormal at the ex-event vol."""
    f, t, sig, c = np.broadcast_arrays(*(np.asarray(a, dtype=float) for a in (forward, t, ex_event_vol,
                                                                             confidence)))
    with np.errstate(divide="ignore", invalid="ignore"):
        sd = sig * np.sqrt(t)
        z = ndtri(0.5 * (1.0 + c))
        mid = np.log(f) - 0.5 * sd * sd
        lo, hi = np.exp(mid - z * sd), np.exp(mid + z * sd)
    ok = (f > 0) & (t > 0) & (sd > 0) & np.isfinite(sd) & (c > 0) & (c < 1)
    return np.where(ok, lo, np.nan), np.where(ok, hi, np.nan)
