"""Options that change the numbers (--basis, --confidence, --use-file-iv, --closed), shared by
`open`, `table` and `expiries`, and the core ``PipelineSettings`` they make."""

from __future__ import annotations

import argparse
from typing import TYPE_CHECKING

from chaintriage.core.confidence import DEFAULT_CONFIDENCE
from chaintriage.core.findings import ChainTriageError

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd

    from chaintriage.core.pipeline import PipelineSettings


def _confidence(text: str) -> float:
    try:
        value = float(text.rstrip("%")) / (100.0 if text.endswith("%") else 1.0)
    except ValueError:
        raise argparse.ArgumentTypeError(f"not a number: {text!r}") from None
    if not 0.0 < value < 1.0:
        raise argparse.ArgumentTypeError(f"must be between 0 and 1 (or 0%% and 100%%): {text!r}")
    return value


def non_negative(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"not a number: {text!r}") from None
    if not value >= 0 or value == float("inf"):
        raise argparse.ArgumentTypeError(f"must be zero or more: {text!r}")
    return value


def positive(text: str) -> float:
    value = non_negative(text)
    if value == 0:
        raise argparse.ArgumentTypeError(f"must be more than zero: {text!r}")
    return value


def add_pipeline_options(parser: argparse.ArgumentParser) -> None:
    """Options that change the numbers: --basis, --confidence, --use-file-iv, --closed."""
    group = parser.add_argument_group("model options")
    group.add_argument("--basis", choices=("252", "250", "365"), default="252",
                       help="time basis: trading days per year (252, 250) or calendar ACT/365 (default 252)")
    group.add_argument("--confidence", type=_confidence, default=DEFAULT_CONFIDENCE, metavar="C",
                       help="two-sided confidence of the ranges, e.g. 0.9 or 95%% "
                            "(default 68.27%%, one sigma: 0.682689...)")
    group.add_argument("--use-file-iv", action="store_true",
                       help="use the file's iv column (converted to --basis) instead of solving from mids")
    group.add_argument("--closed", action="append", default=[], metavar="DATE",
                       help="an extra exchange-closed date, YYYY-MM-DD (repeatable)")


def parse_day(text: str) -> pd.Timestamp | None:
    """The date in an option's text (midnight), or None when it is not a date (empty text and 'NaT' included)."""
    import pandas as pd

    try:
        ts = pd.Timestamp(text)
    except (ValueError, TypeError, OverflowError):
        return None
    return None if ts is pd.NaT else ts.normalize()


def pipeline_settings(args: argparse.Namespace) -> PipelineSettings:
    """PipelineSettings from parsed options. Raises ChainTriageError on a bad date."""
    from chaintriage.core.pipeline import PipelineSettings

    closed = []
    for text in args.closed:
        day = parse_day(text)
        if day is None:
            raise ChainTriageError(f"--closed {text!r} is not a date (YYYY-MM-DD)")
        closed.append(day)
    return PipelineSettings(basis=args.basis, confidence=args.confidence,
                            use_file_iv=args.use_file_iv, extra_closed=tuple(closed))
