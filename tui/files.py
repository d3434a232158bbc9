"""Atomic file writing: a temp file in the target's directory, then a rename.

A reader never sees a half-written file: the text goes to a temporary file
beside the target, is flushed to disk, and only then takes the target's name.
Without ``overwrite`` an existing target is never replaced (the final step is
a hard link, which fails if the name is taken; where links are not supported
the check is a plain existence test just before the rename).

The new file gets the mode an ordinary ``open()`` would give it (0666 less
the umask); a replaced file keeps its own mode. A target that is a symbolic
link is written through the link: the file it points to is replaced and the
link stays.
"""

from __future__ import annotations

import os
import stat
import tempfile
from pathlib import Path

from chaintriage.core.findings import ChainTriageError


class TargetExistsError(ChainTriageError, FileExistsError):
    """The file is already there and the caller did not allow overwriting it."""


#: Temp files being written right now (removed by ``remove_pending_temps`` when the app is stopped).
_pending: set[str] = set()


def remove_pending_temps() -> int:
    """Delete the temp files of writes still under way (on SIGTERM/SIGHUP); how many were removed."""
    removed = 0
    for name in list(_pending):
        try:
            os.unlink(name)
            removed += 1
        except OSError:
            pass
        _pending.discard(name)
    return removed


def current_umask() -> int:
    """The process umask (read from /proc where it can be, without changing it)."""
    try:
        with open("/proc/self/status", encoding="ascii", errors="replace") as fh:
            for line in fh:
                if line.startswith("Umask:"):
                    return int(line.split()[1], 8)
    except (OSError, ValueError, IndexError):
        pass
    mask = os.umask(0o022)  # elsewhere: read it by setting it, and put it straight back
    os.umask(mask)
    return mask


def _mode_for(target: Path) -> int:
    """The permission bits the written file should get: the existing file's, else 0666 less the umask."""
    try:
        st = os.stat(target)
    except OSError:
        return 0o666 & ~current_umask()
    return stat.S_IMODE(st.st_mode) if stat.S_ISREG(st.st_mode) else 0o666 & ~current_umask()


def _through_links(target: Path) -> Path:
    """The file a symbolic link finally points to (the target itself when it is not a link)."""
    if not target.is_symlink():
        return target
    try:
        return Path(os.path.realpath(target, strict=False))
    except (OSError, RuntimeError, ValueError):
        return target


def write_text_atomic(path: str | os.PathLike[str], text: str, *, overwrite: bool = False,
                      encoding: str = "utf-8", newline: str | None = None) -> Path:
    """Write ``text`` to ``path`` atomically; returns the path.

    Raises TargetExistsError if ``path`` exists and ``overwrite`` is False, and
    ChainTriageError (with the OS reason) if the directory cannot be written.
    """
    given = Path(path)
    try:
        if not overwrite and (given.exists() or given.is_symlink()):
            raise TargetExistsError(f"{given} already exists; not overwriting it")
        target = _through_links(given) if overwrite else given
        directory = target.parent if str(target.parent) else Path(".")
        mode = _mode_for(target)
        fd, tmp_name = tempfile.mkstemp(prefix=f".{target.name[:100]}.", suffix=".tmp", dir=directory)
    except ChainTriageError:
        raise
    except (OSError, ValueError) as exc:
        where = given.parent if str(given.parent) else Path(".")
        raise ChainTriageError(f"cannot write in {where}: {getattr(exc, 'strerror', None) or exc}") from exc
    tmp = Path(tmp_name)
    _pending.add(tmp_name)
    try:
        try:
            os.fchmod(fd, mode)
        except OSError:
            pass  # a file system without modes: keep what it gives
        with os.fdopen(fd, "w", encoding=encoding, newline=newline) as fh:
            fh.write(text)
            fh.flush()
            os.fsync(fh.fileno())
        if overwrite:
            os.replace(tmp, target)
        else:
            try:
                os.link(tmp, target)
            except FileExistsError as exc:
                raise TargetExistsError(f"{target} already exists; not overwriting it") from exc
            except OSError:
                # The file system has no hard links: check, then rename.
                if target.exists():
                    raise TargetExistsError(f"{target} already exists; not overwriting it") from None
                os.replace(tmp, target)
    except ChainTriageError:
        raise
    except (OSError, ValueError) as exc:  # ValueError: text the encoding cannot hold
        raise ChainTriageError(f"cannot write {target}: {getattr(exc, 'strerror', None) or exc}") from exc
    finally:
        _pending.discard(tmp_name)
        if tmp.exists():
            try:
                tmp.unlink()
            except OSError:
                pass
    return target
