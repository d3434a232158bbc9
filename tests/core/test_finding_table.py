"""FindingTable: many findings as columns, a list of Finding when read, groups with line ranges.

The expected values are written out by hand from the definitions in
core/findings.py [D]; "a run of consecutive lines" is as an editor counts [C].
"""

from __future__ import annotations

import numpy as np

from chaintriage.core.finding_table import FindingTable, ranges_text
from chaintriage.core.findings import LEFT_OUT, NOTE, WARNING, Finding
from chaintriage.core.loading import load_file


def test_reads_like_a_list_of_findings():
    fs = [Finding(WARNING, "zero bid on the 95 put", file="a.csv", line=4, column="bid", underlying="QRTZ",
                  expiry="2026-03-20"),
          Finding(NOTE, "columns not used: 'x'", file="a.csv"),
          Finding(LEFT_OUT, "strike 'x' is not a number", file="a.csv", line=2, column="strike")]
    t = FindingTable.of(fs)
    assert len(t) == 3 and list(t) == fs and t == fs and t[-1] == fs[2] and t[0:2] == fs[:2]
    assert t.counts() == {LEFT_OUT: 1, WARNING: 1, NOTE: 1}
    # no line first (in order), then by line
    assert list(t.sorted_by_line()) == [fs[1], fs[2], fs[0]]
    assert list(FindingTable.concat([t, [fs[0]]])) == fs + [fs[0]]
    assert list(t.where(file=None)) == [] and list(t.where(underlying="QRTZ")) == [fs[0]]


def test_groups_count_and_line_runs():
    lines = np.array([96, 97, 98, 130, 131, 7, 200])
    t = FindingTable(WARNING, [f"zero bid on the {k} put" for k in range(7)],
                     topic=["zero bid on puts"] * 5 + ["zero bid on calls", "zero bid on puts"],
                     file="c.csv", line=lines, column="bid", underlying="QRTZ",
                     expiry=["2026-03-20"] * 6 + ["2026-04-17"], strike=[90, 91, 92, 93, 94, 120, 80])
    groups = t.groups()
    assert [(g.topic, g.expiry, g.count, g.lines, g.strikes) for g in groups] == [
        ("zero bid on puts", "2026-03-20", 5, ((96, 98), (130, 131)), (90.0, 94.0)),
        ("zero bid on calls", "2026-03-20", 1, ((7, 7),), (120.0, 120.0)),
        ("zero bid on puts", "2026-04-17", 1, ((200, 200),), (80.0, 80.0)),
    ]
    assert ranges_text(groups[0].lines) == "lines 96-98, 130-131"
    assert ranges_text(((7, 7),)) == "line 7"
    assert ranges_text(((1, 1), (3, 3), (5, 5)), limit=2) == "lines 1, 3 and 1 more run"
    assert groups[0].summary() == "zero bid on puts (5 rows, strikes 90 to 94)"
    # every member can be expanded again
    assert [f.line for f in t.take(groups[0].rows)] == [96, 97, 98, 130, 131]


def test_loader_gives_one_group_per_expiry_side_and_reason(tmp_path):
    head = "underlying,as_of,spot,expiry,strike,kind,bid,ask\n"
    rows = [f"QRTZ,2026-03-02T15:30:00-05:00,100,2026-03-20,{k},put,0,0.05\n" for k in range(60, 80)]
    rows += ["QRTZ,2026-03-02T15:30:00-05:00,100,2026-03-20,100,put,2,2.1\n"]
    rows += [f"QRTZ,2026-03-02T15:30:00-05:00,100,2026-03-20,{k},put,x,0.05\n" for k in range(80, 83)]
    p = tmp_path / "z.csv"
    p.write_text(head + "".join(rows))
    load = load_file(p)
    assert load.rows_accepted == 21 and load.rows_left_out == 3
    groups = load.findings.groups()
    assert [(g.severity, g.topic, g.count, g.lines) for g in groups] == [
        (WARNING, "zero bid on puts", 20, ((2, 21),)),
        (LEFT_OUT, "bid is not a number", 3, ((23, 25),)),
    ]
    # every row still has its own finding
    assert [f.line for f in load.findings] == list(range(2, 22)) + [23, 24, 25]
    assert load.findings[0].reason == "zero bid on the 60 put"
    assert load.snapshots[0].findings == load.findings


def test_groups_match_grouping_one_finding_at_a_time():
    """The vectorised grouping against a plain dictionary walk over the findings [D]: same groups in
    order of first member, counts, runs of lines (repeats and line 0 ignored), strike ranges, members."""
    rng = np.random.default_rng(3)
    n = 3000
    pick = lambda values: np.array(values, dtype=object)[rng.integers(0, len(values), n)]  # noqa: E731
    strike = rng.choice([np.nan, 90.0, 95.5, 120.0], n)
    t = FindingTable(rng.integers(0, 3, n).astype(np.int8), pick(["a", "b", "c"]), topic=pick(["t1", "t2"]),
                     file=pick(["x.csv", None]), line=rng.integers(0, 60, n), column=pick(["bid", None]),
                     underlying=pick(["QRTZ", "ABC", None]), expiry=pick(["2026-03-20", None]), strike=strike)
    expected: dict = {}
    for i in range(n):
        key = (t.severity[i], t.file[i], t.underlying[i], t.expiry[i], t.column[i], t.topic[i])
        expected.setdefault(key, []).append(i)
    groups = t.groups()
    assert len(groups) == len(expected)
    for g, (key, rows) in zip(groups, expected.items()):
        lines = sorted({int(t.line[i]) for i in rows if t.line[i] > 0})
        runs = []
        for x in lines:
            if runs and runs[-1][1] == x - 1:
                runs[-1][1] = x
            else:
                runs.append([x, x])
        ok = [t.strike[i] for i in rows if np.isfinite(t.strike[i])]
        assert (g.count, list(g.rows), g.lines, g.strikes, g.first) == (
            len(rows), rows, tuple(map(tuple, runs)), (min(ok), max(ok)) if ok else None, t[rows[0]])
        assert (g.file, g.underlying, g.expiry, g.column, g.topic) == key[1:]


def test_groups_of_findings_about_no_line():
    t = FindingTable.of([Finding(NOTE, "columns not used: 'x'", file="a.csv"), Finding(NOTE, "spot differs")])
    assert [(g.count, g.lines, g.strikes) for g in t.groups()] == [(1, (), None), (1, (), None)]
