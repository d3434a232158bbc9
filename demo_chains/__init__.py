"""Fictional demo snapshots and the script that makes them."""
