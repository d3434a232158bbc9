"""`chaintriage history`: realised volatility by estimator and window, and the volatility cone.

Loads daily price history files (see core.history_file), prints one table
on stdout (plain, csv or json): one row per underlying and window with every
estimator's realised vol ending at the last bar, and the cone of rolling
realised vol for that window. Findings go to stderr. Exit status as `check`.
Also the `--history` option of `table` and `expiries` (``add_history_options``,
``history_for``): history columns beside the market's.
"""

from __future__ import annotations

import argparse
import sys
from typing import TYPE_CHECKING

from chaintriage.core.findings import WARNING, ChainTriageError, Finding
from chaintriage.core.realised_vol_choices import DEFAULT_WINDOWS, ESTIMATORS
from chaintriage.tui.cli.common import EXIT_OK, EXIT_ROWS_LEFT_OUT, EXIT_UNUSABLE, error, one_line, plain
from chaintriage.tui.cli.common import write_out

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd

    from chaintriage.core.history_compare import HistorySettings, HistorySummary
    from chaintriage.core.history_file import HistoryLoads

# pandas and the history computations are imported by the functions that run a command, so that
# the options (and `--help`) of `history`, `table` and `expiries` load none of them.

#: Columns of `history`, in order.
HISTORY_COLUMNS = [
    "underlying", "window", *ESTIMATORS, "days",
    "cone_min", "cone_q25", "cone_median", "cone_q75", "cone_max", "cone_samples",
]

HISTORY_EPILOG = """\
examples:
  chaintriage history prices.csv
  chaintriage history prices.csv --windows 21,63 --basis 365 --format csv
  chaintriage history export.csv --columns history_columns.toml --underlying QRTZ

The file: one row per trading day with date (YYYY-MM-DD), open, high, low,
close and optional volume and underlying columns; prices adjusted for splits
and dividends. Without open/high/low only close-to-close vol is computed.

Vols are annualised decimals in csv and json (0.25 = 25%%); plain output shows
percentages. `days` is the number of days the --cone-estimator's figure rests
on; the cone (min, quartiles, max) is of that estimator's rolling vol over the
whole history.

With --events FILE or --event UNDERLYING:DATE[:amc|bmo] (past events, e.g.
earnings releases), the sessions that carried them are left out of every
estimator and the cone: an ex-event realised vol, to set beside the
ex-event implied vol of `chaintriage expiries --events`.

History is not a forecast, and realised and implied vol measure different
things (implied vol carries the premium sellers ask, and coming events).

exit status:
  0  every row is usable (warnings allowed)
  1  some rows were left out (see stderr)
  2  a file is unusable, or an option is bad
"""


def _windows(text: str) -> tuple[int, ...]:
    out = []
    for part in text.replace(" ", "").split(","):
        if not part:
            continue
        try:
            w = int(part)
        except ValueError:
            raise argparse.ArgumentTypeError(f"not a whole number of days: {part!r}") from None
        if not 2 <= w <= 10_000:
            raise argparse.ArgumentTypeError(f"a window must be 2 to 10000 days: {part!r}")
        out.append(w)
    if not out:
        raise argparse.ArgumentTypeError("no window given")
    return tuple(out)


def _paths(text: str) -> int:
    try:
        n = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"not a whole number: {text!r}") from None
    if not 0 <= n <= 10_000_000:
        raise argparse.ArgumentTypeError(f"must be 0 to 10,000,000: {text!r}")
    return n


def add_history_file_options(p: argparse.ArgumentParser, *, prefix: str = "") -> None:
    """--windows, and the history file's --columns / --underlying (prefixed when sharing a command)."""
    g = p.add_argument_group("history options")
    g.add_argument("--windows", type=_windows, default=DEFAULT_WINDOWS, metavar="N,N,...",
                   help="window lengths in trading days (default 10,21,63,126,252)")
    g.add_argument(f"--{prefix}columns", dest="history_columns", metavar="MAP.toml",
                   help="TOML file that maps history column names (date, open, high, low, close, volume, "
                        "underlying) to the file's headers")
    if not prefix:
        g.add_argument("--underlying", metavar="NAME", help="underlying name for every row of the files")
    g.add_argument("--cone-estimator", choices=("auto", *ESTIMATORS), default="auto",
                   help="estimator of the cone and of the odds (auto: Yang-Zhang when the files have "
                        "open/high/low, else close-to-close)")


def configure(p: argparse.ArgumentParser) -> None:
    """Add `history`'s description, options and ``func`` to its parser."""
    from chaintriage.tui.cli.events import add_event_options

    p.description = ("Realised volatility from daily price history: close-to-close, Parkinson,\n"
                     "Garman-Klass, Rogers-Satchell and Yang-Zhang over each window, and the\n"
                     "volatility cone (Burghardt-Lane) of rolling realised vol.")
    p.epilog = HISTORY_EPILOG
    p.add_argument("files", nargs="+", metavar="HISTORY", help="daily price history files (CSV, or Parquet)")
    add_history_file_options(p)
    p.add_argument("--basis", choices=("252", "250", "365"), default="252",
                   help="time basis: trading days per year (252, 250) or calendar ACT/365 (default 252)")
    p.add_argument("--until", metavar="DATE", help="leave out rows dated after DATE (YYYY-MM-DD)")
    p.add_argument("--format", choices=("plain", "csv", "json"), default="plain",
                   help="output format on stdout (default: plain)")
    p.add_argument("--quiet", action="store_true",
                   help="print only a summary line on stderr instead of every finding")
    add_event_options(p)
    p.set_defaults(func=run_history)


def history_settings(args: argparse.Namespace, basis: str, paths: int = 0) -> HistorySettings:
    from chaintriage.core.history_compare import HistorySettings

    return HistorySettings(windows=args.windows, basis=basis, estimator=args.cone_estimator, paths=paths)


def load_history_files(paths, args: argparse.Namespace, until=None) -> HistoryLoads:
    """Load history files with the options of ``add_history_file_options``; errors go to stderr."""
    from chaintriage.core.history_file import load_histories, load_history_column_map

    cmap = load_history_column_map(args.history_columns) if args.history_columns else None
    loads = load_histories(paths, underlying=getattr(args, "underlying", None), column_map=cmap, until=until)
    for exc in loads.errors:
        error(str(exc))
    return loads


def history_status(loads: HistoryLoads) -> int:
    if loads.errors:
        return EXIT_UNUSABLE
    return EXIT_ROWS_LEFT_OUT if loads.rows_left_out else EXIT_OK


def history_summary_line(loads: HistoryLoads) -> str:
    n = len(loads.files) + len(loads.errors)
    files = f"{n} history file" + ("s" if n != 1 else "")
    if loads.errors:
        files += f" ({len(loads.errors)} unusable)"
    warnings = sum(f.severity == WARNING for f in loads.findings)
    return (f"{files}, {loads.rows_read} rows read, {loads.rows_read - loads.rows_left_out} accepted, "
            f"{warnings} warnings, {loads.rows_left_out} left out")


def report_history_findings(loads: HistoryLoads, extra: list[Finding], quiet: bool) -> None:
    if not quiet:
        for f in [*loads.findings, *extra]:
            print(one_line(str(f)), file=sys.stderr)
    print(history_summary_line(loads), file=sys.stderr)


def history_frame(summaries: list[HistorySummary]) -> pd.DataFrame:
    """The `history` table: one row per underlying and window."""
    import pandas as pd

    frames = []
    for s in summaries:
        vol = s.realised.vol
        cone = s.cone.table
        f = pd.DataFrame({"underlying": s.history.underlying, "window": vol.index.to_numpy()})
        for est in ESTIMATORS:
            f[est] = vol[est].to_numpy()
        f["days"] = s.realised.days[s.estimator].to_numpy()
        for c in ("min", "q25", "median", "q75", "max"):
            f[f"cone_{c}"] = cone[c].reindex(vol.index).to_numpy()
        f["cone_samples"] = cone["samples"].reindex(vol.index).to_numpy()
        frames.append(f)
    return pd.concat(frames, ignore_index=True)[HISTORY_COLUMNS]


def _until(text: str | None) -> pd.Timestamp | None:
    if text is None:
        return None
    import pandas as pd

    try:
        ts = pd.Timestamp(text)
    except (ValueError, TypeError, OverflowError):
        ts = None
    if ts is None or ts is pd.NaT or ts.tzinfo is not None or not 1900 <= ts.year <= 2199:
        raise ChainTriageError(f"--until {text!r} is not a date (YYYY-MM-DD)")
    return ts.normalize()


def run_history(args: argparse.Namespace) -> int:
    from dataclasses import replace

    from chaintriage.core.history_compare import event_sessions, summarise_history
    from chaintriage.tui.cli.events import gather_events
    from chaintriage.tui.cli.table_output import render

    until = _until(args.until)
    settings = history_settings(args, args.basis)
    events, bad, events_left_out = gather_events(args)
    if bad:
        return EXIT_UNUSABLE
    loads = load_history_files(args.files, args, until=until)
    histories = loads.histories
    if not histories:
        report_history_findings(loads, [], args.quiet)
        error("no usable history")
        return EXIT_UNUSABLE
    summaries = []
    for h in histories:
        mine = [e for e in events if e.underlying == h.underlying]
        skip = event_sessions(h.bars["date"].to_numpy(), mine) if mine else ()
        summaries.append(summarise_history(h, replace(settings, skip_dates=skip) if skip else settings))
    frame = history_frame(summaries)
    if args.format == "plain":
        for s in summaries:
            b = s.history.bars
            print(plain(f"{one_line(s.history.underlying)}: {len(b)} daily bars, {b['date'].iat[0]:%Y-%m-%d} to "
                        f"{b['date'].iat[-1]:%Y-%m-%d}, last close {s.history.last_close:.6g}; basis {args.basis}; "
                        f"cone of {s.estimator.replace('_', '-')} vol"))
        print()
    write_out(render(frame, args.format))
    report_history_findings(loads, [f for s in summaries for f in s.findings], args.quiet)
    status = history_status(loads)
    return max(status, 1) if events_left_out else status


# --------------------------------------------------------------------------- --history for table / expiries


def add_history_options(p: argparse.ArgumentParser) -> None:
    """--history FILE (repeatable) and its options, for commands that annotate snapshots."""
    p.add_argument("--history", action="append", default=[], metavar="HISTORY",
                   help="daily price history of the underlying: adds history columns (repeatable)")
    add_history_file_options(p, prefix="history-")
    p.add_argument("--paths", type=_paths, default=20_000, metavar="N",
                   help="bootstrap paths for the history odds (default 20000; 0 skips the bootstrap)")


#: Columns `table --history` adds.
HISTORY_TABLE_COLUMNS = ["hist_vol", "hist_p_beyond", "hist_p_touch", "boot_p_beyond", "boot_p_beyond_se",
                         "boot_p_touch", "boot_p_touch_se"]

#: Columns `expiries --history` adds.
HISTORY_EXPIRY_COLUMNS = ["hist_window", "hist_vol", "iv_rv", "cone_percentile"]


def history_columns(frame: pd.DataFrame, table, keep, columns) -> pd.DataFrame:
    """``frame`` with the history columns appended (blank when the snapshot has no history)."""
    for col in columns:
        frame[col] = table[col].loc[keep].to_numpy() if table is not None else float("nan")
    return frame


def finish_with_history(args, loads: HistoryLoads | None, extra: list[Finding], status: int) -> int:
    """Report the history files' findings (when --history was given) and fold their status into ``status``."""
    if loads is None:
        return status
    report_history_findings(loads, extra, args.quiet)
    return max(status, history_status(loads))


def history_for(args: argparse.Namespace, annotated: list) -> tuple[dict[int, object], HistoryLoads | None,
                                                                   list[Finding]]:
    """History comparisons keyed by the index of each annotated snapshot that has a history.

    Returns ({} , None, []) when --history was not given. Histories match snapshots by underlying name;
    rows dated after a snapshot's date are left out.
    """
    if not args.history:
        return {}, None, []
    until = max(a.snapshot.as_of.tz_localize(None) for a in annotated) if annotated else None
    compare = HistoryComparer(args, until)
    out: dict[int, object] = {}
    for i, a in enumerate(annotated):
        cmp = compare(a)
        if cmp is not None:
            out[i] = cmp
    return out, compare.loads, compare.extra


class HistoryComparer:
    """The --history files loaded once (rows after ``until``, the latest snapshot time, left out), then
    called with one annotated snapshot at a time: its comparison with its underlying's history, or None.
    ``extra`` collects the findings of the comparisons (and a note per snapshot without a history)."""

    def __init__(self, args: argparse.Namespace, until) -> None:
        self.args = args
        self.loads = load_history_files(args.history, args, until=until)
        self.by_name = {h.underlying: h for h in self.loads.histories}
        self.extra: list[Finding] = []

    def __call__(self, a):
        from chaintriage.core.history_compare import compare_with_snapshot  # only when asked for

        settings = history_settings(self.args, a.settings.basis, paths=self.args.paths)
        h = self.by_name.get(a.snapshot.underlying)
        if h is None:
            self.extra.append(Finding(
                "note", f"no price history for {a.snapshot.underlying!r}: history columns are blank "
                        f"(histories given for: {', '.join(map(repr, self.by_name)) or 'none'})",
                underlying=a.snapshot.underlying))
            return None
        if h.last_date > a.snapshot.as_of.tz_localize(None).normalize():
            keep = h.bars["date"] <= a.snapshot.as_of.tz_localize(None).normalize()
            h = type(h)(h.underlying, h.bars[keep].reset_index(drop=True), h.findings, h.source)
            if len(h.bars) < 3:
                return None
        cmp = compare_with_snapshot(a, h, settings)
        self.extra.extend(cmp.findings)
        return cmp
