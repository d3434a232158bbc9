"""ndtr, ndtri and erfcx (core/standard_normal.py) against scipy.special and the C library's erfc.

Source tags as in REFERENCE.md: [L] a library used as oracle, [D] derived (consistency only).
scipy.special is imported here only, as the oracle. Its ndtr and erfcx round x^2 before taking
exp(-x^2) (their relative error grows like x^2 * eps in the far tails, up to ~6e-14 at x = -33);
Cody's split keeps ours within about 1e-15 there, as the C library's erfc (math.erfc) confirms.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.special as sp

from chaintriage.core.standard_normal import erfcx, ndtr, ndtri

EPS = np.finfo(float).eps


def rel_err(got, want):
    got, want = np.asarray(got, dtype=float), np.asarray(want, dtype=float)
    same = (got == want) | (np.isnan(got) & np.isnan(want))
    with np.errstate(invalid="ignore"):
        err = np.abs(got - want) / np.abs(want)
    return np.where(same, 0.0, err)


def within(got, want, rtol):
    """Relative error at most ``rtol``; below the smallest normal number (subnormal results, with
    fewer bits) the same error counted against that number, plus the subnormal spacing."""
    got, want = np.asarray(got, dtype=float), np.asarray(want, dtype=float)
    tiny = np.finfo(float).tiny
    normal = np.abs(want) >= tiny
    ok_normal = rel_err(got, want) <= rtol
    ok_sub = np.abs(got - want) <= rtol * tiny + 2 * 5e-324
    return np.all(np.where(normal, ok_normal, ok_sub))


def grid(lo, hi, n=200_001, seed=0):
    rng = np.random.default_rng(seed)
    return np.concatenate([np.linspace(lo, hi, n), rng.uniform(lo, hi, n)])


def test_ndtr_matches_scipy_to_1e15_within_five_sigma():
    # [L] scipy.special.ndtr (Cephes).
    x = grid(-5.0, 5.0)
    assert rel_err(ndtr(x), sp.ndtr(x)).max() < 2e-15


def test_ndtr_tails_match_scipy_within_its_own_exp_rounding():
    # [L] scipy.special.ndtr: beyond five sigma its exp(-x^2/2) carries a relative error of about
    # x^2/2 * eps, so the two may differ by that much, never more. Where Phi is below the smallest
    # normal number scipy gives 0 from x = -37.7 on; ours goes on in subnormals as the C library does
    # (the next test), so the comparison stops there.
    x = grid(-37.5, 38.0)
    allowed = 2e-15 + 1.5 * (0.5 * x * x) * EPS
    assert within(ndtr(x), sp.ndtr(x), allowed)


def test_ndtr_matches_the_c_library_erfc_everywhere():
    # [L] math.erfc (the platform's C library) at the same scaled argument, Phi(x) = erfc(-x/sqrt 2)/2,
    # in both tails: ours stays within ~1e-15 where scipy's drifts by up to 6e-14.
    x = np.concatenate([np.linspace(-38.4, 8.2, 40_001), np.linspace(-1e-3, 1e-3, 1001)])
    want = np.array([0.5 * math.erfc(-v * 0.70710678118654752440) for v in x])
    assert within(ndtr(x), want, 2e-15)


def test_erfcx_matches_scipy():
    # [L] scipy.special.erfcx (the Faddeeva package); for x < 0 it is 2 exp(x^2) - erfcx(-x) with
    # exp(x^2) taken from the rounded square, so there the same allowance as for ndtr's tails.
    x = np.concatenate([grid(-26.6, 30.0), np.logspace(1.5, 300, 2001), [6.71e7, 1e8, 1e300, 3e307]])
    neg = np.minimum(x, 0.0)
    allowed = 2e-15 + 1.5 * neg * neg * EPS
    assert np.all(rel_err(erfcx(x), sp.erfcx(x)) <= allowed)


def test_ndtri_matches_scipy_to_1e15():
    # [L] scipy.special.ndtri, over the centre, both tails down to the smallest subnormal and the
    # region boundaries of both algorithms.
    rng = np.random.default_rng(3)
    p = np.concatenate([
        rng.uniform(size=400_000),
        np.logspace(-323, -1, 40_001),
        1.0 - np.logspace(-16, -1, 40_001),
        np.linspace(0.07, 0.08, 10_001), np.linspace(0.92, 0.93, 10_001),
        np.linspace(0.5 - 1e-9, 0.5 + 1e-9, 2001),
    ])
    assert rel_err(ndtri(p), sp.ndtri(p)).max() < 2e-15


def test_ndtri_inverts_ndtr():
    # [D] Phi(Phi^-1(p)) = p to the accuracy the slope allows.
    p = np.concatenate([np.linspace(1e-12, 1 - 1e-12, 100_001), np.logspace(-300, -12, 1001)])
    x = ndtri(p)
    assert np.all(np.abs(ndtr(x) - p) <= 4e-15 * np.maximum(p, 1e-300) + 2 * EPS * np.abs(x) * np.exp(-0.5 * x * x))


def test_special_values():
    # [L] the values scipy.special gives at the ends of the ranges.
    x = np.array([-np.inf, np.inf, np.nan, 0.0, -0.0, -40.0, 40.0])
    np.testing.assert_array_equal(ndtr(x), sp.ndtr(x))
    p = np.array([0.0, 1.0, -0.1, 1.1, np.nan, 0.5])
    np.testing.assert_array_equal(ndtri(p), sp.ndtri(p))
    assert rel_err(ndtri(5e-324), sp.ndtri(5e-324)) < 1e-15
    z = np.array([-np.inf, np.inf, np.nan, 0.0, -27.0, 1e308])
    np.testing.assert_array_equal(erfcx(z), sp.erfcx(z))


def test_scalars_and_shapes_like_a_ufunc():
    # [D] a scalar gives a numpy float, an array keeps its shape, lists are accepted.
    assert isinstance(ndtr(0.3), np.float64) and isinstance(ndtri(0.3), np.float64)
    assert isinstance(erfcx(0.3), np.float64)
    assert ndtr(np.zeros((3, 4))).shape == (3, 4)
    assert ndtri([[0.2, 0.4]]).shape == (1, 2)
    assert erfcx(np.empty(0)).shape == (0,)


@pytest.mark.parametrize("f, lo, hi", [(ndtr, -40, 40), (erfcx, -27, 40), (ndtri, 0.0, 1.0)])
def test_each_value_is_the_same_bits_whatever_array_it_is_computed_in(f, lo, hi):
    # [D] one implementation, one result: the first expiry computed alone gives the bits the whole
    # chain gives (whatever regions the other elements of an array fall in, whatever its length).
    rng = np.random.default_rng(7)
    x = rng.uniform(lo, hi, 3000)
    whole = f(x)
    alone = np.array([f(v) for v in x[:300]])
    np.testing.assert_array_equal(whole[:300], alone)
    np.testing.assert_array_equal(f(x[1000:2000]), whole[1000:2000])
