"""`chaintriage demo-path`: print where the bundled demo chains are, so examples can use them.

It never loads Textual: the folder comes from the installed package's resources.
"""

from __future__ import annotations

import argparse
import os
from importlib import resources

from chaintriage.tui.cli.common import EXIT_OK, EXIT_UNUSABLE, error, plain

DEMO_PACKAGE = "chaintriage.demo_chains"

DEMO_PATH_EPILOG = """\
examples:
  chaintriage demo-path                       (the folder)
  chaintriage demo-path --files               (one demo file per line)
  chaintriage demo-path ospx                  (the demo file whose name starts so)
  chaintriage check "$(chaintriage demo-path)/messy_export.csv"
  chaintriage table "$(chaintriage demo-path)/ospx_2026-12-01.csv" --beyond 1.5

The demo underlyings are fictional (no real company).
"""


def demo_folder() -> str | None:
    """The folder holding the bundled demo CSV files, or None when none are installed."""
    try:
        root = resources.files(DEMO_PACKAGE)
        path = os.fspath(root)  # type: ignore[arg-type]
    except (ModuleNotFoundError, FileNotFoundError, TypeError):
        return None
    return path if os.path.isdir(path) else None


def configure(p: argparse.ArgumentParser) -> None:
    """Add `demo-path`'s description, options and ``func`` to its parser."""
    p.description = "Print the folder of the bundled demo snapshots (fictional underlyings)."
    p.epilog = DEMO_PATH_EPILOG
    p.add_argument("name", nargs="?", metavar="NAME",
                   help="print the path of the demo file whose name starts with NAME (e.g. ospx, messy)")
    p.add_argument("--files", action="store_true",
                   help="print each demo CSV file's full path, one per line, instead of the folder")
    p.set_defaults(func=run_demo_path)


def run_demo_path(args: argparse.Namespace) -> int:
    folder = demo_folder()
    if folder is None:
        error("no demo chains are bundled with this installation")
        return EXIT_UNUSABLE
    names = sorted(n for n in os.listdir(folder) if n.lower().endswith(".csv"))
    if args.name:
        wanted = os.path.basename(args.name).lower()
        chosen = [n for n in names if n.lower().startswith(wanted)]
        if not chosen:
            error(f"no demo file starts with {args.name!r}; the demo files are: {', '.join(names)}")
            return EXIT_UNUSABLE
        for name in chosen:
            print(plain(os.path.join(folder, name)))
    elif args.files:
        for name in names:
            print(plain(os.path.join(folder, name)))
    else:
        print(plain(folder))
    return EXIT_OK
