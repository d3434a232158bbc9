"""The triage screen: the strike ladder of one expiry, its header lines and the distribution pane.

Layout, top to bottom: a line naming the snapshot shown (and findings,
shortlist, work in progress); the current expiry's header (days left,
forward, ATM IV, the range at the chosen confidence, fit quality, findings);
the filter line; then the strike ladder (StrikeGrid) with the distribution
pane (DistributionPlot) beside it; the key line at the bottom. Until the
first snapshot is ready, a loading message stands in for the ladder.

The first frame needs only Textual: the ladder and the plot (which need
numpy) are mounted by ``mount_body`` once the loading job has imported the
numerical modules (``body_ready`` says whether they are there).

The screen draws a ``TriageState``; its keys call the app's actions, which
change the state and ask the screen to draw it again. Text from files is
shown as rich Text, never markup.
"""

from __future__ import annotations

import contextlib
import inspect
from typing import TYPE_CHECKING

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.css.scalar import Scalar
from textual.screen import Screen
from textual.widgets import LoadingIndicator, Static

from chaintriage.tui import formatting as fm
from chaintriage.tui.ladder_columns import COLUMNS
from chaintriage.tui.layout import PLOT_HIDDEN, PLOT_SHOWN, plan_layout
from chaintriage.tui.themes import ChainTheme
from chaintriage.tui.triage_state import TriageState
from chaintriage.tui.widgets.info_bars import BarStyles, InfoBar, expiry_pieces, filter_pieces, top_pieces
from chaintriage.tui.widgets.key_line import KeyLine

#: Seconds between two frames of the moving loading indicator: each takes the interpreter from the
#: loading worker for a screen update (~1-2 ms), so it moves slowly (Textual's default is 1/16 s).
SPINNER_FRAME_SECONDS = 0.25


class SlowLoadingIndicator(LoadingIndicator):
    """Textual's loading indicator, redrawn at most every ``SPINNER_FRAME_SECONDS``."""

    @property
    def auto_refresh(self) -> float | None:
        return LoadingIndicator.auto_refresh.fget(self)

    @auto_refresh.setter
    def auto_refresh(self, interval: float | None) -> None:
        LoadingIndicator.auto_refresh.fset(self, None if interval is None else max(interval, SPINNER_FRAME_SECONDS))


if TYPE_CHECKING:  # pragma: no cover
    from chaintriage.tui.widgets.distribution_plot import DistributionPlot
    from chaintriage.tui.widgets.strike_grid import StrikeGrid


class TriageScreen(Screen):
    """The main screen: draws ``state``; its keys call the app's actions."""

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
        Binding("y", "app.show_terms", "vols by expiry", show=False),
        Binding("h", "app.show_history", "history", show=False),
        Binding("p", "app.toggle_paths", "paths", show=False),
        Binding("n", "app.toggle_ex_event", "ex-event", show=False),
        Binding("r", "app.show_targets", "targets"),
        Binding("z", "app.sort_ladder", "sort", show=False),
        Binding("l", "app.load_file", "open file", show=False),
        Binding("q", "app.quit", "quit"),
    ]

    def __init__(self, state: TriageState, *, id: str | None = None) -> None:
        super().__init__(id=id)
        self.state = state
        self.is_up = False
        self.body_ready = False
        self._bar_styles = BarStyles(state.theme)
        #: The expiry header's pieces by (info, the widest infos, styles, ASCII), with those kept alive.
        self._expiry_bars: dict[tuple, tuple] = {}

    def compose(self) -> ComposeResult:
        st = self.state
        yield InfoBar(id="topbar")
        yield InfoBar(id="expirybar")
        yield InfoBar(id="filterbar")
        yield Horizontal(id="body")
        with Vertical(id="loading"):
            yield Static(Text("starting"), id="loading-msg")
        yield KeyLine()

    async def on_mount(self) -> None:
        self.is_up = True
        self.set_class(self.state.ascii_only, "-ascii")
        self.show_body(False)
        self.refresh_bars()
        ready = getattr(self.app, "screen_ready", None)
        result = ready() if ready is not None else None
        if inspect.isawaitable(result):
            await result

    async def mount_body(self) -> None:
        """Mount the ladder and the plot (imports numpy through them: call it once that is cheap)."""
        if self.body_ready:
            return
        from chaintriage.tui.widgets.distribution_plot import DistributionPlot
        from chaintriage.tui.widgets.strike_grid import StrikeGrid

        st = self.state
        await self.query_one("#body").mount(
            StrikeGrid(id="grid", theme=st.theme, columns=st.columns, ascii_only=st.ascii_only, title=False),
            DistributionPlot(id="plot", theme=st.theme, ascii_only=st.ascii_only))
        if st.ladder_sort is not None:
            self.grid.set_sort(st.ladder_sort)  # the sort kept in the settings (checked when read)
        self.body_ready = True
        self.update_layout()

    def on_resize(self) -> None:
        self.update_layout()

    def on_strike_grid_strike_highlighted(self, message) -> None:
        self.highlight_moved()

    # ------------------------------------------------------------ widgets

    @property
    def grid(self) -> StrikeGrid:
        """The ladder (only once ``body_ready``)."""
        return self.query_one("#grid")  # type: ignore[return-value]

    @property
    def plot(self) -> DistributionPlot:
        """The distribution pane (only once ``body_ready``)."""
        return self.query_one("#plot")  # type: ignore[return-value]

    def bar(self, name: str) -> InfoBar:
        return self.query_one(f"#{name}", InfoBar)

    def show_body(self, ready: bool) -> None:
        """The ladder and plot when a snapshot is ready, else the loading message."""
        ready = ready and self.body_ready
        self.query_one("#body").set_class(not ready, "-hidden")
        self.query_one("#loading").set_class(ready, "-hidden")
        if ready:
            self.grid.focus()

    # ------------------------------------------------------------ loading

    def show_spinner(self) -> None:
        """A moving indicator under the loading message (only while nothing is shown yet)."""
        if not self.state.views:
            self.query_one("#loading").mount(SlowLoadingIndicator(), before=0)

    def set_busy(self, text: str) -> None:
        """Say what the background work is doing ("" when idle)."""
        self.state.busy = text
        if not self.state.views and self.is_up:
            with contextlib.suppress(Exception):
                self.query_one("#loading-msg", Static).update(Text(fm.clean_text(text) + " ..."))
        self.refresh_bars()

    # ------------------------------------------------------------ what is shown

    def show_view(self, index: int, expiry=None) -> None:
        """Show snapshot number ``index`` (see ``TriageState.choose_view``)."""
        same_underlying = self.state.choose_view(index, expiry)
        if same_underlying is None:
            return
        self.show_body(True)
        # Strike levels of another underlying mean nothing here: start at its forward.
        self.show_expiry(keep_highlight=same_underlying)

    def show_expiry(self, keep_highlight: bool = True) -> None:
        """Put the current expiry in the ladder, the header and the plot."""
        st = self.state
        view = st.view
        if view is None or not view.expiries or not self.body_ready:
            return
        grid = self.grid
        expiry = st.current_expiry
        frame = view.ex_event_frame(expiry) if st.ex_event else view.frame(expiry)
        shown, hidden = st.strike_filter.apply(frame)
        info = view.info(st.expiry_pos, st.confidence, st.ex_event)
        grid.set_rows(shown, info.forward, expiry=expiry, underlying=view.snapshot.underlying, hidden=hidden,
                      keep_highlight=keep_highlight, strike_width=view.strike_width())
        st.strike_total = len(grid.strikes) + hidden
        self.mark_grid()
        self.update_layout()
        self.refresh_bars()
        self.update_plot()

    def mark_grid(self) -> None:
        """Mark the shortlisted contracts of the current expiry in the ladder."""
        st = self.state
        view, expiry = st.view, st.current_expiry
        if view is None or expiry is None or not self.body_ready:
            return
        self.grid.set_marked(st.shortlist.marked_in(view.snapshot.underlying, view.snapshot.as_of, expiry))

    def update_layout(self) -> None:
        """Share the width between ladder and plot for the current terminal size."""
        if not (self.is_up and self.body_ready):
            return
        st = self.state
        grid, plot = self.grid, self.plot
        width = self.size.width or self.app.size.width
        plan = plan_layout(width, st.columns, grid.strike_width, st.plot_pref)
        was_shown = plot.display
        if plot.display != (plan.plot_width > 0):
            plot.display = plan.plot_width > 0
        if plan.plot_width and plot.styles.width != Scalar.from_number(plan.plot_width):
            plot.styles.width = plan.plot_width
        if grid.columns != plan.columns:
            grid.set_columns(plan.columns)
        if plan.left_out != st.left_out_columns or plan.plot_squeezed != st.plot_squeezed:
            st.left_out_columns = plan.left_out
            st.plot_squeezed = plan.plot_squeezed
            self.refresh_bars()
        if plot.display and not was_shown:
            self.update_plot()

    def refresh_bars(self) -> None:
        """Redraw the three information lines from the state."""
        if not self.is_up:
            return
        st = self.state
        styles, ascii_only = self._bar_styles, st.ascii_only
        view = st.view
        if view is None or not self.body_ready:
            top = top_pieces(underlying="", as_of_text="", spot=float("nan"), index=0, count=0, findings=0,
                             shortlist=len(st.shortlist), busy=st.busy, st=styles, ascii_only=ascii_only)
            self.bar("topbar").set_pieces(top)
            self.bar("expirybar").set_pieces([])
            self.bar("filterbar").set_pieces([])
            return
        top = top_pieces(underlying=view.snapshot.underlying,
                         as_of_text=fm.fmt_timestamp(view.snapshot.as_of, ascii_only),
                         spot=view.snapshot.spot, index=st.view_index, count=len(st.views),
                         findings=st.findings_count(), shortlist=len(st.shortlist),
                         busy=st.busy, st=styles, ascii_only=ascii_only)
        self.bar("topbar").set_pieces(top)
        info = view.info(st.expiry_pos, st.confidence, st.ex_event) if view.expiries else None
        self.bar("expirybar").set_pieces(*self._expiry_bar(info, view.header_infos() if info is not None else None))
        hidden_names = [COLUMNS[k].heading_ascii if ascii_only else COLUMNS[k].heading
                        for k in st.left_out_columns]
        plot_note = ""
        if not self.plot.display and st.plot_pref == PLOT_SHOWN:
            plot_note = "plot waits for a wider terminal (the quotes come first)"
        elif not self.plot.display and st.plot_pref != PLOT_HIDDEN:
            plot_note = "plot hidden (v shows it)"
        self.bar("filterbar").set_pieces(filter_pieces(
            st.strike_filter, shown=len(self.grid.strikes), total=st.strike_total,
            hidden_columns=hidden_names, plot_note=plot_note, st=styles, ascii_only=ascii_only))

    def _expiry_bar(self, info, widest) -> tuple[list[Text], list[Text]]:
        """(pieces, reserve) of the expiry header for ``info``, kept per info (paging back to an
        expiry builds nothing again)."""
        styles, ascii_only = self._bar_styles, self.state.ascii_only
        if info is None:
            return expiry_pieces(None, st=styles, ascii_only=ascii_only), []
        key = (id(info), id(widest), id(styles), ascii_only)
        kept = self._expiry_bars.get(key)
        if kept is not None and kept[0] is info and kept[1] is widest and kept[2] is styles:
            return kept[3], kept[4]
        pieces = expiry_pieces(info, st=styles, ascii_only=ascii_only)
        reserve = expiry_pieces(info, st=styles, ascii_only=ascii_only, widest=widest)
        if len(self._expiry_bars) >= 64:
            self._expiry_bars.pop(next(iter(self._expiry_bars)))
        self._expiry_bars[key] = (info, widest, styles, pieces, reserve)
        return pieces, reserve

    def update_plot(self) -> None:
        """Draw the current expiry's distribution in the side pane (when it is shown)."""
        st = self.state
        if not self.body_ready:
            return
        view, expiry, plot = st.view, st.current_expiry, self.plot
        if view is None or expiry is None or not plot.display:
            return
        if st.show_paths:  # the simulated history paths instead (the app runs the simulation)
            self.app.show_paths()
            return
        dist = view.distribution(expiry)
        if dist is None:
            plot.clear(" no distribution: this expiry has no smile fit")
            return
        info = view.info(st.expiry_pos, st.confidence)
        strike, kind, p_beyond = self._highlight()
        plot.update_plot(dist.strikes, dist.density, dist.density_flat, forward=info.forward,
                         sigma_sqrt_t=info.sigma_sqrt_t, highlight_strike=strike, highlight_kind=kind,
                         p_beyond=p_beyond)

    def _highlight(self) -> tuple[float | None, str, float | None]:
        hl = self.grid.highlighted
        if hl is None:
            return None, "call", None
        return hl[0], hl[1], fm.as_finite(self.grid.highlighted_value("p_beyond"))

    def highlight_moved(self) -> None:
        if self.body_ready and self.plot.display:
            if self.state.show_paths:
                self.app.show_paths()
                return
            strike, kind, p_beyond = self._highlight()
            self.plot.set_highlight(strike, kind, p_beyond)

    # ------------------------------------------------------------ looks

    def apply_theme(self, theme: ChainTheme) -> None:
        """Draw with ``theme`` (the state's theme is already set)."""
        self._bar_styles = BarStyles(theme)
        if self.is_up and self.body_ready:
            self.grid.set_theme(theme)
            self.plot.set_theme(theme)
            self.refresh_bars()

    def apply_ascii(self) -> None:
        """Draw with plain ASCII or Unicode, as the state says."""
        ascii_only = self.state.ascii_only
        self.set_class(ascii_only, "-ascii")
        if self.body_ready:
            self.grid.set_ascii(ascii_only)
            self.plot.set_ascii(ascii_only)
        self.refresh_bars()
