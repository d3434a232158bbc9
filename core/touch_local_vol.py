"""Touch probability under a local-volatility path model, every level of an expiry at once.

Model: d ln S = (mu(T) - sigma_loc^2/2) dT + sigma_loc(ln(S/F_T), T) dW, with
sigma_loc and mu = d ln F/dT from a ``LocalVolSurface`` (Dupire from the
fitted smiles). For a level H below spot, u(T, x) = P(min of S over [T, T_end]
<= H | ln(S_T/S_0) = x) solves the backward equation

    u_T + (mu - sigma_loc^2/2) u_x + 1/2 sigma_loc^2 u_xx = 0,   u = 1 at x = ln(H/S_0),   u(T_end, x) = 0 above it,

and symmetrically for a level above spot; P(touch) is u(0, 0).

Numerics: one grid in x = ln(S/S_0) shared by the solved levels (a sinh
grid dense around spot, with spot and each solved level exactly on a node
and the spacing changing smoothly between them); Crank-Nicolson in time after
two fully implicit (Rannacher) steps, time steps shrinking towards expiry
(where the absorbing corner is) and every earlier expiry a time node. Each
level's equation lives on its own part of the grid (from the level to the far
edge); all of them are stacked into one block-diagonal tridiagonal system and
solved together by LAPACK's ``dgtsv`` at every time step, so the Python loop
runs over time steps only; ``touch_local_vol_many`` puts several expiries'
systems side by side in the same way (one call per time step for all of
them, the same figures). The far edge, ``SPAN_SD`` standard deviations from
spot, has u = 0.

Not every strike gets its own equation: at most ``SOLVED_PER_SIDE`` levels on
each side of spot (spread in sqrt-distance from spot, nearest and furthest
included) are solved, and the rest are interpolated (monotone cubic in
ln(H/S_0)) in the ratio P(touch) / P(finish beyond on the far side), which is
smooth (about 2 for a diffusion) and known exactly from the surface for the
denominator. Measured on a skewed SSVI surface: within 1e-3 of solving every
level on a fine grid.

Units: levels and spot in price units; times in years on the surface's clock;
probabilities in [0, 1]. A level outside the grid (further than the span from
spot) gets NaN; a level at spot gets 1.
"""

from __future__ import annotations

import threading
from dataclasses import dataclass

import numpy as np
from scipy.linalg.lapack import dgtsv
from .standard_normal import ndtr

from .local_vol import LocalVolSurface

#: Grid half-width in standard deviations of ln S over the whole time (the larger of the at-the-money
#: and the wing total variance inside +/- 6 at-the-money standard deviations).
SPAN_SD = 6.0
#: Background grid points in x and time steps (the defaults of ``touch_local_vol``).
N_SPACE = 120
N_TIME = 30
#: Fully implicit steps at the start (next to expiry) before Crank-Nicolson.
RANNACHER_STEPS = 2
#: Levels per side of spot solved by their own equation; the rest are interpolated between them.
SOLVED_PER_SIDE = 8
#: |ln(H/S_0)| below this counts as a level at spot.
AT_SPOT = 1e-9
#: Largest side-by-side system of ``touch_local_vol_many`` (time steps x unknowns; 5 float arrays of it).
BATCH_CELLS = 250_000
#: Step arrays up to this many cells each stay allocated for the next call (5 arrays: 10 MB).
KEEP_CELLS = 250_000
#: Width of the dense part of the grid around spot, in at-the-money standard deviations.
GRID_CONCENTRATION = 0.5


@dataclass(frozen=True)
class TouchSolution:
    """P(touch) per level and how much of the local variance had to be guarded.

    ``guarded_share``: share of (time step, grid point) pairs within 3
    at-the-money standard deviations of the forward where the local variance
    was floored or capped (calendar or butterfly arbitrage in the smiles).
    """

    p_touch: np.ndarray
    guarded_share: float


def _grid(levels_x: np.ndarray, lo: float, hi: float, n_space: int, alpha: float) -> np.ndarray:
    """Nodes on [lo, hi] with 0 and every level exactly on a node, denser near spot.

    The background map is x = alpha sinh(xi) with xi uniform (``n_space``
    points). Between two consecutive required points (lo, the levels, 0, hi)
    the nodes are uniform in xi, with as many steps as the background has
    there (at least one), so the spacing changes smoothly and never jumps.
    """
    special = np.unique(np.concatenate([[lo, 0.0, hi], levels_x]))
    xi = np.arcsinh(special / alpha)
    step = (xi[-1] - xi[0]) / (n_space - 1)
    gaps = np.diff(xi)
    counts = np.maximum(np.ceil(gaps / step - 0.25).astype(int), 1)
    start = np.repeat(xi[:-1], counts)
    frac = (np.arange(counts.sum()) - np.repeat(np.cumsum(counts) - counts, counts)) / np.repeat(counts, counts)
    nodes = np.concatenate([start + frac * np.repeat(gaps, counts), [xi[-1]]])
    x = alpha * np.sinh(nodes)
    x[np.searchsorted(nodes, xi)] = special  # exact levels (no rounding from the map)
    return x


def _time_grid(surface: LocalVolSurface, t_end: float, n_time: int) -> np.ndarray:
    """Times to expiry from 0 to t_end: t_end (k/M)^2 (small steps next to the absorbing corner at
    expiry) with every earlier expiry of the surface added as a node (the local vol changes its time
    slope there, so no step straddles one)."""
    s = t_end * (np.arange(n_time + 1) / n_time) ** 2
    knots = t_end - surface.t[surface.t < t_end]
    if knots.size:
        step = 2.0 * np.sqrt(s * t_end) / n_time + t_end / n_time ** 2  # local spacing of the s grid
        near = np.abs(s[:, None] - knots[None, :]).min(axis=1) < 0.35 * step
        s = s[~near | (s == 0.0) | (s == t_end)]
    return np.unique(np.concatenate([s, knots]).clip(0.0, t_end))


@dataclass
class _Levels:
    """One expiry's solved levels laid out for time stepping: the grid, its blocks and per-node factors.

    The unknowns of level b are grid nodes ``node[starts[b]] .. node[ends[b]]``;
    ``a``, ``b``, ``c`` are the stencil's sub-, main- and super-diagonal
    factors times dt, shape (steps, nodes); ``theta`` the implicitness of each
    step (1 for the first ``RANNACHER_STEPS``, then 1/2).
    """

    node: np.ndarray
    starts: np.ndarray
    ends: np.ndarray
    left_bc: np.ndarray
    right_bc: np.ndarray
    read: np.ndarray
    a: np.ndarray
    b: np.ndarray
    c: np.ndarray
    theta: np.ndarray
    guarded: float

    @property
    def steps(self) -> int:
        return self.a.shape[0]

    @property
    def unknowns(self) -> int:
        return self.node.size


def _lay_out(surface: LocalVolSurface, t_end: float, lv: np.ndarray, lo: float, hi: float,
             near: float, alpha: float, n_space: int, n_time: int) -> _Levels:
    """Grid, blocks and stencil factors for each level lv (ln(H/S_0), nonzero, inside (lo, hi))."""
    x = _grid(lv, lo, hi, n_space, alpha)
    n = x.size
    i0 = int(np.searchsorted(x, 0.0))
    m = np.searchsorted(x, lv)  # node of each level

    # Stacked unknowns: a level below spot owns nodes m+1 .. n-2, one above owns 1 .. m-1.
    below = lv < 0.0
    first = np.where(below, m + 1, 1)
    last = np.where(below, n - 2, m - 1)
    sizes = last - first + 1
    starts = np.concatenate([[0], np.cumsum(sizes)[:-1]])
    total = int(sizes.sum())
    blk = np.repeat(np.arange(lv.size), sizes)
    node = first[blk] + (np.arange(total) - starts[blk])
    ends = starts + sizes - 1
    left_bc = np.where(below, 1.0, 0.0)   # value left of a block's first unknown
    right_bc = np.where(below, 0.0, 1.0)  # value right of its last unknown
    read = starts + (i0 - first)          # where x = 0 sits in each block

    s = _time_grid(surface, t_end, n_time)
    n_time = s.size - 1
    dt = np.diff(s)[:, None]
    tau = t_end - 0.5 * (s[1:] + s[:-1])  # calendar point of each step's middle
    var, bad, mu = surface.local_variance_paths(tau, x[1:-1])
    near_fwd = np.abs(x[1:-1]) <= near
    guarded = float(bad[:, near_fwd].mean()) if near_fwd.any() else 0.0

    # Non-uniform three-point stencils on interior nodes 1 .. n-2, all time steps at once.
    hm = x[1:-1] - x[:-2]
    hp = x[2:] - x[1:-1]
    drift = mu[:, None] - 0.5 * var
    coef = np.zeros((3, n_time, n))
    coef[0, :, 1:-1] = var / (hm * (hm + hp)) - drift * hp / (hm * (hm + hp))
    coef[1, :, 1:-1] = -var / (hm * hp) + drift * (hp - hm) / (hm * hp)
    coef[2, :, 1:-1] = var / (hp * (hm + hp)) + drift * hm / (hp * (hm + hp))
    a, b, c = coef * dt  # (n_time, n) each, times dt, per grid node
    theta = np.where(np.arange(n_time) < RANNACHER_STEPS, 1.0, 0.5)[:, None]
    return _Levels(node, starts, ends, left_bc, right_bc, read, a, b, c, theta, guarded)


#: The step arrays, in the order ``_write_steps`` fills them.
_STEP_ARRAYS = ("dl", "diag", "du", "e0", "bc")


def _write_steps(lev: _Levels, out: dict, rows: slice, cols: slice) -> None:
    """Write one expiry's step factors into ``out[name][rows, cols]`` (rows: its steps, cols: its unknowns).

    (I - theta dt L) u_new = (I + (1 - theta) dt L) u + dt (boundary terms; theta + (1 - theta) = 1):
    ``diag``, ``dl`` (coupling of unknown i to i - 1), ``du`` (to i + 1) form the left side, ``e0``
    and ``bc`` the right; on Crank-Nicolson steps (theta = 1/2) the right side's couplings are
    -dl and -du exactly, on fully implicit ones there are none (``_march``). Couplings across block
    edges are boundary values, kept apart (in ``bc``): none from a block's first unknown to the
    left, none from its last to the right, so blocks, and expiries written side by side, never
    mix. Each factor is formed per grid node and copied block by block (a block is a run of nodes).
    """
    theta = lev.theta
    node, starts, ends = lev.node, lev.starts, lev.ends
    view = {name: out[name][rows, cols] for name in _STEP_ARRAYS}
    runs = list(zip(node[starts].tolist(), starts.tolist(), (ends + 1).tolist()))
    for name, per_node in (("dl", -theta * lev.a), ("diag", 1.0 - theta * lev.b), ("du", -theta * lev.c),
                           ("e0", 1.0 + (1.0 - theta) * lev.b)):
        dst = view[name]
        for first, lo, hi in runs:
            dst[:, lo:hi] = per_node[:, first:first + hi - lo]
    view["dl"][:, starts] = -theta * (lev.a[:, node[starts]] * 0.0)
    view["du"][:, ends] = -theta * 0.0
    view["dl"][:, 0] = 0.0  # nothing left of the expiry's first unknown
    bc = view["bc"]
    bc[...] = 0.0
    bc[:, starts] = lev.a[:, node[starts]] * lev.left_bc
    bc[:, ends] += lev.c[:, node[ends]] * lev.right_bc


_SCRATCH = threading.local()


def _scratch(size: int) -> np.ndarray:
    """A float buffer of ``size`` for this thread's step arrays, kept between calls up to ``KEEP_CELLS``
    cells per array (fresh memory costs page faults that can exceed the arithmetic written into it)."""
    buf = getattr(_SCRATCH, "buf", None)
    if buf is not None and buf.size >= size:
        return buf
    buf = np.empty(size)
    if size <= len(_STEP_ARRAYS) * KEEP_CELLS:
        _SCRATCH.buf = buf
    return buf


def _march(levels: list[_Levels]) -> list[np.ndarray] | None:
    """u(0, 0) per level of each expiry, all expiries stepped side by side in one tridiagonal system.

    Expiries are placed longest first and aligned on their last step, so at
    every step the ones already under way form a prefix of the unknowns (and
    those still in their fully implicit first steps the end of that prefix)
    and one ``dgtsv`` call solves them all. None when LAPACK reports a
    singular system or a value is not finite (the caller then steps each
    expiry alone).
    """
    order = sorted(range(len(levels)), key=lambda j: -levels[j].steps)
    n_steps = levels[order[0]].steps
    width = np.cumsum([0] + [levels[j].unknowns for j in order])
    cells = n_steps * int(width[-1])
    buf = _scratch(len(_STEP_ARRAYS) * cells)
    out = {name: buf[i * cells:(i + 1) * cells].reshape(n_steps, int(width[-1]))
           for i, name in enumerate(_STEP_ARRAYS)}
    for at, j in enumerate(order):
        _write_steps(levels[j], out, slice(n_steps - levels[j].steps, None), slice(width[at], width[at + 1]))
    begins = np.array([n_steps - levels[j].steps for j in order])
    k_all = np.arange(n_steps)
    active = width[np.searchsorted(begins, k_all, side="right")].tolist()
    crank = width[np.searchsorted(begins, k_all - RANNACHER_STEPS, side="right")].tolist()
    dl, diag, du, e0, bc = (out[name] for name in _STEP_ARRAYS)
    u = np.zeros(int(width[-1]))
    for k in range(n_steps):
        p, c = active[k], crank[k]  # unknowns under way; of them, those past the fully implicit steps
        uk = u[:p]
        rhs = e0[k, :p] * uk + bc[k, :p]
        if c > 1:  # Crank-Nicolson: the right side's couplings are -dl, -du (theta = 1 - theta = 1/2)
            rhs[1:c] -= dl[k, 1:c] * uk[:c - 1]
            rhs[:c - 1] -= du[k, :c - 1] * uk[1:c]
        *_, sol, info = dgtsv(dl[k, 1:p], diag[k, :p], du[k, :p - 1], rhs[:, None], 1, 1, 1, 1)
        if info != 0:
            return None
        u[:p] = sol[:, 0]
    got = [None] * len(levels)
    for at, j in enumerate(order):
        got[j] = u[width[at]:width[at + 1]][levels[j].read]
    if len(levels) > 1 and not all(np.isfinite(g).all() for g in got):
        return None
    return got


def _pick(xs: np.ndarray, scale: float, most: int) -> np.ndarray:
    """Indices of the sorted one-sided ``xs`` (ln(H/S_0)) solved by their own equation.

    All if at most ``most``; else the levels nearest to ``most`` target
    distances from spot spread evenly in sqrt(distance) up to 6 ``scale``
    (standard deviations), plus the nearest and the furthest level.
    """
    if xs.size <= most:
        return np.arange(xs.size)
    dist = np.abs(xs)
    reach = max(min(6.0 * scale, dist.max()), dist.min())
    targets = (np.linspace(np.sqrt(dist.min()), np.sqrt(reach), most - 1)) ** 2
    order = np.argsort(dist)
    pos = np.clip(np.searchsorted(dist[order], targets), 1, dist.size - 1)
    left = order[pos - 1]
    right = order[pos]
    nearest = np.where(np.abs(dist[left] - targets) <= np.abs(dist[right] - targets), left, right)
    return np.unique(np.concatenate([nearest, [order[0], order[-1]]]))


def _monotone_cubic(xs: np.ndarray, ys: np.ndarray, x: np.ndarray) -> np.ndarray:
    """Fritsch-Carlson monotone cubic Hermite interpolation (PCHIP) of sorted ``xs``; ends held beyond."""
    h = np.diff(xs)
    delta = np.diff(ys) / h
    d = np.zeros_like(ys)
    if xs.size > 2:
        w1 = 2.0 * h[1:] + h[:-1]
        w2 = h[1:] + 2.0 * h[:-1]
        same = delta[:-1] * delta[1:] > 0
        with np.errstate(divide="ignore", invalid="ignore"):
            d[1:-1] = np.where(same, (w1 + w2) / (w1 / delta[:-1] + w2 / delta[1:]), 0.0)
    d[0] = delta[0]
    d[-1] = delta[-1]
    xc = np.clip(x, xs[0], xs[-1])
    i = np.clip(np.searchsorted(xs, xc) - 1, 0, xs.size - 2)
    t = (xc - xs[i]) / h[i]
    t2, t3 = t * t, t * t * t
    return ((2 * t3 - 3 * t2 + 1) * ys[i] + (t3 - 2 * t2 + t) * h[i] * d[i]
            + (-2 * t3 + 3 * t2) * ys[i + 1] + (t3 - t2) * h[i] * d[i + 1])


def _interp_side(x_solved: np.ndarray, p_solved: np.ndarray, x_all: np.ndarray, far_solved: np.ndarray,
                 far_all: np.ndarray, far_at_spot: float) -> np.ndarray:
    """Levels of one side between solved ones: PCHIP in ln(H/S_0) of the ratio P(touch) / P(finish beyond).

    ``far``: P(S_T on the far side of the level from spot) from the surface at
    expiry (the smile's digital), known at every level. The ratio is smooth
    (about 2 for a diffusion), equals 1 / ``far_at_spot`` at spot (used as one
    more node), and only nodes where the digital is above 1e-9 are used
    (beyond them the last ratio is held). The result is clipped to [0, 1] and
    made non-increasing away from spot.
    """
    if x_solved.size == x_all.size:
        out = p_solved
    else:
        use = far_solved > 1e-9
        xs = np.concatenate([[0.0], x_solved[use]])
        ratio = np.concatenate([[1.0 / max(far_at_spot, 1e-9)], p_solved[use] / far_solved[use]])
        order = np.argsort(xs)
        xs, ratio = xs[order], ratio[order]
        r_all = _monotone_cubic(xs, ratio, x_all) if xs.size >= 2 else np.full(x_all.size, ratio[0])
        out = np.clip(r_all * far_all, 0.0, 1.0)
    order = np.argsort(np.abs(x_all))
    mono = np.empty_like(out)
    mono[order] = np.minimum.accumulate(out[order])
    return mono


def far_side_probability(surface: LocalVolSurface, t_end: float, x: np.ndarray) -> np.ndarray:
    """P(S_T beyond ln(H/S_0) = x on the far side from spot) from the surface's total variance at t_end.

    The smile's digital, P(S_T > K) = N(d-) - phi(d-) w'/(2 sqrt w) with
    d- = -y/sqrt(w) - sqrt(w)/2 and y = ln(K/F_T); below spot 1 minus that.
    """
    y = x + surface.log_spot - surface.log_forward_at(t_end)
    w, w1 = surface.variance_and_slope(t_end, y)
    with np.errstate(divide="ignore", invalid="ignore"):
        sw = np.sqrt(np.where(w > 0, w, np.nan))
        dm = -y / sw - 0.5 * sw
        above = np.clip(ndtr(dm) - np.exp(-0.5 * dm * dm) / np.sqrt(2 * np.pi) * w1 / (2.0 * sw), 0.0, 1.0)
    return np.where(x < 0, 1.0 - above, above)


@dataclass
class _Plan:
    """What ``touch_local_vol`` has decided for one expiry before the time stepping, and what it needs after."""

    out: np.ndarray
    ok: np.ndarray
    ux: np.ndarray
    inverse: np.ndarray
    p_unique: np.ndarray
    sides: list
    picks: list
    far: np.ndarray
    far_spot: np.ndarray
    levels: _Levels | None


def _plan(surface: LocalVolSurface, t_end: float, levels, n_space: int, n_time: int,
          solved_per_side: int | None) -> TouchSolution | _Plan:
    """The levels to solve and their grid (a ``_Plan``), or the answer when nothing needs solving."""
    levels = np.asarray(levels, dtype=float)
    out = np.full(levels.shape, np.nan)
    spot = float(np.exp(surface.log_spot))
    ok = np.isfinite(levels) & (levels > 0)
    if not (t_end > 0) or not ok.any():
        out[ok] = np.where(levels[ok] == spot, 1.0, 0.0)
        return TouchSolution(out, 0.0)

    # Grid span from the total variance at t_end (wings included) and the drift.
    w_atm = float(np.asarray(surface.total_variance(t_end, 0.0)[0]))
    sd_atm = np.sqrt(max(w_atm, 1e-10))
    w_wide = np.asarray(surface.total_variance(t_end, np.linspace(-6.0, 6.0, 25) * sd_atm)[0], float)
    sd = min(np.sqrt(max(np.nanmax(w_wide), w_atm, 1e-10)), 3.0 * sd_atm)
    carry = surface.log_forward_at(t_end) - surface.log_spot
    lo = -SPAN_SD * sd + min(carry, 0.0)
    hi = SPAN_SD * sd + max(carry, 0.0)

    ux, inverse = np.unique(np.log(np.where(ok, levels, 1.0) / spot), return_inverse=True)
    ux = np.where(np.abs(ux) < AT_SPOT, 0.0, ux)  # a level at spot (to rounding) is touched now
    inverse = inverse.reshape(levels.shape)
    p_unique = np.full(ux.size, np.nan)
    p_unique[ux == 0.0] = 1.0
    inside = np.flatnonzero((ux > lo) & (ux < hi) & (ux != 0.0))
    sides = [inside[ux[inside] < 0.0], inside[ux[inside] > 0.0]]
    most = ux.size if solved_per_side is None else max(int(solved_per_side), 2)
    picks = [side[_pick(ux[side], sd_atm, most)] for side in sides]
    chosen = np.concatenate(picks)
    far = far_side_probability(surface, t_end, np.concatenate([ux, [-1e-12, 1e-12]]))  # and just at spot
    far, far_spot = far[:-2], far[-2:]
    lev = None
    if chosen.size:
        lev = _lay_out(surface, t_end, ux[chosen], lo, hi, 3.0 * sd_atm + abs(carry),
                       GRID_CONCENTRATION * sd_atm, n_space, n_time)
    return _Plan(out, ok, ux, inverse, p_unique, sides, picks, far, far_spot, lev)


def _finish(plan: _Plan, u_read: np.ndarray | None) -> TouchSolution:
    """P(touch) of every level from the solved ones' u(0, 0) (None: the stepping failed, all NaN)."""
    guarded = 0.0
    p_unique = plan.p_unique
    if plan.levels is not None:
        if u_read is None:
            p_chosen, guarded = np.full(plan.levels.read.size, np.nan), 1.0
        else:
            p_chosen, guarded = np.clip(u_read, 0.0, 1.0), plan.levels.guarded
        at = 0
        for side, pick, f0 in zip(plan.sides, plan.picks, plan.far_spot):
            p_side = p_chosen[at:at + pick.size]
            at += pick.size
            if side.size:
                p_unique[side] = _interp_side(plan.ux[pick], p_side, plan.ux[side], plan.far[pick],
                                              plan.far[side], f0)
    plan.out[plan.ok] = p_unique[plan.inverse[plan.ok]]
    return TouchSolution(plan.out, guarded)


def touch_local_vol(surface: LocalVolSurface, t_end: float, levels, n_space: int = N_SPACE,
                    n_time: int = N_TIME, solved_per_side: int = SOLVED_PER_SIDE) -> TouchSolution:
    """P(the underlying trades at each level at some time in (0, t_end]) under the surface's local vol.

    ``levels``: price units (any shape; duplicates are solved once). At most
    ``solved_per_side`` levels on each side of spot (spread by rank, nearest
    and furthest included) get their own equation; the others are
    interpolated between them (``_interp_side``). ``None``
    solves every level.
    """
    return touch_local_vol_many([(surface, t_end, levels)], n_space, n_time, solved_per_side)[0]


def touch_local_vol_many(cases, n_space: int = N_SPACE, n_time: int = N_TIME,
                         solved_per_side: int | None = SOLVED_PER_SIDE,
                         batch_cells: int = BATCH_CELLS) -> list[TouchSolution]:
    """``touch_local_vol`` for several (surface, t_end, levels) cases, their time stepping run together.

    The same figures as one call per case: cases are stepped side by side in
    one tridiagonal system (``_march``) while the system stays under
    ``batch_cells`` (time steps x unknowns, which bounds the memory: 5 arrays
    of that many floats); a batch whose stepping fails is stepped case by case.
    """
    got: list = [None] * len(cases)
    batch: list[tuple[int, _Plan]] = []

    def run() -> None:
        u = _march([plan.levels for _, plan in batch])
        for at, (i, plan) in enumerate(batch):
            if u is None and len(batch) > 1:
                alone = _march([plan.levels])
                got[i] = _finish(plan, None if alone is None else alone[0])
            else:
                got[i] = _finish(plan, None if u is None else u[at])
        batch.clear()

    for i, (surface, t_end, levels) in enumerate(cases):
        plan = _plan(surface, t_end, levels, n_space, n_time, solved_per_side)
        if isinstance(plan, TouchSolution):
            got[i] = plan
            continue
        if plan.levels is None:
            got[i] = _finish(plan, None)
            continue
        if batch:
            steps = max(plan.levels.steps, *(p.levels.steps for _, p in batch))
            if steps * (plan.levels.unknowns + sum(p.levels.unknowns for _, p in batch)) > batch_cells:
                run()
        batch.append((i, plan))
    if batch:
        run()
    return got
