"""The pipeline's row order: by expiry, strike and kind, as numpy's stable ``np.lexsort`` gives it [L].

``_lexsort_by_expiry`` sorts each expiry's run of rows on its own when the expiries come in order;
the order must be exactly lexsort's (ties keep the file's order), with NaN strikes, repeated strikes,
expiries out of order and missing expiries (NaT) alike.
"""

from __future__ import annotations

import numpy as np
import pytest

from chaintriage.core.pipeline import _lexsort_by_expiry


def _case(n: int, seed: int, in_order: bool, nat: bool):
    rng = np.random.default_rng(seed)
    days = rng.integers(0, 12, n)
    if in_order:
        days = np.sort(days)
    expiry = np.datetime64("2026-12-18", "ns") + days.astype("timedelta64[D]")
    if nat:
        expiry[rng.random(n) < 0.05] = np.datetime64("NaT")
    strike = np.round(rng.uniform(50, 150, n) / 5) * 5  # many repeated strikes: ties
    strike[rng.random(n) < 0.03] = np.nan
    kind = rng.integers(0, 3, n)  # three kinds, as factorized codes
    return kind, strike, expiry


@pytest.mark.parametrize("in_order, nat", [(True, False), (False, False), (True, True)])
@pytest.mark.parametrize("n", [0, 1, 7, 5000])
def test_order_is_numpys_lexsort(n, in_order, nat):
    for seed in range(3):
        kind, strike, expiry = _case(n, seed, in_order, nat)
        got = _lexsort_by_expiry(kind, strike, expiry)
        assert got.dtype == np.intp
        assert np.array_equal(got, np.lexsort((kind, strike, expiry)))


def test_bool_kind_key_and_one_expiry():
    rng = np.random.default_rng(5)
    kind = rng.random(300) < 0.5
    strike = rng.integers(0, 20, 300).astype(float)
    expiry = np.full(300, np.datetime64("2027-01-15", "ns"))
    assert np.array_equal(_lexsort_by_expiry(kind, strike, expiry), np.lexsort((kind, strike, expiry)))
