"""The core pipeline: from one loaded snapshot to the annotated chain.

Per expiry (DESIGN.md, "Computation, per expiry"): time to settlement,
parity forward and discount factor, implied vols, a fitted smile, then per
contract the sigma distance, finish-beyond probabilities (smile and flat),
touch probability, delta, breakeven and its probability, spread and flags;
per expiry the ranges at a chosen confidence.

The expiries are computed together, not one after another: rows are sorted
once by expiry, strike and kind, so each expiry is a run of rows and calls
and puts line up per (expiry, strike); the parity forwards
(``implied_forwards``), the smile fits (``smile_batch.fit_smiles``) and the
smile ranges (``range_smile_rows``) take all expiries in one call, and the
per-contract figures use each row's own expiry smile (``svi.SviSlices``).
Python loops over expiries only assemble findings and result objects.
Before anything else, strikes far outside their expiry's range (typos such as
1e300) are left out with a finding (``far_strikes``, read off the sorted rows).
"""

from __future__ import annotations

import contextlib
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field, replace
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from . import black76
from .confidence import DEFAULT_CONFIDENCE
from .contract_figures import GREEK_COLUMNS, TRADE_COLUMNS, contract_figures
from .distribution import (
    Distribution,
    range_flat,
    range_smile_rows,
    terminal_distribution,
)
from .exchange_calendar import ExchangeCalendar
from .far_strikes import FAR_FACTOR, far_strikes, far_strikes_grouped
from .findings import LEFT_OUT, NOTE, WARNING, ChainTriageError, Finding
from .implied_vol import ABOVE_UPPER_BOUND, BELOW_INTRINSIC, STATUS_REASONS, implied_vol
from .parity_forward import ForwardEstimate, implied_forwards
from .smile_batch import fit_smiles
from .quote_bands import vol_outside
from .smile_fit import PRICE_UNCERTAINTY_FLOOR, Smile
from .snapshot import Snapshot
from .svi import SviParams, SviSlices
from .time_to_expiry import (
    calendar_days_to_expiry,
    convert_vol,
    trading_days_to_expiry,
    year_fraction,
)
from .calendar_arbitrage import calendar_findings

if TYPE_CHECKING:  # pragma: no cover
    from .touch_expiry import ExpiryTouch

#: Columns of the annotated contract table, in display order.
CONTRACT_TABLE_COLUMNS = [
    "underlying", "expiry", "strike", "kind", "bid", "ask", "mid", "iv",
    "sigma_distance", "p_beyond", "p_beyond_flat", "p_touch", "p_touch_low", "p_touch_high", "delta",
    "breakeven", "p_breakeven", "spread_pct", "flags",
    "volume", "open_interest", "otm", "source_line",
    # Greeks (core/greeks.py) and the economics at the bid and the ask (core/trade_economics.py).
    *GREEK_COLUMNS, *TRADE_COLUMNS,
]

#: Columns of the per-expiry table, in display order.
EXPIRY_TABLE_COLUMNS = [
    "underlying", "expiry", "t_years", "trading_days", "calendar_days",
    "forward", "discount", "forward_method", "atm_iv",
    "range_low", "range_high", "range_low_smile", "range_high_smile",
    "fit_rmse", "fit_method", "arbitrage_free", "arbitrage_note", "contracts", "findings",
]


@dataclass(frozen=True)
class PipelineSettings:
    """Choices that change the numbers.

    ``basis``: '252', '250' (trading days) or '365' (calendar ACT/365).
    ``confidence``: two-sided level of the ranges, in (0, 1); default the one-sigma
    level 0.682689... (``confidence.DEFAULT_CONFIDENCE``, shown as 68.27%).
    ``use_file_iv``: take the file's ``iv`` column instead of solving from mids.
    ``wide_spread``: spread / mid above which a contract is flagged 'wide'.
    ``thin_open_interest``: open interest below which a contract is flagged 'thin'.
    """

    basis: str = "252"
    confidence: float = DEFAULT_CONFIDENCE
    use_file_iv: bool = False
    wide_spread: float = 0.25
    thin_open_interest: float = 10.0
    extra_closed: tuple = ()

    def __post_init__(self) -> None:
        if self.basis not in ("252", "250", "365"):
            raise ValueError(f"unknown time basis {self.basis!r}: use 252, 250 or 365")
        if not 0.0 < self.confidence < 1.0:
            raise ValueError(f"confidence must be between 0 and 1, got {self.confidence}")


@dataclass
class ExpiryResult:
    """Everything computed for one expiry (scalars in price units or years)."""

    expiry: pd.Timestamp
    t_years: float
    forward_estimate: ForwardEstimate
    smile: Smile | None
    atm_iv: float
    findings: list[Finding] = field(default_factory=list)

    @property
    def forward(self) -> float:
        return self.forward_estimate.forward

    @property
    def discount(self) -> float:
        return self.forward_estimate.discount


@dataclass
class TouchSource:
    """What the touch figures of a snapshot's expiries are computed from, known once its smiles are
    fitted (``annotate``'s ``smiles_ready`` is given one before the per-contract figures are made).

    ``strikes``: every contract's strike (price units) in the annotated rows' order; ``rows_of(expiry)``:
    the positions of an expiry's rows.
    """

    results: dict
    strikes: np.ndarray
    spot: float
    underlying: str
    rows_of: Callable[[pd.Timestamp], np.ndarray]

    def inputs(self, expiries) -> tuple[list[pd.Timestamp], tuple, dict]:
        """``AnnotatedSnapshot.touch_inputs`` (the same values): (the expiries of ``expiries`` with
        figures to compute, ``expiries_touch``'s positional and keyword arguments)."""
        todo = []
        for e in dict.fromkeys(pd.Timestamp(e) for e in expiries):
            res = self.results.get(e)
            if res is not None and res.smile is not None and res.t_years > 0:
                todo.append(e)
        if not todo:
            return [], (), {}
        order = list(self.results)
        strikes = [self.strikes[self.rows_of(expiry)] for expiry in todo]
        vols = [None] * len(todo)  # each smile's vol at its strikes, computed only for a one-vol fallback
        args = (strikes, self.spot, np.array([r.t_years for r in self.results.values()]),
                np.array([r.forward for r in self.results.values()]),
                [r.smile for r in self.results.values()], [order.index(e) for e in todo], vols)
        return todo, args, {"underlying": self.underlying, "labels": [f"{e:%Y-%m-%d}" for e in todo]}


@dataclass
class AnnotatedSnapshot:
    """The pipeline's output for one snapshot: contract and expiry tables.

    Touch figures (``p_touch``, ``p_touch_low``, ``p_touch_high``) are computed
    per expiry on demand: ``annotate`` leaves them NaN, ``touch(expiry)``
    computes one expiry (once; later calls return the kept result) and writes
    its rows of ``contracts``, ``touch_many(expiries)`` several at once (the
    same figures, faster), ``fill_touch()`` every expiry. Findings of
    the touch step are added to ``findings`` and the expiry's result when it runs.
    """

    snapshot: Snapshot
    settings: PipelineSettings
    contracts: pd.DataFrame
    expiries: pd.DataFrame
    results: dict[pd.Timestamp, ExpiryResult]
    findings: list[Finding]
    touched: dict[pd.Timestamp, ExpiryTouch] = field(default_factory=dict)
    _touch_cache: tuple | None = field(default=None, repr=False)

    def touch(self, expiry) -> ExpiryTouch | None:
        """Touch figures of one expiry (local vol with model-free bounds), computed once and written to ``contracts``.

        None when the expiry is unknown, has no smile or no time left (its
        touch columns stay NaN).
        """
        return self.touch_many([expiry]).get(pd.Timestamp(expiry))

    def touch_many(self, expiries=None, workers: int = 1) -> dict[pd.Timestamp, ExpiryTouch | None]:
        """``touch`` for several expiries (all when None) at once: the same figures, faster.

        Expiries not yet computed run together (``touch_local_vol_many``
        steps their equations side by side) and the touch columns of
        ``contracts`` are written once. ``workers`` >= 2 lets a second thread
        compute the model-free bounds meanwhile (``expiries_touch``). Returns
        each asked expiry's result (None as ``touch`` gives it).
        """
        asked = list(self.results) if expiries is None else [pd.Timestamp(e) for e in expiries]
        todo = [e for e in dict.fromkeys(asked) if self.needs_touch(e)]
        if todo:
            self.apply_touch(self.compute_touch_many(todo, workers=workers))
        return {e: self.touched.get(e) for e in asked}

    def needs_touch(self, expiry) -> bool:
        """Whether ``touch(expiry)`` would compute something (a known expiry with a smile and time left,
        not computed yet)."""
        expiry = pd.Timestamp(expiry)
        return expiry not in self.touched and self._has_touch(expiry)

    def _has_touch(self, expiry: pd.Timestamp) -> bool:
        """Whether ``expiry`` can have touch figures (a known expiry with a smile and time left)."""
        res = self.results.get(expiry)
        return res is not None and res.smile is not None and res.t_years > 0

    def prepare_touch(self) -> None:
        """Read what ``compute_touch_many`` needs from ``contracts`` once (the expiry of each row, the
        strikes, the touch columns), so it can then run in another thread while ``contracts`` is read here."""
        if self._touch_cache is None:  # contracts are sorted by expiry: each expiry is a run of rows
            values = self.contracts["expiry"].to_numpy(dtype="datetime64[ns]")
            cols = {name: self.contracts[name].to_numpy(dtype=float, copy=True)
                    for name in ("p_touch", "p_touch_low", "p_touch_high")}
            self._touch_cache = (values, cols, self.contracts["strike"].to_numpy(float))

    def _touch_rows(self, expiry: pd.Timestamp) -> np.ndarray:
        values = self._touch_cache[0]
        target = np.datetime64(expiry.to_datetime64(), "ns")
        lo = int(np.searchsorted(values, target, side="left"))
        hi = int(np.searchsorted(values, target, side="right"))
        return np.arange(lo, hi) if (lo < hi and values[lo] == target) else np.flatnonzero(values == target)

    def compute_touch(self, expiry) -> ExpiryTouch | None:
        """One expiry's touch figures without writing them anywhere (see ``compute_touch_many``)."""
        expiry = pd.Timestamp(expiry)
        return self.compute_touch_many([expiry]).get(expiry)

    def compute_touch_many(self, expiries, workers: int = 1) -> dict[pd.Timestamp, ExpiryTouch]:
        """Touch figures of ``expiries`` (see ``touch_many``) without writing them anywhere: reads only
        this object's results and the arrays ``prepare_touch`` kept, so another thread may run it while
        ``contracts`` is used elsewhere; ``apply_touch`` writes them. Expiries with nothing to compute
        (no smile, no time left, unknown) are left out."""
        from .touch_expiry import expiries_touch  # here only: it imports scipy.linalg, not needed to annotate

        todo, args, kwargs = self.touch_inputs(expiries)
        if not todo:
            return {}
        return dict(zip(todo, expiries_touch(*args, **kwargs, workers=workers)))

    def touch_inputs(self, expiries) -> tuple[list[pd.Timestamp], tuple, dict]:
        """What ``compute_touch_many`` gives ``touch_expiry.expiries_touch`` for ``expiries``: (the
        expiries with figures to compute, the positional and the keyword arguments but ``workers``;
        plain data: strikes, spot, times, forwards, smiles, indices). Another process given them
        computes the same figures; ``apply_touch(dict(zip(expiries, its result)))`` writes them."""
        self.prepare_touch()
        return TouchSource(self.results, self._touch_cache[2], self.snapshot.spot, self.snapshot.underlying,
                           self._touch_rows).inputs(expiries)

    def touch_rows(self, expiry) -> np.ndarray:
        """The positions in ``contracts`` of ``expiry``'s rows (the order of ``touch_inputs``' strikes)."""
        self.prepare_touch()
        return self._touch_rows(pd.Timestamp(expiry))

    def apply_touch(self, computed: dict) -> None:
        """Write touch figures from ``compute_touch_many`` (expiry -> ExpiryTouch) to ``contracts`` (each
        column once), their findings to ``findings`` and the expiry's result; expiries already done skipped."""
        fresh = {pd.Timestamp(e): got for e, got in computed.items()
                 if got is not None and pd.Timestamp(e) not in self.touched}
        if not fresh:
            return
        self.prepare_touch()
        cols = self._touch_cache[1]
        expiry_days = None
        for expiry, got in fresh.items():
            rows = self._touch_rows(expiry)
            for name, arr in (("p_touch", got.p_touch), ("p_touch_low", got.low), ("p_touch_high", got.high)):
                cols[name][rows] = arr
            res = self.results[expiry]
            if got.findings:
                res.findings.extend(got.findings)
                self.findings.extend(got.findings)
                if expiry_days is None:
                    expiry_days = self.expiries["expiry"].to_numpy(dtype="datetime64[ns]")
                where = np.flatnonzero(expiry_days == np.datetime64(expiry.to_datetime64(), "ns"))
                self.expiries.loc[self.expiries.index[where], "findings"] = len(res.findings)
            self.touched[expiry] = got
        for name in cols:  # a whole-column swap is much cheaper than a row-wise write; pandas copies the
            self.contracts[name] = cols[name]  # array it is given, so later writes to cols stay ours

    def fill_touch(self, workers: int = 1) -> "AnnotatedSnapshot":
        """Compute the touch figures of every expiry (``touch_many``); returns self."""
        self.touch_many(workers=workers)
        return self

    def distribution(self, expiry, n: int = 401) -> Distribution | None:
        """Terminal distribution of one expiry on a strike grid (None when no smile)."""
        res = self.results.get(pd.Timestamp(expiry))
        if res is None or res.smile is None or not res.t_years > 0:
            return None
        return terminal_distribution(res.smile, res.forward, res.t_years, res.atm_iv, n=n)

    def horizon_extrapolated(self, days: float) -> bool:
        """Whether ``days`` (on the settings' basis) lies past the last expiry with a usable vol,
        where ``horizon_range`` holds the last expiry's variance rate instead of interpolating."""
        per_year = 365.0 if self.settings.basis == "365" else float(self.settings.basis)
        usable = [r.t_years for r in self.results.values() if r.t_years > 0 and np.isfinite(r.atm_iv)]
        return not usable or float(days) / per_year > max(usable) * (1 + 1e-12)

    def horizon_range(self, days: float, confidence: float | None = None) -> tuple[float, float, float]:
        """(forward, low, high) of the plain range ``days`` trading/calendar days ahead.

        Days are counted on the settings' basis (trading days for 252/250).
        At-the-money total variance is interpolated linearly in time between
        expiries and the forward log-linearly; beyond the last expiry the
        variance rate and carry of the last expiry are held.
        """
        conf = self.settings.confidence if confidence is None else confidence
        per_year = 365.0 if self.settings.basis == "365" else float(self.settings.basis)
        t = float(days) / per_year
        usable = [r for r in self.results.values() if r.t_years > 0 and np.isfinite(r.atm_iv)]
        if t <= 0 or not usable:
            spot = self.snapshot.spot
            return spot, spot, spot
        ts = np.array([r.t_years for r in usable])
        order = np.argsort(ts)
        ts = ts[order]
        w = np.array([r.atm_iv ** 2 * r.t_years for r in usable])[order]
        logf = np.log(np.array([r.forward for r in usable]))[order]
        spot = self.snapshot.spot
        # Anchor at t=0 with zero variance and the spot.
        ts = np.concatenate([[0.0], ts])
        w = np.concatenate([[0.0], w])
        logf = np.concatenate([[np.log(spot)], logf])
        if t <= ts[-1]:
            w_t = float(np.interp(t, ts, w))
            logf_t = float(np.interp(t, ts, logf))
        else:
            w_t = w[-1] * t / ts[-1]
            logf_t = np.log(spot) + (logf[-1] - np.log(spot)) * t / ts[-1]
        f = float(np.exp(logf_t))
        sigma = np.sqrt(w_t / t)
        low, high = range_flat(f, sigma, t, conf)
        return f, float(low), float(high)


_CALENDARS: dict[tuple, ExchangeCalendar] = {}


def _calendar(extra_closed) -> ExchangeCalendar:
    """The exchange calendar for these extra closed dates, kept between runs (its holiday tables are built once)."""
    try:
        key = tuple(extra_closed)
        hash(key)
    except TypeError:
        return ExchangeCalendar(extra_closed=extra_closed)
    cal = _CALENDARS.get(key)
    if cal is None:
        if len(_CALENDARS) >= 16:
            _CALENDARS.clear()
        cal = _CALENDARS[key] = ExchangeCalendar(extra_closed=extra_closed)
    return cal


def _first_per_expiry(present: np.ndarray, starts: np.ndarray, ends: np.ndarray):
    """(row of the first present value per expiry group, whether there is one); groups are row ranges."""
    pos = np.where(present, np.arange(present.size), present.size)
    first = np.minimum.reduceat(pos, starts) if present.size else np.zeros(0, dtype=np.int64)
    found = first < ends
    return np.where(found, first, 0), found


def _mids(bid: np.ndarray, ask: np.ndarray) -> np.ndarray:
    """Mid price where the ask is quoted (a zero bid counts as 0), NaN otherwise."""
    bid0 = np.where(np.isfinite(bid), bid, 0.0)
    with np.errstate(invalid="ignore"):
        return np.where(np.isfinite(ask) & (ask > 0), 0.5 * (bid0 + ask), np.nan)


def _sort_order(contracts: pd.DataFrame) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Row order by expiry, strike and kind (stable, as a stable sort_values), with is_call and is_put in that order."""
    kind = contracts["kind"]
    is_call = (kind == "call").to_numpy(dtype=bool, na_value=False)
    is_put = (kind == "put").to_numpy(dtype=bool, na_value=False)
    if np.all(is_call | is_put):
        kind_key = is_put  # 'call' sorts before 'put'
    else:
        kind_key = pd.factorize(kind, sort=True, use_na_sentinel=False)[0]
    order = _lexsort_by_expiry(kind_key, contracts["strike"].to_numpy(float), contracts["expiry"].to_numpy())
    return order, is_call[order], is_put[order]


def _lexsort_by_expiry(kind_key: np.ndarray, strike: np.ndarray, expiry: np.ndarray) -> np.ndarray:
    """``np.lexsort((kind_key, strike, expiry))``; where the expiries already come in order (as files
    usually have them), each expiry's run of rows sorted on its own (the same order, in a fraction
    of the time: short sorts in cache, no pass over the expiry key)."""
    if not (expiry[1:] >= expiry[:-1]).all():  # NaT compares False: sorted as a whole
        return np.lexsort((kind_key, strike, expiry))
    bounds = [0, *(np.flatnonzero(expiry[1:] != expiry[:-1]) + 1).tolist(), expiry.size]
    order = np.empty(expiry.size, dtype=np.intp)
    for lo, hi in zip(bounds[:-1], bounds[1:]):
        run = order[lo:hi]
        run[...] = np.lexsort((kind_key[lo:hi], strike[lo:hi]))
        run += lo
    return order


def _text_per_expiry(column: pd.Series, order: np.ndarray, starts: np.ndarray, ends: np.ndarray, default: str):
    """First non-missing value of a text column per expiry group (rows in ``order``), else ``default``."""
    present = ~column.isna().to_numpy(dtype=bool)[order]
    first, found = _first_per_expiry(present, starts, ends)
    values = column.array.take(order[first]).to_numpy(dtype=object) if found.size else np.zeros(0, dtype=object)
    return np.where(found, values, default).astype(object)


def _far_in_order(contracts: pd.DataFrame, order: np.ndarray, spot: float) -> np.ndarray:
    """``far_strikes`` of the contracts (mask in their own row order), read off the rows in ``order``
    (sorted by expiry and strike) without sorting again; ``far_strikes`` itself when a strike or an
    expiry is missing."""
    expiry = contracts["expiry"].to_numpy()
    strike = contracts["strike"].to_numpy(float)
    sorted_expiry = expiry[order]
    far_sorted = None
    if sorted_expiry.dtype.kind == "M" and not np.isnat(sorted_expiry).any():
        new_exp = np.ones(order.size, dtype=bool)
        new_exp[1:] = sorted_expiry[1:] != sorted_expiry[:-1]
        far_sorted = far_strikes_grouped(np.flatnonzero(new_exp), strike[order], spot)
    if far_sorted is None:
        return far_strikes(expiry, strike, spot)
    far = np.zeros(order.size, dtype=bool)
    far[order] = far_sorted
    return far


def _without_far_strikes(snapshot: Snapshot, findings: list[Finding], far: np.ndarray) -> Snapshot:
    """The snapshot without the strikes far outside their expiry's range (``far``, from ``_far_in_order``),
    each left out with a finding naming its file and line; the same snapshot when there are none."""
    contracts = snapshot.contracts
    if not far.any():
        return snapshot
    gone = contracts[far]
    for expiry, strike, kind, file, line in zip(gone["expiry"], gone["strike"], gone["kind"],
                                                gone["source_file"], gone["source_line"]):
        findings.append(Finding(
            LEFT_OUT, f"strike {strike:.10g} is more than {FAR_FACTOR:g} times away from the other strikes of "
                      f"this expiry (and from spot {snapshot.spot:.10g}); left out before the fit as a likely typo",
            file=str(file) or None, line=int(line), column="strike", underlying=snapshot.underlying,
            expiry=f"{pd.Timestamp(expiry):%Y-%m-%d}"))
    return replace(snapshot, contracts=contracts[~far].reset_index(drop=True))


def annotate(snapshot: Snapshot, settings: PipelineSettings | None = None, touch: bool = False,
             smiles_ready=None) -> AnnotatedSnapshot:
    """Run the whole per-expiry pipeline over a snapshot.

    The touch columns are left NaN for ``AnnotatedSnapshot.touch`` to fill per
    expiry on demand; ``touch=True`` fills every expiry now. ``smiles_ready``:
    called with a ``TouchSource`` once the smiles are fitted, before the
    per-contract figures (e.g. to have the touch figures computed elsewhere meanwhile).
    """
    settings = settings or PipelineSettings()
    findings: list[Finding] = []
    snapshot, order, is_call, is_put = _cleaned(snapshot, findings)
    annotated = _annotate_sorted(snapshot, settings, findings, order, is_call, is_put, smiles_ready=smiles_ready)
    return annotated.fill_touch() if touch else annotated


def _cleaned(snapshot: Snapshot, findings: list[Finding]) -> tuple[Snapshot, np.ndarray, np.ndarray, np.ndarray]:
    """(the snapshot without far strikes, each with a finding added to ``findings``; its row order by
    expiry, strike and kind; is_call and is_put in that order)."""
    contracts = snapshot.contracts
    order, is_call, is_put = _sort_order(contracts)
    far = _far_in_order(contracts, order, snapshot.spot)
    if far.any():  # rare: leave them out and sort what is left
        snapshot = _without_far_strikes(snapshot, findings, far)
        order, is_call, is_put = _sort_order(snapshot.contracts)
    return snapshot, order, is_call, is_put


def annotate_in_parts(snapshot: Snapshot, settings: PipelineSettings | None = None,
                      first: int = 1) -> Iterator[AnnotatedSnapshot]:
    """``annotate`` in two steps, for showing a chain before all of it is computed: yields the first
    ``first`` expiries annotated alone, then the whole snapshot, equal to ``annotate(snapshot, settings)``
    (each expiry's figures come from its own quotes; the whole joins the two parts and adds what
    compares expiries, the calendar-arbitrage findings). Yields the whole alone when there are no more
    than ``first`` expiries. The first part's findings are its expiries' own (and their far strikes').
    """
    settings = settings or PipelineSettings()
    far_findings: list[Finding] = []
    snapshot, order, is_call, is_put = _cleaned(snapshot, far_findings)
    contracts = snapshot.contracts
    exp_sorted = contracts["expiry"].to_numpy()[order]
    n = order.size
    cut = n
    if n and exp_sorted.dtype.kind == "M" and not np.isnat(exp_sorted).any():
        starts = np.flatnonzero(np.r_[True, exp_sorted[1:] != exp_sorted[:-1]])
        if starts.size > first > 0:
            cut = int(starts[first])
    if cut >= n:
        yield _annotate_sorted(snapshot, settings, far_findings, order, is_call, is_put)
        return
    parts = []
    for lo, hi in ((0, cut), (cut, n)):  # each part: a run of the sorted rows (the whole snapshot, read in part)
        part_findings: list[Finding] = []
        if lo == 0:
            labels = {f"{e:%Y-%m-%d}" for e in pd.DatetimeIndex(exp_sorted[:cut])}
            part_findings = [f for f in far_findings if f.expiry in labels]
        parts.append(_annotate_sorted(snapshot, settings, part_findings, order[lo:hi], is_call[lo:hi],
                                      is_put[lo:hi], compare_expiries=False))
        if lo == 0:
            yield parts[0]
    yield _joined(snapshot, settings, far_findings, parts)


def _joined(snapshot: Snapshot, settings: PipelineSettings, far_findings: list[Finding],
            parts: list[AnnotatedSnapshot]) -> AnnotatedSnapshot:
    """The annotated whole from parts (consecutive runs of expiries, annotated with ``compare_expiries=False``)."""
    columns = {}
    for name in parts[0].contracts.columns:  # numpy columns joined as arrays (cheaper than pd.concat)
        series = [p.contracts[name] for p in parts]
        dtype = series[0].dtype
        if isinstance(dtype, np.dtype) and dtype.kind in "biufcmM" and all(s.dtype == dtype for s in series):
            columns[name] = np.concatenate([s.to_numpy() for s in series])
        else:
            columns[name] = pd.concat(series, ignore_index=True)
            if columns[name].dtype != dtype and len(series[0]):  # a dtype a part could not keep
                with contextlib.suppress(TypeError, ValueError):
                    columns[name] = columns[name].astype(dtype)
    contracts = pd.DataFrame(columns, copy=False)
    exp_table = pd.concat([p.expiries for p in parts], ignore_index=True)
    results: dict[pd.Timestamp, ExpiryResult] = {}
    for p in parts:
        results.update(p.results)
    labels = [f"{e:%Y-%m-%d}" for e in results]
    res_list = list(results.values())
    for fnd in calendar_findings([r.smile for r in res_list], np.array([r.t_years for r in res_list], dtype=float),
                                 labels, snapshot.underlying):
        res_list[labels.index(fnd.expiry)].findings.append(fnd)
    exp_table["findings"] = [len(r.findings) for r in res_list]
    findings = list(far_findings)
    for r in res_list:
        findings.extend(r.findings)
    return AnnotatedSnapshot(snapshot, settings, contracts, exp_table, results, findings)


def _annotate_sorted(snapshot: Snapshot, settings: PipelineSettings, findings: list[Finding], order: np.ndarray,
                     is_call: np.ndarray, is_put: np.ndarray, compare_expiries: bool = True,
                     smiles_ready=None) -> AnnotatedSnapshot:
    """``annotate`` of a snapshot already cleaned of far strikes, its rows in ``order`` (see ``_cleaned``);
    ``findings`` holds the findings so far. ``compare_expiries=False`` leaves out the calendar-arbitrage
    findings (for a part of the expiries: ``annotate_in_parts``)."""
    calendar = _calendar(settings.extra_closed)
    contracts = snapshot.contracts
    underlying = snapshot.underlying
    n = order.size

    def numeric(name: str) -> np.ndarray:
        return contracts[name].to_numpy(float)[order]

    strike = numeric("strike")
    bid = numeric("bid")
    ask = numeric("ask")
    mid = _mids(bid, ask)

    # Expiry groups: rows are sorted by expiry, so each expiry is one run of rows.
    exp_values = contracts["expiry"].to_numpy()[order]
    new_exp = np.ones(n, dtype=bool)
    new_exp[1:] = exp_values[1:] != exp_values[:-1]
    starts = np.flatnonzero(new_exp)
    exp_code = np.cumsum(new_exp) - 1
    expiries = pd.DatetimeIndex(exp_values[starts])
    n_exp = len(expiries)
    ends = np.append(starts[1:], n)

    # 1. Time to settlement per expiry.
    settle = _text_per_expiry(contracts["settle"], order, starts, ends, "pm")
    t_exp = np.asarray(year_fraction(snapshot.as_of, expiries, settle, basis=settings.basis, calendar=calendar), float)
    # Interest and carry accrue in calendar time: rates and the parity plausibility
    # bands use ACT/365 whatever the variance clock (the basis) is.
    t_cal = (t_exp if settings.basis == "365" else
             np.asarray(year_fraction(snapshot.as_of, expiries, settle, basis="365", calendar=calendar), float))
    trading_days = np.asarray(trading_days_to_expiry(snapshot.as_of, expiries, calendar=calendar))
    calendar_days = np.asarray(calendar_days_to_expiry(snapshot.as_of, expiries))
    rates = np.full(n_exp, np.nan)
    divs = np.full(n_exp, np.nan)
    for values, per_expiry in ((numeric("rate"), rates), (numeric("div_yield"), divs)):
        first, found = _first_per_expiry(~np.isnan(values), starts, ends)
        per_expiry[found] = values[first[found]]

    t_row = t_exp[exp_code]
    labels = [f"{expiry:%Y-%m-%d}" for expiry in expiries]

    # 2. Forward and discount factor per expiry from put-call parity: one row per (expiry, strike).
    new_pair = new_exp.copy()
    new_pair[1:] |= strike[1:] != strike[:-1]
    pair = np.cumsum(new_pair) - 1
    n_pairs = int(new_pair.sum())
    quotes = {}
    for side, mask in (("call", is_call), ("put", is_put)):
        rows = np.flatnonzero(mask)  # taken by index: a boolean mask alternating row by row is slow to index with
        at = pair[rows]
        for name, values in (("bid", bid), ("ask", ask)):
            arr = np.full(n_pairs, np.nan)
            arr[at] = values[rows]
            quotes[side, name] = arr
    estimates = implied_forwards(
        exp_code[new_pair], strike[new_pair], quotes["call", "bid"], quotes["call", "ask"],
        quotes["put", "bid"], quotes["put", "ask"], spot=snapshot.spot, t=np.maximum(t_cal, 1e-12),
        rate=rates, div_yield=divs,
    )
    forwards = np.array([e.forward for e in estimates], dtype=float)
    discounts = np.array([e.discount for e in estimates], dtype=float)
    expiry_findings: list[list[Finding]] = [[] for _ in expiries]
    open_days = calendar.is_trading_day(expiries)
    for i, est in enumerate(estimates):
        for fnd in est.findings:
            expiry_findings[i].append(Finding(fnd.severity, f"forward: {fnd.reason}", underlying=underlying,
                                              expiry=labels[i]))
        if not open_days[i]:
            expiry_findings[i].append(Finding(WARNING, "expiry date is not an exchange trading day (weekend "
                                              "or holiday); trading time counts to the last session before it",
                                              underlying=underlying, expiry=labels[i]))
        if not t_exp[i] > 0:
            expiry_findings[i].append(Finding(WARNING, "expiry has no time left at the snapshot time; "
                                              "no vols or probabilities", underlying=underlying,
                                              expiry=labels[i]))

    f_row = forwards[exp_code]
    df_row = discounts[exp_code]

    # 3. Implied vols, all contracts at once.
    otm = np.where(is_call, strike >= f_row, strike < f_row)
    if settings.use_file_iv:
        file_iv = numeric("iv")
        iv_basis = contracts["iv_basis"].to_numpy(dtype=object)[order]
        basis = np.where(iv_basis == "", settings.basis, iv_basis)
        iv = file_iv.copy()
        for other in ("252", "250", "365"):
            if other == settings.basis:
                continue
            m = basis == other
            if m.any():
                t_other = np.asarray(year_fraction(snapshot.as_of, expiries, settle, basis=other, calendar=calendar), float)
                with np.errstate(divide="ignore", invalid="ignore"):
                    iv[m] = convert_vol(file_iv[m], t_other[exp_code][m], t_row[m])
    else:
        solved = implied_vol(mid, f_row, strike, t_row, df_row, is_call)
        iv = solved.sigma
        _no_vol_findings(solved.status, contracts, order, exp_code, is_call, strike, mid, otm,
                         underlying, labels, expiry_findings)
    iv_status_ok = np.isfinite(iv)

    # 4. One smile per expiry, all expiries fitted together, on the out-of-the-money quotes with a
    # bid (a zero bid is an upper bound only: checked after the fit, never a point to fit).
    k_row = np.log(strike / f_row)
    live = t_exp > 0
    with np.errstate(invalid="ignore"):
        two_sided = np.isfinite(bid) & (bid > 0)
    otm_live = otm & live[exp_code]
    fit_sel = np.flatnonzero(otm_live & iv_status_ok & two_sided)
    bound_sel = np.flatnonzero(otm_live & ~two_sided & np.isfinite(ask) & (ask > 0))
    has_quotes = np.bincount(exp_code[fit_sel], minlength=n_exp) > 0
    smiles: list = [None] * n_exp
    band_err = np.full(n, np.nan)
    if fit_sel.size:
        smiles = _fit_smiles_in_bands(fit_sel, bound_sel, k_row, iv, t_row, t_exp, f_row, df_row, strike, bid, ask,
                                      is_call, exp_code, has_quotes, band_err, expiry_findings, underlying, labels)

    band_rms = _rms_per_expiry(band_err, exp_code, n_exp)
    atm_ivs = np.full(n_exp, np.nan)
    fit_rmse = np.full(n_exp, np.nan)
    arb_note = np.full(n_exp, "", dtype=object)
    fit_method = np.full(n_exp, "", dtype=object)
    arb_free = np.zeros(n_exp, dtype=bool)
    params = np.full((n_exp, 5), np.nan)
    have_smile = np.zeros(n_exp, dtype=bool)
    for i in range(n_exp):
        smile = None
        if live[i]:
            got = smiles[i]
            if isinstance(got, ChainTriageError):
                expiry_findings[i].append(Finding(WARNING, f"no smile for this expiry: {got}",
                                                  underlying=underlying, expiry=labels[i]))
            elif got is None:
                expiry_findings[i].append(Finding(WARNING, "no out-of-the-money quote with a bid and an implied vol; "
                                                  "no smile for this expiry", underlying=underlying,
                                                  expiry=labels[i]))
            else:
                smile = got
        if smile is not None:
            expiry_findings[i].extend(smile.findings(underlying, labels[i]))
            params[i] = smile.params.as_tuple()
            have_smile[i] = True
            fit_rmse[i] = smile.rmse_vol
            if has_quotes[i] and np.isfinite(band_rms[i]):
                fit_rmse[i] = band_rms[i]
            fit_method[i] = smile.method
            arb_free[i] = bool(smile.arbitrage_free)
            arb_note[i] = _arbitrage_note(smile, forwards[i])
    slices = SviSlices(SviParams(*params.T))
    for fnd in calendar_findings([smiles[i] if have_smile[i] else None for i in range(n_exp)], t_exp, labels,
                                 underlying) if compare_expiries else ():
        expiry_findings[labels.index(fnd.expiry)].append(fnd)
    atm_ivs[have_smile] = _atm_vols(slices, t_exp)[have_smile]
    results: dict[pd.Timestamp, ExpiryResult] = {}
    for i, expiry in enumerate(expiries):
        results[expiry] = ExpiryResult(expiry, float(t_exp[i]), estimates[i], smiles[i] if have_smile[i] else None,
                                       atm_ivs[i], expiry_findings[i])
    if smiles_ready is not None:  # (``annotate``'s): rows are sorted by expiry, each expiry a run of rows
        runs = dict(zip(expiries, zip(starts.tolist(), ends.tolist())))
        smiles_ready(TouchSource(results, strike, snapshot.spot, underlying,
                                 lambda e: np.arange(*runs.get(pd.Timestamp(e), (0, 0)))))

    # 5. Per-contract figures from each row's own expiry smile, in blocks of rows (contract_figures).
    p_touch = np.full(n, np.nan)  # touch figures: per expiry on demand (AnnotatedSnapshot.touch)
    ranges = np.full((n_exp, 4), np.nan)
    e_ok = np.flatnonzero(have_smile)
    if e_ok.size:
        ranges[e_ok, 0], ranges[e_ok, 1] = range_flat(forwards[e_ok], atm_ivs[e_ok], t_exp[e_ok], settings.confidence)
        ranges[e_ok, 2], ranges[e_ok, 3] = range_smile_rows(slices.take((e_ok, None)), forwards[e_ok],
                                                            settings.confidence)
    per_year = 365.0 if settings.basis == "365" else float(settings.basis)
    figures = contract_figures(
        snapshot.spot, strike, bid, ask, mid, iv, k_row, is_call, exp_code, have_smile, slices, atm_ivs, t_exp,
        t_cal, forwards, discounts, per_year)
    sigma_distance, p_beyond, p_beyond_flat, delta, breakeven, p_breakeven, spread_pct = (
        figures.pop(name) for name in ("sigma_distance", "p_beyond", "p_beyond_flat", "delta", "breakeven",
                                       "p_breakeven", "spread_pct"))
    extra = figures  # GREEK_COLUMNS and TRADE_COLUMNS

    open_interest = numeric("open_interest")
    flags = _flags(open_interest, bid, iv, spread_pct, settings)

    out = pd.DataFrame({
        "underlying": underlying,
        "expiry": (exp_values if exp_values.dtype == contracts["expiry"].dtype
                   else contracts["expiry"].take(order).reset_index(drop=True)),
        "strike": strike,
        "kind": contracts["kind"].take(order).reset_index(drop=True),
        "bid": bid,
        "ask": ask,
        "mid": mid,
        "iv": iv,
        "sigma_distance": sigma_distance,
        "p_beyond": p_beyond,
        "p_beyond_flat": p_beyond_flat,
        "p_touch": p_touch,
        "p_touch_low": p_touch.copy(),
        "p_touch_high": p_touch.copy(),
        "delta": delta,
        "breakeven": breakeven,
        "p_breakeven": p_breakeven,
        "spread_pct": spread_pct,
        "flags": flags,
        "volume": numeric("volume"),
        "open_interest": open_interest,
        "otm": otm,
        "source_line": contracts["source_line"].to_numpy()[order],
        **extra,
    }, copy=False)  # every column is a fresh array of its own: kept as is, not copied into one 2-d block

    counts = ends - starts
    exp_table = pd.DataFrame({
        "underlying": underlying,
        "expiry": expiries,
        "t_years": t_exp,
        "trading_days": trading_days,
        "calendar_days": calendar_days,
        "forward": forwards,
        "discount": discounts,
        "forward_method": [e.method for e in estimates],
        "atm_iv": atm_ivs,
        "range_low": ranges[:, 0],
        "range_high": ranges[:, 1],
        "range_low_smile": ranges[:, 2],
        "range_high_smile": ranges[:, 3],
        "fit_rmse": fit_rmse,
        "fit_method": fit_method,
        "arbitrage_free": arb_free,
        "arbitrage_note": arb_note,
        "contracts": counts,
        "findings": [len(f) for f in expiry_findings],
    }, copy=False)
    for fs in expiry_findings:
        findings.extend(fs)
    return AnnotatedSnapshot(snapshot, settings, out, exp_table, results, findings)


def _no_vol_findings(status, contracts, order, exp_code, is_call, strike, mid, otm, underlying, labels,
                     expiry_findings) -> None:
    """A finding, naming the file line, for each mid outside the no-arbitrage bounds (no vol exists).

    A warning for an out-of-the-money contract (its quote feeds the smile), a
    note for an in-the-money one (deep in the money the quote is mostly
    intrinsic value and often carries no time value after rounding).
    """
    bad = np.flatnonzero((status == BELOW_INTRINSIC) | (status == ABOVE_UPPER_BOUND))
    if not bad.size:
        return
    rows = order[bad]  # the few rows taken before the text becomes objects (not the whole column)
    files = contracts["source_file"].array.take(rows).to_numpy(dtype=object)
    lines = contracts["source_line"].to_numpy()[rows].tolist()
    # Python numbers (tolist) format and index faster than numpy scalars, to the same text.
    for file, line, code, call, out, k, m, st in zip(files, lines, exp_code[bad].tolist(), is_call[bad].tolist(),
                                                     otm[bad].tolist(), strike[bad].tolist(), mid[bad].tolist(),
                                                     status[bad].tolist()):
        expiry_findings[code].append(Finding(
            WARNING if out else NOTE,
            f"{'call' if call else 'put'} {k:g}: no implied vol: {STATUS_REASONS[int(st)]} (mid {m:.4g})",
            file=str(file), line=int(line), underlying=underlying, expiry=labels[code]))


def _fit_smiles_in_bands(fit_sel, bound_sel, k_row, iv, t_row, t_exp, f_row, df_row, strike, bid, ask, is_call,
                         exp_code, has_quotes, band_err, expiry_findings, underlying, labels) -> list:
    """The smile of every expiry fitted to its two-sided out-of-the-money quotes, then checked against the
    zero-bid ones (upper bounds); fills ``band_err`` (decimal vol outside each quote's band) per row.

    Weights: the quote's half spread in vol terms, floored at PRICE_UNCERTAINTY_FLOOR * DF * F * sqrt(t)
    in price (tight quotes count by their vega) and at 0.1 vol point. An expiry whose smile lies above
    the ask of some zero-bid quotes is fitted once more with those quotes held at their ask vol, with a
    note; zero-bid quotes the smile still prices above their ask get a note. The error counted per
    two-sided quote is the distance of the smile's vol outside its bid-ask band, to first order
    (|smile vol - mid vol| less the half spread over the vega, decimal vol, 0 inside); quotes left
    out as far off the curve and zero-bid quotes (bounds, not fitted) do not count.
    """
    n_exp = t_exp.size
    tf = t_row[fit_sel]
    vega = black76.vega(f_row[fit_sel], strike[fit_sel], iv[fit_sel], tf, df_row[fit_sel])
    spread = ask[fit_sel] - bid[fit_sel]
    floor = PRICE_UNCERTAINTY_FLOOR * df_row[fit_sel] * f_row[fit_sel] * np.sqrt(tf)
    fitted = fit_smiles(k_row[fit_sel], iv[fit_sel] ** 2 * tf, t_exp, exp_code[fit_sel], vega=vega, spread=spread,
                        price_floor=floor)
    smiles = [fitted[i] if has_quotes[i] else None for i in range(n_exp)]
    rows = np.concatenate([fit_sel, bound_sel])

    def fitted_vol(sel):
        """The smile's vol at each row of ``sel`` (NaN where its expiry has no smile or w <= 0)."""
        params = np.full((n_exp, 5), np.nan)
        for e in range(n_exp):
            if isinstance(smiles[e], Smile):
                params[e] = smiles[e].params.as_tuple()
        w = np.asarray(SviSlices(SviParams(*params[exp_code[sel]].T)).total_variance(k_row[sel]), dtype=float)
        with np.errstate(invalid="ignore"):
            return np.sqrt(np.where(w > 0, w, np.nan) / t_row[sel])

    def outside(sel):
        """Distance of the smile's price outside each quote's band, in vol (price distance / vega)."""
        vol = fitted_vol(sel)
        price = black76.price(f_row[sel], strike[sel], vol, t_row[sel], df_row[sel], is_call[sel])
        vg = black76.vega(f_row[sel], strike[sel], vol, t_row[sel], df_row[sel])
        return vol_outside(price, vg, bid[sel], ask[sel])

    def outside_fitted():
        """:func:`outside` for the two-sided quotes, to first order from their mid vol and its vega:
        max(|smile vol - mid vol| - (spread/2)/vega, 0) (no Black price per quote)."""
        with np.errstate(invalid="ignore", divide="ignore"):
            half = 0.5 * spread / np.where(vega > 0, vega, np.nan)
            return np.maximum(np.abs(fitted_vol(fit_sel) - iv[fit_sel]) - half, 0.0)

    nf = fit_sel.size
    bound_dist = None  # outside(bound_sel) with the smiles as first fitted
    refitted = []  # expiries whose smile was fitted again
    if bound_sel.size:
        bound_dist = outside(bound_sel)
        with np.errstate(invalid="ignore"):
            above = bound_dist > 1e-6
        redo = np.unique(exp_code[bound_sel[above]])
        redo = redo[[isinstance(smiles[e], Smile) and smiles[e].method == "svi" for e in redo]] if redo.size else redo
        if redo.size:
            held = above & np.isin(exp_code[bound_sel], redo)
            extra = bound_sel[held]
            extra_iv = implied_vol(ask[extra], f_row[extra], strike[extra], t_row[extra], df_row[extra],
                                   is_call[extra]).sigma
            extra, extra_iv = extra[np.isfinite(extra_iv)], extra_iv[np.isfinite(extra_iv)]
            mine = np.isin(exp_code[fit_sel], redo)
            sel = np.concatenate([fit_sel[mine], extra])
            target = np.concatenate([iv[fit_sel][mine], extra_iv])
            spr = np.concatenate([spread[mine], np.zeros(extra.size)])
            order = np.lexsort((k_row[sel], exp_code[sel]))
            sel, target, spr = sel[order], target[order], spr[order]
            t_s = t_row[sel]
            local = np.searchsorted(redo, exp_code[sel])
            refit = fit_smiles(k_row[sel], target ** 2 * t_s, t_exp[redo], local,
                               vega=black76.vega(f_row[sel], strike[sel], target, t_s, df_row[sel]), spread=spr,
                               price_floor=PRICE_UNCERTAINTY_FLOOR * df_row[sel] * f_row[sel] * np.sqrt(t_s))
            for j, e in enumerate(redo):
                n_up = int(np.count_nonzero(exp_code[extra] == e))
                if isinstance(refit[j], Smile) and n_up:
                    smiles[e] = refit[j]
                    refitted.append(e)
                    expiry_findings[e].append(Finding(
                        NOTE, f"smile: the fit to the two-sided quotes priced {n_up} zero-bid quote(s) above "
                              "their ask; fitted again with those held at their ask", underlying=underlying,
                        expiry=labels[e]))
    if refitted:  # the bounds' distances again where the smile changed (each row's own: the same elsewhere)
        again = np.flatnonzero(np.isin(exp_code[bound_sel], refitted))
        bound_dist[again] = outside(bound_sel[again])
    dist = np.concatenate([outside_fitted(), outside(bound_sel) if bound_dist is None else bound_dist])
    if bound_sel.size:  # zero-bid quotes still priced above their ask: said, not counted in the fit error
        over = dist[nf:]
        with np.errstate(invalid="ignore"):
            bad = over > 1e-4
        for e in np.unique(exp_code[bound_sel[bad]]):
            mine = bad & (exp_code[bound_sel] == e)
            expiry_findings[e].append(Finding(
                NOTE, f"smile: {int(mine.sum())} zero-bid quote(s) lie below the smile (their ask is under the "
                      f"smile's price, by up to {100 * float(over[mine].max()):.2f} vol points); a zero bid is "
                      "an upper bound only, not fitted", underlying=underlying, expiry=labels[e]))
    counts = np.zeros(rows.size, dtype=bool)
    counts[:nf] = True
    for e in np.unique(exp_code[fit_sel]):
        sm = smiles[e]
        if isinstance(sm, Smile) and sm.left_out_k:
            counts[:nf] &= ~((exp_code[fit_sel] == e) & np.isin(k_row[fit_sel], np.asarray(sm.left_out_k)))
    band_err[rows[counts]] = dist[counts]
    return smiles


def _rms_per_expiry(err: np.ndarray, exp_code: np.ndarray, n_exp: int) -> np.ndarray:
    """Root mean square of the finite values of ``err`` per expiry (NaN where there is none)."""
    ok = np.flatnonzero(np.isfinite(err))  # by index: the finite rows alternate with calls and puts
    code = exp_code[ok]
    n = np.bincount(code, minlength=n_exp)
    ss = np.bincount(code, weights=err[ok] ** 2, minlength=n_exp)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(n > 0, np.sqrt(ss / np.maximum(n, 1)), np.nan)


def _arbitrage_note(smile: Smile, forward: float) -> str:
    """'' for a smile free of butterfly arbitrage, else where its density is negative and what that means."""
    if smile.arbitrage_free:
        return ""
    if smile.negative_intervals:
        lo = min(a for a, _ in smile.negative_intervals)
        hi = max(b for _, b in smile.negative_intervals)
        where = f"strikes {forward * np.exp(lo):.6g} to {forward * np.exp(hi):.6g}"
    else:
        where = "part of the range"
    return (f"butterfly arbitrage: negative density and P(beyond) not monotone between {where} "
            f"(minimum g {smile.min_g:.3g})")


def _atm_vols(slices: SviSlices, t: np.ndarray) -> np.ndarray:
    """At-the-money vol per expiry, sqrt(w(0)/t) as Smile.atm_vol (NaN where w(0) <= 0)."""
    w = np.asarray(slices.total_variance(0.0), dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.sqrt(np.where(w > 0, w, np.nan) / t)


def _flags(oi: np.ndarray, bid: np.ndarray, iv: np.ndarray, spread_pct: np.ndarray,
           settings: PipelineSettings):
    """Short plain words per contract, comma-separated: no-iv, zero-bid, wide, thin.

    A categorical of the 16 combinations (in text order, so it sorts as the texts do): a byte per row,
    where a text column would lay out every row's text (with pyarrow, a buffer made by a take)."""
    words = ("no-iv", "zero-bid", "wide", "thin")
    with np.errstate(invalid="ignore"):
        masks = (
            ~np.isfinite(iv),
            ~(bid > 0),
            spread_pct > settings.wide_spread,
            np.isfinite(oi) & (oi < settings.thin_open_interest),
        )
    code = np.zeros(bid.size, dtype=np.int8)
    for bit, mask in enumerate(masks):
        code |= mask.astype(np.int8) << bit
    texts = [",".join(w for b, w in enumerate(words) if c >> b & 1) for c in range(16)]
    in_order = sorted(range(16), key=texts.__getitem__)
    place = np.empty(16, dtype=np.int8)
    place[in_order] = np.arange(16)
    return pd.Categorical.from_codes(place[code], pd.Index([texts[c] for c in in_order], dtype="str"))
