"""One butterfly-arbitrage verdict per expiry, the same in the expiry table, the header and the plot.

The arbitrage slice is Gatheral & Jacquier (2014), Example 3.1 (credited to Axel Vogt) [V],
REFERENCE.md §6: T = 1, (a, b, m, rho, sigma) = (-0.0410, 0.1331, 0.3586, 0.3060, 0.4153), whose
g(k) is negative exactly on [0.6424, 1.2569]. A chain priced from it (QuantLib blackFormula [L]) is
fitted back to the same slice: the arbitrage cannot be removed without missing the quotes, so the
expiry is marked, with the reason, in every place that shows it. On the demo files every expiry's
verdict is checked against the drawn density [D].
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from chaintriage.core import svi
from chaintriage.core.loading import load_files
from chaintriage.core.pipeline import PipelineSettings, annotate
from chaintriage.core.svi import SviParams
from chaintriage.tui.widgets.info_bars import BarStyles, expiry_pieces
from chaintriage.tui.widgets.distribution_plot import NEGATIVE_NOTE, draw_distribution
from chaintriage.tui.session import SnapshotView
from tests.core.chain_builders import build_snapshot, ql_black, year_fractions
from tests.tui.app_support import DEMO_DIR

VOGT = SviParams.from_gj_order(-0.0410, 0.1331, 0.3586, 0.3060, 0.4153)
EXPIRY = "2027-12-01"  # one year (365 calendar days) after the snapshot
F = 100.0


@pytest.fixture(scope="module")
def vogt_chain():
    t = float(year_fractions([EXPIRY])[0])
    ks = np.arange(40.0, 301.0, 5.0)

    def vol(k):
        return float(np.sqrt(svi.total_variance(VOGT, np.log(k / F)) / t))

    snap = build_snapshot([EXPIRY], [ks], lambda i, k: ql_black(F, k, vol(k), t, 1.0, True),
                          lambda i, k: ql_black(F, k, vol(k), t, 1.0, False), spot=F, half_spread=0.0,
                          rate=0.0, div_yield=0.0)
    return snap, annotate(snap, PipelineSettings(basis="365"))


def header_text(view: SnapshotView, i: int) -> str:
    info = view.info(i, 0.6826894921370859)
    return " ".join(p.plain for p in expiry_pieces(info, st=BarStyles()))


def test_arbitrage_slice_is_marked_with_the_reason_everywhere(vogt_chain):
    _, ann = vogt_chain
    row = ann.expiries.iloc[0]
    assert not row["arbitrage_free"]
    # the reason names the strikes where the density is negative: F exp(0.6424) to F exp(1.2569) [V]
    note = row["arbitrage_note"]
    assert "butterfly arbitrage" in note and "P(beyond) not monotone" in note
    lo, hi = (float(x) for x in note.split("between strikes ")[1].split(" (")[0].split(" to "))
    assert np.log(lo / F) == pytest.approx(0.6424, abs=2e-3) and np.log(hi / F) == pytest.approx(1.2569, abs=2e-3)
    # what the mark is about: the call P(beyond) rises with the strike somewhere, the density is negative
    calls = ann.contracts[ann.contracts["kind"] == "call"]
    assert np.any(np.diff(calls["p_beyond"].to_numpy(float)) > 1e-6)
    dist = ann.distribution(EXPIRY)
    assert dist.negative_density
    # header and plot say the same
    view = SnapshotView(ann)
    assert "butterfly arbitrage" in header_text(view, 0) and "arbitrage-free" not in header_text(view, 0)
    res = ann.results[pd.Timestamp(EXPIRY)]
    plot = draw_distribution(dist.strikes, dist.density, dist.density_flat, forward=res.forward,
                             sigma_sqrt_t=res.atm_iv * np.sqrt(res.t_years), width=70, height=16)
    assert NEGATIVE_NOTE in plot.notes


def test_expiries_command_shows_the_mark_and_the_reason(vogt_chain, tmp_path, capsys):
    from chaintriage.tui.cli.main import main

    snap, _ = vogt_chain
    frame = snap.contracts.drop(columns=["source_file", "source_line", "iv", "iv_basis"]).copy()
    frame["expiry"] = frame["expiry"].dt.strftime("%Y-%m-%d")
    frame["underlying"] = snap.underlying
    frame["as_of"] = snap.as_of.isoformat()
    frame["spot"] = snap.spot
    path = tmp_path / "vogt.csv"
    frame.to_csv(path, index=False)
    code = main(["expiries", str(path), "--format", "json", "--basis", "365", "--quiet"])
    out = json.loads(capsys.readouterr().out)
    assert code in (0, 1)
    assert out[0]["arbitrage_free"] is False
    assert out[0]["arbitrage_note"].startswith("butterfly arbitrage")


@pytest.mark.parametrize("name", ["messy_export.csv", "ospx_2026-12-01.csv", "tsbh_2026-12-01.csv"])
def test_demo_expiries_agree_between_the_table_the_header_and_the_plot(name):
    """The messy file's MWCS 2026-12-18 once said "arbitrage-free" in the header while the plot noted
    a negative density: the check now covers every k the distribution draws."""
    for snap in load_files([f"{DEMO_DIR}/{name}"]).snapshots:
        ann = annotate(snap, PipelineSettings())
        view = SnapshotView(ann)
        for i, e in enumerate(view.expiries):
            dist = ann.distribution(e)
            if dist is None:
                continue
            free = bool(ann.expiries.set_index("expiry").loc[e, "arbitrage_free"])
            assert free == (not dist.negative_density), (snap.underlying, e)
            assert ("arbitrage-free" in header_text(view, i)) == free, (snap.underlying, e)
            if free:  # what is shown is then a true distribution: P(beyond) falls with the strike
                assert np.all(np.diff(dist.cdf) >= -1e-12)
