"""Raw SVI total-variance smile and its butterfly-arbitrage check.

Units: ``k = ln(K/F)`` is log-moneyness (dimensionless); total variance
``w = sigma_implied**2 * t`` is dimensionless (vol in decimal, t in years);
``dw_dk`` and ``d2w_dk2`` are derivatives of w with respect to k.

Raw SVI (Gatheral & Jacquier 2014, eq. 3.1)::

    w(k) = a + b * (rho * (k - m) + sqrt((k - m)**2 + sigma**2))

valid when b >= 0, |rho| < 1, sigma > 0 and a + b*sigma*sqrt(1 - rho**2) >= 0
(the minimum of w). Lee's moment bound asks the wing slopes b*(1 - rho) (left)
and b*(1 + rho) (right) to be at most 2; strictly below 2 also gives
d+(k) -> -inf as k -> inf, the second condition of G&J Lemma 2.2.

The g function (G&J 2014 eq. 2.1)::

    g(k) = (1 - k*w'/(2w))**2 - (w'**2/4) * (1/w + 1/4) + w''/2

A slice is free of butterfly arbitrage iff g >= 0 everywhere (and the d+
limit above); the density of ln(S_T/F) is g(k)/sqrt(2*pi*w)*exp(-d_minus**2/2).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: Largest wing slope of total variance allowed by Lee's moment formula.
LEE_MAX_SLOPE = 2.0


@dataclass(frozen=True, slots=True)
class SviParams:
    """Raw SVI parameters, in the field order (a, b, rho, m, sigma).

    Gatheral & Jacquier (2014) list the same parameters in the order
    (a, b, m, rho, sigma): when copying a parameter set from that paper use
    :meth:`from_gj_order`, or m and rho end up swapped.

    ``a`` is a level of total variance, ``b`` >= 0 the wing steepness,
    ``rho`` in (-1, 1) the skew, ``m`` the k of the vertex and ``sigma`` > 0
    the width of the rounded vertex (all dimensionless).
    """

    a: float
    b: float
    rho: float
    m: float
    sigma: float

    @classmethod
    def from_gj_order(cls, a: float, b: float, m: float, rho: float, sigma: float) -> SviParams:
        """Build from parameters listed as in Gatheral & Jacquier: (a, b, m, rho, sigma)."""
        return cls(a=a, b=b, rho=rho, m=m, sigma=sigma)

    @classmethod
    def flat(cls, w0: float) -> SviParams:
        """A flat smile: total variance w0 at every k (b = 0)."""
        return cls(a=float(w0), b=0.0, rho=0.0, m=0.0, sigma=1.0)

    def as_tuple(self) -> tuple[float, float, float, float, float]:
        """(a, b, rho, m, sigma)."""
        return (self.a, self.b, self.rho, self.m, self.sigma)


@dataclass(frozen=True)
class SviSlices:
    """Many raw SVI slices evaluated at once, one per element.

    ``params`` holds arrays (a, b, rho, m, sigma) that broadcast against the
    log-moneyness ``k`` passed to the methods, e.g. one row of parameters per
    contract, or shape (E, 1) against k of shape (E, n). The methods have the
    same names and units as ``Smile``'s, so the functions of
    ``distribution`` accept this object as a smile.
    """

    params: SviParams

    @classmethod
    def stack(cls, slices: list[SviParams]) -> SviSlices:
        """Stack scalar parameter sets into arrays of shape (len(slices),)."""
        arr = np.array([p.as_tuple() for p in slices], dtype=float).reshape(-1, 5)
        return cls(SviParams(*(arr[:, i] for i in range(5))))

    def take(self, index) -> SviSlices:
        """The slices at ``index`` (numpy fancy indexing on every parameter)."""
        p = self.params
        return SviSlices(SviParams(*(np.asarray(v)[index] for v in p.as_tuple())))

    def total_variance(self, k):
        """Total variance w(k), dimensionless."""
        return total_variance(self.params, k)

    def dw_dk(self, k):
        """w'(k)."""
        return dw_dk(self.params, k)

    def w_and_dw_dk(self, k):
        """(w(k), w'(k)) in one pass."""
        return w_and_dw_dk(self.params, k)

    def d2w_dk2(self, k):
        """w''(k)."""
        return d2w_dk2(self.params, k)

    def w_and_derivatives(self, k):
        """(w(k), w'(k), w''(k)) in one pass."""
        return w_and_derivatives(self.params, k)


def _xr(p: SviParams, k):
    x = np.asarray(k, dtype=float) - p.m
    return x, np.sqrt(x * x + p.sigma * p.sigma)


def total_variance(p: SviParams, k):
    """Total variance w(k) (dimensionless) at log-moneyness k."""
    x, r = _xr(p, k)
    return p.a + p.b * (p.rho * x + r)


def w_and_dw_dk(p: SviParams, k):
    """(w(k), w'(k)) with x and R computed once: the same numbers as total_variance and dw_dk."""
    x, r = _xr(p, k)
    return p.a + p.b * (p.rho * x + r), p.b * (p.rho + x / r)


def w_and_derivatives(p: SviParams, k):
    """(w(k), w'(k), w''(k)) with x and R computed once: the same numbers as total_variance, dw_dk and d2w_dk2."""
    x, r = _xr(p, k)
    return p.a + p.b * (p.rho * x + r), p.b * (p.rho + x / r), p.b * p.sigma * p.sigma / (r * r * r)


def dw_dk(p: SviParams, k):
    """First derivative w'(k) = b*(rho + x/R), x = k - m, R = sqrt(x^2 + sigma^2)."""
    x, r = _xr(p, k)
    return p.b * (p.rho + x / r)


def d2w_dk2(p: SviParams, k):
    """Second derivative w''(k) = b*sigma^2/R^3."""
    _, r = _xr(p, k)
    return p.b * p.sigma * p.sigma / (r * r * r)


def g_from_w(k, w, w1, w2):
    """The G&J g function from w, w' and w'' at k (any smile, not only SVI).

    Returns NaN where w <= 0.
    """
    k = np.asarray(k, dtype=float)
    w = np.asarray(w, dtype=float)
    w1 = np.asarray(w1, dtype=float)
    w2 = np.asarray(w2, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        wpos = np.where(w > 0.0, w, np.nan)
        return (1.0 - k * w1 / (2.0 * wpos)) ** 2 - 0.25 * w1 * w1 * (1.0 / wpos + 0.25) + 0.5 * w2


def g_function(p: SviParams, k):
    """G&J (2014) eq. 2.1 g(k) for a raw SVI slice (dimensionless); NaN where w <= 0."""
    return g_from_w(k, total_variance(p, k), dw_dk(p, k), d2w_dk2(p, k))


def min_total_variance(p: SviParams) -> float:
    """Minimum of w over all k: a + b*sigma*sqrt(1 - rho^2) (for |rho| < 1)."""
    return p.a + p.b * p.sigma * np.sqrt(max(1.0 - p.rho * p.rho, 0.0))


def wing_slopes(p: SviParams) -> tuple[float, float]:
    """Asymptotic slopes of w: (left, right) = (b*(1 - rho), b*(1 + rho))."""
    return p.b * (1.0 - p.rho), p.b * (1.0 + p.rho)


def validity_problems(p: SviParams) -> list[str]:
    """Plain-English reasons why p is not a valid raw SVI slice within Lee's bound.

    Empty list when b >= 0, |rho| < 1, sigma > 0, minimum w >= 0 and both wing
    slopes <= 2.
    """
    out: list[str] = []
    vals = p.as_tuple()
    if not all(np.isfinite(v) for v in vals):
        return ["a parameter is not a finite number"]
    if p.b < 0:
        out.append(f"b = {p.b:.6g} is negative")
    if not abs(p.rho) < 1:
        out.append(f"|rho| = {abs(p.rho):.6g} is not below 1")
    if not p.sigma > 0:
        out.append(f"sigma = {p.sigma:.6g} is not positive")
    if abs(p.rho) < 1 and min_total_variance(p) < 0:
        out.append(f"minimum total variance {min_total_variance(p):.6g} is negative")
    left, right = wing_slopes(p)
    if max(left, right) > LEE_MAX_SLOPE:
        out.append(f"wing slope {max(left, right):.6g} exceeds Lee's bound of 2")
    return out


def is_valid(p: SviParams) -> bool:
    """True when :func:`validity_problems` finds nothing."""
    return not validity_problems(p)


def default_check_grid(p: SviParams) -> np.ndarray:
    """k grid for the butterfly check: [-3, 3] plus a dense patch around the vertex m."""
    wide = np.linspace(-3.0, 3.0, 1201)
    vertex = p.m + abs(p.sigma) * np.linspace(-10.0, 10.0, 201)
    return np.unique(np.concatenate([wide, vertex]))


def _refine_min(fun, k: np.ndarray, vals: np.ndarray) -> tuple[float, float]:
    """Zoom twice around the grid minimum of fun (vectorised); returns (min, k_at_min)."""
    i = int(np.nanargmin(vals))
    lo = k[max(i - 1, 0)]
    hi = k[min(i + 1, k.size - 1)]
    best_k, best_v = float(k[i]), float(vals[i])
    for _ in range(3):
        kk = np.linspace(lo, hi, 201)
        vv = fun(kk)
        if not np.any(np.isfinite(vv)):
            break
        j = int(np.nanargmin(vv))
        if vv[j] < best_v:
            best_k, best_v = float(kk[j]), float(vv[j])
        step = kk[1] - kk[0]
        lo, hi = kk[j] - step, kk[j] + step
    return best_v, best_k


def _bisect_roots(fun, lo: np.ndarray, hi: np.ndarray, iters: int = 60) -> np.ndarray:
    """Vectorised bisection for sign changes of fun on [lo, hi] (fun(lo), fun(hi) differ in sign)."""
    lo = lo.astype(float).copy()
    hi = hi.astype(float).copy()
    flo = fun(lo)
    for _ in range(iters):
        mid = 0.5 * (lo + hi)
        fm = fun(mid)
        same = np.sign(fm) == np.sign(flo)
        lo = np.where(same, mid, lo)
        flo = np.where(same, fm, flo)
        hi = np.where(same, hi, mid)
    return 0.5 * (lo + hi)


def negative_intervals_of(fun, k: np.ndarray, vals: np.ndarray) -> list[tuple[float, float]]:
    """Intervals of k where fun < 0, with ends found by bisection (grid ends if open)."""
    neg = vals < 0
    if not np.any(neg):
        return []
    change = np.nonzero(neg[1:] != neg[:-1])[0]
    roots = _bisect_roots(fun, k[change], k[change + 1]) if change.size else np.empty(0)
    edges: list[float] = []
    if neg[0]:
        edges.append(float(k[0]))
    edges.extend(float(r) for r in roots)
    if neg[-1]:
        edges.append(float(k[-1]))
    return [(edges[i], edges[i + 1]) for i in range(0, len(edges) - 1, 2)]


def butterfly_check(p: SviParams, k_grid=None):
    """Check g(k) >= 0 on a k grid (G&J 2014 Lemma 2.2).

    Returns ``(arbitrage_free, min_g, k_at_min, negative_intervals)``: min_g
    and its k are refined around the grid minimum; ``negative_intervals`` is a
    list of (k_start, k_end) where g < 0, ends found by bisection (an end at
    the edge of the grid means the interval may go on beyond it). A slice with
    a wing slope at or above Lee's bound of 2, or w <= 0 on the grid, is
    never called arbitrage-free.
    """
    k = default_check_grid(p) if k_grid is None else np.unique(np.asarray(k_grid, dtype=float))
    k = k[np.isfinite(k)]
    if k.size < 2:
        raise ValueError("the butterfly check needs at least two finite k values")

    def fun(x):
        return g_function(p, x)

    g = fun(k)
    if np.any(~np.isfinite(g)):
        bad = k[~np.isfinite(g)]
        return False, float("nan"), float(bad[0]), [(float(bad[0]), float(bad[-1]))]
    min_g, k_min = _refine_min(fun, k, g)
    intervals = negative_intervals_of(fun, k, g)
    lee_ok = max(wing_slopes(p)) < LEE_MAX_SLOPE
    return bool(min_g >= 0.0 and lee_ok), float(min_g), float(k_min), intervals
