"""`chaintriage expiries`: one row per expiry (forward, discount, at-the-money vol, ranges, fit), for scripts."""

from __future__ import annotations

import argparse

from chaintriage.tui.cli.annotated_tables import (
    COMMON_NOTES,
    add_table_options,
    load_and_annotate,
    nothing_usable,
    with_as_of,
)
from chaintriage.tui.cli.common import EXIT_UNUSABLE, error, write_out
from chaintriage.tui.cli.events import add_event_options, gather_events, report_with_events
from chaintriage.tui.cli.history import (
    HISTORY_EXPIRY_COLUMNS,
    add_history_options,
    finish_with_history,
    history_columns,
    history_for,
)
from chaintriage.tui.cli.model_options import DAYS_MAX, days

# pandas, the term structure and the table writer are imported by `run_expiries`, so that
# `expiries --help` loads none of them.

#: Columns of `expiries`, in order.
EXPIRY_COLUMNS = [
    "underlying", "expiry", "t_years", "trading_days", "calendar_days", "forward", "discount",
    "forward_method", "atm_iv", "range_low", "range_high", "range_low_smile", "range_high_smile", "fit_rmse",
    "arbitrage_free", "arbitrage_note", "contracts", "findings", "forward_vol", "event_variance", "ex_event_vol",
    "events",
]

#: Columns of `expiries --days`.
HORIZON_COLUMNS = ["underlying", "days", "forward", "range_low", "range_high", "extrapolated"]

EXPIRIES_EPILOG = """\
examples:
  chaintriage expiries chain.csv
  chaintriage expiries chain.csv --confidence 0.95 --format json
  chaintriage expiries chain.csv --days 10 --days 30
  chaintriage expiries chain.csv --events events.csv

forward_vol is the at-the-money vol between the previous expiry and this
one; with events (--events FILE, --event UNDERLYING:DATE[:amc|bmo]),
event_variance is the events' total variance the expiry carries and
ex_event_vol the vol of its ordinary days (see `chaintriage events --help`).

With --history FILE (daily prices of the underlying): hist_window and
hist_vol (realised vol at the window nearest each expiry), iv_rv (atm_iv /
hist_vol) and cone_percentile (share of the history's rolling vols of that
window below atm_iv). Realised and implied vol measure different things.

With --days, prints instead the range N days ahead (trading days on the
252/250 bases, calendar days on 365), interpolating at-the-money total
variance in time between expiries. A horizon past the last expiry holds
the last expiry's variance rate: its row says extrapolated = yes and a
warning goes to stderr. N is more than zero and at most %d.

""" % DAYS_MAX + COMMON_NOTES


def configure(p: argparse.ArgumentParser) -> None:
    """Add `expiries`'s description, options and ``func`` to its parser."""
    p.description = ("Summarise each expiry: time, parity forward and discount factor, at-the-money\n"
                     "vol, the range at a confidence (plain and from the smile), smile fit quality.")
    p.epilog = EXPIRIES_EPILOG
    add_table_options(p)
    add_event_options(p)
    add_history_options(p)
    p.add_argument("--days", type=days, action="append", default=[], metavar="N",
                   help="print the range N days ahead instead (repeatable)")
    p.set_defaults(func=run_expiries)


def run_expiries(args: argparse.Namespace) -> int:
    import pandas as pd

    from chaintriage.core.term_structure import snapshot_term_structure
    from chaintriage.tui.cli.table_output import render

    events, bad, left_out = gather_events(args)
    if bad:
        return EXIT_UNUSABLE
    result, annotated = load_and_annotate(args)
    if not annotated:
        return nothing_usable(args, result)
    extra = []
    loads, hist_extra = None, []
    if args.days:
        rows = []
        for a in annotated:
            for n in args.days:
                f, lo, hi = a.horizon_range(n)
                beyond = a.horizon_extrapolated(n)
                if beyond:
                    error(f"warning: {a.snapshot.underlying}: {n:g} days is past the last expiry; "
                          "the range holds the last expiry's variance rate (an extrapolation)")
                rows.append({"underlying": a.snapshot.underlying, "days": n,
                             "forward": f, "range_low": lo, "range_high": hi, "extrapolated": beyond})
        frame = pd.DataFrame(rows, columns=HORIZON_COLUMNS)
    else:
        history, loads, hist_extra = history_for(args, annotated)
        frames = []
        for i, a in enumerate(annotated):
            ts = snapshot_term_structure(a, events)
            extra.extend(ts.findings)
            term = ts.table.set_index("expiry")
            table = a.expiries.copy()
            for name in ("forward_vol", "event_variance", "ex_event_vol", "events"):
                table[name] = term[name].reindex(pd.DatetimeIndex(table["expiry"])).to_numpy()
            frame = with_as_of(table[EXPIRY_COLUMNS], a, args.format)
            if loads is not None:
                cmp = history.get(i)
                frame = history_columns(frame, cmp.expiries if cmp else None, slice(None), HISTORY_EXPIRY_COLUMNS)
            frames.append(frame)
        frame = pd.concat(frames, ignore_index=True)
    write_out(render(frame, args.format))
    status = report_with_events(args, result, annotated, extra, left_out)
    return finish_with_history(args, loads, hist_extra, status)
