"""The user's remembered preferences: ``$XDG_CONFIG_HOME/chaintriage/settings.toml``.

Read with tomllib (a regular file of at most 1 MiB: a FIFO or a device is
refused with a notice, never waited on or read without end). A missing file
gives the defaults quietly; a file that cannot be read, or a key with the
wrong type, gives the default for it and a plain-text notice.

Saving merges: the file is read again and only the keys whose values changed
since they were loaded (or last saved) are written, so keys this version does
not know, tables, dates and quoted keys stay as they are, and two app
instances changing different preferences keep each other's changes. Simple
top-level lines are edited in place (comments kept); when that cannot be done
exactly, the merged document is written out whole. The write is atomic
(temp file and rename, under a lock on the directory) and goes through a
symbolic link to the file it points to.
"""

from __future__ import annotations

import datetime as _dt
import math
import os
import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from chaintriage.core.confidence import DEFAULT_CONFIDENCE
from chaintriage.core.findings import ChainTriageError
from chaintriage.core.small_files import SmallFileError, read_small_file

from .files import write_text_atomic
from .themes import DEFAULT_THEME, config_dir

SETTINGS_FILE = "settings.toml"
_BARE_KEY = re.compile(r"^[A-Za-z0-9_-]+$")


@dataclass
class Settings:
    """Preferences: ``theme`` (name), ``ascii_only`` (no Unicode drawing), ``columns``
    (grid column keys per side, empty = the grid's default), ``confidence`` (range
    confidence as a decimal, e.g. 0.9; default the one-sigma level 0.682689...), and ``extra`` keys from newer versions."""

    theme: str = DEFAULT_THEME
    ascii_only: bool = False
    columns: list[str] = field(default_factory=list)
    confidence: float = DEFAULT_CONFIDENCE
    extra: dict[str, Any] = field(default_factory=dict)
    #: The values as last read or saved (what a save compares against to find the changed keys).
    loaded: dict[str, Any] = field(default_factory=dict, repr=False, compare=False)

    def items(self) -> dict[str, Any]:
        """Every key this object would write, with its value."""
        out: dict[str, Any] = dict(self.extra)
        out.update(theme=self.theme, ascii_only=self.ascii_only, columns=list(self.columns),
                   confidence=float(self.confidence))
        return out

    def changed(self) -> dict[str, Any]:
        """The keys whose values differ from those last read or saved (all keys when never read)."""
        if not self.loaded:
            return self.items()
        return {k: v for k, v in self.items().items() if k not in self.loaded or self.loaded[k] != v}


def settings_path(env: dict[str, str] | None = None) -> Path:
    """Where the settings file lives."""
    return config_dir(env) / SETTINGS_FILE


def toml_string(value: str) -> str:
    """``value`` as a TOML basic string: quotes, backslashes and control characters escaped."""
    out = ['"']
    for ch in value:
        code = ord(ch)
        if ch == '"':
            out.append('\\"')
        elif ch == "\\":
            out.append("\\\\")
        elif ch == "\n":
            out.append("\\n")
        elif ch == "\t":
            out.append("\\t")
        elif ch == "\r":
            out.append("\\r")
        elif code < 0x20 or code == 0x7F:
            out.append(f"\\u{code:04X}")
        else:
            out.append(ch)
    out.append('"')
    return "".join(out)


def _toml_value(value: Any) -> str | None:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        return repr(value) if math.isfinite(value) else None
    if isinstance(value, str):
        return toml_string(value)
    if isinstance(value, (list, tuple)) and all(isinstance(v, str) for v in value):
        return "[" + ", ".join(toml_string(v) for v in value) + "]"
    return None


def dumps_settings(settings: Settings) -> str:
    """The TOML text for ``settings`` (values that cannot be written simply are left out)."""
    items: dict[str, Any] = dict(settings.extra)
    items.update(theme=settings.theme, ascii_only=settings.ascii_only,
                 columns=list(settings.columns), confidence=float(settings.confidence))
    lines = ["# chaintriage settings: written by the app; edit with care."]
    for key, value in items.items():
        text = _toml_value(value)
        if text is None or not _BARE_KEY.match(key):
            continue
        lines.append(f"{key} = {text}")
    return "\n".join(lines) + "\n"


def parse_settings(text: str, source: str = SETTINGS_FILE) -> tuple[Settings, list[str]]:
    """Settings from TOML text, and notices for anything that fell back to a default."""
    notices: list[str] = []
    defaults = Settings()
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        return defaults, [f"settings file {source} could not be read ({exc}); using defaults"]
    s = Settings()
    theme = data.pop("theme", defaults.theme)
    if isinstance(theme, str) and theme.strip():
        s.theme = theme
    else:
        notices.append(f"{source}: 'theme' should be a name; using {defaults.theme!r}")
    ascii_only = data.pop("ascii_only", defaults.ascii_only)
    if isinstance(ascii_only, bool):
        s.ascii_only = ascii_only
    else:
        notices.append(f"{source}: 'ascii_only' should be true or false; using false")
    columns = data.pop("columns", [])
    if isinstance(columns, list) and all(isinstance(c, str) for c in columns):
        s.columns = list(columns)
    else:
        notices.append(f"{source}: 'columns' should be a list of names; using the default columns")
    conf = data.pop("confidence", defaults.confidence)
    if isinstance(conf, (int, float)) and not isinstance(conf, bool) and 0.0 < float(conf) < 1.0:
        # 0.6827 saved by older versions means the one-sigma level
        s.confidence = DEFAULT_CONFIDENCE if abs(float(conf) - DEFAULT_CONFIDENCE) < 5e-5 else float(conf)
    else:
        notices.append(f"{source}: 'confidence' should be a decimal between 0 and 1; using {defaults.confidence}")
    s.extra = {k: v for k, v in data.items() if _toml_value(v) is not None}
    return s, notices


def load_settings(path: str | os.PathLike[str] | None = None) -> tuple[Settings, list[str]]:
    """Read the settings file; a missing file gives defaults with no notice, never raises."""
    p = Path(path) if path is not None else settings_path()
    try:
        text = read_small_file(p).decode("utf-8-sig")
    except SmallFileError as exc:
        s = Settings()
        s.loaded = s.items()
        return s, [] if exc.missing else [f"settings file {p} could not be read ({exc.reason}); using defaults"]
    except UnicodeDecodeError as exc:
        s = Settings()
        s.loaded = s.items()
        return s, [f"settings file {p} could not be read ({exc}); using defaults"]
    s, notices = parse_settings(text, str(p))
    s.loaded = s.items()
    return s, notices


# --------------------------------------------------------------------------- writing TOML


def _toml_key(key: str) -> str:
    return key if _BARE_KEY.match(key) else toml_string(key)


def _toml_any(value: Any) -> str:
    """Any value tomllib can give, as TOML (inline tables for dicts inside arrays)."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if math.isnan(value):
            return "nan"
        if math.isinf(value):
            return "inf" if value > 0 else "-inf"
        return repr(value)
    if isinstance(value, str):
        return toml_string(value)
    if isinstance(value, (_dt.datetime, _dt.date, _dt.time)):
        return value.isoformat()
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(_toml_any(v) for v in value) + "]"
    if isinstance(value, dict):
        return "{" + ", ".join(f"{_toml_key(str(k))} = {_toml_any(v)}" for k, v in value.items()) + "}"
    raise ValueError(f"cannot write {type(value).__name__} in TOML")


def dump_toml(data: dict[str, Any], header: str = "") -> str:
    """A whole TOML document: plain keys first, then one [table] per dict (nested as [a.b])."""
    lines = [header] if header else []

    def table(prefix: list[str], d: dict[str, Any]) -> None:
        plain = [(k, v) for k, v in d.items() if not isinstance(v, dict)]
        subs = [(k, v) for k, v in d.items() if isinstance(v, dict)]
        if prefix and (plain or not subs):
            lines.append("")
            lines.append("[" + ".".join(_toml_key(p) for p in prefix) + "]")
        for k, v in plain:
            lines.append(f"{_toml_key(str(k))} = {_toml_any(v)}")
        for k, v in subs:
            table([*prefix, str(k)], v)

    table([], data)
    return "\n".join(lines) + "\n"


_HEADER = "# chaintriage settings: written by the app; edit with care."


def _top_key_line(key: str) -> re.Pattern[str]:
    quoted = "|".join(re.escape(q) for q in {key, toml_string(key), f"'{key}'"})
    return re.compile(rf"^[ \t]*(?:{quoted})[ \t]*=")


def _edit_in_place(text: str, changes: dict[str, Any]) -> str:
    """``text`` with each changed top-level key's line replaced (or a line added before the first table)."""
    lines = text.split("\n")
    first_table = next((i for i, ln in enumerate(lines) if re.match(r"^[ \t]*\[", ln)), len(lines))
    new_lines: list[str] = []
    for key, value in changes.items():
        line = f"{_toml_key(key)} = {_toml_any(value)}"
        pattern = _top_key_line(key)
        at = [i for i in range(first_table) if pattern.match(lines[i])]
        if at:
            lines[at[0]] = line
        else:
            new_lines.append(line)
    if new_lines:
        cut = first_table
        while cut > 0 and not lines[cut - 1].strip():
            cut -= 1
        lines[cut:cut] = new_lines
    out = "\n".join(lines)
    return out if out.endswith("\n") else out + "\n"


def merged_text(current_text: str | None, changes: dict[str, Any]) -> str:
    """The settings file's new text: ``current_text`` (None when there is no file) with ``changes`` applied.

    Lines are edited in place when the result reads back exactly as the merge
    should; otherwise the merged document is written whole. A file that is not
    valid TOML gives just the changes (``save_settings`` keeps the old file aside first).
    """
    data: dict[str, Any] = {}
    if current_text is not None:
        try:
            data = tomllib.loads(current_text)
        except tomllib.TOMLDecodeError:
            current_text = None
    expected = {**data, **changes}
    if current_text is not None and current_text.strip():
        text = _edit_in_place(current_text, changes)
        try:
            if tomllib.loads(text) == expected:
                return text
        except tomllib.TOMLDecodeError:
            pass
    return dump_toml(expected, _HEADER)


def _locked(directory: Path):
    """An exclusive lock on the directory (no lock file left behind); a no-op where locks are missing."""
    import contextlib

    @contextlib.contextmanager
    def lock():
        fd = None
        try:
            import fcntl

            fd = os.open(directory, os.O_RDONLY)
            fcntl.flock(fd, fcntl.LOCK_EX)
        except (ImportError, OSError):
            pass
        try:
            yield
        finally:
            if fd is not None:
                os.close(fd)  # closing releases the lock

    return lock()


def _keep_aside(path: Path) -> Path | None:
    """Rename an unreadable settings file to ``settings.toml.unreadable[-N]`` (never over another file)."""
    target = Path(os.path.realpath(path))
    for n in range(100):
        aside = target.with_name(target.name + ".unreadable" + (f"-{n}" if n else ""))
        try:
            os.link(target, aside)
        except FileExistsError:
            continue
        except OSError:
            return None
        return aside
    return None


def save_settings(settings: Settings, path: str | os.PathLike[str] | None = None) -> Path:
    """Merge the changed keys into the settings file atomically (creating the directory).

    Raises ChainTriageError if it cannot. Afterwards ``settings.loaded`` holds the values saved.
    """
    p = Path(path) if path is not None else settings_path()
    try:
        p.parent.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise ChainTriageError(f"cannot create {p.parent}: {exc.strerror or exc}") from exc
    changes = settings.changed()
    if not changes and (p.exists() or p.is_symlink()):
        return p
    with _locked(p.parent):
        current: str | None = None
        try:
            current = read_small_file(p).decode("utf-8-sig")
            tomllib.loads(current)
        except SmallFileError as exc:
            if not exc.missing:
                raise ChainTriageError(str(exc)) from None
        except (UnicodeDecodeError, tomllib.TOMLDecodeError):
            _keep_aside(p)  # unreadable, so it cannot be merged; the user's bytes are kept beside it
            current = None
            changes = settings.items()
        written = write_text_atomic(p, merged_text(current, changes), overwrite=True)
    settings.loaded = settings.items()
    return written


def save_preferences(settings: Settings, *, theme: str, ascii_only: bool, columns: list[str], confidence: float,
                     plot: str, ladder_sort: str = "", path: str | os.PathLike[str] | None = None) -> Path:
    """Put the app's current looks into ``settings`` and write them (``save_settings``);
    ChainTriageError if they cannot be written (``settings`` holds them all the same). ``ladder_sort``
    is ``ladder_columns.sort_text``'s text ("" for strike order: the key is then left out of a file
    that does not have it)."""
    settings.theme = theme
    settings.ascii_only = bool(ascii_only)
    settings.columns = list(columns)
    settings.confidence = float(confidence)
    settings.extra["plot"] = plot
    if ladder_sort or "ladder_sort" in settings.extra:
        settings.extra["ladder_sort"] = ladder_sort
    return save_settings(settings, path)
