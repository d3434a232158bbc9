"""Findings: what the loader and the core pipeline say about the data.

A finding is plain data. Every row of a snapshot file is either accepted,
accepted with a warning, or left out with a reason; core adds notes and
warnings about whole expiries (a parity forward that fell back, a smile fit
with butterfly arbitrage, ...). Text in a finding is plain text, never markup.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass
from typing import Any

#: The row was not used.
LEFT_OUT = "left-out"
#: The row or expiry was used, but something about it deserves a look.
WARNING = "warning"
#: Informational: a fallback or a choice the pipeline made.
NOTE = "note"

SEVERITIES = (LEFT_OUT, WARNING, NOTE)


@dataclass(frozen=True, slots=True)
class Finding:
    """One message about the data.

    ``line`` is the 1-based line number as a text editor shows it (the header
    is line 1), or None when the finding is not about one row.
    """

    severity: str
    reason: str
    file: str | None = None
    line: int | None = None
    column: str | None = None
    underlying: str | None = None
    expiry: str | None = None  # ISO date, YYYY-MM-DD

    def __post_init__(self) -> None:
        if self.severity not in SEVERITIES:
            raise ValueError(f"unknown severity {self.severity!r}")

    def location(self, with_file: bool = True) -> str:
        """Where the finding points, e.g. ``chain.csv:12 [bid]`` (plain text).

        With ``with_file=False`` the file name is left out (``line 12 [bid]``),
        for reports already grouped by file.
        """
        parts = []
        if self.file is not None and with_file:
            parts.append(self.file if self.line is None else f"{self.file}:{self.line}")
        elif self.line is not None:
            parts.append(f"line {self.line}")
        if self.column:
            parts.append(f"[{self.column}]")
        if self.underlying:
            parts.append(self.underlying)
        if self.expiry:
            parts.append(self.expiry)
        return " ".join(parts)

    def as_dict(self) -> dict[str, Any]:
        """A JSON-ready dict."""
        return asdict(self)

    def __str__(self) -> str:
        where = self.location()
        return f"{where}: {self.severity}: {self.reason}" if where else f"{self.severity}: {self.reason}"


class ChainTriageError(Exception):
    """The project's own error: a problem with the user's input that stops the work.

    The message is written for the user (it names the file and the reason);
    callers show it without a traceback.
    """
