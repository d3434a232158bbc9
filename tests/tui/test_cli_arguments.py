"""Command-line argument checks and the --days horizon past the last expiry (the CLI's contract [D]).

[C] argparse exits 2 on a bad option value and names the option.
"""

from __future__ import annotations

import pytest

from chaintriage.tui.cli import main as cli

HEADER = "underlying,as_of,spot,expiry,strike,kind,bid,ask"
AS_OF = "2026-03-02T15:30:00-05:00"


@pytest.fixture
def chain(tmp_path):
    rows = [HEADER]
    for k in range(80, 121, 5):
        c, p = max(100 - k, 0) + 1.0, max(k - 100, 0) + 1.0
        rows.append(f"QRTZ,{AS_OF},100,2026-03-20,{k},call,{c:.2f},{c + 0.2:.2f}")
        rows.append(f"QRTZ,{AS_OF},100,2026-03-20,{k},put,{p:.2f},{p + 0.2:.2f}")
    path = tmp_path / "chain.csv"
    path.write_text("\n".join(rows) + "\n", encoding="utf-8")
    return str(path)


def run(capsys, *argv):
    try:
        code = cli.main(list(argv))
    except SystemExit as exc:  # argparse refusing an option
        code = exc.code
    out, err = capsys.readouterr()
    return code, out, err


@pytest.mark.parametrize("value", ["-5", "0", "-0", "1e9", "inf", "nan", "1_0", "5,5"])
def test_days_must_be_a_plain_positive_number_and_the_message_says_so(capsys, chain, value):
    code, _, err = run(capsys, "expiries", chain, f"--days={value}")
    assert code == 2
    assert "must be zero or more" not in err
    assert "--days" in err and ("more than zero" in err or "not a plain number" in err)


@pytest.mark.parametrize("value", ["50%%", "1_0", "0.5%%", "nan", "inf%", "%"])
def test_confidence_takes_one_percent_sign_at_most(capsys, chain, value):
    code, _, err = run(capsys, "expiries", chain, f"--confidence={value}")
    assert code == 2 and "--confidence" in err


def test_confidence_as_a_percentage_still_works(capsys, chain):
    code, out, _ = run(capsys, "expiries", chain, "--confidence=95%")
    assert code == 0 and "QRTZ" in out


@pytest.mark.parametrize("option", ["--expiry", "--closed"])
@pytest.mark.parametrize("word", ["now", "today", "tomorrow", "2026-03-20T10:00"])
def test_words_pandas_reads_as_times_are_not_dates(capsys, chain, option, word):
    command = "table"
    code, out, err = run(capsys, command, chain, option, word)
    assert code == 2
    assert f"{option} {word!r} is not a date" in err


def test_beyond_minus_zero_is_zero(capsys, chain):
    code, out, err = run(capsys, "table", chain, "--beyond=-0")
    assert code == 0


def test_a_horizon_past_the_last_expiry_is_marked(capsys, chain):
    code, out, err = run(capsys, "expiries", chain, "--days", "5", "--days", "100000"[:4], "--format", "csv")
    assert code == 0
    lines = out.splitlines()
    assert lines[0].split(",")[-1] == "extrapolated"
    assert lines[1].endswith(",False") and lines[2].endswith(",True")  # 5 days inside, 1000 past 2026-03-20
    assert "past the last expiry" in err and "1000 days" in err


def test_a_far_strike_is_left_out_by_table_with_status_1(capsys, chain, tmp_path):
    text = open(chain, encoding="utf-8").read() + f"QRTZ,{AS_OF},100,2026-03-20,1e300,call,0.5,0.6\n"
    p = tmp_path / "typo.csv"
    p.write_text(text, encoding="utf-8")
    code, out, err = run(capsys, "table", str(p), "--format", "csv")
    assert code == 1
    assert "e+300" not in out and ":20 [strike]" in err and "left out before the fit" in err
