"""Every tui test gets its own config directory: settings and user themes never touch the real home."""

from __future__ import annotations

import pytest


@pytest.fixture(autouse=True)
def config_home(tmp_path_factory, monkeypatch):
    home = tmp_path_factory.mktemp("config")
    monkeypatch.setenv("XDG_CONFIG_HOME", str(home))
    return home
