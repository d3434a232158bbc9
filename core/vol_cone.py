"""The volatility cone (Burghardt and Lane, J. Portfolio Management 1990, "How to tell if options are cheap").

For each window length n, the distribution over the history of the rolling
n-day realised vol: minimum, lower quartile, median, upper quartile, maximum,
and today's figure (the window ending at the last bar). The windows overlap
(one per bar), as in the original. Quantiles interpolate linearly between
order statistics (numpy's and pandas' default). Units: decimals per
sqrt(year) on the basis of the ``DailyTerms``.

Placing an implied vol on the cone: ``cone_at`` interpolates the cone's
columns linearly in the window length at a horizon in days, and
``percentile_in_cone`` says which share of the rolling n-day vols lie below a
given vol (n the window nearest the horizon).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from .findings import NOTE, Finding
from .realised_vol import DEFAULT_WINDOWS, DailyTerms, _check_windows, rolling_vol

__all__ = ["CONE_COLUMNS", "VolCone", "vol_cone", "cone_at", "percentile_in_cone", "nearest_window"]

#: Columns of ``VolCone.table``.
CONE_COLUMNS: tuple[str, ...] = ("min", "q25", "median", "q75", "max", "current", "samples")


@dataclass
class VolCone:
    """``table``: one row per window (index: days) with CONE_COLUMNS; ``series``: the rolling vols per window
    (one per bar, NaN until the window is full); ``estimator`` used; ``findings`` (notes on short histories)."""

    table: pd.DataFrame
    series: dict[int, np.ndarray]
    estimator: str
    findings: list[Finding]


def vol_cone(terms: DailyTerms, windows=DEFAULT_WINDOWS, estimator: str = "close_to_close",
             underlying: str | None = None) -> VolCone:
    """The cone of rolling realised vol for each window (see the module docstring)."""
    windows = _check_windows(windows)
    rows = []
    series: dict[int, np.ndarray] = {}
    findings: list[Finding] = []
    for w in windows:
        vol, _ = rolling_vol(terms, w, estimator)
        series[w] = vol
        ok = vol[np.isfinite(vol)]
        if ok.size == 0:
            findings.append(Finding(NOTE, f"cone: no full {w}-day window in the history", underlying=underlying))
            rows.append([np.nan] * 6 + [0])
            continue
        q = np.quantile(ok, [0.0, 0.25, 0.5, 0.75, 1.0])
        rows.append([*q, vol[-1], ok.size])
        if ok.size < 2 * w:
            findings.append(Finding(NOTE, f"cone: only {ok.size} overlapping {w}-day windows (fewer than "
                                          f"{2 * w}); its quantiles rest on little independent data",
                                    underlying=underlying))
    table = pd.DataFrame(rows, index=pd.Index(windows, name="window"), columns=list(CONE_COLUMNS))
    table["samples"] = table["samples"].astype(np.int64)
    return VolCone(table=table, series=series, estimator=estimator, findings=findings)


def nearest_window(days, windows) -> np.ndarray:
    """The window length (int) nearest each horizon in ``days`` (trading days); ties go to the shorter."""
    w = np.asarray(sorted(windows), dtype=float)
    d = np.atleast_1d(np.asarray(days, dtype=float))
    i = np.argmin(np.abs(d[:, None] - w[None, :]), axis=1)
    return w[i].astype(np.int64)


def cone_at(cone: VolCone, days) -> pd.DataFrame:
    """The cone's min/q25/median/q75/max at horizons ``days`` (trading days), linear in the window length.

    Horizons outside the cone's windows take the nearest window's row. One row per horizon.
    """
    t = cone.table.dropna(subset=["median"])
    d = np.atleast_1d(np.asarray(days, dtype=float))
    out = {}
    for c in ("min", "q25", "median", "q75", "max"):
        if t.empty:
            out[c] = np.full(d.shape, np.nan)
        else:
            out[c] = np.interp(d, t.index.to_numpy(float), t[c].to_numpy(float))
    return pd.DataFrame(out, index=pd.Index(d, name="days"))


def percentile_in_cone(cone: VolCone, days, vol) -> np.ndarray:
    """Share (0..1) of the rolling vols of the window nearest ``days`` that lie below ``vol`` (NaN if none)."""
    d = np.atleast_1d(np.asarray(days, dtype=float))
    v = np.broadcast_to(np.asarray(vol, dtype=float), d.shape)
    w = nearest_window(d, list(cone.series))
    out = np.full(d.shape, np.nan)
    for win in np.unique(w):  # a handful of windows
        s = np.sort(cone.series[int(win)][np.isfinite(cone.series[int(win)])])
        sel = (w == win) & np.isfinite(v)
        if s.size:
            out[sel] = np.searchsorted(s, v[sel], side="left") / s.size
    return out
