"""Settings numpy and its BLAS read from the environment when first imported, chosen for this program.

- ``OPENBLAS_NUM_THREADS=1``: the matrices here are small (an expiry's smile fit); a pool of BLAS
  threads costs ~30-100 ms of CPU when numpy is imported (and spins after a call), taken from the
  screen's thread or the command's own work on a machine with few cores.
- ``NUMPY_MADVISE_HUGEPAGE=0``: numpy asks Linux for huge pages for arrays of 4 MB or more. Where the
  kernel then compacts memory on the spot (transparent huge pages on ``madvise`` with ``defrag`` on
  ``madvise``, a common default), each such array can stall the process in the kernel: `table` on
  200,000 contracts measured 0.78 s of system time against 0.28 s without (means of 5 runs), for the
  same user time. The setting is numpy's own documented switch for kernels where this is slow.

A value the user has set is kept.
"""

from __future__ import annotations

import os
import sys

#: The defaults, applied only where the environment has no value of its own.
NUMERICAL_DEFAULTS = {"OPENBLAS_NUM_THREADS": "1", "NUMPY_MADVISE_HUGEPAGE": "0"}


def set_numerical_defaults() -> bool:
    """Put ``NUMERICAL_DEFAULTS`` into the environment where unset, before numpy's first import.
    False (nothing changed) when numpy is already imported: it has read its settings by then."""
    if "numpy" in sys.modules:
        return False
    for name, value in NUMERICAL_DEFAULTS.items():
        os.environ.setdefault(name, value)
    return True


#: glibc's malloc settings for a command's run (``hold_freed_memory``), by ``mallopt`` parameter number:
#: arrays below 32 MB (the largest this setting takes) come from the heap, and memory freed at the
#: heap's top stays there for the next arrays (up to 1 GB) instead of going back to the kernel.
HEAP_SETTINGS = {-3: 32 << 20, -1: 1 << 30}  # M_MMAP_THRESHOLD, M_TRIM_THRESHOLD

#: Variables through which the user tunes glibc's malloc: when one is set, the settings are left alone.
MALLOC_VARIABLES = ("GLIBC_TUNABLES", "MALLOC_MMAP_THRESHOLD_", "MALLOC_TRIM_THRESHOLD_", "MALLOC_TOP_PAD_")


def hold_freed_memory() -> bool:
    """Ask glibc's malloc to keep freed memory for reuse (``HEAP_SETTINGS``); True when done.

    By default glibc hands a freed array of some hundred KB or more back to the kernel (its own
    mapping, or the heap's top trimmed), and the next array of that size is fresh memory: a page
    fault per 4 KB page on first touch (microseconds each on a virtual machine). A command's numpy
    and pandas temporaries come and go by the thousand: `table` on 200,000 contracts made ~88,000
    page faults (json ~240,000) and ~65,000 (json ~100,000) with these settings, for the same peak
    memory. For the command line's short runs only (the app's long session hands memory back).
    Nothing is done off glibc, or where the user set one of ``MALLOC_VARIABLES``.
    """
    if not sys.platform.startswith("linux") or any(name in os.environ for name in MALLOC_VARIABLES):
        return False
    try:
        import ctypes

        libc = ctypes.CDLL(None)
        if not hasattr(libc, "gnu_get_libc_version"):  # another C library (musl has a mallopt that does nothing)
            return False
        return all(libc.mallopt(param, value) == 1 for param, value in HEAP_SETTINGS.items())
    except (OSError, AttributeError):
        return False
