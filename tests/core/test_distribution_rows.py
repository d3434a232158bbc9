"""Many smiles at once: SviSlices, quantile_rows and range_smile_rows (core/svi.py, core/distribution.py).

Sources (tags as in REFERENCE.md):
- [D] the row-wise functions take exactly the steps of the one-smile
  functions (quantile, range_smile, prob_above), so they must agree with them.
- [L] REFERENCE §2: two-sided z for 90% is 1.644854 (scipy/QuantLib); with a
  flat smile the smile quantiles are the lognormal ones,
  F exp(-s^2/2 -/+ z s), s = sigma sqrt(T).
- [V] Gatheral & Jacquier (2014) Example 3.1 (Vogt slice, REFERENCE §6):
  butterfly arbitrage, a CDF that is not monotone.
"""

from __future__ import annotations

import numpy as np
import pytest

from chaintriage.core import distribution as dist
from chaintriage.core import svi
from chaintriage.core.smile_fit import fit_smile
from chaintriage.core.svi import SviParams, SviSlices

VOGT = SviParams.from_gj_order(-0.0410, 0.1331, 0.3586, 0.3060, 0.4153)  # [V], T = 1


def _smiles():
    """Fitted smiles of several shapes, a flat one and the Vogt slice (test data)."""
    out = []
    for p, t in (
        (SviParams(a=0.02, b=0.1, rho=-0.6, m=0.05, sigma=0.15), 1.0),
        (SviParams(a=0.001, b=0.03, rho=-0.3, m=0.0, sigma=0.05), 0.25),
        (SviParams(a=1.5e-4, b=0.004, rho=-0.4, m=0.002, sigma=0.01), 2.0 / 252),
        (SviParams(a=0.01, b=0.05, rho=0.2, m=-0.05, sigma=0.2), 0.5),
    ):
        k = np.linspace(-0.5, 0.4, 30) * np.sqrt(t)
        out.append(fit_smile(k, svi.total_variance(p, k), None, t))
    out.append(fit_smile(np.array([-0.1, 0.05, 0.2]), np.array([0.05, 0.04, 0.045]), None, 0.5))  # flat
    k = np.linspace(-1.5, 1.5, 40)
    out.append(fit_smile(k, svi.total_variance(VOGT, k), None, 1.0, arbitrage_refit=False))
    return out


SMILES = _smiles()
FORWARDS = np.array([100.0, 250.0, 37.5, 1000.0, 80.0, 1.0])


def test_stacked_slices_evaluate_like_each_smile():
    # [D] per-row parameters give the same w, w' and w'' as each smile, bit for bit
    rows = SviSlices.stack([s.params for s in SMILES])
    k = np.linspace(-1.0, 1.0, 7)
    for i, s in enumerate(SMILES):
        one = rows.take(np.full(k.size, i))
        np.testing.assert_array_equal(one.total_variance(k), s.total_variance(k))
        np.testing.assert_array_equal(one.dw_dk(k), s.dw_dk(k))
        np.testing.assert_array_equal(one.d2w_dk2(k), s.d2w_dk2(k))


def test_prob_above_with_row_parameters_equals_the_per_smile_call():
    # [D] one call over all rows equals one call per smile
    rows = SviSlices.stack([s.params for s in SMILES])
    strikes = np.outer(FORWARDS, np.array([0.7, 0.9, 1.0, 1.1, 1.4]))
    idx = np.repeat(np.arange(len(SMILES)), strikes.shape[1])
    got = dist.prob_above(rows.take(idx), FORWARDS[idx], strikes.ravel())
    want = np.concatenate([dist.prob_above(s, f, ks) for s, f, ks in zip(SMILES, FORWARDS, strikes)])
    np.testing.assert_array_equal(got, want)


def test_quantile_rows_take_the_same_steps_as_quantile():
    # [D] every row equals quantile() for that smile alone (including the non-monotone Vogt CDF)
    rows = SviSlices.stack([s.params for s in SMILES]).take((slice(None), None))
    levels = np.array([1e-7, 0.05, 0.16, 0.5, 0.84, 0.95, 1 - 1e-7])
    got = dist.quantile_rows(rows, FORWARDS, levels)
    for i, s in enumerate(SMILES):
        np.testing.assert_array_equal(got[i], dist.quantile(s, FORWARDS[i], levels))
    assert np.all(np.diff(got[:-1], axis=1) > 0)  # increasing in the level for the arbitrage-free ones


@pytest.mark.parametrize("confidence", [0.68, 0.9, 0.99])
def test_range_smile_rows_equals_range_smile(confidence):
    rows = SviSlices.stack([s.params for s in SMILES]).take((slice(None), None))
    lo, hi = dist.range_smile_rows(rows, FORWARDS, confidence)
    for i, s in enumerate(SMILES):
        want = dist.range_smile(s, FORWARDS[i], confidence)
        assert (lo[i], hi[i]) == (float(want[0]), float(want[1]))


def test_flat_rows_give_the_lognormal_band():
    # [L] z(90%) = 1.644854 (REFERENCE §2): flat smiles give F exp(-s^2/2 -/+ z s)
    sig = np.array([0.15, 0.3, 0.8])
    t = np.array([0.1, 1.0, 2.0])
    f = np.array([50.0, 100.0, 4000.0])
    w = sig * sig * t
    rows = SviSlices(SviParams(a=w[:, None], b=np.zeros((3, 1)), rho=np.zeros((3, 1)), m=np.zeros((3, 1)),
                               sigma=np.ones((3, 1))))
    lo, hi = dist.range_smile_rows(rows, f, 0.9)
    s = np.sqrt(w)
    np.testing.assert_allclose(lo, f * np.exp(-0.5 * s * s - 1.644854 * s), rtol=2e-6)
    np.testing.assert_allclose(hi, f * np.exp(-0.5 * s * s + 1.644854 * s), rtol=2e-6)


def test_bad_levels_and_forwards_give_nan():
    rows = SviSlices.stack([s.params for s in SMILES[:2]]).take((slice(None), None))
    got = dist.quantile_rows(rows, np.array([100.0, -1.0]), np.array([np.nan, 0.0, 0.5, 1.0]))
    assert np.isnan(got[:, [0, 1, 3]]).all() and np.isnan(got[1]).all() and np.isfinite(got[0, 2])
    lo, hi = dist.range_smile_rows(rows, np.array([100.0, 100.0]), 1.5)
    assert np.isnan(lo).all() and np.isnan(hi).all()
