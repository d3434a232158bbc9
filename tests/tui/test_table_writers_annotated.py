"""The table writers on a realistic annotated chain give the text of the per-value definitions.

The demo chain of a fictional underlying (TSBH) is annotated by the pipeline
and its table written in each format; a few cells are made missing (NaN) and
a few texts awkward (control characters, formula prefixes, commas, quotes,
non-ASCII, a trailing no-break space). Oracles, value by value: Python's own
printf ``'%.10g' % v`` for csv decimals [L], the standard ``json`` module for
json [L], and the shared per-value formatter ``_fmt`` with ``str.rjust`` /
``ljust`` / ``rstrip`` for plain [D] (the definition the app shares).
"""

from __future__ import annotations

import io
import json
import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from chaintriage.core.loading import load_files
from chaintriage.core.pipeline import PipelineSettings, annotate
from chaintriage.tui.cli import table_output as to
from chaintriage.tui.cli.table import TABLE_COLUMNS
from tests.tui.test_table_writers import json_reference

DEMO = Path(__file__).resolve().parents[2] / "demo_chains" / "tsbh_2026-12-01.csv"


@pytest.fixture(scope="module")
def chain() -> pd.DataFrame:
    snap = load_files([DEMO]).snapshots[0]
    frame = annotate(snap, PipelineSettings()).contracts[TABLE_COLUMNS].copy().reset_index(drop=True)
    frame.insert(1, "as_of", snap.as_of.isoformat())
    rng = np.random.default_rng(7)
    floats = [c for c in frame.columns if pd.api.types.is_float_dtype(frame[c].dtype)]
    for c in floats:  # some cells missing in every decimal column
        frame.loc[rng.random(len(frame)) < 0.05, c] = np.nan
    frame.loc[3, "bid"] = -0.0
    frame.loc[4, "ask"] = 1e-7
    frame.loc[5, "mid"] = 123456789012.5
    flags = frame["flags"].astype(object).to_numpy().copy()
    weird = ["=HYPERLINK(x)", "-1", "a,b", 'say "hi"', "two\nlines", "\x1b[2Jx", "caf\u00e9", "\u202eevil", "\ttab",
             "+x", "@y"]
    flags[rng.integers(0, len(frame), 40)] = rng.choice(weird, 40)
    frame["flags"] = flags
    return frame


def test_the_chain_is_realistic(chain):
    assert len(chain) > 100 and chain["iv"].notna().sum() > 50 and chain["p_beyond"].between(0, 1).any()


def test_csv_equals_printf_of_every_value(chain, monkeypatch):
    monkeypatch.setattr(to, "BLOCK_ROWS", 97)
    cols = list(chain.columns)
    lines = [",".join(to._csv_header(c) for c in cols)]
    for row in chain.itertuples(index=False, name=None):
        cells = []
        for c, v in zip(cols, row):
            if pd.api.types.is_float_dtype(chain[c].dtype):
                cells.append("" if math.isnan(v) else "%.10g" % v)
            else:
                cells.append(to._csv_cell_text(v))
        lines.append(",".join(cells))
    assert to.to_csv(chain) == "\n".join(lines) + "\n"


def test_json_equals_json_dumps_of_the_records(chain, monkeypatch):
    monkeypatch.setattr(to, "BLOCK_ROWS", 97)
    assert to.to_json(chain) == json_reference(chain)


def plain_reference(frame: pd.DataFrame) -> str:
    kinds = [to._PLAIN.get(c, (c, "text"))[1] for c in frame.columns]
    heads = [to._PLAIN.get(c, (c, "text"))[0] for c in frame.columns]
    cells = [[to._fmt(v, k) for v, k in zip(row, kinds)] for row in frame.itertuples(index=False, name=None)]
    widths = [max([len(h)] + [len(r[j]) for r in cells]) for j, h in enumerate(heads)]
    left = [k in ("text", "date") for k in kinds]

    def line(values):
        return "  ".join(v.ljust(w) if lft else v.rjust(w) for v, w, lft in zip(values, widths, left)).rstrip()

    return "\n".join([line(heads), line(["-" * w for w in widths])] + [line(r) for r in cells]) + "\n"


def test_plain_equals_the_per_value_formatter(chain, monkeypatch):
    monkeypatch.setattr(to, "BLOCK_ROWS", 97)
    plain = chain.drop(columns=["as_of"])
    assert to.to_plain(plain) == plain_reference(plain)


@pytest.mark.parametrize("last", ["flags", "edge_share_buy", "underlying"])
def test_plain_line_ends_whatever_the_last_column(chain, last):
    """Lines lose their trailing blanks as ``str.rstrip`` takes them, also a no-break space a text ends in."""
    frame = chain.drop(columns=["as_of"])
    frame = frame[[c for c in frame.columns if c != last] + [last]].copy()
    if last == "underlying":
        frame["underlying"] = np.where(np.arange(len(frame)) % 3 == 0, "TSBH\u00a0", "TSBH")
    if last == "edge_share_buy":
        frame.loc[::4, last] = np.nan
    assert to.to_plain(frame) == plain_reference(frame)


def test_text_with_a_nul_character_still_written_as_defined(chain):
    frame = chain.head(30).copy()
    flags = frame["flags"].astype(object).to_numpy().copy()
    flags[2] = "a\x00b"
    frame["flags"] = flags
    csv_text = to.to_csv(frame)
    assert "\x00" not in csv_text and len(csv_text.splitlines()) == 31
    plain = frame.drop(columns=["as_of"])
    assert to.to_plain(plain) == plain_reference(plain)
    assert json.loads(to.to_json(frame))[2]["flags"] == "a\x00b"


def test_csv_columns_missing_in_a_whole_block(chain, monkeypatch):
    """A decimal column with no value in a block (or anywhere) writes empty cells there, as printf's definition."""
    monkeypatch.setattr(to, "BLOCK_ROWS", 50)
    frame = chain.head(160).copy()
    frame["p_touch"] = np.nan
    frame.loc[50:99, "iv"] = np.nan
    expected = [",".join(to._csv_header(c) for c in frame.columns)]
    for row in frame.itertuples(index=False, name=None):
        expected.append(",".join(("" if math.isnan(v) else "%.10g" % v) if pd.api.types.is_float_dtype(frame[c].dtype)
                                 else to._csv_cell_text(v) for c, v in zip(frame.columns, row)))
    assert to.to_csv(frame) == "\n".join(expected) + "\n"
