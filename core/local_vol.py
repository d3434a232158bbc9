"""Dupire local volatility from fitted smiles in total variance.

With y = ln(K/F_T) the log-forward moneyness and w(y, T) the total implied
variance (Gatheral, *The Volatility Surface*, 2006, eq. 1.10 [M]; Dupire 1994)::

    sigma_loc^2(y, T) = dw/dT / [1 - (y/w) dw/dy + 1/4 (-1/4 - 1/w + y^2/w^2) (dw/dy)^2 + 1/2 d2w/dy2]

The surface between expiries: total variance linear in T at fixed y (so dw/dT
is constant between two expiries); before the first expiry w(y, T) =
(T / T_1) w_1(y) (the first slice scaled); after the last, the last segment's
dw/dT is held. The forward is log-linear in T between expiries, starting at
spot at T = 0; its slope is the drift of ln S in the path model.

Where the formula has no meaning (dw/dT <= 0: calendar arbitrage; the
denominator <= 0: butterfly arbitrage; w <= 0) or is out of range, the local
variance is floored at ``VAR_FLOOR`` or capped at ``VAR_CAP`` and the point is
marked, so the caller can say so in a finding.

Units: T in years on the variance clock of the smiles (the pipeline's time
basis); y dimensionless; w dimensionless; local variance per year (decimal
vol squared). A smile is any object with ``total_variance``, ``dw_dk`` and
``d2w_dk2`` methods of k = ln(K/F) (``Smile``, a row of ``SviSlices``).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .svi import SviParams, SviSlices

#: Smallest local variance used (1% vol squared, per year).
VAR_FLOOR = 1e-4
#: Largest local variance used (500% vol squared, per year).
VAR_CAP = 25.0
#: Denominators below this are treated as butterfly arbitrage.
DENOM_MIN = 1e-8


@dataclass(frozen=True)
class LocalVolSurface:
    """Local volatility built from smiles at increasing times.

    ``t``: expiry times (years, strictly increasing, > 0); ``log_forward``: ln F
    at each; ``log_spot``: ln S at T = 0; ``smiles``: one smile per time.
    """

    t: np.ndarray
    log_forward: np.ndarray
    log_spot: float
    smiles: tuple
    #: The smiles' raw SVI parameters stacked, with a zero slice first (T = 0), when every smile has them.
    stack: SviSlices | None = None

    @classmethod
    def build(cls, t, forward, spot: float, smiles) -> "LocalVolSurface":
        """From expiry times (years), forwards and spot (price units) and smiles; drops non-increasing times.

        Where two times are equal (or out of order) the later entry is kept
        and the earlier one dropped, so the last smile given always stays.
        """
        t = np.asarray(t, dtype=float)
        f = np.asarray(forward, dtype=float)
        keep: list[int] = []
        for i in range(t.size):
            while keep and not t[i] > t[keep[-1]]:
                keep.pop()
            keep.append(i)
        kept = tuple(smiles[i] for i in keep)
        params = [getattr(sm, "params", None) for sm in kept]
        stack = None
        if all(isinstance(p, SviParams) and np.ndim(p.a) == 0 for p in params):
            stack = SviSlices.stack([SviParams(0.0, 0.0, 0.0, 0.0, 1.0), *params])
        return cls(t[keep], np.log(f[keep]), float(np.log(spot)), kept, stack)

    def log_forward_at(self, tau: float) -> float:
        """ln F(tau), log-linear between expiries from ln S at 0; the last segment's slope beyond."""
        ts = np.concatenate([[0.0], self.t])
        lf = np.concatenate([[self.log_spot], self.log_forward])
        if tau <= ts[-1]:
            return float(np.interp(tau, ts, lf))
        return float(lf[-1] + self.drift(tau) * (tau - ts[-1]))

    def drift(self, tau: float) -> float:
        """d ln F / d tau on the segment containing tau (per year)."""
        ts = np.concatenate([[0.0], self.t])
        lf = np.concatenate([[self.log_spot], self.log_forward])
        i = int(np.clip(np.searchsorted(ts, tau, side="left"), 1, ts.size - 1))
        return float((lf[i] - lf[i - 1]) / (ts[i] - ts[i - 1]))

    def _segment(self, tau: float) -> tuple[int, float]:
        """(i, lam) of time tau (years): i = 0 before the first expiry, where lam = tau / t[0] scales the
        first smile; else tau lies between expiries i-1 and i at weight lam of the later one."""
        ts = self.t
        i = int(np.searchsorted(ts, tau, side="left"))
        if i == 0:
            return 0, tau / ts[0]
        i = min(i, ts.size - 1)
        return i, (tau - ts[i - 1]) / (ts[i] - ts[i - 1])

    def total_variance(self, tau: float, y):
        """(w, dw/dT, dw/dy, d2w/dy2) at time tau and log-forward moneyness y (arrays of y's shape)."""
        y = np.asarray(y, dtype=float)
        ts = self.t
        i, lam = self._segment(tau)
        if i == 0:
            s, c = self.smiles[0], lam
            w1 = np.asarray(s.total_variance(y), float)
            return c * w1, w1 / ts[0], c * np.asarray(s.dw_dk(y), float), c * np.asarray(s.d2w_dk2(y), float)
        a, b = self.smiles[i - 1], self.smiles[i]
        span = ts[i] - ts[i - 1]
        wa = np.asarray(a.total_variance(y), float)
        wb = np.asarray(b.total_variance(y), float)
        w = wa + lam * (wb - wa)
        w1 = np.asarray(a.dw_dk(y), float) * (1 - lam) + lam * np.asarray(b.dw_dk(y), float)
        w2 = np.asarray(a.d2w_dk2(y), float) * (1 - lam) + lam * np.asarray(b.d2w_dk2(y), float)
        return w, (wb - wa) / span, w1, w2

    def variance_and_slope(self, tau: float, y):
        """(w, dw/dy) at time tau and moneyness y: the first and third of ``total_variance``, the same numbers."""
        y = np.asarray(y, dtype=float)
        i, lam = self._segment(tau)
        if i == 0:
            w, w1 = _w_and_slope(self.smiles[0], y)
            return lam * w, lam * w1
        a, b = self.smiles[i - 1], self.smiles[i]
        wa, w1a = _w_and_slope(a, y)
        wb, w1b = _w_and_slope(b, y)
        return wa + lam * (wb - wa), w1a * (1 - lam) + lam * w1b

    def local_variance(self, tau: float, y):
        """(sigma_loc^2 per year, mask of points floored or capped) at time tau and moneyness y."""
        w, wt, w1, w2 = self.total_variance(tau, y)
        y = np.asarray(y, dtype=float)
        return dupire_local_variance(y, w, wt, w1, w2)


    def local_variance_paths(self, taus, x):
        """Local variance on a time-by-space grid: (var of shape (len(taus), len(x)), guarded mask, drift per tau).

        ``taus``: times (years); ``x``: ln(S/S_0) nodes. Row j is evaluated at
        y = x + ln S_0 - ln F(taus[j]); one call of the smile methods per
        segment between expiries (a Python loop over expiries only).
        """
        taus = np.asarray(taus, dtype=float)
        x = np.asarray(x, dtype=float)
        ts = np.concatenate([[0.0], self.t])
        lf = np.concatenate([[self.log_spot], self.log_forward])
        seg = np.clip(np.searchsorted(ts, taus, side="left"), 1, ts.size - 1)
        slope = (lf[seg] - lf[seg - 1]) / (ts[seg] - ts[seg - 1])
        log_f = lf[seg - 1] + slope * (taus - ts[seg - 1])
        y = x[None, :] + (self.log_spot - log_f)[:, None]
        lam = ((taus - ts[seg - 1]) / (ts[seg] - ts[seg - 1]))[:, None]
        if self.stack is not None:
            # Slice seg-1 and seg of the stack (a zero slice at T = 0 first): one vectorised evaluation.
            a = self.stack.take((seg - 1, None))
            b = self.stack.take((seg, None))
            wa, w1a, w2a = a.w_and_derivatives(y)
            wb, w1b, w2b = b.w_and_derivatives(y)
            w = wa + lam * (wb - wa)
            wt = (wb - wa) / (ts[seg] - ts[seg - 1])[:, None]
            w1 = (1 - lam) * w1a + lam * w1b
            w2 = (1 - lam) * w2a + lam * w2b
            var, guarded = dupire_local_variance(y, w, wt, w1, w2)
            return var, guarded, slope
        w = np.empty_like(y)
        wt = np.empty_like(y)
        w1 = np.empty_like(y)
        w2 = np.empty_like(y)
        for i in np.unique(seg):
            rows = seg == i
            yy = y[rows]
            if i == 1:
                s = self.smiles[0]
                c = (taus[rows] / ts[1])[:, None]
                base = np.asarray(s.total_variance(yy), float)
                w[rows] = c * base
                wt[rows] = base / ts[1]
                w1[rows] = c * np.asarray(s.dw_dk(yy), float)
                w2[rows] = c * np.asarray(s.d2w_dk2(yy), float)
                continue
            a, b = self.smiles[i - 2], self.smiles[i - 1]
            span = ts[i] - ts[i - 1]
            lr = lam[rows]
            wa = np.asarray(a.total_variance(yy), float)
            wb = np.asarray(b.total_variance(yy), float)
            w[rows] = wa + lr * (wb - wa)
            wt[rows] = (wb - wa) / span
            w1[rows] = (1 - lr) * np.asarray(a.dw_dk(yy), float) + lr * np.asarray(b.dw_dk(yy), float)
            w2[rows] = (1 - lr) * np.asarray(a.d2w_dk2(yy), float) + lr * np.asarray(b.d2w_dk2(yy), float)
        var, guarded = dupire_local_variance(y, w, wt, w1, w2)
        return var, guarded, slope


def _w_and_slope(smile, y) -> tuple[np.ndarray, np.ndarray]:
    """(w(y), w'(y)) of a smile as float arrays: one pass where the smile has ``w_and_dw_dk``."""
    both = getattr(smile, "w_and_dw_dk", None)
    if both is not None:
        w, w1 = both(y)
    else:
        w, w1 = smile.total_variance(y), smile.dw_dk(y)
    return np.asarray(w, float), np.asarray(w1, float)


def dupire_local_variance(y, w, dw_dt, dw_dy, d2w_dy2):
    """Gatheral's eq. 1.10 (module docstring), floored/capped: (local variance per year, mask of guarded points).

    All inputs broadcast together; y = ln(K/F_T), w total variance, derivatives in T (per year) and y.
    """
    args = [np.asarray(a, dtype=float) for a in (y, w, dw_dt, dw_dy, d2w_dy2)]
    if any(a.shape != args[0].shape for a in args):
        args = np.broadcast_arrays(*args)
    y, w, wt, w1, w2 = args
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        den = 1.0 - (y / w) * w1 + 0.25 * (-0.25 - 1.0 / w + (y * y) / (w * w)) * w1 * w1 + 0.5 * w2
        var = wt / den
        bad = ~(np.isfinite(var) & (w > 0) & (wt > 0) & (den > DENOM_MIN))
        var = np.where(bad, VAR_FLOOR, var)
        guarded = bad | (var < VAR_FLOOR) | (var > VAR_CAP)
    return np.clip(var, VAR_FLOOR, VAR_CAP), guarded
