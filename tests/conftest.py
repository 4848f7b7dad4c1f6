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


@pytest.fixture(autouse=True)
def _private_state_dir(tmp_path_factory: pytest.TempPathFactory, monkeypatch: pytest.MonkeyPatch) -> None:
    """The run cache's secret key goes to a folder of this test session, never to $HOME."""
    monkeypatch.setenv("GAMMADOT_STATE_DIR", str(tmp_path_factory.getbasetemp() / "gammadot-state"))
