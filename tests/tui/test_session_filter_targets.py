"""The strike filter's |delta| and P(beyond) ranges and its side (the model; core decides who qualifies).

The frame is a PRESENTATION FIXTURE (invented numbers with the pipeline's
column names); the checks are the stated rules [D]: ranges inclusive, a
missing measure fails a set limit, a strike stays when either contract
qualifies, and the filter gives the same answer as core's predicate.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from chaintriage.core.findings import ChainTriageError
from chaintriage.core.targets import target_mask
from chaintriage.tui.session import StrikeFilter


def fixture_frame() -> pd.DataFrame:
    """PRESENTATION FIXTURE: strikes 90..110, calls' |delta| falling and puts' rising with the strike."""
    rows = []
    for i, k in enumerate((90.0, 95.0, 100.0, 105.0, 110.0)):
        z = (k - 100.0) / 5.0
        rows.append(dict(strike=k, kind="call", sigma_distance=z, delta=0.9 - 0.2 * i, p_beyond=0.85 - 0.2 * i,
                         spread_pct=0.05, open_interest=500.0))
        rows.append(dict(strike=k, kind="put", sigma_distance=z, delta=-(0.1 + 0.2 * i),
                         p_beyond=np.nan if k == 110.0 else 0.08 + 0.2 * i, spread_pct=0.30, open_interest=500.0))
    return pd.DataFrame(rows)


def test_delta_range_side_and_combination():
    f = fixture_frame()
    kept, hidden = StrikeFilter(delta=(0.05, 0.15)).apply(f)
    assert sorted(set(kept["strike"])) == [90.0, 110.0] and hidden == 3  # the 0.1-delta put and call
    kept, _ = StrikeFilter(delta=(0.05, 0.15), side="calls").apply(f)
    assert sorted(set(kept["strike"])) == [110.0]
    kept, _ = StrikeFilter(delta=(None, 0.3), side="calls").apply(f)
    assert sorted(set(kept["strike"])) == [105.0, 110.0]
    flt = StrikeFilter(sigma=1.0, beyond=(0.05, 0.30), max_spread=0.10)
    expected = target_mask(f, sigma=1.0, beyond=(0.05, 0.30)) & (f["spread_pct"] <= 0.10).to_numpy()
    np.testing.assert_array_equal(flt.qualifies(f), expected)
    assert sorted(set(flt.apply(f)[0]["strike"])) == [105.0, 110.0]  # the tight calls 1+ sigma up


def test_missing_measure_fails_a_set_range():
    f = fixture_frame()
    q = StrikeFilter(beyond=(0.0, 1.0), side="puts").qualifies(f)
    assert q[((f["strike"] == 110.0) & (f["kind"] == "put")).to_numpy()].tolist() == [False]


def test_parse_and_describe_ranges():
    flt = StrikeFilter.parse("", "", "", delta="0.10-0.20", beyond="5-", side="puts")
    assert flt == StrikeFilter(delta=(0.10, 0.20), beyond=(0.05, None), side="puts") and flt.active
    assert flt.describe() == "puts only · |Δ| 0.1 to 0.2 · P(beyond) ≥ 5%"
    assert flt.describe(ascii_only=True) == "puts only / |delta| 0.1 to 0.2 / P(beyond) >= 5%"
    assert StrikeFilter.parse(beyond="-12.5%").beyond == (None, 0.125)
    assert StrikeFilter.parse(delta="0.3").delta == (0.3, None)
    assert StrikeFilter(side="calls").active and not StrikeFilter(side="both").active
    for bad in (dict(delta="0.3-0.1"), dict(delta="1.5"), dict(beyond="150"), dict(delta="a-b"),
                dict(delta="-"), dict(side="left")):
        with pytest.raises(ChainTriageError):
            StrikeFilter.parse(**bad)


def test_snapshot_view_targets_are_cores_selection():
    """[D] the view hands back core's per-expiry table, the same after other targets (kept selector)."""
    from chaintriage.core.targets import Target, select_targets
    from chaintriage.tui.session import SnapshotView
    from tests.tui.app_support import demo_annotated

    ann = demo_annotated()[0]
    view = SnapshotView(ann)
    target = Target("puts", "sigma", 1.5)
    first = view.targets(target)
    view.targets(Target("calls", "delta", 0.2), shift=1)
    pd.testing.assert_frame_equal(view.targets(target), first)
    pd.testing.assert_frame_equal(first, select_targets(ann.contracts, ann.expiries, target))
    assert len(first) == len(view.expiries) and (first["row"] >= 0).any()
