"""Distance of a smile's price outside a quote's bid-ask band (core.quote_bands).

Prices from QuantLib's blackFormula [L]; the vol distance is the price distance over the vega,
which agrees with the implied-vol distance to first order (Taylor, [D]).
"""

from __future__ import annotations

import numpy as np
import pytest
import QuantLib as ql

from chaintriage.core import black76
from chaintriage.core.quote_bands import price_outside, vol_outside


def ql_call(f, k, vol, t, df):
    return ql.blackFormula(ql.Option.Call, k, f, vol * np.sqrt(t), df)


def test_price_outside_the_band():
    # [D] inside: 0; below the bid or above the ask: the gap; a zero or missing bid is no lower edge
    price = np.array([1.0, 0.8, 1.3, 0.01, 0.01, np.nan, 2.0])
    bid = np.array([0.9, 0.9, 0.9, 0.0, np.nan, 0.9, 1.0])
    ask = np.array([1.1, 1.1, 1.1, 0.05, 0.05, 1.1, np.nan])
    out = price_outside(price, bid, ask)
    np.testing.assert_allclose(out[:5], [0.0, 0.1, 0.2, 0.0, 0.0], atol=1e-15)
    assert np.isnan(out[5]) and out[6] == 0.0
    assert price_outside(0.08, 0.0, 0.05) == pytest.approx(0.03)  # a zero-bid quote is an upper bound


@pytest.mark.parametrize("k", [80.0, 100.0, 125.0])
def test_vol_distance_is_the_implied_vol_gap_to_first_order(k):
    # a smile at 20% against a band whose ask is priced at 20% - delta: the distance is about delta [L][D]
    f, t, df, vol, delta = 100.0, 0.25, 0.99, 0.20, 0.002
    price = ql_call(f, k, vol, t, df)
    ask = ql_call(f, k, vol - delta, t, df)
    bid = ql_call(f, k, vol - 3 * delta, t, df)
    vega = float(black76.vega(f, k, vol, t, df))
    got = float(vol_outside(price, vega, bid, ask))
    assert got == pytest.approx(delta, rel=0.05)
    assert float(vol_outside(ask, vega, bid, price)) == 0.0
