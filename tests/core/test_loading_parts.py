"""Big inputs are read a few underlyings at a time (``PartLoader``): the outcome equals ``load_files``.

Oracle: ``load_files`` on the same files [D] (itself checked against Python's
csv module and hand-written cases by the loading suites). The block and part
sizes are forced down so that small files are cut into many blocks and every
underlying lands in a part of its own or shares one: the same rows accepted,
the same findings (as a multiset, and in the same groups), the same snapshots,
the same unusable files.
"""

from __future__ import annotations

from collections import Counter

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from chaintriage.core import loading
from chaintriage.core.loading import PartLoader, SnapshotOverrides, load_files

from .fuzz_support import AS_OF, SMALL_VALID, examples
from .test_loading_blocks import MESSY

SETTINGS = settings(max_examples=examples(60), deadline=None,
                    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])

ROWS = (MESSY.splitlines(keepends=True)[1:] + SMALL_VALID.splitlines(keepends=True)[1:] + [
    f"ABC,{AS_OF},50,2026-03-20,50,call,1.00,1.10\n",
    f"ABC,{AS_OF},50,2026-03-20,50,call,1.00,1.20\n",  # a duplicate
    f"ABC,2026-03-02T16:00:00-05:00,51,2026-03-20,55,put,0,1.10\n",  # a later as_of, a zero bid
    f" ,{AS_OF},50,2026-03-20,50,call,1.00,1.10\n",  # no underlying
    f"ZED,{AS_OF},50,2026-03-01,50,call,1.00,1.10\n",  # before the snapshot date
    f"ZED,{AS_OF},x,2026-03-20,50,call,1.00,1.10\n",
    f"QRTZ,{AS_OF},100.5\n",  # short
])


def _finding_key(f):
    return (f.severity, f.reason, f.file, f.line, f.column, f.underlying, f.expiry)


def whole_outcome(paths, **kw):
    r = load_files(paths, **kw)
    findings = list(r.findings) + [f for e in r.errors for f in e.findings]
    snaps = {(s.underlying, s.as_of): (s.spot, s.contracts.to_csv(), sorted(map(_finding_key, s.findings)),
                                       s.sources) for s in r.snapshots}
    rows = {fl.path: (fl.rows_read, fl.rows_accepted) for fl in r.files}
    rows.update({e.path: (e.rows_read, 0) for e in r.errors})
    groups = Counter(_group_key(g) for g in loading.FindingTable.concat(
        [r.findings] + [e.findings for e in r.errors]).groups())
    return (Counter(map(_finding_key, findings)), snaps, rows, sorted((e.path, e.reason) for e in r.errors), groups)


def _group_key(g):
    return (g.severity, g.topic, g.file, g.underlying, g.expiry, g.column, g.count, g.lines, g.strikes)


def parts_outcome(paths, part_rows, **kw):
    loader = PartLoader(paths, part_rows=part_rows, **kw)
    findings, snaps, rows, groups = [], {}, {}, Counter()
    for part in loader:
        findings.extend(part.findings)
        groups.update(_group_key(g) for g in part.findings.groups())
        for s in part.snapshots:
            snaps[(s.underlying, s.as_of)] = (s.spot, s.contracts.to_csv(), sorted(map(_finding_key, s.findings)),
                                              s.sources)
        for fl in part.files:
            read, acc = rows.get(fl.path, (0, 0))
            rows[fl.path] = (read + fl.rows_read, acc + fl.rows_accepted)
    errors = loader.errors + loader.unusable()
    for e in errors:
        rows[e.path] = (e.rows_read or rows.get(e.path, (0, 0))[0], 0)
    return (Counter(map(_finding_key, findings)), snaps, rows, sorted((e.path, e.reason) for e in errors), groups)


def same_both_ways(paths, monkeypatch, blocks=(7, 40, 1 << 30), parts=(1, 3, 10 ** 9), **kw):
    whole = whole_outcome(paths, **kw)
    for block in blocks:
        monkeypatch.setattr(loading, "BIG_FILE_BYTES", 0)
        monkeypatch.setattr(loading, "CHUNK_BYTES", block)
        for part_rows in parts:
            assert parts_outcome(paths, part_rows, **kw) == whole, (block, part_rows)


def write(tmp_path, name, header, body) -> str:
    p = tmp_path / name
    p.write_bytes((header + "".join(body)).encode())
    return str(p)


HEADER = SMALL_VALID.splitlines(keepends=True)[0]


def test_a_messy_file_of_several_underlyings(tmp_path, monkeypatch):
    same_both_ways([write(tmp_path, "a.csv", HEADER, ROWS)], monkeypatch)


def test_files_merged_across_parts(tmp_path, monkeypatch):
    a = write(tmp_path, "a.csv", HEADER, ROWS[::2])
    b = write(tmp_path, "b.csv", HEADER, ROWS[1::2] + ROWS[:4])
    same_both_ways([a, b, a], monkeypatch)


def test_a_file_with_no_usable_row_and_a_missing_file(tmp_path, monkeypatch):
    bad = write(tmp_path, "bad.csv", HEADER, [f"QRTZ,{AS_OF},x,2026-03-20,95,put,1,2\n"] * 3 + ["ABC,1\n"])
    same_both_ways([bad, str(tmp_path / "missing.csv")], monkeypatch)


def test_overrides(tmp_path, monkeypatch):
    p = write(tmp_path, "a.csv", HEADER, ROWS)
    same_both_ways([p], monkeypatch, overrides=SnapshotOverrides(underlying="OVR", spot=101.0))
    one = write(tmp_path, "one.csv", HEADER, [r for r in ROWS if r.startswith("ABC")])
    same_both_ways([one], monkeypatch, overrides=SnapshotOverrides(spot=50.0))
    # several underlyings and one spot: both refuse the file with the same message
    assert whole_outcome([p], overrides=SnapshotOverrides(spot=50.0))[3]
    same_both_ways([p], monkeypatch, overrides=SnapshotOverrides(spot=50.0))


@SETTINGS
@given(body=st.lists(st.sampled_from(ROWS + ["\n", "\r\n", 'QRTZ,"a""b",1\n']), max_size=30),
       part_rows=st.integers(1, 12), block=st.integers(1, 200))
def test_shuffled_rows_read_the_same_in_parts(tmp_path, monkeypatch, body, part_rows, block):
    p = write(tmp_path, "f.csv", HEADER, body)
    same_both_ways([p], monkeypatch, blocks=(block,), parts=(part_rows,))


def test_a_file_read_the_slow_way_says_so(tmp_path, monkeypatch):
    """Quotes inside a field make the rest of a big file go to the csv module: a note names the line,
    and the rest of the outcome is unchanged."""
    body = ROWS[:6] + ['QRTZ,"a"b",1\n'] + ROWS[6:]
    p = write(tmp_path, "q.csv", HEADER, body)
    whole = whole_outcome([p])
    monkeypatch.setattr(loading, "BIG_FILE_BYTES", 0)
    monkeypatch.setattr(loading, "CHUNK_BYTES", 40)
    monkeypatch.setattr(loading, "SLOW_READ_NOTE_BYTES", 0)
    parts = parts_outcome([p], 2)
    notes = [k for k in parts[0] if "exact reader" in k[1]]
    assert len(notes) == 1 and notes[0][0] == "note" and notes[0][2] == p and "at or after line" in notes[0][1]
    del parts[0][notes[0]]
    assert parts[:4] == whole[:4]
