"""The user's remembered preferences: ``$XDG_CONFIG_HOME/chaintriage/settings.toml``.

Read with tomllib; written by hand (a few flat keys, strings escaped as TOML
basic strings) to a temp file in the same directory and renamed into place.
A missing file gives the defaults quietly; a file that cannot be read, or a
key with the wrong type, gives the default for it and a plain-text notice.
Keys this version does not know are kept and written back unchanged.
"""

from __future__ import annotations

import math
import os
import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from chaintriage.core.confidence import DEFAULT_CONFIDENCE
from chaintriage.core.findings import ChainTriageError

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
        text = p.read_text(encoding="utf-8")
    except FileNotFoundError:
        return Settings(), []
    except (OSError, UnicodeDecodeError) as exc:
        return Settings(), [f"settings file {p} could not be read ({exc}); using defaults"]
    return parse_settings(text, str(p))


def save_settings(settings: Settings, path: str | os.PathLike[str] | None = None) -> Path:
    """Write the settings atomically (creating the directory); ChainTriageError if it cannot."""
    p = Path(path) if path is not None else settings_path()
    try:
        p.parent.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise ChainTriageError(f"cannot create {p.parent}: {exc.strerror or exc}") from exc
    return write_text_atomic(p, dumps_settings(settings), overwrite=True)


def save_preferences(settings: Settings, *, theme: str, ascii_only: bool, columns: list[str], confidence: float,
                     plot: str, path: str | os.PathLike[str] | None = None) -> Path:
    """Put the app's current looks into ``settings`` and write them (``save_settings``);
    ChainTriageError if they cannot be written (``settings`` holds them all the same)."""
    settings.theme = theme
    settings.ascii_only = bool(ascii_only)
    settings.columns = list(columns)
    settings.confidence = float(confidence)
    settings.extra["plot"] = plot
    return save_settings(settings, path)
