"""`check` and `table` on big inputs read them a few underlyings at a time: the same report, table,
findings and exit status as reading them whole.

Oracle: the same commands on the same files read whole [D] (their layout and
exit codes are pinned by test_cli_check.py, test_cli_tables.py and the rest).
The size above which inputs are read in parts, the block size and the rows
per part are forced down, so small files take the big files' path.
"""

from __future__ import annotations

import json

import pytest

from chaintriage.core import loading
from chaintriage.tui.cli import main as cli

from ..core.test_loading_parts import HEADER, ROWS

CHAIN = "".join(
    f"{und},2026-03-02T15:30:00-05:00,{spot},{exp},{k},{kind},{max(0.0, round(p, 2)):.2f},{round(p + 0.1, 2):.2f}\n"
    for und, spot in (("QRTZ", 100.5), ("ABC", 50.0))
    for exp in ("2026-03-20", "2026-04-17")
    for k in range(int(spot * 0.8), int(spot * 1.2) + 1, 2)
    for kind, p in (("call", max(0.05, spot - k + 1.5)), ("put", max(0.05, k - spot + 1.5))))


def outputs(capsys, monkeypatch, argv, parts: bool, part_rows: int = 3, block: int = 50):
    if parts:
        monkeypatch.setattr(loading, "PART_INPUT_BYTES", -1)
        monkeypatch.setattr(loading, "BIG_FILE_BYTES", 0)
        monkeypatch.setattr(loading, "CHUNK_BYTES", block)
        monkeypatch.setattr(loading, "PART_ROWS", part_rows)
    else:
        monkeypatch.setattr(loading, "PART_INPUT_BYTES", 1 << 40)
    code = cli.main(list(argv))
    out, err = capsys.readouterr()
    monkeypatch.undo()
    return code, out, sorted(err.splitlines())


def same_both_ways(capsys, monkeypatch, *argv, **kw):
    whole = outputs(capsys, monkeypatch, argv, False)
    for part_rows in (1, 10 ** 9):
        assert outputs(capsys, monkeypatch, argv, True, part_rows=part_rows, **kw) == whole, part_rows
    return whole


@pytest.fixture
def files(tmp_path):
    a = tmp_path / "a.csv"
    a.write_text(HEADER + "".join(ROWS))
    b = tmp_path / "b.csv"
    b.write_text(HEADER + "".join(ROWS[::3]))
    bad = tmp_path / "bad.csv"
    bad.write_text(HEADER + "ZED,x,1,2026-03-20,50,call,1,2\n")
    chain = tmp_path / "chain.csv"
    chain.write_text(HEADER.replace(",iv", "") + CHAIN)
    return str(a), str(b), str(bad), str(chain)


def test_check_plain_and_json(files, capsys, monkeypatch):
    code, out, _ = same_both_ways(capsys, monkeypatch, "check", *files)
    assert code == 2 and "unusable" in out  # the oracle run exercises every kind of outcome
    code, out, _ = same_both_ways(capsys, monkeypatch, "check", *files, "--format", "json")
    assert json.loads(out)["exit_status"] == 2
    assert same_both_ways(capsys, monkeypatch, "check", files[3])[0] == 0


@pytest.mark.parametrize("fmt", ["csv", "plain", "json"])
def test_table(files, capsys, monkeypatch, fmt):
    code, out, err = same_both_ways(capsys, monkeypatch, "table", files[3], files[0], "--format", fmt)
    assert code == 1 and "QRTZ" in out and "ABC" in out
    same_both_ways(capsys, monkeypatch, "table", files[3], "--format", fmt, "--expiry", "2026-04-17",
                   "--side", "puts")
    assert same_both_ways(capsys, monkeypatch, "table", files[2], "--format", fmt)[0] == 2


def test_check_json_on_an_output_that_holds_only_ascii(files, monkeypatch):
    """Big inputs' json report streamed to an ASCII-only output: the text ``json_text`` gives with
    every non-ASCII character escaped (as ``json.dumps(ensure_ascii=True)`` [L]), as a whole reading."""
    import io

    from chaintriage.core.loading import load_files
    from chaintriage.tui.cli import check

    paths = files[:3]
    expected = check.json_text(check.json_report(paths, load_files(paths)), ascii_only=True)
    monkeypatch.setattr(loading, "PART_INPUT_BYTES", -1)
    monkeypatch.setattr(loading, "BIG_FILE_BYTES", 0)
    monkeypatch.setattr(loading, "CHUNK_BYTES", 50)
    monkeypatch.setattr(loading, "PART_ROWS", 1)
    spill = check.FindingSpill()
    outcomes, across, _ = check.read_in_parts(paths, None, None, spill=spill)
    buf = io.BytesIO()
    out = io.TextIOWrapper(buf, encoding="ascii", newline="\n")
    check.write_json_streamed(outcomes, across, spill, out)
    spill.close()
    out.flush()
    assert "\\u00e9" in expected and buf.getvalue().decode("ascii") == expected


def test_table_with_history(capsys, monkeypatch):
    """--history on big inputs (read twice: first for the latest snapshot time) gives the table, the
    findings and the status of a whole reading, the note about an underlying without history too."""
    from importlib.resources import files as package_files
    from pathlib import Path

    demo = Path(str(package_files("chaintriage.demo_chains")))
    chains = [str(demo / "ospx_2026-12-01.csv"), str(demo / "tsbh_2026-12-01.csv")]
    hist = str(demo / "history" / "ospx_history.csv")
    code, out, err = same_both_ways(capsys, monkeypatch, "table", *chains, "--history", hist, "--paths", "300",
                                    "--format", "csv", "--expiry", "2027-02-19", block=1 << 16)
    assert code == 0 and "hist_p_beyond" in out and any("no price history for 'TSBH'" in e for e in err)
    assert same_both_ways(capsys, monkeypatch, "table", *chains, "--history", hist, "--expiry", "2031-01-17",
                          block=1 << 16)[0] == 2
