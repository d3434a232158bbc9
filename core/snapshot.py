"""The in-memory chain snapshot that the loader produces and the pipeline reads.

A ``Snapshot`` is one underlying at one moment: the contracts as a pandas
DataFrame with the canonical columns below, plus the findings about the rows
it came from. Text values (``underlying``, file names) are plain strings.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import pandas as pd

from .findings import Finding

#: Canonical contract columns, in order, with their meaning and units.
CONTRACT_COLUMNS: dict[str, str] = {
    "expiry": "expiry date (datetime64[ns], midnight, no time zone)",
    "strike": "strike price (float, price units)",
    "kind": "'call' or 'put' (str)",
    "bid": "bid price (float, NaN when missing)",
    "ask": "ask price (float, NaN when missing)",
    "iv": "implied volatility from the file (decimal, NaN when absent)",
    "iv_basis": "time basis of the file's iv: '252', '250' or '365' (str, '' when absent)",
    "volume": "traded contracts (float, NaN when absent)",
    "open_interest": "open contracts (float, NaN when absent)",
    "settle": "'pm' (settles at the close) or 'am' (at the open) (str)",
    "rate": "continuously compounded risk-free rate (decimal, NaN when absent)",
    "div_yield": "continuous dividend yield (decimal, NaN when absent)",
    "source_file": "file the row came from (str)",
    "source_line": "1-based line number in that file, header = line 1 (int)",
}


@dataclass
class Snapshot:
    """One underlying's option chain at one moment.

    ``as_of`` is a tz-aware pandas Timestamp; ``spot`` is in price units.
    ``contracts`` has exactly the columns of ``CONTRACT_COLUMNS`` and only
    usable rows (left-out rows appear in ``findings`` instead).
    """

    underlying: str
    as_of: pd.Timestamp
    spot: float
    contracts: pd.DataFrame
    findings: Sequence[Finding] = field(default_factory=list)  # a FindingTable from the loader
    sources: tuple[str, ...] = ()

    @property
    def label(self) -> str:
        """Short plain-text label, e.g. ``QRTZ 2026-12-01 15:30``."""
        return f"{self.underlying} {self.as_of:%Y-%m-%d %H:%M}"

    def expiries(self) -> list[pd.Timestamp]:
        """Sorted distinct expiry dates."""
        return sorted(self.contracts["expiry"].unique())
