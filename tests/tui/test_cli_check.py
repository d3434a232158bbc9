"""`chaintriage check`: report layout, streams and exit status (the CLI's own contract [D]).

Underlyings are invented (QRTZ, VELM).
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

from chaintriage.tui.cli import main as cli

HEADER = "underlying,as_of,spot,expiry,strike,kind,bid,ask"
AS_OF = "2026-03-02T15:30:00-05:00"
DATA = Path(__file__).resolve().parent.parent / "data"


def row(und="QRTZ", strike="100", kind="call", bid="2.10", ask="2.20", as_of=AS_OF) -> str:
    return f"{und},{as_of},100.5,2026-03-20,{strike},{kind},{bid},{ask}"


def csv_file(tmp_path: Path, name: str, *rows: str, header: str = HEADER) -> Path:
    p = tmp_path / name
    p.write_text("\n".join([header, *rows]) + "\n", encoding="utf-8")
    return p


def run(capsys, *argv: str) -> tuple[int, str, str]:
    code = cli.main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_clean_file_exits_0(tmp_path, capsys):
    p = csv_file(tmp_path, "clean.csv", row(), row(kind="put"))
    code, out, err = run(capsys, "check", str(p))
    assert code == 0
    assert err == ""
    assert out.splitlines() == [
        f"{p}: 2 rows read, 2 accepted, 0 left out",
        "1 file, 2 rows read, 2 accepted, 0 warnings, 0 left out",
    ]


def test_warnings_only_still_exit_0(tmp_path, capsys):
    p = csv_file(tmp_path, "warn.csv", row(bid="0", ask="0.05"))
    code, out, _ = run(capsys, "check", str(p))
    assert code == 0
    assert "  warnings (1)\n    line 2 [bid] QRTZ 2026-03-20: zero bid on the 100 call\n" in out
    assert out.splitlines()[-1] == "1 file, 1 rows read, 1 accepted, 1 warnings, 0 left out"


def test_repeated_warnings_are_grouped_with_count_and_line_ranges(tmp_path, capsys):
    """Zero bids on lines 2-6 and 8 (puts) and on line 7 (a call): one line per expiry, topic and side."""
    puts = [row(strike=str(k), kind="put", bid="0", ask="0.05") for k in (80, 81, 82, 83, 84)]
    p = csv_file(tmp_path, "zeros.csv", *puts, row(strike="120", kind="call", bid="0", ask="0.05"),
                 row(strike="79", kind="put", bid="0", ask="0.05"), row(strike="100", kind="put"))
    code, out, _ = run(capsys, "check", str(p))
    assert code == 0
    lines = out.splitlines()
    assert lines[1] == "  warnings (7, in 2 groups)"
    assert lines[2] == "    lines 2-6, 8 [bid] QRTZ 2026-03-20: zero bid on puts (6 rows, strikes 79 to 84)"
    assert lines[3] == "    line 7 [bid] QRTZ 2026-03-20: zero bid on the 120 call"
    assert lines[-1] == "1 file, 8 rows read, 8 accepted, 7 warnings, 0 left out"
    code, out, _ = run(capsys, "check", str(p), "--format", "json")
    doc = json.loads(out)["files"][0]
    # json keeps every finding with its own line, and gives the groups beside them
    assert [f["line"] for f in doc["findings"]] == [2, 3, 4, 5, 6, 7, 8]
    assert doc["findings"][0]["reason"] == "zero bid on the 80 put"
    assert [(g["topic"], g["count"], g["lines"], g["strikes"]) for g in doc["finding_groups"]] == [
        ("zero bid on puts", 6, [[2, 6], [8, 8]], [79.0, 84.0]), ("zero bid on calls", 1, [[7, 7]], [120.0, 120.0])]


def test_left_out_rows_are_grouped_but_every_line_is_shown(tmp_path, capsys):
    rows = [row(strike=str(k), bid="x") for k in range(100, 130)]
    p = csv_file(tmp_path, "bad.csv", *rows[::2], row(strike="99"), *rows[1::2])
    code, out, _ = run(capsys, "check", str(p))
    assert code == 1
    lines = out.splitlines()
    assert lines[1] == "  left out (30, in 1 group)"
    assert lines[2] == ("    lines 2-16, 18-32 [bid] QRTZ 2026-03-20: bid is not a number (30 rows)")


def test_left_out_rows_exit_1_and_are_grouped_by_severity(tmp_path, capsys):
    p = csv_file(tmp_path, "mixed.csv", row(), row(strike="-5"), row(kind="put", bid="0", ask="0.1"),
                 row(strike="105", bid="3", ask="2"))
    code, out, err = run(capsys, "check", str(p))
    assert code == 1
    assert err == ""
    lines = out.splitlines()
    assert lines[0] == f"{p}: 4 rows read, 2 accepted, 2 left out"
    assert lines[1] == "  left out (2)"
    assert lines[2] == "    line 3 [strike] QRTZ 2026-03-20: strike '-5' is not positive"
    assert lines[3] == "    line 5 QRTZ 2026-03-20: crossed market: bid 3.00 is above ask 2.00"
    assert lines[4] == "  warnings (1)"
    assert lines[5].startswith("    line 4 [bid]")
    assert lines[-1] == "1 file, 4 rows read, 2 accepted, 1 warnings, 2 left out"


def test_unusable_file_exits_2_message_on_stderr(tmp_path, capsys):
    good = csv_file(tmp_path, "good.csv", row())
    bad = tmp_path / "empty.csv"
    bad.write_text("")
    code, out, err = run(capsys, "check", str(good), str(bad), str(tmp_path / "missing.csv"))
    assert code == 2
    assert err.splitlines() == [f"chaintriage: {bad}: is empty", f"chaintriage: {tmp_path / 'missing.csv'}: no such file"]
    assert f"{bad}: unusable" in out
    assert out.splitlines()[-1] == "3 files (2 unusable), 1 rows read, 1 accepted, 0 warnings, 0 left out"


def test_file_with_no_usable_row_still_lists_its_reasons(tmp_path, capsys):
    p = csv_file(tmp_path, "allbad.csv", row(strike="x"), row(strike="0"))
    code, out, err = run(capsys, "check", str(p))
    assert code == 2
    assert "no usable row" in err
    assert f"{p}: unusable (2 rows read, 0 accepted)" in out
    assert "line 2 [strike] QRTZ 2026-03-20: strike 'x' is not a number" in out
    assert out.splitlines()[-1] == "1 file (1 unusable), 2 rows read, 0 accepted, 0 warnings, 2 left out"


def test_json_format(tmp_path, capsys):
    p = csv_file(tmp_path, "j.csv", row(), row(strike="-5"))
    bad = tmp_path / "nothing.csv"
    code, out, err = run(capsys, "check", "--format", "json", str(p), str(bad))
    assert code == 2
    doc = json.loads(out)
    assert [f["path"] for f in doc["files"]] == [str(p), str(bad)]
    first, second = doc["files"]
    assert (first["usable"], first["rows_read"], first["rows_accepted"], first["rows_left_out"]) == (True, 2, 1, 1)
    assert first["findings"][0]["line"] == 3 and first["findings"][0]["severity"] == "left-out"
    assert first["snapshots"][0] == {"underlying": "QRTZ", "as_of": AS_OF, "spot": 100.5,
                                     "contracts": 1, "expiries": 1}
    assert second["usable"] is False and second["error"] == "no such file"
    assert doc["summary"] == {"files": 2, "unusable": 1, "rows_read": 2, "rows_accepted": 1,
                              "warnings": 0, "left_out": 1}
    assert doc["exit_status"] == 2
    assert "no such file" in err


def test_overrides_and_column_map(capsys):
    code, out, _ = run(capsys, "check", str(DATA / "foreign_export.csv"),
                       "--columns", str(DATA / "columns_example.toml"))
    assert code == 1  # the impossible 06/31 expiry
    assert "    line 7 [Expiration] VELM: expiry '06/31/2026' is not a possible date in the format %m/%d/%Y\n" in out
    code, out, _ = run(capsys, "check", str(DATA / "foreign_export.csv"),
                       "--columns", str(DATA / "columns_example.toml"),
                       "--underlying", "QRTZ", "--spot", "50", "--as-of", "2026-05-04T10:00:00-04:00",
                       "--format", "json")
    doc = json.loads(out)
    snap = doc["files"][0]["snapshots"][0]
    assert (snap["underlying"], snap["spot"], snap["as_of"]) == ("QRTZ", 50.0, "2026-05-04T10:00:00-04:00")


@pytest.mark.parametrize(
    "argv, words",
    [
        (["--as-of", "2026-05-04T10:00"], "no UTC offset"),
        (["--columns", "/nonexistent/map.toml"], "no such file"),
    ],
)
def test_bad_options_exit_2(tmp_path, capsys, argv, words):
    p = csv_file(tmp_path, "c.csv", row())
    code, out, err = run(capsys, "check", str(p), *argv)
    assert code == 2
    assert out == ""
    assert err.startswith("chaintriage: ") and words in err


def test_bad_spot_is_a_usage_error(tmp_path, capsys):
    p = csv_file(tmp_path, "c.csv", row())
    with pytest.raises(SystemExit) as info:
        cli.main(["check", str(p), "--spot", "-3"])
    assert info.value.code == 2
    assert "must be a positive number" in capsys.readouterr().err


def test_control_characters_are_escaped_in_the_report(tmp_path, capsys):
    p = csv_file(tmp_path, "ctl.csv", row(und="QR\x1b[2JTZ"), row(und="QR\x1b[2JTZ", strike="-1"))
    code, out, _ = run(capsys, "check", str(p))
    assert code == 1
    assert "\x1b" not in out
    assert "QR\\x1b[2JTZ" in out


@pytest.mark.parametrize("argv", [["--help"], ["check", "--help"]])
def test_help_has_examples(capsys, argv):
    with pytest.raises(SystemExit) as info:
        cli.main(argv)
    assert info.value.code == 0
    out = capsys.readouterr().out
    assert "examples:" in out and "chaintriage check" in out


def test_subcommands_registered_through_the_command_list():
    parser = cli.build_parser()
    sub = next(a for a in parser._actions if a.dest == "command")
    assert {"open", "check", "table", "expiries", "events", "targets"} <= set(sub.choices)
    assert [c.name for c in cli.COMMANDS] == list(sub.choices)
    # only the wanted command gets its options: `check --format` exists, `table --side` not yet
    wanted = cli.build_parser("check")
    sub = next(a for a in wanted._actions if a.dest == "command")
    assert "--format" in sub.choices["check"].format_help()
    assert "--side" not in sub.choices["table"].format_help()
    everything = cli.build_parser("*")
    sub = next(a for a in everything._actions if a.dest == "command")
    assert "--side" in sub.choices["table"].format_help()


def test_no_arguments_opens_the_app(monkeypatch):
    seen = []
    import chaintriage.tui.app as app_module

    monkeypatch.setattr(app_module, "open_app", lambda paths: seen.append(list(paths)) or 0)
    assert cli.main([]) == 0
    assert seen == [[]]


def test_console_script_runs_check(tmp_path):
    """The installed entry point, in a subprocess: data on stdout, exit status 1."""
    p = csv_file(tmp_path, "s.csv", row(), row(strike="zero"))
    proc = subprocess.run([sys.executable, "-m", "chaintriage.tui.cli", "check", str(p)],
                          capture_output=True, text=True, timeout=60)
    assert proc.returncode == 1
    assert proc.stdout.splitlines()[-1] == "1 file, 2 rows read, 1 accepted, 0 warnings, 1 left out"
    assert proc.stderr == ""
