"""Touch figures of many expiries at once (touch_local_vol_many, expiries_touch, AnnotatedSnapshot.touch_many)
and the upper bound's skipped grid points: the same figures as the plain computations.

Consistency checks [D]: the batched paths must give exactly the numbers of the one-expiry paths, which
the oracle tests (test_touch_local_vol.py, test_touch_bounds.py, test_touch_heston.py) check against
outside references; the bound's pruned minimum is checked against the minimum over every grid point
taken here from its definition (Brown-Hobson-Rogers, module docstring of core/touch_bounds.py).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import chaintriage.core.touch_local_vol as tlv
from chaintriage.core.local_vol import LocalVolSurface
from chaintriage.core.pipeline import PipelineSettings, annotate
from chaintriage.core.svi import SviParams, SviSlices
from chaintriage.core.touch_bounds import _lowest_ratio, touch_bounds
from chaintriage.core.touch_local_vol import touch_local_vol, touch_local_vol_many
from tests.oracles.heston import heston_snapshot
from tests.oracles.ssvi import SKEW_ETA, SKEW_RHO, skew_theta, ssvi_slice

TIMES = np.array([7, 21, 49, 91, 182, 365]) / 365


def _surfaces():
    """One SSVI surface per expiry (Gatheral-Jacquier Thm 4.2 [V], as in test_touch_local_vol.py), built
    from the expiries up to it as the pipeline does: the cases have different time grids."""
    smiles = [ssvi_slice(th, SKEW_RHO, SKEW_ETA) for th in skew_theta(TIMES)]
    fwd = 100.0 * np.exp(0.03 * TIMES)
    return [LocalVolSurface.build(TIMES[:i + 1], fwd[:i + 1], 100.0, smiles[:i + 1]) for i in range(TIMES.size)]


def _levels(t):
    sd = np.sqrt(skew_theta(t))
    return np.round(100.0 * np.exp(sd * np.linspace(-5, 5, 181)), 2)


def _same(a, b):
    return np.array_equal(np.asarray(a), np.asarray(b), equal_nan=True)


@pytest.mark.parametrize("batch_cells", [1, 60_000, 10 ** 8])
def test_many_cases_together_give_the_one_case_figures(batch_cells):
    """[D] Any batch size (one case per system, a few, all) gives exactly the one-case figures."""
    cases = [(s, t, _levels(t)) for s, t in zip(_surfaces(), TIMES)]
    cases.append((cases[2][0], TIMES[2], [np.nan, 0.0, 100.0]))  # nothing to solve: answered directly
    alone = [touch_local_vol(*c) for c in cases]
    together = touch_local_vol_many(cases, batch_cells=batch_cells)
    for a, b in zip(alone, together):
        assert _same(a.p_touch, b.p_touch)
        assert a.guarded_share == b.guarded_share
    assert np.isfinite(together[-2].p_touch).sum() > 150


def test_a_failing_case_is_stepped_alone_and_leaves_the_others_unchanged(monkeypatch):
    """[D] A case whose equation gives no number (made so here by a NaN in its stencil) makes the
    batch step case by case: it gets what it gets alone (NaN inside the grid) and the others keep
    their figures."""
    cases = [(s, t, _levels(t)) for s, t in zip(_surfaces(), TIMES)]
    good = [touch_local_vol(*c) for c in cases]
    lay_out = tlv._lay_out

    def broken(surface, t_end, *args):
        lev = lay_out(surface, t_end, *args)
        if t_end == TIMES[3]:
            lev.a[:, :] = np.nan
        return lev

    monkeypatch.setattr(tlv, "_lay_out", broken)
    got = touch_local_vol_many(cases, batch_cells=10 ** 8)
    bad = touch_local_vol(*cases[3])
    assert _same(got[3].p_touch, bad.p_touch) and got[3].guarded_share == bad.guarded_share
    near = (np.abs(_levels(TIMES[3]) - 100.0) < 10.0) & (_levels(TIMES[3]) != 100.0)  # 100 is spot: 1
    assert near.sum() > 10 and not np.isfinite(bad.p_touch[near]).any()
    for i in (0, 1, 2, 4, 5):
        assert _same(got[i].p_touch, good[i].p_touch)


@pytest.mark.parametrize("puts", [True, False])
def test_skipped_grid_points_never_hold_the_minimum(puts):
    """[D] The blockwise, pruned minimum of price / |y - h| equals the minimum over every grid point on
    the level's side, bit for bit: on a smooth price curve, a non-convex one, one with a NaN price
    (the minimum is NaN where it lies on the level's side) and with levels beyond the grid."""
    rng = np.random.default_rng(7)
    y = np.sort(100.0 * np.exp(rng.uniform(-1.0, 1.0, 801)))
    smooth = np.maximum(y - 100.0, 0.0) + 5.0 * np.exp(-0.5 * ((y - 100.0) / 20.0) ** 2)
    if not puts:
        smooth = smooth[::-1].copy()
    bumpy = smooth * (1.0 + 0.3 * rng.random(y.size))
    holed = smooth.copy()
    holed[500] = np.nan
    h = np.concatenate([rng.uniform(30.0, 280.0, 700), [1.0, 1000.0, y[0], y[-1], y[300]]])
    for price in (smooth, bumpy, holed):
        got = _lowest_ratio(price, y, h, puts)
        gap = (y[None, :] - h[:, None]) if puts else (h[:, None] - y[None, :])
        with np.errstate(divide="ignore", invalid="ignore"):
            want = np.where(gap > 0, price[None, :] / gap, np.inf).min(axis=1)
        assert _same(got, want)
    assert np.isnan(_lowest_ratio(holed, y, h, puts)).any()


def test_bounds_on_a_skewed_smile_match_the_definition():
    """[D] touch_bounds' upper bound on a skewed raw-SVI smile equals the minimum over its whole grid
    computed here from the definition (the grid of core/touch_bounds.py: Y_POINTS over +/- Y_SPAN_SD)."""
    from chaintriage.core import touch_bounds as tb

    smile = SviSlices(SviParams(a=0.01, b=0.1, rho=-0.5, m=0.05, sigma=0.2))
    fwd, spot = 101.0, 100.0
    levels = np.unique(np.round(np.linspace(40.0, 220.0, 1500), 2))
    _, high = touch_bounds(smile, fwd, spot, levels)
    below = levels < spot
    h_eff = np.where(below, levels * max(1.0, fwd / spot), levels * min(1.0, fwd / spot))
    sd = np.sqrt(float(smile.total_variance(0.0)))
    k_h = np.log(h_eff / fwd)
    k = np.linspace(min(-tb.Y_SPAN_SD * sd, k_h.min()), max(tb.Y_SPAN_SD * sd, k_h.max()), tb.Y_POINTS)
    y = fwd * np.exp(k)
    w = np.asarray(smile.total_variance(k), float)
    put, call = tb._undiscounted_black(fwd, y, w, False), tb._undiscounted_black(fwd, y, w, True)
    gap = y[None, :] - h_eff[:, None]
    with np.errstate(divide="ignore", invalid="ignore"):
        want = np.where(below, np.where(gap > 0, put / gap, np.inf).min(axis=1),
                        np.where(gap < 0, call / -gap, np.inf).min(axis=1))
    want = np.clip(want, 0.0, 1.0)
    low, _ = touch_bounds(smile, fwd, spot, levels)
    want = np.where(levels == spot, 1.0, np.fmax(want, low))
    assert _same(high, want)


@pytest.mark.parametrize("workers", [1, 2])
def test_touch_many_gives_the_columns_and_findings_of_touch_one_by_one(workers):
    """[D] On the Heston test chain: touch_many (one thread or two) writes the same touch columns,
    results and findings as touch called expiry by expiry."""
    snap = heston_snapshot()[0]
    settings = PipelineSettings(basis="365")
    one, many = annotate(snap, settings), annotate(snap, settings)
    for e in one.results:
        one.touch(e)
    got = many.touch_many(workers=workers)
    assert set(got) == set(one.results)
    for name in ("p_touch", "p_touch_low", "p_touch_high"):
        assert _same(one.contracts[name].to_numpy(), many.contracts[name].to_numpy())
    assert [str(f) for f in one.findings] == [str(f) for f in many.findings]
    assert one.expiries["findings"].tolist() == many.expiries["findings"].tolist()
    for e, g in one.touched.items():
        assert g.method == got[e].method and g.clipped == got[e].clipped and g.max_cross == got[e].max_cross
    assert many.touch_many() == {e: many.touched[e] for e in many.results}  # kept, not recomputed
    assert many.touch_many(["2001-01-01"]) == {pd.Timestamp("2001-01-01"): None}  # unknown expiry


def test_touch_columns_taken_earlier_do_not_change_with_later_expiries():
    """[C] A touch column read before another expiry is computed keeps its values (the frame's column is
    replaced, never written in place): a view held by the app stays what it was."""
    snap = heston_snapshot()[0]
    a = annotate(snap, PipelineSettings(basis="365"))
    first, second = list(a.results)[:2]
    a.touch(first)
    held = a.contracts["p_touch"]
    values = held.to_numpy().copy()
    a.touch(second)
    assert _same(held.to_numpy(), values)
    assert not _same(a.contracts["p_touch"].to_numpy(), values)  # the new column has the second expiry


def test_puts_and_calls_at_once_are_the_one_at_a_time_prices():
    """[D] touch_bounds' put and call grid prices from one normal-probability call equal, to the bit,
    ``_undiscounted_black`` of each side (deep wings, zero and tiny variances included)."""
    from chaintriage.core import touch_bounds as tb

    y = np.geomspace(1.0, 1000.0, 801)
    for w in (np.full(801, 0.04), np.linspace(0.0, 2.0, 801), np.full(801, 1e-320)):
        put, call = tb._undiscounted_puts_and_calls(100.0, y, w)
        assert _same(put, tb._undiscounted_black(100.0, y, w, False))
        assert _same(call, tb._undiscounted_black(100.0, y, w, True))
