"""The product's normal-distribution figures against printed tables.

Values: REFERENCE.md §2 (scipy 1.17.1 norm.cdf/ppf, QuantLib's
CumulativeNormalDistribution agreeing to 1e-15 [L]); the empirical
68-95-99.7 rule (any statistics text, e.g. Hull's normal tables [C]).
The flat digital P(S_T > K) = N(d2) and the plain range
F exp(-sigma^2 T/2 -/+ z sigma sqrt T) (REFERENCE.md §9, the lognormal's central
interval) must reproduce them when the strike or confidence is chosen to hit a
table entry: ln(M/low)/S = ln(high/M)/S = z about the median M = F exp(-S^2/2).
"""

from __future__ import annotations

import numpy as np
import pytest

from chaintriage.core.distribution import prob_above_flat, range_flat

F, SIGMA, T = 100.0, 0.2, 0.25
S = SIGMA * np.sqrt(T)
M = F * np.exp(-0.5 * S * S)  # the lognormal's median, centre of the plain range

# x -> N(x), REFERENCE.md §2 (tol 1e-6 against the exact values).
TABLE = {1.0: 0.841345, 1.28: 0.899727, 1.645: 0.950015, 1.96: 0.975002, 2.0: 0.977250,
         2.326: 0.989991, 2.33: 0.990097, 2.576: 0.995002, 3.0: 0.998650}


@pytest.mark.parametrize("x, nx", sorted(TABLE.items()))
def test_flat_digital_reproduces_the_normal_table(x, nx):
    # Strike with d2 = x: ln(F/K) - S^2/2 = x S.
    k = F * np.exp(-x * S - 0.5 * S * S)
    assert prob_above_flat(F, k, SIGMA, T) == pytest.approx(nx, abs=1e-6)
    k_low = F * np.exp(x * S - 0.5 * S * S)  # d2 = -x
    assert prob_above_flat(F, k_low, SIGMA, T) == pytest.approx(1 - nx, abs=1e-6)


@pytest.mark.parametrize("confidence, z", [(0.6826895, 1.0), (0.9544997, 2.0), (0.9973002, 3.0)])
def test_empirical_rule_confidence_gives_whole_sigmas(confidence, z):
    """68.27% / 95.45% / 99.73% are +/- 1, 2, 3 sigmas (the 68-95-99.7 rule [C], REFERENCE.md §2)."""
    low, high = range_flat(F, SIGMA, T, confidence)
    assert np.log(M / low) / S == pytest.approx(z, abs=1e-6)
    assert np.log(high / M) / S == pytest.approx(z, abs=1e-6)


@pytest.mark.parametrize("confidence, z", [(0.80, 1.281552), (0.90, 1.644854), (0.95, 1.959964),
                                           (0.99, 2.575829)])
def test_two_sided_z_for_common_levels(confidence, z):
    """Two-sided z per level, REFERENCE.md §2 (scipy norm.ppf [L])."""
    low, high = range_flat(F, SIGMA, T, confidence)
    assert np.log(high / M) / S == pytest.approx(z, abs=1e-6)
