"""Building the plugin manager: blocks, built-ins, entry points, validation — in that order.

Nothing happens at import time: :func:`build_plugin_manager` is called by the CLI (or a
test) with the names to block. Third-party plugins arrive through the entry-point group
``gammadot``; a plugin that fails to load stops start-up with its name and how to block it.

Every plugin is checked against the compatibility rule (:mod:`gammadot.compat`) before it
is registered: one whose declared ``GAMMADOT_HOOKSPEC`` range excludes this gammadot's hook
specs stops start-up with its name and both versions.

Environment:
- ``GAMMADOT_BLOCK_PLUGINS``: comma-separated plugin names never to register.
- ``GAMMADOT_NO_ENTRY_POINTS=1``: load built-ins only (no third-party plugins).
"""

from __future__ import annotations

import importlib
import os
from importlib import metadata
from typing import Iterable

import pluggy

from . import hookspecs
from .hookspecs import PROJECT_NAME

ENTRY_POINT_GROUP = "gammadot"
BLOCK_ENV = "GAMMADOT_BLOCK_PLUGINS"
NO_ENTRY_POINTS_ENV = "GAMMADOT_NO_ENTRY_POINTS"


class PluginLoadError(RuntimeError):
    """A plugin could not be loaded or validated; the message names it and how to block it."""


def blocked_from_env() -> list[str]:
    """Plugin names listed in ``GAMMADOT_BLOCK_PLUGINS``."""
    return [name.strip() for name in os.environ.get(BLOCK_ENV, "").split(",") if name.strip()]


def _how_to_block(name: str) -> str:
    return f"start without it with --block {name} or {BLOCK_ENV}={name}"


def build_plugin_manager(block: Iterable[str] = (), *, entry_points: bool | None = None,
                         extra: Iterable[tuple[str, object]] = ()) -> pluggy.PluginManager:
    """A ready plugin manager: blocked names, built-ins, entry points, ``extra`` plugins.

    ``entry_points=None`` follows ``GAMMADOT_NO_ENTRY_POINTS``; ``extra`` registers
    (name, plugin) pairs last (tests use it for throwaway plugins).
    """
    from gammadot.plugins import BUILTIN_HOOKSPEC, BUILTIN_PLUGINS

    pm = pluggy.PluginManager(PROJECT_NAME)
    pm.add_hookspecs(hookspecs)
    for name in [*blocked_from_env(), *block]:
        pm.set_blocked(name)
    for name, module_path in BUILTIN_PLUGINS:
        if not pm.is_blocked(name):
            module = importlib.import_module(module_path)
            _refuse_incompatible(name, module, "built-in", default=BUILTIN_HOOKSPEC)
            pm.register(module, name=name)
    if entry_points is None:
        entry_points = os.environ.get(NO_ENTRY_POINTS_ENV, "") not in ("1", "true", "yes")
    if entry_points:
        _load_entry_points(pm)
    for name, plugin in extra:
        if not pm.is_blocked(name):
            _refuse_incompatible(name, plugin, "added by the caller")
            pm.register(plugin, name=name)
    try:
        pm.check_pending()
    except pluggy.PluginValidationError as exc:
        name = pm.get_name(exc.plugin) or repr(exc.plugin)
        raise PluginLoadError(f"plugin '{name}' implements an unknown hook: {exc}; "
                              f"{_how_to_block(name)}") from None
    return pm


def _load_entry_points(pm: pluggy.PluginManager) -> None:
    for ep in sorted(metadata.entry_points(group=ENTRY_POINT_GROUP), key=lambda e: e.name):
        if pm.is_blocked(ep.name) or pm.get_plugin(ep.name) is not None:
            continue
        try:
            plugin = ep.load()
        except Exception as exc:  # any import-time failure of third-party code
            dist = getattr(ep, "dist", None)
            origin = f" from {dist.name} {dist.version}" if dist else ""
            raise PluginLoadError(f"plugin '{ep.name}' ({ep.value}{origin}) failed to load: "
                                  f"{type(exc).__name__}: {exc}; {_how_to_block(ep.name)}") from exc
        dist = getattr(ep, "dist", None)
        _refuse_incompatible(ep.name, plugin, f"{ep.value} from {dist.name} {dist.version}" if dist else ep.value)
        try:
            pm.register(plugin, name=ep.name)
        except (pluggy.PluginValidationError, ValueError) as exc:
            raise PluginLoadError(f"plugin '{ep.name}' ({ep.value}) is not a valid gammadot plugin: {exc}; "
                                  f"{_how_to_block(ep.name)}") from exc


def _refuse_incompatible(name: str, plugin: object, origin: str, default: str | None = None) -> None:
    """Stop start-up when ``plugin`` declares hook specs this gammadot does not have."""
    from .compat import compatibility

    found = compatibility(plugin, default=default)
    if not found.compatible:
        raise PluginLoadError(f"plugin '{name}' ({origin}) {found.problem}; install a version of the plugin "
                              f"made for these hook specs, or {_how_to_block(name)}")
