"""Model-free touch bounds (core/touch_bounds.py): Brown, Hobson & Rogers (2001) [M], REFERENCE.md s.10."""

from __future__ import annotations

import numpy as np
import pytest

from chaintriage.core.svi import SviParams, SviSlices
from chaintriage.core.touch import prob_touch
from chaintriage.core.touch_bounds import touch_bounds


def test_reference_sanity_case():
    """REFERENCE.md s.10 [C]: flat 25%, T=.5, F=S=100, H=90: 0.305860 <= GBM 0.580151 <= 0.665228."""
    smile = SviSlices(SviParams.flat(0.25 ** 2 * 0.5))
    low, high = touch_bounds(smile, 100.0, 100.0, [90.0])
    assert low[0] == pytest.approx(0.305860, abs=5e-7)
    assert high[0] == pytest.approx(0.665228, abs=5e-7)
    gbm = prob_touch(100.0, 90.0, 0.5, 0.25, 0.0)
    assert gbm == pytest.approx(0.580151, abs=5e-7)
    assert low[0] <= gbm <= high[0]


@pytest.mark.parametrize("r,q", [(0.0, 0.0), (0.08, 0.0), (0.0, 0.08), (0.05, 0.02)])
def test_gbm_touch_inside_carry_adjusted_bounds(r, q):
    """With carry, the reflection-principle touch of GBM [M, REFERENCE s.3] lies inside the bounds
    applied to the moving level (module docstring) at every level; the bounds are model-free, so any
    model that prices the same flat smile must respect them."""
    spot, sigma, t = 100.0, 0.3, 0.75
    fwd = spot * np.exp((r - q) * t)
    smile = SviSlices(SviParams.flat(sigma * sigma * t))
    levels = np.concatenate([np.linspace(50, 99, 50), np.linspace(101, 200, 50)])
    low, high = touch_bounds(smile, fwd, spot, levels)
    gbm = prob_touch(spot, levels, t, sigma, r - q)
    assert np.all(low <= gbm + 1e-12)
    assert np.all(gbm <= high + 1e-12)
    assert np.all(low <= high)


def test_bounds_monotone_and_at_spot():
    """Both bounds fall away from spot on each side [C]; a level at spot gives (1, 1)."""
    smile = SviSlices(SviParams(a=0.01, b=0.1, rho=-0.5, m=0.05, sigma=0.2))
    levels = np.arange(60.0, 141.0, 1.0)
    low, high = touch_bounds(smile, 101.0, 100.0, levels)
    below, above = levels < 100, levels > 100
    for arr in (low, high):
        assert np.all(np.diff(arr[below]) >= -1e-12)
        assert np.all(np.diff(arr[above]) <= 1e-12)
        assert arr[levels == 100][0] == 1.0


def test_bad_levels_give_nan():
    smile = SviSlices(SviParams.flat(0.02))
    low, high = touch_bounds(smile, 100.0, 100.0, [np.nan, -5.0, 0.0])
    assert np.isnan(low).all() and np.isnan(high).all()
