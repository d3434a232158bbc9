"""`chaintriage events` and the term-structure columns of `chaintriage expiries`.

The chain is priced with QuantLib's blackFormula [L] at a flat vol per expiry
whose total variance follows the event model w(T) = sigma_ex^2 T + e^2 after
the event (common practice [C], REFERENCE.md s.10), with sigma_ex = 0.32 and
e^2 = 0.0064: the commands must give both back.
"""

from __future__ import annotations

import datetime as dt
import json

import numpy as np
import pandas as pd
import pytest

from chaintriage.core.events import AFTER_CLOSE, Event, carried
from chaintriage.core.term_structure import settlement_times
from chaintriage.core.time_to_expiry import year_fraction
from chaintriage.tui.cli import main as cli
from tests.core.chain_builders import AS_OF, build_snapshot, ql_black, year_fractions

EXPIRIES = ["2026-12-04", "2026-12-11", "2026-12-18", "2027-01-08", "2027-01-15", "2027-01-22", "2027-02-19"]
SPOT = 80.0


@pytest.fixture(scope="module")
def event_chain(tmp_path_factory):
    exp = pd.DatetimeIndex(EXPIRIES)
    t = year_fraction(AS_OF, exp, "pm", basis="252")
    t_cal = year_fractions(EXPIRIES)
    ev = [Event("EVTX", dt.date(2027, 1, 12), AFTER_CLOSE)]
    carry = carried(ev, settlement_times(exp, "pm"))[:, 0]
    vol = np.sqrt((0.32 ** 2 * t + 0.0064 * carry) / t) * np.sqrt(t / t_cal)  # Black-76 on calendar time
    fwd = SPOT * np.exp(0.03 * t_cal)
    df = np.exp(-0.03 * t_cal)
    snap = build_snapshot(
        EXPIRIES, [np.arange(56.0, 104.1, 2.0)] * len(EXPIRIES),
        lambda i, k: ql_black(fwd[i], k, vol[i], t_cal[i], df[i], True),
        lambda i, k: ql_black(fwd[i], k, vol[i], t_cal[i], df[i], False), spot=SPOT, half_spread=0.0005)
    frame = snap.contracts.drop(columns=["source_file", "source_line", "iv", "iv_basis"])
    frame.insert(0, "underlying", "EVTX")
    frame.insert(1, "as_of", AS_OF.isoformat())
    frame.insert(2, "spot", SPOT)
    frame["expiry"] = frame["expiry"].dt.strftime("%Y-%m-%d")
    folder = tmp_path_factory.mktemp("events")
    path = folder / "evtx.csv"
    frame.to_csv(path, index=False, float_format="%.12g")
    return path, folder


def run(capsys, *argv):
    code = cli.main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_events_gives_back_the_priced_move(event_chain, capsys):
    path, _ = event_chain
    code, out, err = run(capsys, "events", str(path), "--event", "EVTX:2027-01-12:amc", "--format", "json", "--quiet")
    assert code == 0, err
    (row,) = json.loads(out)
    assert row["event_variance"] == pytest.approx(0.0064, abs=2e-6)
    assert row["move"] == pytest.approx(0.08, abs=2e-5)
    assert row["expected_abs_move"] == pytest.approx(0.08 * np.sqrt(2 / np.pi), abs=2e-5)
    assert row["move_price"] == pytest.approx(SPOT * 0.08, abs=2e-3)
    assert row["ordinary_vol"] == pytest.approx(0.32, abs=1e-5)
    assert row["first_expiry"].startswith("2027-01-15")
    code, out, _ = run(capsys, "events", str(path), "--event", "EVTX:2027-01-12", "--quiet")
    assert code == 0 and "2027-01-12" in out and "8.0%" in out


def test_expiries_shows_forward_and_ex_event_vols(event_chain, capsys):
    path, folder = event_chain
    events = folder / "events.csv"
    events.write_text("underlying,date,timing,label\nEVTX,2027-01-12,after_close,results\n", encoding="utf-8")
    code, out, err = run(capsys, "expiries", str(path), "--events", str(events), "--format", "csv", "--quiet")
    assert code == 0, err
    frame = pd.read_csv(pd.io.common.StringIO(out))
    np.testing.assert_allclose(frame["ex_event_vol"], 0.32, atol=1e-5)
    after = frame["expiry"] >= "2027-01-15"
    np.testing.assert_allclose(frame.loc[after, "event_variance"], 0.0064, atol=2e-6)
    assert (frame.loc[after, "events"] == "results").all()
    # Without events the forward vol is still there; it jumps across the event.
    code, out, _ = run(capsys, "expiries", str(path), "--format", "csv", "--quiet")
    frame = pd.read_csv(pd.io.common.StringIO(out))
    fv = frame.set_index("expiry")["forward_vol"]
    assert fv["2027-01-15"] > 0.5 and fv["2027-01-22"] == pytest.approx(0.32, abs=1e-4)


def test_bad_event_values_and_files(event_chain, capsys):
    path, folder = event_chain
    code, _, err = run(capsys, "events", str(path), "--event", "EVTX:2027-13-01")
    assert code == 2 and "not a date" in err
    code, _, err = run(capsys, "events", str(path), "--events", str(folder / "missing.csv"))
    assert code == 2 and "missing.csv" in err
    mixed = folder / "mixed.csv"
    mixed.write_text("underlying,date\nEVTX,2027-01-12\nEVTX,someday\n", encoding="utf-8")
    code, out, err = run(capsys, "events", str(path), "--events", str(mixed))
    assert code == 1 and "mixed.csv:3" in err and "someday" in err and "EVTX" in out


def _history_with_known_event_moves(folder):
    """EVTX closes flat except on the sessions after two past after-close releases: +7% after
    2026-07-14 (session 07-15) and -5% after 2026-10-13 (session 10-14) [D: built here]."""
    days = pd.bdate_range("2026-06-01", "2026-11-30")
    ret = np.zeros(days.size)
    ret[days.get_loc(pd.Timestamp("2026-07-15"))] = 0.07
    ret[days.get_loc(pd.Timestamp("2026-10-14"))] = -0.05
    close = 80.0 * np.exp(np.cumsum(ret) - ret.sum())
    path = folder / "evtx_history.csv"
    pd.DataFrame({"underlying": "EVTX", "date": days.strftime("%Y-%m-%d"), "close": close}).to_csv(
        path, index=False, float_format="%.12g")
    return path


def test_events_with_history_gives_the_past_moves_by_hand(event_chain, capsys):
    path, folder = event_chain
    hist = _history_with_known_event_moves(folder)
    args = ["events", str(path), "--event", "EVTX:2027-01-12:amc", "--event", "EVTX:2026-07-14:amc",
            "--event", "EVTX:2026-10-13:amc", "--history", str(hist)]
    code, out, err = run(capsys, *args, "--format", "json")
    assert code in (0, 1), err
    (row,) = json.loads(out)
    assert row["past_events"] == 2
    # mean |move| and root mean square, by hand
    assert row["past_mean_abs_move"] == pytest.approx(0.06, abs=1e-9)
    assert row["past_rms_move"] == pytest.approx(np.sqrt((0.07**2 + 0.05**2) / 2), abs=1e-9)
    assert row["past_moves"] == "-0.0500 +0.0700"
    # the implied move is still the market's (the fixture's e^2 = 0.0064)
    assert row["event_variance"] == pytest.approx(0.0064, rel=1e-3)
    code, out, _ = run(capsys, *args, "--format", "csv", "--last", "1")
    frame = pd.read_csv(__import__("io").StringIO(out))
    assert frame["past_events"].iat[0] == 1 and frame["past_mean_abs_move"].iat[0] == pytest.approx(0.05)
    code, out, err = run(capsys, *args)
    assert "past mean |move|" in out and "6.0%" in out
    assert "1 history file" in err
    # without --history the columns are not there
    code, out, _ = run(capsys, "events", str(path), "--event", "EVTX:2027-01-12:amc", "--format", "json")
    assert "past_events" not in json.loads(out)[0]
