"""`chaintriage targets` and the new `table` columns, on a flat-vol model chain written to CSV.

The chain is priced with QuantLib's blackFormula [L] at one vol, so:
- the put chosen for a sigma target sits next to K = F e^{-z sigma sqrt T}
  (REFERENCE.md s.9 convention [C]);
- P(profit) at the bid is the lognormal tail beyond the seller's breakeven
  (scipy.stats.lognorm [L]);
- the chosen contract is the one `table` shows nearest the target [D], and
  the exit status is the one `table` gives on the same files [D].
"""

from __future__ import annotations

import io
import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy.stats import lognorm

from chaintriage.tui.cli import main as cli
from chaintriage.tui.cli.targets import TARGETS_COLUMNS
from tests.core.chain_builders import write_flat_chain_csv

VOL = 0.3
SPOT = 50.0
EXPIRIES = ["2027-01-15", "2027-02-19", "2027-04-16"]
DEMO = Path(__file__).resolve().parents[2] / "demo_chains"


@pytest.fixture(scope="module")
def chain_csv(tmp_path_factory):
    path = tmp_path_factory.mktemp("chain") / "fltx.csv"
    return write_flat_chain_csv(path, EXPIRIES, 0.5, vol=VOL, spot=SPOT, half_spread=0.01)


def run(capsys, *argv):
    code = cli.main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_targets_csv_puts_by_sigma(chain_csv, capsys):
    """[C] K = F exp(-z sigma sqrt T) for a put z sigmas out; the listed strike within half a step of it."""
    path, ts, fwd = chain_csv
    code, out, err = run(capsys, "targets", str(path), "--side", "puts", "--sigma", "1.5", "--format", "csv",
                         "--basis", "365")
    assert code == 0 and "model findings" in err
    frame = pd.read_csv(io.StringIO(out))
    assert list(frame.columns) == TARGETS_COLUMNS[:1] + ["as_of"] + TARGETS_COLUMNS[1:]
    assert list(frame["expiry"]) == EXPIRIES and (frame["kind"] == "put").all()
    exact = fwd * np.exp(-1.5 * VOL * np.sqrt(ts))
    assert np.all(np.abs(frame["strike"] - exact) <= 0.25 + 1e-9)
    np.testing.assert_allclose(frame["strike_below"], frame["strike"] - 0.5)
    np.testing.assert_allclose(frame["strike_above"], frame["strike"] + 0.5)
    # [L] scipy lognormal: a put seller at the bid ends ahead when S_T > strike - bid.
    s = VOL * np.sqrt(ts)
    p = [lognorm(s=s[i], scale=fwd[i] * np.exp(-0.5 * s[i] ** 2)).sf(k - b)
         for i, (k, b) in enumerate(zip(frame["strike"], frame["bid"]))]
    np.testing.assert_allclose(frame["p_profit_sell"], p, atol=2e-6)


def test_targets_json_calls_by_delta_match_the_table(chain_csv, capsys):
    """[D] the chosen call is the one whose |delta| in `table` is nearest the target, per expiry."""
    path, _, _ = chain_csv
    code, out, _ = run(capsys, "targets", str(path), "--side", "calls", "--delta", "0.16", "--format", "json")
    assert code == 0
    rows = json.loads(out)
    assert [r["expiry"] for r in rows] == EXPIRIES
    code, out, _ = run(capsys, "table", str(path), "--side", "calls", "--format", "csv")
    table = pd.read_csv(io.StringIO(out))
    for r in rows:
        sub = table[table["expiry"] == r["expiry"]]
        best = sub.iloc[int(np.argmin(np.abs(sub["delta"].abs() - 0.16)))]
        assert r["strike"] == best["strike"] and r["delta"] == pytest.approx(best["delta"], rel=1e-9)
        assert r["p_profit_buy"] == pytest.approx(best["p_profit_buy"], rel=1e-9)


def test_targets_plain_by_beyond_percent(chain_csv, capsys):
    path, _, _ = chain_csv
    code, out, _ = run(capsys, "targets", str(path), "--side", "puts", "--beyond", "10%")
    assert code == 0
    lines = out.splitlines()
    assert lines[0].split()[:3] == ["underlying", "expiry", "cdays"] and "P(profit)" in lines[0]
    assert len(lines) == 2 + len(EXPIRIES) and all("FLTX" in line for line in lines[2:])
    assert "nan" not in out.lower()


@pytest.mark.parametrize("argv", [
    ["--sigma", "1"],                                   # no side
    ["--side", "puts"],                                 # no target
    ["--side", "puts", "--sigma", "1", "--delta", "0.2"],  # two targets
    ["--side", "puts", "--delta", "1.5"],
    ["--side", "puts", "--beyond", "0"],
    ["--side", "both", "--sigma", "1"],
    ["--side", "puts", "--sigma", "nan"],
])
def test_targets_bad_options_exit_2(chain_csv, capsys, argv):
    path, _, _ = chain_csv
    with pytest.raises(SystemExit) as exc:
        cli.main(["targets", str(path), *argv])
    assert exc.value.code == 2


@pytest.mark.parametrize("files", [["fltx"], [str(DEMO / "messy_export.csv")], ["missing.csv"]])
def test_targets_exit_status_is_the_tables(chain_csv, capsys, files, tmp_path):
    """[D] 0 all rows usable, 1 rows left out, 2 unusable: as `table` on the same files."""
    path, _, _ = chain_csv
    files = [str(path) if f == "fltx" else (str(tmp_path / f) if f == "missing.csv" else f) for f in files]
    table_code, _, _ = run(capsys, "table", *files)
    targets_code, _, _ = run(capsys, "targets", *files, "--side", "calls", "--sigma", "1")
    assert targets_code == table_code
    name = Path(files[0]).name
    assert targets_code == {"messy_export.csv": 1, "missing.csv": 2}.get(name, 0)


def test_table_carries_the_greek_and_trade_columns(chain_csv, capsys):
    """[D] csv and json carry every new column; plain shows them with their headings."""
    from chaintriage.core.pipeline import GREEK_COLUMNS, TRADE_COLUMNS

    path, _, _ = chain_csv
    _, out, _ = run(capsys, "table", str(path), "--format", "csv", "--expiry", EXPIRIES[0])
    frame = pd.read_csv(io.StringIO(out))
    assert list(frame.columns[-len(GREEK_COLUMNS) - len(TRADE_COLUMNS):]) == GREEK_COLUMNS + TRADE_COLUMNS
    two_sided = frame["bid"] > 0
    np.testing.assert_allclose(frame.loc[two_sided, "sell_premium"], frame.loc[two_sided, "bid"])
    _, out, _ = run(capsys, "table", str(path), "--expiry", EXPIRIES[0])
    head = out.splitlines()[0]
    for heading in ("gamma", "theta", "vega", "P(profit) sell", "P(profit) buy", "a year sell", "BE move buy"):
        assert heading in head
