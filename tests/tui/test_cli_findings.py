"""Findings on the command line: grouped per expiry and reason, and only those of what was asked for.

The layout is the command line's own contract [D]; the line numbers are those a
text editor shows (header = line 1) [C]. Underlyings are invented (QRTZ).
"""

from __future__ import annotations

from pathlib import Path

from chaintriage.tui.cli import main as cli

HEADER = "underlying,as_of,spot,expiry,strike,kind,bid,ask"
AS_OF = "2026-03-02T15:30:00-05:00"


def chain(tmp_path: Path) -> Path:
    """Two expiries; five zero-bid puts on lines 2-6 (March) and three on lines 12-14 (April)."""
    lines = [HEADER]
    for expiry, zeros in (("2026-03-20", 5), ("2026-04-17", 3)):
        for k in range(zeros):
            lines.append(f"QRTZ,{AS_OF},100,{expiry},{70 + k},put,0,0.05")
        for strike, kind, bid, ask in ((95, "put", 1.1, 1.2), (100, "put", 2.6, 2.7), (100, "call", 2.9, 3.0),
                                       (105, "call", 1.2, 1.3), (110, "call", 0.4, 0.5)):
            lines.append(f"QRTZ,{AS_OF},100,{expiry},{strike},{kind},{bid},{ask}")
    p = tmp_path / "two.csv"
    p.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return p


def run(capsys, *argv: str) -> tuple[int, str, str]:
    code = cli.main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def loader_lines(err: str) -> list[str]:
    return [x for x in err.splitlines() if "zero bid" in x]


def test_table_groups_repeated_findings_on_stderr(tmp_path, capsys):
    p = chain(tmp_path)
    code, _, err = run(capsys, "table", str(p), "--format", "csv")
    assert code == 0
    assert loader_lines(err) == [
        f"{p} lines 2-6 [bid] QRTZ 2026-03-20: warning: zero bid on puts (5 rows, strikes 70 to 74)",
        f"{p} lines 12-14 [bid] QRTZ 2026-04-17: warning: zero bid on puts (3 rows, strikes 70 to 72)",
    ]


def test_table_expiry_lists_only_its_findings_and_counts_the_rest(tmp_path, capsys):
    p = chain(tmp_path)
    code, _, err = run(capsys, "table", str(p), "--format", "csv", "--expiry", "2026-04-17")
    assert code == 0
    assert loader_lines(err) == [
        f"{p} lines 12-14 [bid] QRTZ 2026-04-17: warning: zero bid on puts (3 rows, strikes 70 to 72)"]
    assert "2026-03-20" not in err
    rest = [x for x in err.splitlines() if "other expiry not listed" in x]
    assert len(rest) == 1 and rest[0].split()[0].isdigit() and int(rest[0].split()[0]) >= 5
