"""Reading small text files safely: mapping files, settings, themes.

The same rule as for snapshot files: only a regular file is read (a FIFO, a
device such as /dev/zero, a directory or a symlink loop is refused with a
reason, never read until memory runs out or waited on forever), and a file
larger than ``limit`` bytes is refused before it is read.
"""

from __future__ import annotations

import errno
import os
import stat

from .findings import ChainTriageError

#: Largest small file read, in bytes (a settings or mapping file is a few hundred bytes).
SMALL_FILE_LIMIT = 1 << 20


class SmallFileError(ChainTriageError):
    """A small file that cannot be read; ``reason`` says why, ``missing`` is True when it does not exist."""

    def __init__(self, path: str, reason: str, *, missing: bool = False):
        self.path = str(path)
        self.reason = reason
        self.missing = missing
        super().__init__(f"{self.path}: {reason}")


def _refusal(path: str, exc: OSError) -> SmallFileError:
    if exc.errno == errno.ELOOP:
        return SmallFileError(path, "is a symbolic link that leads back to itself (a link loop)")
    if exc.errno == errno.ENOENT:
        if os.path.islink(path):
            return SmallFileError(path, "is a symbolic link to a file that does not exist", missing=True)
        return SmallFileError(path, "no such file", missing=True)
    if exc.errno == errno.EISDIR:
        return SmallFileError(path, "is a directory, not a file")
    return SmallFileError(path, f"cannot be read ({exc.strerror or exc})")


def kind_of(mode: int) -> str:
    """A plain name for a file type that is not a regular file."""
    if stat.S_ISDIR(mode):
        return "a directory"
    if stat.S_ISFIFO(mode):
        return "a named pipe (FIFO)"
    if stat.S_ISCHR(mode) or stat.S_ISBLK(mode):
        return "a device"
    if stat.S_ISSOCK(mode):
        return "a socket"
    return "not a regular file"


def not_regular(mode: int) -> str:
    """The reason for refusing a file of this type: "is a named pipe (FIFO), not a regular file"."""
    kind = kind_of(mode)
    return f"is {kind}, not a regular file" if kind.startswith("a ") else "is not a regular file"


def read_small_file(path: str | os.PathLike[str], limit: int = SMALL_FILE_LIMIT) -> bytes:
    """The bytes of a regular file of at most ``limit`` bytes; SmallFileError otherwise.

    The file is opened non-blocking (a FIFO swapped in after the check cannot
    hang the open) and checked again on the open descriptor.
    """
    name = os.fspath(path)
    try:
        st = os.stat(name)
    except OSError as exc:
        raise _refusal(name, exc) from None
    if not stat.S_ISREG(st.st_mode):
        raise SmallFileError(name, not_regular(st.st_mode))
    if st.st_size > limit:
        raise SmallFileError(name, f"is {st.st_size:,} bytes; a file of this kind is at most {limit:,} bytes")
    try:
        fd = os.open(name, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_CLOEXEC", 0))
    except OSError as exc:
        raise _refusal(name, exc) from None
    try:
        st = os.fstat(fd)
        if not stat.S_ISREG(st.st_mode):
            raise SmallFileError(name, not_regular(st.st_mode))
        chunks = []
        size = 0
        while size <= limit:
            chunk = os.read(fd, limit + 1 - size)
            if not chunk:
                break
            chunks.append(chunk)
            size += len(chunk)
    except OSError as exc:
        raise _refusal(name, exc) from None
    finally:
        os.close(fd)
    if size > limit:
        raise SmallFileError(name, f"is more than {limit:,} bytes; a file of this kind is at most {limit:,} bytes")
    return b"".join(chunks)
