"""Raw SVI fits of many expiries at once: the batched form of ``smile_fit.fit_smile``.

Same inputs per expiry, same method, bounds, weights, outlier pass, checks,
notes and ``Smile`` objects as :func:`smile_fit.fit_smile` (read its module
docstring for the method). What changes is how the work is laid out: the
quotes of all expiries sit in one flat array grouped by expiry, and

- the quasi-explicit grid start solves the 3 x 3 normal equations of every
  (m, sigma) candidate of every expiry at once, in closed form (LDL', elementwise);
- the Levenberg-Marquardt polish runs for all expiries together in numpy
  (per-expiry damping and stopping, (E, 5, 5) systems solved with
  ``np.linalg.solve``) in the same box-bounded logistic parametrisation, so
  every fitted slice is a valid raw SVI within Lee's bound;
- the outlier pass, the acceptance checks and the butterfly check (g >= 0 on
  the same k grid, minimum refined the same way) are evaluated for all
  expiries at once.

An expiry that needs one of the rarer branches - fewer than 5 usable quotes,
quotes not in non-decreasing k, a non-finite or rejected fit (flat fallback), a
failed outlier re-fit, butterfly arbitrage (with its penalised re-fit), or
a polish still moving after ``MAX_ITER`` steps (an optimum at the edge of
the box, approached ever more slowly) - is handed whole to ``fit_smile``, so
those cases behave exactly as the single-expiry fit.

The polish stops only at a stationary point (a near Gauss-Newton step below
1e-10 of the parameters, or no relative gain above 1e-15), while MINPACK in
``fit_smile`` stops once the relative gain falls below 1e-13: the weighted
cost is never higher than the single fit's, and the parameters can differ
in the last digits where the cost is flat at rounding level.

Units as in ``smile_fit``: k = ln(K/F), total variance w = iv**2 * t
(dimensionless), t in years, vols decimal.
"""

from __future__ import annotations

import numpy as np

from . import svi
from .findings import ChainTriageError
from .smile_fit import (
    CHECK_REACH_SD,
    _LEE_RATIO_MAX,
    _RHO_MAX,
    MIN_QUOTES_SVI,
    OUTLIER_MIN_VOL,
    VOL_UNCERTAINTY_FLOOR,
    Smile,
    _note_outliers,
    _note_summary,
    _note_too_many_outliers,
    _note_unusable,
    _sigma_floor,
    fit_smile,
)
from .svi import SviParams

#: Levenberg-Marquardt iterations after which an expiry still moving is handed to fit_smile.
MAX_ITER = 100
#: Quotes per block in the grid start's per-candidate sums.
_CHUNK = 512
#: Candidates of the grid start whose cost is recomputed directly (guards the expanded sums).
_RERANK = 4


# ---------------------------------------------------------------------------
# flat layout helpers


def _segsum(x: np.ndarray, starts: np.ndarray) -> np.ndarray:
    """Sum of x over each group of rows (groups contiguous and non-empty)."""
    return np.add.reduceat(x, starts, axis=0)


def _segmin(x: np.ndarray, starts: np.ndarray) -> np.ndarray:
    return np.minimum.reduceat(x, starts, axis=0)


def _segmax(x: np.ndarray, starts: np.ndarray) -> np.ndarray:
    return np.maximum.reduceat(x, starts, axis=0)


# ---------------------------------------------------------------------------
# quasi-explicit grid start, all expiries


def grid_start_batch(k, w, wt, starts) -> np.ndarray:
    """Quasi-explicit start of every expiry: (E, 5) raw SVI (a, b, rho, m, sigma).

    ``k``, ``w``, ``wt``: quotes grouped by expiry (``starts``: first row of
    each group). Same 17 x 16 (m, sigma) candidates, normal equations, clipping
    and choice as ``smile_fit._grid_start``; the symmetric 3 x 3 systems are
    solved elementwise by LDL' instead of one LU solve each (the same solution
    to rounding). The sums over quotes that
    involve R = sqrt((k - m)^2 + sigma^2) are one matrix product per expiry;
    every other sum comes from moments of k and w. The weighted cost of each
    candidate is expanded from the same sums (around the weighted mean of w,
    to limit cancellation) and the best few are re-checked directly, lowest
    candidate index first on exact ties, as an argmin over direct sums would.
    """
    starts = np.asarray(starts)
    n_exp = starts.size
    ends = np.append(starts[1:], k.size)
    gid = np.repeat(np.arange(n_exp), ends - starts)
    kmin, kmax = _segmin(k, starts), _segmax(k, starts)
    span = np.maximum(kmax - kmin, 1e-3)
    ms = np.linspace(kmin - 0.25 * span, kmax + 0.25 * span, 17, axis=1)  # (E, 17)
    ss = span[:, None] * np.geomspace(0.01, 2.0, 16)[None, :]  # (E, 16)
    n_grid = 17 * 16
    mm = np.repeat(ms, 16, axis=1)  # (E, G), m-major as meshgrid(indexing='ij').ravel()
    sg = np.tile(ss, (1, 17))
    s0 = _segsum(wt, starts)[:, None]
    wbar = _segsum(wt * w, starts)[:, None] / s0
    wc = w - wbar[gid, 0]  # w about its weighted mean
    # per-candidate sums over quotes of wt R, wt k R and wt wc R
    s_r = np.empty((n_exp, n_grid))
    s_kr = np.empty((n_exp, n_grid))
    s_wcr = np.empty((n_exp, n_grid))
    buf = np.empty(n_grid * min(int((ends - starts).max()), _CHUNK))
    ss2 = ss * ss
    vecs = np.stack([wt, wt * k, wt * wc], axis=1)
    for e in range(n_exp):
        sums = np.zeros((n_grid, 3))
        for lo in range(starts[e], ends[e], _CHUNK):  # blocks of quotes keep the work in cache
            sl = slice(lo, min(lo + _CHUNK, ends[e]))
            ke = k[sl]
            x = ke[None, :] - ms[e][:, None]  # (17, n)
            x *= x
            big = buf[: n_grid * ke.size].reshape(17, 16, ke.size)
            np.add(x[:, None, :], ss2[e][None, :, None], out=big)
            np.sqrt(big, out=big)
            sums += big.reshape(n_grid, ke.size) @ vecs[sl]
        s_r[e], s_kr[e], s_wcr[e] = sums[:, 0], sums[:, 1], sums[:, 2]
    s_k = _segsum(wt * k, starts)[:, None]
    s_kk = _segsum(wt * k * k, starts)[:, None]
    s_w = _segsum(wt * w, starts)[:, None]
    s_kw = _segsum(wt * k * w, starts)[:, None]
    s_wc = _segsum(wt * wc, starts)[:, None]
    s_kwc = _segsum(wt * k * wc, starts)[:, None]
    s_wcwc = _segsum(wt * wc * wc, starts)[:, None]
    s_wr = s_wcr + wbar * s_r  # sum wt w R
    # sums over y = (k - m)/sigma and root = R/sigma, as in smile_fit._grid_start
    sxm = s_k - mm * s0  # sum wt (k - m)
    sxx = s_kk - 2.0 * mm * s_k + mm * mm * s0  # sum wt (k - m)^2
    sy = sxm / sg
    sr = s_r / sg
    syy = sxx / (sg * sg)
    sxr = s_kr - mm * s_r  # sum wt (k - m) R
    syr = sxr / (sg * sg)
    srr = syy + s0
    # the 3 x 3 normal equations of every candidate, symmetric positive definite with a tiny ridge on the
    # diagonal, solved elementwise by LDL' (d and c only)
    ridge = 1e-12 * (s0 + syy + srr)
    a00, a11, a22 = s0 + ridge, syy + ridge, srr + ridge
    swx = s_kw - mm * s_w  # sum wt w (k - m)
    r1, r2 = swx / sg, s_wr / sg
    with np.errstate(divide="ignore", invalid="ignore"):
        l10, l20 = sy / a00, sr / a00
        d1 = a11 - l10 * sy
        e12 = syr - l20 * sy
        l21 = e12 / d1
        y1 = r1 - l10 * s_w
        y2 = r2 - l20 * s_w - l21 * y1
        c = y2 / (a22 - l20 * sr - l21 * e12)
        d = y1 / d1 - l21 * c
    b = np.maximum(c / sg, 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        rho = np.where(c > 0, d / c, 0.0)
    rho = np.clip(np.nan_to_num(rho), -0.99, 0.99)
    b = np.minimum(b, 1.98 / (1.0 + np.abs(rho)))
    # shape = rho (k - m) + R; a = weighted mean of w - b shape
    s_shape = rho * sxm + s_r
    a = (s_w - b * s_shape) / s0
    wmin = _segmin(w, starts)[:, None]
    a = np.maximum(a, -b * sg * np.sqrt(1.0 - rho * rho) + 1e-3 * wmin)
    # sse = sum wt (a + b shape - w)^2 = sum wt (ac + b shape - wc)^2 with ac = a - wbar, wc = w - wbar
    ac = a - wbar
    s_sh2 = rho * rho * sxx + 2.0 * rho * sxr + sxx + sg * sg * s0
    s_wsh = rho * (s_kwc - mm * s_wc) + s_wcr
    sse = (ac * ac * s0 + b * b * s_sh2 + s_wcwc + 2.0 * ac * b * s_shape - 2.0 * ac * s_wc - 2.0 * b * s_wsh)
    sse = np.where(np.isfinite(sse), sse, np.inf)
    # re-check the best few directly, in candidate order, so ties and rounding resolve as a direct sum would
    top = np.sort(np.argsort(sse, axis=1, kind="stable")[:, :_RERANK], axis=1)  # exact ties: lowest index first
    rows = np.arange(n_exp)[:, None]
    ca, cb, cr, cm, cs = (z[rows, top] for z in (a, b, rho, mm, sg))
    x = k[:, None] - cm[gid]
    model = np.sqrt(x * x + (cs * cs)[gid])
    model += cr[gid] * x
    model *= cb[gid]
    model += ca[gid]
    model -= w[:, None]
    model *= model
    direct = _segsum(model * wt[:, None], starts)
    direct = np.where(np.isfinite(direct), direct, np.inf)
    pick = np.argmin(direct, axis=1)
    r1 = np.arange(n_exp)
    return np.stack([ca[r1, pick], cb[r1, pick], cr[r1, pick], cm[r1, pick], cs[r1, pick]], axis=1)


# ---------------------------------------------------------------------------
# batched Levenberg-Marquardt polish in the box-bounded parametrisation


def box_bounds(k, w, starts):
    """(lo, hi), each (E, 5), of (v, s, rho, m, sigma) per expiry, as ``smile_fit._bounds``."""
    kmin, kmax = _segmin(k, starts), _segmax(k, starts)
    span = np.maximum(kmax - kmin, 1e-3)
    ends = np.append(np.asarray(starts)[1:], k.size)
    floor = _sigma_floor(span, _atm_levels(k, w, np.asarray(starts), ends))
    lo = np.stack([1e-4 * _segmin(w, starts), np.zeros_like(span), np.full_like(span, -_RHO_MAX),
                   kmin - span, floor], axis=1)
    hi = np.stack([2.0 * _segmax(w, starts), np.full_like(span, _LEE_RATIO_MAX), np.full_like(span, _RHO_MAX),
                   kmax + span, 10.0 * span], axis=1)
    return lo, hi


def to_box(p: np.ndarray) -> np.ndarray:
    """(E, 5) raw SVI (a, b, rho, m, sigma) -> (v, s, rho, m, sigma) (smile_fit._from_params)."""
    a, b, rho, m, sig = p.T
    v = a + b * sig * np.sqrt(np.maximum(1.0 - rho * rho, 0.0))
    return np.stack([v, 0.5 * b * (1.0 + np.abs(rho)), rho, m, sig], axis=1)


def from_box(x: np.ndarray) -> np.ndarray:
    """(E, 5) (v, s, rho, m, sigma) -> raw SVI (a, b, rho, m, sigma) (smile_fit._to_params)."""
    v, s, rho, m, sig = x.T
    b = 2.0 * s / (1.0 + np.abs(rho))
    return np.stack([v - b * sig * np.sqrt(1.0 - rho * rho), b, rho, m, sig], axis=1)


def _ranges(first: np.ndarray, counts: np.ndarray) -> np.ndarray:
    """Concatenated row indices first[i] .. first[i] + counts[i] - 1."""
    offsets = np.repeat(first - np.concatenate([[0], np.cumsum(counts)[:-1]]), counts)
    return np.arange(int(counts.sum())) + offsets


def _pad(values: np.ndarray, first: np.ndarray, counts: np.ndarray, fill: np.ndarray) -> np.ndarray:
    """Rows first[i] .. first[i] + counts[i] - 1 of ``values`` as row i of an (n, max count) array."""
    out = np.repeat(fill[:, None], int(counts.max()), axis=1)
    gi = np.repeat(np.arange(counts.size), counts)
    pos = np.arange(gi.size) - np.repeat(np.concatenate([[0], np.cumsum(counts)[:-1]]), counts)
    out[gi, pos] = values[_ranges(first, counts)]
    return out


def _size_chunks(counts: np.ndarray) -> list[np.ndarray]:
    """Group indices split into chunks of similar quote counts (padding at most doubles the work)."""
    order = np.argsort(-counts, kind="stable")
    chunks: list[list[int]] = []
    top = 0
    for i in order:
        c = int(counts[i])
        if not chunks or 2 * c < top:
            chunks.append([])
            top = c
        chunks[-1].append(int(i))
    return [np.sort(np.array(c, dtype=np.int64)) for c in chunks]


def polish_batch(k, w, wt, starts, start: np.ndarray, *, max_iter: int = 1000) -> tuple[np.ndarray, np.ndarray]:
    """Levenberg-Marquardt on all expiries at once; returns ((E, 5) raw SVI, converged flags).

    Minimises sum wt (w_svi(k) - w)^2 per expiry over u, with
    x = lo + (hi - lo) * logistic(u) inside the box of :func:`box_bounds`,
    from ``start`` (raw SVI, clipped into the box as smile_fit._polish does).
    Each expiry has its own damping (Marquardt scaling by the largest
    diagonal of J'J seen) and stops on its own: after a near Gauss-Newton
    step shorter than 1e-10 of |u|, when a step lowers its cost by less than
    1e-15 relative, or when no step can. An expiry not stopped after
    ``max_iter`` steps is returned as not converged; a row of NaN means the
    polish met non-finite values.
    """
    starts = np.asarray(starts)
    n_exp = starts.size
    counts = np.diff(np.append(starts, k.size))
    lo, hi = box_bounds(k, w, starts)
    span = hi - lo
    x0 = np.clip(to_box(start), lo + 1e-3 * span, hi - 1e-3 * span)
    with np.errstate(invalid="ignore", divide="ignore"):
        u = np.log((x0 - lo) / (hi - x0))
    sw = np.sqrt(wt)
    converged = np.zeros(n_exp, dtype=bool)
    bad = ~np.all(np.isfinite(u), axis=1)
    for work in _size_chunks(counts):
        work = work[~bad[work]]
        if not work.size:
            continue
        first, cnt = starts[work], counts[work]
        kp = _pad(k, first, cnt, k[first])
        wp = _pad(w, first, cnt, w[first])
        swp = _pad(sw, first, cnt, np.zeros(work.size))
        u[work], converged[work], bad[work] = _lm(kp, wp, swp, lo[work], span[work], u[work], max_iter)
    x = lo + span / (1.0 + np.exp(-np.clip(u, -50.0, 50.0)))
    p = from_box(x)
    bad |= ~np.all(np.isfinite(p), axis=1)
    p[bad] = np.nan
    return p, converged & ~bad


#: Padded quotes (expiries x quotes) per batch of the normal equations: a batch's temporaries stay in the
#: processor's cache and are reused, where whole-chunk temporaries would be fresh memory at every step.
_NORMAL_BATCH = 32768


def _normal_system(u, k, w, sw, lo, span, idx=None):
    """J'J (n, 5, 5), J'r (n, 5) and r'r (n,) of the weighted residuals r = sw (w_svi - w) at u.

    Padded rows: ``k``, ``w``, ``sw`` are (N, m) with sw = 0 on padding; ``idx`` (optional) picks the
    n rows of them that ``u``, ``lo`` and ``span`` (n, 5) belong to. Jacobian columns in
    (v, s, rho, m, sigma), times dx/du of the logistic map. Rows are independent, so they are done a
    few at a time (``_NORMAL_BATCH`` quotes).
    """
    n = u.shape[0]
    e = 1.0 / (1.0 + np.exp(-np.clip(u, -50.0, 50.0)))
    x = lo + span * e
    dx = span * e * (1.0 - e)
    a_mat = np.empty((n, 5, 5))
    grad = np.empty((n, 5))
    cost = np.empty(n)
    per = max(1, _NORMAL_BATCH // max(k.shape[1], 1))
    for b0 in range(0, n, per):
        b = slice(b0, min(b0 + per, n))
        rows = b if idx is None else idx[b]
        m6 = _normal_rows(x[b], dx[b], k[rows], w[rows], sw[rows])
        a_mat[b], grad[b], cost[b] = m6[:, :5, :5], m6[:, :5, 5], m6[:, 5, 5]
    return a_mat, grad, cost


def _normal_rows(x, dx, k, w, sw):
    """[J r]' [J r] (n, 6, 6) for box parameters ``x`` (n, 5) with logistic slopes ``dx``, padded quotes (n, m)."""
    v, s, rho, m, sig = (x[:, i, None] for i in range(5))
    d0, d1, d2, d3, d4 = (dx[:, i, None] for i in range(5))
    q = np.sqrt(1.0 - rho * rho)
    inv = 1.0 / (1.0 + np.abs(rho))
    b = 2.0 * s * inv
    sgn = np.where(rho >= 0, 1.0, -1.0)
    aug = np.empty((k.shape[0], 6, k.shape[1]))  # per row, each column of [J r] one contiguous run
    xk = np.subtract(k, m, out=aug[:, 2])
    r = np.multiply(xk, xk, out=aug[:, 4])
    r += sig * sig
    np.sqrt(r, out=r)
    h = np.multiply(xk, rho, out=aug[:, 1])
    h += r
    h -= sig * q
    res = np.multiply(h, b, out=aug[:, 5])
    res += v
    res -= w
    res *= sw
    c3 = np.divide(xk, r, out=aug[:, 3])  # d/dm = -b (rho + xk/r)
    c3 += rho
    c3 *= sw * (-b * d3)
    c4 = np.divide(sig, r, out=aug[:, 4])  # d/dsigma = b (sigma/r - q)
    c4 -= q
    c4 *= sw * (b * d4)
    c2 = xk  # d/drho = b (xk + sigma rho/q) - b sgn h/(1 + |rho|)
    c2 += sig * rho / q
    c2 *= b * d2
    c2 -= h * (b * sgn * inv * d2)
    c2 *= sw
    h *= sw * (2.0 * inv * d1)  # d/ds = 2 h/(1 + |rho|)
    np.multiply(sw, d0, out=aug[:, 0])  # d/dv = 1
    return np.matmul(aug, aug.transpose(0, 2, 1))


def _lm(k, w, sw, lo, span, u, max_iter):
    """Batched LM on padded rows; returns (u, converged, bad)."""
    n = u.shape[0]
    with np.errstate(invalid="ignore", over="ignore", divide="ignore"):
        a_mat, grad, cost = _normal_system(u, k, w, sw, lo, span)
    bad = ~(np.isfinite(cost) & np.all(np.isfinite(a_mat), axis=(1, 2)) & np.all(np.isfinite(grad), axis=1))
    active = ~bad
    converged = np.zeros(n, dtype=bool)
    lam = np.full(n, 1e-3)
    nu = np.full(n, 2.0)
    scale = np.zeros((n, 5))
    eye = np.eye(5)
    for _ in range(max_iter):
        idx = np.flatnonzero(active)
        if not idx.size:
            break
        every = idx.size == n
        sub = (lambda z: z) if every else (lambda z: z[idx])
        a_i, g_i, c_i, u_i, lam_i, nu_i = (sub(z) for z in (a_mat, grad, cost, u, lam, nu))
        sc_i = np.maximum(sub(scale), np.einsum("eii->ei", a_i))
        dsc = np.where(sc_i > 0, sc_i, 1.0)
        step = np.linalg.solve(a_i + (lam_i[:, None] * dsc)[:, :, None] * eye, -g_i[..., None])[..., 0]
        with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
            a_new, g_new, c_new = _normal_system(u_i + step, k, w, sw, sub(lo), sub(span), None if every else idx)
            pred = -(step * g_i).sum(axis=1) + lam_i * (dsc * step * step).sum(axis=1)
            ratio = (c_i - c_new) / pred
            take = (np.isfinite(c_new) & (c_new < c_i) & np.all(np.isfinite(a_new), axis=(1, 2))
                    & np.all(np.isfinite(g_new), axis=1))
            step_len = np.sqrt((step * step).sum(axis=1))
            u_len = np.sqrt((u_i * u_i).sum(axis=1))
            stop = (
                (take & (lam_i <= 1e-2) & (step_len <= 1e-10 * (u_len + 1e-10)))  # near Gauss-Newton step, tiny
                | (take & (c_i - c_new <= 1e-15 * c_i) & (pred <= 1e-15 * c_i))  # no gain left
                | (step_len <= 1e-14 * (u_len + 1e-14))  # cannot move
                | (np.abs(g_i).max(axis=1) <= 1e-16 * np.sqrt(np.maximum(c_i, 1e-300) * dsc.max(axis=1)))
            )
            shrink = np.maximum(1.0 / 3.0, 1.0 - (2.0 * np.clip(ratio, 0.0, 1.0) - 1.0) ** 3)
            lam_i = np.where(take, lam_i * shrink, lam_i * nu_i)
            nu_i = np.where(take, 2.0, nu_i * 2.0)
        stop |= lam_i > 1e16  # no step lowers the cost: at the minimum to rounding
        a_mat[idx] = np.where(take[:, None, None], a_new, a_i)
        grad[idx] = np.where(take[:, None], g_new, g_i)
        cost[idx] = np.where(take, c_new, c_i)
        u[idx] = np.where(take[:, None], u_i + step, u_i)
        lam[idx], nu[idx], scale[idx] = lam_i, nu_i, sc_i
        converged[idx[stop]] = True
        active[idx[stop]] = False
    return u, converged, bad


# ---------------------------------------------------------------------------
# checks on all expiries at once


def _tv(p: np.ndarray, k: np.ndarray) -> np.ndarray:
    """Raw SVI total variance with parameter rows p (..., 5) broadcast against k."""
    a, b, rho, m, sig = (p[..., i] for i in range(5))
    x = k - m
    return a + b * (rho * x + np.sqrt(x * x + sig * sig))


def _g_rows(p: np.ndarray, k: np.ndarray) -> np.ndarray:
    """G&J g(k) for parameter rows p (E, 5) against k (E, n): svi.g_function with the square root taken once."""
    a, b, rho, m, sig = (p[:, i, None] for i in range(5))
    x = k - m
    r = np.sqrt(x * x + sig * sig)
    return svi.g_from_w(k, a + b * (rho * x + r), b * (rho + x / r), b * sig * sig / (r * r * r))


def _vol_errors(p_q: np.ndarray, k, w, t_q):
    """Fitted minus market vol per quote (decimal), parameter row per quote."""
    wf = _tv(p_q, k)
    with np.errstate(invalid="ignore"):
        return np.sqrt(np.where(wf > 0, wf, np.nan) / t_q) - np.sqrt(w / t_q)


def _atm_levels(k, w, starts, ends) -> np.ndarray:
    """smile_fit._atm_level per group (k non-decreasing within each group; with repeated k the last
    one at or below 0 is used, as np.interp does)."""
    n_le = _segsum((k <= 0.0).astype(np.int64), starts)
    j = starts + n_le - 1
    inside = (k[starts] <= 0.0) & (k[ends - 1] >= 0.0)
    jj = np.clip(j, starts, ends - 1)
    j1 = np.minimum(jj + 1, ends - 1)
    with np.errstate(invalid="ignore", divide="ignore"):
        slope = (w[j1] - w[jj]) / (k[j1] - k[jj])
        interp = np.where(k[jj] == 0.0, w[jj], slope * (0.0 - k[jj]) + w[jj])
    # outside the quoted range: the quote nearest k = 0 (the first when all k > 0, the last when all k < 0)
    nearest = np.where(k[starts] > 0.0, w[starts], w[ends - 1])
    return np.where(inside, interp, nearest)


def _wild_batch(p, k, w, wt, starts, ends, t, w0) -> np.ndarray:
    """True where smile_fit._wild would reject the fit (the reason is left to fit_smile)."""
    a, b, rho, sig = p[:, 0], p[:, 1], p[:, 2], p[:, 4]
    with np.errstate(invalid="ignore", over="ignore"):
        valid = (np.all(np.isfinite(p), axis=1) & (b >= 0) & (np.abs(rho) < 1) & (sig > 0)
                 & (a + b * sig * np.sqrt(np.maximum(1.0 - rho * rho, 0.0)) >= 0)
                 & (np.maximum(b * (1.0 - rho), b * (1.0 + rho)) <= svi.LEE_MAX_SLOPE))
        kmin, kmax = _segmin(k, starts), _segmax(k, starts)
        dense = np.linspace(kmin, kmax, 201, axis=1)
        wf = _tv(p[:, None, :], dense)
        pos = np.all(np.isfinite(wf) & (wf > 0), axis=1)
        vf = np.sqrt(wf / t[:, None])
        vm = np.sqrt(w / np.repeat(t, ends - starts))
        in_band = (vf.min(axis=1) >= 0.5 * _segmin(vm, starts)) & (vf.max(axis=1) <= 2.0 * _segmax(vm, starts))
        gid = np.repeat(np.arange(starts.size), ends - starts)
        sse_fit = _segsum(wt * (_tv(p[gid], k) - w) ** 2, starts)
        sse_flat = _segsum(wt * (w0[gid] - w) ** 2, starts)
    return ~(valid & pos & in_band & ~(sse_fit > sse_flat))


def _butterfly_batch(p, kmin, kmax, w0):
    """svi.butterfly_check on smile_fit._check_grid for every row of p.

    Returns (free, min_g, k_at_min_g, grid_lo, grid_hi); ``free`` is False
    wherever g < 0 or is not finite somewhere on the grid (those rows go to
    fit_smile, which reports the intervals).
    """
    n = p.shape[0]
    reach = CHECK_REACH_SD * np.sqrt(np.maximum(w0, 1e-12))
    lo = np.minimum(kmin, -reach)
    hi = np.maximum(kmax, reach)
    span = hi - lo
    lo, hi = lo - 0.1 * span, hi + 0.1 * span
    base = np.linspace(lo, hi, 801, axis=1)
    quoted = np.linspace(kmin, kmax, 201, axis=1)
    vert = p[:, 3, None] + p[:, 4, None] * np.linspace(-8.0, 8.0, 161)[None, :]
    keep = (vert > lo[:, None]) & (vert < hi[:, None]) & (p[:, 1] > 0)[:, None]
    # three sorted runs per row: a merging (stable) sort is the quick one here, and sorted values are sorted values
    grid = np.sort(np.concatenate([base, quoted, np.where(keep, vert, np.nan)], axis=1), axis=1, kind="stable")
    dup = np.zeros(grid.shape, dtype=bool)
    dup[:, 1:] = grid[:, 1:] == grid[:, :-1]
    if dup.any():
        grid = np.sort(np.where(dup, np.nan, grid), axis=1, kind="stable")
    valid = np.isfinite(grid)
    count = valid.sum(axis=1)
    rows = np.arange(n)
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        g = _g_rows(p, np.where(valid, grid, 0.0))
        finite = np.all(np.isfinite(g) | ~valid, axis=1)
        gm = np.where(valid & np.isfinite(g), g, np.inf)
        i = np.argmin(gm, axis=1)
        best_v = gm[rows, i]
        best_k = grid[rows, i]
        r_lo = grid[rows, np.maximum(i - 1, 0)]
        r_hi = grid[rows, np.minimum(i + 1, count - 1)]
        moving = np.ones(n, dtype=bool)
        for _ in range(3):
            kk = np.linspace(r_lo, r_hi, 201, axis=1)
            vv = _g_rows(p, kk)
            fin = np.isfinite(vv)
            moving &= fin.any(axis=1)
            vvm = np.where(fin, vv, np.inf)
            j = np.argmin(vvm, axis=1)
            vj = vvm[rows, j]
            better = moving & (vj < best_v)
            best_v = np.where(better, vj, best_v)
            best_k = np.where(better, kk[rows, j], best_k)
            step = kk[:, 1] - kk[:, 0]
            r_lo = np.where(moving, kk[rows, j] - step, r_lo)
            r_hi = np.where(moving, kk[rows, j] + step, r_hi)
        b, rho = p[:, 1], p[:, 2]
        lee_ok = np.maximum(b * (1.0 - rho), b * (1.0 + rho)) < svi.LEE_MAX_SLOPE
    free = finite & (count >= 2) & (best_v >= 0.0) & lee_ok
    return free, best_v, best_k, grid[:, 0], grid[rows, np.maximum(count - 1, 0)]


# ---------------------------------------------------------------------------
# the batched fit


def fit_smiles(k, total_var, t, group, *, vega=None, spread=None, weights=None, price_floor=None,
               arbitrage_refit: bool = True, outlier_check: bool = True) -> list[Smile | ChainTriageError]:
    """:func:`smile_fit.fit_smile` for many expiries at once; one result per expiry.

    ``k``, ``total_var`` (and ``vega``, ``spread``, ``price_floor`` or ``weights``): quotes of
    all expiries in one flat array, with ``group`` the expiry index of each
    quote (0..E-1, non-decreasing); ``t``: years per expiry, length E. The
    result for expiry i is what ``fit_smile`` returns for that expiry's quotes,
    or the ChainTriageError it raises (returned, not raised). Fits may differ
    from fit_smile's in the last digits: the batched polish stops at a cost
    at least as low.
    """
    t = np.atleast_1d(np.asarray(t, dtype=float))
    n_exp = t.size
    k = np.atleast_1d(np.asarray(k, dtype=float))
    w = np.atleast_1d(np.asarray(total_var, dtype=float))
    group = np.atleast_1d(np.asarray(group, dtype=np.int64))
    if not (k.shape == w.shape == group.shape and k.ndim == 1):
        raise ChainTriageError("fit_smiles: k, total variance and group must be 1-d and the same length")
    if group.size and (np.any(np.diff(group) < 0) or group[0] < 0 or group[-1] >= n_exp):
        raise ChainTriageError("fit_smiles: quotes must be grouped by expiry index 0..E-1 in order")
    bounds = np.searchsorted(group, np.arange(n_exp + 1))
    vega_a = None if vega is None else np.broadcast_to(np.asarray(vega, dtype=float), k.shape)
    spread_a = None if spread is None else np.broadcast_to(np.asarray(spread, dtype=float), k.shape)
    weights_a = None if weights is None else np.broadcast_to(np.asarray(weights, dtype=float), k.shape)
    floor_a = None if price_floor is None else np.broadcast_to(np.asarray(price_floor, dtype=float), k.shape)

    results: list[Smile | ChainTriageError | None] = [None] * n_exp

    def reference(i: int) -> None:
        sl = slice(bounds[i], bounds[i + 1])
        try:
            results[i] = fit_smile(
                k[sl], w[sl], None if weights_a is None else weights_a[sl], float(t[i]),
                vega=None if vega_a is None else vega_a[sl], spread=None if spread_a is None else spread_a[sl],
                price_floor=None if floor_a is None else floor_a[sl],
                arbitrage_refit=arbitrage_refit, outlier_check=outlier_check)
        except ChainTriageError as exc:
            results[i] = exc

    # weights and usable quotes (smile_fit.quote_weights / fit_smile)
    t_ok = np.isfinite(t) & (t > 0)
    t_q = np.repeat(np.where(t_ok, t, 1.0), np.diff(bounds))
    with np.errstate(invalid="ignore", divide="ignore"):
        if weights_a is None:
            iv = np.sqrt(np.where(w > 0, w, np.nan) / t_q)
            if vega_a is None or spread_a is None:
                unc = np.ones_like(iv)
                okw = np.isfinite(iv) & (iv > 0)
            else:
                okw = (np.isfinite(iv) & (iv > 0) & np.isfinite(vega_a) & (vega_a > 0)
                       & np.isfinite(spread_a) & (spread_a >= 0))
                half = 0.5 * spread_a if floor_a is None else np.maximum(0.5 * spread_a, floor_a)
                unc = np.maximum(half / vega_a, VOL_UNCERTAINTY_FLOOR)
            wt = np.where(okw, 1.0 / (iv * iv * t_q * unc * unc), 0.0)
            pos = wt > 0
            n_pos = np.bincount(group, weights=pos, minlength=n_exp)
            mean_pos = np.bincount(group, weights=np.where(pos, wt, 0.0), minlength=n_exp) / np.maximum(n_pos, 1)
            wt = np.where(n_pos[group] > 0, wt / np.where(n_pos > 0, mean_pos, 1.0)[group], wt)
        else:
            wt = weights_a.copy()
        ok = np.isfinite(k) & np.isfinite(w) & (w > 0) & np.isfinite(wt) & (wt > 0)
    n_all = np.diff(bounds)
    n_ok = np.bincount(group[ok], minlength=n_exp)
    # k in non-decreasing order within each expiry keeps the batched checks simple (repeated strikes are
    # fine: a big chain often lists one strike twice); anything else -> fit_smile
    kk_ok = k[ok]
    same_group = group[ok][1:] == group[ok][:-1]
    not_ascending = np.bincount(group[ok][1:][same_group & ~(kk_ok[1:] >= kk_ok[:-1])], minlength=n_exp) > 0
    fast = t_ok & (n_ok >= MIN_QUOTES_SVI) & ~not_ascending
    for i in np.flatnonzero(~fast):
        reference(int(i))
    idx = np.flatnonzero(ok & fast[group])
    if idx.size == 0:
        return results
    fg = np.flatnonzero(fast)  # expiry of each fast group
    local = np.full(n_exp, -1)
    local[fg] = np.arange(fg.size)
    gq = local[group[idx]]
    kq, wq, wtq = k[idx], w[idx], wt[idx]
    cnt = np.bincount(gq, minlength=fg.size)
    st = np.concatenate([[0], np.cumsum(cnt)[:-1]])
    wtq = wtq / (_segsum(wtq, st) / cnt)[gq]
    tf = t[fg]

    p, conv = polish_batch(kq, wq, wtq, st, grid_start_batch(kq, wq, wtq, st), max_iter=MAX_ITER)
    failed = ~conv  # slow valleys (an optimum at the edge of the box) are left to fit_smile
    left_out: list[tuple] = [()] * fg.size
    extra_notes: list[list[str]] = [[] for _ in fg]
    keep_q = np.ones(kq.size, dtype=bool)

    if outlier_check:
        err = _vol_errors(p[gq], kq, wq, tf[gq])
        aerr = np.abs(err)
        failed |= np.bincount(gq, weights=~np.isfinite(err), minlength=fg.size) > 0
        med = _segmedian(np.where(np.isfinite(aerr), aerr, 0.0), gq, st, cnt)
        thr = np.maximum(6.0 * (1.4826 * med), OUTLIER_MIN_VOL)
        far = aerr > thr[gq]
        nfar = np.bincount(gq, weights=far, minlength=fg.size).astype(np.int64)
        refit = ~failed & (nfar > 0) & (nfar <= np.maximum(1, cnt // 10)) & (cnt - nfar >= MIN_QUOTES_SVI)
        for j in np.flatnonzero(~failed & (nfar > 0) & ~refit):
            extra_notes[j].append(_note_too_many_outliers(int(nfar[j]), float(thr[j])))
        if refit.any():
            rg = np.flatnonzero(refit)
            rows = _ranges(st[rg], cnt[rg])
            wt2 = np.where(far[rows], 0.0, wtq[rows])
            st2 = np.concatenate([[0], np.cumsum(cnt[rg])[:-1]])
            p2, conv2 = polish_batch(kq[rows], wq[rows], wt2, st2, p[rg], max_iter=MAX_ITER)
            bad2 = ~conv2
            failed[rg[bad2]] = True  # fit_smile decides what a failed re-fit means
            # acceptance is judged on the quotes that stay
            stay = ~far[rows]
            rows_s = rows[stay]
            cnt_s = cnt[rg] - nfar[rg]
            st_s = np.concatenate([[0], np.cumsum(cnt_s)[:-1]])
            ends_s = st_s + cnt_s
            w0_s = _atm_levels(kq[rows_s], wq[rows_s], st_s, ends_s)
            wild2 = _wild_batch(np.where(bad2[:, None], p[rg], p2), kq[rows_s], wq[rows_s], wt2[stay],
                                st_s, ends_s, tf[rg], w0_s)
            accept = ~bad2 & ~wild2
            for jj in np.flatnonzero(accept):
                j = rg[jj]
                sl = slice(st[j], st[j] + cnt[j])
                fj = far[sl]
                extra_notes[j].append(_note_outliers(kq[sl][fj], err[sl][fj]))
                left_out[j] = tuple(float(x) for x in kq[sl][fj])
                p[j] = p2[jj]
                keep_q[sl] = ~fj
                wtq[sl] = np.where(fj, 0.0, wtq[sl])

    # the quotes each fit finally rests on
    if not keep_q.all():
        kq, wq, wtq, gq = kq[keep_q], wq[keep_q], wtq[keep_q], gq[keep_q]
        cnt = np.bincount(gq, minlength=fg.size)
        st = np.concatenate([[0], np.cumsum(cnt)[:-1]])
        wtq = wtq / (_segsum(wtq, st) / cnt)[gq]
    ends = st + cnt
    pp = np.where(failed[:, None], 1.0, p)  # placeholder rows for failed fits; decided by fit_smile
    w0 = _atm_levels(kq, wq, st, ends)
    wild = _wild_batch(pp, kq, wq, wtq, st, ends, tf, w0)
    kmin, kmax = kq[st], kq[ends - 1]
    free, min_g, k_min, g_lo, g_hi = _butterfly_batch(pp, kmin, kmax, w0)
    err = _vol_errors(pp[gq], kq, wq, tf[gq])
    rmse = np.sqrt(_segsum(err * err, st) / cnt)
    max_err = _segmax(np.abs(err), st)
    done = ~failed & ~wild & free & np.isfinite(rmse)
    for j, i in enumerate(fg):
        if not done[j]:
            reference(int(i))
            continue
        sl = slice(st[j], ends[j])
        n_bad = int(n_all[i] - n_ok[i])
        notes = ([_note_unusable(n_bad, int(n_all[i]))] if n_bad else []) + extra_notes[j]
        notes.insert(0, _note_summary(kq[sl], float(rmse[j]), float(max_err[j])))
        a, b, rho, m, sig = (float(x) for x in p[j])
        results[i] = Smile(
            params=SviParams(a=a, b=b, rho=rho, m=m, sigma=sig), t=float(t[i]), method="svi",
            rmse_vol=float(rmse[j]), arbitrage_free=True, min_g=float(min_g[j]), notes=tuple(notes), reason="",
            max_err_vol=float(max_err[j]), k_at_min_g=float(k_min[j]), negative_intervals=(),
            check_range=(float(g_lo[j]), float(g_hi[j])), n_quotes=int(cnt[j]),
            k_range=(float(kmin[j]), float(kmax[j])), penalised=False, min_g_plain=float(min_g[j]),
            left_out_k=left_out[j],
        )
    return results


def _segmedian(x: np.ndarray, gid: np.ndarray, starts: np.ndarray, counts: np.ndarray) -> np.ndarray:
    """Median of x within each group (as np.median)."""
    order = np.lexsort((x, gid))
    xs = x[order]
    lo = starts + (counts - 1) // 2
    hi = starts + counts // 2
    return 0.5 * (xs[lo] + xs[hi])
