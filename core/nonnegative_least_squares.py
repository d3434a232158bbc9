"""Non-negative least squares: min ||A x - b||_2 subject to x >= 0 (Lawson and Hanson's active-set method).

For the small problems of the term structure (a few columns: the ordinary variance rate and one
variance per event group), in numpy alone, so nothing imports scipy.optimize (a tenth to a third
of a second) to separate event variance on the app's first frame.
"""

from __future__ import annotations

import numpy as np


def nnls(a, b, max_iter: int | None = None) -> np.ndarray:
    """The x >= 0 that minimises ||a @ x - b|| (a: m x n, b: m; both finite). Unitless as a and b.

    Lawson and Hanson (Solving Least Squares Problems, 1974, ch. 23, algorithm NNLS): move the
    column with the largest positive gradient into the passive set, solve the unconstrained
    least squares on that set, and step back along the segment whenever a passive variable
    would turn negative. Raises ValueError on non-finite input or when ``max_iter`` (default
    20 n + 20) inner steps do not settle.
    """
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    if a.ndim != 2 or b.ndim != 1 or a.shape[0] != b.shape[0]:
        raise ValueError(f"nnls needs a (m, n) matrix and an m-vector, got {a.shape} and {b.shape}")
    if not (np.isfinite(a).all() and np.isfinite(b).all()):
        raise ValueError("nnls: the matrix and the vector must be finite")
    m, n = a.shape
    x = np.zeros(n)
    if n == 0 or m == 0:
        return x
    limit = 20 * n + 20 if max_iter is None else int(max_iter)
    tol = 10.0 * max(m, n) * np.finfo(float).eps * max(1.0, float(np.abs(a).sum(axis=0).max()))
    passive = np.zeros(n, dtype=bool)
    w = a.T @ (b - a @ x)
    steps = 0
    while not passive.all() and (w[~passive] > tol).any():
        j = int(np.argmax(np.where(passive, -np.inf, w)))
        passive[j] = True
        first = True
        while True:
            steps += 1
            if steps > limit:
                raise ValueError("nnls did not settle within its iteration limit")
            idx = np.flatnonzero(passive)
            s = np.zeros(n)
            s[idx] = np.linalg.lstsq(a[:, idx], b, rcond=None)[0]
            if first and s[j] <= tol:
                # The new column is (numerically) a combination of the passive ones: it cannot enter
                # (Lawson and Hanson's test); leave it out until the gradient is computed again.
                passive[j] = False
                w[j] = 0.0
                s = None
                break
            first = False
            if (s[idx] > 0).all():
                break
            back = passive & (s <= 0)
            alpha = float(np.min(x[back] / (x[back] - s[back])))
            x = x + alpha * (s - x)
            passive &= x > tol
            x[~passive] = 0.0
        if s is None:
            continue
        x = s
        w = a.T @ (b - a @ x)
    return x
