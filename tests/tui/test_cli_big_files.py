"""Big inputs on the command line: `open` refuses them with a message, never a traceback;
a file that does not fit in memory is an unusable file (exit 2), never exit 1 by accident.

The exit codes are the command line's documented contract [D].
"""

from __future__ import annotations

from chaintriage.core import loading
from chaintriage.tui.cli import main as cli

HEADER = "underlying,as_of,spot,expiry,strike,kind,bid,ask"
ROW = "QRTZ,2026-03-02T15:30:00-05:00,100.5,2026-03-20,100,call,2.10,2.20"


def test_open_refuses_files_above_the_stated_size(tmp_path, capsys, monkeypatch):
    p = tmp_path / "big.csv"
    p.write_text(HEADER + "\n" + ROW + "\n")
    monkeypatch.setattr(loading, "OPEN_MAX_BYTES", 50)
    opened = []
    monkeypatch.setattr("chaintriage.tui.app.open_app", lambda *a, **k: opened.append(a) or 0)
    code = cli.main(["open", str(p)])
    err = capsys.readouterr().err
    assert code == 2 and not opened
    assert "more than the app opens at once" in err and "chaintriage check" in err and "Traceback" not in err
    monkeypatch.setattr(loading, "OPEN_MAX_BYTES", 10_000)
    assert cli.main(["open", str(p)]) == 0 and opened


def test_out_of_memory_is_an_unusable_file_with_exit_2(tmp_path, capsys, monkeypatch):
    p = tmp_path / "huge.csv"
    p.write_text(HEADER + "\n" + ROW + "\n")

    def no_memory(*args, **kwargs):
        raise MemoryError

    monkeypatch.setattr(loading, "_read_csv_table", no_memory)
    code = cli.main(["check", str(p)])
    out, err = capsys.readouterr()
    assert code == 2
    assert "too big to load in the memory available" in err and "Traceback" not in err
    assert f"{p}: unusable" in out


def test_out_of_memory_past_loading_is_exit_2_with_a_message(tmp_path, capsys, monkeypatch):
    p = tmp_path / "c.csv"
    p.write_text(HEADER + "\n" + ROW + "\n")

    def no_memory(*args, **kwargs):
        raise MemoryError

    monkeypatch.setattr("chaintriage.core.pipeline.annotate", no_memory)  # `table` imports it when it runs
    code = cli.main(["table", str(p), "--format", "csv"])
    err = capsys.readouterr().err
    assert code == 2 and "out of memory" in err and "Traceback" not in err


def test_the_apps_open_file_prompt_has_the_same_cap(tmp_path, monkeypatch):
    """The `l` prompt loads through ``load_views``: above the cap it says why and loads nothing."""
    from chaintriage.tui import snapshot_loading

    p = tmp_path / "big.csv"
    p.write_text(HEADER + "\n" + ROW + "\n")
    monkeypatch.setattr(loading, "OPEN_MAX_BYTES", 50)
    views = []
    errors, added = snapshot_loading.load_views([str(p)], on_view=lambda v, first: views.append(v))
    assert added == 0 and not views and len(errors) == 1
    assert "more than the app opens at once" in errors[0] and "chaintriage check" in errors[0]
    monkeypatch.setattr(loading, "OPEN_MAX_BYTES", 10_000)
    errors, added = snapshot_loading.load_views([str(p)], on_view=lambda v, first: views.append(v))
    assert errors == [] and added == 1 and views
