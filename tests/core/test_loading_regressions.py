"""Inputs that once broke something, kept in tests/data/regressions/ and loaded on every run.

A ``NAME.toml`` beside ``NAME.csv`` is loaded with it as the column mapping file.

Each file must load (or be refused with the project's error) keeping the
accounting invariants of DESIGN.md "Snapshot file" [D] (``check_load``),
without a numpy overflow/invalid warning. A file named in ``EXPECT`` also
has its particular failure checked.
"""

from __future__ import annotations

import warnings
from pathlib import Path

import pytest

from chaintriage.core.column_map import parse_column_map
from chaintriage.core.findings import WARNING, ChainTriageError
from chaintriage.core.loading import ColumnMap, FileLoad, load_file
from tests.core.fuzz_support import check_load

CORPUS = Path(__file__).resolve().parents[1] / "data" / "regressions"
FILES = sorted(p for p in CORPUS.iterdir() if p.is_file() and p.suffix in (".csv", ".txt", ".bin", ".parquet"))


def _wide_spread_near_max_float(res) -> None:
    # (ask + bid) / 2 overflowed to inf and the wide-spread warning said "inf% of mid"
    assert isinstance(res, FileLoad) and res.rows_accepted == 2
    wide = [f.reason for f in res.findings if f.severity == WARNING and f.reason.startswith("wide spread")]
    assert len(wide) == 1 and "(spread 178% of mid)" in wide[0]


def _bad_expiry_format(res) -> None:
    # pandas raised re.error ("redefinition of group name") out of load_file for "%Y%Y"
    assert isinstance(res, ChainTriageError) and "not a usable date format" in str(res)


def _expiry_format_with_time(res) -> None:
    # an expiry format with a time of day gave expiries at 16:00 instead of the date
    assert isinstance(res, FileLoad) and res.rows_accepted == 2
    (snap,) = res.snapshots
    assert list(snap.contracts["expiry"].astype(str)) == ["2027-01-15", "2027-01-15"]


def _parquet_row_left_out(column: str):
    # the column's text conversion raised (UnicodeDecodeError / NotImplementedError) out of load_file
    def check(res) -> None:
        assert isinstance(res, FileLoad) and (res.rows_read, res.rows_accepted) == (2, 1)
        (left,) = [f for f in res.findings if f.severity == "left-out"]
        assert left.line == 2 and left.column == column
    return check


EXPECT = {
    "bid_bytes_not_utf8.parquet": _parquet_row_left_out("bid"),
    "as_of_beyond_year_9999.parquet": _parquet_row_left_out("as_of"),
    "wide_spread_near_max_float.csv": _wide_spread_near_max_float,
    "expiry_format_repeated_directive.csv": _bad_expiry_format,
    "expiry_format_with_time.csv": _expiry_format_with_time,
}


@pytest.mark.parametrize("fmt", ["%Q", "%", "%Y%Y", "%s", "%U %Y", "%Y-%m-%d %z", "%d.%m.%Y %Z"])
def test_unusable_expiry_formats_are_refused_with_a_message(tmp_path, fmt):
    """Each of these once escaped load_file as ValueError / re.error, or shifted the date by a zone."""
    p = tmp_path / "c.csv"
    p.write_text("underlying,as_of,spot,expiry,strike,kind,bid,ask\n"
                 "QRTZ,2026-03-02T15:30:00Z,100,2027-01-15,100,c,1,1.1\n")
    with pytest.raises(ChainTriageError, match="expiry"):
        load_file(p, column_map=ColumnMap(expiry_format=fmt))
    with pytest.raises(ChainTriageError, match="column mapping file"):
        parse_column_map({"formats": {"expiry": fmt}}, source="m.toml")


def test_corpus_is_not_empty():
    assert FILES and set(EXPECT) <= {p.name for p in FILES}


@pytest.mark.parametrize("path", FILES, ids=[p.name for p in FILES])
def test_regression_input_keeps_the_invariants(path):
    if path.suffix == ".parquet":
        pytest.importorskip("pyarrow")
    with warnings.catch_warnings():
        warnings.simplefilter("error", RuntimeWarning)
        mapping = path.with_suffix(".toml")
        res = check_load(path, mapping if mapping.exists() else None)
    if path.name in EXPECT:
        EXPECT[path.name](res)
