"""What the triage screen shows, without Textual: loaded snapshots, per-expiry
slices, the strike filter, the expiry header figures and the confidence levels.

The numbers all come from ``chaintriage.core`` (the annotated tables, the
distribution, ``range_flat`` / ``range_smile``); this module only slices,
filters and caches them. Units: prices in price units, vols and
probabilities as decimals, sigma distance in sigmas, time in years.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from typing import Any, Callable, Iterable, Sequence

import numpy as np
import pandas as pd

from chaintriage.core.confidence import DEFAULT_CONFIDENCE
from chaintriage.core.distribution import range_flat, range_smile
from chaintriage.core.findings import ChainTriageError, Finding
from chaintriage.core.pipeline import AnnotatedSnapshot
from chaintriage.core.targets import Target, TargetSelector, target_mask

from . import formatting as fm
from .ladder_columns import TOUCH_FIELDS, TOUCH_PENDING

#: The confidence levels the range cycles through (two-sided, decimals).
CONFIDENCE_LEVELS: tuple[float, ...] = (DEFAULT_CONFIDENCE, 0.80, 0.90, 0.95, 0.99)


def step_confidence(current: float, step: int) -> float:
    """The level ``step`` places up (+1) or down (-1) from ``current`` in CONFIDENCE_LEVELS,
    stopping at the ends. A level not in the list moves to its nearest neighbour that way."""
    levels = CONFIDENCE_LEVELS
    if step > 0:
        higher = [c for c in levels if c > current + 1e-9]
        return higher[0] if higher else levels[-1]
    if step < 0:
        lower = [c for c in levels if c < current - 1e-9]
        return lower[-1] if lower else levels[0]
    return current


def fmt_confidence(c: float) -> str:
    """0.682689 -> "68.27%", 0.9 -> "90%"."""
    text = f"{100 * c:.2f}".rstrip("0").rstrip(".")
    return text + "%"


# ---------------------------------------------------------------- the strike filter


@dataclass(frozen=True)
class StrikeFilter:
    """Which strikes the ladder shows.

    ``sigma`` (sigmas, >= 0): a call qualifies when its sigma distance is >= sigma
    (above the forward), a put when <= -sigma (below it), i.e. out of the money
    by at least that many sigmas. ``delta`` and ``beyond``: (low, high) ranges
    of |delta| and P(beyond) (decimals; either end None for open). ``side``:
    'calls', 'puts' or 'both' (which contracts can qualify). These targets are
    core's predicate (``core.targets.target_mask``). ``max_spread`` (decimal
    of mid, e.g. 0.2) and ``min_open_interest`` (contracts) are liquidity
    limits; a missing spread, open interest or measure fails a limit that is
    set. A strike row stays when either of its contracts qualifies. ``None``
    means "no limit".
    """

    sigma: float | None = None
    max_spread: float | None = None
    min_open_interest: float | None = None
    delta: tuple[float | None, float | None] | None = None
    beyond: tuple[float | None, float | None] | None = None
    side: str = "both"

    @property
    def active(self) -> bool:
        return not (self.sigma is None and self.max_spread is None and self.min_open_interest is None
                    and self.delta is None and self.beyond is None and self.side == "both")

    def qualifies(self, frame: pd.DataFrame) -> np.ndarray:
        """Boolean per contract (row of ``frame``): does it pass every limit that is set."""
        n = len(frame)
        ok = np.ones(n, dtype=bool)
        if not n:
            return ok
        ok &= target_mask(frame, sigma=self.sigma, delta=self.delta, beyond=self.beyond, side=self.side)
        if self.max_spread is not None:
            s = frame["spread_pct"].to_numpy(dtype=float)
            with np.errstate(invalid="ignore"):
                ok &= s <= self.max_spread + 1e-12
        if self.min_open_interest is not None:
            oi = frame["open_interest"].to_numpy(dtype=float)
            with np.errstate(invalid="ignore"):
                ok &= oi >= self.min_open_interest
        if self.has_limits and self.side == "both":  # one side chosen: its contracts are the ones read
            ok &= self.read_side(frame)
        return ok

    @property
    def has_limits(self) -> bool:
        """True when a liquidity limit (spread, open interest) is set."""
        return self.max_spread is not None or self.min_open_interest is not None

    @staticmethod
    def read_side(frame: pd.DataFrame) -> np.ndarray:
        """Boolean per contract: is it on the side a trader reads at its strike, the out-of-the-money
        one (calls above the forward, puts below)? A liquidity limit is tested on that side only:
        the in-the-money contract at the same strike meeting it says nothing about the one traded."""
        if "otm" in frame.columns:
            try:
                return frame["otm"].astype("boolean").fillna(False).to_numpy(dtype=bool)
            except (TypeError, ValueError):
                pass
        z = frame["sigma_distance"].to_numpy(dtype=float)
        is_call = (frame["kind"] == "call").to_numpy()
        with np.errstate(invalid="ignore"):
            return np.where(is_call, z > 0, z < 0)

    def apply(self, frame: pd.DataFrame) -> tuple[pd.DataFrame, int]:
        """(the contracts of the strikes that stay, how many strikes were hidden)."""
        if not self.active or frame.empty:
            return frame, 0
        strikes = frame["strike"].to_numpy(dtype=float)
        keep_strikes = np.unique(strikes[self.qualifies(frame)])
        keep = np.isin(strikes, keep_strikes)
        hidden = int(np.unique(strikes).size - keep_strikes.size)
        return frame[keep], hidden

    def describe(self, ascii_only: bool = False) -> str:
        """Plain words for the filter bar, e.g. "|σ| ≥ 1.5 out of the money · spread ≤ 20% · OI ≥ 100"."""
        if not self.active:
            return "off"
        sig = fm.SIGMA_ASCII if ascii_only else fm.SIGMA
        ge = ">=" if ascii_only else "≥"
        le = "<=" if ascii_only else "≤"
        parts = []
        if self.side != "both":
            parts.append(f"{self.side} only")
        if self.sigma is not None:
            parts.append(f"{_num(self.sigma)}{sig} or more out of the money")
        if self.delta is not None:
            parts.append(_range_words("|delta|" if ascii_only else "|Δ|", self.delta, 1.0, "", ascii_only))
        if self.beyond is not None:
            parts.append(_range_words("P(beyond)", self.beyond, 100.0, "%", ascii_only))
        if self.max_spread is not None:
            parts.append(f"spread {le} {_num(100 * self.max_spread)}%")
        if self.min_open_interest is not None:
            parts.append(f"OI {ge} {fm.fmt_count(self.min_open_interest)}")
        if self.has_limits:
            parts.append("limits tested on the out-of-the-money side" if self.side == "both"
                         else f"limits tested on the {self.side}")
        return " · ".join(parts) if not ascii_only else " / ".join(parts)

    @classmethod
    def parse(cls, sigma: str = "", max_spread: str = "", min_open_interest: str = "", *,
              delta: str = "", beyond: str = "", side: str = "both") -> "StrikeFilter":
        """A filter from what the user typed (blank = no limit; the spread in percent, "%" allowed).

        ``delta`` is an |delta| range as decimals, ``beyond`` a P(beyond) range
        in percent ("%" allowed): "LOW-HIGH", "LOW-" (at least) or "-HIGH" (at
        most), a single number meaning at least. ``side``: calls, puts or both.
        Raises ChainTriageError with a message naming the field when a value is unusable.
        """
        side = (side or "both").strip().lower()
        if side not in ("calls", "puts", "both"):
            raise ChainTriageError(f"side: {fm.clean_text(side)!r} is not calls, puts or both")
        spread = (max_spread or "").strip()
        spread = spread[:-1] if spread.endswith("%") else spread
        return cls(
            sigma=_parse_number(sigma, "sigmas", limit=SIGMA_LIMIT),
            max_spread=None if (v := _parse_number(spread, "max spread", limit=SPREAD_LIMIT_PCT)) is None
            else v / 100.0,
            min_open_interest=_parse_number(min_open_interest, "min open interest", limit=OPEN_INTEREST_LIMIT,
                                            thousands=True),
            delta=_parse_range(delta, "|delta|", 1.0),
            beyond=_parse_range(beyond, "P(beyond) %", 100.0),
            side=side,
        )


#: Largest values the filter dialog takes: no strike lies 50 sigmas out, a spread of 1000 % of mid is no
#: limit, and no contract has a billion open.
SIGMA_LIMIT = 50.0
SPREAD_LIMIT_PCT = 1000.0
OPEN_INTEREST_LIMIT = 1e9

#: What the dialog takes: digits with at most one decimal point (no sign, exponent, "_" or separators).
_PLAIN_NUMBER = re.compile(r"\+?(?:\d+(?:\.\d*)?|\.\d+)")


def _num(x: float) -> str:
    return fm.tidy_zero(f"{x:.2f}".rstrip("0").rstrip("."))


def _range_words(label: str, bounds: tuple[float | None, float | None], scale: float, unit: str,
                 ascii_only: bool) -> str:
    low, high = bounds
    ge, le = (">=", "<=") if ascii_only else ("≥", "≤")
    if low is not None and high is not None:
        return f"{label} {_num(scale * low)}{unit} to {_num(scale * high)}{unit}"
    if low is not None:
        return f"{label} {ge} {_num(scale * low)}{unit}"
    if high is not None:
        return f"{label} {le} {_num(scale * high)}{unit}"
    return f"{label} known"


def _parse_range(text: str, what: str, scale: float) -> tuple[float | None, float | None] | None:
    """(low, high) in decimals from "LOW-HIGH", "LOW-", "-HIGH" or "LOW" typed in units of 1/scale."""
    text = (text or "").strip().replace("%", "")
    if not text:
        return None
    low_text, sep, high_text = text.partition("-")
    if not sep:
        high_text = ""
    low = _parse_number(low_text, what, limit=scale)
    high = _parse_number(high_text, what, limit=scale)
    if low is None and high is None:
        raise ChainTriageError(f"{what}: give LOW-HIGH, LOW- or -HIGH")
    low = None if low is None else low / scale
    high = None if high is None else high / scale
    for value in (low, high):
        if value is not None and value > 1.0:
            raise ChainTriageError(f"{what}: a value above {_num(scale)} is out of range")
    if low is not None and high is not None and low > high:
        raise ChainTriageError(f"{what}: the low end is above the high end")
    return low, high


_THOUSANDS = re.compile(r"\+?\d{1,3}(?:,\d{3})+")


def _parse_number(text: str, what: str, *, limit: float, thousands: bool = False) -> float | None:
    """A typed limit: blank gives None; a plain decimal from 0 to ``limit``, else ChainTriageError.

    With ``thousands`` (a count) commas are taken as thousands separators in whole groups ("1,000").
    """
    text = (text or "").strip()
    if not text:
        return None
    shown = fm.clean_text(text)[:20]
    if thousands and _THOUSANDS.fullmatch(text):
        text = text.replace(",", "")
    if "," in text:
        raise ChainTriageError(f"{what}: {shown!r} has a comma; write decimals with a point and no "
                               "thousands separators (1.5, 1000)")
    if text.startswith("-"):
        raise ChainTriageError(f"{what}: give a number of zero or more")
    if not _PLAIN_NUMBER.fullmatch(text):
        raise ChainTriageError(f"{what}: {shown!r} is not a number (digits and one point, e.g. 1.5)")
    value = float(text)
    if value > limit:
        raise ChainTriageError(f"{what}: at most {_num(limit) if limit < 1e6 else f'{limit:,.0f}'}")
    return value + 0.0


# ---------------------------------------------------------------- one expiry's header


@dataclass(frozen=True)
class ExpiryInfo:
    """The figures of the expiry header (NaN where core had none).

    ``range_plain`` and ``range_smile`` are (low, high) in price units at ``confidence``;
    ``fit_rmse`` in decimal vol (0.01 = 1 vol point); ``sigma_sqrt_t`` = atm_iv*sqrt(t_years).
    """

    expiry: pd.Timestamp
    index: int
    count: int
    t_years: float
    trading_days: int | None
    calendar_days: int | None
    forward: float
    forward_method: str
    atm_iv: float
    confidence: float
    range_plain: tuple[float, float]
    range_smile: tuple[float, float]
    fit_rmse: float
    fit_method: str
    arbitrage_free: bool | None
    findings: tuple[Finding, ...] = ()
    #: Names of the scheduled events this expiry carries ("" when none) and the vol of its ordinary
    #: days with their variance taken out (decimal; NaN without events).
    events: str = ""
    ex_event_vol: float = math.nan
    #: With a price history: the realised-vol window matched to the expiry (trading days), the
    #: realised vol over it (decimal) and ATM IV / that vol; None / NaN without one.
    hist_window: int | None = None
    hist_vol: float = math.nan
    iv_rv: float = math.nan
    #: True when the ranges are on the ex-event vol (the ``n`` toggle) for an expiry that carries events.
    ex_event_ranges: bool = False
    #: True when the ex-event view is on (whether or not this expiry carries an event).
    ex_event_asked: bool = False

    @property
    def sigma_sqrt_t(self) -> float:
        if math.isfinite(self.atm_iv) and math.isfinite(self.t_years) and self.t_years > 0:
            return self.atm_iv * math.sqrt(self.t_years)
        return math.nan


def _int_or_none(value: Any) -> int | None:
    x = fm.as_finite(value)
    return None if x is None else int(round(x))


def _float(value: Any) -> float:
    x = fm.as_finite(value)
    return math.nan if x is None else x


# ---------------------------------------------------------------- one loaded snapshot

#: In the ex-event view's frames, the market's P(beyond) kept beside the ex-event one.
MARKET_P_BEYOND = "p_beyond_market"


def market_figures(contract: dict[str, Any] | None) -> dict[str, Any] | None:
    """A ladder row with the market's P(beyond) back in place (rows of the ex-event view carry both):
    what is copied or shortlisted is always the market's figure."""
    if contract is None or MARKET_P_BEYOND not in contract:
        return contract
    out = dict(contract)
    out["p_beyond"] = out.pop(MARKET_P_BEYOND)
    return out



class SnapshotView:
    """One annotated snapshot, sliced per expiry, with caches for what the screen asks again.

    ``file_findings`` are loader findings about this snapshot's files that name no
    underlying (they still belong on its findings list).
    """

    def __init__(self, annotated: AnnotatedSnapshot, file_findings: Iterable[Finding] = ()) -> None:
        self.annotated = annotated
        self.snapshot = annotated.snapshot
        contracts = annotated.contracts
        exp_table = annotated.expiries.reset_index(drop=True)
        self.expiry_table = exp_table
        self.expiries: list[pd.Timestamp] = [pd.Timestamp(e) for e in exp_table["expiry"]]
        # The contracts table is sorted by expiry: one contiguous slice per expiry.
        values = contracts["expiry"].to_numpy(dtype="datetime64[ns]")
        self._bounds: dict[pd.Timestamp, tuple[int, int]] = {}
        for e in self.expiries:
            v = np.datetime64(e.to_datetime64(), "ns")
            lo = int(np.searchsorted(values, v, side="left"))
            hi = int(np.searchsorted(values, v, side="right"))
            self._bounds[e] = (lo, hi)
        if len(values) > 1 and np.any(values[1:] < values[:-1]):  # not sorted: slice by mask instead
            self._bounds = {}
        self._frames: dict[pd.Timestamp, pd.DataFrame] = {}
        self._dists: dict[pd.Timestamp, Any] = {}
        self._ranges: dict[tuple[pd.Timestamp, float], tuple[tuple[float, float], tuple[float, float]]] = {}
        self._infos: dict[tuple[int, float], ExpiryInfo] = {}
        self._header_infos: tuple[int, list[ExpiryInfo]] | None = None
        self._file_findings = list(file_findings)
        self._events: list = []
        self._term: Any = None
        self._findings: Any = None
        self._findings_key = -1
        self._groups: Any = None
        self._target_selector: TargetSelector | None = None
        self._strike_width: int | None = None
        #: The price history's figures (``history_view.ViewHistory``), once the loading job has them.
        self.history: Any = None
        #: When set, ``frame`` does not compute an expiry's touch figures: it marks them pending
        #: (``TOUCH_PENDING`` in the frame's attrs) and calls ``touch_later(self, expiry)``; the
        #: figures come back through ``touch_arrived`` (``touch_jobs``: computed off the screen's thread).
        self.touch_later: Callable[[SnapshotView, pd.Timestamp], None] | None = None
        self._touch_here: set[pd.Timestamp] = set()  # the background computation failed: compute here
        #: True for the view of a chain's first expiry alone, shown while the other expiries are computed
        #: (the whole chain's view takes its place; the price history goes to that one).
        self.partial = False

    # --- labels

    @property
    def underlying(self) -> str:
        return fm.clean_text(self.snapshot.underlying)

    @property
    def label(self) -> str:
        """e.g. "QRTZ 2026-12-01 14:30 -05:00" (control characters removed)."""
        return f"{self.underlying} {fm.fmt_timestamp(self.snapshot.as_of)}"

    def __len__(self) -> int:
        return len(self.annotated.contracts)

    # --- per expiry

    def frame(self, expiry: pd.Timestamp) -> pd.DataFrame:
        """The contracts of one expiry (both kinds, sorted by strike)."""
        expiry = pd.Timestamp(expiry)
        cached = self._frames.get(expiry)
        if cached is not None and not (TOUCH_PENDING in cached.attrs and expiry in self.annotated.touched):
            return cached  # (a pending frame whose figures were computed elsewhere meanwhile is made again)
        pending = self.touch_pending(expiry)
        if not pending:
            self.annotated.touch(expiry)  # touch figures are computed per expiry on demand, once
        contracts = self.annotated.contracts
        if expiry in self._bounds:
            lo, hi = self._bounds[expiry]
            out = contracts.iloc[lo:hi]
        else:
            out = contracts[contracts["expiry"] == expiry]
        if self.history is not None:
            out = self._with_history_columns(out)
        if pending:
            out.attrs = {**out.attrs, TOUCH_PENDING: TOUCH_FIELDS}
        self._frames[expiry] = out
        if pending:
            self.touch_later(self, expiry)
        return out

    def touch_pending(self, expiry: pd.Timestamp) -> bool:
        """Whether ``expiry``'s touch figures are being computed elsewhere (see ``touch_later``)."""
        return self.touch_later is not None and expiry not in self._touch_here and \
            self.annotated.needs_touch(expiry)

    def touch_arrived(self, computed: dict) -> None:
        """Write touch figures computed elsewhere (expiry -> ``ExpiryTouch``; None: it failed there, so
        ``frame`` computes it here) and forget the frames that showed them pending."""
        failed = [pd.Timestamp(e) for e, got in computed.items() if got is None]
        self._touch_here.update(failed)
        self.annotated.apply_touch({e: got for e, got in computed.items() if got is not None})
        for e in computed:
            e = pd.Timestamp(e)
            self._frames.pop(e, None)
            self._frames.pop(("ex_event", e), None)  # type: ignore[call-overload]
        self._infos.clear()  # the expiry's findings may have grown

    #: Per-contract history columns the ladder can show (``core.history_compare.HISTORY_CONTRACT_COLUMNS``).
    HISTORY_FIELDS = ("hist_p_beyond", "hist_p_touch", "boot_p_beyond", "boot_p_beyond_se", "boot_p_touch")

    def _with_history_columns(self, frame: pd.DataFrame) -> pd.DataFrame:
        """``frame`` with the history columns (same rows: core's comparison keeps the contracts' index)."""
        hist = self.history.comparison.contracts
        try:
            part = hist.loc[frame.index, list(self.HISTORY_FIELDS)]
        except KeyError:
            return frame
        out = frame.copy()
        for c in self.HISTORY_FIELDS:
            out[c] = part[c].to_numpy()
        return out

    def set_history(self, history: Any, findings: Sequence[Finding] = ()) -> None:
        """Attach the price history's figures (``history_view.ViewHistory`` or None) and the findings of
        the history files about this underlying (they join the snapshot's findings)."""
        self.history = history
        self._file_findings.extend(findings)
        self._findings = None
        self._groups = None
        self._frames.clear()
        self._infos.clear()

    def expiry_index(self, expiry: Any) -> int | None:
        try:
            return self.expiries.index(pd.Timestamp(expiry))
        except (ValueError, TypeError):
            return None

    def nearest_expiry_index(self, expiry: Any) -> int:
        """Index of ``expiry``, else of the nearest expiry in time, else 0."""
        if not self.expiries:
            return 0
        try:
            target = pd.Timestamp(expiry)
        except (TypeError, ValueError):
            return 0
        gaps = [abs((e - target).total_seconds()) for e in self.expiries]
        return int(np.argmin(gaps))

    def strike_width(self) -> int:
        """Cells of the ladder's strike column that every expiry's strikes fit in (cached)."""
        if self._strike_width is None:
            self._strike_width = fm.strike_column_width(
                pd.to_numeric(self.annotated.contracts["strike"], errors="coerce").to_numpy(dtype=float))
        return self._strike_width

    def distribution(self, expiry: pd.Timestamp):
        """core's terminal Distribution of one expiry (None when there is none); cached."""
        expiry = pd.Timestamp(expiry)
        if expiry not in self._dists:
            try:
                self._dists[expiry] = self.annotated.distribution(expiry)
            except (ChainTriageError, ValueError, FloatingPointError):
                self._dists[expiry] = None
        return self._dists[expiry]

    def ranges(self, expiry: pd.Timestamp, confidence: float) -> tuple[tuple[float, float], tuple[float, float]]:
        """((plain low, high), (smile low, high)) at ``confidence``, price units; NaN when unknown."""
        expiry = pd.Timestamp(expiry)
        key = (expiry, round(float(confidence), 6))
        if key in self._ranges:
            return self._ranges[key]
        nan2 = (math.nan, math.nan)
        plain, smile_band = nan2, nan2
        res = self.annotated.results.get(expiry)
        if res is not None:
            f, iv, t = _float(res.forward), _float(res.atm_iv), _float(res.t_years)
            if f > 0 and iv > 0 and t > 0:
                lo, hi = range_flat(f, iv, t, confidence)
                plain = (_float(lo), _float(hi))
            if res.smile is not None and f > 0:
                try:
                    lo, hi = range_smile(res.smile, f, confidence)
                    smile_band = (_float(lo), _float(hi))
                except (ChainTriageError, ValueError, FloatingPointError):
                    smile_band = nan2
        self._ranges[key] = (plain, smile_band)
        return plain, smile_band

    def info(self, index: int, confidence: float, ex_event: bool = False) -> ExpiryInfo:
        """The header figures of expiry number ``index`` (0-based) at ``confidence``; cached.

        ``ex_event``: for an expiry that carries events, the ranges on its ex-event vol.
        """
        key = (int(index), round(float(confidence), 6), bool(ex_event))
        cached = self._infos.get(key)
        if cached is not None:
            return cached
        info = self._info(index, confidence)
        if ex_event:
            import dataclasses

            info = dataclasses.replace(info, ex_event_asked=True)
        if ex_event and info.events and math.isfinite(info.ex_event_vol):
            import dataclasses

            from chaintriage.core.ex_event_odds import ex_event_range

            lo, hi = ex_event_range(info.forward, info.t_years, info.ex_event_vol, confidence)
            info = dataclasses.replace(info, range_plain=(_float(lo), _float(hi)), range_smile=(math.nan, math.nan),
                                       ex_event_ranges=True)
        self._infos[key] = info
        return info

    def ex_event_frame(self, expiry: pd.Timestamp) -> pd.DataFrame:
        """``frame(expiry)`` with P(beyond) on the expiry's ex-event vol (core.ex_event_odds) when it
        carries events; the frame as it is otherwise. Cached."""
        expiry = pd.Timestamp(expiry)
        key = ("ex_event", expiry)
        cached = self._frames.get(key)  # type: ignore[call-overload]
        if cached is not None:
            return cached
        frame = self.frame(expiry)
        index = self.expiry_index(expiry)
        names, ex_vol = self._event_marks(index) if index is not None else ("", math.nan)
        if names and math.isfinite(ex_vol) and len(frame):
            from chaintriage.core.ex_event_odds import ex_event_p_beyond

            row = self.expiry_table.iloc[index]
            out = frame.copy()
            out[MARKET_P_BEYOND] = frame["p_beyond"]
            out["p_beyond"] = ex_event_p_beyond(_float(row.get("forward")), frame["strike"].to_numpy(dtype=float),
                                                (frame["kind"] == "call").to_numpy(), _float(row.get("t_years")),
                                                ex_vol)
            frame = out
        self._frames[key] = frame  # type: ignore[index]
        return frame

    # --- scheduled events

    def set_events(self, events) -> None:
        """Scheduled events (``core.events.Event``, any underlying): the header marks the expiries that carry one."""
        events = list(events)
        if events == self._events:
            return  # already set (e.g. by the loading worker): keep what was computed
        self._events = events
        self._term = None
        self._infos.clear()
        for key in [k for k in self._frames if isinstance(k, tuple)]:
            del self._frames[key]
        self._header_infos = None

    def term_structure(self):
        """core's term structure of this snapshot with its events (``core.term_structure.TermStructure``); cached."""
        if self._term is None:
            from chaintriage.core.term_structure import snapshot_term_structure

            self._term = snapshot_term_structure(self.annotated, self._events)
        return self._term

    def event_names(self, index: int) -> str:
        """Names of the scheduled events expiry number ``index`` carries (settles after), "" for none."""
        return self._event_marks(index)[0]

    def _event_marks(self, index: int) -> tuple[str, float]:
        """(names of the events expiry ``index`` carries, its ex-event vol); ("", NaN) without events."""
        if not self._events:
            return "", math.nan
        table = self.term_structure().table
        hit = table.index[pd.DatetimeIndex(table["expiry"]) == self.expiries[index]]
        if not len(hit):
            return "", math.nan
        row = table.loc[hit[0]]
        names = str(row["events"] or "")
        return names, _float(row["ex_event_vol"]) if names else math.nan

    def _info(self, index: int, confidence: float) -> ExpiryInfo:
        row = self.expiry_table.iloc[index]
        expiry = self.expiries[index]
        res = self.annotated.results.get(expiry)
        plain, smile_band = self.ranges(expiry, confidence)
        arb = row.get("arbitrage_free")
        fit_method = str(row.get("fit_method") or "")
        events, ex_event_vol = self._event_marks(index)
        window, rv, iv_rv = self.history.expiry_figures(index) if self.history is not None else (None, math.nan,
                                                                                                  math.nan)
        return ExpiryInfo(
            expiry=expiry, index=index, count=len(self.expiries),
            t_years=_float(row.get("t_years")),
            trading_days=_int_or_none(row.get("trading_days")),
            calendar_days=_int_or_none(row.get("calendar_days")),
            forward=_float(row.get("forward")),
            forward_method=str(row.get("forward_method") or ""),
            atm_iv=_float(row.get("atm_iv")),
            confidence=float(confidence),
            range_plain=plain, range_smile=smile_band,
            fit_rmse=_float(row.get("fit_rmse")),
            fit_method=fit_method,
            arbitrage_free=bool(arb) if fit_method else None,
            findings=tuple(res.findings) if res is not None else (),
            events=events, ex_event_vol=ex_event_vol,
            hist_window=window, hist_vol=rv, iv_rv=iv_rv,
        )

    # --- targets

    def targets(self, target: Target, shift: int = 0) -> pd.DataFrame:
        """core's per-expiry target table (``core.targets.TARGET_TABLE_COLUMNS``) for this snapshot.

        The selector (each side's contracts grouped by expiry and strike) is
        kept, so a change of target costs a few array passes. ``row`` columns
        are positions in ``annotated.contracts``.
        """
        if self._target_selector is None:
            self._target_selector = TargetSelector(self.annotated.contracts, self.annotated.expiries)
        return self._target_selector.select(target, shift)

    def header_infos(self) -> list[ExpiryInfo]:
        """Every expiry's header figures without its ranges (NaN: the shown expiry's ranges stand in
        for them), for sizing the header once for the whole snapshot; cached, made again only when
        computing touch figures has added findings to an expiry."""
        key = sum(len(res.findings) for res in self.annotated.results.values())
        if self._header_infos is not None and self._header_infos[0] == key:
            return self._header_infos[1]
        table = self.expiry_table
        column = {name: table[name].tolist() if name in table.columns else [None] * len(table)
                  for name in ("trading_days", "calendar_days", "forward", "forward_method", "atm_iv",
                               "fit_rmse", "fit_method", "arbitrage_free", "t_years")}
        nan2 = (math.nan, math.nan)
        out = []
        for i, expiry in enumerate(self.expiries):
            res = self.annotated.results.get(expiry)
            fit_method = str(column["fit_method"][i] or "")
            events, ex_event_vol = self._event_marks(i)
            out.append(ExpiryInfo(
                expiry=expiry, index=i, count=len(self.expiries), t_years=_float(column["t_years"][i]),
                trading_days=_int_or_none(column["trading_days"][i]),
                calendar_days=_int_or_none(column["calendar_days"][i]),
                forward=_float(column["forward"][i]), forward_method=str(column["forward_method"][i] or ""),
                atm_iv=_float(column["atm_iv"][i]), confidence=math.nan, range_plain=nan2, range_smile=nan2,
                fit_rmse=_float(column["fit_rmse"][i]), fit_method=fit_method,
                arbitrage_free=bool(column["arbitrage_free"][i]) if fit_method else None,
                findings=tuple(res.findings) if res is not None else (),
                events=events, ex_event_vol=ex_event_vol))
        self._header_infos = (key, out)
        return out

    # --- findings

    def findings(self):
        """The loader's findings about this snapshot, then the pipeline's (a ``core.finding_table.FindingTable``).

        The loader's come as a table (no object per finding); the few others are added once each.
        """
        from chaintriage.core.finding_table import FindingTable

        key = len(self.annotated.findings)  # touch figures computed on demand add findings
        if self._findings is None or self._findings_key != key:
            self._findings_key = key
            self._groups = None
            seen: set[Finding] = set()
            extra: list[Finding] = []
            for f in list(self._file_findings) + list(self.annotated.findings):
                if f not in seen:
                    seen.add(f)
                    extra.append(f)
            self._findings = FindingTable.concat([FindingTable.of(self.snapshot.findings), extra])
        return self._findings

    def finding_groups(self):
        """``findings()`` grouped per file, underlying, expiry, column and reason (``FindingGroup``); cached."""
        table = self.findings()
        if self._groups is None:
            self._groups = table.groups()
        return self._groups


def file_findings_without_underlying(findings: Sequence[Finding], sources: Sequence[str]) -> list[Finding]:
    """Loader findings from ``sources`` that name no underlying (e.g. a row whose underlying was blank)."""
    from chaintriage.core.finding_table import FindingTable

    wanted = set(sources)
    if isinstance(findings, FindingTable):  # only the few without an underlying become objects
        findings = findings.take(np.flatnonzero(pd.isna(findings.underlying)))
    return [f for f in findings if f.underlying is None and f.file in wanted]
