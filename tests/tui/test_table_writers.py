"""The column-at-a-time table writers give the same text as the per-cell definitions.

Oracles: pandas' own ``DataFrame.to_csv`` with the same float format [L], the
standard ``json`` module (``json.dumps(records, indent=1)``) [L], and for plain
output the per-value formatter ``_fmt`` (the definition the app shares) [D].
Random values span every magnitude, with rounding ties, signs, zero, NaN and
infinities, so a shortcut that differs from the definition anywhere fails.
"""

from __future__ import annotations

import io
import json
import math

import numpy as np
import pandas as pd
import pytest

from chaintriage.tui.shortlist import neutralise_formula
from chaintriage.tui.cli.common import plain
from chaintriage.tui.cli import table_output as to

KINDS = ["price", "level", "strike", "vol", "prob", "spread", "delta", "count", "signed", "points", "g", "f4", "pct2",
         "f6"]


def awkward_values(n: int = 4000, seed: int = 3) -> np.ndarray:
    rng = np.random.default_rng(seed)
    mags = 10.0 ** rng.integers(-8, 14, n)
    v = rng.normal(size=n) * mags
    ticks = np.round(rng.uniform(-50, 500, n) * 10.0 ** (d := rng.integers(0, 5, n))) / 10.0 ** d  # on grids
    ties = (np.arange(n) - n // 2) / 2000.0 + 0.00005  # values at and near x.xx5
    edges = [0.0, -0.0, 1.0, 0.99949, 0.9995, 0.99999, 0.0004999, 0.0005, 9.995, 9.99499, 1e12, -1e12, 1e308,
             -1e-300, 0.125, 0.375, 2.675, 1.005, 181.10000000000002, np.nan, np.inf, -np.inf]
    return np.concatenate([v, ticks, ties, edges])


@pytest.mark.parametrize("kind", KINDS)
def test_plain_columns_equal_the_per_value_formatter(kind):
    values = awkward_values()
    got = to.format_column(values, kind)
    expected = [to._fmt(v, kind) for v in values]
    bad = [(v, g, e) for v, g, e in zip(values, got, expected) if g != e]
    assert not bad, bad[:5]


def frame(n: int = 3000) -> pd.DataFrame:
    rng = np.random.default_rng(5)
    texts = np.array(["QRTZ", "=1+2", "-cmd", "@SUM(A1)", "a,b", 'say "hi"', "two\nlines", "\x1b[2Jx",
                      "caf\u00e9", "\u202eevil", "\ttab", "", "+x"], dtype=object)
    vals = awkward_values(n, seed=9)[:n]
    f = pd.DataFrame({
        "underlying": texts[rng.integers(0, texts.size, n)],
        "expiry": pd.to_datetime("2026-03-20") + pd.to_timedelta(rng.integers(0, 400, n), unit="D"),
        "strike": np.round(rng.uniform(1, 500, n), 2),
        "kind": np.where(rng.random(n) < 0.5, "call", "put"),
        "bid": vals, "p_beyond": rng.random(n), "open_interest": np.where(rng.random(n) < 0.1, np.nan, 7.0),
        "arbitrage_free": rng.random(n) < 0.5, "contracts": rng.integers(0, 9, n),
        "flags": np.where(rng.random(n) < 0.3, "wide", ""),
    })
    f.loc[3, "kind"] = None
    return f


def test_csv_equals_pandas_to_csv_of_the_sanitised_frame(monkeypatch):
    monkeypatch.setattr(to, "BLOCK_ROWS", 700)  # several blocks
    f = frame()
    safe = f.copy()
    for col in ("underlying", "kind", "flags"):
        safe[col] = [neutralise_formula(plain(v)) if isinstance(v, str) else v for v in safe[col]]
    expected = safe.to_csv(index=False, date_format="%Y-%m-%d", float_format="%.10g", lineterminator="\n")
    assert to.to_csv(f) == expected
    # the guarantees themselves
    back = pd.read_csv(io.StringIO(to.to_csv(f)), keep_default_na=False)
    assert not back["underlying"].str.match(r"[=+\-@\t\r]").any()
    assert "\x1b" not in to.to_csv(f) and "\u202e" not in to.to_csv(f)


def json_reference(f: pd.DataFrame) -> str:
    """The json writer's output built with the standard library's json.dumps [L], record by record
    (dates as YYYY-MM-DD, non-finite numbers as null)."""
    records = []
    for row in f.to_dict(orient="records"):
        rec = {}
        for k, v in row.items():
            if isinstance(v, pd.Timestamp):
                v = f"{v:%Y-%m-%d}"
            elif hasattr(v, "item"):
                v = v.item()
            if isinstance(v, float) and not math.isfinite(v):
                v = None
            rec[k] = v
        records.append(rec)
    return json.dumps(records, indent=1) + "\n"


def test_json_equals_json_dumps_of_the_records(monkeypatch):
    monkeypatch.setattr(to, "BLOCK_ROWS", 700)
    f = frame()
    assert to.to_json(f) == json_reference(f)
    assert to.to_json(f.iloc[:0]) == "[]\n"


def test_plain_equals_the_per_cell_layout(monkeypatch):
    monkeypatch.setattr(to, "BLOCK_ROWS", 700)
    f = frame(1500)
    kinds = [to._PLAIN.get(c, (c, "text"))[1] for c in f.columns]
    heads = [to._PLAIN.get(c, (c, "text"))[0] for c in f.columns]
    cells = [[to._fmt(v, k) for v, k in zip(row, kinds)] for row in f.itertuples(index=False, name=None)]
    widths = [max([len(h)] + [len(r[j]) for r in cells]) for j, h in enumerate(heads)]
    left = [k in ("text", "date") for k in kinds]

    def line(values):
        return "  ".join(v.ljust(w) if lft else v.rjust(w) for v, w, lft in zip(values, widths, left)).rstrip()

    expected = "\n".join([line(heads), line(["-" * w for w in widths])] + [line(r) for r in cells]) + "\n"
    assert to.to_plain(f) == expected


def test_categorical_text_columns_are_written_as_their_texts(monkeypatch):
    """A categorical of text (``as_of``, ``flags``) is written as the same texts would be: csv against
    pandas' to_csv of the sanitised texts [L], json against json.dumps of the records [L], plain as
    the object column [D]; a missing value, an unused category and categories out of row order too."""
    monkeypatch.setattr(to, "BLOCK_ROWS", 700)
    f = frame()
    cat = f.copy()
    for col in ("underlying", "kind", "flags"):
        cats = sorted({v for v in f[col] if isinstance(v, str)} | {"unused"}, reverse=True)
        cat[col] = pd.Categorical(f[col], categories=pd.Index(cats, dtype=object))
    assert cat["kind"].isna().sum() == 1 and all(isinstance(cat[c].dtype, pd.CategoricalDtype) for c in
                                                 ("underlying", "kind", "flags"))
    safe = f.copy()
    for col in ("underlying", "kind", "flags"):
        safe[col] = [neutralise_formula(plain(v)) if isinstance(v, str) else v for v in safe[col]]
    assert to.to_csv(cat) == safe.to_csv(index=False, date_format="%Y-%m-%d", float_format="%.10g",
                                         lineterminator="\n")
    assert to.to_json(cat) == json_reference(f)
    assert to.to_plain(cat) == to.to_plain(f)
    for fmt in ("csv", "json"):  # pieces of a stream, one category per piece (as ``with_as_of`` makes them)
        buf = io.StringIO()
        stream = to.TableStream(fmt, buf)
        for a in range(0, len(f), 1000):
            piece = f.iloc[a:a + 1000].copy()
            piece["kind"] = pd.Categorical.from_codes(np.zeros(len(piece), dtype=np.int8), ["x,y"])
            stream.write(piece)
        stream.close()
        whole = f.assign(kind="x,y")
        assert buf.getvalue() == to.render(whole, fmt)


@pytest.mark.parametrize("fmt", ["csv", "json", "plain"])
def test_a_table_written_in_pieces_equals_the_table_written_whole(fmt):
    f = frame(900)
    cuts = [f.iloc[:0], f.iloc[:300], f.iloc[300:300], f.iloc[300:899], f.iloc[899:]]
    buf = io.StringIO()
    stream = to.TableStream(fmt, buf)
    for piece in cuts:
        stream.write(piece)
    stream.close()
    assert buf.getvalue() == to.render(f, fmt)
    empty = io.StringIO()
    stream = to.TableStream(fmt, empty)
    stream.write(f.iloc[:0])
    stream.close()
    assert empty.getvalue() == to.render(f.iloc[:0], fmt)


def test_plain_past_its_kept_rows_streams_with_columns_that_only_widen(monkeypatch):
    """Past ``PLAIN_WIDTH_ROWS`` rows plain writes each piece as it comes: every row shows the same
    cells as the whole table's [D], the rows kept first are laid out as that piece alone would be, and
    each later row is aligned to the widest cells seen up to its piece (columns never narrow)."""
    monkeypatch.setattr(to, "PLAIN_WIDTH_ROWS", 250)
    f = frame(900)
    cuts = [f.iloc[:200], f.iloc[200:300], f.iloc[300:600], f.iloc[600:]]
    buf = io.StringIO()
    stream = to.TableStream("plain", buf)
    for piece in cuts:
        stream.write(piece)
    stream.close()
    got = buf.getvalue().splitlines()
    whole = to.to_plain(f).splitlines()
    assert len(got) == len(whole)
    assert [r.split() for r in got[2:]] == [r.split() for r in whole[2:]]
    first = to.to_plain(f.iloc[:300]).splitlines()
    assert got[:302] == first  # the kept rows (over the limit at the second piece) with their own widths
    widths = [len(c) for c in first[1].split("  ")]
    kinds = [to._PLAIN.get(c, (c, "text"))[1] for c in f.columns]
    left = [k in ("text", "date") for k in kinds]
    for piece, start in ((cuts[2], 302), (cuts[3], 602)):
        cells = [[to._fmt(v, k) for v, k in zip(row, kinds)] for row in piece.itertuples(index=False, name=None)]
        widths = [max([w] + [len(r[j]) for r in cells]) for j, w in enumerate(widths)]
        expected = ["  ".join(v.ljust(w) if lft else v.rjust(w) for v, w, lft in zip(r, widths, left)).rstrip()
                    for r in cells]
        assert got[start:start + len(piece)] == expected
