"""Text from files is data: markup, terminal control and OSC sequences, BEL, backspace,
carriage return and bidi overrides are shown literally or stripped everywhere.

Checked places: the header lines, the ladder, the findings screen, the shortlist
screen, the notifications, the whole rendered screen, the terminal clipboard and
the text handed to the system clipboard tool; and the CSV and Markdown exports
neutralise spreadsheet formula prefixes in every text cell (OWASP "CSV
Injection" [M]; OWASP ASVS 5.0 requirement 1.2.10 [V]).
"""

from __future__ import annotations

import csv
import io
import re

from rich.cells import cell_len

from chaintriage.core.loading import load_files
from chaintriage.tui import formatting as fm
from chaintriage.tui.shortlist import FORMULA_PREFIXES, ContractKey, Shortlist

from .app_support import Clipboard, bar, make_app, notes, run, wait_copied, wait_ready
from .test_app_looks_and_loading import AS_OF

#: Markup, CSI colour, an OSC 8 hyperlink, an OSC 52 clipboard write, BEL, backspace, CR, bidi override.
EVIL = ("[bold]Q[/]\x1b[31m\x1b]8;;https://x.invalid\x1b\\L\x1b]8;;\x1b\\\x1b]52;c;ZXZpbA==\x07"
        "[link=https://x.invalid]k[/link]\x08\r\u202eZ\x9b2J")
#: Anything of these in shown or copied text is a leak.
FORBIDDEN = re.compile("[\x00-\x08\x0b-\x1f\x7f-\x9f\u200e\u200f\u202a-\u202e\u2066-\u2069]")


def evil_chain(path, underlying: str = EVIL, bad_cell: str = "=1+1\x1b[2J[bold]x\x07\u202e") -> str:
    """A two-expiry chain named ``underlying``, plus a row whose bid is ``bad_cell`` (left out, quoted)."""
    lines = ["underlying,as_of,spot,expiry,strike,kind,bid,ask,open_interest"]
    name = '"' + underlying.replace('"', '""') + '"'
    for expiry, width in (("2026-03-20", 1.0), ("2026-04-17", 1.6)):
        for k in range(80, 121, 5):
            c = max(100 - k, 0) + width * 2.5 * 2.718 ** (-((k - 100) / (12 * width)) ** 2)
            for kind, mid in (("call", c), ("put", c - (100 - k))):
                mid = max(mid, 0.06)
                lines.append(f"{name},{AS_OF},100,{expiry},{k},{kind},{mid - 0.05:.2f},{mid + 0.05:.2f},100")
    bad = '"' + bad_cell.replace('"', '""') + '"'
    lines.append(f"{name},{AS_OF},100,2026-03-20,125,call,{bad},0.10,100")
    with open(path, "w", encoding="utf-8", newline="") as fh:
        fh.write("\n".join(lines) + "\n")
    return str(path)


def clean(texts, where: str) -> None:
    for t in texts:
        assert not FORBIDDEN.search(str(t)), (where, repr(t))


def test_file_text_is_literal_or_stripped_everywhere(tmp_path):
    path = evil_chain(tmp_path / "evil.csv")
    result = load_files([path])
    assert result.snapshots, [str(e) for e in result.errors]
    assert result.snapshots[0].underlying != fm.clean_text(EVIL)  # the loader kept the raw name: the app cleans
    clip = Clipboard()
    app = make_app(snapshots=result.snapshots, system_clipboard=clip)
    bad_dir = tmp_path / "x\x1b[31m[bold]\x07.csv"
    bad_dir.mkdir()

    async def scenario(pilot):
        shown = fm.clean_text(EVIL)
        assert shown.startswith("[bold]Q[/]L[link=https://x.invalid]k[/link]")
        top = bar(app, "topbar")
        assert "[bold]Q[/]" in top
        clean([bar(app, n) for n in ("topbar", "expirybar", "filterbar")], "header lines")
        clean(app.triage.grid.render_lines_text(), "ladder")
        await pilot.press("c")
        await wait_copied(app, pilot)
        assert app.clipboard.startswith(shown.strip()), app.clipboard
        assert clip.texts and clip.texts[-1] == app.clipboard
        clean([app.clipboard] + clip.texts, "clipboard")
        await pilot.press("m", "down", "m", "s")
        table = app.screen.query_one("#shortlist-table")
        cells = [c.plain for r in range(table.row_count) for c in table.get_row_at(r)]
        assert any(c.startswith("[bold]Q[/]") for c in cells)
        clean(cells, "shortlist screen")
        await pilot.press("c")
        clean([app.clipboard] + clip.texts, "clipboard from the shortlist")
        await pilot.press("escape", "e")
        table = app.screen.query_one("#findings-table")
        rows = [list(table.row_cells(r)) for r in range(table.row_count)]
        assert any("[bold]x" in r[-1] for r in rows), rows  # the quoted cell, literally
        clean([c for r in rows for c in r], "findings table")
        for _ in range(table.row_count):
            clean([str(app.screen.query_one("#finding-detail").render())], "finding detail")
            await pilot.press("down")
        clean([str(app.screen.query_one(".title").render())], "findings title")
        await pilot.press("escape", "l")
        await pilot.pause()
        app.screen.query_one("#path-input").value = str(bad_dir)
        await pilot.press("enter")
        await pilot.pause()
        await wait_ready(app, pilot)
        await pilot.pause()
        assert any("[bold]" in n and ".csv" in n for n in notes(app)), notes(app)
        clean(notes(app) + [n.title for n in app._notifications], "notifications")
        clean([app.export_screenshot()], "the rendered screen")

    run(app, scenario)


def test_exports_neutralise_formulas_in_every_text_column(tmp_path):
    sl = Shortlist()
    starts = ["=HYPERLINK(\"https://x.invalid\")", "+1+1", "-1+1", "@SUM(A1)", "\tX", "\rX", "\0=1"]
    for i, head in enumerate(starts):
        key = ContractKey(underlying=head, as_of="2026-03-02T15:30:00-05:00", expiry="2026-03-20",
                          strike=100.0 + i, kind="call")
        sl.add(key, {"mid": -1.5, "flags": starts[(i + 1) % len(starts)]})
    text_fields = ("underlying", "as_of", "expiry", "kind", "flags")
    rows = list(csv.DictReader(io.StringIO(sl.to_csv_text())))
    assert len(rows) == len(starts)
    for row in rows:
        for name in text_fields:
            assert not row[name].startswith(FORMULA_PREFIXES), (name, row[name])
        assert row["underlying"].startswith("'") and row["flags"].startswith("'")
        assert row["mid"] == "-1.5"  # numbers stay numbers
    md = sl.to_markdown_text().splitlines()[2:]
    for line in md:
        cells = [c.strip() for c in line.strip("|").split(" | ")]
        underlying, flags = cells[0], cells[-1]
        for cell in (underlying, flags):
            assert cell and not cell.startswith(FORMULA_PREFIXES), line
        clean([line], "markdown")


def test_a_very_long_wide_name_fits_every_screen(tmp_path):
    name = "株式" * 400 + "e\u0301" * 50 + "👍🏽\u200d" * 20 + "[/]" * 30
    path = evil_chain(tmp_path / "long.csv", underlying=name, bad_cell="x" * 5000 + "\x1b[2J")
    result = load_files([path])
    assert result.snapshots, [str(e) for e in result.errors]
    app = make_app(snapshots=result.snapshots)

    async def scenario(pilot):
        for size in ((80, 24), (200, 50), (80, 24)):
            await pilot.resize_terminal(*size)
            await pilot.press("c", "m", "s", "c", "escape", "e", "down", "escape", "down", "c")
            top = bar(app, "topbar").splitlines()
            assert all(cell_len(line) <= size[0] for line in top)  # the name is cut to the line, not wrapped
            clean(top + notes(app) + [app.clipboard], "long name")
        assert app.is_running

    run(app, scenario)


def test_every_bidi_control_and_unicode_line_break_is_removed():
    # The Unicode bidirectional controls (UAX #9, "Explicit Directional ..." and the marks) [V: Unicode
    # Standard Annex #9, table 4], a byte-order mark, and the line/paragraph separators U+2028/U+2029.
    bidi = "\u061c\u200e\u200f\u202a\u202b\u202c\u202d\u202e\u2066\u2067\u2068\u2069\ufeff"
    assert fm.clean_text(f"A{bidi}B") == "AB"
    assert fm.clean_text("A\u2028B\u2029C") == "A B C"
