"""The catalogue: every importer, geometry, model, check and writer, with the plugin behind it.

Built once from a plugin manager by :func:`build_registry`. Each record is kept with the
name of the plugin that provided it (:class:`Provided`), so that failures, listings and
reports can name the plugin. Two records of one kind with the same id stop start-up.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Generic, TypeVar

import pluggy

from .plugin_manager import PluginLoadError
from .records import Analysis, Check, GeometryType, Importer, Model, RunSection, Writer

R = TypeVar("R")

# Catalogue kind -> (hook name, record type).
KINDS: dict[str, tuple[str, type]] = {
    "importers": ("gammadot_importers", Importer),
    "geometries": ("gammadot_geometries", GeometryType),
    "models": ("gammadot_models", Model),
    "checks": ("gammadot_checks", Check),
    "analyses": ("gammadot_analyses", Analysis),
    "writers": ("gammadot_writers", Writer),
    "sections": ("gammadot_run_sections", RunSection),
}


@dataclass(frozen=True)
class Provided(Generic[R]):
    """A record and the name of the plugin that provided it."""

    plugin: str
    record: R


@dataclass
class Registry:
    """Records by kind and id, in registration order (built-ins first)."""

    importers: dict[str, Provided[Importer]] = field(default_factory=dict)
    geometries: dict[str, Provided[GeometryType]] = field(default_factory=dict)
    models: dict[str, Provided[Model]] = field(default_factory=dict)
    checks: dict[str, Provided[Check]] = field(default_factory=dict)
    analyses: dict[str, Provided[Analysis]] = field(default_factory=dict)
    writers: dict[str, Provided[Writer]] = field(default_factory=dict)
    sections: dict[str, Provided[RunSection]] = field(default_factory=dict)
    plugins: dict[str, str] = field(default_factory=dict)  # plugin name -> version/origin
    blocked: list[str] = field(default_factory=list)

    def provided_by(self, plugin: str) -> dict[str, list[str]]:
        """What one plugin provides: kind -> ids."""
        found: dict[str, list[str]] = {}
        for kind in KINDS:
            ids = [i for i, p in getattr(self, kind).items() if p.plugin == plugin]
            if ids:
                found[kind] = ids
        return found


def build_registry(pm: pluggy.PluginManager) -> Registry:
    """Call every catalogue hook of every plugin once and combine the records."""
    registry = Registry()
    for name, plugin in pm.list_name_plugin():
        if plugin is None:  # pluggy keeps blocked names with no plugin
            registry.blocked.append(name)
        else:
            registry.plugins[name] = _origin(pm, plugin)
    for kind, (hook_name, record_type) in KINDS.items():
        table = getattr(registry, kind)
        # get_hookimpls() lists implementations in registration order (built-ins first);
        # trylast ones come first: only the pass-through geometry uses it.
        for impl in getattr(pm.hook, hook_name).get_hookimpls():
            for record in _call_catalogue(impl, hook_name):
                _add(table, kind, record_type, impl.plugin_name, record)
    return registry


def _call_catalogue(impl: Any, hook_name: str) -> list[Any]:
    try:
        return list(impl.function() or ())
    except Exception as exc:
        raise PluginLoadError(f"plugin '{impl.plugin_name}' failed in {hook_name}: "
                              f"{type(exc).__name__}: {exc}; start without it with "
                              f"--block {impl.plugin_name}") from exc


def _add(table: dict[str, Provided[Any]], kind: str, record_type: type, plugin: str, record: Any) -> None:
    if not isinstance(record, record_type):
        raise PluginLoadError(f"plugin '{plugin}' returned {type(record).__name__} from its {kind} hook, "
                              f"expected gammadot.{record_type.__name__}")
    if record.id in table:
        other = table[record.id].plugin
        raise PluginLoadError(f"{record_type.__name__.lower()} id '{record.id}' is provided twice: by plugin '{other}' and by "
                              f"plugin '{plugin}'; block one of them with --block NAME")
    table[record.id] = Provided(plugin, record)


def _origin(pm: pluggy.PluginManager, plugin: object) -> str:
    """'built-in', or the distribution and version that ship the plugin's module."""
    module = getattr(plugin, "__name__", None) or type(plugin).__module__
    if str(module).startswith("gammadot.plugins."):
        return "built-in"
    from importlib import metadata

    dists = metadata.packages_distributions().get(str(module).split(".")[0], [])
    for dist in dists:
        return f"{dist} {metadata.version(dist)}"
    return str(module)
