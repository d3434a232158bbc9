"""Targeting strikes by how far out they are: a sigma distance, an |delta| or a P(beyond).

Three measures of "how far out" per contract of the annotated contract table
(core/pipeline.py), each growing the further out of the money it is:

- ``sigma``: sigmas out of the money, the sigma distance counted in the
  payoff direction (``sigma_distance`` for a call, ``-sigma_distance`` for a
  put; negative in the money);
- ``delta``: |delta| (0..1 times the discount and carry factor), falling as a
  contract moves out;
- ``beyond``: P(beyond), the chance of finishing beyond the strike (0..1).

:func:`target_mask` is the predicate of the strike filter (any combination of
a minimum sigma distance out of the money, an |delta| range and a P(beyond)
range, on calls, puts or both). :func:`select_targets` gives, per expiry, the
contract of one side nearest a target value and its neighbouring strikes:
one row per expiry of the snapshot, vectorised over contracts (sorting and
grouped minima; the only per-expiry work is in numpy's reductions).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pandas as pd

from .findings import ChainTriageError

#: Target measures and what each reads.
MEASURES = ("sigma", "delta", "beyond")
#: Sides a target looks at.
SIDES = ("calls", "puts")

#: Columns of the per-expiry target table, in order. ``row``, ``row_below`` and ``row_above``
#: are positions (iloc) in the contract table (-1 where there is none); ``measure`` is the
#: chosen contract's value of the target measure and ``miss`` = measure - target.
TARGET_TABLE_COLUMNS = [
    "expiry", "calendar_days", "trading_days", "strike", "strike_below", "strike_above",
    "bid", "ask", "mid", "iv", "sigma_distance", "delta", "p_beyond", "p_touch",
    "p_profit_sell", "p_profit_buy", "premium_per_day_sell", "return_sell", "return_sell_annual",
    "spread_pct", "open_interest", "flags", "measure", "miss", "row", "row_below", "row_above",
]

#: Contract-table columns copied into the target table for the chosen contract.
_COPIED = ["strike", "bid", "ask", "mid", "iv", "sigma_distance", "delta", "p_beyond", "p_touch",
           "p_profit_sell", "p_profit_buy", "premium_per_day_sell", "return_sell", "return_sell_annual",
           "spread_pct", "open_interest"]


@dataclass(frozen=True)
class Target:
    """A side and a value of one measure: e.g. Target("puts", "sigma", 1.5), Target("calls", "delta", 0.16).

    ``value``: sigmas out of the money for ``sigma`` (any finite number; below
    zero is in the money), a decimal in (0, 1) for ``delta`` and ``beyond``.
    Raises ChainTriageError on an unknown side or measure or an unusable value.
    """

    side: str
    measure: str
    value: float

    def __post_init__(self) -> None:
        if self.side not in SIDES:
            raise ChainTriageError(f"side must be one of {', '.join(SIDES)}, not {self.side!r}")
        if self.measure not in MEASURES:
            raise ChainTriageError(f"target must be one of {', '.join(MEASURES)}, not {self.measure!r}")
        try:
            value = float(self.value)
        except (TypeError, ValueError):
            raise ChainTriageError(f"{self.measure} target is not a number: {self.value!r}") from None
        if not math.isfinite(value):
            raise ChainTriageError(f"{self.measure} target must be a finite number")
        if self.measure != "sigma" and not 0.0 < value < 1.0:
            raise ChainTriageError(f"{self.measure} target must be between 0 and 1 (a decimal), got {value:g}")
        object.__setattr__(self, "value", value)


def measure(contracts: pd.DataFrame, which: str, is_call: np.ndarray | None = None) -> np.ndarray:
    """The target measure per contract (see the module docstring); NaN where unknown.

    ``is_call``: the contracts' kind == 'call' when the caller has it already.
    """
    if which == "sigma":
        z = contracts["sigma_distance"].to_numpy(dtype=float)
        return np.where(_is_call(contracts) if is_call is None else is_call, z, -z)
    if which == "delta":
        return np.abs(contracts["delta"].to_numpy(dtype=float))
    if which == "beyond":
        return contracts["p_beyond"].to_numpy(dtype=float)
    raise ChainTriageError(f"target must be one of {', '.join(MEASURES)}, not {which!r}")


def _is_call(contracts: pd.DataFrame) -> np.ndarray:
    return (contracts["kind"] == "call").to_numpy(dtype=bool, na_value=False)


def _is_put(contracts: pd.DataFrame) -> np.ndarray:
    return (contracts["kind"] == "put").to_numpy(dtype=bool, na_value=False)


def target_mask(contracts: pd.DataFrame, *, sigma: float | None = None,
                delta: tuple[float | None, float | None] | None = None,
                beyond: tuple[float | None, float | None] | None = None,
                side: str = "both") -> np.ndarray:
    """Boolean per contract: does it meet every limit that is set.

    ``sigma``: at least this many sigmas out of the money (calls at or above
    F + sigma, puts at or below). ``delta``: (low, high) bounds on |delta|,
    either end None for open. ``beyond``: (low, high) bounds on P(beyond).
    ``side``: 'calls', 'puts' or 'both' (the other side never qualifies).
    A contract whose measure is missing fails a limit that is set.
    """
    n = len(contracts)
    ok = np.ones(n, dtype=bool)
    if not n:
        return ok
    if side == "calls":
        ok &= _is_call(contracts)
    elif side == "puts":
        ok &= _is_put(contracts)
    elif side != "both":
        raise ChainTriageError(f"side must be calls, puts or both, not {side!r}")
    with np.errstate(invalid="ignore"):
        if sigma is not None:
            ok &= measure(contracts, "sigma") >= sigma - 1e-12
        for name, bounds in (("delta", delta), ("beyond", beyond)):
            if bounds is None:
                continue
            low, high = bounds
            values = measure(contracts, name)
            if low is not None:
                ok &= values >= low - 1e-12
            if high is not None:
                ok &= values <= high + 1e-12
            if low is None and high is None:
                ok &= np.isfinite(values)
    return ok


def select_targets(contracts: pd.DataFrame, expiries: pd.DataFrame, target: Target, shift: int = 0) -> pd.DataFrame:
    """One row per expiry: the ``target.side`` contract nearest the target, and its neighbours.

    A one-off :meth:`TargetSelector.select`; a screen that changes the target
    often keeps one ``TargetSelector`` per snapshot instead.
    """
    return TargetSelector(contracts, expiries).select(target, shift)


class TargetSelector:
    """Per-expiry target selection over one annotated snapshot.

    ``contracts`` and ``expiries`` are the pipeline's tables (columns as
    CONTRACT_TABLE_COLUMNS and EXPIRY_TABLE_COLUMNS). The grouping of each
    side's contracts by expiry and strike is worked out once per side and
    kept; :meth:`select` then costs a few array passes per target change.
    """

    def __init__(self, contracts: pd.DataFrame, expiries: pd.DataFrame) -> None:
        self.contracts = contracts
        self.expiries = expiries
        self._exp_values = pd.DatetimeIndex(expiries["expiry"]).to_numpy(dtype="datetime64[ns]")
        self._is_call = _is_call(contracts)
        self._strikes = contracts["strike"].to_numpy(dtype=float)
        self._groups: dict[str, tuple] = {}
        self._measures: dict[str, np.ndarray] = {}
        self._columns: dict[str, np.ndarray] = {}

    def _column(self, name: str) -> np.ndarray:
        got = self._columns.get(name)
        if got is None:
            values = self.contracts[name]
            got = self._columns[name] = (values.to_numpy(dtype=object, na_value="") if name == "flags"
                                         else values.to_numpy(dtype=float))
        return got

    def _side_groups(self, side: str):
        """(rows sorted by expiry then strike, their expiry number, group starts, group ends, group expiry)."""
        got = self._groups.get(side)
        if got is not None:
            return got
        exp_values = self._exp_values
        n_exp = exp_values.size
        rows = np.flatnonzero(self._is_call if side == "calls" else _is_put(self.contracts))
        c_exp = self.contracts["expiry"].to_numpy(dtype="datetime64[ns]")[rows]
        exp_order = np.argsort(exp_values, kind="stable")
        if rows.size and n_exp:
            pos = np.minimum(np.searchsorted(exp_values[exp_order], c_exp), n_exp - 1)
            known = exp_values[exp_order][pos] == c_exp
            rows, code = rows[known], exp_order[pos[known]]
        else:
            rows, code = rows[:0], np.zeros(0, dtype=np.int64)
        order = np.lexsort((self._strikes[rows], code))
        rows, code = rows[order], code[order]
        new = np.ones(rows.size, dtype=bool)
        new[1:] = code[1:] != code[:-1]
        starts = np.flatnonzero(new)
        ends = np.append(starts[1:], rows.size)
        got = self._groups[side] = (rows, np.cumsum(new) - 1, starts, ends, code[starts])
        return got

    def _measure(self, which: str) -> np.ndarray:
        got = self._measures.get(which)
        if got is None:
            got = self._measures[which] = measure(self.contracts, which, self._is_call)
        return got

    def select(self, target: Target, shift: int = 0) -> pd.DataFrame:
        """One row per expiry of the snapshot (TARGET_TABLE_COLUMNS).

        Nearest means the smallest |measure - value| among the side's
        contracts with a known measure; a tie goes to the lower strike.
        ``shift`` then moves that many strikes up (+) or down (-) along the
        side's strikes of the expiry, stopping at the ends (one keystroke to a
        neighbour). ``strike_below`` / ``strike_above`` are the next strikes of
        the side around the chosen one. An expiry with no usable contract of
        the side gets NaN figures, empty flags and row -1.
        """
        n_exp = self._exp_values.size
        rows, group, starts, ends, exp_of = self._side_groups(target.side)
        chosen = np.full(n_exp, -1, dtype=np.int64)
        below = np.full(n_exp, -1, dtype=np.int64)
        above = np.full(n_exp, -1, dtype=np.int64)
        if rows.size:
            with np.errstate(invalid="ignore"):
                miss_all = np.abs(self._measure(target.measure)[rows] - target.value)
            miss_all[~np.isfinite(miss_all)] = np.inf
            best = np.minimum.reduceat(miss_all, starts)
            hit = miss_all == best[group]
            first = np.minimum.reduceat(np.where(hit, np.arange(rows.size), rows.size), starts)
            usable = np.isfinite(best)
            at = np.clip(first + int(shift), starts, ends - 1)
            chosen[exp_of[usable]] = rows[at[usable]]
            has_below = usable & (at > starts)
            has_above = usable & (at < ends - 1)
            below[exp_of[has_below]] = rows[at[has_below] - 1]
            above[exp_of[has_above]] = rows[at[has_above] + 1]
        return self._table(target, chosen, below, above)

    def _table(self, target: Target, chosen: np.ndarray, below: np.ndarray, above: np.ndarray) -> pd.DataFrame:
        n_exp = chosen.size
        has = chosen >= 0
        picked = chosen[has]
        strikes = self._strikes

        def spread(values: np.ndarray, default) -> np.ndarray:
            full = np.full(n_exp, default, dtype=object if isinstance(default, str) else float)
            full[has] = values
            return full

        def strike_at(at: np.ndarray) -> np.ndarray:
            return np.where(at >= 0, strikes[np.maximum(at, 0)] if strikes.size else np.nan, np.nan)

        out = {
            "expiry": pd.DatetimeIndex(self.expiries["expiry"]),
            "calendar_days": self.expiries["calendar_days"].to_numpy(),
            "trading_days": self.expiries["trading_days"].to_numpy(),
            "strike_below": strike_at(below),
            "strike_above": strike_at(above),
        }
        for name in _COPIED:
            out[name] = spread(self._column(name)[picked], np.nan)
        out["flags"] = spread(self._column("flags")[picked], "")
        chosen_measure = spread(self._measure(target.measure)[picked], np.nan)
        out["measure"] = chosen_measure
        out["miss"] = chosen_measure - target.value
        out["row"], out["row_below"], out["row_above"] = chosen, below, above
        return pd.DataFrame(out, columns=TARGET_TABLE_COLUMNS)
