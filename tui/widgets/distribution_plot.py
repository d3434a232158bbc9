"""The terminal distribution of one expiry, drawn with text characters.

``draw_distribution`` is a pure function: arrays and scalars in, a list of
``rich.text.Text`` lines (exactly ``height`` lines of ``width`` cells) out.
``DistributionPlot`` is a thin Textual widget that redraws it for its size.

Layout, top to bottom:
  row 0           the highlighted contract and its P(beyond), and a legend;
  (row 1)         a note when negative density values were drawn as zero;
  plot rows       the market-implied density as filled bars, the one-vol
                  lognormal density as a dot per column, the bars beyond the
                  highlighted strike in another fill and colour; a vertical
                  line at the highlighted strike, a dotted one at the forward;
  axis row        "F" under the forward, "1" at F*exp(+/-1 sigma*sqrt(T)),
                  "2" at F*exp(+/-2 sigma*sqrt(T)) (sigma marks: sigma distance
                  +/-1 and +/-2, named in the legend when it fits; not the
                  range, which is the lognormal's central interval),
                  "^"/"▲" at the strike;
  label row       a few strike values under their columns: the strike, the
                  forward, the sigma marks' values, then the domain edges
                  where room is left.

X axis (price units, linear): the domain is [F*exp(-3s), F*exp(+3s)] with
s = sigma_sqrt_t (= atm_iv*sqrt(T), log space), cut to the range of the
given strikes. The plot's ``width`` columns split the domain into equal
cells; a price x falls in column floor((x - lo) / (hi - lo) * width),
clipped to [0, width - 1] (``column_of``). Y axis: density, scaled so the
higher of the two series fills the plot rows.
"""

from __future__ import annotations

import math
from collections import OrderedDict
from dataclasses import dataclass, field
from typing import Any, Mapping, Sequence

import numpy as np
from rich.segment import Segment
from rich.style import Style
from rich.text import Text
from textual.strip import Strip
from textual.widget import Widget

from chaintriage.tui import formatting as fm
from chaintriage.tui.themes import FALLBACK_THEME, ChainTheme

#: Half-width of the default x domain, in multiples of sigma*sqrt(T).
DOMAIN_SIGMAS = 3.0

#: Drawn plots kept (by inputs, size and looks): paging back through expiries redraws none of them.
KEEP_PLOTS = 32

_EIGHTHS = " ▁▂▃▄▅▆▇█"

_GLYPHS_UNICODE = {
    "bar": "█", "beyond": "▓", "flat": "•", "strike_line": "│", "forward_line": "┆",
    "axis": "─", "strike_mark": "▲",
}
_GLYPHS_ASCII = {
    "bar": "#", "beyond": "=", "flat": "o", "strike_line": "|", "forward_line": ":",
    "axis": "-", "strike_mark": "^",
}

NEGATIVE_NOTE = "negative density drawn as zero (butterfly arbitrage in the smile)"


@dataclass(frozen=True)
class PlotColors:
    """Colours ("#rrggbb") the plot uses, normally taken from a theme."""

    market: str
    flat: str
    beyond: str
    forward: str
    highlight: str
    text: str
    dim: str
    warning: str
    background: str

    @classmethod
    def from_theme(cls, theme: ChainTheme) -> "PlotColors":
        c = theme.colors
        return cls(market=c["plot_market"], flat=c["plot_flat"], beyond=c["plot_beyond"],
                   forward=c["forward_marker"], highlight=c["marked"], text=c["text"],
                   dim=c["dim"], warning=c["warning"], background=c["background"])


@dataclass
class PlotResult:
    """The drawn lines, the x domain [lo, hi] in price units, the column of each
    mark drawn ("forward", "-2", "-1", "+1", "+2", "strike"), and any notes."""

    lines: list[Text]
    lo: float = math.nan
    hi: float = math.nan
    plot_width: int = 0
    marks: dict[str, int] = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)

    @property
    def plain(self) -> list[str]:
        """The lines as plain strings."""
        return [line.plain for line in self.lines]


def x_domain(strikes: np.ndarray, forward: float, sigma_sqrt_t: float,
             span: float = DOMAIN_SIGMAS) -> tuple[float, float]:
    """The plotted price range: F*exp(+/-span*s) cut to the strikes' range (price units)."""
    finite = strikes[np.isfinite(strikes)]
    if finite.size == 0:
        return math.nan, math.nan
    s_lo, s_hi = float(finite.min()), float(finite.max())
    if math.isfinite(forward) and forward > 0 and math.isfinite(sigma_sqrt_t) and sigma_sqrt_t > 0:
        lo = max(s_lo, forward * math.exp(-span * sigma_sqrt_t))
        hi = min(s_hi, forward * math.exp(span * sigma_sqrt_t))
        if hi > lo:
            return lo, hi
    return s_lo, s_hi


def column_of(x: float, lo: float, hi: float, width: int) -> int | None:
    """The plot column of price ``x``; None when x is outside [lo, hi] or not finite."""
    if not (math.isfinite(x) and math.isfinite(lo) and math.isfinite(hi)) or hi <= lo or width <= 0:
        return None
    if x < lo or x > hi:
        return None
    return min(width - 1, max(0, int(math.floor((x - lo) / (hi - lo) * width))))


def _pad_lines(lines: list[Text], width: int, height: int, style: Style) -> list[Text]:
    out = []
    for line in lines[:height]:
        line = line.copy()
        line.truncate(width, pad=True)
        if not line.style:
            line.style = style
        out.append(line)
    while len(out) < height:
        out.append(Text(" " * width, style=style))
    return out


def _message(text: str, width: int, height: int, colors: PlotColors) -> PlotResult:
    style = Style(color=colors.dim, bgcolor=colors.background)
    return PlotResult(_pad_lines([Text(text[:width], style=style)], width, height, style))


def draw_distribution(
    strikes: Sequence[float] | np.ndarray,
    density: Sequence[float] | np.ndarray,
    density_flat: Sequence[float] | np.ndarray,
    *,
    forward: float,
    sigma_sqrt_t: float,
    highlight_strike: float | None = None,
    highlight_kind: str = "call",
    p_beyond: float | None = None,
    colors: PlotColors | ChainTheme | None = None,
    width: int = 60,
    height: int = 16,
    ascii_only: bool = False,
) -> PlotResult:
    """Draw the market-implied and one-vol densities into ``width`` x ``height`` cells.

    Units: strikes and forward in price units; densities per unit of strike
    (any common scale); ``sigma_sqrt_t`` = atm_iv*sqrt(T) in log space;
    ``p_beyond`` a decimal. ``highlight_kind`` "call" shades the area above the
    strike, "put" the area below. Never raises for bad numbers: it draws what it can.
    """
    if isinstance(colors, ChainTheme):
        colors = PlotColors.from_theme(colors)
    colors = colors or PlotColors.from_theme(FALLBACK_THEME)
    width = max(0, int(width))
    height = max(0, int(height))
    if width == 0 or height == 0:
        return PlotResult([Text("") for _ in range(height)])
    g = _GLYPHS_ASCII if ascii_only else _GLYPHS_UNICODE
    bg = colors.background
    st_text = Style(color=colors.text, bgcolor=bg)
    st_dim = Style(color=colors.dim, bgcolor=bg)
    st_market = Style(color=colors.market, bgcolor=bg)
    st_beyond = Style(color=colors.beyond, bgcolor=bg)
    st_flat = Style(color=colors.flat, bgcolor=bg, bold=True)
    st_forward = Style(color=colors.forward, bgcolor=bg, bold=True)
    st_strike = Style(color=colors.highlight, bgcolor=bg, bold=True)
    st_warn = Style(color=colors.warning, bgcolor=bg)

    k = np.asarray(strikes, dtype=float).ravel()
    q = np.asarray(density, dtype=float).ravel()
    qf = np.asarray(density_flat, dtype=float).ravel()
    n = min(k.size, q.size, qf.size)
    k, q, qf = k[:n], q[:n], qf[:n]
    ok = np.isfinite(k)
    k, q, qf = k[ok], q[ok], qf[ok]
    order = np.argsort(k, kind="stable")
    k, q, qf = k[order], q[order], qf[order]
    forward = float(forward) if forward is not None else math.nan
    s = float(sigma_sqrt_t) if sigma_sqrt_t is not None else math.nan

    if k.size < 2:
        return _message(" no distribution for this expiry", width, height, colors)

    notes: list[str] = []
    finite_q = q[np.isfinite(q)]
    scale = float(np.max(np.abs(finite_q))) if finite_q.size else 0.0
    if finite_q.size and float(finite_q.min()) < -1e-9 * max(scale, 1e-300):
        notes.append(NEGATIVE_NOTE)
    q = np.where(np.isfinite(q), np.maximum(q, 0.0), 0.0)
    qf = np.where(np.isfinite(qf), np.maximum(qf, 0.0), 0.0)

    lo, hi = x_domain(k, forward, s)
    if not (math.isfinite(lo) and math.isfinite(hi)) or hi <= lo:
        return _message(" no distribution for this expiry", width, height, colors)

    note_rows = 1 if notes else 0
    plot_rows = height - 3 - note_rows
    if plot_rows < 1 or width < 12:
        return _message(" enlarge the pane to see the plot", width, height, colors)

    centres = lo + (np.arange(width) + 0.5) * (hi - lo) / width
    m_vals = np.interp(centres, k, q)
    f_vals = np.interp(centres, k, qf)
    ymax = float(max(m_vals.max(initial=0.0), f_vals.max(initial=0.0)))

    # Marks.
    marks: dict[str, int] = {}
    if math.isfinite(forward) and forward > 0:
        c = column_of(forward, lo, hi, width)
        if c is not None:
            marks["forward"] = c
        if math.isfinite(s) and s > 0:
            for nsig in (-2, -1, 1, 2):
                c = column_of(forward * math.exp(nsig * s), lo, hi, width)
                if c is not None:
                    marks[f"{nsig:+d}"] = c
    hl = fm.as_finite(highlight_strike)
    kind = "put" if str(highlight_kind).lower().startswith("p") else "call"
    strike_col = column_of(hl, lo, hi, width) if hl is not None else None
    if strike_col is not None:
        marks["strike"] = strike_col

    # Cells: grid[row][col] = (char, style); row 0 is the top plot row.
    grid: list[list[tuple[str, Style]]] = [[(" ", st_text)] * width for _ in range(plot_rows)]
    for c in range(width):
        if hl is not None:
            beyond = (centres[c] > hl) if kind == "call" else (centres[c] < hl)
            if strike_col is not None and c == strike_col:
                beyond = False
        else:
            beyond = False
        bar_style = st_beyond if beyond else st_market
        full_glyph = g["beyond"] if beyond else g["bar"]
        top = -1  # highest filled row from the bottom
        if ymax > 0:
            level = m_vals[c] / ymax * plot_rows
            if ascii_only:
                full, part = int(round(level)), 0
            else:
                eighths = int(round(level * 8))
                full, part = divmod(eighths, 8)
            full = min(full, plot_rows)
            for j in range(full):
                grid[plot_rows - 1 - j][c] = (full_glyph, bar_style)
            top = full - 1
            if part and full < plot_rows:
                grid[plot_rows - 1 - full][c] = (_EIGHTHS[part], bar_style)
                top = full
            f_level = f_vals[c] / ymax * plot_rows
            if f_level >= 0.5:
                jf = min(plot_rows - 1, int(math.floor(f_level)))
                # In ASCII there is no background colour to keep the bar under a dot: a dot inside
                # the bar would read as a gap in it, so the bar cell stays and the dot is left out.
                if not (ascii_only and jf <= top):
                    fg = Style(color=colors.flat, bgcolor=colors.beyond if beyond else colors.market, bold=True) \
                        if jf <= top else st_flat
                    grid[plot_rows - 1 - jf][c] = (g["flat"], fg)
        line_char = None
        if strike_col is not None and c == strike_col:
            line_char = (g["strike_line"], st_strike)
        elif marks.get("forward") == c:
            line_char = (g["forward_line"], st_forward)
        if line_char is not None:
            for j in range(plot_rows):
                if grid[j][c][0] == " ":
                    grid[j][c] = line_char

    # Axis row.
    axis: list[tuple[str, Style]] = [(g["axis"], st_dim)] * width
    for key, ch in (("-2", "2"), ("+2", "2"), ("-1", "1"), ("+1", "1")):
        if key in marks:
            axis[marks[key]] = (ch, st_text)
    if "forward" in marks:
        axis[marks["forward"]] = ("F", st_forward)
    if strike_col is not None:
        axis[strike_col] = (g["strike_mark"], st_strike)

    # Label row: strike values placed by priority without overlap.
    label_cells = [" "] * width
    taken = [False] * width
    span_x = hi - lo
    decimals = 0 if span_x >= 50 else 1 if span_x >= 5 else 2

    def place(value: float, col: int, align: str, exact: bool = False) -> None:
        text = fm.fmt_strike(value) if exact else f"{value:.{decimals}f}"
        if len(text) > width:
            return
        if align == "left":
            start = col
        elif align == "right":
            start = col - len(text) + 1
        else:
            start = col - len(text) // 2
        start = max(0, min(width - len(text), start))
        lo_c, hi_c = max(0, start - 1), min(width, start + len(text) + 1)
        if any(taken[lo_c:hi_c]):
            return
        for i, ch in enumerate(text):
            label_cells[start + i] = ch
            taken[start + i] = True

    if strike_col is not None and hl is not None:
        place(hl, strike_col, "centre", exact=True)
    if "forward" in marks:
        place(forward, marks["forward"], "centre")
    # the sigma marks' own values first, so a "2" on the axis never has a domain edge printed beside it
    for key in ("-2", "+2", "-1", "+1"):
        if key in marks:
            place(forward * math.exp(int(key) * s), marks[key], "centre")
    place(lo, 0, "left")
    place(hi, width - 1, "right")

    # Title row.
    legend = f"{g['bar']} market  {g['flat']} 1-vol"
    if hl is not None:
        legend += f"  {g['beyond']} beyond"
        pb = fm.fmt_prob(p_beyond, ascii_only=ascii_only)
        title = f" {fm.fmt_strike(hl)} {kind}  P(beyond) {pb}"
    else:
        title = " market-implied vs one-vol"
    if any(key in marks for key in ("-2", "+2", "-1", "+1")):
        with_marks = legend + ("  1 2 sigma marks" if ascii_only else "  1 2 σ marks")
        if width - len(title) - len(with_marks) - 1 >= 2:
            legend = with_marks
    lines: list[Text] = []
    head = Text(title, style=Style(color=colors.text, bgcolor=bg, bold=True))
    gap = width - len(title) - len(legend) - 1
    if gap >= 2:
        head.append(" " * gap, style=st_text)
        head.append(legend + " ", style=st_dim)
    lines.append(head)
    if notes:
        lines.append(Text(" " + notes[0], style=st_warn))
    for row in grid:
        lines.append(_runs(row))
    lines.append(_runs(axis))
    lines.append(Text("".join(label_cells), style=st_dim))
    if ascii_only:
        lines = [_ascii_line(t) for t in lines]
    return PlotResult(_pad_lines(lines, width, height, st_text), lo, hi, width, marks, notes)


def _runs(cells: list[tuple[str, Style]]) -> Text:
    text = Text()
    if not cells:
        return text
    run_chars = [cells[0][0]]
    run_style = cells[0][1]
    for ch, style in cells[1:]:
        if style is run_style or style == run_style:
            run_chars.append(ch)
        else:
            text.append("".join(run_chars), style=run_style)
            run_chars, run_style = [ch], style
    text.append("".join(run_chars), style=run_style)
    return text


def _ascii_line(line: Text) -> Text:
    plain = line.plain
    if plain.isascii():
        return line
    out = line.copy()
    out.plain = plain.encode("ascii", "replace").decode("ascii")
    return out


def _line_segments(line: Text, base: Style, console: Any) -> list[Segment]:
    """The segments of one drawn line with ``base`` under every style: the same as rendering the
    Text and applying ``base``, straight from its spans when they follow one another without
    overlapping (as ``draw_distribution`` builds them), which costs a fraction of rendering."""
    plain = line.plain
    if not line.spans:  # rendering a Text without spans leaves its own style out
        return [Segment(plain, base)] if plain else []
    line_style = line.style
    if isinstance(line_style, str):
        return list(Segment.apply_style(line.render(console), style=base))
    under = base + line_style if line_style else base
    segments: list[Segment] = []
    pos = 0
    for span in line.spans:
        if span.start < pos or isinstance(span.style, str):
            return list(Segment.apply_style(line.render(console), style=base))
        if span.start > pos:
            segments.append(Segment(plain[pos:span.start], under))
        end = min(span.end, len(plain))
        if end > span.start:
            segments.append(Segment(plain[span.start:end], under + span.style))
        pos = max(pos, end)
    if pos < len(plain):
        segments.append(Segment(plain[pos:], under))
    return segments


class DistributionPlot(Widget):
    """A pane drawing ``draw_distribution`` at its own size; call ``update_plot``
    with the same keyword inputs (minus width/height) to redraw."""

    DEFAULT_CSS = """
    DistributionPlot {
        width: 1fr;
        height: 1fr;
    }
    """

    def __init__(self, *, theme: ChainTheme | None = None, ascii_only: bool = False,
                 name: str | None = None, id: str | None = None, classes: str | None = None) -> None:
        super().__init__(name=name, id=id, classes=classes)
        self._theme = theme or FALLBACK_THEME
        self._ascii = ascii_only
        self._inputs: dict[str, Any] | None = None
        self._empty_text = " no expiry selected"
        #: Another picture drawn in the pane instead (``show_drawing``): called with (width, height, colors,
        #: ascii_only), returns the rows.
        self._drawer: Any = None
        self.last_result: PlotResult | None = None
        self._strips: list[Strip] | None = None
        self._strips_size: tuple[int, int] = (0, 0)
        #: Drawn plots by their inputs, size and looks, so switching back to an expiry draws nothing.
        self._drawn: OrderedDict[tuple, tuple[PlotResult, list[Strip], Any]] = OrderedDict()

    def update_plot(self, strikes: Any, density: Any, density_flat: Any, *, forward: float,
                    sigma_sqrt_t: float, highlight_strike: float | None = None,
                    highlight_kind: str = "call", p_beyond: float | None = None) -> None:
        """New inputs (see draw_distribution); redraws."""
        self._drawer = None
        self._inputs = dict(strikes=strikes, density=density, density_flat=density_flat, forward=forward,
                            sigma_sqrt_t=sigma_sqrt_t, highlight_strike=highlight_strike,
                            highlight_kind=highlight_kind, p_beyond=p_beyond)
        self.refresh()

    def set_highlight(self, strike: float | None, kind: str, p_beyond: float | None) -> None:
        """Move only the highlighted strike (same distribution)."""
        if self._inputs is not None and self._drawer is None:
            if (self._inputs["highlight_strike"], self._inputs["highlight_kind"], self._inputs["p_beyond"]) == \
                    (strike, kind, p_beyond):
                return  # already drawn so: no second frame
            self._inputs.update(highlight_strike=strike, highlight_kind=kind, p_beyond=p_beyond)
            self.refresh()

    def show_drawing(self, drawer: Any) -> None:
        """Draw another picture in the pane: ``drawer(width, height, colors, ascii_only)`` gives its rows
        (rich Text). ``update_plot`` or ``clear`` brings the distribution back."""
        self._inputs = None
        self._drawer = drawer
        self.refresh()

    def clear(self, message: str = " no expiry selected") -> None:
        self._drawer = None
        self._inputs = None
        self._empty_text = message
        self.refresh()

    def set_theme(self, theme: ChainTheme) -> None:
        self._theme = theme
        self.refresh()

    def set_ascii(self, ascii_only: bool) -> None:
        self._ascii = bool(ascii_only)
        self.refresh()

    def refresh(self, *args: Any, **kwargs: Any):  # type: ignore[override]
        self._strips = None
        return super().refresh(*args, **kwargs)

    def _draw(self) -> PlotResult:
        width, height = self.size.width, self.size.height
        colors = PlotColors.from_theme(self._theme)
        if self._drawer is not None:
            style = Style(color=colors.text, bgcolor=colors.background)
            try:
                lines = self._drawer(width, height, colors, self._ascii)
            except Exception as exc:  # a drawing fault must not take the app down: say it in the pane
                return _message(f" could not draw: {type(exc).__name__}", width, height, colors)
            return PlotResult(_pad_lines(lines, width, height, style))
        if self._inputs is None:
            return _message(self._empty_text, width, height, colors)
        return draw_distribution(**self._inputs, colors=colors, width=width, height=height,
                                 ascii_only=self._ascii)

    def _drawn_key(self) -> tuple | None:
        if self._inputs is None:
            return None
        i = self._inputs
        return (id(i["strikes"]), id(i["density"]), id(i["density_flat"]), i["forward"], i["sigma_sqrt_t"],
                i["highlight_strike"], i["highlight_kind"], i["p_beyond"], self.size.width, self.size.height,
                self._theme.name, id(self._theme), self._ascii)

    def render_line(self, y: int) -> Strip:
        """One line of the plot, drawn straight to segments (no markup, no re-parsing of styles)."""
        key = (self.size.width, self.size.height)
        if self._strips is None or self._strips_size != key:
            drawn_key = self._drawn_key()
            hit = self._drawn.get(drawn_key) if drawn_key is not None else None
            if hit is not None and hit[2] is self._inputs["strikes"]:
                self._drawn.move_to_end(drawn_key)
                result, strips = hit[0], hit[1]
            else:
                result = self._draw()
                console = self.app.console
                base = self._base_style()
                # Every segment gets the theme's text and background under its own style: an unstyled
                # run (axis, notes, padding) would show the terminal's default colours, and Textual's
                # monochrome filter (NO_COLOR) cannot take a segment without a style.
                strips = [Strip(_line_segments(line, base, console), line.cell_len)
                          .extend_cell_length(key[0], base) for line in result.lines]
                if drawn_key is not None:
                    self._drawn[drawn_key] = (result, strips, self._inputs["strikes"])
                    while len(self._drawn) > KEEP_PLOTS:
                        self._drawn.popitem(last=False)
            self.last_result = result
            self._strips = strips
            self._strips_size = key
        if 0 <= y < len(self._strips):
            return self._strips[y]
        return Strip.blank(self.size.width, self._base_style())

    def _base_style(self) -> Style:
        """The theme's text on the theme's background: what every cell of the plot starts from."""
        return Style(color=self._theme.colors["text"], bgcolor=self._theme.colors["background"])

    def render(self) -> Text:
        result = self._draw()
        self.last_result = result
        return Text("\n").join(result.lines)
