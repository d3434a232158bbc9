"""Forward and discount factor implied from put-call parity (core/parity_forward.py).

Sources (REFERENCE.md tags): §7 parity case [D]; Hull, Table 11.3 parity
example [M]; QuantLib AnalyticEuropeanEngine prices [L]; robustness and
fallback cases are consistency checks [D] built on the §7 chain.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from chaintriage.core.black76 import price
from chaintriage.core.findings import NOTE, WARNING, ChainTriageError, Finding
from chaintriage.core.parity_forward import ForwardEstimate, implied_forward

# REFERENCE §7 [D]: S=100, r=.05, q=.02, T=.5, strikes 80..120 step 5,
# sigma(K) = .25 - .15k + .3k^2 with k = ln(K/F).
S, R, Q, T = 100.0, 0.05, 0.02, 0.5
F_TRUE = 101.511306  # published to 6 dp
DF_TRUE = 0.97530991  # published to 8 dp
STRIKES = np.arange(80.0, 120.0 + 1e-9, 5.0)


def _chain(spot=S, r=R, q=Q, t=T, strikes=STRIKES):
    f = spot * math.exp((r - q) * t)
    df = math.exp(-r * t)
    k = np.log(strikes / f)
    sig = 0.25 - 0.15 * k + 0.3 * k * k
    return f, df, price(f, strikes, sig, t, df, True), price(f, strikes, sig, t, df, False)


def _quotes(c, p, half=0.05):
    return c - half, c + half, p - half, p + half


# ---------------------------------------------------------------- §7 case [D]

def test_reference_section7_chain_values():
    # REFERENCE §7 [D]: true F and DF, and the sample quotes at K=100.
    f, df, c, p = _chain()
    assert f == pytest.approx(F_TRUE, abs=5e-7)
    assert df == pytest.approx(DF_TRUE, abs=5e-9)
    i = int(np.flatnonzero(STRIKES == 100.0)[0])
    assert c[i] == pytest.approx(7.746802, abs=5e-7)
    assert p[i] == pytest.approx(6.272809, abs=5e-7)


@pytest.mark.parametrize("half", [0.0, 0.01, 0.10])
def test_reference_section7_recovers_forward_and_df(half):
    # REFERENCE §7 [D]: the regression of C-P on K recovers F and DF to 1e-9
    # (the smile cancels out of parity); exact and symmetric-spread quotes.
    f, df, c, p = _chain()
    est = implied_forward(STRIKES, *_quotes(c, p, half), spot=S, t=T)
    assert isinstance(est, ForwardEstimate)
    assert est.method == "parity"
    assert est.forward == pytest.approx(f, abs=1e-9)
    assert est.discount == pytest.approx(df, abs=1e-9)
    assert est.forward == pytest.approx(F_TRUE, abs=5e-7)
    assert est.discount == pytest.approx(DF_TRUE, abs=5e-9)
    assert est.rate_implied == pytest.approx(R, abs=1e-9)
    assert est.strikes_used == 8  # default window of 8 near-the-money strikes
    assert est.strikes_set_aside == 0
    assert est.residual_rms < 1e-9
    assert est.reason == "" and est.findings == ()


def test_reference_section7_two_strike_formula():
    # REFERENCE §7 [D]: with only two strikes, DF = -Δ(C-P)/ΔK and
    # F = K + (C-P)/DF; recovered to 1e-9.
    f, df, c, p = _chain()
    keep = np.isin(STRIKES, [95.0, 105.0])
    cb, ca, pb, pa = _quotes(c, p)
    nan = np.nan
    est = implied_forward(STRIKES, np.where(keep, cb, nan), np.where(keep, ca, nan), pb, pa, spot=S, t=T)
    assert est.method == "parity" and est.strikes_used == 2
    y = c - p
    df_two = -(y[keep][1] - y[keep][0]) / 10.0
    assert est.discount == pytest.approx(df_two, abs=1e-12)
    assert est.discount == pytest.approx(df, abs=1e-9)
    assert est.forward == pytest.approx(f, abs=1e-9)
    assert est.reason == ""
    assert [fd.severity for fd in est.findings] == [NOTE]
    assert "only 2 strikes" in est.findings[0].reason


def test_max_strikes_window_is_near_the_money():
    # [D] A window of 4 takes the 4 strikes closest to where |C-P| is smallest
    # (F ~ 101.5: 95, 100, 105, 110 in some order); still exact.
    f, df, c, p = _chain()
    est = implied_forward(STRIKES, *_quotes(c, p), spot=S, t=T, max_strikes=4)
    assert est.strikes_used == 4
    assert est.forward == pytest.approx(f, abs=1e-9)


# ------------------------------------------------------- Hull Table 11.3 [M]

def test_hull_table_11_3_parity_identity():
    # Hull, Table 11.3 parity-arbitrage example [M]: c=3, S0=31, K=30, r=10%,
    # T=0.25: c + K e^{-rT} = 32.2593, so parity implies p = 1.2593.
    c, s0, k, r, t = 3.0, 31.0, 30.0, 0.10, 0.25
    assert c + k * math.exp(-r * t) == pytest.approx(32.2593, abs=5e-5)
    p = 1.2593
    assert c + k * math.exp(-r * t) - s0 == pytest.approx(p, abs=5e-5)
    # One strike quoted on both sides: F = K + (C-P)/DF with DF from the rate,
    # which must give the no-dividend forward S0 e^{rT} (p rounded to 4 dp).
    est = implied_forward([k], [c], [c], [p], [p], spot=s0, t=t, rate=r)
    assert est.method == "parity-single"
    assert est.strikes_used == 1
    assert est.discount == pytest.approx(math.exp(-r * t), abs=1e-15)
    assert est.forward == pytest.approx(s0 * math.exp(r * t), abs=1e-4)
    assert "only one strike" in est.reason
    assert [f.severity for f in est.findings] == [NOTE]


def test_single_strike_without_rate_uses_df_one_with_warning():
    # [D] One usable strike and no rate: F = K + (C-P), DF = 1, a WARNING.
    f, df, c, p = _chain()
    i = int(np.flatnonzero(STRIKES == 100.0)[0])
    est = implied_forward([100.0], [c[i]], [c[i]], [p[i]], [p[i]], spot=S, t=T)
    assert est.method == "parity-single"
    assert est.discount == 1.0
    assert est.forward == pytest.approx(100.0 + c[i] - p[i], abs=1e-12)
    assert est.findings[0].severity == WARNING


# ---------------------------------------------------- QuantLib oracle [L]

def test_quantlib_european_prices_give_quantlib_forward():
    # QuantLib AnalyticEuropeanEngine [L]: European calls and puts priced by
    # QuantLib with flat r, q, vol; the implied forward and DF must match
    # S e^{(r-q)T} and e^{-rT} of QuantLib's own curves.
    ql = pytest.importorskip("QuantLib")
    today = ql.Date(15, ql.March, 2024)
    ql.Settings.instance().evaluationDate = today
    dc = ql.Actual365Fixed()
    days = 73
    maturity = today + days
    s0, r, q, vol = 57.3, 0.042, 0.011, 0.31
    spot_h = ql.QuoteHandle(ql.SimpleQuote(s0))
    rts = ql.YieldTermStructureHandle(ql.FlatForward(today, r, dc))
    qts = ql.YieldTermStructureHandle(ql.FlatForward(today, q, dc))
    vts = ql.BlackVolTermStructureHandle(ql.BlackConstantVol(today, ql.NullCalendar(), vol, dc))
    engine = ql.AnalyticEuropeanEngine(ql.BlackScholesMertonProcess(spot_h, qts, rts, vts))
    strikes = np.arange(45.0, 70.0 + 1e-9, 2.5)
    quotes = {}
    for kind in (ql.Option.Call, ql.Option.Put):
        vals = []
        for k in strikes:
            opt = ql.VanillaOption(ql.PlainVanillaPayoff(kind, float(k)), ql.EuropeanExercise(maturity))
            opt.setPricingEngine(engine)
            vals.append(opt.NPV())
        quotes[kind] = np.array(vals)
    t = days / 365.0
    c, p = quotes[ql.Option.Call], quotes[ql.Option.Put]
    est = implied_forward(strikes, c - 0.02, c + 0.02, p - 0.02, p + 0.02, spot=s0, t=t)
    ql_forward = s0 * qts.discount(maturity) / rts.discount(maturity)
    assert est.method == "parity"
    assert est.forward == pytest.approx(ql_forward, abs=1e-8)
    assert est.discount == pytest.approx(rts.discount(maturity), abs=1e-10)
    assert est.rate_implied == pytest.approx(r, abs=1e-8)


# ------------------------------------------------------ robustness [D]

@pytest.mark.parametrize("strike,shift", [(100.0, 2.0), (100.0, -2.0), (105.0, 2.0), (90.0, -2.0)])
def test_one_corrupted_quote_is_set_aside(strike, shift):
    # [D] on the §7 chain: one call quote (bid and ask) off by 2.00 must not
    # move F by more than a cent; the bad strike is set aside with a NOTE.
    f, df, c, p = _chain()
    c_bad = c.copy()
    c_bad[STRIKES == strike] += shift
    est = implied_forward(STRIKES, *_quotes(c_bad, p), spot=S, t=T)
    assert est.method == "parity"
    assert abs(est.forward - f) < 0.01
    assert abs(est.discount - df) < 1e-4
    assert est.strikes_set_aside == 1
    assert est.strikes_used == 7
    assert any(fd.severity == NOTE and "set aside 1 strike" in fd.reason and f"({strike:g})" in fd.reason
               for fd in est.findings)


def test_two_corrupted_quotes_in_window():
    # [D] two bad quotes among eight near-the-money strikes: still within a cent.
    f, df, c, p = _chain()
    c_bad, p_bad = c.copy(), p.copy()
    c_bad[STRIKES == 95.0] += 1.5
    p_bad[STRIKES == 110.0] -= 3.0
    est = implied_forward(STRIKES, *_quotes(c_bad, p_bad), spot=S, t=T)
    assert abs(est.forward - f) < 0.01
    assert est.strikes_set_aside == 2


@pytest.mark.parametrize("seed", range(25))
def test_bid_ask_noise_keeps_forward_within_the_half_spread(seed):
    # [D] on the §7 chain: bid = price - a, ask = price + b with a, b drawn
    # uniformly in [0.01, 0.20] per quote, so every mid is off by up to the
    # quote's half-spread. F must stay within the smallest combined half-spread
    # ((call spread + put spread)/2) of the window; no good quote is set aside.
    f, df, c, p = _chain()
    rng = np.random.default_rng(seed)
    a = rng.uniform(0.01, 0.20, size=(4, STRIKES.size))
    cb, ca, pb, pa = c - a[0], c + a[1], p - a[2], p + a[3]
    est = implied_forward(STRIKES, cb, ca, pb, pa, spot=S, t=T)
    half = 0.5 * ((ca - cb) + (pa - pb))
    assert est.method == "parity"
    assert abs(est.forward - f) <= half.min()
    assert abs(est.discount - df) < 0.01
    assert est.strikes_set_aside == 0
    assert 0 < est.residual_rms <= half.max()


def test_short_expiry_noisy_df_keeps_parity_forward():
    # [D] 3 trading days to expiry, strikes 1 apart, noisy quotes: the fitted
    # slope can give an implied rate far outside -5%..25%. The forward is still
    # well determined, so it is kept with DF from the given rate and a NOTE.
    t = 3 / 252
    strikes = np.arange(95.0, 105.0 + 1e-9, 1.0)
    f, df, c, p = _chain(t=t, strikes=strikes)
    # Mids tilted by up to 0.15 so the slope is about -1.06 (DF 1.06: implausible).
    y_shift = -0.06 * (strikes - f)
    cb, ca, pb, pa = _quotes(c + 0.5 * y_shift, p - 0.5 * y_shift, half=0.02)
    est = implied_forward(strikes, cb, ca, pb, pa, spot=S, t=t, rate=R, div_yield=Q)
    assert est.method == "parity"
    assert est.strikes_used >= 6
    assert est.discount == pytest.approx(math.exp(-R * t), abs=1e-15)
    assert abs(est.forward - f) < 0.05
    assert "implausible" in est.reason and "given rate" in est.reason
    assert any(fd.severity == NOTE for fd in est.findings)


def test_negative_rate_long_expiry_is_plausible():
    # [D] r = -1% over 2 years gives DF = 1.0202, above 1.02 but well inside the
    # -5%..25% rate band: parity must be kept, not replaced.
    f, df, c, p = _chain(r=-0.01, q=0.0, t=2.0)
    assert df > 1.02
    est = implied_forward(STRIKES, *_quotes(c, p), spot=S, t=2.0)
    assert est.method == "parity" and est.reason == ""
    assert est.forward == pytest.approx(f, abs=1e-9)
    assert est.rate_implied == pytest.approx(-0.01, abs=1e-10)


@pytest.mark.parametrize("seed", range(10))
def test_given_rate_is_preferred_when_tick_rounded_quotes_cannot_tell(seed):
    # [D] A 30-day expiry, quotes rounded to a 0.05 tick (common practice [C]):
    # the fitted slope's DF wanders by more than the rate uncertainty itself, so
    # a given rate whose DF lies within 2 slope SEs is used, and the forward is
    # re-estimated from the same points. The forward stays within the tick.
    t = 30 / 365
    f, df, c, p = _chain(t=t)
    rng = np.random.default_rng(seed)
    tick = 0.05
    half = rng.integers(1, 4, size=(2, STRIKES.size)) * tick
    cm, pm = np.round(c / tick) * tick, np.round(p / tick) * tick
    cb, ca, pb, pa = cm - half[0], cm + half[0], pm - half[1], pm + half[1]
    plain_est = implied_forward(STRIKES, cb, ca, pb, pa, spot=S, t=t)
    est = implied_forward(STRIKES, cb, ca, pb, pa, spot=S, t=t, rate=R)
    if est.method == "parity-rate":
        assert est.discount == pytest.approx(df, abs=1e-15)
        assert est.rate_implied == pytest.approx(R, abs=1e-12)
    else:  # the quotes said otherwise: the fitted line is kept as it was
        assert (est.forward, est.discount) == (plain_est.forward, plain_est.discount)
    assert abs(est.forward - f) < tick
    assert est.findings == plain_est.findings


def test_rate_far_from_exact_quotes_is_not_used():
    # [D] Exact §7 prices (no noise: the slope SE is ~1e-16) with a given rate 2 points
    # off: the quotes clearly disagree, so parity's own DF stays.
    f, df, c, p = _chain()
    est = implied_forward(STRIKES, *_quotes(c, p), spot=S, t=T, rate=R + 0.02)
    assert est.method == "parity"
    assert est.discount == pytest.approx(DF_TRUE, abs=1e-8)


def test_rate_agreeing_with_exact_quotes_is_used():
    # [D] Exact §7 prices and the true rate: identical DFs, so either way the result is exact.
    f, df, c, p = _chain()
    est = implied_forward(STRIKES, *_quotes(c, p), spot=S, t=T, rate=R)
    assert est.forward == pytest.approx(F_TRUE, abs=1e-6)
    assert est.discount == pytest.approx(DF_TRUE, abs=1e-8)


# ------------------------------------------------------- fallbacks [D]

def test_missing_sides_are_skipped():
    # [D] Strikes missing a side (NaN ask, zero bid, crossed bid > ask) are not used.
    f, df, c, p = _chain()
    cb, ca, pb, pa = (x.copy() for x in _quotes(c, p))
    ca[STRIKES == 95.0] = np.nan
    pb[STRIKES == 100.0] = 0.0
    cb[STRIKES == 105.0] = ca[STRIKES == 105.0] + 0.5  # crossed
    est = implied_forward(STRIKES, cb, ca, pb, pa, spot=S, t=T)
    assert est.method == "parity"
    assert est.strikes_used == 6  # 9 strikes, 3 unusable
    assert est.forward == pytest.approx(f, abs=1e-9)


def test_no_two_sided_strike_falls_back_to_rates():
    # [D] Puts missing everywhere: F = S e^{(r-q)T}, DF = e^{-rT}, a NOTE that says why.
    f, df, c, p = _chain()
    cb, ca, _, _ = _quotes(c, p)
    nan = np.full(STRIKES.size, np.nan)
    est = implied_forward(STRIKES, cb, ca, nan, nan, spot=S, t=T, rate=R, div_yield=Q)
    assert est.method == "rates"
    assert est.forward == pytest.approx(F_TRUE, abs=5e-7)
    assert est.discount == pytest.approx(DF_TRUE, abs=5e-9)
    assert est.rate_implied == pytest.approx(R, abs=1e-15)
    assert est.strikes_used == 0 and math.isnan(est.residual_rms)
    assert "no strike has both the call and the put quoted" in est.reason
    assert [fd.severity for fd in est.findings] == [NOTE]
    assert isinstance(est.findings[0], Finding)


def test_rate_only_fallback_says_dividend_yield_assumed_zero():
    # [D] F = S e^{rT} when only the rate is known; reason names the assumption.
    nan = np.full(3, np.nan)
    est = implied_forward([90.0, 100.0, 110.0], nan, nan, nan, nan, spot=S, t=T, rate=R, div_yield=float("nan"))
    assert est.method == "rates"
    assert est.forward == pytest.approx(S * math.exp(R * T), rel=1e-15)
    assert "no dividend yield given" in est.reason


def test_nothing_usable_and_no_rates_falls_back_to_spot():
    # [D] F = spot, DF = 1 with a WARNING.
    est = implied_forward([], [], [], [], [], spot=S, t=T)
    assert est.method == "spot"
    assert est.forward == S and est.discount == 1.0 and est.rate_implied == 0.0
    assert est.findings[0].severity == WARNING
    assert "no rate or dividend yield" in est.reason


def test_forward_far_from_spot_falls_back():
    # [D] Quotes consistent with parity but for a forward 40% above spot in half
    # a year (carry ~67%/yr, outside +/-50%): not trusted; rates used instead.
    f, df, c, p = _chain(spot=140.0)
    est = implied_forward(STRIKES, *_quotes(c, p), spot=S, t=T, rate=R, div_yield=Q)
    assert est.method == "rates"
    assert "too far from spot" in est.reason


def test_implausible_df_without_plausible_forward_falls_back_to_spot():
    # [D] C-P rising with K (slope +1: DF = -1) and no rates: spot fallback, WARNING.
    strikes = np.array([90.0, 95.0, 100.0, 105.0, 110.0])
    y = strikes - 60.0
    c = np.maximum(y, 0) + 5.0
    p = c - y
    est = implied_forward(strikes, c, c + 0.1, p, p + 0.1, spot=S, t=T)
    assert est.method == "spot"
    assert "implausible" in est.reason
    assert est.findings[0].severity == WARNING


# ------------------------------------------------------- bad input [C]

def test_malformed_input_raises_project_error():
    with pytest.raises(ChainTriageError, match="same length"):
        implied_forward([90.0, 100.0], [1.0], [1.1], [1.0], [1.1], spot=S, t=T)
    with pytest.raises(ChainTriageError, match="spot"):
        implied_forward([100.0], [1.0], [1.1], [1.0], [1.1], spot=0.0, t=T)
    with pytest.raises(ChainTriageError, match="time to expiry"):
        implied_forward([100.0], [1.0], [1.1], [1.0], [1.1], spot=S, t=0.0)
    with pytest.raises(ChainTriageError, match="max_strikes"):
        implied_forward([100.0], [1.0], [1.1], [1.0], [1.1], spot=S, t=T, max_strikes=1)


def test_result_is_frozen():
    est = implied_forward([], [], [], [], [], spot=S, t=T)
    with pytest.raises(AttributeError):
        est.forward = 1.0  # type: ignore[misc]


# ------------------------------------------------- property check [D]

@settings(max_examples=40, deadline=None)
@given(
    spot=st.floats(5.0, 5000.0),
    r=st.floats(-0.01, 0.15),
    q=st.floats(0.0, 0.08),
    t=st.floats(0.02, 3.0),
    atm_vol=st.floats(0.08, 0.9),
    skew=st.floats(-0.4, 0.1),
)
def test_parity_recovers_forward_for_any_smile(spot, r, q, t, atm_vol, skew):
    # [D] Parity is model-free: quotes from any smile give back F and DF.
    f = spot * math.exp((r - q) * t)
    df = math.exp(-r * t)
    strikes = f * np.exp(np.linspace(-0.3, 0.3, 13) * atm_vol * math.sqrt(t))
    k = np.log(strikes / f)
    sig = np.maximum(atm_vol + skew * k + 0.3 * k * k, 0.02)
    c = price(f, strikes, sig, t, df, True)
    p = price(f, strikes, sig, t, df, False)
    est = implied_forward(strikes, c, c, p, p, spot=spot, t=t)
    assert est.method == "parity"
    assert est.forward == pytest.approx(f, rel=1e-9)
    assert est.discount == pytest.approx(df, rel=1e-9)


def test_messages_never_show_nan_or_negative_zero():
    # [C] A locked market (bid = ask) on every strike gives a zero spread and a degenerate
    # fit; prices near the float limit overflow. Messages must read as words, not 'nan'/'-0'.
    from chaintriage.core.parity_forward import _fmt

    assert _fmt(float("nan")) == "undefined" and _fmt(float("inf")) == "undefined"
    assert _fmt(-0.0) == "0"
    k = np.array([1e308, 9e307])
    est = implied_forward(k, np.array([1e306, 5e307]), np.array([1e306, 5e307]),
                          np.array([1e306, 1e306]), np.array([1e306, 1e306]), spot=1e308, t=0.5)
    text = " ".join(f.reason for f in est.findings) + est.reason
    assert "nan" not in text.lower() and "-0 " not in text
