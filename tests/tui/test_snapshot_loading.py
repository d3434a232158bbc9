"""The app's loading job: a big chain's first expiry, annotated alone, shows the figures the whole
chain gives it (each expiry is computed from its own quotes), and the job hands it over first."""

from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd

from chaintriage.core.loading import load_files
from chaintriage.core.pipeline import PipelineSettings, annotate
from chaintriage.tui import snapshot_loading
from chaintriage.tui.snapshot_loading import demo_files, load_views


FIGURES = ["mid", "iv", "sigma_distance", "p_beyond", "p_beyond_flat", "p_touch", "delta", "breakeven",
           "p_breakeven", "spread_pct"]


def first_expiry_snapshot(snapshot):
    """The snapshot cut to its first expiry (None when it has at most one expiry): annotated on its
    own, it must give what the whole chain gives that expiry."""
    contracts = snapshot.contracts
    if contracts.empty:
        return None
    expiry = contracts["expiry"]
    keep = (expiry == expiry.min()).to_numpy()
    if keep.all():
        return None
    return dataclasses.replace(snapshot, contracts=contracts[keep], findings=[])


def _demo_snapshot():
    from importlib import resources

    root = resources.files("chaintriage.demo_chains")
    return load_files([str(root / demo_files()[0])]).snapshots[0]


def test_first_expiry_alone_gives_the_whole_chains_figures():
    """[D] consistency: the figures of the first expiry do not depend on the other expiries."""
    snap = _demo_snapshot()
    part = first_expiry_snapshot(snap)
    assert part is not None and part.contracts["expiry"].nunique() == 1
    whole = annotate(snap, PipelineSettings()).contracts
    alone = annotate(part, PipelineSettings()).contracts
    first = whole[whole["expiry"] == part.contracts["expiry"].iloc[0]]
    assert len(first) == len(alone) > 0
    key = ["strike", "kind"]
    a = first.sort_values(key).reset_index(drop=True)
    b = alone.sort_values(key).reset_index(drop=True)
    pd.testing.assert_frame_equal(a[key], b[key])
    for col in FIGURES:
        np.testing.assert_allclose(a[col].to_numpy(float), b[col].to_numpy(float), rtol=1e-9, atol=1e-12,
                                   equal_nan=True, err_msg=col)


def test_a_big_chain_is_handed_over_first_expiry_first(monkeypatch):
    monkeypatch.setattr(snapshot_loading, "FIRST_EXPIRY_FIRST_ABOVE", 10)
    snap = _demo_snapshot()
    events = []
    errors, added = load_views([], snapshots=[snap], confidence=lambda: 0.68,
                               on_view=lambda view, first: events.append(("view", len(view.expiries))),
                               on_replace=lambda old, new: events.append(("replace", len(old.expiries),
                                                                          len(new.expiries))))
    n = snap.contracts["expiry"].nunique()
    assert errors == [] and added == 1
    assert events == [("view", 1), ("replace", 1, n)]


def test_without_a_replace_hook_the_whole_chain_comes_at_once(monkeypatch):
    monkeypatch.setattr(snapshot_loading, "FIRST_EXPIRY_FIRST_ABOVE", 10)
    snap = _demo_snapshot()
    events = []
    load_views([], snapshots=[snap], on_view=lambda view, first: events.append(len(view.expiries)))
    assert events == [snap.contracts["expiry"].nunique()]


def test_a_views_findings_without_underlying_are_picked_from_the_table(tmp_path):
    """[D] consistency: the loader's findings that name no underlying (a row with a blank underlying)
    go to the view of their file; picked from the finding table's columns, they are the ones a
    per-finding reading picks, and a findings list gives the same."""
    from importlib import resources

    from chaintriage.core.finding_table import FindingTable
    from chaintriage.tui.session import file_findings_without_underlying
    from chaintriage.tui.snapshot_loading import load_for_app

    lines = (resources.files("chaintriage.demo_chains") / demo_files()[0]).read_text().splitlines()
    blank = "," + lines[5].split(",", 1)[1]  # a quote row whose underlying cell is empty
    path = tmp_path / "blank_underlying.csv"
    path.write_text("\n".join(lines[:40] + [blank]) + "\n")
    result = load_for_app([str(path)])
    assert isinstance(result.findings, FindingTable) and len(result.findings) > 1
    sources = result.snapshots[0].sources
    picked = file_findings_without_underlying(result.findings, sources)
    by_hand = [f for f in list(result.findings) if f.underlying is None and f.file in set(sources)]
    assert len(picked) == 1 and picked == by_hand
    assert picked[0].line == 41 and "underlying" in picked[0].reason
    assert file_findings_without_underlying(list(result.findings), sources) == by_hand
    assert file_findings_without_underlying(result.findings, ["elsewhere.csv"]) == []


def _recording_loads(monkeypatch):
    calls, events = [], []
    real = snapshot_loading.load_for_app

    def recording(paths, **kwargs):
        calls.append([p.rsplit("/", 1)[-1] for p in paths])
        events.append(("read", len(paths)))
        return real(paths, **kwargs)

    monkeypatch.setattr(snapshot_loading, "load_for_app", recording)
    return calls, events


def test_the_demo_is_read_file_by_file_and_its_first_chain_shown_before_the_second_is_read(monkeypatch):
    """[D] the first data frame waits for one demo file only; the views are those of reading the files
    together (different underlyings: nothing merges), in the same order, with the same findings."""
    calls, events = _recording_loads(monkeypatch)
    views = []

    def on_view(view, first):
        events.append(("view", view.snapshot.underlying))
        views.append(view)

    errors, added = load_views([], on_view=on_view, on_replace=lambda old, new: views.append(new))
    assert errors == [] and added == len(demo_files()) == 2
    assert calls == [[name] for name in demo_files()]
    assert events[:2] == [("read", 1), ("view", events[1][1])]
    monkeypatch.undo()
    from chaintriage.tui.session import file_findings_without_underlying

    together = snapshot_loading.load_for_app([])
    wholes = [v for v in views if not v.partial]
    assert [v.snapshot.underlying for v in wholes] == [s.underlying for s in together.snapshots]
    for view, snap in zip(wholes, together.snapshots):
        assert len(view.snapshot.contracts) == len(snap.contracts)
        assert view._file_findings == file_findings_without_underlying(together.findings, snap.sources)


def test_with_an_underlying_override_the_demo_files_are_read_together(monkeypatch):
    """[D] an override of the underlying makes the demo's chains one underlying: read together, as
    files given together are, so they merge as the command line merges them."""
    from chaintriage.core.loading import SnapshotOverrides

    calls, _ = _recording_loads(monkeypatch)
    load_views([], overrides=SnapshotOverrides(underlying="SAME"))
    assert calls == [[]]
