"""Snapshot loading: every rule of DESIGN.md "Snapshot file" and the loader's documented decisions.

Sources: the schema and row rules are the project's own spec (DESIGN.md,
"Snapshot file") [D]; CSV quoting and line counting follow RFC 4180 as read
by common CSV readers [C]; ISO 8601 times with a UTC offset [C]; "bid above
ask is a crossed market", "a contract is underlying/expiry/strike/kind" and
"a price cannot be negative" are facts of the trade [C]. The underlyings in
these tests (QRTZ, VELM, DORNA) are invented.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from chaintriage.core.findings import LEFT_OUT, NOTE, WARNING, ChainTriageError
from chaintriage.core.loading import (
    FileLoad,
    SnapshotFileError,
    SnapshotOverrides,
    load_column_map,
    load_file,
    load_files,
)
from chaintriage.core.snapshot import CONTRACT_COLUMNS

DATA = Path(__file__).resolve().parent.parent / "data"

HEADER = "underlying,as_of,spot,expiry,strike,kind,bid,ask"
AS_OF = "2026-03-02T15:30:00-05:00"


def row(und="QRTZ", as_of=AS_OF, spot="100.5", expiry="2026-03-20", strike="100", kind="call",
        bid="2.10", ask="2.20") -> str:
    return ",".join([und, as_of, spot, expiry, strike, kind, bid, ask])


def write(tmp_path: Path, text: str | bytes, name: str = "chain.csv") -> Path:
    p = tmp_path / name
    if isinstance(text, bytes):
        p.write_bytes(text)
    else:
        p.write_text(text, encoding="utf-8", newline="")
    return p


def csv_file(tmp_path: Path, *rows: str, header: str = HEADER, name: str = "chain.csv") -> Path:
    return write(tmp_path, "\n".join([header, *rows]) + "\n", name)


def left_out(load: FileLoad) -> list:
    return [f for f in load.findings if f.severity == LEFT_OUT]


def warnings(load: FileLoad) -> list:
    return [f for f in load.findings if f.severity == WARNING]


def assert_accounting(load: FileLoad) -> None:
    """rows_read == accepted + left out, each left-out row has exactly one finding, and the
    snapshots hold exactly the accepted rows."""
    row_left = [f for f in left_out(load) if f.line is not None]
    assert load.rows_read == load.rows_accepted + len(row_left)
    assert len({f.line for f in row_left}) == len(row_left)
    assert sum(len(s.contracts) for s in load.snapshots) == load.rows_accepted


def one_left_out(load: FileLoad):
    lo = left_out(load)
    assert len(lo) == 1, [str(f) for f in load.findings]
    return lo[0]


# --------------------------------------------------------------------------- the happy path


def test_clean_file_gives_canonical_snapshot(tmp_path):
    p = csv_file(tmp_path, row(kind="call"), row(kind="put", bid="1.90", ask="2.00"),
                 row(strike="105", kind="c", bid="0.50", ask="0.55"))
    load = load_file(p)
    assert (load.rows_read, load.rows_accepted) == (3, 3)
    assert load.findings == []
    (snap,) = load.snapshots
    assert snap.underlying == "QRTZ"
    assert snap.spot == 100.5
    assert snap.as_of == pd.Timestamp("2026-03-02T20:30:00Z")
    assert snap.as_of.utcoffset() == pd.Timedelta(hours=-5)  # the file's own offset is kept
    c = snap.contracts
    assert list(c.columns) == list(CONTRACT_COLUMNS)
    assert c["expiry"].dtype == "datetime64[ns]"
    for col in ("strike", "bid", "ask", "iv", "volume", "open_interest", "rate", "div_yield"):
        assert c[col].dtype == np.float64, col
    assert c["source_line"].dtype == np.int64
    assert c["kind"].tolist() == ["call", "put", "call"]
    assert c["strike"].tolist() == [100.0, 100.0, 105.0]
    assert c["settle"].tolist() == ["pm"] * 3  # default
    assert c["iv_basis"].tolist() == [""] * 3
    assert c["source_line"].tolist() == [2, 3, 4]
    assert c["source_file"].tolist() == [str(p)] * 3
    assert snap.sources == (str(p),)
    assert snap.expiries() == [pd.Timestamp("2026-03-20")]


def test_headers_are_case_insensitive_and_trimmed(tmp_path):
    header = " Underlying ,AS_OF,Spot , EXPIRY,Strike,KIND,  bid,Ask,Open Interest,div-yield"
    p = csv_file(tmp_path, row() + ",1500,1.5%", header=header)
    load = load_file(p)
    c = load.snapshots[0].contracts
    assert c["open_interest"].iloc[0] == 1500
    assert c["div_yield"].iloc[0] == pytest.approx(0.015)
    assert load.findings == []


def test_utf8_bom_is_accepted(tmp_path):
    p = write(tmp_path, b"\xef\xbb\xbf" + (HEADER + "\n" + row() + "\n").encode())
    assert load_file(p).rows_accepted == 1


def test_crlf_and_lone_cr_line_endings(tmp_path):
    text = HEADER + "\r\n" + row(strike="95") + "\r\n\r\n" + row(strike="105") + "\r" + row(strike="110") + "\r\n"
    p = write(tmp_path, text.encode())
    load = load_file(p)
    assert load.snapshots[0].contracts["source_line"].tolist() == [2, 4, 5]


def test_optional_columns_parse_with_units(tmp_path):
    header = HEADER + ",iv,iv_basis,volume,open_interest,settle,rate,div_yield"
    p = csv_file(
        tmp_path,
        row(strike="95") + ",25.5%,252,10,300,AM,4.5%,0.01",
        row(strike="100") + ",0.22,365,,,pm,0.045,1%",
        row(strike="105") + ",,,,,,,",
        header=header,
    )
    load = load_file(p)
    assert load.findings == []
    c = load.snapshots[0].contracts
    assert c["iv"].tolist()[:2] == pytest.approx([0.255, 0.22])
    assert np.isnan(c["iv"].iloc[2])
    assert c["iv_basis"].tolist() == ["252", "365", ""]
    assert c["volume"].iloc[0] == 10 and np.isnan(c["volume"].iloc[1])
    assert c["settle"].tolist() == ["am", "pm", "pm"]
    assert c["rate"].tolist()[:2] == pytest.approx([0.045, 0.045])
    assert c["div_yield"].tolist()[:2] == pytest.approx([0.01, 0.01])


# --------------------------------------------------------------------------- file-level errors


@pytest.mark.parametrize(
    "content, words",
    [
        (b"", "is empty"),
        (b"  \n\n \t\n", "is empty"),
        ((HEADER + "\n").encode(), "no data rows"),
        (b"\xff\xfeu\x00n\x00", "UTF-16"),
        (b"PK\x03\x04rest", "zip"),
        ((HEADER + "\n" + row()).encode().replace(b"QRTZ", b"QR\xe9TZ"), "not UTF-8 text: byte 0xE9 on line 2"),
    ],
)
def test_unusable_files_raise_with_file_and_reason(tmp_path, content, words):
    p = write(tmp_path, content)
    with pytest.raises(SnapshotFileError) as info:
        load_file(p)
    assert str(p) in str(info.value)
    assert words in str(info.value)
    assert isinstance(info.value, ChainTriageError)


def test_missing_file_and_directory(tmp_path):
    with pytest.raises(SnapshotFileError, match="no such file"):
        load_file(tmp_path / "nope.csv")
    with pytest.raises(SnapshotFileError, match="is a directory"):
        load_file(tmp_path)


def test_missing_required_column_is_named_with_a_suggestion(tmp_path):
    p = csv_file(tmp_path, "QRTZ,2026-03-02T15:30:00Z,100,2026-03-20,100,call,1,1.1",
                 header="underlying,as_of,spot,expiry,stirke,kind,bid,asks")
    with pytest.raises(SnapshotFileError) as info:
        load_file(p)
    msg = str(info.value)
    assert "required column(s) missing: strike, ask" in msg
    assert "'stirke' for strike?" in msg


def test_duplicate_header_column_is_an_error(tmp_path):
    p = csv_file(tmp_path, row() + ",1", header=HEADER + ",BID")
    with pytest.raises(SnapshotFileError, match="appears more than once"):
        load_file(p)


def test_snapshot_wide_value_missing_everywhere(tmp_path):
    p = csv_file(tmp_path, "2026-03-20,100,call,1,1.1", header="expiry,strike,kind,bid,ask")
    with pytest.raises(SnapshotFileError, match="no underlying: the file has no underlying column"):
        load_file(p)
    with pytest.raises(SnapshotFileError, match="no as_of"):
        load_file(p, overrides=SnapshotOverrides(underlying="QRTZ"))
    with pytest.raises(SnapshotFileError, match="no spot"):
        load_file(p, overrides=SnapshotOverrides(underlying="QRTZ", as_of=AS_OF))
    load = load_file(p, overrides=SnapshotOverrides(underlying="QRTZ", as_of=AS_OF, spot=101))
    snap = load.snapshots[0]
    assert (snap.underlying, snap.spot, snap.as_of) == ("QRTZ", 101.0, pd.Timestamp(AS_OF))


def test_no_usable_row_keeps_the_findings(tmp_path):
    p = csv_file(tmp_path, row(strike="-1"), row(strike="abc"))
    with pytest.raises(SnapshotFileError) as info:
        load_file(p)
    err = info.value
    assert "no usable row: all 2 rows were left out" in str(err)
    assert err.rows_read == 2
    assert [f.line for f in err.findings] == [2, 3]


# --------------------------------------------------------------------------- row rules


@pytest.mark.parametrize(
    "kw, column, words",
    [
        ({"strike": "abc"}, "strike", "strike 'abc' is not a number"),
        ({"strike": "NaN"}, "strike", "not a finite number"),
        ({"strike": "inf"}, "strike", "not a finite number"),
        ({"strike": "1e999"}, "strike", "not a finite number"),
        ({"strike": "0"}, "strike", "is not positive"),
        ({"strike": "-5"}, "strike", "is not positive"),
        ({"strike": ""}, "strike", "strike is empty"),
        ({"kind": "straddle"}, "kind", "kind 'straddle' is not call/put"),
        ({"kind": ""}, "kind", "kind is empty"),
        ({"expiry": "2026-02-30"}, "expiry", "not a possible date"),
        ({"expiry": "03/20/2026"}, "expiry", "is not a date written YYYY-MM-DD"),
        ({"expiry": "0026-03-20"}, "expiry", "outside the years"),
        ({"expiry": "2026-03-01"}, "expiry", "before the snapshot date 2026-03-02"),
        ({"bid": "-0.1"}, "bid", "negative price"),
        ({"ask": "-0.1", "bid": ""}, "ask", "negative price"),
        ({"bid": "x1"}, "bid", "bid 'x1' is not a number"),
        ({"bid": "", "ask": ""}, None, "no bid and no ask"),
        ({"bid": "2.5", "ask": "2.4"}, None, "crossed market: bid 2.50 is above ask 2.40"),
        ({"bid": "0", "ask": "0"}, None, "both zero"),
        ({"bid": "0", "ask": ""}, "bid", "zero bid and no ask"),
        ({"spot": "-3"}, "spot", "spot '-3' is not positive"),
        ({"spot": "n/a"}, "spot", "not a number"),
        ({"as_of": "2026-03-02 15:30"}, "as_of", "has no UTC offset"),
        ({"as_of": "yesterday"}, "as_of", "is not an ISO 8601 time"),
        ({"und": ""}, "underlying", "underlying is empty"),
    ],
)
def test_row_left_out_with_reason(tmp_path, kw, column, words):
    p = csv_file(tmp_path, row(strike="90"), row(**({"strike": "95"} | kw)), row(strike="110"))
    load = load_file(p)
    f = one_left_out(load)
    assert f.line == 3
    assert f.file == str(p)
    assert f.column == column
    assert words in f.reason
    assert load.rows_accepted == 2
    assert_accounting(load)


def test_expiry_on_the_snapshot_date_is_kept(tmp_path):
    # the snapshot date is the as_of date in its own offset: 2026-03-02 23:30-05:00 is 03-03 in UTC
    p = csv_file(tmp_path, row(expiry="2026-03-02", as_of="2026-03-02T23:30:00-05:00"))
    assert load_file(p).rows_accepted == 1


@pytest.mark.parametrize("spelling", ["call", "CALL", "Call", "c", "C", " c "])
def test_call_spellings(tmp_path, spelling):
    p = csv_file(tmp_path, row(kind=spelling))
    assert load_file(p).snapshots[0].contracts["kind"].tolist() == ["call"]


@pytest.mark.parametrize("spelling", ["put", "PUT", "p", "P"])
def test_put_spellings(tmp_path, spelling):
    p = csv_file(tmp_path, row(kind=spelling))
    assert load_file(p).snapshots[0].contracts["kind"].tolist() == ["put"]


@pytest.mark.parametrize(
    "bid, ask, words",
    [
        ("0", "0.05", "zero bid"),
        ("", "0.05", "no bid"),
        ("0.40", "", "no ask (bid 0.40)"),
        ("1.00", "2.00", "wide spread: bid 1.00, ask 2.00 (spread 67% of mid)"),
    ],
)
def test_row_accepted_with_warning(tmp_path, bid, ask, words):
    p = csv_file(tmp_path, row(bid=bid, ask=ask))
    load = load_file(p)
    assert load.rows_accepted == 1
    (w,) = warnings(load)
    assert words in w.reason
    assert w.line == 2


@pytest.mark.parametrize(
    "bid, ask, wide",
    [
        ("1.00", "2.00", True),  # spread 1.00 = 67% of mid 1.50, and > 0.10
        ("0.05", "0.12", False),  # 82% of mid but only 0.07 wide
        ("10.00", "14.00", False),  # 4.00 wide but 33% of mid
        ("0.20", "0.36", True),  # 0.16 wide, 57% of mid
        ("1.00", "1.00", False),  # locked market is fine
    ],
)
def test_wide_spread_threshold(tmp_path, bid, ask, wide):
    load = load_file(csv_file(tmp_path, row(bid=bid, ask=ask)))
    assert any("wide spread" in f.reason for f in warnings(load)) == wide
    assert load.rows_accepted == 1


@pytest.mark.parametrize(
    "column, value, words",
    [
        ("iv", "abc", "iv 'abc' is not a number; left blank"),
        ("iv", "nan", "not a finite number"),
        ("iv", "30", "above 500%"),
        ("iv", "-0.2", "not positive"),
        ("volume", "lots", "not a number"),
        ("volume", "-4", "negative"),
        ("open_interest", "-1", "negative"),
        ("rate", "5", "above 100%"),
        ("div_yield", "x%", "not a number"),
        ("iv_basis", "360", "not 252, 250 or 365"),
        ("settle", "noon", "not pm or am; pm is used"),
    ],
)
def test_malformed_optional_values_warn_and_stay_blank(tmp_path, column, value, words):
    p = csv_file(tmp_path, row() + "," + value, header=HEADER + "," + column)
    load = load_file(p)
    assert load.rows_accepted == 1
    (w,) = warnings(load)
    assert w.column == column and words in w.reason
    c = load.snapshots[0].contracts
    if column == "iv_basis":
        assert c[column].iloc[0] == ""
    elif column == "settle":
        assert c[column].iloc[0] == "pm"
    else:
        assert np.isnan(c[column].iloc[0])


def test_duplicate_contract_keeps_the_first(tmp_path):
    p = csv_file(tmp_path, row(bid="2.0", ask="2.1"), row(kind="put"), row(strike="100.0", bid="9", ask="9.5"),
                 row(kind="c", bid="3", ask="3.2"))
    load = load_file(p)
    lo = left_out(load)
    assert [f.line for f in lo] == [4, 5]
    assert all("duplicate of line 2" in f.reason for f in lo)
    c = load.snapshots[0].contracts
    assert c.loc[c["kind"] == "call", "bid"].tolist() == [2.0]
    assert_accounting(load)


def test_a_bad_row_does_not_shadow_a_later_good_duplicate(tmp_path):
    # the first row is left out for its price, so the second is not a duplicate of it
    p = csv_file(tmp_path, row(bid="-1"), row(bid="2.0"))
    load = load_file(p)
    assert load.rows_accepted == 1
    assert "negative" in one_left_out(load).reason


def test_first_reason_wins_and_one_finding_per_left_out_row(tmp_path):
    p = csv_file(tmp_path, row(strike="abc", kind="xyz", bid="-1"))
    with pytest.raises(SnapshotFileError) as info:
        load_file(p)
    (f,) = info.value.findings
    assert f.column == "strike"


# --------------------------------------------------------------------------- line numbers and CSV shape


def test_line_numbers_count_blank_lines_and_embedded_newlines(tmp_path):
    text = (
        "\n"  # line 1 blank: the header is on line 2
        + HEADER + "\n"
        + row(strike="90") + "\n"  # 3
        + "\n"  # 4
        + '"QRTZ",' + AS_OF + ',100.5,2026-03-20,95,call,"1.0","x\ny"\n'  # 5-6: ask has a newline
        + "   \n"  # 7 blank (spaces only)
        + row(strike="-1") + "\n"  # 8
        + row(strike="100")  # 9, no final newline
    )
    load = load_file(write(tmp_path, text))
    lo = left_out(load)
    assert [(f.line, f.column) for f in lo] == [(5, "ask"), (8, "strike")]
    assert "spans lines 5-6" in lo[0].reason
    assert load.snapshots[0].contracts["source_line"].tolist() == [3, 9]
    assert load.rows_read == 4
    assert_accounting(load)


def test_stray_quotes_take_the_exact_slow_path(tmp_path):
    # a quote inside an unquoted field is a literal character (as common CSV readers do)
    text = "\n".join([
        HEADER,
        row(und='QR"TZ', strike="90"),
        '"QRTZ",' + AS_OF + ',100.5,2026-03-20,"95",call,1,"1.1"',
        '"QRTZ\nB",' + AS_OF + ",100.5,2026-03-20,95,call,1,1.1",
        row(strike="-2"),
    ]) + "\n"
    load = load_file(write(tmp_path, text))
    names = {s.underlying for s in load.snapshots}
    assert names == {'QR"TZ', "QRTZ", "QRTZ\nB"}
    assert one_left_out(load).line == 6
    lines = sorted(int(x) for s in load.snapshots for x in s.contracts["source_line"])
    assert lines == [2, 3, 4]
    assert_accounting(load)


@pytest.mark.parametrize("stray", [False, True])
def test_unclosed_quote_is_a_file_error_naming_its_line(tmp_path, stray):
    und = 'Q"R' if stray else "QRTZ"
    text = "\n".join([HEADER, row(und=und), row(strike='"95'), row(strike="96")]) + "\n"
    with pytest.raises(SnapshotFileError, match="quoted field opened on line 3 is never closed"):
        load_file(write(tmp_path, text))


def test_short_and_long_rows(tmp_path):
    p = csv_file(tmp_path, row(strike="90"), "QRTZ," + AS_OF + ",100,2026-03-20,95,call,1",
                 row(strike="100") + ",",  # a trailing empty field is harmless
                 row(strike="105") + ",,oops",
                 row(strike="110") + ',"",  ',  # empty and blank extras are harmless too
                 row(strike="115") + ',""""')  # ... but a quoted quote is a value
    load = load_file(p)
    lo = left_out(load)
    assert [(f.line, f.reason) for f in lo] == [
        (3, "row has 7 fields; the header has 8"),
        (5, "row has 10 fields; the header has 8 (extra values at the end)"),
        (7, "row has 9 fields; the header has 8 (extra values at the end)"),
    ]
    assert load.rows_accepted == 3


@pytest.mark.parametrize("delim", [";", "\t"])
def test_semicolon_and_tab_delimiters(tmp_path, delim):
    text = "\n".join(x.replace(",", delim) for x in [HEADER, row(), row(strike="101", kind="p")]) + "\n"
    load = load_file(write(tmp_path, text))
    assert load.rows_accepted == 2


# --------------------------------------------------------------------------- snapshot-wide values


def test_several_underlyings_give_one_snapshot_each(tmp_path):
    p = csv_file(tmp_path, row(und="QRTZ"), row(und="VELM", spot="20.25", as_of="2026-03-02T16:00:00+01:00"),
                 row(und="QRTZ", kind="put"))
    load = load_file(p)
    snaps = {s.underlying: s for s in load.snapshots}
    assert set(snaps) == {"QRTZ", "VELM"}
    assert len(snaps["QRTZ"].contracts) == 2 and len(snaps["VELM"].contracts) == 1
    assert snaps["VELM"].spot == 20.25
    assert snaps["VELM"].as_of == pd.Timestamp("2026-03-02T15:00:00Z")
    assert snaps["VELM"].as_of.utcoffset() == pd.Timedelta(hours=1)


def test_as_of_and_spot_varying_within_an_underlying(tmp_path):
    p = csv_file(
        tmp_path,
        row(as_of="2026-03-02T15:29:58-05:00", spot="100.40"),
        row(as_of="2026-03-02T15:30:02-05:00", spot="100.45", kind="put"),
        row(as_of="2026-03-02T15:30:00-05:00", spot="100.42", strike="105"),
    )
    load = load_file(p)
    snap = load.snapshots[0]
    assert snap.as_of == pd.Timestamp("2026-03-02T15:30:02-05:00")
    assert snap.spot == 100.45  # the spot at the latest as_of
    reasons = [f.reason for f in warnings(load)]
    assert any(r.startswith("as_of varies across 3 rows") for r in reasons)
    assert any(r.startswith("spot varies (3 values from 100.4 to 100.45)") for r in reasons)
    assert load.rows_accepted == 3


def test_snapshot_values_only_on_the_first_row(tmp_path):
    p = csv_file(tmp_path, row(), row(as_of="", spot="", kind="put"), row(as_of="", spot="", strike="105"))
    load = load_file(p)
    assert load.rows_accepted == 3
    notes = [f.reason for f in load.findings if f.severity == NOTE]
    assert "as_of is empty on 2 of 3 rows; 2026-03-02T15:30:00-05:00 is used for them" in notes
    assert "spot is empty on 2 of 3 rows; 100.5 is used" in notes


def test_naive_as_of_everywhere_is_unusable_but_override_fixes_it(tmp_path):
    p = csv_file(tmp_path, row(as_of="2026-03-02T15:30:00"), row(as_of="2026-03-02T15:30:00", kind="p"))
    with pytest.raises(SnapshotFileError, match="has no UTC offset"):
        load_file(p)
    load = load_file(p, overrides=SnapshotOverrides(as_of="2026-03-02T15:30:00-05:00"))
    assert load.rows_accepted == 2
    assert any(f.severity == NOTE and "as_of comes from the override" in f.reason for f in load.findings)


def test_overrides_replace_columns(tmp_path):
    p = csv_file(tmp_path, row(und="VELM", spot="bad", as_of="never"))
    load = load_file(p, overrides=SnapshotOverrides(underlying="QRTZ", spot=99.0,
                                                    as_of=pd.Timestamp("2026-03-02T10:00:00+00:00")))
    snap = load.snapshots[0]
    assert (snap.underlying, snap.spot) == ("QRTZ", 99.0)
    assert snap.as_of == pd.Timestamp("2026-03-02T10:00:00Z")
    assert load.rows_accepted == 1


@pytest.mark.parametrize(
    "ov, words",
    [
        (SnapshotOverrides(as_of="2026-03-02T15:30"), "no UTC offset"),
        (SnapshotOverrides(as_of="tomorrow"), "not an ISO 8601 time"),
        (SnapshotOverrides(as_of=pd.Timestamp("2026-03-02 15:30")), "no UTC offset"),
        (SnapshotOverrides(spot=-1), "positive"),
        (SnapshotOverrides(spot="abc"), "not a number"),
        (SnapshotOverrides(underlying="  "), "empty"),
    ],
)
def test_bad_overrides_raise(tmp_path, ov, words):
    p = csv_file(tmp_path, row())
    with pytest.raises(ChainTriageError, match=words):
        load_file(p, overrides=ov)


def test_one_spot_override_for_several_underlyings_is_refused(tmp_path):
    p = csv_file(tmp_path, row(und="QRTZ"), row(und="VELM"))
    with pytest.raises(SnapshotFileError, match="holds 2 underlyings"):
        load_file(p, overrides=SnapshotOverrides(spot=50))
    load = load_file(p, overrides=SnapshotOverrides(spot=50, underlying="DORNA"))
    assert [s.underlying for s in load.snapshots] == ["DORNA"]
    assert "duplicate of line 2" in one_left_out(load).reason


# --------------------------------------------------------------------------- text stays text


def test_markup_and_control_characters_are_kept_as_data(tmp_path):
    p = csv_file(tmp_path, row(und="[bold]QRTZ[/bold]"), row(und="VE\x1b[31mLM"))
    load = load_file(p)
    names = sorted(s.underlying for s in load.snapshots)
    assert names == ["VE\x1b[31mLM", "[bold]QRTZ[/bold]"]
    (w,) = warnings(load)
    assert "control or invisible characters" in w.reason
    assert "\x1b" not in w.reason  # the value is shown escaped in the message


def test_unknown_columns_get_a_note(tmp_path):
    p = csv_file(tmp_path, row() + ",hello", header=HEADER + ",Comment")
    load = load_file(p)
    assert [f.reason for f in load.findings] == ["columns not used: 'Comment'"]


# --------------------------------------------------------------------------- column map


def test_example_column_map_loads_the_foreign_export():
    cmap = load_column_map(DATA / "columns_example.toml")
    assert cmap.columns["strike"] == "Strike Price"
    assert cmap.kind_values["call"] == ("Calls", "CL")
    assert cmap.expiry_format == "%m/%d/%Y"
    load = load_file(DATA / "foreign_export.csv", column_map=cmap)
    assert load.rows_read == 6 and load.rows_accepted == 5
    f = one_left_out(load)
    assert (f.line, f.column) == (7, "Expiration")
    assert f.reason == "expiry '06/31/2026' is not a possible date in the format %m/%d/%Y"
    snap = load.snapshots[0]
    assert snap.underlying == "VELM" and snap.spot == 48.20
    c = snap.contracts
    assert c["kind"].tolist() == ["call", "put", "call", "put", "call"]
    assert c["expiry"].dt.strftime("%Y-%m-%d").tolist()[-1] == "2026-06-19"
    assert c["iv"].iloc[0] == pytest.approx(0.29)
    assert c["open_interest"].iloc[0] == 800
    assert [x.reason for x in load.findings if x.severity == NOTE] == ["columns not used: 'Comment'"]
    # the same file without the map: our column names are not there
    with pytest.raises(SnapshotFileError, match="required column"):
        load_file(DATA / "foreign_export.csv")
    # a path works as well as a ColumnMap
    assert load_file(DATA / "foreign_export.csv", column_map=DATA / "columns_example.toml").rows_accepted == 5


def test_mapped_header_missing_from_the_file_is_reported(tmp_path):
    m = write(tmp_path, '[columns]\nstrike = "Strike Price"\niv = "Impl Vol"\n', "map.toml")
    p = csv_file(tmp_path, row())
    load = load_file(p, column_map=m)  # strike falls back to our own name
    assert load.rows_accepted == 1
    assert any("names 'Impl Vol' for iv" in f.reason for f in load.findings)
    q = csv_file(tmp_path, row(), header=HEADER.replace("strike", "k"), name="other.csv")
    with pytest.raises(SnapshotFileError, match=r"strike \(mapped to 'Strike Price'\)"):
        load_file(q, column_map=m)


@pytest.mark.parametrize(
    "text, words",
    [
        ("[columns\n", "not valid TOML"),
        ("[colums]\nstrike = 'K'\n", "unknown section"),
        ("[columns]\nstrik = 'K'\n", "unknown column 'strik'"),
        ("[columns]\nstrike = 5\n", "must be a non-empty string"),
        ("[columns]\nbid = 'Px'\nask = 'px'\n", "maps both 'bid' and 'ask'"),
        ("[kind_values]\ncall = ['X']\nput = ['x']\n", "given for both call and put"),
        ("[kind_values]\nstraddle = ['S']\n", "must be 'call' or 'put'"),
        ("[kind_values]\nput = ['c']\n", "always means call"),
        ("[formats]\nexpiry = 'MM/DD'\n", "strftime format"),
        ("columns = 3\n", "must be a table"),
    ],
)
def test_bad_mapping_files(tmp_path, text, words):
    m = write(tmp_path, text, "map.toml")
    with pytest.raises(ChainTriageError) as info:
        load_column_map(m)
    assert str(m) in str(info.value)
    assert words in str(info.value)


def test_mapping_file_unreadable(tmp_path):
    with pytest.raises(ChainTriageError, match="no such file"):
        load_column_map(tmp_path / "none.toml")
    with pytest.raises(ChainTriageError, match="not UTF-8"):
        load_column_map(write(tmp_path, b"\xff\xfe[", "bad.toml"))


# --------------------------------------------------------------------------- Parquet


def test_parquet_round_trip(tmp_path):
    pytest.importorskip("pyarrow")
    df = pd.DataFrame({
        "Underlying": ["QRTZ", "QRTZ", "QRTZ"],
        "as_of": pd.to_datetime(["2026-03-02T15:30:00-05:00"] * 3),
        "spot": [100.5, 100.5, 100.5],
        "expiry": pd.to_datetime(["2026-03-20", "2026-03-20", "2026-04-17"]),
        "strike": [100.0, 100.0, -5.0],
        "kind": ["call", "put", "call"],
        "bid": [2.1, 1.9, 0.5],
        "ask": [2.2, np.nan, 0.6],
    })
    p = tmp_path / "chain.parquet"
    df.to_parquet(p)
    load = load_file(p)
    assert (load.rows_read, load.rows_accepted) == (3, 2)
    f = one_left_out(load)
    assert f.line == 4 and f.column == "strike"  # Parquet rows number as if under a one-line header
    snap = load.snapshots[0]
    assert snap.as_of == pd.Timestamp("2026-03-02T15:30:00-05:00")
    assert any(w.reason.startswith("no ask") for w in warnings(load))


def test_parquet_without_pyarrow_says_how_to_get_it(tmp_path, monkeypatch):
    p = write(tmp_path, b"PAR1 not really", "chain.parquet")
    monkeypatch.setitem(sys.modules, "pyarrow", None)  # import pyarrow now raises ImportError
    with pytest.raises(SnapshotFileError, match=r"needs pyarrow: pip install 'chaintriage\[parquet\]'"):
        load_file(p)


def test_damaged_parquet(tmp_path):
    pytest.importorskip("pyarrow")
    p = write(tmp_path, b"PAR1 not really", "chain.parquet")
    with pytest.raises(SnapshotFileError, match="cannot be read as Parquet"):
        load_file(p)


# --------------------------------------------------------------------------- several files


def test_load_files_goes_on_past_unusable_files(tmp_path):
    good = csv_file(tmp_path, row(), name="good.csv")
    empty = write(tmp_path, b"", "empty.csv")
    res = load_files([empty, good, tmp_path / "missing.csv"])
    assert [e.path for e in res.errors] == [str(empty), str(tmp_path / "missing.csv")]
    assert [f.path for f in res.files] == [str(good)]
    assert len(res.snapshots) == 1
    assert res.rows_read == 1 and res.rows_accepted == 1


def test_same_underlying_and_instant_merge_across_files(tmp_path):
    calls = csv_file(tmp_path, row(kind="call"), row(kind="call", strike="105"), name="calls.csv")
    puts = csv_file(tmp_path, row(kind="put", as_of="2026-03-02T20:30:00Z"), row(kind="call", strike="105"),
                    name="puts.csv")
    res = load_files([calls, puts])
    (snap,) = res.snapshots
    assert len(snap.contracts) == 3
    assert snap.sources == (str(calls), str(puts))
    # the later copy of the 105 call is left out of puts.csv, and its counts follow
    fl_puts = res.files[1]
    f = one_left_out(fl_puts)
    assert f.line == 3 and f.reason.startswith(f"duplicate of {calls}:3")
    assert (fl_puts.rows_read, fl_puts.rows_accepted) == (2, 1)
    assert_accounting(fl_puts)
    assert res.rows_left_out == 1


def test_different_instants_stay_apart(tmp_path):
    a = csv_file(tmp_path, row(), name="a.csv")
    b = csv_file(tmp_path, row(as_of="2026-03-03T15:30:00-05:00", expiry="2026-03-20"), name="b.csv")
    res = load_files([a, b])
    assert len(res.snapshots) == 2
    assert res.rows_left_out == 0


def test_spot_differing_between_merged_files_warns(tmp_path):
    a = csv_file(tmp_path, row(), name="a.csv")
    b = csv_file(tmp_path, row(kind="put", spot="100.7"), name="b.csv")
    res = load_files([a, b])
    (snap,) = res.snapshots
    assert snap.spot == 100.5
    assert any("spot differs between files" in f.reason for f in res.findings)


def test_text_cells_that_look_like_numbers_keep_their_text(tmp_path):
    # [D] the C reader may take a text column for numbers or booleans; its cells are text as written
    from chaintriage.core.column_map import ColumnMap

    p = tmp_path / "numeric_text.csv"
    p.write_text("underlying,as_of,spot,expiry,strike,kind,bid,ask\n"
                 "0050,2026-04-01T15:30:00-04:00,100,20260515,100,call,1,1.2\n"
                 "0050,2026-04-01T15:30:00-04:00,100,20260515,100,put,1,1.2\n"
                 "1e3,2026-04-01T15:30:00-04:00,100,20260619,95,put,1,1.2\n"
                 "True,2026-04-01T15:30:00-04:00,100,20260515,100,put,1,1.2\n")
    load = load_file(p, column_map=ColumnMap(expiry_format="%Y%m%d"))
    assert load.rows_accepted == 4
    assert [s.underlying for s in load.snapshots] == ["0050", "1e3", "True"]
    assert load.snapshots[1].contracts["expiry"].dt.strftime("%Y-%m-%d").tolist() == ["2026-06-19"]
