"""Colour themes shipped as TOML data files."""
