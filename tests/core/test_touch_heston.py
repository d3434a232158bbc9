"""P(touch) on a chain priced from Heston with QuantLib's analytic engine [L] (tests/oracles/heston.py).

Local and stochastic volatility reprice the same smiles but differ on paths, so the distance to the
Heston Monte Carlo truth is printed for both sides; below spot it must stay within 0.03 (the target).
Always: inside the carry-adjusted model-free bounds (Brown-Hobson-Rogers 2001 [M]), which the
Heston truth must respect too (within 4 SE + 0.002 for the smile fit); monotone away from spot;
within 0.01 of a fine-grid solution on the same fitted surface.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from chaintriage.core.local_vol import LocalVolSurface
from chaintriage.core.pipeline import PipelineSettings, annotate
from chaintriage.core.touch_local_vol import touch_local_vol
from tests.oracles.heston import STRONG_SKEW, heston_mc, heston_snapshot


@pytest.fixture(scope="module")
def heston_chain():
    snap, t, strikes = heston_snapshot()
    return annotate(snap, PipelineSettings(basis="365"), touch=True), t


def _otm_rows(ann, expiry):
    c = ann.contracts
    rows = c[(c["expiry"] == expiry) & np.where(c["kind"] == "put", c["strike"] < STRONG_SKEW.spot,
                                                 c["strike"] > STRONG_SKEW.spot)]
    return rows.sort_values("strike")


def test_touch_within_bounds_and_monotone(heston_chain):
    ann, _ = heston_chain
    for expiry, got in ann.touched.items():
        assert got.method == "local vol", expiry
        rows = _otm_rows(ann, expiry)
        p, lo, hi = (rows[c].to_numpy() for c in ("p_touch", "p_touch_low", "p_touch_high"))
        assert np.all((lo <= p + 1e-12) & (p <= hi + 1e-12)), expiry
        assert got.max_cross < 1e-3, (expiry, got.max_cross)  # clipping only ever fixes grid noise
        below = rows["strike"].to_numpy() < STRONG_SKEW.spot
        assert np.all(np.diff(p[below]) >= -1e-12) and np.all(np.diff(p[~below]) <= 1e-12), expiry


@pytest.mark.slow
@pytest.mark.parametrize("index", [1, 3, 5, 6])
def test_touch_against_heston_monte_carlo(heston_chain, index):
    ann, t = heston_chain
    expiry = list(ann.results)[index]
    rows = _otm_rows(ann, expiry)
    sd = np.sqrt(STRONG_SKEW.theta * t[index])
    targets = STRONG_SKEW.spot * np.exp(sd * np.array([-2.0, -1.2, -0.6, -0.25, 0.25, 0.6, 1.2, 2.0]))
    strikes = rows["strike"].to_numpy()
    picked = np.unique(strikes[np.abs(strikes[:, None] - targets[None, :]).argmin(axis=0)])
    picked = picked[picked != STRONG_SKEW.spot]
    mc = heston_mc(STRONG_SKEW, t[index], picked, n_paths=100_000, seed=11 + index)
    r = rows.set_index("strike").loc[picked]
    diff = r["p_touch"].to_numpy() - mc.p_touch
    below = picked < STRONG_SKEW.spot
    print(f"\n{expiry:%Y-%m-%d} t={t[index]:.3f}: local vol - Heston MC touch, below spot "
          f"{np.round(diff[below], 4).tolist()}, above {np.round(diff[~below], 4).tolist()} (SE <= "
          f"{mc.p_touch_se.max():.4f})")
    assert np.all(np.abs(diff[below]) <= 0.03), (picked[below], diff[below])
    slack = 4 * mc.p_touch_se + 0.002
    assert np.all(r["p_touch_low"].to_numpy() <= mc.p_touch + slack)
    assert np.all(mc.p_touch <= r["p_touch_high"].to_numpy() + slack)


def test_touch_against_fine_grid_on_the_fitted_surface(heston_chain):
    """Default grid (interpolated between solved levels) vs every level solved on a fine grid [D]: 0.01."""
    ann, _ = heston_chain
    res = list(ann.results.values())
    for index in (0, 3, 6):
        e = res[index]
        surface = LocalVolSurface.build([r.t_years for r in res[:index + 1]], [r.forward for r in res[:index + 1]],
                                        STRONG_SKEW.spot, [r.smile for r in res[:index + 1]])
        rows = _otm_rows(ann, e.expiry)
        strikes = rows["strike"].to_numpy()
        fine = touch_local_vol(surface, e.t_years, strikes, n_space=500, n_time=200, solved_per_side=None).p_touch
        got = rows["p_touch"].to_numpy()
        ok = np.isfinite(fine)
        assert np.max(np.abs(got[ok] - fine[ok])) < 0.01, e.expiry
