"""`table`, `expiries` and `check` on edge-case chains written as CSV.

Quotes are priced with QuantLib's blackFormula [L] (a test-only oracle) at
one vol, or set by hand where the edge case is the quote itself (zero bids,
locked and crossed markets, prices below intrinsic). The checks are about
behaviour, from facts of the trade [C] and the documented exit statuses [D]:
usable output for what can be computed, a finding for what cannot, and never
"nan", "inf" or a traceback on stdout or stderr, in any format (json: null for
a missing number; csv: an empty cell).
"""

from __future__ import annotations

import io
import json
import math
import re

import numpy as np
import pandas as pd
import pytest
import QuantLib as ql

from chaintriage.tui.cli import main as cli

HEADER = "underlying,as_of,spot,expiry,strike,kind,bid,ask\n"
AS_OF = "2026-12-01T15:55:00-05:00"  # a Tuesday, five minutes before the close
BAD_TEXT = re.compile(r"(?i)\b(nan|inf|infinity)\b|traceback|exception")


def _black(forward: float, strike: float, t: float, call: bool, vol: float = 0.25) -> float:
    kind = ql.Option.Call if call else ql.Option.Put
    return ql.blackFormula(kind, strike, forward, vol * math.sqrt(max(t, 1e-12)), 1.0)


def _priced(strikes, *, expiry="2027-01-15", t=0.12, spot=100.0, kinds=("call", "put"), half=0.05,
            as_of=AS_OF, keep=lambda k, kind: True) -> str:
    rows = []
    for k in strikes:
        for kind in kinds:
            if not keep(k, kind):
                continue
            p = _black(spot, k, t, kind == "call")
            rows.append(f"QRTZ,{as_of},{spot:.10g},{expiry},{k:.10g},{kind},{max(p - half, 0):.10g},{p + half:.10g}")
    return HEADER + "\n".join(rows) + "\n"


def _fixed(bid: str, ask: str, strikes=range(80, 121, 5)) -> str:
    return HEADER + "".join(f"QRTZ,{AS_OF},100,2027-01-15,{k},{kind},{bid},{ask}\n"
                            for k in strikes for kind in ("call", "put"))


#: name -> (file text, expected exit status, a text some finding must contain, or None)
CHAINS = {
    "minutes_left": (_priced(range(90, 111, 5), expiry="2026-12-01", t=5 / 60 / 24 / 252), 0, None),
    "already_past": (_priced(range(90, 111, 5), expiry="2026-12-01", t=1e-9,
                             as_of="2026-12-01T16:30:00-05:00"), 0, "no time left"),
    "single_strike": (_priced([100.0]), 0, "only one strike"),
    "calls_only": (_priced(np.arange(80, 121, 5.0), kinds=("call",)), 0, "forward = spot"),
    "puts_only": (_priced(np.arange(80, 121, 5.0), kinds=("put",)), 0, "forward = spot"),
    "no_strike_on_both_sides": (_priced(np.arange(80, 121, 5.0), keep=lambda k, kind: (kind == "call") == (k >= 100)),
                                0, "forward = spot"),
    "all_bids_zero": (_fixed("0", "0.5"), 0, "zero bid"),
    "locked": (_fixed("2", "2"), 0, None),
    "crossed": (_fixed("3", "2") + f"QRTZ,{AS_OF},100,2027-01-15,100,call,4,4.2\n", 1, "crossed market"),
    "below_intrinsic": (_fixed("0.01", "0.02"), 0, "no implied vol"),
    "sub_penny": (_priced([0.03, 0.04, 0.05, 0.06, 0.07], spot=0.05, half=0.0001), 0, None),
    "very_large": (_priced([4e7, 4.5e7, 5e7, 5.5e7, 6e7], spot=5e7, half=1000.0), 0, None),
}


@pytest.fixture(scope="module")
def chain_files(tmp_path_factory):
    root = tmp_path_factory.mktemp("edges")
    paths = {}
    for name, (text, _, _) in CHAINS.items():
        paths[name] = root / f"{name}.csv"
        paths[name].write_text(text)
    return paths


def _run(capsys, *argv):
    code = cli.main([str(a) for a in argv])
    out, err = capsys.readouterr()
    assert not BAD_TEXT.search(out), out
    assert not BAD_TEXT.search(err), err
    return code, out, err


def _numbers_are_numbers_or_null(records):
    for rec in records:
        for key, value in rec.items():
            assert not (isinstance(value, float) and not math.isfinite(value)), (key, value)


@pytest.mark.parametrize("name", list(CHAINS))
@pytest.mark.parametrize("target", [["--side", "puts", "--sigma", "1.5"], ["--side", "calls", "--delta", "0.2"],
                                    ["--side", "puts", "--beyond", "0.1"]])
def test_targets_in_every_format(chain_files, capsys, name, target):
    """One row per expiry, the table's exit status, no nan/inf, probabilities in [0, 1]."""
    path = chain_files[name]
    _, status, _ = CHAINS[name]
    code, out, _ = _run(capsys, "targets", path, *target)
    assert code == status and "strike" in out.splitlines()[0]
    assert "nan" not in out.lower() and "inf" not in out.lower()
    code, out, _ = _run(capsys, "targets", path, *target, "--format", "json")
    assert code == status
    records = json.loads(out, parse_constant=lambda c: pytest.fail(f"{c} in json"))
    _numbers_are_numbers_or_null(records)
    assert len({(r["underlying"], r["expiry"]) for r in records}) == len(records)
    for col in ("p_beyond", "p_touch", "p_profit_sell", "p_profit_buy"):
        assert all(0.0 <= r[col] <= 1.0 for r in records if r[col] is not None), col
    code, out, _ = _run(capsys, "targets", path, *target, "--format", "csv")
    assert code == status and len(pd.read_csv(io.StringIO(out))) == len(records)


@pytest.mark.parametrize("name", list(CHAINS))
def test_table_in_every_format(chain_files, capsys, name):
    path = chain_files[name]
    _, status, must = CHAINS[name]
    code, out, err = _run(capsys, "table", path)
    assert code == status
    assert "strike" in out.splitlines()[0]
    if must:
        assert must in err
    code, out, _ = _run(capsys, "table", path, "--format", "json")
    assert code == status
    records = json.loads(out, parse_constant=lambda c: pytest.fail(f"{c} in json"))
    assert records and all(r["strike"] > 0 for r in records)
    _numbers_are_numbers_or_null(records)
    code, out, _ = _run(capsys, "table", path, "--format", "csv")
    assert code == status
    frame = pd.read_csv(io.StringIO(out), keep_default_na=False)
    assert len(frame) == len(records)
    # a missing number is an empty cell, and the same cell is null in json
    for col in ("iv", "p_beyond", "p_touch", "sigma_distance"):
        empty = (frame[col].astype(str) == "").to_numpy()
        nulls = np.array([r[col] is None for r in records])
        assert np.array_equal(empty, nulls), col
        assert pd.to_numeric(frame.loc[~empty, col]).map(math.isfinite).all()
    for col in ("p_beyond", "p_beyond_flat", "p_touch", "p_breakeven"):
        vals = [r[col] for r in records if r[col] is not None]
        assert all(0.0 <= v <= 1.0 for v in vals), col


@pytest.mark.parametrize("name", list(CHAINS))
def test_expiries_and_check(chain_files, capsys, name):
    path = chain_files[name]
    _, status, must = CHAINS[name]
    for fmt in ("plain", "csv", "json"):
        code, out, err = _run(capsys, "expiries", path, "--format", fmt)
        assert code == status
        if fmt == "json":
            records = json.loads(out, parse_constant=lambda c: pytest.fail(f"{c} in json"))
            assert records and all(r["contracts"] > 0 for r in records)
            _numbers_are_numbers_or_null(records)
        elif fmt == "csv":
            assert len(pd.read_csv(io.StringIO(out))) >= 1
    code, out, err = _run(capsys, "expiries", path, "--days", "1", "--days", "400")
    assert code == status and out.count("QRTZ") == 2
    code, out, _ = _run(capsys, "check", path)
    assert code == status and "rows read" in out
    if must and status:
        assert must in out
    code, out, _ = _run(capsys, "check", path, "--format", "json")
    report = json.loads(out, parse_constant=lambda c: pytest.fail(f"{c} in json"))
    assert report["exit_status"] == code == status


def test_expired_expiry_has_blank_figures_and_says_why(chain_files, capsys):
    code, out, err = _run(capsys, "table", chain_files["already_past"], "--format", "json")
    records = json.loads(out)
    assert code == 0 and all(r["iv"] is None and r["p_beyond"] is None for r in records)
    assert "expiry has no time left" in err
    # What can be computed still is: the mid and breakeven are prices, not model outputs.
    assert all(r["mid"] is not None and r["breakeven"] is not None for r in records)


@pytest.mark.parametrize("option, value", [
    ("--expiry", "0001-01-01"),  # once: OutOfBoundsDatetime traceback
    ("--expiry", ""),  # once: AttributeError on NaT
    ("--expiry", "NaT"),
    ("--expiry", "2027-01-15T00:00+01:00"),
    ("--expiry", "2300-01-01"),
    ("--closed", ""),  # once: AttributeError on NaT
    ("--closed", "NaT"),
    ("--closed", "not-a-date"),
])
def test_unusable_date_options_exit_2_with_a_message(chain_files, capsys, option, value):
    code, out, err = _run(capsys, "table", chain_files["single_strike"], option, value)
    assert code == 2 and out == ""
    assert f"{option} {value!r} is not a date" in err


def test_empty_closed_date_exits_2_for_expiries_too(chain_files, capsys):
    code, _, err = _run(capsys, "expiries", chain_files["single_strike"], "--closed", "")
    assert code == 2 and "--closed '' is not a date" in err
