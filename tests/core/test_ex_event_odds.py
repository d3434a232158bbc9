"""P(beyond) and the range on the ex-event vol (core.ex_event_odds).

Sources:
- The Black-76 digital P(S_T > K) = N(d2), d2 = (ln(F/K) - s^2 T/2) / (s sqrt T), computed
  here with scipy.stats.norm [L]; Hull Ex.15.6 gives 0.7349 for S=42, K=40, r=.10,
  s=.20, T=.5 [V] (REFERENCE.md s.1, s.4).
- The range's mass under scipy.stats.lognorm [L].
- A term structure built with a known ex-event vol and event variance (the construction of
  tests/core/test_term_structure.py) [D]: the ex-event vol read back from core.term_structure
  and put into the digital gives the digital at the known vol.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.stats import lognorm, norm

from chaintriage.core.ex_event_odds import ex_event_p_beyond, ex_event_range


def _digital(f, k, t, s, call):
    d2 = (np.log(f / k) - 0.5 * s * s * t) / (s * np.sqrt(t))
    return norm.cdf(d2) if call else norm.cdf(-d2)


def test_against_scipy_black76_digital():
    f = 100.0 * math.exp(0.03 * 0.12)
    k = np.array([70.0, 90.0, 100.0, 110.0, 140.0])
    for call in (True, False):
        got = ex_event_p_beyond(f, k, call, 0.12, 0.38)
        np.testing.assert_allclose(got, _digital(f, k, 0.12, 0.38, call), rtol=1e-12, atol=1e-15)
    assert float(ex_event_p_beyond(42 * math.exp(0.05), 40, True, 0.5, 0.20)) == pytest.approx(0.7349, abs=5e-5)
    bad = ex_event_p_beyond([100, -1, 100], [100, 100, 100], True, [0.1, 0.1, 0.0], [0.3, 0.3, 0.3])
    assert np.isfinite(bad[0]) and np.isnan(bad[1:]).all()


def test_range_holds_the_confidence_under_lognorm():
    f, t, s = 250.0, 0.2, 0.42
    for c in (0.6827, 0.9, 0.99):
        lo, hi = ex_event_range(f, t, s, c)
        law = lognorm(s=s * math.sqrt(t), scale=f * math.exp(-0.5 * s * s * t))
        assert law.cdf(hi) - law.cdf(lo) == pytest.approx(c, abs=1e-10)
        assert law.cdf(lo) == pytest.approx((1 - c) / 2, abs=1e-10)
    assert np.isnan(ex_event_range(f, t, s, 1.0)).all()


def test_ex_event_vol_from_the_term_structure_gives_the_ordinary_digital():
    import datetime as dt

    import pandas as pd

    from chaintriage.core.events import AFTER_CLOSE, Event, carried
    from chaintriage.core.term_structure import settlement_times, term_structure
    from chaintriage.core.time_to_expiry import year_fraction

    as_of = pd.Timestamp("2026-12-01 14:30", tz="America/New_York")
    exp = pd.DatetimeIndex(["2026-12-18", "2027-01-08", "2027-01-15", "2027-01-22", "2027-02-19"])
    settle = settlement_times(exp, "pm")
    t = year_fraction(as_of, exp, "pm", basis="252")
    ev = [Event("TSTX", dt.date(2027, 1, 12), AFTER_CLOSE)]
    carry = carried(ev, settle)[:, 0]
    sig_ex, e2 = 0.30, 0.01
    atm = np.sqrt((sig_ex**2 * t + e2 * carry) / t)
    ts = term_structure(exp, t, atm, settle, ev, as_of=as_of, underlying="TSTX")
    ex = ts.table["ex_event_vol"].to_numpy()
    np.testing.assert_allclose(ex, sig_ex, rtol=1e-6)
    i = 2  # the first expiry after the event
    k = np.array([80.0, 100.0, 125.0])
    got = ex_event_p_beyond(100.0, k, True, t[i], ex[i])
    np.testing.assert_allclose(got, _digital(100.0, k, t[i], sig_ex, True), rtol=1e-5)
    # with the event in, the market's one-vol odds of the far strike are higher
    assert (_digital(100.0, 125.0, t[i], atm[i], True) > got[2])
