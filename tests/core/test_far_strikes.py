"""Absurd strikes are left out before any fit, so they cannot reshape their expiry.

Prices come from QuantLib's blackFormula [L] at one vol (25 %), so the fitted
smile of a clean expiry is flat and P(beyond) matches the lognormal N(d2)
figure (scipy.stats.norm [L]); one typo strike must not change that.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy.stats import norm

from chaintriage.core.far_strikes import FAR_FACTOR, far_strikes, far_strikes_grouped
from chaintriage.core.findings import LEFT_OUT
from chaintriage.core.pipeline import PipelineSettings, annotate
from chaintriage.core.snapshot import Snapshot
from tests.core.chain_builders import build_snapshot, ql_black, year_fractions

VOL = 0.25
SPOT = 100.0
EXPIRIES = ["2027-01-15", "2027-03-19"]
STRIKES = np.arange(70.0, 131.0, 5.0)


def _snapshot(extra_strike: float | None = None, expiry_index: int = 0) -> Snapshot:
    ts = year_fractions(EXPIRIES)
    fwd = SPOT * np.exp(0.02 * ts)
    dfs = np.exp(-0.03 * ts)
    strikes = [STRIKES.copy() for _ in EXPIRIES]
    if extra_strike is not None:
        strikes[expiry_index] = np.append(strikes[expiry_index], extra_strike)

    def price(i, k, call):
        if k > 1e6 or k < 1e-6:  # a typo row: keep some quote on it
            return 0.5
        return ql_black(fwd[i], k, VOL, ts[i], dfs[i], call)

    return build_snapshot(EXPIRIES, strikes, lambda i, k: price(i, k, True), lambda i, k: price(i, k, False),
                          spot=SPOT)


@pytest.mark.parametrize("typo", [1e300, 1e7, 1e-300, 0.5])
def test_one_absurd_strike_leaves_its_expiry_as_it_was(typo):
    settings = PipelineSettings(basis="365")  # the basis the prices were made on
    clean = annotate(_snapshot(), settings)
    dirty = annotate(_snapshot(typo), settings)
    left = [f for f in dirty.findings if f.severity == LEFT_OUT and f.column == "strike"]
    assert len(left) == 2 and all(f.line is not None and f.file == "model.csv" for f in left)  # call and put
    assert not (dirty.contracts["strike"] == typo).any()
    pd.testing.assert_frame_equal(dirty.expiries[["forward", "atm_iv", "fit_rmse"]],
                                  clean.expiries[["forward", "atm_iv", "fit_rmse"]], rtol=1e-9)
    # and the figures still match the one-vol lognormal [L: N(d2)]
    first = dirty.contracts[dirty.contracts["expiry"] == pd.Timestamp(EXPIRIES[0])]
    t = float(dirty.expiries["t_years"].iloc[0])
    f = float(dirty.expiries["forward"].iloc[0])
    d2 = (np.log(f / first["strike"]) - 0.5 * VOL ** 2 * t) / (VOL * np.sqrt(t))
    calls = first["kind"] == "call"
    np.testing.assert_allclose(first.loc[calls, "p_beyond"], norm.cdf(d2[calls]), atol=2e-3)


def test_the_rule_keeps_every_real_strike_of_a_wide_chain():
    # [C] a long-dated chain of a volatile stock: strikes from 1/20 to 20x spot are listed together.
    strikes = np.array([0.5, 1, 2.5, 5, 10, 20, 50, 100, 200])
    assert not far_strikes(np.zeros(strikes.size), strikes, 10.0).any()


def test_a_wrong_spot_does_not_throw_out_a_sane_expiry():
    strikes = np.arange(4000.0, 6001.0, 50.0)
    assert not far_strikes(np.zeros(strikes.size), strikes, 0.5).any()  # spot in other units


def test_each_expiry_has_its_own_reference():
    expiry = np.array([0] * 5 + [1] * 5)
    strikes = np.array([90, 95, 100, 105, 110, 90, 95, 100, 105, 100 * FAR_FACTOR * 1.01])
    assert far_strikes(expiry, strikes, 100.0).tolist() == [False] * 9 + [True]


@pytest.mark.parametrize("spot", [100.0, 0.5, float("nan")])
def test_grouped_form_gives_the_same_mask_as_the_general_one(spot):
    # [D] far_strikes_grouped reads the median off rows sorted by expiry and strike; far_strikes
    # takes pandas' group median (numpy.median per group [L] agrees): the same mask on chains with
    # typos above and below, even and odd group sizes, repeated strikes and groups with no strike near spot.
    rng = np.random.default_rng(5)
    sizes = [1, 2, 7, 8, 40, 41, 3]
    expiry, strikes = [], []
    for e, n in enumerate(sizes):
        ks = np.round(100.0 * np.exp(rng.normal(0.0, 0.5, n)), 1)
        if n > 2:
            ks[: n // 3] = ks[-1]  # repeated strikes
            ks[-1] = ks[0] * (FAR_FACTOR * 1.5 if e % 2 else 1 / (FAR_FACTOR * 1.5))
        if e == 6:
            ks = ks * 1e5  # a whole expiry far from spot: its own strikes are the reference
        expiry.append(np.full(n, e))
        strikes.append(ks)
    expiry, strikes = np.concatenate(expiry), np.concatenate(strikes)
    order = np.lexsort((strikes, expiry))
    starts = np.flatnonzero(np.r_[True, expiry[order][1:] != expiry[order][:-1]])
    grouped = far_strikes_grouped(starts, strikes[order], spot)
    assert grouped.tolist() == far_strikes(expiry, strikes, spot)[order].tolist()
    assert grouped.any()
    # a strike that is not a finite positive number is left to far_strikes
    assert far_strikes_grouped(starts, np.where(np.arange(strikes.size) == 3, -1.0, strikes[order]), spot) is None
