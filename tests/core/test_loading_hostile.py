"""Loader messages and dates under odd inputs: time zones, compressed and UTF-16 files, link loops,
a file given twice, and the summary of an unusable file.

Sources: the exchange's dates are New York dates [C] (US equity options trade
and expire on the New York calendar); the magic numbers of gzip (RFC 1952:
1f 8b), bzip2 ("BZh"), xz (fd 37 7a 58 5a 00) and zstd (28 b5 2f fd) are
from their format specifications [M]; UTF-16 puts a zero byte beside every
ASCII character [C]. The underlying QRTZ is invented.
"""

from __future__ import annotations

import bz2
import gzip
import lzma
import os
from pathlib import Path

import pytest

from chaintriage.core.findings import LEFT_OUT, NOTE
from chaintriage.core.loading import SnapshotFileError, load_file, load_files

HEADER = "underlying,as_of,spot,expiry,strike,kind,bid,ask"


def _csv(tmp_path: Path, as_of: str, expiries=("2026-12-17", "2026-12-18"), name="chain.csv") -> Path:
    rows = [HEADER] + [f"QRTZ,{as_of},100,{e},100,{k},2.1,2.2" for e in expiries for k in ("call", "put")]
    p = tmp_path / name
    p.write_text("\n".join(rows) + "\n", encoding="utf-8")
    return p


# --------------------------------------------------------------------------- #8 exchange time zone


@pytest.mark.parametrize("as_of", [
    "2026-12-18T05:00:00+09:00",   # Tokyo morning = 15:00 New York on the 17th
    "2026-12-17T15:00:00-05:00",   # the same instant in New York's own offset
    "2026-12-17T20:00:00Z",        # and in UTC
])
def test_the_snapshot_date_is_the_exchanges_date_whatever_the_offset(tmp_path, as_of):
    load = load_file(_csv(tmp_path, as_of))
    assert load.rows_accepted == 4, [f.reason for f in load.findings]


def test_an_expiry_before_the_new_york_date_is_still_left_out(tmp_path):
    # 02:00 UTC on the 18th is 21:00 New York on the 17th: the 16th is before it, the 17th is not.
    load = load_file(_csv(tmp_path, "2026-12-18T02:00:00Z", expiries=("2026-12-16", "2026-12-17")))
    left = [f.reason for f in load.findings if f.severity == LEFT_OUT]
    assert load.rows_accepted == 2 and len(left) == 2
    assert all("before the snapshot date 2026-12-17" in r for r in left)


# --------------------------------------------------------------------------- #16 the summary keeps its digits


def test_the_summary_of_an_unusable_file_shows_real_dates_and_values(tmp_path):
    p = _csv(tmp_path, "2026-12-18T10:00:00-05:00", expiries=("2026-12-15", "2026-12-16"))
    with pytest.raises(SnapshotFileError) as info:
        load_file(p)
    reason = info.value.reason
    assert "…" not in reason and "..." not in reason, reason
    assert "expiry 2026-12-15 is before the snapshot date 2026-12-18" in reason
    assert "and the like" in reason  # two different expiries share one kind of reason
    assert "4 x" in reason


# --------------------------------------------------------------------------- #17 the real cause


@pytest.mark.parametrize("compress, word", [
    (gzip.compress, "gzip"), (bz2.compress, "bzip2"), (lzma.compress, "xz"),
])
def test_a_compressed_file_is_named_as_such(tmp_path, compress, word):
    p = tmp_path / "chain.csv"
    p.write_bytes(compress(_csv(tmp_path, "2026-12-17T15:00:00-05:00", name="src.csv").read_bytes()))
    with pytest.raises(SnapshotFileError) as info:
        load_file(p)
    assert word in info.value.reason and "UTF-8" not in info.value.reason


@pytest.mark.parametrize("codec", ["utf-16-le", "utf-16-be"])
def test_utf16_without_a_bom_is_named_in_a_short_message(tmp_path, codec):
    text = _csv(tmp_path, "2026-12-17T15:00:00-05:00", name="src.csv").read_text(encoding="utf-8")
    p = tmp_path / "chain.csv"
    p.write_bytes(text.encode(codec))  # no byte-order mark
    with pytest.raises(SnapshotFileError) as info:
        load_file(p)
    reason = info.value.reason
    assert "UTF-16" in reason and len(reason) < 120, reason


def test_a_symlink_loop_is_not_called_missing(tmp_path):
    p = tmp_path / "chain.csv"
    p.symlink_to(p)
    with pytest.raises(SnapshotFileError) as info:
        load_file(p)
    assert "link loop" in info.value.reason and "no such file" not in info.value.reason


def test_a_dangling_link_says_so(tmp_path):
    p = tmp_path / "chain.csv"
    p.symlink_to(tmp_path / "gone.csv")
    with pytest.raises(SnapshotFileError, match="link to a file that does not exist"):
        load_file(p)


# --------------------------------------------------------------------------- #20 given twice


def test_a_file_given_twice_is_read_once_and_said_so(tmp_path):
    p = _csv(tmp_path, "2026-12-17T15:00:00-05:00")
    other_name = tmp_path / "again.csv"
    os.link(p, other_name)
    result = load_files([p, p, other_name])
    assert result.rows_read == 4 and result.rows_accepted == 4 and result.rows_left_out == 0
    assert not any("duplicate" in f.reason for f in result.findings)
    twice = [f.reason for f in result.findings if "given twice" in f.reason]
    assert len(twice) == 2 and all(f.severity == NOTE for f in result.findings if "given twice" in f.reason)
