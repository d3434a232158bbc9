"""The information lines above the ladder: what is loaded, the current expiry's
figures, and the filter. Pure functions build rich ``Text`` pieces (never
markup); ``InfoBar`` packs the pieces into as many lines as its width needs.

Pieces are kept whole: a line break falls between pieces, never inside one.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, Sequence

from rich.segment import Segment
from rich.style import Style
from rich.text import Text
from textual.geometry import Size
from textual.strip import Strip
from textual.widget import Widget

from chaintriage.core.findings import LEFT_OUT, WARNING, Finding
from chaintriage.tui import formatting as fm
from chaintriage.tui.themes import FALLBACK_THEME, ChainTheme

if TYPE_CHECKING:  # pragma: no cover  (session needs numpy and core: not before the first frame)
    from chaintriage.tui.session import ExpiryInfo, StrikeFilter

SEP = "  "

#: How the forward was found, in words (core's ForwardEstimate.method).
FORWARD_METHODS = {"parity": "put-call parity", "parity-single": "parity at one strike",
                   "rates": "from rate and dividend", "spot": "spot: no parity, no rate"}


def pack_pieces(pieces: Sequence[Text], width: int, sep: str = SEP, indent: str = " ") -> list[Text]:
    """Lay pieces out left to right in lines of at most ``width`` cells.

    A piece longer than a whole line is cut with "~". Always at least one line.
    """
    width = max(1, int(width))
    lines: list[Text] = []
    line = Text(indent)
    has = False
    for piece in pieces:
        p = piece.copy()
        if p.cell_len > width - len(indent):
            p.truncate(max(1, width - len(indent) - 1), overflow="crop")  # one marker: the "~"
            p.append("~")
        needed = p.cell_len + (len(sep) if has else 0)
        if has and line.cell_len + needed > width:
            lines.append(line)
            line = Text(indent)
            has = False
        if has:
            line.append(sep)
        line.append_text(p)
        has = True
    lines.append(line)
    return lines


class InfoBar(Widget):
    """One or more lines of pieces; its height follows the packed line count.

    The lines are drawn straight to segments (``render_line``), kept until the pieces, the width or
    the widget's own colours change: a header line costs a fraction of rendering its Text.
    """

    DEFAULT_CSS = """
    InfoBar {
        height: auto;
        width: 1fr;
    }
    """

    def __init__(self, *, id: str | None = None, classes: str | None = None) -> None:
        super().__init__(id=id, classes=classes)
        self._pieces: list[Text] = []
        self._reserve: list[Text] = []
        self._right: Text | None = None
        #: The drawn lines and what they were drawn for: (width, the widget's base style).
        self._strips: list[Strip] | None = None
        self._strips_key: tuple | None = None
        #: Lines the bar takes, by width (for the pieces shown now).
        self._heights: dict[int, int] = {}

    def set_pieces(self, pieces: Sequence[Text], reserve: Sequence[Text] = ()) -> None:
        """Show ``pieces``; the bar is at least as tall as ``reserve`` would make it (a steady height)."""
        new = list(pieces)
        res = list(reserve)
        if [p.plain for p in new] == [p.plain for p in self._pieces] and \
                [p.spans for p in new] == [p.spans for p in self._pieces] and \
                [p.plain for p in res] == [p.plain for p in self._reserve]:
            return
        width = self.size.width
        before = self._height(width) if width else None
        self._pieces = new
        self._reserve = res
        self._strips = None
        self._heights = {}
        # A new layout only when the bar's height changes: a layout pass makes Textual update every
        # scrolling widget's scroll bars, which draws a second frame after this one.
        self.refresh(layout=before is None or self._height(width) != before)

    @property
    def plain(self) -> str:
        """The text currently shown, lines joined with newlines."""
        return "\n".join(t.plain for t in self._lines(self.size.width or 80))

    def _lines(self, width: int) -> list[Text]:
        return pack_pieces(self._pieces, width)

    def _height(self, width: int) -> int:
        """Lines the bar takes at ``width`` cells."""
        height = self._heights.get(width)
        if height is None:
            reserved = len(pack_pieces(self._reserve, width)) if self._reserve else 0
            height = self._heights[width] = max(len(self._lines(width)), reserved)
        return height

    def get_content_height(self, container: Size, viewport: Size, width: int) -> int:
        return self._height(width)

    def render_line(self, y: int) -> Strip:
        """Line ``y`` of the packed pieces on the bar's own colours (blank below the last)."""
        if self.text_selection is not None:  # Textual draws the selection itself
            return super().render_line(y)
        width = self.size.width
        base = self.rich_style
        key = (width, base)
        if self._strips is None or self._strips_key != key:
            console = self.app.console
            strips = []
            for row, line in enumerate(self._lines(width)):
                segments = Segment.apply_style(line.render(console, end=""), style=base)
                # The offsets let the mouse select the text, as in a line Textual draws itself.
                strips.append(Strip(segments).apply_offsets(0, row).crop_extend(0, width, base))
            self._strips, self._strips_key = strips, key
        if 0 <= y < len(self._strips):
            return self._strips[y]
        return Strip.blank(width, base)

    def render(self) -> Text:
        """The lines as one Text (what Textual's text selection reads; drawing goes by ``render_line``)."""
        return Text("\n").join(self._lines(self.size.width))

    def notify_style_update(self) -> None:
        super().notify_style_update()
        self._strips = None


# ---------------------------------------------------------------- styles from a theme


class BarStyles:
    """Styles for the bars, from a theme's colours."""

    def __init__(self, theme: ChainTheme | None = None) -> None:
        c = (theme or FALLBACK_THEME).colors
        self.text = Style(color=c["text"])
        self.strong = Style(color=c["text"], bold=True)
        self.dim = Style(color=c["dim"])
        self.accent = Style(color=c["accent"], bold=True)
        self.brand = Style(color=c["background"], bgcolor=c["accent"], bold=True)
        self.warning = Style(color=c["warning"], bold=True)
        self.error = Style(color=c["error"], bold=True)
        self.forward = Style(color=c["forward_marker"], bold=True)
        self.marked = Style(color=c["marked"], bold=True)
        self.call = Style(color=c["otm_call"])
        self.put = Style(color=c["otm_put"])


def _piece(*parts: tuple[str, Style | None]) -> Text:
    t = Text(no_wrap=True, overflow="ellipsis")
    for text, style in parts:
        t.append(text, style=style)
    return t


def _dash(ascii_only: bool) -> str:
    return "-" if ascii_only else "–"


def _band(lo: float, hi: float, ascii_only: bool) -> str:
    if not (math.isfinite(lo) and math.isfinite(hi)):
        return fm.placeholder(ascii_only)
    return f"{fm.fmt_level(lo)}{_dash(ascii_only)}{fm.fmt_level(hi)}"


def finding_counts(findings: Sequence[Finding]) -> tuple[int, int, int]:
    """(left out, warnings, notes)."""
    lo = sum(1 for f in findings if f.severity == LEFT_OUT)
    wa = sum(1 for f in findings if f.severity == WARNING)
    return lo, wa, len(findings) - lo - wa


def top_pieces(*, underlying: str, as_of_text: str, spot: float, index: int, count: int,
               findings: int, shortlist: int, busy: str = "", st: BarStyles,
               ascii_only: bool = False) -> list[Text]:
    """The first line: the app, the snapshot shown (of how many), findings, shortlist, work in progress.

    ``underlying`` and ``busy`` are plain text from data; they are cleaned, never parsed.
    """
    pieces = [_piece((" chaintriage ", st.brand))]
    if underlying or as_of_text:
        pieces.append(_piece((fm.clean_text(underlying), st.strong), ("  as of ", st.dim),
                             (as_of_text, st.text), ("  spot ", st.dim),
                             (fm.fmt_price(spot, ascii_only=ascii_only), st.text)))
    if count > 1:
        pieces.append(_piece(("snapshot ", st.dim), (f"{index + 1}/{count}", st.text), (" ({ })", st.dim)))
    if findings:
        mark = "!" if ascii_only else "⚠"
        pieces.append(_piece((f"{mark} {findings:,} finding{'s' if findings != 1 else ''}", st.warning),
                             (" (e)", st.dim)))
    if shortlist:
        pieces.append(_piece(("shortlist ", st.dim), (f"{shortlist}", st.marked), (" (s)", st.dim)))
    if busy:
        pieces.append(_piece((fm.clean_text(busy), st.accent)))
    return pieces


def expiry_pieces(info: ExpiryInfo | None, *, st: BarStyles, ascii_only: bool = False,
                  widest: Sequence[ExpiryInfo] | None = None) -> list[Text]:
    """The expiry header: date and position, days left, forward, ATM IV, ranges, fit, findings.

    With ``widest`` (the infos of every expiry of the snapshot, or a sample), the pieces are as
    long as any of them makes each one: the header reserves that many lines so it keeps one
    height while paging through the expiries.
    """
    from chaintriage.tui.session import fmt_confidence

    if info is None:
        return [_piece(("no expiry to show", st.dim))]
    if widest is not None:
        return _widest_pieces(info, widest, st=st, ascii_only=ascii_only)
    ph = fm.placeholder(ascii_only)
    days_t = ph if info.trading_days is None else f"{info.trading_days}"
    days_c = ph if info.calendar_days is None else f"{info.calendar_days}"
    fwd = [("fwd ", st.dim), (fm.fmt_level(info.forward, ascii_only=ascii_only), st.forward)]
    if info.forward_method not in ("", "parity"):
        how = FORWARD_METHODS.get(info.forward_method, fm.clean_text(info.forward_method))
        fwd.append((f" ({how})", st.warning if info.forward_method == "spot" else st.dim))
    pieces = [
        _piece(("expiry ", st.dim), (fm.fmt_date(info.expiry), st.strong),
               (f"  {info.index + 1} of {info.count} ([ ])", st.dim)),
        _piece((days_t, st.text), (" trading / ", st.dim), (days_c, st.text), (" calendar days", st.dim)),
        _piece(*fwd),
        _piece(("ATM IV ", st.dim), (fm.fmt_vol(info.atm_iv, ascii_only=ascii_only), st.text),
               *((("  ex-event ", st.dim), (fm.fmt_vol(info.ex_event_vol, ascii_only=ascii_only), st.text))
                 if info.events else ())),
        _piece((f"{fmt_confidence(info.confidence)} range ", st.dim),
               (_band(*info.range_plain, ascii_only), st.text),
               ("  smile ", st.dim), (_band(*info.range_smile, ascii_only), st.text), ("  (+/-)", st.dim))
        if not info.ex_event_ranges else
        _piece((f"{fmt_confidence(info.confidence)} range ", st.dim), ("on ex-event vol ", st.warning),
               (_band(*info.range_plain, ascii_only), st.text), ("  (+/-)", st.dim)),
    ]
    if info.ex_event_asked:
        if info.ex_event_ranges:
            pieces.insert(0, _piece(("EX-EVENT VIEW (n): ", st.warning),
                                    ("beyond and range at ex-event vol (one vol; cf. 1-vol)", st.text)))
        else:
            pieces.insert(0, _piece(("EX-EVENT VIEW (n): ", st.warning),
                                    ("this expiry carries no event; figures as they are", st.dim)))
    if math.isfinite(info.hist_vol):
        ratio = fm.as_finite(info.iv_rv)
        pieces.append(_piece(("RV ", st.dim), (f"{info.hist_window}d " if info.hist_window else "", st.dim),
                             (fm.fmt_vol(info.hist_vol, ascii_only=ascii_only), st.text),
                             ("  IV/RV ", st.dim), (f"{ratio:.2f}" if ratio is not None else ph, st.text),
                             ("  (h)", st.dim)))
    if info.events:
        pieces.append(_piece(("* " if ascii_only else "◆ ", st.warning), ("carries ", st.dim),
                             (fm.clean_text(info.events), st.warning), ("  (y)", st.dim)))
    if info.fit_method:
        rmse = fm.as_finite(info.fit_rmse)
        fit = [("fit ", st.dim), (f"{100 * rmse:.2f}" if rmse is not None else ph, st.text), (" vol pts", st.dim)]
        if info.fit_method != "svi":
            fit.append((f", {info.fit_method} fallback", st.warning))
        if info.arbitrage_free is False:
            fit.append((", butterfly arbitrage", st.warning))
        elif info.arbitrage_free:
            fit.append((", arbitrage-free", st.dim))
        pieces.append(_piece(*fit))
    else:
        pieces.append(_piece(("no smile fit", st.warning)))
    lo, wa, no = finding_counts(info.findings)
    if lo or wa or no:
        words = []
        if lo:
            words.append(f"{lo} left out")
        if wa:
            words.append(f"{wa} warning{'s' if wa != 1 else ''}")
        if no:
            words.append(f"{no} note{'s' if no != 1 else ''}")
        pieces.append(_piece(("this expiry: ", st.dim), (", ".join(words), st.warning if (lo or wa) else st.text),
                             (" (e)", st.dim)))
    return pieces


def _slot(piece: Text) -> str:
    """The slot of a header piece: its first word (findings and fit pieces come and go)."""
    word = piece.plain.split(" ")[0] if not piece.plain.startswith("fwd") else "fwd"
    if word.replace(".", "").isdigit() or word in ("—", "--", "-"):
        word = "days"
    if word.endswith("%") or "range" in piece.plain[:16]:
        word = "range"
    return word


#: The widest piece of each slot over a snapshot's expiries, by (id of the infos, ASCII, id of the styles);
#: the infos and styles are kept with it (so their ids are not reused) and only the last few are remembered.
_OTHERS_SLOTS: dict[tuple[int, bool, int], tuple[Sequence[ExpiryInfo], BarStyles, dict[str, Text]]] = {}


def _others_slots(others: Sequence[ExpiryInfo], st: BarStyles, ascii_only: bool) -> dict[str, Text]:
    key = (id(others), bool(ascii_only), id(st))
    kept = _OTHERS_SLOTS.get(key)
    if kept is not None and kept[0] is others and kept[1] is st:
        return kept[2]
    slots: dict[str, Text] = {}
    for info in others:
        for p in expiry_pieces(info, st=st, ascii_only=ascii_only):
            word = _slot(p)
            if word != "range" and (word not in slots or p.cell_len > slots[word].cell_len):
                slots[word] = p
    while len(_OTHERS_SLOTS) >= 8:
        _OTHERS_SLOTS.pop(next(iter(_OTHERS_SLOTS)))
    _OTHERS_SLOTS[key] = (others, st, slots)
    return slots


def _widest_pieces(info: ExpiryInfo, others: Sequence[ExpiryInfo], *, st: BarStyles,
                   ascii_only: bool = False) -> list[Text]:
    """Each piece of the expiry header at its longest over ``info`` and ``others`` (same order).

    The range piece is ``info``'s (its ranges stand in for every expiry's); the other slots'
    widest pieces over ``others`` are worked out once per list of infos.
    """
    slots: dict[str, Text] = {}
    for p in expiry_pieces(info, st=st, ascii_only=ascii_only):
        word = _slot(p)
        if word not in slots or p.cell_len > slots[word].cell_len:
            slots[word] = p
    for word, p in _others_slots(others, st, ascii_only).items():
        if word not in slots or p.cell_len > slots[word].cell_len:
            slots[word] = p
    return list(slots.values())


def filter_pieces(flt: StrikeFilter, *, shown: int, total: int, hidden_columns: Sequence[str] = (),
                  plot_note: str = "", st: BarStyles, ascii_only: bool = False) -> list[Text]:
    """The filter line: the active filter (or "off"), strikes shown, and layout notes."""
    if flt.active:
        pieces = [_piece(("filter ", st.accent), (flt.describe(ascii_only), st.text)),
                  _piece((f"{shown} of {total} strikes shown", st.strong if shown else st.warning),
                         ("  (x clears)", st.dim))]
    else:
        pieces = [_piece(("filter off", st.dim), ("  (f sets one)", st.dim))]
    notes = []
    if hidden_columns:
        notes.append(f"{', '.join(hidden_columns)} not shown")
    if plot_note:
        notes.append(plot_note)
    if notes:
        pieces.append(_piece(("narrow terminal: ", st.dim), ("; ".join(notes), st.dim)))
    return pieces
