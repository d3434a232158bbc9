"""Shared pieces of the loader fuzz tests: the invariant check and a small valid file.

The invariants are the accounting rule of DESIGN.md "Snapshot file" [D]:
nothing escapes but the project's own error with a message, and every data
row is accepted or left out with a finding that names its line.
"""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np

from chaintriage.core import loading
from chaintriage.core.findings import LEFT_OUT, ChainTriageError
from chaintriage.core.loading import FileLoad, SnapshotFileError, load_file

#: The suite-wide knob (the existing property tests use it too); 200 is the default run.
BASE_EXAMPLES = int(os.environ.get("CHAINTRIAGE_HYPOTHESIS_EXAMPLES", "200"))


def examples(default: int) -> int:
    """``default`` examples in the default run, scaled by CHAINTRIAGE_HYPOTHESIS_EXAMPLES / 200."""
    return max(1, default * BASE_EXAMPLES // 200)


HEADER = "underlying,as_of,spot,expiry,strike,kind,bid,ask"
AS_OF = "2026-03-02T15:30:00-05:00"

#: A small valid file: two expiries, calls and puts, one optional column.
SMALL_VALID = (
    "underlying,as_of,spot,expiry,strike,kind,bid,ask,iv\n"
    f'QRTZ,{AS_OF},100.5,2026-03-20,95,put,0.80,0.90,21.5%\n'
    f'QRTZ,{AS_OF},100.5,2026-03-20,95,call,6.10,6.30,0.21\n'
    f'QRTZ,{AS_OF},100.5,2026-03-20,100,put,2.00,2.10,\n'
    f'"QRTZ",{AS_OF},100.5,2026-03-20,100,c,2.40,2.55,0.2\n'
    f'QRTZ,{AS_OF},100.5,2026-04-17,105,call,1.20,1.35,0.19\n'
    f'QRTZ,{AS_OF},100.5,2026-04-17,105,p,5.00,5.40,0.2\n'
)


def check_load(path: Path, column_map=None) -> FileLoad | ChainTriageError:
    """Load ``path`` (with an optional column map); fail the test unless the outcome keeps every invariant.

    Any exception other than a ChainTriageError with a non-empty message fails.
    """
    try:
        load = load_file(path, column_map=column_map)
    except SnapshotFileError as exc:
        assert exc.reason and str(exc).startswith(str(path) + ": ")
        lo = [f for f in exc.findings if f.severity == LEFT_OUT]
        assert all(f.line is not None and f.line >= 2 and f.reason for f in lo)
        assert len(lo) == exc.rows_read
        assert len({f.line for f in lo}) == len(lo)
        return exc
    except ChainTriageError as exc:
        assert str(exc).strip()
        return exc
    row_left = [f for f in load.findings if f.severity == LEFT_OUT]
    assert all(f.line is not None and f.line >= 2 and f.reason for f in row_left)
    assert load.rows_read == load.rows_accepted + len(row_left)
    accepted_lines = [int(x) for s in load.snapshots for x in s.contracts["source_line"]]
    assert len(accepted_lines) == load.rows_accepted
    left_lines = {f.line for f in row_left}
    assert len(left_lines) == len(row_left)
    assert not left_lines & set(accepted_lines)
    assert len(set(accepted_lines)) == len(accepted_lines)
    for f in load.findings:
        assert f.reason
    for s in load.snapshots:
        c = s.contracts
        assert list(c.columns) == list(loading.CONTRACT_COLUMNS)
        assert len(c) > 0
        assert (c["strike"] > 0).all() and np.isfinite(c["strike"]).all()
        assert c["kind"].isin(["call", "put"]).all()
        bid, ask = c["bid"].to_numpy(), c["ask"].to_numpy()
        assert not np.isinf(bid).any() and not np.isinf(ask).any()
        assert not (bid > ask).any()
        assert not (bid < 0).any() and not (ask < 0).any()
        for col in ("iv", "volume", "open_interest", "rate", "div_yield"):
            assert not np.isinf(c[col].to_numpy()).any()
        assert s.as_of.tzinfo is not None and np.isfinite(s.spot) and s.spot > 0
        assert s.underlying
    return load
