"""Loader fuzzing: hostile and broken files never crash it and never lose a row.

About 10,200 loader inputs in the default run (see ``examples``); set
CHAINTRIAGE_HYPOTHESIS_EXAMPLES (default 200) higher to scale every test up,
e.g. 2000 for ten times as many. Oracle: the accounting rule of DESIGN.md
"Snapshot file" [D], checked by ``fuzz_support.check_load``; the encodings
are produced by Python's own codecs [C].
"""

from __future__ import annotations

import codecs

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from chaintriage.core.findings import ChainTriageError
from chaintriage.core.loading import FileLoad
from tests.core.fuzz_support import AS_OF, HEADER, SMALL_VALID, check_load, examples


#: A numpy overflow or invalid-value warning means a number went non-finite unnoticed: fail on it.
pytestmark = pytest.mark.filterwarnings("error::RuntimeWarning")


def _settings(n: int):
    return settings(max_examples=examples(n), deadline=None, database=None,
                    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow,
                                           HealthCheck.filter_too_much, HealthCheck.data_too_large])


def _load_bytes(tmp_path, data: bytes, name: str = "f.csv"):
    p = tmp_path / name
    p.write_bytes(data)
    return check_load(p)


# --------------------------------------------------------------------------- raw bytes


@_settings(6200)
@given(prefix=st.sampled_from([b"", HEADER.encode() + b"\n", b"\xef\xbb\xbf" + HEADER.encode() + b"\r\n"]),
       body=st.binary(max_size=400))
def test_random_bytes(tmp_path, prefix, body):
    _load_bytes(tmp_path, prefix + body)


@_settings(1000)
@given(edits=st.lists(st.tuples(st.integers(0, len(SMALL_VALID) - 1), st.binary(max_size=3),
                                st.integers(0, 2)), min_size=1, max_size=6))
def test_mutated_valid_file(tmp_path, edits):
    """A valid file with a few bytes replaced, inserted or deleted."""
    data = bytearray(SMALL_VALID.encode())
    for pos, chunk, op in edits:
        pos = min(pos, len(data))
        if op == 0:
            data[pos:pos + len(chunk)] = chunk
        elif op == 1:
            data[pos:pos] = chunk
        else:
            del data[pos:pos + max(1, len(chunk))]
    _load_bytes(tmp_path, bytes(data))


def test_truncated_at_every_byte(tmp_path):
    """Cut a valid file at every byte position; then a UTF-8 one at every byte near a multi-byte name."""
    data = SMALL_VALID.encode()
    for cut in range(len(data) + 1):
        res = _load_bytes(tmp_path, data[:cut])
        if cut == len(data):
            assert isinstance(res, FileLoad) and res.rows_accepted == 6
        elif cut == 0:
            assert isinstance(res, ChainTriageError) and "empty" in str(res)
        elif cut < len(SMALL_VALID.split("\n")[0]) - 3:  # header cut short: a required column is gone
            assert isinstance(res, ChainTriageError)
    wide = SMALL_VALID.replace("QRTZ", "ÆRTZ€").encode()
    near = sorted({c for i, b in enumerate(wide) if b >= 0x80 for c in range(i - 1, i + 3)} & set(range(len(wide))))
    assert len(near) > 40
    for cut in near:
        res = _load_bytes(tmp_path, wide[:cut])
        assert not isinstance(res, FileLoad) or res.rows_read >= res.rows_accepted


# --------------------------------------------------------------------------- encodings

_ENCODINGS = ["utf-16", "utf-16-le", "utf-16-be", "utf-32", "latin-1", "cp1252", "utf-8-sig", "utf-8",
              "mac_roman", "cp437"]


@_settings(400)
@given(enc=st.sampled_from(_ENCODINGS),
       name=st.sampled_from(["QRTZ", "ÆRTZ", "QRT€", "Ünd", "Q“R”", "QR\u00a0TZ"]),
       bom=st.booleans())
def test_wrong_encodings(tmp_path, enc, name, bom):
    text = SMALL_VALID.replace("QRTZ", name)
    try:
        data = text.encode(enc)
    except UnicodeEncodeError:
        data = text.encode(enc, "replace")
    if bom and enc in ("utf-16-le", "utf-16-be"):
        data = (codecs.BOM_UTF16_LE if enc.endswith("le") else codecs.BOM_UTF16_BE) + data
    res = _load_bytes(tmp_path, data)
    if enc.startswith(("utf-16", "utf-32")):
        assert isinstance(res, ChainTriageError)  # never read as garbage rows
    if enc in ("utf-8", "utf-8-sig"):
        assert isinstance(res, FileLoad) and res.rows_accepted == 6


# --------------------------------------------------------------------------- columns

_COLS = ["underlying", "as_of", "spot", "expiry", "strike", "kind", "bid", "ask", "iv", "iv_basis", "volume",
         "open_interest", "settle", "rate", "div_yield"]
_VALUES = {"underlying": "QRTZ", "as_of": AS_OF, "spot": "100", "expiry": "2026-03-20", "strike": "100",
           "kind": "call", "bid": "1.00", "ask": "1.10", "iv": "0.2", "iv_basis": "252", "volume": "5",
           "open_interest": "7", "settle": "pm", "rate": "0.03", "div_yield": "1%"}


@st.composite
def column_files(draw):
    cols = draw(st.lists(st.sampled_from(_COLS + ["junk", "", "Strike Price", "bid "]), min_size=0, max_size=20))
    spellings = [draw(st.sampled_from([c, c.upper(), f" {c}", c.replace("_", " "), c.replace("_", "-")]))
                 for c in cols]
    nrows = draw(st.integers(0, 5))
    lines = [",".join(spellings)]
    for r in range(nrows):
        vals = [_VALUES.get(c.strip(), "x") for c in cols]
        vals = [v if c != "strike" else str(100 + r) for v, c in zip(vals, cols)]
        extra = draw(st.sampled_from(["", "", ",", ",extra", ",,", "\t"]))
        lines.append(",".join(vals) + extra)
    return "\n".join(lines) + draw(st.sampled_from(["", "\n"]))


@_settings(800)
@given(text=column_files())
def test_extra_missing_and_duplicated_columns(tmp_path, text):
    res = _load_bytes(tmp_path, text.encode())
    header = [h.strip().casefold().replace(" ", "_").replace("-", "_") for h in text.split("\n")[0].split(",")]
    dup = {h for h in header if h in _COLS and header.count(h) > 1}
    if dup:
        assert isinstance(res, ChainTriageError) and "more than once" in str(res)


# --------------------------------------------------------------------------- numbers, dates, mixtures

_NUMBERS = ["1e308", "1.7976931348623157e308", "1e309", "1e400", "-1e400", "1e-320", "4.9e-324", "1e-400",
            "-0", "-0.0", "+0", "0", "nan", "NaN", "-nan", "inf", "-inf", "Infinity", "-Infinity", "INF",
            "1.#INF", "#N/A", "N/A", "null", "None", "", " ", "1e", "e5", ".", "-", "+", "0x10", "1_000",
            "1,000", "1 000", "١٢٣", "１２", "5%", "%", "1e+308%", "12345678901234567890123456789",
            "0." + "0" * 400 + "1", "9" * 400, "1.5", "100", "0.01", "0.001", "99999999"]
_NUMERIC = ["spot", "strike", "bid", "ask", "iv", "volume", "open_interest", "rate", "div_yield"]
_FULL_HEADER = ",".join(_COLS)


def _row(values: dict[str, str]) -> str:
    return ",".join(values.get(c, _VALUES[c]) for c in _COLS)


@_settings(300)
@given(rows=st.lists(st.dictionaries(st.sampled_from(_NUMERIC), st.one_of(st.sampled_from(_NUMBERS),
                                                                            st.floats().map(repr),
                                                                            st.floats().map(str))),
                     min_size=1, max_size=6))
def test_extreme_and_non_finite_numbers(tmp_path, rows):
    body = [_row({**r, "strike": r.get("strike", str(90 + i))}) for i, r in enumerate(rows)]
    res = _load_bytes(tmp_path, ("\n".join([_FULL_HEADER, *body]) + "\n").encode())
    if isinstance(res, FileLoad):
        assert res.rows_read == len(rows)


_DATES = ["2026/03/20", "20.03.2026", "20260320", "2026-3-20", "2026-03-20T16:00", "2026-03-20 16:00:00",
          "2026-03-20T16:00:00Z", "03/20/2026", "Mar 20 2026", "2026-02-29", "2026-13-01", "2026-00-10",
          "0000-01-01", "9999-12-31", "2262-04-12", "1677-09-21", "2026-03-20 ", "２０２６-03-20", "",
          "2026-W12", "2026-079", "2026-03-20+01:00", "-2026-03-20", "2026-03-20\x00"]
_TIMES = [AS_OF, "2026-03-02", "2026-03-02T15:30", "2026-03-02T15:30:00+99:99", "2026-03-02T25:30:00Z",
          "2026-03-02T15:30:00.123456789123Z", "2026-03-02 15:30+0530", "2026-03-02T15:30:00-05",
          "2026/03/02T15:30:00Z", "02.03.2026 15:30 +01:00", "20260302T153000Z", "9999-12-31T23:59:59Z",
          "1900-01-01T00:00:00+14:00", "2199-12-31T23:59:59-12:00", "now", ""]


@_settings(300)
@given(rows=st.lists(st.tuples(st.sampled_from(_DATES + ["2026-03-20"]), st.sampled_from(_TIMES)),
                     min_size=1, max_size=6))
def test_dates_and_times_in_odd_formats(tmp_path, rows):
    body = [_row({"expiry": e, "as_of": t, "strike": str(90 + i)}) for i, (e, t) in enumerate(rows)]
    res = _load_bytes(tmp_path, ("\n".join([_FULL_HEADER, *body]) + "\n").encode())
    if isinstance(res, FileLoad):
        assert res.rows_read == len(rows)


_NAMES = ["QRTZ", "VELM", "qrtz", " QRTZ", "[bold]X[/bold]", "[link=http://x.invalid]Y[/link]", "\x1b[31mR",
          "\x1b]8;;http://x.invalid\x07Z\x1b]8;;\x07", "A\x07B", "A\bB", "A\rB", "=1+2", "@SUM(A1)", "-2+3",
          "\u202eTZRQ", "\ufeffQRTZ", "Q\x00R", "Ω", "😀", "x" * 5000]


@st.composite
def mixed_files(draw):
    n = draw(st.integers(1, 8))
    rows = []
    for i in range(n):
        r = {"underlying": draw(st.sampled_from(_NAMES)), "strike": str(90 + i),
             "kind": draw(st.sampled_from(["call", "put"]))}
        if draw(st.booleans()):
            r["underlying"] = '"' + r["underlying"].replace('"', '""') + '"'
        rows.append(_row(r))
    eols = [draw(st.sampled_from(["\n", "\r\n", "\r"])) for _ in range(n + 1)]
    text = _FULL_HEADER + "".join(eol + row for eol, row in zip(eols, rows)) + eols[-1]
    data = text.encode()
    # sprinkle NUL bytes and an occasional very long line
    for pos in draw(st.lists(st.integers(0, len(data)), max_size=3)):
        data = data[:pos] + b"\x00" + data[pos:]
    if draw(st.integers(0, 9)) == 0:
        data += b"QRTZ," + b"9" * draw(st.sampled_from([10_000, 200_000])) + b",100,2026-03-20,1,c,1,2\n"
    return data


@_settings(200)
@given(data=mixed_files())
def test_mixed_underlyings_line_endings_nul_and_long_lines(tmp_path, data):
    _load_bytes(tmp_path, data)


@_settings(60)
@given(seed_len=st.sampled_from([1, 100_000, 1_000_000]), quoted=st.booleans(), where=st.integers(0, 7))
def test_very_long_fields(tmp_path, seed_len, quoted, where):
    """A single field of up to a million characters, in any column, quoted or not."""
    vals = [_VALUES[c] for c in _COLS[:8]]
    big = "7" * seed_len
    vals[where] = f'"{big}"' if quoted else big
    text = ",".join(_COLS[:8]) + "\n" + ",".join(vals) + "\n"
    _load_bytes(tmp_path, text.encode())


_DIRECTIVES = ["%Y", "%m", "%d", "%y", "%b", "%B", "%j", "%H", "%M", "%S", "%f", "%p", "%a", "%A", "%U", "%W",
               "%w", "%u", "%V", "%G", "%z", "%Z", "%c", "%x", "%X", "%%", "%", "%Q", "%s", "/", "-", ".", " ", "T"]


@_settings(200)
@given(fmt=st.lists(st.sampled_from(_DIRECTIVES), min_size=1, max_size=6).map("".join),
       values=st.lists(st.sampled_from(_DATES + ["01/15/2027", "15.01.2027 16:00", "2027 15 01"]), min_size=1,
                       max_size=4))
def test_expiry_formats_from_a_column_map(tmp_path, fmt, values):
    """Any strftime-like format in a mapping: a usable map, or the project's error naming the format."""
    from chaintriage.core.loading import ColumnMap

    body = [_row({"expiry": v, "strike": str(90 + i)}) for i, v in enumerate(values)]
    p = tmp_path / "m.csv"
    p.write_bytes(("\n".join([_FULL_HEADER, *body]) + "\n").encode())
    res = check_load(p, ColumnMap(expiry_format=fmt))
    if isinstance(res, FileLoad):
        for s in res.snapshots:  # an expiry is a date: no time of day survives
            assert (s.contracts["expiry"] == s.contracts["expiry"].dt.normalize()).all()


@st.composite
def parquet_columns(draw):
    """Every known column as a random Arrow type: text, numbers, bytes, times near and far, lists, nulls."""
    import pyarrow as pa

    n = draw(st.integers(0, 5))
    cols = {}
    for name in draw(st.lists(st.sampled_from(_COLS), min_size=3, max_size=len(_COLS), unique=True)):
        kind = draw(st.sampled_from(["text", "float", "int", "bytes", "ts", "date", "list", "null", "bool"]))
        if kind == "text":
            arr = pa.array(draw(st.lists(st.one_of(st.none(), st.sampled_from([_VALUES[name], ""]), st.text(max_size=5)),
                                         min_size=n, max_size=n)), type=pa.string())
        elif kind == "float":
            arr = pa.array(draw(st.lists(st.one_of(st.none(), st.floats()), min_size=n, max_size=n)), type=pa.float64())
        elif kind == "int":
            arr = pa.array(draw(st.lists(st.one_of(st.none(), st.integers(-2**63, 2**63 - 1)), min_size=n, max_size=n)),
                           type=pa.int64())
        elif kind == "bytes":
            arr = pa.array(draw(st.lists(st.binary(max_size=4), min_size=n, max_size=n)), type=pa.binary())
        elif kind == "ts":
            unit = draw(st.sampled_from(["s", "ms", "us", "ns"]))
            tz = draw(st.sampled_from([None, "UTC", "Asia/Tokyo"]))
            bound = 2**62 if unit == "ns" else 10**14
            arr = pa.array(draw(st.lists(st.integers(-bound, bound), min_size=n, max_size=n)),
                           type=pa.timestamp(unit, tz=tz))
        elif kind == "date":
            arr = pa.array(draw(st.lists(st.integers(-10**6, 2**31 - 1), min_size=n, max_size=n)), type=pa.date32())
        elif kind == "list":
            arr = pa.array(draw(st.lists(st.lists(st.integers(0, 9), max_size=2), min_size=n, max_size=n)))
        elif kind == "bool":
            arr = pa.array(draw(st.lists(st.booleans(), min_size=n, max_size=n)))
        else:
            arr = pa.nulls(n)
        cols[name] = arr
    return pa.table(cols)


@_settings(150)
@given(table=parquet_columns())
def test_parquet_columns_of_any_type(tmp_path, table):
    """Parquet files whose columns have unexpected Arrow types (needs pyarrow, as the loader does)."""
    pq = pytest.importorskip("pyarrow.parquet")
    p = tmp_path / "p.parquet"
    pq.write_table(table, p)
    res = check_load(p)
    if isinstance(res, FileLoad):
        assert res.rows_read == table.num_rows


_PIECES = [SMALL_VALID, SMALL_VALID.replace("call", "put"), SMALL_VALID.replace("100.5", "101"),
           SMALL_VALID.replace("-05:00", "-04:00"), SMALL_VALID.replace("QRTZ", "VELM"), HEADER + "\n", "", "x"]


@_settings(120)
@given(parts=st.lists(st.tuples(st.sampled_from(_PIECES), st.integers(0, 8)), min_size=1, max_size=4))
def test_several_files_merge_with_exact_accounting(tmp_path, parts):
    """load_files over overlapping files: per-file counts stay exact after duplicates across files leave."""
    from chaintriage.core.findings import LEFT_OUT
    from chaintriage.core.loading import load_files

    paths = []
    for i, (text, drop) in enumerate(parts):
        lines = text.split("\n")
        if drop and len(lines) > 2:
            del lines[1 + drop % (len(lines) - 2)]
        paths.append(tmp_path / f"f{i}.csv")
        paths[-1].write_text("\n".join(lines))
    res = load_files(paths)
    assert len(res.files) + len(res.errors) == len(paths)
    for fl in res.files:
        left = [f for f in fl.findings if f.severity == LEFT_OUT]
        assert all(f.line is not None for f in left)
        assert fl.rows_read == fl.rows_accepted + len(left)
    assert sum(len(s.contracts) for s in res.snapshots) == res.rows_accepted
    for e in res.errors:
        assert isinstance(e, ChainTriageError) and e.reason
