"""The `chaintriage` command line.

``chaintriage`` with no arguments opens the app on the bundled demo chains.
Subcommands are registered by the functions in ``COMMANDS`` (see
``add_commands``); each one adds its parser and sets ``func`` to a function
``(args) -> exit status``. Shared options and printing live in
``cli_common``; each command in its own module.
"""

from __future__ import annotations

import argparse
import os
import sys
import warnings
from collections.abc import Callable, Sequence

from chaintriage.core.findings import ChainTriageError
from chaintriage.tui.check_command import add_check_command
from chaintriage.tui.cli_common import EXIT_OK, EXIT_UNUSABLE, PROG, error
from chaintriage.tui.open_command import add_open_command
from chaintriage.tui.table_commands import add_expiries_command, add_table_command

# --------------------------------------------------------------------------- parser and main

#: Functions that each register one subcommand on the subparsers object
#: (each as ``add_<name>_command(subparsers)`` setting ``func``).
COMMANDS: list[Callable[[argparse._SubParsersAction], None]] = [
    add_open_command, add_check_command, add_table_command, add_expiries_command,
]


def add_commands(subparsers: argparse._SubParsersAction) -> None:
    """Register every subcommand in ``COMMANDS``."""
    for add in COMMANDS:
        add(subparsers)


MAIN_EPILOG = """\
Run without arguments to open the app on the bundled demo chains.

examples:
  chaintriage
  chaintriage open chain.csv
  chaintriage check chain.csv
  chaintriage table chain.csv --beyond 1.5 --side puts
  chaintriage expiries chain.csv --confidence 0.95
  chaintriage COMMAND --help

Every figure is a model output from market quotes under stated assumptions;
it is not advice.
"""


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog=PROG,
        description="Option chain triage from the keyboard.",
        epilog=MAIN_EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("--version", action="version", version=f"%(prog)s {_version()}")
    subparsers = parser.add_subparsers(dest="command", metavar="COMMAND", title="commands")
    add_commands(subparsers)
    return parser


def _version() -> str:
    try:
        from importlib.metadata import version

        return version("chaintriage")
    except Exception:  # not installed (e.g. run from a source tree)
        return "unknown"


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point: returns the exit status."""
    argv = list(sys.argv[1:] if argv is None else argv)
    try:
        if not argv:
            from chaintriage.tui.app import open_app  # lazy: textual loads only for the app

            with warnings.catch_warnings():
                warnings.simplefilter("ignore", RuntimeWarning)
                return open_app([])
        parser = build_parser()
        args = parser.parse_args(argv)
        if getattr(args, "func", None) is None:
            parser.print_help(sys.stderr)
            return EXIT_UNUSABLE
        # Overflow and invalid-value warnings from numpy at absurd magnitudes are
        # not for the user: core reports such rows as NaN plus a finding.
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            return args.func(args)
    except ChainTriageError as exc:
        error(str(exc))
        return EXIT_UNUSABLE
    except BrokenPipeError:  # e.g. `chaintriage check big.csv | head`: stop quietly
        try:
            devnull = os.open(os.devnull, os.O_WRONLY)
            os.dup2(devnull, sys.stdout.fileno())
        except (OSError, ValueError, AttributeError):
            pass
        return EXIT_OK
    except KeyboardInterrupt:
        return 130


if __name__ == "__main__":
    sys.exit(main())
