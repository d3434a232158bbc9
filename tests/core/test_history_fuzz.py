"""History-file fuzzing: broken and hostile files never crash the reader and never lose a row.

About 720 inputs by default (about 15 s on a busy 2-core machine); CHAINTRIAGE_HYPOTHESIS_EXAMPLES
scales them as for the snapshot loader. Oracle: the accounting rule of
DESIGN.md "Snapshot file", which the issue applies to history files [D].
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from chaintriage.core.findings import LEFT_OUT, ChainTriageError
from chaintriage.core.history_file import BAR_COLUMNS, HistoryFileError, HistoryLoad, load_history
from tests.core.fuzz_support import examples

pytestmark = pytest.mark.filterwarnings("error::RuntimeWarning")

HEADER = "date,open,high,low,close,volume"
VALID = (
    HEADER + "\n"
    "2026-11-23,100,101,99,100.5,1000\n"
    "2026-11-24,100.5,102,100,101,1200\n"
    "2026-11-25,101,102.5,100.5,102,900\n"
    "2026-11-27,102,103,101,102.5,400\n"
    "2026-11-30,102.5,104,102,103,1100\n"
)


def _settings(n: int):
    return settings(max_examples=examples(n), deadline=None, database=None,
                    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow,
                                           HealthCheck.filter_too_much, HealthCheck.data_too_large])


def check_history(path, **kw) -> HistoryLoad | ChainTriageError:
    """Load ``path``; fail unless the outcome keeps every invariant (only the project's error escapes)."""
    try:
        load = load_history(path, **kw)
    except HistoryFileError as exc:
        assert exc.reason and str(exc).startswith(str(path) + ": ")
        lo = [f for f in exc.findings if f.severity == LEFT_OUT]
        assert len(lo) == exc.rows_read and len({f.line for f in lo}) == len(lo)
        assert all(f.line is not None and f.line >= 2 and f.reason for f in lo)
        return exc
    except ChainTriageError as exc:
        assert str(exc).strip()
        return exc
    left = [f for f in load.findings if f.severity == LEFT_OUT]
    assert all(f.line is not None and f.line >= 2 and f.reason for f in left)
    assert load.rows_read == load.rows_accepted + len(left)
    lines = [int(x) for h in load.histories for x in h.bars["source_line"]]
    assert len(lines) == load.rows_accepted == len(set(lines))
    assert not set(lines) & {f.line for f in left}
    for h in load.histories:
        b = h.bars
        assert list(b.columns) == list(BAR_COLUMNS) and len(b) > 0 and h.underlying
        assert np.isfinite(b["close"]).all() and (b["close"] > 0).all()
        d = b["date"].to_numpy().astype(np.int64)
        assert (np.diff(d) > 0).all()  # sorted, no duplicate dates
        o, hi, lo, c = (b[k].to_numpy() for k in ("open", "high", "low", "close"))
        with np.errstate(invalid="ignore"):
            assert not (hi < lo).any() and not (c > hi).any() and not (c < lo).any()
            assert not (o > hi).any() and not (o < lo).any() and not (o <= 0).any()
        assert not np.isinf(b[["open", "high", "low", "volume"]].to_numpy()).any()
    return load


def _load_bytes(tmp_path, data: bytes, **kw):
    p = tmp_path / "h.csv"
    p.write_bytes(data)
    return check_history(p, **kw)


@_settings(400)
@given(prefix=st.sampled_from([b"", HEADER.encode() + b"\n", b"\xef\xbb\xbfDate;Close\r\n"]),
       body=st.binary(max_size=300))
def test_random_bytes(tmp_path, prefix, body):
    _load_bytes(tmp_path, prefix + body, underlying="Q")


@_settings(150)
@given(edits=st.lists(st.tuples(st.integers(0, len(VALID) - 1), st.binary(max_size=3), st.integers(0, 2)),
                      min_size=1, max_size=6))
def test_mutated_valid_file(tmp_path, edits):
    data = bytearray(VALID.encode())
    for pos, chunk, op in edits:
        pos = min(pos, len(data))
        if op == 0:
            data[pos:pos + len(chunk)] = chunk
        elif op == 1:
            data[pos:pos] = chunk
        else:
            del data[pos:pos + max(1, len(chunk))]
    _load_bytes(tmp_path, bytes(data), until="2026-11-27")


_CELLS = st.one_of(
    st.sampled_from(["", "0", "-1", "1e308", "-inf", "NaN", "1,5", "100", "101", "99", "abc", "2026-11-24",
                     "2026-02-30", "1899-12-31", "2200-01-01", " 100 ", '"', "\x1b[31m", "‮"]),
    st.text(max_size=8),
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
)


@_settings(100)
@given(rows=st.lists(st.tuples(st.sampled_from(["2026-11-23", "2026-11-24", "2026-11-25", "2026-12-05",
                                                "2026-11-31", "11/24/2026", ""]),
                               _CELLS, _CELLS, _CELLS, _CELLS, _CELLS), max_size=12),
       underlying_col=st.booleans())
def test_random_cells(tmp_path, rows, underlying_col):
    head = HEADER + (",underlying" if underlying_col else "")
    lines = [head]
    for i, (d, *vals) in enumerate(rows):
        cells = [d, *(v.replace("\n", " ").replace("\r", " ").replace(",", ";").replace('"', "'") for v in vals)]
        if underlying_col:
            cells.append(["A", "B", ""][i % 3])
        lines.append(",".join(cells))
    _load_bytes(tmp_path, ("\n".join(lines) + "\n").encode(), until="2026-12-01T14:30:00-05:00")


def test_truncated_at_every_byte(tmp_path):
    """Cut a valid file at every third byte (and at its end)."""
    data = VALID.encode()
    for cut in [*range(0, len(data), 3), len(data)]:
        res = _load_bytes(tmp_path, data[:cut])
        if cut == len(data):
            assert isinstance(res, HistoryLoad) and res.rows_accepted == 5
