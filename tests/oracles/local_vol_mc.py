"""Monte Carlo of the touch probability under a given local volatility (test oracle).

d ln S = (mu(t) - sigma^2/2) dt + sigma(ln(S/F_t), t) dW, Euler steps with the local variance
frozen over each step at its start, and within a step the exact law of a Brownian bridge's
minimum / maximum given both ends (Glasserman, *Monte Carlo Methods in Financial Engineering*,
section 6.4 [M]): min = (a + b - sqrt((b - a)^2 - 2 s2 ln U)) / 2. Antithetic normals; seeded.
The local variance comes from ``LocalVolSurface.local_variance`` (the same local vol the PDE uses),
so this checks the equation's solution, the grid and the interpolation between solved levels.
"""

from __future__ import annotations

import numpy as np


def local_vol_touch_mc(surface, t_end: float, levels, n_paths: int = 100_000, steps_per_year: int = 500,
                       min_steps: int = 100, seed: int = 2024):
    """(P(touch), standard error) per level (price units) before ``t_end`` years."""
    rng = np.random.default_rng(seed)
    levels = np.asarray(levels, float)
    half = n_paths // 2
    n_steps = max(int(np.ceil(steps_per_year * t_end)), min_steps)
    # Steps finer at the start, where the local vol of the first slice is scaled from zero time.
    grid = t_end * (np.arange(n_steps + 1) / n_steps) ** 1.5
    x = np.zeros(2 * half)
    run_min = x.copy()
    run_max = x.copy()
    for a, b in zip(grid[:-1], grid[1:]):
        dt = b - a
        y = x + surface.log_spot - surface.log_forward_at(a)
        var, _ = surface.local_variance(max(a, 1e-12), y)
        z = rng.standard_normal(half)
        z = np.concatenate([z, -z])
        x_new = x + (surface.drift(0.5 * (a + b)) - 0.5 * var) * dt + np.sqrt(var * dt) * z
        s2 = var * dt
        d2 = (x_new - x) ** 2
        u = rng.random((2, 2 * half))
        np.minimum(run_min, 0.5 * (x + x_new - np.sqrt(d2 - 2.0 * s2 * np.log(u[0]))), out=run_min)
        np.maximum(run_max, 0.5 * (x + x_new + np.sqrt(d2 - 2.0 * s2 * np.log(u[1]))), out=run_max)
        x = x_new
    lx = np.log(levels) - surface.log_spot
    hit = np.where(lx < 0, run_min[:, None] <= lx, run_max[:, None] >= lx).astype(float)
    pairs = 0.5 * (hit[:half] + hit[half:])
    return pairs.mean(axis=0), pairs.std(axis=0, ddof=1) / np.sqrt(half)
