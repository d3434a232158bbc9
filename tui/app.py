"""The Textual app a trader keeps open all day: composition and key routing.

``ChainTriageApp`` builds the state (``TriageState``) from the remembered
settings and themes, puts the triage screen (``screens.triage``) on top, runs
the loading job (``snapshot_loading``) in a worker thread, and routes every key
to the state, the triage screen or another screen (help, findings, shortlist,
dialogs). Numbers come from ``chaintriage.core``; text from files is shown as
rich Text, never markup.
"""

from __future__ import annotations

import contextlib
import gc
import os
import sys
import threading
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

from textual.app import App
from textual.screen import Screen

from chaintriage.core.confidence import DEFAULT_CONFIDENCE
from chaintriage.core.findings import ChainTriageError
from chaintriage.tui import formatting as fm
from chaintriage.tui import clipboard, snapshot_loading, terminal_signals
from chaintriage.tui.touch_jobs import TouchJobs
from chaintriage.tui.cli.common import error
from chaintriage.tui.collector import collector_paused
from chaintriage.tui.layout import PLOT_HIDDEN, PLOT_SHOWN
from chaintriage.tui.screens.triage import TriageScreen
from chaintriage.tui.settings import load_settings, save_preferences
from chaintriage.tui.shortlist import ContractKey, ShortlistEntry
from chaintriage.tui.strike_summary import copy_to_system_clipboard, summarize
from chaintriage.tui.themes import FALLBACK_THEME, ChainTheme, css_variables, load_themes, to_textual_theme
from chaintriage.tui.triage_state import TriageState
from chaintriage.tui.ladder_columns import DEFAULT_COLUMNS, known_columns, parse_sort_text, sort_text
from chaintriage.tui.widgets.ascii_drawing import use_ascii_drawing

if TYPE_CHECKING:  # pragma: no cover
    from chaintriage.core.loading import ColumnMap, SnapshotOverrides
    from chaintriage.core.snapshot import Snapshot
    from chaintriage.tui.session import SnapshotView, StrikeFilter

#: Exit status when nothing could be shown.
EXIT_NOTHING = 2
#: The command line's --confidence default (the same constant as core's and the app's): any
#: other value given there is where the range starts.
CLI_DEFAULT_CONFIDENCE = DEFAULT_CONFIDENCE
#: Seconds of loading before the moving loading indicator appears (the message is there at once,
#: drawn once). Later than a first data frame takes (the demo's ~0.6 s, a 200,000-contract chain's ~1 s):
#: until then nothing on the screen's thread competes with the loading worker for the interpreter.
SPINNER_DELAY = 1.5


#: The interpreter's switch interval (seconds) while loading work runs beside the screen: a thread that
#: wants the GIL gets it after at most this long (Python's default is 5 ms, paid at every hand-over
#: while a key is handled and a frame drawn).
LOADING_SWITCH_INTERVAL = 0.0005
_loads_lock = threading.Lock()
_loads_running = [0, 0.005]


@contextlib.contextmanager
def _ui_first():
    """While loading jobs run, a short switch interval, so the screen's thread waits little for the GIL."""
    with _loads_lock:
        if _loads_running[0] == 0:
            _loads_running[1] = sys.getswitchinterval()
            sys.setswitchinterval(min(LOADING_SWITCH_INTERVAL, _loads_running[1]))
        _loads_running[0] += 1
    try:
        yield
    finally:
        with _loads_lock:
            _loads_running[0] -= 1
            if _loads_running[0] == 0:
                sys.setswitchinterval(_loads_running[1])


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
    /* Below NARROW_WIDTH columns notices sit over the header lines, not over the ladder's figures. */
    App.-narrow ToastRack { dock: top; align: right top; margin-bottom: 0; }
    App.-narrow Toast { padding: 0 1; margin-top: 0; max-width: 60%; }
    /* ASCII drawing: dialog frames, notice bars. */
    App.-ascii .dialog { border: ascii $ct-accent; }
    App.-ascii Toast { border-left: ascii $ct-accent; }
    App.-ascii Toast.-warning { border-left: ascii $ct-warning; }
    App.-ascii Toast.-error { border-left: ascii $ct-error; }
    """

    #: Below this many columns, notices go at the top (over the header lines) instead of over the ladder.
    NARROW_WIDTH = 120

    def __init__(self, paths: Sequence[str | Path] = (), *, snapshots: Sequence[Snapshot] | None = None,
                 views: Sequence[SnapshotView] | None = None,
                 overrides: SnapshotOverrides | None = None, column_map: ColumnMap | None = None,
                 pipeline_settings: Any = None,
                 system_clipboard: Callable[[str], object] | None = copy_to_system_clipboard,
                 events: Sequence[Any] | None = None, histories: Sequence[str] | None = None,
                 history_column_map: Any = None) -> None:
        super().__init__()
        #: Daily price history files (None: the demo's when the demo is shown, else none), their mapping,
        #: and the files as read (``history_view.HistoryFiles``: read once, by the first view that needs them).
        self._history_paths = list(histories) if histories is not None else None
        self._history_column_map = history_column_map
        self._history_files: Any = None  # history_view.HistoryFiles, made by the first load that needs it
        self._history_files_lock = threading.Lock()
        #: Scheduled events (core.events.Event) of every underlying; None: the demo's when showing the demo.
        self._events = list(events) if events is not None else None
        self._paths = [str(p) for p in paths]
        self._given_snapshots = list(snapshots) if snapshots is not None else None
        self._given_views = list(views) if views is not None else None
        self._overrides = overrides
        self._column_map = column_map
        #: Each file's own column mapping (None: our own layout), by real path: a mapping
        #: belongs to the files it was given for.
        self._file_maps: dict[str, ColumnMap | None] = {os.path.realpath(p): column_map for p in self._paths}
        self._pipeline_settings = pipeline_settings
        self._system_clipboard = system_clipboard
        clipboard.reset()  # copies allowed again (a previous app in this process may have stopped them)
        self.exit_messages: list[str] = []
        # Remembered preferences and themes.
        self.settings, notices = load_settings()
        self.themes = load_themes()
        self._startup_notices = list(notices) + list(self.themes.notices)
        for theme in self.themes.themes.values():
            self.register_theme(to_textual_theme(theme))
        self.register_theme(to_textual_theme(FALLBACK_THEME))
        chain_theme = self.themes.get(self.settings.theme)
        if self.settings.theme != chain_theme.name:
            wanted = self.settings.theme if len(self.settings.theme) <= 40 else self.settings.theme[:39] + "~"
            self._startup_notices.append(f"theme {wanted!r} was not found; using {chain_theme.name!r} "
                                         "(t picks another)")
        self.theme = chain_theme.textual_name
        confidence = float(self.settings.confidence)
        given = getattr(pipeline_settings, "confidence", None)
        if given is not None and abs(given - CLI_DEFAULT_CONFIDENCE) > 1e-12:
            confidence = float(given)  # `open --confidence C` starts there
        try:
            ladder_sort = parse_sort_text(self.settings.extra.get("ladder_sort", ""))
        except ValueError as exc:
            ladder_sort = None
            self._startup_notices.append(f"settings: 'ladder_sort' {exc}; the ladder is in strike order")
        self.state = TriageState(theme=chain_theme, confidence=confidence,
                                 columns=known_columns(self.settings.columns) or list(DEFAULT_COLUMNS),
                                 ascii_only=bool(self.settings.ascii_only),
                                 plot=self.settings.extra.get("plot", ""), ladder_sort=ladder_sort)
        self._settings_unsaved = False
        self.triage = TriageScreen(self.state, id="triage")
        self._heap_released = False  # see _heap_settled
        #: Touch figures of the views this app loads are computed off the screen's thread (``touch_jobs``).
        self.touch_jobs = TouchJobs(self._start_touch_worker, self._shown_expiry, self._deliver_touch)

    # ------------------------------------------------------------ Textual hooks

    def on_resize(self, event: Any) -> None:
        self.set_class(event.size.width < self.NARROW_WIDTH, "-narrow")

    def on_mount(self) -> None:
        self.set_class(self.size.width < self.NARROW_WIDTH, "-narrow")
        self._apply_ascii_drawing()

    def _apply_ascii_drawing(self) -> None:
        ascii_only = self.state.ascii_only
        self.set_class(ascii_only, "-ascii")
        use_ascii_drawing(ascii_only)
        self.refresh(layout=True)

    def get_theme_variable_defaults(self) -> dict[str, str]:
        return {**super().get_theme_variable_defaults(), **css_variables(FALLBACK_THEME)}

    def get_default_screen(self) -> Screen:
        return self.triage

    async def screen_ready(self) -> None:
        """Called when the triage screen is mounted: start loading (the first frame is not kept waiting)."""
        terminal_signals.install(self)  # SIGTERM/SIGHUP: exit the ordinary way, terminal restored
        for notice in self._startup_notices:
            self.notify(notice, title="settings and themes", severity="warning", markup=False)
        if self._given_views:
            await self.triage.mount_body()
            for view in self._given_views:
                view.set_events(self.events)
            self.state.views.extend(self._given_views)
            self.triage.show_view(0)
            return
        # A moving indicator only when loading takes a while: its refreshes would compete with a short load.
        self.set_timer(SPINNER_DELAY, self.triage.show_spinner)
        self._start_load(self._paths, snapshots=self._given_snapshots, initial=True,
                         overrides=self._overrides)

    def notify(self, message: str, *, title: str = "", severity: Any = "information",
               timeout: float | None = None, markup: bool = False) -> None:
        """Every notice is plain text: file names, paths and messages that quote files are data,
        so escape sequences and control characters are removed and nothing is read as markup."""
        super().notify(fm.clean_text(message, keep_newlines=True), title=fm.clean_text(title),
                       severity=severity, timeout=timeout, markup=False)

    # ------------------------------------------------------------ loading (worker threads)

    def _start_load(self, paths: Sequence[str], *, snapshots: Sequence[Snapshot] | None = None,
                    initial: bool = False, overrides: SnapshotOverrides | None = None) -> None:
        self.state.loads_running += 1
        what = "the demo chains" if not paths and snapshots is None else \
            ", ".join(os.path.basename(p) for p in paths) if paths else "the snapshots"
        self.triage.set_busy(f"loading {what}")

        def start() -> None:
            self.run_worker(lambda: self._load_job(list(paths), snapshots, initial, overrides),
                            thread=True, group="load", name="load", exit_on_error=False)

        if initial:  # after the first frame: the worker's imports would hold the GIL while it is drawn
            self.call_after_refresh(start)
        else:
            start()

    def _companions(self, snapshot: Snapshot) -> list[tuple[str, ColumnMap | None]]:
        """Files (with their mappings) of a snapshot already shown at ``snapshot``'s underlying and instant."""
        for view in list(self.state.views):
            shown = view.snapshot
            if (shown.underlying, shown.as_of) == (snapshot.underlying, snapshot.as_of) \
                    and set(shown.sources) != set(snapshot.sources):
                return [(p, self._file_maps.get(os.path.realpath(p))) for p in shown.sources]
        return []

    def _shown_file(self, path: str) -> int | None:
        """The index of the snapshot that already holds file ``path`` (same real path), or None."""
        real = os.path.realpath(path)
        for i, view in enumerate(self.state.views):
            if any(os.path.realpath(p) == real for p in view.snapshot.sources):
                return i
        return None

    def _load_job(self, paths: list[str], snapshots: Sequence[Snapshot] | None, initial: bool,
                  overrides: SnapshotOverrides | None) -> None:
        """Worker thread: the numerical modules, then ``snapshot_loading.load_views``, each view handed
        to the screen as it is ready."""
        if not self.triage.body_ready:
            # The screen's modules and widgets first, then the imports with the collector paused, frozen
            # as they are: its passes over the growing heap cost ~30 ms of the start, and the imports
            # leave almost no cyclic garbage (a few hundred objects), so none is looked for.
            self._heap_settled(young=False)
            with collector_paused():
                snapshot_loading.import_numerical_modules()
                self._heap_settled(young=False)
            self.call_from_thread(self.triage.mount_body)

        errors: list[str] = []

        def prepare(view: SnapshotView, touched: Sequence = ()) -> None:
            """What showing a view needs, worked out here, off the screen's thread (all of it cached).

            Touch figures come from the touch worker, after the view is drawn (the first frame waits
            neither for them nor for the modules they need), except those of ``touched`` expiries
            (shown already in the view this one replaces: computed here, so they stay on screen)."""
            view.finding_groups()  # the findings screen opens at once
            try:
                # The header's event marks need the term structure: of the whole chain (a first expiry
                # shown alone gets none; its ex-event vol would come from that expiry alone).
                view.set_events([] if view.partial else self.events)
                view.annotated.prepare_touch()  # before touch figures are computed in another thread
                for expiry in touched:
                    view.annotated.touch(expiry)  # not on screen yet: no one else reads it
                view.touch_later = self.touch_jobs.ask
                if view.expiries:
                    view.info(0, self.state.confidence)  # a new view, or a big chain's whole, opens at its first
                    view.header_infos()
                    if not view.touch_pending(view.expiries[0]):  # else the screen asks for them, once drawn
                        view.frame(view.expiries[0])
            except Exception:  # noqa: BLE001 - the screen works it out again and says what is wrong, as before
                view.touch_later = self.touch_jobs.ask

        def on_view(view: SnapshotView, first: bool) -> None:
            prepare(view)
            self._heap_settled()
            drawn = threading.Event()
            self.call_from_thread(self._add_view, view, first, drawn)
            # Let the screen draw before more model work competes with it for the interpreter.
            drawn.wait(2.0)
            # Its price history next, before the other expiries' background work (a first expiry shown
            # alone: the whole chain that takes its place gets it).
            figures = None if view.partial else self._history_figures(view, errors)
            if figures is not None:
                self.call_from_thread(self._set_history, view, *figures)

        def on_replace(partial: SnapshotView, whole: SnapshotView) -> None:
            figures = self._history_figures(whole, errors)
            if figures is not None:  # not on screen yet: attached here, so the swap keeps the history shown
                whole.set_history(*figures)
            prepare(whole, touched=list(partial.annotated.touched))
            self._heap_settled()
            self.call_from_thread(self._replace_view, partial, whole)

        maps = [self._file_maps.get(os.path.realpath(p)) for p in paths] if paths else None
        with _ui_first():
            load_errors, added = snapshot_loading.load_views(
                paths, snapshots=snapshots, overrides=overrides,
                column_map=self._column_map if not paths else None, column_maps=maps,
                companions=None if initial else self._companions, pipeline_settings=self._pipeline_settings,
                confidence=lambda: self.state.confidence,
                on_busy=lambda text: self.call_from_thread(self.triage.set_busy, text), on_view=on_view,
                on_replace=on_replace)
        self._heap_settled()
        self.call_from_thread(self._load_done, load_errors + errors, added, initial)

    def _heap_settled(self, young: bool = True) -> None:
        """Leave the objects alive now (modules, widgets, loaded views) out of the cycle collector's
        future passes (``gc.freeze``): a full pass over a big chain's heap (~150,000 objects) holds the
        interpreter 60-150 ms, the screen's thread included, whichever thread triggers it; frozen objects
        are still freed by reference counting, and are handed back to the collector when the app stops
        (``on_unmount``). With ``young``, young cyclic garbage is collected first (a few ms)."""
        if self._heap_released:
            return
        if young:
            gc.collect(1)
        gc.freeze()

    def on_unmount(self) -> None:
        """The app stops: what loading froze goes back to the cycle collector (a process that runs
        several apps, as the tests do, frees each one's cyclic garbage)."""
        self._heap_released = True
        gc.unfreeze()

    # ------------------------------------------------------------ touch figures (a worker thread)

    def _start_touch_worker(self) -> None:
        """A thread for ``touch_jobs``; asked on the screen's thread, it starts after the next frame is
        drawn (that frame does not share the interpreter with it)."""
        def run() -> None:
            with _ui_first():  # keys and frames get the interpreter at once meanwhile
                self.touch_jobs.run()

        thread = threading.Thread(target=run, name="touch", daemon=True)
        if getattr(self, "_thread_id", None) == threading.get_ident():
            self.call_after_refresh(thread.start)
        else:
            thread.start()

    def _shown_expiry(self) -> tuple[SnapshotView, Any] | None:
        """(view, expiry) on screen, read from the touch worker: computed first."""
        view, expiry = self.state.view, self.state.current_expiry
        return None if view is None or expiry is None else (view, expiry)

    def _deliver_touch(self, view: SnapshotView, computed: dict) -> bool:
        """Touch worker: hand figures to the screen's thread (waits until written); False once the app is gone."""
        try:
            self.call_from_thread(self._touch_arrived, view, computed)
        except Exception:  # noqa: BLE001 - the app has stopped (or is stopping)
            return False
        return True

    def _touch_arrived(self, view: SnapshotView, computed: dict) -> None:
        view.touch_arrived(computed)
        shown = self.state.findings_changed(view)  # touch findings join the count
        if shown and self.state.current_expiry in computed:
            self.triage.show_expiry()

    def _touch_on_screen_now(self) -> None:
        """Copy and mark take the figures shown: when the shown expiry's touch figures are still being
        computed, compute them here first (the key that asks waits; an expiry switch never does)."""
        view, expiry = self.state.view, self.state.current_expiry
        if view is not None and expiry is not None and view.touch_pending(expiry):
            try:
                got = view.annotated.compute_touch(expiry)
            except Exception:  # noqa: BLE001 - touch_arrived leaves it to frame(), which says what is wrong
                got = None
            view.touch_arrived({expiry: got})
            self.triage.show_expiry()

    def _history_paths_in_use(self) -> list[str] | None:
        """History files to read: those given, else the demo's when the demo is shown (None), else none ([])."""
        if self._history_paths is not None:
            return self._history_paths
        demo = not self._paths and self._given_snapshots is None and self._given_views is None
        return None if demo else []

    def _history_figures(self, view: SnapshotView, errors: list[str]) -> tuple[Any, list] | None:
        """Worker thread: ``view``'s price history figures and findings (the files are read by the first
        call, once; each snapshot is cut to its own day), None when no history files are in use. The
        reading's error messages are added to ``errors``."""
        paths = self._history_paths_in_use()
        if paths == []:
            return None
        from chaintriage.tui import history_view

        with self._history_files_lock:
            if self._history_files is None:
                self._history_files = history_view.HistoryFiles(paths, column_map=self._history_column_map)
            files = self._history_files
        errors += files.read()
        return files.figures(view, self.events)

    def _set_history(self, view: SnapshotView, vh: Any, findings: list) -> None:
        view.set_history(vh, findings)
        if self.state.findings_changed(view):
            self.triage.show_expiry()
        self.triage.refresh_bars()

    def _add_view(self, view: SnapshotView, select: bool, drawn: threading.Event | None = None) -> None:
        view.set_events([] if view.partial else self.events)
        st = self.state
        key = (view.snapshot.underlying, view.snapshot.as_of)
        same = [i for i, v in enumerate(st.views) if (v.snapshot.underlying, v.snapshot.as_of) == key]
        if same:  # merged with a snapshot already shown: it takes that one's place
            index = same[0]
            st.replace_view(index, view)
            self.triage.show_view(index)
        elif select or st.view_index < 0:
            st.views.append(view)
            self.triage.show_view(len(st.views) - 1)
        else:
            st.views.append(view)
            self.triage.refresh_bars()
        if drawn is not None:
            self.call_after_refresh(drawn.set)

    def _replace_view(self, partial: SnapshotView, whole: SnapshotView) -> None:
        """Swap the first-expiry view of a big chain for the whole chain, at the same expiry."""
        st = self.state
        index = next((i for i, v in enumerate(st.views) if v is partial), None)
        if index is None:
            return
        expiry = partial.expiries[st.expiry_positions.get(index, 0)] if partial.expiries else None
        st.replace_view(index, whole)
        if expiry is not None:
            st.expiry_positions[index] = whole.nearest_expiry_index(expiry)
        if st.view_index == index:
            self.triage.show_expiry()
        else:
            self.triage.refresh_bars()

    def _load_done(self, errors: list[str], added: int, initial: bool) -> None:
        st = self.state
        st.loads_running = max(0, st.loads_running - 1)
        if not st.loads_running:
            st.busy = ""
        st.file_errors.extend(errors)
        if initial and not st.views:
            self.exit_messages = errors + ["nothing to show: no file gave a usable snapshot"]
            self.exit(return_code=EXIT_NOTHING)
            return
        for message in errors:
            self.notify(message, title="could not open", severity="error", timeout=10, markup=False)
        if not initial and added:
            self.notify(f"opened {added} snapshot{'s' if added != 1 else ''}", markup=False)
        self.triage.refresh_bars()

    # ------------------------------------------------------------ settings

    def _save_settings(self) -> None:
        st = self.state
        try:
            save_preferences(self.settings, theme=st.theme.name, ascii_only=st.ascii_only, columns=st.columns,
                             confidence=st.confidence, plot=st.plot_pref, ladder_sort=sort_text(st.ladder_sort))
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
        notice = self.state.step_expiry(step)
        if notice:
            self.notify(notice, timeout=1.5, markup=False)
        elif notice is None:
            self.triage.show_expiry()

    def action_next_snapshot(self) -> None:
        self._step_snapshot(+1)

    def action_previous_snapshot(self) -> None:
        self._step_snapshot(-1)

    def _step_snapshot(self, step: int) -> None:
        index = self.state.step_snapshot(step)
        if index is None:
            self.notify("one snapshot is loaded; l opens another file", timeout=2, markup=False)
            return
        self.triage.show_view(index)

    # ------------------------------------------------------------ actions: filter and range

    def action_set_filter(self) -> None:
        from chaintriage.tui.screens.filter_dialog import FilterDialog

        def done(flt: StrikeFilter | None) -> None:
            if flt is not None:
                self.set_filter(flt)

        self.push_screen(FilterDialog(self.state.strike_filter), done)

    def set_filter(self, flt: StrikeFilter) -> None:
        self.state.strike_filter = flt
        self.triage.show_expiry()

    def action_clear_filter(self) -> None:
        if self.state.strike_filter.active:
            self.state.clear_filter()
            self.triage.show_expiry()

    def action_confidence_up(self) -> None:
        self._step_confidence(+1)

    def action_confidence_down(self) -> None:
        self._step_confidence(-1)

    def _step_confidence(self, step: int) -> None:
        notice = self.state.step_confidence(step)
        if notice:
            self.notify(notice, timeout=1.5, markup=False)
            return
        self.triage.refresh_bars()
        self._save_settings()

    # ------------------------------------------------------------ actions: copy and shortlist

    def action_copy_summary(self) -> None:
        if not self.triage.body_ready:
            return
        from chaintriage.tui.session import market_figures

        self._touch_on_screen_now()
        view = self.state.view
        grid = self.triage.grid
        contract = market_figures(grid.highlighted_contract())
        if view is None or contract is None:
            self.notify(f"nothing to copy: {self._no_contract_reason()}", severity="warning", markup=False)
            return
        self.copy_contract(view, contract)

    def copy_contract(self, view: SnapshotView, contract: dict) -> None:
        """Copy one contract's summary (a contracts-table row of ``view``) with its expiry's forward and days."""
        index = view.expiry_index(contract["expiry"])
        info = view.info(index, self.state.confidence) if index is not None else None
        text = summarize(contract, as_of=view.snapshot.as_of, underlying=view.snapshot.underlying,
                         ascii_only=self.state.ascii_only, spot=view.snapshot.spot,
                         forward=info.forward if info else None, days=info.calendar_days if info else None)
        self.copy_text(text)

    def _no_contract_reason(self) -> str:
        """Why no contract is highlighted (the same words for copy and mark)."""
        hl = self.triage.grid.highlighted if self.state.view is not None else None
        return f"no {hl[1]} quoted at this strike" if hl else "no contract highlighted (the ladder is empty)"

    def copy_entry(self, entry: ShortlistEntry) -> None:
        k = entry.key
        row = dict(entry.figures, underlying=k.underlying, expiry=k.expiry, strike=k.strike, kind=k.kind)
        self.copy_text(summarize(row, as_of=k.as_of, ascii_only=self.state.ascii_only,
                                 spot=entry.figures.get("spot"), forward=entry.figures.get("forward")))

    def copy_text(self, text: str) -> None:
        """Copy to the terminal's clipboard and (in a daemon thread) the system's; then say what happened.

        The system clipboard tools run as child processes that quitting stops (``clipboard.stop_all``),
        so a hanging tool never holds up ``q``.
        """
        self.copy_to_clipboard(text)
        if self._system_clipboard is None:
            self.notify(self._copy_notice(text), title="sent to the terminal's clipboard", timeout=4, markup=False)
            return

        def done(outcome: clipboard.CopyOutcome) -> None:
            try:
                self.call_from_thread(self._copy_done, text, outcome)
            except RuntimeError:  # the app has stopped meanwhile
                pass

        clipboard.copy_in_background(self._system_clipboard, text, done)

    #: Characters of the copied text a notice shows below NARROW_WIDTH columns (about two lines there).
    NARROW_COPY_NOTICE = 88

    def _copy_notice(self, text: str) -> str:
        """The copied text as its notice shows it: whole on a wide terminal, its start on a narrow one
        (so the notice stays over the header lines, not over the ladder's figures)."""
        if self.size.width >= self.NARROW_WIDTH or len(text) <= self.NARROW_COPY_NOTICE:
            return text
        return text[:self.NARROW_COPY_NOTICE - 1].rstrip() + ("~" if self.state.ascii_only else "…")

    def _copy_done(self, text: str, outcome: clipboard.CopyOutcome) -> None:
        if outcome.ok:
            self.notify(self._copy_notice(text), title="copied to the clipboard", timeout=4, markup=False)
        else:
            self.notify(f"{self._copy_notice(text)}\n{outcome.summary()}; sent only to the terminal's clipboard "
                        "(pasting works "
                        "where the terminal allows programs to set it)", title="not copied by a clipboard tool",
                        severity="warning", timeout=8, markup=False)

    def exit(self, *args: Any, **kwargs: Any) -> None:
        """Stop: clipboard tools still running are killed first, so none holds up quitting."""
        clipboard.stop_all()
        self.touch_jobs.close()
        super().exit(*args, **kwargs)

    def action_toggle_mark(self) -> None:
        if not self.triage.body_ready:
            return
        from chaintriage.tui.session import market_figures

        self._touch_on_screen_now()
        view = self.state.view
        contract = market_figures(self.triage.grid.highlighted_contract())
        if view is None or contract is None:
            self.notify(f"nothing to mark: {self._no_contract_reason()}", severity="warning", markup=False)
            return
        self._toggle_shortlist(view, contract)

    def _toggle_shortlist(self, view: SnapshotView, contract: dict) -> None:
        """Set a contract (a contracts-table row) aside, or take it off; spot and its expiry's forward go with it."""
        key = ContractKey.of(view.snapshot.underlying, view.snapshot.as_of, contract["expiry"],
                             contract["strike"], contract["kind"])
        pos = view.expiry_index(contract["expiry"])
        forward = view.info(pos, self.state.confidence).forward if pos is not None else None
        self.state.shortlist.toggle(key, dict(contract, spot=view.snapshot.spot, forward=forward))
        self.shortlist_changed()  # the mark in the ladder and the count in the top line say it

    def shortlist_changed(self) -> None:
        self.triage.mark_grid()
        self.triage.refresh_bars()

    def action_open_shortlist(self) -> None:
        from chaintriage.tui.screens.shortlist import ShortlistScreen

        st = self.state

        def remember(row: int) -> None:
            st.shortlist_row = row

        self.push_screen(ShortlistScreen(st.shortlist, st.ascii_only,
                                         on_change=self.shortlist_changed, copy_entry=self.copy_entry,
                                         go_to=self.go_to_contract, cursor=st.shortlist_row,
                                         on_cursor=remember))

    def go_to_contract(self, key: ContractKey) -> bool:
        """Show a shortlisted contract in the ladder; False (with a notice) if its snapshot is gone."""
        st = self.state
        where = st.locate(key)
        if where is None:
            self.notify("that contract's snapshot is not loaded", severity="warning", markup=False)
            return False
        index, pos = where
        st.expiry_positions[index] = pos
        if st.strike_filter.active and not self._filter_passes(index, pos, key):
            st.clear_filter()
            self.notify("filter cleared to show the contract", timeout=2, markup=False)
        self.triage.show_view(index, expiry=st.views[index].expiries[pos])
        self.triage.grid.cursor_to_strike(key.strike, key.kind)
        return True

    def _filter_passes(self, index: int, pos: int, key: ContractKey) -> bool:
        """True when the strike filter keeps ``key``'s strike in its expiry's ladder."""
        view = self.state.views[index]
        shown, _ = self.state.strike_filter.apply(view.frame(view.expiries[pos]))
        try:
            strikes = shown["strike"].to_numpy(dtype=float)
        except (KeyError, TypeError, ValueError):
            return False
        return bool(len(strikes)) and bool((abs(strikes - key.strike) <= 1e-9 * max(1.0, abs(key.strike))).any())

    # ------------------------------------------------------------ actions: looks

    def action_choose_columns(self) -> None:
        from chaintriage.tui.screens.column_picker import ColumnPicker

        self.push_screen(ColumnPicker(self.state.columns, self.set_columns, ascii_only=self.state.ascii_only))

    def set_columns(self, keys: Sequence[str]) -> None:
        keys = known_columns(keys)
        if not keys:
            return
        self.state.columns = list(keys)
        self.triage.update_layout()
        self.triage.refresh_bars()
        self._save_settings()

    def action_sort_ladder(self) -> None:
        """Sort the ladder by a shown column of the selected side, or back to strike order (key z)."""
        from chaintriage.tui.screens.sort_chooser import STRIKE_ORDER, SortChooser

        if not self.triage.body_ready or self.state.view is None:
            return
        grid = self.triage.grid
        side = grid.selected_kind

        def done(choice: tuple[str, bool] | None) -> None:
            if choice is None:
                return
            key, descending = choice
            grid.set_sort(None if key == STRIKE_ORDER else (key, side, descending))
            if grid.sort != self.state.ladder_sort:
                self.state.ladder_sort = grid.sort
                self._save_settings()

        self.push_screen(SortChooser(grid.columns, side, grid.sort, ascii_only=self.state.ascii_only), done)

    def action_toggle_plot(self) -> None:
        if not self.triage.body_ready:
            return
        self.state.plot_pref = PLOT_HIDDEN if self.triage.plot.display else PLOT_SHOWN
        self.triage.update_layout()
        self.triage.refresh_bars()
        self._save_settings()
        if self.state.plot_pref == PLOT_SHOWN and not self.triage.plot.display:
            self.notify("the plot shows once the terminal is wide enough for it beside the quotes; "
                        "v again hides it for good", timeout=4, markup=False)

    def action_next_theme(self) -> None:
        name = self.themes.next_name(self.state.theme.name)
        self.apply_theme(self.themes.get(name))
        self._save_settings()
        self.notify(f"theme: {name}", timeout=2, markup=False)

    def apply_theme(self, theme: ChainTheme) -> None:
        self.state.theme = theme
        self.theme = theme.textual_name
        self.triage.apply_theme(theme)

    def action_toggle_ascii(self) -> None:
        self.state.ascii_only = not self.state.ascii_only
        self._apply_ascii_drawing()
        self.triage.apply_ascii()
        self._save_settings()
        self.notify("plain ASCII drawing" if self.state.ascii_only else "Unicode drawing", timeout=2,
                    markup=False)

    # ------------------------------------------------------------ actions: other screens

    def action_show_help(self) -> None:
        from chaintriage.tui.screens.help import HelpScreen

        self.push_screen(HelpScreen(self.state.ascii_only))

    def action_show_findings(self) -> None:
        from chaintriage.tui.screens.findings import FindingsScreen

        view = self.state.view
        if view is None:
            return
        self.push_screen(FindingsScreen(view.label, view.findings(), self.state.file_errors,
                                        groups=view.finding_groups()))

    @property
    def events(self) -> list:
        """The scheduled events in use: those given, else the demo's when the demo is shown."""
        if self._events is None:
            self._events = snapshot_loading.demo_events() if not self._paths and \
                self._given_snapshots is None and self._given_views is None else []
        return self._events

    def action_show_terms(self) -> None:
        from chaintriage.tui.screens.term_structure import TermStructureScreen

        view = self.state.view
        if view is None:
            return
        ts = view.term_structure()
        days = view.annotated.expiries["trading_days"].tolist()
        index = self.state.view_index

        def choose(expiry) -> None:
            if self.state.view_index == index and view.expiries:
                self.state.expiry_positions[index] = view.nearest_expiry_index(expiry)
                self.triage.show_expiry()

        self.push_screen(TermStructureScreen(view.label, ts, view.snapshot.spot, days, self.state.current_expiry,
                                             choose, theme=self.state.theme, ascii_only=self.state.ascii_only,
                                             past_moves=view.history.past_moves if view.history is not None else None,
                                             with_history=view.history is not None))

    def action_show_history(self) -> None:
        from chaintriage.tui.screens.history import HistoryScreen

        view = self.state.view
        if view is None:
            return
        if view.history is None:
            busy = self.state.loads_running and self._history_paths_in_use() != []
            self.notify("the price history is still being read" if busy else
                        "no price history for this underlying (open with --history FILE)", timeout=3, markup=False)
            return
        self.push_screen(HistoryScreen(view, view.history, theme=self.state.theme, ascii_only=self.state.ascii_only))

    def action_toggle_paths(self) -> None:
        """The side pane: the distribution at expiry, or a fan of simulated history paths."""
        if not self.triage.body_ready:
            return
        st = self.state
        st.show_paths = not st.show_paths
        if not self.triage.plot.display:
            self.notify("the side pane is hidden (v shows it); it will show "
                        + ("the paths" if st.show_paths else "the distribution"), timeout=3, markup=False)
        self.triage.update_plot()

    #: (view, expiry) whose paths are being simulated, so a key press does not start a second run.
    _fan_running: Any = None

    def show_paths(self) -> None:
        """Draw the path fan of the current expiry in the side pane; simulate it first (in a worker
        thread, progress in the pane) when it is not cached."""
        st = self.state
        view, expiry, plot = st.view, st.current_expiry, self.triage.plot
        if view is None or expiry is None:
            return
        if view.history is None:
            busy = st.loads_running and self._history_paths_in_use() != []
            plot.clear(" reading the price history ..." if busy else
                       " no price history for this underlying: open with --history FILE to see paths (p: back)")
            return
        fan = view.history.fans.get(expiry)
        if fan is None:
            if self._fan_running != (id(view), expiry):
                self._start_fan(view, expiry)
            return
        from chaintriage.tui.widgets.path_fan import draw_path_fan

        strike, kind, p_market = self.triage._highlight()
        info = view.info(st.expiry_pos, st.confidence)
        dist = view.distribution(expiry)
        p_hist = fan.p_beyond(strike, kind == "call") if strike is not None else None
        confidence = st.confidence
        underlying = view.underlying

        def drawer(width, height, colors, ascii_only):
            return draw_path_fan(fan, width=width, height=height, colors=colors, ascii_only=ascii_only,
                                 underlying=underlying, strike=strike, kind=kind, confidence=confidence,
                                 p_market=p_market, market_range=info.range_smile,
                                 market_strikes=dist.strikes if dist is not None else None,
                                 market_density=dist.density if dist is not None else None,
                                 p_beyond=p_hist, history_range=fan.central_range(confidence))

        plot.show_drawing(drawer)

    def _start_fan(self, view: SnapshotView, expiry) -> None:
        self._fan_running = (id(view), expiry)
        plot = self.triage.plot
        und = view.underlying
        plot.clear(f" simulating paths from {und}'s days ...")

        def progress(share: float) -> None:
            self.call_from_thread(self._fan_progress, view, expiry, share)

        def job() -> None:
            try:
                view.history.fan(view, expiry, progress)
                error = ""
            except ChainTriageError as exc:
                error = str(exc)
            self.call_from_thread(self._fan_done, view, expiry, error)

        self.run_worker(job, thread=True, group="paths", name="paths", exit_on_error=False)

    def _fan_progress(self, view: SnapshotView, expiry, share: float) -> None:
        st = self.state
        if st.show_paths and st.view is view and st.current_expiry == expiry and self.triage.body_ready:
            self.triage.plot.clear(f" simulating paths from {view.underlying}'s days: {100 * share:.0f}%")

    def _fan_done(self, view: SnapshotView, expiry, error: str) -> None:
        if self._fan_running == (id(view), expiry):
            self._fan_running = None
        st = self.state
        if not (st.show_paths and st.view is view and st.current_expiry == expiry):
            return
        if error or view.history.fans.get(expiry) is None:
            self.triage.plot.clear(f" no paths: {error or 'this expiry has no trading days or forward'}")
            return
        self.show_paths()

    def action_toggle_ex_event(self) -> None:
        """P(beyond) and the ranges on the ex-event vol for expiries that carry events, or back."""
        st = self.state
        if not st.ex_event and st.view is not None and not any(
                st.view.info(i, st.confidence).events for i in range(len(st.view.expiries))):
            self.notify("no expiry of this snapshot carries a scheduled event (open with --events FILE)",
                        timeout=3, markup=False)
            return
        st.ex_event = not st.ex_event
        self.triage.show_expiry()
        self.notify("ex-event view: P(beyond) and ranges on the ex-event vol where an event is carried"
                    if st.ex_event else "market view: P(beyond) and ranges as priced", timeout=2, markup=False)

    def action_show_targets(self) -> None:
        """The target view: per expiry, the contract nearest a target (key r)."""
        from chaintriage.tui.screens.target_view import TargetViewScreen, initial_target

        st = self.state
        view = st.view
        if view is None or not self.triage.body_ready or not view.expiries:
            return
        target = initial_target(st.target, self.triage.grid.selected_kind, st.strike_filter)
        snap = view.snapshot

        def open_ladder(expiry, strike: float, kind: str) -> None:
            self.go_to_contract(ContractKey.of(snap.underlying, snap.as_of, expiry, strike, kind))

        def mark(contract: dict) -> None:
            self._toggle_shortlist(view, contract)

        def copy(contract: dict) -> None:
            self.copy_contract(view, contract)

        def remember(chosen) -> None:
            st.target = chosen

        self.push_screen(TargetViewScreen(view, target, on_open=open_ladder, shortlist=st.shortlist, on_mark=mark,
                                          on_copy=copy,
                                          on_target=remember, current_expiry=st.current_expiry,
                                          theme=st.theme, ascii_only=st.ascii_only))

    def action_load_file(self) -> None:
        from chaintriage.tui.screens.path_prompt import PathPrompt

        def done(answer: tuple[str, str] | None) -> None:
            if not answer or not answer[0]:
                return
            path = os.path.expanduser(answer[0])
            mapping = os.path.expanduser(answer[1]) if answer[1] else ""
            shown = self._shown_file(path)
            if shown is not None:  # the same file again: no second copy (the command line merges it too)
                self.notify(f"{os.path.basename(path)} is already open: showing it", timeout=3, markup=False)
                self.triage.show_view(shown)
                return
            column_map = None
            if mapping:
                from chaintriage.core.loading import load_column_map

                try:
                    column_map = load_column_map(mapping)
                except ChainTriageError as exc:
                    self.notify(str(exc), title="could not open", severity="error", timeout=10, markup=False)
                    return
            self._file_maps[os.path.realpath(path)] = column_map
            self._start_load([path])

        self.push_screen(PathPrompt("open a snapshot file",
                                    hint="CSV or Parquet in chaintriage's layout; for other headers, a mapping "
                                         "file (as --columns takes) for this file only",
                                    second=("column mapping", "optional: MAP.toml")), done)


def open_app(paths: Sequence[str | Path], *, overrides: SnapshotOverrides | None = None,
             column_map: ColumnMap | None = None, settings=None, events: Sequence[Any] | None = None,
             histories: Sequence[str] | None = None, history_column_map: Any = None) -> int:
    """Run the app on snapshot files (the demo chains when ``paths`` is empty). Returns an exit status.

    Files that do not exist are reported at once; loading runs inside the app.
    """
    if not paths and not snapshot_loading.demo_files():
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
    app = ChainTriageApp(usable, overrides=overrides, column_map=column_map, pipeline_settings=settings,
                         events=events, histories=histories, history_column_map=history_column_map)
    app.run()
    for message in app.exit_messages:
        error(message)
    return app.return_code or 0
