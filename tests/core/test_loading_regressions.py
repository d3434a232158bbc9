"""Inputs that once broke something, kept in tests/data/regressions/ and loaded on every run.

Each file must load (or be refused with the project's error) keeping the
accounting invariants of DESIGN.md "Snapshot file" [D] (``check_load``),
without a numpy overflow/invalid warning. A file named in ``EXPECT`` also
has its particular failure checked.
"""

from __future__ import annotations

import warnings
from pathlib import Path

import pytest

from chaintriage.core.findings import WARNING
from chaintriage.core.loading import FileLoad
from tests.core.fuzz_support import check_load

CORPUS = Path(__file__).resolve().parents[1] / "data" / "regressions"
FILES = sorted(p for p in CORPUS.iterdir() if p.is_file() and p.suffix in (".csv", ".txt", ".bin"))


def _wide_spread_near_max_float(res) -> None:
    # (ask + bid) / 2 overflowed to inf and the wide-spread warning said "inf% of mid"
    assert isinstance(res, FileLoad) and res.rows_accepted == 2
    wide = [f.reason for f in res.findings if f.severity == WARNING and f.reason.startswith("wide spread")]
    assert len(wide) == 1 and "(spread 178% of mid)" in wide[0]


EXPECT = {
    "wide_spread_near_max_float.csv": _wide_spread_near_max_float,
}


def test_corpus_is_not_empty():
    assert FILES and set(EXPECT) <= {p.name for p in FILES}


@pytest.mark.parametrize("path", FILES, ids=[p.name for p in FILES])
def test_regression_input_keeps_the_invariants(path):
    with warnings.catch_warnings():
        warnings.simplefilter("error", RuntimeWarning)
        res = check_load(path)
    if path.name in EXPECT:
        EXPECT[path.name](res)
