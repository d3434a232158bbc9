"""Atomic file writing: a temp file in the target's directory, then a rename.

A reader never sees a half-written file: the text goes to a temporary file
beside the target, is flushed to disk, and only then takes the target's name.
Without ``overwrite`` an existing target is never replaced (the final step is
a hard link, which fails if the name is taken; where links are not supported
the check is a plain existence test just before the rename).
"""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

from chaintriage.core.findings import ChainTriageError


class TargetExistsError(ChainTriageError, FileExistsError):
    """The file is already there and the caller did not allow overwriting it."""


def write_text_atomic(path: str | os.PathLike[str], text: str, *, overwrite: bool = False,
                      encoding: str = "utf-8", newline: str | None = None) -> Path:
    """Write ``text`` to ``path`` atomically; returns the path.

    Raises TargetExistsError if ``path`` exists and ``overwrite`` is False, and
    ChainTriageError (with the OS reason) if the directory cannot be written.
    """
    target = Path(path)
    directory = target.parent if str(target.parent) else Path(".")
    if not overwrite and target.exists():
        raise TargetExistsError(f"{target} already exists; not overwriting it")
    try:
        fd, tmp_name = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=directory)
    except OSError as exc:
        raise ChainTriageError(f"cannot write in {directory}: {exc.strerror or exc}") from exc
    tmp = Path(tmp_name)
    try:
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
    except OSError as exc:
        raise ChainTriageError(f"cannot write {target}: {exc.strerror or exc}") from exc
    finally:
        if tmp.exists():
            try:
                tmp.unlink()
            except OSError:
                pass
    return target
