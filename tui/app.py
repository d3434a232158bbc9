"""The triage screen: the Textual app a trader keeps open all day.

Layout, top to bottom: a line naming the snapshot shown (and findings,
shortlist, work in progress); the current expiry's header (days left,
forward, ATM IV, the range at the chosen confidence, fit quality, findings);
the filter line; then the strike ladder (StrikeGrid) with the distribution
pane (DistributionPlot) beside it; the key line at the bottom.

Loading and annotating run in worker threads: the screen shows a loading
indicator and what is being done instead of freezing. Numbers come from
``chaintriage.core``; text from files is shown as rich Text, never markup.
"""

from __future__ import annotations

import contextlib
import os
import threading
from collections.abc import Callable, Sequence
from importlib import resources
from pathlib import Path
from typing import Any

from rich.text import Text
from textual.app import App, ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.css.scalar import Scalar
from textual.screen import Screen
from textual.widgets import Footer, LoadingIndicator, Static

from chaintriage.core.findings import ChainTriageError
from chaintriage.core.loading import ColumnMap, LoadResult, SnapshotOverrides, load_files
from chaintriage.core.snapshot import Snapshot
from chaintriage.tui.cli_common import error

from . import formatting as fm
from .bars import BarStyles, InfoBar, expiry_pieces, filter_pieces, top_pieces
from .distribution_plot import DistributionPlot
from .files import TargetExistsError
from .layout import PLOT_AUTO, PLOT_HIDDEN, PLOT_SHOWN, plan_layout
from .session import CONFIDENCE_LEVELS, SnapshotView, StrikeFilter, file_findings_without_underlying, \
    fmt_confidence, step_confidence
from .settings import Settings, load_settings, save_settings
from .shortlist import ContractKey, Shortlist, ShortlistEntry
from .strike_grid import COLUMNS, DEFAULT_COLUMNS, StrikeGrid, known_columns
from .strike_summary import copy_to_system_clipboard, summarize
from .themes import FALLBACK_THEME, ChainTheme, css_variables, load_themes, to_textual_theme

DEMO_PACKAGE = "chaintriage.demo_chains"

#: Exit status when nothing could be shown.
EXIT_NOTHING = 2
#: The command line's --confidence default: any other value given there is where the range starts.
CLI_DEFAULT_CONFIDENCE = 0.68
#: Seconds of loading before the moving loading indicator appears (the message is there at once).
SPINNER_DELAY = 0.4


def demo_files(root=None) -> list[str]:
    """Names of the bundled demo chains (CSV files, except the deliberately messy ones), sorted.

    ``root`` is the folder to look in (a Traversable); default: the chaintriage.demo_chains package.
    """
    try:
        root = resources.files(DEMO_PACKAGE) if root is None else root
        names = [p.name for p in root.iterdir() if p.name.lower().endswith(".csv")]
    except (ModuleNotFoundError, FileNotFoundError, NotADirectoryError):
        return []
    return sorted(n for n in names if "messy" not in n.lower())


def load_for_app(paths: Sequence[str | Path], *, overrides: SnapshotOverrides | None = None,
                 column_map: ColumnMap | None = None) -> LoadResult:
    """Load the given files, or the bundled demo chains when ``paths`` is empty.

    Raises ChainTriageError when there is nothing to load.
    """
    if paths:
        return load_files(paths, overrides=overrides, column_map=column_map)
    names = demo_files()
    if not names:
        raise ChainTriageError(
            "no demo chains are bundled with this installation; give snapshot files to open")
    root = resources.files(DEMO_PACKAGE)
    with contextlib.ExitStack() as stack:
        real = [str(stack.enter_context(resources.as_file(root / n))) for n in names]
        return load_files(real, overrides=overrides, column_map=column_map)


def annotate_view(snapshot: Snapshot, pipeline_settings: Any, load_findings: Sequence = (),
                  confidence: float | None = None, precompute: int | None = None) -> SnapshotView:
    """Run core's pipeline on one snapshot and wrap it for the screen (heavy: call off the UI thread).

    The distributions, and the ranges at ``confidence``, of the first ``precompute``
    expiries (all when None) are computed here too, so paging through them costs no
    model work; ``precompute_view`` does the rest later.
    """
    from chaintriage.core.pipeline import annotate

    annotated = annotate(snapshot, pipeline_settings)
    view = SnapshotView(annotated, file_findings_without_underlying(load_findings, snapshot.sources))
    precompute_view(view, confidence, stop=precompute)
    return view


def precompute_view(view: SnapshotView, confidence: float | None, start: int = 0, stop: int | None = None) -> None:
    """Compute (and cache) the distributions and ranges of expiries ``start:stop``."""
    for e in view.expiries[start:stop]:
        view.distribution(e)
        if confidence is not None:
            view.ranges(e, confidence)


class TriageScreen(Screen):
    """The main screen: its keys call the app's actions."""

    BINDINGS = [
        Binding("question_mark", "app.show_help", "help", key_display="?"),
        Binding("]", "app.next_expiry", "next expiry", key_display="]"),
        Binding("[", "app.previous_expiry", "prev expiry", key_display="["),
        Binding("}", "app.next_snapshot", "next snapshot", show=False),
        Binding("{", "app.previous_snapshot", "prev snapshot", show=False),
        Binding("f", "app.set_filter", "filter"),
        Binding("x", "app.clear_filter", "clear filter", show=False),
        Binding("plus,equals_sign", "app.confidence_up", "wider range", show=False),
        Binding("minus", "app.confidence_down", "narrower range", show=False),
        Binding("c", "app.copy_summary", "copy"),
        Binding("m", "app.toggle_mark", "mark"),
        Binding("s", "app.open_shortlist", "shortlist"),
        Binding("o", "app.choose_columns", "columns", show=False),
        Binding("v", "app.toggle_plot", "plot", show=False),
        Binding("t", "app.next_theme", "theme", show=False),
        Binding("a", "app.toggle_ascii", "ascii", show=False),
        Binding("e", "app.show_findings", "findings"),
        Binding("l", "app.load_file", "open file", show=False),
        Binding("q", "app.quit", "quit"),
    ]

    def compose(self) -> ComposeResult:
        app: ChainTriageApp = self.app  # type: ignore[assignment]
        yield InfoBar(id="topbar")
        yield InfoBar(id="expirybar")
        yield InfoBar(id="filterbar")
        with Horizontal(id="body"):
            yield StrikeGrid(id="grid", theme=app.chain_theme, columns=app.columns,
                             ascii_only=app.ascii_only, title=False)
            yield DistributionPlot(id="plot", theme=app.chain_theme, ascii_only=app.ascii_only)
        with Vertical(id="loading"):
            yield Static(Text("starting"), id="loading-msg")
        yield Footer(show_command_palette=False)

    def on_mount(self) -> None:
        self.app.screen_ready()  # type: ignore[attr-defined]

    def on_resize(self) -> None:
        self.app.update_layout()  # type: ignore[attr-defined]

    def on_strike_grid_strike_highlighted(self, message: StrikeGrid.StrikeHighlighted) -> None:
        self.app.highlight_moved()  # type: ignore[attr-defined]


class ChainTriageApp(App[int]):
    """Option chain triage from the keyboard.

    Give ``paths`` (snapshot files; none: the bundled demo), ``snapshots``
    (already loaded: annotated in a worker) or ``views`` (already annotated,
    shown at once). ``system_clipboard`` is called with the copied text in a
    worker thread (None: only the terminal's clipboard is used).
    """

    TITLE = "chaintriage"
    ENABLE_COMMAND_PALETTE = False

    CSS = """
    Screen {
        background: $ct-background;
        color: $ct-text;
    }
    #topbar { background: $ct-surface; }
    #expirybar { background: $ct-background; }
    #filterbar { background: $ct-surface; }
    #body { height: 1fr; }
    #body.-hidden { display: none; }
    #grid {
        scrollbar-size-vertical: 1;
        scrollbar-size-horizontal: 1;
        scrollbar-background: $ct-background;
        scrollbar-color: $ct-dim;
    }
    #plot {
        width: 50;
        border-left: solid $ct-dim;
        background: $ct-background;
    }
    .-ascii #plot { border-left: ascii $ct-dim; }
    #loading {
        height: 1fr;
        align: center middle;
    }
    #loading.-hidden { display: none; }
    #loading LoadingIndicator { height: 3; color: $ct-accent; background: $ct-background; }
    #loading-msg { width: 1fr; content-align: center middle; color: $ct-dim; }
    .title { background: $ct-surface; color: $ct-text; height: auto; }
    #help-scroll { background: $ct-background; }
    #finding-detail { height: auto; max-height: 8; background: $ct-surface; padding: 0 1; }
    #help-body { padding: 0 2; }
    DataTable { height: 1fr; }
    ModalScreen { align: center middle; background: $ct-background 60%; }
    .dialog {
        width: 64;
        height: auto;
        padding: 1 2;
        background: $ct-surface;
        border: round $ct-accent;
    }
    .dialog.wide { width: 90%; max-width: 100; }
    .dialog .field { height: 1; margin: 1 0 0 0; }
    .dialog .label { width: 16; }
    .dialog Input { width: 1fr; background: $ct-background; }
    .dialog Input:focus { background: $ct-highlight; }
    #path-input { margin: 1 0; }
    #f-error { height: auto; margin: 1 0 0 0; color: $ct-error; }
    #column-list { height: auto; max-height: 17; border: none; padding: 0; margin: 1 0; }
    """

    def __init__(self, paths: Sequence[str | Path] = (), *, snapshots: Sequence[Snapshot] | None = None,
                 views: Sequence[SnapshotView] | None = None,
                 overrides: SnapshotOverrides | None = None, column_map: ColumnMap | None = None,
                 pipeline_settings: Any = None,
                 system_clipboard: Callable[[str], bool] | None = copy_to_system_clipboard) -> None:
        super().__init__()
        self._paths = [str(p) for p in paths]
        self._given_snapshots = list(snapshots) if snapshots is not None else None
        self._given_views = list(views) if views is not None else None
        self._overrides = overrides
        self._column_map = column_map
        self._pipeline_settings = pipeline_settings
        self._system_clipboard = system_clipboard
        self.exit_messages: list[str] = []
        # Remembered preferences and themes.
        self.settings, notices = load_settings()
        self.themes = load_themes()
        self._startup_notices = list(notices) + list(self.themes.notices)
        for theme in self.themes.themes.values():
            self.register_theme(to_textual_theme(theme))
        self.register_theme(to_textual_theme(FALLBACK_THEME))
        self.chain_theme: ChainTheme = self.themes.get(self.settings.theme)
        if self.settings.theme != self.chain_theme.name:
            wanted = self.settings.theme if len(self.settings.theme) <= 40 else self.settings.theme[:39] + "~"
            self._startup_notices.append(f"theme {wanted!r} was not found; using {self.chain_theme.name!r} "
                                         "(t picks another)")
        self.theme = self.chain_theme.textual_name
        self.ascii_only: bool = bool(self.settings.ascii_only)
        self.columns: list[str] = known_columns(self.settings.columns) or list(DEFAULT_COLUMNS)
        self.confidence: float = float(self.settings.confidence)
        given = getattr(pipeline_settings, "confidence", None)
        if given is not None and abs(given - CLI_DEFAULT_CONFIDENCE) > 1e-12:
            self.confidence = float(given)  # `open --confidence C` starts there
        plot = self.settings.extra.get("plot", PLOT_AUTO)
        self.plot_pref: str = plot if plot in (PLOT_AUTO, PLOT_SHOWN, PLOT_HIDDEN) else PLOT_AUTO
        # What is loaded and shown.
        self.views: list[SnapshotView] = []
        self.view_index = -1
        self._expiry_pos: dict[int, int] = {}
        self.file_errors: list[str] = []
        self.strike_filter = StrikeFilter()
        self.shortlist = Shortlist()
        self.left_out_columns: list[str] = []
        self._bar_styles = BarStyles(self.chain_theme)
        self._busy = ""
        self._loads_running = 0
        self._findings_count: dict[int, int] = {}
        self._strike_total = 0
        self._screen_up = False
        self._settings_unsaved = False
        self.triage = TriageScreen(id="triage")

    # ------------------------------------------------------------ Textual hooks

    def get_theme_variable_defaults(self) -> dict[str, str]:
        return {**super().get_theme_variable_defaults(), **css_variables(FALLBACK_THEME)}

    def get_default_screen(self) -> Screen:
        return self.triage

    def screen_ready(self) -> None:
        """Called when the triage screen is mounted: start loading."""
        self._screen_up = True
        self.triage.set_class(self.ascii_only, "-ascii")
        self._show_body(False)
        self.refresh_bars()
        for notice in self._startup_notices:
            self.notify(notice, title="settings and themes", severity="warning", markup=False)
        if self._given_views:
            self.views.extend(self._given_views)
            self.show_view(0)
            return
        # A moving indicator only when loading takes a while: it would compete with a short load.
        self.set_timer(SPINNER_DELAY, self._show_spinner)
        self._start_load(self._paths, snapshots=self._given_snapshots, initial=True,
                         overrides=self._overrides)

    def notify(self, message: str, *, title: str = "", severity: Any = "information",
               timeout: float | None = None, markup: bool = False) -> None:
        """Every notice is plain text: file names, paths and messages that quote files are data,
        so escape sequences and control characters are removed and nothing is read as markup."""
        super().notify(fm.clean_text(message, keep_newlines=True), title=fm.clean_text(title),
                       severity=severity, timeout=timeout, markup=False)

    # ------------------------------------------------------------ widgets

    @property
    def grid(self) -> StrikeGrid:
        return self.triage.query_one("#grid", StrikeGrid)

    @property
    def plot(self) -> DistributionPlot:
        return self.triage.query_one("#plot", DistributionPlot)

    def _bar(self, name: str) -> InfoBar:
        return self.triage.query_one(f"#{name}", InfoBar)

    def _show_body(self, ready: bool) -> None:
        self.triage.query_one("#body").set_class(not ready, "-hidden")
        self.triage.query_one("#loading").set_class(ready, "-hidden")
        if ready:
            self.grid.focus()

    # ------------------------------------------------------------ loading (worker threads)

    def _start_load(self, paths: Sequence[str], *, snapshots: Sequence[Snapshot] | None = None,
                    initial: bool = False, overrides: SnapshotOverrides | None = None) -> None:
        self._loads_running += 1
        what = "the demo chains" if not paths and snapshots is None else \
            ", ".join(os.path.basename(p) for p in paths) if paths else "the snapshots"
        self._set_busy(f"loading {what}")
        self.run_worker(lambda: self._load_job(list(paths), snapshots, initial, overrides),
                        thread=True, group="load", name="load", exit_on_error=False)

    def _load_job(self, paths: list[str], snapshots: Sequence[Snapshot] | None, initial: bool,
                  overrides: SnapshotOverrides | None) -> None:
        """Worker thread: read the files, annotate each snapshot, hand each to the screen as it is ready."""
        errors: list[str] = []
        added = 0
        try:
            if snapshots is None:
                result = load_for_app(paths, overrides=overrides, column_map=self._column_map)
                snapshots = result.snapshots
                load_findings = result.findings
                errors.extend(str(e) for e in result.errors)
            else:
                load_findings = []
            settings = self._pipeline_settings
            if settings is None:
                from chaintriage.core.pipeline import PipelineSettings

                settings = PipelineSettings()
            for n, snap in enumerate(snapshots):
                self.call_from_thread(
                    self._set_busy, f"computing {fm.clean_text(snap.underlying)} "
                                    f"({len(snap.contracts):,} contracts, {n + 1} of {len(snapshots)})")
                try:
                    view = annotate_view(snap, settings, load_findings, self.confidence, precompute=1)
                except ChainTriageError as exc:
                    errors.append(f"{snap.label}: {exc}")
                    continue
                drawn = threading.Event()
                self.call_from_thread(self._add_view, view, added == 0, drawn)
                added += 1
                # Let the screen draw before more model work competes with it for the interpreter.
                drawn.wait(2.0)
                precompute_view(view, self.confidence, start=1)
        except ChainTriageError as exc:
            errors.append(str(exc))
        except Exception as exc:  # never a traceback on screen: say what failed and go on
            errors.append(f"could not load: {type(exc).__name__}: {exc}")
        self.call_from_thread(self._load_done, errors, added, initial)

    def _show_spinner(self) -> None:
        if not self.views:
            self.triage.query_one("#loading").mount(LoadingIndicator(), before=0)

    def _set_busy(self, text: str) -> None:
        self._busy = text
        if not self.views:
            with contextlib.suppress(Exception):
                self.triage.query_one("#loading-msg", Static).update(Text(fm.clean_text(text) + " ..."))
        self.refresh_bars()

    def _add_view(self, view: SnapshotView, select: bool, drawn: threading.Event | None = None) -> None:
        self.views.append(view)
        if select or self.view_index < 0:
            self.show_view(len(self.views) - 1)
        else:
            self.refresh_bars()
        if drawn is not None:
            self.call_after_refresh(drawn.set)

    def _load_done(self, errors: list[str], added: int, initial: bool) -> None:
        self._loads_running = max(0, self._loads_running - 1)
        if not self._loads_running:
            self._busy = ""
        self.file_errors.extend(errors)
        if initial and not self.views:
            self.exit_messages = errors + ["nothing to show: no file gave a usable snapshot"]
            self.exit(return_code=EXIT_NOTHING)
            return
        for message in errors:
            self.notify(message, title="could not open", severity="error", timeout=10, markup=False)
        if not initial and added:
            self.notify(f"opened {added} snapshot{'s' if added != 1 else ''}", markup=False)
        self.refresh_bars()

    # ------------------------------------------------------------ what is shown

    @property
    def view(self) -> SnapshotView | None:
        return self.views[self.view_index] if 0 <= self.view_index < len(self.views) else None

    @property
    def expiry_pos(self) -> int:
        return self._expiry_pos.get(self.view_index, 0)

    @property
    def current_expiry(self):
        view = self.view
        if view is None or not view.expiries:
            return None
        return view.expiries[self.expiry_pos]

    def show_view(self, index: int, expiry: Any = None) -> None:
        """Show snapshot number ``index``: at ``expiry`` if given, else where it was left, else at
        the expiry nearest the one shown now (same underlying at another time reads across)."""
        if not 0 <= index < len(self.views):
            return
        before = self.current_expiry
        before_underlying = self.view.snapshot.underlying if self.view is not None else None
        self.view_index = index
        view = self.views[index]
        if expiry is not None:
            self._expiry_pos[index] = view.nearest_expiry_index(expiry)
        elif index not in self._expiry_pos:
            self._expiry_pos[index] = view.nearest_expiry_index(before) if before is not None else 0
        self._show_body(True)
        # Strike levels of another underlying mean nothing here: start at its forward.
        self.show_expiry(keep_highlight=view.snapshot.underlying == before_underlying)

    def show_expiry(self, keep_highlight: bool = True) -> None:
        """Put the current expiry in the ladder, the header and the plot."""
        view = self.view
        grid = self.grid
        if view is None or not view.expiries:
            return
        expiry = self.current_expiry
        frame = view.frame(expiry)
        shown, hidden = self.strike_filter.apply(frame)
        info = view.info(self.expiry_pos, self.confidence)
        grid.set_rows(shown, info.forward, expiry=expiry, underlying=view.snapshot.underlying, hidden=hidden,
                      keep_highlight=keep_highlight)
        self._strike_total = len(grid.strikes) + hidden
        self._mark_grid()
        self.update_layout()
        self.refresh_bars()
        self.update_plot()

    def _mark_grid(self) -> None:
        view, expiry = self.view, self.current_expiry
        if view is None or expiry is None:
            return
        self.grid.set_marked(self.shortlist.marked_in(view.snapshot.underlying, view.snapshot.as_of, expiry))

    def update_layout(self) -> None:
        """Share the width between ladder and plot for the current terminal size."""
        if not self._screen_up:
            return
        grid, plot = self.grid, self.plot
        width = self.triage.size.width or self.size.width
        plan = plan_layout(width, self.columns, grid.strike_width, self.plot_pref)
        was_shown = plot.display
        if plot.display != (plan.plot_width > 0):
            plot.display = plan.plot_width > 0
        if plan.plot_width and plot.styles.width != Scalar.from_number(plan.plot_width):
            plot.styles.width = plan.plot_width
        if grid.columns != plan.columns:
            grid.set_columns(plan.columns)
        if plan.left_out != self.left_out_columns:
            self.left_out_columns = plan.left_out
            self.refresh_bars()
        if plot.display and not was_shown:
            self.update_plot()

    def refresh_bars(self) -> None:
        if not self._screen_up:
            return
        st, ascii_only = self._bar_styles, self.ascii_only
        view = self.view
        if view is None:
            top = top_pieces(underlying="", as_of_text="", spot=float("nan"), index=0, count=0, findings=0,
                             shortlist=len(self.shortlist), busy=self._busy, st=st, ascii_only=ascii_only)
            self._bar(("topbar")).set_pieces(top)
            self._bar("expirybar").set_pieces([])
            self._bar("filterbar").set_pieces([])
            return
        if self.view_index not in self._findings_count:
            self._findings_count[self.view_index] = len(view.findings())
        top = top_pieces(underlying=view.snapshot.underlying,
                         as_of_text=fm.fmt_timestamp(view.snapshot.as_of, ascii_only),
                         spot=view.snapshot.spot, index=self.view_index, count=len(self.views),
                         findings=self._findings_count[self.view_index], shortlist=len(self.shortlist),
                         busy=self._busy, st=st, ascii_only=ascii_only)
        self._bar("topbar").set_pieces(top)
        info = view.info(self.expiry_pos, self.confidence) if view.expiries else None
        self._bar("expirybar").set_pieces(expiry_pieces(info, st=st, ascii_only=ascii_only))
        hidden_names = [COLUMNS[k].heading_ascii if ascii_only else COLUMNS[k].heading
                        for k in self.left_out_columns]
        plot_note = ""
        if not self.plot.display and self.plot_pref != PLOT_HIDDEN:
            plot_note = "plot hidden (v shows it)"
        self._bar("filterbar").set_pieces(filter_pieces(
            self.strike_filter, shown=len(self.grid.strikes), total=self._strike_total,
            hidden_columns=hidden_names, plot_note=plot_note, st=st, ascii_only=ascii_only))

    def update_plot(self) -> None:
        view, expiry, plot = self.view, self.current_expiry, self.plot
        if view is None or expiry is None or not plot.display:
            return
        dist = view.distribution(expiry)
        if dist is None:
            plot.clear(" no distribution: this expiry has no smile fit")
            return
        info = view.info(self.expiry_pos, self.confidence)
        strike, kind, p_beyond = self._highlight()
        plot.update_plot(dist.strikes, dist.density, dist.density_flat, forward=info.forward,
                         sigma_sqrt_t=info.sigma_sqrt_t, highlight_strike=strike, highlight_kind=kind,
                         p_beyond=p_beyond)

    def _highlight(self) -> tuple[float | None, str, float | None]:
        hl = self.grid.highlighted
        if hl is None:
            return None, "call", None
        contract = self.grid.highlighted_contract()
        p = fm.as_finite(contract.get("p_beyond")) if contract else None
        return hl[0], hl[1], p

    def highlight_moved(self) -> None:
        if self.plot.display:
            strike, kind, p_beyond = self._highlight()
            self.plot.set_highlight(strike, kind, p_beyond)

    # ------------------------------------------------------------ settings

    def _save_settings(self) -> None:
        s: Settings = self.settings
        s.theme = self.chain_theme.name
        s.ascii_only = self.ascii_only
        s.columns = list(self.columns)
        s.confidence = float(self.confidence)
        s.extra["plot"] = self.plot_pref
        try:
            save_settings(s)
        except ChainTriageError as exc:
            if not self._settings_unsaved:  # once a session: every look change would say it again
                self.notify(f"settings not saved: {exc}; changes last until you quit", severity="warning",
                            timeout=8)
            self._settings_unsaved = True
        else:
            self._settings_unsaved = False

    # ------------------------------------------------------------ actions: moving around

    def action_next_expiry(self) -> None:
        self._step_expiry(+1)

    def action_previous_expiry(self) -> None:
        self._step_expiry(-1)

    def _step_expiry(self, step: int) -> None:
        view = self.view
        if view is None or not view.expiries:
            return
        pos = self.expiry_pos + step
        if not 0 <= pos < len(view.expiries):
            self.notify("this is the last expiry" if step > 0 else "this is the first expiry",
                        timeout=1.5, markup=False)
            return
        self._expiry_pos[self.view_index] = pos
        self.show_expiry()

    def action_next_snapshot(self) -> None:
        self._step_snapshot(+1)

    def action_previous_snapshot(self) -> None:
        self._step_snapshot(-1)

    def _step_snapshot(self, step: int) -> None:
        if len(self.views) < 2:
            self.notify("one snapshot is loaded; l opens another file", timeout=2, markup=False)
            return
        self.show_view((self.view_index + step) % len(self.views))

    # ------------------------------------------------------------ actions: filter and range

    def action_set_filter(self) -> None:
        from .screens import FilterDialog

        def done(flt: StrikeFilter | None) -> None:
            if flt is not None:
                self.set_filter(flt)

        self.push_screen(FilterDialog(self.strike_filter), done)

    def set_filter(self, flt: StrikeFilter) -> None:
        self.strike_filter = flt
        self.show_expiry()

    def action_clear_filter(self) -> None:
        if self.strike_filter.active:
            self.set_filter(StrikeFilter())

    def action_confidence_up(self) -> None:
        self._set_confidence(step_confidence(self.confidence, +1))

    def action_confidence_down(self) -> None:
        self._set_confidence(step_confidence(self.confidence, -1))

    def _set_confidence(self, c: float) -> None:
        if c == self.confidence:
            edge = "widest" if c >= CONFIDENCE_LEVELS[-1] else "narrowest"
            self.notify(f"{fmt_confidence(c)} is the {edge} range", timeout=1.5, markup=False)
            return
        self.confidence = c
        self.refresh_bars()
        self._save_settings()

    # ------------------------------------------------------------ actions: copy and shortlist

    def action_copy_summary(self) -> None:
        view = self.view
        contract = self.grid.highlighted_contract()
        if view is None or contract is None:
            hl = self.grid.highlighted
            what = f"no {hl[1]} at this strike" if hl else "no contract highlighted"
            self.notify(f"nothing to copy: {what}", severity="warning", markup=False)
            return
        text = summarize(contract, as_of=view.snapshot.as_of, underlying=view.snapshot.underlying,
                         ascii_only=self.ascii_only)
        self.copy_text(text)

    def copy_entry(self, entry: ShortlistEntry) -> None:
        k = entry.key
        row = dict(entry.figures, underlying=k.underlying, expiry=k.expiry, strike=k.strike, kind=k.kind)
        self.copy_text(summarize(row, as_of=k.as_of, ascii_only=self.ascii_only))

    def copy_text(self, text: str) -> None:
        """Copy to the terminal's clipboard and (in a worker) the system's; confirm with the text."""
        self.copy_to_clipboard(text)
        if self._system_clipboard is not None:
            tool = self._system_clipboard
            self.run_worker(lambda: tool(text), thread=True, group="clipboard", exit_on_error=False)
        self.notify(text, title="copied to the clipboard", timeout=4, markup=False)

    def action_toggle_mark(self) -> None:
        view = self.view
        contract = self.grid.highlighted_contract()
        if view is None or contract is None:
            self.notify("nothing to mark: no contract on this side at this strike", severity="warning",
                        markup=False)
            return
        key = ContractKey.of(view.snapshot.underlying, view.snapshot.as_of, contract["expiry"],
                             contract["strike"], contract["kind"])
        self.shortlist.toggle(key, contract)
        self.shortlist_changed()  # the mark in the ladder and the count in the top line say it

    def shortlist_changed(self) -> None:
        self._mark_grid()
        self.refresh_bars()

    def action_open_shortlist(self) -> None:
        from .screens import ShortlistScreen

        self.push_screen(ShortlistScreen(self.ascii_only))

    def go_to_contract(self, key: ContractKey) -> bool:
        """Show a shortlisted contract in the ladder; False (with a notice) if its snapshot is gone."""
        for i, view in enumerate(self.views):
            probe = ContractKey.of(view.snapshot.underlying, view.snapshot.as_of, key.expiry, 0.0, "call")
            if (probe.underlying, probe.as_of) == (key.underlying, key.as_of):
                pos = view.expiry_index(key.expiry)
                if pos is None:
                    break
                self._expiry_pos[i] = pos
                if self.strike_filter.active:
                    self.strike_filter = StrikeFilter()
                    self.notify("filter cleared to show the contract", timeout=2, markup=False)
                self.show_view(i)
                self.grid.cursor_to_strike(key.strike, key.kind)
                return True
        self.notify("that contract's snapshot is not loaded", severity="warning", markup=False)
        return False

    def default_export_name(self) -> str:
        return "shortlist.csv"

    def export_shortlist(self, path: str | None, overwrite: bool = False) -> None:
        """Write the shortlist to ``path`` (.md: Markdown, else CSV); ask before replacing a file."""
        if not path:
            return
        from .screens import ConfirmDialog

        target = Path(os.path.expanduser(path))
        if target.is_dir():
            self.notify(f"{target} is a folder: give a file name, e.g. {target / 'shortlist.csv'}",
                        title="not written", severity="warning", markup=False)
            return
        markdown = target.suffix.lower() in (".md", ".markdown")
        try:
            if markdown:
                self.shortlist.export_markdown(target, overwrite=overwrite, ascii_only=self.ascii_only)
            else:
                self.shortlist.export_csv(target, overwrite=overwrite)
        except TargetExistsError:
            def answer(yes: bool | None) -> None:
                if yes:
                    self.export_shortlist(path, overwrite=True)
                else:
                    self.notify("not written: the file was kept as it was", timeout=3, markup=False)

            self.push_screen(ConfirmDialog(f"{target} already exists. Replace it?"), answer)
            return
        except ChainTriageError as exc:
            self.notify(str(exc), title="not written", severity="error", markup=False)
            return
        n = len(self.shortlist)
        self.notify(f"wrote {n} contract{'s' if n != 1 else ''} to {target}", markup=False)

    # ------------------------------------------------------------ actions: looks

    def action_choose_columns(self) -> None:
        from .screens import ColumnPicker

        self.push_screen(ColumnPicker(self.columns, self.set_columns))

    def set_columns(self, keys: Sequence[str]) -> None:
        keys = known_columns(keys)
        if not keys:
            return
        self.columns = list(keys)
        self.update_layout()
        self.refresh_bars()
        self._save_settings()

    def action_toggle_plot(self) -> None:
        self.plot_pref = PLOT_HIDDEN if self.plot.display else PLOT_SHOWN
        self.update_layout()
        self.refresh_bars()
        self._save_settings()

    def action_next_theme(self) -> None:
        name = self.themes.next_name(self.chain_theme.name)
        self.apply_theme(self.themes.get(name))
        self._save_settings()
        self.notify(f"theme: {name}", timeout=2, markup=False)

    def apply_theme(self, theme: ChainTheme) -> None:
        self.chain_theme = theme
        self.theme = theme.textual_name
        self._bar_styles = BarStyles(theme)
        if self._screen_up:
            self.grid.set_theme(theme)
            self.plot.set_theme(theme)
            self.refresh_bars()

    def action_toggle_ascii(self) -> None:
        self.ascii_only = not self.ascii_only
        self.triage.set_class(self.ascii_only, "-ascii")
        self.grid.set_ascii(self.ascii_only)
        self.plot.set_ascii(self.ascii_only)
        self.refresh_bars()
        self._save_settings()
        self.notify("plain ASCII drawing" if self.ascii_only else "Unicode drawing", timeout=2, markup=False)

    # ------------------------------------------------------------ actions: other screens

    def action_show_help(self) -> None:
        from .screens import HelpScreen

        self.push_screen(HelpScreen(self.ascii_only))

    def action_show_findings(self) -> None:
        from .screens import FindingsScreen

        view = self.view
        if view is None:
            return
        self.push_screen(FindingsScreen(view.label, view.findings(), self.file_errors))

    def action_load_file(self) -> None:
        from .screens import PathPrompt

        def done(path: str | None) -> None:
            if path:
                self._start_load([os.path.expanduser(path)])

        self.push_screen(PathPrompt("open a snapshot file", hint="CSV in the chaintriage layout, or as mapped "
                                    "by --columns"), done)


def open_app(paths: Sequence[str | Path], *, overrides: SnapshotOverrides | None = None,
             column_map: ColumnMap | None = None, settings=None) -> int:
    """Run the app on snapshot files (the demo chains when ``paths`` is empty). Returns an exit status.

    Files that do not exist are reported at once; loading runs inside the app.
    """
    if not paths and not demo_files():
        error("no demo chains are bundled with this installation; give snapshot files to open")
        return EXIT_NOTHING
    usable = []
    for p in paths:
        if os.path.isfile(p) and os.access(p, os.R_OK):
            usable.append(str(p))
        else:
            error(f"{p}: {'no such file' if not os.path.exists(p) else 'not a readable file'}")
    if paths and not usable:
        error("nothing to show: no file gave a usable snapshot")
        return EXIT_NOTHING
    app = ChainTriageApp(usable, overrides=overrides, column_map=column_map, pipeline_settings=settings)
    app.run()
    for message in app.exit_messages:
        error(message)
    return app.return_code or 0
