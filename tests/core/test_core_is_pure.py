"""core/ must stay free of the UI layer (DESIGN.md: core is pure computation)."""

import pkgutil
import subprocess
import sys

import chaintriage.core


def test_core_modules_import_no_ui_packages():
    names = [m.name for m in pkgutil.walk_packages(chaintriage.core.__path__, "chaintriage.core.")]
    assert "chaintriage.core.findings" in names  # the walk really found the modules
    script = (
        "import importlib, sys\n"
        f"for name in {names!r}:\n"
        "    importlib.import_module(name)\n"
        "bad = sorted(m for m in sys.modules if m.split('.')[0] in ('textual', 'rich'))\n"
        "print(','.join(bad))\n"
    )
    out = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "", f"core imported UI modules: {out.stdout.strip()}"
