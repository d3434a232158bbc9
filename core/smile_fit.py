"""Fit one expiry's smile: raw SVI on total variance, with a checked fallback.

Input is the out-of-the-money side of one expiry (puts below the forward,
calls above; the pipeline passes only quotes with a bid - a zero bid is an
upper bound, see ``quote_bands``): log-moneyness ``k = ln(K/F)``, market total variance
``w = iv**2 * t`` (iv decimal, t in years on the basis of iv) and weights.

Weights multiply squared total-variance residuals (only their ratios
matter). The recommended weights, built by :func:`quote_weights` when you
pass ``vega`` and ``spread`` instead of ``weights``, make the fit measure each
residual in units of the quote's own vol uncertainty:
``dvol_i = max((ask - bid)/2, price_floor) / vega_i`` (the half spread in vol
terms, the half spread floored at ``price_floor`` in price - the pipeline
passes PRICE_UNCERTAINTY_FLOOR * DF * F * sqrt(t), so tight quotes count by
their vega - and dvol floored at 0.1 vol point) and, since ``dw = 2*iv*t*dvol``,
``weight_i = 1 / (iv_i**2 * t * dvol_i**2)``. With no vega or spread the
weights are ``1/iv_i**2``: every quote counts the same in vol terms.

Method: the quasi-explicit idea of Zeliade (2009) gives the start - for a
fixed vertex (m, sigma) the remaining (a, b*rho, b) solve a linear least
squares problem, here for a 17 x 16 grid of (m, sigma) at once - then
Levenberg-Marquardt (``scipy.optimize.least_squares(method='lm')``, analytic
Jacobian) polishes all five parameters in a reparametrisation where every
constraint is a box bound, each box mapped onto the real line by a logistic
function: minimum total variance ``v`` in [1e-4 min w, 2 max w], Lee ratio
``s = b*(1+|rho|)/2`` in [0, 0.999] (wing slopes below 2),
``|rho| <= 0.999``, m within one quoted k span of the quotes, sigma from
max(0.002 quoted k spans, 0.2 at-the-money sds sqrt(w(0))) (no kinked vertex)
to 10 quoted k spans. Every fitted slice is therefore a valid raw SVI
within Lee's bound.

After the fit: one pass of outlier handling (a quote more than
max(6 robust SDs, 1 vol point) off the curve is left out of a re-fit, at most
one in ten quotes, always stated in the notes); the butterfly check g(k) >= 0
(G&J 2014) on a wide k grid; if g < 0 somewhere, a re-fit with a penalty on
negative g (started from the plain fit and from the best arbitrage-free grid
candidate, the penalty stiffened up to three times), kept only if it is free
of butterfly arbitrage and costs at most max(1 vol point, the plain RMSE) of
extra RMSE. Otherwise the plain fit is kept with ``arbitrage_free=False``.
The notes always say which fit was kept; ``min_g_plain`` keeps the plain
fit's minimum g.

Fallback, ``method='flat'`` (flat total variance at the at-the-money level,
interpolated in k from the quotes; arbitrage-free by construction) when:
fewer than 5 usable quotes, the optimiser fails, the fitted curve leaves
[0.5x, 2x] the range of quoted vols inside the quoted k range, or it fits
the quotes worse (weighted) than the flat level does. ``reason`` says which.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .findings import NOTE, WARNING, ChainTriageError, Finding
from . import svi
from .svi import SviParams

#: Fewest usable quotes for a full SVI fit.
MIN_QUOTES_SVI = 5
#: Floor on a quote's vol uncertainty in :func:`quote_weights` (decimal vol; 0.001 = 0.1 vol point).
VOL_UNCERTAINTY_FLOOR = 0.001
#: A quote further than this from the fitted curve (decimal vol) may be treated as an outlier.
OUTLIER_MIN_VOL = 0.01
#: A penalised (arbitrage-free) re-fit is kept only if its RMSE is at most
#: max(this, the plain RMSE) above the plain fit's (decimal vol).
ARBITRAGE_REFIT_MAX_COST = 0.01
#: Half-width of the butterfly check in standard deviations sqrt(w(0)): it covers every k where
#: the distribution is drawn (``distribution.terminal_distribution`` spans at most 4 x 6 of them),
#: so a smile called arbitrage-free never shows a negative density or a falling P(beyond).
CHECK_REACH_SD = 24.0
#: Floor on the SVI sigma (the rounding of the vertex) in at-the-money standard deviations
#: sqrt(w(0)): without it a fit to few or noisy quotes can put a kink (sigma -> 0) between two
#: strikes, a jump in w'(k) and so in P(beyond). Smooth stochastic-volatility smiles fit with
#: sigma of 0.35 to 2 of these (Heston chains, tests/bench/bench_smile_accuracy.py).
SIGMA_FLOOR_SD = 0.2
#: Smallest price uncertainty of a quote in the pipeline's weights, as a fraction of DF * F * sqrt(t)
#: (about 0.3% of the at-the-money straddle at 20% vol): tight quotes then count by their vega.
PRICE_UNCERTAINTY_FLOOR = 5e-4
_RHO_MAX = 0.999
_LEE_RATIO_MAX = 0.999


@dataclass(frozen=True)
class Smile:
    """One expiry's fitted smile.

    ``params``: raw SVI parameters (a flat smile has b = 0). ``t``: years.
    ``method``: 'svi' or 'flat' (the fallback); ``reason`` says why a
    fallback was used ('' for svi). ``rmse_vol`` and ``max_err_vol``: error of
    fitted vs market implied vol over the quotes used in the fit, in decimal
    vol (0.01 = 1 vol point), unweighted. ``arbitrage_free``, ``min_g``,
    ``k_at_min_g`` and ``negative_intervals`` come from the butterfly check
    (g(k) >= 0) on the k range ``check_range``. ``penalised``: the kept fit is
    the re-fit with an arbitrage penalty; ``min_g_plain`` is the minimum g
    of the plain (unpenalised) fit. ``left_out_k``: k of quotes left out as
    far off the curve. ``n_quotes`` and ``k_range``: the quotes the fit used.
    ``notes``: plain-English sentences.
    """

    params: SviParams
    t: float
    method: str
    rmse_vol: float
    arbitrage_free: bool
    min_g: float
    notes: tuple[str, ...] = ()
    reason: str = ""
    max_err_vol: float = float("nan")
    k_at_min_g: float = float("nan")
    negative_intervals: tuple[tuple[float, float], ...] = ()
    check_range: tuple[float, float] = (float("nan"), float("nan"))
    n_quotes: int = 0
    k_range: tuple[float, float] = (float("nan"), float("nan"))
    penalised: bool = False
    min_g_plain: float = float("nan")
    left_out_k: tuple[float, ...] = field(default=())

    def total_variance(self, k):
        """Total variance w(k), dimensionless, at log-moneyness k = ln(K/F)."""
        return svi.total_variance(self.params, k)

    def vol(self, k):
        """Annualised implied vol sqrt(w(k)/t), decimal; NaN where w <= 0."""
        w = np.asarray(self.total_variance(k), dtype=float)
        with np.errstate(invalid="ignore"):
            return np.sqrt(np.where(w > 0, w, np.nan) / self.t)

    def dw_dk(self, k):
        """w'(k)."""
        return svi.dw_dk(self.params, k)

    def w_and_dw_dk(self, k):
        """(w(k), w'(k)) in one pass."""
        return svi.w_and_dw_dk(self.params, k)

    def d2w_dk2(self, k):
        """w''(k)."""
        return svi.d2w_dk2(self.params, k)

    def g(self, k):
        """G&J g(k); negative values mean a negative implied density."""
        return svi.g_function(self.params, k)

    def atm_vol(self) -> float:
        """Annualised vol at k = 0 (at the forward), decimal."""
        return float(self.vol(0.0))

    def findings(self, underlying: str | None = None, expiry: str | None = None) -> list[Finding]:
        """The fallback and arbitrage facts as Findings (NOTE / WARNING)."""
        out: list[Finding] = []
        if self.method != "svi":
            out.append(Finding(NOTE, f"smile fallback '{self.method}': {self.reason}", underlying=underlying, expiry=expiry))
        if not self.arbitrage_free:
            where = ", ".join(f"{lo:.4f} to {hi:.4f}" for lo, hi in self.negative_intervals)
            out.append(
                Finding(
                    WARNING,
                    f"fitted smile has butterfly arbitrage: g(k) < 0 for k in {where or 'part of the range'}"
                    f" (minimum {self.min_g:.4g} at k = {self.k_at_min_g:.4f}); the implied density is negative there",
                    underlying=underlying,
                    expiry=expiry,
                )
            )
        if self.penalised:
            out.append(
                Finding(
                    NOTE,
                    f"smile re-fitted with an arbitrage penalty: the plain fit had g(k) < 0 (minimum {self.min_g_plain:.4g}); "
                    f"the kept fit is {100 * self.rmse_vol:.3f} vol points RMSE from the quotes",
                    underlying=underlying,
                    expiry=expiry,
                )
            )
        if self.left_out_k:
            out.append(
                Finding(
                    NOTE,
                    f"{len(self.left_out_k)} quote(s) far from the smile left out of the fit",
                    underlying=underlying,
                    expiry=expiry,
                )
            )
        return out


# ---------------------------------------------------------------------------
# weights


def quote_weights(iv, t, vega=None, spread=None, vol_floor: float = VOL_UNCERTAINTY_FLOOR, price_floor=None):
    """Recommended fit weights (relative, mean 1 over the positive ones).

    ``iv``: implied vol, decimal; ``t``: years; ``vega``: dPrice/dvol per 1.00
    of vol (as black76.vega); ``spread``: ask - bid in price units;
    ``price_floor``: the smallest price uncertainty of a quote (price units,
    scalar or per quote; None = 0). The quote's vol uncertainty is
    max(max(spread/2, price_floor)/vega, vol_floor), or 1 when vega or spread
    is not given; weight = 1/(iv^2 * t * uncertainty^2). With a price floor
    a tight quote counts by its vega (its price error), so the quotes near
    the money, which fix the at-the-money level and slope, count most. A
    quote with a non-finite or non-positive iv or vega, or a negative or
    non-finite spread, gets weight 0 (``fit_smile`` leaves it out and says so).
    """
    iv = np.asarray(iv, dtype=float)
    if vega is None or spread is None:
        unc = np.ones_like(iv)
        ok = np.isfinite(iv) & (iv > 0)
    else:
        vega = np.broadcast_to(np.asarray(vega, dtype=float), iv.shape)
        spread = np.broadcast_to(np.asarray(spread, dtype=float), iv.shape)
        ok = np.isfinite(iv) & (iv > 0) & np.isfinite(vega) & (vega > 0) & np.isfinite(spread) & (spread >= 0)
        half = 0.5 * spread if price_floor is None else np.maximum(0.5 * spread, price_floor)
        with np.errstate(divide="ignore", invalid="ignore"):
            unc = np.maximum(half / vega, vol_floor)
    with np.errstate(divide="ignore", invalid="ignore"):
        wt = np.where(ok, 1.0 / (iv * iv * float(t) * unc * unc), 0.0)
    pos = wt > 0
    if np.any(pos):
        wt = wt / wt[pos].mean()
    return wt


# ---------------------------------------------------------------------------
# the SVI fit in the box-bounded parametrisation (v, s, rho, m, sigma):
#   b = 2 s / (1 + |rho|),  a = v - b sigma sqrt(1 - rho^2)


def _to_params(x) -> SviParams:
    v, s, rho, m, sig = (float(z) for z in x)
    b = 2.0 * s / (1.0 + abs(rho))
    a = v - b * sig * np.sqrt(1.0 - rho * rho)
    return SviParams(a=a, b=b, rho=rho, m=m, sigma=sig)


def _from_params(p: SviParams) -> np.ndarray:
    return np.array([svi.min_total_variance(p), 0.5 * p.b * (1.0 + abs(p.rho)), p.rho, p.m, p.sigma])


def _model_and_jac(x, k):
    v, s, rho, m, sig = x
    q = np.sqrt(1.0 - rho * rho)
    sgn = 1.0 if rho >= 0 else -1.0
    b = 2.0 * s / (1.0 + abs(rho))
    xk = k - m
    r = np.sqrt(xk * xk + sig * sig)
    h = rho * xk + r - sig * q
    w = v + b * h
    jac = np.empty((k.size, 5))
    jac[:, 0] = 1.0
    jac[:, 1] = 2.0 / (1.0 + abs(rho)) * h
    jac[:, 2] = -b * sgn / (1.0 + abs(rho)) * h + b * (xk + sig * rho / q)
    jac[:, 3] = -b * (rho + xk / r)
    jac[:, 4] = b * (sig / r - q)
    return w, jac


def _sigma_floor(span, w0):
    """Lowest SVI sigma allowed: SIGMA_FLOOR_SD at-the-money sds sqrt(w0), at least 0.002 quoted k spans
    (and 1e-5), at most 5 spans (half the upper bound)."""
    floor = np.maximum(2e-3 * span, np.minimum(SIGMA_FLOOR_SD * np.sqrt(np.maximum(w0, 0.0)), 5.0 * span))
    return np.maximum(floor, 1e-5)


def _bounds(k, w):
    kmin, kmax = float(k.min()), float(k.max())
    span = max(kmax - kmin, 1e-3)
    lo = np.array([1e-4 * float(w.min()), 0.0, -_RHO_MAX, kmin - span, float(_sigma_floor(span, _atm_level(k, w)))])
    hi = np.array([2.0 * float(w.max()), _LEE_RATIO_MAX, _RHO_MAX, kmax + span, 10.0 * span])
    return lo, hi


def _params_arrays(x):
    """Vectorised _to_params: x has shape (..., 5); fields come back as arrays with a trailing axis."""
    v, s, rho, m, sig = (x[..., i][..., None] for i in range(5))
    b = 2.0 * s / (1.0 + np.abs(rho))
    return SviParams(a=v - b * sig * np.sqrt(1.0 - rho * rho), b=b, rho=rho, m=m, sigma=sig)


def _grid_start(k, w, wt, g_check_k=None) -> SviParams | None:
    """Quasi-explicit start: linear least squares in (a, b*rho*sigma, b*sigma) over a grid of (m, sigma).

    With ``g_check_k``, only candidates with g >= 0 on those k compete (None if there is none).
    """
    kmin, kmax = float(k.min()), float(k.max())
    span = max(kmax - kmin, 1e-3)
    ms = np.linspace(kmin - 0.25 * span, kmax + 0.25 * span, 17)
    ss = span * np.geomspace(0.01, 2.0, 16)
    mm, sg = (z.ravel() for z in np.meshgrid(ms, ss, indexing="ij"))
    y = (k[None, :] - mm[:, None]) / sg[:, None]  # (G, n)
    root = np.sqrt(y * y + 1.0)
    wy, wr = wt * y, wt * root
    s0 = wt.sum()
    sy, sr = wy.sum(axis=1), wr.sum(axis=1)
    syy, syr = (wy * y).sum(axis=1), (wy * root).sum(axis=1)
    srr = syy + s0  # root**2 = y**2 + 1
    normal = np.empty((mm.size, 3, 3))
    normal[:, 0, 0] = s0
    normal[:, 0, 1] = normal[:, 1, 0] = sy
    normal[:, 0, 2] = normal[:, 2, 0] = sr
    normal[:, 1, 1] = syy
    normal[:, 1, 2] = normal[:, 2, 1] = syr
    normal[:, 2, 2] = srr
    normal += 1e-12 * (s0 + syy + srr)[:, None, None] * np.eye(3)
    rhs = np.stack([np.full(mm.size, float(wt @ w)), wy @ w, wr @ w], axis=1)
    sol = np.linalg.solve(normal, rhs[..., None])[..., 0]
    d, c = sol[:, 1], sol[:, 2]
    b = np.maximum(c / sg, 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        rho = np.where(c > 0, d / c, 0.0)
    rho = np.clip(np.nan_to_num(rho), -0.99, 0.99)
    b = np.minimum(b, 1.98 / (1.0 + np.abs(rho)))
    shape = rho[:, None] * y * sg[:, None] + sg[:, None] * root  # (w - a)/b
    wsum = wt.sum()
    a = ((w[None, :] - b[:, None] * shape) * wt[None, :]).sum(axis=1) / wsum
    a = np.maximum(a, -b * sg * np.sqrt(1.0 - rho * rho) + 1e-3 * float(w.min()))
    model = a[:, None] + b[:, None] * shape
    sse = (((model - w[None, :]) ** 2) * wt[None, :]).sum(axis=1)
    if g_check_k is not None:
        cand = SviParams(a=a[:, None], b=b[:, None], rho=rho[:, None], m=mm[:, None], sigma=sg[:, None])
        g = svi.g_function(cand, np.asarray(g_check_k)[None, :])
        ok = np.all(np.isfinite(g) & (g >= 0.0), axis=1)
        if not np.any(ok):
            return None
        sse = np.where(ok, sse, np.inf)
    i = int(np.nanargmin(sse))
    return SviParams(a=float(a[i]), b=float(b[i]), rho=float(rho[i]), m=float(mm[i]), sigma=float(sg[i]))


def _polish(k, w, wt, start: SviParams, penalty_k=None, penalty_scale: float = 0.0) -> SviParams:
    """Levenberg-Marquardt (MINPACK) on u, with x = lo + (hi - lo) * logistic(u) inside the box."""
    from scipy.optimize import least_squares  # here only: importing it costs a tenth of a second at start

    lo, hi = _bounds(k, w)
    span = hi - lo
    x0 = np.clip(_from_params(start), lo + 1e-3 * span, hi - 1e-3 * span)
    u0 = np.log((x0 - lo) / (hi - x0))
    sw = np.sqrt(wt)

    def to_x(u):
        e = 1.0 / (1.0 + np.exp(-np.clip(u, -50.0, 50.0)))
        return lo + span * e, span * e * (1.0 - e)

    def data_res(u):
        return sw * (_model_and_jac(to_x(u)[0], k)[0] - w)

    if penalty_k is None:
        def jac(u):
            x, dx = to_x(u)
            return sw[:, None] * _model_and_jac(x, k)[1] * dx[None, :]

        res = least_squares(data_res, u0, jac=jac, method="lm", ftol=1e-13, xtol=1e-13, gtol=1e-13, max_nfev=200)
    else:
        target = 1e-3
        step = 1e-7 * span

        def g_at(xs):
            g = svi.g_function(_params_arrays(xs), penalty_k)
            return np.where(np.isfinite(g), g, -1.0)

        def fun(u):
            g = g_at(to_x(u)[0])
            return np.concatenate([data_res(u), penalty_scale * np.minimum(g - target, 0.0)])

        def jac(u):
            x, dx = to_x(u)
            data = sw[:, None] * _model_and_jac(x, k)[1] * dx[None, :]
            shifts = np.diag(step)
            gg = g_at(np.concatenate([x + shifts, x - shifts]))  # (10, n_pen) in one call
            dg = (gg[:5] - gg[5:]) / (2.0 * step[:, None])
            active = (g_at(x) < target).astype(float)
            pen = penalty_scale * active[:, None] * dg.T * dx[None, :]
            return np.vstack([data, pen])

        res = least_squares(fun, u0, jac=jac, method="lm", ftol=1e-9, xtol=1e-9, max_nfev=150)
    x = to_x(res.x)[0]
    if not np.all(np.isfinite(x)):
        raise FloatingPointError("optimiser returned non-finite parameters")
    return _to_params(x)


# ---------------------------------------------------------------------------


def _vol_errors(p: SviParams, k, w, t):
    wf = svi.total_variance(p, k)
    with np.errstate(invalid="ignore"):
        return np.sqrt(np.where(wf > 0, wf, np.nan) / t) - np.sqrt(w / t)


def _atm_level(k, w) -> float:
    order = np.argsort(k)
    ks, ws = k[order], w[order]
    if ks[0] <= 0.0 <= ks[-1]:
        return float(np.interp(0.0, ks, ws))
    return float(ws[np.argmin(np.abs(ks))])


def _check_grid(k, w0, p: SviParams) -> np.ndarray:
    """k grid of the butterfly check: the quoted range and +/- CHECK_REACH_SD sds of w0, a dense patch on the quotes and the vertex."""
    reach = CHECK_REACH_SD * np.sqrt(max(w0, 1e-12))
    lo = min(float(k.min()), -reach)
    hi = max(float(k.max()), reach)
    span = hi - lo
    lo, hi = lo - 0.1 * span, hi + 0.1 * span
    parts = [np.linspace(lo, hi, 801), np.linspace(float(k.min()), float(k.max()), 201)]
    if p.b > 0:
        vert = p.m + p.sigma * np.linspace(-8.0, 8.0, 161)
        parts.append(vert[(vert > lo) & (vert < hi)])
    return np.unique(np.concatenate(parts))


def _flat_smile(k, w, t, reason: str, notes: list[str], left_out=()) -> Smile:
    w0 = _atm_level(k, w) if k.size else float("nan")
    p = SviParams.flat(w0)
    err = _vol_errors(p, k, w, t) if k.size else np.array([np.nan])
    inside = bool(k.size and k.min() <= 0.0 <= k.max())
    how = "interpolated at k = 0" if inside else "taken from the quote nearest k = 0"
    notes = notes + [f"Flat smile at the at-the-money vol {np.sqrt(w0 / t):.4f} ({how}): {reason}."]
    kr = (float(k.min()), float(k.max())) if k.size else (float("nan"), float("nan"))
    return Smile(
        params=p, t=t, method="flat", rmse_vol=float(np.sqrt(np.nanmean(err**2))), arbitrage_free=True,
        min_g=1.0, notes=tuple(notes), reason=reason, max_err_vol=float(np.nanmax(np.abs(err))),
        k_at_min_g=0.0, check_range=(float("-inf"), float("inf")), n_quotes=int(k.size), k_range=kr,
        left_out_k=tuple(left_out),
    )


def _wild(p: SviParams, k, w, wt, t) -> str:
    """'' if the fit is acceptable, else the reason it is not."""
    probs = svi.validity_problems(p)
    if probs:
        return "the fitted parameters are not a valid SVI slice (" + "; ".join(probs) + ")"
    dense = np.linspace(float(k.min()), float(k.max()), 201)
    wf = svi.total_variance(p, dense)
    if np.any(~np.isfinite(wf)) or np.any(wf <= 0):
        return "the fitted total variance is not positive inside the quoted range"
    vf = np.sqrt(wf / t)
    vm = np.sqrt(w / t)
    if vf.min() < 0.5 * vm.min() or vf.max() > 2.0 * vm.max():
        return (f"the fitted vol leaves [{0.5 * vm.min():.4f}, {2.0 * vm.max():.4f}] "
                f"(half the lowest to twice the highest quoted vol) inside the quoted range")
    sse_fit = float(np.sum(wt * (svi.total_variance(p, k) - w) ** 2))
    w0 = _atm_level(k, w)
    sse_flat = float(np.sum(wt * (w0 - w) ** 2))
    if sse_fit > sse_flat:
        return "the SVI fit matches the quotes worse than a flat at-the-money level"
    return ""


def _note_unusable(n_bad: int, n: int) -> str:
    return f"{n_bad} of {n} quote(s) left out: non-finite k, total variance not positive, or weight not positive."


def _note_outliers(k_far, err_far) -> str:
    desc = ", ".join(f"k = {kk:.4f} (fit minus market {100 * e:+.2f} vol points)" for kk, e in zip(k_far, err_far))
    return f"{len(k_far)} quote(s) far from the fitted curve left out of the fit: {desc}."


def _note_too_many_outliers(nfar: int, thr: float) -> str:
    return f"{nfar} quote(s) sit more than {100 * thr:.2f} vol points from the fitted curve; too many to leave out, all kept."


def _note_summary(k, rmse: float, max_err: float) -> str:
    return (f"Raw SVI fitted to {k.size} quote(s), k from {k.min():.4f} to {k.max():.4f}; "
            f"RMSE {100 * rmse:.3f} vol points, largest error {100 * max_err:.3f}.")


def fit_smile(k, total_var, weights=None, t=None, *, vega=None, spread=None, price_floor=None,
              arbitrage_refit: bool = True, outlier_check: bool = True) -> Smile:
    """Fit raw SVI to one expiry's out-of-the-money quotes.

    ``k``: ln(K/F) per quote; ``total_var``: market iv**2 * t per quote
    (dimensionless); ``weights``: relative weights on squared total-variance
    residuals, or None to build them with :func:`quote_weights` from ``vega``
    (per 1.00 vol), ``spread`` (ask - bid) and ``price_floor`` (smallest price
    uncertainty, price units), or 1/iv^2 without them;
    ``t``: years (> 0). ``arbitrage_refit``: try a penalised re-fit when the
    plain fit has g < 0. ``outlier_check``: leave out at most one in ten
    quotes that sit far off the curve, with a note.

    Quotes with a non-finite k, a non-positive or non-finite total variance,
    or a non-positive weight are left out (counted in the notes). Raises
    ChainTriageError when t is not a positive number, the arrays differ in
    length, or no usable quote remains.
    """
    try:
        t_val = float(t)
    except (TypeError, ValueError):
        t_val = float("nan")
    if not (np.isfinite(t_val) and t_val > 0):
        raise ChainTriageError(f"smile fit needs a positive time to expiry in years, got {t!r}")
    t = t_val
    k = np.atleast_1d(np.asarray(k, dtype=float))
    w = np.atleast_1d(np.asarray(total_var, dtype=float))
    if k.shape != w.shape or k.ndim != 1:
        raise ChainTriageError(f"smile fit: k and total variance must be 1-d and the same length ({k.shape} vs {w.shape})")
    if weights is None:
        with np.errstate(invalid="ignore"):
            iv = np.sqrt(np.where(w > 0, w, np.nan) / t)
        wt = quote_weights(iv, t, vega, spread, price_floor=price_floor)
    else:
        wt = np.broadcast_to(np.asarray(weights, dtype=float), k.shape).copy()
    notes: list[str] = []
    ok = np.isfinite(k) & np.isfinite(w) & (w > 0) & np.isfinite(wt) & (wt > 0)
    if not np.all(ok):
        notes.append(_note_unusable(int((~ok).sum()), k.size))
    k, w, wt = k[ok], w[ok], wt[ok]
    if k.size == 0:
        raise ChainTriageError("smile fit: no usable quotes for this expiry")
    wt = wt / wt.mean()

    if k.size < MIN_QUOTES_SVI:
        return _flat_smile(k, w, t, f"only {k.size} usable quote(s), fewer than {MIN_QUOTES_SVI}", notes)

    try:
        p = _polish(k, w, wt, _grid_start(k, w, wt))
    except (FloatingPointError, ValueError, np.linalg.LinAlgError) as exc:
        return _flat_smile(k, w, t, f"the SVI optimiser failed ({exc})", notes)

    left_out: list[float] = []
    if outlier_check:
        err = _vol_errors(p, k, w, t)
        scale = 1.4826 * float(np.nanmedian(np.abs(err)))
        thr = max(6.0 * scale, OUTLIER_MIN_VOL)
        far = np.abs(err) > thr
        nfar = int(far.sum())
        if 0 < nfar <= max(1, k.size // 10) and k.size - nfar >= MIN_QUOTES_SVI:
            wt2 = wt.copy()
            wt2[far] = 0.0
            try:
                p2 = _polish(k, w, wt2, p)
            except (FloatingPointError, ValueError, np.linalg.LinAlgError):
                p2 = None
            if p2 is not None and not _wild(p2, k[~far], w[~far], wt2[~far], t):
                notes.append(_note_outliers(k[far], err[far]))
                left_out = [float(x) for x in k[far]]
                p = p2
                k, w, wt = k[~far], w[~far], wt2[~far]
                wt = wt / wt.mean()
        elif nfar:
            notes.append(_note_too_many_outliers(nfar, thr))

    why = _wild(p, k, w, wt, t)
    if why:
        return _flat_smile(k, w, t, why, notes, left_out)

    w0 = _atm_level(k, w)
    grid = _check_grid(k, w0, p)
    free, min_g, k_min, intervals = svi.butterfly_check(p, grid)
    err = _vol_errors(p, k, w, t)
    rmse = float(np.sqrt(np.mean(err**2)))
    penalised = False
    min_g_plain = min_g
    if not free and arbitrage_refit:
        where = ", ".join(f"[{lo:.4f}, {hi:.4f}]" for lo, hi in intervals)
        pen_k = np.unique(np.concatenate([np.linspace(grid[0], grid[-1], 241),
                                          np.linspace(float(k.min()), float(k.max()), 121)]))
        base = float(np.median(w)) * np.sqrt(k.size / pen_k.size)
        starts = [p]
        safe = _grid_start(k, w, wt, g_check_k=pen_k)
        if safe is not None:
            starts.append(safe)
        best = None  # (rmse, params, check result)
        for start in starts:
            for mult in (1e2, 1e3, 1e4):  # stiffen the penalty until g >= 0
                try:
                    cand = _polish(k, w, wt, start, penalty_k=pen_k, penalty_scale=mult * base)
                except (FloatingPointError, ValueError, np.linalg.LinAlgError):
                    break
                if _wild(cand, k, w, wt, t):
                    break
                check = svi.butterfly_check(cand, _check_grid(k, w0, cand))
                if check[0]:
                    r = float(np.sqrt(np.mean(_vol_errors(cand, k, w, t) ** 2)))
                    if best is None or r < best[0]:
                        best = (r, cand, check)
                    break
                start = cand
        free_p = best is not None and best[0] <= rmse + max(ARBITRAGE_REFIT_MAX_COST, rmse)
        if best is not None and not free_p:
            notes.append(
                f"The SVI fit has butterfly arbitrage (g < 0 on {where}, minimum g {min_g:.4g} at k = {k_min:.4f}); "
                f"a penalised re-fit removed it only by raising the RMSE from {100 * rmse:.3f} to {100 * best[0]:.3f} "
                f"vol points, so the plain fit is kept and its implied density is negative there."
            )
        elif best is not None:
            pp = best[1]
            _, min_g_p, k_min_p, int_p = best[2]
        if free_p:
            err_p = _vol_errors(pp, k, w, t)
            rmse_p = float(np.sqrt(np.mean(err_p**2)))
            notes.append(
                f"The plain SVI fit had butterfly arbitrage (g < 0 on {where}, minimum g {min_g:.4g} at k = {k_min:.4f}); "
                f"a re-fit with an arbitrage penalty removed it (RMSE {100 * rmse:.3f} -> {100 * rmse_p:.3f} vol points) "
                f"and is the one kept."
            )
            p, free, min_g, k_min, intervals, err, rmse = pp, free_p, min_g_p, k_min_p, int_p, err_p, rmse_p
            grid = _check_grid(k, w0, pp)
            penalised = True
        elif best is None:
            notes.append(
                f"The SVI fit has butterfly arbitrage (g < 0 on {where}, minimum g {min_g:.4g} at k = {k_min:.4f}); "
                f"a penalised re-fit did not remove it, so the plain fit is kept and its implied density is negative there."
            )
    elif not free:
        where = ", ".join(f"[{lo:.4f}, {hi:.4f}]" for lo, hi in intervals)
        notes.append(
            f"The SVI fit has butterfly arbitrage (g < 0 on {where}, minimum g {min_g:.4g} at k = {k_min:.4f}); "
            f"kept as fitted (no re-fit asked), so its implied density is negative there."
        )
    notes.insert(0, _note_summary(k, rmse, float(np.max(np.abs(err)))))
    return Smile(
        params=p, t=t, method="svi", rmse_vol=rmse, arbitrage_free=bool(free), min_g=float(min_g),
        notes=tuple(notes), reason="", max_err_vol=float(np.max(np.abs(err))), k_at_min_g=float(k_min),
        negative_intervals=tuple(intervals), check_range=(float(grid[0]), float(grid[-1])),
        n_quotes=int(k.size), k_range=(float(k.min()), float(k.max())), penalised=penalised,
        min_g_plain=float(min_g_plain), left_out_k=tuple(left_out),
    )
