"""The environment numpy and OpenBLAS read at import, set by the app and the subcommands.

[L] numpy reads ``NUMPY_MADVISE_HUGEPAGE`` when first imported (0: no huge-page
requests for big arrays; documented in numpy's environment-variable reference,
named here from memory) and reports its choice through
``numpy._core.multiarray._get_madvise_hugepage``; OpenBLAS reads
``OPENBLAS_NUM_THREADS`` at load. [D] a value the user has set is kept.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys

import pytest

PROBE = """
import json, os, sys
from chaintriage.tui.cli.main import _import_numerical_modules
_import_numerical_modules()
import numpy._core.multiarray as m
print(json.dumps({"huge": m._get_madvise_hugepage(), "blas": os.environ.get("OPENBLAS_NUM_THREADS"),
                  "madvise": os.environ.get("NUMPY_MADVISE_HUGEPAGE")}))
"""


def _run_probe(code: str, unset: tuple[str, ...], **env_overrides) -> dict:
    """The JSON a fresh interpreter running ``code`` prints, without the ``unset`` variables (plus overrides)."""
    env = {k: v for k, v in os.environ.items() if k not in unset}
    env.update(env_overrides)
    out = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True, timeout=120)
    assert out.returncode == 0, out.stderr
    return json.loads(out.stdout)


def _probe(**env_overrides) -> dict:
    return _run_probe(PROBE, ("OPENBLAS_NUM_THREADS", "NUMPY_MADVISE_HUGEPAGE"), **env_overrides)


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="numpy asks for huge pages on Linux only")
def test_a_subcommand_asks_for_no_huge_pages_and_one_blas_thread():
    assert _probe() == {"huge": False, "blas": "1", "madvise": "0"}


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="numpy asks for huge pages on Linux only")
def test_values_the_user_set_are_kept():
    assert _probe(NUMPY_MADVISE_HUGEPAGE="1", OPENBLAS_NUM_THREADS="2") == {"huge": True, "blas": "2",
                                                                          "madvise": "1"}


def test_nothing_is_set_once_numpy_is_imported(monkeypatch):
    from chaintriage.tui.numerical_environment import NUMERICAL_DEFAULTS, set_numerical_defaults

    import numpy  # noqa: F401  (this test process has numpy already)

    for name in NUMERICAL_DEFAULTS:
        monkeypatch.delenv(name, raising=False)
    assert set_numerical_defaults() is False
    assert all(name not in os.environ for name in NUMERICAL_DEFAULTS)


def test_the_app_worker_sets_them_before_its_imports(monkeypatch):
    from chaintriage.tui import snapshot_loading

    calls = []
    monkeypatch.setattr(snapshot_loading, "set_numerical_defaults", lambda: calls.append("set"))
    snapshot_loading.import_numerical_modules()
    assert calls == ["set"]


HEAP_PROBE = """
import json, resource, numpy as np
from chaintriage.tui.cli.main import _import_numerical_modules
_import_numerical_modules()
from chaintriage.tui.numerical_environment import hold_freed_memory
faults = []
for _ in range(6):  # three 3 MB arrays made, filled and freed, again and again
    before = resource.getrusage(resource.RUSAGE_SELF).ru_minflt
    arrays = [np.ones(3 * 2**20, dtype=np.uint8) for _ in range(3)]
    del arrays
    faults.append(resource.getrusage(resource.RUSAGE_SELF).ru_minflt - before)
print(json.dumps({"held": hold_freed_memory(), "faults": sum(faults[2:])}))
"""


def _heap_probe(**env_overrides) -> dict:
    return _run_probe(HEAP_PROBE, ("GLIBC_TUNABLES", "MALLOC_TOP_PAD_"), **env_overrides)


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="glibc's malloc settings")
def test_a_subcommand_keeps_freed_memory_for_reuse():
    # [D] glibc hands freed memory at the heap's top back to the kernel past its trim threshold, and
    # memory handed back faults in again page by page (4 KB): 3 x 3 MB per round is ~2,300 pages. With
    # the settings the arrays of a later round reuse the first round's pages.
    held = _heap_probe()
    if not held["held"]:
        pytest.skip("not glibc")
    assert held["faults"] < 200
    # a malloc setting of the user's own (here the default top pad) leaves glibc's defaults: pages fault again
    default = _heap_probe(MALLOC_TOP_PAD_="131072")
    assert default["held"] is False
    assert default["faults"] > 2000
