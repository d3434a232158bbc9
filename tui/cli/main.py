"""The `chaintriage` command line: the parser and the dispatcher.

``chaintriage`` with no arguments opens the app on the bundled demo chains.
Subcommands are listed in ``COMMANDS`` with the module that implements each;
a module is imported only when its subcommand runs (or its ``--help`` is
asked for), so ``chaintriage --help`` imports no more than argparse. Each
subcommand module has ``configure(parser)``, which adds its description,
options and ``func`` (a function ``(args) -> exit status``). Shared options
and printing live in ``common``.
"""

from __future__ import annotations

import argparse
import importlib
import sys
import warnings
from collections import namedtuple
from collections.abc import Sequence

from chaintriage.tui.cli.common import (
    EXIT_OK,
    EXIT_UNUSABLE,
    PROG,
    error,
    flush_out,
    safe_streams,
    stdout_to_devnull,
)


class Command(namedtuple("Command", "name summary module interactive", defaults=(False,))):
    """One subcommand: its name, the line ``chaintriage --help`` shows, and the module that runs it.

    ``interactive`` commands open the Textual app; every other one must run without importing it.
    (A named tuple, not a dataclass: importing dataclasses costs ``--help`` a tenth of its time.)
    """

    __slots__ = ()


#: Every subcommand, in the order ``--help`` lists them.
COMMANDS: tuple[Command, ...] = (
    Command("open", "open the triage app on snapshot files", "chaintriage.tui.cli.open", interactive=True),
    Command("check", "validate snapshot files and report every finding", "chaintriage.tui.cli.check"),
    Command("table", "one row per contract: vols, sigma distance, finish-beyond and touch odds",
            "chaintriage.tui.cli.table"),
    Command("expiries", "one row per expiry: forward, discount, atm iv, ranges, fit quality",
            "chaintriage.tui.cli.expiries"),
    Command("events", "the move the options price for each scheduled event (earnings and the like)",
            "chaintriage.tui.cli.events"),
    Command("targets", "one row per expiry: the strike nearest a sigma, delta or P(beyond) target",
            "chaintriage.tui.cli.targets"),
    Command("history", "realised vol by estimator and window, and the volatility cone, from daily prices",
            "chaintriage.tui.cli.history"),
    Command("demo-path", "print the folder of the bundled demo snapshots (for trying the examples)",
            "chaintriage.tui.cli.demo_path"),
)


MAIN_EPILOG = """\
Run without arguments to open the app on the bundled demo chains.

examples:
  chaintriage
  chaintriage open chain.csv
  chaintriage check chain.csv
  chaintriage table chain.csv --beyond 1.5 --side puts
  chaintriage expiries chain.csv --confidence 0.95
  chaintriage events chain.csv --events events.csv
  chaintriage targets chain.csv --side puts --sigma 1.5
  chaintriage history prices.csv --windows 21,63,252
  chaintriage check "$(chaintriage demo-path)/messy_export.csv"
  chaintriage COMMAND --help

Every figure is a model output from market quotes under stated assumptions;
it is not advice.
"""


def build_parser(wanted: str | None = None) -> argparse.ArgumentParser:
    """The parser; only the subcommand named ``wanted`` gets its options (its module is imported).

    ``wanted="*"`` configures every subcommand (for tools that want the whole parser).
    """
    parser = argparse.ArgumentParser(
        prog=PROG,
        description="Option chain triage from the keyboard.",
        epilog=MAIN_EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("--version", action=_VersionAction)
    subparsers = parser.add_subparsers(dest="command", metavar="COMMAND", title="commands")
    for command in COMMANDS:
        sub = subparsers.add_parser(command.name, help=command.summary, description=command.summary,
                                    formatter_class=argparse.RawDescriptionHelpFormatter)
        if wanted in (command.name, "*"):
            importlib.import_module(command.module).configure(sub)
    return parser


class _VersionAction(argparse.Action):
    """``--version``: the installed version, looked up only when asked (importlib.metadata is slow to import)."""

    def __init__(self, option_strings, dest=argparse.SUPPRESS, default=argparse.SUPPRESS,
                 help="show program's version number and exit"):
        super().__init__(option_strings=option_strings, dest=dest, default=default, nargs=0, help=help)

    def __call__(self, parser, namespace, values, option_string=None):
        parser._print_message(f"{parser.prog} {_version()}\n", sys.stdout)
        parser.exit()


def _version() -> str:
    try:
        from importlib.metadata import version

        return version("chaintriage")
    except Exception:  # not installed (e.g. run from a source tree)
        return "unknown"


def _import_numerical_modules() -> None:
    """The loader (numpy, pandas), which every subcommand that runs uses, imported with the cycle
    collector paused and its objects frozen after (later passes skip them): ~0.05-0.1 s less CPU;
    numpy gets ``numerical_environment.NUMERICAL_DEFAULTS`` unless the environment says otherwise, and
    malloc keeps freed memory for reuse (``numerical_environment.hold_freed_memory``)."""
    import gc

    from chaintriage.tui.collector import collector_paused
    from chaintriage.tui.numerical_environment import hold_freed_memory, set_numerical_defaults

    set_numerical_defaults()

    with collector_paused():
        import chaintriage.core.loading  # noqa: F401
    gc.freeze()
    hold_freed_memory()  # (after numpy's import, which brings ctypes)


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point: returns the exit status."""
    argv = list(sys.argv[1:] if argv is None else argv)
    safe_streams()

    try:
        if not argv:
            from chaintriage.tui.app import open_app  # textual loads only for the app

            with warnings.catch_warnings():
                warnings.simplefilter("ignore", RuntimeWarning)
                return open_app([])
        parser = build_parser(wanted=argv[0])
        args = parser.parse_args(argv)
        if getattr(args, "func", None) is None:
            parser.print_help(sys.stderr)
            return EXIT_UNUSABLE
        _import_numerical_modules()
        # Overflow and invalid-value warnings from numpy at absurd magnitudes are
        # not for the user: core reports such rows as NaN plus a finding.
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            status = args.func(args)
        flush_out()  # a reader that went away leaves the status as the data deserves
        return status
    except MemoryError:  # past loading (which names the file itself): the work does not fit either
        error("out of memory: the snapshot is too big for the memory available; split the file "
              "(e.g. one file per underlying or per expiry)")
        return EXIT_UNUSABLE
    except BrokenPipeError:  # help or usage text cut short (commands write through write_out)
        stdout_to_devnull()
        return EXIT_OK
    except KeyboardInterrupt:
        return 130
    except Exception as exc:
        from chaintriage.core.findings import ChainTriageError  # imported here: --help needs none of core

        if not isinstance(exc, ChainTriageError):
            raise
        error(str(exc))
        return EXIT_UNUSABLE


if __name__ == "__main__":
    sys.exit(main())
