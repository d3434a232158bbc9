"""The help content as data: keys, what each grid column means, the words we use,
and the cautions. ``help_text()`` lays it out as plain text (never markup).

The key map is a proposal for the app; StrikeGrid binds the "ladder" keys
itself. ``KEYS`` carries an action name per key so the app can build its
bindings from this one list.
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class KeyHelp:
    """One key (or a few equivalent keys, Textual key names), where it works,
    the action name the app binds it to, and what it does."""

    keys: tuple[str, ...]
    context: str  # "ladder", "screen", "targets", "shortlist", "dialog"
    action: str
    description: str


@dataclass(frozen=True)
class ColumnHelp:
    """A grid column (StrikeGrid.COLUMNS key), its heading, and its meaning in plain words."""

    key: str
    heading: str
    meaning: str


KEYS: tuple[KeyHelp, ...] = (
    # The ladder (bound by StrikeGrid).
    KeyHelp(("up", "k"), "ladder", "cursor_up", "move the highlight up one row (next lower strike)"),
    KeyHelp(("down", "j"), "ladder", "cursor_down", "move the highlight down one row (next higher strike)"),
    KeyHelp(("pageup", "pagedown"), "ladder", "cursor_page_up / cursor_page_down", "move a screenful"),
    KeyHelp(("home", "end"), "ladder", "cursor_first / cursor_last", "lowest / highest strike"),
    KeyHelp(("g",), "ladder", "cursor_forward", "back to the strike nearest the forward (at the money)"),
    KeyHelp(("left", "right"), "ladder", "select_side", "select the call side / the put side"),
    KeyHelp(("ctrl+pageup", "ctrl+pagedown"), "ladder", "page_left / page_right",
            "scroll sideways when the columns are wider than the pane"),
    # The triage screen.
    KeyHelp(("]",), "screen", "next_expiry", "next expiry"),
    KeyHelp(("[",), "screen", "previous_expiry", "previous expiry"),
    KeyHelp(("}",), "screen", "next_snapshot",
            "next loaded snapshot (another underlying, or the same one at another time)"),
    KeyHelp(("{",), "screen", "previous_snapshot", "previous loaded snapshot"),
    KeyHelp(("f",), "screen", "set_filter",
            "show only strikes at least N sigmas out of the money, or within an |delta| range or a "
            "P(beyond) range (any combination), on the calls, the puts or both, optionally with spread "
            "and open-interest limits (asks for them; ranges as LOW-HIGH, LOW- or -HIGH)"),
    KeyHelp(("x",), "screen", "clear_filter", "show every strike again"),
    KeyHelp(("plus", "minus"), "screen", "confidence_up / confidence_down",
            "widen / narrow the range's confidence (68.27%, 80%, 90%, 95%, 99%); = works as +"),
    KeyHelp(("c",), "screen", "copy_summary", "copy the highlighted contract's one-line summary"),
    KeyHelp(("m",), "screen", "toggle_mark", "put the highlighted contract on the shortlist, or take it off"),
    KeyHelp(("s",), "screen", "open_shortlist", "open the shortlist"),
    KeyHelp(("o",), "screen", "choose_columns", "choose the columns shown on each side"),
    KeyHelp(("v",), "screen", "toggle_plot", "show or hide the distribution pane"),
    KeyHelp(("t",), "screen", "next_theme", "next colour theme (remembered)"),
    KeyHelp(("a",), "screen", "toggle_ascii", "draw with plain ASCII characters, or with Unicode"),
    KeyHelp(("e",), "screen", "show_findings", "what the loader and the pipeline said about the data"),
    KeyHelp(("y",), "screen", "show_terms",
            "vols by expiry: ATM, ex-event and forward vol, scheduled events and the move each is priced "
            "at (Enter opens an expiry)"),
    KeyHelp(("h",), "screen", "show_history",
            "with a price history (--history; the demo has its own): realised vol by estimator and window, "
            "the volatility cone with today's ATM implied vols, IV/RV per expiry"),
    KeyHelp(("p",), "screen", "toggle_paths",
            "side pane: the distribution at expiry, or a fan of 100,000 simulated paths built from the "
            "underlying's own past days (block bootstrap) with the highlighted strike and both ranges"),
    KeyHelp(("n",), "screen", "toggle_ex_event",
            "P(beyond) and the range on the ex-event vol (the event's variance taken out, one vol per "
            "expiry) for expiries that carry a scheduled event, or back to the market's; the header says so"),
    KeyHelp(("r",), "screen", "show_targets",
            "the target view: for every expiry, the call or put nearest a target (a sigma distance, an "
            "|delta| or a P(beyond)) with its quote, odds and what it is worth at the bid and the ask"),
    KeyHelp(("z",), "screen", "sort_ladder",
            "sort the ladder by one of its shown columns on the selected side, low to high or high to low, "
            "or back to strike order; the side's label names the sort; while sorted the forward line is "
            "left out and g goes to the strike nearest the forward wherever it sits"),
    KeyHelp(("l",), "screen", "load_file",
            "open another snapshot file (asks for its path, and a mapping file for its headers if it needs "
            "one); a file already open is shown, not loaded twice"),
    KeyHelp(("question_mark",), "screen", "show_help", "this help"),
    KeyHelp(("q",), "screen", "quit", "quit"),
    # The target view.
    KeyHelp(("1", "2", "3"), "targets", "measure",
            "target by sigma distance out of the money / by |delta| / by P(beyond)"),
    KeyHelp(("plus", "minus"), "targets", "step",
            "move the target further out / nearer (0.25 sigma, 0.01 of |delta|, 1% of P(beyond))"),
    KeyHelp(("v",), "targets", "type_value",
            "type the target: sigmas (negative: in the money), |delta| as a decimal, P(beyond) in percent"),
    KeyHelp(("left", "right"), "targets", "side", "target the calls / the puts"),
    KeyHelp(("comma", "full_stop"), "targets", "shift",
            "every row one listed strike down / up from the nearest (the neighbours, one key away)"),
    KeyHelp(("up", "k", "down", "j"), "targets", "cursor", "move along the expiries"),
    KeyHelp(("enter",), "targets", "open_ladder", "open that expiry's ladder on that contract"),
    KeyHelp(("m",), "targets", "mark", "put that contract on the shortlist, or take it off"),
    KeyHelp(("c",), "targets", "copy", "copy that contract's one-line summary"),
    KeyHelp(("ctrl+pageup", "ctrl+pagedown"), "targets", "page_left / page_right",
            "more columns to the left / right (expiry, days and strike stay)"),
    KeyHelp(("escape", "r"), "targets", "close", "back to the ladder"),
    # The shortlist.
    KeyHelp(("up", "k", "down", "j"), "shortlist", "cursor_up / cursor_down", "move through the shortlist"),
    KeyHelp(("home", "end"), "shortlist", "scroll_top / scroll_bottom", "first / last contract (findings too)"),
    KeyHelp(("enter",), "shortlist", "go_to", "show the contract in the ladder"),
    KeyHelp(("d", "delete"), "shortlist", "remove_entry", "take the contract off the shortlist"),
    KeyHelp(("w",), "shortlist", "export",
            "write the shortlist to a file: .csv or .md by the name given (asks before replacing a file)"),
    KeyHelp(("c",), "shortlist", "copy_summary", "copy the contract's one-line summary"),
    # Any dialog or pane.
    KeyHelp(("escape",), "dialog", "dismiss", "close the dialog or pane (q too, where nothing is typed)"),
    KeyHelp(("enter",), "dialog", "submit", "apply what was typed (filter, path)"),
    KeyHelp(("tab",), "dialog", "focus_next", "next field of the filter dialog"),
    KeyHelp(("space",), "dialog", "toggle", "show or hide a column in the column list"),
    KeyHelp(("up", "down"), "dialog", "highlight", "move through the sort chooser's list (Enter picks)"),
    KeyHelp(("y", "n"), "dialog", "answer", "yes / no, e.g. to replacing an existing file"),
)

#: How a Textual key name is shown to the user.
KEY_LABELS: dict[str, str] = {
    "up": "↑", "down": "↓", "left": "←", "right": "→", "pageup": "PgUp", "pagedown": "PgDn",
    "home": "Home", "end": "End", "ctrl+pageup": "Ctrl+PgUp", "ctrl+pagedown": "Ctrl+PgDn",
    "plus": "+", "minus": "-", "question_mark": "?", "escape": "Esc", "delete": "Del",
    "enter": "Enter", "tab": "Tab", "space": "Space", "equals_sign": "=", "comma": ",", "full_stop": ".",
}
KEY_LABELS_ASCII: dict[str, str] = {**KEY_LABELS, "up": "Up", "down": "Down", "left": "Left", "right": "Right"}

COLUMNS: tuple[ColumnHelp, ...] = (
    ColumnHelp("bid", "bid", "best bid quoted in the snapshot"),
    ColumnHelp("ask", "ask", "best ask quoted in the snapshot"),
    ColumnHelp("mid", "mid", "halfway between bid and ask; the price the figures are computed from"),
    ColumnHelp("iv", "IV", "implied volatility of the mid, Black-76 on the forward, annualised"),
    ColumnHelp("sigma", "σ dist",
               "sigma distance: ln(strike / forward) / (at-the-money IV x sqrt(T)); "
               "+ above the forward, - below"),
    ColumnHelp("p_beyond", "beyond",
               "P(beyond): chance the underlying finishes beyond the strike at expiry in the "
               "contract's direction (above for a call, below for a put), read from the whole smile"),
    ColumnHelp("p_flat", "1-vol",
               "the same chance from a plain lognormal at the one at-the-money vol; "
               "a gap to 'beyond' is the skew's say"),
    ColumnHelp("p_touch", "touch",
               "P(touch): chance the underlying trades at the strike at some time before expiry, "
               "starting from spot now, from one path model that reprices the whole smile (local volatility); "
               "'…' ('..' in ASCII) while an expiry's touch figures are still being computed"),
    ColumnHelp("p_touch_low", "t.low",
               "touch bound, low: no model that reprices the quoted options can give a smaller touch chance "
               "(the chance of finishing past the strike, away from spot)"),
    ColumnHelp("p_touch_high", "t.high",
               "touch bound, high: no model that reprices the quoted options can give a larger touch chance; "
               "a wide gap between the bounds means the touch figure depends on the model"),
    ColumnHelp("delta", "delta", "change in option price per unit change in the underlying (Black-76)"),
    ColumnHelp("breakeven", "BE", "price at expiry where a buyer at mid breaks even: strike + mid for a call, "
               "strike - mid for a put"),
    ColumnHelp("p_breakeven", "P(BE)", "chance of finishing beyond the breakeven (the buyer's chance of profit "
               "at expiry)"),
    ColumnHelp("spread", "spread", "ask minus bid as a share of mid: how costly the market is to cross"),
    ColumnHelp("open_interest", "OI", "open interest: contracts outstanding"),
    ColumnHelp("volume", "volume", "contracts traded in the session"),
    ColumnHelp("flags", "flags", "short words about the quote: zero-bid, wide, no-iv, ..."),
    ColumnHelp("gamma", "gamma", "change of delta per unit change in the underlying"),
    ColumnHelp("theta", "theta", "value change per day with the underlying and vol held: per trading day on the "
               "252 and 250 bases, per calendar day on 365"),
    ColumnHelp("vega", "vega", "value change per vol point (one percentage point of IV)"),
    ColumnHelp("p_profit_sell", "P sell", "chance a seller at the bid ends expiry ahead: the underlying finishes "
               "short of strike + bid (call) or above strike - bid (put)"),
    ColumnHelp("p_profit_buy", "P buy", "chance a buyer at the ask ends expiry ahead: the underlying finishes "
               "beyond strike + ask (call) or below strike - ask (put)"),
    ColumnHelp("per_day_sell", "/day", "the bid divided by the calendar days to expiry"),
    ColumnHelp("return_sell_annual", "yr ret", "a seller's simple return on capital, x 365 / calendar days: "
               "bid / (strike - bid) for a cash-secured put, bid / spot for a covered call"),
    ColumnHelp("edge_share_sell", "edge", "what selling at the bid gives up against the mid, as a share of "
               "the bid: (mid - bid) / bid"),
    ColumnHelp("hist_p_beyond", "RV bey", "with a price history: P(beyond) from a lognormal at the realised vol "
               "(window matched to the expiry) with the forward's drift"),
    ColumnHelp("boot_p_beyond", "boot", "with a price history: P(beyond) from 20,000 simulated paths built "
               "from the underlying's own past days (block bootstrap, centred on the forward)"),
    ColumnHelp("boot_p_beyond_se", "boot±", "the simulation's standard error of 'boot' (sqrt(p(1-p)/paths))"),
    ColumnHelp("hist_p_touch", "RV tch", "with a price history: P(touch) from a lognormal at the realised vol "
               "with the forward's drift (watched continuously)"),
    ColumnHelp("boot_p_touch", "b.tch", "with a price history: P(touch) from the same simulated paths (a day "
               "touches when its high or low reaches the strike)"),
)

#: The target view's columns not in the ladder (the others read as there).
TARGET_COLUMNS: tuple[tuple[str, str], ...] = (
    ("days", "calendar days to the expiry date (the per-day and yearly figures count the exact time to "
             "settlement)"),
    ("strike", "the listed strike of the side nearest the target; nearby: the next strikes below and above"),
    ("bid x ask", "the quote: a seller gets the bid, a buyer pays the ask"),
    ("P sell, P buy", "chance a seller at the bid / a buyer at the ask ends expiry ahead"),
    ("/day, buy /day", "the bid / the ask divided by the days to expiry"),
    ("return, yr ret", "the seller's simple return on capital, and x 365 / days"),
    ("BE sell, BE buy", "breakevens at the bid and at the ask"),
    ("edge, edge %", "ask - mid, and (mid - bid) / bid"),
    ("touch range", "the touch bounds (filled in while the view is open)"),
    ("event", "scheduled events before the expiry"),
)

#: The areas of the triage screen, top to bottom.
AREAS: tuple[tuple[str, str], ...] = (
    ("top line", "the snapshot shown (underlying, snapshot time, spot), which of the loaded snapshots "
                 "it is, how many findings its data has, and the shortlist's size"),
    ("expiry lines", "the expiry and its place in the list; trading and calendar days left; the forward "
                     "(from put-call parity); the at-the-money IV (and, when the expiry carries a scheduled event, "
                     "the ex-event vol and the event's name after a diamond); the range at the chosen confidence, "
                     "plain F x exp(-ATM IV^2 x T/2 +/- z x ATM IV x sqrt(T)) (the central interval of the "
                     "one-vol lognormal) and from the smile's quantiles; the smile "
                     "fit's error in vol points (root mean square distance outside the bid-ask bands of "
                     "the quotes with a bid; 0 when it runs inside every band; zero-bid quotes are upper "
                     "bounds, not fitted) and whether it is free of butterfly arbitrage (if not, the "
                     "density is negative and P(beyond) not monotone somewhere; the plot says so too); "
                     "this expiry's findings; with a price history, the realised vol (RV) over the window "
                     "nearest the expiry's trading days and IV/RV"),
    ("filter line", "the filter in force and how many strikes it leaves; on a narrow terminal, the "
                    "columns and the plot left out for lack of width"),
    ("ladder", "calls on the left, the strike in the middle, puts on the right; one row per strike"),
    ("plot", "beside the ladder when there is room: the highlighted expiry's distribution at expiry"),
)

#: The ladder's other marks.
MARKS: tuple[tuple[str, str], ...] = (
    ("fwd line", "the dashed line across the ladder sits between the strikes around the forward "
                 "and shows its value"),
    ("colours", "out-of-the-money figures take the call or put colour of the theme; in-the-money "
                "figures are plain on a shaded background"),
    ("● / *", "the contract is on the shortlist"),
    ("calls / puts", "the highlighted heading is the selected side; ← and → switch it"),
)

#: The plot's marks.
PLOT: tuple[tuple[str, str], ...] = (
    ("bars", "the market-implied distribution of the underlying at expiry (from the smile)"),
    ("dots", "the one-vol lognormal distribution, for comparison"),
    ("shaded bars", "the area beyond the highlighted strike; its P(beyond) is printed above"),
    ("F, 1, 2", "the forward, and one and two sigmas either side of it"),
    ("p: paths", "a fan of simulated paths from the underlying's own days: outer band 5% to 95%, "
                 "shaded middle half, median line, a few single paths; the strike as a line across; the "
                 "history range at the chosen confidence marked at the right edge; below, the market's "
                 "distribution (bars) and history's (dots) at expiry on one price axis"),
)

#: Figures of the command line's table and targets and of the copied summary, with their formulas.
FORMULAS: tuple[tuple[str, str], ...] = (
    ("P(profit)", "chance the position ends expiry ahead at the price you can deal at (a seller gets the "
                  "bid, a buyer pays the ask): the chance of finishing beyond the breakeven, strike + "
                  "premium for a call, strike - premium for a put, on the side that pays the position"),
    ("return", "the seller's simple return on capital: cash-secured put = bid / (strike - bid); "
               "covered call = bid / spot"),
    ("annualised", "return x 365 / calendar days to expiry (simple, not compounded)"),
    ("per day", "premium / calendar days to expiry"),
    ("move to BE", "sigmas the underlying must end beyond the forward for a buyer at the ask to break even"),
    ("edge", "ask - mid (= mid - bid): what dealing at the bid or the ask gives up against the mid"),
    ("theta", "value change per day with spot and vol held: per trading day on the 252 and 250 bases, "
              "per calendar day on 365"),
    ("vega, gamma", "value change per vol point; delta change per unit of the underlying"),
)

CAUTIONS: tuple[str, ...] = (
    "Every figure is a model output computed from the quotes in the snapshot, under the "
    "risk-neutral measure: not a forecast of what will happen.",
    "Assumptions: European exercise; no jumps beyond what the smile already prices; "
    "volatility as quoted now, at the snapshot time.",
    "Stale, wide or one-sided quotes give unreliable figures: check the spread and the flags.",
    "An event's implied move is the market's price of the event, not a prediction; event dates "
    "in files can be wrong or move.",
    "History is not a forecast. Realised and implied vol measure different things: implied vol carries "
    "the premium option sellers ask (the variance risk premium) and the events before the expiry.",
    "P(profit) is risk-neutral and counted at expiry only. Returns leave out commissions, assignment "
    "and margin rules, which depend on the broker and the account.",
    "This is not advice. Decide for yourself.",
)


def key_label(key: str, ascii_only: bool = False) -> str:
    """How a Textual key name is shown ("pageup" -> "PgUp")."""
    labels = KEY_LABELS_ASCII if ascii_only else KEY_LABELS
    return labels.get(key, key)


def help_text(ascii_only: bool = False) -> str:
    """The whole help as plain text (show it with rich Text, not markup)."""
    out: list[str] = ["SCREEN"]
    for name, meaning in AREAS:
        out.append(f"  {name:<13} {meaning}")
    out += ["", "KEYS"]
    titles = {"ladder": "In the ladder", "screen": "Anywhere on the triage screen",
              "targets": "In the target view (r)", "shortlist": "In the shortlist", "dialog": "In a dialog"}
    for context, title in titles.items():
        out.append(f"  {title}")
        for k in KEYS:
            if k.context == context:
                keys = " / ".join(key_label(x, ascii_only) for x in k.keys)
                out.append(f"    {keys:<22} {k.description}")
    out += ["", "COLUMNS (each side of the ladder)"]
    for c in COLUMNS:
        heading = c.heading.replace("σ", "s") if ascii_only else c.heading
        out.append(f"  {heading:<8} {c.meaning}")
    out += ["", "TARGET VIEW (r: one row per expiry)"]
    for name, meaning in TARGET_COLUMNS:
        out.append(f"  {name:<15} {meaning}")
    out += ["", "MARKS"]
    for name, meaning in MARKS:
        out.append(f"  {name:<13} {meaning}")
    out += ["", "DISTRIBUTION PANE"]
    for name, meaning in PLOT:
        out.append(f"  {name:<13} {meaning}")
    out += ["", "TRADE FIGURES (target view, command line, shortlist and copied summary)"]
    for name, meaning in FORMULAS:
        out.append(f"  {name:<13} {meaning}")
    out += ["", "CAUTIONS"]
    out += [f"  - {c}" for c in CAUTIONS]
    text = "\n".join(out) + "\n"
    if ascii_only:
        text = text.replace("●", "o").replace("←", "Left").replace("→", "Right").replace("σ", "s")
        text = text.encode("ascii", "replace").decode("ascii")
    return text


def wrap_help(text: str, width: int) -> str:
    """``text`` (as from help_text) wrapped to ``width`` cells with hanging indents, so a long
    description continues under itself rather than under the key."""
    import re
    import textwrap

    width = max(20, int(width))
    out: list[str] = []
    for line in text.splitlines():
        if len(line) <= width:
            out.append(line)
            continue
        m = re.match(r"^(\s*\S.*?\s{2,})(\S.*)$", line) or re.match(r"^(\s*- )(.*)$", line)
        indent = len(m.group(1)) if m and len(m.group(1)) < width // 2 else len(line) - len(line.lstrip())
        first, rest = (m.group(1), m.group(2)) if m and indent == len(m.group(1)) else (line[:indent], line[indent:])
        out.extend(textwrap.wrap(rest, width, initial_indent=first, subsequent_indent=" " * indent,
                                 break_on_hyphens=False) or [line])
    return "\n".join(out) + ("\n" if text.endswith("\n") else "")
