"""Hostile text in snapshot files never reaches the terminal or a spreadsheet as commands.

Underlying names carry Rich markup, ANSI/OSC terminal sequences (ECMA-48 [C]:
ESC [ ... m colours, ESC ] 8 ;; hyperlinks, the one-byte CSI U+009B), BEL,
backspace, carriage return, bidirectional overrides, and spreadsheet formula
prefixes. Plain output and check reports show them escaped or literally;
`table --format csv` neutralises formula prefixes in text cells with a
leading single quote (OWASP ASVS 5.0 1.2.10 [V], as ``shortlist.neutralise_formula``)
while numbers stay numbers; json escapes them.
"""

from __future__ import annotations

import csv
import io
import json
import math
import re

import pytest
import QuantLib as ql

from chaintriage.tui.cli import main as cli
from chaintriage.tui.cli.check import json_text

AS_OF = "2026-12-01T15:55:00-05:00"
HOSTILE = [
    "[bold]QRTZ[/bold]",
    "[link=http://x.invalid]QRTZ[/link]",
    "\x1b[31mQRTZ\x1b[0m",
    "\x1b]8;;http://x.invalid\x07QRTZ\x1b]8;;\x07",
    "\x9b2JQRTZ",
    "QR\bTZ",
    "QRTZ\rVELM",
    "Q\x07RTZ",
    "\u202eZTRQ",
    '=HYPERLINK("http://x.invalid","QRTZ")',
    "+1+2",
    "-2+3",
    "@SUM(A1:A2)",
    "=cmd|' /C calc'!A0",
]
#: What a terminal would act on: C0 controls other than tab and newline, DEL, C1 controls, bidi overrides.
RAW_CONTROL = re.compile("[\x00-\x08\x0b-\x1f\x7f-\x9f\u202a-\u202e\u2066-\u2069]")


@pytest.fixture(scope="module")
def hostile_file(tmp_path_factory):
    rows = [["underlying", "as_of", "spot", "expiry", "strike", "kind", "bid", "ask"]]
    for name in HOSTILE:
        for k in (80.0, 90.0, 100.0, 110.0, 120.0):
            for kind in ("call", "put"):
                # QuantLib blackFormula [L] at 25 % vol, 0.12 years, forward 100
                p = ql.blackFormula(ql.Option.Call if kind == "call" else ql.Option.Put, k, 100.0,
                                    0.25 * math.sqrt(0.12), 1.0)
                rows.append([name, AS_OF, "100", "2027-01-15", f"{k:g}", kind, f"{max(p - 0.05, 0):.4f}",
                             f"{p + 0.05:.4f}"])
    buf = io.StringIO()
    csv.writer(buf, lineterminator="\n", quoting=csv.QUOTE_ALL).writerows(rows)  # quotes the lone \r too
    path = tmp_path_factory.mktemp("hostile") / "hostile.csv"
    path.write_text(buf.getvalue(), encoding="utf-8")
    return path


def _run(capsys, *argv):
    code = cli.main([str(a) for a in argv])
    out, err = capsys.readouterr()
    for stream in (out, err):
        found = RAW_CONTROL.search(stream)
        assert found is None, f"raw {found.group()!r} in output"
    return code, out, err


@pytest.mark.parametrize("command", [["table"], ["expiries"], ["check"], ["targets", "--side", "puts", "--sigma", "1"]])
def test_plain_output_shows_hostile_text_escaped_or_literally(hostile_file, capsys, command):
    code, out, err = _run(capsys, *command, hostile_file)
    assert code == 0
    shown = out + err
    # markup is shown literally, control sequences as escapes
    assert "[bold]QRTZ[/bold]" in shown and "[link=http://x.invalid]QRTZ[/link]" in shown
    assert "\\x1b[31mQRTZ\\x1b[0m" in shown
    assert "\\x1b]8;;http://x.invalid\\x07QRTZ" in shown
    assert "\\x9b2JQRTZ" in shown and "QR\\x08TZ" in shown
    # the loader reads a carriage return inside a quoted field as a line break; it stays on one line here
    assert "QRTZ\\nVELM" in shown and "\nVELM" not in shown
    assert "\\u202eZTRQ" in shown


@pytest.mark.parametrize("command", [["table"], ["expiries"], ["check"], ["targets", "--side", "puts", "--sigma", "1"]])
def test_json_output_escapes_hostile_text_and_round_trips(hostile_file, capsys, command):
    code, out, _ = _run(capsys, *command, hostile_file, "--format", "json")
    assert code == 0
    data = json.loads(out)
    names = ({r["underlying"] for r in data} if isinstance(data, list)
             else {s["underlying"] for f in data["files"] for s in f["snapshots"]})
    # escaped on the wire, exact once parsed (a line break inside a field is read as \n)
    assert names == {n.replace("\r", "\n") for n in HOSTILE}


def test_csv_neutralises_formulas_in_text_cells_and_keeps_numbers(hostile_file, capsys):
    code, out, _ = _run(capsys, "table", hostile_file, "--format", "csv")
    assert code == 0
    rows = list(csv.DictReader(io.StringIO(out)))
    assert len(rows) == len(HOSTILE) * 10
    for r in rows:
        for value in r.values():
            assert not value.startswith(("=", "+", "-", "@", "\t", "\r", "\0")) or _is_number(value)
    und = {r["underlying"] for r in rows}
    assert "'=HYPERLINK(\"http://x.invalid\",\"QRTZ\")" in und
    assert {"'+1+2", "'-2+3", "'@SUM(A1:A2)", "'=cmd|' /C calc'!A0"} <= und
    assert "[bold]QRTZ[/bold]" in und and "\\x1b[31mQRTZ\\x1b[0m" in und
    # numbers stay numbers: negative sigma distances and deltas are written bare
    sigma = [float(r["sigma_distance"]) for r in rows if r["sigma_distance"]]
    delta = [float(r["delta"]) for r in rows if r["delta"]]
    assert min(sigma) < 0 and min(delta) < 0


def _is_number(text: str) -> bool:
    try:
        return math.isfinite(float(text))
    except ValueError:
        return False


def test_check_json_escapes_c1_and_bidi_characters_but_keeps_readable_text():
    text = json_text({"a": "\x9b31m", "b": "\u202eabc", "c": "Ærtz €", "d": "\x1b[1m"})
    assert "\x9b" not in text and "\u202e" not in text and "\x1b" not in text
    assert "Ærtz €" in text
    assert json.loads(text) == {"a": "\x9b31m", "b": "\u202eabc", "c": "Ærtz €", "d": "\x1b[1m"}
