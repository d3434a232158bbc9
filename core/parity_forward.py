"""Forward price and discount factor of one expiry, implied from put-call parity.

Put-call parity for European options on the same strike and expiry:
C - P = DF * (F - K). Across strikes, y = C_mid - P_mid is a straight line in K
with slope -DF and intercept DF * F. The smile cancels out of the relation, so
no vol model is needed.

Method (``implied_forward``):

1. Usable strikes: both sides quoted (bid > 0 and ask >= bid > 0 on the call
   and the put). Combined half-spread h = ((ask_c - bid_c) + (ask_p - bid_p))/2:
   the true C - P lies within y_mid +/- h when quotes are consistent.
2. Near the money: the ``max_strikes`` usable strikes closest to the strike
   where |C - P| is smallest (deep in-the-money quotes are wide and, for
   American-style contracts, carry early-exercise value).
3. Robust straight-line fit: a repeated-median (Siegel) line gives a start
   that a minority of bad quotes cannot move. Points whose residual exceeds
   both 2 combined half-spreads and 5 robust scale units (1.4826 * MAD) are set
   aside; the rest are fitted by weighted least squares with weights
   1/(combined spread)^2 (spreads floored at a quarter of the median spread so a
   locked quote cannot take all the weight). Selection and fit are repeated
   until the set of points stops changing. At most half of the window is
   ever set aside, and at least two points stay.
4. Sanity: 0.5 < DF <= max(1.02, exp(0.05 T)) with the implied rate
   -ln(DF)/T in [-5%, +25%] per year, and the forward near spot: |ln(F/S)| <= max(0.5 * T, 0.05)
   (carry within +/-50% a year, with a 5% floor so that short expiries around a
   dividend or with a slightly stale spot are not thrown out). When only the
   DF fails (common for short expiries, where the slope is poorly determined
   but the forward is not), DF is taken from ``rate`` (or 1 without a rate) and
   the forward is re-estimated from the same points; method stays 'parity' and
   ``reason`` says so.
   When the DF passes and a ``rate`` is given, the slope's standard error
   decides between them: if the given rate's DF lies within
   ``RATE_AGREEMENT_SES`` standard errors of the fitted DF, the quotes cannot
   tell the two apart, so the given rate's DF is used and the forward
   re-estimated from the same points (method 'parity-rate'). The slope of a
   short expiry's parity line is poorly determined by tick-rounded quotes;
   the intercept, and so the forward, is not.
5. One usable strike: F = K + (C - P)/DF with DF from ``rate``, else 1.
6. Fallbacks: with ``rate`` and/or ``div_yield`` (a missing one counts as 0):
   F = S exp((r - q) T), DF = exp(-r T) (NOTE). Otherwise F = spot, DF = 1
   (WARNING).

Units: strikes, quotes, spot, forward and residuals in price units; ``t`` in
years; rates continuously compounded per year (decimal); DF dimensionless.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .findings import NOTE, WARNING, ChainTriageError, Finding

#: Plausible band for the discount factor (exclusive low, inclusive high). The
#: high end widens to exp(0.05 T) for long expiries so that a mildly negative
#: rate stays plausible; the rate band below is the binding check there.
DF_BAND = (0.5, 1.02)
#: Plausible band for the implied rate -ln(DF)/T, per year.
RATE_BAND = (-0.05, 0.25)
#: Plausible |ln(F/S)| per year of time to expiry ...
CARRY_LIMIT = 0.5
#: ... but never tighter than this absolute log-distance.
CARRY_FLOOR = 0.05
#: A point is set aside when its residual exceeds both of these.
OUTLIER_HALF_SPREADS = 2.0
OUTLIER_SCALES = 5.0
#: A given rate's DF within this many slope standard errors of the fitted DF is preferred.
RATE_AGREEMENT_SES = 2.0


@dataclass(frozen=True, slots=True)
class ForwardEstimate:
    """The forward and discount factor of one expiry, and how they were found.

    forward: price units. discount: dimensionless DF to the settlement date.
    method: 'parity' | 'parity-rate' (forward from parity, DF from the given
    rate, which the quotes agree with) | 'parity-single' | 'rates' | 'spot'.
    strikes_used: strikes in the final fit (0 for 'rates' and 'spot').
    strikes_set_aside: near-the-money strikes dropped as inconsistent quotes.
    residual_rms: root-mean-square residual of C - P about the fitted line over
    the strikes used, price units (NaN for 'rates'/'spot', 0 for one strike).
    rate_implied: -ln(DF)/T, per year. reason: plain English, '' when parity
    worked cleanly. findings: NOTE/WARNING findings without file/expiry
    context (the pipeline adds it).
    """

    forward: float
    discount: float
    method: str
    strikes_used: int
    residual_rms: float
    rate_implied: float
    reason: str = ""
    strikes_set_aside: int = 0
    findings: tuple[Finding, ...] = ()


def _clean(x) -> float | None:
    """A user-given rate as a float, or None when absent or NaN."""
    if x is None:
        return None
    x = float(x)
    return None if np.isnan(x) else x


def _fmt(x: float) -> str:
    """A number for a message: 6 significant digits; 'undefined' when not finite; never '-0'."""
    if not np.isfinite(x):
        return "undefined"
    return f"{x + 0.0:.6g}"


def _repeated_median(k: np.ndarray, y: np.ndarray) -> tuple[float, float]:
    """Siegel's repeated-median line y = a + s k; returns (a, s). Needs >= 2 distinct k."""
    dk = k[None, :] - k[:, None]
    dy = y[None, :] - y[:, None]
    with np.errstate(divide="ignore", invalid="ignore"):
        slopes = np.where(dk != 0, dy / dk, np.nan)
    s = float(np.nanmedian(np.nanmedian(slopes, axis=1)))
    a = float(np.median(y - s * k))
    return a, s


def _wls(k: np.ndarray, y: np.ndarray, w: np.ndarray) -> tuple[float, float]:
    """Weighted least-squares line y = a + s k; returns (a, s)."""
    sw = w.sum()
    km = (w * k).sum() / sw
    ym = (w * y).sum() / sw
    s = (w * (k - km) * (y - ym)).sum() / (w * (k - km) ** 2).sum()
    return float(ym - s * km), float(s)


def _slope_se(k: np.ndarray, y: np.ndarray, w: np.ndarray, a: float, s: float) -> float:
    """Standard error of the weighted least-squares slope (price units per unit strike); inf below 3 points."""
    n = k.size
    if n < 3:
        return float("inf")
    r = y - (a + s * k)
    sigma2 = float((w * r * r).sum()) / (n - 2)
    km = float((w * k).sum() / w.sum())
    return float(np.sqrt(sigma2 / float((w * (k - km) ** 2).sum())))


def _robust_fit(k, y, half, w):
    """Robust line through (k, y). Returns (a, s, keep mask)."""
    n = k.size
    a, s = _repeated_median(k, y)
    keep = np.ones(n, dtype=bool)
    max_out = n // 2 if n >= 4 else 0  # with 2-3 points a bad one cannot be told apart
    for _ in range(10):
        r = y - (a + s * k)
        scale = 1.4826 * float(np.median(np.abs(r[keep] - np.median(r[keep]))))
        limit = np.maximum(OUTLIER_HALF_SPREADS * half, OUTLIER_SCALES * scale)
        excess = np.abs(r) / limit
        new_keep = excess <= 1.0
        if (~new_keep).sum() > max_out:  # set aside only the worst ones
            order = np.argsort(-excess)
            new_keep = np.ones(n, dtype=bool)
            new_keep[order[:max_out]] = False
        if np.unique(k[new_keep]).size < 2:
            new_keep = keep
        a, s = _wls(k[new_keep], y[new_keep], w[new_keep])
        if np.array_equal(new_keep, keep):
            break
        keep = new_keep
    return a, s, keep


def _as_1d(name: str, x) -> np.ndarray:
    arr = np.asarray(x, dtype=float)
    if arr.ndim != 1:
        raise ChainTriageError(f"{name}: expected a one-dimensional array, got shape {arr.shape}")
    return arr


def _fallback(spot: float, t: float, rate, div_yield, why: str) -> ForwardEstimate:
    if rate is not None or div_yield is not None:
        r = rate if rate is not None else 0.0
        q = div_yield if div_yield is not None else 0.0
        missing = []
        if rate is None:
            missing.append("no rate given, 0 used")
        if div_yield is None:
            missing.append("no dividend yield given, 0 used")
        extra = f" ({'; '.join(missing)})" if missing else ""
        reason = (
            f"{why}; forward from the given rates: F = spot * exp((r - q) T) with "
            f"r = {_fmt(r)}, q = {_fmt(q)}{extra}"
        )
        df = float(np.exp(-r * t))
        return ForwardEstimate(
            forward=float(spot * np.exp((r - q) * t)), discount=df, method="rates",
            strikes_used=0, residual_rms=float("nan"), rate_implied=float(r),
            reason=reason, findings=(Finding(NOTE, reason),),
        )
    reason = f"{why}, and no rate or dividend yield is given; forward = spot and discount factor = 1"
    return ForwardEstimate(
        forward=float(spot), discount=1.0, method="spot", strikes_used=0,
        residual_rms=float("nan"), rate_implied=0.0, reason=reason,
        findings=(Finding(WARNING, reason),),
    )


def _carry_ok(forward: float, spot: float, t: float) -> bool:
    return bool(
        np.isfinite(forward) and forward > 0
        and abs(np.log(forward / spot)) <= max(CARRY_LIMIT * t, CARRY_FLOOR)
    )


def _df_ok(df: float, t: float) -> bool:
    high = max(DF_BAND[1], float(np.exp(-RATE_BAND[0] * t)))
    if not (np.isfinite(df) and DF_BAND[0] < df <= high):
        return False
    r = -np.log(df) / t
    return bool(RATE_BAND[0] <= r <= RATE_BAND[1])


# Quotes near the float limit overflow to inf/NaN on the way; every estimate is judged
# (_carry_ok, _df_ok, finite checks) before it is used, so the warnings say nothing new.
@np.errstate(over="ignore", divide="ignore", invalid="ignore")
def implied_forward(
    strikes, call_bid, call_ask, put_bid, put_ask, *,
    spot: float, t: float, rate: float | None = None, div_yield: float | None = None,
    max_strikes: int = 8,
) -> ForwardEstimate:
    """Forward (price units) and discount factor of ONE expiry from put-call parity.

    Arrays are aligned by strike (price units), NaN where a side is missing.
    ``spot`` in price units, ``t`` in years (> 0), ``rate``/``div_yield``
    continuously compounded per year (None or NaN when not known).
    ``max_strikes``: how many near-the-money strikes enter the fit (>= 2).
    Raises ChainTriageError on malformed input (unequal lengths, spot or t not
    positive); bad quotes never raise, they are skipped or set aside.
    """
    k = _as_1d("strikes", strikes)
    cb, ca, pb, pa = (_as_1d(n, x) for n, x in (
        ("call_bid", call_bid), ("call_ask", call_ask), ("put_bid", put_bid), ("put_ask", put_ask)))
    if not (k.size == cb.size == ca.size == pb.size == pa.size):
        raise ChainTriageError(
            "strikes and quotes must have the same length "
            f"(strikes {k.size}, call bid {cb.size}, call ask {ca.size}, put bid {pb.size}, put ask {pa.size})"
        )
    spot = float(spot)
    t = float(t)
    if not (np.isfinite(spot) and spot > 0):
        raise ChainTriageError(f"spot must be a positive price, got {spot!r}")
    if not (np.isfinite(t) and t > 0):
        raise ChainTriageError(f"time to expiry must be positive (years), got {t!r}")
    if int(max_strikes) < 2:
        raise ChainTriageError(f"max_strikes must be at least 2, got {max_strikes!r}")
    rate, div_yield = _clean(rate), _clean(div_yield)

    with np.errstate(invalid="ignore"):
        usable = (
            np.isfinite(k) & (k > 0)
            & np.isfinite(cb) & np.isfinite(ca) & np.isfinite(pb) & np.isfinite(pa)
            & (cb > 0) & (ca > 0) & (pb > 0) & (pa > 0) & (ca >= cb) & (pa >= pb)
        )
    if not usable.any():
        return _fallback(spot, t, rate, div_yield, "no strike has both the call and the put quoted on both sides")

    k, cb, ca, pb, pa = (x[usable] for x in (k, cb, ca, pb, pa))
    y = 0.5 * (cb + ca) - 0.5 * (pb + pa)
    spread = (ca - cb) + (pa - pb)

    # Near the money: closest strikes to where |C - P| is smallest.
    k0 = k[np.argmin(np.abs(y))]
    window = np.argsort(np.abs(k - k0), kind="stable")[: int(max_strikes)]
    k, y, spread = k[window], y[window], spread[window]

    if np.unique(k).size < 2:
        return _single(k, y, spot, t, rate, div_yield)

    pos = spread[spread > 0]
    floor = 0.25 * float(np.median(pos)) if pos.size else 0.0
    floor = max(floor, 1e-8 * spot)
    spread = np.maximum(spread, floor)
    half = 0.5 * spread
    w = 1.0 / spread ** 2

    a, s, keep = _robust_fit(k, y, half, w)
    df = -s
    forward = a / df if df != 0 else float("nan")
    findings: list[Finding] = []
    reasons: list[str] = []
    n_out = int((~keep).sum())
    if n_out:
        dropped = ", ".join(_fmt(x) for x in np.sort(k[~keep]))
        r_out = y - (a + s * k)
        worst = float(np.max(np.abs(r_out[~keep])))
        findings.append(Finding(
            NOTE,
            f"parity forward: set aside {n_out} strike(s) ({dropped}) whose call-minus-put mid "
            f"is off the parity line by up to {worst:.4g}",
        ))

    if not _df_ok(df, t):
        if rate is not None:
            df_fix, src = float(np.exp(-rate * t)), f"the given rate {_fmt(rate)}"
        else:
            df_fix, src = 1.0, "1 (no rate given)"
        bad = (f"discount factor from the quotes ({_fmt(df)}, implied rate "
               f"{_fmt(-np.log(df) / t) if df > 0 else 'undefined'} per year) is implausible")
        fwd_fix = float(np.sum(w[keep] * (k[keep] + y[keep] / df_fix)) / np.sum(w[keep]))
        if not _carry_ok(fwd_fix, spot, t):
            return _fallback(spot, t, rate, div_yield,
                             f"put-call parity gave no plausible forward ({bad}, and with DF = "
                             f"{_fmt(df_fix)} the forward {_fmt(fwd_fix)} is too far from spot {_fmt(spot)})")
        df, forward = df_fix, fwd_fix
        reason = f"{bad}; discount factor taken from {src}, forward from the quotes"
        reasons.append(reason)
        findings.append(Finding(NOTE, f"parity forward: {reason}"))
        resid = y[keep] - df * (forward - k[keep])
        method = "parity"
    else:
        if not _carry_ok(forward, spot, t):
            return _fallback(spot, t, rate, div_yield,
                             f"put-call parity gave a forward {_fmt(forward)} too far from spot {_fmt(spot)} "
                             f"for {_fmt(t)} years")
        method = "parity"
        if rate is not None:
            df_rate = float(np.exp(-rate * t))
            if abs(df - df_rate) <= RATE_AGREEMENT_SES * _slope_se(k[keep], y[keep], w[keep], a, s):
                fwd_rate = float(np.sum(w[keep] * (k[keep] + y[keep] / df_rate)) / np.sum(w[keep]))
                if _carry_ok(fwd_rate, spot, t):
                    df, forward, method = df_rate, fwd_rate, "parity-rate"
        resid = y[keep] - df * (forward - k[keep])

    if keep.sum() == 2:
        findings.append(Finding(
            NOTE, "parity forward from only 2 strikes quoted on both sides; a bad quote cannot be detected",
        ))
    return ForwardEstimate(
        forward=float(forward), discount=float(df), method=method,
        strikes_used=int(keep.sum()), residual_rms=float(np.sqrt(np.mean(resid ** 2))),
        rate_implied=float(-np.log(df) / t), reason="; ".join(reasons),
        strikes_set_aside=n_out, findings=tuple(findings),
    )


def _single(k, y, spot, t, rate, div_yield) -> ForwardEstimate:
    """One usable strike: F = K + (C - P)/DF with DF from the rate, else 1."""
    kk, yy = float(k[0]), float(np.mean(y))
    if rate is not None:
        df, src, sev = float(np.exp(-rate * t)), f"the given rate {_fmt(rate)}", NOTE
    else:
        df, src, sev = 1.0, "1 (no rate given)", WARNING
    forward = kk + yy / df
    if not _carry_ok(forward, spot, t):
        return _fallback(spot, t, rate, div_yield,
                         f"the only strike quoted on both sides ({_fmt(kk)}) gives a forward "
                         f"{_fmt(forward)} too far from spot {_fmt(spot)}")
    reason = (f"only one strike ({_fmt(kk)}) has the call and the put quoted on both sides; "
              f"forward = K + (C - P)/DF with the discount factor from {src}")
    return ForwardEstimate(
        forward=float(forward), discount=df, method="parity-single", strikes_used=1,
        residual_rms=0.0, rate_implied=float(-np.log(df) / t), reason=reason,
        findings=(Finding(sev, f"parity forward: {reason}"),),
    )


def implied_forwards(
    group, strikes, call_bid, call_ask, put_bid, put_ask, *,
    spot: float, t, rate=None, div_yield=None, max_strikes: int = 8,
) -> list[ForwardEstimate]:
    """:func:`implied_forward` for many expiries at once; same results, one per expiry.

    Rows are (expiry, strike) pairs: ``group`` is the expiry index of each row
    (0..E-1, non-decreasing), strikes ascending within an expiry; quotes
    aligned per row as for :func:`implied_forward` (price units, NaN where a
    side is missing). ``t`` (years), ``rate`` and ``div_yield`` (per year,
    NaN when not known) are arrays of length E. The common case - at least
    three near-the-money strikes, none set aside, a plausible discount factor
    and forward - is solved for all expiries together; every other expiry
    goes through :func:`implied_forward` itself.
    """
    group = np.asarray(group, dtype=np.int64)
    k_all = np.asarray(strikes, dtype=float)
    cb, ca, pb, pa = (np.asarray(x, dtype=float) for x in (call_bid, call_ask, put_bid, put_ask))
    t = np.atleast_1d(np.asarray(t, dtype=float))
    n_exp = t.size
    rate = np.full(n_exp, np.nan) if rate is None else np.broadcast_to(np.asarray(rate, dtype=float), (n_exp,))
    div_yield = (np.full(n_exp, np.nan) if div_yield is None
                 else np.broadcast_to(np.asarray(div_yield, dtype=float), (n_exp,)))
    spot = float(spot)
    m = int(max_strikes)
    if group.size and (np.any(np.diff(group) < 0) or group[0] < 0 or group[-1] >= n_exp):
        raise ChainTriageError("implied_forwards: rows must be grouped by expiry index 0..E-1 in order")
    bounds = np.searchsorted(group, np.arange(n_exp + 1))

    def one(i: int) -> ForwardEstimate:
        sl = slice(bounds[i], bounds[i + 1])
        return implied_forward(k_all[sl], cb[sl], ca[sl], pb[sl], pa[sl], spot=spot, t=t[i],
                               rate=rate[i], div_yield=div_yield[i], max_strikes=max_strikes)

    if np.isfinite(spot) and spot > 0 and m >= 2 and group.size:
        fast_out = _parity_fast_path(group, k_all, cb, ca, pb, pa, spot, t, m, n_exp, rate)
    else:
        fast_out = None
    out: list[ForwardEstimate] = []
    for i in range(n_exp):
        if fast_out is not None and fast_out[0][i]:
            fwd, df, n_used, rms, by_rate = (x[i] for x in fast_out[1:])
            out.append(ForwardEstimate(
                forward=float(fwd), discount=float(df), method="parity-rate" if by_rate else "parity",
                strikes_used=int(n_used),
                residual_rms=float(rms), rate_implied=float(-np.log(df) / t[i]),
            ))
        else:
            out.append(one(i))
    return out


def _nanmedian_last(x: np.ndarray) -> np.ndarray:
    """Median over the last axis ignoring NaN, as np.nanmedian (NaN where a row has no number)."""
    xs = np.sort(x, axis=-1)  # NaN sort last
    count = np.sum(~np.isnan(x), axis=-1)
    lo = np.take_along_axis(xs, np.maximum((count - 1) // 2, 0)[..., None], axis=-1)[..., 0]
    hi = np.take_along_axis(xs, np.maximum(count // 2, 0)[..., None], axis=-1)[..., 0]
    with np.errstate(invalid="ignore"):
        return np.where(count > 0, 0.5 * (lo + hi), np.nan)


def _parity_fast_path(group, k, cb, ca, pb, pa, spot, t, m, n_exp, rate):
    """Vectorised clean case of implied_forward.

    Returns (ok, forward, df, strikes_used, residual_rms, df_from_rate) per expiry.
    """
    with np.errstate(invalid="ignore"):
        usable = (
            np.isfinite(k) & (k > 0)
            & np.isfinite(cb) & np.isfinite(ca) & np.isfinite(pb) & np.isfinite(pa)
            & (cb > 0) & (ca > 0) & (pb > 0) & (pa > 0) & (ca >= cb) & (pa >= pb)
        )
    idx = np.flatnonzero(usable)
    g = group[idx]
    cnt = np.bincount(g, minlength=n_exp)
    first = np.concatenate([[0], np.cumsum(cnt)[:-1]])
    pos = np.arange(idx.size) - first[g]
    width = max(int(cnt.max()) if cnt.size else 0, 1)
    kk = np.full((n_exp, width), np.nan)
    yy = np.full((n_exp, width), np.nan)
    sp = np.full((n_exp, width), np.nan)
    kk[g, pos] = k[idx]
    yy[g, pos] = 0.5 * (cb[idx] + ca[idx]) - 0.5 * (pb[idx] + pa[idx])
    sp[g, pos] = (ca[idx] - cb[idx]) + (pa[idx] - pb[idx])
    rows = np.arange(n_exp)
    # strictly ascending strikes within each expiry (else the per-expiry path decides)
    ascending = ~np.any(np.diff(kk, axis=1) <= 0, axis=1)
    # near the money: the m closest strikes to the one with the smallest |C - P| (stable order)
    j0 = np.argmin(np.where(np.isfinite(yy), np.abs(yy), np.inf), axis=1)
    k0 = kk[rows, j0]
    cand = j0[:, None] + np.arange(-m, m + 1)[None, :]
    cand_ok = (cand >= 0) & (cand < cnt[:, None])
    cand_c = np.clip(cand, 0, width - 1)
    dist = np.where(cand_ok, np.abs(kk[rows[:, None], cand_c] - k0[:, None]), np.inf)
    order = np.argsort(dist, axis=1, kind="stable")[:, :m]
    win = cand_c[rows[:, None], order]
    n_w = np.minimum(cnt, m)
    valid = np.arange(m)[None, :] < n_w[:, None]
    kw = np.where(valid, kk[rows[:, None], win], np.nan)
    yw = np.where(valid, yy[rows[:, None], win], np.nan)
    sw_ = np.where(valid, sp[rows[:, None], win], np.nan)

    with np.errstate(invalid="ignore", divide="ignore"):
        med_pos = _nanmedian_last(np.where(sw_ > 0, sw_, np.nan))
        floor = np.where(np.isfinite(med_pos), 0.25 * med_pos, 0.0)
        floor = np.maximum(floor, 1e-8 * spot)
        spread = np.maximum(sw_, floor[:, None])
        half = 0.5 * spread
        w = 1.0 / spread ** 2
        # repeated-median (Siegel) start
        dk = kw[:, None, :] - kw[:, :, None]
        dy = yw[:, None, :] - yw[:, :, None]
        slopes = np.where(dk != 0, dy / dk, np.nan)
        s = _nanmedian_last(_nanmedian_last(slopes))
        a = _nanmedian_last(yw - s[:, None] * kw)
        r = yw - (a[:, None] + s[:, None] * kw)
        scale = 1.4826 * _nanmedian_last(np.abs(r - _nanmedian_last(r)[:, None]))
        limit = np.maximum(OUTLIER_HALF_SPREADS * half, OUTLIER_SCALES * scale[:, None])
        excess = np.abs(r) / limit
        all_in = np.all(~valid | (excess <= 1.0), axis=1) | (n_w < 4)
        # weighted least squares on every strike of the window
        wv = np.where(valid, w, 0.0)
        kv = np.where(valid, kw, 0.0)
        yv = np.where(valid, yw, 0.0)
        sw = wv.sum(axis=1)
        km = (wv * kv).sum(axis=1) / sw
        ym = (wv * yv).sum(axis=1) / sw
        dkm = np.where(valid, kv - km[:, None], 0.0)
        s = (wv * dkm * (yv - ym[:, None])).sum(axis=1) / (wv * dkm ** 2).sum(axis=1)
        a = ym - s * km
        df = -s
        fwd = np.where(df != 0, a / df, np.nan)
        high = np.maximum(DF_BAND[1], np.exp(-RATE_BAND[0] * t))
        rate_impl = -np.log(df) / t
        df_ok = np.isfinite(df) & (df > DF_BAND[0]) & (df <= high) & (rate_impl >= RATE_BAND[0]) & (rate_impl <= RATE_BAND[1])
        carry_ok = np.isfinite(fwd) & (fwd > 0) & (np.abs(np.log(fwd / spot)) <= np.maximum(CARRY_LIMIT * t, CARRY_FLOOR))
        resid = np.where(valid, yv - (a[:, None] + s[:, None] * kv), 0.0)
        # The given rate's DF, where the quotes cannot tell it from the fitted one (see implied_forward).
        sigma2 = (wv * resid ** 2).sum(axis=1) / np.maximum(n_w - 2, 1)
        se = np.where(n_w >= 3, np.sqrt(sigma2 / (wv * dkm ** 2).sum(axis=1)), np.inf)
        df_rate = np.exp(-rate * t)
        fwd_rate = (wv * (kv + yv / df_rate[:, None])).sum(axis=1) / sw
        by_rate = (np.isfinite(rate) & (np.abs(df - df_rate) <= RATE_AGREEMENT_SES * se)
                   & np.isfinite(fwd_rate) & (fwd_rate > 0)
                   & (np.abs(np.log(fwd_rate / spot)) <= np.maximum(CARRY_LIMIT * t, CARRY_FLOOR)))
        fwd = np.where(by_rate, fwd_rate, fwd)
        df_out = np.where(by_rate, df_rate, df)
        resid = np.where(valid, yv - df_out[:, None] * (fwd[:, None] - kv), 0.0)
        rms = np.sqrt((resid ** 2).sum(axis=1) / np.maximum(n_w, 1))
    ok = ascending & (n_w >= 3) & all_in & df_ok & carry_ok & np.isfinite(t) & (t > 0)
    return ok, fwd, df_out, n_w, rms, by_rate
