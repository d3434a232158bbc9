"""The command line in a hostile environment: a non-UTF-8 locale, a reader that goes away.

[C] POSIX: with LC_ALL=C (and Python's UTF-8 mode and locale coercion off)
stdout is ASCII; a closed pipe gives EPIPE on write. The exit status is the
command's own contract [D]: 0 usable, 1 rows left out, 2 unusable.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys

import pytest

HEADER = "underlying,as_of,spot,expiry,strike,kind,bid,ask"
AS_OF = "2026-03-02T15:30:00-05:00"
NAME = "Tëssborne Ω"


def _chain(tmp_path, name: str = NAME, bad_rows: int = 1):
    rows = [HEADER]
    for k in range(80, 121, 5):
        c, p = max(100 - k, 0) + 1.0, max(k - 100, 0) + 1.0
        rows.append(f"{name},{AS_OF},100,2026-03-20,{k},call,{c:.2f},{c + 0.2:.2f}")
        rows.append(f"{name},{AS_OF},100,2026-03-20,{k},put,{p:.2f},{p + 0.2:.2f}")
    rows += [f"{name},{AS_OF},100,2026-03-20,-{i + 1},put,1,2" for i in range(bad_rows)]
    path = tmp_path / "chain.csv"
    path.write_text("\n".join(rows) + "\n", encoding="utf-8")
    return path


def _ascii_env() -> dict[str, str]:
    env = {k: v for k, v in os.environ.items() if not k.startswith(("LC_", "LANG", "PYTHONIO"))}
    env.update(LC_ALL="C", PYTHONUTF8="0", PYTHONCOERCECLOCALE="0")
    return env


COMMANDS = [
    ["check"], ["check", "--format", "json"], ["table"], ["table", "--format", "csv"],
    ["table", "--format", "json"], ["expiries"], ["expiries", "--format", "json"], ["expiries", "--days", "5"],
]


@pytest.mark.parametrize("command", COMMANDS, ids=" ".join)
def test_a_non_utf8_locale_escapes_what_it_cannot_print(tmp_path, command):
    path = _chain(tmp_path)
    done = subprocess.run([sys.executable, "-m", "chaintriage.tui.cli", command[0], str(path), *command[1:]],
                          capture_output=True, env=_ascii_env(), timeout=120)
    err = done.stderr.decode("ascii", "replace")
    assert "Traceback" not in err and "UnicodeEncodeError" not in err, err[-800:]
    assert done.returncode == 1, err[-800:]  # one row left out: the data's own status
    out = done.stdout.decode("ascii")  # ASCII only, never a raw byte the locale cannot show
    if "json" in command:
        data = json.loads(out)  # still valid JSON: \\u escapes, not \\x
        assert NAME in json.dumps(data, ensure_ascii=False)
    elif command != ["expiries", "--days", "5"]:
        assert "T\\xebssborne" in out or "T\\u00ebssborne" in out, out[:400]


@pytest.mark.parametrize("command", [["check"], ["table"], ["check", "--format", "json"]], ids=" ".join)
def test_a_reader_going_away_keeps_the_status_the_data_deserves(tmp_path, command):
    path = _chain(tmp_path, name="QRTZ", bad_rows=4000)  # a report far larger than a pipe's buffer
    proc = subprocess.Popen([sys.executable, "-m", "chaintriage.tui.cli", command[0], str(path), *command[1:]],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    proc.stdout.readline()
    proc.stdout.close()  # like `| head -1`
    err = proc.stderr.read().decode("utf-8", "replace")
    status = proc.wait(timeout=120)
    assert "Traceback" not in err and "Exception ignored" not in err, err[-800:]
    assert status == 1  # rows were left out, whatever happened to the reader
