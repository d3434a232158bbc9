"""The at-the-money term structure of one snapshot, and the variance its events add.

Per expiry i with time T_i (years on the chosen basis) and at-the-money vol
sigma_i, total variance w_i = sigma_i^2 T_i (the invariant). Between two
consecutive expiries the forward variance is (w_j - w_i) / (T_j - T_i) and
the forward vol its square root; a negative forward variance is calendar
arbitrage at the money (a finding names the two expiries).

Events: an expiry that settles after a scheduled event carries one day of
extra variance e^2 on top of the ordinary diffusion (common practice [C]):

    w(T) = sigma_ex^2 T + sum over events carried by the expiry of e_k^2

``sigma_ex`` (the ex-event, or ordinary, vol) and the e_k^2 are fitted by
non-negative least squares on the expiries around the events (the three
before the first event to the third after the last), weighting each
expiry's variance error by 1/T (errors in variance per year). Events that
no pair of expiries separates (no expiry settles between them) are one
joint estimate. Where only one expiry carries the last event, the ordinary
vol is the nearest earlier expiry's (its own events taken out), with a note.

The implied move of an event: one standard deviation e of the log price
(a fraction of the price), and the expected absolute move sqrt(2/pi) e of
a normal with that standard deviation. These are the market's price of the
event, not a prediction.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .events import BEFORE_OPEN, Event, carried, events_for, past_events_finding
from .exchange_calendar import TZ, ExchangeCalendar, default_calendar
from .findings import NOTE, WARNING, Finding
from .nonnegative_least_squares import nnls
from .time_to_expiry import year_fraction

#: E|X| / sd for a normal X with mean zero: sqrt(2/pi).
ABS_MOVE_FACTOR = float(np.sqrt(2.0 / np.pi))

#: Expiries kept on each side of the events for the fit.
FIT_MARGIN = 3

#: Columns of the term-structure table.
TERM_COLUMNS = [
    "expiry", "t_years", "atm_iv", "total_variance", "forward_vol",
    "event_variance", "ex_event_vol", "events",
]


@dataclass
class EventEstimate:
    """The variance one event (or several that cannot be told apart) adds.

    ``variance`` is e^2 in total variance (NaN when it cannot be estimated);
    ``move`` is e, one standard deviation of the log price (fraction);
    ``expected_abs_move`` is sqrt(2/pi) e; ``t_years`` is when the news lands
    on the variance clock; ``method`` says how e^2 was found: ``fit``,
    ``nearest earlier expiry`` (one expiry carries it) or ``none`` (no expiry
    carries it, or it lies in the past).
    """

    events: tuple[Event, ...]
    t_years: float
    variance: float
    method: str
    first_expiry: pd.Timestamp | None = None

    @property
    def name(self) -> str:
        """Plain-text name of the event(s)."""
        return " + ".join(e.name for e in self.events)

    @property
    def move(self) -> float:
        """One standard deviation of the log price across the event (fraction of the price)."""
        return float(np.sqrt(self.variance)) if self.variance >= 0 else float("nan")

    @property
    def expected_abs_move(self) -> float:
        """Expected absolute move across the event (fraction of the price), sqrt(2/pi) e."""
        return ABS_MOVE_FACTOR * self.move


@dataclass
class TermStructure:
    """The term structure of one snapshot: one row per expiry, the event estimates and the fit."""

    table: pd.DataFrame
    events: list[EventEstimate]
    ordinary_vol: float
    fit_rmse: float  # vol points (percent), RMS over the fitted expiries
    fitted_expiries: int
    findings: list[Finding] = field(default_factory=list)


def settlement_times(expiries, settle, calendar: ExchangeCalendar | None = None) -> pd.DatetimeIndex:
    """Settlement instant of each expiry (New York, tz-aware): the close for PM, the open for AM.

    On a day the exchange is closed, the nominal 16:00 / 09:30 of that date.
    """
    cal = calendar if calendar is not None else default_calendar()
    exp = pd.DatetimeIndex(expiries)
    is_pm = np.asarray([str(s).strip().lower() != "am" for s in np.broadcast_to(np.asarray(settle, object),
                                                                             (len(exp),))])
    closes = cal.session_closes(exp.values.astype("datetime64[D]"))
    opens = cal.session_opens(exp.values.astype("datetime64[D]"))
    nominal_close = (exp + pd.Timedelta(hours=16)).tz_localize(TZ)
    nominal_open = (exp + pd.Timedelta(hours=9, minutes=30)).tz_localize(TZ)
    close = np.where(pd.isna(closes), nominal_close, closes)
    open_ = np.where(pd.isna(opens), nominal_open, opens)
    return pd.DatetimeIndex(np.where(is_pm, close, open_)).tz_convert(TZ)


def _nnls(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    return nnls(a, b)


def term_structure(
    expiries,
    t_years,
    atm_iv,
    settlement: pd.DatetimeIndex,
    events=(),
    *,
    as_of: pd.Timestamp,
    underlying: str = "",
    basis: str = "252",
    calendar: ExchangeCalendar | None = None,
) -> TermStructure:
    """Term structure, forward vols and event variances of one snapshot.

    ``expiries`` (dates), ``t_years`` (years on ``basis``), ``atm_iv``
    (decimal, on ``basis``) and ``settlement`` (tz-aware instants) are one
    value per expiry; ``events`` may hold other underlyings' events (only
    ``underlying``'s are used). Expiries without time or vol are shown with
    NaN and left out of the fit.
    """
    exp = pd.DatetimeIndex(expiries)
    t = np.asarray(t_years, float)
    iv = np.asarray(atm_iv, float)
    order = np.argsort(t, kind="stable")
    exp, t, iv = exp[order], t[order], iv[order]
    settlement = pd.DatetimeIndex(settlement)[order]
    w = iv * iv * t
    findings: list[Finding] = []
    labels = [f"{e:%Y-%m-%d}" for e in exp]
    ok = (t > 0) & np.isfinite(w)
    rows = np.flatnonzero(ok)

    # Forward vol between consecutive usable expiries (the first from the snapshot time).
    fwd_vol = np.full(t.size, np.nan)
    prev_t, prev_w, prev_label = 0.0, 0.0, None
    for i in rows:
        dt_ = t[i] - prev_t
        dw = w[i] - prev_w
        if dt_ > 0:
            fv = dw / dt_
            fwd_vol[i] = np.sqrt(fv) if fv >= 0 else np.nan
            if fv < 0 and prev_label is not None:
                findings.append(Finding(WARNING, f"calendar arbitrage at the money: total variance falls from "
                                        f"{prev_w:.6f} ({prev_label}) to {w[i]:.6f} ({labels[i]})",
                                        underlying=underlying or None, expiry=labels[i]))
        prev_t, prev_w, prev_label = t[i], w[i], labels[i]

    # Events: drop the past ones, group those no expiry separates.
    mine = events_for(events, underlying) if underlying else sorted(events, key=lambda e: e.instant())
    as_of_ny = pd.Timestamp(as_of).tz_convert(TZ)
    live = [e for e in mine if e.instant() > as_of_ny]
    past = [e for e in mine if e.instant() <= as_of_ny]
    if past:
        findings.append(past_events_finding(past))
    carry = carried(live, settlement)  # [expiry, event]
    groups: list[list[int]] = []
    for j in range(len(live)):
        col = carry[rows, j]
        if groups and np.array_equal(col, carry[rows, groups[-1][0]]):
            groups[-1].append(j)
        else:
            groups.append([j])
    estimates: list[EventEstimate] = []
    fit_groups: list[int] = []
    for g, members in enumerate(groups):
        ev = tuple(live[j] for j in members)
        first = ev[0]
        t_ev = float(year_fraction(as_of_ny, [pd.Timestamp(first.date)],
                                   "am" if first.timing == BEFORE_OPEN else "pm", basis=basis,
                                   calendar=calendar)[0])
        carriers = rows[carry[rows, members[0]]]
        est = EventEstimate(ev, t_ev, float("nan"), "none", exp[carriers[0]] if carriers.size else None)
        estimates.append(est)
        if carriers.size == 0:
            findings.append(Finding(WARNING, f"{est.name} on {first.date:%Y-%m-%d} comes after the last expiry "
                                    "with a usable vol; its move cannot be read from this chain",
                                    file=first.source or None, underlying=underlying or None))
            continue
        if len(members) > 1:
            findings.append(Finding(NOTE, f"{est.name}: no expiry settles between these events, so they are "
                                    "estimated together", underlying=underlying or None))
        fit_groups.append(g)

    x_ex = np.nan
    fitted = np.zeros(0, dtype=np.int64)
    if rows.size:
        if fit_groups:
            firsts = [np.flatnonzero(carry[rows, groups[g][0]])[0] for g in fit_groups]
            lo = max(0, min(firsts) - FIT_MARGIN)
            hi = min(rows.size, max(firsts) + FIT_MARGIN)
            fitted = rows[lo:hi]
        else:
            fitted = rows
        a = np.column_stack([t[fitted]] + [carry[fitted, groups[g][0]].astype(float) for g in fit_groups])
        scale = 1.0 / t[fitted]
        single = None
        if fit_groups and int(carry[fitted, groups[fit_groups[-1]][0]].sum()) == 1 and fitted.size > 1:
            single = fit_groups[-1]
        if single is not None:
            keep = ~carry[fitted, groups[single][0]]
            x_head = _nnls(a[keep][:, :-1] * scale[keep, None], w[fitted][keep] * scale[keep])
            x = np.append(x_head, np.nan)
        elif fitted.size >= a.shape[1]:
            x = _nnls(a * scale[:, None], w[fitted] * scale)
        else:
            x = np.full(a.shape[1], np.nan)
            findings.append(Finding(NOTE, "too few expiries to separate event variance from the ordinary vol",
                                    underlying=underlying or None))
        x_ex = x[0]
        for col, g in enumerate(fit_groups, start=1):
            estimates[g].variance = float(x[col])
            estimates[g].method = "fit"
        if single is not None:
            post = fitted[carry[fitted, groups[single][0]]][0]
            pre = [i for i in fitted if t[i] < t[post] and not carry[i, groups[single][0]]]
            est = estimates[single]
            if pre:
                i_pre = pre[-1]
                other_pre = sum(estimates[g].variance for g in fit_groups[:-1] if carry[i_pre, groups[g][0]])
                other_post = sum(estimates[g].variance for g in fit_groups[:-1] if carry[post, groups[g][0]])
                rate = (w[i_pre] - other_pre) / t[i_pre]
                est.variance = float(max(w[post] - other_post - rate * t[post], 0.0))
                est.method = "nearest earlier expiry"
                findings.append(Finding(NOTE, f"{est.name}: only the {labels[post]} expiry carries it, so the "
                                        f"ordinary vol is that of {labels[i_pre]} ({100 * np.sqrt(rate):.2f}%)",
                                        underlying=underlying or None))
            else:
                findings.append(Finding(NOTE, f"{est.name}: one expiry carries it and none settles before it; "
                                        "its move cannot be told from the ordinary vol",
                                        underlying=underlying or None))

    # Per expiry: the events' variance it carries and the vol of its ordinary days.
    ev_var = np.zeros(t.size)
    names: list[str] = [""] * t.size
    for est, members in zip(estimates, groups):
        col = carry[:, members[0]]
        if np.isfinite(est.variance):
            ev_var = ev_var + np.where(col, est.variance, 0.0)
    for i in range(t.size):
        names[i] = ", ".join(est.name for est, members in zip(estimates, groups) if carry[i, members[0]])
    unknown = np.zeros(t.size, dtype=bool)
    for est, members in zip(estimates, groups):
        if not np.isfinite(est.variance):
            unknown |= carry[:, members[0]]
    with np.errstate(invalid="ignore", divide="ignore"):
        ex_var = (w - ev_var) / t
        ex_vol = np.where(ok & ~unknown & (ex_var > 0), np.sqrt(np.abs(ex_var)), np.nan)
    for i in np.flatnonzero(ok & ~unknown & ~(ex_var > 0)):
        findings.append(Finding(WARNING, f"the events' variance exceeds the {labels[i]} expiry's whole variance; "
                                "no ex-event vol", underlying=underlying or None, expiry=labels[i]))

    rmse = float("nan")
    if fitted.size and np.isfinite(x_ex):
        model = x_ex * t[fitted] + ev_var[fitted]
        with np.errstate(invalid="ignore"):
            err = np.sqrt(np.maximum(model, 0.0) / t[fitted]) - iv[fitted]
        rmse = float(100.0 * np.sqrt(np.nanmean(err * err)))
    table = pd.DataFrame({
        "expiry": exp, "t_years": t, "atm_iv": iv, "total_variance": np.where(ok, w, np.nan),
        "forward_vol": fwd_vol, "event_variance": np.where(ok, ev_var, np.nan), "ex_event_vol": ex_vol,
        "events": names,
    }, columns=TERM_COLUMNS)
    return TermStructure(table, estimates, float(np.sqrt(x_ex)) if np.isfinite(x_ex) else float("nan"),
                         rmse, int(fitted.size), findings)


def snapshot_term_structure(annotated, events=()) -> TermStructure:
    """``term_structure`` of an annotated snapshot (``pipeline.AnnotatedSnapshot``) with these events."""
    snap = annotated.snapshot
    table = annotated.expiries
    settle = (snap.contracts.groupby("expiry", sort=True)["settle"].first()
              .reindex(pd.DatetimeIndex(table["expiry"])).fillna("pm").to_numpy())
    calendar = ExchangeCalendar(extra_closed=annotated.settings.extra_closed) \
        if annotated.settings.extra_closed else default_calendar()
    settlement = settlement_times(table["expiry"], settle, calendar)
    return term_structure(table["expiry"], table["t_years"], table["atm_iv"], settlement, events,
                          as_of=snap.as_of, underlying=snap.underlying, basis=annotated.settings.basis,
                          calendar=calendar)
