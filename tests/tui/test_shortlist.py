"""The shortlist model and its CSV / Markdown exports.

Rows are PRESENTATION FIXTURES (invented figures). Formula neutralisation
follows OWASP's CSV Injection guidance as written in OWASP ASVS 5.0
requirement 1.2.10: cells starting with '=', '+', '-', '@', tab or NUL are
escaped with a single quote [V]; carriage return per the OWASP CSV Injection
page [M]. CSV is read back with Python's csv module (RFC 4180 dialect) [C].
"""

from __future__ import annotations

import csv
import io
import math

import pandas as pd
import pytest

from chaintriage.core.findings import ChainTriageError
from chaintriage.tui.files import TargetExistsError
from chaintriage.tui.shortlist import (
    FIGURES, KEY_FIELDS, ContractKey, Shortlist, escape_markdown, neutralise_formula,
)

AS_OF = pd.Timestamp("2026-12-01 14:30", tz="America/New_York")


def contract(strike=95.0, kind="put", **over):
    """PRESENTATION FIXTURE: one row with the pipeline's column names."""
    r = dict(underlying="QRTZ", expiry=pd.Timestamp("2027-01-15"), strike=strike, kind=kind,
             bid=1.20, ask=1.26, mid=1.23, iv=0.312, sigma_distance=-1.4849, p_beyond=0.081,
             p_beyond_flat=0.07, p_touch=0.159, delta=-0.21, breakeven=93.77, p_breakeven=0.061,
             spread_pct=0.0488, open_interest=12345.0, volume=678.0, flags="wide", p_profit_sell=0.9312,
             p_profit_buy=0.0561, breakeven_sell=93.8, breakeven_buy=93.74, spot=101.52, forward=101.87)
    r.update(over)
    return r


def filled(*rows):
    sl = Shortlist()
    for r in rows:
        sl.add(ContractKey.from_row(r, AS_OF), r)
    return sl


def test_add_remove_toggle_and_identity():
    sl = Shortlist()
    a = ContractKey.from_row(contract(), AS_OF)
    b = ContractKey.from_row(contract(strike=105.0, kind="c"), AS_OF)
    assert b.kind == "call" and a.expiry == "2027-01-15" and a.as_of == AS_OF.isoformat()
    sl.add(a, contract())
    assert a in sl and len(sl) == 1
    assert sl.toggle(b, contract(strike=105.0, kind="call")) is True
    assert sl.toggle(b) is False and b not in sl
    # same strike and kind but another snapshot time is another contract entry
    later = ContractKey.from_row(contract(), AS_OF + pd.Timedelta(hours=1))
    sl.add(later, contract(mid=1.5))
    assert len(sl) == 2
    assert sl.entries[0].figures["mid"] == 1.23 and sl.entries[1].figures["mid"] == 1.5
    assert sl.marked_in("QRTZ", AS_OF, pd.Timestamp("2027-01-15")) == {(95.0, "put")}
    assert sl.remove(a) is True and sl.remove(a) is False


def test_csv_round_trip(tmp_path):
    rows = [contract(), contract(strike=110.0, kind="call", sigma_distance=0.83, mid=float("nan"), flags="")]
    sl = filled(*rows)
    path = sl.export_csv(tmp_path / "short.csv")
    with open(path, newline="", encoding="utf-8") as fh:
        got = list(csv.DictReader(fh))
    assert list(got[0].keys()) == list(KEY_FIELDS + FIGURES)
    assert len(got) == 2
    for r, g in zip(rows, got):
        assert g["underlying"] == "QRTZ" and g["expiry"] == "2027-01-15" and g["as_of"] == AS_OF.isoformat()
        assert float(g["strike"]) == r["strike"] and g["kind"] == r["kind"]
        for name in FIGURES:
            if name == "flags":
                assert g[name] == r[name]
            elif isinstance(r[name], float) and math.isnan(r[name]):
                assert g[name] == ""
            else:
                assert float(g[name]) == r[name], name  # 10 significant digits hold these exactly
    assert got[0]["sigma_distance"] == "-1.4849"  # a negative number stays a number


def test_markdown_round_trip_and_pipe_escaping(tmp_path):
    sl = filled(contract(flags="wide|thin"), contract(strike=110.0, kind="call", sigma_distance=0.83,
                                                       underlying="QR|TZ"))
    path = sl.export_markdown(tmp_path / "short.md")
    lines = path.read_text(encoding="utf-8").splitlines()
    assert lines[0].startswith("| underlying | as of | expiry | strike | kind | bid |")
    assert set(lines[1]) <= set("|-:")
    assert len(lines) == 4

    def cells(line):
        out, cur, i = [], "", 1
        while i < len(line) - 1:
            ch = line[i]
            if ch == "\\" and i + 1 < len(line):
                cur += line[i + 1]
                i += 2
                continue
            if ch == "|":
                out.append(cur.strip())
                cur = ""
            else:
                cur += ch
            i += 1
        out.append(cur.strip())
        return out

    head = cells(lines[0])
    first = dict(zip(head, cells(lines[2])))
    second = dict(zip(head, cells(lines[3])))
    assert first["flags"] == "wide|thin" and second["underlying"] == "QR|TZ"
    assert first["strike"] == "95" and first["kind"] == "put"
    assert first["mid"] == "1.23" and first["IV"] == "31.2%" and first["σ dist"] == "-1.48σ"
    assert first["P(beyond)"] == "8.1%" and first["OI"] == "12,345"
    assert second["σ dist"] == "+0.83σ"
    assert escape_markdown("a|b\\c\nd") == "a\\|b\\\\c d"


def test_exports_refuse_to_overwrite_unless_asked(tmp_path):
    sl = filled(contract())
    for export, name in ((sl.export_csv, "a.csv"), (sl.export_markdown, "a.md")):
        path = tmp_path / name
        path.write_text("keep me", encoding="utf-8")
        with pytest.raises(TargetExistsError):
            export(path)
        with pytest.raises(FileExistsError):  # also an ordinary FileExistsError
            export(path)
        assert path.read_text(encoding="utf-8") == "keep me"
        export(path, overwrite=True)
        assert "QRTZ" in path.read_text(encoding="utf-8")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.csv", "a.md"]  # no temp files left


def test_export_to_a_missing_directory_is_a_clear_error(tmp_path):
    sl = filled(contract())
    with pytest.raises(ChainTriageError) as info:
        sl.export_csv(tmp_path / "no" / "such" / "dir.csv")
    assert "no/such" in str(info.value)


@pytest.mark.parametrize("prefix", ["=", "+", "-", "@", "\t", "\r"])
def test_formula_prefixes_are_neutralised_in_text_cells(tmp_path, prefix):
    payload = prefix + "HYPERLINK(\"http://x\",\"y\")"
    sl = filled(contract(flags=payload, underlying=prefix + "QRTZ"))
    text = sl.to_csv_text()
    got = list(csv.DictReader(io.StringIO(text, newline="")))[0]
    assert got["flags"] == "'" + payload
    assert got["underlying"] == "'" + prefix + "QRTZ"
    # numbers are not text: a negative sigma distance stays a plain number
    assert got["sigma_distance"] == "-1.4849" and got["delta"] == "-0.21"


def test_neutralise_formula_leaves_plain_text_alone():
    assert neutralise_formula("wide,zero-bid") == "wide,zero-bid"
    assert neutralise_formula("") == ""
    assert neutralise_formula("\0=1+1") == "'\0=1+1"
    sl = filled(contract(flags="\0=1+1"))
    got = list(csv.DictReader(io.StringIO(sl.to_csv_text(), newline="")))[0]
    assert got["flags"] == "'=1+1"  # NUL dropped, then the formula neutralised
