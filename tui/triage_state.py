"""Where the user is in the triage screen, without Textual: the snapshots loaded, the one
shown and the expiry shown in each, the strike filter, the range's confidence, the
shortlist and the display preferences (theme, ASCII drawing, columns, plot).

The app's keys change this state; the triage screen draws it.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from chaintriage.tui.layout import PLOT_AUTO, PLOT_HIDDEN, PLOT_SHOWN
from chaintriage.tui.shortlist import ContractKey, Shortlist

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd

    from chaintriage.tui.session import SnapshotView, StrikeFilter
    from chaintriage.tui.themes import ChainTheme


class TriageState:
    """The state behind the triage screen (see the module docstring).

    ``confidence`` is the range's two-sided confidence (decimal); ``columns`` the ladder's
    column keys per side; ``plot`` one of PLOT_AUTO, PLOT_SHOWN, PLOT_HIDDEN; ``ladder_sort``
    the ladder's sort (column key, side, descending) or None.
    """

    def __init__(self, *, theme: ChainTheme, confidence: float, columns: list[str], ascii_only: bool = False,
                 plot: str = PLOT_AUTO, ladder_sort: tuple[str, str, bool] | None = None) -> None:
        self.theme = theme
        self.confidence = float(confidence)
        self.columns = list(columns)
        self.ascii_only = bool(ascii_only)
        self.plot_pref = plot if plot in (PLOT_AUTO, PLOT_SHOWN, PLOT_HIDDEN) else PLOT_AUTO
        #: The ladder's sort (column key, side, descending), kept in the settings; None: strike order.
        self.ladder_sort = ladder_sort
        self.views: list[SnapshotView] = []
        self.view_index = -1
        #: The expiry shown in each snapshot (view index -> expiry position), so each one reopens where it was.
        self.expiry_positions: dict[int, int] = {}
        self.file_errors: list[str] = []
        self._strike_filter: StrikeFilter | None = None
        self.shortlist = Shortlist()
        #: The shortlist screen's cursor row, kept between openings.
        self.shortlist_row = 0
        #: Ladder columns the terminal is too narrow for (still chosen, not drawn).
        self.left_out_columns: list[str] = []
        #: True when the plot is wanted but its width went to the ladder's essential columns.
        self.plot_squeezed = False
        #: What the background work is doing ("" when idle), and how many loads are running.
        self.busy = ""
        self.loads_running = 0
        #: Strikes of the current expiry before the filter.
        self.strike_total = 0
        self._findings_count: dict[int, int] = {}
        #: The ``n`` toggle: P(beyond) and the ranges on the ex-event vol for expiries that carry events.
        self.ex_event = False
        #: The ``p`` toggle: the side pane shows simulated history paths instead of the distribution.
        self.show_paths = False
        #: The target view's last target (a core.targets.Target; None until it is first opened).
        self.target: Any = None

    @property
    def strike_filter(self) -> StrikeFilter:
        """The strike filter (none set: a filter that keeps every strike)."""
        if self._strike_filter is None:
            from chaintriage.tui.session import StrikeFilter  # numpy: not needed before the first data

            self._strike_filter = StrikeFilter()
        return self._strike_filter

    @strike_filter.setter
    def strike_filter(self, flt: StrikeFilter) -> None:
        self._strike_filter = flt

    def clear_filter(self) -> None:
        """Show every strike again."""
        self._strike_filter = None

    # ------------------------------------------------------------ what is shown

    @property
    def view(self) -> SnapshotView | None:
        return self.views[self.view_index] if 0 <= self.view_index < len(self.views) else None

    @property
    def expiry_pos(self) -> int:
        return self.expiry_positions.get(self.view_index, 0)

    @property
    def current_expiry(self) -> pd.Timestamp | None:
        view = self.view
        if view is None or not view.expiries:
            return None
        return view.expiries[self.expiry_pos]

    def replace_view(self, index: int, view: SnapshotView) -> None:
        """Put ``view`` in place of snapshot number ``index`` (e.g. the whole chain for its first expiry)."""
        self.views[index] = view
        self._findings_count.pop(index, None)

    def findings_changed(self, view: SnapshotView) -> bool:
        """``view``'s findings grew (its price history, its touch figures): they are counted again.
        Returns whether it is the snapshot shown."""
        for i, v in enumerate(self.views):
            if v is view:
                self._findings_count.pop(i, None)
        return self.view is view

    def findings_count(self) -> int:
        """How many findings the current snapshot has (counted once per snapshot)."""
        view = self.view
        if view is None:
            return 0
        if self.view_index not in self._findings_count:
            self._findings_count[self.view_index] = len(view.findings())
        return self._findings_count[self.view_index]

    # ------------------------------------------------------------ moving around

    def choose_view(self, index: int, expiry: Any = None) -> bool | None:
        """Make snapshot number ``index`` current: at ``expiry`` if given, else at the expiry date
        nearest the one shown now, every time (paging snapshots reads one date across them),
        else where that snapshot was left (its first expiry at first).

        Returns None when there is no such snapshot, else whether the underlying is the one
        shown before (strike levels of another underlying mean nothing in its ladder).
        """
        if not 0 <= index < len(self.views):
            return None
        before = self.current_expiry
        before_underlying = self.view.snapshot.underlying if self.view is not None else None
        self.view_index = index
        view = self.views[index]
        if expiry is not None:
            self.expiry_positions[index] = view.nearest_expiry_index(expiry)
        elif before is not None:
            self.expiry_positions[index] = view.nearest_expiry_index(before)
        elif index not in self.expiry_positions:
            self.expiry_positions[index] = view.nearest_expiry_index(before) if before is not None else 0
        return view.snapshot.underlying == before_underlying

    def step_expiry(self, step: int) -> str | None:
        """Move ``step`` expiries on (+1) or back (-1); returns a notice when it cannot, else None."""
        view = self.view
        if view is None or not view.expiries:
            return ""
        pos = self.expiry_pos + step
        if not 0 <= pos < len(view.expiries):
            return "this is the last expiry" if step > 0 else "this is the first expiry"
        self.expiry_positions[self.view_index] = pos
        return None

    def step_snapshot(self, step: int) -> int | None:
        """The index of the snapshot ``step`` places on (wrapping round); None when only one is loaded."""
        if len(self.views) < 2:
            return None
        return (self.view_index + step) % len(self.views)

    def locate(self, key: ContractKey) -> tuple[int, int] | None:
        """(view index, expiry position) of a shortlisted contract's snapshot and expiry; None if not loaded."""
        for i, view in enumerate(self.views):
            probe = ContractKey.of(view.snapshot.underlying, view.snapshot.as_of, key.expiry, 0.0, "call")
            if (probe.underlying, probe.as_of) == (key.underlying, key.as_of):
                pos = view.expiry_index(key.expiry)
                return None if pos is None else (i, pos)
        return None

    # ------------------------------------------------------------ the range

    def step_confidence(self, step: int) -> str | None:
        """Widen (+1) or narrow (-1) the range; returns a notice at the ends, else None."""
        from chaintriage.tui.session import CONFIDENCE_LEVELS, fmt_confidence, step_confidence

        c = step_confidence(self.confidence, step)
        if c == self.confidence:
            edge = "widest" if c >= CONFIDENCE_LEVELS[-1] else "narrowest"
            return f"{fmt_confidence(c)} is the {edge} range"
        self.confidence = c
        return None
