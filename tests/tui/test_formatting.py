"""Number formatting for reading.

Expected strings follow from the definitions (percent = decimal x 100, rounded
half-even as Python's format does [C]); the sigma distance example uses the
REFERENCE.md §9 value ln(110/100)/(0.2*sqrt(0.25)) = 0.953102 [C].
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
from hypothesis import given, settings
from hypothesis import strategies as st

from chaintriage.tui import formatting as fm

FORMATTERS = (fm.fmt_pct, fm.fmt_vol, fm.fmt_prob, fm.fmt_spread, fm.fmt_price, fm.fmt_strike,
              fm.fmt_sigma, fm.fmt_delta, fm.fmt_count)


def test_percentages():
    assert fm.fmt_vol(0.312) == "31.2%"
    assert fm.fmt_prob(0.081) == "8.1%"
    assert fm.fmt_prob(0.0) == "0.0%"
    assert fm.fmt_prob(1.0) == "100.0%"
    assert fm.fmt_prob(0.0004) == "<0.1%"  # not a false zero
    assert fm.fmt_prob(0.9996) == ">99.9%"  # not a false certainty
    assert fm.fmt_spread(0.052) == "5.2%"
    assert fm.fmt_spread(12.0) == ">999%"
    assert fm.fmt_pct(-1e-6) == "0.0%"  # no "-0.0%"


def test_prices_to_the_tick():
    assert fm.fmt_price(1.2) == "1.20"
    assert fm.fmt_price(1.225) == "1.225"  # a mid between two penny quotes
    assert fm.fmt_price(0.0035) == "0.0035"  # sub-penny
    assert fm.fmt_price(93.77) == "93.77"
    assert fm.fmt_price(-0.001 + 0.001) == "0.00"


def test_strikes():
    assert fm.fmt_strike(95.0) == "95"
    assert fm.fmt_strike(97.5) == "97.5"
    assert fm.fmt_strike(95.0, decimals=1) == "95.0"
    assert fm.strike_decimals([95, 97.5, 100]) == 1
    assert fm.strike_decimals([12.125]) == 3


def test_sigma_distance_with_sign_and_ascii_mode():
    z = math.log(110 / 100) / (0.2 * math.sqrt(0.25))  # 0.953102 [C]
    assert fm.fmt_sigma(z) == "+0.95σ"
    assert fm.fmt_sigma(-1.4849) == "-1.48σ"
    assert fm.fmt_sigma(1.52, ascii_only=True) == "+1.52s"
    assert fm.fmt_sigma(-0.001) == "+0.00σ"


def test_counts_with_thousands_separators():
    assert fm.fmt_count(1234567.0) == "1,234,567"
    assert fm.fmt_count(12) == "12"


def test_fixed_width_right_aligned_and_overflow_is_not_a_wrong_number():
    assert fm.fmt_price(1.2, width=8) == "    1.20"
    assert fm.fmt_prob(0.081, width=6) == "  8.1%"
    assert fm.fmt_price(123456.78, width=6) == "######"
    assert fm.fit("abcdef", 4, numeric=False) == "abc~"


def test_missing_values_show_a_neutral_placeholder():
    for f in FORMATTERS:
        for bad in (None, float("nan"), float("inf"), -float("inf"), np.nan, "x"):
            out = f(bad)
            assert out == "·", (f.__name__, bad, out)
            assert f(bad, ascii_only=True) == "--"
            assert f(bad, width=7) == "      ·"
    assert fm.fmt_timestamp(pd.NaT) == "·"
    assert fm.fmt_date(None, ascii_only=True) == "--"


@settings(max_examples=200, deadline=None)
@given(st.one_of(st.floats(allow_nan=True, allow_infinity=True), st.integers(-10**12, 10**12), st.none()),
       st.booleans(), st.sampled_from([None, 6, 8]))
def test_never_nan_or_inf_text(value, ascii_only, width):
    for f in FORMATTERS:
        out = f(value, width=width, ascii_only=ascii_only).lower()
        assert "nan" not in out and "inf" not in out
        if width is not None:
            assert len(out) == width
        if ascii_only and f is not fm.fmt_sigma:
            assert out.isascii()
    assert fm.fmt_sigma(value, ascii_only=True).isascii()


def test_timestamp_keeps_the_offset():
    ts = pd.Timestamp("2026-12-01 14:30", tz="America/New_York")
    assert fm.fmt_timestamp(ts) == "2026-12-01 14:30 -05:00"
    assert fm.fmt_timestamp("2026-06-01T09:45:00+05:30") == "2026-06-01 09:45 +05:30"
    assert fm.fmt_date(pd.Timestamp("2027-01-15")) == "2027-01-15"


def test_clean_text_strips_escapes_and_controls():
    assert fm.clean_text("QR\x1b[1;31mTZ\x1b[0m") == "QRTZ"
    assert fm.clean_text("a\x1b]0;title\x07b") == "ab"
    assert fm.clean_text("a\x9b31mb") == "ab"  # 8-bit CSI
    assert fm.clean_text("x\u202ey\x00z\x7f") == "xyz"  # bidi override, NUL, DEL
    assert fm.clean_text("one\ntwo\tthree") == "one two three"
    assert fm.clean_text("[bold]kept[/bold]") == "[bold]kept[/bold]"  # markup is just text
    assert fm.clean_text(float("nan")) == ""


def test_absurdly_large_prices_use_scientific_notation():
    # [C] No real underlying trades at 1e12; a 300-digit number helps nobody.
    from chaintriage.tui.formatting import fmt_level, fmt_price, fmt_strike

    assert fmt_price(1.05e307) == "1.05e+307"
    assert fmt_level(-2e15) == "-2e+15"
    assert fmt_strike(9e307) == "9e+307"
    assert fmt_price(999_999.5) == "999999.50"


def test_tiny_values_use_scientific_notation_too():
    # [C] Fixed decimals would print 1e-300 as 0 and make different prices look equal.
    from chaintriage.tui.formatting import fmt_level, fmt_price, fmt_strike

    assert fmt_price(1e-300) == "1e-300"
    assert fmt_price(1.2e-300) != fmt_price(1.5e-300)
    assert fmt_level(3e-7) == "3e-07"
    assert fmt_strike(1e-300) == "1e-300"
    assert fmt_strike(0.0035, decimals=2) == "0.0035"  # not "0.00" in a two-decimal column
    assert fmt_price(0) == "0.00" and fmt_strike(0) == "0"  # zero itself stays plain
    assert fmt_price(0.0035) == "0.0035" and fmt_price(0.05) == "0.05"


def test_greeks_and_returns():
    """[D] four decimals below 1, three below 100, one above; returns as percentages with a cap."""
    assert fm.fmt_greek(-0.011795) == "-0.0118" and fm.fmt_greek(0.065544) == "0.0655"
    assert fm.fmt_greek(12.10548) == "12.105" and fm.fmt_greek(250.0) == "250.0"
    assert fm.fmt_greek(-0.00001) == "0.0000" and fm.fmt_greek(3e15) == "3e+15"
    assert fm.fmt_greek(float("nan")) == fm.placeholder()
    assert fm.fmt_return(0.155650) == "15.6%" and fm.fmt_return(250.0) == ">9999%"
    assert fm.fmt_return(None, width=7) == fm.fit(fm.placeholder(), 7)
