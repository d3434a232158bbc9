"""Non-negative least squares (core.nonnegative_least_squares).

Sources:
- scipy.optimize.nnls [L], used here only as the oracle: the same problems must give the
  same minimum residual (and the same x where the problem has one solution).
- The Karush-Kuhn-Tucker conditions of min ||Ax - b|| subject to x >= 0 [M] (Lawson and
  Hanson 1974, ch. 23): x >= 0, the gradient w = A'(b - Ax) <= 0 where x = 0 and w = 0 where x > 0.
- A worked example [D]: with A = I the answer is max(b, 0), done by hand.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import nnls as scipy_nnls

from chaintriage.core.nonnegative_least_squares import nnls


def _problems(count: int, seed: int = 3):
    rng = np.random.default_rng(seed)
    for k in range(count):
        m, n = int(rng.integers(1, 15)), int(rng.integers(1, 9))
        a = rng.normal(size=(m, n))
        if k % 3 == 0:
            a = np.abs(a)  # like the term structure's: times and 0/1 event columns
        yield a, rng.normal(size=m) * rng.choice([0.01, 1.0, 100.0])


def test_same_minimum_as_scipy():
    """[L] the residual equals scipy's on 600 random problems, the solution too when A has full column rank."""
    for a, b in _problems(600):
        x = nnls(a, b)
        y = scipy_nnls(a, b)[0]
        scale = 1.0 + np.linalg.norm(b)
        assert np.linalg.norm(a @ x - b) <= np.linalg.norm(a @ y - b) + 1e-10 * scale
        if a.shape[0] >= a.shape[1] and np.linalg.matrix_rank(a) == a.shape[1]:
            np.testing.assert_allclose(x, y, atol=1e-8 * scale)


def test_kkt_conditions():
    """[M] x >= 0, w = A'(b - Ax) <= 0 on the zeros and = 0 on the positive entries."""
    for a, b in _problems(300, seed=11):
        x = nnls(a, b)
        w = a.T @ (b - a @ x)
        tol = 1e-9 * (1.0 + np.abs(a).sum() * (1.0 + np.abs(b).sum()))
        assert (x >= 0).all()
        assert (w[x == 0] <= tol).all()
        assert np.allclose(w[x > 0], 0.0, atol=tol)


def test_identity_gives_positive_part():
    """[D] A = I: x = max(b, 0)."""
    b = np.array([1.5, -2.0, 0.0, 3.25])
    np.testing.assert_array_equal(nnls(np.eye(4), b), np.maximum(b, 0.0))


def test_bad_input_raises():
    with pytest.raises(ValueError):
        nnls(np.array([[1.0, np.nan]]), np.array([1.0]))
    with pytest.raises(ValueError):
        nnls(np.ones((3, 2)), np.ones(2))
