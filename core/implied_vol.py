"""Implied volatility from Black-76 option prices, vectorised over contracts.

Units: ``price`` is the discounted option price and ``forward``/``strike`` are
in price units of the underlying; ``t`` is in years on the same time basis the
volatility is wanted in (only the total variance sigma**2 * t is determined
by the price); ``discount`` is the discount factor to settlement
(dimensionless); ``is_call`` is boolean. The result ``sigma`` is annualised
volatility as a decimal (0.2 = 20%), NaN where no volatility exists, and
``status`` says why (see ``STATUS_REASONS``).

Method
------
The problem is reduced to the normalised out-of-the-money call of
P. Jäckel, "Let's Be Rational", Wilmott Magazine, January 2015, pp. 40-53:
an in-the-money price is turned into the out-of-the-money price at the same
strike by put-call parity on the forward (c - p = DF*(F - K)), a put is
mapped to a call by reciprocal-strike symmetry, and the price is divided by
DF*sqrt(F*K). With x = -|ln(F/K)| <= 0 and s = sigma*sqrt(t), the target is
beta = b(x, s) = exp(x/2)*N(x/s + s/2) - exp(-x/2)*N(x/s - s/2).

Following that paper, the initial guess comes from four branches of
rational cubic interpolation (Delbourgo and Gregory, "Shape preserving
piecewise rational interpolation", SIAM J. Sci. Stat. Comput. 6(4), 1985)
between the points s_l < s_c = sqrt(2|x|) < s_h; the lowest branch
interpolates a transformed map of the price that is asymptotically exact for
tiny prices, the highest one a map that is exact as the price approaches its
upper bound. Then two third-order Householder steps are taken on the
objective 1/ln(b) - 1/ln(beta) in the lowest branch,
ln((b_max - beta)/(b_max - b)) in the highest (when beta > b_max/2) and
b - beta elsewhere. Every step is a fixed number of whole-array operations;
the few elements whose last step was still large (extreme inputs only) are
polished on their own by a bracketed Newton/bisection loop. The upper-side
quantity b_max - b is evaluated as a sum of positive terms, never as a
difference, so prices near their bound keep their accuracy.

The price function itself is evaluated in the plain two-term form with
``standard_normal.ndtr``; its rounding moves the solved s by only about
eps*N(d1)/phi(d1), far below the accuracy target.

Accuracy (tests/core/test_implied_vol.py): over F in [1, 5000], K/F in
[0.2, 5], sigma in [0.01, 3] and T from one hour to five years, wherever the
price has at least half a cent of time value, the vol of an out-of-the-money
price came back within 9e-14 of the true one in a million random contracts
(the tests assert 1e-12). For an in-the-money price the
error is bounded by the price's own rounding divided by vega (about
eps*price/vega), which no solver can remove. Speed: about 0.2 microseconds
per contract at a million contracts (tests/bench/bench_implied_vol.py).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from .standard_normal import erfcx, ndtr, ndtri

__all__ = [
    "OK",
    "NO_PRICE",
    "BELOW_INTRINSIC",
    "ABOVE_UPPER_BOUND",
    "NO_TIME",
    "STATUS_REASONS",
    "ImpliedVolResult",
    "implied_vol",
]

#: A volatility was found.
OK = 0
#: The price (or forward, strike, discount factor or time) is missing, not a
#: finite number, or not positive.
NO_PRICE = 1
#: The price is at or below the discounted intrinsic value: no time value
#: (also when the time value is too small to represent after normalising).
BELOW_INTRINSIC = 2
#: The price is at or above its no-arbitrage upper bound (DF*F for a call,
#: DF*K for a put).
ABOVE_UPPER_BOUND = 3
#: The time to expiry is zero or negative.
NO_TIME = 4

#: Plain-English reason for each status code.
STATUS_REASONS: dict[int, str] = {
    OK: "implied volatility found",
    NO_PRICE: "no usable price: the price, forward, strike, discount factor or time is missing, "
    "not a finite number, or not positive",
    BELOW_INTRINSIC: "price is at or below the discounted intrinsic value (or its time value is too "
    "small to tell apart from zero), so no volatility fits it",
    ABOVE_UPPER_BOUND: "price is at or above its upper bound (the discounted forward for a call, "
    "the discounted strike for a put), so no volatility fits it",
    NO_TIME: "the option has no time left to expiry",
}

_SQRT_2PI = np.sqrt(2.0 * np.pi)
_INV_SQRT_2PI = 1.0 / _SQRT_2PI
_SQRT3 = np.sqrt(3.0)
_TWO_PI_OVER_SQRT27 = 2.0 * np.pi / np.sqrt(27.0)
_SQRT_PI_OVER_2 = np.sqrt(np.pi / 2.0)
_EPS = np.finfo(float).eps
_TINY = np.finfo(float).tiny
_HUGE = np.finfo(float).max
_SQRT_HUGE = np.sqrt(_HUGE)
# Control parameter bounds of the rational cubic (Jäckel's values).
_R_MIN = -(1.0 - np.sqrt(_EPS))
_R_MAX = 2.0 / (_EPS * _EPS)
# Above this the rational cubic equals its straight line to machine precision;
# capping keeps the formula free of overflow.
_R_CAP = 1e30

# Householder steps taken on every element; then elements whose last step was
# larger than _POLISH_IF * s get more steps on their own.
_STEPS = 2
_POLISH_IF = 1e-6
_POLISH_MAX = 100
# Contracts are solved in blocks of this many to keep temporaries in cache.
_BLOCK = 1 << 16


@dataclass(frozen=True)
class ImpliedVolResult:
    """Implied volatilities and why each is (or is not) a number.

    ``sigma``: float64 array, annualised volatility (decimal), NaN unless
    ``status == OK``. ``status``: int8 array of the module's status codes.
    """

    sigma: np.ndarray
    status: np.ndarray

    def reasons(self) -> np.ndarray:
        """Plain-English reason per contract (object array of str)."""
        lookup = np.array([STATUS_REASONS[k] for k in sorted(STATUS_REASONS)], dtype=object)
        return lookup[self.status]


def implied_vol(price, forward, strike, t, discount=1.0, is_call=True) -> ImpliedVolResult:
    """Black-76 implied volatility of discounted option prices.

    All inputs broadcast against each other. ``price``: discounted option
    price (price units); ``forward``, ``strike``: price units; ``t``: years;
    ``discount``: discount factor; ``is_call``: True for calls, False for puts.
    Returns an ``ImpliedVolResult`` (annualised decimal vols and status codes).
    """
    inputs = [np.asarray(a, dtype=float) for a in (price, forward, strike, t, discount)]
    inputs.append(np.asarray(is_call, dtype=bool))
    shape = np.broadcast_shapes(*(a.shape for a in inputs))
    n = int(np.prod(shape))
    # Size-one inputs stay scalars; the rest become flat arrays of length n.
    flat = [a.reshape(()) if a.size == 1 else np.broadcast_to(a, shape).reshape(-1) for a in inputs]
    sigma = np.empty(n)
    status = np.empty(n, dtype=np.int8)
    with np.errstate(all="ignore"):
        for lo in range(0, n, _BLOCK):
            hi = min(lo + _BLOCK, n)
            part = [a if a.ndim == 0 else a[lo:hi] for a in flat]
            _solve_block(*part, sigma[lo:hi], status[lo:hi])
    return ImpliedVolResult(sigma.reshape(shape), status.reshape(shape))


def _solve_block(p, f, k, tt, df, call, sigma, status):
    """Fill ``sigma`` and ``status`` (views of length m) for one block of contracts."""
    m = sigma.size
    usable = (
        (p > 0) & (f > 0) & (k > 0) & (df > 0)
        & np.isfinite(p) & np.isfinite(f) & np.isfinite(k) & np.isfinite(df) & np.isfinite(tt)
    )
    status.fill(OK)
    np.copyto(status, NO_PRICE, where=~usable)
    np.copyto(status, NO_TIME, where=usable & (tt <= 0))
    upper = df * np.where(call, f, k)
    intrinsic = np.maximum(np.where(call, f - k, k - f), 0.0)
    np.copyto(status, ABOVE_UPPER_BOUND, where=(status == OK) & (p >= upper))
    np.copyto(status, BELOW_INTRINSIC, where=(status == OK) & (p <= df * intrinsic))
    good = status == OK
    # Out-of-the-money undiscounted price (parity on the forward), normalised
    # by sqrt(F*K), and x = -|ln(F/K)|: the normalised OTM call b(x, s) = beta.
    beta = np.broadcast_to((p / df - intrinsic) / (np.sqrt(f) * np.sqrt(k)), (m,))
    x = np.broadcast_to(-np.abs(np.log(f / k)), (m,))
    bmax = np.exp(0.5 * x)
    # Rounding can leave no time value, or a price at the bound, after the conversion.
    np.copyto(status, BELOW_INTRINSIC, where=good & ~(beta > 0))
    np.copyto(status, ABOVE_UPPER_BOUND, where=good & (beta >= bmax))
    solve = status == OK
    if not solve.all():
        # Stand-in values keep the whole-array solve free of NaN; results are discarded.
        x = np.where(solve, x, -1.0)
        bmax = np.exp(0.5 * x)
        beta = np.where(solve, beta, 0.5 * bmax)
    vol = _normalised_vol(beta, x, bmax)
    vol /= np.sqrt(tt)
    np.copyto(sigma, np.where(solve, vol, np.nan))


# --------------------------------------------------------------------------
# Normalised Black function and its solver. Throughout: x <= 0 (the
# out-of-the-money call), s = sigma*sqrt(t) > 0, b_max = exp(x/2).


def _black(x, s, bmax, ibmax):
    """Normalised OTM call b(x, s) and vega db/ds; x <= 0, dimensionless."""
    h = x / s
    t = 0.5 * s
    d = h + t
    b = ndtr(d)
    b *= bmax
    d -= s
    b -= ibmax * ndtr(d)
    h *= h
    t *= t
    h += t
    h *= -0.5
    np.exp(h, out=h)
    h *= _INV_SQRT_2PI
    return b, h


def _black_upper_gap(x, s, bmax, ibmax):
    """b_max - b(x, s) as a sum of positive terms (accurate near the bound)."""
    h = x / s
    t = 0.5 * s
    return bmax * ndtr(-(h + t)) + ibmax * ndtr(h - t)


def _rational_cubic(z, xl, xr, yl, yr, dl, dr, r):
    """Delbourgo-Gregory rational cubic through (xl, yl), (xr, yr) with end slopes dl, dr.

    ``r`` is the control parameter (> -1); very large r gives the straight line.
    """
    r = np.minimum(r, _R_CAP)
    h = xr - xl
    t = (z - xl) / h
    omt = 1.0 - t
    t_omt = t * omt
    num = yr * t
    num *= t
    num *= t
    num += (r * yr - h * dr) * t * t_omt
    num += (r * yl + h * dl) * omt * t_omt
    num += yl * omt * omt * omt
    r -= 3.0
    r *= t_omt
    r += 1.0
    num /= r
    return num


def _minimum_control(dl, dr, m, prefer_shape):
    """Smallest control parameter keeping the cubic monotone/convex (Delbourgo-Gregory (3.8), (3.18))."""
    monotonic = (dl * m >= 0) & (dr * m >= 0)
    convex = (dl <= m) & (m <= dr)
    concave = (dl >= m) & (m >= dr)
    with np.errstate(all="ignore"):
        m_nonzero = np.abs(m) >= _TINY
        r1 = np.where(monotonic & m_nonzero, (dr + dl) / m, -_HUGE)
        if prefer_shape:
            r1 = np.where(monotonic & ~m_nonzero, _R_MAX, r1)
        drmdl = dr - dl
        drms = dr - m
        smdl = m - dl
        ok = (np.abs(smdl) >= _TINY) & (np.abs(drms) >= _TINY)
        r2_val = np.maximum(np.abs(drmdl / drms), np.abs(drmdl / smdl))
        cc = convex | concave
        r2 = np.where(cc & ok, r2_val, -_HUGE)
        if prefer_shape:
            r2 = np.where((cc & ~ok) | (~cc & monotonic), _R_MAX, r2)
    out = np.maximum(_R_MIN, np.maximum(r1, r2))
    return np.where(monotonic | convex | concave, out, _R_MIN)


def _control_fit(num, den):
    """numerator/denominator with Jäckel's handling of zero parts."""
    with np.errstate(all="ignore"):
        r = num / den
    r = np.where(np.abs(den) < _TINY, np.where(num > 0, _R_MAX, _R_MIN), r)
    return np.where(np.abs(num) < _TINY, 0.0, r)


def _lower_map(x, s):
    """Jäckel's lower map f(s) and its first two derivatives with respect to b."""
    ax = -x
    z = ax / (_SQRT3 * s)
    y = z * z
    s2 = s * s
    big_phi = ndtr(-z)
    phi_ratio = _SQRT_PI_OVER_2 * erfcx(z / np.sqrt(2.0))  # N(-z)/phi(z), no underflow
    fpp = (np.pi / 6.0) * y / (s2 * s) * big_phi * (
        8.0 * _SQRT3 * s * ax + (3.0 * s2 * (s2 - 8.0) - 8.0 * x * x) * phi_ratio
    ) * np.exp(2.0 * y + 0.25 * s2)
    fp = 2.0 * np.pi * y * big_phi * big_phi * np.exp(y + 0.125 * s2)
    f = _TWO_PI_OVER_SQRT27 * ax * big_phi * big_phi * big_phi
    return f, fp, fpp


def _initial_guess(beta, x, bmax, ibmax):
    """Four-branch rational guess for s; also returns the lowest/highest branch index arrays."""
    s_c = np.sqrt(-2.0 * x)
    b_c = 0.5 * bmax - ibmax * ndtr(-s_c)  # b(x, s_c): there x/s + s/2 = 0
    v_c = bmax * _INV_SQRT_2PI
    lower = beta < b_c
    s_o = np.where(lower, s_c - b_c / v_c, s_c + (bmax - b_c) / v_c)
    np.maximum(s_o, _TINY, out=s_o)
    b_o, v_o = _black(x, s_o, bmax, ibmax)

    # Middle branches: s(beta) through (b_o, s_o) and (b_c, s_c) with slopes
    # 1/vega and zero curvature at the s_c end. The rational cubic does not
    # depend on which end is called left, so s_c is always the right end.
    with np.errstate(all="ignore"):
        inv_vo = 1.0 / v_o
        inv_vc = 1.0 / v_c
        m = (s_c - s_o) / (b_c - b_o)
        d_diff = inv_vc - inv_vo
        r = d_diff / (inv_vc - m)
        # Shape-preserving minimum (monotone, convex or concave): eqs. (3.8), (3.18).
        np.fmax(r, (inv_vc + inv_vo) / m, out=r)
        np.fmax(r, np.abs(d_diff / (inv_vc - m)), out=r)
        np.fmax(r, np.abs(d_diff / (m - inv_vo)), out=r)
        np.fmax(r, _R_MIN, out=r)
        s = _rational_cubic(beta, b_o, b_c, s_o, s_c, inv_vo, inv_vc, r)

    low_idx = np.flatnonzero(lower & (beta < b_o))
    high_idx = np.flatnonzero(~lower & (beta > b_o))
    with np.errstate(all="ignore"):
        if low_idx.size:
            s[low_idx] = _lowest_branch_guess(beta[low_idx], x[low_idx], s_o[low_idx], b_o[low_idx])
        if high_idx.size:
            s[high_idx] = _highest_branch_guess(
                beta[high_idx], x[high_idx], s_o[high_idx], b_o[high_idx], bmax[high_idx]
            )
    return s, low_idx, high_idx


def _lowest_branch_guess(beta, x, s_l, b_l):
    """Guess for beta < b(x, s_l): interpolate the lower map, then invert it."""
    f_l, fp_l, fpp_l = _lower_map(x, s_l)
    zero = np.zeros_like(beta)
    one = np.ones_like(beta)
    m = f_l / b_l
    r = _control_fit(0.5 * b_l * fpp_l + (fp_l - 1.0), fp_l - m)
    r = np.maximum(r, _minimum_control(one, fp_l, m, True))
    f = _rational_cubic(beta, zero, b_l, zero, f_l, one, fp_l, r)
    tt = beta / b_l
    f = np.where(f > 0, f, (f_l * tt + b_l * (1.0 - tt)) * tt)
    s = np.abs(x / (_SQRT3 * ndtri(np.cbrt(f / (_TWO_PI_OVER_SQRT27 * -x)))))
    return np.where(f > 0, s, 0.5 * s_l)


def _highest_branch_guess(beta, x, s_h, b_h, bmax):
    """Guess for beta > b(x, s_h): interpolate the upper map N(-s/2), then invert it."""
    f_h = ndtr(-0.5 * s_h)
    w = (x / s_h) ** 2
    fp_h = -0.5 * np.exp(0.5 * w)
    fpp_h = _SQRT_PI_OVER_2 * np.exp(w + 0.125 * s_h * s_h) * w / s_h
    half = np.full_like(beta, -0.5)
    zero = np.zeros_like(beta)
    hgt = bmax - b_h
    m = -f_h / hgt
    r = _control_fit(0.5 * hgt * fpp_h + (half - fp_h), m - fp_h)
    r = np.maximum(r, _minimum_control(fp_h, half, m, True))
    f = _rational_cubic(beta, b_h, bmax, f_h, zero, fp_h, half, r)
    f = np.where(np.isfinite(fpp_h) & (np.abs(fpp_h) < _SQRT_HUGE), f, -1.0)
    tt = (beta - b_h) / hgt
    f = np.where(f > 0, f, (f_h * (1.0 - tt) + 0.5 * hgt * tt) * (1.0 - tt))
    return -2.0 * ndtri(f)


def _householder_factor(newton, halley, hh3):
    return (1.0 + 0.5 * halley * newton) / (1.0 + newton * (halley + hh3 * newton / 6.0))


def _step(beta, x, s, bmax, ibmax, low_idx, up_idx, ln_beta_low, gap_beta_up):
    """One Householder(3) step for every element; returns the step ds."""
    b, bp = _black(x, s, bmax, ibmax)
    hs = x / s
    hs *= hs  # (x/s)^2
    b_halley = hs / s
    b_halley -= 0.25 * s  # b''/b' = x^2/s^3 - s/4
    b_hh3 = b_halley * b_halley
    b_hh3 -= 3.0 * hs / (s * s)
    b_hh3 -= 0.25  # b'''/b'
    newton = beta - b
    newton /= bp
    halley = b_halley
    hh3 = b_hh3
    if low_idx.size:
        # Objective 1/ln(b) - 1/ln(beta).
        bl, bpl = b[low_idx], bp[low_idx]
        bhl, bh3l = b_halley[low_idx], b_hh3[low_idx]
        ln_b = np.log(bl)
        bpob = bpl / bl
        inv_ln_b = 1.0 / ln_b
        newton[low_idx] = (ln_beta_low - ln_b) * ln_b / ln_beta_low / bpob
        one_2 = 1.0 + 2.0 * inv_ln_b
        hh3_low = bh3l + 2.0 * bpob * bpob * (1.0 + 3.0 * inv_ln_b * (1.0 + inv_ln_b)) - 3.0 * bhl * bpob * one_2
        halley[low_idx] = bhl - bpob * one_2
        hh3[low_idx] = hh3_low
    if up_idx.size:
        # Objective ln((b_max - beta)/(b_max - b)).
        gap_b = _black_upper_gap(x[up_idx], s[up_idx], bmax[up_idx], ibmax[up_idx])
        gp = bp[up_idx] / gap_b
        bhu = b_halley[up_idx]
        newton[up_idx] = -np.log(gap_beta_up / gap_b) / gp
        hh3[up_idx] = hh3[up_idx] + gp * (2.0 * gp + 3.0 * bhu)
        halley[up_idx] = bhu + gp
    ds = newton * _householder_factor(newton, halley, hh3)
    return np.maximum(ds, -0.5 * s, out=ds)


def _normalised_vol(beta, x, bmax):
    """s = sigma*sqrt(t) with b(x, s) = beta, for 1-d arrays with x <= 0, bmax = exp(x/2), 0 < beta < bmax."""
    with np.errstate(all="ignore"):
        ibmax = 1.0 / bmax
        s, low_idx, high_idx = _initial_guess(beta, x, bmax, ibmax)
        up_idx = high_idx[beta[high_idx] > 0.5 * bmax[high_idx]]
        ln_beta_low = np.log(beta[low_idx])
        gap_beta_up = bmax[up_idx] - beta[up_idx]
        ds = None
        for _ in range(_STEPS):
            ds = _step(beta, x, s, bmax, ibmax, low_idx, up_idx, ln_beta_low, gap_beta_up)
            s += ds
        todo = np.flatnonzero(~(np.abs(ds) <= _POLISH_IF * s))
        if todo.size:
            s[todo] = _polish(beta[todo], x[todo], s[todo])
    return s


def _polish(beta, x, s):
    """Bracketed Newton/bisection on the few unconverged elements (vectorised over them).

    Newton works on ln(b) for small prices, on b_max - b (in logs) near the
    bound and on b in between; a step may at most halve or double s, and a
    step that leaves the bracket is replaced by bisection (geometric once the
    bracket is finite), so any finite or NaN starting point converges.
    """
    with np.errstate(all="ignore"):
        return _polish_loop(beta, x, s)


def _polish_loop(beta, x, s):
    bmax = np.exp(0.5 * x)
    ibmax = 1.0 / bmax
    n = beta.size
    lo = np.zeros(n)
    hi = np.full(n, np.inf)
    s = np.where(np.isfinite(s) & (s > 0), s, 1.0)
    ln_beta = np.log(beta)
    ln_gap_beta = np.log(bmax - beta)
    use_log = beta < 0.25 * bmax
    use_gap = beta > 0.5 * bmax
    active = np.ones(n, dtype=bool)
    for _ in range(_POLISH_MAX):
        ia = np.flatnonzero(active)
        if ia.size == 0:
            break
        sa, xa, ba = s[ia], x[ia], beta[ia]
        b, bp = _black(xa, sa, bmax[ia], ibmax[ia])
        gap = _black_upper_gap(xa, sa, bmax[ia], ibmax[ia])
        ug = use_gap[ia]
        above = np.where(ug, gap < bmax[ia] - ba, b > ba)
        hi[ia] = np.where(above, np.minimum(hi[ia], sa), hi[ia])
        lo[ia] = np.where(above, lo[ia], np.maximum(lo[ia], sa))
        newton = np.where(
            use_log[ia],
            (ln_beta[ia] - np.log(b)) * b / bp,
            np.where(ug, (np.log(gap) - ln_gap_beta[ia]) * gap / bp, (ba - b) / bp),
        )
        cand = np.clip(sa + newton, 0.5 * sa, 2.0 * sa)
        lo_a, hi_a = lo[ia], hi[ia]
        inside = np.isfinite(cand) & (cand >= lo_a) & (cand <= hi_a)
        bisect = np.where(
            np.isfinite(hi_a), np.where(lo_a > 0, np.sqrt(lo_a * hi_a), 0.5 * hi_a), 2.0 * np.maximum(sa, lo_a)
        )
        snew = np.where(inside, cand, bisect)
        s[ia] = snew
        done = (np.abs(snew - sa) <= 4.0 * _EPS * snew) | (np.isfinite(hi_a) & (hi_a - lo_a <= 4.0 * _EPS * hi_a))
        active[ia[done]] = False
    return s
