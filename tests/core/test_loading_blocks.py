"""Big files are read block by block: the outcome equals reading the file whole.

Oracle: the whole-file reader of the same module on the same bytes [D] (it is
itself checked against Python's csv module by the property and fuzz suites),
with the block size forced down to a few bytes so that every file is cut at
many places: inside rows with quoted line breaks, blank lines, \\r\\n pairs,
a byte-order mark and multi-byte characters.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from chaintriage.core import loading
from chaintriage.core.loading import SnapshotFileError, load_file

from .fuzz_support import AS_OF, SMALL_VALID, examples

SETTINGS = settings(max_examples=examples(150), deadline=None,
                    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])


def outcome(path, monkeypatch, block: int | None):
    monkeypatch.setattr(loading, "BIG_FILE_BYTES", 0 if block is not None else 1 << 40)
    monkeypatch.setattr(loading, "CHUNK_BYTES", block if block is not None else 1 << 40)
    try:
        fl = load_file(path)
    except SnapshotFileError as exc:
        return ("unusable", exc.reason, exc.rows_read, list(exc.findings))
    snaps = [(s.underlying, s.as_of, s.spot, s.contracts.to_csv(), list(s.findings)) for s in fl.snapshots]
    return ("loaded", fl.rows_read, fl.rows_accepted, list(fl.findings), snaps)


def same_both_ways(tmp_path, monkeypatch, data: bytes, blocks=(5, 17, 64)) -> None:
    p = tmp_path / "f.csv"
    p.write_bytes(data)
    whole = outcome(p, monkeypatch, None)
    for block in blocks:
        assert outcome(p, monkeypatch, block) == whole, block


MESSY = (
    "\ufeffunderlying,as_of,spot,expiry,strike,kind,bid,ask,iv\r\n"
    f'QRTZ,{AS_OF},100.5,2026-03-20,95,put,0,0.90,21.5%\r\n'
    "\r\n"
    f'"QR\nTZ",{AS_OF},100.5,2026-03-20,95,call,6.10,6.30,0.21\n'
    f'Québec,{AS_OF},100.5,2026-03-20,100,put,x,2.10,\r'
    f'QRTZ,{AS_OF},100.5,2026-03-20,100,c,2.40,2.55,0.2,,\n'
    "   \n"
    f'QRTZ,{AS_OF},100.5,2026-03-20,100,c,2.40,2.55,0.2\n'
    f'QRTZ,{AS_OF},100.5,2026-04-17,105,call,1.20,1.35\n'
    f'"QRTZ","{AS_OF}","100.5","2026-04-17","105","p","5.00","5.40","0.2"\n'
)


def test_a_messy_file_reads_the_same_in_blocks(tmp_path, monkeypatch):
    same_both_ways(tmp_path, monkeypatch, MESSY.encode("utf-8"), blocks=range(1, 90, 4))


def test_a_bad_byte_is_named_on_its_line(tmp_path, monkeypatch):
    data = SMALL_VALID.encode() + b"QRTZ,x,\xff\n"
    same_both_ways(tmp_path, monkeypatch, data)
    monkeypatch.setattr(loading, "BIG_FILE_BYTES", 0)
    monkeypatch.setattr(loading, "CHUNK_BYTES", 30)
    with pytest.raises(SnapshotFileError, match="on line 8"):
        load_file(tmp_path / "f.csv")


lines = st.lists(st.sampled_from(MESSY.splitlines(keepends=True)[1:] + SMALL_VALID.splitlines(keepends=True)[1:]
                                 + ["\n", '"unclosed\n', 'QRTZ,"a""b",1\n', "\r\n"]), max_size=25)


@SETTINGS
@given(body=lines)
def test_shuffled_rows_read_the_same_in_blocks(tmp_path, monkeypatch, body):
    same_both_ways(tmp_path, monkeypatch, (SMALL_VALID.splitlines(keepends=True)[0] + "".join(body)).encode())


NUMBER_ROWS = [
    f"QRTZ,{AS_OF},{spot},2026-03-20,{strike},{kind},{bid},{ask},{iv},{vol},{rate}\n"
    for spot, strike, kind, bid, ask, iv, vol, rate in [
        ("100.5", "95", "put", "0.80", "0.90", "0.215", "10", "0.04"),
        ("100.5", "-5", "call", "6.10", "6.30", "600", "-3", "2"),
        ("100.5", "0", "put", "-0", "2.10", "", "0", "-0"),
        ("100.5", "100", "c", "2.40", "1e999", "-0.1", "7", "0.05"),
        ("-0", "105", "call", "-1.20", "1.35", "0", "", "-1.5"),
        ("100.5", "105", "p", "5.00", "5.40", "inf", "12", ""),
        ("100.5", "110", "p", "5.00", "5.40", "0.2", "12", "0.01"),
        ("100.5", "115", "c", "x", "5.40", "0.2", "12", "1%"),
    ]]


@settings(max_examples=examples(40), deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])
@given(body=st.lists(st.sampled_from(NUMBER_ROWS), min_size=1, max_size=30))
def test_number_columns_judged_block_by_block_match_the_text_reading(tmp_path, monkeypatch, body):
    """Number columns read as numbers block by block (only the cells messages may quote kept as
    text) give what reading every cell as text gives [D: the text reading is the reference]."""
    p = tmp_path / "n.csv"
    p.write_text("underlying,as_of,spot,expiry,strike,kind,bid,ask,iv,volume,rate\n" + "".join(body))
    with monkeypatch.context() as m:
        m.setattr(loading, "_table_numbers", lambda *a, **k: None)
        m.setattr(loading, "_read_csv_blocks", lambda *a, **k: pytest.fail("read whole"))
        text = outcome(p, monkeypatch, None)
    kept = []
    real = loading._KeptNumbers.of
    monkeypatch.setattr(loading._KeptNumbers, "of", lambda *a: kept.append(1) or real(*a))
    for block in (97, 300):
        assert outcome(p, monkeypatch, block) == text, block
    assert kept  # the number columns were judged block by block
