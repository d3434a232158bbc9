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
