"""Settings and mapping files under a hostile environment: special files, merges, links, modes.

[C] POSIX file semantics: open(2) on a FIFO blocks until a writer comes; a new
file's mode is 0666 & ~umask (what open(..., "w") gives); rename(2) replaces a
symbolic link itself, not the file it points to. [C] TOML 1.0 (toml.io): quoted
keys, tables and offset date-times are part of the document and must survive a
rewrite.
"""

from __future__ import annotations

import datetime as dt
import os
import stat
import subprocess
import sys
import textwrap
import tomllib

import pytest

from chaintriage.core.column_map import load_column_map
from chaintriage.core.findings import ChainTriageError
from chaintriage.core.small_files import SMALL_FILE_LIMIT, read_small_file
from chaintriage.tui.files import write_text_atomic
from chaintriage.tui.settings import Settings, load_settings, save_settings

CSV = "underlying,as_of,spot,expiry,strike,kind,bid,ask\nQRTZ,2026-03-02T15:30:00-05:00,100,2026-03-20,100,call,2.1,2.2\n"


def _python(code: str, timeout: float = 30, env: dict | None = None) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-c", textwrap.dedent(code)], capture_output=True, text=True,
                          timeout=timeout, env=env)


# --------------------------------------------------------------------------- special files (#4)


def test_a_fifo_as_mapping_file_is_refused_not_waited_on(tmp_path):
    fifo = tmp_path / "map.toml"
    os.mkfifo(fifo)
    data = tmp_path / "a.csv"
    data.write_text(CSV, encoding="utf-8")
    try:
        done = subprocess.run([sys.executable, "-m", "chaintriage.tui.cli", "check", str(data), "--columns", str(fifo)],
                              capture_output=True, text=True, timeout=60)
    except subprocess.TimeoutExpired:
        pytest.fail("a FIFO as the mapping file hangs the command")
    assert done.returncode == 2
    assert "named pipe" in done.stderr and "Traceback" not in done.stderr


def test_a_fifo_as_settings_file_is_refused_with_a_notice(tmp_path):
    fifo = tmp_path / "settings.toml"
    os.mkfifo(fifo)
    try:
        done = _python(f"""
            from chaintriage.tui.settings import load_settings
            s, notes = load_settings({str(fifo)!r})
            print(s.theme); print(notes)
        """)
    except subprocess.TimeoutExpired:
        pytest.fail("a FIFO as the settings file hangs the app's start")
    assert done.returncode == 0, done.stderr
    assert "named pipe" in done.stdout


def test_dev_zero_behind_a_link_is_refused_at_once(tmp_path):
    link = tmp_path / "map.toml"
    link.symlink_to("/dev/zero")
    # Memory capped, so reading /dev/zero whole fails fast instead of filling the machine.
    done = _python(f"""
        import resource
        resource.setrlimit(resource.RLIMIT_AS, (3 << 30, 3 << 30))
        from chaintriage.core.column_map import load_column_map
        from chaintriage.core.findings import ChainTriageError
        from chaintriage.tui.settings import load_settings
        try:
            load_column_map({str(link)!r})
        except ChainTriageError as exc:
            print("refused:", exc)
        print(load_settings({str(link)!r})[1])
    """, timeout=120)
    assert done.returncode == 0, done.stderr[-500:]
    assert "refused:" in done.stdout and "device" in done.stdout
    assert done.stdout.count("device") == 2


def test_an_oversized_file_is_refused_before_it_is_read(tmp_path):
    big = tmp_path / "map.toml"
    with open(big, "wb") as fh:
        fh.truncate(SMALL_FILE_LIMIT + 1)  # sparse: no disk used
    with pytest.raises(ChainTriageError, match="at most"):
        load_column_map(big)
    _, notes = load_settings(big)
    assert notes and "at most" in notes[0]


def test_a_link_loop_is_named_as_such(tmp_path):
    loop = tmp_path / "map.toml"
    loop.symlink_to(loop)
    with pytest.raises(ChainTriageError, match="link loop"):
        read_small_file(loop)


# --------------------------------------------------------------------------- merge on save (#13)

RICH = """\
# my own comment
"quoted key" = "kept"
plot = "auto"
theme = "paper"
seen = 2026-03-20T15:30:00-04:00

[window]
width = 120
"""


def test_a_save_keeps_unknown_keys_tables_datetimes_and_quoted_keys(tmp_path):
    path = tmp_path / "settings.toml"
    path.write_text(RICH, encoding="utf-8")
    s, notes = load_settings(path)
    assert notes == []
    s.ascii_only = True
    save_settings(s, path)
    text = path.read_text(encoding="utf-8")
    data = tomllib.loads(text)
    assert data["quoted key"] == "kept"
    assert data["window"] == {"width": 120}
    assert data["seen"] == dt.datetime(2026, 3, 20, 15, 30, tzinfo=dt.timezone(dt.timedelta(hours=-4)))
    assert data["theme"] == "paper" and data["ascii_only"] is True
    assert "# my own comment" in text


def test_two_instances_keep_each_others_changes(tmp_path):
    path = tmp_path / "settings.toml"
    a, _ = load_settings(path)
    b, _ = load_settings(path)
    a.theme = "paper"
    save_settings(a, path)
    b.ascii_only = True
    save_settings(b, path)
    final, _ = load_settings(path)
    assert final.theme == "paper" and final.ascii_only is True


def test_a_merge_that_cannot_be_done_line_by_line_still_keeps_every_key(tmp_path):
    path = tmp_path / "settings.toml"
    path.write_text('theme = "paper"\ncolumns = [\n  "bid",\n  "ask",\n]\n[t]\nx = 1\n', encoding="utf-8")
    s, _ = load_settings(path)
    s.columns = ["iv"]
    save_settings(s, path)
    data = tomllib.loads(path.read_text(encoding="utf-8"))
    assert data == {"theme": "paper", "columns": ["iv"], "t": {"x": 1}}


def test_a_linked_settings_file_is_written_through_the_link(tmp_path):
    real = tmp_path / "dotfiles" / "settings.toml"
    real.parent.mkdir()
    real.write_text('theme = "paper"\n', encoding="utf-8")
    link = tmp_path / "settings.toml"
    link.symlink_to(real)
    s, _ = load_settings(link)
    s.ascii_only = True
    save_settings(s, link)
    assert link.is_symlink() and os.readlink(link) == str(real)
    assert tomllib.loads(real.read_text(encoding="utf-8")) == {"theme": "paper", "ascii_only": True}


def test_an_unreadable_settings_file_is_kept_aside_not_lost(tmp_path):
    path = tmp_path / "settings.toml"
    path.write_bytes(b"theme = [\x00 = =")
    s, _ = load_settings(path)
    s.theme = "paper"
    save_settings(s, path)
    assert load_settings(path)[0].theme == "paper"
    assert (tmp_path / "settings.toml.unreadable").read_bytes() == b"theme = [\x00 = ="


# --------------------------------------------------------------------------- modes (#15)


@pytest.fixture
def umask_022():
    old = os.umask(0o022)
    yield
    os.umask(old)


def _mode(p) -> int:
    return stat.S_IMODE(os.stat(p).st_mode)


def test_new_files_follow_the_umask(tmp_path, umask_022):
    p = write_text_atomic(tmp_path / "export.csv", "a\n")
    assert _mode(p) == 0o644
    save_settings(Settings(theme="paper"), tmp_path / "settings.toml")
    assert _mode(tmp_path / "settings.toml") == 0o644
    os.umask(0o077)
    assert _mode(write_text_atomic(tmp_path / "private.csv", "a\n")) == 0o600


def test_replacing_a_file_keeps_its_mode(tmp_path, umask_022):
    p = tmp_path / "export.csv"
    p.write_text("old\n")
    os.chmod(p, 0o640)
    write_text_atomic(p, "new\n", overwrite=True)
    assert _mode(p) == 0o640 and p.read_text() == "new\n"
