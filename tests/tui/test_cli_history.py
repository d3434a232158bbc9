"""`chaintriage history` and the --history option of `table` and `expiries`.

Oracles: numpy's sample standard deviation of log returns times sqrt(252)
for close-to-close vol (Hull, "estimating volatility from historical data")
[V]; scipy.stats.norm for the lognormal P(beyond) N(d2) at the printed
realised vol (Hull s.15.8) [L]; the exit statuses and the finding-per-row
rule of `check` [D].
"""

from __future__ import annotations

import io
import json
import math
from importlib.resources import files
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy.stats import norm

from chaintriage.tui.cli import main as cli

DEMO = Path(str(files("chaintriage.demo_chains")))
OSPX_CHAIN = DEMO / "ospx_2026-12-01.csv"
OSPX_HISTORY = DEMO / "history" / "ospx_history.csv"


def run(capsys, *argv):
    code = cli.main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def test_history_close_to_close_matches_numpy(capsys):
    code, out, err = run(capsys, "history", OSPX_HISTORY, "--windows", "21,63", "--format", "csv")
    assert code == 0, err
    table = pd.read_csv(io.StringIO(out))
    assert list(table["window"]) == [21, 63]
    close = pd.read_csv(OSPX_HISTORY)["close"].to_numpy()
    r = np.diff(np.log(close))
    for w in (21, 63):
        want = np.std(r[-w:], ddof=1) * math.sqrt(252)
        got = table.loc[table["window"] == w, "close_to_close"].item()
        assert abs(got - want) < 1e-9
        row = table.loc[table["window"] == w].iloc[0]
        assert row["cone_min"] <= row["cone_q25"] <= row["cone_median"] <= row["cone_q75"] <= row["cone_max"]
    assert "1 history file, 1003 rows read, 1003 accepted" in err


def test_history_plain_json_and_bad_input(capsys, tmp_path):
    code, out, _ = run(capsys, "history", OSPX_HISTORY)
    assert code == 0 and "Yang-Zhang" in out and "cone median" in out and "nan" not in out
    code, out, _ = run(capsys, "history", OSPX_HISTORY, "--format", "json", "--basis", "365")
    assert code == 0 and len(json.loads(out)) == 5
    bad = tmp_path / "bad.csv"
    bad.write_text("date,close\n2026-11-02,100\n2026-11-03,-4\n2026-11-04,101\n", encoding="utf-8")
    code, out, err = run(capsys, "history", bad, "--underlying", "QRTZ")
    assert code == 1 and "bad.csv:3" in err and "close '-4' is not positive" in err
    code, out, err = run(capsys, "history", tmp_path / "missing.csv")
    assert code == 2 and "no such file" in err and "Traceback" not in err
    with pytest.raises(SystemExit) as info:  # argparse refuses the option
        run(capsys, "history", OSPX_HISTORY, "--windows", "1")
    assert info.value.code == 2


def test_table_and_expiries_with_history(capsys):
    code, out, err = run(capsys, "expiries", OSPX_CHAIN, "--history", OSPX_HISTORY, "--format", "csv")
    assert code == 0, err
    exp = pd.read_csv(io.StringIO(out))
    assert np.allclose(exp["iv_rv"], exp["atm_iv"] / exp["hist_vol"])
    code, out, err = run(capsys, "table", OSPX_CHAIN, "--history", OSPX_HISTORY, "--format", "csv",
                         "--expiry", "2027-02-19", "--paths", "2000")
    assert code == 0, err
    con = pd.read_csv(io.StringIO(out))
    row = exp.loc[exp["expiry"] == "2027-02-19"].iloc[0]
    sd = con["hist_vol"] * math.sqrt(row["t_years"])
    d2 = (np.log(row["forward"] / con["strike"]) - 0.5 * sd**2) / sd
    want = np.where(con["kind"] == "call", norm.cdf(d2), norm.cdf(-d2))
    assert np.allclose(con["hist_p_beyond"], want, atol=1e-12)
    assert con["boot_p_beyond"].between(0, 1).all() and (con["boot_p_beyond_se"] >= 0).all()


def test_table_history_of_another_underlying_is_a_note(capsys):
    code, out, err = run(capsys, "table", DEMO / "tsbh_2026-12-01.csv", "--history", OSPX_HISTORY,
                         "--format", "csv", "--expiry", "2026-12-18", "--paths", "0")
    assert code == 0
    con = pd.read_csv(io.StringIO(out))
    assert con["hist_p_beyond"].isna().all()
    assert "no price history for 'TSBH'" in err


def test_file_text_is_never_markup_control_or_formula(capsys, tmp_path):
    """An underlying name with escape codes, a formula prefix and newlines stays inert [D]."""
    name = '=HYPERLINK("x")\x1b[2J\u202e'
    p = tmp_path / "evil.csv"
    rows = ["underlying,date,close"] + [f'"{name}",2026-11-{d:02d},{100 + d}' for d in (2, 3, 4, 5, 6, 9)]
    p.write_text("\n".join(rows) + "\n", encoding="utf-8")
    for fmt in ("plain", "csv", "json"):
        code, out, err = run(capsys, "history", p, "--windows", "2,3", "--format", fmt)
        assert code == 0, err
        for text in (out, err):
            assert "\x1b" not in text and "\u202e" not in text
        if fmt == "csv":
            assert "\n=" not in out and ",=" not in out


def test_history_with_past_events_is_ex_event(capsys):
    """--event leaves the session after an after-close release out: numpy on the other returns [C]."""
    args = ("history", OSPX_HISTORY, "--windows", "126", "--format", "csv")
    _, plain_out, _ = run(capsys, *args)
    code, out, err = run(capsys, *args, "--event", "OSPX:2026-10-13", "--event", "OSPX:2026-07-14:amc")
    assert code == 0, err
    got = pd.read_csv(io.StringIO(out))["close_to_close"].item()
    assert got < pd.read_csv(io.StringIO(plain_out))["close_to_close"].item()
    hist = pd.read_csv(OSPX_HISTORY)
    r = pd.Series(np.diff(np.log(hist["close"].to_numpy())), index=hist["date"].iloc[1:]).iloc[-126:]
    want = r.drop(["2026-10-14", "2026-07-15"]).std(ddof=1) * math.sqrt(252)
    assert abs(got - want) < 1e-9
    assert "2 event day(s) left out" in err
