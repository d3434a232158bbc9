"""Colour themes: TOML files with a name and one colour per role.

Built-in themes ship as ``chaintriage.themes/*.toml`` (read through
importlib.resources); users add their own as
``$XDG_CONFIG_HOME/chaintriage/themes/*.toml`` (default ``~/.config``). A file
that cannot be read or lacks a role is skipped with a plain-text notice; it
never stops the app (more than ``NOTICE_LIMIT`` skipped files give one summary
notice instead of one each). A user theme with a built-in theme's name replaces
it; the name of the theme built into the code (``fallback``) is reserved.
Theme files are read like settings: regular files of at most 1 MiB.

A theme file::

    name = "harbour"
    dark = true
    description = "one line"
    [colors]
    background = "#14181f"
    ...            # every role in ROLES, as "#rrggbb" or "#rgb"

Widgets take a ChainTheme directly (``theme.color("otm_call")``); the app can
also register ``to_textual_theme(theme)`` so Textual's own widgets match, with
every role exposed as a CSS variable ``$ct-<role>`` (underscores as dashes).
"""

from __future__ import annotations

import os
import re
import tomllib
from dataclasses import dataclass, field
from importlib.resources import files
from pathlib import Path
from typing import Mapping

from chaintriage.core.findings import ChainTriageError
from chaintriage.core.small_files import SmallFileError, read_small_file

#: Every colour role a theme must define, with what it paints.
ROLES: dict[str, str] = {
    "background": "screen and grid background",
    "surface": "header rows, panes and bars",
    "text": "ordinary text",
    "dim": "secondary text: placeholders, axis, hints",
    "accent": "focus and the app's own emphasis",
    "otm_call": "figures of an out-of-the-money call",
    "otm_put": "figures of an out-of-the-money put",
    "itm": "figures of an in-the-money contract",
    "itm_background": "background behind in-the-money figures",
    "forward_marker": "the forward's line in the ladder and the plot",
    "highlight": "background of the highlighted strike row",
    "highlight_text": "text on the highlighted row",
    "selected": "background of the selected side on the highlighted row",
    "selected_text": "text on the selected side of the highlighted row",
    "marked": "the shortlist mark",
    "plot_market": "market-implied density in the plot",
    "plot_flat": "one-vol lognormal density in the plot",
    "plot_beyond": "the area beyond the highlighted strike in the plot",
    "warning": "warnings and notes that need a look",
    "error": "errors",
}

#: The theme used when nothing else is chosen or found.
DEFAULT_THEME = "harbour"

_COLOR_RE = re.compile(r"^#(?:[0-9a-fA-F]{3}|[0-9a-fA-F]{6})$")
_NAME_RE = re.compile(r"^[A-Za-z0-9][A-Za-z0-9 _.-]{0,39}$")


class ThemeError(ChainTriageError):
    """A theme file that cannot be used (the message names the file and the reason)."""


@dataclass(frozen=True)
class ChainTheme:
    """One theme: its name, whether it is dark, and a "#rrggbb" colour per role."""

    name: str
    dark: bool
    colors: Mapping[str, str]
    description: str = ""
    source: str = ""

    def color(self, role: str) -> str:
        """The colour of ``role`` as "#rrggbb" (KeyError for an unknown role)."""
        return self.colors[role]

    @property
    def textual_name(self) -> str:
        """The name under which the Textual theme is registered (prefixed to avoid clashes)."""
        return f"ct-{self.name}"


@dataclass
class ThemeSet:
    """The themes found, by name, and a notice per file that was skipped or replaced."""

    themes: dict[str, ChainTheme] = field(default_factory=dict)
    notices: list[str] = field(default_factory=list)

    def get(self, name: str | None) -> ChainTheme:
        """The theme called ``name``, else the default, else the first one found."""
        if name and name in self.themes:
            return self.themes[name]
        if DEFAULT_THEME in self.themes:
            return self.themes[DEFAULT_THEME]
        if self.themes:
            return next(iter(self.themes.values()))
        return FALLBACK_THEME

    def names(self) -> list[str]:
        """Theme names in the order they were found (built-ins first)."""
        return list(self.themes)

    def next_name(self, current: str | None) -> str:
        """The name after ``current`` in a cycle (for a "next theme" key)."""
        names = self.names() or [FALLBACK_THEME.name]
        if current not in names:
            return names[0]
        return names[(names.index(current) + 1) % len(names)]


def _normalise_color(value: str) -> str:
    v = value.lower()
    if len(v) == 4:
        v = "#" + "".join(ch * 2 for ch in v[1:])
    return v


def parse_theme(text: str, source: str = "<theme>") -> ChainTheme:
    """A ChainTheme from TOML text; ThemeError naming ``source`` if it is malformed."""
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ThemeError(f"{source}: not valid TOML ({exc})") from exc
    name = data.get("name")
    if not isinstance(name, str) or not _NAME_RE.match(name):
        raise ThemeError(f"{source}: 'name' must be 1-40 letters, digits, spaces, '.', '_' or '-'")
    dark = data.get("dark", True)
    if not isinstance(dark, bool):
        raise ThemeError(f"{source}: 'dark' must be true or false")
    description = data.get("description", "")
    if not isinstance(description, str):
        raise ThemeError(f"{source}: 'description' must be a string")
    colors = data.get("colors")
    if not isinstance(colors, dict):
        raise ThemeError(f"{source}: missing the [colors] table")
    missing = [role for role in ROLES if role not in colors]
    if missing:
        raise ThemeError(f"{source}: missing colour roles: {', '.join(missing)}")
    bad = [role for role in ROLES if not (isinstance(colors[role], str) and _COLOR_RE.match(colors[role]))]
    if bad:
        raise ThemeError(f"{source}: colours must be '#rrggbb' or '#rgb': {', '.join(bad)}")
    clean = {role: _normalise_color(colors[role]) for role in ROLES}
    return ChainTheme(name=name, dark=dark, colors=clean, description=description, source=source)


def config_dir(env: Mapping[str, str] | None = None) -> Path:
    """``$XDG_CONFIG_HOME/chaintriage`` (an absolute XDG path only), else ``~/.config/chaintriage``."""
    env = os.environ if env is None else env
    base = env.get("XDG_CONFIG_HOME", "")
    if base and os.path.isabs(base):
        return Path(base) / "chaintriage"
    home = env.get("HOME") or os.path.expanduser("~")
    return Path(home) / ".config" / "chaintriage"


def user_theme_dir(env: Mapping[str, str] | None = None) -> Path:
    """Where users put their own theme files."""
    return config_dir(env) / "themes"


def builtin_theme_texts() -> list[tuple[str, str]]:
    """(file name, TOML text) of each theme shipped with the package, sorted by file name."""
    out = []
    for entry in files("chaintriage.themes").iterdir():
        if entry.name.endswith(".toml") and entry.is_file():
            out.append((entry.name, entry.read_text(encoding="utf-8")))
    return sorted(out)


def load_themes(user_dir: str | os.PathLike[str] | None = None, *, include_user: bool = True) -> ThemeSet:
    """Built-in themes, then the user's (``user_dir`` or the config directory's ``themes``).

    Never raises for a bad file: it is skipped and a notice says which and why.
    """
    result = ThemeSet()
    skipped: list[str] = []
    for fname, text in builtin_theme_texts():
        try:
            theme = parse_theme(text, f"built-in theme {fname}")
        except ThemeError as exc:
            result.notices.append(f"skipped {exc}")
            continue
        result.themes[theme.name] = theme
    if not include_user:
        return result
    directory = Path(user_dir) if user_dir is not None else user_theme_dir()
    try:
        paths = sorted(p for p in directory.glob("*.toml") if p.is_file())
    except OSError as exc:
        result.notices.append(f"could not list themes in {directory}: {exc.strerror or exc}")
        return result
    for path in paths:
        try:
            text = read_small_file(path).decode("utf-8")
        except SmallFileError as exc:
            skipped.append(f"skipped theme file {path}: {exc.reason}")
            continue
        except UnicodeDecodeError as exc:
            skipped.append(f"skipped theme file {path}: cannot be read ({exc})")
            continue
        try:
            theme = parse_theme(text, str(path))
        except ThemeError as exc:
            skipped.append(f"skipped theme file {exc}")
            continue
        if theme.name == FALLBACK_THEME.name:
            skipped.append(f"skipped theme file {path}: the name {theme.name!r} is reserved for the theme built "
                           "into the program; give it another name")
            continue
        if theme.name in result.themes:
            result.notices.append(f"theme '{theme.name}' from {path} replaces the one found earlier")
        result.themes[theme.name] = theme
    result.notices.extend(summarise_skipped(skipped, directory))
    return result


#: More skipped theme files than this give one summary notice.
NOTICE_LIMIT = 5


def summarise_skipped(skipped: list[str], directory: Path) -> list[str]:
    """The notices for skipped theme files: each one, or one summary when there are many."""
    if len(skipped) <= NOTICE_LIMIT:
        return skipped
    first = skipped[0].removeprefix("skipped theme file ")
    if len(first) > 200:
        first = first[:199] + "~"
    return [f"skipped {len(skipped)} theme files in {directory} that cannot be used; the first: {first}"]


def css_variables(theme: ChainTheme) -> dict[str, str]:
    """Every role as a Textual CSS variable: ``ct-otm-call`` -> "#rrggbb"."""
    return {f"ct-{role.replace('_', '-')}": colour for role, colour in theme.colors.items()}


def to_textual_theme(theme: ChainTheme):
    """A ``textual.theme.Theme`` for ``App.register_theme`` (named ``theme.textual_name``)."""
    from textual.theme import Theme

    c = theme.colors
    return Theme(
        name=theme.textual_name,
        primary=c["accent"],
        secondary=c["forward_marker"],
        accent=c["marked"],
        warning=c["warning"],
        error=c["error"],
        success=c["otm_call"],
        foreground=c["text"],
        background=c["background"],
        surface=c["surface"],
        panel=c["surface"],
        dark=theme.dark,
        variables=css_variables(theme),
    )


#: Used only if no theme file at all can be read (so the app still has colours).
FALLBACK_THEME = ChainTheme(
    name="fallback",
    dark=True,
    description="built into the code; used when no theme file can be read",
    colors={
        "background": "#000000", "surface": "#1c1c1c", "text": "#e0e0e0", "dim": "#8a8a8a",
        "accent": "#5fafd7", "otm_call": "#5fafd7", "otm_put": "#d7af5f", "itm": "#c0c0c0",
        "itm_background": "#1c1c1c", "forward_marker": "#d7d75f", "highlight": "#303a4a",
        "highlight_text": "#ffffff", "selected": "#5f87af", "selected_text": "#ffffff",
        "marked": "#d75f87", "plot_market": "#5fafd7", "plot_flat": "#c0c0c0",
        "plot_beyond": "#d7875f", "warning": "#d7af00", "error": "#d75f5f",
    },
)
