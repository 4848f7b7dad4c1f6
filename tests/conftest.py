"""Shared fixtures: a registry of built-in plugins only (installed third-party plugins never
leak into tests)."""

from __future__ import annotations

import pytest

from gammadot.plugin_manager import build_plugin_manager
from gammadot.registry import Registry, build_registry


@pytest.fixture
def registry() -> Registry:
    """Built-in plugins only."""
    return build_registry(build_plugin_manager(entry_points=False))
