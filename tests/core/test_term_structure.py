"""Term structure, forward vol and event variance (core.term_structure, core.events).

Sources:
- The event model w(T) = sigma_ex^2 T + sum of e_k^2 over events before T is
  common practice [C] (REFERENCE.md s.10); the surfaces below are built from
  it with known sigma_ex and e_k, and the separation must give them back.
- Forward variance between two maturities, (sigma2^2 T2 - sigma1^2 T1) / (T2 - T1),
  is textbook arithmetic [C]; the numbers are worked by hand in the test.
- E|X| = sqrt(2/pi) s for X ~ N(0, s^2): scipy.stats [L].
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from chaintriage.core.events import AFTER_CLOSE, BEFORE_OPEN, Event, carried, parse_event_option
from chaintriage.core.findings import ChainTriageError
from chaintriage.core.pipeline import annotate
from chaintriage.core.term_structure import (
    ABS_MOVE_FACTOR,
    settlement_times,
    snapshot_term_structure,
    term_structure,
)
from chaintriage.core.time_to_expiry import year_fraction

from .chain_builders import AS_OF, build_snapshot, ql_black, year_fractions

EXPIRIES = ["2026-12-04", "2026-12-11", "2026-12-18", "2027-01-08", "2027-01-15", "2027-01-22",
            "2027-02-19", "2027-03-19"]


def _surface(sigma_ex: float, events: list[Event], expiries=EXPIRIES, basis="252"):
    """(t, atm_iv, settlement) of expiries whose ATM total variance follows the event model exactly."""
    exp = pd.DatetimeIndex(expiries)
    t = year_fraction(AS_OF, exp, "pm", basis=basis)
    settle = settlement_times(exp, "pm")
    carry = carried(events, settle)
    return t, settle, carry


def test_known_event_variance_and_ordinary_vol_are_recovered():
    # [C] event model; known sigma_ex = 0.30 and e^2 = 0.0081 (a 9% one-sd move).
    ev = [Event("TSTX", dt.date(2027, 1, 12), AFTER_CLOSE, "results")]
    t, settle, carry = _surface(0.30, ev)
    w = 0.30 ** 2 * t + 0.0081 * carry[:, 0]
    ts = term_structure(EXPIRIES, t, np.sqrt(w / t), settle, ev, as_of=AS_OF, underlying="TSTX")
    assert ts.ordinary_vol == pytest.approx(0.30, abs=1e-6)
    (est,) = ts.events
    assert est.variance == pytest.approx(0.0081, abs=1e-6)
    assert est.move == pytest.approx(0.09, abs=1e-6)
    assert est.method == "fit"
    assert est.first_expiry == pd.Timestamp("2027-01-15")
    np.testing.assert_allclose(ts.table["ex_event_vol"], 0.30, atol=1e-6)
    np.testing.assert_allclose(ts.table["event_variance"], 0.0081 * carry[:, 0], atol=1e-6)
    assert ts.fit_rmse < 1e-4
    assert not [f for f in ts.findings if f.severity == "warning"]


def test_two_events_are_separated_and_unseparable_ones_estimated_together():
    ev = [Event("TSTX", dt.date(2026, 12, 14), BEFORE_OPEN, "trial data"),
          Event("TSTX", dt.date(2027, 1, 12), AFTER_CLOSE, "results")]
    t, settle, carry = _surface(0.25, ev)
    w = 0.25 ** 2 * t + 0.004 * carry[:, 0] + 0.0064 * carry[:, 1]
    ts = term_structure(EXPIRIES, t, np.sqrt(w / t), settle, ev, as_of=AS_OF, underlying="TSTX")
    assert [e.variance for e in ts.events] == pytest.approx([0.004, 0.0064], abs=1e-6)
    # Two events in the same gap between expiries: one joint estimate and a note.
    ev2 = [Event("TSTX", dt.date(2027, 1, 11), AFTER_CLOSE, "a"), Event("TSTX", dt.date(2027, 1, 12), AFTER_CLOSE, "b")]
    t, settle, carry = _surface(0.25, ev2)
    w = 0.25 ** 2 * t + 0.003 * carry[:, 0] + 0.002 * carry[:, 1]
    ts = term_structure(EXPIRIES, t, np.sqrt(w / t), settle, ev2, as_of=AS_OF, underlying="TSTX")
    (joint,) = ts.events
    assert joint.name == "a + b"
    assert joint.variance == pytest.approx(0.005, abs=1e-6)
    assert any("estimated together" in f.reason for f in ts.findings)


def test_one_expiry_after_the_event_uses_the_nearest_earlier_vol():
    # Ordinary vol rises with T; with one carrying expiry the nearest earlier expiry's vol is used.
    exp = EXPIRIES[:5]
    ev = [Event("TSTX", dt.date(2027, 1, 12), AFTER_CLOSE, "results")]
    t, settle, carry = _surface(0.0, ev, exp)
    base = np.array([0.20, 0.21, 0.22, 0.23, 0.24])
    w = base ** 2 * t
    w[4] = 0.23 ** 2 * t[4] + 0.005  # the ordinary part at the nearest earlier expiry's vol
    ts = term_structure(exp, t, np.sqrt(w / t), settle, ev, as_of=AS_OF, underlying="TSTX")
    (est,) = ts.events
    assert est.method == "nearest earlier expiry"
    assert est.variance == pytest.approx(0.005, abs=1e-9)
    assert any("only the 2027-01-15 expiry carries it" in f.reason for f in ts.findings)


def test_no_event_gives_zero_event_variance_and_no_finding():
    t, settle, _ = _surface(0.2, [])
    iv = 0.2 + 0.01 * np.sqrt(t)
    ts = term_structure(EXPIRIES, t, iv, settle, [], as_of=AS_OF, underlying="TSTX")
    assert ts.events == [] and ts.findings == []
    np.testing.assert_allclose(ts.table["event_variance"], 0.0)
    np.testing.assert_allclose(ts.table["ex_event_vol"], iv, rtol=1e-12)


def test_forward_vol_is_the_textbook_arithmetic():
    # [C] sigma_f^2 = (0.20^2 * 2 - 0.18^2 * 1) / (2 - 1) = 0.0476, sigma_f = 0.218174 (by hand).
    exp = ["2027-12-17", "2028-12-15"]
    settle = settlement_times(exp, "pm")
    ts = term_structure(exp, [1.0, 2.0], [0.18, 0.20], settle, as_of=AS_OF)
    assert ts.table["forward_vol"].tolist() == pytest.approx([0.18, 0.2181742], abs=1e-7)


def test_falling_total_variance_is_named_as_calendar_arbitrage():
    exp = ["2027-01-15", "2027-02-19"]
    settle = settlement_times(exp, "pm")
    ts = term_structure(exp, [0.1, 0.2], [0.40, 0.25], settle, as_of=AS_OF, underlying="TSTX")
    (f,) = [f for f in ts.findings if "calendar arbitrage" in f.reason]
    assert "2027-01-15" in f.reason and "2027-02-19" in f.reason
    assert np.isnan(ts.table["forward_vol"].iloc[1])


def test_expected_absolute_move_matches_scipy():
    # [L] scipy.stats: E|X| for X ~ N(0, s^2) is halfnorm(scale=s).mean().
    assert ABS_MOVE_FACTOR == pytest.approx(stats.halfnorm.mean(), abs=1e-15)
    assert 0.07 * ABS_MOVE_FACTOR == pytest.approx(stats.norm(0, 0.07).expect(abs), abs=1e-10)


def test_which_expiries_carry_an_event():
    # A PM settlement on the event day carries news before the open, not after the close;
    # an AM settlement that day carries news before the open.
    day = pd.DatetimeIndex(["2027-01-12", "2027-01-12", "2027-01-13"])
    settle = settlement_times(day, ["pm", "am", "am"])
    both = [Event("X", dt.date(2027, 1, 12), AFTER_CLOSE), Event("X", dt.date(2027, 1, 12), BEFORE_OPEN)]
    np.testing.assert_array_equal(carried(both, settle), [[False, True], [False, True], [True, True]])


def test_past_and_too_late_events_are_findings():
    ev = [Event("TSTX", dt.date(2026, 11, 20), AFTER_CLOSE, "old"), Event("TSTX", dt.date(2027, 6, 1), AFTER_CLOSE, "late"),
          Event("OTHER", dt.date(2027, 1, 12), AFTER_CLOSE, "not ours")]
    t, settle, _ = _surface(0.2, [])
    ts = term_structure(EXPIRIES, t, np.full(t.size, 0.2), settle, ev, as_of=AS_OF, underlying="TSTX")
    reasons = " | ".join(f.reason for f in ts.findings)
    assert "old on 2026-11-20" in reasons and "before the snapshot time" in reasons
    assert "late on 2027-06-01 comes after the last expiry" in reasons
    assert "not ours" not in reasons
    np.testing.assert_allclose(ts.table["event_variance"], 0.0)


def test_event_option_parsing():
    e = parse_event_option("TSTX:2027-01-12:bmo")
    assert (e.underlying, e.date, e.timing) == ("TSTX", dt.date(2027, 1, 12), BEFORE_OPEN)
    assert parse_event_option("TSTX:2027-01-12").timing == AFTER_CLOSE
    for bad in ("TSTX", "TSTX:2027-02-30", "TSTX:12/01/2027", ":2027-01-12", "TSTX:2027-01-12:noon", "a:b:c:d"):
        with pytest.raises(ChainTriageError):
            parse_event_option(bad)


def test_a_priced_chain_gives_back_its_event():
    # End to end: a chain priced with QuantLib's Black formula [L] at a flat vol per expiry whose
    # total variance follows the event model (sigma_ex 0.32, e^2 0.0064) on the 252 basis.
    ev = [Event("TSTX", dt.date(2027, 1, 12), AFTER_CLOSE, "results")]
    exp = pd.DatetimeIndex(EXPIRIES)
    t = year_fraction(AS_OF, exp, "pm", basis="252")
    t_cal = year_fractions(EXPIRIES)
    carry = carried(ev, settlement_times(exp, "pm"))[:, 0]
    vol = np.sqrt((0.32 ** 2 * t + 0.0064 * carry) / t)
    spot, rate = 100.0, 0.04
    fwd = spot * np.exp(rate * t_cal)
    df = np.exp(-rate * t_cal)
    strikes = [np.arange(70.0, 131.0, 2.5)] * len(EXPIRIES)
    # Black-76 on the 252 clock: the vol's variance is vol^2 * t (trading time).
    call = lambda i, k: ql_black(fwd[i], k, vol[i] * np.sqrt(t[i] / t_cal[i]), t_cal[i], df[i], True)
    put = lambda i, k: ql_black(fwd[i], k, vol[i] * np.sqrt(t[i] / t_cal[i]), t_cal[i], df[i], False)
    snap = build_snapshot(EXPIRIES, strikes, call, put, spot=spot, half_spread=0.0005, rate=rate)
    ts = snapshot_term_structure(annotate(snap), ev)
    assert ts.ordinary_vol == pytest.approx(0.32, abs=1e-5)
    assert ts.events[0].variance == pytest.approx(0.0064, abs=1e-6)
