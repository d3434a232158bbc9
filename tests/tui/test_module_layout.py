"""The layout of the packages (DEVELOPERS.md): the command line's non-interactive subcommands
never load the Textual app, ``chaintriage --help`` loads none of the numerical stack, and no
chaintriage module imports, however indirectly, one that imports it back.

Each import check runs in a fresh interpreter and reads ``sys.modules`` [C].
"""

from __future__ import annotations

import ast
import importlib.util
import json
import pkgutil
import subprocess
import sys
from importlib import resources

import chaintriage.core
import chaintriage.tui
from chaintriage.tui.cli.main import COMMANDS

UI = ("textual",)


def _modules_after(code: str) -> set[str]:
    """Top-level names of the modules loaded after running ``code`` in a fresh interpreter."""
    script = code + "\nimport json, sys\nprint(json.dumps(sorted({m.split('.')[0] for m in sys.modules})))\n"
    out = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, timeout=120)
    assert out.returncode == 0, out.stderr[-2000:]
    return set(json.loads(out.stdout.strip().splitlines()[-1]))


def _run_main(args: list[str]) -> str:
    return (
        "import contextlib, io\n"
        "from chaintriage.tui.cli.main import main\n"
        "with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()):\n"
        "    try:\n"
        f"        main({args!r})\n"
        "    except SystemExit:\n"
        "        pass\n"
    )


def _demo_chain() -> str:
    from chaintriage.tui.snapshot_loading import demo_files

    return str(resources.files("chaintriage.demo_chains") / demo_files()[0])


def test_non_interactive_subcommands_import_no_textual():
    """Every registered subcommand that is not marked interactive (today check, table, expiries),
    asked for its help and run on a demo chain, leaves Textual unloaded."""
    batch = [c for c in COMMANDS if not c.interactive]
    assert {"check", "table", "expiries"} <= {c.name for c in batch}
    demo = _demo_chain()
    required = {"targets": ["--side", "puts", "--sigma", "1"]}  # options it cannot run without
    for command in batch:
        for args in ([command.name, "--help"], [command.name, *required.get(command.name, []), demo]):
            loaded = _modules_after(_run_main(args))
            if args[-1] == demo and command.name != "demo-path":  # it really ran: the loader's imports are there
                assert "pandas" in loaded, (args, sorted(loaded))
            bad = sorted(loaded & set(UI))
            assert not bad, f"`chaintriage {' '.join(args)}` imported {bad}"


def test_the_check_finds_textual_where_it_is_loaded():
    """The probe itself can fail: the interactive command's module path does load Textual."""
    loaded = _modules_after("import chaintriage.tui.app")
    assert "textual" in loaded


def test_main_help_imports_no_numerical_stack():
    """`chaintriage --help` needs argparse only: no numpy, pandas, scipy or Textual."""
    loaded = _modules_after(_run_main(["--help"]))
    bad = sorted(loaded & {"numpy", "pandas", "scipy", "textual", "rich"})
    assert not bad, f"`chaintriage --help` imported {bad}"


def test_every_subcommands_help_imports_no_numerical_stack():
    """`chaintriage SUBCOMMAND --help` (every subcommand, `open` included) builds its options from
    light modules: no numpy, pandas, scipy or Textual is loaded, and the help is really printed."""
    assert {"open", "check", "table", "expiries", "events", "targets", "history"} <= {c.name for c in COMMANDS}
    for command in COMMANDS:
        code = (
            "import contextlib, io\n"
            "from chaintriage.tui.cli.main import main\n"
            "out = io.StringIO()\n"
            "with contextlib.redirect_stdout(out), contextlib.redirect_stderr(io.StringIO()):\n"
            "    try:\n"
            f"        main([{command.name!r}, '--help'])\n"
            "    except SystemExit:\n"
            "        pass\n"
            f"assert out.getvalue().startswith('usage: chaintriage {command.name} '), out.getvalue()[:200]\n"
        )
        loaded = _modules_after(code)
        bad = sorted(loaded & {"numpy", "pandas", "scipy", *UI})
        assert not bad, f"`chaintriage {command.name} --help` imported {bad}"


# ---------------------------------------------------------------- import cycles


def _all_modules() -> dict[str, str]:
    """chaintriage.core and chaintriage.tui modules (packages included) -> source file."""
    out = {}
    for pkg in (chaintriage.core, chaintriage.tui):
        out[pkg.__name__] = pkg.__file__
        for info in pkgutil.walk_packages(pkg.__path__, pkg.__name__ + "."):
            spec = importlib.util.find_spec(info.name)
            if spec is not None and spec.origin and spec.origin.endswith(".py"):
                out[info.name] = spec.origin
    return out


def _imports_of(name: str, path: str, known: set[str]) -> set[str]:
    """The chaintriage modules ``name`` imports anywhere in its source: at the top, inside functions
    and under TYPE_CHECKING alike (a cycle through a lazy import is still a cycle of the design)."""
    is_package = path.endswith("__init__.py")
    package = name if is_package else name.rpartition(".")[0]
    tree = ast.parse(open(path, encoding="utf-8").read(), path)
    found: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            targets = [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")
                base = base[: len(base) - (node.level - 1)]
                mod = ".".join(base + ([node.module] if node.module else []))
            else:
                mod = node.module or ""
            targets = [f"{mod}.{a.name}" if f"{mod}.{a.name}" in known else mod for a in node.names]
        else:
            continue
        for t in targets:
            while t and t not in known:  # `import chaintriage.tui.x.y` names a module or its package
                t = t.rpartition(".")[0]
            if t and t != name:
                found.add(t)
    return found


def find_cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """Strongly connected components with more than one module (Tarjan's algorithm)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    cycles: list[list[str]] = []
    counter = [0]

    def visit(v: str) -> None:
        index[v] = low[v] = counter[0]
        counter[0] += 1
        stack.append(v)
        on_stack.add(v)
        for w in sorted(graph.get(v, ())):
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on_stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            comp = []
            while True:
                w = stack.pop()
                on_stack.discard(w)
                comp.append(w)
                if w == v:
                    break
            if len(comp) > 1:
                cycles.append(sorted(comp))

    for v in sorted(graph):
        if v not in index:
            visit(v)
    return cycles


def test_cycle_finder_finds_a_cycle():
    graph = {"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}
    assert find_cycles(graph) == [["a", "b", "c"]]
    assert find_cycles({"a": {"b"}, "b": set()}) == []


def test_no_import_cycle_among_chaintriage_modules():
    modules = _all_modules()
    assert "chaintriage.tui.app" in modules and "chaintriage.tui.cli.main" in modules
    known = set(modules)
    graph = {name: _imports_of(name, path, known) for name, path in modules.items()}
    assert "chaintriage.tui.screens.triage" in graph["chaintriage.tui.app"]  # the parser sees imports
    assert find_cycles(graph) == []


def test_core_imports_nothing_from_the_ui_layer():
    modules = _all_modules()
    known = set(modules)
    for name, path in modules.items():
        if name.startswith("chaintriage.core"):
            assert not {m for m in _imports_of(name, path, known) if m.startswith("chaintriage.tui")}, name


def test_pyproject_ships_every_package():
    """Every folder of core/ and tui/ that is a package is listed in pyproject.toml, so the wheel
    carries it (the listing is explicit: a new subpackage left out would be missing when installed)."""
    import tomllib
    from pathlib import Path

    root = Path(__file__).resolve().parents[2]
    config = tomllib.loads((root / "pyproject.toml").read_text(encoding="utf-8"))["tool"]["setuptools"]
    listed = set(config["packages"])
    dirs = {v: k for k, v in config["package-dir"].items()}
    found = set()
    for top in ("core", "tui"):
        for init in (root / top).rglob("__init__.py"):
            rel = init.parent.relative_to(root).as_posix()
            assert rel in dirs, f"{rel} has no package-dir entry in pyproject.toml"
            found.add(dirs[rel])
    assert {"chaintriage.tui.cli", "chaintriage.tui.screens", "chaintriage.tui.widgets"} <= found
    assert found <= listed, f"not listed in pyproject.toml: {sorted(found - listed)}"


def test_the_app_module_needs_only_textual_for_its_first_frame():
    """Importing the app (what runs before the first frame) loads no numpy, pandas or scipy: the
    loading worker imports them while the screen already shows its loading state."""
    loaded = _modules_after("import chaintriage.tui.app, chaintriage.tui.cli.main")
    assert "textual" in loaded
    bad = sorted(loaded & {"numpy", "pandas", "scipy"})
    assert not bad, f"importing the app imported {bad}"


def test_scipy_optimize_only_where_it_is_used():
    """Importing the loader, the pipeline and the `table` command imports neither scipy.optimize
    (only the single-expiry fallback fit uses it, and imports it when it runs) nor scipy.special
    (core.standard_normal stands in for it: its import costs ~0.1 s of the app's first data frame)."""
    code = (
        "import sys\n"
        "from chaintriage.core.loading import load_files\n"
        "from chaintriage.core.pipeline import annotate, PipelineSettings\n"
        "import chaintriage.tui.cli.table\n"
        "assert 'scipy.special' not in sys.modules and 'scipy.optimize' not in sys.modules, 'scipy at start'\n"
    )
    assert "pandas" in _modules_after(code)
