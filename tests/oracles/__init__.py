"""Test-only oracles: models priced outside the project (QuantLib) and Monte Carlo references."""
