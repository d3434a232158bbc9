"""Files as a trader meets them in the app: the shortlist export's numbers, its format by name and
its proposed place; opening files with ``l`` (the same file again, a column mapping per file).

The CSV export is read against ``chaintriage table --format csv`` of the same demo chain (the
command line is the reference for how numbers are written) [D]; csv parsing by Python's csv
module (RFC 4180 dialect) [C].
"""

from __future__ import annotations

import csv
import io
import os

import pandas as pd

from chaintriage.tui.cli import main as cli
from chaintriage.tui.screens.confirm_dialog import ConfirmDialog
from chaintriage.tui.screens.path_prompt import PathPrompt
from chaintriage.tui.shortlist import ContractKey, Shortlist, default_export_path, package_folders

from .app_support import demo_paths, make_app, notes, run, type_export_path


def test_shortlist_csv_writes_numbers_as_table_csv_does(capsys):
    ospx = [p for p in demo_paths() if "ospx" in os.path.basename(p)][0]
    assert cli.main(["table", ospx, "--format", "csv", "--expiry", "2026-12-04"]) in (0, 1)
    table = list(csv.DictReader(io.StringIO(capsys.readouterr().out)))
    sl = Shortlist()
    for row in table[:6]:
        key = ContractKey.of(row["underlying"], row["as_of"], row["expiry"], float(row["strike"]), row["kind"])
        figures = {k: (float(v) if v not in ("",) and k not in ("flags",) else v)
                   for k, v in row.items() if k not in ("underlying", "as_of", "expiry", "strike", "kind")}
        figures["open_interest"] = float(row["open_interest"])  # 718.0 in memory
        sl.add(key, figures)
    text = sl.to_csv_text()
    got = list(csv.DictReader(io.StringIO(text)))
    for mine, theirs in zip(got, table[:6]):
        for name in ("bid", "ask", "mid", "iv", "sigma_distance", "p_beyond", "p_touch", "delta", "breakeven",
                     "p_breakeven", "spread_pct", "open_interest"):
            assert mine[name] == theirs[name], name


def test_shortlist_csv_has_no_float_noise():
    sl = Shortlist()
    sl.add(ContractKey.of("OSPX", "2026-12-01T14:30:00-05:00", "2026-12-04", 300.0, "call"),
           {"breakeven": 179.3 + 1.8, "open_interest": 718.0, "mid": 0.1 + 0.2})
    row = list(csv.DictReader(io.StringIO(sl.to_csv_text())))[0]
    assert repr(179.3 + 1.8) == "181.10000000000002"  # the noise a plain repr would write
    assert row["breakeven"] == "181.1" and row["open_interest"] == "718" and row["mid"] == "0.3"


def test_default_export_path_is_dated_and_never_inside_the_package(tmp_path):
    now = pd.Timestamp("2026-12-01 14:35")
    here = default_export_path(now, cwd=tmp_path, home=tmp_path / "home")
    assert here == tmp_path.resolve() / "shortlist-2026-12-01-1435.csv"
    home = tmp_path / "home"
    (home / "Documents").mkdir(parents=True)
    for folder in package_folders():
        chosen = default_export_path(now, cwd=folder, home=home)
        assert chosen.parent == home / "Documents", folder
    os.rmdir(home / "Documents")
    assert default_export_path(now, cwd=package_folders()[0], home=home).parent == home


def test_export_prompt_proposes_a_dated_name_and_says_where(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    app = make_app()

    async def scenario(pilot):
        await pilot.press("m", "s", "w")
        prompt = app.screen
        assert isinstance(prompt, PathPrompt)
        value = prompt.query_one("#path-input").value
        assert os.path.basename(value).startswith("shortlist-") and value.endswith(".csv")
        assert os.path.dirname(os.path.expanduser(value)) == str(tmp_path.resolve())
        await pilot.press("enter")
        await pilot.pause()
        written = list(tmp_path.glob("shortlist-*.csv"))
        assert len(written) == 1

    run(app, scenario)


def test_a_txt_name_writes_a_markdown_table_and_an_unknown_ending_is_asked(tmp_path):
    app = make_app()

    async def scenario(pilot):
        await pilot.press("m", "s")
        await type_export_path(app, pilot, tmp_path / "picks.txt")
        assert (tmp_path / "picks.txt").read_text(encoding="utf-8").startswith("| underlying |")
        assert any("as a Markdown table" in n for n in notes(app))
        await type_export_path(app, pilot, tmp_path / "picks.dat")
        assert isinstance(app.screen, ConfirmDialog)
        await pilot.press("n")
        assert not (tmp_path / "picks.dat").exists()
        await type_export_path(app, pilot, tmp_path / "picks.dat")
        await pilot.press("y")
        await pilot.pause()
        assert (tmp_path / "picks.dat").read_text(encoding="utf-8").startswith("underlying,as_of,")

    run(app, scenario)


# ---------------------------------------------------------------- opening files with l

DATA = os.path.join(os.path.dirname(os.path.dirname(__file__)), "data")
FOREIGN = os.path.join(DATA, "foreign_export.csv")
MAPPING = os.path.join(DATA, "columns_example.toml")


async def _open(app, pilot, path, mapping=""):
    from .app_support import wait_ready

    await pilot.press("l")
    prompt = app.screen
    assert isinstance(prompt, PathPrompt)
    prompt.query_one("#path-input").value = str(path)
    if mapping:
        prompt.query_one("#second-input").value = str(mapping)
    await pilot.press("enter")
    await pilot.pause()
    await wait_ready(app, pilot)
    await pilot.pause()


def _ospx() -> str:
    return [p for p in demo_paths() if "ospx" in os.path.basename(p)][0]


def test_the_same_file_opened_again_is_not_a_second_snapshot(tmp_path):
    import shutil

    from chaintriage.core.loading import load_files

    copy = tmp_path / "ospx_copy.csv"
    shutil.copyfile(_ospx(), copy)
    app = make_app(paths=[_ospx()])

    async def scenario(pilot):
        assert len(app.state.views) == 1
        await _open(app, pilot, _ospx())
        assert len(app.state.views) == 1
        assert any("already open" in n for n in notes(app))
        # Another file with the same underlying and instant merges, as the command line does.
        await _open(app, pilot, copy)
        cli_result = load_files([_ospx(), str(copy)])
        assert len(app.state.views) == len(cli_result.snapshots) == 1
        merged = app.state.views[0].snapshot
        assert len(merged.contracts) == len(cli_result.snapshots[0].contracts)
        assert set(merged.sources) == {_ospx(), str(copy)}

    run(app, scenario)


def test_a_mapping_belongs_to_its_file_and_l_can_take_one():
    from chaintriage.core.loading import load_column_map

    app = make_app(paths=[FOREIGN], column_map=load_column_map(MAPPING))

    async def scenario(pilot):
        assert len(app.state.views) == 1 and app.state.view.snapshot.underlying == "VELM"
        await _open(app, pilot, _ospx())  # our own layout: the mapping is not applied to it
        assert len(app.state.views) == 2 and not app.state.file_errors, app.state.file_errors
        assert app.state.view.snapshot.underlying == "OSPX"

    run(app, scenario)


def test_l_opens_a_mapped_file_with_the_mapping_given_in_the_dialog():
    app = make_app(paths=[_ospx()])

    async def scenario(pilot):
        await _open(app, pilot, FOREIGN)  # no mapping: refused, and the message says how to map
        assert len(app.state.views) == 1
        assert any("--columns" in e for e in app.state.file_errors), app.state.file_errors
        await _open(app, pilot, FOREIGN, MAPPING)
        assert len(app.state.views) == 2 and app.state.view.snapshot.underlying == "VELM"

    run(app, scenario)


def test_missing_columns_error_mentions_columns_on_the_command_line(capsys):
    assert cli.main(["check", FOREIGN]) == 2
    assert "--columns" in capsys.readouterr().err
