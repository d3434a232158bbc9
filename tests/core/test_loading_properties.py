"""Property tests of the loader: it never crashes, never drops a row silently, and numbers lines right.

Oracles: Python's csv module (writer to build files, reader as the reference
tokenizer) [C]; "header = line 1, a line break is \\n, \\r\\n or \\r" as a text
editor counts [C]; the accounting rule of DESIGN.md "Snapshot file" [D].
"""

from __future__ import annotations

import csv
import io
import os
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from chaintriage.core import loading
from chaintriage.core.findings import LEFT_OUT, ChainTriageError
from chaintriage.core.loading import FileLoad, SnapshotFileError, load_file

#: Examples per property; raise it for a deeper run, e.g. CHAINTRIAGE_HYPOTHESIS_EXAMPLES=5000.
MAX_EXAMPLES = int(os.environ.get("CHAINTRIAGE_HYPOTHESIS_EXAMPLES", "200"))
SETTINGS = settings(max_examples=MAX_EXAMPLES, deadline=None,
                    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])

COLUMNS = ["underlying", "as_of", "spot", "expiry", "strike", "kind", "bid", "ask",
           "iv", "iv_basis", "volume", "open_interest", "settle", "rate", "div_yield"]


def check_outcome(path: Path) -> FileLoad | SnapshotFileError:
    """Load; any exception other than a ChainTriageError with a message fails the test."""
    try:
        load = load_file(path)
    except SnapshotFileError as exc:
        assert str(exc).startswith(str(path) + ": ") and exc.reason
        lo = [f for f in exc.findings if f.severity == LEFT_OUT and f.line is not None]
        assert len(lo) == exc.rows_read  # nothing usable: every row has its reason
        return exc
    except ChainTriageError as exc:  # pragma: no cover - load_file raises only SnapshotFileError today
        assert str(exc)
        return exc
    row_left = [f for f in load.findings if f.severity == LEFT_OUT and f.line is not None]
    assert load.rows_read == load.rows_accepted + len(row_left)
    assert len({f.line for f in row_left}) == len(row_left)
    assert sum(len(s.contracts) for s in load.snapshots) == load.rows_accepted
    for s in load.snapshots:
        c = s.contracts
        assert list(c.columns) == list(loading.CONTRACT_COLUMNS)
        assert (c["strike"] > 0).all()
        assert c["kind"].isin(["call", "put"]).all()
        assert not (c["bid"] > c["ask"]).any()
        assert s.as_of.tzinfo is not None and s.spot > 0
    return load


# --------------------------------------------------------------------------- arbitrary input

csvish = st.text(alphabet=st.sampled_from(list('abk,;\t"\n\r 0123456789.-:TZ+%\x00é[]')), max_size=400)
header_prefix = st.sampled_from(["", "underlying,as_of,spot,expiry,strike,kind,bid,ask\n"])


@SETTINGS
@given(prefix=header_prefix, body=st.one_of(st.text(max_size=300), csvish))
def test_arbitrary_text_never_crashes(tmp_path, prefix, body):
    p = tmp_path / "t.csv"
    p.write_bytes((prefix + body).encode("utf-8", "surrogatepass"))
    check_outcome(p)


@SETTINGS
@given(prefix=header_prefix, body=st.binary(max_size=300))
def test_arbitrary_bytes_never_crash(tmp_path, prefix, body):
    p = tmp_path / "b.csv"
    p.write_bytes(prefix.encode() + body)
    check_outcome(p)


# --------------------------------------------------------------------------- plausible and implausible rows

numbers = st.one_of(
    st.floats(min_value=-5, max_value=500, allow_nan=False).map(lambda x: f"{x:.2f}"),
    st.integers(min_value=-10, max_value=300).map(str),
    st.sampled_from(["", "0", "nan", "NaN", "-inf", "inf", "1e999", "abc", " 5 ", "1,5", "2%", "+3", ".5"]),
    st.text(max_size=4),
)
cells = {
    "underlying": st.one_of(st.sampled_from(["QRTZ", "VELM", "", "[b]QRTZ[/b]", "Q,R", 'Q"R', "Q\nR",
                                             "\x1b[2J", " QRTZ "]), st.text(max_size=6)),
    "as_of": st.sampled_from(["2026-03-02T15:30:00-05:00", "2026-03-02T15:30:00Z", "2026-03-02 16:00+0100",
                              "2026-03-02T15:30", "", "garbage", "2026-02-30T10:00:00Z", "9999-01-01T00:00:00Z"]),
    "spot": numbers,
    "expiry": st.one_of(st.sampled_from(["2026-03-20", "2026-03-01", "2026-02-30", "", "20260320",
                                         "2026-03-20T00:00", "0001-01-01"]),
                        st.dates().map(str)),
    "strike": numbers,
    "kind": st.one_of(st.sampled_from(["call", "put", "c", "P", "CALL", "x", "", " p"]), st.text(max_size=3)),
    "bid": numbers,
    "ask": numbers,
    "iv": numbers,
    "iv_basis": st.sampled_from(["", "252", "365", "250.0", "360", "x"]),
    "volume": numbers,
    "open_interest": numbers,
    "settle": st.sampled_from(["", "pm", "AM", "noon"]),
    "rate": numbers,
    "div_yield": numbers,
}


@st.composite
def snapshot_files(draw):
    """A CSV written by csv.writer, with the data line where each row starts."""
    cols = draw(st.lists(st.sampled_from(COLUMNS), min_size=5, max_size=len(COLUMNS), unique=True))
    if draw(st.booleans()):  # usually a loadable header
        cols = ["underlying", "as_of", "spot", "expiry", "strike", "kind", "bid", "ask"] + [
            c for c in cols if c not in ("underlying", "as_of", "spot", "expiry", "strike", "kind", "bid", "ask")]
    header = [draw(st.sampled_from([c, c.upper(), f" {c} "])) for c in cols]
    n = draw(st.integers(min_value=0, max_value=12))
    rows = []
    for _ in range(n):
        r = [draw(cells[c]) for c in cols]
        shape = draw(st.sampled_from(["ok", "ok", "ok", "short", "long", "trailing"]))
        if shape == "short":
            r = r[: max(2, len(r) - 2)]
        elif shape == "long":
            r = r + draw(st.lists(st.sampled_from(["extra", "", " ", "\t", '"', "\x0b", "a\nb"]),
                                  min_size=1, max_size=3))
        elif shape == "trailing":
            r = r + [""]
        rows.append(r)
    eol = draw(st.sampled_from(["\n", "\r\n"]))
    if eol == "\n":
        # csv.writer quotes only the characters of its own line terminator; a lone \r left
        # unquoted is a line break to an editor (and to us), so make the writer quote it
        rows = [[c.replace("\r", "\r\n") for c in r] for r in rows]
    blank_after = draw(st.sets(st.integers(min_value=0, max_value=n)))
    out = io.StringIO()
    w = csv.writer(out, lineterminator=eol)
    w.writerow(header)
    starts = []
    for i, r in enumerate(rows):
        if i in blank_after:
            out.write(eol)
        text = out.getvalue()
        starts.append(text.replace("\r\n", "\n").replace("\r", "\n").count("\n") + 1)
        w.writerow(r)
    return out.getvalue(), starts


@SETTINGS
@given(data=snapshot_files())
def test_rows_accounted_for_and_lines_right(tmp_path, data):
    text, starts = data
    p = tmp_path / "g.csv"
    p.write_bytes(text.encode("utf-8", "surrogatepass"))
    res = check_outcome(p)
    if isinstance(res, FileLoad):
        assert res.rows_read == len(starts)
        seen = [int(x) for s in res.snapshots for x in s.contracts["source_line"]]
        seen += [f.line for f in res.findings if f.severity == LEFT_OUT and f.line is not None]
        assert sorted(seen) == starts  # every row once, at the line an editor shows
    elif res.rows_read:
        assert sorted(f.line for f in res.findings if f.severity == LEFT_OUT and f.line) == starts


def _load_outcome(p, signed=()):
    """What loading ``p`` gives, comparable with ==: the error, or the findings, counts, snapshots and
    their cells (with the sign bits of the ``signed`` columns, so -0.0 differs from 0.0)."""
    try:
        load = load_file(p)
    except SnapshotFileError as exc:
        return ("error", exc.reason, [str(f) for f in exc.findings])
    frames = [s.contracts.to_dict("list") for s in load.snapshots]
    signs = [np.signbit(s.contracts[c].to_numpy()).tolist() for s in load.snapshots for c in signed]
    return ("ok", [str(f) for f in load.findings], load.rows_read, load.rows_accepted,
            [(s.underlying, s.as_of, s.spot) for s in load.snapshots], repr(frames), signs)


@SETTINGS
@given(data=snapshot_files())
def test_fast_path_matches_the_csv_module(tmp_path, data, monkeypatch):
    """The vectorised record splitter and pandas give what the csv module gives."""
    text, _ = data
    p = tmp_path / "d.csv"
    p.write_bytes(text.encode("utf-8", "surrogatepass"))

    fast = _load_outcome(p)
    with monkeypatch.context() as m:
        m.setattr(loading, "_ascii_table", lambda *a, **k: None)
        m.setattr(loading, "_table_fast", lambda *a, **k: None)
        slow = _load_outcome(p)
    assert fast == slow


_PLAIN_HEADER = "underlying,as_of,spot,expiry,strike,kind,bid,ask,iv,volume\n"
_PLAIN_ROW = "QRTZ,2026-03-02T15:30:00-05:00,100,2026-03-20,{k},call,1.5,1.6,0.3,{v}\n"


@pytest.mark.parametrize("body", [
    # every line of the header's width, the common export
    "".join(_PLAIN_ROW.format(k=90 + i, v=i) for i in range(5)),
    # the first data line one field longer (the C reader would take its width), a later line short
    _PLAIN_ROW.format(k=90, v=0)[:-1] + ",\n" + _PLAIN_ROW.format(k=91, v=1) + "QRTZ,2026-03-02T15:30:00-05:00\n",
    # a short line and a long one whose delimiters make up the header's count between them
    _PLAIN_ROW.format(k=90, v=0) + "QRTZ,2026-03-02T15:30:00-05:00,100,2026-03-20,91,call,1.5,1.6,0.3\n"
    + _PLAIN_ROW.format(k=92, v=2)[:-1] + ",7\n",
    # short lines whose last cell is empty anyway, and an empty last cell on a full line
    _PLAIN_ROW.format(k=90, v="") + "QRTZ,2026-03-02T15:30:00-05:00,100,2026-03-20,91,call,1.5,1.6,0.3\n",
    # a short line when the last column holds text (its missing cell reads as empty text)
    _PLAIN_ROW.format(k=90, v="x") + "QRTZ,2026-03-02T15:30:00-05:00,100,2026-03-20,91,call\n",
    # blank and blank-looking lines between records
    _PLAIN_ROW.format(k=90, v=0) + "\n  \n" + _PLAIN_ROW.format(k=91, v=1),
    # a cell quoted, a trailing empty field, CRLF line breaks, a byte order mark, non-ASCII text
    _PLAIN_ROW.format(k=90, v=0) + '"QRTZ",2026-03-02T15:30:00-05:00,100,2026-03-20,91,call,1.5,1.6,0.3,-0\n',
    _PLAIN_ROW.format(k=90, v=0)[:-1] + ",\n" + _PLAIN_ROW.format(k=91, v=0)[:-1] + ",\n",
    _PLAIN_ROW.format(k=90, v=0).replace("\n", "\r\n") + _PLAIN_ROW.format(k=91, v=-0.0),
    "\ufeff" + _PLAIN_ROW.format(k=90, v=0) + _PLAIN_ROW.format(k=91, v=1).replace("QRTZ", "QRTZ\u00e9"),
])
def test_files_of_uniform_lines_load_as_the_csv_module_reads_them(tmp_path, monkeypatch, body):
    """The reading of a file whose lines all have the header's width (from its bytes, without
    scanning its records) gives what the csv module's reading gives, also for the files that
    only look like that [C: Python's csv module is the reference tokenizer]."""
    p = tmp_path / "u.csv"
    p.write_bytes(("\ufeff" if body.startswith("\ufeff") else "").encode()
                  + (_PLAIN_HEADER + body.lstrip("\ufeff")).encode("utf-8"))
    fast = _load_outcome(p, ("bid", "volume"))
    with monkeypatch.context() as m:
        m.setattr(loading, "_ascii_table", lambda *a, **k: None)
        m.setattr(loading, "_table_fast", lambda *a, **k: None)
        slow = _load_outcome(p, ("bid", "volume"))
    assert fast == slow


def test_a_short_line_is_found_when_the_last_column_holds_text(tmp_path, monkeypatch):
    """A line shorter than the header whose missing last cell (a text column: read as empty text)
    leaves the delimiter count short: read as the csv module reads it [C: Python's csv module]."""
    p = tmp_path / "t.csv"
    p.write_text("underlying,as_of,spot,expiry,strike,kind,bid,ask,settle\n"
                 "QRTZ,2026-03-02T15:30:00-05:00,100,2026-03-20,90,call,1.5,1.6,pm\n"
                 "QRTZ,2026-03-02T15:30:00-05:00,100,2026-03-20,91,call,1.5,1.6\n")
    fast = _load_outcome(p)
    with monkeypatch.context() as m:
        m.setattr(loading, "_ascii_table", lambda *a, **k: None)
        m.setattr(loading, "_table_fast", lambda *a, **k: None)
        assert fast == _load_outcome(p)
    assert fast[0] == "ok" and fast[3] == 1  # the short line is left out


def test_a_plain_export_is_read_from_its_bytes_without_scanning_records(tmp_path, monkeypatch):
    """The common export (ASCII, one record per line, the header's width everywhere) takes the
    reading that needs no record scan; its line numbers and re-read cells are still right."""
    def no_scan(*a, **k):
        raise AssertionError("records scanned")

    monkeypatch.setattr(loading, "_records_fast", no_scan)
    p = tmp_path / "plain.csv"
    p.write_text(_PLAIN_HEADER + _PLAIN_ROW.format(k=90, v="-0") + _PLAIN_ROW.format(k=91, v=-3)
                 + _PLAIN_ROW.format(k=91, v=5))
    load = load_file(p)
    assert load.rows_read == 3 and load.rows_accepted == 2
    assert list(load.snapshots[0].contracts["source_line"]) == [2, 3]
    assert np.signbit(load.snapshots[0].contracts["volume"].to_numpy()).tolist() == [True, False]
    assert [(f.line, f.reason) for f in load.findings] == [
        (3, "volume '-3' is negative; left blank"),
        (4, "duplicate of line 3 (same underlying, expiry, strike and kind)")]


def test_fast_path_is_taken_for_plain_quotes_and_not_for_stray_ones(tmp_path, monkeypatch):
    calls = []
    real = loading._table_csv_module
    monkeypatch.setattr(loading, "_table_csv_module", lambda *a: calls.append(1) or real(*a))
    header = "underlying,as_of,spot,expiry,strike,kind,bid,ask\n"
    good = '"QRTZ","2026-03-02T15:30:00Z",100,2026-03-20,"100","c",1,"1.1"\n"Q""R",x,1,2,3,4,5,"6\n7"\n'
    p = tmp_path / "q.csv"
    p.write_text(header + good)
    load = load_file(p)
    assert calls == [] and load.rows_read == 2
    p.write_text(header + 'QR"TZ,2026-03-02T15:30:00Z,100,2026-03-20,100,c,1,1.1\n')
    load = load_file(p)
    assert calls == [1] and load.snapshots[0].underlying == 'QR"TZ'
    assert np.array_equal(load.snapshots[0].contracts["source_line"], [2])


@pytest.mark.parametrize("n", [1, 2000])
def test_large_generated_file_accounting(tmp_path, n):
    """A bigger file with a bad row every 7th line keeps exact accounting (no timing here)."""
    lines = ["underlying,as_of,spot,expiry,strike,kind,bid,ask"]
    for i in range(n):
        bid = "x" if i % 7 == 3 else f"{1 + i % 5}.00"
        lines.append(f"QRTZ,2026-03-02T15:30:00Z,100,2026-03-20,{50 + i * 0.5},{'c' if i % 2 else 'p'},{bid},6.00")
    p = tmp_path / "big.csv"
    p.write_text("\n".join(lines) + "\n")
    load = load_file(p)
    bad = sum(1 for i in range(n) if i % 7 == 3)
    assert (load.rows_read, load.rows_accepted) == (n, n - bad)
    assert [f.line for f in load.findings if f.severity == LEFT_OUT] == [i + 2 for i in range(n) if i % 7 == 3]


# --------------------------------------------------------------------------- number columns read as numbers

#: Cells of a number column the C reader may read as numbers, and the neighbours it must refuse
#: (so the column is read as text): signed zeros, overflows, infinities, blanks, quotes.
plain_numbers = st.one_of(
    st.floats(min_value=-5, max_value=500, allow_nan=False).map(lambda x: f"{x:.2f}"),
    st.floats(allow_nan=False).map(repr),
    st.integers(min_value=-10, max_value=300).map(str),
    st.sampled_from(["", "0", "-0", "+0", "-0.0", "0e5", "-00", "1e999", "-1e999", "inf", "-Infinity", "INF",
                     " 5 ", "\t7", "+3", ".5", "5.", "1E+3", "00012", "1e-400", "9223372036854775808",
                     "18446744073709551616", "True", "nan", "1e", "1_0", "0x10", "\xa05", "-", "2%",
                     "12345678901234567890.123"]),
)


@st.composite
def number_column_files(draw):
    """A CSV of plausible rows whose number columns mostly hold numbers (csv.writer quotes where needed)."""
    cols = ["underlying", "as_of", "spot", "expiry", "strike", "kind", "bid", "ask", "iv", "volume",
            "open_interest", "rate", "div_yield"]
    n = draw(st.integers(min_value=1, max_value=10))
    pool = {c: draw(st.lists(plain_numbers, min_size=1, max_size=3)) for c in cols}
    rows = []
    for _ in range(n):
        r = ["QRTZ", "2026-03-02T15:30:00Z", draw(st.sampled_from(pool["spot"] + ["100"])), "2026-03-20",
             draw(st.sampled_from(pool["strike"] + ["95", "105.5"])), draw(st.sampled_from(["c", "p"]))]
        r += [draw(st.sampled_from(pool[c] + ["1.25", "2"])) for c in cols[6:]]
        rows.append(r)
    out = io.StringIO()
    w = csv.writer(out, lineterminator="\n",
                   quoting=draw(st.sampled_from([csv.QUOTE_MINIMAL, csv.QUOTE_NONNUMERIC, csv.QUOTE_ALL])))
    w.writerow(cols)
    w.writerows(rows)
    return out.getvalue()


@SETTINGS
@given(text=number_column_files())
def test_number_columns_read_as_numbers_match_the_text_reading(tmp_path, text, monkeypatch):
    """Number columns the C reader gives as numbers load exactly as when every cell is read as text
    (values, signed zeros, findings and their quoted cells) [D: the text reading is the reference]."""
    p = tmp_path / "n.csv"
    p.write_text(text)

    signed = ("bid", "ask", "iv", "volume", "open_interest", "rate", "div_yield")
    fast = _load_outcome(p, signed)
    with monkeypatch.context() as m:
        m.setattr(loading, "_table_numbers", lambda *a, **k: None)
        slow = _load_outcome(p, signed)
    assert fast == slow


def test_number_columns_are_read_as_numbers(tmp_path):
    """The plain file takes the number reading: number columns come as int64/float64 cells."""
    p = tmp_path / "plain.csv"
    p.write_text("underlying,as_of,spot,expiry,strike,kind,bid,ask,volume\n"
                 "QRTZ,2026-03-02T15:30:00Z,100,2026-03-20,95,c,-0,1.5,-0\n"
                 "QRTZ,2026-03-02T15:30:00Z,100,2026-03-20,95,p,0.5,1e999,7\n")
    table = loading._read_table(str(p), loading._number_columns(str(p), loading.SnapshotOverrides(),
                                                                 loading.ColumnMap()))
    assert [table.cells[i].dtype.kind for i in range(9)] == ["O", "O", "i", "O", "i", "O", "f", "f", "i"]
    assert list(table.cell_text(6, np.array([0, 1]))) == ["-0", "0.5"]
    load = load_file(p)
    c = load.snapshots[0].contracts
    assert np.signbit(c["bid"].to_numpy()).tolist() == [True]  # '-0' as float() reads it
    assert np.signbit(c["volume"].to_numpy()).tolist() == [True]  # also in a column of integers
    assert [f.reason for f in load.findings] == ["zero bid on the 95 call", "ask '1e999' is not a finite number"]
