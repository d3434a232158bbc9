"""Pure computation for chaintriage: numpy, scipy and pandas only (never textual or rich)."""
