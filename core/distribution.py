"""Market-implied terminal distribution of one expiry, from its smile.

Works with any smile object that has vectorised ``total_variance(k)``,
``dw_dk(k)`` and ``d2w_dk2(k)`` in log-moneyness k = ln(K/F) (a fitted
``Smile``, a flat one, or a test smile). Units: ``forward`` and strikes in
price units; ``t`` in years; ``sigma`` annualised decimal vol; probabilities
in [0, 1]; densities per unit of strike (or per unit of k for
:func:`density_k`). Everything is risk-neutral (forward measure).

Finish-beyond probability with a smile. With w = w(k), d- = -k/sqrt(w) -
sqrt(w)/2 and d+ = d- + sqrt(w), the undiscounted Black call is
C/DF = F*(N(d+) - e^k N(d-)) = F*c(k, w). At fixed w, dc/dk = -e^k N(d-)
(the phi terms cancel because phi(d+) = e^k phi(d-)); at fixed k,
dc/dw = e^k phi(d-)/(2 sqrt(w)). Along the smile, dk/dK = 1/K = 1/(F e^k), so

    P(S_T > K) = -(1/DF) dC/dK = N(d-) - phi(d-) * w'(k) / (2 sqrt(w)).

This is the same as N(d2) - F*phi(d1)*sqrt(T)*sigma'(K): with
sigma(K) = sqrt(w/T), sigma'(K) = w'/(2 sqrt(w T) K), and F*phi(d1) =
F*e^k*phi(d2) = K*phi(d2), so F*phi(d1)*sqrt(T)*sigma'(K) = phi(d2)*w'/(2 sqrt(w)).
Differentiating once more gives the Breeden-Litzenberger density
(1/DF) d2C/dK2, which in k is p(k) = g(k)/sqrt(2 pi w) * exp(-d-^2/2)
(Gatheral & Jacquier 2014), and per unit strike p(k)/K.

Where the smile's g(k) < 0 (butterfly arbitrage) the implied density is
negative: it is kept as computed and flagged (``Distribution.negative_density``
and ``notes``); the caller decides how to draw it. Probabilities are clipped
to [0, 1].
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from .standard_normal import ndtr, ndtri

# numpy >= 2 has trapezoid; older numpy calls it trapz. (scipy.integrate would
# also do, but importing it costs about 0.3 s at start-up.)
trapezoid = getattr(np, "trapezoid", None) or np.trapz

from .confidence import DEFAULT_CONFIDENCE
from .findings import ChainTriageError
from .svi import g_from_w

_SQRT_2PI = np.sqrt(2.0 * np.pi)


def _phi(x):
    return np.exp(-0.5 * x * x) / _SQRT_2PI


def _log_moneyness(forward, strike):
    forward = np.asarray(forward, dtype=float)
    strike = np.asarray(strike, dtype=float)
    ok = np.isfinite(forward) & np.isfinite(strike) & (forward > 0) & (strike > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        k = np.where(ok, np.log(np.where(ok, strike, 1.0) / np.where(ok, forward, 1.0)), np.nan)
    return k


def _prob_above_k(smile, k):
    """Unclipped P(S_T > F e^k) from the smile at log-moneyness k."""
    both = getattr(smile, "w_and_dw_dk", None)  # raw SVI slices: w and w' from one x and R
    w, w1 = both(k) if both is not None else (smile.total_variance(k), smile.dw_dk(k))
    w = np.asarray(w, dtype=float)
    w1 = np.asarray(w1, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        sw = np.sqrt(np.where(w > 0, w, np.nan))
        dm = -k / sw - 0.5 * sw
        return ndtr(dm) - _phi(dm) * w1 / (2.0 * sw)


def prob_above(smile, forward, strike):
    """P(S_T > K) implied by the whole smile (the digital), in [0, 1].

    ``forward``, ``strike``: price units, broadcast together. NaN where the
    forward or strike is not a positive number or w(k) <= 0.
    """
    k = _log_moneyness(forward, strike)
    p = _prob_above_k(smile, k)
    return np.clip(p, 0.0, 1.0)


def prob_below(smile, forward, strike):
    """P(S_T < K) = 1 - P(S_T > K) from the smile, in [0, 1]."""
    return 1.0 - prob_above(smile, forward, strike)


def prob_above_flat(forward, strike, sigma, t):
    """P(S_T > K) under a lognormal at one vol: N(d2), d2 = (ln(F/K) - sigma^2 t/2)/(sigma sqrt(t)).

    NaN where forward, strike, sigma or t is not positive.
    """
    k = _log_moneyness(forward, strike)
    sigma = np.asarray(sigma, dtype=float)
    t = np.asarray(t, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        s = np.where((sigma > 0) & (t > 0), sigma * np.sqrt(np.where(t > 0, t, np.nan)), np.nan)
        return ndtr(-k / s - 0.5 * s)


def density_k(smile, k):
    """Density of ln(S_T/F) at k: g(k)/sqrt(2 pi w) * exp(-d-^2/2), per unit of k.

    Negative where g(k) < 0 (butterfly arbitrage); NaN where w <= 0.
    """
    k = np.asarray(k, dtype=float)
    w = np.asarray(smile.total_variance(k), dtype=float)
    w1 = np.asarray(smile.dw_dk(k), dtype=float)
    w2 = np.asarray(smile.d2w_dk2(k), dtype=float)
    g = g_from_w(k, w, w1, w2)
    with np.errstate(divide="ignore", invalid="ignore"):
        sw = np.sqrt(np.where(w > 0, w, np.nan))
        dm = -k / sw - 0.5 * sw
        return g / (_SQRT_2PI * sw) * np.exp(-0.5 * dm * dm)


def density_strike(smile, forward, strike):
    """Risk-neutral density of S_T per unit of strike: p(k)/K = (1/DF) d2C/dK2."""
    k = _log_moneyness(forward, strike)
    return density_k(smile, k) / np.asarray(strike, dtype=float)


def density_strike_flat(forward, strike, sigma, t):
    """Lognormal density of S_T per unit of strike at one vol: phi(d2)/(K sigma sqrt(t))."""
    k = _log_moneyness(forward, strike)
    sigma = np.asarray(sigma, dtype=float)
    t = np.asarray(t, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        s = np.where((sigma > 0) & (t > 0), sigma * np.sqrt(np.where(t > 0, t, np.nan)), np.nan)
        d2 = -k / s - 0.5 * s
        return _phi(d2) / (np.asarray(strike, dtype=float) * s)


def _k_bracket(smile, lo_target: float, hi_target: float, max_abs_k: float = 60.0):
    """k_lo, k_hi with CDF(k_lo) <= lo_target and CDF(k_hi) >= hi_target (or the cap)."""
    w0 = float(np.asarray(smile.total_variance(0.0)))
    step = 8.0 * np.sqrt(w0) if np.isfinite(w0) and w0 > 0 else 1.0
    k_lo, k_hi = -step, step
    while k_lo > -max_abs_k and not 1.0 - _prob_above_k(smile, np.array(k_lo)) <= lo_target:
        k_lo = max(2.0 * k_lo, -max_abs_k)
    while k_hi < max_abs_k and not 1.0 - _prob_above_k(smile, np.array(k_hi)) >= hi_target:
        k_hi = min(2.0 * k_hi, max_abs_k)
    return k_lo, k_hi


def quantile(smile, forward, p, tol: float = 1e-13):
    """Strike K with P(S_T <= K) = p under the smile (closed-form CDF, vectorised bisection in k).

    ``p`` in (0, 1), any shape; NaN outside it. Where butterfly arbitrage
    makes the CDF non-monotone, one crossing is returned.
    """
    forward = float(forward)
    if not (np.isfinite(forward) and forward > 0):
        raise ChainTriageError(f"quantile needs a positive forward, got {forward!r}")
    p = np.asarray(p, dtype=float)
    valid = np.isfinite(p) & (p > 0) & (p < 1)
    if not np.any(valid):
        return np.full(p.shape, np.nan)
    pv = p[valid]
    k_lo, k_hi = _k_bracket(smile, float(pv.min()), float(pv.max()))
    lo = np.full(pv.shape, k_lo)
    hi = np.full(pv.shape, k_hi)
    for _ in range(200):
        mid = 0.5 * (lo + hi)
        below = (1.0 - np.clip(_prob_above_k(smile, mid), 0.0, 1.0)) < pv
        lo = np.where(below, mid, lo)
        hi = np.where(below, hi, mid)
        if np.max(hi - lo) < tol:
            break
    out = np.full(p.shape, np.nan)
    out[valid] = forward * np.exp(0.5 * (lo + hi))
    return out


def range_flat(forward, sigma, t, confidence=None, centre: str = "median"):
    """Plain range (low, high) at a two-sided confidence: the central interval of the one-vol lognormal.

    centre='median' (the default, the product's plain range): the risk-neutral
    lognormal whose mean is the forward, F*exp(-sigma^2 t/2 -/+ z sigma sqrt(t))
    with z = ndtri((1 + c)/2): exactly (1 - c)/2 of that lognormal lies below
    low and (1 - c)/2 above high. centre='forward': the band
    F*exp(-/+ z sigma sqrt(t)) symmetric in log around the forward (the sigma
    marks; it does NOT hold probability c under that lognormal). ``confidence``
    defaults to :data:`DEFAULT_CONFIDENCE`. Broadcasts; NaN for a confidence
    outside [0, 1).
    """
    if centre not in ("forward", "median"):
        raise ChainTriageError(f"range centre must be 'forward' or 'median', got {centre!r}")
    if confidence is None:
        confidence = DEFAULT_CONFIDENCE
    forward = np.asarray(forward, dtype=float)
    s = np.asarray(sigma, dtype=float) * np.sqrt(np.asarray(t, dtype=float))
    c = np.asarray(confidence, dtype=float)
    with np.errstate(invalid="ignore"):
        z = np.where((c >= 0) & (c < 1), ndtri(0.5 * (1.0 + c)), np.nan)
    mid = forward * (np.exp(-0.5 * s * s) if centre == "median" else 1.0)
    return mid * np.exp(-z * s), mid * np.exp(z * s)


def range_smile(smile, forward, confidence=None):
    """Band (low, high) between the (1-c)/2 and (1+c)/2 quantiles of the smile's distribution."""
    c = np.asarray(DEFAULT_CONFIDENCE if confidence is None else confidence, dtype=float)
    with np.errstate(invalid="ignore"):
        c = np.where((c > 0) & (c < 1), c, np.nan)
    q = quantile(smile, forward, np.stack([0.5 * (1.0 - c), 0.5 * (1.0 + c)]))
    return q[0], q[1]


def quantile_rows(smiles, forward, p, tol: float = 1e-13):
    """:func:`quantile` for many smiles at once: one row per smile, shape (E, len(p)).

    ``smiles`` evaluates every row's smile at once: its methods broadcast
    parameters of shape (E, 1) against k of shape (E, m) (e.g. an
    ``svi.SviSlices`` taken with ``[:, None]``). ``forward``: (E,) price
    units; ``p``: 1-d levels in (0, 1), NaN outside. Each row takes exactly
    the bracket and bisection steps :func:`quantile` takes for that smile on
    its own; a row with a forward that is not a positive number is NaN.
    """
    forward = np.atleast_1d(np.asarray(forward, dtype=float))
    p = np.atleast_1d(np.asarray(p, dtype=float))
    out = np.full((forward.size, p.size), np.nan)
    valid = np.isfinite(p) & (p > 0) & (p < 1)
    if not np.any(valid) or forward.size == 0:
        return out
    pv = p[valid][None, :]
    lo_target, hi_target = float(pv.min()), float(pv.max())
    max_abs_k = 60.0
    w0 = np.asarray(smiles.total_variance(np.zeros((forward.size, 1))), dtype=float)[:, 0]
    with np.errstate(invalid="ignore"):
        step = np.where(np.isfinite(w0) & (w0 > 0), 8.0 * np.sqrt(np.where(w0 > 0, w0, 1.0)), 1.0)
    k_lo, k_hi = -step, step
    while True:  # as _k_bracket: double outwards until the CDF brackets the levels (or the cap)
        with np.errstate(invalid="ignore"):
            need_lo = (k_lo > -max_abs_k) & ~(1.0 - _prob_above_k(smiles, k_lo[:, None])[:, 0] <= lo_target)
            need_hi = (k_hi < max_abs_k) & ~(1.0 - _prob_above_k(smiles, k_hi[:, None])[:, 0] >= hi_target)
        if not (need_lo.any() or need_hi.any()):
            break
        k_lo = np.where(need_lo, np.maximum(2.0 * k_lo, -max_abs_k), k_lo)
        k_hi = np.where(need_hi, np.minimum(2.0 * k_hi, max_abs_k), k_hi)
    lo = np.repeat(k_lo[:, None], pv.shape[1], axis=1)
    hi = np.repeat(k_hi[:, None], pv.shape[1], axis=1)
    active = np.ones(forward.size, dtype=bool)
    for _ in range(200):
        mid = 0.5 * (lo + hi)
        below = (1.0 - np.clip(_prob_above_k(smiles, mid), 0.0, 1.0)) < pv
        upd = active[:, None]
        lo = np.where(upd & below, mid, lo)
        hi = np.where(upd & ~below, mid, hi)
        active &= ~(np.max(hi - lo, axis=1) < tol)
        if not active.any():
            break
    ok = np.isfinite(forward) & (forward > 0)
    with np.errstate(invalid="ignore"):
        out[:, valid] = np.where(ok[:, None], forward[:, None] * np.exp(0.5 * (lo + hi)), np.nan)
    return out


def range_smile_rows(smiles, forward, confidence):
    """:func:`range_smile` for many smiles at once: (low, high), each (E,), as :func:`quantile_rows`."""
    c = float(confidence)
    c = c if 0.0 < c < 1.0 else float("nan")
    q = quantile_rows(smiles, forward, np.array([0.5 * (1.0 - c), 0.5 * (1.0 + c)]))
    return q[:, 0], q[:, 1]


@dataclass(frozen=True)
class Distribution:
    """One expiry's terminal distribution on a strike grid.

    ``strikes`` (price units, increasing); ``density`` market-implied and
    ``density_flat`` lognormal at ``sigma_flat``, both per unit of strike;
    ``cdf`` = 1 - P(S_T > K) from the closed-form digital (clipped to
    [0, 1]) and ``cdf_flat``. ``negative_density`` is True when the
    market-implied density is negative somewhere on the grid (butterfly
    arbitrage in the smile); the values are kept as computed. ``k`` is
    ln(strikes/forward); ``spacing`` is 'log' (even in k) or 'linear'.
    """

    forward: float
    t: float
    sigma_flat: float
    strikes: np.ndarray
    density: np.ndarray
    density_flat: np.ndarray
    cdf: np.ndarray
    cdf_flat: np.ndarray
    negative_density: bool
    notes: tuple[str, ...] = ()
    k: np.ndarray | None = None
    spacing: str = "log"
    mean_beyond: tuple[float, float] = (0.0, 0.0)

    def quantile(self, p):
        """Strike at CDF level p, interpolated on the grid (running maximum of the CDF); NaN off the grid."""
        return self._interp_quantile(self.cdf, p)

    def quantile_flat(self, p):
        """Lognormal strike at CDF level p, interpolated on the grid."""
        return self._interp_quantile(self.cdf_flat, p)

    def _interp_quantile(self, cdf, p):
        p = np.asarray(p, dtype=float)
        mono = np.maximum.accumulate(cdf)
        keep = np.concatenate([[True], np.diff(mono) > 0])
        xs, ys = mono[keep], self.strikes[keep]
        out = np.interp(p, xs, ys)
        return np.where((p >= xs[0]) & (p <= xs[-1]), out, np.nan)

    def _integrate(self, f) -> float:
        # On an even grid the trapezoid rule is very accurate for a smooth density that
        # dies off at both ends: even in k, integrate f(K) dK = f(K) K dk.
        if self.spacing == "log" and self.k is not None:
            return float(trapezoid(f * self.strikes, self.k))
        return float(trapezoid(f, self.strikes))

    def tail_mass(self) -> tuple[float, float]:
        """Market-implied probability below the first and above the last strike (closed form)."""
        return float(self.cdf[0]), float(1.0 - self.cdf[-1])

    def tail_mean(self) -> tuple[float, float]:
        """E[S_T; S_T below the first strike] and E[S_T; S_T above the last strike], price units (closed form).

        mean() + sum(tail_mean()) is the forward for an arbitrage-free smile.
        """
        return self.mean_beyond

    def mass(self) -> float:
        """Trapezoid integral of the market-implied density over the grid (about 1)."""
        return self._integrate(self.density)

    def mass_flat(self) -> float:
        """Trapezoid integral of the lognormal density over the grid."""
        return self._integrate(self.density_flat)

    def mean(self) -> float:
        """Trapezoid E[S_T] over the grid under the market-implied density, price units.

        About the forward; short of it when fat wings put mass beyond the grid.
        """
        return self._integrate(self.strikes * self.density)

    def mean_flat(self) -> float:
        """Trapezoid E[S_T] under the lognormal density, price units."""
        return self._integrate(self.strikes * self.density_flat)


def terminal_distribution(smile, forward, t, sigma_flat, n: int = 401, span_sd: float = 6.0,
                          tail: float = 1e-7, spacing: str = "log", refine_tol: float = 1e-6,
                          max_doublings: int = 4) -> Distribution:
    """Market-implied and one-vol lognormal distributions of S_T on a grid of about n strikes.

    The grid spans at least +/- ``span_sd`` flat standard deviations
    (sigma_flat*sqrt(t)) in k = ln(K/F), widened to the smile's ``tail`` and
    1 - ``tail`` quantiles (but at most 4x that span), so quantiles and mass
    see the tails. ``spacing``: 'log' (even in k) or 'linear' (even in
    strike). When n points do not resolve the density (a sharp smile vertex:
    the trapezoid mass misses the closed-form CDF step across the grid by
    more than ``refine_tol``) the grid is made twice as fine, up to
    ``max_doublings`` times, so it can hold more than n points. Probability
    and E[S_T] beyond the grid ends are given by :meth:`Distribution.tail_mass`
    and :meth:`Distribution.tail_mean` (closed form), and noted when large.
    """
    forward, t, sigma_flat = float(forward), float(t), float(sigma_flat)
    for name, val in (("forward", forward), ("t", t), ("sigma_flat", sigma_flat)):
        if not (np.isfinite(val) and val > 0):
            raise ChainTriageError(f"terminal distribution needs a positive {name}, got {val!r}")
    if n < 3 or spacing not in ("log", "linear"):
        raise ChainTriageError("terminal distribution needs n >= 3 and spacing 'log' or 'linear'")
    sd = sigma_flat * np.sqrt(t)
    reach = span_sd * sd
    k_lo, k_hi = -reach - 0.5 * sd * sd, reach - 0.5 * sd * sd
    q_lo, q_hi = quantile(smile, 1.0, [tail, 1.0 - tail])
    if np.isfinite(q_lo):
        k_lo = max(min(k_lo, float(np.log(q_lo))), -4.0 * reach)
    if np.isfinite(q_hi):
        k_hi = min(max(k_hi, float(np.log(q_hi))), 4.0 * reach)
    n_now = n
    for attempt in range(max_doublings + 1):
        if spacing == "log":
            k = np.linspace(k_lo, k_hi, n_now)
            x = k
        else:
            x = np.linspace(np.exp(k_lo), np.exp(k_hi), n_now)  # strike / forward
            k = np.log(x)
        pk = density_k(smile, k)
        cdf_raw = 1.0 - _prob_above_k(smile, k)
        integrand = pk if spacing == "log" else pk / x
        miss = abs(float(trapezoid(integrand, x)) - float(cdf_raw[-1] - cdf_raw[0]))
        if miss <= refine_tol or attempt == max_doublings:
            break
        n_now = 2 * n_now - 1
    strikes = forward * np.exp(k)
    dens = pk / strikes
    cdf = np.clip(cdf_raw, 0.0, 1.0)
    dens_flat = density_strike_flat(forward, strikes, sigma_flat, t)
    cdf_flat = 1.0 - prob_above_flat(forward, strikes, sigma_flat, t)
    neg = bool(np.any(dens < 0))
    notes: list[str] = []
    if neg:
        bad = strikes[dens < 0]
        notes.append(
            f"The market-implied density is negative between strikes {bad.min():.6g} and {bad.max():.6g} "
            f"(butterfly arbitrage in the smile); shown as computed."
        )
    if np.any(~np.isfinite(dens)):
        notes.append("The market-implied density is undefined at some strikes (total variance not positive).")
    if not miss <= refine_tol:
        notes.append(
            f"Even {n_now} grid points do not resolve the market-implied density: the grid integral "
            f"misses the exact probability by {miss:.2g}."
        )
    # closed-form E[S_T; S_T beyond each grid end]: K P(beyond) -/+ the undiscounted put/call there
    w_end = np.asarray(smile.total_variance(k[[0, -1]]), dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        sw = np.sqrt(w_end)
        dm = -k[[0, -1]] / sw - 0.5 * sw
        dp = dm + sw
    x_end = np.exp(k[[0, -1]])
    put_lo = x_end[0] * ndtr(-dm[0]) - ndtr(-dp[0])
    call_hi = ndtr(dp[1]) - x_end[1] * ndtr(dm[1])
    mean_below = forward * float(x_end[0] * cdf_raw[0] - put_lo)
    mean_above = forward * float(call_hi + x_end[1] * (1.0 - cdf_raw[-1]))
    outside = float(cdf[0] + 1.0 - cdf[-1])
    if mean_below + mean_above > 1e-4 * forward:
        notes.append(
            f"{100 * (mean_below + mean_above) / forward:.3g}% of E[S_T] comes from beyond the grid "
            f"(fat wings), so the grid mean falls short of the forward by that much."
        )
    if outside > 1e-4:
        notes.append(
            f"{100 * outside:.3g}% of the market-implied probability lies beyond the grid "
            f"(below {strikes[0]:.6g}: {100 * cdf[0]:.3g}%, above {strikes[-1]:.6g}: {100 * (1 - cdf[-1]):.3g}%); "
            f"the smile's wings are very fat."
        )
    return Distribution(forward=forward, t=t, sigma_flat=sigma_flat, strikes=strikes, density=dens,
                        density_flat=dens_flat, cdf=cdf, cdf_flat=cdf_flat, negative_density=neg,
                        notes=tuple(notes), k=k, spacing=spacing, mean_beyond=(mean_below, mean_above))
