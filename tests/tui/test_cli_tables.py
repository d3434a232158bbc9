"""`chaintriage table` and `chaintriage expiries` on a flat-vol model chain written to CSV.

The chain is priced with QuantLib's blackFormula [L] at one vol, so the
command's P(beyond) must be N(d2) (Hull §15.8 [V]) and its implied vols the
model vol.
"""

from __future__ import annotations

import io
import json
import subprocess
import sys

import numpy as np
import pandas as pd
import pytest
from scipy.stats import norm

from chaintriage.tui.cli import main as cli
from tests.core.chain_builders import write_flat_chain_csv

VOL = 0.3
SPOT = 50.0
EXPIRIES = ["2027-01-15", "2027-02-19"]


@pytest.fixture(scope="module")
def chain_csv(tmp_path_factory):
    path = tmp_path_factory.mktemp("chain") / "fltx.csv"
    return write_flat_chain_csv(path, EXPIRIES, 1.0, vol=VOL, spot=SPOT)


def run(capsys, *argv):
    code = cli.main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_table_csv_has_the_documented_columns_and_decimals(chain_csv, capsys):
    path, ts, fwd = chain_csv
    code, out, err = run(capsys, "table", str(path), "--format", "csv", "--basis", "365")
    assert code == 0
    frame = pd.read_csv(io.StringIO(out))
    for col in ("underlying", "expiry", "strike", "kind", "bid", "ask", "mid", "iv", "sigma_distance",
                "p_beyond", "p_beyond_flat", "p_touch", "delta", "breakeven", "p_breakeven", "spread_pct", "flags"):
        assert col in frame.columns
    assert frame["p_beyond"].between(0, 1).all()
    i = frame["expiry"].map({e: j for j, e in enumerate(EXPIRIES)}).to_numpy()
    k = frame["strike"].to_numpy()
    # Out of the money, where the CSV's 12-digit prices keep all the time value.
    otm = np.where(frame["kind"] == "call", k > fwd[i], k < fwd[i]) & (frame["mid"] > 0.02)
    np.testing.assert_allclose(frame.loc[otm, "iv"], VOL, atol=1e-8)
    # N(d2) at the model vol (Hull §15.8 [V]).
    d2 = (np.log(fwd[i] / k) - 0.5 * VOL**2 * ts[i]) / (VOL * np.sqrt(ts[i]))
    expected = np.where(frame["kind"] == "call", norm.cdf(d2), norm.cdf(-d2))
    np.testing.assert_allclose(frame["p_beyond"], expected, atol=1e-6)
    assert "model findings" in err


def test_table_filters_beyond_side_and_expiry(chain_csv, capsys):
    path, *_ = chain_csv
    code, out, _ = run(capsys, "table", str(path), "--format", "json", "--beyond", "1.5",
                       "--side", "puts", "--expiry", EXPIRIES[1], "--quiet")
    assert code == 0
    rows = json.loads(out)
    assert rows, "the filter kept nothing"
    assert {r["kind"] for r in rows} == {"put"}
    assert {r["expiry"] for r in rows} == {EXPIRIES[1]}
    assert all(r["sigma_distance"] <= -1.5 for r in rows)
    # Every put at or beyond -1.5 sigma is there.
    code, out, _ = run(capsys, "table", str(path), "--format", "json", "--quiet")
    allrows = json.loads(out)
    expected = [r for r in allrows if r["kind"] == "put" and r["expiry"] == EXPIRIES[1]
                and r["sigma_distance"] is not None and r["sigma_distance"] <= -1.5]
    assert len(rows) == len(expected)


def test_table_unknown_expiry_is_an_error(chain_csv, capsys):
    path, *_ = chain_csv
    code, out, err = run(capsys, "table", str(path), "--expiry", "2031-01-01", "--quiet")
    assert code == 2
    assert "2031-01-01" in err and EXPIRIES[0] in err


def test_plain_output_never_shows_nan(chain_csv, capsys):
    path, *_ = chain_csv
    code, out, _ = run(capsys, "table", str(path), "--quiet")
    assert code == 0
    assert "nan" not in out.lower() and "inf" not in out.lower()
    assert "P(beyond)" in out.splitlines()[0]


def test_expiries_and_horizon(chain_csv, capsys):
    """Plain range F exp(-sigma^2 T/2 -/+ z sigma sqrt T) (REFERENCE.md §9 [C]) with z = N^{-1}(0.975) at 95% (scipy [L])."""
    path, ts, fwd = chain_csv
    code, out, _ = run(capsys, "expiries", str(path), "--format", "json", "--basis", "365",
                       "--confidence", "95%", "--quiet")
    assert code == 0
    rows = json.loads(out)
    assert [r["expiry"] for r in rows] == EXPIRIES
    z = norm.ppf(0.975)
    for r, t, f in zip(rows, ts, fwd):
        assert r["forward"] == pytest.approx(f, rel=1e-9)
        s = VOL * np.sqrt(t)
        assert r["range_low"] == pytest.approx(f * np.exp(-0.5 * s * s - z * s), rel=1e-6)
        assert r["range_high"] == pytest.approx(f * np.exp(-0.5 * s * s + z * s), rel=1e-6)
        assert r["arbitrage_free"] is True
    code, out, _ = run(capsys, "expiries", str(path), "--format", "csv", "--days", "30", "--basis", "365",
                       "--quiet")
    frame = pd.read_csv(io.StringIO(out))
    assert list(frame.columns) == ["underlying", "days", "forward", "range_low", "range_high", "extrapolated"]
    assert frame["range_low"].iloc[0] < frame["forward"].iloc[0] < frame["range_high"].iloc[0]


def test_command_line_and_app_default_to_the_same_one_sigma_confidence(chain_csv, capsys):
    """No --confidence: the one-sigma level N(1) - N(-1) (REFERENCE.md §2 [L]), z = 1, the app's default too."""
    from chaintriage.tui.settings import Settings

    path, ts, fwd = chain_csv
    code, out, _ = run(capsys, "expiries", str(path), "--format", "json", "--basis", "365", "--quiet")
    assert code == 0
    for r, t, f in zip(json.loads(out), ts, fwd):
        s = VOL * np.sqrt(t)
        assert r["range_low"] == pytest.approx(f * np.exp(-0.5 * s * s - s), rel=1e-6)
        assert r["range_high"] == pytest.approx(f * np.exp(-0.5 * s * s + s), rel=1e-6)
    assert Settings().confidence == pytest.approx(norm.cdf(1) - norm.cdf(-1), abs=1e-15)


def test_rows_left_out_give_exit_status_1(chain_csv, tmp_path, capsys):
    path, *_ = chain_csv
    text = path.read_text().splitlines()
    bad = text + [text[1].replace(",call,", ",straddle,")]
    p = tmp_path / "bad.csv"
    p.write_text("\n".join(bad) + "\n")
    code, out, err = run(capsys, "table", str(p), "--format", "csv")
    assert code == 1
    assert "straddle" in err


def test_unusable_file_gives_exit_status_2(tmp_path, capsys):
    p = tmp_path / "empty.csv"
    p.write_text("")
    code, out, err = run(capsys, "expiries", str(p))
    assert code == 2
    assert "empty.csv" in err


def test_numbers_near_the_float_limit_print_no_numpy_warnings(tmp_path):
    """Prices near 1e308 overflow inside the model; the user sees findings, never numpy's warnings."""
    p = tmp_path / "huge.csv"
    head = "underlying,as_of,spot,expiry,strike,kind,bid,ask\n"
    rows = [f"HUGX,2026-12-01T14:30:00-05:00,1e308,2027-01-15,{k},{kind},{b},{a}\n"
            for k, kind, b, a in (("1e308", "call", "1e306", "2e306"), ("1e308", "put", "1e306", "2e306"),
                                  ("9e307", "call", "1e307", "1.1e307"), ("9e307", "put", "1e305", "2e305"))]
    p.write_text(head + "".join(rows))
    # A real process: under pytest, warnings would be captured by pytest rather than reach stderr.
    proc = subprocess.run([sys.executable, "-m", "chaintriage.tui.cli", "table", str(p)],
                          capture_output=True, text=True, timeout=120)
    code, out, err = proc.returncode, proc.stdout, proc.stderr
    assert code == 0
    assert "RuntimeWarning" not in err and "overflow" not in err
    assert "nan" not in (out + err).lower() and "inf " not in (out + err).lower()
    # every cell stays short: huge numbers in scientific notation, not hundreds of digits
    assert max(len(cell) for cell in out.split()) < 20


def test_table_names_an_asked_expiry_that_no_contract_has(chain_csv, capsys):
    """[C] asking for an expiry the file lacks is an unusable request: status 2, the expiries there listed."""
    path, _, _ = chain_csv
    code, out, err = run(capsys, "table", str(path), "--expiry", "2027-03-19", "--format", "csv")
    assert code == 2 and out == ""
    assert "no contracts expire on 2027-03-19; expiries: 2027-01-15, 2027-02-19" in err
